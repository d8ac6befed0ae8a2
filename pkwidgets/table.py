"""Study tables: :func:`nca` maps a long-format table onto the array engine.

The stages: read the columns (:mod:`pkwidgets.columns`, every error located
by file, line and column), form profiles from the key columns, place the rows
into profiles x samples arrays (:mod:`pkwidgets.padding`), apply recorded
terminal-phase choices (:mod:`pkwidgets.record`), run
:func:`pkwidgets.nca_arrays` once, and assemble an :class:`NCAResult` whose
tables share the ``profile_id`` (:mod:`pkwidgets.result`).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from ._dask import is_dask_frame, nca_dask
from .accumulation import accumulation_ratios, first_occasion
from .columns import TableSource, terminal_windows
from .batches import run_batches
from .engine import SampleValueError
from .errors import InputDataError
from .options import ColumnMap, NCAOptions, build_options
from .keys import check_separating_columns
from .padding import ProfilePadding
from .profile import ordered_codes
from .qc import FLAGS, STATUS_REASONS, SampleStatus, flag_message
from .record import canonical_key, coerce_record
from .result import SAMPLE_COLUMNS, NCAResult, ProfileArrays
from .units import StudyUnits, coerce_units

__all__ = ["nca", "nca_frame", "NCATable"]

REASON_NO_TIME = "no time and no concentration recorded"
_RESERVED_KEYS = ("profile_id",)


@dataclass(frozen=True)
class StudySpec:
    """What :func:`nca` was asked: profile columns, column roles, fixed values and rules."""

    by: tuple
    columns: ColumnMap
    options: NCAOptions
    amounts: dict  # role -> number for dose, lloq, dose_time given as values
    exclude_times: dict | None  # profile key -> times to leave out of the lambda-z fit
    units: StudyUnits | None
    dose_required: bool  # a dose column was named (not the default "dose")


def nca(data, *, by, options=None, columns=None, time="time", conc="conc", dose="dose", blq=None, lloq=None,
        dose_time=None, units=None, route="extravascular", duration=None, tau=None, auc_method="linear",
        terminal="auto", exclude=None, blq_rules=None, partial=(), qc=None, lambda_z_rule=None, selections=None,
        selections_new=False, occasion=None, sep=",", decimal=".", encoding="utf-8"):
    """NCA of every profile in a long-format study table.

    Parameters
    ----------
    data : DataFrame, path of a CSV file, or Dask DataFrame
        One row per sample.
    by : str or list of str
        Columns that identify a profile (subject, period, treatment, analyte, day...).
    options : NCAOptions, optional
        The rules of the analysis; the keyword arguments ``route``,
        ``duration``, ``tau``, ``auc_method``, ``terminal``, ``blq_rules``,
        ``partial``, ``qc`` and ``occasion`` override it when they differ
        from their defaults.
    columns : ColumnMap, optional
        Column roles; ``time``, ``conc``, ``dose``, ``blq``, ``lloq``,
        ``dose_time``, ``duration``, ``tau`` and ``exclude`` given as column
        names override it.
    time, conc : str
        Sampling time (after the dose, or on a study clock with ``dose_time``)
        and concentration columns.  Concentration text ``"BLQ"``, ``"<0.50"``
        and the other markers in :data:`pkwidgets.blq.BLQ_MARKERS` is read as
        BLQ (``"<x"`` also gives the LLOQ); other text is an error.
    dose : str or float or None
        Dose column (constant within a profile) or one amount for all.  When
        the default column ``"dose"`` is absent, no dose is used (a warning
        says so).  A named dose column needs a finite dose > 0 in every
        profile (an error names the profile and its lines).
    blq : str, optional
        Column of BLQ flags (true/false, yes/no, 1/0).
    lloq, dose_time, duration, tau : str or float, optional
        A column (constant within a profile for the last three) or one value.
    units : StudyUnits or dict, optional
        Declared units (``time``, ``conc``, ``dose``); values are then
        reported in derived units (CL in L/h, ...).
    route, auc_method, terminal, blq_rules, partial, qc, lambda_z_rule
        As in :class:`pkwidgets.NCAOptions`; ``terminal`` may be a dict of
        profile key (the ``by`` value, a tuple for several columns) -> window.
    exclude : str or dict, optional
        Column of yes/no (yes = leave the sample out of the lambda-z fit), or
        dict of profile key -> sampling times to leave out.
    selections : SelectionRecord or path, optional
        Recorded hand choices of the terminal phase (:mod:`pkwidgets.record`);
        the latest choice of each recorded profile replaces ``terminal`` and
        ``exclude`` for it.  A profile whose data no longer match the
        recorded fingerprint is analysed automatically and flagged
        ``selection_stale``.  Recorded profiles absent from the data are named
        in a warning and in ``settings["selections"]["unmatched"]``.  A path
        that does not exist is an error (a mistyped name would otherwise apply
        nothing) unless ``selections_new=True``.
    selections_new : bool
        Start a new, empty record when ``selections`` names no file yet.
    occasion : str, optional
        A ``by`` column ordering dosing occasions; with ``tau`` each later
        occasion gets ARAUC and ARCMAX against the first one, and the first
        occasion is taken as the first dose: without a sample at dose time its
        concentration there is 0 (flag ``time0_added``), not CMIN.
    sep, decimal, encoding
        CSV reading options when ``data`` is a path.

    Returns
    -------
    NCAResult
        ``.parameters`` (one row per profile: ``by`` columns, ``profile_id``,
        PPTESTCD codes), ``.samples`` (every input row with its use and
        reason), ``.flags``, ``.units``, ``.options``, ``.settings``,
        ``.to_long()`` and ``.profile(key)``.  For a Dask DataFrame: a
        :class:`pkwidgets._dask.LazyResult` of lazy tables.

    Raises
    ------
    InputDataError
        With file (or table), line (or row) and column for unreadable values,
        missing columns, duplicate times in a profile, conflicting doses.
    """
    spec = _study_spec(by, options, columns, units, terminal=terminal, exclude=exclude, occasion=occasion,
                       route=route, auc_method=auc_method, blq_rules=blq_rules, partial=partial, qc=qc,
                       lambda_z_rule=lambda_z_rule,
                       roles={"time": time, "conc": conc, "dose": dose, "blq": blq, "lloq": lloq,
                              "dose_time": dose_time, "duration": duration, "tau": tau})
    if selections is not None:
        selections = coerce_record(selections, create=selections_new)
    if is_dask_frame(data):  # scale-out: the same function on each partition, profiles kept whole
        return nca_dask(data, spec, nca_frame, selections=selections)
    return nca_frame(data, spec, selections=selections, sep=sep, decimal=decimal, encoding=encoding)


def _study_spec(by, options, columns, units, *, roles, terminal, exclude, **rules) -> StudySpec:
    """Validate the arguments once: profile columns, column roles, fixed values, rules and units."""
    by = (by,) if isinstance(by, str) else tuple(by or ())
    if not by:
        raise ValueError("by must name at least one column that identifies a profile (e.g. by='subject').")
    clash = [b for b in by if b in _RESERVED_KEYS]
    if clash:
        raise ValueError(f"profile column {clash[0]!r} clashes with the result's own 'profile_id' column; "
                         "rename it in the data.")
    given_cols = {k: v for k, v in roles.items() if isinstance(v, str)}
    base = columns or ColumnMap()
    cols = ColumnMap(**{**base.used(), **given_cols, **({} if "dose" in given_cols or roles["dose"] == "dose"
                                                          else {"dose": None})})
    amounts = {k: float(v) for k, v in roles.items() if k in ("dose", "lloq", "dose_time")
               and v is not None and not isinstance(v, str)}
    numbers = {k: roles[k] for k in ("duration", "tau") if roles[k] is not None and not isinstance(roles[k], str)}
    exclude_times = None
    if isinstance(exclude, str):
        cols = ColumnMap(**{**cols.used(), "exclude": exclude})
    elif isinstance(exclude, dict):
        exclude_times = exclude
    elif exclude is not None:
        raise TypeError(f"exclude must be None, a column name or a dict of profile -> times; got "
                        f"{type(exclude).__name__}.")
    opts = build_options(options, terminal=terminal, **numbers, **rules)
    su = coerce_units(units, needs_dose=cols.dose is not None or "dose" in amounts)
    return StudySpec(by=by, columns=cols, options=opts, amounts=amounts, exclude_times=exclude_times, units=su,
                     dose_required=cols.dose is not None and cols.dose != "dose")


def nca_frame(data, spec: StudySpec, *, selections=None, sep=",", decimal=".", encoding="utf-8") -> NCAResult:
    """:func:`nca` of an in-memory table or CSV file, with the arguments already validated."""
    src = TableSource.open(data, sep=sep, encoding=encoding)
    cols, by = spec.columns, list(spec.by)
    src.require(by + [c for role, c in cols.used().items() if not (role == "dose" and c == "dose")])
    if cols.dose == "dose" and "dose" not in src.frame.columns:
        warnings.warn(f"{src.name} has no 'dose' column: CL, V and dose-normalised values are not computed; "
                      "pass dose= (a column or an amount).", stacklevel=3)
        spec = replace(spec, columns=ColumnMap(**{**cols.used(), "dose": None}))
    values = _read_samples(src, spec, decimal)
    prof, keys, key_notes = _profiles(src, by, values["keep"])
    per_profile = _per_profile_values(src, spec, prof, keys, decimal)
    if per_profile["dose_time"] is not None:
        values["time"] = values["time"] - per_profile["dose_time"][np.maximum(prof, 0)]
    pad = ProfilePadding(values["time"], prof, values["keep"], src, keys, cols.time)
    exclude = src.exclusions(cols.exclude or spec.exclude_times, prof, keys, values["time"], by)
    flat = {k: pad.flat(v) for k, v in {**values, "exclude": exclude}.items() if k != "keep"}
    terminal = terminal_windows(spec.options.terminal, keys, by, len(keys))
    key_texts = [canonical_key(tuple(r)) for r in keys.itertuples(index=False)]
    run = _run_engine(pad, flat, per_profile, terminal, spec.options, key_texts, selections, src, keys, cols.conc)
    run.flags["times_sorted"] = run.flags["times_sorted"] | pad.unsorted(values["time"], prof, values["keep"])
    sel = None
    if selections is not None:
        run.flags["selection_stale"] = run.selection["stale"]
        sel = _selection_settings(selections, run.selection, key_texts, src.name)
    run.settings["key_notes"] = key_notes
    return _assemble(run, spec, src, keys, prof, values["time"], pad, flat, per_profile, key_texts, sel)


def _read_samples(src: TableSource, spec: StudySpec, decimal) -> dict:
    """Time, concentration, BLQ flag and LLOQ of every row; rows with neither time nor value are not placed."""
    cols = spec.columns
    t = src.numeric(cols.time, decimal)
    c, blq, lloq_text = src.concentrations(cols.conc, decimal)
    if cols.blq is not None:
        blq = blq | src.boolean(cols.blq)
    n = len(t)
    lloq = (src.numeric(cols.lloq, decimal) if cols.lloq is not None
            else np.full(n, spec.amounts.get("lloq", np.nan)))
    lloq = np.where(np.isnan(lloq), lloq_text, lloq)
    no_time = np.isnan(t)
    _first_error(src, no_time & (~np.isnan(c) | blq), cols.time,
                 "time is empty but a concentration is given; fill in the sampling time.")
    _first_error(src, np.isinf(t), cols.time, "time is infinite.")
    bad_c = np.isinf(c) | (c < 0)
    if bad_c.any():
        i = int(np.flatnonzero(bad_c)[0])
        _first_error(src, bad_c, cols.conc, f"concentration {float(c[i])!r} is not a finite value >= 0; write BLQ "
                                             "values as 'BLQ' or '<LLOQ' or flag them in a blq column.")
    return {"time": t, "conc": c, "blq": blq, "lloq": lloq, "keep": ~no_time}


def _first_error(src, bad, column, message):
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputDataError(f"{src.at(i, column)}: {message}", file=src.file, line=src.line(i), column=column)


def _profiles(src: TableSource, by, keep):
    """Profile id of every row (-1 for rows not placed) and the key table (one row per id).

    Spellings merged by the key rule, and keys differing only by case, are
    warned about; a specimen or analyte column varying inside a profile is an error.
    """
    if not keep.any():
        raise InputDataError(f"{src.name}: no row has a sampling time; nothing to analyse.", file=src.file)
    prof, keys, notes = src.profiles(by, keep)
    for note in notes:
        warnings.warn(f"{src.name}: {note}", stacklevel=4)
    check_separating_columns(src.original(), by, prof, keys, src.name, src.file, src.where_row)
    return prof, keys, notes


def _per_profile_values(src: TableSource, spec: StudySpec, prof, keys, decimal) -> dict:
    """Dose, dose time, duration and tau of each profile (a column constant within the profile, or one value)."""
    cols, P = spec.columns, len(keys)
    out = {}
    for role in ("dose", "dose_time", "duration", "tau"):
        column = getattr(cols, role)
        value = column if column is not None else spec.amounts.get(role, getattr(spec.options, role, None))
        out[role] = src.per_profile(value, prof, P, role, decimal) if value is not None else None
    if cols.dose is not None:
        src.check_doses(cols.dose, out["dose"], prof, keys)
    tau = out["tau"] if out["tau"] is not None else spec.options.tau
    out["first_dose"] = None
    if spec.options.occasion is not None and tau is not None:  # the first occasion follows the first dose
        out["first_dose"] = first_occasion(keys, list(spec.by), spec.options.occasion, tau) == np.arange(P)
    return out


def _selection_settings(rec, replay: dict, key_texts, source_name) -> dict:
    """What the record did: applied, stale (with why), and recorded profiles absent from the data (warned)."""
    recorded = set(rec.states())
    unmatched = sorted(recorded - {tuple(k) for k in key_texts})
    if unmatched:
        names = ", ".join("/".join(k) for k in unmatched[:5]) + (", ..." if len(unmatched) > 5 else "")
        hint = (" None of its profiles is in the data: is it the record of another dataset?"
                if len(unmatched) == len(recorded) else "")
        warnings.warn(f"selection record {rec.path or '(not saved)'} has choices for {len(unmatched)} profile(s) "
                      f"not in {source_name} ({names}); they were not applied.{hint}", stacklevel=4)
    return {"path": rec.path, "applied": [key_texts[p] for p in np.flatnonzero(replay["applied"])],
            "stale": [key_texts[p] for p in np.flatnonzero(replay["stale"])], "fingerprints": replay["fingerprints"],
            "unmatched": unmatched, "problems": {"/".join(k): v for k, v in replay["problems"].items()}}


def _run_engine(pad, flat, per_profile, terminal, options, key_texts, record, src, keys, conc_column):
    """The engine over batches of similar length; a sample error names its file, line and profile.

    Recorded hand choices replace the window and exclusions of their profiles
    when the fingerprint of what the fit sees still matches
    (:mod:`pkwidgets.fingerprint`: times, values, BLQ samples with their
    LLOQ, BLQ rules and area method).
    """
    try:
        return run_batches(pad, flat, per_profile, terminal, options, key_texts, record)
    except SampleValueError as exc:
        i = pad.row_of(exc.profile, exc.sample)
        key = keys.iloc[exc.profile].to_dict()
        raise InputDataError(f"{src.at(i, conc_column)}, profile {key}: " + exc.template.format(where="this BLQ sample"),
                             file=src.file, line=src.line(i), column=conc_column, profile=key) from None


def _assemble(run, spec, src, keys, prof, time, pad, flat, per_profile, key_texts, sel) -> NCAResult:
    """The result tables, joined by profile id, and the stated settings."""
    by, P = list(spec.by), len(keys)
    params = dict(run.params)
    if spec.options.occasion is not None:
        params.update(accumulation_ratios(params, keys, by, spec.options.occasion, per_profile["tau"]))
    codes = ordered_codes(params)
    unit_of = (lambda k: spec.units.unit_of(k)) if spec.units is not None else (lambda k: ("", 1.0))
    units = {k: unit_of(k)[0] for k in codes}
    ids = np.arange(P)
    parameters = pd.concat([keys.reset_index(drop=True), pd.DataFrame({"profile_id": ids}),
                            pd.DataFrame({k: params[k] * unit_of(k)[1] for k in codes})], axis=1)
    samples = _sample_account(src, run, pad, prof, time)
    flags = _flag_table(run.flags, keys, spec.options.qc)
    profile_arrays = ProfileArrays(
        ids=ids, offsets=pad.offsets, time=flat["time"], conc=flat["conc"], blq=flat["blq"], lloq=flat["lloq"],
        exclude=run.exclude, lambda_z_used=run.lambda_z_used, terminal=run.terminal,
        per_profile={k: per_profile[k] for k in ("dose", "duration", "tau")}, partial=dict(run.partial_bounds),
        keys=key_texts)
    settings = _settings(run, spec, src, P, samples, sel)
    return NCAResult(parameters=parameters, samples=samples, flags=flags, options=spec.options, units=units,
                     settings=settings, by=spec.by, arrays=profile_arrays)


def _sample_account(src, run, pad, prof, time) -> pd.DataFrame:
    """Every input row as given, with the tool's own columns: used or not, why, in the lambda-z fit."""
    rows = src.original()
    taken = [c for c in SAMPLE_COLUMNS.values() if c in rows.columns]
    if taken:
        raise InputDataError(f"{src.name}: column(s) {taken} use the prefix 'nca_' that the result keeps for its "
                             "own columns; rename them.", file=src.file, column=taken[0])
    status = pad.per_row(run.status, fill=-1)
    reasons = np.array([STATUS_REASONS[s] for s in sorted(STATUS_REASONS)] + [REASON_NO_TIME], dtype=object)
    if src.file is not None:
        rows.insert(0, SAMPLE_COLUMNS["line"], src.lines())
    rows[SAMPLE_COLUMNS["profile"]] = prof
    rows[SAMPLE_COLUMNS["time"]] = time
    rows[SAMPLE_COLUMNS["used"]] = status == SampleStatus.USED
    rows[SAMPLE_COLUMNS["reason"]] = reasons[np.where(status < 0, len(reasons) - 1, status)]
    rows[SAMPLE_COLUMNS["lambda_z"]] = pad.per_row(run.lambda_z_used, fill=False)
    return rows


