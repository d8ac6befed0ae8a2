r"""Stage 4 of the engine: the terminal phase (lambda z).

Candidates for the fit are the observed positive concentrations not excluded
by hand: after CMAX up to TLST for the automatic search (from CMAX itself for
an IV bolus), or those inside the window given (ends included, to 1e-9
relative).  :mod:`pkwidgets.lambda_z` chooses the window and fits

.. math:: \ln C = a - \lambda_z t

by least squares over it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._exposure import Exposure
from ._sorting import SortedSamples
from scipy import stats

from .lambda_z import LambdaZFit, fit_lambda_z

__all__ = ["TerminalPhase", "fit_terminal_phase", "COMPARISON_RULE"]

#: The rule each automatic rule is checked against for the "terminal phase ambiguous" flag.
COMPARISON_RULE = {"adjusted-r2": "tail-extension"}


@dataclass
class TerminalPhase:
    """The lambda-z fit of each profile."""

    fit: LambdaZFit         # per-profile fit; ``used`` is sorted rows x profiles
    lamz: np.ndarray        # lambda z, NaN without a measurable concentration or a fit
    manual: np.ndarray      # bool: the window was given by hand
    margin: np.ndarray      # half-width of the 95 % t interval of lambda z (NaN below 3 points)
    lamz_other: np.ndarray  # lambda z of the comparison rule (automatic profiles; NaN for hand windows)
    first_time: np.ndarray  # time of the first observed positive concentration


def fit_terminal_phase(ordered: SortedSamples, exposure: Exposure, window_start, window_end,
                       route, rule="tail-extension") -> TerminalPhase:
    r"""Candidate points per profile (automatic or by window), the lambda-z fit, its 95 % margin.

    The margin is :math:`t_{0.975,\,n-2}\,SE(\lambda_z)` (the t interval of a
    least-squares slope; :mod:`pkwidgets.lambda_z_bounds`).  The same
    candidates are also fitted by a second rule (:data:`COMPARISON_RULE`,
    otherwise the adjusted-R² search) so that a disagreement can be flagged.
    """
    Ts, Xs, positive = ordered.time, ordered.excluded, exposure.positive
    rows = np.arange(Ts.shape[0])[:, None]
    manual = ~np.isnan(window_start)
    after_peak = rows >= exposure.i_max + (0 if route == "iv-bolus" else 1)
    kept = positive & ~Xs
    candidate = kept & after_peak & (rows <= exposure.i_last)
    if manual.any():  # windows given by hand: their candidates replace the automatic ones
        with np.errstate(invalid="ignore"):
            eps = 1e-9 * np.maximum(1.0, np.abs(window_end))
            cand_man = kept & (Ts >= window_start - eps) & (Ts <= window_end + eps)
        candidate = np.where(manual, cand_man, candidate)
    tmax = exposure.tmax if route == "extravascular" else None
    fit = fit_lambda_z(Ts, ordered.value, candidate, manual, axis=0, rule=rule, tmax=tmax,
                       compare=COMPARISON_RULE.get(rule, "adjusted-r2"))
    with np.errstate(invalid="ignore"):
        margin = np.where(fit.df >= 1, _t_quantile(0.975, fit.df) * fit.se, np.nan)
    cols = np.arange(Ts.shape[1])
    first = np.where(exposure.positive.any(axis=0), Ts[exposure.i_first, cols], np.nan)
    return TerminalPhase(fit, np.where(exposure.measurable, fit.lamz, np.nan), manual, margin,
                         fit.lamz_compare, first)


def _t_quantile(level, df):
    """``scipy.stats.t.ppf(level, max(df, 1))`` per profile, evaluated once per distinct ``df``.

    ``df`` takes few values (points - 2), so the quantiles of 1 ... max(df)
    are computed once and looked up: the same numbers as one call per profile.
    """
    d = np.maximum(df, 1)
    if d.size == 0:
        return np.zeros(d.shape)
    return stats.t.ppf(level, np.arange(1, int(d.max()) + 1, dtype=d.dtype))[d - 1]
