"""Group labels for tables and legends: ``"dose 10 mg"``, ``"period 1, treatment R"``.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["format_group_value", "group_labels", "label_groups"]


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
    if frame.empty:
        return pd.Series([], index=frame.index, dtype=object)
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
