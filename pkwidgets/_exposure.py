r"""Stage 3 of the engine: exposure at the observed samples, areas and moments.

CMAX, TMAX, CLST, TLST and TLAG are read from the sorted samples (the
dose-time point is never a peak or a last point); AUC and AUMC are running
sums of the segment areas of :mod:`pkwidgets.auc` [1]_:

.. math:: \mathrm{AUC}_{0-t_k} = \sum_{i<k} A_i, \qquad \mathrm{AUMC}_{0-t_k} = \sum_{i<k} M_i

References
----------
.. [1] Gibaldi M, Perrier D. Pharmacokinetics, 2nd ed. Marcel Dekker, 1982,
       Appendix D.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._anchor import pick
from ._rows import argmax_rows, first_true, last_true
from ._sorting import SortedSamples
from .auc import segment_areas, segment_is_log

__all__ = ["Exposure", "measure_exposure"]


@dataclass
class Exposure:
    """Peak, last point, lag and areas (1-D arrays over profiles unless noted)."""

    measurable: np.ndarray    # bool: the profile has a measured positive concentration
    positive: np.ndarray      # sorted rows x profiles: observed positive concentrations
    i_max: np.ndarray         # sorted row of CMAX
    i_last: np.ndarray        # sorted row of CLST
    i_first: np.ndarray       # sorted row of the first observed positive concentration (0 without one)
    cmax: np.ndarray
    tmax: np.ndarray
    clst: np.ndarray
    tlst: np.ndarray
    tlag: np.ndarray
    is_log: np.ndarray        # segments x profiles: the log rule is used
    cum_auc: np.ndarray       # sorted rows x profiles: AUC from dose time to each row
    cum_aumc: np.ndarray
    auclst: np.ndarray
    aumclst: np.ndarray
    aucall: np.ndarray


def measure_exposure(ordered: SortedSamples, measured, tau, route, method) -> Exposure:
    """CMAX/TMAX (within [0, tau] at steady state), CLST/TLST, TLAG, AUCLST, AUMCLST and AUCALL."""
    Ts, Vs = ordered.time, ordered.value
    obs = ordered.usable & ~ordered.added
    with np.errstate(invalid="ignore"):
        steady = ~np.isnan(tau)
        peak_pool = obs & ((Ts <= tau) | ~steady) if steady.any() else obs
        positive = obs & (Vs > 0)
    i_max = argmax_rows(np.where(peak_pool, Vs, -np.inf))
    # a profile needs one measured (not substituted) positive concentration
    has_pos = positive.any(axis=0) & measured.any(axis=0)
    cmax = np.where(has_pos, pick(Vs, i_max), np.nan)
    tmax = np.where(has_pos, pick(Ts, i_max), np.nan)
    i_last = last_true(positive)
    clst = np.where(has_pos, pick(Vs, i_last), np.nan)
    tlst = np.where(has_pos, pick(Ts, i_last), np.nan)
    i_first = first_true(positive)
    tlag = np.where(i_first > 0, pick(Ts, np.maximum(i_first - 1, 0)), 0.0)
    tlag = np.where(has_pos & (route == "extravascular"), tlag, np.nan)
    t_switch = np.zeros(Ts.shape[1]) if route == "iv-bolus" else tmax
    is_log, A, Mm = _running_areas(ordered, method, t_switch)
    auclst = np.where(has_pos, pick(A, i_last), np.nan)
    aumclst = np.where(has_pos, pick(Mm, i_last), np.nan)
    aucall = np.where(has_pos, pick(A, np.maximum(ordered.n_usable - 1, 0)), np.nan)
    return Exposure(has_pos, positive, i_max, i_last, i_first, cmax, tmax, clst, tlst, tlag, is_log, A, Mm,
                    auclst, aumclst, aucall)


def _running_areas(ordered: SortedSamples, method, t_switch):
    """Log-rule mask of each segment and the running AUC and AUMC down the sorted rows."""
    Ts, Vs = ordered.time, ordered.value
    t1, t2, c1, c2 = Ts[:-1], Ts[1:], Vs[:-1], Vs[1:]
    seg_ok = ordered.usable[1:]
    is_log = segment_is_log(t1, c1, c2, method, t_switch) & seg_ok
    a_seg, m_seg = segment_areas(t1, t2, c1, c2, is_log)
    return is_log, running_sum(np.where(seg_ok, a_seg, 0.0)), running_sum(np.where(seg_ok, m_seg, 0.0))


def running_sum(s):
    """``[0, s0, s0 + s1, ...]`` down axis 0: the additions of ``np.cumsum``, one row at a time."""
    out = np.empty((s.shape[0] + 1,) + s.shape[1:])
    out[0] = 0.0
    if s.shape[0]:
        out[1] = s[0]
    for i in range(1, s.shape[0]):
        np.add(out[i], s[i], out=out[i + 1])
    return out
