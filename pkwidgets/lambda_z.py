r"""Terminal elimination rate constant (lambda z) by log-linear least squares.

The automatic search fits :math:`\ln C = a - \lambda_z t` to the last 3, 4,
... candidate points of each profile (candidates: positive concentrations
after CMAX, not excluded) and keeps the fit with the highest adjusted
:math:`R^2`; fits within ``tol`` (1e-4) of the best count as tied and the
one with most points wins.  Only fits with :math:`\lambda_z > 0` qualify.
This rule is common practice, no source.

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
    R^2_{adj} = 1 - (1 - R^2)\frac{n - 1}{n - 2}

(ordinary least squares; checked against ``scipy.stats.linregress`` in the
tests).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["LambdaZFit", "fit_lambda_z", "fit_lambda_z_samples_major"]

#: Adjusted R² values within this of the best are tied (common practice, no source).
ADJ_R2_TOLERANCE = 1e-4


@dataclass
class LambdaZFit:
    """Per-profile lambda-z fit results (1-D arrays over profiles) and the points used (2-D)."""

    lamz: np.ndarray
    intercept: np.ndarray  # ln C at t = 0
    r2: np.ndarray
    r2adj: np.ndarray
    corr: np.ndarray
    npoints: np.ndarray
    t_first: np.ndarray
    t_last: np.ndarray
    used: np.ndarray  # bool, same shape as the time array


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


def fit_lambda_z(t, c, candidate, manual, *, min_points=3, tol=ADJ_R2_TOLERANCE):
    """Fit lambda z for many profiles at once.

    Parameters
    ----------
    t, c : ndarray, shape (profiles, samples)
        Times (increasing along each row over the candidate points) and
        concentrations.
    candidate : ndarray of bool, same shape
        Points that may enter the fit (positive concentration, not excluded,
        in the allowed range).
    manual : ndarray of bool, shape (profiles,)
        True where ``candidate`` is a fixed window chosen by the user: all its
        points are used (at least 2), no search.
    min_points : int
        Fewest points of an automatic fit.
    tol : float
        Tie tolerance on adjusted R².

    Returns
    -------
    LambdaZFit
        NaN (and 0 points) for a profile with no qualifying fit, e.g. fewer
        than ``min_points`` candidates or no declining window.
    """
    fit = fit_lambda_z_samples_major(
        np.ascontiguousarray(t.T), np.ascontiguousarray(c.T), np.ascontiguousarray(candidate.T), manual,
        min_points=min_points, tol=tol)
    fit.used = np.ascontiguousarray(fit.used.T)
    return fit


def fit_lambda_z_samples_major(t, c, candidate, manual, *, min_points=3, tol=ADJ_R2_TOLERANCE):
    """:func:`fit_lambda_z` on samples x profiles arrays (``used`` comes back samples x profiles).

    The array engine works in this layout: per-profile values broadcast along
    the long axis and the running sums advance one contiguous row at a time.
    """
    N, P = t.shape
    rows = np.arange(P)
    has_cand = candidate.any(axis=0)
    last = N - 1 - np.argmax(candidate[::-1], axis=0)
    tref = np.where(has_cand, t[last, rows], 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        yref = np.where(has_cand, np.log(c[last, rows]), 0.0)

    # a sample no profile has as a candidate starts no window: rows lo:hi suffice
    any_row = candidate.any(axis=1)
    lo, hi = int(np.argmax(any_row)), N - int(np.argmax(any_row[::-1]))
    cand_t = candidate[lo:hi]
    q = _suffix_sums(t[lo:hi], c[lo:hi], cand_t, tref, yref)
    n, sx, sy, sxx, sxy, syy = (q[:, k] for k in range(6))
    with np.errstate(divide="ignore", invalid="ignore"):
        cxx = sxx - sx * sx / n
        cxy = sxy - sx * sy / n
        cyy = syy - sy * sy / n
        slope = cxy / cxx
        r2 = np.minimum(cxy * cxy / (cxx * cyy), 1.0)
        r2adj = 1.0 - (1.0 - r2) * (n - 1.0) / (n - 2.0)

    declining = slope < 0
    # automatic: suffix windows starting at a candidate, >= min_points, declining
    ok = cand_t & (n >= min_points) & declining & np.isfinite(r2adj)
    best = np.max(np.where(ok, r2adj, -np.inf), axis=0)
    qualifies = ok & (r2adj >= best - tol)
    start_auto = np.argmax(qualifies, axis=0)  # earliest start = most points (row in lo:hi)
    has_auto = qualifies.any(axis=0)
    # manual: the whole candidate set, from its first point
    start_manual = np.argmax(cand_t, axis=0)
    n_manual = n[start_manual, rows]
    has_manual = has_cand & (n_manual >= 2) & declining[start_manual, rows]

    start = np.where(manual, start_manual, start_auto)
    has = np.where(manual, has_manual, has_auto)

    def pick(a):  # a is (rows lo:hi) x profiles
        return np.where(has, a[start, rows], np.nan)

    b = pick(slope)
    npts = pick(n)
    mean_x = pick(sx) / npts
    mean_y = pick(sy) / npts
    intercept = yref + mean_y - b * mean_x - b * tref
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = np.where(has, np.sign(b) * np.sqrt(pick(r2)), np.nan)
    r2adj_out = pick(r2adj)
    r2adj_out = np.where(npts >= 3, r2adj_out, np.nan)
    used = np.zeros((N, P), dtype=bool)
    used[lo:hi] = cand_t & (np.arange(hi - lo)[:, None] >= start) & has
    return LambdaZFit(
        lamz=-b,
        intercept=np.where(has, intercept, np.nan),
        r2=pick(r2),
        r2adj=r2adj_out,
        corr=corr,
        npoints=np.where(has, npts, 0).astype(np.int64),
        t_first=np.where(has, t[start + lo, rows], np.nan),
        t_last=np.where(has, tref, np.nan),
        used=used,
    )
