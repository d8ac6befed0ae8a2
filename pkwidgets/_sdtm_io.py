"""Reading one SDTM domain from a DataFrame or a file, and its columns as text, numbers, results and times."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

from ._iso8601 import parse_durations
from .blq import parse_concentrations
from .errors import InputDataError

__all__ = ["read_domain"]


def read_domain(data, name: str) -> tuple[pd.DataFrame, str]:
    """A domain given as a DataFrame or a ``.xpt``, ``.sas7bdat``, ``.parquet`` or ``.csv`` path.

    SAS files are read with pyreadstat (text decoded, numbers as float);
    CSV cells are read as text (empty cells as ``""``) and numbers parsed
    where a column needs them.  Returns the table and a name for messages.
    """
    if isinstance(data, pd.DataFrame):
        return data.copy(), f"the {name.upper()} table"
    if not isinstance(data, (str, os.PathLike)):
        raise TypeError(f"{name} must be a pandas DataFrame or the path of an .xpt, .sas7bdat, .parquet "
                        f"or .csv file; got {type(data).__name__}.")
    path = Path(data)
    suffix = path.suffix.lower()
    if suffix not in (".xpt", ".sas7bdat", ".parquet", ".csv"):
        raise InputDataError(f"{path}: the file type {suffix or '(none)'!r} is not read; give {name} as "
                             "an .xpt, .sas7bdat, .parquet or .csv file, or as a DataFrame.", file=str(path))
    if not path.exists():
        raise FileNotFoundError(f"{path}: no such file ({name} domain).")
    if suffix in (".xpt", ".sas7bdat"):
        import pyreadstat

        reader = pyreadstat.read_xport if suffix == ".xpt" else pyreadstat.read_sas7bdat
        frame, _ = reader(str(path))
    elif suffix == ".parquet":
        frame = pd.read_parquet(path)
    else:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    return frame, str(path)


def _require(frame, columns, name, hint):
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise InputDataError(f"{name}: required SDTM column(s) {missing} not found; columns are "
                             f"{list(frame.columns)}. {hint}", column=missing[0])


def _text(frame, column, default=""):
    if column not in frame.columns:
        return pd.Series(default, index=frame.index, dtype=object)
    s = frame[column]
    return s.where(s.notna(), "").astype(str).str.strip().astype(object)


def _number(frame, column):
    if column not in frame.columns:
        return np.full(len(frame), np.nan)
    return pd.to_numeric(_text(frame, column).replace("", None), errors="coerce").to_numpy(dtype=float)


def _concentrations(rows):
    """conc for nca (float, or ``"<LLOQ"``/``"BLQ"`` text), numeric value, BLQ flag, LLOQ, unreadable text."""
    text = _text(rows, "PCSTRESC")
    value, blq, lloq_text, bad = parse_concentrations(list(text))
    stresn = _number(rows, "PCSTRESN")
    value = np.where(blq, np.nan, np.where(np.isnan(stresn), value, stresn))  # a BLQ marker wins
    bad &= np.isnan(stresn)
    lloq = _number(rows, "PCLLOQ")
    lloq = np.where(np.isnan(lloq), lloq_text, lloq)
    conc = value.astype(object)
    marker = np.array(["BLQ" if np.isnan(q) else f"<{float(q)!r}" for q in lloq], dtype=object)
    conc[blq] = marker[blq]
    conc[~blq & np.isnan(value)] = None
    return conc, value, blq, lloq, bad


def _nominal_source(columns):
    """Where the nominal times came from, in words (the reading's summary)."""
    if "PCELTM" in columns:
        return "PCELTM (PCTPTNUM where empty)" if "PCTPTNUM" in columns else "PCELTM"
    return "PCTPTNUM, taken to be in hours" if "PCTPTNUM" in columns else "none: PC has neither PCELTM nor PCTPTNUM"


def _nominal_times(rows):
    """Planned time after the dose in hours: PCELTM (ISO 8601 duration) where given, else PCTPTNUM."""
    if "PCELTM" in rows.columns:
        hours, _ = parse_durations(_text(rows, "PCELTM"))
        return np.where(np.isnan(hours), _number(rows, "PCTPTNUM"), hours)
    return _number(rows, "PCTPTNUM")
