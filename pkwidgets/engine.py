r"""The array engine: NCA of many profiles at once.

:func:`nca_arrays` takes profiles x samples arrays (NaN-padded when profiles
have different numbers of samples) and returns one array per parameter.
:func:`pkwidgets.nca_profile` and :func:`pkwidgets.nca` are thin layers over
it, so a single profile, a study and a million simulated profiles go through
the same arithmetic.

The profiles are cut into chunks of :data:`CHUNK`, run on a thread pool; each
chunk is the list of stage calls in :func:`_chunk`, every stage a function of
its own module taking and returning named structures:

1. classify each sample (missing, before dose, BLQ by position) and apply
   the BLQ rules (:mod:`pkwidgets._classify`, :mod:`pkwidgets.blq`);
2. anchor at dose time: add the dose-time point where none was sampled (0
   for an extravascular single dose or an infusion, the pre-dose sample or
   CMIN of the interval at steady state, C0 for an IV bolus;
   :mod:`pkwidgets._anchor`), then sort by time with unusable samples last
   (:mod:`pkwidgets._sorting`);
3. exposure: CMAX, TMAX, CLST, TLST, TLAG and the running areas and moments
   (:mod:`pkwidgets._exposure`, :mod:`pkwidgets.auc`);
4. terminal phase: the lambda-z fit (:mod:`pkwidgets._terminal`,
   :mod:`pkwidgets.lambda_z`);
5. regimen: IV bolus C0, infusion, dosing interval and partial areas
   (:mod:`pkwidgets._regimen`);
6. derived parameters, each from its formula in the catalogue
   (:mod:`pkwidgets._derived`, :mod:`pkwidgets.parameters`);
7. QC flags (:mod:`pkwidgets.qc`), reported values and, for every input
   sample, its status (:mod:`pkwidgets._flags`).
"""

from __future__ import annotations

import contextlib
import math
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from typing import NamedTuple

import numpy as np

from ._anchor import anchor_at_dose_time
from ._classify import ChunkSamples, SampleValueError, classify_samples
from ._derived import derive_parameters
from ._docs import fill_doc
from ._exposure import measure_exposure
from ._flags import reported_values, review_flags, sample_status
from ._inputs import ProfileArrays, prepare_inputs
from ._memory import keep_heap
from ._regimen import regimen_values
from ._sorting import sort_samples
from ._terminal import fit_terminal_phase
from .options import ROUTES, NCAOptions, build_options
from .parameters import derivation_order, output_codes

__all__ = ["nca_arrays", "ArrayResult", "ROUTES", "SampleValueError"]

#: Profiles per chunk: keeps temporaries near the cache and memory bounded
#: (8192 profiles x 17 float64 ~ 1 MB per temporary).  Measured with
#: ``bench/nca_speed.py`` on 2 cores: 8192 beat 2048, 4096 and 16384 by
#: 20-40 %; 32768 was 2-4 x slower.
CHUNK = 8192
#: Threads over chunks (NumPy releases the GIL inside its loops); None = all cores.
THREADS = None
_LOCAL = threading.local()


@contextlib.contextmanager
def chunk_threads(n):
    """Within the block, :func:`nca_arrays` calls made by this thread use ``n`` threads over chunks.

    For callers that already run engine calls in parallel (``evaluate_schedule`` runs blocks of subjects on a
    thread pool): one thread per call there avoids two levels of threads contending for the cores and the GIL
    (measured with ``bench/design_speed.py``).  Results do not depend on it.
    """
    before = getattr(_LOCAL, "threads", None)
    _LOCAL.threads = n
    try:
        yield
    finally:
        _LOCAL.threads = before


class ArrayResult(dict):
    """Parameters as ``{PPTESTCD: 1-D array over profiles}``, plus the details.

    Attributes
    ----------
    flags : dict of str to ndarray of bool
        Per-profile QC flags (names in :data:`pkwidgets.qc.FLAGS`).
    status : ndarray of int8, shape (profiles, samples)
        What happened to each input sample (:class:`pkwidgets.qc.SampleStatus`).
    lambda_z_used : ndarray of bool, shape (profiles, samples)
        Input samples used in the lambda-z fit.
    partial_bounds : dict of str to (ndarray, ndarray)
        Start and end of each partial-AUC interval, per profile.
    settings : dict
        The options the result was computed with, as plain values (``route``,
        ``auc_method``, ``blq_rules``, ``qc``, ``partial`` names).
    options : NCAOptions
        The options object itself.
    """

    partial_bounds: dict
    flags: dict
    status: np.ndarray
    lambda_z_used: np.ndarray
    settings: dict
    options: NCAOptions


