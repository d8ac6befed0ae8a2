"""Experimental numba kernels for bench/design_speed.py only (numba is not a pkwidgets dependency).

Each kernel loops over profiles (``numba.prange``) and, inside, over one
profile's samples, with the engine's formulas (``pkwidgets/lambda_z.py``,
``pkwidgets/auc.py``), so that its results can be compared with the engine's
for equality and its speed with the engine's NumPy stages.
"""

from __future__ import annotations

import numpy as np


def numba_kernels(numba):
    """Compiled lambda-z search and lin-up/log-down areas, one profile per loop iteration (prange)."""
    return _lamz_kernel(numba), _areas_kernel(numba)


def _lamz_kernel(numba):
    """The engine's lambda-z rule (suffix windows, best adjusted R2, ties to most points) as a loop."""

    @numba.njit(parallel=True, cache=False)
    def lamz(t, c, cand, min_points, tol):
        M, P = t.shape
        out_l, out_r, out_n = np.full(P, np.nan), np.full(P, np.nan), np.zeros(P, np.int64)
        for p in numba.prange(P):
            last = -1
            for i in range(M - 1, -1, -1):
                if cand[i, p]:
                    last = i
                    break
            if last < 0:
                continue
            tref, yref = t[last, p], np.log(c[last, p])
            best = -np.inf
            for sweep in range(2):  # 1: best adjusted R2; 2: most points within tol of it
                n = sx = sy = sxx = sxy = syy = 0.0
                for i in range(last, -1, -1):
                    if not cand[i, p]:
                        continue
                    x, y = t[i, p] - tref, np.log(c[i, p]) - yref
                    n += 1.0
                    sx += x
                    sy += y
                    sxx += x * x
                    sxy += x * y
                    syy += y * y
                    if n < min_points:
                        continue
                    cxx, cxy, cyy = sxx - sx * sx / n, sxy - sx * sy / n, syy - sy * sy / n
                    slope = cxy / cxx
                    r2 = min(cxy * cxy / (cxx * cyy), 1.0)
                    r2adj = 1.0 - (1.0 - r2) * (n - 1.0) / (n - 2.0)
                    if not (slope < 0.0 and np.isfinite(r2adj)):
                        continue
                    if sweep == 0:
                        best = max(best, r2adj)
                    elif r2adj >= best - tol:
                        out_l[p], out_r[p], out_n[p] = -slope, r2adj, int(n)
        return out_l, out_r, out_n

    return lamz


def _areas_kernel(numba):
    """Lin-up/log-down AUC and AUMC to the last positive sample, in the engine's formulas (auc.py)."""

    @numba.njit(parallel=True, cache=False)
    def areas(t, c, i_last):
        M, P = t.shape
        auc, aumc = np.zeros(P), np.zeros(P)
        for p in numba.prange(P):
            a = m = 0.0
            for i in range(i_last[p]):
                t1, t2, c1, c2 = t[i, p], t[i + 1, p], c[i, p], c[i + 1, p]
                dt = t2 - t1
                if c2 < c1 and c2 > 0.0:
                    x = np.log1p((c1 - c2) / c2)
                    la = (c1 - c2) * dt / x
                    if abs(x) < 0.01:
                        g = 0.5 + x * (-1 / 3 + x * (1 / 8 + x * (-1 / 30 + x * (1 / 144 - x / 840))))
                    else:
                        g = (-np.expm1(-x) - x * np.exp(-x)) / (x * x)
                    a += la
                    m += t1 * la + c1 * dt * dt * g
                else:
                    a += 0.5 * dt * (c1 + c2)
                    m += 0.5 * dt * (t1 * c1 + t2 * c2)
            auc[p], aumc[p] = a, m
        return auc, aumc

    return areas


def whole_profile_kernel(numba):
    """CMAX, TMAX, TLST, AUCLST (lin-up/log-down), LAMZ, AUCIFO from raw profiles-major inputs in one pass.

    Covers only this benchmark's case (extravascular single dose, sorted times,
    a sample at dose time, BLQ rules before=zero / between=missing, automatic
    lambda z): a ceiling for what a compiled engine could reach, not an engine.
    """
    lamz_one = _lamz_one(numba)

    @numba.njit(parallel=True, cache=False)
    def whole(t, c, blq, tol):
        P, N = t.shape
        out = np.full((P, 6), np.nan)
        for p in numba.prange(P):
            first = -1
            for i in range(N):
                if not blq[p, i] and c[p, i] > 0.0:
                    first = i
                    break
            if first < 0:
                continue
            tt, vv = np.empty(N), np.empty(N)
            m, i_max, i_last = 0, 0, 0
            for i in range(N):
                if np.isnan(t[p, i]) or (blq[p, i] and i >= first) or (not blq[p, i] and np.isnan(c[p, i])):
                    continue
                tt[m], vv[m] = t[p, i], 0.0 if blq[p, i] else c[p, i]
                if vv[m] > vv[i_max]:
                    i_max = m
                if vv[m] > 0.0:
                    i_last = m
                m += 1
            auc = 0.0
            for i in range(i_last):
                t1, t2, c1, c2 = tt[i], tt[i + 1], vv[i], vv[i + 1]
                if c2 < c1 and c2 > 0.0:
                    auc += (c1 - c2) * (t2 - t1) / np.log1p((c1 - c2) / c2)
                else:
                    auc += 0.5 * (t2 - t1) * (c1 + c2)
            lam = lamz_one(tt, vv, i_max + 1, i_last, tol)
            out[p, 0], out[p, 1], out[p, 2], out[p, 3] = vv[i_max], tt[i_max], tt[i_last], auc
            out[p, 4], out[p, 5] = lam, auc + vv[i_last] / lam
        return out

    return whole


def _lamz_one(numba):
    @numba.njit(cache=False)
    def lamz_one(tt, vv, lo, last, tol):
        """Lambda z of one compacted profile from candidates lo..last (positive values)."""
        tref, yref = tt[last], np.log(vv[last])
        best, lam = -np.inf, np.nan
        for sweep in range(2):
            n = sx = sy = sxx = sxy = syy = 0.0
            for i in range(last, lo - 1, -1):
                if not vv[i] > 0.0:
                    continue
                x, y = tt[i] - tref, np.log(vv[i]) - yref
                n += 1.0
                sx += x
                sy += y
                sxx += x * x
                sxy += x * y
                syy += y * y
                if n < 3:
                    continue
                cxx, cxy, cyy = sxx - sx * sx / n, sxy - sx * sy / n, syy - sy * sy / n
                slope = cxy / cxx
                r2adj = 1.0 - (1.0 - min(cxy * cxy / (cxx * cyy), 1.0)) * (n - 1.0) / (n - 2.0)
                if not (slope < 0.0 and np.isfinite(r2adj)):
                    continue
                if sweep == 0:
                    best = max(best, r2adj)
                elif r2adj >= best - tol:
                    lam = -slope
        return lam

    return lamz_one
