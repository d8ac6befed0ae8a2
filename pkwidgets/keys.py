"""The one rule that turns profile-key values into profiles, for every entry point.

A key value is compared after stripping surrounding blanks; in a column whose
every value reads as a number, values are compared as numbers (``1``,
``1.0``, ``"1"``, ``"01"`` and ``" 1 "`` are one subject, reported as the
integer 1).  So a CSV file read from its path and the same file read first
with ``pandas.read_csv`` give the same profiles.  When different spellings
are merged by this rule, or when two keys differ only by upper/lower case
(kept apart), a warning names the column, the values and a line of each.

Columns that usually separate profiles (specimen, analyte, matrix; SDTM
``PCSPEC`` and ``PCTESTCD``) must not vary inside a profile: plasma and urine
rows of one subject are never merged into one profile.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .errors import InputDataError

__all__ = ["canonical_keys", "spelling_notes", "check_separating_columns", "SEPARATING_COLUMNS"]

#: Column names (compared without case) that name a specimen, matrix or analyte.
SEPARATING_COLUMNS = ("pcspec", "pctestcd", "pctest", "specimen", "matrix", "analyte", "spec", "pcspcdt")


def canonical_keys(values: pd.Series) -> pd.Series:
    """Key values under the key rule: stripped text, or numbers when every value reads as one.

    Examples
    --------
    >>> canonical_keys(pd.Series(["01", "1 ", "1.0", "2"])).tolist()
    [1, 1, 1, 2]
    >>> canonical_keys(pd.Series(["S1", "S1 ", "s1"])).tolist()
    ['S1', 'S1', 's1']
    """
    if pd.api.types.is_bool_dtype(values):
        return values.astype(object)
    if pd.api.types.is_numeric_dtype(values):
        numbers = values.astype(np.float64)
    else:
        text = values.astype(str).str.strip()
        numbers = pd.to_numeric(text.where(text.str.fullmatch(r"[-+]?\d*\.?\d+(?:[eE][-+]?\d+)?")), errors="coerce")
        if numbers.isna().any():
            return text.astype(object)
    finite = numbers[np.isfinite(numbers)]
    if len(finite) == len(numbers) and (finite == np.round(finite)).all():
        return numbers.astype(np.int64).astype(object)
    return numbers.astype(object)


def spelling_notes(raw: pd.Series, canon: pd.Series, column: str, where) -> list:
    """Warnings for spellings merged into one key, and for keys that differ only by case.

    Parameters
    ----------
    raw, canon : Series
        The values as given and under the key rule (same index).
    column : str
    where : callable
        Row position -> "line 12" / "row 3" text.
    """
    notes = []
    frame = pd.DataFrame({"raw": raw.astype(str).to_numpy(), "canon": canon.astype(str).to_numpy()})
    spellings = frame.groupby("canon", sort=True)["raw"].unique()
    merged = spellings[spellings.map(len) > 1]
    for canon_value, forms in list(merged.items())[:3]:
        rows = [where(int(np.flatnonzero(frame["raw"].to_numpy() == f)[0])) for f in forms[:4]]
        notes.append(f"column {column!r}: {', '.join(repr(f) for f in forms[:4])} ({', '.join(rows)}) were taken "
                     f"as one profile key {canon_value!r} (blanks ignored, numbers compared by value).")
    if len(merged) > 3:
        notes.append(f"column {column!r}: {len(merged) - 3} more key(s) were written in more than one way.")
    lower = pd.Series(spellings.index, dtype=str)
    cased = lower.groupby(lower.str.lower()).unique()
    for forms in [f for f in cased if len(f) > 1][:3]:
        notes.append(f"column {column!r}: keys {', '.join(repr(f) for f in forms)} differ only by upper/lower case; "
                     "they were kept as separate profiles. Correct the data if they are one subject.")
    return notes


def check_separating_columns(frame: pd.DataFrame, by, prof: np.ndarray, keys: pd.DataFrame, name: str, file,
                             line_of) -> None:
    """Refuse profiles in which a specimen/analyte column takes more than one value.

    Raises
    ------
    InputDataError
        Naming the column, the profile, two of its values and their lines,
        with the fix (add the column to ``by=``, or select one specimen).
    """
    by_lower = {b.lower() for b in by}
    for col in frame.columns:
        if str(col).lower() not in SEPARATING_COLUMNS or str(col).lower() in by_lower:
            continue
        placed = np.flatnonzero(prof >= 0)
        vals = frame[col].astype(str).str.strip().to_numpy()[placed]
        per = pd.DataFrame({"p": prof[placed], "v": vals}).groupby("p")["v"].nunique()
        mixed = per.index[per > 1]
        if len(mixed):
            p = int(mixed[0])
            rows = placed[prof[placed] == p]
            seen = pd.Series(vals[prof[placed] == p]).drop_duplicates()
            first, second = rows[seen.index[0]], rows[seen.index[1]]
            raise InputDataError(
                f"{name}: profile {keys.iloc[p].to_dict()} mixes {col} values {seen.iloc[0]!r} "
                f"({line_of(first)}) and {seen.iloc[1]!r} ({line_of(second)}); a profile is one specimen and one "
                f"analyte. Add {col!r} to by= (e.g. by={list(by) + [col]!r}) or keep one {col} only.",
                file=file, column=col, profile=keys.iloc[p].to_dict())
