r"""Pure helpers behind the widgets: from core results to what is drawn and written.

Nothing here touches ipywidgets or bqplot.  Widget callbacks gather trait
values and call these functions; all arithmetic (marker positions, the
fitted line, readout text) lives here, where tests reach it without a
browser.

Colours are from the Okabe–Ito palette (Okabe & Ito, "Color Universal
Design", 2008), always paired with a distinct marker shape and a legend
word, so no role is told by colour alone.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field

import numpy as np

from ..engine import nca_arrays
from ..qc import FLAGS, QCThresholds, flag_message
from ._axes import legend_html as _legend_html
from ._axes import log_ticks, unit_labels, with_unit, x_range
from ._fit_view import bounds_text, click_status, fit_bounds, fit_residuals  # noqa: F401 (click_status: API)

__all__ = [
    "ROLE_STYLE", "PointView", "ProfileView", "compute_profile", "profile_view", "toggle_time",
    "window_from_brush", "readout_rows", "readout_html", "flag_words",
    "needs_review", "key_label", "choice_summary", "fit_interval", "click_action", "click_status", "record_steps",
    "legend_html",
]

#: Okabe–Ito colours (hex as published) with a marker shape and a legend word per role.
ROLE_STYLE = {
    "fit": {"colour": "#0072B2", "marker": "circle", "label": "in the λz fit"},
    "other": {"colour": "#000000", "marker": "square", "label": "other observation"},
    "excluded": {"colour": "#D55E00", "marker": "cross", "label": "left out by hand"},
    "blq": {"colour": "#CC79A7", "marker": "triangle-down", "label": "below LLOQ"},
}
LINE_COLOUR = "#009E73"
REVIEW_COLOUR = "#E69F00"


@dataclass
class ProfileView:
    """Everything the picker draws for one profile (plain arrays and text)."""

    points: dict  # role -> {"x": times, "y": plotted conc, "index": input sample index}
    fit_x: np.ndarray
    fit_y: np.ndarray
    tail_x: np.ndarray
    tail_y: np.ndarray
    window: tuple | None
    readout: list = field(default_factory=list)
    flags: list = field(default_factory=list)
    x_range: tuple = (0.0, 1.0)  # time-axis limits: the samples, not the tail
    y_range: tuple = (None, None)  # log-axis limits at ticks (None on a linear axis: automatic)
    y_ticks: list = field(default_factory=list)  # log-axis ticks (empty on a linear axis)
    residuals: tuple = (np.array([]), np.array([]))  # (t, ln C - fitted ln C) of the fit points


PointView = dict


def compute_profile(time, conc, *, blq=None, lloq=None, window=None, excluded=(), options=None):
    """Run the engine on one profile with a window and excluded times.

    Parameters
    ----------
    time, conc : array_like, 1-D
        Times after the dose and concentrations (NaN-padded allowed).
    blq : array_like of bool, optional
    lloq : float or array_like, optional
    window : (start, end) or None
        None: automatic lambda-z search.
    excluded : sequence of float
        Sampling times left out of the fit.
    options : dict, optional
        Further keywords of :func:`pkwidgets.nca_arrays` (``dose``,
        ``route``, ``auc_method``, ``blq_rules``, ``qc``...).

    Returns
    -------
    ArrayResult
        For one profile (arrays of length 1).
    """
    t = np.asarray(time, dtype=np.float64)
    excl = np.zeros(t.shape, dtype=bool)
    for x in excluded:
        excl |= np.isclose(t, float(x), rtol=1e-9, atol=1e-12)
    terminal = "auto" if window is None else (float(window[0]), float(window[1]))
    return nca_arrays(t, conc, blq=blq, lloq=lloq, terminal=terminal, exclude=excl, **(options or {}))


def _plot_conc(conc, blq, lloq, positive_floor):
    """y positions: measured values; BLQ at the LLOQ if known, else half the smallest positive value."""
    c = np.asarray(conc, dtype=np.float64)
    lq = np.broadcast_to(np.asarray(np.nan if lloq is None else lloq, dtype=np.float64), c.shape)
    y = np.where(blq, np.where(np.isfinite(lq) & (lq > 0), lq, positive_floor / 2.0), c)
    return y


def profile_view(time, conc, result, *, blq=None, lloq=None, excluded=(), window=None, log_scale=True,
                 qc=None, units=None):
    r"""Map one profile's engine result to drawable arrays and readout text.

    Roles: ``fit`` (used in the lambda-z fit), ``excluded`` (left out by
    hand), ``blq`` (below the LLOQ, drawn at the LLOQ), ``other`` (every
    other observation with a time).  On a log axis, zero concentrations
    cannot be drawn and are left out of ``other`` (they still count in the
    AUC).  The fitted line runs over the fit interval,
    :math:`\hat C(t) = e^{a - \lambda_z t}`; the dashed tail continues it
    from TLST to the right edge of the time axis, which covers the samples
    only (:func:`pkwidgets.widgets._axes.x_range`), to suggest the area out to
    infinity (:math:`C_{last}/\lambda_z`).  On a log axis the y limits and
    ticks come from :func:`pkwidgets.widgets._axes.log_ticks`.  ``units`` are
    the study's units (:func:`pkwidgets.widgets._axes.unit_labels`).
    """
    t = np.asarray(time, dtype=np.float64)
    c = np.asarray(conc, dtype=np.float64)
    b = np.zeros(t.shape, dtype=bool) if blq is None else np.asarray(blq, dtype=bool)
    present = ~np.isnan(t)
    used = np.asarray(result.lambda_z_used[0], dtype=bool)
    excl = np.zeros(t.shape, dtype=bool)
    for x in excluded:
        excl |= np.isclose(t, float(x), rtol=1e-9, atol=1e-12)
    pos = c[present & ~b & (c > 0)] if np.any(present & ~b) else np.array([])
    floor = float(np.min(pos)) if pos.size else 1.0
    y = _plot_conc(c, b, lloq, floor)
    drawable = present & np.isfinite(y) & ((y > 0) if log_scale else True)
    roles = {
        "fit": drawable & used,
        "excluded": drawable & excl & ~b,
        "blq": drawable & b,
    }
    roles["other"] = drawable & ~roles["fit"] & ~roles["excluded"] & ~roles["blq"]
    points = {r: {"x": t[m], "y": y[m], "index": np.flatnonzero(m)} for r, m in roles.items()}

    xr = x_range(t[present])
    fit_x, fit_y, tail_x, tail_y = _fit_lines(result, xr[1])
    y_lo, y_hi, ticks = log_ticks(np.concatenate([y[drawable], fit_y])) if log_scale else (None, None, [])
    flags = [name for name in FLAGS if bool(result.flags[name][0])]
    readout = readout_rows(result, unit_labels(units), fit_bounds(t, c, result))
    return ProfileView(points=points, fit_x=fit_x, fit_y=fit_y, tail_x=tail_x, tail_y=tail_y,
                       window=window, readout=readout, flags=flag_words(flags, qc), x_range=xr,
                       y_range=(y_lo, y_hi), y_ticks=ticks, residuals=fit_residuals(t, c, result))


def _fit_lines(result, x_edge):
    """(fit_x, fit_y, tail_x, tail_y): the fitted line over the fit interval, the tail from TLST to ``x_edge``."""
    lamz = float(result["LAMZ"][0])
    lo, hi = float(result["LAMZLL"][0]), float(result["LAMZUL"][0])
    empty = np.array([])
    if not (math.isfinite(lamz) and lamz > 0):
        return empty, empty, empty, empty
    # intercept a from CLSTP = exp(a - lamz * TLST)
    tlst = float(result["TLST"][0])
    a = math.log(float(result["CLSTP"][0])) + lamz * tlst
    fit_x = np.linspace(lo, hi, 24)
    tail_x = np.linspace(tlst, x_edge, 24) if x_edge > tlst else empty
    return fit_x, np.exp(a - lamz * fit_x), tail_x, np.exp(a - lamz * tail_x)


def _fmt(x, digits=4):
    x = float(x)
    if not math.isfinite(x):
        return "—"
    return f"{x:.{digits}g}"


def readout_rows(result, units=None, bounds=None):
    """(label, value text) pairs of the live readout for a one-profile result.

    ``units``: :func:`pkwidgets.widgets._axes.unit_labels` (default: no
    units, said in words); ``bounds``: :func:`pkwidgets.widgets._fit_view.fit_bounds`
    (rows "95 % bounds" under λz, t½ and AUCIFO; left out when None).
    """
    u = units or unit_labels(None)
    g = {k: float(result[k][0]) for k in ("LAMZ", "LAMZHL", "R2ADJ", "LAMZNPT", "LAMZSPN", "LAMZLL",
                                           "LAMZUL", "AUCIFO", "AUCPEO", "AUCLST")}
    n = g["LAMZNPT"]
    window = "—" if not math.isfinite(g["LAMZLL"]) else f"{_fmt(g['LAMZLL'])} to {_fmt(g['LAMZUL'])}"
    ci = (lambda code: [("  95 % bounds", bounds_text(bounds, code))]) if bounds else (lambda code: [])
    return [
        (with_unit("λz", u["LAMZ"]), _fmt(g["LAMZ"])), *ci("LAMZ"),
        (with_unit("t½", u["LAMZHL"]), _fmt(g["LAMZHL"])), *ci("LAMZHL"),
        ("adjusted R²", "—" if not math.isfinite(g["R2ADJ"]) else f"{g['R2ADJ']:.4f}"),
        ("points in fit", str(int(n)) if math.isfinite(n) else "0"),
        (with_unit("fit from … to", u["time"]), window),
        ("span (half-lives)", _fmt(g["LAMZSPN"], 3)),
        (with_unit("AUCLST", u["AUCLST"]), _fmt(g["AUCLST"])),
        (with_unit("AUCIFO", u["AUCIFO"]), _fmt(g["AUCIFO"])), *ci("AUCIFO"),
        ("extrapolated share", "—" if not math.isfinite(g["AUCPEO"]) else f"{g['AUCPEO']:.1f} %"),
    ]


def flag_words(names, qc=None):
    """Flag names -> list of (severity, message) in words, review flags first."""
    q = qc or QCThresholds()
    items = [(FLAGS[n][0], flag_message(n, q)) for n in names]
    return sorted(items, key=lambda it: it[0] != "review")


def _indent(label):
    """Left padding of a readout label: labels given with leading spaces (sub-rows) are indented."""
    return "1.2em" if label.startswith(" ") else "0"


def readout_html(rows, flags, status=""):
    """HTML of the readout: a two-column table, then the flags as a list, then a status line.

    A label starting with spaces (the "95 % bounds" under a value) is drawn indented.
    """
    cells = "".join(
        f"<tr><th style='text-align:left;font-weight:normal;padding:1px 1em 1px {_indent(k)};white-space:nowrap'>"
        f"{html.escape(k.strip())}</th><td class='pkw-value' style='text-align:right;padding:1px 0;"
        f"font-variant-numeric:tabular-nums'>{html.escape(v)}</td></tr>"
        for k, v in rows)
    if flags:
        lis = "".join(
            f"<li><b>{'needs review' if sev == 'review' else 'note'}:</b> {html.escape(msg)}</li>"
            for sev, msg in flags)
        fl = f"<ul class='pkw-flags' style='margin:0.3em 0;padding-left:1.2em'>{lis}</ul>"
    else:
        fl = "<p class='pkw-flags' style='margin:0.3em 0'>No checks raised.</p>"
    st = f"<p class='pkw-status' style='margin:0.3em 0'>{html.escape(status)}</p>" if status else ""
    return (f"<div class='pkw-readout' style='line-height:1.4'><table style='border-collapse:collapse'>{cells}"
            f"</table>{fl}{st}</div>")


def toggle_time(excluded, t):
    """Add ``t`` to the excluded times, or remove it when it is already there (sorted list)."""
    t = float(t)
    keep = [float(x) for x in excluded if not math.isclose(float(x), t, rel_tol=1e-9, abs_tol=1e-12)]
    if len(keep) == len(list(excluded)):
        keep.append(t)
    return sorted(keep)


def window_from_brush(selected, times):
    """Fit window from a brushed time interval: snapped to the sampling times it contains.

    Returns None when fewer than two sampling times lie inside (no window).
    """
    if selected is None or len(selected) != 2:
        return None
    lo, hi = sorted(float(v) for v in selected)
    t = np.asarray(times, dtype=np.float64)
    inside = t[(t >= lo) & (t <= hi)]
    if inside.size < 2:
        return None
    return (float(inside.min()), float(inside.max()))


def needs_review(flags_row):
    """True if any raised flag has severity "review" (``flags_row``: iterable of names)."""
    return any(FLAGS[n][0] == "review" for n in flags_row)


def key_label(key, by):
    """'Subject 1' or 'Subject 1 · Period 2' for a canonical key tuple."""
    return " · ".join(f"{b} {k}" for b, k in zip(by, key))


def choice_summary(window, excluded):
    """Words for the current choice, e.g. 'window 2 to 24; left out: 9'."""
    parts = ["automatic search" if window is None else f"window {_fmt(window[0])} to {_fmt(window[1])}"]
    if excluded:
        parts.append("left out: " + ", ".join(_fmt(x) for x in excluded))
    return "; ".join(parts)


def fit_interval(result):
    """(LAMZLL, LAMZUL) of a one-profile result: the times of the first and last fit point (NaN if no fit)."""
    return float(result["LAMZLL"][0]), float(result["LAMZUL"][0])


#: Status lines of :func:`click_action` when a click changes nothing.
CLICK_BLQ = "samples below the LLOQ never enter the λz fit"
CLICK_NO_FIT = ("no λz fit to widen (too few points after the peak): switch to “drag a window” and drag "
                "across the terminal points to fit them")


def click_action(role, t, window, excluded, fit_range):
    """What a click on a point at time ``t`` does.

    Parameters
    ----------
    role : {"fit", "excluded", "other", "blq"}
        Role of the clicked point (:func:`profile_view`).
    t : float
        Its sampling time.
    window : (start, end) or None
        Current window (None: automatic search).
    excluded : sequence of float
        Times currently left out by hand.
    fit_range : (float, float)
        Current fit interval (:func:`fit_interval`); NaN when there is no fit.

    Returns
    -------
    window, excluded, message
        The new choice and a status line ("" when the click changed the choice):

        - a point in the fit is left out (added to ``excluded``);
        - a point left out by hand is taken back;
        - any other observation is brought into the fit: the window widens to
          reach it (from the window, or else the current fit interval); with
          no fit and no window there is nothing to widen (message
          :data:`CLICK_NO_FIT`);
        - a BLQ sample cannot enter the fit (message :data:`CLICK_BLQ`).
    """
    excluded = [float(x) for x in excluded]
    if role in ("fit", "excluded"):
        return window, toggle_time(excluded, t), ""
    if role == "other":
        base = window if window is not None else fit_range
        if base is None or not all(math.isfinite(v) for v in base):
            return window, excluded, CLICK_NO_FIT
        return (min(float(base[0]), float(t)), max(float(base[1]), float(t))), excluded, ""
    return window, excluded, CLICK_BLQ


def record_steps(previous, fingerprint, window, excluded):
    """Record entries that take a profile from its recorded selection to the one shown.

    Parameters
    ----------
    previous : SelectionState or None
        Latest recorded state of the profile (:meth:`SelectionRecord.state`).
    fingerprint : str
        Fingerprint of the data shown; a recorded state made on other data
        counts as automatic (the record restarts from automatic too).
    window : (start, end) or None
    excluded : list of float

    Returns
    -------
    list of tuple
        ``("reset",)``, ``("window", start, end)`` and ``("exclude", times)``
        in the order to append them; empty when the recorded selection is
        already the one shown.  A profile never recorded, shown with the
        automatic search, gets ``[("reset",)]`` so that the choice to keep
        the automatic search is recorded with its reason.
    """
    fresh = previous is not None and previous.fingerprint == fingerprint
    prev_window = previous.window if fresh else None
    prev_excl = previous.exclude if fresh else []
    excluded = [float(x) for x in excluded]
    if window is None and not excluded:
        return [] if fresh and prev_window is None and not prev_excl else [("reset",)]
    steps = []
    if window != prev_window:
        if window is None:
            steps.append(("reset",))
            prev_excl = []
        else:
            steps.append(("window", float(window[0]), float(window[1])))
    if excluded != prev_excl:
        steps.append(("exclude", excluded))
    return steps


def legend_html():
    """The picker's legend (every point role and both lines), drawn beside the figure, outside the data."""
    roles = [(ROLE_STYLE[r]["marker"], ROLE_STYLE[r]["colour"], ROLE_STYLE[r]["label"])
             for r in ("fit", "other", "excluded", "blq")]
    return _legend_html(roles + [("line", LINE_COLOUR, "λz fit"),
                                 ("dashed", LINE_COLOUR, "fit continued past the last sample")])