class _Plan(NamedTuple):
    """What every chunk of one call computes."""

    options: NCAOptions
    steady: bool          # any profile has a dosing interval: every chunk returns the steady-state codes
    codes: list           # returned codes, in order (pkwidgets.parameters.output_codes)
    derived: list         # the derived ones among them, in dependency order


def _plan(options: NCAOptions, arrays: ProfileArrays) -> _Plan:
    steady = bool(np.any(~np.isnan(arrays.tau)))
    codes = output_codes(options, partial_names=[name for name, _, _ in arrays.partial], has_tau=steady)
    wanted = set(codes)
    return _Plan(options, steady, codes, [c for c in derivation_order() if c in wanted])


class ChunkResult(NamedTuple):
    """What one chunk of profiles gives back (profiles of the chunk only)."""

    parameters: dict      # code -> (profiles,)
    flags: dict           # flag name -> (profiles,) bool
    status: np.ndarray    # (profiles, samples) int8
    lambda_z_used: np.ndarray  # (profiles, samples) bool


@fill_doc
def nca_arrays(time, conc, *, options=None, dose=None, route="extravascular", duration=None, tau=None,
               auc_method="linear", terminal="auto", exclude=None, blq=None, lloq=None, partial=(),
               blq_rules=None, qc=None, lambda_z_rule=None, first_dose=None):
    r"""Non-compartmental parameters of many profiles at once (stages: see the module docstring).

    Parameters
    ----------
    time : array_like, shape (profiles, samples) or (samples,)
        Sampling times after the dose, in one unit.  Ragged profiles are
        padded with NaN (time and conc both NaN).  Negative times are
        pre-dose samples: they are reported, not used.
    conc : array_like, same shape
        Concentrations, >= 0; NaN where missing.
    exclude : array_like of bool, same shape as ``time``, optional
        Samples left out of the lambda-z fit (they still enter the AUC).
    %(options)s

    Returns
    -------
    ArrayResult
        PPTESTCD code -> 1-D float array over profiles, in the order of
        :func:`pkwidgets.parameters.output_codes`; NaN where a value cannot be
        computed, or would be infinite (flag ``nonfinite_result``).

    Raises
    ------
    ValueError
        For shapes that do not match, infinite or negative values, duplicate
        times within a profile, missing LLOQ where a BLQ rule needs it, or an
        unknown option.

    Examples
    --------
    >>> t = np.array([0.5, 1, 2, 4, 8, 12, 24])
    >>> r = nca_arrays(t, 100 * np.exp(-0.1 * t), dose=1000, route="iv-bolus", auc_method="lin-up/log-down")
    >>> round(float(r["AUCIFO"][0]), 6)   # Dose / CL = 1000 / 1
    1000.0
    >>> nca_arrays([0, 1, 1], [0, 2, 3])
    Traceback (most recent call last):
    ...
    ValueError: time 1.0 appears twice in profile 0; each profile needs distinct sampling times (average replicates or drop one).
    """
    keep_heap()  # glibc: keep freed chunk temporaries for reuse (pkwidgets._memory); no effect on results
    opts = build_options(options, route=route, auc_method=auc_method, duration=_scalar(duration),
                         tau=_scalar(tau), terminal=terminal, partial=partial, blq_rules=blq_rules, qc=qc,
                         lambda_z_rule=lambda_z_rule)
    arrays = prepare_inputs(time, conc, opts, dose=dose, duration=_per_profile(duration), tau=_per_profile(tau),
                            exclude=exclude, blq=blq, lloq=lloq, first_dose=first_dose)
    plan = _plan(opts, arrays)

    def run(s):
        try:
            return _chunk(arrays.rows(slice(s, s + CHUNK)), plan)
        except SampleValueError as exc:  # chunk-relative profile index -> index in the input
            raise exc.shifted(s) from None

    return _result(_run_chunks(run, arrays.time.shape[0]), arrays, opts)


def _result(piece: ChunkResult, arrays: ProfileArrays, opts: NCAOptions) -> ArrayResult:
    out = ArrayResult(piece.parameters)
    out.flags = piece.flags
    out.status = piece.status
    out.lambda_z_used = piece.lambda_z_used
    out.partial_bounds = {name: (a, b) for name, a, b in arrays.partial}
    out.settings = {"route": opts.route, "auc_method": opts.auc_method, "blq_rules": opts.blq_rules.as_dict(),
                    "qc": opts.qc.as_dict(), "partial": [name for name, _, _ in arrays.partial]}
    out.options = opts
    return out


def _scalar(value):
    """A number given for ``duration``/``tau`` goes into the options; arrays and NaN do not (None)."""
    if value is None or isinstance(value, str):
        return value  # a string is left for the option check to reject
    if np.ndim(value) != 0:
        return None
    if isinstance(value, (np.integer, np.floating)):
        value = value.item()
    return None if isinstance(value, float) and math.isnan(value) else value


