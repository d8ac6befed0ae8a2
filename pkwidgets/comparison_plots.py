"""Static figures of treatment comparisons and dose proportionality (matplotlib, imported when called).

Each figure states its units and keeps its legend outside the data area.
Colours are from the Okabe-Ito colour-blind-safe palette and always paired
with a marker shape.  No computation here beyond arranging the numbers of a
:class:`~pkwidgets.compare.Comparison` or
:class:`~pkwidgets.proportionality.Proportionality`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["plot_ratios", "plot_subject_ratios", "plot_dose_proportionality"]

#: Okabe-Ito palette (Okabe & Ito, Color Universal Design, 2008).
_BLUE, _ORANGE, _GREEN, _VERMILION, _GREY = "#0072B2", "#E69F00", "#009E73", "#D55E00", "#7f7f7f"
_OUTSIDE = dict(loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0, fontsize=8, frameon=False)


def _limit_lines(ax, lo, hi, vertical):
    line = ax.axvline if vertical else ax.axhline
    line(100.0, color=_GREY, lw=0.8, label="100 % (equal)")
    line(100.0 * lo, color=_VERMILION, ls="--", lw=1.0, label=f"limits {100 * lo:.2f}-{100 * hi:.2f} %")
    line(100.0 * hi, color=_VERMILION, ls="--", lw=1.0)


def _plain_log(axis):
    """Log-axis labels as plain numbers (10, 20, 50 ...) instead of powers of ten."""
    from matplotlib.ticker import FuncFormatter

    lo, hi = sorted(axis.get_view_interval())
    few = np.log10(hi / lo) < 1.5 if lo > 0 else False

    def minor(v, _):
        return f"{v:g}" if few and v > 0 and round(v / 10 ** np.floor(np.log10(v))) in (2, 5) else ""

    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    axis.set_minor_formatter(FuncFormatter(minor))


def plot_ratios(comparison):
    """Forest plot: geometric mean ratio (%) and its interval per parameter, with the acceptance limits.

    Parameters
    ----------
    comparison : Comparison
        From :func:`pkwidgets.compare_treatments`.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    tab = comparison.table
    fig, ax = plt.subplots(figsize=(9, 0.55 * len(tab) + 1.4))
    fig.subplots_adjust(left=0.2, right=0.66, bottom=0.3 if len(tab) < 3 else 0.18, top=0.88)
    y = np.arange(len(tab))[::-1]
    ok = tab["within_limits"].to_numpy(bool)
    for mask, colour, marker, label in ((ok, _BLUE, "o", "CI within limits"), (~ok, _ORANGE, "s", "CI not within")):
        if mask.any():
            r = tab[mask]
            err = [100 * (r["ratio"] - r["lower"]), 100 * (r["upper"] - r["ratio"])]
            ax.errorbar(100 * r["ratio"], y[mask], xerr=err,
                        fmt=marker, color=colour, capsize=3, ms=6, label=label)
    lo, hi = float(tab["limit_low"].min()), float(tab["limit_high"].max())
    _limit_lines(ax, lo, hi, vertical=True)
    ax.set_xscale("log")
    span = 100 * np.r_[tab["lower"].dropna(), tab["upper"].dropna(), lo, hi]
    ticks = [t for t in (10, 16, 25, 32, 40, 50, 64, 80, 100, 125, 156, 200, 250, 320, 400, 640, 1000)
             if span.min() / 1.3 <= t <= span.max() * 1.3]
    ax.set_xticks(ticks, [str(t) for t in ticks])
    ax.minorticks_off()
    ax.set_yticks(y, tab["parameter"])
    ax.set_xlabel(f"{comparison.test} / {comparison.reference}: geometric mean ratio (%), "
                  f"{100 * comparison.level:g} % CI (log scale)")
    ax.set_title(comparison.model.split(":")[0], fontsize=9)
    ax.legend(**_OUTSIDE)
    return fig


