r"""Sampling design: how well a schedule lets NCA estimate what the model gives exactly.

:func:`simulate_profiles` draws virtual subjects from a
:class:`~pkwidgets.design_models.CompartmentModel` and observes them at the
sampling times of a schedule (residual error, censoring below the LLOQ).
:func:`evaluate_schedule` does so for several candidate schedules on the
same virtual subjects, runs the array engine (:func:`pkwidgets.nca_arrays`)
on each, and compares AUCLST, AUCIFO, CMAX, TMAX, LAMZHL (and AUCTAU) with
their exact values (:func:`pkwidgets.design_curves.exact_values`):

.. math:: e_i = \frac{\hat\theta_i - \theta_i}{\theta_i}

summarised per schedule by the median (bias) and the 5th-95th percentiles
(the 90 % range: precision) of :math:`100\,e_i`, with the share of profiles
where the parameter could be estimated, the share with AUCPEO > 20 % (EMA
bioequivalence guideline, 2010) and the share with each QC flag.

Subjects are simulated in blocks of ``block_size``; block ``b`` draws its
subjects from ``SeedSequence(seed, spawn_key=(b, 0))`` and the residual
errors of schedule ``s`` from ``spawn_key=(b, s + 1)`` (NumPy's documented
way to give parallel streams), so the result depends on ``seed``, ``n``
and ``block_size`` only: not on the order blocks run in, nor on where
(:func:`evaluate_schedule_dask` gives the same numbers on a Dask cluster).

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor, as_completed
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .design_curves import concentration, exact_values
from .design_models import CompartmentModel, draw_subjects
from .engine import chunk_threads, nca_arrays

__all__ = ["VirtualStudy", "simulate_profiles", "ScheduleEvaluation", "evaluate_schedule",
           "evaluate_schedule_dask", "DESIGN_CODES"]

#: Parameters compared with their exact values (AUCTAU too when the model has tau).
DESIGN_CODES = ("AUCLST", "AUCIFO", "CMAX", "TMAX", "LAMZHL")
#: AUCPEO above this share is counted (EMA 2010 bioequivalence guideline: AUC(0-t) >= 80 % of AUC(0-inf)).
AUCPEO_LIMIT = 20.0


def _check_schedule(times, name) -> np.ndarray:
    t = np.asarray(times, dtype=np.float64) if not isinstance(times, str) else np.array([np.nan])
    if t.ndim != 1 or t.size < 1 or not np.all(np.isfinite(t)) or np.any(t < 0):
        raise ValueError(f"schedule {name!r} must be a list of finite sampling times >= 0 after the dose; "
                         f"got {times!r}.")
    if np.any(np.diff(t) <= 0):
        raise ValueError(f"schedule {name!r} must have strictly increasing times (no repeats); got {times!r}.")
    return t


@dataclass
class VirtualStudy:
    """Simulated profiles of virtual subjects on one schedule.

    Attributes
    ----------
    time, conc : ndarray (subjects, samples)
        Sampling times and observed concentrations (NaN where BLQ).
    blq : ndarray of bool
        Censored observations.
    true_conc : ndarray
        The model curve at the sampling times (no residual error).
    subjects : dict of str to ndarray (subjects,)
        Individual parameters.
    model : CompartmentModel
    """

    time: np.ndarray
    conc: np.ndarray
    blq: np.ndarray
    true_conc: np.ndarray
    subjects: dict
    model: CompartmentModel

    def nca(self, **options):
        """:func:`pkwidgets.nca_arrays` of the profiles, with the model's route, dose, duration, tau and LLOQ."""
        return nca_arrays(self.time, self.conc, blq=self.blq, **_engine_options(self.model), **options)

    def exact(self, t_last=None) -> dict:
        """Exact values per subject (:func:`pkwidgets.design_curves.exact_values`)."""
        return exact_values(self.model, self.subjects, t_last)


def _engine_options(model):
    out = dict(route=model.route, dose=model.dose, lloq=model.lloq if model.lloq is not None else 0.0)
    if model.route == "iv-infusion":
        out["duration"] = model.duration  # nominal duration; variability on it is not told to NCA
    if model.tau is not None:
        out["tau"] = model.tau
    return out


def _observe(model, subjects, times, rng, *, keep_true=True):
    r"""Observed concentrations :math:`C(1 + \sigma_p z_1) + \sigma_a z_2`, censored below the LLOQ (or 0)."""
    true = concentration(model, subjects, times)
    obs = true.copy() if keep_true else true
    if model.proportional_error > 0:
        z = rng.standard_normal(obs.shape)
        z *= model.proportional_error
        z += 1.0
        obs *= z
    if model.additive_error > 0:
        z = rng.standard_normal(obs.shape)
        z *= model.additive_error
        obs += z
    blq = obs < (model.lloq if model.lloq is not None else 0.0)
    np.copyto(obs, np.nan, where=blq)
    return obs, blq, (true if keep_true else None)


