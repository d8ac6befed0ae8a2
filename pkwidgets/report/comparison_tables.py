"""Record tables of treatment comparisons and dose proportionality (formatting only; the numbers are computed
by :func:`pkwidgets.compare_treatments` and :func:`pkwidgets.dose_proportionality`).

Ratios and their intervals are shown in percent with two decimals, the form
in which acceptance limits are written (80.00-125.00 %); everything else to
``sig`` significant figures.  The CSV exports keep full precision.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .tables import Caption, format_value, report_table

__all__ = ["ratio_table", "tmax_table", "proportionality_table", "listing_table"]


def _percent(x):
    return [f"{100.0 * v:.2f}" if np.isfinite(v) else "–" for v in pd.to_numeric(x, errors="coerce")]


def _yes_no(x):
    return ["yes" if v is True or v == 1 else "no" if v is False or v == 0 else "–" for v in x]


def ratio_table(table, *, units=None, level=0.90, sig=3):
    """Test/reference geometric mean ratios: n, ratio and interval (%), intra-subject CV, geometric means.

    Parameters
    ----------
    table : DataFrame
        ``CompareResult.table`` (parameter, n, ratio, lower, upper,
        cv_intra, gmean_test, gmean_reference, limit_low, limit_high,
        within_limits, conclusion).
    units : dict, optional
        Parameter code -> unit of its geometric means.
    level : float
        Confidence level of the interval (for the column names).

    Returns
    -------
    list
        The table and one caption per parameter with its conclusion in words.
    """
    units = units or {}
    pct = f"{level:.0%}".replace("%", " %")
    out = pd.DataFrame({
        "parameter": table["parameter"].to_numpy(),
        "n": table["n"].to_numpy(),
        "ratio (%)": _percent(table["ratio"]),
        f"{pct} CI lower (%)": _percent(table["lower"]),
        f"{pct} CI upper (%)": _percent(table["upper"]),
        "limits (%)": [f"{a}–{b}" for a, b in zip(_percent(table["limit_low"]), _percent(table["limit_high"]))],
        "within limits": _yes_no(table["within_limits"]),
        "intra-subject CV (%)": [format_value(v, sig) for v in table["cv_intra"]],
        "geo. mean test": [format_value(v, sig) for v in table["gmean_test"]],
        "geo. mean reference": [format_value(v, sig) for v in table["gmean_reference"]],
        "unit": [units.get(p, "") for p in table["parameter"]],
    })
    shown = report_table(out, keys=["parameter"], sort=False, counts={"n"},
                         caption="Test/reference ratio of geometric means with its confidence interval (percent).")
    return [shown] + [Caption(f"{p}: {c}") for p, c in zip(table["parameter"], table["conclusion"])]


def tmax_table(tmax, *, units=None, sig=3):
    """TMAX comparison: medians, Hodges-Lehmann difference and its interval, method."""
    units = units or {}
    out = tmax.rename(columns={"median_test": "median test", "median_reference": "median reference",
                               "difference": "median difference", "lower": "CI lower", "upper": "CI upper"})
    out.insert(1, "unit", [units.get(p, "") for p in tmax["parameter"]])
    return report_table(out, keys=["parameter"], sort=False, sig=sig, counts={"n"},
                        caption="Time parameters: median difference test - reference (Hodges-Lehmann) with its "
                                "interval.")


def proportionality_table(table, *, sig=3):
    """Power-model slope and its interval against the criterion range, per parameter."""
    shown = ["parameter", "n", "n_doses", "slope", "lower", "upper", "criterion_low", "criterion_high",
             "proportional", "dose_ratio"]
    out = table[[c for c in shown if c in table.columns]].copy()
    out["proportional"] = _yes_no(out["proportional"])
    out = out.rename(columns={"proportional": "criterion met", "lower": "slope CI lower", "upper": "slope CI upper",
                              "criterion_low": "criterion low", "criterion_high": "criterion high",
                              "dose_ratio": "dose ratio", "n_doses": "doses"})
    shown = report_table(out, keys=["parameter"], sort=False, sig=sig, counts={"n", "doses"},
                         caption="Power model ln y = a + b ln dose: slope b with its confidence interval, "
                                 "against the range that the acceptance limits allow (Smith et al. 2000).")
    return [shown] + [Caption(f"{p}: {c}") for p, c in zip(table["parameter"], table["conclusion"])]


def listing_table(frame, empty, *, keys=(), caption="", sig=3, index=None, units=None):
    """A listing (values not used, incomplete subjects, an ANOVA table) or the words ``empty`` when it has no row.

    ``index``: name of a first column made from the frame's index (e.g. ``"term"`` for an ANOVA table);
    None leaves the index out (row labels carry no information a column does not).  ``units``: column -> unit,
    shown in the headers.
    """
    if not len(frame):
        return Caption(empty)
    frame = frame.reset_index(names=index) if index else frame.reset_index(drop=True)
    return report_table(frame, keys=[k for k in keys if k in frame.columns], sort=False, sig=sig, caption=caption,
                        units=units)
