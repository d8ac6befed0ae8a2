"""Overview of every profile as clickable small multiples (bqplot); a click shows that profile.

:func:`overview_layout` (pure) places each profile's semi-log sparkline in a
cell of a grid in plot coordinates: column ``i % columns`` spans x in
[col, col + 1], row ``i // columns`` spans y in [-(row + 1), -row] (rows go
down).  :class:`ProfileOverview` draws it with one bqplot figure and an
invisible square over each cell that takes the click.

A profile needing review gets a thick dashed orange frame and a "!" after
its label (never colour alone); the profile shown a thick black frame.
"""

from __future__ import annotations

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from ._view import REVIEW_COLOUR, ROLE_STYLE

__all__ = ["ProfileOverview", "overview_layout", "CELL_PX"]

#: Pixel size of one cell (width, height).
CELL_PX = (92, 62)
# inner box of the sparkline within a cell (fractions of the cell)
_X0, _X1, _Y0, _Y1 = 0.08, 0.92, 0.10, 0.62


def _rect(col, row, inset=0.03):
    x0, x1, y0, y1 = col + inset, col + 1 - inset, -row - 1 + inset, -row - inset
    return [x0, x1, x1, x0, x0], [y1, y1, y0, y0, y1]


def _sparkline(t, c, used, col, row):
    ok = np.isfinite(t) & np.isfinite(c) & (c > 0)
    if not ok.any():
        return np.array([]), np.array([]), np.zeros(0, dtype=bool)
    tt, lc = t[ok], np.log(c[ok])
    tspan, cspan = max(float(np.ptp(tt)), 1e-12), max(float(np.ptp(lc)), 1e-12)
    px = col + _X0 + (tt - tt.min()) / tspan * (_X1 - _X0)
    py = -row - 1 + _Y0 + (lc - lc.min()) / cspan * (_Y1 - _Y0)
    return px, py, np.asarray(used, dtype=bool)[ok]


def _pad(rows):
    """Ragged list of arrays -> 2-D array padded with NaN (bqplot draws one line per row); empty: 1-D empty."""
    if not any(len(r) for r in rows):
        return np.array([])
    width = max(len(r) for r in rows)
    out = np.full((max(len(rows), 1), width), np.nan)
    for i, r in enumerate(rows):
        out[i, :len(r)] = r
    return out


