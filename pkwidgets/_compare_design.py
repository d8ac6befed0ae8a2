"""Input checks and design choice for :func:`pkwidgets.compare_treatments`.

Everything here reads the parameter table and either returns what the model
needs (treatment roles, sequences, the design key and why it was chosen) or
raises an error that names the column, subject or option and says how to fix
it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .errors import InputDataError

__all__ = ["DESIGNS", "DEFAULT_LIMITS", "require_columns", "check_options", "limits_per_code", "treatment_roles",
           "check_keys", "derive_sequences", "subject_sequence", "choose_design"]

#: Designs and the model each one uses (``design=`` takes a key or ``"auto"``).
DESIGNS = {
    "2x2": "2x2x2 crossover: ANOVA of ln values with sequence, subject(sequence), period and treatment as fixed "
           "effects (statsmodels OLS)",
    "mixed": "crossover with replicates or more than two periods: linear mixed model of ln values, fixed sequence, "
             "period and treatment, random subject intercept, REML (statsmodels MixedLM)",
    "paired": "paired, no period information: t interval of the within-subject ln differences",
    "parallel": "parallel groups: Welch t interval of the difference of mean ln values",
}
#: Acceptance limits of the ratio, EMA 2010 bioequivalence guideline and FDA 2001 statistical guidance.
DEFAULT_LIMITS = (0.80, 1.25)

def require_columns(params, names):
    missing = [n for n in names if n is not None and n not in params.columns]
    if missing:
        raise InputDataError(f"column(s) {missing} are not in the parameter table; its columns are "
                             f"{list(params.columns)}. Name the columns that hold them.", column=missing[0])


def check_options(level, design, limits, parameters):
    if not 0.0 < float(level) < 1.0:
        raise ValueError(f"The 'level' option must be a confidence level between 0 and 1 (0.90 for bioequivalence); "
                         f"got {level!r}.")
    if design != "auto" and design not in DESIGNS:
        raise ValueError(f"The 'design' option must be one of {['auto', *DESIGNS]}; got {design!r}.")
    if not parameters:
        raise ValueError("The 'parameters' option must name at least one column, e.g. ('CMAX', 'AUCLST').")
    for code, (lo, hi) in limits.items():
        if not 0.0 < lo < hi:
            raise ValueError(f"acceptance limits for {code} must be ratios 0 < low < high, e.g. (0.80, 1.25); "
                             f"got ({lo!r}, {hi!r}).")


def limits_per_code(limits, parameters) -> dict:
    """(low, high) for every parameter from a pair or a dict code -> pair (others get the default)."""
    if isinstance(limits, dict):
        return {c: tuple(map(float, limits.get(c, DEFAULT_LIMITS))) for c in parameters}
    lo, hi = limits
    return {c: (float(lo), float(hi)) for c in parameters}


def treatment_roles(params, treatment, test, reference) -> pd.Series:
    """'test', 'reference' or '' per row; labels compared as text (1 and '1' match)."""
    if str(test) == str(reference):
        raise ValueError(f"test and reference are the same label ({test!r}); name two treatments of {treatment!r}.")
    labels = params[treatment].astype(str)
    present = sorted(labels.dropna().unique())
    for name, value in (("test", test), ("reference", reference)):
        if str(value) not in present:
            raise ValueError(f"{name}={value!r} is not a value of column {treatment!r}; its values are {present}. "
                             f"Set {name} to one of them.")
    return pd.Series(np.select([labels == str(test), labels == str(reference)], ["test", "reference"], ""),
                     index=params.index)


def check_keys(params, subject, treatment, period):
    for col in (subject, treatment, period):
        if col is not None and params[col].isna().any():
            rows = list(params.index[params[col].isna()][:5])
            raise InputDataError(f"column {col!r} has no value in row(s) {rows}: every profile needs its {col}.",
                                 column=col, line=rows[0])
    keys = [subject, period] if period is not None else [subject, treatment]
    dup = params.duplicated(keys, keep=False)
    if dup.any():
        first = [v.item() if isinstance(v, np.generic) else v for v in params.loc[dup, keys].iloc[0]]
        hint = "" if period is not None else (" Give period= (the column of the study period) for a replicate "
                                              "design.")
        raise InputDataError(f"{len(params[dup])} rows share {dict(zip(keys, first))}: one row per "
                             f"{' and '.join(keys)} is expected.{hint}", column=keys[-1], profile=first[0])


# ---------------------------------------------------------------------------- sequences and design

def _period_order(value):
    num = pd.to_numeric(pd.Series([value]), errors="coerce").iloc[0]
    return (0, float(num), "") if pd.notna(num) else (1, 0.0, str(value))


def derive_sequences(params, subject, treatment, period) -> pd.Series:
    """Each subject's treatments in period order ("TR", or "A-B" for longer labels); a subject with missing
    periods gets the one full sequence that agrees with the periods it has, else its own with '?' in the gaps."""
    periods = sorted(params[period].unique(), key=_period_order)
    grid = params.pivot(index=subject, columns=period, values=treatment).reindex(columns=periods).astype(object)
    rows = {s: tuple(None if pd.isna(v) else str(v) for v in r) for s, r in zip(grid.index, grid.to_numpy())}
    full = sorted({r for r in rows.values() if None not in r})
    sep = "" if params[treatment].astype(str).str.len().max() == 1 else "-"
    out = {}
    for s, r in rows.items():
        match = [f for f in full if all(a == b for a, b in zip(f, r) if b is not None)] if None in r else [r]
        out[s] = sep.join(match[0]) if len(match) == 1 else sep.join("?" if v is None else v for v in r)
    return pd.Series(out)


def subject_sequence(params, subject, sequence):
    per = params.groupby(subject)[sequence].nunique()
    if (per > 1).any():
        s = per.index[per > 1][0]
        raise InputDataError(f"subject {s!r} has more than one value of {sequence!r} "
                             f"({sorted(params.loc[params[subject] == s, sequence].astype(str).unique())}); a subject "
                             "belongs to one sequence.", column=sequence, profile=s)
    return params.groupby(subject)[sequence].first().astype(str)


def choose_design(rows, design, has_period) -> tuple[str, str]:
    """Design key and why: from who received which treatment, and in how many periods."""
    counts = rows.groupby(["subject", "role"]).size().unstack(fill_value=0).reindex(
        columns=["test", "reference"], fill_value=0)
    both = (counts > 0).all(axis=1)
    replicated = bool((counts > 1).any(axis=None))
    n_periods = rows["period"].nunique() if has_period else 0
    n_seq = rows.loc[rows["subject"].isin(both.index[both]), "sequence"].nunique() if has_period else 0
    if not both.any():
        auto, why = "parallel", "no subject received both treatments"
    elif not has_period:
        auto, why = "paired", "subjects received both treatments; no period column given"
    elif n_periods == 2 and not replicated and n_seq <= 2:
        auto, why = "2x2", "two periods, two sequences, one profile per subject and treatment"
    else:
        auto, why = "mixed", f"{n_periods} periods, {n_seq} sequences{', replicated treatments' if replicated else ''}"
    if design == "auto":
        return auto, f"chosen from the data: {why}"
    problems = {"parallel": both.any() and f"{int(both.sum())} subjects received both treatments (not independent "
                                           "groups)",
                "2x2": (not has_period and "no period column given") or (auto != "2x2" and why),
                "paired": replicated and "a subject has more than one profile of a treatment"}
    if problems.get(design):
        raise ValueError(f"design={design!r} does not fit the data: {problems[design]}. Use design='auto' or "
                         f"{auto!r}.")
    return design, f"requested (the data suggest {auto!r}: {why})"