def _flag_table(flags, keys, qc) -> pd.DataFrame:
    """One row per raised flag: profile keys, profile_id, flag, severity, message."""
    raised = sorted((p, name) for name in FLAGS for p in np.flatnonzero(flags[name]))
    where = [p for p, _ in raised]
    return pd.concat(
        [keys.iloc[where].reset_index(drop=True),
         pd.DataFrame({"profile_id": np.array(where, dtype=np.int64), "flag": [nm for _, nm in raised],
                       "severity": [FLAGS[nm][0] for _, nm in raised],
                       "message": [flag_message(nm, qc) for _, nm in raised]})], axis=1)


def _settings(run, spec, src, P, samples, sel) -> dict:
    """The run as stated in records: source, columns, units, rules, counts, applied selections."""
    cols, o = spec.columns, spec.options
    settings = dict(run.settings)
    rules = settings["blq_rules"]
    settings.update(
        source=src.name, by=list(spec.by),
        columns={"time": cols.time, "conc": cols.conc, "dose": cols.dose if cols.dose else spec.amounts.get("dose"),
                 "blq": cols.blq, "lloq": cols.lloq or spec.amounts.get("lloq"),
                 "dose_time": cols.dose_time or spec.amounts.get("dose_time")},
        units=None if spec.units is None else {"time": spec.units.time, "conc": spec.units.conc,
                                               "dose": spec.units.dose},
        tau=cols.tau or o.tau, duration=cols.duration or o.duration, occasion=o.occasion,
        steady_state_predose=("observed sample at dose time used as C(0); without one, CMIN of the "
                              "interval (flag predose_imputed)") if (cols.tau or o.tau) is not None else None,
        blq_rules_text="; ".join(f"{k}={v}" for k, v in rules.items()),
        profiles=P, rows=len(samples), rows_used=int(samples[SAMPLE_COLUMNS["used"]].sum()), selections=sel,
        options=o.as_dict(),
    )
    return settings


#: Deprecated name of the result type (kept for one release).
NCATable = NCAResult