def simulate_profiles(model: CompartmentModel, times, n: int, *, seed=None) -> VirtualStudy:
    """Virtual subjects of ``model`` sampled at ``times``.

    Parameters
    ----------
    model : CompartmentModel
    times : array_like (samples,)
        Sampling times after the observed dose, increasing, >= 0.
    n : int
        Number of subjects.
    seed : int or numpy.random.SeedSequence, optional
        Passed to ``numpy.random.default_rng``; subjects are drawn first,
        then the residual errors.

    Returns
    -------
    VirtualStudy

    Examples
    --------
    >>> m = CompartmentModel(route="iv-bolus", dose=1000, cl=1, v=10)
    >>> s = simulate_profiles(m, [0.5, 1, 2, 4, 8, 12, 24], 3, seed=1)
    >>> s.conc.shape
    (3, 7)
    >>> float(s.exact()["AUCIFO"][0])   # Dose / CL
    1000.0
    """
    t = _check_schedule(times, "times")
    n = _check_n(n)
    rng = np.random.default_rng(seed)
    subjects = draw_subjects(model, n, rng)
    obs, blq, true = _observe(model, subjects, t, rng)
    return VirtualStudy(np.broadcast_to(t, obs.shape).copy(), obs, blq, true, subjects, model)


def _check_n(n):
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise ValueError(f"n must be a whole number of subjects >= 1; got {n!r}.")
    return int(n)


def _relative_errors(est, exact):
    with np.errstate(divide="ignore", invalid="ignore"):
        e = (est - exact) / exact
    return np.where(exact != 0, e, np.nan)  # TMAX of an IV bolus is 0: no relative error


def _block_schedule(model, times, block, size, s_index, entropy, options):
    """One block of subjects on one schedule: relative errors per code and flag counts."""
    subjects = draw_subjects(model, size, np.random.default_rng(np.random.SeedSequence(entropy, spawn_key=(block, 0))))
    rng = np.random.default_rng(np.random.SeedSequence(entropy, spawn_key=(block, s_index + 1)))
    obs, blq, _ = _observe(model, subjects, times, rng, keep_true=False)
    with chunk_threads(1):  # the blocks already run in parallel
        res = nca_arrays(np.broadcast_to(times, obs.shape), obs, blq=blq, **_engine_options(model), **options)
    exact = exact_values(model, subjects, t_last=res["TLST"])
    codes = DESIGN_CODES + (("AUCTAU",) if model.tau is not None else ())
    errors = {code: _relative_errors(res[code], exact[code]) for code in codes}
    with np.errstate(invalid="ignore"):
        counts = {"AUCPEO > 20 %": int(np.count_nonzero(res["AUCPEO"] > AUCPEO_LIMIT))}
    counts.update({name: int(np.count_nonzero(flag)) for name, flag in res.flags.items()})
    return errors, counts


