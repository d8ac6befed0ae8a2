r"""Rules that choose the terminal window of each profile from its suffix windows.

A window is a suffix of a profile's candidate points (the last 3, 4, ...
points after CMAX).  :func:`pkwidgets.lambda_z.fit_lambda_z` computes the
least-squares statistics of every suffix window at once
(:class:`WindowStats`, arrays of shape (rows, profiles), row = first sample
of the window); a rule returns, per profile, the row where its window starts
and whether it has one.  Every rule is vectorised over profiles; none loops
over profiles or windows.

Rules
-----
``"adjusted-r2"``
    Highest adjusted :math:`R^2`; values within ``tol`` (1e-4) of the best
    are tied and the tie goes to the window with most points (common
    practice, no source).
``"two-tmax"``
    All candidate points at or after :math:`2\,t_{max}` (Scheerans,
    Derendorf & Kloft, Biopharm Drug Dispos 2008;29:145-157, from memory);
    at least ``min_points`` of them.  Meant for extravascular dosing.
``"last-n"``
    The last ``last_n`` candidate points (common practice, no source).
``"aicc"``
    Lowest small-sample Akaike criterion of the window's regression
    (Hurvich & Tsai, Biometrika 1989;76:297-307, from memory), with the
    Gaussian log-likelihood at the least-squares fit and :math:`k = 2`
    coefficients, as ``statsmodels.tools.eval_measures.aicc`` computes it:

    .. math::
        \mathrm{AICc} = n \ln(2\pi\,SSE/n) + n + 2k + \frac{2k(k+1)}{n-k-1}

    Windows of at least 4 points (the criterion is infinite for 3); ties go
    to the most points.  Windows hold different data, so the criterion is a
    heuristic comparison here, not a likelihood test.
``"tail-extension"`` (this project's rule)
    Start from the last ``min_points`` (3) candidates and extend the window
    backwards one point at a time; stop at the first run of ``run`` (5)
    consecutive earlier points that lie off the line on the same side (all
    above it, or all below it; a point on the line or on the other side ends
    a run).  Each point is tested against the line of the window right after
    it, except while a run is in progress: then it is tested against the
    anchor, the window after the run's latest point (the window as it was
    before the run began), when that window is wide (at least
    ``WIDE_WINDOW``, 6, points).  The window after a point already holds the
    run's later points and tilts toward them, which hides a bend; the anchor
    does not move until a point on the line (or on the other side) ends the
    run.  A narrower anchor is not used: its slope error is shared by every
    point tested against it, which makes runs out of noise.  A shorter run
    that reaches the
    first candidate also stops it: a run below the line only when one of its
    points has :math:`r_0 < -t_{0.95,\,n-2}` (``FIRM_BELOW_LEVEL``); a run
    above it when it holds two points or more, when more than ``SHORT_TAIL``
    (4) candidates follow it, or when its lone point has
    :math:`r_0 > t_{0.90,\,n-2}` (``FIRM_ABOVE_LEVEL``: with few points left,
    dropping one costs much precision, so one noisy high point must be
    clearly high).  The window then starts two candidates after the latest
    point of that run: the point at the edge of a bend is left out as well
    (a one-point margin, kept only while more than ``min_points`` points
    remain), except after a run above the line when the edge point's own
    residual (against the window after it) is :math:`r_0 < -2.5`
    (``EDGE_KEEP_RESIDUAL``): a point far below the line is no
    distribution-phase point, and it stays in.  With ``tmax`` given
    (extravascular dosing) the window also starts no earlier than
    :math:`2\,t_{max}` while at least ``min_points`` points remain there
    (the two-tmax rule as a floor).  A point is above
    the line when its studentised prediction residual is above the one-sided
    ``off_line_levels[0]`` (0.70) quantile (against a wide window: the
    ``WIDE_ABOVE_LEVEL`` (0.75) quantile, or ``off_line_levels[0]`` if
    higher), below it when the residual is
    below minus the ``off_line_levels[1]`` (0.90) quantile of Student's t
    with :math:`n - 2` degrees of freedom.  For a reference window of
    :math:`n` points (the window after the point, or the anchor) and an
    earlier point :math:`(x_0, y_0)`, :math:`y = \ln C`:

    .. math::
        r_0 = \frac{y_0 - \hat y(x_0)}
        {s \sqrt{1 + \frac{1}{n} + \frac{(x_0 - \bar x)^2}{S_{xx}}}}, \quad
        \text{above if } r_0 > t_{q,\,n-2}, \quad
        q = \begin{cases} 0.70 & n < 6 \\ 0.75 & n \ge 6 \end{cases}, \quad
        \text{below if } r_0 < -t_{0.90,\,n-2}

    (the prediction interval of a new observation in simple linear
    regression, Draper & Smith, Applied Regression Analysis, 3rd ed., 1998,
    ch. 3, from memory; :math:`s` floored at ``RESIDUAL_FLOOR``).  The rule
    stops where the log curve bends beyond the
    window's own residual noise: distribution-phase points lie above the
    terminal line, absorption-phase points below it, so a bend gives a run on
    one side while noise gives points on both; the upper test is the more
    sensitive one, and a lone low point at the start (often the absorption
    tail of a one-compartment profile, or noise) stops the rule only when it
    is far below.  Requiring a run makes one noisy point harmless.  The
    levels, the run length, the anchor and ``WIDE_WINDOW``, the firm levels,
    ``SHORT_TAIL``, the margin and its exception are our choice,
    tuned on ``bench/terminal_accuracy.py`` (one- and two-compartment, IV and
    oral, rich and sparse designs; tuned at 15 % residual error, the anchor
    on the bench's default seed, checked on other seeds and at 10 % and 25 %;
    the anchor's variants are in ``bench/_experiment_anchor.py``); no source.  The residuals against the
    window right after each point come at once from the suffix sums; one loop
    over the sample axis counts the runs and recomputes, for the profiles
    with a run in progress, the residual against its anchor.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from numbers import Integral, Real

import numpy as np
from scipy import stats

from ._rows import first_true
from .choices import check_choice

__all__ = ["TERMINAL_RULES", "ADJ_R2_TOLERANCE", "OFF_LINE_LEVELS", "EXTENSION_RUN", "FIRM_BELOW_LEVEL",
           "FIRM_ABOVE_LEVEL", "SHORT_TAIL", "EDGE_KEEP_RESIDUAL", "WIDE_WINDOW", "WIDE_ABOVE_LEVEL", "WindowStats",
           "choose_window", "rule_options", "window_aicc"]

#: Automatic terminal-window rules, in the order the documentation lists them.
TERMINAL_RULES = ("adjusted-r2", "two-tmax", "last-n", "aicc", "tail-extension")
#: Adjusted R² values within this of the best are tied (common practice, no source).
ADJ_R2_TOLERANCE = 1e-4
#: One-sided t levels (above, below the line) of the "tail-extension" rule's off-line test, and the
#: run of off-line points that stops it (our choice, tuned on ``bench/terminal_accuracy.py``).
OFF_LINE_LEVELS = (0.70, 0.90)
EXTENSION_RUN = 5
#: A window of at least this many points is wide: it anchors the test of earlier points while a run is in progress,
#: and its test above the line uses at least ``WIDE_ABOVE_LEVEL`` (our choice, tuned on ``bench/terminal_accuracy.py``).
WIDE_WINDOW = 6
WIDE_ABOVE_LEVEL = 0.75
#: One-sided t level below the line that a short run of low points reaching the first candidate must pass at one
#: point at least before it stops the "tail-extension" rule (our choice, tuned on ``bench/terminal_accuracy.py``).
FIRM_BELOW_LEVEL = 0.95
#: One-sided t level above the line that a lone point at the first candidate must pass before it stops the
#: "tail-extension" rule when at most ``SHORT_TAIL`` candidates follow it (our choice, tuned on
#: ``bench/terminal_accuracy.py``).
FIRM_ABOVE_LEVEL = 0.90
SHORT_TAIL = 4
#: Studentised residual below which the edge point after a bend above the line stays in the window (our choice,
#: tuned on ``bench/terminal_accuracy.py``).
EDGE_KEEP_RESIDUAL = -2.5
#: Residual SD floor (ln units) of the AICc: rounding-level residuals of exact data stay finite.
_SD_FLOOR = 1e-12


@dataclass
class WindowStats:
    """Least-squares statistics of every suffix window; arrays (rows, profiles) unless noted.

    ``x = t - tref`` and ``y = ln C - yref`` relative to each profile's last
    candidate; ``n, sx, sy`` are sums over the window, ``cxx, cxy, cyy`` its
    centred sums, ``sse`` its residual sum of squares.  ``t, c, candidate``
    are the rows ``lo:hi`` of the inputs; ``tref, yref, has_cand`` are per
    profile.
    """

    t: np.ndarray
    c: np.ndarray
    candidate: np.ndarray
    lo: int
    hi: int
    tref: np.ndarray
    yref: np.ndarray
    has_cand: np.ndarray
    n: np.ndarray
    sx: np.ndarray
    sy: np.ndarray
    cxx: np.ndarray
    cxy: np.ndarray
    cyy: np.ndarray
    slope: np.ndarray
    r2: np.ndarray
    r2adj: np.ndarray
    sse: np.ndarray


def _first_row(mask):
    """First row where ``mask`` holds (0 where none, as ``np.argmax``), and whether it holds anywhere."""
    return first_true(mask), mask.any(axis=0)


def _at(a, start):
    return a[start, np.arange(a.shape[1])]


def _adjusted_r2(w, *, min_points, tol):
    declining = w.slope < 0
    # automatic: suffix windows starting at a candidate, >= min_points, declining
    ok = w.candidate & (w.n >= min_points) & declining & np.isfinite(w.r2adj)
    best = np.max(np.where(ok, w.r2adj, -np.inf), axis=0)
    qualifies = ok & (w.r2adj >= best - tol)
    return _first_row(qualifies)  # earliest start = most points


def _two_tmax(w, *, min_points, tmax):
    with np.errstate(invalid="ignore"):
        after = w.candidate & (w.t >= 2.0 * np.asarray(tmax, dtype=float))
    start, has = _first_row(after)
    return start, has & (_at(w.n, start) >= min_points) & (_at(w.slope, start) < 0)


def _last_n(w, *, last_n):
    start, has = _first_row(w.candidate & (w.n == last_n))
    return start, has & (_at(w.slope, start) < 0)


def window_aicc(n, sse, k=2):
    r"""Small-sample AIC of a least-squares line on ``n`` points with residual sum of squares ``sse``.

    .. math::
        \mathrm{AICc} = n \ln(2\pi\,SSE/n) + n + 2k + \frac{2k(k+1)}{n-k-1}

    (Hurvich & Tsai, Biometrika 1989, from memory; equal to
    ``statsmodels.tools.eval_measures.aicc`` of the OLS log-likelihood).  NaN or infinite for
    ``n <= k + 1``; ``sse`` is floored at :math:`n\,(10^{-12})^2`.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        sse = np.maximum(sse, n * _SD_FLOOR**2)
        return n * np.log(2.0 * np.pi * sse / n) + n + 2.0 * k + 2.0 * k * (k + 1.0) / (n - k - 1.0)


