"""Study tables: :func:`nca` maps a long-format table onto the array engine.

The table layer parses and validates columns (naming file, line and column
in every error), groups rows into profiles, pads them into profiles x
samples arrays, calls :func:`pkwidgets.engine.nca_arrays` once, and maps the
results back: one row per profile, and for every input row whether it was
used and, if not, why.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ._dask import is_dask_frame, nca_dask
from .blq import BLQ_MARKERS, parse_concentrations
from .engine import SampleValueError, nca_arrays
from .errors import InputDataError
from .io import LINE, read_study_csv, wrong_delimiter_hint
from .parameters import PARAMETERS
from .profile import ordered_codes
from .record import apply_selections, canonical_key, coerce_record
from .qc import FLAGS, STATUS_REASONS, QCThresholds, SampleStatus, flag_message
from .units import StudyUnits, ureg

__all__ = ["nca", "NCATable", "NCARecord"]

_TRUE = {"1", "true", "t", "yes", "y", "blq"}
_FALSE = {"0", "false", "f", "no", "n", ""}
_EMPTY = {"", "na", "nan", "."}
REASON_NO_TIME = "no time and no concentration recorded"


@dataclass
class NCARecord:
    """Everything about a run besides the parameters.

    Attributes
    ----------
    rows : DataFrame
        Every input row with ``profile`` (index into the result), ``used``
        (bool), ``reason`` and ``lambda_z`` (bool: in the lambda-z fit).
    qc_flags : DataFrame
        One row per raised flag: profile keys, ``flag``, ``severity``, ``message``.
    settings : dict
        Options, rules and thresholds used.
    units : dict
        Code -> unit text ("" when no units were declared).
    """

    rows: pd.DataFrame
    qc_flags: pd.DataFrame
    settings: dict
    units: dict = field(default_factory=dict)
    by: list = field(default_factory=list)
    #: Engine inputs (profiles x samples arrays, per-profile options, keys,
    #: fingerprints) so that widgets can show one profile as the run saw it.
    inputs: dict = field(default_factory=dict)


class NCATable(pd.DataFrame):
    """Parameters, one row per profile (``by`` columns first, then PPTESTCD codes).

    A ``pandas.DataFrame`` with the run's record attached:

    - ``.rows``: every input row, used or not, with its reason;
    - ``.unused``: the rows not used, with their reason;
    - ``.qc_flags``: reviewer checks raised, one row per profile and flag;
    - ``.settings``, ``.units``;
    - ``.to_long()``: one row per profile and parameter, CDISC-style.
    """

    _metadata = ["_record"]

    @property
    def _constructor(self):
        return NCATable

    @property
    def parameters(self) -> pd.DataFrame:
        """The parameters as a plain DataFrame (profile keys first, then PPTESTCD codes)."""
        return pd.DataFrame(self)

    @property
    def record(self) -> NCARecord:
        return self._record

    @property
    def rows(self) -> pd.DataFrame:
        return self._record.rows

    @property
    def unused(self) -> pd.DataFrame:
        r = self._record.rows
        return r.loc[~r["used"]]

    @property
    def qc_flags(self) -> pd.DataFrame:
        return self._record.qc_flags

    @property
    def settings(self) -> dict:
        return self._record.settings

    @property
    def units(self) -> dict:
        return self._record.units

    def to_long(self) -> pd.DataFrame:
        """One row per profile and parameter, CDISC-style.

        Columns: the profile keys, PPTESTCD, PPTEST, value, unit, PPSTINT and
        PPENINT (ISO 8601 durations after the dose, for partial areas, when
        the time unit is declared), interval_start and interval_end (the same
        in the study's time unit), auc_method and blq_rules.  Partial areas
        carry the CDISC code AUCINT with their interval; the wide table's
        column name is kept in ``interval``.
        """
        by = self._record.by
        codes = [c for c in self.columns if c not in by]
        long = pd.DataFrame(self).melt(id_vars=by, value_vars=codes, var_name="PPTESTCD", value_name="value",
                                       ignore_index=False)
        profile = long.index.to_numpy()
        long = long.reset_index(drop=True)
        long["unit"] = long["PPTESTCD"].map(self._record.units).fillna("")
        start = np.full(len(long), np.nan)
        end = np.full(len(long), np.nan)
        for name, (s, e) in self._record.inputs.get("partial", {}).items():
            m = (long["PPTESTCD"] == name).to_numpy()
            start[m], end[m] = s[profile[m]], e[profile[m]]
        is_part = long["PPTESTCD"].str.startswith("AUCINT").to_numpy()
        long["interval"] = np.where(is_part, long["PPTESTCD"], "")
        long.loc[is_part, "PPTESTCD"] = "AUCINT"
        long["PPTEST"] = [PARAMETERS[c].name if c in PARAMETERS else "AUC from T1 to T2" for c in long["PPTESTCD"]]
        time_unit = (self._record.settings.get("units") or {}).get("time")
        long["PPSTINT"] = _iso_durations(start, time_unit)
        long["PPENINT"] = _iso_durations(end, time_unit)
        long["interval_start"], long["interval_end"] = start, end
        s = self._record.settings
        long["auc_method"] = s["auc_method"]
        long["blq_rules"] = s["blq_rules_text"]
        return long[by + ["PPTESTCD", "PPTEST", "value", "unit", "PPSTINT", "PPENINT", "interval_start",
                          "interval_end", "interval", "auc_method", "blq_rules"]]


def _iso_durations(times, time_unit):
    """Times after the dose as ISO 8601 durations in hours (``PT1.5H``); "" where NaN or no unit."""
    if time_unit is None:
        return [""] * len(times)
    hours = times * float((1.0 * ureg(time_unit)).to("h").magnitude)
    return ["" if np.isnan(h) else f"PT{h:.10g}H" for h in hours]


def nca(
    data,
    *,
    by,
    time="time",
    conc="conc",
    dose="dose",
    blq=None,
    lloq=None,
    dose_time=None,
    units=None,
    route="extravascular",
    duration=None,
    tau=None,
    auc_method="linear",
    terminal="auto",
    exclude=None,
    blq_rules=None,
    partial=(),
    qc=None,
    selections=None,
    occasion=None,
    sep=",",
    decimal=".",
    encoding="utf-8",
) -> NCATable:
    """NCA of every profile in a long-format study table.

    Parameters
    ----------
    data : DataFrame or path of a CSV file
        One row per sample.
    by : str or list of str
        Columns that identify a profile (subject, period, treatment, analyte, day...).
    time, conc : str
        Column names of the sampling time (after the dose, or absolute with
        ``dose_time``) and the concentration.  Concentration text ``"BLQ"``,
        ``"<0.50"`` and the other markers in :data:`pkwidgets.blq.BLQ_MARKERS`
        is read as BLQ (``"<x"`` also gives the LLOQ); other text is an error.
    dose : str or float or None
        Dose column (constant within a profile) or one amount for all.  When
        the default column ``"dose"`` is absent, no dose is used (a warning
        says so) and CL, V and dose-normalised values are NaN.  A dose column
        asks for those values: a profile whose dose is empty, zero, negative or
        infinite is an error naming the profile and its lines (pass
        ``dose=None`` to analyse without doses).
    blq : str, optional
        Column of BLQ flags (true/false, yes/no, 1/0).
    lloq : str or float, optional
        LLOQ column or value.
    dose_time : str or float, optional
        Time of the dose on the same clock as ``time``; times are taken relative to it.
    units : StudyUnits or dict, optional
        Declared units (``time``, ``conc``, ``dose``); values are then
        reported in derived units (CL in L/h, ...).
    route, duration, tau, auc_method, blq_rules, partial, qc
        As in :func:`pkwidgets.nca_profile`; ``duration`` and ``tau`` may also
        name a column (constant within a profile).
    terminal : "auto", (start, end), or dict of profile key -> (start, end)
        Lambda-z window for all profiles or per profile (key: the ``by``
        value, a tuple when ``by`` has several columns).
    exclude : str or dict, optional
        Column of booleans (True = leave the sample out of the lambda-z fit),
        or dict of profile key -> sampling times to leave out.
    selections : SelectionRecord or path, optional
        A record of hand-made lambda-z choices (:mod:`pkwidgets.record`).
        The latest choice of each recorded profile replaces ``terminal`` and
        ``exclude`` for that profile.  A profile whose data no longer match
        the recorded fingerprint is analysed automatically and flagged
        ``selection_stale``.  A missing file is an empty record.  Recorded
        profiles that are not in the data are not applied: a warning names
        them (``settings["selections"]["unmatched"]``).
    occasion : str, optional
        A ``by`` column that orders dosing occasions (day, dose number) of
        otherwise identical keys.  With ``tau``, each later occasion gets the
        observed accumulation ratios against the first occasion with the same
        tau: ARAUC = AUCTAU / AUCTAU(first), ARCMAX = CMAX / CMAX(first).
    sep, decimal, encoding
        CSV reading options when ``data`` is a path.

    Returns
    -------
    NCATable
        One row per profile, ``by`` columns first, then PPTESTCD codes; with
        ``.rows``, ``.unused``, ``.qc_flags``, ``.settings``, ``.units`` and
        ``.to_long()``.  Results equal :func:`pkwidgets.nca_profile` on each
        profile.  For a Dask DataFrame (extra ``pkwidgets[dask]``): a lazy
        Dask DataFrame of the parameters; rows are shuffled on the profile
        keys so each profile is whole on one partition, and every partition
        runs this function (see :mod:`pkwidgets._dask`).

    Raises
    ------
    InputDataError
        With file (or table), line (or row) and column for unreadable values,
        missing columns, duplicate times in a profile, conflicting doses.
    """
    if is_dask_frame(data):  # scale-out: the same function on each partition, profiles kept whole
        options = dict(locals())
        del options["data"], options["by"]
        return nca_dask(data, by=by, **options)
    by = [by] if isinstance(by, str) else list(by)
    if not by:
        raise ValueError("by must name at least one column that identifies a profile (e.g. by='subject').")
    src = _Source.open(data, sep=sep, encoding=encoding)
    opt_cols = {"blq": blq, "lloq": lloq, "dose_time": dose_time, "duration": duration, "tau": tau,
                "exclude": exclude, "dose": dose}
    required = by + [time, conc] + [v for k, v in opt_cols.items()
                                     if isinstance(v, str) and not (k == "dose" and v == "dose")]
    src.require(required)
    f = src.frame
    n = len(f)

    t = src.numeric(time, decimal)
    c, blq_a, lloq_txt = src.concentrations(conc, decimal)
    if isinstance(blq, str):
        blq_a = blq_a | src.boolean(blq)
    lloq_a = src.numeric(lloq, decimal) if isinstance(lloq, str) else np.full(n, np.nan if lloq is None else float(lloq))
    lloq_a = np.where(np.isnan(lloq_a), lloq_txt, lloq_a)

    no_time = np.isnan(t)
    bad_time = no_time & (~np.isnan(c) | blq_a)
    if bad_time.any():
        i = int(np.flatnonzero(bad_time)[0])
        raise InputDataError(
            f"{src.at(i, time)}: time is empty but a concentration is given; fill in the sampling time.",
            file=src.file, line=src.line(i), column=time)
    if np.isinf(t).any():
        i = int(np.flatnonzero(np.isinf(t))[0])
        raise InputDataError(f"{src.at(i, time)}: time is infinite.", file=src.file, line=src.line(i), column=time)
    bad_c = np.isinf(c) | (c < 0)
    if bad_c.any():
        i = int(np.flatnonzero(bad_c)[0])
        raise InputDataError(
            f"{src.at(i, conc)}: concentration {float(c[i])!r} is not a finite value >= 0; "
            "write BLQ values as 'BLQ' or '<LLOQ' or flag them in a blq column.",
            file=src.file, line=src.line(i), column=conc)

    keep = ~no_time
    prof = src.profiles(by, keep)
    P = int(prof.max()) + 1 if keep.any() else 0
    if P == 0:
        raise InputDataError(f"{src.name}: no row has a sampling time; nothing to analyse.", file=src.file)
    keys = src.keys(by, prof, P)

    if dose_time is not None:
        dt_p = src.per_profile(dose_time, prof, P, "dose_time", decimal)
        t = t - dt_p[np.maximum(prof, 0)]
    if isinstance(dose, str) and dose not in f.columns:
        if dose != "dose":
            raise InputDataError(f"{src.name}: dose column {dose!r} not found.", file=src.file, column=dose)
        warnings.warn(f"{src.name} has no 'dose' column: CL, V and dose-normalised values are not computed; "
                      "pass dose= (a column or an amount).", stacklevel=2)
        dose = None
    dose_p = src.per_profile(dose, prof, P, "dose", decimal) if dose is not None else None
    if isinstance(dose, str):
        src.check_doses(dose, dose_p, prof, keys)
    dur_p = src.per_profile(duration, prof, P, "duration", decimal) if duration is not None else None
    tau_p = src.per_profile(tau, prof, P, "tau", decimal) if tau is not None else None

    pad = _Padding(t, prof, keep, src, keys, time)
    T, C, B, L = (pad.array(a) for a in (t, c, blq_a, lloq_a))
    X = pad.array(src.exclusions(exclude, prof, keys, t, by))
    term = _terminal_array(terminal, keys, by, P)
    key_texts = [canonical_key(tuple(r)) for r in keys.itertuples(index=False)]
    sel = None
    if selections is not None:
        rec = coerce_record(selections)
        term, X, stale, applied, fps = apply_selections(rec, key_texts, T, C, B, X, term)
        sel = {"path": rec.path, "applied": [key_texts[p] for p in np.flatnonzero(applied)],
               "stale": [key_texts[p] for p in np.flatnonzero(stale)], "fingerprints": fps}
        recorded = set(rec.states())
        sel["unmatched"] = sorted(recorded - {tuple(k) for k in key_texts})
        if sel["unmatched"]:
            names = ", ".join("/".join(k) for k in sel["unmatched"][:5]) + (", ..." if len(sel["unmatched"]) > 5 else "")
            hint = (" None of its profiles is in the data: is it the record of another dataset?"
                    if len(sel["unmatched"]) == len(recorded) else "")
            warnings.warn(f"selection record {rec.path or '(not saved)'} has choices for {len(sel['unmatched'])} "
                          f"profile(s) not in {src.name} ({names}); they were not applied.{hint}", stacklevel=2)

    try:
        res = nca_arrays(T, C, dose=dose_p, route=route, duration=dur_p, tau=tau_p, auc_method=auc_method,
                         terminal=term, exclude=X, blq=B, lloq=L, partial=partial, blq_rules=blq_rules, qc=qc)
    except SampleValueError as exc:  # name the file, line and profile of the sample
        i = pad.row_of(exc.profile, exc.sample)
        raise InputDataError(
            f"{src.at(i, conc)}, profile {keys.iloc[exc.profile].to_dict()}: "
            + exc.template.format(where="this BLQ sample"),
            file=src.file, line=src.line(i), column=conc, profile=keys.iloc[exc.profile].to_dict()) from None
    if occasion is not None:
        res.update(_accumulation(res, keys, by, occasion, tau_p))
    res.flags["times_sorted"] = res.flags["times_sorted"] | pad.unsorted(t, prof, keep)
    if sel is not None:
        res.flags["selection_stale"] = stale

    # wide table, units
    codes = ordered_codes(res)
    su = None if units is None else (units if isinstance(units, StudyUnits) else StudyUnits(**units))
    unit_map, cols = {}, {}
    for k in codes:
        text, factor = su.unit_of(k) if su is not None else ("", 1.0)
        unit_map[k] = text
        cols[k] = res[k] * factor
    wide = pd.concat([keys.reset_index(drop=True), pd.DataFrame(cols)], axis=1)

    # every input row: used or not, and why
    rows = src.original()
    rows["profile"] = np.where(keep, prof, -1)
    status = pad.per_row(res.status, fill=-1)
    reasons = np.array([STATUS_REASONS[s] for s in sorted(STATUS_REASONS)] + [REASON_NO_TIME], dtype=object)
    rows["used"] = status == SampleStatus.USED
    rows["reason"] = reasons[np.where(status < 0, len(reasons) - 1, status)]
    rows["lambda_z"] = pad.per_row(res.lambda_z_used, fill=False)

    qc_flags = _flag_table(res.flags, keys, qc or QCThresholds())
    rules = res.settings["blq_rules"]
    settings = dict(res.settings)
    settings.update(
        source=src.name, by=by, columns={"time": time, "conc": conc, "dose": dose, "blq": blq, "lloq": lloq,
                                         "dose_time": dose_time},
        units=None if su is None else {"time": su.time, "conc": su.conc, "dose": su.dose},
        tau=tau, duration=duration, occasion=occasion,
        steady_state_predose=("observed sample at dose time used as C(0); without one, CMIN of the "
                              "interval (flag predose_imputed)") if tau is not None else None,
        blq_rules_text="; ".join(f"{k}={v}" for k, v in rules.items()),
        profiles=P, rows=n, rows_used=int(rows["used"].sum()), selections=sel,
    )
    out = NCATable(wide)
    inputs = {"partial": res.partial_bounds, "time": T, "conc": C, "blq": B, "lloq": L, "exclude": X,
              "terminal": term, "dose": dose_p,
              "duration": dur_p, "tau": tau_p, "keys": key_texts, "lambda_z_used": res.lambda_z_used}
    out._record = NCARecord(rows=rows, qc_flags=qc_flags, settings=settings, units=unit_map, by=by, inputs=inputs)
    return out


class _Padding:
    """Rows of a table placed into profiles x samples arrays, ordered by time within each profile."""

    def __init__(self, t, prof, keep, src, keys, time_column):
        idx = np.flatnonzero(keep)
        self.order = order = idx[np.lexsort((t[idx], prof[idx]))]
        self.profile = p_sorted = prof[order]
        self.starts = np.r_[0, np.flatnonzero(np.diff(p_sorted)) + 1]
        counts = np.diff(np.r_[self.starts, len(order)])
        self.slot = np.arange(len(order)) - np.repeat(self.starts, counts)
        self.shape = (int(prof.max()) + 1, int(counts.max()))
        self.n = len(t)
        t_sorted = t[order]
        dup = (np.diff(p_sorted) == 0) & (np.diff(t_sorted) == 0)
        if dup.any():
            j = int(np.flatnonzero(dup)[0])
            a, b = order[j], order[j + 1]
            key = keys.iloc[p_sorted[j]].to_dict()
            raise InputDataError(
                f"{src.name}: profile {key} has time {t_sorted[j]:g} twice "
                f"({src.where_row(a)} and {src.where_row(b)}); keep one sample per time (or average replicates).",
                file=src.file, line=src.line(a), column=time_column, profile=key)

    def array(self, values):
        """Per-row values as a (profiles, samples) array, NaN (or False) where no sample."""
        out = np.zeros(self.shape, dtype=bool) if values.dtype == bool else np.full(self.shape, np.nan)
        out[self.profile, self.slot] = values[self.order]
        return out

    def per_row(self, array, fill):
        """A (profiles, samples) array back onto the input rows; ``fill`` for rows not placed."""
        out = np.full(self.n, fill, dtype=np.int16 if array.dtype != bool else bool)
        out[self.order] = array[self.profile, self.slot]
        return out

    def unsorted(self, t, prof, keep):
        """Per profile: were its rows out of time order in the input?"""
        idx = np.flatnonzero(keep)
        p = prof[idx]
        back = (np.diff(p) == 0) & (np.diff(t[idx]) < 0)
        out = np.zeros(self.shape[0], dtype=bool)
        out[p[1:][back]] = True
        return out

    def row_of(self, profile, sample):
        """Input row of a (profile, sample) position."""
        return int(self.order[self.starts[profile] + sample])


def _flag_table(flags, keys, qc):
    """One row per raised flag: profile keys, flag, severity, message."""
    raised = sorted((p, name) for name in FLAGS for p in np.flatnonzero(flags[name]))
    return pd.concat(
        [keys.iloc[[p for p, _ in raised]].reset_index(drop=True),
         pd.DataFrame({"flag": [nm for _, nm in raised], "severity": [FLAGS[nm][0] for _, nm in raised],
                       "message": [flag_message(nm, qc) for _, nm in raised]})], axis=1)


def _accumulation(res, keys, by, occasion, tau_p):
    """ARAUC and ARCMAX of each profile against the first occasion of the same other keys and tau."""
    if occasion not in by:
        raise ValueError(f"occasion={occasion!r} must be one of the by columns {by}.")
    if tau_p is None:
        raise ValueError("occasion= gives accumulation ratios over a dosing interval: pass tau= as well.")
    P = len(keys)
    tau_p = np.broadcast_to(np.asarray(tau_p, dtype=np.float64), (P,))
    others = [b for b in by if b != occasion]
    frame = keys.copy()
    frame["__tau__"] = tau_p
    frame["__pos__"] = np.arange(P)
    group = frame.groupby(others + ["__tau__"], sort=False, dropna=False) if others else frame.groupby("__tau__")
    first_pos = frame.loc[group[occasion].idxmin(), "__pos__"].to_numpy()
    ref = np.full(P, -1)
    ref[frame["__pos__"].to_numpy()] = first_pos[group.ngroup().to_numpy()]
    later = ref != np.arange(P)
    with np.errstate(divide="ignore", invalid="ignore"):
        return {
            "ARAUC": np.where(later, res["AUCTAU"] / res["AUCTAU"][ref], np.nan),
            "ARCMAX": np.where(later, res["CMAX"] / res["CMAX"][ref], np.nan),
        }


def _key_of(row_values, by):
    return row_values[0] if len(by) == 1 else tuple(row_values)


def _terminal_array(terminal, keys, by, P):
    if not isinstance(terminal, dict):
        return terminal
    arr = np.full((P, 2), np.nan)
    lookup = {_key_of(list(r), by): i for i, r in enumerate(keys.itertuples(index=False))}
    for k, win in terminal.items():
        if k not in lookup:
            raise InputDataError(f"terminal names profile {k!r}, which is not in the data (profiles are keyed by {by}).")
        if win is None or (isinstance(win, str) and win == "auto"):
            continue
        arr[lookup[k]] = win
        if not arr[lookup[k], 1] > arr[lookup[k], 0]:
            raise InputDataError(f"terminal window for profile {k!r} must have end > start; got {tuple(win)!r}.",
                                 profile=k)
    return arr


class _Source:
    """A table being parsed, with the means to name any cell in an error."""

    def __init__(self, frame, file, name):
        self.frame = frame
        self.file = file
        self.name = name

    @classmethod
    def open(cls, data, *, sep, encoding):
        if isinstance(data, (str, os.PathLike)):
            return cls(read_study_csv(data, sep=sep, encoding=encoding), os.fspath(data), os.fspath(data))
        if isinstance(data, pd.DataFrame):
            if len(data) == 0:
                raise InputDataError("the table is empty: expected one row per sample.")
            if data.columns.duplicated().any():
                d = data.columns[data.columns.duplicated()][0]
                raise InputDataError(f"column name {d!r} appears more than once; give each column a distinct name.",
                                     column=d)
            return cls(data, None, "table")
        raise TypeError(f"data must be a pandas DataFrame or the path of a CSV file; got {type(data).__name__}.")

    def line(self, i):
        if self.file is not None:
            return int(self.frame[LINE].iloc[i])
        return self.frame.index[i]

    def where_row(self, i):
        return f"line {self.line(i)}" if self.file is not None else f"row {self.line(i)!r}"

    def at(self, i, column):
        return f"{self.name}, {self.where_row(i)}, column {column!r}"

    def original(self):
        cols = [c for c in self.frame.columns if c != LINE]
        rows = self.frame[cols].copy()
        if self.file is not None:
            rows.insert(0, "line", self.frame[LINE].to_numpy())
        return rows

    def require(self, columns):
        missing = [c for c in dict.fromkeys(columns) if c not in self.frame.columns]
        if missing:
            have = [c for c in self.frame.columns if c != LINE]
            raise InputDataError(
                f"{self.name}: required column(s) {missing} not found; columns are {have}."
                + wrong_delimiter_hint(have) + " Map your names with time=, conc=, by=, dose=.",
                file=self.file, column=missing[0])

    def _text(self, column):
        return self.frame[column].astype(str).str.strip()

    def numeric(self, column, decimal="."):
        s = self.frame[column]
        if pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s):
            return s.to_numpy(dtype=np.float64, na_value=np.nan)
        text = self._text(column)
        empty = text.str.lower().isin(_EMPTY) | s.isna().to_numpy()
        if decimal != ".":
            text = text.str.replace(decimal, ".", regex=False)
        vals = pd.to_numeric(text.where(~empty, None), errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
        bad = np.isnan(vals) & ~empty.to_numpy()
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raw = s.iloc[i]
            hint = " It looks like a decimal comma: pass decimal=','." if "," in str(raw) else ""
            raise InputDataError(
                f"{self.at(i, column)}: {raw!r} is not a number ({int(bad.sum())} such value(s) in the column).{hint}",
                file=self.file, line=self.line(i), column=column)
        return vals

    def concentrations(self, column, decimal="."):
        s = self.frame[column]
        n = len(s)
        if pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s):
            return s.to_numpy(dtype=np.float64, na_value=np.nan), np.zeros(n, bool), np.full(n, np.nan)
        text = self._text(column)
        if decimal != ".":
            text = text.str.replace(decimal, ".", regex=False)
        # a writable copy: pandas (copy-on-write) may hand back a read-only view
        vals = np.array(pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan))
        blq = np.zeros(n, dtype=bool)
        lloq = np.full(n, np.nan)
        todo = np.flatnonzero(np.isnan(vals))
        if todo.size:
            raw = s.iloc[todo].to_numpy(dtype=object)
            raw = np.where(pd.isna(raw), None, raw)
            cv, b, lq, bad = parse_concentrations(list(raw))
            if bad.any():
                i = int(todo[np.flatnonzero(bad)[0]])
                hint = " It looks like a decimal comma: pass decimal=','." if "," in str(s.iloc[i]) else ""
                raise InputDataError(
                    f"{self.at(i, column)}: {s.iloc[i]!r} is neither a number nor a BLQ marker "
                    f"({', '.join(BLQ_MARKERS)}, or '<' followed by the LLOQ).{hint}",
                    file=self.file, line=self.line(i), column=column)
            vals[todo], blq[todo], lloq[todo] = cv, b, lq
        return vals, blq, lloq

    def boolean(self, column):
        s = self.frame[column]
        if pd.api.types.is_bool_dtype(s):
            return s.to_numpy(dtype=bool, na_value=False)
        text = self._text(column).str.lower()
        text = text.where(~s.isna(), "")
        t = text.isin(_TRUE).to_numpy()
        fz = text.isin(_FALSE).to_numpy()
        bad = ~t & ~fz
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise InputDataError(
                f"{self.at(i, column)}: {s.iloc[i]!r} is not a yes/no value (use true/false, yes/no or 1/0).",
                file=self.file, line=self.line(i), column=column)
        return t

    def profiles(self, by, keep):
        for col in by:
            miss = self.frame[col].isna().to_numpy() | (self._text(col) == "").to_numpy()
            if (miss & keep).any():
                i = int(np.flatnonzero(miss & keep)[0])
                raise InputDataError(f"{self.at(i, col)}: profile key is empty; every sample needs a {col!r}.",
                                     file=self.file, line=self.line(i), column=col)
        sub = self.frame.loc[keep, by]
        prof = np.full(len(self.frame), -1, dtype=np.int64)
        prof[keep] = sub.groupby(by, sort=True, dropna=False).ngroup().to_numpy()
        return prof

    def keys(self, by, prof, P):
        first = np.full(P, -1, dtype=np.int64)
        valid = np.flatnonzero(prof >= 0)
        first_pos = np.unique(prof[valid], return_index=True)[1]
        first[:] = valid[first_pos]
        return self.frame[by].iloc[first].reset_index(drop=True)

    def per_profile(self, value, prof, P, name, decimal):
        if not isinstance(value, str):
            return value
        vals = self.numeric(value, decimal)
        ok = prof >= 0
        df = pd.DataFrame({"p": prof[ok], "v": vals[ok]}).dropna()
        spread = df.groupby("p")["v"].agg(["min", "max"])
        conflict = spread.index[spread["min"] != spread["max"]]
        if len(conflict):
            p = int(conflict[0])
            lines = [self.where_row(i) for i in np.flatnonzero(prof == p)[:6]]
            raise InputDataError(
                f"{self.name}: column {value!r} differs within one profile ({spread.loc[p, 'min']:g} and "
                f"{spread.loc[p, 'max']:g}; {', '.join(lines)}); a profile has one {name}. Split the profile "
                "with another by= column (e.g. period or day) or correct the value.",
                file=self.file, column=value)
        out = np.full(P, np.nan)
        out[spread.index.to_numpy()] = spread["min"].to_numpy()
        return out

    def check_doses(self, column, dose_p, prof, keys):
        """A dose column asks for CL, V and dose-normalised values: every profile needs a finite dose > 0."""
        with np.errstate(invalid="ignore"):
            bad = np.flatnonzero(~(dose_p > 0) | np.isinf(dose_p))
        if bad.size:
            p = int(bad[0])
            rows = np.flatnonzero(prof == p)
            key = keys.iloc[p].to_dict()
            got = "no value" if np.isnan(dose_p[p]) else f"dose {float(dose_p[p]):g}"
            raise InputDataError(
                f"{self.name}: profile {key} has {got} in column {column!r} "
                f"({', '.join(self.where_row(i) for i in rows[:6])}); CL, V and dose-normalised values need "
                "a finite dose > 0. Correct the dose, leave the profile out, or pass dose=None to analyse "
                "without doses.",
                file=self.file, line=self.line(rows[0]), column=column, profile=key)

    def exclusions(self, exclude, prof, keys, t, by):
        n = len(self.frame)
        if exclude is None:
            return np.zeros(n, dtype=bool)
        if isinstance(exclude, str):
            return self.boolean(exclude)
        if isinstance(exclude, dict):
            lookup = {_key_of(list(r), by): i for i, r in enumerate(keys.itertuples(index=False))}
            mask = np.zeros(n, dtype=bool)
            for k, times in exclude.items():
                if k not in lookup:
                    raise InputDataError(f"exclude names profile {k!r}, which is not in the data.")
                rows = np.flatnonzero(prof == lookup[k])
                for x in np.atleast_1d(times):
                    hit = rows[np.isclose(t[rows], float(x), rtol=1e-9, atol=1e-12)]
                    if hit.size == 0:
                        raise InputDataError(f"exclude lists time {float(x)!r} for profile {k!r}, which has no "
                                             "sample then.", profile=k)
                    mask[hit] = True
            return mask
        raise TypeError(f"exclude must be None, a column name or a dict of profile -> times; got {type(exclude).__name__}.")
