"""Long, CDISC-style output: one row per profile and parameter.

Partial areas carry the CDISC code AUCINT with their interval as ISO 8601
durations after the dose (PPSTINT/PPENINT, CDISC SDTM PP), and the same
interval in the study's time unit.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .parameters import PARAMETERS
from .units import ureg

__all__ = ["long_table", "iso_durations", "LONG_COLUMNS"]

#: Columns after the profile keys and profile_id.
LONG_COLUMNS = ["PPTESTCD", "PPTEST", "value", "unit", "PPSTINT", "PPENINT", "interval_start", "interval_end",
                "interval", "auc_method", "blq_rules"]


def iso_durations(times, time_unit):
    """Times after the dose as ISO 8601 durations in hours (``PT1.5H``); "" where NaN or no unit.

    Examples
    --------
    >>> iso_durations(np.array([90.0, np.nan]), "min")
    ['PT1.5H', '']
    """
    if time_unit is None:
        return [""] * len(times)
    hours = np.asarray(times, dtype=np.float64) * float((1.0 * ureg(time_unit)).to("h").magnitude)
    return ["" if np.isnan(h) else f"PT{h:.10g}H" for h in hours]


def long_table(parameters: pd.DataFrame, by: list, units: dict, bounds: dict, settings: dict) -> pd.DataFrame:
    """Melt a parameter table into one row per profile and parameter.

    Parameters
    ----------
    parameters : DataFrame
        ``by`` columns, ``profile_id``, then codes; row ``i`` belongs with
        entry ``i`` of every ``bounds`` array.
    by : list of str
    units : dict
        Code -> unit text.
    bounds : dict
        Partial-area name -> (start array, end array), aligned with the rows
        of ``parameters``.
    settings : dict
        Run settings (``auc_method``, ``blq_rules_text``, ``units``).
    """
    ids = by + ["profile_id"]
    codes = [c for c in parameters.columns if c not in ids]
    long = parameters.melt(id_vars=ids, value_vars=codes, var_name="PPTESTCD", value_name="value",
                           ignore_index=False)
    row = long.index.to_numpy()
    long = long.reset_index(drop=True)
    long["unit"] = long["PPTESTCD"].map(units).fillna("")
    start = np.full(len(long), np.nan)
    end = np.full(len(long), np.nan)
    for name, (s, e) in bounds.items():
        m = (long["PPTESTCD"] == name).to_numpy()
        start[m], end[m] = np.asarray(s)[row[m]], np.asarray(e)[row[m]]
    is_part = long["PPTESTCD"].str.startswith("AUCINT").to_numpy()
    long["interval"] = np.where(is_part, long["PPTESTCD"], "")
    long.loc[is_part, "PPTESTCD"] = "AUCINT"
    long["PPTEST"] = [PARAMETERS[c].name if c in PARAMETERS else "AUC from T1 to T2" for c in long["PPTESTCD"]]
    time_unit = (settings.get("units") or {}).get("time")
    long["PPSTINT"] = iso_durations(start, time_unit)
    long["PPENINT"] = iso_durations(end, time_unit)
    long["interval_start"], long["interval_end"] = start, end
    long["auc_method"] = settings["auc_method"]
    long["blq_rules"] = settings["blq_rules_text"]
    return long[ids + LONG_COLUMNS]
