"""analyses/sampling_design.ipynb: stored outputs under nbval, and a papermill run on other parameters.

Sources of the check values:
- one-compartment IV bolus, no variability and no residual error: the linear trapezoid over
  C0 e^(-kt) overestimates each segment by the factor x coth(x), x = k h / 2, against the exact
  area (c1 - c2)/k (closed form of the exponential; Gibaldi & Perrier, from memory); the log
  trapezoid is exact (common practice, no source);
- exact extrapolated share e^(-k t_last) against the 20 % limit of the EMA 2010 bioequivalence
  guideline (seen, shared/REFERENCES.md).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from _notebooks import notebook, parameter_names, run_nbval

from pkwidgets.report import CAUTION, run_analysis

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "analyses" / "sampling_design.ipynb"
REQUIRED = {"model", "variability", "proportional_error", "additive_error", "lloq", "schedules", "units", "n",
            "seed", "auc_method", "output_dir"}

pytestmark = [pytest.mark.notebook, pytest.mark.slow]


def test_one_parameters_cell_and_python3_kernel():
    names = parameter_names("sampling_design")
    nb = notebook("sampling_design")
    assert REQUIRED <= names
    assert CAUTION in nb.cells[0].source


def test_design_notebook_reproduces_under_nbval():
    """The committed outputs (model, schedules, comparison table, flags) are reproduced cell by cell."""
    r = run_nbval(["sampling_design"])
    assert r.returncode == 0, r.stdout[-6000:] + r.stderr[-2000:]


def test_papermill_run_against_closed_forms(tmp_path):
    k, t_short, t_long = 0.1, [0.5, 1, 2, 4, 8, 12], [0.5, 1, 2, 4, 6, 8, 12, 24]
    params = dict(model={"route": "iv-bolus", "dose": 1000.0, "cl": 1.0, "v": 10.0}, variability={},
                  proportional_error=0.0, additive_error=0.0, lloq=None, n=50, seed=1, auc_method="linear",
                  schedules={"to 12 h": t_short, "to 24 h": t_long})
    out = run_analysis(NOTEBOOK, tmp_path, params, timeout=300)
    table = pd.read_csv(tmp_path / "design_table.csv").set_index("schedule")
    for name, times in (("to 12 h", t_short), ("to 24 h", t_long)):
        edges = np.r_[0.0, times]
        c = 100 * np.exp(-k * edges)
        x = k * np.diff(edges) / 2
        linear = np.sum((c[:-1] - c[1:]) / k * x / np.tanh(x))  # linear trapezoid, closed form
        exact = 100 * (1 - math.exp(-k * times[-1])) / k
        assert table.loc[name, "AUCLST median %"] == pytest.approx(100 * (linear / exact - 1), rel=1e-9)
        assert table.loc[name, "AUCLST median %"] > 0  # convex decline: the linear rule overestimates
        share = 100.0 if math.exp(-k * times[-1]) > 0.20 else 0.0  # e^-1.2 = 30 %, e^-2.4 = 9 %
        assert table.loc[name, "AUCPEO > 20 % (%)"] == share
    html = Path(out["html"]).read_text(encoding="utf-8")
    assert CAUTION in html and "to 24 h" in html
