"""Sections of the study record built from a result: terminal phase, concentration listing, parameters.

Each function returns a :class:`~pkwidgets.report.tables.ReportTable` (HTML
in the record, text elsewhere); profiles are looked up by key, listed in
natural order of their keys.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

from .tables import MISSING, format_value, report_table, unit_header

__all__ = ["terminal_phase_table", "concentration_listing", "parameter_table", "left_out_table", "unused_table",
           "mean_profile_data", "mean_n_table"]

_RULE_NAMES = {"adjusted-r2": "highest adjusted R²", "two-tmax": "points from 2×TMAX", "last-n": "last n points",
               "aicc": "lowest AICc", "tail-extension": "tail extension"}


def _key_texts(items) -> set:
    return {tuple(str(x) for x in (k if isinstance(k, (list, tuple)) else [k])) for k in items or []}


def _record(result):
    """The selection record the run read, or None."""
    from ..record import SelectionRecord

    sel = result.settings.get("selections")
    path = sel.get("path") if isinstance(sel, dict) else None
    if not isinstance(path, (str, os.PathLike)) or not os.path.isfile(path):
        return None
    return SelectionRecord.load(path)


def _hand_choice(state, key, applied, stale) -> dict:
    """Columns of a profile chosen by hand: what, why, who, when, and whether the data still match."""
    text = tuple(str(v) for v in key)
    if text in stale:
        match = "no: data changed since the choice (automatic search used)"
    elif text in applied:
        match = "yes"
    else:
        match = MISSING
    window = state.window
    what = "by hand: window" if window is not None else "by hand: points excluded"
    return {"choice": what, "reason": state.get("reason") or MISSING, "author": state.get("author") or MISSING,
            "recorded (UTC)": state.get("timestamp") or MISSING, "data match": match}


def terminal_phase_table(result, sig=3):
    """One row per profile: how its terminal phase was chosen, the window, the points and, for hand choices, why.

    Parameters
    ----------
    result : NCAResult
        Its ``settings["selections"]`` names the selection record read
        (:class:`pkwidgets.SelectionRecord`), whose latest entry per profile
        gives the reason, author and UTC time.

    Returns
    -------
    ReportTable
    """
    by = list(result.by)
    sel = result.settings.get("selections") or {}
    applied, stale = _key_texts(sel.get("applied")), _key_texts(sel.get("stale"))
    record = _record(result)
    rule = (result.settings.get("options") or {}).get("lambda_z_rule", "adjusted-r2")
    rows = []
    for _, prow in result.parameters.iterrows():
        key = tuple(prow[b] for b in by)
        prof = result.profile(profile_id=int(prow["profile_id"]))
        fit = prof.fit
        state = record.state(key) if record is not None else None
        row = {b: prow[b] for b in by}
        row.update({"choice": "automatic", "window": _window(fit.get("LAMZLL"), fit.get("LAMZUL"), sig),
                    "points": fit.get("LAMZNPT"),
                    "times in fit": ", ".join(format_value(t, sig) for t in fit["times_used"]) or MISSING,
                    "excluded times": ", ".join(format_value(t, sig) for t in fit["times_excluded"]) or "none",
                    "reason": MISSING, "author": MISSING, "recorded (UTC)": MISSING, "data match": MISSING})
        if state is not None and not state.is_automatic:
            row.update(_hand_choice(state, [str(v) for v in key], applied, stale))
        if not np.isfinite(fit.get("LAMZ", np.nan)):
            row["window"] = "λz not estimable"
        rows.append(row)
    table = pd.DataFrame(rows)
    time_unit = (getattr(result, "units", None) or {}).get("LAMZLL", "")  # the window's times are in the time unit
    units = {c: time_unit for c in ("window", "times in fit", "excluded times")} if time_unit else None
    table = report_table(table, keys=by, sig=sig, counts={"points"}, units=units,
                         caption=f"Terminal phase of every profile: the automatic rule ({_RULE_NAMES.get(rule, rule)}) "
                                 "or a hand choice (the latest entry of the selection record), the fit window, the "
                                 "points used and excluded.")
    table.numeric |= {unit_header("window", units)}
    return table


def _window(lo, hi, sig) -> str:
    if lo is None or hi is None or not np.isfinite([lo, hi]).all():
        return MISSING
    return f"{format_value(lo, sig)}–{format_value(hi, sig)}"


def concentration_listing(result, *, nominal_time=None, sig=3):
    """Every input row by profile: nominal and actual time, concentration as given (BLQ marked), used or why not.

    Parameters
    ----------
    result : NCAResult
    nominal_time : str, optional
        Nominal-time column, shown beside the actual time when given.
    """
    cols = result.settings["columns"]
    by = list(result.by)
    s = result.samples
    out = s[by].copy()
    if nominal_time and nominal_time in s.columns and nominal_time != cols["time"]:
        out["nominal time"] = s[nominal_time]
    out["time"] = s[cols["time"]]
    out["concentration"] = [_conc_text(v, sig) for v in s[cols["conc"]]]
    if cols.get("blq") and cols["blq"] in s.columns:
        blq = s[cols["blq"]].astype(str).str.strip().str.lower().isin({"1", "true", "t", "yes", "y", "blq"})
        out.loc[blq.to_numpy(), "concentration"] = "BLQ"
    if cols.get("lloq") and cols["lloq"] in s.columns:
        out["LLOQ"] = s[cols["lloq"]]
    out["in the analysis"] = np.where(s["nca_used"].to_numpy(), "used", s["nca_reason"].astype(str).to_numpy())
    out["λz fit"] = np.where(s["nca_lambda_z"].to_numpy(), "yes", "")
    out["_t"] = pd.to_numeric(s["nca_time"], errors="coerce").to_numpy()
    out = out.sort_values("_t", kind="stable").drop(columns="_t")
    units = result.settings.get("units") or {}
    units = {"time": units.get("time"), "nominal time": units.get("time"), "concentration": units.get("conc"),
             "LLOQ": units.get("conc")}
    table = report_table(out, keys=by, sig=sig, units=units,
                         caption="Concentrations as given, by profile, in time order (BLQ: below the lower limit of "
                                 "quantification; λz fit: the sample is one of the terminal-phase points).")
    table.numeric |= {unit_header(c, units) for c in units}
    return table


def _conc_text(value, sig) -> str:
    """A concentration as given: numbers to ``sig`` figures, BLQ text kept (marked), blank as missing."""
    num = pd.to_numeric(pd.Series([value]), errors="coerce").iloc[0]
    if pd.notna(num):
        return format_value(float(num), sig)
    if value is None or (isinstance(value, float) and np.isnan(value)) or not str(value).strip():
        return "missing"
    return f"BLQ ({str(value).strip()})" if str(value).strip().upper() != "BLQ" else "BLQ"


def parameter_table(params, codes, *, keys, units, sig=3):
    """Parameters per profile: key columns, then ``codes`` with their units, values to ``sig`` figures."""
    shown = [k for k in dict.fromkeys(keys) if k in params.columns] + [c for c in codes if c in params.columns]
    return report_table(params[shown], units=units, keys=[k for k in keys if k in params.columns], sig=sig)


def left_out_table(left_out):
    """The profiles left out of the summaries with their reasons (a line of text when there are none)."""
    if left_out is None or not len(left_out):
        return report_table(pd.DataFrame({"profiles left out of the summaries": ["none"]}))
    keys = [c for c in left_out.columns if c not in ("profile_id", "reason")]
    return report_table(left_out.drop(columns=["profile_id"]), keys=keys,
                        caption="Profiles left out of the group summaries and mean profiles (still listed and "
                                "analysed individually).")


def unused_table(result, sig=3):
    """Rows not used in the analysis: profile key, time, concentration as given and the reason (other columns left out)."""
    cols, by = result.settings["columns"], list(result.by)
    u = result.unused
    if not len(u):
        return report_table(pd.DataFrame({"rows not used": ["none: every row was used"]}))
    out = u[by].copy()
    if "nca_line" in u.columns:  # a file was read (a table given in memory has no lines)
        out["line"] = u["nca_line"]
    out["time"] = u[cols["time"]]
    out["concentration"] = [_conc_text(v, sig) for v in u[cols["conc"]]]
    out["reason"] = u["nca_reason"].astype(str)
    table = report_table(out, keys=by, sig=sig, counts={"line"},
                         caption="Rows not used, with the reason" + (" (line: line of the data file)." if "nca_line" in u.columns
                                                                 else "."))
    table.numeric |= {"time", "concentration"}
    return table


def mean_profile_data(result, *, group_by, nominal_time=None, left_out=None, tolerance=0.1, time_unit=""):
    """Rows for mean profiles and the caption that says how times were lined up.

    With a nominal-time column the means are by nominal time, and the caption
    warns when actual times differ from nominal by more than ``tolerance``
    (relative); without one the actual times are gathered into bins
    (:func:`pkwidgets.summary.bin_times`) and the caption says so.  Profiles
    left out of the summaries are left out here too.

    Returns
    -------
    rows : DataFrame
        Input rows with a ``_mean_time`` column, for :func:`pkwidgets.summary.mean_profiles`.
    caption : str
    """
    from ..summary import bin_times

    rows = result.samples[result.samples["nca_profile_id"] >= 0].copy()
    if left_out is not None and len(left_out):
        rows = rows[~rows["nca_profile_id"].isin(left_out["profile_id"])]
    actual = pd.to_numeric(rows["nca_time"], errors="coerce").to_numpy(dtype=np.float64)
    nominal = (pd.to_numeric(rows[nominal_time], errors="coerce").to_numpy(dtype=np.float64)
               if nominal_time and nominal_time in rows.columns else np.full(len(rows), np.nan))
    if np.isfinite(nominal).any():
        rows["_mean_time"] = nominal
        off = np.abs(actual - nominal) > tolerance * np.maximum(np.abs(nominal), 1e-12)
        off &= np.isfinite(actual) & np.isfinite(nominal) & (np.abs(actual - nominal) > 1e-9)
        caption = f"Means by nominal time ({nominal_time}); BLQ as 0; n: profiles with a value at each time."
        if off.any():
            caption += (f" Warning: {int(off.sum())} sample(s) taken more than {tolerance:.0%} away from their "
                        f"nominal time (largest difference {format_value(np.nanmax(np.abs(actual - nominal)[off]))}"
                        f"{' ' + time_unit if time_unit else ''}).")
        missing = int((~np.isfinite(nominal) & np.isfinite(actual)).sum())
        if missing:
            caption += f" {missing} sample(s) without a nominal time are not in the means."
        return rows, caption
    rows["_mean_time"] = bin_times(actual, tolerance)
    caption = ((f"The nominal-time column {nominal_time} holds no time: " if nominal_time else "No nominal-time column: ")
               + "actual times after the dose gathered into bins of times within "
               f"{tolerance:.0%} of each other, each shown at its median time; BLQ as 0; n: samples in each bin.")
    spread = pd.Series(actual).groupby(rows["_mean_time"].to_numpy()).agg(lambda x: x.max() - x.min())
    if (spread > 0).any():
        caption += (f" Warning: actual times differ between profiles (up to {format_value(spread.max())}"
                    f"{' ' + time_unit if time_unit else ''} within a bin).")
    return rows, caption


def mean_n_table(means, *, group_by, group_units=None, time_unit="", sig=3):
    """Mean (SD) and n at each time, by group: one row per time, one column pair per group."""
    from .labels import group_labels

    labels = group_labels(means, group_by, group_units)
    rows = {}
    for label, m in means.groupby(labels.to_numpy(), sort=False):
        for _, r in m.iterrows():
            row = rows.setdefault(r["time"], {"time": r["time"]})
            row[f"{label}: mean (SD)"] = (f"{format_value(r['mean'], sig)} ({format_value(r['sd'], sig)})"
                                          if np.isfinite(r["sd"]) else format_value(r["mean"], sig))
            row[f"{label}: n"] = str(int(r["n"]))
    frame = pd.DataFrame([rows[t] for t in sorted(rows)]).fillna(MISSING)
    table = report_table(frame, keys=["time"], units={"time": time_unit}, sig=sig)
    table.numeric |= set(table.frame.columns)
    return table
