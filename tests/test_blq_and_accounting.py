"""BLQ rules by position, text markers, and the row-by-row account of a run.

Sources: the default BLQ rules (0 before the first measurable sample, missing
between, excluded from AUCLST and 0 for AUCALL after the last) are common
practice, no source; CDISC definitions of AUCLST (to the last measurable
concentration) and AUCALL (to the last observation, measurable or not) are from
the CDISC controlled terminology (shared/REFERENCES.md, seen).  Expected areas
are hand calculations by the linear trapezoidal rule, written out beside each
check, and scipy.integrate.trapezoid as the reference library.
"""

import numpy as np
import pytest
from scipy.integrate import trapezoid

import pkwidgets as pk

T = np.array([0, 1, 2, 4, 6, 8, 12, 24.0])
C = np.array([np.nan, 4.0, 6.0, np.nan, 3.0, 2.0, np.nan, np.nan])
BLQ = np.array([True, False, False, True, False, False, True, True])
LLOQ = 0.5


def test_default_rules():
    r = pk.nca_profile(T, C, blq=BLQ, lloq=LLOQ)
    # before -> 0, between (t=4) -> missing, after -> 0 (beyond TLST = 8)
    used_t = np.array([0, 1, 2, 6, 8.0])
    used_c = np.array([0, 4, 6, 3, 2.0])
    assert r["AUCLST"] == pytest.approx(trapezoid(used_c, used_t), rel=1e-15)
    # AUCALL adds the segment 8 -> 12 down to 0 and 12 -> 24 at 0: 4 * (2 + 0)/2 = 4
    assert r["AUCALL"] == pytest.approx(r["AUCLST"] + 4.0, rel=1e-15)
    assert r["TLST"] == 8 and r["CLST"] == 2
    status = r.attrs["sample_status"]
    assert status[3] == "BLQ between measurable concentrations, rule 'missing'"
    assert status[6].startswith("after the last measurable concentration")
    assert r.attrs["settings"]["blq_rules"] == {"before": "zero", "between": "missing", "after": "zero"}


def test_half_lloq_between_and_lloq_after():
    r = pk.nca_profile(T, C, blq=BLQ, lloq=LLOQ, blq_rules={"between": "half-lloq", "after": "missing"})
    t = np.array([0, 1, 2, 4, 6, 8.0])
    c = np.array([0, 4, 6, LLOQ / 2, 3, 2.0])
    assert r["AUCLST"] == pytest.approx(trapezoid(c, t), rel=1e-15)
    # after = missing: nothing beyond TLST, so AUCALL = AUCLST
    assert r["AUCALL"] == r["AUCLST"]
    r2 = pk.nca_profile(T, C, blq=BLQ, lloq=LLOQ, blq_rules={"after": "lloq"})
    # substituted values are observations: TLST moves to 24 h
    assert r2["TLST"] == 24 and r2["CLST"] == LLOQ


def test_rule_needing_lloq_without_one():
    with pytest.raises(ValueError, match=r"BLQ rule between='half-lloq' needs the LLOQ.*profile 0, sample 3"):
        pk.nca_profile(T, C, blq=BLQ, blq_rules={"between": "half-lloq"})


def test_unknown_rule_name():
    with pytest.raises(ValueError, match="BLQ rule 'after' must be one of"):
        pk.BLQRules(after="drop")


def test_all_blq_profile_gives_nan_and_flag():
    # valid but uninformative: NaN parameters plus a flag, never an exception
    r = pk.nca_profile([0, 1, 2], [np.nan] * 3, blq=[True] * 3)
    assert r.isna().all()
    assert r.attrs["flags"] == ["no_measurable"]


def test_text_markers_in_csv_and_every_row_accounted(tmp_path):
    path = tmp_path / "study.csv"
    path.write_text(
        "subject,time,conc,dose\n"
        "A,0,BLQ,10\n"
        "A,1,4.0,10\n"
        "A,2,6.0,10\n"
        "A,4,<0.50,10\n"
        "A,6,3.0,10\n"
        "A,8,2.0,10\n"
        "A,12,BLQ,10\n"
        "A,,,10\n"
        "B,0,0,10\n"
        "B,1,2.0,10\n"
        "B,2,,10\n"
        "B,4,1.0,10\n"
    )
    res = pk.nca(path, by="subject", blq_rules={"between": "half-lloq"})
    rows = res.samples
    assert len(rows) == 12  # nothing lost: every input row is in the account
    assert list(rows["nca_line"]) == list(range(2, 14))
    # "<0.50" is BLQ with its LLOQ: between measurable samples -> half-LLOQ = 0.25
    a = res.profile("A").parameters
    assert a["AUCLST"] == pytest.approx(
        trapezoid([0, 4, 6, 0.25, 3, 2], [0, 1, 2, 4, 6, 8]), rel=1e-15)
    unused = res.unused.set_index("nca_line")["nca_reason"]
    assert unused[8].startswith("after the last measurable concentration")
    assert unused[9] == "no time and no concentration recorded"
    assert unused[12] == "concentration missing"
    assert set(unused.index) == {8, 9, 12}
    assert rows["nca_used"].sum() + len(unused) == len(rows)


def test_unknown_marker_names_line_and_column(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text("subject,time,conc\nA,0,0\nA,1,n/a?\n")
    with pytest.raises(pk.InputDataError, match=r"bad.csv, line 3, column 'conc': 'n/a\?' is neither a number nor a BLQ marker"):
        pk.nca(path, by="subject", dose=None)
