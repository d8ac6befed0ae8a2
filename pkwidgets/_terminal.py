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
from .lambda_z import LambdaZFit, fit_lambda_z_samples_major

__all__ = ["TerminalPhase", "fit_terminal_phase"]


@dataclass
class TerminalPhase:
    """The lambda-z fit of each profile."""

    fit: LambdaZFit         # per-profile fit; ``used`` is sorted rows x profiles
    lamz: np.ndarray        # lambda z, NaN without a measurable concentration or a fit
    manual: np.ndarray      # bool: the window was given by hand


def fit_terminal_phase(ordered: SortedSamples, exposure: Exposure, window_start, window_end,
                       route) -> TerminalPhase:
    """Candidate points per profile (automatic or by window) and the lambda-z fit over them."""
    Ts, Xs, positive = ordered.time, ordered.excluded, exposure.positive
    rows = np.arange(Ts.shape[0])[:, None]
    manual = ~np.isnan(window_start)
    after_peak = rows >= exposure.i_max + (0 if route == "iv-bolus" else 1)
    cand_auto = positive & ~Xs & after_peak & (rows <= exposure.i_last)
    with np.errstate(invalid="ignore"):
        eps = 1e-9 * np.maximum(1.0, np.abs(window_end))
        cand_man = positive & ~Xs & (Ts >= window_start - eps) & (Ts <= window_end + eps)
    candidate = np.where(manual, cand_man, cand_auto)
    fit = fit_lambda_z_samples_major(Ts, ordered.value, candidate, manual)
    return TerminalPhase(fit, np.where(exposure.measurable, fit.lamz, np.nan), manual)
