r"""Pure helpers for the picker's axes, units and legend (no ipywidgets, no bqplot).

- :func:`unit_labels`: the unit text of the axes and the readout, derived
  from the study's declared units with :class:`pkwidgets.units.StudyUnits`
  (pint), so that the picker says what the result table says.
- :func:`x_range`: the time axis covers the samples, not the extrapolated tail.
- :func:`log_ticks`: tick values of a log axis at 1, 2 and 5 per decade, or
  fewer when the axis spans many decades, with the axis domain widened to the
  nearest tick on each side (a common plotting convention, no source).
- :func:`legend_html`: the legend as HTML beside the figure, outside the data.
"""

from __future__ import annotations

import html
import math

import numpy as np

from ..units import StudyUnits

__all__ = ["NO_UNITS", "unit_labels", "with_unit", "x_range", "log_ticks", "legend_html", "linear_ticks",
           "residual_axis", "X_PAD"]

#: Words used when the study declared no units.
NO_UNITS = {"time": "time unit", "conc": "conc. unit", "LAMZ": "1/time unit", "LAMZHL": "time unit",
            "AUCLST": "time unit·conc. unit", "AUCIFO": "time unit·conc. unit"}
#: Share of the sampling span added on each side of the time axis.
X_PAD = 0.03
#: Mantissas per decade, densest first, tried until the ticks are few enough.
_MANTISSAS = ((1.0, 2.0, 5.0), (1.0, 3.0), (1.0,))


def unit_labels(units=None):
    """Unit text for the picker's axes and readout.

    Parameters
    ----------
    units : dict or None
        The study's units as given to :func:`pkwidgets.nca` (``{"time": "h",
        "conc": "ng/mL"}``, ``"dose"`` optional), e.g. ``NCAResult.settings["units"]``.

    Returns
    -------
    dict
        ``time``, ``conc``, ``LAMZ``, ``LAMZHL``, ``AUCLST`` and ``AUCIFO`` ->
        unit text, the same text as ``NCAResult.units`` (both come from
        :meth:`StudyUnits.unit_of`); :data:`NO_UNITS` words without units.

    Examples
    --------
    >>> unit_labels({"time": "h", "conc": "ng/mL"})["AUCIFO"]
    'h·ng/mL'
    >>> unit_labels(None)["LAMZHL"]
    'time unit'
    """
    if not units:
        return dict(NO_UNITS)
    su = StudyUnits(time=units["time"], conc=units["conc"], dose=units.get("dose"))
    out = {"time": units["time"], "conc": units["conc"]}
    for code in ("LAMZ", "LAMZHL", "AUCLST", "AUCIFO"):
        out[code] = su.unit_of(code)[0]
    return out


def with_unit(label, unit):
    """``"t½ (h)"``: a label with its unit in brackets."""
    return f"{label} ({unit})"


def x_range(times, pad=X_PAD):
    r"""Time-axis limits: the sampling times, padded by ``pad`` of their span on each side.

    .. math:: [t_{min} - p\,(t_{max} - t_{min}),\ t_{max} + p\,(t_{max} - t_{min})]

    Returns ``(lo, hi)``; ``(0, 1)`` without a finite time, ``t ± 1`` for one time.
    """
    t = np.asarray(times, dtype=np.float64)
    t = t[np.isfinite(t)]
    if t.size == 0:
        return 0.0, 1.0
    lo, hi = float(t.min()), float(t.max())
    span = hi - lo
    if span <= 0:
        return lo - 1.0, hi + 1.0
    return lo - pad * span, hi + pad * span


def _ticks_with(mantissas, d0, d1):
    return [m * 10.0 ** d for d in range(d0, d1 + 1) for m in mantissas]


