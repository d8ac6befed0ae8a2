"""Make ``docs/record_first_page.png``: the first page of a study record, as the README shows it.

Run ``python docs/make_record_picture.py`` (needs Debian ``chromium`` and the ``playwright`` package).
It runs ``analyses/single_dose.ipynb`` on the synthetic demo study with one terminal phase chosen by hand
and one profile left out of the summaries (both with their reasons), then screenshots the first page of
the HTML record at 1280 px in headless Chromium.  Synthetic data, for the picture only.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import pkwidgets as pk  # noqa: E402
from pkwidgets.report import run_analysis  # noqa: E402

DATA = ROOT / "data" / "demo_single_dose.csv"
REASON = "absorption still visible before 12 h: window 12-48 h"


def hand_choice(folder: Path) -> Path:
    """A selection record with one window chosen by hand, on the fingerprint of the data as the fit sees it."""
    path = folder / "selection.json"
    res = pk.nca(str(DATA), by=["subject"], time="time", conc="conc", dose="dose", lloq="lloq",
                 units={"time": "h", "conc": "ng/mL", "dose": "mg"}, auc_method="linear",
                 selections=str(path), selections_new=True)
    rec = pk.SelectionRecord(str(path))
    rec.set_window("S101", 12.0, 48.0, REASON, author="reviewer A",
                   fingerprint=res.settings["selections"]["fingerprints"][res.profile_id("S101")])
    rec.save()
    return path


def main(out=ROOT / "docs" / "record_first_page.png") -> None:
    from playwright.sync_api import sync_playwright

    folder = Path(tempfile.mkdtemp(prefix="pkw_picture_"))
    try:
        run = run_analysis(ROOT / "analyses" / "single_dose.ipynb", folder / "record_example",
                           {"selection_record": str(hand_choice(folder)),
                            "exclude_from_summary": {"S105": "vomited at 1 h (synthetic example)"}}, timeout=300)
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path="/usr/bin/chromium")
            page = browser.new_page(viewport={"width": 1280, "height": 880})
            page.goto(Path(run["html"]).as_uri())
            page.screenshot(path=str(out))
            browser.close()
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    print("written", out)


if __name__ == "__main__":
    main()
