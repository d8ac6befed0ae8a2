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

__all__ = ["PER_PAGE", "ProfilePage", "fit_caption", "short_label", "plot_profile_pages"]

#: Panels per figure (4 columns).
PER_PAGE = 12
_COLUMNS = 4


def short_label(key, width=44) -> str:
    """A profile key short enough for a panel title: ``subject S101``, or the values ``01-701-1192 · XAN · PLASMA``.

    Examples
    --------
    >>> short_label({"subject": "S101"}), short_label({"USUBJID": "01-701-1192", "PCTESTCD": "XAN"})
    ('subject S101', '01-701-1192 · XAN')
    """
    from .tables import key_text

    items = list(dict(key).items())
    text = f"{items[0][0]} {key_text(items[0][1])}" if len(items) == 1 else " · ".join(key_text(v) for _, v in items)
    return text if len(text) <= width else text[:width - 1] + "…"


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


def _decades(ax, y) -> None:
    """Log-scale ticks on an axis of log10 values: one labelled tick per decade, written as plain numbers.

    Plotting log10 C on linear axes draws the same picture as a log axis at
    about two thirds of the cost (no log locator, no mathtext tick labels).
    """
    from matplotlib.ticker import FixedLocator, FuncFormatter

    lo, hi = np.floor(np.nanmin(y)), np.ceil(np.nanmax(y))
    ax.set_ylim(lo - 0.05, hi + 0.05)
    ax.yaxis.set_major_locator(FixedLocator(np.arange(lo, hi + 1)))
    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{10 ** v:g}"))


class ProfilePage:
    """One page of profile panels as PNG (shown as an image in Jupyter and in the record).

    Attributes
    ----------
    png : bytes
    labels : list of str
        The profiles on the page, in panel order.
    number, pages : int
    """

    def __init__(self, png, labels, number, pages):
        self.png, self.labels, self.number, self.pages = png, labels, number, pages

    def _repr_png_(self) -> bytes:
        return self.png

    def __repr__(self) -> str:
        return f"profiles page {self.number} of {self.pages}: {self.labels[0]} to {self.labels[-1]}"


