r"""Confidence bounds for lambda z, the terminal half-life and AUCIFO from the log-linear fit.

The terminal fit :math:`\ln C = a - \lambda_z t` over :math:`n` points is an
ordinary least-squares line, so its slope has the usual t interval (e.g.
Draper & Smith, Applied Regression Analysis, 3rd ed., 1998, ch. 1, from
memory):

.. math::
    \lambda_z \pm t_{(1+\gamma)/2,\,n-2}\,SE(\lambda_z), \qquad
    SE(\lambda_z) = \frac{s}{\sqrt{S_{xx}}}, \quad s^2 = \frac{SSE}{n-2}

at confidence level :math:`\gamma` (0.95).  The half-life
:math:`t_{1/2} = \ln 2/\lambda_z` and
:math:`AUC_{IFO} = AUC_{LST} + C_{LST}/\lambda_z` are decreasing in
:math:`\lambda_z` (for :math:`\lambda_z > 0`), so their bounds are the exact
transformations of the lambda-z bounds with the ends swapped:

.. math::
    t_{1/2}^{lower} = \frac{\ln 2}{\lambda_z^{upper}}, \quad
    t_{1/2}^{upper} = \frac{\ln 2}{\lambda_z^{lower}}, \quad
    AUC_{IFO}^{lower} = AUC_{LST} + \frac{C_{LST}}{\lambda_z^{upper}}, \quad
    AUC_{IFO}^{upper} = AUC_{LST} + \frac{C_{LST}}{\lambda_z^{lower}}

(the image of a confidence interval under a monotone map is a confidence
interval of the same level).  The intervals hold for a window fixed in
advance; a window chosen from the same data makes them somewhat optimistic.
When the lower lambda-z bound is not positive the data do not exclude a flat
tail: the upper half-life and AUCIFO bounds are then ``inf``.  Fits of fewer
than 3 points (no residual degrees of freedom) and profiles without a fit
give NaN.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

__all__ = ["lambda_z_bounds", "aucifo_bounds"]

_LN2 = np.log(2.0)


def _suffix(level):
    if not (isinstance(level, float) and 0.0 < level < 1.0):
        raise ValueError(f"The 'level' option must be a float between 0 and 1, e.g. 0.95; got {level!r}.")
    return f"{100.0 * level:g}".replace(".", "_")


def _upper_of_reciprocal(numerator, lamz_lower):
    """``numerator / lamz_lower``, ``inf`` where the lower bound is not positive (NaN stays NaN)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(lamz_lower > 0, numerator / lamz_lower, np.where(np.isnan(lamz_lower), np.nan, np.inf))


def lambda_z_bounds(fit, level=0.95):
    r"""Two-sided confidence bounds of LAMZ and LAMZHL from a lambda-z fit.

    Parameters
    ----------
    fit : LambdaZFit
        Result of :func:`pkwidgets.lambda_z.fit_lambda_z` (uses ``lamz``,
        ``se`` and ``df``).
    level : float
        Confidence level :math:`\gamma`, 0.95 by default.

    Returns
    -------
    dict of ndarray, shape (profiles,)
        ``LAMZ_LOWER95``, ``LAMZ_UPPER95`` (1/time) and ``LAMZHL_LOWER95``,
        ``LAMZHL_UPPER95`` (time); the suffix is ``100 * level``.  NaN
        without a fit of at least 3 points; ``LAMZHL_UPPER95`` is ``inf``
        when ``LAMZ_LOWER95 <= 0``.

    Notes
    -----
    .. math::
        \lambda_z \pm t_{(1+\gamma)/2,\,n-2}\,SE(\lambda_z), \qquad
        t_{1/2} \in [\ln 2/\lambda_z^{upper},\ \ln 2/\lambda_z^{lower}]

    (t interval of a least-squares slope, Draper & Smith, from memory).

    Examples
    --------
    >>> from pkwidgets.lambda_z import fit_lambda_z
    >>> t = np.array([2.0, 4, 6, 8]); c = np.array([8.0, 4.4, 2.2, 1.0])
    >>> b = lambda_z_bounds(fit_lambda_z(t, c, c > 0, True))  # = linregress slope -+ t(0.975, 2) * stderr
    >>> [round(float(b[k][0]), 4) for k in ("LAMZ_LOWER95", "LAMZ_UPPER95")]
    [0.2817, 0.4114]
    """
    p = _suffix(level)
    df = np.asarray(fit.df)
    with np.errstate(invalid="ignore"):
        q = stats.t.ppf(0.5 + level / 2.0, np.where(df >= 1, df, np.nan))
        half = q * fit.se
    lower, upper = fit.lamz - half, fit.lamz + half
    with np.errstate(divide="ignore", invalid="ignore"):
        hl_lower = _LN2 / upper
    return {
        f"LAMZ_LOWER{p}": lower,
        f"LAMZ_UPPER{p}": upper,
        f"LAMZHL_LOWER{p}": hl_lower,
        f"LAMZHL_UPPER{p}": _upper_of_reciprocal(_LN2, lower),
    }


def aucifo_bounds(auclst, clst, lamz_lower, lamz_upper, *, level=0.95):
    r"""Confidence bounds of AUCIFO from the lambda-z bounds (exact monotone transformation).

    Parameters
    ----------
    auclst, clst : ndarray, shape (profiles,)
        AUCLST and CLST of each profile.
    lamz_lower, lamz_upper : ndarray, shape (profiles,)
        ``LAMZ_LOWER95`` and ``LAMZ_UPPER95`` from :func:`lambda_z_bounds`.
    level : float
        Level of those bounds; only names the keys (``AUCIFO_LOWER95`` for 0.95).

    Returns
    -------
    dict of ndarray
        ``AUCIFO_LOWER95`` and ``AUCIFO_UPPER95``; NaN where a bound of lambda
        z is NaN, ``AUCIFO_UPPER95`` is ``inf`` where ``lamz_lower <= 0``.

    Notes
    -----
    .. math::
        AUC_{IFO} \in \left[AUC_{LST} + \frac{C_{LST}}{\lambda_z^{upper}},\
        AUC_{LST} + \frac{C_{LST}}{\lambda_z^{lower}}\right]

    Examples
    --------
    >>> aucifo_bounds(np.array([90.0]), np.array([2.0]), np.array([0.1]), np.array([0.4]))
    {'AUCIFO_LOWER95': array([95.]), 'AUCIFO_UPPER95': array([110.])}
    >>> aucifo_bounds(np.array([90.0]), np.array([2.0]), np.array([-0.1]), np.array([0.4]))["AUCIFO_UPPER95"]
    array([inf])
    """
    p = _suffix(level)
    auclst, clst = np.asarray(auclst, dtype=float), np.asarray(clst, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        lower = auclst + clst / np.asarray(lamz_upper, dtype=float)
    return {f"AUCIFO_LOWER{p}": lower, f"AUCIFO_UPPER{p}": auclst + _upper_of_reciprocal(clst, np.asarray(lamz_lower))}
