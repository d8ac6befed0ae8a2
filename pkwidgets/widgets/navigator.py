"""Study navigator: one picker, stepping through every profile of a study.

The study is analysed once with :func:`pkwidgets.nca` (applying the
selection record); the picker shows one profile as that run saw it.  After
a choice is recorded, or a method toggled, the study is analysed again so
that the overview and the review filter stay true.
"""

from __future__ import annotations

import re

import ipywidgets as widgets
import numpy as np
import traitlets

from ..record import SelectionRecord, canonical_key, coerce_record
from ..table import nca
from . import _view as V
from .overview import ProfileOverview
from .picker import TerminalPhasePicker
from .toggles import MethodToggles

__all__ = ["StudyNavigator", "TABLE_ONLY_OPTIONS", "profile_options", "flags_by_profile", "count_text",
           "review_order", "step", "jump_options", "recorded_choice", "natural_key", "natural_order"]

#: nca() keywords that describe the table, not the computation of one profile.
TABLE_ONLY_OPTIONS = ("time", "conc", "dose", "blq", "lloq", "dose_time", "units", "terminal", "exclude",
                      "duration", "tau", "sep", "decimal", "encoding", "occasion")


def profile_options(nca_options, profile):
    """Keywords of :func:`pkwidgets.nca_arrays` for one profile (a :class:`pkwidgets.ProfileData`)."""
    opts = {k: v for k, v in nca_options.items() if k not in TABLE_ONLY_OPTIONS}
    for name in ("dose", "duration", "tau"):
        value = getattr(profile, name)
        if value is not None and not np.isnan(value):
            opts[name] = value
    return opts


def natural_key(value):
    """Sort key that orders numbers by value and text by its runs of digits ("S2" < "S10").

    Numbers (the table layer reads numeric-looking IDs as numbers) sort before
    text; text is split into digit and non-digit runs, digits compared as
    integers, letters without regard to case.

    Examples
    --------
    >>> sorted(["S10", "S2", "s1"], key=natural_key)
    ['s1', 'S2', 'S10']
    >>> sorted([10, 2, 1], key=natural_key)
    [1, 2, 10]
    """
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        return (0, float(value), ())
    parts = re.split(r"(\d+)", str(value))
    return (1, 0.0, tuple((0, int(p), "") if p.isdigit() else (1, 0, p.casefold()) for p in parts if p))


def natural_order(keys):
    """Positions of ``keys`` (tuples of key values) in natural order (:func:`natural_key`, column by column)."""
    return sorted(range(len(keys)), key=lambda i: tuple(natural_key(v) for v in keys[i]))


def flags_by_profile(flags, profile_ids):
    """List of raised flag names per profile, in the order of ``profile_ids`` (looked up by id)."""
    names = {int(p): [] for p in profile_ids}
    for pid, flag in flags[["profile_id", "flag"]].itertuples(index=False):
        names[int(pid)].append(flag)
    return [names[int(p)] for p in profile_ids]


def count_text(n_shown, n_total, review):
    """The line beside the navigation buttons."""
    return f"{n_shown} of {n_total} profiles shown; {int(np.sum(review))} need review"


def review_order(review, only_review):
    """Indices of the profiles to step through."""
    idx = np.flatnonzero(review) if only_review else np.arange(len(review))
    return [int(i) for i in idx]


def jump_options(labels, order, current):
    """(label, index) pairs of the "go to" list: the profiles in ``order``, or the current one if none."""
    return [(labels[i], i) for i in order] or [(labels[current], current)]


def recorded_choice(state, fingerprint):
    """Window, excluded times and status line to show for a profile's recorded state.

    Parameters
    ----------
    state : SelectionState or None
        Latest recorded state (:meth:`SelectionRecord.state`).
    fingerprint : str
        Fingerprint of the profile's data in this run.

    Returns
    -------
    window, excluded, status
        The recorded choice when it was made on these data; otherwise the
        automatic search, with a status line saying why (empty when nothing
        was recorded).
    """
    if state is None:
        return None, [], ""
    if state.fingerprint != fingerprint:
        return None, [], "the recorded choice was made on other data: automatic shown; review and record again"
    return (state.window, state.exclude,
            f"recorded by {state['author']} ({state['timestamp']}): {state['reason']}")


def step(order, current, delta):
    """Next/previous position in ``order`` from ``current`` (clamped; first if current is not in it)."""
    if not order:
        return current
    if current not in order:
        return order[0]
    k = order.index(current) + delta
    return order[min(max(k, 0), len(order) - 1)]


