r"""Dose proportionality by the power model, with the Smith et al. acceptance interval for the slope.

:func:`dose_proportionality` fits :math:`\ln P = a + b \ln \mathrm{dose}` to
each exposure parameter over all profiles and compares the confidence
interval of :math:`b` with the interval that keeps the dose-normalised
exposure ratio between the highest and lowest dose within the acceptance
limits (0.80-1.25 by default).

References
----------
.. [1] Smith BP, Vandenhende FR, DeSante KA, Farid NA, Welch PA, Callaghan JT,
   Forgue ST. Confidence interval criteria for assessment of dose
   proportionality. Pharm Res 2000;17:1278-1283.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import html
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .errors import InputDataError
from .result import parameters_of

__all__ = ["Proportionality", "dose_proportionality", "slope_criterion"]

_COLUMNS = ["parameter", "n", "n_doses", "slope", "lower", "upper", "criterion_low", "criterion_high", "proportional",
            "conclusion", "intercept", "dose_ratio", "max_dose_ratio"]


@dataclass
class Proportionality:
    """Result of :func:`dose_proportionality`.

    Attributes
    ----------
    table : DataFrame
        One row per parameter: ``parameter, n, n_doses, slope, lower, upper``
        (power-model slope and its interval), ``criterion_low,
        criterion_high`` (acceptance interval of the slope),
        ``proportional`` (bool), ``conclusion`` (text), ``intercept``,
        ``dose_ratio`` (highest / lowest dose) and ``max_dose_ratio`` (the
        largest dose ratio over which the interval would conclude
        proportionality).
    data : DataFrame
        The values used: ``parameter, row`` (index in ``params``), the
        ``label`` columns, ``dose, value, normalised`` (value / dose).
    excluded : DataFrame
        Values not used, with the reason.
    level : float
    limits : (float, float)
    """

    table: pd.DataFrame
    data: pd.DataFrame
    excluded: pd.DataFrame
    level: float
    limits: tuple

    def __repr__(self) -> str:
        return (f"Dose proportionality, power model, {100 * self.level:g} % CI of the slope; limits "
                f"{self.limits[0]:.2f}-{self.limits[1]:.2f}\n{self.table[_COLUMNS[:9]].to_string(index=False)}\n"
                f"values not used: {len(self.excluded)}")

    def _repr_html_(self) -> str:
        return (f"<p><b>Dose proportionality</b>: power model ln P = a + b ln dose, {100 * self.level:g} % "
                f"confidence interval of b against the interval from limits {self.limits[0]:.2f}-"
                f"{self.limits[1]:.2f} (Smith et al., Pharm Res 2000).</p>" + self.table.to_html(index=False)
                + f"<p>Values not used: {len(self.excluded)} (see <code>.excluded</code>). "
                + html.escape("Results support qualified review; follow local regulations and SOPs.") + "</p>")


def slope_criterion(dose_ratio, limits=(0.80, 1.25)) -> tuple[float, float]:
    r"""Acceptance interval of the power-model slope for a dose range (Smith et al. 2000 [1]_).

    .. math:: \left[1 + \frac{\ln \theta_L}{\ln r},\ 1 + \frac{\ln \theta_H}{\ln r}\right],
       \quad r = \frac{\text{highest dose}}{\text{lowest dose}}

    Parameters
    ----------
    dose_ratio : float
        :math:`r > 1`.
    limits : (float, float)
        :math:`(\theta_L, \theta_H)`, default (0.80, 1.25).

    Examples
    --------
    >>> [round(v, 4) for v in slope_criterion(10.0)]
    [0.9031, 1.0969]
    >>> slope_criterion(1.0)
    Traceback (most recent call last):
    ...
    ValueError: dose_ratio must be above 1 (highest / lowest dose); got 1.0.
    """
    if not dose_ratio > 1.0:
        raise ValueError(f"dose_ratio must be above 1 (highest / lowest dose); got {dose_ratio!r}.")
    lo, hi = limits
    return float(1.0 + np.log(lo) / np.log(dose_ratio)), float(1.0 + np.log(hi) / np.log(dose_ratio))


def _max_dose_ratio(lower, upper, limits):
    r"""Largest r with the slope interval inside the criterion: :math:`\min(\theta_L^{1/(L-1)}, \theta_H^{1/(U-1)})`
    over the bounds on the far side of 1 (infinite when the interval is [1, 1]; NaN when it excludes 1)."""
    if not (lower <= 1.0 <= upper):
        return np.nan
    r_lo = limits[0] ** (1.0 / (lower - 1.0)) if lower < 1.0 else np.inf
    r_hi = limits[1] ** (1.0 / (upper - 1.0)) if upper > 1.0 else np.inf
    return float(min(r_lo, r_hi))


def _power_fit(dose, value, level):
    """OLS of ln value on ln dose (statsmodels); slope, its t interval (df n - 2) and intercept."""
    import statsmodels.api as sm

    fit = sm.OLS(np.log(value), sm.add_constant(np.log(dose))).fit()
    lo, hi = fit.conf_int(alpha=1.0 - level)[1]
    return float(fit.params[1]), float(lo), float(hi), float(fit.params[0])


def _usable(params, dose, code, labels):
    d = pd.to_numeric(params[dose], errors="coerce")
    v = pd.to_numeric(params[code], errors="coerce")
    reason = pd.Series("", index=params.index)
    reason[v.isna()] = "no value"
    reason[v.notna() & (v <= 0)] = "value <= 0: ln undefined"
    reason[d.isna()] = "no dose"
    reason[d.notna() & (d <= 0)] = "dose <= 0 (placebo?): ln undefined"
    keep = reason == ""
    base = params[labels].copy() if labels else pd.DataFrame(index=params.index)
    base.insert(0, "row", params.index)
    base.insert(0, "parameter", code)
    base["dose"], base["value"] = d, v
    used = base[keep].assign(normalised=v[keep] / d[keep])
    return used, base[~keep].assign(reason=reason[~keep])


def dose_proportionality(params, *, dose, parameters=("CMAX", "AUCIFO"), level=0.90, limits=(0.80, 1.25),
                         labels=None) -> Proportionality:
    r"""Power-model dose proportionality of exposure parameters.

    Parameters
    ----------
    params : DataFrame
        One row per profile (``pk.nca(...).parameters``; an object with a
        ``.parameters`` DataFrame is taken as that) with a dose column.
    dose : str
        Dose column (any unit: the slope does not depend on it).
    parameters : sequence of str
        Exposure parameters, default CMAX and AUCIFO.
    level : float
        Confidence level of the slope interval, default 0.90.
    limits : (float, float)
        :math:`(\theta_L, \theta_H)` of the criterion, default (0.80, 1.25).
    labels : list of str, optional
        Columns carried into ``data`` and ``excluded`` (e.g. the subject).

    Returns
    -------
    Proportionality
        ``.table``, ``.data``, ``.excluded`` (values <= 0, missing values or
        doses <= 0, with the reason).

    Notes
    -----
    Per parameter, over all profiles with a positive value and dose:

    .. math:: \ln P = a + b \ln \mathrm{dose}, \qquad \hat b \pm t_{(1+L)/2,\,n-2}\,\mathrm{SE}(\hat b)

    proportional when the interval lies within :func:`slope_criterion`
    (Smith et al. 2000 [1]_); "not proportional" when it lies wholly outside
    it, "inconclusive" otherwise.  Profiles are taken as independent
    (parallel dose groups, as in a single-ascending-dose study); a design
    with several doses per subject needs a mixed model (not provided).

    Examples
    --------
    >>> df = pd.DataFrame({"dose": [1.0, 1.0, 10.0, 10.0, 100.0, 100.0],
    ...                    "AUCIFO": [2.0, 2.2, 21.0, 19.0, 205.0, 198.0]})
    >>> res = dose_proportionality(df, dose="dose", parameters=["AUCIFO"])
    >>> row = res.table.iloc[0]
    >>> bool(row["proportional"]), round(float(row["criterion_low"]), 4), round(float(row["criterion_high"]), 4)
    (True, 0.9515, 1.0485)
    >>> dose_proportionality(df, dose="DOSE")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    pkwidgets.errors.InputDataError: column(s) ['DOSE', 'CMAX'] are not in the parameter table; its columns are ...
    """
    params = parameters_of(params)  # an NCA result object gives its parameter table
    parameters = [parameters] if isinstance(parameters, str) else list(parameters)
    labels = [labels] if isinstance(labels, str) else list(labels or [])
    missing = [c for c in [dose, *parameters, *labels] if c not in params.columns]
    if missing:
        raise InputDataError(f"column(s) {missing} are not in the parameter table; its columns are "
                             f"{list(params.columns)}. Name the columns that hold them.", column=missing[0])
    if not 0.0 < float(level) < 1.0:
        raise ValueError(f"The 'level' option must be between 0 and 1 (e.g. 0.90); got {level!r}.")
    if not 0.0 < limits[0] < 1.0 < limits[1]:
        raise ValueError(f"The 'limits' option must be ratios (low < 1 < high), e.g. (0.80, 1.25); got {limits!r}.")
    rows, used, excluded = [], [], []
    for code in parameters:
        data, gone = _usable(params, dose, code, labels)
        used.append(data)
        excluded.append(gone)
        doses = np.unique(data["dose"])
        if doses.size < 2 or len(data) < 3:
            raise InputDataError(f"{code}: the power model needs at least 2 dose levels and 3 values; got "
                                 f"{doses.size} dose level(s) and {len(data)} value(s) after leaving out "
                                 f"{len(gone)} (see the reasons: value or dose missing or <= 0).", column=code)
        slope, lo, hi, a = _power_fit(data["dose"].to_numpy(float), data["value"].to_numpy(float), level)
        r = float(doses.max() / doses.min())
        c_lo, c_hi = slope_criterion(r, limits)
        inside = bool(lo >= c_lo and hi <= c_hi)
        verdict = ("proportional" if inside else "not proportional" if (hi < c_lo or lo > c_hi) else "inconclusive")
        rows.append({"parameter": code, "n": len(data), "n_doses": int(doses.size), "slope": slope, "lower": lo,
                     "upper": hi, "criterion_low": c_lo, "criterion_high": c_hi, "proportional": inside,
                     "conclusion": f"{verdict}: {100 * level:g} % CI of slope {lo:.3f}-{hi:.3f}, criterion "
                                   f"{c_lo:.3f}-{c_hi:.3f} over a {r:g}-fold dose range",
                     "intercept": a, "dose_ratio": r, "max_dose_ratio": _max_dose_ratio(lo, hi, limits)})
    return Proportionality(table=pd.DataFrame(rows, columns=_COLUMNS), data=pd.concat(used, ignore_index=True),
                           excluded=pd.concat(excluded, ignore_index=True), level=float(level),
                           limits=(float(limits[0]), float(limits[1])))
