"""Record tables of a sampling-design evaluation (formatting only; the numbers come from
:func:`pkwidgets.evaluate_schedule` and the model from :class:`pkwidgets.CompartmentModel`).

Errors against the model's exact values are shown in percent with one
decimal, as "median (5th to 95th percentile)": the median is the bias, the
range the precision.  Model values carry their units, derived from the
study's time, concentration and dose units; the CSV exports keep full
precision.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .tables import MISSING, Caption, ReportTable

__all__ = ["model_table", "schedule_table", "error_table", "estimable_table", "flag_share_table"]

#: Model quantities in the order shown: (attribute, label, unit kind).
_MODEL_ROWS = (("dose", "dose", "dose"), ("cl", "CL", "clearance"), ("v", "V", "volume"), ("q", "Q", "clearance"),
               ("v2", "V2", "volume"), ("ka", "ka", "per_time"), ("f", "F", "fraction"), ("lag", "lag time", "time"),
               ("duration", "infusion duration", "time"), ("tau", "dosing interval", "time"))


def _pct(value) -> str:
    """A percentage to one decimal; a share too small to show as 0.0 is written "< 0.1"."""
    if not np.isfinite(value):
        return MISSING
    return "< 0.1" if 0 < abs(value) < 0.05 else f"{value:.1f}"


def _given(value) -> str:
    """A model value as the user wrote it (no rounding: it is an input, not an estimate)."""
    return MISSING if value is None else f"{value:g}"


def _table(frame, key, caption, numeric=None) -> ReportTable:
    """A record table of text cells; ``numeric`` columns (default all but the key) are right-aligned."""
    numeric = [c for c in frame.columns if c != key] if numeric is None else numeric
    return ReportTable(frame, keys=[key], caption=caption, numeric=numeric)


def _model_units(units) -> dict:
    """Unit text per kind.  Volume and clearance are in dose / concentration (litres when the units allow it):
    the model computes C = Dose / V with the numbers as given."""
    from ..units import coerce_units

    units = dict(units or {})
    time, conc, dose = units.get("time", ""), units.get("conc", ""), units.get("dose", "")
    volume = clearance = ""
    if time and conc and dose:
        study = coerce_units(units, needs_dose=True)
        (vol, vf), (cl, cf) = study.unit_of("VZO"), study.unit_of("CLO")
        volume = vol if vf == 1.0 else f"{dose}/({conc})"
        clearance = cl if cf == 1.0 else f"{dose}/({conc}·{time})"
    return {"dose": dose, "clearance": clearance, "volume": volume, "per_time": f"1/{time}" if time else "",
            "time": time, "fraction": "", "conc": conc}


def model_table(model, units=None):
    """Typical values of the simulation model with units and between-subject variability.

    Parameters
    ----------
    model : CompartmentModel
    units : dict, optional
        ``{"time": ..., "conc": ..., "dose": ...}`` of the study.

    Returns
    -------
    ReportTable
        quantity, value, unit, between-subject SD (log scale); then the
        residual errors and the LLOQ.
    """
    kinds = _model_units(units)
    rows = [("route", model.route, "", MISSING), ("compartments", str(model.compartments), "", MISSING)]
    for name, label, kind in _MODEL_ROWS:
        value = getattr(model, name)
        if value is None or (name == "lag" and model.ka is None):
            continue
        label = "V1 (central)" if name == "v" and model.compartments == 2 else label
        sd = model.variability.get(name)
        rows.append((label, _given(value), kinds[kind], _given(sd) if sd else MISSING))
    if model.tau is not None:
        rows.append(("doses", str(model.doses), "", MISSING))
    rows += [("proportional residual error (SD, relative)", _given(model.proportional_error), "", MISSING),
             ("additive residual error (SD)", _given(model.additive_error), kinds["conc"], MISSING),
             ("LLOQ", _given(model.lloq) if model.lloq is not None else "none", kinds["conc"], MISSING)]
    frame = pd.DataFrame(rows, columns=["quantity", "value", "unit", "between-subject SD (log scale)"])
    return _table(frame, "quantity", "Simulation model: typical values, units and between-subject variability "
                                     "(log-normal).", numeric=["value", "between-subject SD (log scale)"])


def schedule_table(schedules, time_unit=""):
    """One row per candidate schedule: number of samples, last sample and the sampling times."""
    unit = f" ({time_unit})" if time_unit else ""
    frame = pd.DataFrame({"schedule": list(schedules),
                          "samples": [str(len(t)) for t in schedules.values()],
                          f"last sample{unit}": [_given(max(t)) for t in schedules.values()],
                          f"times{unit}": [", ".join(f"{x:g}" for x in t) for t in schedules.values()]})
    return _table(frame, "schedule", "Candidate sampling schedules.", numeric=["samples", f"last sample{unit}"])


def error_table(summary, schedules):
    """Relative error (%) of each parameter on each schedule: median (5th to 95th percentile).

    Parameters
    ----------
    summary : DataFrame
        ``ScheduleEvaluation.summary`` (schedule, PPTESTCD, median_pct,
        p05_pct, p95_pct).
    schedules : sequence of str
        Schedule names in the order shown.
    """
    cell = {(r.schedule, r.PPTESTCD): f"{_pct(r.median_pct)} ({_pct(r.p05_pct)} to {_pct(r.p95_pct)})"
            for r in summary.itertuples(index=False)}
    codes = list(dict.fromkeys(summary["PPTESTCD"]))
    frame = pd.DataFrame({"parameter": codes,
                          **{s: [cell.get((s, c), MISSING) for c in codes] for s in schedules}})
    return _table(frame, "parameter",
                  "Relative error against the model's exact value, %: median (5th to 95th "
                  "percentile). The median is the bias; the range holds the middle 90 % of subjects.")


def estimable_table(summary, table, schedules):
    """Share of profiles (%) with each parameter estimable, and with AUCPEO above 20 %, per schedule."""
    share = summary.pivot(index="PPTESTCD", columns="schedule", values="estimable_pct")
    codes = list(dict.fromkeys(summary["PPTESTCD"]))
    rows = {f"{c} estimable": share.loc[c] for c in codes}
    rows["AUCPEO > 20 %"] = table.set_index("schedule")["AUCPEO > 20 % (%)"]
    frame = pd.DataFrame({"share of profiles (%)": list(rows),
                          **{s: [_pct(v[s]) for v in rows.values()] for s in schedules}})
    return _table(frame, "share of profiles (%)", "Share of the virtual subjects with each parameter estimable, "
                                                   "and with more than 20 % of AUCIFO extrapolated (%).")


def flag_share_table(flags, schedules):
    """Share of profiles (%) with each QC flag that is raised on some schedule; a sentence when none is."""
    raised = flags.loc[list(schedules), flags.gt(0).any()]
    if not raised.shape[1]:
        return Caption("No QC flag was raised on any schedule.")
    frame = pd.DataFrame({"QC flag": list(raised.columns),
                          **{s: [_pct(v) for v in raised.loc[s]] for s in schedules}})
    return _table(frame, "QC flag", "Share of the virtual subjects with each QC flag raised (%); flags raised on "
                               "no schedule are left out.")
