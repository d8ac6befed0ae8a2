r"""The model curve of a :class:`~pkwidgets.design_models.CompartmentModel` and the exact values NCA estimates.

A :class:`CompartmentModel` is a one- or two-compartment model with linear
elimination, dosed by IV bolus, constant-rate infusion or first-order
absorption (optional lag time), once or repeatedly every ``tau``
(superposition; the observed dose is the last one and no dose follows it).
Between-subject variability is log-normal; residual error is proportional
and additive, and observations below the LLOQ are censored.

For every virtual subject the quantities NCA estimates are known exactly
from the model: :func:`exact_values` gives AUC to infinity, AUC up to any
time, AUC over the dosing interval, the true CMAX and TMAX and the terminal
half-life.

Notes
-----
The unit impulse response of the disposition is a sum of exponentials
:math:`h(t) = \sum_i a_i e^{-\lambda_i t}` [1]_: one compartment,
:math:`a = 1/V`, :math:`\lambda = CL/V`; two compartments, with
:math:`k_{10} = CL/V`, :math:`k_{12} = Q/V`, :math:`k_{21} = Q/V_2`,

.. math::
    \alpha, \beta = \tfrac12\Big[(k_{10}+k_{12}+k_{21}) \pm
        \sqrt{(k_{10}+k_{12}+k_{21})^2 - 4 k_{10} k_{21}}\Big], \quad
    a_\alpha = \frac{\alpha - k_{21}}{V(\alpha - \beta)}, \quad
    a_\beta = \frac{k_{21} - \beta}{V(\alpha - \beta)}

(checked against ``scipy.integrate.solve_ivp`` of the ODEs in the tests).
Doses given every :math:`\tau` before the observed one add, per
exponential, :math:`\sum_{j=1}^{n-1} e^{-\mu j\tau}` (a geometric series;
:math:`1/(e^{\mu\tau}-1)` at steady state) [1]_.  All curves and their
integrals are closed forms; TMAX is a closed form for one compartment
(:math:`t_{max} = t_{lag} + \ln(k_a S_{k_a} / (k S_k))/(k_a - k)`, with
:math:`S_\mu = \sum_{j=0}^{n-1} e^{-\mu j \tau}`, which is
:math:`\ln(k_a/k)/(k_a-k)` for one dose) and a bracketed numerical search
for two compartments (:func:`true_peak`).

References
----------
.. [1] Gibaldi M, Perrier D. Pharmacokinetics, 2nd ed. Marcel Dekker, 1982,
       ch. 1-3 (one- and two-compartment models, multiple dosing) (from memory).
"""

from __future__ import annotations

import math

import numpy as np

from .design_models import CompartmentModel

__all__ = ["disposition", "concentration", "cumulative_auc", "true_peak", "exact_values"]

#: ka closer than this (relative) to a disposition rate constant is moved this far away: the closed
#: forms have a removable singularity at ka = lambda (the curve changes by less than 1e-6 relative).
_KA_GAP = 1e-6
_LN2 = math.log(2.0)


def disposition(p: dict):
    """Unit impulse response coefficients ``a`` and exponents ``lam``, each (n, compartments).

    Exponents are in decreasing order (alpha, beta).
    """
    if "q" not in p:
        return (1.0 / p["v"])[:, None], (p["cl"] / p["v"])[:, None]
    k10, k12, k21 = p["cl"] / p["v"], p["q"] / p["v"], p["q"] / p["v2"]
    s = k10 + k12 + k21
    alpha = 0.5 * (s + np.sqrt(s * s - 4.0 * k10 * k21))
    beta = k10 * k21 / alpha  # alpha * beta = k10 k21: no cancellation in the small root
    a_alpha = (alpha - k21) / (p["v"] * (alpha - beta))
    a_beta = (k21 - beta) / (p["v"] * (alpha - beta))
    return np.stack([a_alpha, a_beta], axis=1), np.stack([alpha, beta], axis=1)


