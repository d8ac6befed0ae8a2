r"""Terminal elimination rate constant (lambda z) by log-linear least squares.

Each profile's candidate points (positive concentrations after CMAX, not
excluded) are searched for a terminal window, a suffix of the candidates
(the last 3, 4, ... points), by one of the rules of
:mod:`pkwidgets.terminal_rules` ("adjusted-r2", "two-tmax", "last-n",
"aicc", "tail-extension"), and :math:`\ln C = a - \lambda_z t` is fitted to
it by ordinary least squares.  Only fits with :math:`\lambda_z > 0` qualify.

Every window of a profile is a suffix of its candidate points, so running
sums of :math:`x, y, x^2, xy, y^2` taken from the end give all windows at
once: O(samples) per profile, no loop over profiles or windows.  ``x`` and
``y`` are taken relative to the last candidate point, which every window
contains, to keep the centred sums free of cancellation.

Notes
-----
For a window of :math:`n` points with centred sums
:math:`S_{xx}, S_{xy}, S_{yy}`:

.. math::
    b = S_{xy}/S_{xx}, \quad R^2 = \frac{S_{xy}^2}{S_{xx}S_{yy}}, \quad
    R^2_{adj} = 1 - (1 - R^2)\frac{n - 1}{n - 2}, \\
    SSE = S_{yy} - S_{xy}^2/S_{xx}, \quad
    s = \sqrt{SSE/(n-2)}, \quad SE(b) = s/\sqrt{S_{xx}}

(ordinary least squares, e.g. Draper & Smith, Applied Regression Analysis,
3rd ed., 1998, ch. 1, from memory; checked against
``scipy.stats.linregress`` in the tests).  Confidence bounds from these
are in :mod:`pkwidgets.lambda_z_bounds`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import terminal_rules
from ._rows import first_true, last_true
from .terminal_rules import ADJ_R2_TOLERANCE, WindowStats

__all__ = ["LambdaZFit", "fit_lambda_z", "fit_lambda_z_samples_major", "fit_lambda_z_profiles_major",
           "ADJ_R2_TOLERANCE"]


@dataclass
class LambdaZFit:
    """Per-profile lambda-z fit results (1-D arrays over profiles) and the points used.

    ``used`` has the shape and layout of the input time array.  ``se`` is the
    standard error of lambda z, ``resid_sd`` the residual standard deviation
    of ln C about the line and ``df`` its degrees of freedom (points - 2);
    all NaN (``df`` 0) without a fit, and ``se``/``resid_sd`` NaN for a fit
    of 2 points.
    """

    lamz: np.ndarray
    intercept: np.ndarray  # ln C at t = 0
    r2: np.ndarray
    r2adj: np.ndarray
    corr: np.ndarray
    npoints: np.ndarray
    t_first: np.ndarray
    t_last: np.ndarray
    used: np.ndarray  # bool, same shape as the time array
    se: np.ndarray = None
    resid_sd: np.ndarray = None
    df: np.ndarray = None
    lamz_compare: np.ndarray = None  # lambda z of the ``compare`` rule on the same windows (automatic profiles)


def _suffix_sums(t, c, candidate, tref, yref):
    """Running sums from the end of n, x, y, x², xy, y², samples-major.

    ``x = t - tref`` and ``y = ln c - yref`` on the candidates, 0 elsewhere.
    Returns an array of shape (samples, 6, profiles): entry ``[i, k, p]`` is
    the k-th sum over the candidate points of profile ``p`` at or after
    sample ``i``.  Samples-major layout makes each step of the running sum
    one contiguous add over all profiles and all six sums (a cumulative sum
    along short rows is several times slower); the additions happen in the
    same order as ``cumsum`` from the end, so the sums are the same numbers.
    """
    N, P = t.shape
    q = np.empty((N, 6, P))
    q[:, 0] = candidate
    x, y = q[:, 1], q[:, 2]
    np.subtract(np.where(candidate, t, tref), tref, out=x)  # tref - tref = 0 off the candidates
    np.log(np.where(candidate, c, 1.0), out=y)  # log 1 = 0 off the candidates (and no log of NaN)
    y -= yref
    y *= candidate  # y is finite everywhere: exact 0 off the candidates
    np.multiply(x, x, out=q[:, 3])
    np.multiply(x, y, out=q[:, 4])
    np.multiply(y, y, out=q[:, 5])
    for i in range(N - 2, -1, -1):
        np.add(q[i], q[i + 1], out=q[i])
    return q


def _window_stats(t, c, candidate):
    """Least-squares statistics of every suffix window (samples x profiles arrays)."""
    N, P = t.shape
    rows = np.arange(P)
    has_cand = candidate.any(axis=0)
    last = last_true(candidate)
    tref = np.where(has_cand, t[last, rows], 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        yref = np.where(has_cand, np.log(c[last, rows]), 0.0)

    # a sample no profile has as a candidate starts no window: rows lo:hi suffice
    any_row = candidate.any(axis=1)
    lo, hi = int(np.argmax(any_row)), N - int(np.argmax(any_row[::-1]))
    cand_t = candidate[lo:hi]
    q = _suffix_sums(t[lo:hi], c[lo:hi], cand_t, tref, yref)
    n, sx, sy = q[:, 0], q[:, 1], q[:, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        cxx, cxy, cyy, slope, r2, r2adj, sse = _centred(q)
    return WindowStats(t=t[lo:hi], c=c[lo:hi], candidate=cand_t, lo=lo, hi=hi, tref=tref, yref=yref,
                       has_cand=has_cand, n=n, sx=sx, sy=sy, cxx=cxx, cxy=cxy, cyy=cyy, slope=slope,
                       r2=r2, r2adj=r2adj, sse=sse)


def _centred(q):
    r"""Centred sums, slope, :math:`R^2`, adjusted :math:`R^2` and SSE from the running sums ``q``.

    The formulas of the module docstring, operation for operation as
    ``cxx = sxx - sx * sx / n`` etc. would evaluate them (so the same
    numbers), with the temporaries written in place: the centred sums
    overwrite the raw sums of squares and products in ``q``.
    """
    n, sx, sy, sxx, sxy, syy = (q[:, k] for k in range(6))
    tmp = np.empty(n.shape)
    for a, b, raw in ((sx, sx, sxx), (sx, sy, sxy), (sy, sy, syy)):  # c.. = s.. - a * b / n
        np.multiply(a, b, out=tmp)
        tmp /= n
        raw -= tmp
    cxx, cxy, cyy = sxx, sxy, syy
    slope = cxy / cxx
    r2 = cxy * cxy  # min(cxy * cxy / (cxx * cyy), 1)
    r2 /= np.multiply(cxx, cyy, out=tmp)
    np.minimum(r2, 1.0, out=r2)
    r2adj = np.subtract(1.0, r2)  # 1 - (1 - r2) * (n - 1) / (n - 2)
    r2adj *= np.subtract(n, 1.0, out=tmp)
    r2adj /= np.subtract(n, 2.0, out=tmp)
    np.subtract(1.0, r2adj, out=r2adj)
    sse = np.subtract(cyy, np.multiply(cxy, slope, out=tmp))  # max(cyy - cxy * slope, 0)
    np.maximum(sse, 0.0, out=sse)
    return cxx, cxy, cyy, slope, r2, r2adj, sse


def _manual_window(w):
    """The whole candidate set of each profile, from its first point (at least 2, declining)."""
    rows = np.arange(w.n.shape[1])
    start = first_true(w.candidate)
    n_manual = w.n[start, rows]
    has = w.has_cand & (n_manual >= 2) & (w.slope[start, rows] < 0)
    return start, has


def _assemble(w, start, has, shape):
    """Pick each profile's window row from the suffix statistics into a :class:`LambdaZFit`."""
    N, P = shape
    rows = np.arange(P)
    flat = start * P + rows

    def pick(a):  # a is (rows lo:hi) x profiles: a[start, rows], by a flat take where a is contiguous
        at = a.reshape(-1).take(flat) if a.flags.c_contiguous else a[start, rows]
        return np.where(has, at, np.nan)

    b = pick(w.slope)
    npts = pick(w.n)
    mean_x = pick(w.sx) / npts
    mean_y = pick(w.sy) / npts
    intercept = w.yref + mean_y - b * mean_x - b * w.tref
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = np.where(has, np.sign(b) * np.sqrt(pick(w.r2)), np.nan)
        resid_sd = np.sqrt(pick(w.sse) / (npts - 2.0))
        resid_sd = np.where(npts >= 3, resid_sd, np.nan)
        se = resid_sd / np.sqrt(pick(w.cxx))
    r2adj_out = pick(w.r2adj)
    r2adj_out = np.where(npts >= 3, r2adj_out, np.nan)
    used = np.zeros((N, P), dtype=bool)
    used[w.lo:w.hi] = w.candidate & (np.arange(w.hi - w.lo)[:, None] >= start) & has
    return LambdaZFit(
        lamz=-b,
        intercept=np.where(has, intercept, np.nan),
        r2=pick(w.r2),
        r2adj=r2adj_out,
        corr=corr,
        npoints=np.where(has, npts, 0).astype(np.int64),
        t_first=np.where(has, w.t[start, rows], np.nan),
        t_last=np.where(has, w.tref, np.nan),
        used=used,
        se=se,
        resid_sd=resid_sd,
        df=np.where(has, npts - 2, 0).astype(np.int64),
    )


