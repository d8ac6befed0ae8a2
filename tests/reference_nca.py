r"""A slow, loop-based reference NCA, written independently of the engine.

One profile at a time, in plain Python and NumPy, with ``scipy`` doing the
regression: it exists to check :func:`pkwidgets.nca_arrays` (the vectorised
path) and as the per-profile loop the benchmark in ``bench/nca_speed.py``
compares against.  It covers a single extravascular dose with the default
BLQ rules; it does not cover IV routes, steady state, partial areas or
manual lambda-z windows.

Sources
-------
- Areas: ``numpy.trapezoid`` (linear trapezoidal rule) for linear segments,
  and the log-trapezoidal formula for declining segments (Gibaldi M, Perrier
  D. Pharmacokinetics, 2nd ed., 1982, Appendix D [from memory]):
  :math:`A = \Delta t (c_1 - c_2)/\ln(c_1/c_2)`,
  :math:`M = \Delta t (t_1 c_1 - t_2 c_2)/\ln(c_1/c_2) - \Delta t^2 (c_2 - c_1)/\ln(c_1/c_2)^2`.
- Lambda z: ``scipy.stats.linregress`` of ln C on t (reference library)
  over each candidate terminal window (the last 3, 4, ... positive
  concentrations after CMAX); kept: the highest adjusted R²,
  :math:`1 - (1 - r^2)(n - 1)/(n - 2)`, among fits with a negative slope;
  fits within 1e-4 of the best count as tied and the one with the most
  points wins (common practice, no source).
- BLQ defaults (common practice, no source): BLQ before the first
  measurable concentration counts as 0, between measurable ones is dropped,
  after the last measurable one counts as 0.  A zero-time point (0, 0) is
  added when no usable sample was taken at the dose time.
- Extrapolation: AUCIFO = AUCLST + CLST/λz, AUMCIFO = AUMCLST + CLST·TLST/λz
  + CLST/λz², CL/F = Dose/AUCIFO, Vz/F = Dose/(λz·AUCIFO) (Gibaldi & Perrier
  [from memory]; CDISC PPTESTCD definitions).
"""

from __future__ import annotations

import decimal
import math

import numpy as np
from scipy import stats

__all__ = ["reference_profile", "reference_many", "REFERENCE_CODES"]

#: Codes the reference computes.
REFERENCE_CODES = (
    "CMAX", "TMAX", "CLST", "TLST", "TLAG", "AUCLST", "AUCALL", "AUMCLST",
    "LAMZ", "LAMZHL", "LAMZNPT", "LAMZLL", "LAMZUL", "R2", "R2ADJ", "CORRXY",
    "CLSTP", "AUCIFO", "AUCIFP", "AUCPEO", "AUMCIFO", "MRTEVLST", "MRTEVIFO",
    "CLFO", "VZFO", "LAMZSPN",
)
TIE = 1e-4
NAN = float("nan")


def _segment(t1, t2, c1, c2, log_down):
    """AUC and AUMC of one segment (explicit formulas, see module notes)."""
    if log_down and c1 > c2 > 0:
        # textbook log-trapezoid formulas (Gibaldi & Perrier), evaluated in 40-digit
        # decimal arithmetic so that the reference itself carries no cancellation error
        with decimal.localcontext() as ctx:
            ctx.prec = 40
            T1, T2, C1, C2 = (decimal.Decimal(float(v)) for v in (t1, t2, c1, c2))
            dt = T2 - T1
            lr = (C1 / C2).ln()
            auc = dt * (C1 - C2) / lr
            aumc = dt * (T1 * C1 - T2 * C2) / lr - dt * dt * (C2 - C1) / (lr * lr)
            return float(auc), float(aumc)
    return None  # linear: done with numpy.trapezoid by the caller


def _area(ts, cs, log_down):
    """AUC and AUMC over consecutive points: numpy.trapezoid on linear runs, formulas on log segments."""
    auc = aumc = 0.0
    for i in range(len(ts) - 1):
        seg = _segment(ts[i], ts[i + 1], cs[i], cs[i + 1], log_down)
        if seg is None:
            x = ts[i:i + 2]
            y = cs[i:i + 2]
            seg = (float(np.trapezoid(y, x)), float(np.trapezoid(x * y, x)))
        auc += seg[0]
        aumc += seg[1]
    return auc, aumc


def _lambda_z(ts, cs):
    """Best terminal window by adjusted R², with scipy.stats.linregress on every suffix of >= 3 points."""
    best = None
    fits = []
    for k in range(3, len(ts) + 1):
        x = ts[-k:]
        y = np.log(cs[-k:])
        if np.all(y == y[0]):
            continue  # flat: slope exactly 0 (linregress can return a rounding-level negative slope)
        fit = stats.linregress(x, y)
        if not fit.slope < 0:
            continue
        r2 = fit.rvalue ** 2
        adj = 1.0 - (1.0 - r2) * (k - 1) / (k - 2)
        fits.append((k, fit, r2, adj))
        if best is None or adj > best:
            best = adj
    if not fits:
        return None
    tied = [f for f in fits if f[3] >= best - TIE]
    return max(tied, key=lambda f: f[0])