def log_ticks(values, max_ticks=7):
    """Tick values and domain of a log axis over the positive ``values``.

    Ticks sit at 1-2-5 per decade, else 1-3, else 1 per decade, else every
    k-th decade: the densest choice with at most ``max_ticks`` ticks.  The
    domain runs from the largest tick at or below the smallest value to the
    smallest tick at or above the largest value, so both ends carry a label
    (one tick step either side when all values sit on one tick).

    Returns
    -------
    (lo, hi, ticks)
        Floats and a list of floats; ``(None, None, [])`` without a positive value.

    Examples
    --------
    >>> log_ticks([0.3, 7.0])
    (0.2, 10.0, [0.2, 0.5, 1.0, 2.0, 5.0, 10.0])
    >>> log_ticks([5.0])
    (2.0, 10.0, [2.0, 5.0, 10.0])
    >>> log_ticks([0.001, 1000.0])[2]
    [0.001, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0]
    """
    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return None, None, []
    vmin, vmax = float(v.min()), float(v.max())
    d0, d1 = math.floor(math.log10(vmin)), math.ceil(math.log10(vmax))
    best = None
    for mant in _MANTISSAS:
        all_ticks = [float(f"{x:.12g}") for x in _ticks_with(mant, d0 - 1, d1 + 1)]
        lo = max(x for x in all_ticks if x <= vmin * (1 + 1e-12))
        hi = min(x for x in all_ticks if x >= vmax * (1 - 1e-12))
        if lo == hi:                          # one value on a tick: one tick step either side
            lo, hi = all_ticks[all_ticks.index(lo) - 1], all_ticks[all_ticks.index(hi) + 1]
        ticks = [x for x in all_ticks if lo <= x <= hi]
        best = (lo, hi, ticks)
        if len(ticks) <= max_ticks:
            return best
    lo, hi, ticks = best                      # one per decade is still too many: every k-th decade
    k = math.ceil(len(ticks) / max_ticks)
    return lo, hi, ticks[::k] if ticks[::k][-1] == hi else ticks[::k] + [hi]


_SYMBOL = {
    "circle": "<circle cx='8' cy='7' r='4.5' fill='{c}'/>",
    "square": "<rect x='3.5' y='2.5' width='9' height='9' fill='{c}'/>",
    "cross": "<path d='M6 2h4v3h3v4h-3v3h-4v-3h-3v-4h3z' fill='{c}'/>",
    "triangle-down": "<path d='M3 3h10l-5 9z' fill='{c}'/>",
    "line": "<line x1='1' y1='7' x2='15' y2='7' stroke='{c}' stroke-width='2.5'/>",
    "dashed": "<line x1='1' y1='7' x2='15' y2='7' stroke='{c}' stroke-width='1.5' stroke-dasharray='4,3'/>",
}


def legend_html(entries):
    """The legend as one line of HTML: a small symbol and its words per entry.

    Parameters
    ----------
    entries : list of (shape, colour, words)
        ``shape`` is a bqplot marker name (circle, square, cross,
        triangle-down) or ``"line"`` / ``"dashed"``.
    """
    items = []
    for shape, colour, words in entries:
        svg = (f"<svg width='16' height='14' style='vertical-align:middle' aria-hidden='true'>"
               f"{_SYMBOL[shape].format(c=colour)}</svg>")
        items.append(f"<span style='margin-right:1em;white-space:nowrap'>{svg} {html.escape(words)}</span>")
    return f"<div class='pkw-legend' style='font-size:12px;line-height:1.6'>{''.join(items)}</div>"


def _nice_step(raw):
    """Smallest 1-2-5 step (times a power of ten) at or above ``raw`` > 0."""
    base = 10.0 ** math.floor(math.log10(raw))
    return next(m * base for m in (1.0, 2.0, 5.0, 10.0) if m * base >= raw * (1 - 1e-12))


def linear_ticks(lo, hi, max_ticks=5):
    """Round tick values (steps of 1, 2 or 5 times a power of ten) inside ``[lo, hi]``, at most ``max_ticks``.

    Examples
    --------
    >>> linear_ticks(-0.72, 24.72)
    [0.0, 5.0, 10.0, 15.0, 20.0]
    >>> linear_ticks(-0.3, 0.3, 3)
    [-0.2, 0.0, 0.2]
    """
    lo, hi = float(lo), float(hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return []
    step = _nice_step((hi - lo) / (max_ticks + 1))
    while True:
        first, last = math.ceil(lo / step - 1e-9), math.floor(hi / step + 1e-9)
        if last - first + 1 <= max_ticks:
            return [float(f"{k * step:.12g}") + 0.0 for k in range(first, last + 1)]
        step = _nice_step(step * 1.000001)


def residual_axis(residuals):
    """Symmetric limits and ticks of the residual plot: ``(lim, [-r, 0, r])`` with ``r`` a 1-2-5 value.

    ``r`` is the smallest 1-2-5 value at or above the largest absolute
    residual, ``lim = 1.15 r``; ``r = 0.1`` without residuals or when all are 0.

    Examples
    --------
    >>> residual_axis([0.03, -0.12])
    (0.22999999999999998, [-0.2, 0.0, 0.2])
    """
    r = np.abs(np.asarray(residuals, dtype=np.float64))
    r = r[np.isfinite(r)]
    top = float(r.max()) if r.size and r.max() > 0 else 0.1
    nice = _nice_step(top)
    return 1.15 * nice, [-nice, 0.0, nice]
