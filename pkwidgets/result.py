"""The result of a study analysis, looked up by profile key, never by position.

:class:`NCAResult` holds, by composition, plain pandas tables that share one
column, the profile id:

- ``parameters``: one row per profile: the key columns, ``profile_id``, then
  the PPTESTCD codes;
- ``samples``: every input row as given, plus the tool's own columns
  (prefixed ``nca_``: line, profile id, time after the dose, used, reason,
  in the lambda-z fit);
- ``flags``: one row per raised reviewer check.

Everything that needs one profile's data (figures, long output, the picker)
goes through :meth:`NCAResult.profile` or the ``profile_id`` column, so that
filtering, sorting or combining tables cannot attach one subject's samples to
another subject's label.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from .exports import ResultExports
from .long import long_table
from .options import NCAOptions

__all__ = ["NCAResult", "ProfileData", "ProfileArrays", "SAMPLE_COLUMNS", "parameters_of"]

#: The tool's own columns in ``NCAResult.samples`` (user columns keep their names).
SAMPLE_COLUMNS = {"line": "nca_line", "profile": "nca_profile_id", "time": "nca_time", "used": "nca_used",
                  "reason": "nca_reason", "lambda_z": "nca_lambda_z"}
_OLD_NAMES = {v: k for k, v in SAMPLE_COLUMNS.items() if k != "time"}


@dataclass(frozen=True)
class ProfileArrays:
    """The engine inputs of every profile, flat: row ``i`` (profile id ``ids[i]``) owns ``offsets[i]:offsets[i+1]``.

    Samples are in time order, without padding, so memory follows the data.
    """

    ids: np.ndarray
    offsets: np.ndarray
    time: np.ndarray
    conc: np.ndarray
    blq: np.ndarray
    lloq: np.ndarray
    exclude: np.ndarray
    lambda_z_used: np.ndarray
    terminal: np.ndarray  # (profiles, 2), NaN rows automatic
    per_profile: dict = field(default_factory=dict)  # dose, duration, tau: (profiles,) arrays or None
    partial: dict = field(default_factory=dict)  # name -> (start (profiles,), end (profiles,))
    keys: list = field(default_factory=list)  # canonical key text of each row

    FLAT = ("time", "conc", "blq", "lloq", "exclude", "lambda_z_used")

    def rows_of(self, ids) -> np.ndarray:
        """Array rows of the given profile ids."""
        pos = {int(p): i for i, p in enumerate(self.ids)}
        return np.array([pos[int(p)] for p in ids], dtype=np.int64)

    def span(self, row) -> slice:
        """Flat positions of array row ``row``."""
        return slice(int(self.offsets[row]), int(self.offsets[row + 1]))

    def take(self, rows) -> "ProfileArrays":
        """The same arrays for a subset of rows."""
        rows = np.asarray(rows, dtype=np.int64)
        lengths = np.diff(self.offsets)[rows]
        flat = np.concatenate([np.arange(self.offsets[r], self.offsets[r + 1]) for r in rows]) if len(rows) else \
            np.empty(0, np.int64)
        pick = lambda a: None if a is None else (a if np.ndim(a) == 0 else np.asarray(a)[rows])  # noqa: E731
        return ProfileArrays(
            ids=self.ids[rows], offsets=np.r_[0, np.cumsum(lengths)], terminal=self.terminal[rows],
            **{k: getattr(self, k)[flat] for k in self.FLAT},
            per_profile={k: pick(v) for k, v in self.per_profile.items()},
            partial={k: (pick(s), pick(e)) for k, (s, e) in self.partial.items()}, keys=[self.keys[i] for i in rows])


@dataclass(frozen=True)
class ProfileData:
    """All that is known about one profile.

    Attributes
    ----------
    key : dict
        ``by`` column -> value.
    profile_id : int
    parameters : Series
        PPTESTCD code -> value (in the reported units, see ``units``).
    units : dict
        Code -> unit text.
    samples : DataFrame
        This profile's input rows, used or not, with the ``nca_`` columns.
    flags : DataFrame
        Reviewer checks raised for this profile.
    time, conc, blq, lloq, exclude, lambda_z_used : ndarray
        The samples as the engine saw them (times after the dose, in time
        order, padding removed).
    terminal : tuple or None
        The lambda-z window given (by hand or by record), None when automatic.
    dose, duration, tau : float or None
    partial : dict
        Partial-area name -> (start, end).
    """

    key: dict
    profile_id: int
    parameters: pd.Series
    units: dict
    samples: pd.DataFrame
    flags: pd.DataFrame
    time: np.ndarray
    conc: np.ndarray
    blq: np.ndarray
    lloq: np.ndarray
    exclude: np.ndarray
    lambda_z_used: np.ndarray
    terminal: tuple | None
    dose: float | None
    duration: float | None
    tau: float | None
    partial: dict

    @property
    def label(self) -> str:
        """``subject 3, period 2`` style label."""
        return ", ".join(f"{k} {v}" for k, v in self.key.items())

    @property
    def fit(self) -> dict:
        """The lambda-z fit: rate, half-life, adjusted R², points, window and the times used/excluded."""
        p = self.parameters
        get = lambda c: float(p[c]) if c in p.index else np.nan  # noqa: E731
        return {"LAMZ": get("LAMZ"), "LAMZHL": get("LAMZHL"), "R2ADJ": get("R2ADJ"), "LAMZNPT": get("LAMZNPT"),
                "LAMZLL": get("LAMZLL"), "LAMZUL": get("LAMZUL"), "window": self.terminal,
                "times_used": self.time[self.lambda_z_used].tolist(),
                "times_excluded": self.time[self.exclude].tolist(), "manual": self.terminal is not None}


def _key_text(value) -> str:
    """One key value as text: numbers without a trailing ``.0``, text stripped."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    return str(value).strip()


