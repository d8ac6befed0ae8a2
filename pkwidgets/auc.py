"""Area kernels: trapezoid segments by the linear and the logarithmic rule.

All functions work element-wise on arrays of segments, so one call serves
every segment of every profile.

References
----------
.. [1] Gibaldi M, Perrier D. Pharmacokinetics, 2nd ed. Marcel Dekker, 1982,
       Appendix D (trapezoidal and log-trapezoidal areas, AUMC).
.. [2] CDISC SDTM controlled terminology, PK analytical method codelist
       C172330: linear trapezoidal; linear-up/log-down; lin-log (linear to
       Cmax, log after).
"""

from __future__ import annotations

import numpy as np

from .options import AUC_METHODS, check_choice

__all__ = ["AUC_METHODS", "check_method", "segment_areas", "segment_is_log", "area_to", "moment_to",
           "exponential_moment"]


def check_method(method: str) -> str:
    """Return ``method`` if it is one of :data:`AUC_METHODS` (the option check of :mod:`pkwidgets.options`).

    Examples
    --------
    >>> check_method("lin-log")
    'lin-log'
    >>> check_method("log")
    Traceback (most recent call last):
    ...
    ValueError: The 'auc_method' option must be one of 'linear', 'lin-up/log-down', 'lin-log'; got 'log'. Did you mean 'lin-log'?
    """
    return check_choice("The 'auc_method' option", method, AUC_METHODS)


def segment_is_log(t1, c1, c2, method, t_switch):
    """Which segments use the log rule.

    Parameters
    ----------
    t1 : ndarray
        Start time of each segment.
    c1, c2 : ndarray
        Concentrations at the segment ends.
    method : {"linear", "lin-up/log-down", "lin-log"}
        ``"lin-up/log-down"``: log rule wherever the concentration falls and
        both ends are positive; ``"lin-log"``: the same, but only for segments
        starting at or after ``t_switch`` (TMAX), linear before.
    t_switch : ndarray
        Per-segment (broadcastable) time from which ``"lin-log"`` may use logs.

    Returns
    -------
    ndarray of bool
    """
    if method == "linear":
        return np.zeros(np.broadcast(t1, c1, c2).shape, dtype=bool)
    with np.errstate(invalid="ignore"):
        falling = (c2 < c1) & (c2 > 0)
        if method == "lin-log":
            falling &= t1 >= t_switch
    return falling


def segment_areas(t1, t2, c1, c2, is_log):
    r"""AUC and AUMC of each segment.

    Parameters
    ----------
    t1, t2 : ndarray
        Segment start and end times, ``t2 > t1``.
    c1, c2 : ndarray
        Concentrations at ``t1`` and ``t2`` (non-negative).
    is_log : ndarray of bool
        Use the log rule (requires ``c1 > c2 > 0``) where True.

    Returns
    -------
    auc, aumc : ndarray
        Same shape as the broadcast inputs; NaN where an input is NaN.

    Notes
    -----
    Linear rule [1]_:

    .. math:: A = \frac{\Delta t}{2}(c_1 + c_2), \qquad
              M = \frac{\Delta t}{2}(t_1 c_1 + t_2 c_2)

    Log rule, exact for :math:`c = c_1 e^{-k(t - t_1)}` with
    :math:`k = \ln(c_1/c_2)/\Delta t` [1]_:

    .. math:: A = \frac{c_1 - c_2}{k}, \qquad
              M = \frac{t_1 c_1 - t_2 c_2}{k} + \frac{c_1 - c_2}{k^2}

    Evaluation: :math:`k\Delta t = \mathrm{log1p}((c_1 - c_2)/c_2)`, so nearly
    equal concentrations (down to adjacent floating-point numbers) keep full
    precision in ``A``; ``M`` is evaluated in the equivalent moment form
    :math:`M = t_1 A + c_1 \Delta t^2 g(k\Delta t)` (two positive terms; ``g``
    by a series for small arguments, see ``_g``), since the two terms of the
    textbook form cancel on nearly flat segments.

    Examples
    --------
    >>> import numpy as np
    >>> a, m = segment_areas(np.array([0.0]), np.array([1.0]), np.array([2.0]),
    ...                      np.array([1.0]), np.array([True]))
    >>> round(float(a[0]), 6)  # 1 / ln 2
    1.442695
    """
    dt = t2 - t1
    with np.errstate(over="ignore"):  # +-inf from huge values: the engine reports NaN, flag nonfinite_result
        lin_auc = 0.5 * dt * (c1 + c2)
        lin_aumc = 0.5 * dt * (t1 * c1 + t2 * c2)
    if isinstance(lin_auc, np.ndarray) and np.shape(is_log) == lin_auc.shape and not is_log.any():
        return lin_auc, lin_aumc  # no log segment (e.g. auc_method="linear"): skip the log rule
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        x = _log_ratio(c1, c2)  # k * dt
        log_auc = (c1 - c2) * dt / x
        # moment form of the textbook AUMC: both terms positive, so no cancellation
        # on nearly flat segments (the textbook difference loses about 1e-16 / x**2)
        log_aumc = t1 * log_auc + c1 * dt * dt * _g(x)
    return np.where(is_log, log_auc, lin_auc), np.where(is_log, log_aumc, lin_aumc)


