"""Summaries and the comparison figure of a sampling-design evaluation (:func:`pkwidgets.evaluate_schedule`).

Percentiles are ``numpy.quantile`` with its default linear interpolation
(Hyndman & Fan type 7) over the profiles where the parameter was estimated.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .qc import FLAGS

__all__ = ["summarise", "plot_evaluation"]

#: Okabe-Ito colour-blind-safe colours, each paired with a marker shape.
_STYLE = [("#0072B2", "o"), ("#D55E00", "s"), ("#009E73", "^"), ("#CC79A7", "D"), ("#E69F00", "v"),
          ("#56B4E9", "P"), ("#F0E442", "X"), ("#000000", "*")]


def _stats(e):
    """(estimable %, median %, P5 %, P95 %) of relative errors ``e`` (NaN: not estimable)."""
    ok = e[np.isfinite(e)]
    if ok.size == 0:
        return 0.0, np.nan, np.nan, np.nan
    p05, med, p95 = np.quantile(ok, [0.05, 0.5, 0.95])
    return 100.0 * ok.size / e.size, 100.0 * med, 100.0 * p05, 100.0 * p95


def summarise(schedules, errors, counts, n):
    """Long summary, comparison table and flag shares.

    Parameters
    ----------
    schedules : dict of name to ndarray
        Sampling times of each schedule.
    errors : dict of name to dict of PPTESTCD to ndarray
        Relative errors per subject.
    counts : dict of name to dict of str to int
        Profiles with ``"AUCPEO > 20 %"`` and with each QC flag.
    n : int
        Subjects per schedule.

    Returns
    -------
    summary, table, flags : pandas.DataFrame
    """
    rows, wide, flag_rows = [], [], []
    for name, times in schedules.items():
        line = {"schedule": name, "samples": times.size, "last time": float(times[-1]),
                "AUCPEO > 20 % (%)": 100.0 * counts[name]["AUCPEO > 20 %"] / n}
        for code, e in errors[name].items():
            est, med, p05, p95 = _stats(e)
            rows.append({"schedule": name, "PPTESTCD": code, "estimable_pct": est, "median_pct": med,
                         "p05_pct": p05, "p95_pct": p95})
            line.update({f"{code} median %": med, f"{code} P5 %": p05, f"{code} P95 %": p95})
        wide.append(line)
        flag_rows.append({"schedule": name, **{f: 100.0 * counts[name].get(f, 0) / n for f in FLAGS
                                               if f in counts[name]}})
    flags = pd.DataFrame(flag_rows).set_index("schedule")
    return pd.DataFrame(rows), pd.DataFrame(wide), flags


def plot_evaluation(result, codes=None):
    """One panel per parameter: median (marker) and 90 % range (bar) of the relative error per schedule.

    A last panel shows the share of profiles with AUCPEO > 20 %.  Returns the
    matplotlib Figure.
    """
    import matplotlib.pyplot as plt

    summary = result.summary
    codes = list(codes or dict.fromkeys(summary["PPTESTCD"]))
    names = list(result.schedules)
    ncol = min(3, len(codes) + 1)
    nrow = -(-(len(codes) + 1) // ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.0 * ncol, 0.5 + (0.45 * len(names) + 1.0) * nrow), squeeze=False)
    y = np.arange(len(names))[::-1]
    for ax, code in zip(axes.flat, codes):
        part = summary[summary["PPTESTCD"] == code].set_index("schedule").reindex(names)
        for i, name in enumerate(names):
            colour, marker = _STYLE[i % len(_STYLE)]
            r = part.loc[name]
            ax.plot([r["p05_pct"], r["p95_pct"]], [y[i], y[i]], color=colour, lw=2.5)
            ax.plot(r["median_pct"], y[i], marker=marker, color=colour, ms=7, ls="none")
        ax.axvline(0.0, color="0.4", lw=0.8, ls="--")
        ax.set_title(f"{code}: relative error (%)", fontsize=10)
        ax.set_yticks(y, names if ax in axes[:, 0] else [""] * len(names))
    ax = axes.flat[len(codes)]
    share = result.table.set_index("schedule").reindex(names)["AUCPEO > 20 % (%)"]
    for i, name in enumerate(names):
        colour, marker = _STYLE[i % len(_STYLE)]
        ax.barh(y[i], share[name], color=colour, height=0.5)
        ax.plot(share[name], y[i], marker=marker, color=colour, ms=7, ls="none")
    ax.set_title("profiles with AUCPEO > 20 % (%)", fontsize=10)
    ax.set_yticks(y, names if ax in axes[:, 0] else [""] * len(names))
    for extra in axes.flat[len(codes) + 1:]:
        extra.set_visible(False)
    fig.suptitle(f"Schedules compared on {result.settings['n']:,} virtual subjects "
                 "(marker: median = bias; bar: 5th-95th percentile)", fontsize=10)
    fig.subplots_adjust(left=0.16, right=0.98, bottom=0.08, top=0.86, wspace=0.15, hspace=0.6)
    return fig
