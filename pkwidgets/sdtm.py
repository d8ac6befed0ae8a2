"""CDISC SDTM input: PC (concentrations) and EX (doses) as one long table for :func:`pkwidgets.nca`.

:func:`read_sdtm` derives the actual time after the dose from the ISO 8601
date-times (``PCDTC`` minus the ``EXSTDTC`` of the latest dose at or before
the sample), picks the dose (``EXDOSE``/``EXDOSU``, route ``EXROUTE``), reads
BLQ markers in ``PCSTRESC`` and the LLOQ in ``PCLLOQ``, and keeps the keys
``USUBJID``, ``PCTESTCD`` and ``PCSPEC`` so that profiles are always split
by analyte and specimen.  Every PC row it cannot place is listed with its
reason (``unplaced``); nothing is dropped silently.

Return value (a design choice, for reviewers)
----------------------------------------------
``read_sdtm(...)`` returns the long table itself, a plain ``DataFrame`` that
``pk.nca(long, by=["USUBJID", "PCTESTCD", "PCSPEC"])`` analyses as it is.
Everything else (unplaced rows, summary, units, reference date-times) is
returned by ``read_sdtm(..., details=True)`` as an :class:`SDTMRead`: use
it when the unplaced rows must be seen.  The long table also carries
``STUDYID`` and ``dose_datetime`` as columns (what :func:`pkwidgets.to_pp`
needs), and ``long.attrs["sdtm"]`` holds plain values for convenience
(studyid, units, notes, the count of unplaced rows, the summary, reference
date-times as ``"USUBJID/dose_number"`` -> text): no DataFrame, since pandas
compares ``attrs`` when it combines tables, and may drop them.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ._iso8601 import parse_datetimes
from ._sdtm_io import _concentrations, _nominal_source, _nominal_times, _number, _require, _text, read_domain
from .errors import InputDataError

__all__ = ["SDTMRead", "read_sdtm", "read_domain"]

PC_REQUIRED = ("USUBJID", "PCTESTCD", "PCSPEC", "PCSTRESC", "PCDTC")
EX_REQUIRED = ("USUBJID", "EXSTDTC", "EXDOSE", "EXDOSU")
#: PC columns carried into the long table when present.
PC_KEEP = ("STUDYID", "USUBJID", "PCSEQ", "PCTESTCD", "PCTEST", "PCSPEC", "VISIT", "VISITNUM", "PCTPT",
           "PCTPTNUM", "PCELTM")
DATE_ONLY_OPTIONS = ("midnight", "unplaced")
MULTI_DOSE_ADVICE = "add 'dose_number' to by= so that each dose is its own profile."  # ends the note on several doses


@dataclass
class SDTMRead:
    """Everything :func:`read_sdtm` found.

    Attributes
    ----------
    long : DataFrame
        One row per placed PC row (index: the PC row's label), columns
        ``time`` (h after the dose), ``conc``, ``dose``, ``lloq``,
        ``nominal_time`` and the SDTM keys; see :func:`read_sdtm`.
    unplaced : DataFrame
        The PC rows not placed: their keys, ``PCDTC``, ``PCSTRESC``,
        ``reason_code`` and ``reason`` (plain words).
    summary : DataFrame
        ``item``/``value`` counts: rows read, placed, unplaced by reason,
        left out by the ``analyte``/``specimen`` choice.
    units : dict
        ``time`` ("h"), ``conc`` and ``dose``: pass as ``nca(..., units=...)``.
    reference : DataFrame
        One row per dose that has placed samples: ``USUBJID``,
        ``dose_number``, ``STUDYID``, ``dose_datetime`` (``EXSTDTC`` as
        written; the PP domain's ``PPRFTDTC``).
    notes : list of str
        Assumptions made while reading (also issued as warnings).
    """

    long: pd.DataFrame
    unplaced: pd.DataFrame
    summary: pd.DataFrame
    units: dict
    reference: pd.DataFrame
    notes: list = field(default_factory=list)


def _choose(rows, column, wanted, option, name):
    """Rows whose ``column`` is one of ``wanted`` (case-insensitive); error if none matches."""
    if wanted is None:
        return rows
    wanted = [wanted] if isinstance(wanted, str) else list(wanted)
    have = _text(rows, column)
    keep = have.str.upper().isin([w.upper() for w in wanted])
    if not keep.any():
        raise InputDataError(f"{name}: {option}={wanted!r} matches no {column} value; the values are "
                             f"{sorted(set(have))}.", column=column)
    return rows.loc[keep]


def _doses(ex):
    """EX records as doses: subject, instant, order, amount, unit, route; and subjects whose doses cannot be ordered."""
    when, date_only, problem = parse_datetimes(_text(ex, "EXSTDTC"))
    d = pd.DataFrame({
        "USUBJID": _text(ex, "USUBJID").to_numpy(), "dose_dt": when.to_numpy(), "date_only": date_only,
        "dose": _number(ex, "EXDOSE"), "dose_unit": _text(ex, "EXDOSU").to_numpy(),
        "route": _text(ex, "EXROUTE").to_numpy(), "EXTRT": _text(ex, "EXTRT").to_numpy(),
        "dose_datetime": _text(ex, "EXSTDTC").to_numpy(), "STUDYID": _text(ex, "STUDYID").to_numpy(),
        "ex_row": np.arange(len(ex)), "problem": problem})
    bad = d.loc[d["problem"] != ""]
    unordered = {s: f"EX row {int(r.ex_row)} of this subject has EXSTDTC {r.dose_datetime!r} "
                    f"({r.problem}), so its doses cannot be ordered" for s, r in
                 bad.drop_duplicates("USUBJID").set_index("USUBJID").iterrows()}
    d = d.loc[d["problem"] == ""].sort_values(["USUBJID", "dose_dt", "ex_row"], kind="stable")
    d["dose_number"] = d.groupby("USUBJID").cumcount() + 1
    d["same_time"] = d.duplicated(["USUBJID", "dose_dt"], keep=False)
    return d.reset_index(drop=True), unordered


def _match(samples, doses):
    """Index into ``doses`` of the latest dose at or before each sample (the first dose for earlier samples)."""
    left = pd.DataFrame({"USUBJID": samples["USUBJID"].to_numpy(), "t": samples["when"].to_numpy(),
                         "row": np.arange(len(samples))}).sort_values("t", kind="stable")
    right = pd.DataFrame({"USUBJID": doses["USUBJID"].to_numpy(), "t": doses["dose_dt"].to_numpy(),
                          "dose_index": np.arange(len(doses))}).sort_values("t", kind="stable")
    out = np.full(len(samples), -1)
    for direction in ("backward", "forward"):
        m = pd.merge_asof(left, right, on="t", by="USUBJID", direction=direction, allow_exact_matches=True)
        idx = m["dose_index"].to_numpy(dtype=float)
        rows = m["row"].to_numpy()
        todo = (out[rows] < 0) & ~np.isnan(idx)
        out[rows[todo]] = idx[todo].astype(int)
    return out


def _placement(rows, when, date_only, problem, doses, unordered, own_reference):
    """Per PC row: matched dose index (-1 if none), reason code and reason text ("" when placed).

    With EX the dose is the latest at or before the sample; without it
    (``own_reference``) each row's own PCRFTDTC.
    """
    n = len(rows)
    code = np.full(n, "", dtype=object)
    why = np.full(n, "", dtype=object)

    def mark(mask, c, text):
        new = mask & (code == "")
        code[new] = c
        why[new] = text[new] if isinstance(text, np.ndarray) else text

    subj = _text(rows, "USUBJID").to_numpy()
    for col in ("USUBJID", "PCTESTCD", "PCSPEC"):
        mark((_text(rows, col) == "").to_numpy(), "no_key", f"{col} is empty: the profile is unknown")
    dtc = _text(rows, "PCDTC").to_numpy()
    texts = np.array([f"no date-time: PCDTC {t!r} is {p}" if p != "empty" else "no date-time: PCDTC is empty"
                      for t, p in zip(dtc, problem)], dtype=object)
    mark(problem != "", "no_datetime", texts)
    mark(date_only, "no_datetime", np.array([f"no date-time: PCDTC {t!r} has no time of day" for t in dtc]))
    mark(np.array([s in unordered for s in subj]), "no_dose",
         np.array([f"no matching dose: {unordered.get(s, '')}" for s in subj], dtype=object))
    ok = code == ""
    idx = np.full(n, -1)
    if own_reference:
        where = {k: i for i, k in enumerate(zip(doses["USUBJID"], doses["dose_datetime"]))}
        ref = _text(rows, "PCRFTDTC").to_numpy()
        idx[ok] = [where.get(k, -1) for k in zip(subj[ok], ref[ok])]
        mark(idx < 0, "no_dose", "no reference: PCRFTDTC is empty or not an ISO 8601 date-time")
    else:
        idx[ok] = _match(pd.DataFrame({"USUBJID": subj[ok], "when": when[ok]}), doses)
        mark(idx < 0, "no_dose", "no matching dose: the subject has no EX record with a usable EXSTDTC")
    return idx, code, why, mark


def _dose_reasons(idx, code, mark, doses, value, date_only_dose, with_doses):
    """Placebo, missing amount, ambiguous or date-only doses: reasons for the samples that follow them."""
    d = doses.iloc[np.maximum(idx, 0)].reset_index(drop=True)
    has = idx >= 0
    desc = (" (EXTRT " + d["EXTRT"].map(repr) + ", EXSTDTC " + d["dose_datetime"] + ")").to_numpy(dtype=object)
    mark(has & d["same_time"].to_numpy(), "ambiguous_dose",
         "ambiguous dose: the subject has several EX records at this EXSTDTC" + desc)
    measurable = np.where(value > 0, "; a measurable concentration is reported", "")
    if with_doses:
        mark(has & (d["dose"].to_numpy() == 0), "placebo",
             "placebo: the matching dose is 0 " + d["dose_unit"].to_numpy(dtype=object) + desc + measurable)
        mark(has & ~(d["dose"].to_numpy() > 0), "no_dose_amount",
             "no dose amount: EXDOSE of the matching dose is empty or not positive" + desc)
    if date_only_dose == "unplaced":
        mark(has & d["date_only"].to_numpy(), "dose_time_unknown",
             "dose time unknown: EXSTDTC has no time of day" + desc)
    return d


def read_sdtm(pc, ex=None, *, analyte=None, specimen=None, date_only_dose="midnight", details=False):
    """Read SDTM PC and EX domains into a long table ready for :func:`pkwidgets.nca`.

    Parameters
    ----------
    pc : DataFrame or path
        The PC domain (``.xpt``, ``.sas7bdat``, ``.parquet`` or ``.csv``).
        Needs USUBJID, PCTESTCD, PCSPEC, PCSTRESC and PCDTC; uses PCSTRESN,
        PCSTRESU, PCLLOQ, PCELTM, PCTPTNUM, PCTEST, PCSEQ and STUDYID when present.
    ex : DataFrame or path, optional
        The EX domain: USUBJID, EXSTDTC, EXDOSE, EXDOSU (EXROUTE, EXTRT when
        present).  Without it the reference date-time is PCRFTDTC and no
        dose column is made.
    analyte, specimen : str or list of str, optional
        Keep only these PCTESTCD / PCSPEC values (case-insensitive).  The rows
        left out are counted in the summary, not listed as unplaced.
    date_only_dose : {"midnight", "unplaced"}
        An EXSTDTC without a time of day is taken as 00:00 of that date (a
        warning says how many; ``dose_time_imputed`` marks the rows), or its
        samples are listed as unplaced.
    details : bool
        Return an :class:`SDTMRead` (long table, unplaced rows, summary,
        units, reference date-times) instead of the long table alone.

    Returns
    -------
    DataFrame or SDTMRead
        One row per placed PC row, index the PC row's label (its position
        for a file, or when the labels repeat), columns:
        the PC keys (STUDYID, USUBJID, PCTESTCD, PCTEST, PCSPEC, PCSEQ, ...),
        ``time`` (actual hours after the matched dose), ``nominal_time``
        (hours), ``conc`` (the number, or ``"<LLOQ"``/``"BLQ"`` text that
        :func:`pkwidgets.nca` reads as BLQ), ``conc_value`` (NaN for BLQ),
        ``blq``, ``lloq``, ``conc_unit``, ``dose``, ``dose_unit``, ``route``,
        ``EXTRT`` (when EX names treatments), ``dose_number`` (order of the dose in EX, per subject),
        ``dose_datetime`` (EXSTDTC as written), ``sample_datetime`` (PCDTC),
        ``dose_time_imputed``, ``time_unit`` ("h") and, when PC has PCENDTC
        (interval collections), ``end_time`` (hours after the same dose).  ``long.attrs["sdtm"]``
        holds plain values (see the module docstring).

    Notes
    -----
    The time after the dose is

    .. math:: t = (\\mathrm{PCDTC} - \\mathrm{EXSTDTC}_k) / 1\\,\\mathrm{h},\\quad
              k = \\max\\{j : \\mathrm{EXSTDTC}_j \\le \\mathrm{PCDTC}\\}

    (CDISC SDTMIG: PCDTC is the collection date-time, EXSTDTC the start of
    the administration, both ISO 8601).  A sample before the first dose is
    placed against the first dose with a negative time (nca lists it as
    sampled before the dose).  Each EX record is one administration at its
    EXSTDTC: a record whose EXDOSFRQ repeats the dose until EXENDTC is not
    expanded (a warning says so).  Unplaced reasons: ``no_key``,
    ``no_datetime``, ``no_dose``, ``ambiguous_dose``, ``placebo`` (dose 0:
    reported, not an error), ``no_dose_amount``, ``dose_time_unknown``,
    ``unreadable_conc``.

    Raises
    ------
    InputDataError
        Missing SDTM columns, an ``analyte``/``specimen`` that matches
        nothing, or units that change within an analyte and specimen
        (PCSTRESU) or between doses (EXDOSU).
    """
    if date_only_dose not in DATE_ONLY_OPTIONS:
        raise ValueError(f"The 'date_only_dose' option must be one of {DATE_ONLY_OPTIONS}; got {date_only_dose!r}.")
    pc_frame, pc_name = read_domain(pc, "pc")
    _require(pc_frame, PC_REQUIRED, pc_name, "read_sdtm needs the PC domain as CDISC SDTM names it.")
    n_read = len(pc_frame)
    if not pc_frame.index.is_unique:  # row labels name the PC rows in the output and in messages
        pc_frame = pc_frame.reset_index(drop=True)
    rows = _choose(_choose(pc_frame, "PCTESTCD", analyte, "analyte", pc_name), "PCSPEC", specimen, "specimen",
                   pc_name)
    when, date_only, problem = parse_datetimes(_text(rows, "PCDTC"))
    when = when.to_numpy()
    notes = []
    if ex is not None:
        ex_frame, ex_name = read_domain(ex, "ex")
        _require(ex_frame, EX_REQUIRED, ex_name, "read_sdtm needs the EX domain as CDISC SDTM names it.")
        doses, unordered = _doses(ex_frame)
        notes += _ex_notes(ex_frame)
    else:
        doses, unordered = _reference_doses(rows, pc_name), {}
    idx, code, why, mark = _placement(rows, when, date_only, problem, doses, unordered, ex is None)
    conc, value, blq, lloq, bad = _concentrations(rows)
    d = _dose_reasons(idx, code, mark, doses, value, date_only_dose, ex is not None)
    mark(bad, "unreadable_conc", "unreadable result: PCSTRESC is neither a number nor a BLQ marker")
    placed = code == ""
    long = _long_table(rows, placed, when, d, conc, value, blq, lloq, ex is not None)
    units = _units(long, pc_name, ex is not None)
    notes += _placement_notes(long)
    for text in notes:
        warnings.warn(text, stacklevel=2)
    unplaced = rows.loc[~placed, [c for c in ("USUBJID", "PCSEQ", "PCTESTCD", "PCSPEC", "PCTPT", "PCDTC",
                                              "PCSTRESC") if c in rows.columns]].copy()
    unplaced["reason_code"], unplaced["reason"] = code[~placed], why[~placed]
    reference = (long[["USUBJID", "dose_number", "STUDYID", "dose_datetime"]]
                 .drop_duplicates(["USUBJID", "dose_number"]).reset_index(drop=True))
    summary = _summary(n_read, len(rows), long, unplaced, notes)
    out = SDTMRead(long=long, unplaced=unplaced, summary=summary, units=units, reference=reference, notes=notes)
    long.attrs["sdtm"] = _attrs(out)
    return out if details else long


def _attrs(read):
    """Plain values only (no DataFrame): pandas compares ``attrs`` when it combines tables."""
    ref = read.reference
    return {"studyid": sorted(set(read.long["STUDYID"]) - {""}), "units": dict(read.units),
            "notes": list(read.notes), "unplaced_rows": len(read.unplaced),
            "summary": dict(zip(read.summary["item"], read.summary["value"].astype(str))),
            "reference_times": {f"{u}/{n}": t for u, n, t in zip(ref["USUBJID"], ref["dose_number"],
                                                                 ref["dose_datetime"])}}


def _reference_doses(rows, name):
    """Without EX: PCRFTDTC as the reference date-time of each subject, no dose amount."""
    if "PCRFTDTC" not in rows.columns:
        raise InputDataError(f"{name}: without an EX domain the reference date-time must come from PCRFTDTC, "
                             "which is not a column; pass ex= (the EX domain).", column="PCRFTDTC")
    ref = pd.DataFrame({"USUBJID": _text(rows, "USUBJID"), "EXSTDTC": _text(rows, "PCRFTDTC"),
                        "EXDOSE": 1.0, "EXDOSU": "", "STUDYID": _text(rows, "STUDYID")})
    doses, _ = _doses(ref.drop_duplicates(["USUBJID", "EXSTDTC"]))
    doses["dose"] = np.nan
    return doses


def _long_table(rows, placed, when, d, conc, value, blq, lloq, with_doses):
    keep = placed
    d = d.loc[keep]
    out = rows.loc[keep, [c for c in PC_KEEP if c in rows.columns]].copy()
    if "STUDYID" not in out.columns:
        out.insert(0, "STUDYID", d["STUDYID"].to_numpy())
    hours = (when[keep] - d["dose_dt"].to_numpy()) / np.timedelta64(1, "h")
    out["nominal_time"] = _nominal_times(rows.loc[keep])
    out["time"] = hours.astype(float)
    out["conc"] = pd.Series(conc[keep], index=out.index, dtype=object)
    out["conc_value"], out["blq"], out["lloq"] = value[keep], blq[keep], lloq[keep]
    out["conc_unit"] = _text(rows.loc[keep], "PCSTRESU").to_numpy()
    if with_doses:
        out["dose"] = d["dose"].to_numpy()
        out["dose_unit"] = d["dose_unit"].to_numpy()
        out["route"] = d["route"].to_numpy()
        if (d["EXTRT"] != "").any():  # the treatment of the matched dose (crossover periods, partial areas)
            out["EXTRT"] = d["EXTRT"].to_numpy()
    out["dose_number"] = d["dose_number"].to_numpy()
    out["dose_datetime"] = d["dose_datetime"].to_numpy()
    out["sample_datetime"] = _text(rows.loc[keep], "PCDTC").to_numpy()
    if "PCENDTC" in rows.columns:  # end of an interval collection (urine), hours after the same dose
        end, _, _ = parse_datetimes(_text(rows.loc[keep], "PCENDTC"))
        out["end_time"] = ((end.to_numpy() - d["dose_dt"].to_numpy()) / np.timedelta64(1, "h")).astype(float)
    out["dose_time_imputed"] = d["date_only"].to_numpy(dtype=bool)
    out["time_unit"] = "h"
    return out


def _constant(long, column, keys, name, what):
    """The one non-empty value of ``column`` within each ``keys`` group; error naming two rows if it varies."""
    filled = long.loc[long[column] != ""]
    for key, g in (filled.groupby(keys, sort=True) if keys else [((), filled)]):
        values = g[column].unique()
        if len(values) > 1:
            a = g.index[g[column] == values[0]][0]
            b = g.index[g[column] == values[1]][0]
            where = f" for {dict(zip(keys, key if isinstance(key, tuple) else (key,)))}" if keys else ""
            raise InputDataError(
                f"{name}: {what} unit changes{where}: {values[0]!r} (row {a}, subject {long.at[a, 'USUBJID']}) "
                f"and {values[1]!r} (row {b}, subject {long.at[b, 'USUBJID']}); convert to one unit first.",
                line=b if isinstance(b, (int, np.integer)) else None, column=column)
    return filled[column].unique().tolist()


def _units(long, name, with_doses):
    conc = _constant(long, "conc_unit", ["PCTESTCD", "PCSPEC"], name, "the concentration (PCSTRESU)")
    if with_doses:
        dosed = long.loc[long["dose"] > 0]
        dose = _constant(dosed, "dose_unit", [], name, "the dose (EXDOSU)")
    else:
        dose = []
    return {"time": "h", "conc": conc[0] if len(conc) == 1 else None, "dose": dose[0] if dose else None}


def _ex_notes(ex):
    freq = _text(ex, "EXDOSFRQ").str.upper()
    start, end = _text(ex, "EXSTDTC").str[:10], _text(ex, "EXENDTC").str[:10]
    spans = int(((freq != "") & (freq != "ONCE") & (end != "") & (end > start)).sum())
    return [f"{spans} EX record(s) repeat the dose (EXDOSFRQ) until a later EXENDTC: each is read as one "
            "administration at its EXSTDTC; give one EX record per administration if samples follow later "
            "administrations."] if spans else []


def _placement_notes(long):
    notes = []
    imputed = long.loc[long["dose_time_imputed"]]
    if len(imputed):
        notes.append(f"{len(imputed)} sample(s) of {imputed['USUBJID'].nunique()} subject(s) follow a dose whose "
                     "date-time (EXSTDTC, or PCRFTDTC without EX) has no time of day: the dose is taken at 00:00 "
                     "of that date (column dose_time_imputed); pass date_only_dose='unplaced' to list them as "
                     "unplaced instead.")
    per = long.groupby(["USUBJID", "PCTESTCD", "PCSPEC"])["dose_number"].nunique()
    multi = per[per > 1]
    if len(multi):
        notes.append(f"{len(multi)} profile(s) have samples after more than one dose (e.g. {multi.index[0]}): "
                     + MULTI_DOSE_ADVICE)
    return notes


def _summary(n_read, n_chosen, long, unplaced, notes):
    items = [("PC rows read", n_read), ("left out by the analyte/specimen choice", n_read - n_chosen),
             ("placed (in the long table)", len(long)), ("unplaced", len(unplaced))]
    items += [(f"unplaced: {k}", int(v)) for k, v in unplaced["reason_code"].value_counts().sort_index().items()]
    items += [("profiles (USUBJID x PCTESTCD x PCSPEC)", int(long.groupby(["USUBJID", "PCTESTCD", "PCSPEC"]).ngroups)),
              ("time unit", "h (actual time after the dose)"),
              ("nominal time from", _nominal_source(long.columns)), ("notes", len(notes))]
    return pd.DataFrame(items, columns=["item", "value"])
