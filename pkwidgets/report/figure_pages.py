"""Individual profiles as small multiples: a page of semi-log panels, each captioned with its λz fit.

A long study record is dominated by its per-profile figures; drawing them as
pages of ``per_page`` panels at a fixed size and resolution keeps a
200-profile record small and quick (see ``bench/record_speed.py``).  A profile
with no measurable concentration gets a line of text in its place, not empty
axes.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .tables import format_value

__all__ = ["PER_PAGE", "fit_caption", "plot_profile_pages"]

#: Panels per figure (4 columns).
PER_PAGE = 12
_COLUMNS = 4


def fit_caption(fit, time_unit="") -> str:
    r"""The λz diagnostics of one profile in one line.

    :math:`t_{1/2} = \ln 2 / \lambda_z`; R²adj, the number of points and the
    fit window [LAMZLL, LAMZUL], and "by hand" when the window was chosen by hand.

    Examples
    --------
    >>> fit_caption({"LAMZ": 0.1, "LAMZHL": 6.93, "R2ADJ": 0.991, "LAMZNPT": 4, "LAMZLL": 8.0, "LAMZUL": 24.0,
    ...              "manual": False}, "h")
    'λz 0.100 /h, t½ 6.93 h, R²adj 0.991,\n4 pts, 8.00–24.0 h'
    """
    lam = fit.get("LAMZ", np.nan)
    if not np.isfinite(lam):
        return "λz not estimable"
    unit = f" {time_unit}" if time_unit else ""
    text = (f"λz {format_value(lam)} /{time_unit or 'time'}, t½ {format_value(fit.get('LAMZHL'))}{unit}, "
            f"R²adj {format_value(fit.get('R2ADJ'))},\n{format_value(fit.get('LAMZNPT'), count=True)} pts, "
            f"{format_value(fit.get('LAMZLL'))}–{format_value(fit.get('LAMZUL'))}{unit}")
    return text + (", by hand" if fit.get("manual") else "")


def _panel(ax, prof, conc_col, time_unit) -> None:
    """One profile on semi-log axes: used filled, not used open, λz points ringed, the fit dashed."""
    s = prof.samples
    t = s["nca_time"].to_numpy(dtype=np.float64)
    c = pd.to_numeric(s[conc_col], errors="coerce").to_numpy(dtype=np.float64)
    used, lz = s["nca_used"].to_numpy(bool), s["nca_lambda_z"].to_numpy(bool)
    ok = np.isfinite(c) & (c > 0) & np.isfinite(t)
    order = np.argsort(t)
    keep = order[ok[order]]
    ax.plot(t[keep], c[keep], "-", color="0.6", lw=0.7)
    ax.plot(t[used & ok], c[used & ok], "o", color="#0072B2", ms=3)
    ax.plot(t[~used & ok], c[~used & ok], "s", mfc="none", color="0.45", ms=3)
    ax.plot(t[lz & ok], c[lz & ok], "o", mfc="none", mec="#D55E00", ms=7, mew=1.1)
    fit, p = prof.fit, prof.parameters
    lam, clp, tl = fit["LAMZ"], p.get("CLSTP", np.nan), p.get("TLST", np.nan)
    if np.isfinite([lam, clp, tl, fit["LAMZLL"], fit["LAMZUL"]]).all():
        tt = np.linspace(fit["LAMZLL"], fit["LAMZUL"], 20)
        ax.plot(tt, clp * np.exp(-lam * (tt - tl)), "--", color="#D55E00", lw=1)
    from matplotlib.ticker import NullFormatter

    ax.set_yscale("log")
    ax.yaxis.set_minor_formatter(NullFormatter())
    ax.set_title(f"{prof.label}\n{fit_caption(fit, time_unit)}", fontsize=7, loc="left", pad=2)
    ax.tick_params(labelsize=7, pad=1)


def plot_profile_pages(result, keys=None, *, per_page=PER_PAGE, conc_unit="", time_unit="", dpi=80):
    """Figures of up to ``per_page`` profiles each (semi-log, 4 per row), captioned with their λz fits.

    Parameters
    ----------
    result : NCAResult
    keys : sequence, optional
        Profile keys in display order; default every profile, keys in natural order.
    per_page : int
        Panels per figure.

    Returns
    -------
    list of matplotlib.figure.Figure
        One per page; a profile with no measurable concentration is a line
        of text in its slot.
    """
    import matplotlib.pyplot as plt

    from .tables import natural_sort

    by = list(result.by)
    if keys is None:  # every profile, subjects in natural order (S2 before S10)
        ordered = natural_sort(result.parameters[by], by)
        keys = [tuple(r) if len(by) > 1 else r[0] for r in ordered.itertuples(index=False)]
    conc_col = result.settings["columns"]["conc"]
    figures = []
    for start in range(0, len(keys), per_page):
        chunk = keys[start:start + per_page]
        rows = -(-len(chunk) // _COLUMNS)
        fig, axes = plt.subplots(rows, _COLUMNS, figsize=(12, 2.8 * rows), dpi=dpi, squeeze=False,
                                 gridspec_kw=dict(left=0.06, right=0.99, bottom=0.2 / rows, top=1 - 0.3 / rows,
                                                  wspace=0.25, hspace=0.95))
        for ax, key in zip(axes.flat, chunk):
            prof = result.profile(key)
            c = pd.to_numeric(prof.samples[conc_col], errors="coerce")
            if not (c > 0).any():
                ax.axis("off")
                ax.text(0.0, 0.5, f"{prof.label}: no measurable concentration (not plotted)", fontsize=8,
                        transform=ax.transAxes, va="center")
                continue
            _panel(ax, prof, conc_col, time_unit)
        for ax in list(axes.flat)[len(chunk):]:
            ax.axis("off")
        fig.supxlabel(f"Time after dose ({time_unit})" if time_unit else "Time after dose", fontsize=8)
        fig.supylabel(f"Concentration ({conc_unit}), log scale" if conc_unit else "Concentration, log scale",
                      fontsize=8)
        figures.append(fig)
    return figures