def _aicc(w, *, min_points):
    crit = window_aicc(w.n, w.sse)
    ok = w.candidate & (w.n >= max(min_points, 4)) & (w.slope < 0) & np.isfinite(crit)
    start = np.argmin(np.where(ok, crit, np.inf), axis=0)  # first minimum = most points
    return start, ok.any(axis=0)


#: Floor of the residual scale (ln units, 0.01 % in concentration): far below any assay's precision, and above the
#: rounding of the running-sum SSE (about 1e-7 to 1e-6), so exact or nearly exact data give decisions on their
#: shape, not on rounding, and do not change when concentrations are scaled (our choice).
RESIDUAL_FLOOR = 1e-4


def _residual(w, row, ref, seed, cols):
    """Studentised prediction residual of the point at ``row`` against the suffix window of row ``ref``.

    For the profiles ``cols`` (a slice with ``row``, ``ref`` rows or slices of rows, or an index array with
    ``ref`` one row per profile); returns the residuals and the window's point counts (NaN / 0 where the
    point is no candidate or the window has fewer than ``seed`` points).
    """
    n, sx, sy, cxx, b, sse = (a[ref, cols] for a in (w.n, w.sx, w.sy, w.cxx, w.slope, w.sse))
    cand, tref = w.candidate[row, cols], w.tref[cols]
    tested = cand & (n >= seed)
    with np.errstate(divide="ignore", invalid="ignore"):
        x0 = np.where(cand, w.t[row, cols], tref) - tref
        y0 = np.log(np.where(cand, w.c[row, cols], 1.0)) - w.yref[cols]
        xbar = sx / n
        r = y0 - (sy / n + b * (x0 - xbar))
        scale = np.sqrt(sse / (n - 2.0) * (1.0 + 1.0 / n + (x0 - xbar) ** 2 / cxx))
        r = r / np.maximum(scale, RESIDUAL_FLOOR)
    return np.where(tested, r, np.nan), np.where(tested, n, 0).astype(np.intp)


