r"""Urine NCA: amounts excreted over collection intervals, excretion rates, renal clearance.

Each input row is one urine collection interval of one profile: start and end
time after the dose, concentration and voided volume.  The amount excreted in
the interval is :math:`A_i = C_i V_i` (converted with pint to an amount unit),
the excretion rate :math:`A_i/(t_{2,i} - t_{1,i})` is placed at the interval
midpoint, and

.. math::
    \mathrm{RCAMINT} = \sum_i A_i, \qquad
    \mathrm{RCPCINT} = 100\,\mathrm{RCAMINT}/\mathrm{Dose}, \qquad
    \mathrm{RENALCL} = A_e(t_a, t_b) / \mathrm{AUC}(t_a, t_b).

Lambda z is fitted to ln(rate) against the midpoints with the engine's search
(:func:`pkwidgets.lambda_z.fit_lambda_z`).  For a mono-exponential excretion
rate :math:`R(t) = R_0 e^{-\lambda t}` the amount still to come after the end
of interval :math:`j` is exactly :math:`A_j / (e^{\lambda \Delta_j} - 1)`
(:math:`\Delta_j` its width; derived here, it tends to :math:`R_j/\lambda` as the
interval shrinks), which gives AURCIFO and AURCPEO.  For equal interval widths
the midpoint log-rates of a mono-exponential fall with slope exactly
:math:`-\lambda`; for unequal widths the midpoint rule is an approximation.

References: Gibaldi & Perrier, *Pharmacokinetics*, 2nd ed., ch. 1 (cumulative
excretion, excretion-rate plot, CLR = fe CL; from memory).  RCAMINT and RENALCL
are the codes of the pharmaverse PP sample (seen); other codes are recalled.

Rules (stated in ``settings`` and listed per interval in ``intervals``):

- BLQ concentration: ``blq="zero"`` counts the amount as 0 (rate 0, never in the
  lambda-z fit); ``blq="missing"`` makes the amount unknown.
- Volume 0 (nothing voided): amount 0 whatever the concentration.
- Missing volume or concentration: amount unknown; with ``missing="nan"``
  totals that need it are NaN and flagged, with ``missing="lower-bound"`` the
  known amounts are summed and the total is flagged as a lower bound.
- Intervals ending at or before the dose (pre-dose blanks) are listed, not used.
  Overlapping intervals, an interval spanning the dose, end <= start and
  negative values are errors naming the row.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ._urine_data import UrineResult, read_urine_table, urine_units
from .engine import ROUTES
from .lambda_z import fit_lambda_z

__all__ = ["UrineResult", "nca_urine"]

BLQ_OPTIONS = ("zero", "missing")
MISSING_OPTIONS = ("nan", "lower-bound")
#: Extrapolated share above which AURCPEO is flagged: by analogy with the plasma 20 % (EMA 2010), no urine source.
AURCPEO_LIMIT = 20.0


def _check_option(name, value, allowed):
    if value not in allowed:
        raise ValueError(f"The {name!r} option of nca_urine must be one of {list(allowed)}; got {value!r}.")


def nca_urine(data, *, by, start, end, conc, volume, units, dose=None, plasma=None, plasma_auc="AUCLST",
              plasma_interval=None, route="extravascular", blq="zero", missing="nan", terminal="auto",
              clr_unit=None, sep=",", encoding="utf-8") -> UrineResult:
    r"""Urine NCA of every profile in a table of collection intervals.

    Parameters
    ----------
    data : DataFrame or path of a CSV file
        One row per collection interval.
    by : str or list of str
        Columns that identify a profile (subject, period, analyte...).
    start, end, conc, volume : str
        Columns of the interval start and end (time after the dose), the
        urine concentration (BLQ text such as ``"BLQ"`` or ``"<0.01"`` allowed)
        and the voided volume.
    units : dict
        ``time``, ``conc`` and ``volume`` are required (e.g. ``{"time": "h",
        "conc": "ug/mL", "volume": "mL"}``); optional ``dose``, ``amount`` (unit
        of reported amounts; default the dose unit, else the concentration's
        amount unit) and ``plasma_auc`` (unit of the plasma AUC column).
    dose : str or float, optional
        Dose column (constant within a profile) or one amount for all; gives RCPCINT.
    plasma : DataFrame or NCA result, optional
        Plasma parameters keyed by the ``by`` columns (an object with
        ``.parameters`` and ``.units``, such as the result of :func:`pkwidgets.nca`,
        is accepted); gives RENALCL.
    plasma_auc : str
        Column of ``plasma`` holding the plasma AUC.
    plasma_interval : (float, float), optional
        The interval the plasma AUC covers; the amount over exactly that
        interval is used.  None: the plasma AUC is taken to cover the whole
        urine collection (first start to last end), as declared in ``settings``.
    route : {"extravascular", "iv-bolus", "iv-infusion"}
        The lambda-z candidates are the positive rates after the maximum-rate
        interval, or from it on for an IV bolus.
    blq : {"zero", "missing"}
    missing : {"nan", "lower-bound"}
    terminal : "auto" or (float, float)
        Automatic lambda-z search, or a fixed window of midpoint times.
    clr_unit : str, optional
        Unit of RENALCL (default litres per time unit, e.g. ``"L/h"``).

    Returns
    -------
    UrineResult
        ``parameters`` (one row per profile), ``intervals``, ``flags``,
        ``units``, ``settings``; ``to_long()``; ``profile(key)``.

    Examples
    --------
    >>> import pandas as pd
    >>> d = pd.DataFrame({"id": ["A"] * 3, "t1": [0, 2, 4], "t2": [2, 4, 8],
    ...                   "c": [10.0, 5.0, "BLQ"], "v": [200.0, 100.0, 300.0]})
    >>> r = nca_urine(d, by="id", start="t1", end="t2", conc="c", volume="v", dose=10,
    ...               units={"time": "h", "conc": "ug/mL", "volume": "mL", "dose": "mg"})
    >>> r.profile("A")[["RCAMINT", "RCPCINT", "ERMAX", "ERTMAX"]].tolist()
    [2.5, 25.0, 1.0, 1.0]
    >>> r.units["RCAMINT"], r.units["ERMAX"]
    ('mg', 'mg/h')
    >>> nca_urine(d, by="id", start="t1", end="t2", conc="c", volume="v", units={"time": "h"})
    Traceback (most recent call last):
    ...
    pkwidgets.errors.UnitError: units must name the 'conc' unit (e.g. units={'time': 'h', 'conc': 'ug/mL', 'volume': 'mL'}).
    """
    for name, value, allowed in (("route", route, ROUTES), ("blq", blq, BLQ_OPTIONS),
                                 ("missing", missing, MISSING_OPTIONS)):
        _check_option(name, value, allowed)
    by = [by] if isinstance(by, str) else list(by)
    u = urine_units(units, dose_given=dose is not None, clr_unit=clr_unit, plasma=plasma, plasma_auc=plasma_auc)
    iv = read_urine_table(data, by=by, start=start, end=end, conc=conc, volume=volume, dose=dose,
                          blq=blq, factor=u.amount_factor, missing=missing, sep=sep, encoding=encoding)
    params, flags = _profiles(iv, by, route=route, missing=missing, terminal=terminal)
    if dose is not None:  # RCPCINT = 100 RCAMINT / dose, the dose converted to the amount unit
        dose_p = iv.groupby("_p", sort=True)["dose"].first().to_numpy()
        params.insert(params.columns.get_loc("RCAMINT") + 1, "RCPCINT",
                      100.0 * params["RCAMINT"] / (dose_p * u.dose_factor))
    if plasma is not None:
        _renal(params, iv, by, plasma, plasma_auc, plasma_interval, u.clr_factor, flags, missing)
    settings = dict(analysis="urine", by=by, columns=dict(start=start, end=end, conc=conc, volume=volume, dose=dose),
                    units=dict(u.declared), route=route, blq=blq, missing=missing, terminal=terminal,
                    plasma_auc=plasma_auc if plasma is not None else None,
                    plasma_interval=(list(plasma_interval) if plasma_interval is not None else
                                     "whole collection" if plasma is not None else None),
                    rules=_rules_text(blq, missing))
    codes = [c for c in _CODES if c in params.columns and (c != "RENALCL" or plasma is not None)]
    params = params[by + codes]
    flags = pd.DataFrame(flags, columns=by + ["flag", "detail"])
    return UrineResult(parameters=params.reset_index(drop=True), intervals=iv.drop(columns=["_p"]),
                       flags=flags, units={c: u.of(c) for c in codes}, settings=settings)


_CODES = ("RCAMINT", "RCPCINT", "RENALCL", "ERMAX", "ERTMAX", "ERLST", "ERTLST", "AURCIFO", "AURCPEO",
          "LAMZ", "LAMZHL", "LAMZNPT", "R2ADJ", "LAMZLL", "LAMZUL", "LAMZSPN")


def _rules_text(blq, missing):
    b = "BLQ amount 0" if blq == "zero" else "BLQ amount unknown"
    m = "unknown amount makes totals NaN" if missing == "nan" else "unknown amounts left out of totals (lower bound)"
    return f"{b}; volume 0 gives amount 0; {m}; pre-dose collections not used"


def _padded(iv, P, column, fill=np.nan):
    """Profiles x intervals array of one column of the used intervals (sorted by start)."""
    used = iv[iv["used"]]
    pos = used.groupby("_p").cumcount().to_numpy()
    N = int(pos.max()) + 1 if len(pos) else 1
    out = np.full((P, N), fill, dtype=float if not isinstance(fill, bool) else bool)
    out[used["_p"].to_numpy(), pos] = used[column].to_numpy()
    return out


def _profiles(iv, by, *, route, missing, terminal):
    """Per-profile totals, rates and the excretion-rate lambda z (all profiles at once)."""
    keys = iv.drop_duplicates("_p").sort_values("_p")[by].reset_index(drop=True)
    P = len(keys)
    amt, t1, t2 = (_padded(iv, P, c) for c in ("amount", "start", "end"))
    known = _padded(iv, P, "known", False)
    present = ~np.isnan(t1)
    unknown_any = (present & ~known).any(axis=1)
    total = np.where(known, amt, 0.0).sum(axis=1)
    params = keys.copy()
    params["RCAMINT"] = np.where(unknown_any & (missing == "nan"), np.nan, total)
    params.loc[~present.any(axis=1), "RCAMINT"] = np.nan
    width = t2 - t1
    mid = (t1 + t2) / 2.0
    rate = np.where(known, amt / width, np.nan)
    r_for_max = np.where(np.isnan(rate), -np.inf, rate)
    imax = np.argmax(r_for_max, axis=1)
    rows = np.arange(P)
    has_rate = np.isfinite(r_for_max).any(axis=1)
    params["ERMAX"] = np.where(has_rate, rate[rows, imax], np.nan)
    params["ERTMAX"] = np.where(has_rate, mid[rows, imax], np.nan)
    pos = known & (amt > 0)
    has_pos = pos.any(axis=1)
    jlast = np.where(has_pos, pos.shape[1] - 1 - np.argmax(pos[:, ::-1], axis=1), 0)
    params["ERLST"] = np.where(has_pos, rate[rows, jlast], np.nan)
    params["ERTLST"] = np.where(has_pos, mid[rows, jlast], np.nan)
    fit = _fit(mid, rate, pos, imax, route, terminal)
    _lambda_columns(params, fit)
    _extrapolate(params, fit.lamz, amt, known, t1, t2, jlast, has_pos)
    iv["lambda_z"] = False
    used_idx = iv.index[iv["used"]]
    iv.loc[used_idx, "lambda_z"] = fit.used[iv.loc[used_idx, "_p"].to_numpy(),
                                            iv[iv["used"]].groupby("_p").cumcount().to_numpy()]
    return params, _profile_flags(params, iv, by, keys, unknown_any, present, missing)


def _fit(mid, rate, pos, imax, route, terminal):
    """Candidates after the maximum-rate interval (from it for an IV bolus), then the engine's fit."""
    col = np.arange(mid.shape[1])[None, :]
    after = col >= imax[:, None] if route == "iv-bolus" else col > imax[:, None]
    cand = pos & after
    manual = np.zeros(mid.shape[0], dtype=bool)
    if terminal != "auto":
        lo, hi = (float(x) for x in terminal)
        cand = pos & (mid >= lo) & (mid <= hi)
        manual[:] = True
    return fit_lambda_z(np.where(np.isnan(mid), 0.0, mid), np.where(np.isnan(rate), 0.0, rate), cand, manual)


