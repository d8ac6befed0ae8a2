"""Study records: static figures, run headers, and the offline HTML record.

Figures are drawn with matplotlib and embedded in the notebook as PNG, so a
record shows them with no network and no JavaScript.  :func:`write_record`
turns an executed analysis notebook into a self-contained HTML file with a
header (data file SHA-256, package version, settings, date, caution) and no
CDN scripts: require.js, MathJax, Mermaid and the widget manager are left
out (a static page runs no Python; interactive views are for Jupyter).
:func:`run_analysis` executes a notebook with papermill and writes the record.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import html
import json
import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .io import write_atomic

__all__ = [
    "CAUTION",
    "ROLES",
    "AnalysisSetup",
    "analysis_setup",
    "display_defaults",
    "data_check",
    "key_parameters",
    "format_group_value",
    "group_labels",
    "label_groups",
    "export_results",
    "sha256_file",
    "run_info",
    "plot_all_profiles",
    "plot_profile",
    "plot_mean_profiles",
    "write_record",
    "run_analysis",
    "refresh_stored_outputs",
]

#: Fixed margins (constrained layout costs more than the drawing itself on a long record).
_GRID = dict(left=0.08, right=0.98, bottom=0.14, top=0.9, wspace=0.25)

CAUTION = "Results support qualified review; follow local regulations and SOPs."

#: File the analysis notebooks write into their output folder; read by :func:`write_record`.
RUN_INFO = "run_info.json"


def sha256_file(path) -> str:
    """SHA-256 hex digest of a file's bytes (read in 1 MiB blocks)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _plain(value):
    """JSON-friendly copy of settings (tuples -> lists, numpy scalars -> Python)."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def run_info(data_path, table, *, notebook, parameters, now=None) -> dict:
    """The record header of one run.

    Parameters
    ----------
    data_path : str
        Analysed data file (its SHA-256 is taken).
    table : NCATable
        Result; its ``settings`` are recorded.
    notebook : str
        Notebook name (e.g. ``"single_dose"``).
    parameters : dict
        The notebook's parameter values.
    now : datetime, optional
        Time stamp; default the current UTC time.

    Returns
    -------
    dict
        ``notebook``, ``data_file``, ``data_sha256``, ``pkwidgets_version``,
        ``date`` (ISO 8601, UTC), ``parameters``, ``settings``, ``caution``.
    """
    from . import __version__

    now = now or _dt.datetime.now(_dt.timezone.utc)
    return _plain({
        "notebook": notebook,
        "data_file": os.path.abspath(os.fspath(data_path)),
        "data_sha256": sha256_file(data_path),
        "pkwidgets_version": __version__,
        "date": now.replace(microsecond=0).isoformat(),
        "parameters": parameters,
        "settings": {k: v for k, v in table.settings.items() if k != "source"},
        "caution": CAUTION,
    })


# ---------------------------------------------------------------------------- analysis notebooks

#: Column roles an analysis notebook's ``columns`` parameter may name; the first three are required.
ROLES = ("subject", "time", "conc", "dose", "period", "day", "treatment", "analyte", "blq", "lloq",
         "nominal_time", "tau")
_KEY_ROLES = ("period", "day", "treatment", "analyte")


@dataclass(frozen=True)
class AnalysisSetup:
    """Column roles and :func:`pkwidgets.nca` options of one analysis notebook run.

    Attributes
    ----------
    by : list of str
        Profile keys: the subject column, then period, day, treatment and
        analyte columns when the roles name them.
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
        The notebook's parameter values, for :func:`run_info`.
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

    @property
    def shown_keys(self) -> list:
        """Profile keys then group columns, each once (the leading columns of a parameter table)."""
        return list(dict.fromkeys(self.by + self.group_by))


