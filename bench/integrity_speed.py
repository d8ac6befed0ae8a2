"""Cost of strict reading and of safe record saves, measured side by side in one run.

Run with ``python bench/integrity_speed.py``.  Prints, best of ``--repeat``:

- :func:`pkwidgets.numbers.parse_numbers` on ``--cells`` numeric cells as text
  (synthetic, seeded: ``%.6g`` of uniform values, 1 % blanks, 0.1 % bad
  text) against ``pandas.to_numeric(errors="coerce")`` on the same cells,
  the permissive rule it replaces;
- :meth:`pkwidgets.SelectionRecord.save` of one new entry into a record of
  ``--entries`` entries (lock, read again, check, merge, atomic write), with
  the record already checked in this process and cold (cache cleared),
  against writing the same JSON text with :func:`pkwidgets.io.write_atomic`
  alone.

Timings depend on the machine and what else runs on it: the header prints the
load average.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from pkwidgets import SelectionRecord  # noqa: E402
from pkwidgets import record_schema  # noqa: E402
from pkwidgets.io import write_atomic  # noqa: E402
from pkwidgets.numbers import parse_numbers  # noqa: E402


def best(fn, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def cells(n, rng):
    text = np.char.mod("%.6g", rng.uniform(0, 1000, n)).astype(object)
    text[rng.random(n) < 0.01] = ""
    text[rng.random(n) < 0.001] = "4_5"
    return pd.Series(text, dtype="str")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cells", type=int, default=1_000_000)
    ap.add_argument("--entries", type=int, default=3000)
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args(argv)
    print(f"load average {os.getloadavg()}; best of {a.repeat}")
    s = cells(a.cells, np.random.default_rng(2026))
    t_strict = best(lambda: parse_numbers(s), a.repeat)
    t_loose = best(lambda: pd.to_numeric(s, errors="coerce"), a.repeat)
    print(f"{a.cells:>9,} cells   parse_numbers {t_strict:7.3f} s   pandas.to_numeric {t_loose:7.3f} s   "
          f"ratio {t_strict / t_loose:5.2f}")
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "sel.json")
        rec = SelectionRecord(path)
        for i in range(a.entries):
            rec.set_window(f"S{i % 500:03d}", 2.0, 8.0 + i, f"entry {i}", author="bench", fingerprint="a" * 64)
        rec.save()

        def save_one():
            rec.set_window("S000", 2.0, 9.5, "one more", author="bench", fingerprint="a" * 64)
            rec.save()

        def save_cold():
            record_schema._CHECKED.clear()
            save_one()

        text = rec.to_json()
        t_warm = best(save_one, a.repeat)
        t_cold = best(save_cold, a.repeat)
        t_plain = best(lambda: write_atomic(os.path.join(d, "plain.json"), text), a.repeat)
        print(f"{a.entries:>9,} entries save (checked) {t_warm:7.3f} s   save (cold) {t_cold:7.3f} s   "
              f"write_atomic alone {t_plain:7.3f} s   ratio {t_warm / t_plain:5.1f} / {t_cold / t_plain:5.1f}")


if __name__ == "__main__":
    main()