def plot_subject_ratios(comparison, *, ncols=3):
    """Per-subject test/reference ratios (%) per parameter, with the geometric mean ratio, its CI and the limits.

    Subjects are ordered by name; the marker shape shows the sequence.  Only
    subjects with both treatments appear (``comparison.pairs``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    pairs, tab = comparison.pairs, comparison.table.set_index("parameter")
    codes = [c for c in tab.index if c in set(pairs["parameter"])]
    nrows = max(1, -(-len(codes) // ncols))
    fig, axes = plt.subplots(nrows, ncols, figsize=(11, 3.0 * nrows), squeeze=False)
    fig.subplots_adjust(left=0.07, right=0.84, bottom=0.12, top=0.9, hspace=0.6, wspace=0.4)
    markers = dict(zip(sorted(pairs["sequence"].astype(str).unique()), "o^sDv<>"))
    colours = dict(zip(markers, (_BLUE, _GREEN, _ORANGE, _VERMILION, _GREY, _BLUE, _GREEN)))
    for ax, code in zip(axes.ravel(), codes):
        p = pairs[pairs["parameter"] == code].sort_values("subject")
        x = np.arange(len(p))
        for seq, m in markers.items():
            sel = (p["sequence"].astype(str) == seq).to_numpy()
            if sel.any():
                ax.plot(x[sel], 100 * p["ratio"].to_numpy()[sel], m, color=colours[seq], ms=5,
                        label=f"sequence {seq}" if seq else "subject")
        r = tab.loc[code]
        ax.axhspan(100 * r["lower"], 100 * r["upper"], color=_BLUE, alpha=0.15,
                   label=f"{100 * comparison.level:g} % CI")
        ax.axhline(100 * r["ratio"], color=_BLUE, lw=1.2, label="geometric mean ratio")
        _limit_lines(ax, r["limit_low"], r["limit_high"], vertical=False)
        ax.set_xticks(x, p["subject"].astype(str), rotation=90, fontsize=6)
        ax.set_title(code, fontsize=9)
        ax.set_ylabel("test / reference (%)")
    for ax in axes.ravel()[len(codes):]:
        ax.set_visible(False)
    if codes:
        axes.ravel()[min(ncols, len(codes)) - 1].legend(**_OUTSIDE)
    fig.suptitle(f"{comparison.test} / {comparison.reference} per subject", fontsize=10)
    return fig


def plot_dose_proportionality(result, parameter, *, dose_unit="", unit=""):
    """Power model and dose-normalised values of one parameter.

    Left: values against dose (log-log) with the fitted power line and the
    line of proportionality through the geometric mean.  Right: value / dose
    against dose with the geometric mean per dose and its 90 % t interval of
    the ln values.

    Parameters
    ----------
    result : Proportionality
        From :func:`pkwidgets.dose_proportionality`.
    parameter : str
        A parameter of ``result.table``.
    dose_unit, unit : str
        Units for the axis labels (dose, parameter).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt
    from scipy import stats

    row = result.table.set_index("parameter").loc[parameter]
    d = result.data[result.data["parameter"] == parameter]
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(11, 3.8))
    fig.subplots_adjust(left=0.08, right=0.78, bottom=0.15, top=0.86, wspace=0.35)
    a1.plot(d["dose"], d["value"], "o", color=_BLUE, ms=4, alpha=0.8, label="profile")
    xs = np.geomspace(d["dose"].min(), d["dose"].max(), 50)
    a1.plot(xs, np.exp(row["intercept"]) * xs ** row["slope"], "-", color=_VERMILION,
            label=f"power model, b = {row['slope']:.3f}")
    gx, gy = np.exp(np.mean(np.log(d["dose"]))), np.exp(np.mean(np.log(d["value"])))
    a1.plot(xs, gy * xs / gx, ":", color=_GREY, label="proportional (b = 1)")
    a1.set(xscale="log", yscale="log", xlabel=f"Dose ({dose_unit})" if dose_unit else "Dose",
           ylabel=f"{parameter} ({unit})" if unit else parameter, title=f"{parameter}: power model (log-log)")
    groups = d.groupby("dose")["normalised"]
    q = (1 + result.level) / 2
    g = pd.DataFrame({"m": groups.apply(lambda v: np.mean(np.log(v))),
                      "s": groups.apply(lambda v: np.std(np.log(v), ddof=1)), "n": groups.size()})
    half = stats.t.ppf(q, np.maximum(g["n"] - 1, 1)) * g["s"] / np.sqrt(g["n"])
    a2.plot(d["dose"], d["normalised"], "o", color=_BLUE, ms=3, alpha=0.5, label="profile")
    gm = np.exp(g["m"])
    a2.errorbar(g.index, gm, yerr=[gm - np.exp(g["m"] - half), np.exp(g["m"] + half) - gm],
                fmt="s", color=_ORANGE, capsize=3, ms=6, label=f"geometric mean, {100 * result.level:g} % CI")
    a2.axhline(np.exp(np.mean(np.log(d["normalised"]))), color=_GREY, ls=":", label="overall geometric mean")
    norm_unit = f"{unit}/{dose_unit}" if unit and dose_unit else ""
    a2.set(xscale="log", yscale="log", xlabel=f"Dose ({dose_unit})" if dose_unit else "Dose",
           ylabel=f"{parameter} / dose ({norm_unit})" if norm_unit else f"{parameter} / dose",
           title=f"{parameter}: dose-normalised")
    for ax in (a1, a2):
        _plain_log(ax.xaxis)
        _plain_log(ax.yaxis)
    h1, l1 = a1.get_legend_handles_labels()
    h2, l2 = a2.get_legend_handles_labels()
    a2.legend(h1[1:] + h2[1:], l1[1:] + l2[1:], **_OUTSIDE)
    return fig