def _lambda_columns(params, fit):
    params["LAMZ"] = fit.lamz
    params["LAMZHL"] = np.log(2.0) / fit.lamz
    params["LAMZNPT"] = fit.npoints
    params["R2ADJ"] = fit.r2adj
    params["LAMZLL"] = fit.t_first
    params["LAMZUL"] = fit.t_last
    params["LAMZSPN"] = (fit.t_last - fit.t_first) / params["LAMZHL"].to_numpy()


def _extrapolate(params, lamz, amt, known, t1, t2, jlast, has_pos):
    r"""AURCIFO = A(0, end_j) + A_j / (exp(LAMZ * width_j) - 1), j the last interval with a positive amount."""
    P, N = amt.shape
    rows = np.arange(P)
    upto = np.arange(N)[None, :] <= jlast[:, None]
    present = ~np.isnan(t1)
    complete = ~((upto & present & ~known).any(axis=1))
    a_to_j = np.where(upto & known, amt, 0.0).sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        tail = amt[rows, jlast] / np.expm1(lamz * (t2[rows, jlast] - t1[rows, jlast]))
    ok = has_pos & complete & np.isfinite(tail) & (lamz > 0)
    params["AURCIFO"] = np.where(ok, a_to_j + tail, np.nan)
    params["AURCPEO"] = np.where(ok, 100.0 * tail / (a_to_j + tail), np.nan)


