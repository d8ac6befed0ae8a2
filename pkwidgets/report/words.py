"""The settings of a run in words, its counts and the flags it raised: the record's first page.

:func:`rules_in_words` turns the settings of a result (route, area rule,
BLQ rules, terminal-phase rule, reviewer-check thresholds with their
sources) into sentences a reviewer reads without knowing the option names;
:func:`run_counts` and :func:`flag_counts` give the numbers of the first page.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import pandas as pd

__all__ = ["rules_in_words", "run_counts", "flag_counts", "QC_SOURCES"]

_ROUTES = {
    "extravascular": "extravascular (oral or other absorption route)",
    "iv-bolus": "intravenous bolus (concentration at dose time C0 back-extrapolated)",
    "iv-infusion": "intravenous infusion",
}
_AREAS = {
    "linear": "linear trapezoidal rule throughout",
    "lin-up/log-down": "linear trapezoidal rule while concentrations rise or stay level, logarithmic while they fall",
    "lin-log": "linear trapezoidal rule up to CMAX, logarithmic after it where concentrations fall",
}
_BLQ = {"zero": "counted as 0", "missing": "left out", "half-lloq": "set to half the LLOQ", "lloq": "set to the LLOQ"}
_LAMBDA_Z = {
    "adjusted-r2": "the window of the last 3 or more points after CMAX with the highest adjusted R² "
                   "(ties within 1e-4 go to the window with more points)",
    "two-tmax": "all points at or after twice TMAX (at least 3)",
    "last-n": "the last n points after CMAX",
    "aicc": "the window with the lowest small-sample Akaike criterion (at least 4 points)",
    "tail-extension": "the last 3 points after CMAX, extended backwards while earlier points stay on the "
                      "line within its own prediction noise (a run of 5 points on one side of the line stops it, "
                      "tested against the window before the run once that window has 6 points; a shorter run at "
                      "the start only when clearly off the line; the edge point of the bend stays out unless far "
                      "below the line; not before 2 x TMAX for extravascular doses); pkwidgets' own rule, "
                      "measured in bench/terminal_accuracy.py",
}
#: Reviewer-check threshold -> (sentence, source).
QC_SOURCES = {
    "max_extrapolated_pct": ("AUC extrapolated beyond the last sample above {} %",
                             "EMA bioequivalence guideline CPMP/EWP/QWP/1401/98 Rev.1 (2010)"),
    "min_r2adj": ("adjusted R² of the λz fit below {}", "common practice, no source"),
    "min_points": ("λz fit on fewer than {} points", "common practice, no source"),
    "min_span": ("λz fit interval shorter than {} half-lives", "common practice, no source"),
    "max_predose_pct": ("pre-dose concentration above {} % of CMAX (single dose)",
                        "EMA bioequivalence guideline (2010)"),
    "max_back_extrapolated_pct": ("IV bolus: back-extrapolated share of AUC (AUCPBEO) above {} %",
                                  "common practice, no source"),
    "max_rule_disagreement": ("the half-lives of two selection rules differ by more than {:.0%}",
                              "common practice, no source; the share is our choice"),
    "max_half_life_ratio": ("the 95 % half-life interval is wider than {}-fold or unbounded", "our choice"),
}


def _blq_text(rules) -> str:
    rules = dict(rules or {})
    parts = [f"{where} the first measurable concentration: {_BLQ.get(rules.get(key), rules.get(key))}"
             for where, key in (("before", "before"),)]
    parts.append(f"between measurable concentrations: {_BLQ.get(rules.get('between'), rules.get('between'))}")
    parts.append(f"after the last measurable concentration: {_BLQ.get(rules.get('after'), rules.get('after'))}")
    return "BLQ samples " + "; ".join(parts) + "."


def rules_in_words(settings) -> list:
    """The rules of a run as ``(topic, sentence)`` pairs.

    Parameters
    ----------
    settings : dict
        ``NCAResult.settings`` (or the ``settings`` of ``run_info.json``).

    Examples
    --------
    >>> dict(rules_in_words({"route": "iv-bolus", "auc_method": "linear"}))["Area rule"]
    'linear trapezoidal rule throughout (AUC and AUMC).'
    """
    if settings.get("analysis") in _OWN_RULES:  # an analysis with rules of its own (sparse sampling, urine)
        return _OWN_RULES[settings["analysis"]](settings)
    options = settings.get("options") or {}
    route = settings.get("route") or options.get("route")
    out = [("Route", _ROUTES.get(route, str(route)) + ".")]
    if settings.get("duration") is not None:
        out.append(("Infusion duration", f"{settings['duration']} (time unit of the data)."))
    if settings.get("tau") is not None:
        window = options.get("predose_window", 0.1)
        out.append(("Dosing interval", f"steady state, tau = {settings['tau']} (time unit of the data); a pre-dose "
                                       f"sample stands at dose time when taken at most {window:g} x tau before "
                                       "the dose (common practice, no source)."))
    method = settings.get("auc_method") or options.get("auc_method")
    out.append(("Area rule", f"{_AREAS.get(method, str(method))} (AUC and AUMC)."))
    out.append(("BLQ rules", _blq_text(settings.get("blq_rules") or options.get("blq_rules"))))
    rule = options.get("lambda_z_rule", "tail-extension")
    out.append(("Terminal phase (λz)", f"automatic unless chosen by hand: {_LAMBDA_Z.get(rule, rule)}; "
                                       "log-linear least squares on ln C."))
    qc = settings.get("qc") or options.get("qc") or {}
    checks = [f"{text.format(qc[name])} ({source})" for name, (text, source) in QC_SOURCES.items() if name in qc]
    if checks:
        out.append(("Reviewer checks", "a profile is flagged when: " + "; ".join(checks) + "."))
    return out


def _sparse_rules(settings) -> list:
    """Rules of a sparse-sampling (toxicokinetic) run (:func:`pkwidgets.nca_sparse`)."""
    start = settings.get("dose_time_conc")
    level = settings.get("ci_level", 0.95)
    return [
        ("Design", f"sparse sampling: one mean profile per group at the nominal times; animal identifiers: "
                   f"{settings.get('animal_rule', 'as given')}."),
        ("Area rule", f"{settings.get('method', '')}."),
        ("BLQ samples", f"{_BLQ.get(settings.get('blq'), settings.get('blq'))} in the mean at their time."),
        ("Dose time", "the profile starts at the first sampled time." if start is None else
                      f"a concentration of {start:g} at dose time when it was not sampled."),
        ("Interval", f"{100 * level:g} % confidence interval of AUCLST (standard error of the mean-profile area)."),
    ]


def _urine_rules(settings) -> list:
    """Rules of a urine-collection run (:func:`pkwidgets.nca_urine`)."""
    terminal = settings.get("terminal", "auto")
    window = (f"chosen by hand: interval midpoints from {terminal[0]:g} to {terminal[1]:g}"
              if terminal != "auto" and terminal is not None else
              "automatic: the window of the last 3 or more rates after the highest rate with the highest adjusted "
              "R² (ties within 1e-4 go to the window with more points)")
    route = settings.get("route")
    return [
        ("Route", _ROUTES.get(route, str(route)) + "."),
        ("Amounts", "amount per collection = concentration x volume; excretion rate = amount / interval width, "
                    "at the interval midpoint."),
        ("Collection rules", f"{settings.get('rules', '')}."),
        ("Terminal phase (λz)", f"from ln(excretion rate) against midpoints, {window}; log-linear least squares."),
        ("Renal clearance", f"amount excreted / plasma {settings.get('plasma_auc')} over the same interval "
                            "(when plasma data are given)."),
    ]


#: ``settings["analysis"]`` of a result -> the rules of that analysis in words.
_OWN_RULES = {"sparse": _sparse_rules, "urine": _urine_rules}


def run_counts(result, left_out=None) -> dict:
    """Profiles, rows read, rows used and not used, profiles left out of the summaries."""
    samples = result.samples
    used = int(samples["nca_used"].sum())
    return {"profiles": int(len(result.parameters)), "rows in file": int(len(samples)), "rows used": used,
            "rows not used": int(len(samples) - used),
            "profiles left out of summaries": 0 if left_out is None else int(len(left_out))}


def flag_counts(result) -> pd.DataFrame:
    """Flags raised: flag, severity, number of profiles, one row per flag (most frequent first)."""
    flags = result.flags
    if flags is None or not len(flags):
        return pd.DataFrame(columns=["flag", "severity", "profiles"])
    out = (flags.groupby(["flag", "severity"], sort=False)["profile_id"].nunique().rename("profiles")
           .reset_index().sort_values(["profiles", "flag"], ascending=[False, True], kind="stable"))
    return out.reset_index(drop=True)
