"""ISO 8601 date-times and durations as SDTM writes them (``--DTC``, ``--ELTM``, ``--STINT``).

Vectorised parsers for pandas Series of text.  pandas itself is not used to
read durations: ``pandas.Timedelta("PT0.5H")`` returns 5 hours (the fraction
is read as a count; measured with pandas 3.1), so a fractional hour would be
silently wrong.

SDTM date-times are ``YYYY-MM-DD`` optionally followed by ``Thh:mm`` and
``:ss`` (fractions of a second allowed); a value may be partial (``2014-01``)
when the collection was not complete (CDISC SDTMIG, ISO 8601 dates).
Durations are ``[-]PnYnMnWnDTnHnMnS``; years and months have no fixed length
in hours and are refused.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["parse_datetimes", "parse_durations", "format_hours"]

_DATETIME = (r"^(?P<date>\d{4}-\d{2}-\d{2})"
             r"(?:T(?P<hh>\d{2}):(?P<mm>\d{2})(?::(?P<ss>\d{2}(?:\.\d+)?))?)?$")
_NUM = r"(\d+(?:[.,]\d+)?)"
_DURATION = (rf"^(?P<sign>[-+])?P(?:{_NUM}Y)?(?:{_NUM}M)?(?:{_NUM}W)?(?:{_NUM}D)?"
             rf"(?:T(?:{_NUM}H)?(?:{_NUM}M)?(?:{_NUM}S)?)?$")
#: hours per unit of the duration fields after years and months: W, D, H, M, S
_HOURS = np.array([168.0, 24.0, 1.0, 1 / 60, 1 / 3600])


def _text(values) -> pd.Series:
    s = pd.Series(values, dtype=object)
    return s.where(s.notna(), "").astype(str).str.strip()


def parse_datetimes(values) -> tuple[pd.Series, np.ndarray, np.ndarray]:
    """ISO 8601 date-times to ``datetime64``.

    Parameters
    ----------
    values : sequence of str
        SDTM ``--DTC`` text, e.g. ``"2014-01-02T00:05"``.

    Returns
    -------
    when : Series of datetime64[ns]
        The instant; a date alone is taken as 00:00 of that day; NaT where
        the text is empty, partial or not a valid date-time.
    date_only : ndarray of bool
        True where only a date was given (the time of day is unknown).
    problem : ndarray of object
        ``""`` when read, else why not ("empty", "partial date-time",
        "not an ISO 8601 date-time").

    Examples
    --------
    >>> when, date_only, problem = parse_datetimes(["2014-01-02T00:05", "2014-01-02", "2014-01", ""])
    >>> when.dt.strftime("%Y-%m-%d %H:%M").tolist()[:2], date_only.tolist(), problem.tolist()
    (['2014-01-02 00:05', '2014-01-02 00:00'], [False, True, False, False], ['', '', 'partial date-time', 'empty'])
    """
    text = _text(values)
    parts = text.str.extract(_DATETIME)
    ok = parts["date"].notna().to_numpy()
    clock = (parts["hh"].fillna("00") + ":" + parts["mm"].fillna("00") + ":"
             + parts["ss"].fillna("00")).where(ok, None)
    when = pd.to_datetime(parts["date"].where(ok, None) + "T" + clock, format="ISO8601", errors="coerce")
    when = when.astype("datetime64[ns]")
    problem = np.full(len(text), "", dtype=object)
    empty = (text == "").to_numpy()
    partial = ~ok & ~empty & text.str.match(r"^\d{4}(-(\d{2}|-)(-(\d{2}|-))?)?(T.*)?$").to_numpy()
    problem[~ok] = "not an ISO 8601 date-time"
    problem[partial] = "partial date-time"
    problem[empty] = "empty"
    problem[ok & when.isna().to_numpy()] = "not a valid calendar date-time"
    date_only = ok & parts["hh"].isna().to_numpy()
    return when, date_only, problem


def parse_durations(values) -> tuple[np.ndarray, np.ndarray]:
    """ISO 8601 durations (``PT1.5H``, ``-PT30M``, ``P1DT12H``) to hours.

    Parameters
    ----------
    values : sequence of str

    Returns
    -------
    hours : ndarray of float
        Signed duration in hours, NaN where not read.
    problem : ndarray of object
        ``""`` when read, else why not.

    Notes
    -----
    .. math:: h = \\pm(168 W + 24 D + H + M/60 + S/3600)

    (ISO 8601-1:2019, durations; a comma may stand for the decimal point.)

    Examples
    --------
    >>> hours, problem = parse_durations(["PT0.5H", "-PT30M", "P1DT12H", "PT5M", "P1M", ""])
    >>> [round(float(h), 6) for h in hours[:4]], problem[4:].tolist()
    ([0.5, -0.5, 36.0, 0.083333], ['years or months have no fixed length in hours', 'empty'])
    """
    text = _text(values)
    parts = text.str.extract(_DURATION)
    ok = text.str.match(_DURATION).to_numpy() & parts.iloc[:, 1:].notna().any(axis=1).to_numpy()
    nums = parts.iloc[:, 1:].apply(lambda col: pd.to_numeric(col.str.replace(",", "."), errors="coerce"))
    nums = nums.to_numpy(dtype=float)
    ym = ~np.isnan(nums[:, :2]).all(axis=1)
    hours = np.nansum(nums[:, 2:] * _HOURS, axis=1)
    hours = np.where(parts["sign"].to_numpy(dtype=object) == "-", -hours, hours)
    problem = np.full(len(text), "", dtype=object)
    problem[~ok] = "not an ISO 8601 duration"
    problem[ok & ym] = "years or months have no fixed length in hours"
    problem[(text == "").to_numpy()] = "empty"
    hours = np.where(problem == "", hours, np.nan)
    return hours.astype(float), problem


def format_hours(hours) -> list[str]:
    """Hours as ISO 8601 durations (``PT1.5H``, ``-PT0.5H``); ``""`` where NaN.

    >>> format_hours([0, 1.5, -0.5, float("nan")])
    ['PT0H', 'PT1.5H', '-PT0.5H', '']
    """
    out = []
    for h in np.asarray(hours, dtype=float):
        out.append("" if np.isnan(h) else f"{'-' if h < 0 else ''}PT{abs(h):.10g}H")
    return out
