r"""Test versus reference comparisons of NCA parameters: crossover, paired and parallel designs.

:func:`compare_treatments` takes the per-profile parameter table of
:func:`pkwidgets.nca` (or any table with the same columns), chooses the model
from the design of the data, and returns a :class:`Comparison`: one row per
parameter with the geometric mean ratio test/reference, its confidence
interval, the within-subject CV and the conclusion against the stated
acceptance limits, plus what a reviewer checks (model, ANOVA tables,
incomplete subjects, values not used, per-subject ratios, the TMAX rank
comparison).

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import _compare_fits as fits
from ._compare_design import (DEFAULT_LIMITS, DESIGNS, check_keys, check_options, choose_design,
                              derive_sequences, limits_per_code, require_columns, subject_sequence, treatment_roles)
from .errors import InputDataError
from .result import parameters_of

__all__ = ["Comparison", "compare_treatments", "DESIGNS", "DEFAULT_LIMITS"]

#: Times, compared by the Hodges-Lehmann median difference (reported in ``Comparison.tmax``).
RANK_CODES = ("TMAX", "TMIN", "TLAG")
_COLUMNS = ["parameter", "n", "ratio", "lower", "upper", "cv_intra", "gmean_test", "gmean_reference", "n_test",
            "n_reference", "limit_low", "limit_high", "within_limits", "conclusion", "model", "df", "note"]


@dataclass
class Comparison:
    """Result of :func:`compare_treatments`.

    Attributes
    ----------
    table : DataFrame
        One row per ln-scale parameter: ``parameter, n, ratio, lower, upper,
        cv_intra`` (%), ``gmean_test, gmean_reference`` (observed geometric
        means of the values in the model), ``n_test, n_reference``,
        ``limit_low, limit_high`` (ratios), ``within_limits`` (bool),
        ``conclusion`` (text), ``model``, ``df``, ``note``.
    tmax : DataFrame
        Time parameters (TMAX...): ``parameter, n, median_test,
        median_reference, difference`` (Hodges-Lehmann, test - reference),
        ``lower, upper, method, note``.
    anova : dict
        Parameter -> ANOVA table (2x2) or fixed effects and variance
        components (mixed model).
    incomplete : DataFrame
        Subjects with a value for one treatment only, per parameter, with the
        reason and whether the model used them.
    excluded : DataFrame
        Values not used, with the reason (missing, <= 0 on a log scale,
        other treatment).
    pairs : DataFrame
        Per subject and parameter: test, reference and their ratio.
    design, model : str
        Key of :data:`DESIGNS` and its description.
    level : float
    test, reference : object
        Treatment labels.
    how_chosen : str
        Why this design: chosen from the data, or requested (and what the
        data suggest).
    roles : dict
        Column names given for subject, treatment, period and sequence.
    """

    table: pd.DataFrame
    tmax: pd.DataFrame
    anova: dict
    incomplete: pd.DataFrame
    excluded: pd.DataFrame
    pairs: pd.DataFrame
    design: str
    model: str
    level: float
    test: object
    reference: object
    how_chosen: str = ""
    roles: dict = field(default_factory=dict)

    def __repr__(self) -> str:
        return (f"Comparison of {self.test} vs {self.reference}, {self.model} ({self.how_chosen})\n"
                f"{self.table[_COLUMNS[:8] + ['within_limits']].to_string(index=False)}\n"
                f"incomplete subjects: {self.incomplete['subject'].nunique()}; values not used: {len(self.excluded)}")

    def _repr_html_(self) -> str:
        head = (f"<p><b>Test {html.escape(str(self.test))} vs reference {html.escape(str(self.reference))}</b>: "
                f"{html.escape(self.model)} ({html.escape(self.how_chosen)}); {100 * self.level:g} % confidence "
                f"intervals.</p>")
        tail = (f"<p>Incomplete subjects: {self.incomplete['subject'].nunique()}; values not used: "
                f"{len(self.excluded)} (see <code>.incomplete</code>, <code>.excluded</code>). Results support "
                "qualified review; follow local regulations and SOPs.</p>")
        return head + self.table.to_html(index=False) + tail


# ---------------------------------------------------------------------------- one parameter

def _values(rows, code, log):
    """The usable values of one parameter, and the rows left out with their reason."""
    v = rows[code]
    reason = pd.Series("", index=rows.index)
    reason[v.isna()] = "no value"
    if log:
        reason[v.notna() & (v <= 0)] = "value <= 0: ln undefined on the log scale"
    out = rows.loc[reason == ""].assign(value=v[reason == ""])
    gone = rows.loc[reason != "", ["subject", "treatment", "period", "role"]].assign(
        parameter=code, value=v[reason != ""], reason=reason[reason != ""])
    return out, gone


def _incomplete(values, gone, code, used):
    have = values.groupby(["subject", "role"]).size().unstack(fill_value=0).reindex(
        columns=["test", "reference"], fill_value=0)
    part = have[(have == 0).any(axis=1)]
    rows = []
    for s, r in part.iterrows():
        missing = "reference" if r["reference"] == 0 else "test"
        why = gone.loc[(gone["subject"] == s) & (gone["role"] == missing), "reason"]
        rows.append({"parameter": code, "subject": s, "n_test": int(r["test"]), "n_reference": int(r["reference"]),
                     "reason": f"no {missing} value ({why.iloc[0] if len(why) else 'no profile'})",
                     "used_in_model": used})
    return rows


def _not_estimable(why):
    return fits.Fit(*[np.nan] * 5, note=why)


def _fit(values, design, level):
    """Fit of one ln-scale parameter; returns (Fit, subjects used, ANOVA or None)."""
    counts = values.groupby(["subject", "role"]).size().unstack(fill_value=0).reindex(
        columns=["test", "reference"], fill_value=0)
    complete = counts.index[(counts > 0).all(axis=1)]
    y, is_test = np.log(values["value"].to_numpy(float)), (values["role"] == "test").to_numpy()
    if design == "parallel":
        if min(is_test.sum(), (~is_test).sum()) < 2:
            return _not_estimable("needs at least 2 values per treatment"), values["subject"].unique(), None
        return fits.welch_t(y[is_test], y[~is_test], level), values["subject"].unique(), None
    if len(complete) < 2:
        return _not_estimable("needs at least 2 subjects with values for both treatments"), complete, None
    if design == "paired":
        wide = values[values["subject"].isin(complete)].pivot(index="subject", columns="role", values="value")
        d = np.log(wide["test"].to_numpy(float)) - np.log(wide["reference"].to_numpy(float))
        return fits.paired_t(d, level), complete, None
    frame = pd.DataFrame({"y": y, "subject": values["subject"].astype(str).to_numpy(),
                          "period": values["period"].astype(str).to_numpy(),
                          "sequence": values["sequence"].astype(str).to_numpy(),
                          "treatment": values["role"].to_numpy()})
    if design == "2x2":
        frame = frame[values["subject"].isin(complete).to_numpy()]
        if frame["sequence"].nunique() < 2 or len(complete) < 3:
            return _not_estimable("needs complete subjects in both sequences (at least 3)"), complete, None
        fit = fits.crossover_ols(frame["y"], frame["subject"], frame["period"], frame["treatment"] == "test", level)
        return fit, complete, fits.anova_2x2(frame)
    x = fits.fixed_subject_design(frame["subject"], frame["period"], frame["treatment"] == "test")
    df = len(frame) - np.linalg.matrix_rank(x)
    if df < 1:
        return _not_estimable("no residual degrees of freedom left for the mixed model"), complete, None
    try:
        fit, table = fits.crossover_mixed(frame, level, df=df)
    except (np.linalg.LinAlgError, ValueError) as exc:
        return _not_estimable(f"MixedLM failed: {exc}"), values["subject"].unique(), None
    return fit, values["subject"].unique(), table


def _row(code, fit, values, used, lim, level):
    used_vals = values[values["subject"].isin(used)]
    g = {r: float(np.exp(np.mean(np.log(used_vals.loc[used_vals["role"] == r, "value"].to_numpy(float)))))
         if (used_vals["role"] == r).any() else np.nan for r in ("test", "reference")}
    ratio, lo, hi = np.exp([fit.estimate, fit.lower, fit.upper])
    # EMA 2010: the bounds, in %, rounded to two decimals, must lie within 80.00-125.00 (from memory)
    within = bool(np.isfinite([lo, hi]).all() and round(100 * lo, 2) >= round(100 * lim[0], 2)
                  and round(100 * hi, 2) <= round(100 * lim[1], 2))
    text = (f"{100 * level:g} % CI {100 * lo:.2f}-{100 * hi:.2f} % {'within' if within else 'not within'} "
            f"{100 * lim[0]:.2f}-{100 * lim[1]:.2f} %") if np.isfinite([lo, hi]).all() else "not estimable"
    return {"parameter": code, "n": len(used), "ratio": ratio, "lower": lo, "upper": hi,
            "cv_intra": 100.0 * np.sqrt(np.expm1(fit.mse)) if np.isfinite(fit.mse) else np.nan,
            "gmean_test": g["test"], "gmean_reference": g["reference"],
            "n_test": int((used_vals["role"] == "test").sum()),
            "n_reference": int((used_vals["role"] == "reference").sum()),
            "limit_low": lim[0], "limit_high": lim[1], "within_limits": within, "conclusion": text,
            "df": fit.df, "note": fit.note}


def _rank_row(code, values, design, level):
    per = values.groupby(["subject", "role"])["value"].mean().unstack().reindex(columns=["test", "reference"])
    if design == "parallel":
        x, y = per["test"].dropna().to_numpy(), per["reference"].dropna().to_numpy()
        fit, n = fits.hodges_lehmann_shift(x, y, level), x.size + y.size
        method = "Hodges-Lehmann shift, Mann-Whitney interval"
    else:
        both = per.dropna()
        x, y = both["test"].to_numpy(), both["reference"].to_numpy()
        fit, n = fits.hodges_lehmann_paired(x - y, level), len(both)
        method = "Hodges-Lehmann median difference, Wilcoxon signed-rank interval"
    return {"parameter": code, "n": n, "median_test": float(np.median(x)) if x.size else np.nan,
            "median_reference": float(np.median(y)) if y.size else np.nan, "difference": fit.estimate,
            "lower": fit.lower, "upper": fit.upper, "method": method, "note": fit.note}


def _pairs(values, code):
    g = values.assign(ln=np.log(values["value"].astype(float))).groupby(["subject", "sequence", "role"])["ln"].mean()
    wide = np.exp(g.unstack("role")).reindex(columns=["test", "reference"]).dropna().reset_index()
    wide.columns.name = None
    return wide.assign(parameter=code, ratio=wide["test"] / wide["reference"])


# ---------------------------------------------------------------------------- entry point

def compare_treatments(params, *, subject, treatment, test, reference, period=None, sequence=None,
                       parameters=("CMAX", "AUCLST", "AUCIFO"), level=0.90, design="auto",
                       limits=DEFAULT_LIMITS) -> Comparison:
    r"""Geometric mean ratio test/reference with its confidence interval, per parameter.

    Parameters
    ----------
    params : DataFrame
        One row per profile (``pk.nca(...).parameters``; an object with a
        ``.parameters`` DataFrame is taken as that): subject, treatment,
        optionally period and sequence columns, and the parameter columns.
    subject, treatment : str
        Column names.
    test, reference : object
        Treatment labels (compared as text).  Rows of other treatments are
        left out and listed in ``excluded`` (each comparison uses only its two
        treatments).
    period : str, optional
        Period column; without it subjects with both treatments are paired.
    sequence : str, optional
        Sequence column; None derives each subject's sequence from its
        treatments in period order.
    parameters : sequence of str
        Columns to compare; TMAX, TMIN and TLAG go to the rank comparison.
    level : float
        Confidence level, default 0.90 (two one-sided tests at 5 %).
    design : {"auto", "2x2", "mixed", "paired", "parallel"}
        "auto" chooses from the data (see :data:`DESIGNS`).
    limits : (float, float) or dict
        Acceptance limits of the ratio, default (0.80, 1.25) (EMA 2010, FDA
        2001); a dict maps parameter -> limits (others keep the default).

    Returns
    -------
    Comparison
        ``.table`` (one row per parameter), ``.tmax``, ``.anova``,
        ``.incomplete``, ``.excluded``, ``.pairs``, ``.design``, ``.model``.

    Notes
    -----
    On :math:`y = \ln P`, with :math:`\hat\delta` the test - reference
    difference of the chosen model and :math:`\mathrm{SE}` its standard error:

    .. math:: \mathrm{ratio} = e^{\hat\delta}, \quad [e^{\hat\delta - t\,\mathrm{SE}},\
       e^{\hat\delta + t\,\mathrm{SE}}], \quad t = t_{(1+L)/2,\,df}, \quad
       \mathrm{CV_{intra}} = 100\sqrt{e^{\mathrm{MSE}} - 1}

    (Chow & Liu, Design and Analysis of Bioavailability and Bioequivalence
    Studies, 3rd ed., 2009).  The interval lies within the limits when its
    bounds in percent, rounded to two decimals, do (EMA 2010, from memory).
    In a 2x2 crossover a subject with one period carries no within-subject
    information and is listed, not used; the mixed model uses it.

    Examples
    --------
    >>> df = pd.DataFrame({"id": [1, 1, 2, 2, 3, 3, 4, 4], "per": [1, 2] * 4,
    ...                    "trt": ["T", "R", "R", "T", "T", "R", "R", "T"],
    ...                    "CMAX": [10.0, 11.0, 12.0, 10.5, 9.0, 9.5, 8.0, 7.9]})
    >>> res = compare_treatments(df, subject="id", treatment="trt", period="per", test="T", reference="R",
    ...                          parameters=["CMAX"])
    >>> res.design, round(float(res.table["ratio"].iloc[0]), 4)  # exp of the period-difference contrast, by hand
    ('2x2', 0.9288)
    >>> compare_treatments(df, subject="id", treatment="trt", test="A", reference="R", parameters=["CMAX"])
    Traceback (most recent call last):
    ...
    ValueError: test='A' is not a value of column 'trt'; its values are ['R', 'T']. Set test to one of them.
    """
    params = parameters_of(params)  # an NCA result object gives its parameter table
    parameters = [parameters] if isinstance(parameters, str) else list(parameters)
    lims = limits_per_code(limits, parameters)
    check_options(level, design, lims, parameters)
    require_columns(params, [subject, treatment, period, sequence, *parameters])
    check_keys(params, subject, treatment, period)
    rows, seq = _study_rows(params, subject, treatment, period, sequence, test, reference, parameters)
    other, rows = rows[rows["role"] == ""], rows[rows["role"] != ""]
    chosen, how = choose_design(rows, design, period is not None)
    parts = _compare_all(rows, parameters, chosen, level, lims)
    parts["excluded"].insert(0, other[["subject", "treatment", "period", "role"]].assign(
        parameter="(all)", value=np.nan, reason=f"treatment is neither {test!r} nor {reference!r}"))
    return Comparison(
        **_frames(parts, chosen, seq), design=chosen, model=DESIGNS[chosen], level=float(level), test=test,
        reference=reference, how_chosen=how,
        roles={"subject": subject, "treatment": treatment, "period": period, "sequence": sequence})


def _study_rows(params, subject, treatment, period, sequence, test, reference, parameters):
    """One row per profile: subject, treatment, role, period, sequence and the parameters as floats."""
    role = treatment_roles(params, treatment, test, reference)
    seq = (subject_sequence(params, subject, sequence) if sequence is not None else
           derive_sequences(params, subject, treatment, period) if period is not None else None)
    rows = pd.DataFrame({"subject": params[subject], "treatment": params[treatment], "role": role,
                         "period": params[period] if period is not None else np.nan,
                         "sequence": params[subject].map(seq) if seq is not None else ""})
    for code in parameters:
        num = pd.to_numeric(params[code], errors="coerce")
        bad = num.isna() & params[code].notna()
        if bad.any():
            raise InputDataError(f"column {code!r} holds non-numeric value {params.loc[bad, code].iloc[0]!r} in row "
                                 f"{params.index[bad][0]}; parameters must be numbers (NaN for none).",
                                 column=code, line=params.index[bad][0])
        rows[code] = num.astype(float)
    return rows, seq


def _compare_all(rows, parameters, chosen, level, lims) -> dict:
    """Fit every parameter: lists of table rows, rank rows, incomplete subjects, excluded values, pairs."""
    parts = {"table": [], "ranks": [], "anova": {}, "incomplete": [], "excluded": [], "pairs": []}
    for code in parameters:
        values, gone = _values(rows, code, log=code not in RANK_CODES)
        parts["excluded"].append(gone)
        if code in RANK_CODES:  # paired differences: a subject with one treatment is listed, not used
            parts["ranks"].append(_rank_row(code, values, chosen, level))
            if chosen != "parallel":
                parts["incomplete"] += _incomplete(values, gone, code, used=False)
            continue
        fit, used, tab = _fit(values, chosen, level)
        if chosen != "parallel":
            parts["incomplete"] += _incomplete(values, gone, code, used=chosen == "mixed")
        if tab is not None:
            parts["anova"][code] = tab
        parts["table"].append(_row(code, fit, values, used, lims[code], level))
        parts["pairs"].append(_pairs(values, code))
    return parts


def _frames(parts, chosen, seq) -> dict:
    """The result tables, columns in their documented order."""
    out = pd.DataFrame(parts["table"], columns=[c for c in _COLUMNS if c != "model"])
    out.insert(_COLUMNS.index("model"), "model", DESIGNS[chosen].split(":")[0])
    excl = pd.concat(parts["excluded"], ignore_index=True)[["parameter", "subject", "treatment", "period", "value",
                                                            "reason"]]
    inc = pd.DataFrame(parts["incomplete"], columns=["parameter", "subject", "n_test", "n_reference", "reason",
                                                     "used_in_model"])
    if seq is not None:
        inc.insert(2, "sequence", inc["subject"].map(seq))
    pair_cols = ["parameter", "subject", "sequence", "test", "reference", "ratio"]
    prs = pd.concat(parts["pairs"], ignore_index=True)[pair_cols] if parts["pairs"] else pd.DataFrame(columns=pair_cols)
    tmax = pd.DataFrame(parts["ranks"], columns=["parameter", "n", "median_test", "median_reference", "difference",
                                                 "lower", "upper", "method", "note"])
    return {"table": out, "tmax": tmax, "anova": parts["anova"], "incomplete": inc, "excluded": excl, "pairs": prs}
