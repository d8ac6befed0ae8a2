"""The "tail-extension" rule with its anchored reference line, against a slow loop written from its definition.

The reference below follows the rule's docstring (pkwidgets.terminal_rules) point by point, one profile at a
time, and fits every line with ``scipy.stats.linregress``; the studentised prediction residual is the
prediction interval of a new observation in simple linear regression (Draper & Smith, Applied Regression
Analysis, 3rd ed., 1998, ch. 3, from memory).  The profiles are two-exponential curves (Gibaldi & Perrier,
Pharmacokinetics, 2nd ed., ch. 2, from memory) with log-normal noise: input only, no value of ours is copied.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from pkwidgets import terminal_rules
from pkwidgets.lambda_z import fit_lambda_z
from pkwidgets.terminal_rules import (EDGE_KEEP_RESIDUAL, EXTENSION_RUN, FIRM_ABOVE_LEVEL, FIRM_BELOW_LEVEL,
                                      OFF_LINE_LEVELS, SHORT_TAIL, WIDE_ABOVE_LEVEL, WIDE_WINDOW)

RICH = np.array([0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48, 72.0])


def _profiles(seed, n_prof, times=RICH, sd=0.15):
    """Two-exponential IV-bolus curves with proportional log-normal noise; samples x profiles."""
    rng = np.random.default_rng(seed)
    alpha, beta = rng.uniform(0.3, 1.5, n_prof), rng.uniform(0.02, 0.1, n_prof)
    a, b = rng.uniform(2, 20, n_prof), rng.uniform(0.5, 3, n_prof)
    t = times[:, None] * np.ones(n_prof)
    c = (a * np.exp(-alpha * t) + b * np.exp(-beta * t)) * np.exp(rng.normal(0, sd, t.shape))
    return t, c, np.ones(t.shape, dtype=bool)


def _studentised(t, c, point, window):
    """Prediction residual of ``point`` against the least-squares line of the points ``window`` (linregress)."""
    r = stats.linregress(t[window], np.log(c[window]))
    n, x0 = len(window), t[point]
    s = np.sqrt(np.sum((np.log(c[window]) - r.intercept - r.slope * t[window]) ** 2) / (n - 2))
    sxx = np.sum((t[window] - t[window].mean()) ** 2)
    s = max(s, terminal_rules.RESIDUAL_FLOOR / np.sqrt(1 + 1 / n + (x0 - t[window].mean()) ** 2 / sxx))
    resid = np.log(c[point]) - (r.intercept + r.slope * x0)
    return resid / (s * np.sqrt(1 + 1 / n + (x0 - t[window].mean()) ** 2 / sxx)), n


def _side(stud, n, levels):
    """+1 above the line, -1 below it, 0 on it (the rule's one-sided t tests)."""
    up = max(levels[0], WIDE_ABOVE_LEVEL) if n >= WIDE_WINDOW else levels[0]
    return 1 if stud > stats.t.ppf(up, n - 2) else -1 if stud < -stats.t.ppf(levels[1], n - 2) else 0


def _reference(t, c, cand, levels=OFF_LINE_LEVELS, run=EXTENSION_RUN, tmax=None):
    """Slow reference written from the rule's definition, one profile."""
    idx = np.flatnonzero(cand)
    streak, side, top, firm, cut = 0, 0, None, False, None
    for j in range(len(idx) - 4, -1, -1):
        anchored = streak > 0 and len(idx) - (top + 1) >= WIDE_WINDOW  # a run in progress, wide anchor
        stud, n = _studentised(t, c, idx[j], idx[(top + 1 if anchored else j + 1):])
        here = _side(stud, n, levels)
        if here == 0 or here != side:  # a point on the line or on the other side ends the run
            streak, side, top, firm = 0, here, j, False
        streak += here != 0
        firm = firm or (stud < -stats.t.ppf(max(levels[1], FIRM_BELOW_LEVEL), n - 2) if here < 0 else
                        stud > stats.t.ppf(max(levels[0], FIRM_ABOVE_LEVEL), n - 2))
        if streak >= run:
            cut = top
            break
    else:  # a shorter run reaching the first candidate: below only when firm; above unless a lone, weak point
        sure_up = streak > 1 or len(idx) - 1 > SHORT_TAIL or firm
        cut = top if streak > 0 and (sure_up if side > 0 else firm) else None
    window = idx[(cut + 1 if cut is not None else 0):]
    edge = cut is not None and len(idx) - (cut + 2) >= 3  # the edge point's own residual (window after it)
    edge_kept = edge and side > 0 and _studentised(t, c, idx[cut + 1], idx[cut + 2:])[0] < EDGE_KEEP_RESIDUAL
    if cut is not None and len(window) > 3 and not edge_kept:  # one-point margin after a bend
        window = window[1:]
    if tmax is not None and (t[window] >= 2 * tmax).sum() >= 3:  # floor at 2 x TMAX
        window = window[t[window] >= 2 * tmax]
    ok = len(window) >= 3 and stats.linregress(t[window], np.log(c[window])).slope < 0
    return window if ok else np.array([], dtype=int)


@pytest.mark.parametrize("levels, run, with_tmax", [
    (OFF_LINE_LEVELS, EXTENSION_RUN, False), (OFF_LINE_LEVELS, EXTENSION_RUN, True), ((0.9, 0.9), 1, False),
    ((0.6, 0.95), 2, True), ((0.8, 0.9), 4, False)])
def test_anchored_tail_extension_matches_its_loop_reference(levels, run, with_tmax):
    t, c, cand = _profiles(31, 150)
    tmax = np.random.default_rng(5).choice([0.25, 1.0, 3.0, 8.0], t.shape[1]) if with_tmax else None
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule="tail-extension", off_line_levels=levels, run=run, tmax=tmax)
    for p in range(t.shape[1]):
        ref = _reference(t[:, p], c[:, p], cand[:, p], levels, run, None if tmax is None else tmax[p])
        assert np.flatnonzero(fit.used[:, p]).tolist() == ref.tolist(), p


