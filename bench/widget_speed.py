"""Speed of the terminal-phase picker: server-side recompute after a click, and click-to-readout
in a real browser (Voilà + Debian Chromium), printed side by side with their targets.

Targets (issue 4): server-side recompute after a click on a 40-sample profile <= 20 ms;
browser click-to-readout <= 150 ms.  The profile is synthetic (invented here, fixed seed).
Also the selection record's growth: appending entries and loading + reading the latest state of
every profile, at 5,000 and 50,000 entries; linear cost gives a time ratio near 10 (a quadratic
one near 100).

Usage: .venv/bin/python bench/widget_speed.py [--no-browser] [--clicks N]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from _voila import CHROMIUM, CHROMIUM_ARGS, voila_server  # noqa: E402  (shared with the browser tests)

SERVER_TARGET_MS = 20.0
BROWSER_TARGET_MS = 150.0
PROFILE_CODE = """
import numpy as np   # inside the text: this code also runs as the browser notebook's cell
rng = np.random.default_rng(20240)
t = np.round(np.concatenate([[0.0], np.geomspace(0.25, 72, 39)]), 3)   # 40 samples, synthetic
c = 50 * (np.exp(-0.08 * t) - np.exp(-1.5 * t)) * np.exp(rng.normal(0, 0.05, t.size))
"""


def synthetic_profile():
    ns = {}
    exec(PROFILE_CODE, ns)  # the same code the browser notebook runs
    return ns["t"], ns["c"]


def server_side(clicks):
    from pkwidgets import nca_arrays
    from pkwidgets.widgets import TerminalPhasePicker

    t, c = synthetic_profile()
    picker = TerminalPhasePicker(t, c, dose=100, auc_method="lin-up/log-down")
    msg = {"event": "element_click", "data": {"index": 0}}
    times = []
    for i in range(clicks):
        role = "excluded" if picker.excluded else "fit"
        t0 = time.perf_counter()
        picker._marks[role]._handle_custom_msgs(None, msg, [])   # what the front end sends on a click
        times.append(time.perf_counter() - t0)
    engine = []
    for _ in range(clicks):
        t0 = time.perf_counter()
        nca_arrays(t, c, dose=100, auc_method="lin-up/log-down")
        engine.append(time.perf_counter() - t0)
    return 1000 * statistics.median(times), 1000 * max(times), 1000 * statistics.median(engine)


def record_scaling(sizes=(5_000, 50_000), repeats=3):
    """Best of ``repeats`` seconds to append ``n`` entries (n/2 profiles), and to load the file and read
    the latest state of every profile."""
    import gc

    from pkwidgets import SelectionRecord

    out = []
    with tempfile.TemporaryDirectory(prefix="pkw-bench-rec-") as tmp:
        for n in sizes:
            append = load = float("inf")
            for _ in range(repeats):
                gc.collect()
                rec = SelectionRecord()
                t0 = time.perf_counter()
                for i in range(n):
                    rec.set_window(f"SYN-{i % (n // 2)}", 1.0, 24.0, "bench", author="bench",
                                   fingerprint="a" * 64)
                append = min(append, time.perf_counter() - t0)
                path = rec.save(os.path.join(tmp, f"rec{n}.json"))
                del rec
                gc.collect()
                t0 = time.perf_counter()
                states = SelectionRecord.load(path).states()
                load = min(load, time.perf_counter() - t0)
                assert len(states) == n // 2
            out.append((n, append, load))
    return out


CLICK_JS = """
async () => {
  const root = document.querySelector('.pkw-picker');
  const dots = Array.from(root.querySelector('.bqplot').querySelectorAll('svg .dot'));  // main figure only
  const fill = e => getComputedStyle(e).fill.replace(/ /g, '');
  const excl = dots.filter(e => fill(e) === 'rgb(213,94,0)');
  const fit = dots.filter(e => fill(e) === 'rgb(0,114,178)');
  const target = excl.length ? excl[0] : fit[0];
  const before = root.querySelector('.pkw-readout').innerText;
  const t0 = performance.now();
  const done = new Promise(resolve => {
    const obs = new MutationObserver(() => {
      const r = root.querySelector('.pkw-readout');
      if (r && r.innerText !== before) { obs.disconnect(); resolve(performance.now() - t0); }
    });
    obs.observe(root, {subtree: true, childList: true, characterData: true});
  });
  target.dispatchEvent(new MouseEvent('click', {bubbles: true}));
  // a click the page never answers gives null after 10 s instead of hanging the bench
  return await Promise.race([done, new Promise(resolve => setTimeout(() => resolve(null), 10000))]);
}
"""


def browser_side(clicks):
    if not os.path.exists(CHROMIUM):
        return None, "Debian chromium not installed"
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return None, "playwright not installed"
    import nbformat

    tmp = Path(tempfile.mkdtemp(prefix="pkw-bench-"))
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.cells = [nbformat.v4.new_code_cell(
        PROFILE_CODE + "from pkwidgets.widgets import TerminalPhasePicker\n"
        "TerminalPhasePicker(t, c, dose=100, auc_method='lin-up/log-down', title='synthetic, 40 samples')")]
    nbformat.write(nb, tmp / "bench.ipynb")
    try:
        with voila_server(tmp / "bench.ipynb", tmp, token="bench") as url, sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
            try:
                page = browser.new_page()
                page.goto(url, timeout=60_000)
                page.wait_for_selector(".pkw-readout", timeout=60_000)
                page.wait_for_selector(".bqplot svg .dot", timeout=30_000)
                page.wait_for_timeout(500)
                page.evaluate(CLICK_JS)            # warm-up
                ms = [page.evaluate(CLICK_JS) for _ in range(clicks)]
            finally:
                browser.close()
    except RuntimeError as exc:                    # the server did not start: say why, keep the other rows
        return None, str(exc)
    lost = sum(m is None for m in ms)
    if lost:
        return None, f"{lost} of {clicks} clicks changed no readout within 10 s"
    return ms, ""


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--clicks", type=int, default=40)
    ap.add_argument("--no-browser", action="store_true")
    a = ap.parse_args(argv)
    med, worst, eng = server_side(max(a.clicks, 100))
    rows = [("server: click -> recompute + redraw traits", med, worst, SERVER_TARGET_MS),
            ("  (engine call alone, same profile)", eng, float("nan"), float("nan"))]
    note = ""
    if not a.no_browser:
        ms, note = browser_side(a.clicks)
        if ms:
            rows.append(("browser: click -> readout text changed", statistics.median(ms), max(ms),
                         BROWSER_TARGET_MS))
    print(f"{'measure (40-sample synthetic profile)':46s} {'median ms':>10s} {'max ms':>9s} "
          f"{'target ms':>10s} {'median/target':>14s}")
    for name, m, w, tgt in rows:
        ratio = m / tgt if tgt == tgt else float("nan")
        print(f"{name:46s} {m:10.2f} {w:9.2f} {tgt:10.0f} {ratio:14.3f}")
    if note:
        print(f"browser measurement skipped: {note}")
    scaling = record_scaling()
    (n0, a0, l0), (n1, a1, l1) = scaling
    print(f"\n{'selection record (n/2 profiles), best of 3':46s} {f'{n0} entries':>14s} {f'{n1} entries':>14s} "
          f"{'time ratio':>11s} {'entry ratio':>12s}")
    print(f"{'  append n entries, s':46s} {a0:14.3f} {a1:14.3f} {a1 / a0:11.1f} {n1 / n0:12.0f}")
    print(f"{'  load file + latest state of each profile, s':46s} {l0:14.3f} {l1:14.3f} {l1 / l0:11.1f} "
          f"{n1 / n0:12.0f}")
    print(json.dumps({name.strip(): round(m, 3) for name, m, _, _ in rows}))


if __name__ == "__main__":
    main()