class StudyNavigator(widgets.VBox):
    """Pick, justify and record terminal phases profile by profile.

    Parameters
    ----------
    data : DataFrame or path of a CSV file
    by : str or list of str
        Columns that identify a profile.
    selections : SelectionRecord or path, optional
        The record choices are saved to; a path that does not exist yet is
        created on the first save.  Without it choices stay in memory.
    author : str, optional
        Name written with each choice (default: the USER environment variable).
    **nca_options
        Keywords of :func:`pkwidgets.nca` (``time=``, ``conc=``, ``dose=``,
        ``route=``, ``auc_method=``...).
    """

    index = traitlets.Int(0, help="position of the profile shown, in natural order of the profile keys")
    only_review = traitlets.Bool(False, help="step only through profiles that need review")

    def __init__(self, data, *, by, selections=None, author=None, **nca_options):
        self._data = data
        self.by = [by] if isinstance(by, str) else list(by)
        self.record = coerce_record(selections, create=True) if selections is not None else SelectionRecord()
        self._nca_options = dict(nca_options)
        self.toggles = MethodToggles(auc_method=nca_options.get("auc_method", "linear"),
                                     blq_rules=nca_options.get("blq_rules"))
        self._run()
        self.labels = [V.key_label(k, self.by) for k in self.profile_keys]
        self.picker = TerminalPhasePicker([0.0], [1.0], record=self.record, author=author)
        self._prev = widgets.Button(description="previous", icon="arrow-left")
        self._next = widgets.Button(description="next", icon="arrow-right")
        self._jump = widgets.Dropdown(options=list(zip(self.labels, range(len(self.labels)))), value=0,
                                      description="go to", layout=widgets.Layout(width="260px"))
        self._only = widgets.Checkbox(value=False, description="only profiles needing review", indent=False)
        self._count = widgets.HTML()
        self.overview = ProfileOverview()
        traitlets.link((self.overview, "index"), (self, "index"))
        self._prev.on_click(lambda _: self._step(-1))
        self._next.on_click(lambda _: self._step(+1))
        traitlets.link((self._jump, "value"), (self, "index"))
        traitlets.link((self._only, "value"), (self, "only_review"))
        super().__init__([
            widgets.HBox([self._prev, self._next, self._jump, self._only, self._count]),
            self.toggles,
            self.picker,
            widgets.HTML("<b>All profiles</b> (click one to show it; dashed orange frame and “!”: needs review; "
                         "thick black frame: shown)"),
            self.overview,
        ])
        self.add_class("pkw-navigator")
        self.observe(self._show, names=["index"])
        self.observe(self._filter_changed, names=["only_review"])
        self.toggles.observe(self._methods_changed, names=["options"])
        self.picker.observe(self._saved, names=["revision"])
        self._show(None)

    # ------------------------------------------------------------ analysis
    def _run(self):
        opts = dict(self._nca_options, **self.toggles.options)
        self.result = nca(self._data, by=self.by, selections=self.record, **opts)
        ids = [int(p) for p in self.result.parameters["profile_id"]]
        profiles = [self.result.profile(profile_id=p) for p in ids]
        order = natural_order([tuple(p.key.values()) for p in profiles])
        self.profile_ids = [ids[i] for i in order]
        self.profiles = [profiles[i] for i in order]
        self.profile_keys = [canonical_key(tuple(p.key.values())) for p in self.profiles]
        self.flag_names = flags_by_profile(self.result.flags, self.profile_ids)
        self.review = [V.needs_review(n) for n in self.flag_names]

    # ------------------------------------------------------------- display
    def _show(self, _):
        p = self.index
        prof = self.profiles[p]
        row = int(self.result.arrays.rows_of([prof.profile_id])[0])
        window, excluded, status = recorded_choice(self.record.state(self.profile_keys[p]),
                                                   self.result.settings["selections"]["fingerprints"][row])
        self.picker.load(prof.time, prof.conc, blq=prof.blq, lloq=prof.lloq,
                         key=self.profile_keys[p], window=window, excluded=excluded, title=self.labels[p],
                         status=status, units=self.result.settings.get("units"),
                         **profile_options(dict(self._nca_options, **self.toggles.options), prof))
        self._render_overview()

    def _render_overview(self):
        order = review_order(self.review, self.only_review)
        self._count.value = count_text(len(order), len(self.profile_keys), self.review)
        self.overview.show(self.labels, [p.time for p in self.profiles], [p.conc for p in self.profiles],
                           [p.lambda_z_used for p in self.profiles], self.review, current=self.index)

    def _step(self, delta):
        self.index = step(review_order(self.review, self.only_review), self.index, delta)

    def _filter_changed(self, _):
        order = review_order(self.review, self.only_review)
        cur = self.index if self.index in order or not order else order[0]
        with self._jump.hold_trait_notifications():
            self._jump.options = jump_options(self.labels, order, cur)
            self._jump.value = cur
        self.index = cur
        self._render_overview()

    def _methods_changed(self, _):
        self._run()
        self._show(None)

    def _saved(self, _):
        self._run()
        self._render_overview()