def _prepare(model, schedules, n, seed, block_size):
    if not isinstance(model, CompartmentModel):
        raise TypeError(f"model must be a CompartmentModel; got {type(model).__name__}.")
    if isinstance(schedules, dict):
        named = {str(k): _check_schedule(v, k) for k, v in schedules.items()}
    else:
        named = {f"schedule {i + 1}": _check_schedule(v, f"schedule {i + 1}") for i, v in enumerate(schedules)}
    if not named:
        raise ValueError("schedules must name at least one schedule, e.g. {'dense': [0, 0.5, 1, 2, 4, 8, 24]}.")
    n = _check_n(n)
    block_size = _check_n(block_size)
    entropy = np.random.SeedSequence(seed).entropy
    sizes = [block_size] * (n // block_size) + ([n % block_size] if n % block_size else [])
    return named, n, entropy, sizes


def evaluate_schedule(model: CompartmentModel, schedules, n: int = 100_000, *, seed=None, auc_method="linear",
                      blq_rules=None, qc=None, block_size: int = 65_536, progress=True,
                      keep_errors=False, workers=None) -> "ScheduleEvaluation":
    r"""Bias and precision of NCA on candidate sampling schedules, against the model's exact values.

    Parameters
    ----------
    model : CompartmentModel
    schedules : dict of name to times, or list of times
        Candidate sampling times after the observed dose.
    n : int
        Virtual subjects (the same ones on every schedule).
    seed : int, optional
        Seeds everything; the seed used is in ``result.settings``.
    auc_method, blq_rules, qc
        As for :func:`pkwidgets.nca_arrays`.
    block_size : int
        Subjects simulated and analysed at a time (bounds memory).
    progress : bool
        Show a ``tqdm`` progress bar over blocks and schedules.
    keep_errors : bool
        Keep every subject's relative errors in ``result.errors``.
    workers : int, optional
        Blocks run at once on a thread pool (default: the number of cores;
        NumPy releases the GIL in its loops).  The result does not depend on it.

    Returns
    -------
    ScheduleEvaluation

    Notes
    -----
    Relative error :math:`(\hat\theta - \theta)/\theta` per subject against
    :func:`pkwidgets.design_curves.exact_values`; AUCLST is compared with
    :math:`\int_0^{TLST} C`, TLST being the subject's last measurable
    sampling time.  TMAX of an IV bolus (exact 0) has no relative error.
    """
    named, n, entropy, sizes = _prepare(model, schedules, n, seed, block_size)
    options = dict(auc_method=auc_method, blq_rules=blq_rules, qc=qc)
    tasks = [(b, size, s, name) for b, size in enumerate(sizes) for s, name in enumerate(named)]
    bar = _progress(progress, len(tasks), f"{n:,} subjects x {len(named)} schedules")
    pieces = {}
    with ThreadPoolExecutor(max_workers=max(1, min(workers or os.cpu_count() or 1, len(tasks)))) as pool:
        futures = {pool.submit(_block_schedule, model, named[name], b, size, s, entropy, options): (b, name)
                   for b, size, s, name in tasks}
        try:
            for fut in as_completed(futures):
                pieces[futures[fut]] = fut.result()
                bar.update(1)
        except BaseException:
            for fut in futures:
                fut.cancel()
            raise
        finally:
            bar.close()
    return _collect(model, named, n, entropy, sizes, pieces, options, keep_errors, block_size)


def evaluate_schedule_dask(client, model: CompartmentModel, schedules, n: int = 100_000, *, seed=None,
                           auc_method="linear", blq_rules=None, qc=None, block_size: int = 65_536,
                           progress=True, keep_errors=False) -> "ScheduleEvaluation":
    """:func:`evaluate_schedule` with blocks of subjects x schedules spread over a Dask cluster.

    Parameters
    ----------
    client : distributed.Client
        A client of a running cluster (``pip install "pkwidgets[dask]"``).
    model, schedules, n, seed, ... :
        As for :func:`evaluate_schedule`; with the same ``seed`` and
        ``block_size`` the result is the same, number for number.

    Notes
    -----
    One task per (block, schedule); each worker redraws its block's subjects
    from the block's own seed, so no subject data travel, only the relative
    errors and flag counts come back.
    """
    from distributed import as_completed  # optional extra: imported only here

    named, n, entropy, sizes = _prepare(model, schedules, n, seed, block_size)
    options = dict(auc_method=auc_method, blq_rules=blq_rules, qc=qc)
    tasks = [(b, size, s, name) for b, size in enumerate(sizes) for s, name in enumerate(named)]
    futures = {client.submit(_block_schedule, model, named[name], b, size, s, entropy, options, pure=False):
               (b, name) for b, size, s, name in tasks}
    bar = _progress(progress, len(tasks), f"{n:,} subjects x {len(named)} schedules on Dask")
    pieces = {}
    try:
        for fut in as_completed(list(futures)):
            pieces[futures[fut]] = fut.result()
            bar.update(1)
    finally:
        bar.close()
    return _collect(model, named, n, entropy, sizes, pieces, options, keep_errors, block_size)


def _progress(show, total, desc):
    from tqdm.auto import tqdm

    return tqdm(total=total, desc=desc, disable=not show, unit="block")


def _collect(model, named, n, entropy, sizes, pieces, options, keep_errors, block_size):
    from .design_summary import summarise

    errors, counts = {}, {}
    for name in named:
        parts = [pieces[(b, name)] for b in range(len(sizes))]
        errors[name] = {code: np.concatenate([p[0][code] for p in parts]) for code in parts[0][0]}
        counts[name] = {k: sum(p[1][k] for p in parts) for k in parts[0][1]}
    summary, table, flags = summarise(named, errors, counts, n)
    settings = dict(n=n, seed=entropy, block_size=block_size, **{k: v for k, v in options.items() if v is not None})
    return ScheduleEvaluation(model=model, schedules={k: tuple(v.tolist()) for k, v in named.items()},
                              settings=settings, summary=summary, table=table, flags=flags,
                              errors={k: pd.DataFrame(v) for k, v in errors.items()} if keep_errors else None)


@dataclass
class ScheduleEvaluation:
    """Result of :func:`evaluate_schedule`.

    Attributes
    ----------
    summary : pandas.DataFrame
        One row per schedule and PPTESTCD: ``estimable_pct`` (profiles where
        NCA gave a value), ``median_pct`` (bias), ``p05_pct``, ``p95_pct``
        (the 90 % range of the relative error, in %).
    table : pandas.DataFrame
        One row per schedule: samples, last time, share with AUCPEO > 20 %,
        then median and 90 % range per parameter (the comparison table).
    flags : pandas.DataFrame
        Share of profiles (%) with each QC flag, one row per schedule.
    errors : dict of name to DataFrame, or None
        Every subject's relative errors (``keep_errors=True``).
    settings : dict
        n, seed, block size and NCA options of the run.
    """

    model: CompartmentModel
    schedules: dict
    settings: dict
    summary: pd.DataFrame
    table: pd.DataFrame
    flags: pd.DataFrame
    errors: dict | None = field(default=None, repr=False)

    def plot(self, codes=None):
        """Comparison figure across schedules (:func:`pkwidgets.design_summary.plot_evaluation`)."""
        from .design_summary import plot_evaluation

        return plot_evaluation(self, codes=codes)
