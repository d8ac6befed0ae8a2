"""Group summaries (pkwidgets.summary).

Sources of the check values:
- geometric CV% = 100*sqrt(exp(s**2) - 1), s = SD of log values: Kirkwood, Biometrics 1979;35:908
  (from memory); check values s = 0.1 -> 10.0251, 0.3 -> 30.6878, 0.5 -> 53.2940 computed from that formula.
- mean, SD (ddof=1), median, min, max: numpy / the Python ``statistics`` module as independent references.
- geometric mean = exp(mean of logs) = ``scipy.stats.gmean``.
- BLQ as 0 in mean curves and positions before/between/after the measurable values: common practice, no source.
"""

import math
import statistics

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from pkwidgets.summary import STATISTICS, blq_positions, geometric_cv, mean_profiles, summarize


def _logs_with_sd(s, n=5):
    """Values whose natural logs have sample SD exactly s (standardised normal scores scaled)."""
    z = np.linspace(-1, 1, n)
    z = z / np.std(z, ddof=1)
    return np.exp(2.0 + s * z)


@pytest.mark.parametrize("s, expected", [(0.1, 10.0251), (0.3, 30.6878), (0.5, 53.2940)])
def test_geometric_cv_matches_formula_values(s, expected):
    # Kirkwood 1979 formula (from memory); check values computed from that formula
    assert geometric_cv(_logs_with_sd(s)) == pytest.approx(expected, abs=5e-5)


def test_geometric_cv_undefined_cases():
    assert math.isnan(geometric_cv([1.0]))  # one value: SD undefined
    assert math.isnan(geometric_cv([1.0, 0.0, 2.0]))  # log of 0 undefined
    assert geometric_cv([2.0, np.nan, 8.0]) == pytest.approx(100 * math.sqrt(math.expm1(np.std(np.log([2, 8]), ddof=1) ** 2)))


def test_summarize_against_independent_statistics():
    rng = np.random.default_rng(7)
    a = rng.lognormal(3.0, 0.4, 9)
    b = rng.lognormal(4.0, 0.2, 6)
    df = pd.DataFrame({"arm": ["A"] * 9 + ["B"] * 6, "AUCLST": np.r_[a, b], "CMAX": np.r_[a, b] / 10})
    s = summarize(df, by="arm")
    assert list(s.columns) == ["arm", "PPTESTCD", "unit", *STATISTICS]
    row = s[(s["arm"] == "A") & (s["PPTESTCD"] == "AUCLST")].iloc[0]
    assert row["N"] == 9
    assert row["Mean"] == pytest.approx(statistics.fmean(a), rel=1e-12)  # Python statistics module
    assert row["SD"] == pytest.approx(statistics.stdev(a), rel=1e-12)
    assert row["CV%"] == pytest.approx(100 * statistics.stdev(a) / statistics.fmean(a), rel=1e-12)
    assert row["Geo. mean"] == pytest.approx(stats.gmean(a), rel=1e-12)  # scipy.stats.gmean
    assert row["Geo. CV%"] == pytest.approx(100 * math.sqrt(math.exp(statistics.stdev(np.log(a)) ** 2) - 1), rel=1e-12)
    assert row["Median"] == pytest.approx(statistics.median(a))
    assert (row["Min"], row["Max"]) == (a.min(), a.max())


def test_summarize_missing_nonpositive_and_infinite_values():
    df = pd.DataFrame({"TMAX": [0.0, 1.0, 2.0, np.nan], "SWING": [np.inf, 1.0, 3.0, 2.0]})
    s = summarize(df).set_index("PPTESTCD")
    assert s.loc["TMAX", "N"] == 3  # NaN not counted
    assert math.isnan(s.loc["TMAX", "Geo. mean"])  # a 0 has no log
    assert s.loc["TMAX", "Mean"] == pytest.approx(1.0)
    assert s.loc["SWING", "N"] == 3  # inf (CMIN = 0) left out
    assert s.loc["SWING", "Mean"] == pytest.approx(2.0)


@pytest.mark.parametrize("kwargs, match", [
    (dict(by="arm"), r"grouping column\(s\) \['arm'\] not in the table"),
    (dict(parameters=["AUCX"]), r"parameter column\(s\) \['AUCX'\] not in the table"),
])
def test_summarize_bad_columns(kwargs, match):
    with pytest.raises(KeyError, match=match):
        summarize(pd.DataFrame({"CMAX": [1.0, 2.0]}), **kwargs)


