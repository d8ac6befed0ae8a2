"""Report tables: units in the headers, values to a few significant figures, subjects in natural order.

:class:`ReportTable` is what the analysis notebooks display: the numbers are
formatted for reading (3 significant figures by default, counts as whole
numbers, no pandas index) and a wide table is split into blocks of columns
that fit a 1280 px page, each block repeating the key columns.  The CSV
exports keep the full precision: only the display is rounded.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import html
import math
import re

import numpy as np
import pandas as pd

__all__ = ["SIGNIFICANT", "MISSING", "COUNT_CODES", "format_value", "natural_key", "natural_sort", "unit_header",
           "ReportTable", "report_table", "summary_table", "settings_table", "key_text", "Caption"]

#: Significant figures of the values shown in the record (the CSV exports keep full precision).
SIGNIFICANT = 3
#: Text of a value that was not computed.
MISSING = "—"
#: Parameters that count things: shown as whole numbers.
COUNT_CODES = frozenset({"LAMZNPT", "N", "n", "samples", "profiles"})
#: Value columns per block of a wide table (key columns are repeated in every block).
MAX_COLUMNS = 9

_DIGITS = re.compile(r"(\d+)")


def format_value(value, sig=SIGNIFICANT, *, count=False) -> str:
    """A number to ``sig`` significant figures, written without an exponent for 1e-4 <= |x| < 1e9.

    Examples
    --------
    >>> [format_value(x) for x in (1234.5, 12.345, 0.0012345, 3.0, float("nan"))]
    ['1230', '12.3', '0.00123', '3.00', '—']
    >>> format_value(3.0, count=True), format_value("S1")
    ('3', 'S1')
    """
    if value is None or isinstance(value, (bool, np.bool_)):
        return MISSING if value is None else str(value)
    if not isinstance(value, (int, float, np.integer, np.floating)):
        return MISSING if pd.isna(value) else str(value)
    x = float(value)
    if not math.isfinite(x):
        return MISSING if math.isnan(x) else str(x)
    if count or (isinstance(value, (int, np.integer))):
        return f"{x:.0f}"
    if x == 0:
        return "0"
    exponent = math.floor(math.log10(abs(x)))
    if not -4 <= exponent < 9:
        return f"{x:.{sig - 1}e}"
    decimals = sig - 1 - exponent
    if decimals <= 0:
        return f"{round(x, decimals):.0f}"
    return f"{x:.{decimals}f}"


def natural_key(value):
    """Sort key that orders ``S2`` before ``S10`` and ``2`` before ``10`` (numbers inside text compared as numbers).

    Examples
    --------
    >>> sorted(["S10", "S2", "S1"], key=natural_key)
    ['S1', 'S2', 'S10']
    """
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        return (0, float(value), "")
    parts = _DIGITS.split(str(value))
    return (1, 0.0, tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in parts if p))


def natural_sort(frame, columns) -> pd.DataFrame:
    """Rows ordered by ``columns`` in natural order (subject S2 before S10); the index is dropped."""
    columns = [c for c in columns if c in frame.columns]
    if not columns or frame.empty:
        return frame.reset_index(drop=True)
    keys = frame[columns].apply(lambda col: col.map(natural_key))
    order = sorted(range(len(frame)), key=lambda i: tuple(keys.iloc[i]))
    return frame.iloc[order].reset_index(drop=True)


def unit_header(column, units) -> str:
    """``"CMAX (ng/mL)"``: a column name with its unit (none for unitless values)."""
    unit = (units or {}).get(column)
    return f"{column} ({unit})" if unit and unit not in ("1", "") else str(column)


class ReportTable:
    """A table formatted for the record (shown as HTML in Jupyter and in the record, as text elsewhere).

    Attributes
    ----------
    frame : DataFrame
        The displayed text, one string per cell, headers with units.
    keys : list of str
        Leading columns repeated in every block of a wide table.
    caption : str
    """

    def __init__(self, frame, keys=(), caption="", numeric=()):
        self.frame = frame
        self.keys = [k for k in keys if k in frame.columns]
        self.caption = caption
        self.numeric = set(numeric)

    def blocks(self, max_columns=MAX_COLUMNS) -> list:
        """The table split into even column blocks of at most ``max_columns`` value columns, keys repeated."""
        values = [c for c in self.frame.columns if c not in self.keys]
        if len(values) <= max_columns:
            return [self.frame]
        n = -(-len(values) // max_columns)
        size = -(-len(values) // n)
        return [self.frame[self.keys + values[i:i + size]] for i in range(0, len(values), size)]

    def _block_html(self, block) -> str:
        """One block as an HTML table; numeric columns right-aligned, text left-aligned."""
        cls = {c: ' class="pkw-num"' if c in self.numeric else "" for c in block.columns}
        head = "".join(f"<th{cls[c]}>{html.escape(str(c))}</th>" for c in block.columns)
        body = "".join("<tr>" + "".join(f"<td{cls[c]}>{html.escape(str(v))}</td>" for c, v in zip(block.columns, row))
                       + "</tr>\n" for row in block.itertuples(index=False))
        return f'<table class="pkw-table"><thead><tr>{head}</tr></thead><tbody>\n{body}</tbody></table>'

    def _repr_html_(self) -> str:
        parts = ['<div class="pkw-table-wrap">']
        if self.caption:
            parts.append(f'<p class="pkw-caption">{html.escape(self.caption)}</p>')
        parts += [self._block_html(block) for block in self.blocks()]
        parts.append("</div>")
        return "\n".join(parts)

    def __repr__(self) -> str:
        text = self.frame.to_string(index=False) if len(self.frame) else "(no rows)"
        return f"{self.caption}\n{text}" if self.caption else text


def report_table(frame, *, units=None, keys=(), sig=SIGNIFICANT, counts=COUNT_CODES, caption="",
                 sort=True) -> ReportTable:
    """Format a table for the record.

    Parameters
    ----------
    frame : DataFrame
        Values at full precision (e.g. ``NCAResult.parameters`` or a summary).
    units : dict, optional
        Column -> unit text; shown in the header (``CMAX (ng/mL)``).
    keys : sequence of str
        Key columns: sorted in natural order, shown first and repeated in
        every block of a wide table.
    sig : int
        Significant figures of the values (default 3).
    counts : set of str
        Columns shown as whole numbers.
    caption : str, optional
    sort : bool
        Sort the rows by ``keys`` in natural order.

    Returns
    -------
    ReportTable
    """
    if not isinstance(sig, (int, np.integer)) or isinstance(sig, bool) or not 1 <= sig <= 15:
        raise ValueError(f"The 'sig' option must be a whole number of significant figures from 1 to 15; got {sig!r}.")
    frame = pd.DataFrame(frame)
    keys = [k for k in keys if k in frame.columns]
    if sort:
        frame = natural_sort(frame, keys)
    frame = frame[keys + [c for c in frame.columns if c not in keys]]
    text = pd.DataFrame({unit_header(c, units): frame[c].map(key_text) if c in keys else
                         frame[c].map(lambda v, c=c: format_value(v, sig, count=c in counts)) for c in frame.columns})
    numeric = [unit_header(c, units) for c in frame.columns
               if c not in keys and pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(frame[c])]
    return ReportTable(text, keys=[unit_header(k, units) for k in keys], caption=caption, numeric=numeric)


def key_text(value) -> str:
    """A profile key or group value as text: whole numbers without decimals (subject 1, not 1.00).

    Examples
    --------
    >>> key_text(1.0), key_text("S01"), key_text(2.5)
    ('1', 'S01', '2.5')
    """
    from .labels import format_group_value

    return format_group_value(value)


def _whole(x, sig) -> str:
    """A count statistic: whole numbers without decimals (a median of counts may be a half)."""
    return format_value(x, sig, count=isinstance(x, (int, float)) and float(x).is_integer())


def _pair(a, b, sig, sep=" (", end=")", fmt=format_value) -> str:
    if a is None or (isinstance(a, float) and math.isnan(a)):
        return MISSING
    second = fmt(b, sig)
    return fmt(a, sig) + ("" if second == MISSING else f"{sep}{second}{end}")


def _median_range(r, sig) -> str:
    fmt = _whole if r["PPTESTCD"] in COUNT_CODES else format_value
    return _pair(r["Median"], r["Min"], sig, " (", "–" + fmt(r["Max"], sig) + ")", fmt=fmt)


def summary_table(summaries, *, group_by=(), group_units=None, sig=SIGNIFICANT, caption="") -> ReportTable:
    """Group summaries for reading: ``Mean (SD)``, ``Geo. mean (Geo. CV%)``, ``Median (min–max)``, units in the rows.

    Parameters
    ----------
    summaries : DataFrame
        From :func:`pkwidgets.summary.summarize` (statistics it leaves out
        are NaN and shown as a dash).
    group_by : sequence of str
    group_units : dict, optional
        Group column -> unit for its labels (the dose column -> "mg").
    """
    from .labels import format_group_value

    group_by = [g for g in ([group_by] if isinstance(group_by, str) else list(group_by or []))
                if g in summaries.columns]
    from ..summary import STATISTICS, statistics_for

    rows = []
    for _, r in summaries.iterrows():
        r = r.copy()
        for stat in set(STATISTICS) - set(statistics_for(r["PPTESTCD"])) - {"N"}:  # shown only where the scale suits
            r[stat] = np.nan
        row = {g: format_group_value(r[g], (group_units or {}).get(g, "")) for g in group_by}
        row["parameter"] = unit_header(r["PPTESTCD"], {r["PPTESTCD"]: r.get("unit", "")})
        row.update({"N": format_value(r["N"], count=True), "Mean (SD)": _pair(r["Mean"], r["SD"], sig),
                    "CV%": format_value(r["CV%"], sig),
                    "Geo. mean (Geo. CV%)": _pair(r["Geo. mean"], r["Geo. CV%"], sig, " (", " %)"),
                    "Median (min–max)": _median_range(r, sig)})
        rows.append(row)
    frame = pd.DataFrame(rows)
    numeric = ["N", "Mean (SD)", "CV%", "Geo. mean (Geo. CV%)", "Median (min–max)"]
    return ReportTable(frame, keys=group_by + ["parameter"], numeric=numeric, caption=caption or
                       "TMAX, TLAG and counts: median (min–max) only; geometric statistics for ratio-scale "
                       "parameters only; — : not reported.")


def _setting_text(value) -> str:
    """A setting as plain words: lists joined by commas, mappings as ``name value`` pairs."""
    if isinstance(value, dict):
        return ", ".join(f"{k} {_setting_text(v)}" for k, v in value.items()) or MISSING
    if isinstance(value, (list, tuple)):
        return ", ".join(_setting_text(v) for v in value) or MISSING
    return MISSING if value is None else (f"{value:g}" if isinstance(value, float) else str(value))


def settings_table(settings, *, leave_out=(), caption="Settings of the analysis, as applied.") -> ReportTable:
    """The settings of a result (a mapping) as a two-column record table, one setting per row.

    Examples
    --------
    >>> settings_table({"group": ["dose", "sex"], "units": {"time": "h"}, "ci_level": 0.95}).frame.values.tolist()
    [['group', 'dose, sex'], ['units', 'time h'], ['ci_level', '0.95']]
    """
    rows = [(str(k), _setting_text(v)) for k, v in settings.items() if k not in set(leave_out)]
    return ReportTable(pd.DataFrame(rows, columns=["setting", "value"]), keys=["setting"], caption=caption)


class Caption:
    """A caption or note shown as a paragraph in the record (as text elsewhere)."""

    def __init__(self, text, note=False):
        self.text, self.note = str(text), note

    def _repr_html_(self) -> str:
        return f'<p class="{"pkw-note" if self.note else "pkw-caption"}">{html.escape(self.text)}</p>'

    def __repr__(self) -> str:
        return self.text
