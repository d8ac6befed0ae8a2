r"""Stage 2 of the engine: the concentration at dose time.

Every profile's areas start at dose time (t = 0).  Where no usable sample
stands there, one is added:

- extravascular or infusion, single dose: 0;
- with a dosing interval tau: the latest pre-dose sample taken within
  ``predose_window`` x tau before dose time stands at dose time; without one,
  CMIN of the interval, or 0 when the interval follows the first dose
  (``first_dose``: nothing was given before it);
- IV bolus: C0, back-extrapolated log-linearly from the first two post-dose
  samples when they decline, else the first observed concentration; a sample
  at dose time is then a pre-dose sample and is not used.

.. math:: C_0 = \exp\Big(\ln c_1 - \frac{\ln c_2 - \ln c_1}{t_2 - t_1} t_1\Big)

(log-linear back-extrapolation; Gibaldi & Perrier, Pharmacokinetics, 2nd ed.,
1982, from memory).  Arrays are samples x profiles.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._classify import ChunkSamples, ClassifiedSamples, rule_value
from ._rows import argmax_rows
from .qc import SampleStatus

__all__ = ["DoseTimePoint", "anchor_at_dose_time", "pick"]


@dataclass
class DoseTimePoint:
    """The point at dose time of each profile (1-D arrays over profiles unless noted)."""

    conc: np.ndarray            # concentration used at dose time (C0 for a bolus)
    added: np.ndarray           # bool: the point is added (no usable sample at dose time)
    trough: np.ndarray          # observed pre-dose concentration (sample at dose time, else before it)
    interval_min: np.ndarray    # smallest usable concentration within [0, tau]; NaN without one
    usable: np.ndarray          # samples x profiles: samples that enter the areas after anchoring
    flags: dict = field(default_factory=dict)


def pick(a, idx):
    """``a[idx[p], p]`` for every profile p of a samples x profiles array (a flat take where ``a`` is contiguous)."""
    cols = np.arange(a.shape[1])
    if a.flags.c_contiguous:
        return a.reshape(-1).take(idx * a.shape[1] + cols)
    return a[idx, cols]


def anchor_at_dose_time(samples: ChunkSamples, classified: ClassifiedSamples, tau, route, rules,
                        predose_window=0.1, first_dose=None) -> DoseTimePoint:
    """Find or add the point at dose time; updates ``classified.status`` of the samples it uses or drops.

    At steady state only a pre-dose sample taken at most ``predose_window`` x
    tau before the dose can stand at dose time; earlier ones get the status
    ``PREDOSE_OUTSIDE_WINDOW``.
    """
    t, value, usable = samples.time, classified.value, classified.usable
    at0 = usable & (t == 0)
    has0 = at0.any(axis=0)
    with np.errstate(invalid="ignore"):
        too_early = classified.before_dose & ~np.isnan(tau) & (t < -predose_window * tau)
    classified.status[too_early] = SampleStatus.PREDOSE_OUTSIDE_WINDOW
    pre_vals, i_pre, has_pre = _latest_predose(samples, classified, rules.before, ~too_early)
    trough = np.where(has0, np.max(np.where(at0, value, -np.inf), axis=0),
                      np.where(has_pre, pick(pre_vals, i_pre), np.nan))
    with np.errstate(invalid="ignore"):
        in_tau = usable & (t <= tau)
    cmin_tau = np.min(np.where(in_tau, value, np.inf), axis=0)
    cmin_tau = np.where(np.isfinite(cmin_tau), cmin_tau, np.nan)
    if route == "iv-bolus":
        classified.status[at0] = SampleStatus.BOLUS_PREDOSE
        usable = usable & ~at0
        c0, declining = _bolus_c0(t.T, value.T, usable.T)
        flags = {"c0_extrapolated": declining, "c0_first_observed": ~declining & ~np.isnan(c0)}
        return DoseTimePoint(c0, np.ones(t.shape[1], dtype=bool), trough, cmin_tau, usable, flags)
    first = np.zeros(t.shape[1], dtype=bool) if first_dose is None else first_dose
    is_ss = ~np.isnan(tau)
    need0 = ~has0
    # with tau: the pre-dose sample stands at dose time; else CMIN of the interval, or 0 after a first dose
    # (nothing was given before it)
    shifted = need0 & is_ss & has_pre
    zero = need0 & (~is_ss | (first & ~has_pre))
    c0 = np.where(shifted, trough, np.where(zero | ~is_ss, 0.0, cmin_tau))
    cmin_tau = np.where(shifted, np.fmin(cmin_tau, trough), cmin_tau)
    cmin_tau = np.where(zero & is_ss, 0.0, cmin_tau)
    flags = {"time0_added": zero, "predose_shifted": shifted, "predose_imputed": need0 & is_ss & ~has_pre & ~first}
    cols = np.flatnonzero(shifted)
    classified.status[i_pre[cols], cols] = SampleStatus.USED
    return DoseTimePoint(c0, need0, trough, cmin_tau, usable, flags)


def _latest_predose(samples, classified, before_rule, allowed):
    """Values of the pre-dose samples (BLQ read by the 'before' rule), the row of the latest, whether any."""
    before = classified.before_dose & allowed
    before_blq = before & samples.blq
    pre_vals = np.where(before_blq, rule_value(before_rule, samples.lloq, before_blq, "before"), samples.conc)
    pre = before & ~np.isnan(pre_vals)
    i_pre = argmax_rows(np.where(pre, samples.time, -np.inf))
    return pre_vals, i_pre, pre.any(axis=0)


def _bolus_c0(t, value, usable):
    """Back-extrapolated C0 from the first two post-dose samples (log-linear) when they decline.

    Arrays are profiles x samples here (one argsort along each short row).
    """
    key = np.where(usable & (t > 0), t, np.inf)
    o = np.argsort(key, axis=1, kind="stable")[:, :2]
    t12 = np.take_along_axis(t, o, axis=1)
    c12 = np.take_along_axis(value, o, axis=1)
    ok = np.take_along_axis(usable & (t > 0), o, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        declining = ok[:, 1] & (c12[:, 1] < c12[:, 0]) & (c12[:, 1] > 0)
        slope = (np.log(c12[:, 1]) - np.log(c12[:, 0])) / (t12[:, 1] - t12[:, 0])
        back = np.exp(np.log(c12[:, 0]) - slope * t12[:, 0])
    first = np.where(ok[:, 0], c12[:, 0], np.nan)
    return np.where(declining, back, first), declining
