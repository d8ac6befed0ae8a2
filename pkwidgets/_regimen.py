r"""Stage 5 of the engine: what the dosing regimen adds (IV, infusion, dosing interval, partial areas).

Areas to an arbitrary time x (the end of the dosing interval, the ends of a
partial area) are interpolated inside the data with the rule of their
segment (:func:`pkwidgets.auc.area_to`) and extrapolated with lambda z beyond
TLST:

.. math:: \mathrm{AUC}_{0-x} = \mathrm{AUC}_{0-t_{last}}
          + \frac{C_{last}}{\lambda_z}\left(1 - e^{-\lambda_z (x - t_{last})}\right),
          \quad x > t_{last}

(Gibaldi & Perrier, Pharmacokinetics, 2nd ed., 1982, from memory).  The
moment over the dosing interval (AUMCTAU) is found the same way: the running
moment to the sample before x plus the part of its segment
(:func:`pkwidgets.auc.moment_to`) inside the data, and beyond TLST

.. math:: \mathrm{AUMC}_{0-x} = \mathrm{AUMC}_{0-t_{last}}
          + \int_{t_{last}}^{x} t\,C_{last} e^{-\lambda_z (t - t_{last})}\,dt

in the closed form of :func:`pkwidgets.auc.exponential_moment`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._anchor import DoseTimePoint, pick
from ._exposure import Exposure
from ._sorting import SortedSamples
from ._terminal import TerminalPhase
from .auc import area_to, exponential_moment, moment_to

__all__ = ["RegimenValues", "regimen_values"]


@dataclass
class RegimenValues:
    """Regimen parameters by code, inputs of the derived parameters, and flags."""

    values: dict    # code -> (profiles,): C0, CMIN, CTROUGH, AUCTAU, AUMCTAU, partial areas
    inputs: dict    # name in parameters.DERIVE_INPUTS -> (profiles,)
    flags: dict     # flag name -> (profiles,) bool


def regimen_values(ordered: SortedSamples, exposure: Exposure, terminal: TerminalPhase, anchor: DoseTimePoint,
                   arrays, route: str, steady: bool) -> RegimenValues:
    """C0 (IV bolus), the infusion's half duration, steady-state values (when ``steady``) and partial areas.

    ``arrays`` is the chunk's :class:`pkwidgets._inputs.ProfileArrays` (dose,
    duration, tau, partial intervals).
    """
    has_pos, tau = exposure.measurable, arrays.tau
    dur = arrays.duration
    inputs = {"dose": arrays.dose, "tau": tau, "half_duration": np.where(np.isnan(dur), 0.0, dur / 2.0),
              "lambda_z_intercept": terminal.fit.intercept, "auc_to_first_sample": exposure.cum_auc[1]}
    values, flags = {}, {}
    if route == "iv-bolus":
        values["C0"] = np.where(has_pos, anchor.conc, np.nan)
    cum = _CumulativeArea(ordered, exposure, terminal.lamz)
    if steady:
        is_ss = ~np.isnan(tau)
        auctau, tau_extrap = cum.at(tau)
        values.update(AUCTAU=auctau, AUMCTAU=cum.moment_at(tau),
                      CMIN=np.where(has_pos & is_ss, anchor.interval_min, np.nan),
                      CTROUGH=np.where(is_ss, anchor.trough, np.nan))
        flags["tau_extrapolated"] = tau_extrap & is_ss
    extrapolated = np.zeros(tau.shape, dtype=bool)
    for name, start, end in arrays.partial:
        a_end, ext_end = cum.at(end)
        a_start, ext_start = cum.at(start)
        values[name] = a_end - a_start
        extrapolated |= ext_end | ext_start
    flags["partial_extrapolated"] = extrapolated
    return RegimenValues(values, inputs, flags)


class _CumulativeArea:
    """AUC and AUMC from dose time to any time x: interpolated inside the data, lambda-z beyond TLST."""

    def __init__(self, ordered: SortedSamples, exposure: Exposure, lamz):
        self.Ts, self.Vs, self.Us, self.A = ordered.time, ordered.value, ordered.usable, exposure.cum_auc
        self.Mm, self.AUMCLST = exposure.cum_aumc, exposure.aumclst
        self.is_log = np.concatenate([exposure.is_log, np.zeros((1, self.Ts.shape[1]), dtype=bool)], axis=0)
        self.TLST, self.CLST, self.AUCLST, self.LAMZ = exposure.tlst, exposure.clst, exposure.auclst, lamz

    def _segment(self, x):
        """Row k of the last usable sample at or before x, and its segment (t1, c1, t2, c2, is_log)."""
        Ts, Vs = self.Ts, self.Vs
        M = Ts.shape[0]
        with np.errstate(invalid="ignore"):
            k = np.maximum((self.Us & (Ts <= x)).sum(axis=0) - 1, 0)
        k1 = np.minimum(k + 1, M - 1)
        return k, (pick(Ts, k), pick(Vs, k), pick(Ts, k1), pick(Vs, k1), pick(self.is_log, k))

    def at(self, x):
        """Return (area, extrapolated) for x of shape (profiles,); NaN x gives NaN."""
        k, segment = self._segment(x)
        with np.errstate(invalid="ignore"):
            seg_area, _ = area_to(x, *segment)
            inside = pick(self.A, k) + seg_area
            extrap = x > self.TLST
            with np.errstate(over="ignore"):
                tail = self.AUCLST + self.CLST / self.LAMZ * -np.expm1(-self.LAMZ * (x - self.TLST))
        area = np.where(extrap, tail, inside)
        return np.where(np.isnan(x), np.nan, area), extrap

    def moment_at(self, x):
        """The first moment (AUMC) from dose time to x, shape (profiles,); NaN x gives NaN."""
        k, segment = self._segment(x)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            inside = pick(self.Mm, k) + moment_to(x, *segment)
            tail = self.AUMCLST + exponential_moment(self.TLST, self.CLST, self.LAMZ, x - self.TLST)
            moment = np.where(x > self.TLST, tail, inside)
        return np.where(np.isnan(x), np.nan, moment)
