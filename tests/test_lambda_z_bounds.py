"""Standard error and confidence bounds of lambda z, LAMZHL and AUCIFO against outside references.

Sources: ``scipy.stats.linregress`` (slope standard error), ``statsmodels`` OLS
(``scale``, ``df_resid``, ``conf_int``: the t interval of a least-squares
slope, Draper & Smith, Applied Regression Analysis, from memory), and a
coverage simulation of mono-exponential tails with proportional log-normal
error, where the log-linear model holds exactly, so a 95 % interval must
cover the true rate in about 95 % of profiles (binomial SD 0.15 % at 20,000).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
import statsmodels.api as sm

from pkwidgets.lambda_z import fit_lambda_z
from pkwidgets.lambda_z_bounds import aucifo_bounds, lambda_z_bounds

TIMES = np.array([1.0, 2, 4, 6, 8, 12, 16, 24])


def _tails(seed, n_prof, sd=0.2):
    """Samples x profiles mono-exponential tails C = C0 exp(-k t) exp(eps), eps ~ N(0, sd) (synthetic)."""
    rng = np.random.default_rng(seed)
    k = 0.1 * np.exp(rng.normal(0, 0.4, n_prof))
    t = TIMES[:, None] * np.ones(n_prof)
    c = 40.0 * np.exp(-k * t + rng.normal(0, sd, t.shape))
    return t, c, k


def test_se_and_residual_sd_equal_linregress_and_statsmodels():
    t, c, _ = _tails(1, 30)
    for rule in ("adjusted-r2", "tail-extension", "aicc"):
        fit = fit_lambda_z(t, c, c > 0, False, axis=0, rule=rule)
        for p in range(t.shape[1]):
            sel = fit.used[:, p]
            r = stats.linregress(t[sel, p], np.log(c[sel, p]))  # scipy: stderr of the slope
            res = sm.OLS(np.log(c[sel, p]), sm.add_constant(t[sel, p])).fit()
            np.testing.assert_allclose(fit.se[p], r.stderr, rtol=1e-9)
            np.testing.assert_allclose(fit.resid_sd[p], np.sqrt(res.scale), rtol=1e-9)
            assert fit.df[p] == res.df_resid


@pytest.mark.parametrize("level", [0.95, 0.9])
def test_lamz_bounds_equal_statsmodels_conf_int(level):
    t, c, _ = _tails(2, 20)
    fit = fit_lambda_z(t, c, c > 0, True, axis=0)
    b = lambda_z_bounds(fit, level=level)
    tag = f"{round(100 * level)}"
    for p in range(t.shape[1]):
        res = sm.OLS(np.log(c[:, p]), sm.add_constant(t[:, p])).fit()
        lo, hi = res.conf_int(alpha=1 - level)[1]  # slope interval; lambda z = -slope
        np.testing.assert_allclose([b[f"LAMZ_LOWER{tag}"][p], b[f"LAMZ_UPPER{tag}"][p]], [-hi, -lo], rtol=1e-9)
        np.testing.assert_allclose([b[f"LAMZHL_LOWER{tag}"][p], b[f"LAMZHL_UPPER{tag}"][p]],
                                   [np.log(2) / -lo, np.log(2) / -hi], rtol=1e-9)


@pytest.mark.parametrize("rule, kwargs", [("manual window", {}), ("last-n", {"last_n": 3})])
def test_lamz_bounds_cover_the_true_rate_95_percent(rule, kwargs):
    # mono-exponential tails with proportional log-normal error: the t interval is exact, coverage ~95 %;
    # last-n with 3 points (1 df) checks the t quantile (a normal quantile would cover ~70 %)
    t, c, k = _tails(3, 20_000)
    manual = rule == "manual window"
    fit = fit_lambda_z(t, c, c > 0, manual, axis=0, rule="adjusted-r2" if manual else rule, **kwargs)
    b = lambda_z_bounds(fit)
    covered = (b["LAMZ_LOWER95"] <= k) & (k <= b["LAMZ_UPPER95"])
    fitted = np.isfinite(b["LAMZ_LOWER95"])  # a rising 3-point tail has no fit: rare here, < 0.5 %
    assert fitted.mean() > 0.995
    assert 0.93 <= covered[fitted].mean() <= 0.97
    # t1/2 = ln 2 / k is monotone: its bounds cover the true half-life exactly when LAMZ's do
    hl = np.log(2) / k
    np.testing.assert_array_equal((b["LAMZHL_LOWER95"] <= hl) & (hl <= b["LAMZHL_UPPER95"]), covered)



def test_aucifo_bounds_are_the_image_of_the_lamz_interval():
    # AUCIFO = AUCLST + CLST / lambda is decreasing in lambda > 0: every lambda inside [lower, upper]
    # gives an AUCIFO inside the bounds, and the ends map to the bounds (Draper & Smith, monotone map)
    auclst, clst = np.array([120.0, 80.0]), np.array([3.0, 0.5])
    lo, hi = np.array([0.05, 0.2]), np.array([0.15, 0.3])
    b = aucifo_bounds(auclst, clst, lo, hi)
    lam = np.linspace(lo, hi, 101)
    inside = auclst + clst / lam
    assert (inside >= b["AUCIFO_LOWER95"] - 1e-12).all() and (inside <= b["AUCIFO_UPPER95"] + 1e-12).all()
    np.testing.assert_allclose([inside[-1], inside[0]], [b["AUCIFO_LOWER95"], b["AUCIFO_UPPER95"]], rtol=1e-14)


def test_bounds_are_nan_without_three_points_and_open_without_a_positive_lower_rate():
    t = np.array([[1.0, 2.0, 4.0, 8.0], [1.0, 2.0, 4.0, 8.0], [1.0, 2.0, 4.0, 8.0]])
    c = np.array([[8.0, 4.0, 2.1, 1.0],      # fine
                  [8.0, 4.0, 2.0, 1.0],      # manual window of 2 points below
                  [5.0, 5.5, 4.6, 4.9]])     # nearly flat, noisy: the interval includes 0
    cand = np.ones_like(t, dtype=bool)
    cand[1, :2] = False
    fit = fit_lambda_z(t, c, cand, np.array([True, True, True]))
    b = lambda_z_bounds(fit)
    assert fit.npoints.tolist() == [4, 2, 4]
    assert np.isnan(fit.se[1]) and np.isnan(b["LAMZ_LOWER95"][1]) and np.isnan(b["LAMZHL_UPPER95"][1])
    assert b["LAMZ_LOWER95"][2] < 0 < fit.lamz[2] and b["LAMZHL_UPPER95"][2] == np.inf
    a = aucifo_bounds(np.full(3, 50.0), c[:, -1], b["LAMZ_LOWER95"], b["LAMZ_UPPER95"])
    assert np.isfinite(a["AUCIFO_UPPER95"][0]) and np.isnan(a["AUCIFO_LOWER95"][1])
    assert a["AUCIFO_UPPER95"][2] == np.inf and np.isfinite(a["AUCIFO_LOWER95"][2])


def test_bad_level_is_named():
    t = np.array([1.0, 2, 4, 8])
    fit = fit_lambda_z(t, np.exp(-t), t > 0, True)
    with pytest.raises(ValueError, match=r"The 'level' option must be a float between 0 and 1, e.g. 0.95; got 95"):
        lambda_z_bounds(fit, level=95)
