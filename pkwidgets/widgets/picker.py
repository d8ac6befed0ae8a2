"""Terminal-phase picker for one profile (ipywidgets + bqplot).

Callbacks only read trait values and call the pure helpers of
:mod:`pkwidgets.widgets._view`; the engine does the arithmetic.  The brush
recomputes once, when the drag ends (``brushing`` turns False).
"""

from __future__ import annotations

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from ..record import SelectionRecord, profile_fingerprint
from . import _axes as A
from . import _view as V
from ._fit_view import fit_times

__all__ = ["TerminalPhasePicker"]

_ROLES = ("other", "blq", "excluded", "fit")


class TerminalPhasePicker(widgets.VBox):
    """Choose the lambda-z points of one profile by clicking and dragging.

    Parameters
    ----------
    time, conc : array_like, 1-D
        Times after the dose and concentrations (NaN-padded allowed).
    blq : array_like of bool, optional
    lloq : float or array_like, optional
    key : profile key, optional
        Used when saving to ``record`` (e.g. the subject).
    record : SelectionRecord, optional
        Where :meth:`save` writes the choice.
    window, excluded : optional
        Starting choice (default automatic, nothing left out).
    units : dict, optional
        The study's units, as given to :func:`pkwidgets.nca` (``{"time": "h",
        "conc": "ng/mL"}``); shown on the axes and in the readout.  Without
        them the labels say "time unit".
    **options
        Keywords of :func:`pkwidgets.nca_arrays` (``dose``, ``route``,
        ``duration``, ``tau``, ``auc_method``, ``blq_rules``, ``qc``).
    """

    window = traitlets.Tuple(None, allow_none=True, help="lambda-z window (start, end); None = automatic")
    excluded = traitlets.List(traitlets.Float(), help="sampling times left out of the fit")
    log_scale = traitlets.Bool(True, help="semi-log view (True) or linear view")
    auc_method = traitlets.Unicode("linear", help="AUC method passed to the core")
    blq_rules = traitlets.Dict(help="BLQ rules passed to the core")
    status = traitlets.Unicode("", help="last message shown under the readout")
    units = traitlets.Dict(None, allow_none=True, help="study units {'time', 'conc'[, 'dose']} or None")
    revision = traitlets.Int(0, help="incremented on every save to the record")

    def __init__(self, time, conc, *, blq=None, lloq=None, key=None, record=None, window=None, excluded=(),
                 title=None, author=None, units=None, **options):
        self.record = record
        self.author = author
        self._build_figure(title)
        self._build_controls()
        super().__init__([
            widgets.HBox([self._mode, self._scale, self._auto], layout=widgets.Layout(flex_flow="row wrap")),
            # in a narrow output area (JupyterLab with its side bar) the readout moves below the figure
            widgets.HBox([widgets.VBox([self.figure, self.legend],
                                       layout=widgets.Layout(width="630px", flex="0 0 auto")),
                          widgets.VBox([self.readout, self._residuals.figure],
                                       layout=widgets.Layout(width="430px", flex="0 0 auto"))],
                         layout=widgets.Layout(flex_flow="row wrap")),
            widgets.HBox([self._reason, self._save]),
        ])
        self.add_class("pkw-picker")
        self.observe(self._recompute, names=["window", "excluded", "auc_method", "blq_rules"])
        self.observe(self._scale_changed, names=["log_scale"])
        self.observe(self._redraw_readout, names=["status"])
        self.load(time, conc, blq=blq, lloq=lloq, key=key, window=window, excluded=excluded, title=title,
                  units=units, **options)

    def _build_figure(self, title):
        """The main figure (points by role, fitted line and its continuation, brush), legend, residual plot."""
        self._xs = bq.LinearScale(allow_padding=False)  # limits from _axes.x_range
        self._ys = {True: bq.LogScale(), False: bq.LinearScale()}
        ys = self._ys[True]
        self._marks = {}
        for role in _ROLES:
            st = V.ROLE_STYLE[role]
            m = bq.Scatter(x=[], y=[], scales={"x": self._xs, "y": ys}, marker=st["marker"],
                           colors=[st["colour"]], default_size=90 if role != "fit" else 110,
                           stroke=st["colour"], labels=[st["label"]], display_legend=False,
                           interactions={"click": "select"}, selected_style={"opacity": 1.0},
                           unselected_style={"opacity": 1.0})
            m.on_element_click(self._make_click(role))
            self._marks[role] = m
        self._fit_line = bq.Lines(x=[], y=[], scales={"x": self._xs, "y": ys}, colors=[V.LINE_COLOUR],
                                  stroke_width=2.5, labels=["λz fit"], display_legend=False)
        self._tail_line = bq.Lines(x=[], y=[], scales={"x": self._xs, "y": ys}, colors=[V.LINE_COLOUR],
                                   stroke_width=1.5, line_style="dashed", labels=["tail toward ∞"],
                                   display_legend=False)
        self._xaxis = bq.Axis(scale=self._xs, label="time after dose", grid_lines="none",
                              label_offset="35px")
        self._yaxes = {log: bq.Axis(scale=self._ys[log], side="left", grid_lines="dashed", tick_format="~g",
                                    label_offset="60px") for log in (True, False)}
        self._yaxis = self._yaxes[True]
        self._brush = bq.interacts.BrushIntervalSelector(scale=self._xs, color="#56B4E9")
        self._brush.observe(self._brushed, names=["brushing"])
        self.figure = bq.Figure(
            marks=[self._fit_line, self._tail_line] + [self._marks[r] for r in _ROLES],
            axes=[self._xaxis, self._yaxis], title=title or "",
            fig_margin={"top": 40, "bottom": 50, "left": 80, "right": 20},
            layout=widgets.Layout(width="620px", height="400px"),
        )
        self.legend = widgets.HTML(V.legend_html(), layout=widgets.Layout(width="560px", margin="0 0 0 60px"))
        self.legend.add_class("pkw-legend-box")
        self._residuals = _ResidualPlot()

    def _build_controls(self):
        """Mode and scale toggles, back-to-automatic, reason and save, readout."""
        self._mode = widgets.ToggleButtons(
            options=[("click points", "click"), ("drag a window", "brush")], value="click",
            tooltips=["click a point: leave it out / take it back / bring it into the fit",
                      "drag across the time axis: fit the points inside"],
            style={"button_width": "125px"})
        self._mode.observe(self._mode_changed, names=["value"])
        self._scale = widgets.ToggleButtons(options=[("log scale", True), ("linear scale", False)], value=True,
                                            style={"button_width": "105px"})
        traitlets.link((self._scale, "value"), (self, "log_scale"))
        self._auto = widgets.Button(description="back to automatic", icon="undo",
                                    layout=widgets.Layout(width="170px"),
                                    tooltip="automatic terminal-phase search, nothing left out")
        self._auto.on_click(self._to_automatic)
        self._reason = widgets.Text(placeholder="why this choice (required to save)",
                                    layout=widgets.Layout(width="300px"))
        self._save = widgets.Button(description="record choice", icon="save", button_style="primary")
        self._save.on_click(self._save_clicked)
        self.readout = widgets.HTML(layout=widgets.Layout(width="430px"))

    # ------------------------------------------------------------------ data
    def load(self, time, conc, *, blq=None, lloq=None, key=None, window=None, excluded=(), title=None,
             status="", units=None, **options):
        """Show another profile (keeps the figure; one recompute).

        Every selection mark of the previous profile (dragged band, selected
        points) is cleared; ``units`` replace the units shown.
        """
        self._time = np.asarray(time, dtype=np.float64)
        self._conc = np.asarray(conc, dtype=np.float64)
        self._blq = None if blq is None else np.asarray(blq, dtype=bool)
        self._lloq = lloq
        self.key = key
        auc_method = options.pop("auc_method", self.auc_method)
        blq_rules = dict(options.pop("blq_rules", None) or self.blq_rules or {})
        self._options = options
        if title is not None:
            self.figure.title = title
        self._loading = True
        try:
            self.auc_method, self.blq_rules = auc_method, blq_rules
            self.window = None if window is None else (float(window[0]), float(window[1]))
            self.excluded = sorted(float(x) for x in excluded)
            self.status = status
            self.units = dict(units) if units else None
        finally:
            self._loading = False
        self._clear_band()
        self._label_axes()
        self._recompute(None)

    @property
    def fingerprint(self) -> str:
        """Fingerprint of what the fit sees: samples, LLOQ of BLQ samples, BLQ rules, area method."""
        return profile_fingerprint(self._time, self._conc, self._blq, lloq=self._lloq,
                                   blq_rules=dict(self.blq_rules) or None, auc_method=self.auc_method)

    @property
    def options(self) -> dict:
        """Core keywords in force (``auc_method``, ``blq_rules`` and the profile's options)."""
        return dict(self._options, auc_method=self.auc_method, blq_rules=dict(self.blq_rules) or None)

    # ------------------------------------------------------------- callbacks
    def _recompute(self, _):
        if getattr(self, "_loading", True):
            return
        try:
            self.result = V.compute_profile(self._time, self._conc, blq=self._blq, lloq=self._lloq,
                                            window=self.window, excluded=self.excluded, options=self.options)
        except ValueError as exc:  # shown, never raised out of a callback
            self.status = f"not computed: {exc}"
            return
        self.view = V.profile_view(self._time, self._conc, self.result, blq=self._blq, lloq=self._lloq,
                                   excluded=self.excluded, window=self.window, log_scale=self.log_scale,
                                   qc=self._options.get("qc"), units=self.units)
        self._draw()
        self._sync_band()

    def _draw(self):
        v = self.view
        self._redraw_readout(None)  # the readout first: it is what the user waits for
        for role, m in self._marks.items():
            with m.hold_sync():
                m.x, m.y = v.points[role]["x"], v.points[role]["y"]
                m.selected = None
        with self._fit_line.hold_sync():
            self._fit_line.x, self._fit_line.y = v.fit_x, v.fit_y
        with self._tail_line.hold_sync():
            self._tail_line.x, self._tail_line.y = v.tail_x, v.tail_y
        with self._xs.hold_sync():
            self._xs.min, self._xs.max = v.x_range
        ys = self._ys[True]
        with ys.hold_sync():
            ys.min, ys.max = v.y_range
        self._yaxes[True].tick_values = np.asarray(v.y_ticks, dtype=float) if v.y_ticks else None
        self._residuals.draw(v.residuals, v.x_range, A.unit_labels(self.units)["time"])

    def _label_axes(self):
        u = A.unit_labels(self.units)
        self._xaxis.label = A.with_unit("time after dose", u["time"])
        self._yaxes[True].label = A.with_unit("concentration", u["conc"]) + ", log scale"
        self._yaxes[False].label = A.with_unit("concentration", u["conc"])

    def _clear_band(self):
        """Remove the dragged band and every selected point (a new profile starts clean)."""
        self._brush.selected = None
        self._brush.reset()
        for m in self._marks.values():
            m.selected = None

    def _sync_band(self):
        """The band shows the window in force: none in automatic mode, the snapped window otherwise."""
        want = None if self.window is None else [float(self.window[0]), float(self.window[1])]
        have = self._brush.selected
        if want is None:
            if have is not None and len(have):
                self._clear_band()
        elif have is None or len(have) != 2 or not np.allclose(have, want):
            self._brush.selected = np.asarray(want)

    def _redraw_readout(self, _):
        if getattr(self, "_loading", True):
            return
        choice = V.choice_summary(self.window, self.excluded)
        view = getattr(self, "view", None)
        rows = ([("choice", choice)] + view.readout) if view else [("choice", choice)]
        self.readout.value = V.readout_html(rows, view.flags if view else [], self.status)

    def _make_click(self, role):
        def clicked(_mark, event):
            t = float(self.view.points[role]["x"][int(event["data"]["index"])])
            window, excluded, message = V.click_action(role, t, self.window, self.excluded,
                                                       V.fit_interval(self.result))
            if message:
                self.status = message
                return
            before = fit_times(self._time, self.result)
            with self.readout.hold_sync():             # one readout message: results and what changed
                with self.hold_trait_notifications():
                    self.window, self.excluded = window, excluded
                self.status = V.click_status(role, t, self.window, before, fit_times(self._time, self.result),
                                             A.unit_labels(self.units)["time"] if self.units else "")
        return clicked

    def _brushed(self, change):
        if change["new"]:  # still dragging: nothing to do until the drag ends
            return
        w = V.window_from_brush(self._brush.selected, self._time)
        if w is None:
            self.status = "the dragged interval holds fewer than two samples: window unchanged"
            self._sync_band()
            return
        self.window = w
        self.status = f"window dragged: {V.choice_summary(self.window, self.excluded)}"

    def _mode_changed(self, change):
        self.figure.interaction = self._brush if change["new"] == "brush" else None

    def _scale_changed(self, change):
        ys = self._ys[change["new"]]
        for m in list(self._marks.values()) + [self._fit_line, self._tail_line]:
            m.scales = {"x": self._xs, "y": ys}
        self._yaxis = self._yaxes[change["new"]]
        self.figure.axes = [self._xaxis, self._yaxis]
        self._recompute(None)

    def _to_automatic(self, _):
        with self.hold_trait_notifications():
            self.window, self.excluded = None, []
        self._clear_band()
        self.status = "automatic search"

    def _save_clicked(self, _):
        try:
            self.status = self.save(self._reason.value)
            self._reason.value = ""
        except ValueError as exc:
            self.status = str(exc)

    # --------------------------------------------------------------- record
    def save(self, reason, author=None) -> str:
        """Append the current choice to the record (and write its file, if it has one).

        Parameters
        ----------
        reason : str
            Why the choice was made (required, non-empty).
        author : str, optional
            Overrides the picker's ``author`` (default: the USER environment variable).

        Returns
        -------
        str
            The message shown to the user.  When the record already holds the
            choice shown (same data), nothing is appended and the message says so.

        Raises
        ------
        ValueError
            For an empty reason, or when no record or no profile key is attached.
        """
        rec: SelectionRecord = self.record
        if rec is None:
            raise ValueError("no selection record attached: pass record= (or selections= to the navigator).")
        if self.key is None:
            raise ValueError("no profile key: pass key= (e.g. the subject) so the record can name the profile.")
        if not reason or not reason.strip():
            raise ValueError("write a short reason before recording the choice.")
        author = author or self.author
        prev = rec.state(self.key)
        steps = V.record_steps(prev, self.fingerprint, self.window, self.excluded)
        if not steps:
            return (f"already recorded by {prev['author']} ({prev['timestamp']}): "
                    f"{V.choice_summary(self.window, self.excluded)}; nothing added")
        kw = {"fingerprint": self.fingerprint}
        for action, *args in steps:
            if action == "reset":
                rec.reset(self.key, reason, author, **kw)
            elif action == "window":
                rec.set_window(self.key, args[0], args[1], reason, author, **kw)
            else:
                rec.set_exclusions(self.key, args[0], reason, author, **kw)
        where = ""
        if rec.path is not None:
            rec.save()
            where = f" in {rec.path}"
        self.revision += 1
        return f"recorded{where}: {V.choice_summary(self.window, self.excluded)}"