def analysis_setup(*, data_path, output_dir, columns, time_unit, conc_unit, dose_unit, route, dose, auc_method,
                   blq_rules, group_by, selection_record, nca_extra=None, **own) -> AnalysisSetup:
    """Read an analysis notebook's parameters into column roles and :func:`pkwidgets.nca` options.

    Parameters
    ----------
    data_path, output_dir : str
        Data file and output folder.
    columns : dict
        Role -> column name; roles are those of :data:`ROLES`, ``subject``,
        ``time`` and ``conc`` required.
    time_unit, conc_unit, dose_unit, route, dose, auc_method, blq_rules
        Passed to :func:`pkwidgets.nca` (``dose`` is used when ``columns``
        names no dose column).
    group_by : str, list of str or None
        Summary groups; None or ``[]`` for one group of all profiles.
    selection_record : str or None
        Terminal-phase record; None means ``terminal_selection.json`` in
        ``output_dir``.
    nca_extra : dict, optional
        Further :func:`pkwidgets.nca` options of the notebook (``tau``,
        ``occasion``...).
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
        If a required role is missing or a role is unknown (a misspelt role
        would otherwise be ignored).

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
    ValueError: columns: unknown role(s) ['subjct']; roles are subject, time, conc, dose, period, day, treatment, analyte, blq, lloq, nominal_time, tau. Required role(s) ['subject'] missing: map each to its column name in d.csv, e.g. columns={'subject': 'ID', ...}.
    """
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
    roles = {r: c for r, c in columns.items() if c}
    by = [roles["subject"]] + [roles[r] for r in _KEY_ROLES if r in roles]
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    selection_record = selection_record or os.path.join(output_dir, "terminal_selection.json")
    options = dict(by=by, time=roles["time"], conc=roles["conc"], dose=roles.get("dose") or dose,
                   blq=roles.get("blq"), lloq=roles.get("lloq"),
                   units={"time": time_unit, "conc": conc_unit, "dose": dose_unit}, route=route,
                   auc_method=auc_method, blq_rules=blq_rules, selections=selection_record)
    options.update(nca_extra or {})
    parameters = dict(data_path=data_path, output_dir=output_dir, columns=columns, time_unit=time_unit,
                      conc_unit=conc_unit, dose_unit=dose_unit, route=route, dose=dose, auc_method=auc_method,
                      blq_rules=blq_rules, group_by=group_by, selection_record=selection_record, **own)
    return AnalysisSetup(by=by, time=roles["time"], conc=roles["conc"], blq=roles.get("blq"),
                         mean_time=roles.get("nominal_time") or roles["time"], group_by=group_by,
                         group_units={roles["dose"]: dose_unit} if roles.get("dose") and dose_unit else {},
                         selection_record=selection_record, nca_options=options, parameters=parameters)


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
    from .summary import blq_positions

    rows, cols, by = table.rows, table.settings["columns"], list(table.settings["by"])
    counts = pd.DataFrame(
        {"value": [len(rows), len(table), int(rows["used"].sum()), len(table.unused), ", ".join(by)]},
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


def format_group_value(value, unit="") -> str:
    """A group value as a label: whole numbers without ``.0``, then the unit.

    Examples
    --------
    >>> format_group_value(10.0, "mg"), format_group_value(2.5, "mg"), format_group_value("R")
    ('10 mg', '2.5 mg', 'R')
    >>> format_group_value(float("nan"), "mg")
    'missing'
    """
    if value is None or (isinstance(value, (float, np.floating)) and np.isnan(value)):
        return "missing"
    if unit and isinstance(value, str):  # a dose read as text ("10.0")
        num = pd.to_numeric(value, errors="coerce")
        value = value if pd.isna(num) else float(num)
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        text = f"{int(value)}" if float(value).is_integer() and abs(value) < 2**53 else f"{float(value):g}"
    else:
        text = str(value)
    return f"{text} {unit}" if unit else text


def group_labels(frame, group_by, units=None) -> pd.Series:
    """One label per row naming its group, e.g. ``"dose 10 mg"`` or ``"period 1, treatment R"``.

    Parameters
    ----------
    frame : DataFrame
        Rows with the ``group_by`` columns.
    group_by : str or list of str or None
        Group columns; none gives ``"all"`` for every row.
    units : dict, optional
        Column -> unit shown after its values (the dose column -> dose unit).

    Examples
    --------
    >>> group_labels(pd.DataFrame({"dose": [10.0, 30.0]}), ["dose"], {"dose": "mg"}).tolist()
    ['dose 10 mg', 'dose 30 mg']
    """
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    units = units or {}
    if not group_by:
        return pd.Series("all", index=frame.index)
    parts = [frame[g].map(lambda v, g=g: f"{g} {format_group_value(v, units.get(g, ''))}") for g in group_by]
    return pd.concat(parts, axis=1).agg(", ".join, axis=1)


def label_groups(frame, units) -> pd.DataFrame:
    """Copy of a table (e.g. summaries) for display, with unit-bearing group columns as labels ("10 mg").

    Examples
    --------
    >>> label_groups(pd.DataFrame({"dose": [10.0], "N": [6]}), {"dose": "mg"})["dose"].tolist()
    ['10 mg']
    """
    out = pd.DataFrame(frame).copy()
    for col, unit in (units or {}).items():
        if col in out.columns:
            out[col] = out[col].map(lambda v, u=unit: format_group_value(v, u))
    return out


def export_results(output_dir, frames, info) -> list:
    """Write the analysis exports: each frame as CSV, and the record header as ``run_info.json``.

    Parameters
    ----------
    output_dir : str
        Existing or new folder.
    frames : dict
        File name (``*.csv``) -> DataFrame.
    info : dict
        From :func:`run_info`.

    Returns
    -------
    list of str
        File names written, in order.
    """
    from .io import write_csv_atomic

    os.makedirs(output_dir, exist_ok=True)
    for name, frame in frames.items():
        write_csv_atomic(frame, os.path.join(output_dir, name))
    write_atomic(os.path.join(output_dir, RUN_INFO), json.dumps(info, indent=1))
    return list(frames) + [RUN_INFO]


# ---------------------------------------------------------------------------- figures

def _numeric(s):
    return pd.to_numeric(s, errors="coerce")


def _numeric_or_text(s):
    """A column as numbers when every value reads as one (for ordering), else as text."""
    num = pd.to_numeric(s, errors="coerce")
    return num if num.notna().all() else s.astype(str)


def plot_all_profiles(rows, *, time, conc, by, conc_unit="", time_unit="", color_by=None, group_units=None):
    """All profiles on one figure, linear and semi-log side by side.

    Parameters
    ----------
    rows : DataFrame
        Input rows (e.g. ``NCATable.rows``); non-numeric concentrations
        (BLQ text, empty) are not drawn.
    time, conc : str
        Column names.
    by : list of str
        Profile key columns (one line per profile).
    color_by : str or list of str, optional
        Column(s) whose values share a colour (e.g. the dose group); groups
        are ordered by value (10 before 100) and labelled as in
        :func:`group_labels`.
    group_units : dict, optional
        Column -> unit for the legend (the dose column -> ``"mg"``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw=_GRID)
    d = pd.DataFrame({"t": _numeric(rows[time]), "c": _numeric(rows[conc])})
    keys = rows[by].astype(str).agg(" ".join, axis=1)
    color_by = [color_by] if isinstance(color_by, str) else list(color_by or [])
    groups = group_labels(rows, color_by, group_units) if color_by else pd.Series("", index=rows.index)
    order = rows[color_by].apply(_numeric_or_text) if color_by else pd.DataFrame(index=rows.index)
    ordered = (pd.concat([order, groups.rename("__label__")], axis=1).drop_duplicates("__label__")
               .sort_values(color_by, na_position="last")["__label__"] if color_by else pd.Series([""]))
    palette = {g: f"C{i % 10}" for i, g in enumerate(ordered)}
    for ax, log in zip(axes, (False, True)):
        for k in keys.unique():
            m = (keys == k).to_numpy()
            sub = d[m].dropna().sort_values("t")
            if log:
                sub = sub[sub["c"] > 0]
            ax.plot(sub["t"], sub["c"], "-o", ms=2.5, lw=0.8, alpha=0.75, color=palette[groups[m].iloc[0]])
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Concentration ({conc_unit})" if conc_unit else "Concentration")
        ax.set_yscale("log" if log else "linear")
        ax.set_title("semi-log" if log else "linear")
    if color_by:
        handles = [plt.Line2D([], [], color=c, marker="o", lw=1) for c in palette.values()]
        axes[0].legend(handles, list(palette), fontsize=8)
    return fig


def plot_profile(table, index, *, time, conc, conc_unit="", time_unit=""):
    """One profile, linear and semi-log, with the lambda-z fit marked.

    Used samples are filled circles, unused ones open; samples in the
    lambda-z fit are ringed and the fitted line
    :math:`\\hat C(t) = C_{last,pred} e^{-\\lambda_z (t - t_{last})}` (CLSTP,
    LAMZ, TLST from the table) is drawn over the fit interval
    [LAMZLL, LAMZUL].

    Parameters
    ----------
    table : NCATable
    index : int
        Row position of the profile in ``table``.
    time, conc : str
        Column names in ``table.rows``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    r = table.rows
    sub = r[r["profile"] == index]
    t = _numeric(sub[time]).to_numpy()
    c = _numeric(sub[conc]).to_numpy()
    used = sub["used"].to_numpy()
    lz = sub["lambda_z"].to_numpy()
    row = table.iloc[index]
    key = ", ".join(f"{k} {row[k]}" for k in table.record.by)
    fig, axes = plt.subplots(1, 2, figsize=(10, 3.4), gridspec_kw=_GRID)
    order = np.argsort(t)
    for ax, log in zip(axes, (False, True)):
        ok = ~np.isnan(c) & (c > 0 if log else True)
        ax.plot(t[order][ok[order]], c[order][ok[order]], "-", color="0.6", lw=0.8)
        ax.plot(t[used & ok], c[used & ok], "o", color="C0", ms=4, label="used")
        ax.plot(t[~used & ok], c[~used & ok], "o", mfc="none", color="C7", ms=4, label="not used")
        ax.plot(t[lz & ok], c[lz & ok], "o", mfc="none", mec="C3", ms=9, mew=1.4, label="λz fit points")
        lam, clp, tl = row.get("LAMZ", np.nan), row.get("CLSTP", np.nan), row.get("TLST", np.nan)
        lo, hi = row.get("LAMZLL", np.nan), row.get("LAMZUL", np.nan)
        if np.isfinite([lam, clp, tl, lo, hi]).all():
            tt = np.linspace(lo, hi, 50)
            ax.plot(tt, clp * np.exp(-lam * (tt - tl)), "--", color="C3", lw=1.2,
                    label=f"λz fit, t½ {np.log(2) / lam:.3g} {time_unit}")
        ax.set_yscale("log" if log else "linear")
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Concentration ({conc_unit})" if conc_unit else "Concentration")
        ax.set_title(f"{key} — {'semi-log' if log else 'linear'}", fontsize=9)
    axes[1].legend(fontsize=7)
    return fig


def plot_mean_profiles(means, *, group_by, time_unit="", conc_unit="", group_units=None):
    """Mean ± SD concentration by group, linear and semi-log.

    On the semi-log panel only the upper bar (mean + SD) is drawn, since
    mean − SD may be 0 or negative; points with a mean of 0 are left out there.

    Parameters
    ----------
    means : DataFrame
        From :func:`pkwidgets.summary.mean_profiles`: group columns, ``time``,
        ``n``, ``mean``, ``sd``.
    group_by : list of str or None
    group_units : dict, optional
        Column -> unit for the legend (the dose column -> ``"mg"``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw=_GRID)
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    labels = group_labels(means, group_by, group_units)
    for i, g in enumerate(dict.fromkeys(labels)):
        m = means[(labels == g).to_numpy()]
        for ax, log in zip(axes, (False, True)):
            keep = (m["mean"] > 0).to_numpy() if log else np.ones(len(m), bool)
            sd = m["sd"].fillna(0).to_numpy()[keep]
            mu = m["mean"].to_numpy()[keep]
            lower = np.zeros_like(sd) if log else sd  # semi-log: upper bar only (a lower bar can cross 0)
            ax.errorbar(m["time"].to_numpy()[keep], mu, yerr=[lower, sd], fmt="-o", ms=3, lw=1, capsize=2,
                        color=f"C{i % 10}", label=g)
    for ax, log in zip(axes, (False, True)):
        ax.set_yscale("log" if log else "linear")
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Mean ± SD ({conc_unit})" if conc_unit else "Mean ± SD")
        ax.set_title("semi-log" if log else "linear")
    axes[0].legend(fontsize=8)
    return fig


# ---------------------------------------------------------------------------- HTML record

_TEMPLATE = r"""{%- extends 'lab/index.html.j2' -%}
{%- block html_head_js_requirejs -%}{%- endblock html_head_js_requirejs -%}
{% block jupyter_widgets %}{% endblock jupyter_widgets %}
{%- block html_head_js_mathjax -%}{%- endblock html_head_js_mathjax -%}
{%- block html_head_js_mermaidjs -%}{%- endblock html_head_js_mermaidjs -%}
{% block extra_css %}<style>
.pkw-header{font-family:sans-serif;border:1px solid #999;padding:0.6em 1em;margin:1em 1em 1.5em 1em;background:#f7f7f7}
.pkw-header table{border-collapse:collapse;font-size:0.9em}
.pkw-header td{padding:2px 8px;vertical-align:top;border-bottom:1px solid #ddd}
.pkw-header td:first-child{font-weight:bold;white-space:nowrap}
.pkw-caution{font-weight:bold;color:#7a3b00}
.pkw-header table.pkw-inner{font-size:1em}
.pkw-header table.pkw-inner td:first-child{font-weight:normal;font-family:monospace}
.pkw-header td{word-break:break-word}
.pkw-header details summary{cursor:pointer;color:#333}
.pkw-fp{margin:0.3em 0;font-size:0.8em}
</style>{% endblock extra_css %}
{%- block body_header -%}
{{ super() }}
{{ resources.pkw_header }}
{%- endblock body_header -%}
"""


def _cell(value) -> str:
    """Compact HTML text of one setting: mappings as ``key=value; ...``, lists comma-separated, None as a dash."""
    if isinstance(value, dict):
        return "; ".join(f"{html.escape(str(k))}={_cell(v)}" for k, v in value.items()) or "—"
    if isinstance(value, (list, tuple)):
        return ", ".join(_cell(v) for v in value) or "—"
    return "—" if value is None else html.escape(str(value))


def _rows_html(mapping: dict) -> str:
    return "".join(f"<tr><td>{html.escape(str(k))}</td><td>{_cell(v)}</td></tr>" for k, v in mapping.items())


def _selections_html(sel) -> str:
    """Terminal-phase record: path and counts; the profile fingerprints folded in a details element."""
    if not isinstance(sel, dict):
        return _cell(sel)
    fps = list(sel.get("fingerprints") or [])
    parts = [f"record {_cell(sel.get('path'))}"]
    parts += [f"{name} {len(sel.get(name) or [])}" for name in ("applied", "stale", "unmatched")]
    text = "; ".join(parts)
    for name in ("applied", "stale", "unmatched"):
        if sel.get(name):
            text += f"<br>{name}: {_cell(sel[name])}"
    if fps:
        items = "".join(f"<li><code>{html.escape(str(f))}</code></li>" for f in fps)
        text += (f'<details><summary>{len(fps)} profile fingerprints (SHA-256 of each profile\'s rows; full list '
                 f'also in {RUN_INFO})</summary><ol class="pkw-fp">{items}</ol></details>')
    return text


def _header_html(info: dict) -> str:
    """Record header: run identity, caution, parameters and settings as compact two-column tables."""
    ident = {
        "Analysis": info.get("notebook", ""),
        "Data file": info.get("data_file", ""),
        "Data SHA-256": info.get("data_sha256", ""),
        "pkwidgets version": info.get("pkwidgets_version", ""),
        "Run date (UTC)": info.get("date", ""),
    }
    settings = dict(info.get("settings") or {})
    sel = settings.pop("selections", None)
    settings.pop("blq_rules_text", None)  # same as blq_rules
    body = _rows_html(ident)
    body += f'<tr><td>Parameters</td><td><table class="pkw-inner">{_rows_html(info.get("parameters") or {})}</table></td></tr>'
    inner = _rows_html(settings)
    if sel is not None:
        inner += f"<tr><td>terminal phase</td><td>{_selections_html(sel)}</td></tr>"
    body += f'<tr><td>Settings</td><td><table class="pkw-inner">{inner}</table></td></tr>'
    caution = html.escape(info.get("caution", CAUTION))
    return (f'<section class="pkw-header" id="pkw-record-header"><h1>Study record</h1>'
            f'<p class="pkw-caution">{caution}</p><table>{body}</table></section>')


def write_record(notebook_path, html_path=None, *, info=None, hide_code=False) -> str:
    """Write the offline HTML record of an executed analysis notebook.

    Parameters
    ----------
    notebook_path : str
        Executed notebook (``.ipynb``).
    html_path : str, optional
        Output file; default the notebook path with ``.html``.
    info : dict, optional
        Header (see :func:`run_info`); default read from ``run_info.json``
        next to the notebook.
    hide_code : bool
        Leave code cells out of the record.

    Returns
    -------
    str
        Path of the HTML file.

    Raises
    ------
    FileNotFoundError
        If ``info`` is not given and ``run_info.json`` is neither beside the
        notebook nor in the ``output_dir`` papermill recorded (run the
        notebook to its end first).
    """
    import nbformat
    from jinja2 import DictLoader
    from nbconvert import HTMLExporter

    notebook_path = os.fspath(notebook_path)
    html_path = html_path or os.path.splitext(notebook_path)[0] + ".html"
    nb = nbformat.read(notebook_path, as_version=4)
    if info is None:
        here = os.path.dirname(os.path.abspath(notebook_path))
        candidates = [os.path.join(here, RUN_INFO)]
        out = nb.metadata.get("papermill", {}).get("parameters", {}).get("output_dir")
        if out:
            candidates += [os.path.join(out, RUN_INFO), os.path.join(here, out, RUN_INFO)]
        found = [p for p in candidates if os.path.exists(p)]
        if not found:
            raise FileNotFoundError(
                f"{RUN_INFO} not found (looked in {', '.join(dict.fromkeys(candidates))}): the record header comes "
                f"from it. Run {notebook_path} to its end (its last cell writes it into output_dir) or pass info=.")
        with open(found[0], encoding="utf-8") as fh:
            info = json.load(fh)
    nb.metadata.pop("widgets", None)  # a static page runs no widgets; their state would need CDN scripts
    exporter = HTMLExporter(template_name="lab", extra_loaders=[DictLoader({"pkw_record.html.j2": _TEMPLATE})],
                            template_file="pkw_record.html.j2", exclude_input=hide_code, embed_images=True)
    resources = {"pkw_header": _header_html(info), "metadata": {"name": f"Study record — {info.get('notebook', '')}"}}
    body, _ = exporter.from_notebook_node(nb, resources=resources)
    write_atomic(html_path, body)
    return html_path


def run_analysis(notebook, output_dir, parameters=None, *, kernel_name="python3", timeout=600) -> dict:
    """Execute an analysis notebook with papermill and write its HTML record.

    Parameters
    ----------
    notebook : str
        Path of the parameterised notebook (e.g. ``analyses/single_dose.ipynb``).
    output_dir : str
        Folder for the executed notebook, the record and the notebook's CSV exports.
    parameters : dict, optional
        Values for the notebook's ``parameters`` cell; ``output_dir`` is set
        from the argument.  Relative ``output_dir``, ``data_path`` and
        ``selection_record`` are taken from the current folder (the kernel
        itself runs in the notebook's folder, where the defaults point).

    Returns
    -------
    dict
        ``notebook`` and ``html`` paths, plus ``csv``: the list of CSV files
        in ``output_dir``.
    """
    import papermill as pm

    output_dir = os.path.abspath(os.fspath(output_dir))
    os.makedirs(output_dir, exist_ok=True)
    params = dict(parameters or {})
    params["output_dir"] = output_dir
    for name in ("data_path", "selection_record"):  # the kernel runs in the notebook's folder
        if isinstance(params.get(name), (str, os.PathLike)):
            params[name] = os.path.abspath(os.fspath(params[name]))
    stem = os.path.splitext(os.path.basename(notebook))[0]
    out_nb = os.path.join(output_dir, f"{stem}.ipynb")
    pm.execute_notebook(os.fspath(notebook), out_nb, parameters=params, kernel_name=kernel_name,
                        execution_timeout=timeout, progress_bar=False,
                        cwd=os.path.dirname(os.path.abspath(notebook)))
    html_path = write_record(out_nb)
    csvs = sorted(os.path.join(output_dir, f) for f in os.listdir(output_dir) if f.endswith(".csv"))
    return {"notebook": out_nb, "html": html_path, "csv": csvs}


def refresh_stored_outputs(notebook, *, timeout=600) -> str:
    """Re-execute an analysis notebook in place on its default (demo) parameters, for nbval.

    The stored outputs are what ``pytest --nbval`` compares; refresh them
    after an intended change of results.  Images are dropped from the stored
    copy (nbval does not compare them, and they would bloat the repository);
    their ``text/plain`` stand-ins are kept.

    Returns
    -------
    str
        The notebook path.
    """
    import nbformat
    from nbclient import NotebookClient

    notebook = os.fspath(notebook)
    nb = nbformat.read(notebook, as_version=4)
    NotebookClient(nb, timeout=timeout, kernel_name="python3",
                   resources={"metadata": {"path": os.path.dirname(os.path.abspath(notebook))}}).execute()
    for cell in nb.cells:
        cell.metadata.pop("execution", None)  # run timings: noise in the repository's history
        for out in cell.get("outputs", []):
            for key in ("image/png", "image/svg+xml"):
                out.get("data", {}).pop(key, None)
    nb.metadata.pop("widgets", None)
    nbformat.write(nb, notebook)
    return notebook


if __name__ == "__main__":  # python -m pkwidgets.report executed.ipynb [record.html]
    import sys

    if len(sys.argv) >= 3 and sys.argv[1] == "--refresh":  # python -m pkwidgets.report --refresh analyses/*.ipynb
        for path in sys.argv[2:]:
            print(refresh_stored_outputs(path))
        sys.exit(0)
    if len(sys.argv) not in (2, 3):
        sys.exit("usage: python -m pkwidgets.report EXECUTED.ipynb [RECORD.html]\n"
                 "       python -m pkwidgets.report --refresh analyses/NAME.ipynb ...")
    if not os.path.exists(sys.argv[1]):
        sys.exit(f"{sys.argv[1]} not found: give the notebook papermill wrote (its output path).")
    print(write_record(sys.argv[1], sys.argv[2] if len(sys.argv) == 3 else None))