def _log_ratio(c1, c2):
    r""":math:`\ln(c_1/c_2)` without rounding ``c1/c2`` to 1 for nearly equal values.

    ``c1 - c2`` is exact for ``c2 <= c1 <= 2 c2`` (Sterbenz), so ``log1p`` of
    ``(c1 - c2)/c2`` keeps full relative precision where ``log(c1/c2)`` would
    keep only about ``eps / ln(c1/c2)``.
    """
    return np.log1p((c1 - c2) / c2)


def _g(x):
    r"""Relative first moment of an exponential segment, stable for small ``x``.

    .. math:: g(x) = \frac{1 - e^{-x}(1 + x)}{x^2}
              = \frac12 - \frac{x}{3} + \frac{x^2}{8} - \frac{x^3}{30} + \frac{x^4}{144} - \dots

    so that :math:`\int_0^{\Delta t} s\,c_1 e^{-ks}\,ds = c_1 \Delta t^2 g(k\Delta t)`.
    The closed form cancels for small ``x`` (relative error about
    ``eps / x``); below ``x = 0.01`` the series (truncated after the ``x**5`` term:
    relative error under 4e-16) is used.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        closed = (-np.expm1(-x) - x * np.exp(-x)) / (x * x)
        series = 0.5 + x * (-1 / 3 + x * (1 / 8 + x * (-1 / 30 + x * (1 / 144 - x / 840))))
    return np.where(np.abs(x) < 0.01, series, closed)


def area_to(x, t1, c1, t2, c2, is_log):
    r"""Area from ``t1`` to ``x`` inside a segment, and the concentration at ``x``.

    The concentration at ``x`` is interpolated linearly, or log-linearly where
    ``is_log`` (the rule used for the whole segment) [2]_.

    .. math:: c_x = c_1 + (c_2 - c_1)\frac{x - t_1}{t_2 - t_1}
              \quad\text{or}\quad c_x = c_1 e^{-k (x - t_1)}

    Examples
    --------
    Log interpolation between (48 h, 16) and (78 h, 5.0897) at 72 h gives
    6.39997 (see ``tests/test_auc.py`` for the source):

    >>> import numpy as np
    >>> _, cx = area_to(np.array(72.0), 48.0, 16.0, 78.0, 5.0897, np.array(True))
    >>> round(float(cx), 5)
    6.39997
    """
    d = x - t1
    dt = t2 - t1
    with np.errstate(divide="ignore", invalid="ignore"):
        c_lin = c1 + (c2 - c1) * d / dt
        a_lin = 0.5 * d * (c1 + c_lin)
        k = _log_ratio(c1, c2) / dt
        c_log = c1 * np.exp(-k * d)
        a_log = c1 * -np.expm1(-k * d) / k  # = (c1 - c_log) / k, without cancellation for small k*d
    cx = np.where(is_log, c_log, c_lin)
    area = np.where(is_log, a_log, a_lin)
    at_start = d == 0
    return np.where(at_start, 0.0, area), np.where(at_start, c1, cx)


def moment_to(x, t1, c1, t2, c2, is_log):
    r"""First moment (area under t*C) from ``t1`` to ``x`` inside a segment, by the segment's rule.

    The concentration at ``x`` is interpolated as in :func:`area_to`; the
    part of the segment from ``t1`` to ``x`` then gets the rule of the whole
    segment [1]_, so the moment to ``x = t2`` is the segment's moment of
    :func:`segment_areas` and the running moment has no jump at a sample.

    Parameters
    ----------
    x : ndarray
        End of the partial segment, ``t1 <= x <= t2``.
    t1, c1, t2, c2, is_log : ndarray
        The segment, as in :func:`segment_areas`.

    Returns
    -------
    ndarray
        The moment from ``t1`` to ``x`` (0 at ``x = t1``); NaN where an input is NaN.

    Notes
    -----
    Linear rule (the trapezoid of :math:`t\,c`, as for a whole segment), with
    :math:`d = x - t_1` and :math:`c_x` linearly interpolated:

    .. math:: M = \frac{d}{2}(t_1 c_1 + x\,c_x)

    It differs from the integral of :math:`t\,c(t)` under the straight line by
    :math:`d^2 (c_1 - c_x)/6`, as the whole-segment rule does.  Log rule,
    exact for :math:`c = c_1 e^{-k(t - t_1)}`:

    .. math:: M = \int_{t_1}^{x} t\,c_1 e^{-k(t - t_1)}\,dt
              = t_1 A + c_1 d^2 g(k d), \qquad
              g(y) = \frac{1 - e^{-y}(1 + y)}{y^2}

    with :math:`A` the area of :func:`area_to` (two positive terms, ``g`` by a
    series for small arguments, as in :func:`segment_areas`).

    Examples
    --------
    Halfway along a linear segment from (0, 2) to (2, 0), and to the end of a
    log segment (the segment's moment of :func:`segment_areas`):

    >>> import numpy as np
    >>> t1, c1, t2, c2 = np.array([0.0]), np.array([2.0]), np.array([2.0]), np.array([0.0])
    >>> float(moment_to(np.array([1.0]), t1, c1, t2, c2, np.array([False]))[0])  # (1/2)(0*2 + 1*1)
    0.5
    >>> c2 = np.array([1.0])
    >>> m = moment_to(t2, t1, c1, t2, c2, np.array([True]))
    >>> bool(np.isclose(m, segment_areas(t1, t2, c1, c2, np.array([True]))[1], rtol=1e-15)[0])
    True
    """
    d = x - t1
    area, cx = area_to(x, t1, c1, t2, c2, is_log)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        m_lin = 0.5 * d * (t1 * c1 + x * cx)
        kd = _log_ratio(c1, c2) / (t2 - t1) * d  # k * d, as in area_to
        m_log = t1 * area + c1 * d * d * _g(kd)
    return np.where(d == 0, 0.0, np.where(is_log, m_log, m_lin))


def exponential_moment(t0, c0, lam, d):
    r"""First moment of an exponential decline from ``t0`` over a length ``d``.

    The moment of the lambda-z extrapolation beyond TLST (``t0 = TLST``,
    ``c0 = CLST``, ``lam = LAMZ``, ``d = x - TLST``).

    Returns
    -------
    ndarray
        Broadcast shape of the inputs; NaN where an input is NaN.

    Notes
    -----
    With :math:`s = t - t_0`, integrating :math:`(t_0 + s)\,e^{-\lambda s}`
    term by term (by parts for :math:`s\,e^{-\lambda s}`):

    .. math:: \int_{t_0}^{t_0 + d} t\,c_0 e^{-\lambda (t - t_0)}\,dt
              = c_0\left[\frac{t_0}{\lambda}\left(1 - e^{-\lambda d}\right)
              + \frac{1 - (1 + \lambda d)\,e^{-\lambda d}}{\lambda^2}\right]
              = c_0\left[t_0\,\frac{1 - e^{-\lambda d}}{\lambda} + d^2 g(\lambda d)\right]

    with ``g`` of :func:`segment_areas` (no cancellation for small
    :math:`\lambda d`).  As :math:`d \to \infty` it tends to
    :math:`c_0 t_0/\lambda + c_0/\lambda^2`, the extrapolated part of AUMCIFO
    (Gibaldi & Perrier, Pharmacokinetics, 2nd ed., 1982, Appendix D, from memory).

    Examples
    --------
    >>> round(float(exponential_moment(0.0, 1.0, 1.0, 1e3)), 12)  # int_0^inf t e^-t dt
    1.0
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        x = lam * d
        return c0 * (t0 * -np.expm1(-x) / lam + d * d * _g(x))
