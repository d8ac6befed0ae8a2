"""Input, units and result object of the urine NCA (:mod:`pkwidgets.urine`).

Reading goes through the study-table parser of :mod:`pkwidgets.table`, so a
bad cell is reported with its file, line and column (or row) as everywhere else.
Units are derived with pint: concentration x volume -> amount.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pint

from .errors import InputDataError, UnitError
from .parameters import PARAMETERS
from .columns import TableSource
from .long import iso_durations
from .units import _fmt, ureg

__all__ = ["UrineResult", "read_urine_table", "urine_units"]

_MASS, _SUBSTANCE = ureg.g.dimensionality, ureg.mol.dimensionality


@dataclass
class UrineResult:
    """Result of :func:`pkwidgets.nca_urine`.

    Attributes
    ----------
    parameters : DataFrame
        One row per profile: key columns, then PPTESTCD codes.
    intervals : DataFrame
        Every input interval: keys, start, end, midpoint, concentration, BLQ,
        volume, amount, rate, cumulative amount, used, reason, in the lambda-z fit.
    flags : DataFrame
        Key columns, flag, detail.
    units : dict
        PPTESTCD code -> unit text.
    settings : dict
        Options and rules of the run.
    """

    parameters: pd.DataFrame
    intervals: pd.DataFrame
    flags: pd.DataFrame
    units: dict
    settings: dict = field(default_factory=dict)

    def profile(self, key) -> pd.Series:
        """The parameters of one profile, looked up by its key (a value, or a tuple for several keys)."""
        by = self.settings["by"]
        key = key if isinstance(key, tuple) else (key,)
        if len(key) != len(by):
            raise KeyError(f"a profile key has {len(by)} value(s) ({by}); got {key!r}.")
        hit = np.logical_and.reduce([self.parameters[b].astype(str).to_numpy() == str(k) for b, k in zip(by, key)])
        if hit.sum() != 1:
            raise KeyError(f"no profile {dict(zip(by, key))} in the result.")
        return self.parameters.loc[hit].iloc[0].drop(by).infer_objects()

    def to_long(self) -> pd.DataFrame:
        """One row per profile and parameter: keys, PPTESTCD, PPTEST, PPSPEC, value, unit, PPSTINT, PPENINT.

        RCAMINT and RCPCINT carry the collection span (first start to last
        end of the used intervals) as their interval, RENALCL the plasma
        interval when one was given.
        """
        by = self.settings["by"]
        codes = [c for c in self.parameters.columns if c not in by]
        long = self.parameters.melt(id_vars=by, value_vars=codes, var_name="PPTESTCD", value_name="value")
        long["PPTEST"] = long["PPTESTCD"].map(lambda c: PARAMETERS[c].name)
        long["PPSPEC"] = "URINE"
        long["unit"] = long["PPTESTCD"].map(self.units)
        used = self.intervals[self.intervals["used"]]
        span = used.groupby(by, sort=False).agg(_s=("start", "min"), _e=("end", "max")).reset_index()
        long = long.merge(span, on=by, how="left")
        spanned = long["PPTESTCD"].isin(["RCAMINT", "RCPCINT"]).to_numpy()
        s = np.where(spanned, long["_s"], np.nan)
        e = np.where(spanned, long["_e"], np.nan)
        pint_iv = self.settings.get("plasma_interval")
        if isinstance(pint_iv, list):
            renal = (long["PPTESTCD"] == "RENALCL").to_numpy()
            s, e = np.where(renal, pint_iv[0], s), np.where(renal, pint_iv[1], e)
        time_unit = self.settings["units"]["time"]
        long["PPSTINT"], long["PPENINT"] = iso_durations(s, time_unit), iso_durations(e, time_unit)
        long["interval_start"], long["interval_end"] = s, e
        return long[by + ["PPTESTCD", "PPTEST", "PPSPEC", "value", "unit", "PPSTINT", "PPENINT",
                          "interval_start", "interval_end"]]

    def __repr__(self):
        return (f"UrineResult: {len(self.parameters)} profile(s), {int(self.intervals['used'].sum())} of "
                f"{len(self.intervals)} interval(s) used, {len(self.flags)} flag(s)\n{self.parameters!r}")


# ---------------------------------------------------------------------------- units

def _parse(text, role):
    try:
        return ureg.Unit(str(text).replace("·", "*"))
    except (pint.errors.UndefinedUnitError, AttributeError, TypeError, ValueError) as exc:
        raise UnitError(f"{role} unit {text!r} is not a unit pint knows ({exc}).") from None


def _factor(src, dst, what):
    try:
        return float(f"{(1.0 * src).to(dst).magnitude:.15g}")  # drop pint noise (999.9999999999999)
    except pint.errors.DimensionalityError:
        raise UnitError(f"{what}: {_fmt(src)} cannot be expressed in {_fmt(dst)}; declare the units on one basis "
                        "(mass with mass per volume, or amount of substance with amount per volume).") from None


def _amount_of(conc_unit):
    """The mass or substance unit in the numerator of a concentration unit (ug/mL -> ug)."""
    for name, power in conc_unit._units.items():
        u = ureg.Unit(name)
        if power > 0 and u.dimensionality in (_MASS, _SUBSTANCE):
            return u ** power
    raise UnitError(f"concentration unit {_fmt(conc_unit)} has no mass or substance unit; give units['amount'].")


@dataclass
class _UrineUnits:
    declared: dict
    time: object
    amount: object
    amount_factor: float
    dose_factor: float | None
    clr: object | None
    clr_factor: float | None

    def of(self, code):
        kind = PARAMETERS[code].unit_kind
        if code == "RENALCL":
            return _fmt(self.clr)
        return {"amount": _fmt(self.amount), "amount_per_time": _fmt(self.amount / self.time),
                "time": _fmt(self.time), "per_time": _fmt(self.time ** -1), "percent": "%",
                "count": "1", "ratio": "1"}[kind]


def urine_units(units, *, dose_given, clr_unit, plasma, plasma_auc):
    """Check the declared units and derive the conversion factors of the urine NCA."""
    if not isinstance(units, dict):
        raise TypeError(f"units must be a dict such as {{'time': 'h', 'conc': 'ug/mL', 'volume': 'mL'}}; "
                        f"got {type(units).__name__}.")
    for role in ("time", "conc", "volume"):
        if not units.get(role):
            raise UnitError(f"units must name the {role!r} unit (e.g. units={{'time': 'h', 'conc': 'ug/mL', "
                            "'volume': 'mL'}).")
    t, c, v = (_parse(units[r], r) for r in ("time", "conc", "volume"))
    if t.dimensionality != ureg.h.dimensionality:
        raise UnitError(f"time unit {units['time']!r} is not a unit of time.")
    if v.dimensionality != ureg.L.dimensionality:
        raise UnitError(f"volume unit {units['volume']!r} is not a unit of volume.")
    dose_u = _parse(units["dose"], "dose") if units.get("dose") else None
    if units.get("amount"):
        amount = _parse(units["amount"], "amount")
    elif dose_u is not None and (1.0 * c * v).dimensionality == dose_u.dimensionality:
        amount = dose_u
    else:
        amount = _amount_of(c)
    amount_factor = _factor(c * v, amount, "amount = concentration x volume")
    dose_factor = None
    if dose_given:
        if dose_u is None:
            raise UnitError("a dose was given: declare its unit as units['dose'] (e.g. 'mg').")
        dose_factor = _factor(dose_u, amount, "fraction excreted = amount / dose")
    clr = clr_factor = None
    if plasma is not None:
        auc_text = units.get("plasma_auc") or (getattr(plasma, "units", None) or {}).get(plasma_auc)
        if not auc_text:
            raise UnitError(f"declare the unit of the plasma {plasma_auc} as units['plasma_auc'] (e.g. 'h*ug/mL').")
        clr = _parse(clr_unit, "renal clearance") if clr_unit else ureg.L / t
        clr_factor = _factor(amount / _parse(auc_text, "plasma AUC"), clr, "renal clearance = amount / plasma AUC")
    declared = {k: str(units[k]) for k in units}
    declared["amount"] = _fmt(amount)
    return _UrineUnits(declared, t, amount, amount_factor, dose_factor, clr, clr_factor)


# ---------------------------------------------------------------------------- input

def _fail(src, i, column, what):
    raise InputDataError(f"{src.at(i, column)}: {what}", file=src.file, line=src.line(i), column=column)


def read_urine_table(data, *, by, start, end, conc, volume, dose, blq, factor, missing, sep, encoding):
    """Parse and check the collection intervals; one row per input row, sorted by profile and start."""
    src = TableSource.open(data, sep=sep, encoding=encoding)
    src.require(by + [start, end, conc, volume] + ([dose] if isinstance(dose, str) else []))
    t1, t2, v = src.numeric(start), src.numeric(end), src.numeric(volume)
    c, is_blq, _ = src.concentrations(conc)
    _check_values(src, by, start, end, conc, volume, t1, t2, c, v)
    iv = pd.DataFrame(index=src.frame.index)
    if src.file is None:
        iv["row"] = src.frame.index
    else:
        iv["line"] = src.lines()
    for b in by:
        iv[b] = src.frame[b].to_numpy()
    iv["_p"] = pd.MultiIndex.from_frame(iv[by].astype(str)).factorize()[0]
    iv["start"], iv["end"], iv["midpoint"] = t1, t2, (t1 + t2) / 2.0
    iv["conc"], iv["blq"], iv["volume"] = c, is_blq, v
    iv["dose"] = _doses(src, dose, iv["_p"].to_numpy()) if dose is not None else np.nan
    _amounts(iv, blq, factor)
    iv = iv.sort_values(["_p", "start"], kind="stable").reset_index(drop=True)
    _check_overlaps(src, iv, by)
    known = iv["known"].where(iv["used"], True)
    cum_src = iv["amount"].where(iv["used"], 0.0)
    if missing == "lower-bound":
        cum_src = cum_src.where(known, 0.0)
    iv["cumulative"] = cum_src.groupby(iv["_p"]).cumsum(skipna=False).where(iv["used"])
    return iv


def _check_values(src, by, start, end, conc, volume, t1, t2, c, v):
    for b in by:
        bad = np.flatnonzero(src.frame[b].isna().to_numpy())
        if bad.size:
            _fail(src, bad[0], b, "the profile key is empty; every interval needs its profile.")
    for col, x in ((start, t1), (end, t2)):
        bad = np.flatnonzero(np.isnan(x))
        if bad.size:
            _fail(src, bad[0], col, "the interval time is empty; give start and end of every collection.")
    bad = np.flatnonzero(t2 <= t1)
    if bad.size:
        _fail(src, bad[0], end, f"end {t2[bad[0]]:g} is not after start {t1[bad[0]]:g}; an interval needs end > start.")
    bad = np.flatnonzero((t1 < 0) & (t2 > 0))
    if bad.size:
        _fail(src, bad[0], start, "the interval spans the dose time; split it at the dose or drop it.")
    for col, x in ((volume, v), (conc, c)):
        bad = np.flatnonzero(x < 0)
        if bad.size:
            _fail(src, bad[0], col, f"{x[bad[0]]:g} is negative; volumes and concentrations must be >= 0.")


def _doses(src, dose, prof):
    if not isinstance(dose, str):
        return np.full(len(prof), float(dose))
    d = src.numeric(dose)
    for p in np.unique(prof):
        vals = d[prof == p]
        if np.isnan(vals).any() or np.unique(vals).size > 1:
            i = int(np.flatnonzero(prof == p)[0])
            _fail(src, i, dose, f"the dose of a profile must be one number on every row; found {vals.tolist()}.")
    return d


def _amounts(iv, blq, factor):
    """Amount, rate, used and reason of every interval (rules in the module docstring)."""
    c, v, b = iv["conc"].to_numpy(), iv["volume"].to_numpy(), iv["blq"].to_numpy()
    pre = iv["end"].to_numpy() <= 0
    amount = c * v * factor
    reason = np.full(len(iv), "", dtype=object)
    known = ~np.isnan(amount)
    if blq == "zero":
        amount, known = np.where(b, 0.0, amount), known | b
        reason[b] = "BLQ: amount counted as 0 (not in the lambda-z fit)"
    else:
        reason[b] = "BLQ: amount unknown (rule 'missing')"
    zero_v = v == 0
    amount, known = np.where(zero_v, 0.0, amount), known | zero_v
    reason[zero_v] = "volume 0 (nothing voided): amount 0"
    reason[np.isnan(v) & ~zero_v] = "volume missing: amount unknown"
    reason[np.isnan(c) & ~b & ~np.isnan(v) & ~zero_v] = "concentration missing: amount unknown"
    reason[pre] = "collected before the dose: not used"
    iv["amount"] = np.where(known, amount, np.nan)
    iv["rate"] = iv["amount"] / (iv["end"] - iv["start"])
    iv["known"], iv["used"], iv["reason"] = known, ~pre, reason


def _check_overlaps(src, iv, by):
    used = iv[iv["used"]]
    same = used["_p"].to_numpy()[1:] == used["_p"].to_numpy()[:-1]
    overlap = same & (used["start"].to_numpy()[1:] < used["end"].to_numpy()[:-1])
    if overlap.any():
        k = int(np.flatnonzero(overlap)[0])
        a, b = used.iloc[k], used.iloc[k + 1]
        where = "line" if src.file is not None else "row"
        raise InputDataError(
            f"{src.name}, profile {a[by].tolist()}: interval {b['start']:g}-{b['end']:g} ({where} "
            f"{b['line' if src.file else 'row']}) overlaps {a['start']:g}-{a['end']:g} ({where} "
            f"{a['line' if src.file else 'row']}); collections of one profile must not overlap.",
            file=src.file, profile=a[by].tolist())