class _Panels:
    """A figure of panels drawn once and re-used page after page (only the data, titles and ticks change)."""

    def __init__(self, rows, conc_unit, time_unit, dpi):
        from matplotlib.figure import Figure  # not pyplot: the page is never shown as a live figure

        self.fig = Figure(figsize=(12, 2.8 * rows), dpi=dpi)
        grid = self.fig.add_gridspec(rows, _COLUMNS, left=0.06, right=0.99, bottom=0.2 / rows, top=1 - 0.3 / rows,
                                     wspace=0.25, hspace=0.95)
        self.axes = [self.fig.add_subplot(grid[i // _COLUMNS, i % _COLUMNS]) for i in range(rows * _COLUMNS)]
        styles = [dict(ls="-", color="0.6", lw=0.7), dict(ls="", marker="o", color="#0072B2", ms=3),
                  dict(ls="", marker="s", mfc="none", color="0.45", ms=3),
                  dict(ls="", marker="o", mfc="none", mec="#D55E00", ms=7, mew=1.1),
                  dict(ls="--", color="#D55E00", lw=1)]
        self.lines = [[ax.plot([], [], **st)[0] for st in styles] for ax in self.axes]
        self.notes = [ax.text(0.0, 0.5, "", fontsize=8, transform=ax.transAxes, va="center") for ax in self.axes]
        for ax in self.axes:
            ax.tick_params(labelsize=7, pad=1)
        self.fig.supxlabel(f"Time after dose ({time_unit})" if time_unit else "Time after dose", fontsize=8)
        self.fig.supylabel(f"Concentration ({conc_unit}), log scale" if conc_unit else "Concentration, log scale",
                           fontsize=8)

    def show(self, i, prof, conc_col, time_unit) -> None:
        """Draw profile ``prof`` in panel ``i`` (a line of text when it has no measurable concentration)."""
        ax, lines, note = self.axes[i], self.lines[i], self.notes[i]
        s = prof.samples
        t = s["nca_time"].to_numpy(dtype=np.float64)
        c = pd.to_numeric(s[conc_col], errors="coerce").to_numpy(dtype=np.float64)
        ok = np.isfinite(c) & (c > 0) & np.isfinite(t)
        if not ok.any():
            self.blank(i, f"{short_label(prof.key)}: no measurable concentration (not plotted)")
            return
        ax.set_axis_on()
        note.set_text("")
        y = np.full_like(c, np.nan)
        y[ok] = np.log10(c[ok])
        used, lz = s["nca_used"].to_numpy(bool), s["nca_lambda_z"].to_numpy(bool)
        order = np.argsort(t)
        keep = order[ok[order]]
        lines[0].set_data(t[keep], y[keep])
        for line, m in zip(lines[1:4], (used & ok, ~used & ok, lz & ok)):
            line.set_data(t[m], y[m])
        lines[4].set_data(*_fit_line(prof))
        _decades(ax, y[ok])
        ax.set_xlim(*_pad(np.nanmin(t[ok]), np.nanmax(t[ok])))
        ax.set_title(f"{short_label(prof.key)}\n{fit_caption(prof.fit, time_unit)}", fontsize=7, loc="left", pad=2)

    def blank(self, i, text="") -> None:
        ax = self.axes[i]
        for line in self.lines[i]:
            line.set_data([], [])
        ax.set_title("")
        ax.set_axis_off()
        self.notes[i].set_text(text)

    def png(self) -> bytes:
        import io

        from matplotlib.backends.backend_agg import FigureCanvasAgg

        buf = io.BytesIO()
        FigureCanvasAgg(self.fig).print_png(buf)
        return buf.getvalue()


def _pad(lo, hi):
    span = (hi - lo) or 1.0
    return lo - 0.04 * span, hi + 0.04 * span


def _fit_line(prof):
    """The λz line over the fit window, as (times, log10 C); empty when there is no fit."""
    fit, p = prof.fit, prof.parameters
    lam, clp, tl = fit["LAMZ"], p.get("CLSTP", np.nan), p.get("TLST", np.nan)
    if not (np.isfinite([lam, clp, tl, fit["LAMZLL"], fit["LAMZUL"]]).all() and clp > 0):
        return [], []
    tt = np.array([fit["LAMZLL"], fit["LAMZUL"]])  # a straight line on the log scale
    return tt, np.log10(clp) - lam * (tt - tl) / np.log(10)


def plot_profile_pages(result, keys=None, *, per_page=PER_PAGE, conc_unit="", time_unit="", dpi=80):
    """Pages of up to ``per_page`` profiles each (semi-log, 4 per row), captioned with their λz fits.

    One figure is drawn and re-used for every page (only the data, titles
    and ticks change), so the cost grows with the number of profiles, not
    of figures.

    Parameters
    ----------
    result : NCAResult
    keys : sequence, optional
        Profile keys in display order; default every profile, keys in natural order.
    per_page : int
        Panels per page (a multiple of 4).

    Returns
    -------
    list of ProfilePage
        PNG pages; a profile with no measurable concentration is a line of
        text in its slot.
    """
    from .tables import natural_sort

    by = list(result.by)
    if keys is None:  # every profile, subjects in natural order (S2 before S10), found by profile id
        ids = natural_sort(result.parameters[by + ["profile_id"]], by)["profile_id"].tolist()
    else:
        ids = [result.profile_id(k) for k in keys]
    conc_col = result.settings["columns"]["conc"]
    rows = -(-min(per_page, max(len(ids), 1)) // _COLUMNS)
    panels, pages = None, []
    total = -(-len(ids) // per_page)
    for start in range(0, len(ids), per_page):
        chunk = ids[start:start + per_page]
        need = -(-len(chunk) // _COLUMNS)
        if panels is None or need != len(panels.axes) // _COLUMNS:
            panels = _Panels(need if need != rows else rows, conc_unit, time_unit, dpi)
        labels = []
        for i, pid in enumerate(chunk):
            prof = result.profile(profile_id=int(pid))
            labels.append(short_label(prof.key))
            panels.show(i, prof, conc_col, time_unit)
        for i in range(len(chunk), len(panels.axes)):
            panels.blank(i)
        pages.append(ProfilePage(panels.png(), labels, len(pages) + 1, total))
    return pages
