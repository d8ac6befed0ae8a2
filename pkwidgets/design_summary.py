"""Summaries and the comparison figure of a sampling-design evaluation (:func:`pkwidgets.evaluate_schedule`).

Percentiles are ``numpy.quantile`` with its default linear interpolation
(Hyndman & Fan type 7) over the profiles where the parameter was estimated.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .qc import FLAGS

__all__ = ["summarise", "plot_evaluation", "plot_schedules", "design_info"]

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


def plot_schedules(model, schedules, *, n=500, seed=0, time_unit="", conc_unit=""):
    """The model's concentrations over time (median and 5th-95th percentile of ``n`` virtual subjects,
    without residual error, semi-log) above the sampling times of each schedule.  Returns the Figure."""
    import matplotlib.pyplot as plt

    from .design_curves import concentration
    from .design_models import draw_subjects

    named = {str(k): np.asarray(v, dtype=float) for k, v in schedules.items()}
    end = max(float(t[-1]) for t in named.values())
    grid = np.linspace(0.0, end, 400)
    conc = concentration(model, draw_subjects(model, n, np.random.default_rng(seed)), grid)
    lo, med, hi = np.quantile(conc, [0.05, 0.5, 0.95], axis=0)
    fig, (top, rug) = plt.subplots(2, 1, figsize=(8.0, 4.2 + 0.3 * len(named)), sharex=True,
                                   gridspec_kw={"height_ratios": [3.0, 0.4 + 0.3 * len(named)]})
    top.fill_between(grid, lo, hi, color="#56B4E9", alpha=0.35, lw=0, label="5th-95th percentile")
    top.plot(grid, med, color="#0072B2", lw=2, label="median")
    if model.lloq is not None:
        top.axhline(model.lloq, color="#D55E00", ls="--", lw=1, label="LLOQ")
    top.set_yscale("log")
    floor = max(float(np.min(med[med > 0])) if np.any(med > 0) else 1e-3, 1e-4 * float(np.max(hi)))
    top.set_ylim(floor if model.lloq is None else min(floor, model.lloq / 3), 2.0 * float(np.max(hi)))
    top.set_ylabel(f"concentration ({conc_unit})" if conc_unit else "concentration")
    top.set_title(f"Model curve of {n} virtual subjects (no residual error) and the candidate schedules", fontsize=10)
    top.legend(fontsize=8, loc="upper right")
    for i, (name, times) in enumerate(named.items()):
        colour, marker = _STYLE[i % len(_STYLE)]
        rug.plot(times, np.full(times.size, -i), marker=marker, color=colour, ls="none", ms=6)
    rug.set_yticks(-np.arange(len(named)), list(named))
    rug.set_ylim(-len(named) + 0.5, 0.5)
    rug.set_xlabel(f"time after dose ({time_unit})" if time_unit else "time after dose")
    fig.subplots_adjust(left=0.2, right=0.98, bottom=0.12, top=0.92, hspace=0.08)
    return fig


def design_info(result, *, notebook, parameters, now=None) -> dict:
    """Record header of a design run, in the shape of :func:`pkwidgets.report.run_info` (no data file:
    the profiles are simulated; the seed makes the run repeatable)."""
    import datetime as _dt

    from .report import CAUTION, software_versions

    now = now or _dt.datetime.now(_dt.timezone.utc)
    software = software_versions()
    return _plain({
        "notebook": notebook,
        "data_file": "none: virtual subjects simulated from the model (synthetic)",
        "data_sha256": "",
        "pkwidgets_version": software["pkwidgets"],
        "software": software,
        "date": now.replace(microsecond=0).isoformat(),
        "parameters": parameters,
        "settings": {**result.settings, "schedules": result.schedules},
        "caution": CAUTION,
    })


def _plain(value):
    """JSON-friendly copy: tuples to lists, NumPy scalars to Python, non-finite floats to None."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value