def _profile_flags(params, iv, by, keys, unknown_any, present, missing):
    """Reviewer flags per profile, computed column-wise (no loop over profiles but to word them)."""
    used = iv[iv["used"]]
    n_unknown = (~used["known"]).groupby(used["_p"]).sum().reindex(range(len(keys)), fill_value=0).to_numpy()
    same = used["_p"].to_numpy()[1:] == used["_p"].to_numpy()[:-1]
    gap_after = same & (used["start"].to_numpy()[1:] > used["end"].to_numpy()[:-1])
    gap = np.zeros(len(keys), dtype=bool)
    gap[used["_p"].to_numpy()[1:][gap_after]] = True
    first = used.groupby("_p")["start"].min().reindex(range(len(keys))).to_numpy()
    gap |= first > 0
    nothing = ~present.any(axis=1)
    what = "RCAMINT is NaN" if missing == "nan" else "RCAMINT is a lower bound"
    peo = params["AURCPEO"].to_numpy()
    checks = [
        (nothing, "no_collection", lambda p: "no post-dose collection interval: nothing computed"),
        (~nothing & unknown_any, "amount_unknown",
         lambda p: f"{int(n_unknown[p])} interval(s) with unknown amount: {what}"),
        (~nothing & gap, "collection_gap",
         lambda p: "intervals do not cover the time from the dose to the last end without gaps"),
        (~nothing & np.isnan(params["LAMZ"].to_numpy()), "lambda_z_not_estimable",
         lambda p: "fewer than 3 declining positive rates after the maximum"),
        (~nothing & (peo > AURCPEO_LIMIT), "extrapolation_high",
         lambda p: f"AURCPEO {peo[p]:.1f} % > {AURCPEO_LIMIT:g} %"),
    ]
    key_rows = keys.to_numpy().tolist()
    return [[*key_rows[p], flag, word(p)] for p in range(len(keys)) for hit, flag, word in checks if hit[p]]