def _bounds(levels, rows):
    """Off-line bounds indexed by a window's point count n (t quantiles with df n - 2): above the line (the wide
    level from ``WIDE_WINDOW`` points on), below it (negated), firm below (negated), firm above."""
    quantiles = (levels[0], max(levels[0], WIDE_ABOVE_LEVEL), levels[1], max(levels[1], FIRM_BELOW_LEVEL),
                 max(levels[0], FIRM_ABOVE_LEVEL))
    return _t_table(tuple(float(q) for q in quantiles), int(rows), WIDE_WINDOW)


@lru_cache(maxsize=64)
def _t_table(quantiles, rows, wide):
    """The tables of :func:`_bounds` for n = 0 ... rows + 1, df = max(n - 2, 1), from ``scipy.stats.t.ppf``
    (computed once per chunk shape and levels: the same numbers as a call per chunk).  Read-only arrays."""
    dfs = np.maximum(np.arange(rows + 2) - 2, 1)
    up_narrow, up_wide, lo, firm_lo, firm_up = (stats.t.ppf(q, dfs) for q in quantiles)
    tables = (np.where(np.arange(rows + 2) >= wide, up_wide, up_narrow), -lo, -firm_lo, firm_up)
    for table in tables:
        table.flags.writeable = False
    return tables