class _Curve:
    """Per-subject constants of the model curve; arrays are (n, 1) or (n, m) to broadcast over times."""

    def __init__(self, model, p):
        self.route, self.lag = model.route, 0.0
        self.a, self.lam = disposition(p)
        self.dose = (p["f"] * model.dose)[:, None] if "f" in p else model.dose
        tau = model.tau if model.tau is not None and model.doses != 1 else None
        self.tau, self.n_doses = tau, (math.inf if model.steady_state else model.doses)
        if model.route == "iv-infusion":
            self.T = p["duration"][:, None]
        if model.route == "extravascular":
            ka = p["ka"][:, None]
            for i in range(self.lam.shape[1]):  # removable singularity at ka = lambda
                lam = self.lam[:, i:i + 1]
                close = np.abs(ka - lam) <= _KA_GAP * lam
                ka = np.where(close, lam * np.where(ka >= lam, 1 + 2 * _KA_GAP, 1 - 2 * _KA_GAP), ka)
            self.ka, self.lag = ka, p["lag"][:, None]

    def S(self, mu):
        r""":math:`\sum_{j=0}^{n-1} e^{-\mu j\tau}` (1 for a single dose)."""
        if self.tau is None:
            return np.ones_like(mu)
        top = 1.0 if math.isinf(self.n_doses) else -np.expm1(-mu * self.n_doses * self.tau)
        return top / -np.expm1(-mu * self.tau)

    def Q(self, mu):
        r""":math:`\sum_{j=0}^{n-2} e^{-\mu j\tau}` (earlier doses, one interval back; 0 for a single dose)."""
        if self.tau is None:
            return np.zeros_like(mu)
        top = 1.0 if math.isinf(self.n_doses) else -np.expm1(-mu * (self.n_doses - 1) * self.tau)
        return top / -np.expm1(-mu * self.tau)


def concentration(model: CompartmentModel, p: dict, t) -> np.ndarray:
    r"""Model concentration of each subject at times ``t`` (after the observed dose).

    Parameters
    ----------
    model : CompartmentModel
    p : dict
        Subject parameters from :func:`draw_subjects` (arrays of length n).
    t : array_like, shape (N,) or (n, N)
        Times >= 0.

    Returns
    -------
    ndarray, shape (n, N)

    Notes
    -----
    With :math:`h(t)=\sum a_i e^{-\lambda_i t}`, :math:`S_\mu` and
    :math:`Q_\mu` the sums over doses (:class:`_Curve`), :math:`D` the
    bioavailable dose and :math:`s = t - t_{lag}`:

    .. math::
        C_{bolus} = D\sum_i a_i S_{\lambda_i} e^{-\lambda_i t} \qquad
        C_{inf} = \frac{D}{T}\sum_i \frac{a_i}{\lambda_i}\Big[(1-e^{-\lambda_i \min(t,T)})
            e^{-\lambda_i (t-T)^+} + (e^{-\lambda_i(\tau-T)} - e^{-\lambda_i\tau})
            Q_{\lambda_i} e^{-\lambda_i t}\Big]

    .. math::
        C_{ev} = D k_a \sum_i \frac{a_i}{k_a-\lambda_i}\Big[\mathbb 1_{s\ge0}
            (e^{-\lambda_i s}-e^{-k_a s}) + Q_{\lambda_i}e^{-\lambda_i(s+\tau)} - Q_{k_a}e^{-k_a(s+\tau)}\Big]
    """
    c = _Curve(model, p)
    t = np.asarray(t, dtype=np.float64)
    t = t[None, :] if t.ndim == 1 else t
    out = None
    for i in range(c.a.shape[1]):
        term = _term(c, c.a[:, i:i + 1], c.lam[:, i:i + 1], t)
        out = term if out is None else np.add(out, term, out=out if out.shape == term.shape else None)
    shape = (c.a.shape[0], t.shape[1])
    return out if out.shape == shape else np.broadcast_to(out, shape).copy()


def _term(c, a, lam, t):
    if c.route == "iv-bolus":
        return _scaled_exp(c.dose * a * c.S(lam), lam, t)
    if c.route == "iv-infusion":
        T = c.T
        m = np.minimum(t, T)
        single = -np.expm1(-lam * m) * np.exp(-lam * (t - m))
        if c.tau is not None:
            single += _scaled_exp((np.exp(-lam * (c.tau - T)) - np.exp(-lam * c.tau)) * c.Q(lam), lam, t)
        return (c.dose / T * a / lam) * single
    ka = c.ka
    s = t - c.lag if np.any(c.lag) else t
    if np.any(c.lag):
        sp = np.maximum(s, 0.0)
        single = np.where(s >= 0, np.exp(-lam * sp) - np.exp(-ka * sp), 0.0)
    else:  # t >= 0: two exponentials, computed in place (the bulk of a simulation's time)
        single = _scaled_exp(1.0, lam, t)
        single -= _scaled_exp(1.0, ka, t)
    if c.tau is not None:
        single += _scaled_exp(c.Q(lam), lam, s + c.tau)
        single -= _scaled_exp(c.Q(ka), ka, s + c.tau)
    single *= c.dose * ka * a / (ka - lam)
    return single


