"""The study data an analysis notebook reads: a long-format table, or SDTM PC and EX domains.

Every data notebook in ``analyses/`` declares ``data_format`` (``"long"``:
one CSV row per sample, columns named by ``columns``; ``"sdtm"``: the PC
and EX domains at ``pc_path`` and ``ex_path``, read by
:func:`pkwidgets.read_sdtm`).  :func:`read_study` turns either into one
:class:`StudyInput`: what :func:`pkwidgets.nca` reads, the column roles, the
units, and for SDTM the reading's counts, notes and unplaced rows, which the
record shows and exports (nothing left out silently).

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field


__all__ = ["DATA_FORMATS", "SDTM_ROLES", "StudyInput", "read_study", "input_tables", "input_exports",
           "input_info", "write_sdtm_outputs"]

DATA_FORMATS = ("long", "sdtm")
#: Column roles of the long table made by :func:`pkwidgets.read_sdtm` (profiles split by analyte and specimen).
SDTM_ROLES = {"subject": "USUBJID", "analyte": "PCTESTCD", "specimen": "PCSPEC", "time": "time", "conc": "conc",
              "dose": "dose", "lloq": "lloq", "nominal_time": "nominal_time"}
#: Further roles a notebook may ask of SDTM input, and the long-table column that holds each.
SDTM_EXTRA_ROLES = {"day": "dose_number", "period": "dose_number", "treatment": "EXTRT"}


@dataclass(frozen=True)
class StudyInput:
    """What an analysis notebook analyses.

    Attributes
    ----------
    data : str or DataFrame
        What :func:`pkwidgets.nca` reads: the CSV path (long format) or the
        long table made from the SDTM domains.
    data_path : str
        The data file named in the record (``pc_path`` for SDTM).
    columns : dict
        Role -> column name for :func:`~pkwidgets.report.analysis_setup`.
    units : dict
        ``time``, ``conc`` and ``dose`` units (for SDTM: from PCSTRESU and EXDOSU).
    data_format : str
        ``"long"`` or ``"sdtm"``.
    sdtm : SDTMRead or None
        The SDTM reading (counts, notes, unplaced rows).
    ex_path : str or None
        The EX domain file.
    notes : list of str
        What the record should say about the input (e.g. units taken from the domains).
    renamed : dict
        For SDTM input, the long-format column names of the notebook's
        ``columns`` -> the SDTM column of the same role (see :meth:`groups`).
    """

    data: object
    data_path: str
    columns: dict
    units: dict
    data_format: str = "long"
    sdtm: object = None
    ex_path: str | None = None
    notes: tuple = ()
    renamed: dict = field(default_factory=dict)

    def groups(self, group_by) -> list:
        """``group_by`` with long-format column names replaced by the SDTM column of the same role.

        A notebook's default ``group_by=["day"]`` names its demo column; with
        SDTM input the dosing occasion is ``dose_number``, so the group
        follows the role.  Names of no role are kept as given.
        """
        group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
        return [self.renamed.get(g, g) for g in group_by]


def _check_format(data_format, pc_path, ex_path):
    if data_format not in DATA_FORMATS:
        raise ValueError(f"The 'data_format' parameter must be one of {DATA_FORMATS}; got {data_format!r}.")
    if data_format == "sdtm" and not pc_path:
        raise ValueError("data_format 'sdtm' needs pc_path (the PC domain: .xpt, .sas7bdat, .parquet or .csv) "
                         "and ex_path (the EX domain) as parameters.")


def read_study(data_format="long", *, data_path=None, columns=None, units=None, pc_path=None, ex_path=None,
               analyte=None, specimen=None, date_only_dose="midnight", roles=()) -> StudyInput:
    """Read a notebook's study data parameters into a :class:`StudyInput`.

    Parameters
    ----------
    data_format : {"long", "sdtm"}
        ``"long"``: ``data_path`` is a CSV, ``columns`` maps roles to its
        columns and ``units`` gives ``time``/``conc``/``dose``.  ``"sdtm"``:
        ``pc_path``/``ex_path`` are read by :func:`pkwidgets.read_sdtm`
        (``analyte``, ``specimen``, ``date_only_dose`` passed on); the roles
        are :data:`SDTM_ROLES` and the units those of the domains, and
        ``columns`` (the notebook's long-format mapping) only says which
        group names to follow (:meth:`StudyInput.groups`).
    roles : iterable of str
        Roles of :data:`SDTM_EXTRA_ROLES` the notebook needs from SDTM input
        (``"day"`` for the dosing occasion at steady state, ``"period"`` and
        ``"treatment"`` (EXTRT) for crossover notebooks).

    Returns
    -------
    StudyInput

    Raises
    ------
    ValueError
        An unknown ``data_format``, or ``"sdtm"`` without ``pc_path``.
    InputDataError
        From :func:`pkwidgets.read_sdtm`: missing SDTM columns, units that
        change within a profile, an ``analyte``/``specimen`` matching nothing.
    """
    _check_format(data_format, pc_path, ex_path)
    units = dict(units or {})
    if data_format == "long":
        return StudyInput(data=data_path, data_path=data_path, columns=dict(columns or {}), units=units)
    from ..sdtm import MULTI_DOSE_ADVICE, read_sdtm

    with warnings.catch_warnings():  # the assumptions made are shown in the record as notes, not as warnings
        warnings.simplefilter("ignore", UserWarning)
        read = read_sdtm(pc_path, ex_path, analyte=analyte, specimen=specimen, date_only_dose=date_only_dose,
                         details=True)
    given, roles = dict(columns or {}), list(roles)
    several = any(MULTI_DOSE_ADVICE in n for n in read.notes)  # the reader's note on samples after several doses
    if several and not roles:
        roles = ["day"]  # each dose its own profile
    columns = dict(SDTM_ROLES, **{r: SDTM_EXTRA_ROLES[r] for r in roles})
    if ex_path is None:
        columns.pop("dose")
    if "EXTRT" in columns.values() and "EXTRT" not in read.long.columns:
        columns = {r: c for r, c in columns.items() if c != "EXTRT"}
    shown = ", ".join(f"{k} {v}" for k, v in read.units.items() if v)
    unused = [f"{k}_unit {units[k]!r}" for k, v in read.units.items() if units.get(k) and units[k] != v]
    notes = [f"units from the SDTM domains (PCSTRESU, EXDOSU): {shown}"
             + (f"; the notebook's {' and '.join(unused)} {'is' if len(unused) == 1 else 'are'} not used" if unused
                else "")]
    # once dose_number is a profile key, the reader's advice to make it one is replaced by saying so
    read_notes = [n.replace(MULTI_DOSE_ADVICE, "each dose is its own profile (key dose_number).")
                  if "dose_number" in columns.values() else n for n in read.notes]
    renamed = {given[r]: c for r, c in columns.items() if given.get(r) and given[r] != c}
    return StudyInput(data=read.long, data_path=pc_path, columns=columns, units=dict(read.units),
                      data_format="sdtm", sdtm=read, ex_path=ex_path, notes=tuple(notes + read_notes),
                      renamed=renamed)


def input_tables(study) -> list:
    """What the record shows about the input: for SDTM the reading's counts, notes and unplaced rows."""
    if study.sdtm is None:
        return []
    from .tables import COUNT_CODES, Caption, report_table

    read = study.sdtm
    counts = read.summary[read.summary["item"] != "notes"]  # the notes themselves follow
    out = [report_table(counts, sort=False, caption="SDTM input: PC rows read, placed and not placed.")]
    out += [Caption("Note: " + note, note=True) for note in study.notes]
    if len(read.unplaced):
        out.append(report_table(read.unplaced, keys=["USUBJID"], counts=set(COUNT_CODES) | {"PCSEQ"},
                                caption="PC rows not placed, with the reason (exported as unplaced_sdtm_rows.csv)."))
    else:
        out.append(Caption("Every PC row was placed."))
    return out


def input_exports(study) -> dict:
    """CSV exports of the input: the SDTM rows not placed, with their reasons (nothing for long format)."""
    return {} if study.sdtm is None else {"unplaced_sdtm_rows.csv": study.sdtm.unplaced}


def input_info(study) -> dict:
    """Record header entries of the dosing file (EX domain) and its SHA-256, when there is one."""
    if not study.ex_path:
        return {}
    from .provenance import sha256_file

    return {"ex_file": os.path.abspath(os.fspath(study.ex_path)), "ex_sha256": sha256_file(study.ex_path)}


def write_sdtm_outputs(study, result, output_dir, *, by, studyid=None) -> list:
    """For SDTM input, the PP domain as ``pp.xpt`` and ``pp.csv`` in ``output_dir``; the names written.

    The parameters go out as :func:`pkwidgets.to_pp` makes them (reference
    date-times from the EX doses); codes outside the CDISC terminology are
    left out there.  Long-format input writes nothing.
    """
    if study.sdtm is None:
        return []
    from ..pp import to_pp, write_pp

    pp = to_pp(result.to_long(), by=by, studyid=studyid, reference_times=study.data)
    for name in ("pp.xpt", "pp.csv"):
        write_pp(pp, os.path.join(output_dir, name))
    return ["pp.xpt", "pp.csv"]