def _classify(r, n, bounds):
    """Masks (above, below, firm below, firm above) of residuals ``r`` against windows of ``n`` points."""
    up, neg_lo, neg_firm_lo, firm_up = (b[n] for b in bounds)
    with np.errstate(invalid="ignore"):  # NaN (not tested) is off the line on no side
        return r > up, r < neg_lo, r < neg_firm_lo, r > firm_up


def _off_line(w, bounds, seed):
    """Masks of every candidate against the window right after it (none on the last row); arrays (rows, profiles)."""
    R = w.n.shape[0]
    r, n = np.full(w.n.shape, np.nan), np.zeros(w.n.shape, dtype=np.intp)
    if R > 1:
        r[:-1], n[:-1] = _residual(w, slice(0, R - 1), slice(1, R), seed, slice(None))
    return _classify(r, n, bounds)


def _next_candidate(w, row):
    """First candidate row after ``row`` (per profile), and whether there is one."""
    return _first_row(w.candidate & (np.arange(w.n.shape[0])[:, None] > row))


def _bend_cut(w, levels, run, seed):
    """Latest row of the first one-sided run of ``run`` off-line candidates met going backwards (-1: none).

    Also returns whether that run lies above the line.  Points above and points below the line count in
    separate runs (a point on the other side or on the line ends a run); while a run is in progress, each
    earlier point is tested against the window after the run's latest point (the anchor) when that window is
    wide, else against the window right after it.  A shorter run that reaches the first candidate stops the
    rule too: below the line only when one of its points is below the firm bound; above it when it holds two
    points or more, when more than ``SHORT_TAIL`` candidates follow it, or when its one point is above the
    firm bound.
    """
    P, bounds = w.n.shape[1], _bounds(levels, w.n.shape[0])
    off = _off_line(w, bounds, seed)  # against the window right after each point; anchored tests replace some
    n_up, n_lo, top_up, top_lo = np.zeros(P, np.int64), np.zeros(P, np.int64), np.full(P, -1), np.full(P, -1)
    firm, lone_firm, done, cut = np.zeros(P, bool), np.zeros(P, bool), np.zeros(P, bool), np.full(P, -1)
    for i in range(w.n.shape[0] - 1, -1, -1):  # backwards over samples, all profiles at once
        on = np.flatnonzero(((n_up > 0) | (n_lo > 0)) & ~done)  # a run in progress: the window before it ...
        anchor = np.where(n_up[on] > 0, top_up[on], top_lo[on]) + 1
        wide = w.n[anchor, on] >= WIDE_WINDOW  # ... is the anchor when it is wide
        on, anchor = on[wide], anchor[wide]
        if on.size:
            for m, sub in zip(off, _classify(*_residual(w, i, anchor, seed, on), bounds)):
                m[i, on] = sub
        above, below, firm_below, firm_above = (m[i] for m in off)
        active = w.candidate[i] & ~done
        up, lo = above & active, below & active
        lone_firm = np.where(up & (n_up == 0), firm_above, lone_firm)
        top_up, top_lo = np.where(up & (n_up == 0), i, top_up), np.where(lo & (n_lo == 0), i, top_lo)
        firm = np.where(lo, (firm & (n_lo > 0)) | firm_below, firm)
        n_up = np.where(up, n_up + 1, np.where(active, 0, n_up))
        n_lo = np.where(lo, n_lo + 1, np.where(active, 0, n_lo))
        hit_up, hit_lo = active & (n_up >= run), active & (n_lo >= run)
        cut, done = np.where(hit_up, top_up, np.where(hit_lo, top_lo, cut)), done | hit_up | hit_lo
    # a shorter run reaching the first candidate; a lone point above needs the firm bound when few points follow
    sure_up = (n_up > 1) | (w.candidate.sum(axis=0) > SHORT_TAIL + 1) | lone_firm
    end_up, end_lo = ~done & (n_up > 0) & sure_up, ~done & (n_lo > 0) & firm
    cut_up = np.where(done, n_up >= run, end_up)
    return np.where(end_up, top_up, np.where(end_lo, top_lo, cut)), cut_up