def test_blq_positions_and_mean_profiles():
    rows = pd.DataFrame({
        "id": ["a"] * 5 + ["b"] * 5,
        "grp": ["x"] * 5 + ["x"] * 5,
        "t": [0, 1, 2, 3, 4] * 2,
        "c": ["BLQ", "5", "BLQ", "2", "BLQ", "BLQ", "4", "3", "", "<0.5"],
    })
    pos = blq_positions(rows, by=["id"], time="t", conc="c")
    # a: t0 before, t2 between, t4 after; b: t0 before, t4 after (t3 empty is missing, not BLQ)
    assert pos.loc["before", "samples"] == 2 and pos.loc["between", "samples"] == 1
    assert pos.loc["after", "samples"] == 2 and pos.loc["after", "profiles"] == 2
    m = mean_profiles(rows, group_by=["grp"], time="t", conc="c").set_index("time")
    assert m.loc[1, "mean"] == pytest.approx(4.5) and m.loc[1, "n"] == 2
    assert m.loc[2, "mean"] == pytest.approx(1.5)  # BLQ as 0: (0 + 3) / 2
    assert m.loc[3, "n"] == 1  # missing concentration left out
    assert m.loc[1, "sd"] == pytest.approx(statistics.stdev([5, 4]))


# ---------------------------------------------------------------------------- edge cases and record helpers
# Sources: the median (Python ``statistics.median``); the reference-median TMAX cut: FDA product-specific
# guidance practice (from memory); labels and layout of the record: common practice, no source.

from pkwidgets.report import analysis_setup, format_group_value, group_labels, label_groups, _header_html  # noqa: E402
from pkwidgets.summary import reference_median  # noqa: E402


def test_summarize_all_zero_nan_and_inf_group():
    df = pd.DataFrame({"g": ["a", "a", "b", "b"], "AUCLST": [0.0, 0.0, np.nan, np.inf]})
    s = summarize(df, by=["g"]).set_index("g")
    assert s.loc["a", "N"] == 2 and s.loc["a", "Mean"] == 0.0
    assert math.isnan(s.loc["a", "CV%"])  # mean 0: CV undefined
    assert math.isnan(s.loc["a", "Geo. mean"]) and math.isnan(s.loc["a", "Geo. CV%"])  # log of 0 undefined
    assert s.loc["b", "N"] == 0 and math.isnan(s.loc["b", "Mean"]) and math.isnan(s.loc["b", "Max"])


@pytest.mark.parametrize("by", [None, [], ()])
def test_summarize_without_groups_summarises_all_profiles(by):
    df = pd.DataFrame({"CMAX": [1.0, 2.0, 6.0]})
    s = summarize(df, by=by)
    assert list(s.columns[:2]) == ["PPTESTCD", "unit"] and s.loc[0, "N"] == 3
    assert s.loc[0, "Median"] == statistics.median([1.0, 2.0, 6.0])


def test_mean_profiles_keeps_rows_with_a_blank_group_value():
    rows = pd.DataFrame({"grp": ["x", None, "x"], "t": [1, 1, 2], "c": ["4", "2", "3"]})
    m = mean_profiles(rows, group_by="grp", time="t", conc="c")
    assert m["n"].sum() == 3  # no row silently dropped


def test_reference_median_and_its_errors():
    df = pd.DataFrame({"trt": ["R", "R", "R", "R", "T"], "TMAX": [1.0, 2.0, 4.0, np.nan, 0.5]})
    assert reference_median(df, "trt", "R") == statistics.median([1.0, 2.0, 4.0])  # NaN left out
    with pytest.raises(ValueError, match=r"no profile with trt = 'X'.*values of trt are \['R', 'T'\]"):
        reference_median(df, "trt", "X")
    with pytest.raises(ValueError, match=r"map the treatment column"):
        reference_median(df, None, "R")
    with pytest.raises(KeyError, match=r"group column 'arm' is not in the table"):
        reference_median(df, "arm", "R")


@pytest.mark.parametrize("value, unit, expected", [
    (10.0, "mg", "10 mg"), (2.5, "mg", "2.5 mg"), ("10.0", "mg", "10 mg"), (np.int64(3), "", "3"),
    ("R", "", "R"), (float("nan"), "mg", "missing"),
])
def test_format_group_value(value, unit, expected):
    assert format_group_value(value, unit) == expected


def test_group_labels_with_units_and_several_columns():
    df = pd.DataFrame({"dose": [10.0, 100.0], "period": [1, 2], "treatment": ["R", "T"]})
    assert group_labels(df, "dose", {"dose": "mg"}).tolist() == ["dose 10 mg", "dose 100 mg"]
    assert group_labels(df, ["period", "treatment"]).tolist() == ["period 1, treatment R", "period 2, treatment T"]
    assert group_labels(df, None).tolist() == ["all", "all"]
    shown = label_groups(df, {"dose": "mg"})
    assert shown["dose"].tolist() == ["10 mg", "100 mg"] and df["dose"].tolist() == [10.0, 100.0]  # copy


