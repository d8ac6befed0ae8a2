"""Review conditions on the terminal phase, as pure functions returning one bool per profile.

Each function takes per-profile arrays (NaN where a value is missing) and
returns a bool array of the same shape; a missing value raises no flag
unless the function says so.  Thresholds are keyword arguments with the
defaults below; each says where it comes from.
"""

from __future__ import annotations

import numpy as np

__all__ = ["MAX_BACK_EXTRAPOLATED_PCT", "MAX_RULE_DISAGREEMENT", "MAX_HALF_LIFE_RATIO",
           "fit_starts_at_first_sample", "back_extrapolation_high", "terminal_phase_ambiguous",
           "half_life_interval_wide", "TERMINAL_FLAG_TEXT"]

#: AUCPBEO above this share (%) is flagged (common practice, no source).
MAX_BACK_EXTRAPOLATED_PCT = 20.0
#: Half-lives of two rules differing by more than this share of the adjusted-R² one are flagged
#: (common practice, no source; the share is our choice).
MAX_RULE_DISAGREEMENT = 0.25
#: A half-life interval whose upper bound exceeds this multiple of its lower bound is flagged (our choice).
MAX_HALF_LIFE_RATIO = 2.0

#: Flag names and review texts, for the lead to add to ``qc.FLAGS``.
TERMINAL_FLAG_TEXT = {
    "lambda_z_from_first_sample": "IV dose: the terminal fit starts at the first sample (distribution phase "
                                  "may be in the fit)",
    "back_extrapolation_high": "AUCPBEO above 20 % (the back-extrapolated area to C0 is large)",
    "terminal_phase_ambiguous": "terminal phase ambiguous: the half-lives of the default and the adjusted-R² "
                                "rules differ by more than 25 %",
    "half_life_interval_wide": "wide half-life interval: the upper 95 % bound is more than twice the lower",
}


def _times_equal(a, b):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.abs(a - b) <= 1e-9 * np.maximum(1.0, np.abs(b))


def fit_starts_at_first_sample(lamzll, first_time, iv):
    """True for an IV profile whose terminal fit starts at its first sample.

    Parameters
    ----------
    lamzll : ndarray
        Start time of the fit (LAMZLL); NaN without a fit (no flag).
    first_time : ndarray
        Time of the profile's first sample after the dose.
    iv : ndarray of bool or bool
        True for intravascular dosing (bolus or infusion).

    Examples
    --------
    >>> fit_starts_at_first_sample(np.array([0.25, 2.0, np.nan]), np.array([0.25, 0.25, 0.25]), True)
    array([ True, False, False])
    """
    return np.asarray(iv, dtype=bool) & _times_equal(lamzll, first_time)


def back_extrapolation_high(aucpbeo, limit=MAX_BACK_EXTRAPOLATED_PCT):
    """True where AUCPBEO (%) is above ``limit`` (20 %, common practice, no source); NaN gives False."""
    with np.errstate(invalid="ignore"):
        return np.asarray(aucpbeo, dtype=float) > limit


def terminal_phase_ambiguous(half_life, half_life_reference, max_share=MAX_RULE_DISAGREEMENT):
    r"""True where two rules' half-lives disagree by more than ``max_share`` of the reference.

    .. math::
        |t_{1/2} - t_{1/2}^{ref}| > \text{max\_share}\cdot t_{1/2}^{ref}

    ``half_life`` comes from the default rule and ``half_life_reference``
    from the adjusted-R² rule.  Also True when exactly one rule finds a
    terminal phase (one value NaN): the rules then disagree on whether there
    is one.  Both NaN gives False (the "no lambda z" flag covers it).

    Examples
    --------
    >>> terminal_phase_ambiguous(np.array([10.0, 10.0, np.nan, np.nan]), np.array([7.0, 9.0, 9.0, np.nan]))
    array([ True, False,  True, False])
    """
    a, b = np.asarray(half_life, dtype=float), np.asarray(half_life_reference, dtype=float)
    with np.errstate(invalid="ignore"):
        apart = np.abs(a - b) > max_share * b
    return apart | (np.isnan(a) != np.isnan(b))


def half_life_interval_wide(lower, upper, max_ratio=MAX_HALF_LIFE_RATIO):
    """True where the half-life bounds' ratio upper/lower exceeds ``max_ratio`` (2, our choice).

    An infinite upper bound (lambda z not distinguishable from 0) is wide;
    NaN bounds give False.

    Examples
    --------
    >>> half_life_interval_wide(np.array([5.0, 5.0, 5.0, np.nan]), np.array([9.0, 11.0, np.inf, np.nan]))
    array([False,  True,  True, False])
    """
    lo, hi = np.asarray(lower, dtype=float), np.asarray(upper, dtype=float)
    with np.errstate(invalid="ignore"):
        return hi > max_ratio * lo
