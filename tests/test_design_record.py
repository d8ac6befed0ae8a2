"""Record tables of a sampling-design run, its run header, and live widgets left out of a static record.

Sources of the check values:
- units of the model's volume and clearance: C = Dose / V, so V is in dose / concentration and CL in
  dose / (concentration x time); conversions by pint (reference library): mg / (mg/L) = 1 L, while
  mg / (ng/mL) = 1000 L is not a plain litre, so the table writes the quotient as given;
- installed versions from ``importlib.metadata`` (the package metadata, outside this project).
"""

from __future__ import annotations

import importlib.metadata

import nbformat
import pandas as pd
import pint
import pytest

import pkwidgets as pk
from pkwidgets import design_summary, report

SCHEDULES = {"rich": [0, 0.5, 1, 2, 4, 8, 12, 24, 48], "short": [0, 1, 2, 4, 8]}


@pytest.fixture(scope="module")
def run():
    model = pk.CompartmentModel(route="extravascular", dose=100, cl=5, v=50, ka=1.2, variability={"cl": 0.3},
                                proportional_error=0.1, lloq=0.05)
    return model, pk.evaluate_schedule(model, SCHEDULES, n=400, seed=7, progress=False)


def _rows(table):
    return table.frame.set_index(table.frame.columns[0])


def test_model_table_units_follow_from_the_study_units(run):
    model, _ = run
    rows = _rows(report.model_table(model, {"time": "h", "conc": "mg/L", "dose": "mg"}))
    ureg = pint.UnitRegistry()
    assert (1 * ureg.mg / (ureg.mg / ureg.L)).to(ureg.L).magnitude == pytest.approx(1.0)  # pint
    assert rows.loc["V", "unit"] == "L" and rows.loc["CL", "unit"] == "L/h" and rows.loc["ka", "unit"] == "1/h"
    assert rows.loc["CL", "value"] == "5" and rows.loc["CL", "between-subject SD (log scale)"] == "0.3"
    assert rows.loc["LLOQ", "unit"] == "mg/L" and rows.loc["dose", "unit"] == "mg"
    # 1 mg / (ng/mL) is 1000 L (pint): not a plain litre, so the unit is written as the quotient
    assert (1 * ureg.mg / (ureg.ng / ureg.mL)).to(ureg.L).magnitude == pytest.approx(1000.0)
    odd = _rows(report.model_table(model, {"time": "h", "conc": "ng/mL", "dose": "mg"}))
    assert odd.loc["V", "unit"] == "mg/(ng/mL)" and odd.loc["CL", "unit"] == "mg/(ng/mL·h)"


def test_two_compartment_model_table_names_the_central_volume():
    model = pk.CompartmentModel(route="iv-bolus", dose=100, cl=5, v=20, q=5, v2=50)
    rows = _rows(report.model_table(model, {"time": "h", "conc": "mg/L", "dose": "mg"}))
    assert {"V1 (central)", "Q", "V2"} <= set(rows.index) and "ka" not in rows.index
    assert rows.loc["Q", "unit"] == "L/h" and rows.loc["V2", "unit"] == "L"


def test_error_table_shows_each_summary_value_to_one_decimal(run):
    _, result = run
    table = _rows(report.error_table(result.summary, list(SCHEDULES)))
    for r in result.summary.itertuples(index=False):
        assert table.loc[r.PPTESTCD, r.schedule] == f"{r.median_pct:.1f} ({r.p05_pct:.1f} to {r.p95_pct:.1f})"
    assert list(table.columns) == list(SCHEDULES)


def test_estimable_and_flag_tables_match_the_result(run):
    _, result = run
    est = _rows(report.estimable_table(result.summary, result.table, list(SCHEDULES)))
    share = result.summary.set_index(["schedule", "PPTESTCD"])["estimable_pct"]
    assert est.loc["AUCIFO estimable", "short"] == f"{share['short', 'AUCIFO']:.1f}"
    flags = _rows(report.flag_share_table(result.flags, list(SCHEDULES)))
    raised = result.flags.columns[result.flags.gt(0).any()]
    assert set(flags.index) == set(raised)
    none = report.flag_share_table(pd.DataFrame({"no_lambda_z": [0.0, 0.0]}, index=list(SCHEDULES)), SCHEDULES)
    assert "No QC flag" in repr(none)


def test_design_run_header_records_the_software(run):
    _, result = run
    info = design_summary.design_info(result, notebook="sampling_design", parameters={})
    assert info["software"]["numpy"] == importlib.metadata.version("numpy")
    assert info["software"]["scipy"] == importlib.metadata.version("scipy")


def test_record_leaves_out_live_widgets(tmp_path):
    """The plain text saved beside a widget is its first state (a progress bar at 0 %): not in the record."""
    nb = nbformat.v4.new_notebook()
    cell = nbformat.v4.new_code_cell("bar")
    cell.outputs = [nbformat.v4.new_output("display_data", data={
        "application/vnd.jupyter.widget-view+json": {"model_id": "x", "version_major": 2, "version_minor": 0},
        "text/plain": "stale progress:   0%|          | 0/4"}),
        nbformat.v4.new_output("stream", name="stdout", text="kept line\n")]
    nb.cells = [cell]
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    path = tmp_path / "w.ipynb"
    nbformat.write(nb, path)
    html = open(report.write_record(str(path), info={"notebook": "w"}), encoding="utf-8").read()
    assert "kept line" in html and "stale progress" not in html
