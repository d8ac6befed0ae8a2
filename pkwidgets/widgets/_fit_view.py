r"""Pure helpers for what the picker says about the λz fit: 95 % bounds, residuals, re-run notes.

The bounds are the engine's ``LAMZ_LOWER95`` ... ``AUCIFO_UPPER95`` columns
when the result has them; otherwise they are computed here from the points
of the fit with :mod:`pkwidgets.lambda_z_bounds` (t interval of the
least-squares slope, exact transformation to t½ and AUCIFO; Draper & Smith,
Applied Regression Analysis, from memory).  No widget code here.
"""

from __future__ import annotations

import math

import numpy as np

from ..lambda_z import fit_lambda_z
from ..lambda_z_bounds import aucifo_bounds, lambda_z_bounds

__all__ = ["BOUND_CODES", "fit_bounds", "fit_residuals", "fit_times", "bounds_text", "rerun_message",
           "times_text", "click_status"]

BOUND_CODES = ("LAMZ_LOWER95", "LAMZ_UPPER95", "LAMZHL_LOWER95", "LAMZHL_UPPER95", "AUCIFO_LOWER95",
               "AUCIFO_UPPER95")


def fit_times(time, result):
    """Sampling times of the points in the λz fit of a one-profile result (sorted list of float)."""
    t = np.asarray(time, dtype=np.float64)
    used = np.asarray(result.lambda_z_used[0], dtype=bool)
    return sorted(float(x) for x in t[used])


def fit_bounds(time, conc, result, level=0.95):
    r"""95 % confidence bounds of LAMZ, LAMZHL and AUCIFO for a one-profile result.

    Parameters
    ----------
    time, conc : array_like, 1-D
        The profile as given to the engine.
    result : ArrayResult
        One-profile engine result (``lambda_z_used``, ``AUCLST``, ``CLST``).

    Returns
    -------
    dict
        :data:`BOUND_CODES` -> float.  Taken from ``result`` when it carries
        them; else from an ordinary least-squares fit of :math:`\ln C` on
        :math:`t` over the fit points (``fit_lambda_z`` with the points
        fixed), then :func:`lambda_z_bounds` and :func:`aucifo_bounds`:

        .. math::
            \lambda_z \pm t_{0.975,\,n-2}\,SE(\lambda_z), \quad
            t_{1/2} \in [\ln 2/\lambda_z^{up},\ \ln 2/\lambda_z^{low}], \quad
            AUC_{IFO} \in [AUC_{LST} + C_{LST}/\lambda_z^{up},\ AUC_{LST} + C_{LST}/\lambda_z^{low}]

        NaN without a fit of at least 3 points; the upper t½ and AUCIFO
        bounds are ``inf`` when the lower λz bound is not positive.
    """
    if all(code in result for code in BOUND_CODES):
        return {code: float(result[code][0]) for code in BOUND_CODES}
    t = np.asarray(time, dtype=np.float64)
    c = np.asarray(conc, dtype=np.float64)
    used = np.asarray(result.lambda_z_used[0], dtype=bool)
    if used.sum() < 3:
        return {code: math.nan for code in BOUND_CODES}
    tt, cc = t[used], c[used]
    fit = fit_lambda_z(tt, cc, np.ones(tt.shape, dtype=bool), True)
    out = lambda_z_bounds(fit, level)
    out.update(aucifo_bounds(result["AUCLST"], result["CLST"], out["LAMZ_LOWER95"], out["LAMZ_UPPER95"],
                             level=level))
    return {code: float(np.asarray(out[code]).ravel()[0]) for code in BOUND_CODES}


def fit_residuals(time, conc, result):
    r"""Residuals of the λz fit: :math:`\ln C_i - (a - \lambda_z t_i)` at the fit points.

    The line is the one drawn (:math:`a = \ln C_{LSTP} + \lambda_z t_{LST}`,
    the engine's intercept).  Returns ``(t, residual)`` arrays, empty without a fit.
    """
    t = np.asarray(time, dtype=np.float64)
    c = np.asarray(conc, dtype=np.float64)
    used = np.asarray(result.lambda_z_used[0], dtype=bool)
    lamz = float(result["LAMZ"][0])
    if not (math.isfinite(lamz) and used.any()):
        return np.array([]), np.array([])
    a = math.log(float(result["CLSTP"][0])) + lamz * float(result["TLST"][0])
    return t[used], np.log(c[used]) - (a - lamz * t[used])


def _num(x):
    x = float(x)
    if math.isinf(x):
        return "∞"
    return "—" if not math.isfinite(x) else f"{x:.4g}"


def bounds_text(bounds, code):
    """'0.1314 to 0.1588' for one parameter's bounds ('—' when unknown)."""
    lo, hi = bounds[f"{code}_LOWER95"], bounds[f"{code}_UPPER95"]
    if not (math.isfinite(lo) or math.isfinite(hi)):
        return "—"
    return f"{_num(lo)} to {_num(hi)}"


def times_text(times, unit):
    """'2, 4, 8 h': sampling times in words (4 significant digits)."""
    return ", ".join(f"{float(x):.4g}" for x in times) + (f" {unit}" if unit else "")


def rerun_message(clicked, before, after, unit=""):
    """Status line after a click that made the automatic search run again.

    Parameters
    ----------
    clicked : float
        Time of the clicked point.
    before, after : list of float
        Times of the fit points before and after the click (:func:`fit_times`).
    unit : str
        Time unit text.

    Returns
    -------
    str
        Says that the search was re-run, which points it chose, and which
        points besides the clicked one left or joined the fit.
    """
    b, a = set(before), set(after)
    chose = times_text(after, unit) if after else "no points (no λz fit)"
    msg = (f"automatic search re-run after the click at {times_text([clicked], unit)}: "
           f"it chose {len(after)} points ({chose})")
    dropped = sorted(b - a - {float(clicked)})
    joined = sorted(a - b - {float(clicked)})
    if dropped:
        msg += f"; also dropped {times_text(dropped, unit)}"
    if joined:
        msg += f"; added {times_text(joined, unit)}"
    if dropped or joined:
        msg += ". To keep the other points, drag a window over them"
    return msg + "."


def click_status(role, t, window, before, after, time_unit=""):
    """Status line after a click that changed the choice (nothing changes silently).

    Parameters
    ----------
    role : str
        Role of the clicked point before the click.
    t : float
        Its time.
    window : (start, end) or None
        The window after the click (None: the automatic search ran again).
    before, after : list of float
        Times of the fit points before and after (:func:`pkwidgets.widgets._fit_view.fit_times`).
    time_unit : str

    Returns
    -------
    str
        With a hand window: what happened to the point, and that the window
        was kept.  In automatic mode: :func:`rerun_message` (which points the
        search chose).
    """
    if window is None:
        return rerun_message(t, before, after, time_unit)
    what = {"fit": "left out", "excluded": "taken back", "other": "brought into the fit"}[role]
    return (f"{times_text([t], time_unit)} {what}; window {_num(window[0])} to {_num(window[1])} kept "
            f"({len(after)} points in the fit)")