_SETUP = dict(data_path="study.csv", output_dir="out", time_unit="h", conc_unit="ng/mL", dose_unit="mg",
              route="extravascular", dose=None, auc_method="linear", blq_rules=None, selection_record=None)


def test_analysis_setup_roles_keys_and_units():
    s = analysis_setup(columns={"subject": "ID", "time": "T", "conc": "C", "dose": "AMT", "period": "PER",
                                "treatment": "TRT", "nominal_time": "NT"}, group_by="TRT", **_SETUP)
    assert s.by == ["ID", "PER", "TRT"] and s.group_by == ["TRT"] and s.mean_time == "NT"
    assert s.group_units == {"AMT": "mg"} and s.nca_options["dose"] == "AMT"
    assert s.shown_keys == ["ID", "PER", "TRT"]
    assert s.parameters["selection_record"] == s.nca_options["selections"]


@pytest.mark.parametrize("columns, error, match", [
    ({"subject": "ID", "time": "T"}, ValueError, r"Required role\(s\) \['conc'\] missing.*study\.csv"),
    ({"subject": "ID", "time": "T", "conc": "C", "dos": "AMT"}, ValueError, r"unknown role\(s\) \['dos'\]"),
    (["ID", "T", "C"], TypeError, r"columns must be a dict"),
])
def test_analysis_setup_bad_columns(columns, error, match):
    with pytest.raises(error, match=match):
        analysis_setup(columns=columns, group_by=None, **_SETUP)


def test_record_header_folds_fingerprints_and_keeps_them_all():
    fps = [f"{i:064x}" for i in range(30)]
    info = {"notebook": "single_dose", "parameters": {"group_by": ["dose"]},
            "settings": {"route": "extravascular", "blq_rules": {"before": "zero"},
                         "selections": {"path": "sel.json", "applied": [], "stale": [], "unmatched": [],
                                        "fingerprints": fps}}}
    text = _header_html(info)
    assert "<details>" in text and "30 profile fingerprints" in text
    assert all(f in text for f in fps)  # complete: every fingerprint is in the record
    assert text.index("<details>") < text.index(fps[0])  # folded: listed inside the details element
    assert "before=zero" in text and "extravascular" in text


# Sources: TMAX and counts are read on the sampling grid, so they are summarised by median and range, and
# geometric statistics belong to ratio-scale (log-normal) parameters only (common practice, no source); the
# median from Python ``statistics.median``; the geometric mean from ``scipy.stats.gmean``.
def test_statistics_follow_the_scale_of_each_parameter():
    df = pd.DataFrame({"TMAX": [1.0, 2.0, 4.0], "LAMZNPT": [3.0, 4.0, 6.0], "R2ADJ": [0.91, 0.95, 0.99],
                       "CMAX": [10.0, 20.0, 40.0]})
    s = summarize(df, scale_rules=True).set_index("PPTESTCD")
    for code in ("TMAX", "LAMZNPT"):
        assert s.loc[code, "Median"] == statistics.median(df[code])
        assert all(math.isnan(s.loc[code, k]) for k in ("Mean", "SD", "CV%", "Geo. mean", "Geo. CV%"))
    assert math.isnan(s.loc["R2ADJ", "Geo. mean"]) and s.loc["R2ADJ", "Mean"] == pytest.approx(statistics.fmean(df["R2ADJ"]))
    assert s.loc["CMAX", "Geo. mean"] == pytest.approx(stats.gmean(df["CMAX"]), rel=1e-12)


def test_bin_times_gathers_close_actual_times():
    # Times within 10 % of a bin's first time share the bin's median (numpy.median); common practice, no source.
    from pkwidgets.summary import bin_times

    got = bin_times([0.0, 1.0, 1.05, 2.0, 2.1, 8.0])
    assert got.tolist() == [0.0] + [float(np.median([1.0, 1.05]))] * 2 + [float(np.median([2.0, 2.1]))] * 2 + [8.0]


def test_confidence_bounds_are_not_summarised_under_the_scale_rules():
    # a mean of per-profile interval ends estimates nothing (common practice, no source): left out of the
    # summaries that the records show; the statistics of the parameters themselves are those of the
    # Python statistics module
    import statistics

    df = pd.DataFrame({"g": [1, 1, 1], "LAMZ": [0.1, 0.2, 0.3], "LAMZ_LOWER95": [0.05, 0.1, 0.2]})
    out = summarize(df, by="g", scale_rules=True)
    assert list(out["PPTESTCD"]) == ["LAMZ"]
    assert out["Mean"].iloc[0] == pytest.approx(statistics.fmean([0.1, 0.2, 0.3]))
    assert "LAMZ_LOWER95" in set(summarize(df, by="g")["PPTESTCD"])  # without the rules: every column