def reference_profile(time, conc, blq=None, *, dose=None, auc_method="linear"):
    """NCA of one extravascular single-dose profile, the slow way.

    Parameters
    ----------
    time, conc : sequence of float
        Sampling times and concentrations; NaN time = padding, NaN conc
        (not BLQ) = missing sample.  Any order.
    blq : sequence of bool, optional
        True where the sample is below the LLOQ.
    dose : float, optional
    auc_method : {"linear", "lin-up/log-down"}

    Returns
    -------
    values : dict of str to float
        PPTESTCD -> value (NaN where not computable).
    lz_times : list of float
        Sampling times used in the lambda-z fit.
    """
    if auc_method not in ("linear", "lin-up/log-down"):
        raise ValueError(f"the reference covers 'linear' and 'lin-up/log-down', not {auc_method!r}")
    log_down = auc_method == "lin-up/log-down"
    time = np.asarray(time, dtype=float)
    conc = np.asarray(conc, dtype=float)
    blq = np.zeros(time.shape, bool) if blq is None else np.asarray(blq, dtype=bool)
    dose = NAN if dose is None else float(dose)

    # samples: (time, value, is_blq), after dose, not missing
    samples = []
    for t, c, b in zip(time, conc, blq):
        if math.isnan(t) or t < 0:
            continue
        if b:
            samples.append((t, None, True))
        elif not math.isnan(c):
            samples.append((t, c, False))
    samples.sort()
    measured = [t for t, c, b in samples if not b and c > 0]
    out = dict.fromkeys(REFERENCE_CODES, NAN)
    out["LAMZNPT"] = NAN
    if not measured:
        return out, []
    first, last = measured[0], measured[-1]
    points = []  # (time, value)
    for t, c, b in samples:
        if b:
            if t < first or t > last:
                points.append((t, 0.0))   # before first / after last measurable: zero
            continue                       # between measurable: dropped
        points.append((t, c))
    added = not any(t == 0 for t, _ in points)
    if added:
        points.insert(0, (0.0, 0.0))
    ts = np.array([p[0] for p in points])
    cs = np.array([p[1] for p in points])
    obs = np.ones(len(ts), bool)
    obs[0] = not added

    i_max = max(range(len(ts)), key=lambda i: (obs[i], cs[i] if obs[i] else -1.0, -i))
    pos = [i for i in range(len(ts)) if obs[i] and cs[i] > 0]
    i_last, i_first = pos[-1], pos[0]
    out.update(CMAX=cs[i_max], TMAX=ts[i_max], CLST=cs[i_last], TLST=ts[i_last],
               TLAG=ts[i_first - 1] if i_first > 0 else 0.0)
    auclst, aumclst = _area(ts[:i_last + 1], cs[:i_last + 1], log_down)
    aucall, _ = _area(ts, cs, log_down)
    out.update(AUCLST=auclst, AUMCLST=aumclst, AUCALL=aucall, MRTEVLST=aumclst / auclst)

    cand = [i for i in pos if i_max < i <= i_last]
    best = _lambda_z(ts[cand], cs[cand])
    if best is None:
        out["LAMZNPT"] = 0.0
        return out, []
    k, fit, r2, adj = best
    lz = -fit.slope
    window = ts[cand][-k:]
    clst, tlst = out["CLST"], out["TLST"]
    clstp = math.exp(fit.intercept - lz * tlst)
    aucifo = auclst + clst / lz
    aucifp = auclst + clstp / lz
    aumcifo = aumclst + clst * tlst / lz + clst / lz ** 2
    out.update(
        LAMZ=lz, LAMZHL=math.log(2) / lz, LAMZNPT=float(k), LAMZLL=window[0], LAMZUL=window[-1],
        R2=r2, R2ADJ=adj, CORRXY=fit.rvalue, CLSTP=clstp, AUCIFO=aucifo, AUCIFP=aucifp,
        AUCPEO=100.0 * (aucifo - auclst) / aucifo, AUMCIFO=aumcifo, MRTEVIFO=aumcifo / aucifo,
        CLFO=dose / aucifo, VZFO=dose / (lz * aucifo),
        LAMZSPN=(window[-1] - window[0]) * lz / math.log(2),
    )
    return out, [float(x) for x in window]


def reference_many(time, conc, blq=None, *, dose=None, auc_method="linear"):
    """Loop :func:`reference_profile` over the rows of 2-D arrays.

    Returns
    -------
    values : dict of str to ndarray
        PPTESTCD -> 1-D array over profiles.
    lz_times : list of list of float
    """
    time = np.asarray(time, dtype=float)
    conc = np.asarray(conc, dtype=float)
    P = time.shape[0]
    blq = np.zeros(time.shape, bool) if blq is None else np.asarray(blq, dtype=bool)
    dose = np.broadcast_to(np.asarray(np.nan if dose is None else dose, dtype=float), (P,))
    values = {k: np.full(P, np.nan) for k in REFERENCE_CODES}
    lz = []
    for p in range(P):
        v, used = reference_profile(time[p], conc[p], blq[p], dose=dose[p], auc_method=auc_method)
        for k in REFERENCE_CODES:
            values[k][p] = v[k]
        lz.append(used)
    return values, lz
