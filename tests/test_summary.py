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