def _scaled_exp(scale, rate, t):
    """``scale * exp(-rate * t)`` broadcast to (subjects, times), with one temporary."""
    out = np.multiply(-rate, t)
    np.exp(out, out=out)
    if not (np.ndim(scale) == 0 and scale == 1.0):
        out *= scale
    return out


def cumulative_auc(model: CompartmentModel, p: dict, t) -> np.ndarray:
    r"""Exact :math:`\int_0^t C(u)\,du` of each subject's curve; ``t = inf`` gives AUC to infinity.

    Parameters
    ----------
    t : array_like, shape (N,) or (n, N)
        Times >= 0 (``np.inf`` allowed).

    Returns
    -------
    ndarray, shape (n, N)

    Notes
    -----
    Term by term integrals of :func:`concentration`, with
    :math:`E(x) = 1 - e^{-x}`:
    bolus :math:`D a S_\lambda E(\lambda t)/\lambda`; infusion
    :math:`\frac{D a}{T\lambda}[m - E(\lambda m)/\lambda + E(\lambda m)E(\lambda(t-m))/\lambda]`,
    :math:`m=\min(t,T)`, plus the earlier doses; extravascular
    :math:`\frac{D k_a a}{k_a-\lambda}[E(\lambda s^+)/\lambda - E(k_a s^+)/k_a]` plus the earlier
    doses.  At :math:`t=\infty` the single-dose parts sum to
    :math:`F\cdot Dose \sum_i a_i/\lambda_i = F\cdot Dose/CL`.
    """
    c = _Curve(model, p)
    t = np.asarray(t, dtype=np.float64)
    t = t[None, :] if t.ndim == 1 else t
    out = 0.0
    for i in range(c.a.shape[1]):
        a, lam = c.a[:, i:i + 1], c.lam[:, i:i + 1]
        out = out + _term_integral(c, a, lam, t)
    return np.broadcast_to(out, np.broadcast_shapes(np.shape(out), (c.a.shape[0], t.shape[1]))).copy()


def _E(x):
    return -np.expm1(-x)


def _term_integral(c, a, lam, t):
    with np.errstate(invalid="ignore"):  # inf - inf where t and T are both infinite: not reached (T finite)
        if c.route == "iv-bolus":
            return (c.dose * a * c.S(lam) / lam) * _E(lam * t)
        if c.route == "iv-infusion":
            T = c.T
            m = np.minimum(t, T)
            single = m - _E(lam * m) / lam + _E(lam * m) * _E(lam * (t - m)) / lam
            if c.tau is not None:
                earlier = (np.exp(-lam * (c.tau - T)) - np.exp(-lam * c.tau)) * c.Q(lam)
                single = single + earlier * _E(lam * t) / lam
            return (c.dose / T * a / lam) * single
        ka = c.ka
        sp = np.maximum(t - c.lag, 0.0)
        single = _E(lam * sp) / lam - _E(ka * sp) / ka
        if c.tau is not None:
            back = c.tau - c.lag  # earlier doses, seen from time 0
            single = single + (c.Q(lam) * np.exp(-lam * back) * _E(lam * t) / lam
                               - c.Q(ka) * np.exp(-ka * back) * _E(ka * t) / ka)
        return (c.dose * ka * a / (ka - lam)) * single


def true_peak(model: CompartmentModel, p: dict):
    r"""True CMAX and TMAX of each subject's curve.

    Over :math:`[0, \tau]` when the model has ``tau`` (as the engine takes CMAX
    within the dosing interval), else over :math:`t \ge 0`.

    Returns
    -------
    cmax, tmax : ndarray (n,)

    Notes
    -----
    IV bolus: TMAX = 0; infusion: TMAX = T (every exponential term rises
    during the infusion and falls after it).  Extravascular: each term
    :math:`w_i(S_{\lambda_i} e^{-\lambda_i s} - S_{k_a} e^{-k_a s})` (positive
    weight) peaks once, at

    .. math:: s_i = \frac{\ln\big(k_a S_{k_a} / (\lambda_i S_{\lambda_i})\big)}{k_a - \lambda_i}

    (for one dose :math:`\ln(k_a/k)/(k_a - k)`, Gibaldi & Perrier, from
    memory).  One compartment: TMAX = lag + :math:`s_1`, closed form.  Two
    compartments: the sum rises before the earliest :math:`s_i` and falls
    after the latest, so its peak lies between them; it is found on a
    17-point grid refined by ``scipy.optimize.elementwise.find_minimum``
    (Chandrupatla's bracketing method), to about 1e-8 relative in time.
    """
    c = _Curve(model, p)
    n = c.a.shape[0]
    if model.route == "iv-bolus":
        tmax = np.zeros(n)
    elif model.route == "iv-infusion":
        tmax = c.T[:, 0].copy()
    else:
        ka, lam, lag = c.ka, c.lam, np.broadcast_to(c.lag, (n, 1))[:, 0]
        with np.errstate(divide="ignore", invalid="ignore"):
            s_i = np.log(ka * c.S(ka) / (lam * c.S(lam))) / (ka - lam)
        cap = np.inf if model.tau is None else model.tau - lag
        if lam.shape[1] == 1:
            s = s_i[:, 0]
        else:
            s = _two_term_peak(c, np.min(s_i, axis=1), np.minimum(np.max(s_i, axis=1), cap))
        tmax = lag + np.minimum(s, cap)
    cmax = concentration(model, p, tmax[:, None])[:, 0]
    return cmax, tmax


