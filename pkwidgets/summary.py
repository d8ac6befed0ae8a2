r"""Descriptive group summaries of NCA parameters.

:func:`summarize` gives, for each group and parameter, the statistics a PK
report tabulates: N, arithmetic mean, SD, CV%, geometric mean, geometric
CV%, median, minimum and maximum.  Pure pandas/NumPy; no printing.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .blq import parse_concentrations
from .summary_sets import bin_times, leave_out  # noqa: F401  (part of this module's interface)

__all__ = ["summarize", "STATISTICS", "MEDIAN_ONLY", "NOT_RATIO_SCALE", "geometric_cv", "with_groups",
           "blq_positions", "mean_profiles", "reference_median", "statistics_for", "leave_out", "bin_times"]

#: Statistic columns of :func:`summarize`, in order.
STATISTICS = ("N", "Mean", "SD", "CV%", "Geo. mean", "Geo. CV%", "Median", "Min", "Max")

#: Times read on the sampling grid and counts: summarised as median (min-max) only (their distribution is
#: discrete; common practice, no source).
MEDIAN_ONLY = frozenset({"TMAX", "TLAG", "TLST", "TMIN", "LAMZNPT", "LAMZLL", "LAMZUL", "ERTMAX", "ERTLST"})
#: Parameters that are not on a ratio scale (bounded percentages, goodness of fit, spans): arithmetic
#: statistics only, no geometric mean or CV (common practice, no source).
NOT_RATIO_SCALE = frozenset({"R2", "R2ADJ", "CORRXY", "LAMZSPN", "AUCPEO", "AUCPEP", "AUMCPEO", "AUCPBEO", "FLUCP",
                             "SWING", "RCPCINT", "AURCPEO"})


def statistics_for(code) -> tuple:
    """The statistics of :data:`STATISTICS` reported for a parameter.

    Examples
    --------
    >>> statistics_for("TMAX")
    ('N', 'Median', 'Min', 'Max')
    >>> "Geo. mean" in statistics_for("R2ADJ"), "Geo. mean" in statistics_for("CMAX")
    (False, True)
    """
    if code in MEDIAN_ONLY:
        return ("N", "Median", "Min", "Max")
    if code in NOT_RATIO_SCALE:
        return tuple(s for s in STATISTICS if not s.startswith("Geo."))
    return STATISTICS


def geometric_cv(values) -> float:
    r"""Geometric coefficient of variation, in percent.

    Parameters
    ----------
    values : array_like
        Positive values; NaN are ignored.  Zero or negative values make the
        result NaN (the log is undefined).

    Returns
    -------
    float
        :math:`100 \sqrt{e^{s^2} - 1}` with :math:`s` the sample SD
        (``ddof=1``) of the natural logs; NaN with fewer than two values.

    Notes
    -----
    .. math:: \mathrm{CV}_{geo} = 100 \sqrt{\exp(s^2) - 1}, \quad s = \mathrm{SD}(\ln x)

    The CV of a log-normal variable [1]_.

    References
    ----------
    .. [1] Kirkwood TBL. Geometric means and measures of dispersion.
       Biometrics 1979;35:908-909.

    Examples
    --------
    >>> round(geometric_cv([1.0, 2.0, 4.0]), 3)
    78.537
    >>> geometric_cv([1.0, -2.0])
    nan
    """
    x = np.asarray(values, dtype=np.float64)
    x = x[~np.isnan(x)]
    if x.size < 2 or np.any(x <= 0):
        return float("nan")
    s = np.std(np.log(x), ddof=1)
    return float(100.0 * np.sqrt(np.expm1(s * s)))


def _stats(x: np.ndarray) -> list:
    x = x[np.isfinite(x)]
    n = x.size
    if n == 0:
        return [0] + [np.nan] * 8
    mean = float(np.mean(x))
    sd = float(np.std(x, ddof=1)) if n > 1 else np.nan
    cv = 100.0 * sd / mean if mean != 0 else np.nan
    if np.all(x > 0):
        gmean = float(np.exp(np.mean(np.log(x))))
        gcv = geometric_cv(x)
    else:
        gmean = gcv = np.nan
    return [n, mean, sd, cv, gmean, gcv, float(np.median(x)), float(np.min(x)), float(np.max(x))]


def summarize(table, *, by=None, parameters=None, units=None, scale_rules=False) -> pd.DataFrame:
    r"""Group summaries of parameters: one row per group and parameter.

    Parameters
    ----------
    table : DataFrame or NCAResult
        One row per profile (e.g. ``NCAResult.parameters``, or the result
        itself); a ``profile_id`` column is never summarised.
    by : str or list of str, optional
        Grouping columns (dose level, treatment, day...).  None or ``[]``
        summarises all profiles together.
    parameters : list of str, optional
        Parameter columns to summarise; default every numeric column that is
        not a grouping column and has at least one value.
    units : dict, optional
        Code -> unit text; default ``table.units`` when the table has it.
    scale_rules : bool
        Report only the statistics that suit each parameter's scale
        (:func:`statistics_for`; the others are NaN): TMAX, TLAG and counts
        get N, median, min and max only; parameters not on a ratio scale
        (R2ADJ, AUCPEO...) get no geometric statistics, and per-profile
        confidence bounds (``*_LOWER95``, ``*_UPPER95``) are not summarised
        (a mean of interval ends estimates nothing).  The study records use
        True; default False (every statistic) for earlier callers.

    Returns
    -------
    pandas.DataFrame
        Columns: the ``by`` columns, ``PPTESTCD``, ``unit`` (from
        ``table.units`` when present, else ""), then ``N``, ``Mean``, ``SD``,
        ``CV%``, ``Geo. mean``, ``Geo. CV%``, ``Median``, ``Min``, ``Max``.
        N counts finite values (NaN, and the infinite SWING of a profile
        whose CMIN is 0, are left out).  SD and CVs need two values (else NaN);
        geometric statistics need all values > 0 (else NaN: TMAX of 0 or
        a zero AUC has no log).

    Raises
    ------
    KeyError
        If a ``by`` or ``parameters`` column is not in the table.

    Notes
    -----
    SD with ``ddof=1``; CV% = 100 SD / mean; geometric mean
    :math:`\exp(\overline{\ln x})`; geometric CV% as in :func:`geometric_cv`.

    Examples
    --------
    >>> df = pd.DataFrame({"dose": [10, 10, 30], "CMAX": [1.0, 3.0, 5.0]})
    >>> s = summarize(df, by="dose")
    >>> s[["dose", "PPTESTCD", "N", "Mean", "Median"]].to_string(index=False)
    ' dose PPTESTCD  N  Mean  Median\n   10     CMAX  2   2.0     2.0\n   30     CMAX  1   5.0     5.0'
    >>> summarize(df, by="arm")
    Traceback (most recent call last):
    ...
    KeyError: "summarize: grouping column(s) ['arm'] not in the table; columns are ['dose', 'CMAX']. Pass by= some of these, or None for one summary over all profiles."
    """
    if isinstance(getattr(table, "parameters", None), pd.DataFrame):  # an NCAResult: its parameters and units
        units = table.units if units is None else units
        table = table.parameters
    table = table.drop(columns=[c for c in ("profile_id",) if c in table.columns])
    by = [] if by is None else ([by] if isinstance(by, str) else list(by))
    missing = [c for c in by if c not in table.columns]
    if missing:
        raise KeyError(f"summarize: grouping column(s) {missing} not in the table; columns are {list(table.columns)}. "
                       "Pass by= some of these, or None for one summary over all profiles.")
    if parameters is None:
        parameters = [c for c in table.columns if c not in by and pd.api.types.is_numeric_dtype(table[c])
                      and table[c].notna().any()]
    else:
        bad = [c for c in parameters if c not in table.columns]
        if bad:
            raise KeyError(f"summarize: parameter column(s) {bad} not in the table; numeric columns are "
                           f"{[c for c in table.columns if pd.api.types.is_numeric_dtype(table[c])]}.")
    if scale_rules:
        parameters = [c for c in parameters if not str(c).endswith(("_LOWER95", "_UPPER95"))]
    units = getattr(table, "units", None) if units is None else units
    units = units if isinstance(units, dict) else {}
    frame = table
    groups = frame.groupby(by, sort=True, dropna=False) if by else [((), frame)]
    out = []
    for key, g in groups:
        key = key if isinstance(key, tuple) else (key,)
        for code in parameters:
            x = g[code].to_numpy(dtype=np.float64, na_value=np.nan)
            values = _stats(x)
            if scale_rules:
                kept = statistics_for(code)
                values = [v if s in kept else np.nan for s, v in zip(STATISTICS, values)]
            out.append(list(key) + [code, units.get(code, "")] + values)
    res = pd.DataFrame(out, columns=by + ["PPTESTCD", "unit"] + list(STATISTICS))
    res["N"] = res["N"].astype(int)
    return res


def with_groups(result, group_by) -> pd.DataFrame:
    """Parameters with grouping columns taken from each profile's input rows, joined by ``profile_id``.

    Parameters
    ----------
    result : NCAResult
        Result of :func:`pkwidgets.nca` (its ``samples`` give the group values).
    group_by : list of str
        Input columns to attach (e.g. the dose level); columns already in the
        parameters are kept as they are.

    Returns
    -------
    pandas.DataFrame
        ``result.parameters`` with the group columns inserted after the
        profile keys.  A profile's group value is that of its first row; a
        column whose values all read as numbers becomes numeric (so 10 sorts
        before 100), and integer-valued (``10`` rather than ``10.0``) when
        every value is whole.

    Raises
    ------
    KeyError
        If a group column is not in the input rows (the message names the
        data file and its columns).
    """
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    out = result.parameters.copy()
    rows = result.samples
    missing = [g for g in group_by if g not in out.columns and g not in rows.columns]
    if missing:
        source = result.settings.get("source") or "the data"
        data_cols = [c for c in rows.columns if not str(c).startswith("nca_")]
        raise KeyError(f"group_by column(s) {missing} are neither profile keys nor columns of {source}; its columns "
                       f"are {data_cols}. Set group_by to some of these, or [] for one summary over all profiles.")
    placed = rows[rows["nca_profile_id"] >= 0]
    first = placed.groupby("nca_profile_id", sort=False).first()
    pos = len(result.by)
    for g in group_by:
        if g not in out.columns:
            col = first[g].reindex(out["profile_id"].to_numpy())
            out.insert(pos, g, _as_numbers(col).to_numpy())
            pos += 1
    return out


def _as_numbers(col: pd.Series) -> pd.Series:
    """Numeric copy of a group column when every value reads as a number (int when all whole), else as is."""
    num = pd.to_numeric(col, errors="coerce")
    if len(num) == 0 or num.isna().any():
        return col
    if np.all(np.isfinite(num)) and np.all(num == np.round(num)) and np.all(np.abs(num) < 2**53):
        return num.astype(np.int64)
    return num


def _conc_values(rows, conc, blq=None):
    raw = rows[conc].to_numpy(dtype=object)
    raw = np.where(pd.isna(raw), None, raw)
    vals = pd.to_numeric(pd.Series(raw, dtype=object), errors="coerce").to_numpy(dtype=np.float64, copy=True)
    is_blq = np.zeros(len(raw), dtype=bool)
    todo = np.flatnonzero(np.isnan(vals))
    if todo.size:
        cv, b, _, _ = parse_concentrations(list(raw[todo]))
        vals[todo] = np.where(b, np.nan, cv)
        is_blq[todo] = b
    if blq is not None:
        flag = rows[blq].astype(str).str.strip().str.lower().isin({"1", "true", "t", "yes", "y", "blq"}).to_numpy()
        is_blq |= flag
        vals[flag] = np.nan
    return vals, is_blq


def blq_positions(rows, *, by, time, conc, blq=None) -> pd.DataFrame:
    """Count BLQ samples by position in their profile.

    Parameters
    ----------
    rows : DataFrame
        Input rows (e.g. ``NCAResult.samples``), concentration as read.
    by : list of str
        Profile keys.
    time, conc : str
        Column names; BLQ is read as in :func:`pkwidgets.nca` (text markers
        and ``"<x"``), or from the ``blq`` flag column.

    Returns
    -------
    pandas.DataFrame
        Index ``before``, ``between``, ``after`` (relative to the first and
        last measurable concentration of the profile) and ``no measurable``
        (profiles with no measurable value); columns ``samples`` and
        ``profiles`` (profiles with at least one such sample).
    """
    by = [by] if isinstance(by, str) else list(by)
    vals, is_blq = _conc_values(rows, conc, blq)
    t = pd.to_numeric(rows[time], errors="coerce").to_numpy(dtype=np.float64)
    key = rows[by].astype(str).agg("\x1f".join, axis=1).to_numpy()
    meas = pd.Series(np.where(~np.isnan(vals) & ~is_blq, t, np.nan))
    first = meas.groupby(key).transform("min").to_numpy()
    last = meas.groupby(key).transform("max").to_numpy()
    pos = np.select([np.isnan(first), t < first, t > last], ["no measurable", "before", "after"], "between")
    pos = np.where(is_blq, pos, "")
    names = ["before", "between", "after", "no measurable"]
    out = pd.DataFrame({"samples": [int(np.sum(pos == n)) for n in names],
                        "profiles": [len(set(key[pos == n])) for n in names]}, index=pd.Index(names, name="BLQ position"))
    return out


def mean_profiles(rows, *, group_by, time, conc, blq=None) -> pd.DataFrame:
    """Mean and SD concentration at each time, by group.

    BLQ samples count as 0 and missing concentrations are left out (common
    practice for descriptive mean curves, no source).  Use a nominal-time
    column for ``time`` so that samples of different subjects line up.

    Parameters
    ----------
    rows : DataFrame
        Input rows with the ``group_by``, ``time`` and ``conc`` columns.
    group_by : list of str
    time, conc, blq : str

    Returns
    -------
    pandas.DataFrame
        Group columns, ``time``, ``n``, ``mean``, ``sd`` (``ddof=1``, NaN for n = 1).
    """
    group_by = [group_by] if isinstance(group_by, str) else list(group_by or [])
    vals, is_blq = _conc_values(rows, conc, blq)
    d = rows[group_by].copy() if group_by else pd.DataFrame(index=rows.index)
    for g in group_by:
        d[g] = _as_numbers(d[g])
    d["time"] = pd.to_numeric(rows[time], errors="coerce").to_numpy()
    d["c"] = np.where(is_blq, 0.0, vals)
    d = d.dropna(subset=["time", "c"])
    g = d.groupby(group_by + ["time"], sort=True, dropna=False)["c"]  # a blank group value stays a group
    return g.agg(n="count", mean="mean", sd="std").reset_index()


def reference_median(table, column, reference, parameter="TMAX") -> float:
    r"""Median of one parameter over the profiles of a reference group.

    Used for the early-exposure partial AUC, cut at the median TMAX of the
    reference treatment (FDA product-specific guidance practice, from memory).
    The parameter itself comes from :func:`pkwidgets.nca`; this only takes
    the median of its finite values.

    Parameters
    ----------
    table : DataFrame
        One row per profile with ``column`` and ``parameter``.
    column : str
        Group column (e.g. the treatment column).
    reference : object
        Value of ``column`` that marks the reference profiles (compared as text,
        so ``1`` and ``"1"`` match).
    parameter : str
        Parameter column; default ``"TMAX"``.

    Returns
    -------
    float
        :math:`\operatorname{median}\{p_i : \text{column}_i = \text{reference}, p_i \text{ finite}\}`.

    Raises
    ------
    KeyError
        If ``column`` or ``parameter`` is not in the table.
    ValueError
        If no reference profile has a finite value.

    Examples
    --------
    >>> df = pd.DataFrame({"trt": ["R", "R", "R", "T"], "TMAX": [1.0, 2.0, 4.0, 0.5]})
    >>> reference_median(df, "trt", "R")
    2.0
    >>> reference_median(df, "trt", "X")
    Traceback (most recent call last):
    ...
    ValueError: reference='X': no profile with trt = 'X' has a finite TMAX; values of trt are ['R', 'T']. Set reference to one of them, or None to skip the early-exposure cut.
    """
    if column is None:
        raise ValueError(f"reference={reference!r} needs the column that holds it: map the treatment column "
                         "(columns={'treatment': ...}) or set reference=None to skip the early-exposure cut.")
    for name, what in ((column, "group column"), (parameter, "parameter")):
        if name is None or name not in table.columns:
            raise KeyError(f"reference_median: {what} {name!r} is not in the table; columns are {list(table.columns)}.")
    groups = table[column].astype(str)
    values = pd.to_numeric(table.loc[(groups == str(reference)).to_numpy(), parameter], errors="coerce").to_numpy(float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        raise ValueError(f"reference={reference!r}: no profile with {column} = {str(reference)!r} has a finite "
                         f"{parameter}; values of {column} are {sorted(groups.unique())}. Set reference to one of "
                         "them, or None to skip the early-exposure cut.")
    return float(np.median(values))