def overview_layout(labels, times, concs, used, review, current=None, *, columns=8):
    """Plot coordinates of the small multiples (pure; see the module docstring for the grid).

    Parameters
    ----------
    labels : list of str
    times, concs, used : lists of 1-D arrays
        Per profile, in the order of ``labels``; ``used`` marks the λz fit points.
    review : list of bool
    current : int, optional
        Position of the profile shown.
    columns : int

    Returns
    -------
    dict
        ``lines_x``/``lines_y`` (2-D, NaN-padded, one row per profile),
        ``fit_x``/``fit_y`` and ``other_x``/``other_y`` (points),
        ``frames`` {"plain", "review", "current"} -> (x, y) 2-D rectangles,
        ``label_x``, ``label_y``, ``label_text``, ``hit_x``, ``hit_y`` (cell
        centres, in profile order), ``columns`` and ``rows``.
    """
    n = len(labels)
    rows = max(1, -(-n // columns))
    lx, ly, fx, fy, ox, oy, texts = [], [], [], [], [], [], []
    frames = {"plain": ([], []), "review": ([], []), "current": ([], [])}
    for i in range(n):
        col, row = i % columns, i // columns
        px, py, u = _sparkline(np.asarray(times[i], float), np.asarray(concs[i], float), used[i], col, row)
        lx.append(px)
        ly.append(py)
        fx += list(px[u]); fy += list(py[u]); ox += list(px[~u]); oy += list(py[~u])  # noqa: E702
        kind = "current" if i == current else ("review" if review[i] else "plain")
        rx, ry = _rect(col, row)
        frames[kind][0].append(rx)
        frames[kind][1].append(ry)
        texts.append(labels[i] + (" !" if review[i] else ""))
    idx = np.arange(n)
    return {
        "lines_x": _pad(lx), "lines_y": _pad(ly), "fit_x": np.array(fx), "fit_y": np.array(fy),
        "other_x": np.array(ox), "other_y": np.array(oy),
        "frames": {k: (_pad(v[0]), _pad(v[1])) for k, v in frames.items()},
        "label_x": idx % columns + 0.07, "label_y": -(idx // columns) - 0.24, "label_text": texts,
        "hit_x": idx % columns + 0.5, "hit_y": -(idx // columns) - 0.5, "columns": columns, "rows": rows,
    }


class ProfileOverview(widgets.VBox):
    """Every profile as a small semi-log sparkline; clicking one sets ``index``.

    Call :meth:`show` with the profiles to draw; observe (or link) ``index``.
    """

    index = traitlets.Int(0, help="position of the profile clicked / shown")

    def __init__(self, *, columns=8):
        self.columns = columns
        self._xs = bq.LinearScale(min=0.0, max=float(columns), allow_padding=False)
        self._ys = bq.LinearScale(allow_padding=False)
        sc = {"x": self._xs, "y": self._ys}
        self._lines = bq.Lines(x=[], y=[], scales=sc, colors=["#999999"], stroke_width=1)
        self._fit = bq.Scatter(x=[], y=[], scales=sc, colors=[ROLE_STYLE["fit"]["colour"]], default_size=12)
        self._other = bq.Scatter(x=[], y=[], scales=sc, colors=["#777777"], default_size=5)
        self._frames = {
            "plain": bq.Lines(x=[], y=[], scales=sc, colors=["#000000"], stroke_width=1),
            "review": bq.Lines(x=[], y=[], scales=sc, colors=[REVIEW_COLOUR], stroke_width=3,
                               line_style="dashed"),
            "current": bq.Lines(x=[], y=[], scales=sc, colors=["#000000"], stroke_width=3),
        }
        self._labels = bq.Label(x=[], y=[], text=[], scales=sc, colors=["#000000"], default_size=10,
                                align="start")
        cell = min(CELL_PX)
        self._hit = bq.Scatter(x=[], y=[], scales=sc, marker="square", default_size=int((0.9 * cell) ** 2),
                               colors=["#ffffff"], opacities=[0.0],
                               interactions={"click": "select"}, tooltip=None)
        self._hit.on_element_click(self._clicked)
        self.figure = bq.Figure(
            marks=[self._lines, self._other, self._fit, *self._frames.values(), self._labels, self._hit],
            fig_margin={"top": 2, "bottom": 2, "left": 2, "right": 2}, padding_x=0, padding_y=0,
            min_aspect_ratio=0.01, max_aspect_ratio=100,
            layout=widgets.Layout(width=f"{columns * CELL_PX[0] + 4}px", height=f"{CELL_PX[1] + 4}px"))
        self.figure.add_class("pkw-overview")
        super().__init__([self.figure])

    def show(self, labels, times, concs, used, review, current=None):
        """Draw the profiles (see :func:`overview_layout`); ``current`` gets the thick black frame."""
        g = overview_layout(labels, times, concs, used, review, current, columns=self.columns)
        self.labels = list(labels)
        self._ys.min, self._ys.max = -float(g["rows"]), 0.0
        w, h = CELL_PX
        self.figure.layout.width = f"{self.columns * w + 4}px"
        self.figure.layout.height = f"{g['rows'] * h + 4}px"
        with self._lines.hold_sync():
            self._lines.x, self._lines.y = g["lines_x"], g["lines_y"]
        for m, key in ((self._fit, "fit"), (self._other, "other")):
            with m.hold_sync():
                m.x, m.y = g[f"{key}_x"], g[f"{key}_y"]
        for kind, mark in self._frames.items():
            with mark.hold_sync():
                mark.x, mark.y = g["frames"][kind]
        with self._labels.hold_sync():
            self._labels.x, self._labels.y, self._labels.text = g["label_x"], g["label_y"], g["label_text"]
        with self._hit.hold_sync():
            self._hit.x, self._hit.y = g["hit_x"], g["hit_y"]
            self._hit.selected = None
        if current is not None:
            self.index = int(current)

    def _clicked(self, _mark, event):
        self._hit.selected = None
        self.index = int(event["data"]["index"])