@dataclass(frozen=True, repr=False, eq=False)
class NCAResult(ResultExports):
    """Parameters, samples and flags of a study analysis, joined by ``profile_id``.

    Attributes
    ----------
    parameters : DataFrame
        One row per profile: ``by`` columns, ``profile_id``, PPTESTCD codes.
    samples : DataFrame
        Every input row, used or not, with ``nca_line``, ``nca_profile_id``,
        ``nca_time``, ``nca_used``, ``nca_reason``, ``nca_lambda_z``.
    flags : DataFrame
        One row per raised flag: ``by`` columns, ``profile_id``, ``flag``,
        ``severity``, ``message``.
    options : NCAOptions
    units : dict
        Code -> unit text ("" when no units were declared).
    settings : dict
        Everything stated about the run (source, columns, rules, counts).
    by : tuple of str
    """

    parameters: pd.DataFrame
    samples: pd.DataFrame
    flags: pd.DataFrame
    options: NCAOptions
    units: dict
    settings: dict
    by: tuple
    arrays: ProfileArrays

    @property
    def unused(self) -> pd.DataFrame:
        """Input rows not used, with their reason."""
        return self.samples.loc[~self.samples[SAMPLE_COLUMNS["used"]]]

    @property
    def codes(self) -> list:
        """PPTESTCD columns of ``parameters``, in catalogue order."""
        return [c for c in self.parameters.columns if c not in self.by and c != "profile_id"]

    def profile_id(self, key) -> int:
        """The profile id of a key: a scalar (one ``by`` column), a tuple, a dict or a row of a table.

        Raises
        ------
        KeyError
            If no profile (or more than one) has that key; the message shows
            the ``by`` columns and some keys.
        """
        values = self._key_values(key)
        text = tuple(_key_text(v) for v in values)
        keys = self.parameters[list(self.by)]
        hits = np.flatnonzero([tuple(_key_text(v) for v in row) == text for row in keys.itertuples(index=False)])
        if hits.size != 1:
            some = ", ".join(str(tuple(r)) for r in keys.head(5).itertuples(index=False))
            what = "no profile" if hits.size == 0 else f"{hits.size} profiles"
            raise KeyError(f"{what} with key {dict(zip(self.by, values))} (profiles are keyed by {list(self.by)}; "
                           f"e.g. {some}).")
        return int(self.parameters["profile_id"].iloc[hits[0]])

    def _key_values(self, key) -> tuple:
        if isinstance(key, (pd.Series, dict)):
            missing = [b for b in self.by if b not in key]
            if missing:
                raise KeyError(f"the key lacks the profile column(s) {missing}; profiles are keyed by {list(self.by)}.")
            return tuple(key[b] for b in self.by)
        values = key if isinstance(key, tuple) else (key,)
        if len(values) != len(self.by):
            raise KeyError(f"a key needs {len(self.by)} value(s), one per column {list(self.by)}; got {key!r}.")
        return values

    def profile(self, key=None, *, profile_id=None) -> ProfileData:
        """All that is known about one profile, found by its key (or by ``profile_id=``).

        Examples
        --------
        >>> import pandas as pd, pkwidgets as pk
        >>> df = pd.DataFrame({"id": [1] * 4 + [2] * 4, "time": [0, 1, 2, 4] * 2,
        ...                    "conc": [0, 4, 3, 1, 0, 8, 6, 2], "dose": 10})
        >>> p = pk.nca(df, by="id").profile(2)
        >>> p.label, float(p.parameters["CMAX"]), p.samples["conc"].tolist()
        ('id 2', 8.0, [0, 8, 6, 2])
        """
        pid = self.profile_id(key) if profile_id is None else int(profile_id)
        params = self.parameters.loc[self.parameters["profile_id"] == pid]
        if len(params) != 1:
            raise KeyError(f"profile_id {pid} is not in this result.")
        row = params.iloc[0]
        i = int(self.arrays.rows_of([pid])[0])
        a = self.arrays
        sl = a.span(i)
        win = a.terminal[i]
        scalar = lambda name: (None if a.per_profile.get(name) is None  # noqa: E731
                               else float(np.broadcast_to(a.per_profile[name], (len(a.ids),))[i]))
        return ProfileData(
            key={b: params[b].iloc[0] for b in self.by}, profile_id=pid, parameters=row[self.codes].astype(float),
            units=dict(self.units),
            samples=self.samples.loc[self.samples[SAMPLE_COLUMNS["profile"]] == pid],
            flags=self.flags.loc[self.flags["profile_id"] == pid],
            time=a.time[sl], conc=a.conc[sl], blq=a.blq[sl], lloq=a.lloq[sl], exclude=a.exclude[sl],
            lambda_z_used=a.lambda_z_used[sl], terminal=None if np.isnan(win).any() else tuple(win.tolist()),
            dose=scalar("dose"), duration=scalar("duration"), tau=scalar("tau"),
            partial={k: (float(s[i]), float(e[i])) for k, (s, e) in a.partial.items()})

    def profiles(self):
        """Iterate over :class:`ProfileData`, in the order of ``parameters``."""
        for pid in self.parameters["profile_id"]:
            yield self.profile(profile_id=pid)

    def subset(self, selection) -> "NCAResult":
        """The result restricted to some profiles: all three tables and the arrays agree.

        ``selection`` is a boolean mask over ``parameters`` rows, a table with a
        ``profile_id`` column (e.g. a filtered ``parameters``), or a list of keys.
        """
        ids = self._ids_of(selection)
        keep = lambda df, col: df.loc[df[col].isin(ids)]  # noqa: E731
        params = self.parameters.set_index("profile_id", drop=False).loc[ids].reset_index(drop=True)
        return replace(self, parameters=params, samples=keep(self.samples, SAMPLE_COLUMNS["profile"]),
                       flags=keep(self.flags, "profile_id"), arrays=self.arrays.take(self.arrays.rows_of(ids)))

    def _ids_of(self, selection) -> list:
        if isinstance(selection, pd.DataFrame):
            if "profile_id" not in selection.columns:
                raise KeyError("a table selecting profiles needs the profile_id column of `parameters`.")
            return [int(p) for p in selection["profile_id"]]
        if isinstance(selection, (pd.Series, np.ndarray)) and np.asarray(selection).dtype == bool:
            mask = np.asarray(selection, dtype=bool)
            if mask.shape != (len(self.parameters),):
                raise ValueError(f"a mask selecting profiles needs {len(self.parameters)} values; got {mask.shape}.")
            return [int(p) for p in self.parameters["profile_id"].to_numpy()[mask]]
        return [self.profile_id(k) for k in selection]

    def to_long(self, parameters: pd.DataFrame | None = None) -> pd.DataFrame:
        """One row per profile and parameter, CDISC-style (see :func:`pkwidgets.long.long_table`).

        ``parameters`` may be a filtered or re-sorted copy of ``self.parameters``
        (it needs its ``profile_id`` column): interval bounds are looked up by id.
        """
        frame = self.parameters if parameters is None else parameters
        if "profile_id" not in frame.columns:
            raise KeyError("to_long needs the profile_id column of `parameters` to find each profile's intervals.")
        rows = self.arrays.rows_of(frame["profile_id"])
        bounds = {k: (np.asarray(s)[rows], np.asarray(e)[rows]) for k, (s, e) in self.arrays.partial.items()}
        return long_table(frame.reset_index(drop=True), list(self.by), self.units, bounds, self.settings)

    def summary(self, by=None, parameters=None) -> pd.DataFrame:
        """Group statistics of the parameters (:func:`pkwidgets.summary.summarize`)."""
        from .summary import summarize

        return summarize(self.parameters.drop(columns="profile_id"), by=by, parameters=parameters, units=self.units)

    def __repr__(self):
        return (f"NCAResult: {len(self.parameters)} profiles by {list(self.by)}, {len(self.samples)} rows "
                f"({len(self.unused)} not used), {len(self.flags)} flags\n{self.parameters!r}")

    def _repr_html_(self):
        head = (f"<p><b>NCAResult</b>: {len(self.parameters)} profiles by {', '.join(self.by)}; "
                f"{len(self.samples)} input rows ({len(self.unused)} not used); {len(self.flags)} flags.</p>")
        return head + self.parameters.to_html(index=False, max_rows=60)

    def __len__(self):
        return len(self.parameters)

    def _deprecated(self, old, new):
        warnings.warn(f"NCAResult.{old} is deprecated and will be removed in the next release; use {new}.",
                      DeprecationWarning, stacklevel=3)

    @property
    def rows(self) -> pd.DataFrame:
        """Deprecated: ``samples`` with the old column names (line, profile, used, reason, lambda_z)."""
        self._deprecated("rows", "NCAResult.samples (tool columns prefixed nca_)")
        return self.samples.drop(columns=[SAMPLE_COLUMNS["time"]]).rename(columns=_OLD_NAMES)

    @property
    def qc_flags(self) -> pd.DataFrame:
        """Deprecated: ``flags``."""
        self._deprecated("qc_flags", "NCAResult.flags")
        return self.flags.drop(columns="profile_id")

    def __getitem__(self, item):
        """Deprecated DataFrame-style access; a boolean mask gives :meth:`subset` (keyed, never positional)."""
        if isinstance(item, (pd.Series, np.ndarray)) and np.asarray(item).dtype == bool:
            self._deprecated("[mask]", "NCAResult.subset(mask)")
            return self.subset(item)
        self._deprecated("[...]", "NCAResult.parameters[...]")
        return self.parameters[item]

    def __getattr__(self, name):
        if name.startswith("_") or name in ("parameters", "samples", "flags", "arrays"):
            raise AttributeError(name)
        if hasattr(pd.DataFrame, name) or name in self.parameters.columns:
            self._deprecated(name, f"NCAResult.parameters.{name}")
            return getattr(self.parameters, name)
        raise AttributeError(f"'NCAResult' has no attribute {name!r}; the tables are .parameters, .samples and "
                             ".flags.")


def parameters_of(params) -> pd.DataFrame:
    """The per-profile parameter table of an :class:`NCAResult`, or ``params`` itself if it is a DataFrame.

    Raises
    ------
    TypeError
        For anything else, saying what is expected.
    """
    if not isinstance(params, pd.DataFrame) and isinstance(getattr(params, "parameters", None), pd.DataFrame):
        return params.parameters
    if not isinstance(params, pd.DataFrame):
        raise TypeError("params must be a pandas DataFrame (e.g. pk.nca(...).parameters); "
                        f"got {type(params).__name__}.")
    return params