def test_sparse_tails_with_gaps_match_the_loop_reference():
    # sparse designs and candidates that start late or have holes (excluded points) reach the short-run branches
    t, c, cand = _profiles(37, 300, times=np.array([0.5, 1, 2, 4, 8, 12, 24, 48, 72.0]), sd=0.2)
    rng = np.random.default_rng(6)
    cand &= (np.arange(t.shape[0])[:, None] >= rng.choice([0, 1, 2], t.shape[1])) & (rng.random(t.shape) > 0.1)
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule="tail-extension")
    for p in range(t.shape[1]):
        ref = _reference(t[:, p], c[:, p], cand[:, p])
        assert np.flatnonzero(fit.used[:, p]).tolist() == ref.tolist(), p


def test_the_anchor_decides_some_windows(monkeypatch):
    # the comparison above exercises the anchor: without it (no window is wide enough) some windows change
    t, c, cand = _profiles(31, 150)
    fit = fit_lambda_z(t, c, cand, False, axis=0, rule="tail-extension")
    monkeypatch.setattr(terminal_rules, "WIDE_WINDOW", 10**6)
    plain = fit_lambda_z(t, c, cand, False, axis=0, rule="tail-extension")
    assert (plain.npoints != fit.npoints).sum() >= 5


def test_exact_biexponential_stops_after_the_bend():
    # noise-free C = 10 e^{-t} + e^{-0.05 t} (closed form): up to 6 h the fast term is > 1 % of C (3.3 % at 6 h),
    # from 8 h it is < 0.6 %; the window must leave out every point up to 6 h and its slope then equals
    # beta = 0.05 within 1e-3 (the fast term changes ln C by < 0.006 at 8 h, < 1e-4 from 12 h)
    t = RICH
    c = 10 * np.exp(-1.0 * t) + np.exp(-0.05 * t)
    fit = fit_lambda_z(t, c, c > 0, False, rule="tail-extension")
    assert fit.t_first[0] >= 8
    np.testing.assert_allclose(fit.lamz[0], 0.05, rtol=1e-3)
