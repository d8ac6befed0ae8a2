r"""One strict rule for reading numbers from text, for every numeric column.

Python's ``float()`` (and so ``pandas.to_numeric``) is generous: it reads
``"4_5"`` as 45 (PEP 515 digit grouping), Arabic-Indic ``"٤٫٥"`` and
full-width ``"４"`` digits as numbers, and a caller who swaps ``","`` for
``"."`` before parsing reads ``"1.234"`` as one point two three four even
when the file writes decimals with a comma.  In a study file each of these
is more likely a typing or export error than an intended value, so
:func:`parse_numbers` accepts only

.. math::

    [+-]?\,(d+[s d^*]? \mid s\,d+)\,([eE][+-]?d+)?

where ``d`` is an ASCII digit 0-9 and ``s`` the declared decimal separator
(``"."`` or ``","``); surrounding blanks are ignored; ``inf``/``infinity``
(any case, with a sign) is read as infinity so that callers can report it
as such.  Empty cells and the markers in :data:`NA_TEXT` are missing (NaN),
not bad.  A number outside the float64 range (``1e400``, or ``1e-400``,
which would silently become 0) is bad.

Reference: the grammar is that of a decimal floating-point literal, C99
(ISO/IEC 9899:1999) section 6.4.4.2, restricted to ASCII digits and one
declared decimal separator; the restriction is common practice, no source.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["parse_numbers", "describe_bad_number", "NA_TEXT", "DECIMALS"]

#: Text read as a missing value (compared after stripping, ignoring case).
NA_TEXT = ("", "na", "nan", ".", "n/a")
#: Decimal separators a study file may declare.
DECIMALS = (".", ",")

_INF = r"[+-]?(?:inf|infinity)"


def _pattern(decimal: str) -> str:
    s = "\\" + decimal if decimal == "." else decimal
    return rf"[+-]?(?:[0-9]+(?:{s}[0-9]*)?|{s}[0-9]+)(?:[eE][+-]?[0-9]+)?"


def _check_decimal(decimal):
    if not (isinstance(decimal, str) and decimal in DECIMALS):
        raise ValueError(f"The 'decimal' option must be one of '.', ','; got {decimal!r}.")


def parse_numbers(texts, *, decimal="."):
    r"""Read a column of text as float64 under one strict rule.

    Parameters
    ----------
    texts : array_like or pandas.Series, 1-D
        Cells as text; numbers (int/float) and missing values (None, NaN,
        ``pd.NA``) are accepted as they are, a boolean is bad.
    decimal : {".", ","}
        The decimal separator the file uses.  With ``","``, a point is bad
        (``"4.5"``, ``"1.234"``): the file cannot hold both.

    Returns
    -------
    values : ndarray of float64, shape (n,)
        The numbers; NaN where the cell is missing or bad.
    bad : ndarray of bool, shape (n,)
        True where the cell is text that is not a number under the rule
        (see the module docstring); missing cells are not bad.

    Notes
    -----
    Vectorised with pandas string methods (one regular expression over the
    column, then :func:`pandas.to_numeric` on the accepted cells).

    Examples
    --------
    >>> v, bad = parse_numbers(["1.5", " -2e3 ", "", "NA", "4_5", "\u0664", "inf"])
    >>> v.tolist()[:4], bad.tolist()
    ([1.5, -2000.0, nan, nan], [False, False, False, False, True, True, False])
    >>> parse_numbers(["4,5", "4.5"], decimal=",")[1].tolist()
    [False, True]
    >>> parse_numbers(["1"], decimal=";")
    Traceback (most recent call last):
    ...
    ValueError: The 'decimal' option must be one of '.', ','; got ';'.
    """
    _check_decimal(decimal)
    s = texts if isinstance(texts, pd.Series) else pd.Series(np.asarray(texts, dtype=object).ravel(), dtype=object)
    s = s.reset_index(drop=True)
    if pd.api.types.is_bool_dtype(s):
        return np.full(len(s), np.nan), s.notna().to_numpy()
    if pd.api.types.is_numeric_dtype(s):
        return s.to_numpy(dtype=np.float64, na_value=np.nan), np.zeros(len(s), dtype=bool)
    values = np.full(len(s), np.nan)
    bad = np.zeros(len(s), dtype=bool)
    if pd.api.types.is_string_dtype(s) and not pd.api.types.is_object_dtype(s):
        is_text = s.notna().to_numpy()
    else:
        obj = s.to_numpy(dtype=object)
        is_text = np.fromiter((isinstance(v, str) for v in obj), dtype=bool, count=len(obj))
        if not is_text.all():
            _non_text(obj, ~is_text, values, bad)
    if is_text.any():
        idx = np.flatnonzero(is_text)
        text = s.iloc[idx] if len(idx) < len(s) else s
        values[idx], bad[idx] = _parse_text(text.astype("str"), decimal)
    return values, bad


def _non_text(obj, mask, values, bad):
    """Cells that are not text: numbers kept, missing values NaN, anything else (bool, dates) bad."""
    for i in np.flatnonzero(mask):
        v = obj[i]
        if isinstance(v, (bool, np.bool_)):
            bad[i] = True
        elif isinstance(v, (int, float, np.integer, np.floating)):
            values[i] = float(v)
        elif v is None or v is pd.NA or v is pd.NaT:
            continue
        else:
            bad[i] = True


def _parse_text(text: pd.Series, decimal: str):
    """Values and bad marks of text cells (a pandas string Series; regex over the column)."""
    stripped = text.str.strip().reset_index(drop=True)
    number = stripped.str.fullmatch(_pattern(decimal)).to_numpy(dtype=bool, na_value=False)
    values = np.full(len(text), np.nan)
    if number.any():
        t = stripped[number]
        if decimal != ".":
            t = t.str.replace(decimal, ".", regex=False)
        values[number] = pd.to_numeric(t, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    bad = ~number
    rest = np.flatnonzero(~number)  # usually few cells: missing markers, infinity, bad text
    if rest.size:
        lower = stripped.iloc[rest].str.lower()
        missing = lower.isin(NA_TEXT).to_numpy()
        infinite = lower.str.fullmatch(_INF).to_numpy(dtype=bool, na_value=False)
        values[rest[infinite]] = np.where(lower[infinite].str.startswith("-"), -np.inf, np.inf)
        bad[rest[missing | infinite]] = False
    # outside the float64 range: overflow to inf, or a non-zero mantissa read as 0 (1e-400)
    over = number & ~np.isfinite(values)
    zero = np.flatnonzero(number & (values == 0))
    if zero.size:
        mantissa = stripped.iloc[zero].str.split(r"[eE]", n=1, regex=True).str[0]
        zero = zero[mantissa.str.contains(r"[1-9]", regex=True).to_numpy(dtype=bool, na_value=False)]
    out = over
    out[zero] = True
    values[out] = np.nan
    return values, bad | out


def describe_bad_number(text, *, decimal=".") -> str:
    """Why one cell is not a number under :func:`parse_numbers` (a phrase for an error message).

    Examples
    --------
    >>> describe_bad_number("4_5")
    "'4_5' is not a number: '_' is not allowed inside a number (write 45 or 4.5)"
    >>> describe_bad_number("1.234", decimal=",")
    "'1.234' is not a number: the file declares decimal=',' but the cell has a '.'"
    """
    _check_decimal(decimal)
    s = str(text).strip()
    head = f"{text!r} is not a number"
    other = "," if decimal == "." else "."
    if isinstance(text, (bool, np.bool_)):
        return f"{head}: a yes/no value in a numeric column"
    if any(ch.isdigit() and not ("0" <= ch <= "9") for ch in s):
        return f"{head}: it holds digits other than ASCII 0-9 (retype the number)"
    if "_" in s:
        return f"{head}: '_' is not allowed inside a number (write 45 or 4.5)"
    if other in s and decimal == ",":
        return f"{head}: the file declares decimal=',' but the cell has a '.'"
    if other in s:
        return f"{head}. It looks like a decimal comma: pass decimal=','"
    if _fullmatch(s, decimal):
        return f"{head}: it is outside the float64 range (about 1e-308 to 1e308)"
    return head


def _fullmatch(s, decimal):
    return bool(pd.Series([s]).str.fullmatch(_pattern(decimal)).iloc[0])