def _fit_samples_major(t, c, candidate, manual, rule, options, compare=None):
    w = _window_stats(t, c, candidate)
    start, has = terminal_rules.choose_window(w, rule, **options)
    if manual.any():  # windows given by hand replace the rule's choice
        start_manual, has_manual = _manual_window(w)
        start = np.where(manual, start_manual, start)
        has = np.where(manual, has_manual, has)
    fit = _assemble(w, start, has, t.shape)
    if compare is not None:  # a second rule on the same suffix statistics (no second pass over the data)
        rule2, options2 = compare
        start2, has2 = terminal_rules.choose_window(w, rule2, **options2)
        rows = np.arange(t.shape[1])
        fit.lamz_compare = np.where(has2 & ~manual, -w.slope[start2, rows], np.nan)
    return fit


def _samples_major(t, c, candidate, axis):
    """The three arrays as contiguous samples x profiles float/bool arrays (1-D: one profile)."""
    t, c, candidate = np.asarray(t, dtype=float), np.asarray(c, dtype=float), np.asarray(candidate, dtype=bool)
    if t.ndim == 1:
        return t[:, None], c[:, None], candidate[:, None]
    if t.ndim != 2:
        raise ValueError(f"The time array must be 1-D or 2-D; got {t.ndim} dimensions.")
    return tuple(np.ascontiguousarray(np.moveaxis(a, axis, 0)) for a in (t, c, candidate))


