"""Set-up shared by the analysis notebooks: parameters into column roles and options, the data check.

The notebooks in ``analyses/`` declare their parameters in one cell tagged
``parameters``; :func:`analysis_setup` reads them into the profile keys and
the :func:`pkwidgets.nca` options, and :data:`PARAMETER_HELP` documents them
(``pkwidgets params NOTEBOOK`` prints it beside each default).

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import pandas as pd

__all__ = ["ROLES", "PARAMETER_HELP", "AnalysisSetup", "analysis_setup", "display_defaults", "data_check",
           "key_parameters"]

#: Column roles an analysis notebook's ``columns`` parameter may name; the first three are required.
ROLES = ("subject", "time", "conc", "dose", "period", "day", "treatment", "analyte", "specimen", "blq", "lloq",
         "nominal_time", "tau", "duration")
_KEY_ROLES = ("period", "day", "treatment", "analyte", "specimen")
#: File name of a run's own selection record (may be new); a record of any other name must exist.
_OWN_RECORD = "terminal_selection.json"

#: What each shared notebook parameter means (shown by ``pkwidgets params`` when the notebook has no comment).
PARAMETER_HELP = {
    "data_format": "long (data_path: one CSV row per sample, columns named by 'columns') or sdtm (pc_path, ex_path)",
    "data_path": "study table, one row per sample (CSV); relative paths are taken from the current folder",
    "pc_path": "SDTM PC domain (.xpt, .sas7bdat, .parquet or .csv), used when data_format is sdtm",
    "ex_path": "SDTM EX domain (doses), used when data_format is sdtm",
    "analyte": "SDTM input: PCTESTCD value(s) to keep; null for every analyte (each its own profile)",
    "specimen": "SDTM input: PCSPEC value(s) to keep; null for every specimen (each its own profile)",
    "date_only_dose": "SDTM input: an EXSTDTC without time of day is taken at midnight, or its samples unplaced",
    "output_dir": "folder for the executed notebook, CSV exports and HTML record (the OUTPUT_DIR argument)",
    "columns": "mapping of role to column name; roles: " + ", ".join(ROLES) + " (subject, time, conc required)",
    "time_unit": "unit of the time column, e.g. h or min",
    "conc_unit": "unit of the concentration column, e.g. ng/mL",
    "dose_unit": "unit of the dose, e.g. mg",
    "route": "extravascular, iv-bolus or iv-infusion",
    "duration": "infusion duration in time units (route iv-infusion), or map the 'duration' role to a column",
    "exclude_from_summary": "profiles left out of the summaries and mean profiles, key -> reason, e.g. {S3: vomited at 1 h}",
    "significant_digits": "significant figures of the values shown in the record (CSV exports keep full precision)",
    "dose": "one dose for every profile (a number) when columns names no dose column",
    "auc_method": "linear, lin-up/log-down or lin-log",
    "blq_rules": "what a BLQ sample counts as before the first, between and after the last measurable sample",
    "group_by": "column(s) grouping the summaries; [] or null for one group of all profiles (dose given as one "
                "number: the dose group is that number)",
    "selection_record": "terminal-phase selection record (JSON); null: terminal_selection.json in the output folder",
    "interactive": "true to open the terminal-phase navigator (needs a live kernel, not an unattended run)",
    "tau": "dosing interval at steady state, in time units",
    "intervals": "partial-AUC intervals, e.g. [[0, 1.5], [1.5, 24]]",
    "reference": "treatment whose median TMAX ends an early-exposure partial AUC; null for none",
}


@dataclass(frozen=True)
class AnalysisSetup:
    """Column roles and :func:`pkwidgets.nca` options of one analysis notebook run.

    Attributes
    ----------
    by : list of str
        Profile keys: the subject column, then period, day, treatment,
        analyte and specimen columns when the roles name them.
    time, conc : str
        Time and concentration columns.
    blq : str or None
        BLQ flag column.
    mean_time : str
        Column for mean curves: the nominal time when given, else ``time``.
    group_by : list of str
        Summary groups (``[]``: one group of all profiles).
    group_units : dict
        Group column -> unit for labels (the dose column -> ``dose_unit``).
    selection_record : str
        Path of the terminal-phase record (may not exist yet).
    nca_options : dict
        Keyword arguments for :func:`pkwidgets.nca`.
    parameters : dict
        The notebook's parameter values, for :func:`~pkwidgets.report.run_info`.
    """

    by: list
    time: str
    conc: str
    blq: str | None
    mean_time: str
    group_by: list
    group_units: dict
    selection_record: str
    nca_options: dict
    parameters: dict = field(default_factory=dict)
    nominal_time: str | None = None
    notes: list = field(default_factory=list)

    @property
    def shown_keys(self) -> list:
        """Profile keys then group columns, each once (the leading columns of a parameter table)."""
        return list(dict.fromkeys(self.by + self.group_by))


def _check_roles(columns, data_path) -> dict:
    """The roles that name a column; errors for a non-dict, an unknown role or a missing required one."""
    if not isinstance(columns, dict):
        raise TypeError(f"columns must be a dict from role to column name (e.g. {{'subject': 'ID', 'time': 'TIME', "
                        f"'conc': 'CONC'}}); got {type(columns).__name__}.")
    unknown = [r for r in columns if r not in ROLES]
    missing = [r for r in ROLES[:3] if not columns.get(r)]
    if unknown or missing:
        parts = []
        if unknown:
            parts.append(f"unknown role(s) {unknown}; roles are {', '.join(ROLES)}.")
        if missing:
            parts.append(f"Required role(s) {missing} missing: map each to its column name in {data_path}, "
                         f"e.g. columns={{{missing[0]!r}: 'ID', ...}}.")
        raise ValueError("columns: " + " ".join(parts))
    return {r: c for r, c in columns.items() if c}


def _nca_options(roles, by, *, dose, duration=None, **options) -> dict:
    """Keyword arguments for :func:`pkwidgets.nca` from the column roles (a dose column wins over ``dose``)."""
    out = dict(by=by, time=roles["time"], conc=roles["conc"], dose=roles.get("dose") or dose,
               blq=roles.get("blq"), lloq=roles.get("lloq"), **options)
    if roles.get("duration") or duration is not None:
        out["duration"] = roles.get("duration") or duration
    return out


def _groups(group_by, roles, dose, dose_unit) -> tuple:
    """Summary groups, with a ``dose`` group dropped when the dose is one number for all (one group then)."""
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    notes = []
    if "dose" in group_by and not roles.get("dose") and dose is not None:
        group_by = [g for g in group_by if g != "dose"]
        notes.append(f"every profile has the dose given as one number ({dose} {dose_unit or ''}".rstrip()
                     + "): one dose group, so group_by 'dose' adds no group.")
    return group_by, notes


def analysis_setup(*, data_path, output_dir, columns, time_unit, conc_unit, dose_unit, route, dose, auc_method,
                   blq_rules, group_by, selection_record, nca_extra=None, duration=None, **own) -> AnalysisSetup:
    """Read an analysis notebook's parameters into column roles and :func:`pkwidgets.nca` options.

    Parameters
    ----------
    data_path, output_dir : str
        Data file and output folder.
    columns : dict
        Role -> column name; roles of :data:`ROLES`, ``subject``, ``time`` and ``conc`` required.
    time_unit, conc_unit, dose_unit, route, dose, auc_method, blq_rules
        Passed to :func:`pkwidgets.nca` (``dose`` is used when ``columns`` names no dose column).
    group_by : str, list of str or None
        Summary groups; None or ``[]`` for one group of all profiles.  A
        ``dose`` group with the dose given as one number (no dose column) is
        dropped with a note: every profile is in the one dose group.
    duration : float, optional
        Infusion duration (``route="iv-infusion"``) when ``columns`` maps no
        ``duration`` column.
    selection_record : str or None
        Terminal-phase record; None means ``terminal_selection.json`` in
        ``output_dir`` (a new record when it does not exist yet).  A record
        of another name must exist (a mistyped path is an error); one named
        ``terminal_selection.json`` is a run's own record and may be new
        (:func:`~pkwidgets.report.run_analysis` keeps it in the final output
        folder).
    nca_extra : dict, optional
        Further :func:`pkwidgets.nca` options of the notebook (``tau``, ``occasion``...).
    **own
        The notebook's other parameters (recorded only).

    Returns
    -------
    AnalysisSetup

    Raises
    ------
    TypeError
        If ``columns`` is not a dict.
    ValueError
        If a required role is missing or a role is unknown (a misspelt role would otherwise be ignored).

    Examples
    --------
    >>> s = analysis_setup(data_path="d.csv", output_dir="out", columns={"subject": "ID", "time": "T", "conc": "C"},
    ...                    time_unit="h", conc_unit="ng/mL", dose_unit="mg", route="extravascular", dose=100,
    ...                    auc_method="linear", blq_rules=None, group_by=None, selection_record=None)
    >>> s.by, s.group_by, s.nca_options["dose"], s.selection_record
    (['ID'], [], 100, 'out/terminal_selection.json')
    >>> analysis_setup(data_path="d.csv", output_dir="out", columns={"subjct": "ID", "time": "T", "conc": "C"},
    ...                time_unit="h", conc_unit="ng/mL", dose_unit="mg", route="extravascular", dose=100,
    ...                auc_method="linear", blq_rules=None, group_by=None, selection_record=None)
    Traceback (most recent call last):
    ...
    ValueError: columns: unknown role(s) ['subjct']; roles are subject, time, conc, dose, period, day, treatment, analyte, specimen, blq, lloq, nominal_time, tau, duration. Required role(s) ['subject'] missing: map each to its column name in d.csv, e.g. columns={'subject': 'ID', ...}.
    """
    roles = _check_roles(columns, data_path)
    by = [roles["subject"]] + [roles[r] for r in _KEY_ROLES if r in roles]
    group_by, notes = _groups(group_by, roles, dose, dose_unit)
    # the run's own record (terminal_selection.json, where run_analysis keeps it) may not exist yet; another must
    default_record = not selection_record or os.path.basename(os.fspath(selection_record)) == _OWN_RECORD
    selection_record = selection_record or os.path.join(output_dir, "terminal_selection.json")
    options = _nca_options(roles, by, dose=dose, units={"time": time_unit, "conc": conc_unit, "dose": dose_unit},
                           route=route, auc_method=auc_method, blq_rules=blq_rules, selections=selection_record,
                           selections_new=default_record, duration=duration)
    options.update(nca_extra or {})
    parameters = dict(data_path=data_path, output_dir=output_dir, columns=columns, time_unit=time_unit,
                      conc_unit=conc_unit, dose_unit=dose_unit, route=route, dose=dose, auc_method=auc_method,
                      blq_rules=blq_rules, group_by=group_by, selection_record=selection_record,
                      **({"duration": duration} if duration is not None or "duration" in own else {}), **own)
    return AnalysisSetup(by=by, time=roles["time"], conc=roles["conc"], blq=roles.get("blq"),
                         mean_time=roles.get("nominal_time") or roles["time"], group_by=group_by,
                         group_units={roles["dose"]: dose_unit} if roles.get("dose") and dose_unit else {},
                         selection_record=selection_record, nca_options=options, parameters=parameters,
                         nominal_time=roles.get("nominal_time"), notes=notes)


def display_defaults() -> None:
    """Figure resolution and table display options shared by the analysis notebooks (no computation)."""
    import matplotlib.pyplot as plt

    plt.rcParams["figure.dpi"] = 72
    for name, value in (("display.precision", 4), ("display.max_rows", 300), ("display.max_columns", 80),
                        ("display.width", 200), ("display.max_colwidth", None)):  # reasons in full
        pd.set_option(name, value)


def data_check(table):
    """Counts of the data check and BLQ samples by position.

    Parameters
    ----------
    table : NCATable
        Result of :func:`pkwidgets.nca` (its settings name the columns).

    Returns
    -------
    counts : pandas.DataFrame
        Rows in file, profiles, samples used, rows not used, profile keys.
    blq : pandas.DataFrame
        :func:`pkwidgets.summary.blq_positions` of the input rows.
    """
    from ..summary import blq_positions

    rows, cols, by = table.samples, table.settings["columns"], list(table.settings["by"])
    counts = pd.DataFrame(
        {"value": [len(rows), len(table.parameters), int(rows["nca_used"].sum()), len(table.unused), ", ".join(by)]},
        index=["rows in file", "profiles", "samples used", "rows not used", "profile keys"])
    return counts, blq_positions(rows, by=by, time=cols["time"], conc=cols["conc"], blq=cols.get("blq"))


def key_parameters(table, codes) -> list:
    """The codes of ``codes`` that are columns of ``table``, then its partial-AUC columns, each once.

    Examples
    --------
    >>> key_parameters(pd.DataFrame(columns=["ID", "CMAX", "AUCTAU"]), ["CMAX", "TMAX", "AUCTAU"])
    ['CMAX', 'AUCTAU']
    """
    partial = list(getattr(table, "settings", {}).get("partial", []) or [])
    return list(dict.fromkeys([c for c in codes if c in table.columns] + [c for c in partial if c in table.columns]))
