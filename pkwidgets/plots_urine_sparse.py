"""Static figures of the urine and sparse-sampling analyses (matplotlib, imported when called).

Colours from the Okabe-Ito colour-blind-safe palette, each paired with a marker shape; every axis
names its unit.  No computation happens here: the figures draw the result objects as they are.
"""

from __future__ import annotations

import numpy as np

__all__ = ["plot_excretion", "plot_mean_profiles_sparse"]

_COLOURS = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000"]
_MARKERS = ["o", "s", "^", "D", "v", "P", "X", "*"]


def plot_excretion(result, *, time_unit=None, max_profiles=24):
    """Cumulative amount excreted (left) and excretion rate at interval midpoints, semi-log (right).

    Rates in the lambda-z fit are ringed; the fitted line is dashed.  At most ``max_profiles`` profiles
    (the first ones) are drawn, and the title says so when there are more.
    """
    import matplotlib.pyplot as plt

    by = result.settings["by"]
    tu = time_unit or result.settings["units"]["time"]
    au = result.units.get("RCAMINT", "")
    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(11, 4))
    iv = result.intervals[result.intervals["used"]]
    params = result.parameters.set_index(by)
    groups = list(iv.groupby(by, sort=False))
    for k, (key, g) in enumerate(groups[:max_profiles]):
        col, mk = _COLOURS[k % len(_COLOURS)], _MARKERS[(k + k // len(_COLOURS)) % len(_MARKERS)]
        label = key if not isinstance(key, tuple) else " / ".join(map(str, key))
        ax1.plot(np.r_[g["start"].iloc[0], g["end"]], np.r_[0.0, g["cumulative"]], marker=mk, color=col,
                 label=str(label), lw=1)
        pos = g["rate"] > 0
        ax2.semilogy(g.loc[pos, "midpoint"], g.loc[pos, "rate"], marker=mk, ls="", color=col)
        fit = g[g["lambda_z"]]
        ax2.semilogy(fit["midpoint"], fit["rate"], marker="o", ls="", mfc="none", mec="k", ms=10)
        p = params.loc[key[0] if isinstance(key, tuple) and len(by) == 1 else key]
        if np.isfinite(p["LAMZ"]) and len(fit):
            t = np.linspace(p["LAMZLL"], p["LAMZUL"], 20)
            c0 = np.exp(np.mean(np.log(fit["rate"]) + p["LAMZ"] * fit["midpoint"]))
            ax2.semilogy(t, c0 * np.exp(-p["LAMZ"] * t), ls="--", color=col, lw=1)
    ax1.set(xlabel=f"time after the dose ({tu})", ylabel=f"cumulative amount excreted ({au})",
            title="Cumulative urinary excretion")
    ax2.set(xlabel=f"interval midpoint ({tu})", ylabel=f"excretion rate ({result.units.get('ERMAX', '')})",
            title="Excretion rate (ringed: in the λz fit)")
    ax1.legend(fontsize=7, ncol=2, title=", ".join(by), title_fontsize=7)
    if len(groups) > max_profiles:
        fig.suptitle(f"first {max_profiles} of {len(groups)} profiles", fontsize=9)
    fig.tight_layout()
    return fig


def plot_mean_profiles_sparse(result, *, sd_bars=True):
    """Mean profile of each group (± SD bars), linear and semi-log side by side; AUCLST points filled."""
    import matplotlib.pyplot as plt

    group = result.settings["group"]
    tu, cu = result.settings["units"]["time"], result.settings["units"]["conc"]
    fig, axes = plt.subplots(1, 2, figsize=(11, 4))
    mp = result.mean_profile
    for k, (key, g) in enumerate(mp.groupby(group, sort=False)):
        col, mk = _COLOURS[k % len(_COLOURS)], _MARKERS[(k + k // len(_COLOURS)) % len(_MARKERS)]
        label = " / ".join(map(str, key if isinstance(key, tuple) else (key,)))
        for ax, log in zip(axes, (False, True)):
            shown = g[g["mean"] > 0] if log else g
            ax.errorbar(shown["time"], shown["mean"], yerr=shown["sd"] if sd_bars else None, color=col, marker=mk,
                        mfc=col, capsize=2, lw=1, label=label)
            out = shown[~shown["in_auclst"].astype(bool)]
            ax.plot(out["time"], out["mean"], ls="", marker=mk, mfc="white", mec=col)
            if log:
                ax.set_yscale("log")
    for ax, scale in zip(axes, ("linear", "semi-log")):
        ax.set(xlabel=f"nominal time after the dose ({tu})", ylabel=f"mean concentration ({cu})",
               title=f"Mean profiles ± SD ({scale})")
    axes[0].legend(fontsize=7, title=", ".join(group), title_fontsize=7)
    fig.tight_layout()
    return fig