def fit_lambda_z(t, c, candidate, manual, *, axis=-1, rule="adjusted-r2", min_points=3,
                 tol=ADJ_R2_TOLERANCE, tmax=None, last_n=3,
                 off_line_levels=terminal_rules.OFF_LINE_LEVELS, run=terminal_rules.EXTENSION_RUN, compare=None):
    r"""Fit lambda z for many profiles at once.

    Parameters
    ----------
    t, c : ndarray, 1-D or 2-D
        Times (increasing along the samples axis over the candidate points)
        and concentrations; 1-D arrays are one profile.
    candidate : ndarray of bool, same shape
        Points that may enter the fit (positive concentration, not excluded,
        in the allowed range).
    manual : ndarray of bool, shape (profiles,), or bool
        True where ``candidate`` is a fixed window chosen by the user: all its
        points are used (at least 2), no search.
    axis : int
        The samples axis (-1: profiles x samples; 0: samples x profiles, the
        engine's layout), as in scipy's array functions.
    rule : str
        Automatic window rule: "adjusted-r2", "two-tmax", "last-n", "aicc" or
        "tail-extension"; see :mod:`pkwidgets.terminal_rules` for each rule,
        its formula and its reference.
    min_points : int
        Fewest points of an automatic fit (not "last-n").
    tol : float
        Tie tolerance on adjusted R² ("adjusted-r2").
    tmax : ndarray, shape (profiles,), optional
        Time of CMAX per profile: required by "two-tmax"; for
        "tail-extension" a floor at 2 x tmax (give it for extravascular doses).
    last_n : int
        Number of last candidate points ("last-n"), at least 3.
    off_line_levels : (float, float)
        One-sided t levels above and below the line of "tail-extension".
    run : int
        Consecutive off-line points that stop "tail-extension".
    compare : str, optional
        A second rule applied to the same window statistics; its lambda z
        is returned as ``lamz_compare`` (NaN for manual windows), so that
        disagreeing rules can be flagged at little extra cost.

    Returns
    -------
    LambdaZFit
        NaN (0 points) for a profile with no qualifying fit (e.g. fewer than
        ``min_points`` candidates, no declining window); ``used`` as ``t``.

    Examples
    --------
    >>> t = np.array([1.0, 2, 4, 8]); c = 10 * np.exp(-0.2 * t)
    >>> fit = fit_lambda_z(t, c, c > 0, False, rule="last-n", last_n=3)
    >>> round(float(fit.lamz[0]), 12), int(fit.npoints[0])
    (0.2, 3)
    >>> fit_lambda_z(t, c, c > 0, False, rule="r2")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    ValueError: The 'rule' option must be one of 'adjusted-r2', 'two-tmax', ..., 'tail-extension'; got 'r2'.
    """
    given = dict(min_points=min_points, tol=tol, tmax=tmax, last_n=last_n, off_line_levels=off_line_levels, run=run)
    options = terminal_rules.rule_options(rule, **given)
    second = None if compare is None else (compare, terminal_rules.rule_options(compare, **given))
    ts, cs, cand = _samples_major(t, c, candidate, axis)
    manual = np.broadcast_to(np.asarray(manual, dtype=bool), ts.shape[1:])
    fit = _fit_samples_major(ts, cs, cand, manual, rule, options, second)
    fit.used = fit.used[:, 0] if np.ndim(t) == 1 else np.ascontiguousarray(np.moveaxis(fit.used, 0, axis))
    return fit


def fit_lambda_z_samples_major(t, c, candidate, manual, *, min_points=3, tol=ADJ_R2_TOLERANCE):
    """:func:`fit_lambda_z` with ``axis=0`` and the adjusted-R² rule (the engine's call; kept as an alias).

    The array engine works in this layout: per-profile values broadcast along
    the long axis and the running sums advance one contiguous row at a time.
    """
    return _fit_samples_major(t, c, candidate, manual, "adjusted-r2", {"min_points": min_points, "tol": tol})


def fit_lambda_z_profiles_major(t, c, candidate, manual, *, min_points=3, tol=ADJ_R2_TOLERANCE):
    """:func:`fit_lambda_z` with ``axis=-1`` and the adjusted-R² rule (the former ``fit_lambda_z`` call)."""
    return fit_lambda_z(t, c, candidate, manual, axis=-1, min_points=min_points, tol=tol)