def _tail_extension(w, *, min_points, off_line_levels, run, tmax):
    seed = max(int(min_points), 3)
    cut, cut_up = _bend_cut(w, off_line_levels, run, seed)
    start, has = _next_candidate(w, cut)
    margin, _ = _next_candidate(w, start)  # after a bend, its edge point stays out as well ...
    # ... unless the bend is above the line and the edge point is far below the window after it
    kept, on = np.zeros(w.n.shape[1], dtype=bool), np.flatnonzero(cut_up & (start + 1 < w.n.shape[0]))
    with np.errstate(invalid="ignore"):
        kept[on] = _residual(w, start[on], start[on] + 1, seed, on)[0] < EDGE_KEEP_RESIDUAL
    start = np.where((cut >= 0) & (_at(w.n, start) > seed) & ~kept, margin, start)
    if tmax is not None:  # extravascular: not before 2 x TMAX while enough points remain
        with np.errstate(invalid="ignore"):
            floor, has_floor = _first_row(w.candidate & (w.t >= 2.0 * np.asarray(tmax, dtype=float)))
        later = has_floor & (floor > start) & (_at(w.n, floor) >= seed)
        start = np.where(later, floor, start)
    return start, has & (_at(w.n, start) >= seed) & (_at(w.slope, start) < 0)


_RULES = {"adjusted-r2": _adjusted_r2, "two-tmax": _two_tmax, "last-n": _last_n, "aicc": _aicc,
          "tail-extension": _tail_extension}
_RULE_OPTIONS = {"adjusted-r2": ("min_points", "tol"), "two-tmax": ("min_points", "tmax"),
                 "last-n": ("last_n",), "aicc": ("min_points",),
                 "tail-extension": ("min_points", "off_line_levels", "run", "tmax")}


def _check_extension(levels, run):
    if not (isinstance(levels, (tuple, list)) and len(levels) == 2
            and all(isinstance(v, Real) and 0.5 <= v < 1.0 for v in levels)):
        raise ValueError(f"The 'off_line_levels' option must be a pair of numbers in [0.5, 1); got {levels!r}.")
    if isinstance(run, bool) or not isinstance(run, Integral) or run < 1:
        raise ValueError(f"The 'run' option must be an integer >= 1; got {run!r}.")


def rule_options(rule, *, min_points=3, tol=ADJ_R2_TOLERANCE, tmax=None, last_n=3,
                 off_line_levels=OFF_LINE_LEVELS, run=EXTENSION_RUN):
    """Check ``rule`` and its options; return the options that rule takes (a dict).

    Raises ``ValueError`` naming the option, what it must be and what it got.
    """

    check_choice("The 'rule' option", rule, TERMINAL_RULES)
    if isinstance(min_points, bool) or not isinstance(min_points, Integral) or min_points < 2:
        raise ValueError(f"The 'min_points' option must be an integer >= 2; got {min_points!r}.")
    if rule == "last-n" and (isinstance(last_n, bool) or not isinstance(last_n, Integral) or last_n < 3):
        raise ValueError(f"The 'last_n' option must be an integer >= 3; got {last_n!r}.")
    if rule == "two-tmax" and tmax is None:
        raise ValueError("The 'two-tmax' rule needs 'tmax', the time of CMAX of each profile; got None.")
    if rule == "tail-extension":
        _check_extension(off_line_levels, run)
    given = {"min_points": min_points, "tol": tol, "tmax": tmax, "last_n": last_n,
             "off_line_levels": off_line_levels, "run": run}
    return {k: given[k] for k in _RULE_OPTIONS[rule]}


def choose_window(w, rule, **options):
    """Row (within ``lo:hi``) where each profile's window starts, and whether it has one.

    ``options`` are those :func:`rule_options` returns for ``rule``.
    """
    return _RULES[rule](w, **options)