class _ResidualPlot:
    """Small plot of the λz fit's residuals (ln C minus the fitted line) against time."""

    def __init__(self):
        self._xs, self._ys = bq.LinearScale(), bq.LinearScale()
        sc = {"x": self._xs, "y": self._ys}
        self._zero = bq.Lines(x=[0.0, 1.0], y=[0.0, 0.0], scales=sc, colors=["#999999"], line_style="dashed")
        self._dots = bq.Scatter(x=[], y=[], scales=sc, marker=V.ROLE_STYLE["fit"]["marker"], default_size=40,
                                colors=[V.ROLE_STYLE["fit"]["colour"]])
        self._xaxis = bq.Axis(scale=self._xs, label="time", tick_format="~g", label_offset="30px")
        self._yaxis = bq.Axis(scale=self._ys, side="left", tick_format="~g", label="ln C residual",
                              label_offset="50px", grid_lines="none")
        self.figure = bq.Figure(marks=[self._zero, self._dots], axes=[self._xaxis, self._yaxis],
                                title="residuals of the λz fit",
                                fig_margin={"top": 30, "bottom": 45, "left": 80, "right": 20},
                                layout=widgets.Layout(width="420px", height="180px"),
                                title_style={"font-size": "12px"})
        self.figure.add_class("pkw-residuals")

    def draw(self, residuals, x_range, time_unit):
        t, r = residuals
        lim, yticks = A.residual_axis(r)
        with self._xs.hold_sync():
            self._xs.min, self._xs.max = x_range
        with self._ys.hold_sync():
            self._ys.min, self._ys.max = -lim, lim
        self._xaxis.tick_values = np.asarray(A.linear_ticks(*x_range, 6))
        self._yaxis.tick_values = np.asarray(yticks)
        with self._dots.hold_sync():
            self._dots.x, self._dots.y = t, r
        self._zero.x = list(x_range)
        self._xaxis.label = A.with_unit("time", time_unit)