def _oral_two_terms(s, w1, w2, l1, l2, s1, s2, ka, ska):
    """Minus the extravascular two-exponential curve for s >= 0 (elementwise in every argument)."""
    return -(w1 * (s1 * np.exp(-l1 * s) - ska * np.exp(-ka * s)) + w2 * (s2 * np.exp(-l2 * s) - ska * np.exp(-ka * s)))


def _two_term_peak(c, lo, hi, points=17):
    from scipy.optimize.elementwise import find_minimum

    ka, lam = c.ka[:, 0], c.lam
    w = c.dose * c.ka * c.a / (c.ka - lam)
    w = np.broadcast_to(w, lam.shape)
    sl, ska = c.S(lam), c.S(c.ka)[:, 0]
    args = (w[:, 0], w[:, 1], lam[:, 0], lam[:, 1], sl[:, 0], sl[:, 1], ka, ska)
    hi = np.maximum(hi, lo)
    grid = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, points)
    y = _oral_two_terms(grid, *(a[:, None] for a in args))
    j = np.argmin(y, axis=1)
    best = grid[np.arange(lo.size), j]
    inner = np.flatnonzero((j > 0) & (j < points - 1))
    if inner.size:
        g, ji = grid[inner], j[inner]
        r = np.arange(inner.size)
        res = find_minimum(_oral_two_terms, (g[r, ji - 1], g[r, ji], g[r, ji + 1]),
                           args=tuple(a[inner] for a in args), tolerances=dict(xrtol=1e-12, xatol=1e-14))
        best[inner] = np.where(res.success, res.x, best[inner])
    return best


def exact_values(model: CompartmentModel, p: dict, t_last=None) -> dict:
    r"""The values NCA estimates, exact from the model, per subject.

    Parameters
    ----------
    model : CompartmentModel
    p : dict
        Subject parameters (:func:`draw_subjects`).
    t_last : array_like (n,), optional
        Each subject's last measurable sampling time: gives ``AUCLST``, the
        exact AUC over the observed window.

    Returns
    -------
    dict of PPTESTCD code to ndarray (n,)
        ``AUCIFO``: :math:`\int_0^\infty C` after the observed dose (for one
        dose :math:`F\cdot Dose/CL`); ``AUCLST``: :math:`\int_0^{t_{last}} C`;
        ``AUCTAU``: :math:`\int_0^\tau C` (when the model has ``tau``; at
        steady state :math:`F\cdot Dose/CL`); ``CMAX``, ``TMAX``
        (:func:`true_peak`); ``LAMZHL``: :math:`\ln 2/\lambda_{min}`, the
        half-life of the slowest exponential of the curve (:math:`k_a` when
        absorption is slower than elimination, "flip-flop").
    """
    ends = [np.inf] + ([model.tau] if model.tau is not None else [])
    areas = cumulative_auc(model, p, np.array(ends))
    out = {"AUCIFO": areas[:, 0]}
    if model.tau is not None:
        out["AUCTAU"] = areas[:, 1]
    if t_last is not None:
        tl = np.asarray(t_last, dtype=np.float64)
        ok = np.isfinite(tl)
        auc = np.full(tl.shape, np.nan)
        if ok.any():
            sub = {k: v[ok] for k, v in p.items()}
            auc[ok] = cumulative_auc(model, sub, tl[ok][:, None])[:, 0]
        out["AUCLST"] = auc
    out["CMAX"], out["TMAX"] = true_peak(model, p)
    _, lam = disposition(p)
    slowest = lam.min(axis=1)
    if model.route == "extravascular":
        slowest = np.minimum(slowest, _Curve(model, p).ka[:, 0])
    out["LAMZHL"] = _LN2 / slowest
    return out