def _per_profile(value):
    """``duration``/``tau`` given per profile (an array), else None: the options' number applies."""
    return value if value is not None and np.ndim(value) != 0 else None


def _chunk(arrays: ProfileArrays, plan: _Plan) -> ChunkResult:
    """All stages for one chunk of profiles, samples-major inside.

    Samples-major (samples x profiles): a per-profile value broadcasts along
    the long contiguous axis and reductions over samples run over contiguous
    rows, where profiles-major arrays of 10-20 samples per row make NumPy loop
    row by row.  Inputs and the per-sample outputs are transposed once, on the
    way in and out.
    """
    options, tau = plan.options, arrays.tau
    route = options.route
    samples = ChunkSamples.from_profiles(arrays)
    classified = classify_samples(samples, options.blq_rules)
    anchor = anchor_at_dose_time(samples, classified, tau, route, options.blq_rules, options.predose_window,
                                 arrays.first_dose)
    ordered = sort_samples(samples, classified, anchor)
    exposure = measure_exposure(ordered, classified.measured, tau, route, options.auc_method)
    terminal = fit_terminal_phase(ordered, exposure, arrays.window_start, arrays.window_end, route,
                                  options.lambda_z_rule)
    regimen = regimen_values(ordered, exposure, terminal, anchor, arrays, route, plan.steady)
    values = derive_parameters({**_measured(exposure, terminal), **regimen.values},
                               {**regimen.inputs, "lambda_z_margin": terminal.margin}, plan.derived)
    stage_flags = {**anchor.flags, "times_sorted": ordered.times_sorted, **regimen.flags}
    flags = review_flags(values, stage_flags, exposure, terminal, anchor, samples, options.qc, route, tau)
    params, flags["nonfinite_result"] = reported_values(values, plan.codes, exposure.measurable)
    status, used = sample_status(classified, ordered, exposure, terminal)
    return ChunkResult(params, flags, status, used)


def _measured(exposure, terminal) -> dict:
    """Values by code that the stages measure (the rest is derived from them)."""
    fit = terminal.fit
    return {
        "CMAX": exposure.cmax, "TMAX": exposure.tmax, "CLST": exposure.clst, "TLST": exposure.tlst,
        "TLAG": exposure.tlag, "AUCLST": exposure.auclst, "AUCALL": exposure.aucall,
        "AUMCLST": exposure.aumclst, "LAMZ": terminal.lamz, "LAMZNPT": fit.npoints.astype(np.float64),
        "LAMZLL": fit.t_first, "LAMZUL": fit.t_last, "R2": fit.r2, "R2ADJ": fit.r2adj, "CORRXY": fit.corr,
    }


def _run_chunks(run, P):
    """Run ``run(start)`` over chunks of CHUNK profiles, writing into preallocated outputs.

    Chunks run on a thread pool (NumPy releases the GIL in its loops); the
    first chunk to finish allocates the outputs (every chunk returns the same
    codes and dtypes) and each chunk writes its own rows, so no list of
    pieces is held and concatenated.  Results do not depend on the number of
    threads or the chunk size; errors surface in chunk order, as in a plain
    loop.
    """
    if P <= CHUNK:
        return run(0)
    out = []
    lock = threading.Lock()

    def work(s):
        piece = run(s)
        with lock:
            if not out:
                out.append(ChunkResult(
                    {k: np.empty(P, dtype=v.dtype) for k, v in piece.parameters.items()},
                    {k: np.empty(P, dtype=v.dtype) for k, v in piece.flags.items()},
                    np.empty((P,) + piece.status.shape[1:], dtype=piece.status.dtype),
                    np.empty((P,) + piece.lambda_z_used.shape[1:], dtype=piece.lambda_z_used.dtype),
                ))
        whole = out[0]
        sl = slice(s, s + piece.status.shape[0])
        for k, v in piece.parameters.items():
            whole.parameters[k][sl] = v
        for k, v in piece.flags.items():
            whole.flags[k][sl] = v
        whole.status[sl] = piece.status
        whole.lambda_z_used[sl] = piece.lambda_z_used

    starts = range(0, P, CHUNK)
    workers = max(1, min(getattr(_LOCAL, "threads", None) or THREADS or os.cpu_count() or 1, len(starts)))
    if workers == 1:
        for s in starts:
            work(s)
    else:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            futures = [pool.submit(work, s) for s in starts]
            try:
                for f in futures:  # chunk order: the first failing chunk's error is raised
                    f.result()
            except BaseException:
                for f in futures:
                    f.cancel()
                raise
    return out[0]