def _renal(params, iv, by, plasma, plasma_auc, plasma_interval, factor, flags, missing):
    """RENALCL = amount over the plasma AUC's interval / plasma AUC, looked up by profile key."""
    table = plasma.parameters if hasattr(plasma, "parameters") else plasma
    if plasma_auc not in table.columns or any(b not in table.columns for b in by):
        raise ValueError(f"plasma must have the key column(s) {by} and the column {plasma_auc!r}; "
                         f"its columns are {list(table.columns)}.")
    dup = table.duplicated(by, keep=False)
    if dup.any():
        raise ValueError(f"plasma has more than one row for profile {table.loc[dup, by].iloc[0].tolist()}; "
                         "give one plasma AUC per profile.")
    auc = params[by].merge(table[by + [plasma_auc]], on=by, how="left")[plasma_auc].to_numpy(dtype=float)
    ae = np.full(len(params), np.nan)
    for p, g in iv[iv["used"]].groupby("_p", sort=True):
        ae[p] = _amount_over(g, plasma_interval, missing)
    params["RENALCL"] = ae / auc * factor
    for p in np.flatnonzero(np.isnan(auc)):
        flags.append([*params[by].iloc[p].tolist(), "no_plasma_auc", f"no plasma {plasma_auc} for this profile"])
    if plasma_interval is not None:
        for p in np.flatnonzero(np.isnan(ae) & ~np.isnan(auc)):
            flags.append([*params[by].iloc[p].tolist(), "renal_interval_mismatch",
                          f"collections do not tile {list(plasma_interval)} with known amounts"])


def _amount_over(g, interval, missing):
    """Amount excreted over ``interval`` (None: the whole collection); NaN unless intervals tile it exactly."""
    g = g.sort_values("start")
    if interval is None:
        unknown = (~g["known"]).any() and missing == "nan"
        return np.nan if unknown else float(g.loc[g["known"], "amount"].sum())
    a, b = (float(x) for x in interval)
    inside = g[(g["start"] >= a) & (g["end"] <= b)]
    s, e = inside["start"].to_numpy(), inside["end"].to_numpy()
    tiles = len(inside) and s[0] == a and e[-1] == b and np.all(s[1:] == e[:-1])
    if not tiles or not inside["known"].all():
        return np.nan
    return float(inside["amount"].sum())
