"""Test/reference comparisons (pkwidgets.compare) against outside references.

Sources of the check values, named again beside each check:
- Balanced or unbalanced 2x2 crossover: the treatment effect is the difference of the sequence means of the
  within-subject half period differences, with a two-sample (pooled) t interval, df = n1 + n2 - 2, and
  MSE = 2 x pooled variance of the half differences (Jones & Kenward, Design and Analysis of Cross-Over Trials,
  3rd ed., ch. 2; from memory). The two-sample interval is taken from ``scipy.stats.ttest_ind``.
- The 2x2 ANOVA: statsmodels OLS fitted here, independently, from a formula on the raw labels; the sequence F
  test equals a one-way ANOVA of the subject means by sequence (``scipy.stats.f_oneway``), since both strata
  scale by the same factor (Chow & Liu, Design and Analysis of Bioavailability and Bioequivalence Studies,
  3rd ed., 2009, table 3.3; from memory).
- CV_intra = 100 sqrt(exp(MSE) - 1) (Chow & Liu; from memory).
- Replicate designs: statsmodels MixedLM fitted here independently; in a complete 2x2 the REML treatment
  estimate equals the within-subject (closed-form) estimate (Jones & Kenward, ch. 2; from memory).
- Paired and parallel designs: ``scipy.stats.ttest_rel`` and ``scipy.stats.ttest_ind(equal_var=False)`` (Welch).
- TMAX: Hodges-Lehmann estimates by their definition (median of Walsh averages / of pairwise differences;
  Hodges & Lehmann, Ann Math Stat 1963;34:598), intervals checked by inverting ``scipy.stats.wilcoxon`` and
  ``scipy.stats.mannwhitneyu`` (exact): just outside a bound the two-sided p-value is <= 1 - level, just inside
  it is above.
- Acceptance limits 80.00-125.00 % (EMA 2010 bioequivalence guideline, FDA 2001 statistical guidance; seen);
  bounds compared after rounding to two decimals in percent (EMA 2010; from memory).
- Monte-Carlo: a 90 % interval covers the true ratio in 90 % of studies (definition of a confidence level);
  with 2,000 studies the binomial SD of the coverage is 0.67 %, so 88-92 % is a +-3 SD band.

Data below are simulated with seeded generators for these checks only; no value of our own output is copied.
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats

import pkwidgets as pk
from pkwidgets import _compare_fits
from pkwidgets.errors import InputDataError

LEVEL = 0.90


def crossover_2x2(rng, n_tr, n_rt, *, ratio=0.95, period=0.05, sd_between=0.3, sd_within=0.15):
    """A simulated 2x2 study: one row per subject and period, CMAX and AUCLST log-normal."""
    rows = []
    for i in range(n_tr + n_rt):
        seq = "TR" if i < n_tr else "RT"
        b = rng.normal(0, sd_between, 2)
        for per, trt in enumerate(seq, start=1):
            mu = np.log([100.0, 1000.0]) + b + (np.log(ratio) if trt == "T" else 0.0) + (period if per == 2 else 0.0)
            y = np.exp(mu + rng.normal(0, sd_within, 2))
            rows.append({"ID": f"s{i:02d}", "SEQ": seq, "PER": per, "TRT": trt, "CMAX": y[0], "AUCLST": y[1],
                         "TMAX": float(rng.uniform(0.5, 4.0))})
    return pd.DataFrame(rows)


def closed_form_2x2(df, code, level=LEVEL):
    """Jones & Kenward: half period differences, two-sample t interval by scipy (pooled variance)."""
    w = df.pivot(index="ID", columns="PER", values=code).dropna()
    seq = df.groupby("ID")["SEQ"].first().loc[w.index]
    d = (np.log(w[2]) - np.log(w[1])) / 2.0
    d_rt, d_tr = d[seq == "RT"].to_numpy(), d[seq == "TR"].to_numpy()
    tt = stats.ttest_ind(d_rt, d_tr, equal_var=True)
    ci = tt.confidence_interval(confidence_level=level)
    pooled = ((d_rt.size - 1) * d_rt.var(ddof=1) + (d_tr.size - 1) * d_tr.var(ddof=1)) / (d_rt.size + d_tr.size - 2)
    return d_rt.mean() - d_tr.mean(), ci.low, ci.high, 2.0 * pooled, d_rt.size + d_tr.size - 2


def compare(df, **kw):
    opts = dict(subject="ID", treatment="TRT", test="T", reference="R", period="PER", sequence="SEQ",
                parameters=["CMAX", "AUCLST"])
    opts.update(kw)
    return pk.compare_treatments(df, **opts)


# ---------------------------------------------------------------------------- 2x2 crossover

@pytest.mark.parametrize("n_tr,n_rt", [(12, 12), (7, 5)])
def test_2x2_matches_closed_form_and_independent_ols(n_tr, n_rt):
    df = crossover_2x2(np.random.default_rng(11 + n_tr), n_tr, n_rt)
    res = compare(df)
    assert res.design == "2x2"
    for code in ("CMAX", "AUCLST"):
        row = res.table.set_index("parameter").loc[code]
        est, lo, hi, mse, dof = closed_form_2x2(df, code)  # Jones & Kenward closed form, scipy t interval
        assert row["ratio"] == pytest.approx(np.exp(est), rel=1e-10)
        assert row["lower"] == pytest.approx(np.exp(lo), rel=1e-10)
        assert row["upper"] == pytest.approx(np.exp(hi), rel=1e-10)
        assert row["df"] == dof
        assert row["cv_intra"] == pytest.approx(100 * np.sqrt(np.exp(mse) - 1), rel=1e-10)  # Chow & Liu
        # statsmodels OLS fitted here from the raw labels (subject, period, treatment with R as baseline)
        ols = smf.ols(f"np.log({code}) ~ C(ID) + C(PER) + C(TRT, Treatment('R'))", df).fit()
        name = "C(TRT, Treatment('R'))[T.T]"
        assert np.log(row["ratio"]) == pytest.approx(ols.params[name], rel=1e-10)
        ci = ols.conf_int(1 - LEVEL).loc[name].to_numpy()
        assert np.log([row["lower"], row["upper"]]) == pytest.approx(ci, rel=1e-10)
        assert row["n"] == n_tr + n_rt and row["n_test"] == row["n_reference"] == n_tr + n_rt
        gm = [np.exp(np.log(df.loc[df["TRT"] == t, code]).mean()) for t in ("T", "R")]  # geometric means by hand
        assert [row["gmean_test"], row["gmean_reference"]] == pytest.approx(gm, rel=1e-12)


def test_2x2_anova_table_against_ols_and_subject_means():
    df = crossover_2x2(np.random.default_rng(5), 8, 6)
    tab = compare(df).anova["CMAX"]
    ols = smf.ols("np.log(CMAX) ~ C(ID) + C(PER) + C(TRT, Treatment('R'))", df).fit()
    assert tab.loc["residual", "df"] == ols.df_resid
    assert tab.loc["residual", "mean_sq"] == pytest.approx(ols.mse_resid, rel=1e-10)
    name = "C(TRT, Treatment('R'))[T.T]"
    assert tab.loc["treatment", "F"] == pytest.approx(ols.tvalues[name] ** 2, rel=1e-9)  # F = t^2, one df
    assert tab.loc["treatment", "p"] == pytest.approx(ols.pvalues[name], rel=1e-8)
    means = np.log(df["CMAX"]).groupby(df["ID"]).mean()
    seq = df.groupby("ID")["SEQ"].first()
    oneway = stats.f_oneway(means[seq == "TR"], means[seq == "RT"])  # sequence vs subject(sequence) (Chow & Liu)
    assert tab.loc["sequence", "F"] == pytest.approx(oneway.statistic, rel=1e-9)
    assert tab.loc["sequence", "p"] == pytest.approx(oneway.pvalue, rel=1e-8)
    assert tab.loc["subject(sequence)", "df"] == df["ID"].nunique() - 2
    balanced = crossover_2x2(np.random.default_rng(6), 7, 7)
    total = ((np.log(balanced["CMAX"]) - np.log(balanced["CMAX"]).mean()) ** 2).sum()
    # balanced sequences: period and treatment are orthogonal, so the sums of squares add up to the total
    assert compare(balanced).anova["CMAX"]["sum_sq"].sum() == pytest.approx(total, rel=1e-10)


def test_2x2_dropout_listed_not_used_and_equal_to_complete_subjects():
    df = crossover_2x2(np.random.default_rng(7), 7, 7)
    df = df[~((df["ID"] == "s03") & (df["PER"] == 2))]  # s03 left after period 1 (sequence TR: only T)
    res = compare(df, parameters=["CMAX", "AUCLST", "TMAX"])
    inc = res.incomplete[res.incomplete["parameter"] == "CMAX"]
    assert inc["subject"].tolist() == ["s03"] and not inc["used_in_model"].iloc[0]
    assert res.incomplete["parameter"].tolist() == ["CMAX", "AUCLST", "TMAX"]  # TMAX: listed too
    assert res.tmax.iloc[0]["n"] == 13
    assert "2x2x2 crossover" in res._repr_html_() and "Incomplete subjects: 1" in res._repr_html_()
    assert inc["sequence"].iloc[0] == "TR" and "no reference value" in inc["reason"].iloc[0]
    row = res.table.set_index("parameter").loc["CMAX"]
    est, lo, hi, _, _ = closed_form_2x2(df, "CMAX")  # complete subjects only (Jones & Kenward)
    assert row["n"] == 13
    assert [row["ratio"], row["lower"]] == pytest.approx(np.exp([est, lo]), rel=1e-10)


def test_derived_sequence_equals_given_sequence():
    df = crossover_2x2(np.random.default_rng(8), 6, 6)
    given, derived = compare(df), compare(df, sequence=None)
    pd.testing.assert_frame_equal(given.table, derived.table)
    assert given.anova["CMAX"].equals(derived.anova["CMAX"])
    # a subject seen in period 2 only takes the one sequence that fits; labels longer than a letter keep a separator
    drop = df[~((df["ID"] == "s07") & (df["PER"] == 1))]
    drop = drop.assign(TRT=drop["TRT"].map({"T": "MR-40", "R": "IR-40"}), PER=drop["PER"].map({1: "P1", 2: "P2"}))
    res = compare(drop, sequence=None, test="MR-40", reference="IR-40")
    assert res.incomplete["sequence"].unique().tolist() == ["IR-40-MR-40"]  # s07 is in sequence RT
    assert set(res.pairs["sequence"]) == {"MR-40-IR-40", "IR-40-MR-40"}


def test_non_positive_and_missing_values_are_listed():
    df = crossover_2x2(np.random.default_rng(9), 6, 6)
    df.loc[(df["ID"] == "s01") & (df["TRT"] == "T"), "CMAX"] = 0.0
    df.loc[(df["ID"] == "s08") & (df["TRT"] == "R"), "AUCLST"] = np.nan
    res = compare(df)
    ex = res.excluded.set_index(["parameter", "subject"])
    assert "ln undefined" in ex.loc[("CMAX", "s01"), "reason"]
    assert ex.loc[("AUCLST", "s08"), "reason"] == "no value"
    assert set(res.incomplete["subject"]) == {"s01", "s08"}
    assert res.table.set_index("parameter").loc["CMAX", "n"] == 11


def test_parameter_without_enough_pairs_is_not_estimable_and_listed():
    df = crossover_2x2(np.random.default_rng(12), 5, 5)
    df["AUCIFO"] = np.nan  # e.g. no terminal phase found
    df.loc[(df["ID"] == "s02") & (df["TRT"] == "T"), "AUCIFO"] = 123.0
    res = compare(df, period=None, sequence=None, parameters=["CMAX", "AUCIFO"])
    row = res.table.set_index("parameter").loc["AUCIFO"]
    assert row["n"] == 0 and np.isnan(row["ratio"]) and not row["within_limits"]
    assert row["conclusion"] == "not estimable" and "at least 2 subjects" in row["note"]
    assert (res.excluded["parameter"] == "AUCIFO").sum() == 19
    assert res.incomplete[["parameter", "subject"]].values.tolist() == [["AUCIFO", "s02"]]
    w = df.pivot(index="ID", columns="TRT", values="CMAX")  # CMAX unaffected: scipy paired t
    ci = stats.ttest_rel(np.log(w["T"]), np.log(w["R"])).confidence_interval(confidence_level=LEVEL)
    assert np.log(res.table.set_index("parameter").loc["CMAX", "lower"]) == pytest.approx(ci.low, rel=1e-10)


def test_other_treatments_left_out_and_listed():
    df = crossover_2x2(np.random.default_rng(10), 6, 6)
    extra = df[df["TRT"] == "R"].assign(TRT="X", PER=3)
    res = compare(pd.concat([df, extra], ignore_index=True), sequence=None)
    assert (res.excluded["reason"].str.contains("neither")).sum() == 12
    base = compare(df)
    assert res.table["ratio"].to_numpy() == pytest.approx(base.table["ratio"].to_numpy(), rel=1e-12)


# ---------------------------------------------------------------------------- mixed model

def replicate_study(rng, n=12, drop=None):
    rows = []
    for i in range(n):
        seq = "TRTR" if i % 2 == 0 else "RTRT"
        b = rng.normal(0, 0.3)
        for per, trt in enumerate(seq, start=1):
            if drop and (f"s{i:02d}", per) in drop:
                continue
            y = np.exp(np.log(100) + b + (np.log(1.05) if trt == "T" else 0) + 0.02 * per + rng.normal(0, 0.2))
            rows.append({"ID": f"s{i:02d}", "SEQ": seq, "PER": per, "TRT": trt, "CMAX": y})
    return pd.DataFrame(rows)


def test_replicate_design_uses_mixedlm_fitted_independently():
    df = replicate_study(np.random.default_rng(21), drop={("s03", 2), ("s03", 4)})  # s03: test only
    res = compare(df, parameters=["CMAX"])
    assert res.design == "mixed"
    m = smf.mixedlm("np.log(CMAX) ~ C(SEQ) + C(PER) + C(TRT, Treatment('R'))", df, groups=df["ID"]).fit(reml=True)
    name = "C(TRT, Treatment('R'))[T.T]"
    dof = len(df) - df["ID"].nunique() - (df["PER"].nunique() - 1) - 1  # residual df of the fixed-subject model
    q = stats.t.ppf(0.5 + LEVEL / 2, dof)
    row = res.table.iloc[0]
    assert np.log(row["ratio"]) == pytest.approx(m.fe_params[name], rel=1e-6)
    assert np.log(row["lower"]) == pytest.approx(m.fe_params[name] - q * m.bse_fe[name], rel=1e-5)
    assert row["cv_intra"] == pytest.approx(100 * np.sqrt(np.expm1(m.scale)), rel=1e-5)
    inc = res.incomplete
    assert inc["subject"].tolist() == ["s03"] and bool(inc["used_in_model"].iloc[0])
    assert row["n"] == 12


def test_mixed_model_on_complete_2x2_equals_closed_form():
    df = crossover_2x2(np.random.default_rng(3), 9, 9, sd_between=0.4)
    row = compare(df, design="mixed").table.set_index("parameter").loc["CMAX"]
    est, lo, hi, mse, dof = closed_form_2x2(df, "CMAX")  # Jones & Kenward: REML = within-subject estimate
    assert np.log(row["ratio"]) == pytest.approx(est, abs=1e-6)
    assert np.log(row["lower"]) == pytest.approx(lo, abs=1e-5)
    assert row["df"] == dof


# ---------------------------------------------------------------------------- paired and parallel

def test_paired_without_period_matches_scipy_ttest_rel():
    df = crossover_2x2(np.random.default_rng(31), 8, 8)
    res = compare(df, period=None, sequence=None)
    assert res.design == "paired"
    w = df.pivot(index="ID", columns="TRT", values="CMAX")
    t = stats.ttest_rel(np.log(w["T"]), np.log(w["R"]))
    ci = t.confidence_interval(confidence_level=LEVEL)
    row = res.table.set_index("parameter").loc["CMAX"]
    assert [np.log(row["lower"]), np.log(row["upper"])] == pytest.approx([ci.low, ci.high], rel=1e-10)
    assert row["df"] == t.df


def test_parallel_matches_scipy_welch():
    rng = np.random.default_rng(41)
    df = pd.DataFrame({"ID": [f"p{i}" for i in range(23)], "TRT": ["T"] * 11 + ["R"] * 12,
                       "CMAX": np.exp(np.r_[rng.normal(4.6, 0.2, 11), rng.normal(4.5, 0.4, 12)]),
                       "TMAX": rng.uniform(0.5, 4, 23)})
    res = pk.compare_treatments(df, subject="ID", treatment="TRT", test="T", reference="R", parameters=["CMAX", "TMAX"])
    assert res.design == "parallel" and "no subject received both" in res.how_chosen
    lt, lr = np.log(df.loc[df["TRT"] == "T", "CMAX"]), np.log(df.loc[df["TRT"] == "R", "CMAX"])
    w = stats.ttest_ind(lt, lr, equal_var=False)  # Welch
    ci = w.confidence_interval(confidence_level=LEVEL)
    row = res.table.iloc[0]
    assert [np.log(row["lower"]), np.log(row["upper"])] == pytest.approx([ci.low, ci.high], rel=1e-10)
    assert row["df"] == pytest.approx(w.df, rel=1e-10)
    assert np.isnan(row["cv_intra"])
    # TMAX: Hodges-Lehmann shift, checked by its definition and by inverting the exact Mann-Whitney test
    x, y = df.loc[df["TRT"] == "T", "TMAX"].to_numpy(), df.loc[df["TRT"] == "R", "TMAX"].to_numpy()
    tm = res.tmax.iloc[0]
    assert tm["difference"] == pytest.approx(np.median([a - b for a, b in itertools.product(x, y)]), rel=1e-12)
    for bound, sign in ((tm["lower"], -1), (tm["upper"], 1)):
        outside = stats.mannwhitneyu(x - (bound + sign * 1e-9), y, method="exact").pvalue
        inside = stats.mannwhitneyu(x - (bound - sign * 1e-9), y, method="exact").pvalue
        assert outside <= 1 - LEVEL < inside


def test_tmax_hodges_lehmann_against_scipy_wilcoxon():
    df = crossover_2x2(np.random.default_rng(51), 7, 7)
    res = compare(df, parameters=["CMAX", "TMAX"])
    assert list(res.table["parameter"]) == ["CMAX"]  # TMAX reported separately
    w = df.pivot(index="ID", columns="TRT", values="TMAX")
    d = (w["T"] - w["R"]).to_numpy()
    walsh = [(a + b) / 2 for a, b in itertools.combinations_with_replacement(d, 2)]  # Hodges & Lehmann 1963
    tm = res.tmax.iloc[0]
    assert tm["difference"] == pytest.approx(np.median(walsh), rel=1e-12)
    assert tm["median_test"] == pytest.approx(np.median(w["T"]))
    for bound, sign in ((tm["lower"], -1), (tm["upper"], 1)):
        outside = stats.wilcoxon(d - (bound + sign * 1e-9), method="exact").pvalue
        inside = stats.wilcoxon(d - (bound - sign * 1e-9), method="exact").pvalue
        assert outside <= 1 - LEVEL < inside


# ---------------------------------------------------------------------------- conclusion and limits

def test_conclusion_uses_limits_rounded_to_two_decimals():
    df = crossover_2x2(np.random.default_rng(61), 10, 10, ratio=0.9)
    base = compare(df).table.set_index("parameter")
    pct_low = round(100 * base.loc["CMAX", "lower"], 2)
    pct_high = round(100 * base.loc["CMAX", "upper"], 2)
    assert bool(base.loc["CMAX", "within_limits"]) == (pct_low >= 80.0 and pct_high <= 125.0)
    # a limit above the bound but equal to it at two decimals still accepts (EMA 2010, from memory)
    just = (pct_low + 0.004) / 100
    assert just > base.loc["CMAX", "lower"] and round(100 * just, 2) == pct_low and pct_high <= 125.0  # set-up
    res = compare(df, limits={"CMAX": (just, 1.25)}).table.set_index("parameter")
    assert bool(res.loc["CMAX", "within_limits"]) and res.loc["AUCLST", "limit_low"] == 0.80
    wide = compare(df, limits={"CMAX": (0.6984, 1.4319)}).table.set_index("parameter")
    assert wide.loc["CMAX", ["limit_low", "limit_high"]].tolist() == [0.6984, 1.4319]
    assert "69.84-143.19 %" in wide.loc["CMAX", "conclusion"]


# ---------------------------------------------------------------------------- Monte-Carlo coverage

def test_monte_carlo_coverage_of_the_90_percent_interval():
    """2,000 simulated unbalanced 2x2 studies through the interval code of compare_treatments."""
    rng = np.random.default_rng(2024)
    n_tr, n_rt, true = 7, 5, np.log(0.93)
    n = n_tr + n_rt
    subject = np.repeat(np.arange(n), 2)
    period = np.tile([1, 2], n)
    is_test = np.where(subject < n_tr, period == 1, period == 2)
    sims = 2000
    between = rng.normal(0, 0.35, (sims, n))[:, subject]
    y = 4.0 + between + true * is_test + 0.04 * (period == 2) + rng.normal(0, 0.2, (sims, 2 * n))
    # the kernel is the one behind compare_treatments' 2x2 interval: on study 0 it equals the closed form
    study0 = pd.DataFrame({"ID": subject, "PER": period, "SEQ": np.where(subject < n_tr, "TR", "RT"),
                           "CMAX": np.exp(y[0])})
    _, lo0, hi0, _, _ = closed_form_2x2(study0, "CMAX")  # Jones & Kenward
    fit0 = _compare_fits.crossover_ols(y[0], subject, period, is_test, LEVEL)
    assert [fit0.lower, fit0.upper] == pytest.approx([lo0, hi0], rel=1e-10)
    covered = 0
    for k in range(sims):
        fit = _compare_fits.crossover_ols(y[k], subject, period, is_test, LEVEL)
        covered += fit.lower <= true <= fit.upper
    assert 0.88 <= covered / sims <= 0.92  # definition of a 90 % confidence level; +-3 binomial SD


# ---------------------------------------------------------------------------- design choice and bad input

@pytest.mark.parametrize("kind,expected", [("2x2", "2x2"), ("3-period", "mixed"), ("no-period", "paired"),
                                           ("parallel", "parallel")])
def test_design_is_chosen_from_the_data(kind, expected):
    df = crossover_2x2(np.random.default_rng(71), 6, 6)
    kw = {}
    if kind == "3-period":
        df = pd.concat([df, df[df["TRT"] == "R"].assign(PER=3)], ignore_index=True)
        kw["sequence"] = None
    elif kind == "no-period":
        kw = dict(period=None, sequence=None)
    elif kind == "parallel":
        df = df[df["PER"] == 1]
        kw = dict(period=None, sequence=None)
    res = compare(df, **kw)
    assert res.design == expected and res.model == pk.compare.DESIGNS[expected]


def _bad(df, **kw):
    return compare(df, **kw)


BAD = [
    (dict(parameters=["CMAXX"]), InputDataError, r"column\(s\) \['CMAXX'\] are not in the parameter table"),
    (dict(test="A"), ValueError, r"test='A' is not a value of column 'TRT'; its values are \['R', 'T'\]"),
    (dict(test="R"), ValueError, r"test and reference are the same label"),
    (dict(level=90), ValueError, r"The 'level' option must be a confidence level between 0 and 1"),
    (dict(design="crossover"), ValueError, r"The 'design' option must be one of \['auto', '2x2'"),
    (dict(design="parallel"), ValueError, r"design='parallel' does not fit the data: 12 subjects received both"),
    (dict(limits=(1.25, 0.8)), ValueError, r"acceptance limits for CMAX must be ratios 0 < low < high"),
]


@pytest.mark.parametrize("kw,exc,match", BAD)
def test_bad_options_are_named(kw, exc, match):
    df = crossover_2x2(np.random.default_rng(81), 6, 6)
    with pytest.raises(exc, match=match):
        _bad(df, **kw)


def test_bad_tables_are_named():
    df = crossover_2x2(np.random.default_rng(82), 6, 6)
    with pytest.raises(TypeError, match="params must be a pandas DataFrame"):
        pk.compare_treatments(df.to_dict(), subject="ID", treatment="TRT", test="T", reference="R")

    class Result:  # an NCA result object with its parameter table (common practice, no source)
        parameters = df
    assert compare(Result()).table.equals(compare(df).table)
    dup = pd.concat([df, df.iloc[[0]]], ignore_index=True)
    with pytest.raises(InputDataError, match=r"rows share \{'ID': 's00', 'PER': 1\}"):
        compare(dup)
    mixed_seq = df.copy()
    mixed_seq.loc[0, "SEQ"] = "RT"
    with pytest.raises(InputDataError, match="subject 's00' has more than one value of 'SEQ'"):
        compare(mixed_seq)
    text = df.astype({"CMAX": object})
    text.loc[3, "CMAX"] = "BLQ"
    with pytest.raises(InputDataError, match="column 'CMAX' holds non-numeric value 'BLQ' in row 3"):
        compare(text)
    no_period = df.copy()
    with pytest.raises(InputDataError, match="Give period="):
        compare(pd.concat([no_period, no_period.iloc[[0]].assign(PER=3)]), period=None, sequence=None)


# ---------------------------------------------------------------------------- figures

def test_figures_keep_legends_outside_the_data_and_state_units():
    """Legends sit right of every data area (design notes of the issue; common practice, no source)."""
    import matplotlib

    matplotlib.use("Agg")
    from pkwidgets import comparison_plots

    df = crossover_2x2(np.random.default_rng(91), 6, 6)
    res = compare(df)
    for fig in (comparison_plots.plot_ratios(res), comparison_plots.plot_subject_ratios(res)):
        fig.canvas.draw()
        legends = [a.get_legend() for a in fig.axes if a.get_legend() is not None]
        assert len(legends) == 1
        right = max(a.get_window_extent().x1 for a in fig.axes if a.get_visible())
        assert legends[0].get_window_extent().x0 >= right
    assert "(%)" in comparison_plots.plot_ratios(res).axes[0].get_xlabel()
    dp = pk.dose_proportionality(df.assign(DOSE=np.where(df["PER"] == 1, 10.0, 30.0)), dose="DOSE", parameters="CMAX")
    fig = comparison_plots.plot_dose_proportionality(dp, "CMAX", dose_unit="mg", unit="ng/mL")
    assert fig.axes[0].get_ylabel() == "CMAX (ng/mL)" and fig.axes[1].get_ylabel() == "CMAX / dose (ng/mL/mg)"
    matplotlib.pyplot.close("all")
