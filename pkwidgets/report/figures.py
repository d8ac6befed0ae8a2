"""Static figures of an analysis: all profiles, one profile with its lambda-z fit, mean profiles.

Figures are drawn with matplotlib (imported when a figure is drawn, not at
import) and embedded in the notebook as PNG, so the HTML record shows them
with no network and no JavaScript.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .labels import group_labels

__all__ = ["plot_all_profiles", "plot_profile", "plot_mean_profiles"]

#: Fixed margins (constrained layout costs more than the drawing itself on a long record).
_GRID = dict(left=0.08, right=0.98, bottom=0.14, top=0.9, wspace=0.25)


def _numeric(s):
    return pd.to_numeric(s, errors="coerce")


def _numeric_or_text(s):
    """A column as numbers when every value reads as one (for ordering), else as text."""
    num = pd.to_numeric(s, errors="coerce")
    return num if num.notna().all() else s.astype(str)


def plot_all_profiles(rows, *, time, conc, by, conc_unit="", time_unit="", color_by=None, group_units=None):
    """All profiles on one figure, linear and semi-log side by side.

    Parameters
    ----------
    rows : DataFrame
        Input rows (e.g. ``NCAResult.samples``); non-numeric concentrations
        (BLQ text, empty) are not drawn.
    time, conc : str
        Column names.
    by : list of str
        Profile key columns (one line per profile).
    color_by : str or list of str, optional
        Column(s) whose values share a colour (e.g. the dose group); groups
        are ordered by value (10 before 100) and labelled as in
        :func:`group_labels`.
    group_units : dict, optional
        Column -> unit for the legend (the dose column -> ``"mg"``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw=_GRID)
    d = pd.DataFrame({"t": _numeric(rows[time]), "c": _numeric(rows[conc])})
    keys = rows[by].astype(str).agg(" ".join, axis=1)
    color_by = [color_by] if isinstance(color_by, str) else list(color_by or [])
    groups = group_labels(rows, color_by, group_units) if color_by else pd.Series("", index=rows.index)
    order = rows[color_by].apply(_numeric_or_text) if color_by else pd.DataFrame(index=rows.index)
    ordered = (pd.concat([order, groups.rename("__label__")], axis=1).drop_duplicates("__label__")
               .sort_values(color_by, na_position="last")["__label__"] if color_by else pd.Series([""]))
    palette = {g: f"C{i % 10}" for i, g in enumerate(ordered)}
    for ax, log in zip(axes, (False, True)):
        for k in keys.unique():
            m = (keys == k).to_numpy()
            sub = d[m].dropna().sort_values("t")
            if log:
                sub = sub[sub["c"] > 0]
            ax.plot(sub["t"], sub["c"], "-o", ms=2.5, lw=0.8, alpha=0.75, color=palette[groups[m].iloc[0]])
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Concentration ({conc_unit})" if conc_unit else "Concentration")
        ax.set_yscale("log" if log else "linear")
        ax.set_title("semi-log" if log else "linear")
    if color_by:
        handles = [plt.Line2D([], [], color=c, marker="o", lw=1) for c in palette.values()]
        axes[0].legend(handles, list(palette), fontsize=8)
    return fig


def plot_profile(result, key, *, time=None, conc=None, conc_unit="", time_unit=""):
    """One profile, linear and semi-log, with the lambda-z fit marked.

    Used samples are filled circles, unused ones open; samples in the
    lambda-z fit are ringed and the fitted line
    :math:`\\hat C(t) = C_{last,pred} e^{-\\lambda_z (t - t_{last})}` (CLSTP,
    LAMZ, TLST from the table) is drawn over the fit interval
    [LAMZLL, LAMZUL].

    Parameters
    ----------
    result : NCAResult
    key : profile key
        A ``by`` value (tuple for several columns), a dict, or a row of
        ``result.parameters`` (filtered or sorted copies work: the profile is
        found by its key, never by position).
    time, conc : str, optional
        Unused (kept for old calls): times are the times after the dose the
        analysis used, concentrations the input column of ``result.settings``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    prof = result.profile(key)
    sub = prof.samples
    t = sub["nca_time"].to_numpy(dtype=np.float64)
    c = _numeric(sub[result.settings["columns"]["conc"]]).to_numpy()
    used = sub["nca_used"].to_numpy()
    lz = sub["nca_lambda_z"].to_numpy()
    row = prof.parameters
    key = prof.label
    fig, axes = plt.subplots(1, 2, figsize=(10, 3.4), gridspec_kw=_GRID)
    order = np.argsort(t)
    for ax, log in zip(axes, (False, True)):
        ok = ~np.isnan(c) & (c > 0 if log else True)
        ax.plot(t[order][ok[order]], c[order][ok[order]], "-", color="0.6", lw=0.8)
        ax.plot(t[used & ok], c[used & ok], "o", color="C0", ms=4, label="used")
        ax.plot(t[~used & ok], c[~used & ok], "o", mfc="none", color="C7", ms=4, label="not used")
        ax.plot(t[lz & ok], c[lz & ok], "o", mfc="none", mec="C3", ms=9, mew=1.4, label="λz fit points")
        lam, clp, tl = row.get("LAMZ", np.nan), row.get("CLSTP", np.nan), row.get("TLST", np.nan)
        lo, hi = row.get("LAMZLL", np.nan), row.get("LAMZUL", np.nan)
        if np.isfinite([lam, clp, tl, lo, hi]).all():
            tt = np.linspace(lo, hi, 50)
            ax.plot(tt, clp * np.exp(-lam * (tt - tl)), "--", color="C3", lw=1.2,
                    label=f"λz fit, t½ {np.log(2) / lam:.3g} {time_unit}")
        ax.set_yscale("log" if log else "linear")
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Concentration ({conc_unit})" if conc_unit else "Concentration")
        ax.set_title(f"{key} — {'semi-log' if log else 'linear'}", fontsize=9)
    axes[1].legend(fontsize=7)
    return fig


def plot_mean_profiles(means, *, group_by, time_unit="", conc_unit="", group_units=None):
    """Mean ± SD concentration by group, linear and semi-log.

    On the semi-log panel only the upper bar (mean + SD) is drawn, since
    mean − SD may be 0 or negative; points with a mean of 0 are left out there.

    Parameters
    ----------
    means : DataFrame
        From :func:`pkwidgets.summary.mean_profiles`: group columns, ``time``,
        ``n``, ``mean``, ``sd``.
    group_by : list of str or None
    group_units : dict, optional
        Column -> unit for the legend (the dose column -> ``"mg"``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw=_GRID)
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    labels = group_labels(means, group_by, group_units)
    for i, g in enumerate(dict.fromkeys(labels)):
        m = means[(labels == g).to_numpy()]
        for ax, log in zip(axes, (False, True)):
            keep = (m["mean"] > 0).to_numpy() if log else np.ones(len(m), bool)
            sd = m["sd"].fillna(0).to_numpy()[keep]
            mu = m["mean"].to_numpy()[keep]
            lower = np.zeros_like(sd) if log else sd  # semi-log: upper bar only (a lower bar can cross 0)
            ax.errorbar(m["time"].to_numpy()[keep], mu, yerr=[lower, sd], fmt="-o", ms=3, lw=1, capsize=2,
                        color=f"C{i % 10}", label=g)
    for ax, log in zip(axes, (False, True)):
        ax.set_yscale("log" if log else "linear")
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Mean ± SD ({conc_unit})" if conc_unit else "Mean ± SD")
        ax.set_title("semi-log" if log else "linear")
    axes[0].legend(fontsize=8)
    return fig
