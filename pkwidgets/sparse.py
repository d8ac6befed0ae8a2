r"""Sparse (destructive or batch) sampling: the mean profile of a group and the AUC of that mean.

In toxicokinetic and paediatric studies each animal gives one or a few samples,
so no individual profile exists.  Per group and nominal time :math:`t_i` the
mean :math:`\bar C_i` and variance :math:`s_i^2` of the :math:`n_i` values are
taken; the AUC of the mean profile by the linear trapezoid is

.. math::
    \widehat{AUC} = \sum_i w_i \bar C_i, \quad
    w_0 = \frac{t_1 - t_0}{2},\; w_i = \frac{t_{i+1} - t_{i-1}}{2},\; w_m = \frac{t_m - t_{m-1}}{2},

and, with different animals at each time (Bailer, J Pharmacokinet Biopharm
1988;16:303-309; from memory),

.. math:: \widehat{Var}(\widehat{AUC}) = \sum_i w_i^2 s_i^2 / n_i .

When some animals are sampled at more than one time the means are correlated:
:math:`Cov(\bar C_i, \bar C_j) = r_{ij}\sigma_{ij}/(n_i n_j)`, :math:`r_{ij}` the
animals sampled at both times, so

.. math:: \widehat{Var} = \sum_i \sum_j w_i w_j\, r_{ij}\, s_{ij} / (n_i n_j),

with :math:`s_{ij}` the sample covariance (divisor :math:`r_{ij}-1`) over the
animals sampled at both times.  This is the extension of Bailer's method to
several samples per animal of Nedelman, Gibiansky & Lau (Pharm Res 1995;
from memory); the covariance estimator is written out here from the formula
above.  With every animal sampled at every time it equals the standard error
of the mean of the individual trapezoidal AUCs (tested).

The confidence interval is :math:`\widehat{AUC} \pm z_{1-\alpha/2}\,SE` with
the normal quantile, as Bailer proposed.  ``ci_method="t-satterthwaite"``
(one sample per animal only) uses a t quantile with Satterthwaite's degrees of
freedom :math:`(\sum_i v_i)^2 / \sum_i v_i^2/(n_i - 1)`, :math:`v_i = w_i^2 s_i^2/n_i`
(Satterthwaite, Biometrics Bulletin 1946; its use here recalled from Nedelman et al.).

BLQ rules (stated in ``settings``, each sample listed in ``samples``):
``"zero"`` (default; common practice, no source) counts a BLQ value as 0 in the
mean; ``"half-lloq"`` as LLOQ/2 (needs an ``lloq`` column); ``"missing"`` leaves
it out (n at that time falls).  AUCLST runs from the dose (concentration
``dose_time_conc`` when no sample is at time 0; None starts at the first
nominal time) to the last time with a positive mean.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from ._sparse_data import SparseResult, read_sparse_table

__all__ = ["SparseResult", "nca_sparse", "sparse_auc_arrays", "trapezoid_weights"]

BLQ_OPTIONS = ("zero", "half-lloq", "missing")
CI_METHODS = ("normal", "t-satterthwaite")


def trapezoid_weights(t):
    """Linear-trapezoid weights: ``sum(w * c)`` equals the trapezoid area of ``c`` over ``t``.

    Examples
    --------
    >>> trapezoid_weights([0.0, 1.0, 3.0, 7.0]).tolist()
    [0.5, 1.5, 3.0, 2.0]
    """
    t = np.asarray(t, dtype=float)
    w = np.zeros_like(t)
    if t.size > 1:
        d = np.diff(t) / 2.0
        w[:-1] += d
        w[1:] += d
    return w


def sparse_auc_arrays(time, conc, *, dose_time_conc=0.0):
    r"""AUC of the mean profile and its variance, for many studies at once.

    Parameters
    ----------
    time : array_like, shape (T,)
        Strictly increasing nominal times.
    conc : ndarray, shape (..., T, A)
        Concentration of animal ``a`` at time ``i``; NaN where not sampled.
        Leading axes are independent studies or groups.
    dose_time_conc : float or None
        Mean concentration at time 0 (no variance) used when ``time[0] > 0``;
        None starts the area at ``time[0]``.

    Returns
    -------
    dict
        ``auc``, ``var`` (shape ``...``), ``mean``, ``n``, ``sd`` (shape ``..., T``),
        ``weights`` (T,), ``repeated`` (bool: some animal at two times) and
        ``shared_one`` (bool: some pair of times shares exactly one animal, whose
        covariance cannot be estimated; ``var`` is NaN there).

    Examples
    --------
    >>> c = np.array([[1.0, 3.0, np.nan, np.nan], [np.nan, np.nan, 2.0, 4.0]])  # 2 times x 4 animals
    >>> r = sparse_auc_arrays([1.0, 2.0], c, dose_time_conc=None)
    >>> float(r["auc"]), float(r["var"])  # 0.5 * (2 + 3); 0.25 * (2/2 + 2/2)
    (2.5, 0.5)
    """
    t = np.asarray(time, dtype=float)
    x = np.asarray(conc, dtype=float)
    if x.shape[-2] != t.size or np.any(np.diff(t) <= 0):
        raise ValueError(f"time must be strictly increasing with one entry per row of conc; got {t.tolist()} "
                         f"for conc of shape {x.shape}.")
    if dose_time_conc is not None and t[0] > 0:
        w = trapezoid_weights(np.r_[0.0, t])
        w0, w = w[0] * float(dose_time_conc), w[1:]
    else:
        w0, w = 0.0, trapezoid_weights(t)
    m = ~np.isnan(x)
    x0 = np.where(m, x, 0.0)
    mf = m.astype(float)
    n = mf.sum(-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = x0.sum(-1) / n
        r = mf @ np.swapaxes(mf, -1, -2)  # animals sampled at both times
        sxy = x0 @ np.swapaxes(x0, -1, -2)
        sx = x0 @ np.swapaxes(mf, -1, -2)  # [i, j]: sum of x_i over animals also sampled at j
        cov = (sxy - sx * np.swapaxes(sx, -1, -2) / r) / (r - 1.0)
        cov = np.where(r > 0, cov, 0.0)
        sd = np.sqrt(np.diagonal(cov, axis1=-2, axis2=-1))
        term = w[:, None] * w[None, :] * r * cov / (n[..., :, None] * n[..., None, :])
        var = np.where(r > 0, term, 0.0).sum((-1, -2))
    off = ~np.eye(t.size, dtype=bool)
    repeated = bool((r[..., off] > 0).any())
    shared_one = (r == 1) & off
    var = np.where(shared_one.any((-1, -2)), np.nan, var)
    return dict(auc=w0 + (w * mean).sum(-1), var=var, mean=mean, n=n, sd=sd, weights=w, repeated=repeated,
                shared_one=shared_one.any((-1, -2)))


def satterthwaite_df(weights, sd, n):
    r"""Satterthwaite degrees of freedom of :math:`\sum_i w_i^2 s_i^2 / n_i` (independent times)."""
    v = np.asarray(weights) ** 2 * np.asarray(sd) ** 2 / np.asarray(n)
    with np.errstate(invalid="ignore", divide="ignore"):
        return v.sum(-1) ** 2 / (v ** 2 / (np.asarray(n) - 1.0)).sum(-1)


def nca_sparse(data, *, group, time, conc, animal=None, lloq=None, units=None, blq="zero", dose_time_conc=0.0,
               ci_level=0.95, ci_method="normal", sep=",", encoding="utf-8") -> SparseResult:
    r"""Mean-profile NCA of sparsely sampled groups (Bailer's AUC with its standard error).

    Parameters
    ----------
    data : DataFrame or path of a CSV file
        One row per sample.
    group : str or list of str
        Columns that define a group (dose level, sex, day...): one mean profile each.
    time : str
        Nominal (planned) time after the dose: each distinct value is a time point.
    conc : str
        Concentration (BLQ text allowed).
    animal : str, optional
        Animal identifier.  None: every row is taken to be a different animal.
        When an animal is sampled at several times the covariance extension is used.
    lloq : str, optional
        LLOQ column (needed for ``blq="half-lloq"``).
    units : dict, optional
        ``time`` and ``conc`` units (default ``{"time": "h", "conc": "ng/mL"}``).
    blq : {"zero", "half-lloq", "missing"}
    dose_time_conc : float or None
        Concentration at the dose time when no sample is there (0 for an
        extravascular dose); None starts the area at the first time.
    ci_level : float
        Confidence level of the interval, in (0, 1).
    ci_method : {"normal", "t-satterthwaite"}

    Returns
    -------
    SparseResult
        ``parameters`` (one row per group: keys, CMAX, TMAX, TLST, CLST, AUCLST,
        then AUCLST_SE, AUCLST_CI_lower, AUCLST_CI_upper, the degrees of freedom
        and the variance method), ``mean_profile``, ``samples``, ``flags``,
        ``units``, ``settings``; ``to_long()``; ``group(key)``.
    """
    if blq not in BLQ_OPTIONS:
        raise ValueError(f"The 'blq' option of nca_sparse must be one of {list(BLQ_OPTIONS)}; got {blq!r}.")
    if ci_method not in CI_METHODS:
        raise ValueError(f"The 'ci_method' option of nca_sparse must be one of {list(CI_METHODS)}; got {ci_method!r}.")
    if not 0.0 < float(ci_level) < 1.0:
        raise ValueError(f"The 'ci_level' option of nca_sparse must be in (0, 1); got {ci_level!r}.")
    group = [group] if isinstance(group, str) else list(group)
    units = dict(units or {"time": "h", "conc": "ng/mL"})
    samples = read_sparse_table(data, group=group, time=time, conc=conc, animal=animal, lloq=lloq, blq=blq,
                                sep=sep, encoding=encoding)
    rows, means, flags = [], [], []
    for key, g in samples[samples["used"]].groupby(group, sort=False):
        key = key if isinstance(key, tuple) else (key,)
        res, mp, fl = _one_group(g, dose_time_conc, ci_level, ci_method)
        rows.append(dict(zip(group, key)) | res)
        means.append(mp.assign(**dict(zip(group, key))))
        flags += [[*key, f, d] for f, d in fl]
    settings = dict(analysis="sparse", group=group, columns=dict(time=time, conc=conc, animal=animal, lloq=lloq), units=units,
                    blq=blq, dose_time_conc=dose_time_conc, ci_level=float(ci_level), ci_method=ci_method,
                    animal_rule="as given" if animal else "every row a different animal",
                    method="Bailer (1988) linear-trapezoid AUC of the mean profile; normal-quantile interval"
                    if ci_method == "normal" else "Bailer (1988) with a Satterthwaite t interval")
    return SparseResult.build(rows, means, samples, flags, settings)


def _one_group(g, dose_time_conc, ci_level, ci_method):
    """Bailer's AUC over the times up to the last positive mean of one group."""
    flags = []
    times = np.sort(g["time"].unique())
    animals = g["animal"].unique()
    x = np.full((times.size, animals.size), np.nan)
    x[np.searchsorted(times, g["time"].to_numpy()), np.searchsorted(np.sort(animals), g["animal"].to_numpy())
      ] = g["value"].to_numpy()
    full = sparse_auc_arrays(times, x, dose_time_conc=dose_time_conc)
    pos = np.flatnonzero(full["mean"] > 0)
    mp = _mean_table(times, full, g)
    if pos.size == 0:
        flags.append(("no_positive_mean", "every mean is 0: AUCLST, CMAX and TMAX not computed"))
        return _empty(), mp, flags
    last = pos[-1]
    part = sparse_auc_arrays(times[: last + 1], x[: last + 1], dose_time_conc=dose_time_conc)
    mp["in_auclst"] = np.arange(times.size) <= last
    mp["weight"] = np.where(mp["in_auclst"], np.r_[part["weights"], np.zeros(times.size - last - 1)], 0.0)
    se = float(np.sqrt(part["var"]))
    if (part["n"] < 2).any():
        flags.append(("single_value_time", "a time point has fewer than 2 values: no variance there, SE not computed "
                                           "(is `time` the nominal time?)"))
        se = np.nan
    if part["shared_one"]:
        flags.append(("covariance_not_estimable", "two times share exactly one animal: SE not computed"))
    df = np.inf
    if ci_method == "t-satterthwaite":
        if part["repeated"]:
            raise ValueError("ci_method='t-satterthwaite' needs one sample per animal; this group has animals "
                             "sampled at several times: use ci_method='normal'.")
        df = float(satterthwaite_df(part["weights"], part["sd"], part["n"]))
    q = stats.norm.ppf(0.5 + ci_level / 2.0) if np.isinf(df) else stats.t.ppf(0.5 + ci_level / 2.0, df)
    i_max = int(np.argmax(full["mean"]))
    auc = float(part["auc"])
    return dict(CMAX=full["mean"][i_max], TMAX=times[i_max], CLST=full["mean"][last], TLST=times[last], AUCLST=auc,
                AUCLST_SE=se, AUCLST_CI_lower=auc - q * se, AUCLST_CI_upper=auc + q * se, AUCLST_df=df,
                variance_method="repeated-sampling covariance" if part["repeated"] else "Bailer",
                n_animals=int(animals.size)), mp, flags


def _empty():
    return dict(CMAX=np.nan, TMAX=np.nan, CLST=np.nan, TLST=np.nan, AUCLST=np.nan, AUCLST_SE=np.nan,
                AUCLST_CI_lower=np.nan, AUCLST_CI_upper=np.nan, AUCLST_df=np.nan, variance_method="", n_animals=0)


def _mean_table(times, full, g):
    import pandas as pd

    n_blq = g.groupby("time")["blq"].sum().reindex(times).to_numpy()
    return pd.DataFrame({"time": times, "n": full["n"].astype(int), "n_blq": n_blq.astype(int),
                         "mean": full["mean"], "sd": full["sd"], "se": full["sd"] / np.sqrt(full["n"]),
                         "in_auclst": False, "weight": 0.0})
