r"""Model fits behind :func:`pkwidgets.compare_treatments`, on arrays of ln values.

Each function takes the ln values of one parameter and integer codes of the
design factors, fits one model with statsmodels (or an exact rank method for
times), and returns a :class:`Fit`: the test - reference difference on the ln
scale, its standard error, degrees of freedom and interval.  No pandas
bookkeeping and no printing here; :mod:`pkwidgets.compare` maps study tables
onto these.

References
----------
.. [1] Chow SC, Liu JP. Design and Analysis of Bioavailability and
   Bioequivalence Studies, 3rd ed. Chapman & Hall/CRC, 2009, ch. 3-4.
.. [2] Jones B, Kenward MG. Design and Analysis of Cross-Over Trials,
   3rd ed. CRC Press, 2014, ch. 2.
.. [3] Hollander M, Wolfe DA, Chicken E. Nonparametric Statistical Methods,
   3rd ed. Wiley, 2014, sections 3.2 and 4.3 (Hodges-Lehmann estimators and
   the distribution-free intervals from Walsh averages and pairwise
   differences).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

__all__ = ["Fit", "fixed_subject_design", "crossover_ols", "anova_2x2", "crossover_mixed", "paired_t", "welch_t",
           "hodges_lehmann_paired", "hodges_lehmann_shift"]

#: Largest sample for the exact null distributions (larger: normal approximation).
_EXACT_SIGNED_RANK = 400
_EXACT_RANK_SUM = 20_000  # m * n


@dataclass(frozen=True)
class Fit:
    """Test - reference difference on the ln scale (or in time units, for the rank methods).

    Attributes
    ----------
    estimate, se : float
        Difference and its standard error (NaN for the rank methods).
    df : float
        Degrees of freedom of the t quantile (NaN for the rank methods).
    lower, upper : float
        Interval at the requested level, same scale as ``estimate``.
    mse : float
        Within-subject (residual) variance of ln values; NaN for parallel groups.
    note : str
        Anything a reviewer must know about this fit (convergence, exact or
        approximate rank interval, achieved level).
    """

    estimate: float
    se: float
    df: float
    lower: float
    upper: float
    mse: float = float("nan")
    note: str = ""


def _t_interval(estimate, se, df, level):
    q = stats.t.ppf(0.5 + level / 2.0, df)
    return estimate - q * se, estimate + q * se


def fixed_subject_design(subject, period, is_test):
    """Columns: one indicator per subject, periods after the first, the test indicator."""
    _, s = np.unique(np.asarray(subject), return_inverse=True)
    cols = [np.eye(s.max() + 1)[s]]
    if period is not None:
        _, p = np.unique(np.asarray(period), return_inverse=True)
        cols.append(np.eye(p.max() + 1)[p][:, 1:])
    cols.append(np.asarray(is_test, dtype=float)[:, None])
    return np.hstack(cols)


def crossover_ols(y, subject, period, is_test, level) -> Fit:
    r"""Treatment difference from the fixed-effects crossover ANOVA model (statsmodels OLS).

    .. math:: \ln y_{ijk} = \mu + s_{ik} + \pi_j + \tau_{d(j,k)} + \varepsilon_{ijk}

    Subjects enter as fixed effects (which also absorbs sequence, a
    between-subject factor), so the treatment contrast, the residual mean
    square (MSE) and its degrees of freedom are those of the ANOVA with
    sequence, subject(sequence), period and treatment [1]_.  Interval:
    :math:`\hat\tau \pm t_{(1+L)/2,\,df}\,\mathrm{SE}`.

    Parameters
    ----------
    y : array of float
        ln values.
    subject, period : array of int
        Codes of subject and period (``period`` None: no period term).
    is_test : array of bool
        True for the test treatment.
    level : float
        Confidence level (0.90 for bioequivalence).
    """
    import statsmodels.api as sm

    fit = sm.OLS(np.asarray(y, float), fixed_subject_design(subject, period, is_test)).fit()
    est, se, df = float(fit.params[-1]), float(fit.bse[-1]), float(fit.df_resid)
    lo, hi = _t_interval(est, se, df, level)
    return Fit(est, se, df, lo, hi, mse=float(fit.mse_resid))


def anova_2x2(frame) -> pd.DataFrame:
    r"""ANOVA table of a 2x2 crossover: sequence, subject(sequence), period, treatment, residual.

    ``frame`` has columns ``y`` (ln value), ``subject``, ``sequence``,
    ``period`` and ``treatment`` (``"test"``/``"reference"``), complete
    subjects only.  Period, treatment, subject and residual rows come from
    ``statsmodels.stats.anova.anova_lm(typ=2)`` of the fixed-subject OLS fit;
    the subject stratum is split into sequence (SS of the sequence means, a
    one-way OLS fit) and subject(sequence), and sequence is tested against
    the subject(sequence) mean square, as in Chow & Liu [1]_, table 3.3.
    (A single OLS fit with both sequence and subject terms is rank deficient
    and its Type I degrees of freedom are wrong.)
    """
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    full = smf.ols("y ~ C(subject) + C(period) + C(treatment, Treatment('reference'))", frame).fit()
    tab = anova_lm(full, typ=2)
    ss_seq = float(anova_lm(smf.ols("y ~ C(sequence)", frame).fit(), typ=1).loc["C(sequence)", "sum_sq"])
    n_seq = frame["sequence"].nunique()
    ss_subj, df_subj = float(tab.iloc[0]["sum_sq"]), float(tab.iloc[0]["df"])
    rows = {
        "sequence": (n_seq - 1.0, ss_seq),
        "subject(sequence)": (df_subj - (n_seq - 1.0), ss_subj - ss_seq),
        "period": (float(tab.iloc[1]["df"]), float(tab.iloc[1]["sum_sq"])),
        "treatment": (float(tab.iloc[2]["df"]), float(tab.iloc[2]["sum_sq"])),
        "residual": (float(tab.iloc[3]["df"]), float(tab.iloc[3]["sum_sq"])),
    }
    out = pd.DataFrame(rows, index=["df", "sum_sq"]).T
    out["mean_sq"] = out["sum_sq"] / out["df"]
    mse, ms_subj = out.loc["residual", "mean_sq"], out.loc["subject(sequence)", "mean_sq"]
    denom = pd.Series({"sequence": ms_subj, "subject(sequence)": mse, "period": mse, "treatment": mse})
    out["F"] = out["mean_sq"].iloc[:4] / denom
    df_den = pd.Series({"sequence": out.loc["subject(sequence)", "df"], "subject(sequence)": out.loc["residual", "df"],
                        "period": out.loc["residual", "df"], "treatment": out.loc["residual", "df"]})
    out["p"] = stats.f.sf(out["F"].iloc[:4], out["df"].iloc[:4], df_den).tolist() + [np.nan]
    out["error_term"] = ["subject(sequence)", "residual", "residual", "residual", ""]
    out.index.name = "source"
    return out


def crossover_mixed(frame, level, *, df) -> tuple[Fit, pd.DataFrame]:
    r"""Treatment difference from a linear mixed model (statsmodels MixedLM, REML).

    .. math:: \ln y_{ijk} = \mu + \gamma_k + \pi_j + \tau_{d} + b_i + \varepsilon_{ijk},
       \quad b_i \sim N(0, \sigma_b^2),\ \varepsilon \sim N(0, \sigma^2)

    Fixed effects sequence (when ``frame`` has more than one), period (when
    given) and treatment; subject random intercept.  Subjects with one
    treatment only still inform the period and subject-variance estimates.
    The interval uses the t quantile with ``df``, the residual degrees of
    freedom of the fixed-subject model on the same observations (the
    containment choice for a within-subject effect, from memory); MSE is
    :math:`\hat\sigma^2`.

    Returns
    -------
    Fit, DataFrame
        The fit and a table of fixed effects and variance components
        (statsmodels ``summary`` numbers).
    """
    import statsmodels.formula.api as smf
    from statsmodels.tools.sm_exceptions import ConvergenceWarning

    terms = [t for t, col in (("C(sequence)", "sequence"), ("C(period)", "period"))
             if col in frame and frame[col].nunique() > 1]
    formula = "y ~ " + " + ".join(terms + ["C(treatment, Treatment('reference'))"])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        res = smf.mixedlm(formula, frame, groups=frame["subject"]).fit(reml=True)
    name = "C(treatment, Treatment('reference'))[T.test]"
    est, se = float(res.fe_params[name]), float(res.bse_fe[name])
    lo, hi = _t_interval(est, se, df, level)
    for w in caught:  # pass on what is not about convergence; convergence goes into the note
        if not issubclass(w.category, ConvergenceWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    notes = sorted({str(w.message).split("\n")[0] for w in caught if issubclass(w.category, ConvergenceWarning)})
    if not res.converged:
        notes.append("MixedLM did not report convergence")
    table = pd.DataFrame({"estimate": res.fe_params, "se": res.bse_fe,
                          "z": res.fe_params / res.bse_fe, "p": res.pvalues[res.fe_params.index]})
    comps = pd.DataFrame({"estimate": [float(res.cov_re.iloc[0, 0]), float(res.scale)]},
                         index=["subject variance (random intercept)", "residual variance"])
    table = pd.concat([table, comps])
    table.index.name = "term"
    return Fit(est, se, float(df), lo, hi, mse=float(res.scale), note="; ".join(notes)), table


def paired_t(d, level) -> Fit:
    r"""t interval of the mean within-subject ln difference (statsmodels ``DescrStatsW``).

    .. math:: \bar d \pm t_{(1+L)/2,\,n-1}\, s_d/\sqrt n, \qquad \mathrm{MSE} = s_d^2 / 2

    :math:`s_d^2/2` estimates the within-subject variance when there is no
    period effect (the paired design has no period information).
    """
    from statsmodels.stats.weightstats import DescrStatsW

    d = np.asarray(d, float)
    ds = DescrStatsW(d)
    lo, hi = ds.tconfint_mean(alpha=1.0 - level)
    return Fit(float(ds.mean), float(ds.std_mean), float(d.size - 1), float(lo), float(hi),
               mse=float(np.var(d, ddof=1)) / 2.0)


def welch_t(y_test, y_ref, level) -> Fit:
    r"""Welch interval of the difference of mean ln values, parallel groups (statsmodels ``CompareMeans``).

    .. math:: \bar y_T - \bar y_R \pm t_{(1+L)/2,\,\nu} \sqrt{s_T^2/n_T + s_R^2/n_R}

    with Welch-Satterthwaite :math:`\nu`.
    """
    from statsmodels.stats.weightstats import CompareMeans, DescrStatsW

    cm = CompareMeans(DescrStatsW(np.asarray(y_test, float)), DescrStatsW(np.asarray(y_ref, float)))
    lo, hi = cm.tconfint_diff(alpha=1.0 - level, usevar="unequal")
    est = float(np.mean(y_test) - np.mean(y_ref))
    return Fit(est, float(cm.std_meandiff_separatevar), float(cm.dof_satt()), float(lo), float(hi))


# ---------------------------------------------------------------------------- rank methods (TMAX)

def _signed_rank_cdf(n):
    """P(T+ <= k), k = 0..n(n+1)/2, exact null distribution of the Wilcoxon signed-rank statistic."""
    p = np.ones(1)
    for k in range(1, n + 1):
        q = np.zeros(p.size + k)
        q[:p.size] += p
        q[k:] += p
        p = q / 2.0
    return np.cumsum(p)


def _rank_sum_cdf(m, n):
    """P(U <= u), u = 0..m*n, exact null distribution of the Mann-Whitney U statistic."""
    # p[j] holds the distribution for sizes (i, j); recursion on the largest observation
    prev = [np.ones(1) for _ in range(n + 1)]  # i = 0
    for i in range(1, m + 1):
        cur = [np.ones(1)]
        for j in range(1, n + 1):
            a = np.concatenate([np.zeros(j), prev[j]])  # largest is from the first sample: U += j
            b = np.concatenate([cur[j - 1], np.zeros(i)])
            cur.append((i * a + j * b) / (i + j))
        prev = cur
    return np.cumsum(prev[n])


def _order_interval(values, cdf, level, normal_c=None):
    """Interval [v(c), v(M-c+1)] of sorted ``values`` with the largest c such that P(stat <= c-1) <= (1-L)/2."""
    v = np.sort(values)
    alpha2 = (1.0 - level) / 2.0
    if cdf is not None:
        ok = np.flatnonzero(cdf <= alpha2 + 1e-12)
        if ok.size == 0:
            return np.nan, np.nan, f"too few values for a {100 * level:g} % interval"
        c = int(ok[-1]) + 1
        note = f"exact; achieved level {100 * (1 - 2 * cdf[c - 1]):.1f} %"
    else:
        c = max(int(np.floor(normal_c)), 1)
        note = "normal approximation of the rank statistic"
    return float(v[c - 1]), float(v[v.size - c]), note


def hodges_lehmann_paired(d, level) -> Fit:
    r"""Hodges-Lehmann median difference and its Wilcoxon signed-rank interval [3]_.

    .. math:: \hat\theta = \operatorname{median}_{i \le j} \frac{d_i + d_j}{2}, \qquad
       [W_{(c)},\ W_{(M+1-c)}],\ M = n(n+1)/2

    with :math:`W` the sorted Walsh averages and :math:`c` the largest integer
    with :math:`P(T^+ \le c-1) \le (1-L)/2` under the exact null
    distribution (n <= 400; normal approximation above).  With ties the stated
    level is approximate.  Too few pairs for the level give NaN bounds.
    """
    d = np.asarray(d, float)
    n = d.size
    if n == 0:
        return Fit(np.nan, np.nan, np.nan, np.nan, np.nan, note="no complete pair")
    i, j = np.triu_indices(n)
    walsh = (d[i] + d[j]) / 2.0
    m = walsh.size
    if n <= _EXACT_SIGNED_RANK:
        lo, hi, note = _order_interval(walsh, _signed_rank_cdf(n), level)
    else:
        z = stats.norm.ppf(0.5 + level / 2.0)
        lo, hi, note = _order_interval(walsh, None, level, m / 2.0 - z * np.sqrt(n * (n + 1) * (2 * n + 1) / 24.0))
    return Fit(float(np.median(walsh)), np.nan, np.nan, lo, hi, note=note)


def hodges_lehmann_shift(x_test, x_ref, level) -> Fit:
    r"""Hodges-Lehmann shift (test - reference) of two independent samples, Mann-Whitney interval [3]_.

    .. math:: \hat\Delta = \operatorname{median}_{i,j}(x_i - y_j), \qquad [D_{(c)},\ D_{(mn+1-c)}]

    with :math:`c` the largest integer with :math:`P(U \le c-1) \le (1-L)/2`
    (exact for m n <= 20000; normal approximation above).
    """
    x, y = np.asarray(x_test, float), np.asarray(x_ref, float)
    if x.size == 0 or y.size == 0:
        return Fit(np.nan, np.nan, np.nan, np.nan, np.nan, note="a group has no value")
    diffs = (x[:, None] - y[None, :]).ravel()
    m, n = x.size, y.size
    if m * n <= _EXACT_RANK_SUM:
        lo, hi, note = _order_interval(diffs, _rank_sum_cdf(m, n), level)
    else:
        z = stats.norm.ppf(0.5 + level / 2.0)
        lo, hi, note = _order_interval(diffs, None, level, m * n / 2.0 - z * np.sqrt(m * n * (m + n + 1) / 12.0))
    return Fit(float(np.median(diffs)), np.nan, np.nan, lo, hi, note=note)
