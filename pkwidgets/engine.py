r"""The array engine: NCA of many profiles at once.

:func:`nca_arrays` takes profiles x samples arrays (NaN-padded when profiles
have different numbers of samples) and returns one array per parameter.
:func:`pkwidgets.nca_profile` and :func:`pkwidgets.nca` are thin layers over
it, so a single profile, a study and a million simulated profiles go through
the same arithmetic.

Steps, per chunk of profiles, all vectorised:

1. classify each sample (missing, before dose, BLQ by position) and apply
   the BLQ rules (:mod:`pkwidgets.blq`);
2. add the dose-time point where none was sampled (0 for an extravascular
   single dose or an infusion, CMIN of the interval at steady state, C0 for
   an IV bolus);
3. sort by time and move unusable samples to the end of each row;
4. CMAX, TMAX, CLST, TLST, TLAG; segment areas (:mod:`pkwidgets.auc`) and
   their running sums give AUCLST, AUCALL, AUMCLST;
5. the lambda-z search (:mod:`pkwidgets.lambda_z`) and everything derived
   from it; IV, steady-state and partial-AUC parameters;
6. QC flags (:mod:`pkwidgets.qc`) and, for every input sample, its status.
"""

from __future__ import annotations

import os
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from .auc import area_to, check_method, segment_areas, segment_is_log
from .blq import BLQRules
from .lambda_z import fit_lambda_z_samples_major
from .parameters import partial_code
from .qc import FLAGS, QCThresholds, SampleStatus

__all__ = ["nca_arrays", "ArrayResult", "ROUTES"]

ROUTES = ("extravascular", "iv-bolus", "iv-infusion")
_LN2 = np.log(2.0)
#: Profiles per chunk: keeps temporaries near the cache and memory bounded
#: (8192 profiles x 17 float64 ~ 1 MB per temporary).  Measured with
#: ``bench/nca_speed.py`` on 2 cores: 8192 beat 2048, 4096 and 16384 by
#: 20-40 %; 32768 was 2-4 x slower.
CHUNK = 8192
#: Threads over chunks (NumPy releases the GIL inside its loops); None = all cores.
THREADS = None


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
        The options the result was computed with.
    """

    partial_bounds: dict
    flags: dict
    status: np.ndarray
    lambda_z_used: np.ndarray
    settings: dict


@dataclass
class _Options:
    route: str
    method: str
    rules: BLQRules
    qc: QCThresholds
    steady: bool = False  # any profile has tau: every chunk returns the steady-state codes


def _as_2d(a, name):
    a = np.asarray(a, dtype=np.float64)
    if a.ndim == 1:
        a = a[None, :]
    if a.ndim != 2:
        raise ValueError(f"{name} must be 1-D (one profile) or 2-D (profiles x samples); got {a.ndim}-D.")
    return a


def _per_profile(value, P, name, *, positive=False, allow_none=True):
    """Broadcast a scalar or a (profiles,) array to (profiles,) floats; None -> NaN."""
    if value is None:
        if not allow_none:
            raise ValueError(f"{name} is required.")
        return np.full(P, np.nan)
    try:
        a = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be a number or an array of numbers; got {value!r}.") from None
    if a.ndim == 0:
        a = np.full(P, float(a))
    if a.shape != (P,):
        raise ValueError(f"{name} must be a scalar or have one value per profile ({P}); got shape {a.shape}.")
    if positive:
        bad = np.flatnonzero(~np.isnan(a) & ~(a > 0) | np.isinf(a))
        if bad.size:
            raise ValueError(f"{name} must be positive and finite; profile {bad[0]} has {float(a[bad[0]])!r}.")
    return a


def _per_sample(value, shape, name, dtype):
    if value is None:  # a read-only broadcast view: no (profiles x samples) allocation
        return np.broadcast_to(np.zeros((), dtype=bool) if dtype is bool else np.float64(np.nan), shape)
    a = np.asarray(value, dtype=dtype)
    if a.ndim == 1 and shape[0] == 1 and a.shape[0] == shape[1]:
        a = a[None, :]
    elif a.ndim == 1 and a.shape[0] == shape[0]:
        a = a[:, None]
    try:
        return np.broadcast_to(a, shape)
    except ValueError:
        raise ValueError(f"{name} has shape {np.shape(value)}, which does not fit samples of shape {shape}.") from None


def _validate(t, c, blq):
    """Errors for values no rule can interpret; positions are (profile, sample)."""
    def first(mask):
        p, s = np.argwhere(mask)[0]
        return int(p), int(s)

    if np.isinf(t).any():
        p, s = first(np.isinf(t))
        raise ValueError(f"time is infinite at profile {p}, sample {s}; give a finite time or drop the sample.")
    given = ~np.isnan(c) | blq
    no_time = np.isnan(t) & given
    if no_time.any():
        p, s = first(no_time)
        raise ValueError(f"time is missing at profile {p}, sample {s} although a concentration is given.")
    if np.isinf(c).any():
        p, s = first(np.isinf(c))
        raise ValueError(f"conc is infinite at profile {p}, sample {s}.")
    with np.errstate(invalid="ignore"):
        neg = (c < 0) & ~blq
    if neg.any():
        p, s = first(neg)
        raise ValueError(
            f"conc is negative ({float(c[p, s])!r}) at profile {p}, sample {s}; concentrations must be >= 0 "
            "(mark values below the limit of quantitation with blq=True instead)."
        )
    # rows whose times increase (then NaN padding) have no duplicates: sort only the others
    # (pairs of neighbours in the flattened array: one contiguous pass; pairs across rows are ignored)
    N = max(t.shape[1], 1)
    flat = np.ascontiguousarray(t).reshape(-1)
    with np.errstate(invalid="ignore"):
        back = np.flatnonzero(~((flat[1:] > flat[:-1]) | np.isnan(flat[1:])))  # not after the one before
    unsorted = np.unique(back[back % N != N - 1] // N)
    ts = np.sort(t[unsorted], axis=1)
    dup = (np.diff(ts, axis=1) == 0)
    if dup.any():
        i, s = first(dup)
        raise ValueError(
            f"time {float(ts[i, s])!r} appears twice in profile {int(unsorted[i])}; each profile needs distinct "
            "sampling times (average replicates or drop one)."
        )


def _parse_terminal(terminal, P):
    """Return (lo, hi) arrays; NaN where the search is automatic."""
    lo = np.full(P, np.nan)
    hi = np.full(P, np.nan)
    if terminal is None or (isinstance(terminal, str) and terminal == "auto"):
        return lo, hi
    if isinstance(terminal, str):
        raise ValueError(f"terminal must be 'auto', a (start, end) pair or an array of pairs; got {terminal!r}.")
    a = np.asarray(terminal, dtype=np.float64)
    if a.shape == (2,):
        a = np.broadcast_to(a, (P, 2))
    if a.shape != (P, 2):
        raise ValueError(f"terminal must be 'auto', (start, end) or an array of shape ({P}, 2); got shape {a.shape}.")
    bad = np.flatnonzero(~(a[:, 1] > a[:, 0]) & ~np.isnan(a).any(axis=1))
    if bad.size:
        raise ValueError(f"terminal window must have end > start; profile {bad[0]} has {tuple(a[bad[0]].tolist())}.")
    return a[:, 0].copy(), a[:, 1].copy()


def _parse_partial(partial, P):
    """List of (name, start array, end array)."""
    items = partial.items() if isinstance(partial, dict) else ((None, iv) for iv in partial)
    out = []
    for name, iv in items:
        try:
            start, end = iv
        except (TypeError, ValueError):
            raise ValueError(f"each partial interval must be a (start, end) pair; got {iv!r}.") from None
        s = _per_profile(start, P, "partial start", allow_none=False)
        e = _per_profile(end, P, "partial end", allow_none=False)
        if name is None:
            if np.ndim(start) or np.ndim(end):
                raise ValueError("partial intervals with per-profile ends need names: pass a dict {name: (start, end)}.")
            name = partial_code(float(start), float(end))
        elif not (isinstance(name, str) and name.startswith("AUCINT")):
            raise ValueError(f"partial interval name {name!r} must start with 'AUCINT' (e.g. 'AUCINT_early'), "
                             "the CDISC code of a partial area, so that reports recognise it.")
        if np.any(s < 0) or np.any(~(e > s)):
            raise ValueError(f"partial interval {name}: need 0 <= start < end; got ({start}, {end}).")
        out.append((name, s, e))
    return out


def nca_arrays(
    time,
    conc,
    *,
    dose=None,
    route="extravascular",
    duration=None,
    tau=None,
    auc_method="linear",
    terminal="auto",
    exclude=None,
    blq=None,
    lloq=None,
    partial=(),
    blq_rules=None,
    qc=None,
):
    r"""Non-compartmental parameters of many profiles at once.

    Parameters
    ----------
    time : array_like, shape (profiles, samples) or (samples,)
        Sampling times after the dose, in one unit.  Ragged profiles are
        padded with NaN (time and conc both NaN).  Negative times are
        pre-dose samples: they are reported, not used.
    conc : array_like, same shape
        Concentrations, >= 0; NaN where missing.
    dose : float or array_like (profiles,), optional
        Dose amount; needed for clearance, volume and dose-normalised values.
    route : {"extravascular", "iv-bolus", "iv-infusion"}
    duration : float or array_like, optional
        Infusion duration (required for ``"iv-infusion"``).
    tau : float or array_like, optional
        Dosing interval: adds AUCTAU, CMIN, CTROUGH, CAVG, FLUCP, SWING,
        CLFTAU/CLTAU and AILAMZ.
    auc_method : {"linear", "lin-up/log-down", "lin-log"}
    terminal : "auto", (start, end) or array_like (profiles, 2)
        Lambda-z window; rows of NaN mean automatic.
    exclude : array_like of bool, same shape as ``time``, optional
        Samples left out of the lambda-z fit (they still enter the AUC).
    blq : array_like of bool, same shape, optional
        True where the sample is below the LLOQ; its conc value is ignored.
    lloq : float or array_like, optional
        Lower limit of quantitation; needed by the ``"half-lloq"`` and
        ``"lloq"`` BLQ rules.
    partial : sequence of (start, end) or dict of name -> (start, end)
        Partial AUC intervals after the dose (see :func:`pkwidgets.partial_auc`);
        unnamed ones are called ``AUCINT_<start>-<end>``, names given must
        start with ``AUCINT``.
    blq_rules : BLQRules or dict, optional
    qc : QCThresholds, optional

    Returns
    -------
    ArrayResult
        ``dict`` of PPTESTCD code -> 1-D float array over profiles (NaN where
        a value cannot be computed), with ``flags``, ``status``,
        ``lambda_z_used`` and ``settings`` attributes.

    Raises
    ------
    ValueError
        For shapes that do not match, infinite or negative values, duplicate
        times within a profile, missing LLOQ where a BLQ rule needs it, or an
        unknown option.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.array([0.5, 1, 2, 4, 8, 12, 24])
    >>> c = 100 * np.exp(-0.1 * t)
    >>> r = nca_arrays(t, c, dose=1000, route="iv-bolus", auc_method="lin-up/log-down")
    >>> round(float(r["AUCIFO"][0]), 6)   # Dose / CL = 1000 / 1
    1000.0
    >>> nca_arrays([0, 1, 1], [0, 2, 3])
    Traceback (most recent call last):
    ...
    ValueError: time 1.0 appears twice in profile 0; each profile needs distinct sampling times (average replicates or drop one).
    """
    t = _as_2d(time, "time")
    c = _as_2d(conc, "conc")
    if t.shape != c.shape:
        raise ValueError(f"time has shape {t.shape} but conc has shape {c.shape}; they must match.")
    P, N = t.shape
    if N == 0:
        raise ValueError(f"time and conc have shape {t.shape}: no samples; each profile needs at least one column.")
    if route not in ROUTES:
        raise ValueError(f"route must be one of {', '.join(map(repr, ROUTES))}; got {route!r}.")
    opts = _Options(route, check_method(auc_method), BLQRules.coerce(blq_rules), qc or QCThresholds())
    blq_a = _per_sample(blq, t.shape, "blq", bool)
    _validate(t, c, blq_a)
    lloq_a = _per_sample(lloq, t.shape, "lloq", np.float64)
    excl = _per_sample(exclude, t.shape, "exclude", bool)
    dose_a = _per_profile(dose, P, "dose", positive=True)
    dur = _per_profile(duration, P, "duration", positive=True)
    if route == "iv-infusion" and np.isnan(dur).any():
        raise ValueError("route 'iv-infusion' needs duration= (the infusion time, in the time unit).")
    tau_a = _per_profile(tau, P, "tau", positive=True)
    lo, hi = _parse_terminal(terminal, P)
    parts = _parse_partial(partial, P)
    opts.steady = bool(np.any(~np.isnan(tau_a)))

    def run(s):
        sl = slice(s, min(P, s + CHUNK))
        try:
            return _chunk(t[sl], c[sl], blq_a[sl], lloq_a[sl], excl[sl], dose_a[sl], dur[sl], tau_a[sl],
                          lo[sl], hi[sl], [(n, a[sl], b[sl]) for n, a, b in parts], opts)
        except SampleValueError as exc:  # chunk-relative profile index -> index in the input
            raise exc.shifted(s) from None

    params, flags, status, used = _run_chunks(run, P)
    out = ArrayResult(params)
    out.flags = flags
    out.status = status
    out.lambda_z_used = used
    out.partial_bounds = {name: (a, b) for name, a, b in parts}
    out.settings = {
        "route": route,
        "auc_method": auc_method,
        "blq_rules": opts.rules.as_dict(),
        "qc": opts.qc.as_dict(),
        "partial": [name for name, _, _ in parts],
    }
    return out


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
                out.extend([
                    {k: np.empty(P, dtype=v.dtype) for k, v in piece[0].items()},
                    {k: np.empty(P, dtype=v.dtype) for k, v in piece[1].items()},
                    np.empty((P,) + piece[2].shape[1:], dtype=piece[2].dtype),
                    np.empty((P,) + piece[3].shape[1:], dtype=piece[3].dtype),
                ])
        params, flags, status, used = out
        sl = slice(s, s + piece[2].shape[0])
        for k, v in piece[0].items():
            params[k][sl] = v
        for k, v in piece[1].items():
            flags[k][sl] = v
        status[sl] = piece[2]
        used[sl] = piece[3]

    starts = range(0, P, CHUNK)
    workers = max(1, min(THREADS or os.cpu_count() or 1, len(starts)))
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
    return tuple(out)


class SampleValueError(ValueError):
    """A ``ValueError`` about one input sample, located by ``profile`` and ``sample`` index.

    ``template`` holds the message with ``{where}`` in place of the location,
    so that a caller that knows more (file, line, subject) can reword it.
    """

    def __init__(self, template, profile, sample):
        self.template, self.profile, self.sample = template, profile, sample
        super().__init__(template.format(where=f"profile {profile}, sample {sample}"))

    def shifted(self, offset):
        return SampleValueError(self.template, self.profile + offset, self.sample)


def _rule_value(rule, lloq, where_mask, position):
    """Substitute for BLQ samples at ``where_mask``; arrays are samples x profiles."""
    if rule == "zero":
        return 0.0
    if rule == "missing":
        return np.nan
    need = where_mask & np.isnan(lloq)
    if need.any():
        p, s = np.argwhere(need.T)[0]
        raise SampleValueError(
            f"BLQ rule {position}={rule!r} needs the LLOQ, but {{where}} has none; "
            "pass lloq= (a number, or one per profile or sample).", int(p), int(s)
        )
    return lloq * (0.5 if rule == "half-lloq" else 1.0)


def _pick(a, idx):
    """``a[idx[p], p]`` for every profile p of a samples x profiles array."""
    return a[idx, np.arange(a.shape[1])]


def _chunk(t, c, blq, lloq, excl, dose, dur, tau, lo, hi, parts, o):  # noqa: C901 - one pass, in steps
    # Work samples-major (samples x profiles): a per-profile value then broadcasts
    # along the long contiguous axis and reductions over samples run over
    # contiguous rows, where profiles-major arrays of 10-20 samples per row make
    # NumPy loop row by row.  Inputs and the per-sample outputs are transposed
    # once, on the way in and out.
    P, N = t.shape
    t, c, blq, excl = (np.ascontiguousarray(a.T) for a in (t, c, blq, excl))
    lloq = lloq.T
    S = SampleStatus
    status = np.zeros((N, P), dtype=np.int8)
    flags = {name: np.zeros(P, dtype=bool) for name in FLAGS}
    is_ss = ~np.isnan(tau)
    bolus = o.route == "iv-bolus"

    # 1. classify samples, apply BLQ rules ----------------------------------
    present = ~np.isnan(t)
    status[~present] = S.PADDING
    before_dose = present & (t < 0)
    status[before_dose] = S.BEFORE_DOSE
    usable_t = present & ~before_dose
    missing = usable_t & np.isnan(c) & ~blq
    status[missing] = S.MISSING_CONC
    isblq = usable_t & blq
    with np.errstate(invalid="ignore"):
        meas = usable_t & ~blq & (c > 0)
    t_first = np.min(np.where(meas, t, np.inf), axis=0)
    t_last = np.max(np.where(meas, t, -np.inf), axis=0)
    value = np.where(blq, np.nan, c)
    for position, mask, code in (
        ("before", isblq & (t < t_first), S.BLQ_MISSING_BEFORE),
        ("after", isblq & (t > t_last) & np.isfinite(t_last), S.BLQ_MISSING_AFTER),
        ("between", isblq & (t > t_first) & (t < t_last), S.BLQ_MISSING_BETWEEN),
    ):
        rule = getattr(o.rules, position)
        value = np.where(mask, _rule_value(rule, lloq, mask, position), value)
        if rule == "missing":
            status[mask] = code
    usable = usable_t & ~np.isnan(value)

    # 2. dose-time point ------------------------------------------------------
    at0 = usable & (t == 0)
    has0 = at0.any(axis=0)
    # the pre-dose concentration: the sample at dose time, else the latest sample
    # before the dose (a BLQ one read by the 'before' rule)
    before_blq = before_dose & blq
    pre_vals = np.where(before_blq, _rule_value(o.rules.before, lloq, before_blq, "before"), c)
    pre = before_dose & ~np.isnan(pre_vals)
    i_pre = np.argmax(np.where(pre, t, -np.inf), axis=0)
    has_pre = pre.any(axis=0)
    ctrough = np.where(has0, np.max(np.where(at0, value, -np.inf), axis=0),
                       np.where(has_pre, _pick(pre_vals, i_pre), np.nan))
    with np.errstate(invalid="ignore"):
        in_tau = usable & (t <= tau)
    cmin_tau = np.min(np.where(in_tau, value, np.inf), axis=0)
    cmin_tau = np.where(np.isfinite(cmin_tau), cmin_tau, np.nan)
    if bolus:
        status[at0] = S.BOLUS_PREDOSE
        usable &= ~at0
        c0, declining = _bolus_c0(t.T, value.T, usable.T)
        need0 = np.ones(P, dtype=bool)
        flags["c0_extrapolated"] = declining
        flags["c0_first_observed"] = ~declining & ~np.isnan(c0)
    else:
        need0 = ~has0
        # steady state: the pre-dose sample stands at dose time, else CMIN of the interval
        shifted = need0 & is_ss & has_pre
        c0 = np.where(is_ss, np.where(shifted, ctrough, cmin_tau), 0.0)
        cmin_tau = np.where(shifted, np.fmin(cmin_tau, ctrough), cmin_tau)
        flags["time0_added"] = need0 & ~is_ss
        flags["predose_shifted"] = shifted
        flags["predose_imputed"] = need0 & is_ss & ~has_pre
        cols_p = np.flatnonzero(shifted)
        status[i_pre[cols_p], cols_p] = S.USED

    # 3. sort, compact --------------------------------------------------------
    T = np.concatenate([np.zeros((1, P)), t], axis=0)
    V = np.concatenate([c0[None, :], value], axis=0)
    U = np.concatenate([(need0 & ~np.isnan(c0))[None, :], usable], axis=0)
    X = np.concatenate([np.zeros((1, P), dtype=bool), excl], axis=0)
    order = _sort_order(T, U)
    with np.errstate(invalid="ignore"):  # inf - inf between padding cells: NaN, not "out of order"
        flags["times_sorted"] = (np.diff(np.where(usable, t, np.nan), axis=0) < 0).any(axis=0) | (
            np.diff(np.where(present, t, np.inf), axis=0) < 0
        ).any(axis=0)
    M = N + 1
    flat = order * P + np.arange(P)  # positions in the flattened (M, P) arrays
    Ts = T.reshape(-1).take(flat)
    Vs = V.reshape(-1).take(flat)
    Us = U.reshape(-1).take(flat)
    Xs = X.reshape(-1).take(flat)
    added = order == 0
    Ts = np.where(Us, Ts, np.nan)
    Vs = np.where(Us, Vs, np.nan)
    nvalid = Us.sum(axis=0)
    cols = np.arange(M)[:, None]

    # 4. peak, last, lag ------------------------------------------------------
    obs = Us & ~added
    with np.errstate(invalid="ignore"):
        peak_pool = obs & np.where(is_ss, Ts <= tau, True)
        positive = obs & (Vs > 0)
    i_max = np.argmax(np.where(peak_pool, Vs, -np.inf), axis=0)
    # a profile needs one measured (not substituted) positive concentration
    has_pos = positive.any(axis=0) & meas.any(axis=0)
    CMAX = np.where(has_pos, _pick(Vs, i_max), np.nan)
    TMAX = np.where(has_pos, _pick(Ts, i_max), np.nan)
    i_last = M - 1 - np.argmax(positive[::-1], axis=0)
    CLST = np.where(has_pos, _pick(Vs, i_last), np.nan)
    TLST = np.where(has_pos, _pick(Ts, i_last), np.nan)
    i_first = np.argmax(positive, axis=0)
    TLAG = np.where(i_first > 0, _pick(Ts, np.maximum(i_first - 1, 0)), 0.0)
    TLAG = np.where(has_pos & (o.route == "extravascular"), TLAG, np.nan)

    # segments and running areas
    t1, t2, c1, c2 = Ts[:-1], Ts[1:], Vs[:-1], Vs[1:]
    seg_ok = Us[1:]
    t_switch = np.zeros(P) if bolus else TMAX
    is_log = segment_is_log(t1, c1, c2, o.method, t_switch) & seg_ok
    a_seg, m_seg = segment_areas(t1, t2, c1, c2, is_log)
    A = _running_sum(np.where(seg_ok, a_seg, 0.0))
    Mm = _running_sum(np.where(seg_ok, m_seg, 0.0))
    AUCLST = np.where(has_pos, _pick(A, i_last), np.nan)
    AUMCLST = np.where(has_pos, _pick(Mm, i_last), np.nan)
    AUCALL = np.where(has_pos, _pick(A, np.maximum(nvalid - 1, 0)), np.nan)

    # 5. lambda z -------------------------------------------------------------
    manual = ~np.isnan(lo)
    after_peak = cols >= i_max + (0 if bolus else 1)
    cand_auto = positive & ~Xs & after_peak & (cols <= i_last)
    with np.errstate(invalid="ignore"):
        eps = 1e-9 * np.maximum(1.0, np.abs(hi))
        cand_man = positive & ~Xs & (Ts >= lo - eps) & (Ts <= hi + eps)
    cand = np.where(manual, cand_man, cand_auto)
    fit = fit_lambda_z_samples_major(Ts, Vs, cand, manual)
    LAMZ = np.where(has_pos, fit.lamz, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        LAMZHL = _LN2 / LAMZ
        CLSTP = np.exp(fit.intercept - LAMZ * TLST)
        AUCIFO = AUCLST + CLST / LAMZ
        AUCIFP = AUCLST + CLSTP / LAMZ
        AUCPEO = 100.0 * (AUCIFO - AUCLST) / AUCIFO
        AUCPEP = 100.0 * (AUCIFP - AUCLST) / AUCIFP
        AUMCIFO = AUMCLST + CLST * TLST / LAMZ + CLST / LAMZ**2
        AUMCPEO = 100.0 * (AUMCIFO - AUMCLST) / AUMCIFO
        LAMZSPN = (fit.t_last - fit.t_first) / LAMZHL
        mrt_lst = AUMCLST / AUCLST
        mrt_ifo = AUMCIFO / AUCIFO

    p = {
        "CMAX": CMAX, "TMAX": TMAX, "CLST": CLST, "TLST": TLST,
        "AUCLST": AUCLST, "AUCALL": AUCALL, "AUCIFO": AUCIFO, "AUCIFP": AUCIFP,
        "AUCPEO": AUCPEO, "AUCPEP": AUCPEP, "AUMCLST": AUMCLST, "AUMCIFO": AUMCIFO,
        "AUMCPEO": AUMCPEO,
        "LAMZ": LAMZ, "LAMZHL": LAMZHL, "LAMZNPT": fit.npoints.astype(np.float64),
        "LAMZLL": fit.t_first, "LAMZUL": fit.t_last, "LAMZSPN": LAMZSPN,
        "R2": fit.r2, "R2ADJ": fit.r2adj, "CORRXY": fit.corr, "CLSTP": CLSTP,
    }
    with np.errstate(divide="ignore", invalid="ignore"):
        if o.route == "extravascular":
            p.update(TLAG=TLAG, MRTEVLST=mrt_lst, MRTEVIFO=mrt_ifo,
                     CLFO=dose / AUCIFO, CLFP=dose / AUCIFP,
                     VZFO=dose / (LAMZ * AUCIFO), VZFP=dose / (LAMZ * AUCIFP))
        else:
            half = np.where(np.isnan(dur), 0.0, dur / 2.0)
            mrt_ifo_iv = mrt_ifo - half
            clo = dose / AUCIFO
            p.update(MRTIVLST=mrt_lst - half, MRTIVIFO=mrt_ifo_iv, CLO=clo, CLP=dose / AUCIFP,
                     VZO=dose / (LAMZ * AUCIFO), VZP=dose / (LAMZ * AUCIFP), VSSO=mrt_ifo_iv * clo)
            if bolus:
                p["C0"] = np.where(has_pos, c0, np.nan)
                p["AUCPBEO"] = 100.0 * A[1] / AUCIFO
        p.update(CMAXD=CMAX / dose, AUCLSTD=AUCLST / dose, AUCIFOD=AUCIFO / dose)

    cum = _Cumulative(Ts, Vs, Us, A, is_log, TLST, CLST, AUCLST, LAMZ)

    # steady state ------------------------------------------------------------
    if o.steady:
        auctau, tau_extrap = cum.at(tau)
        CMIN = np.where(has_pos & is_ss, cmin_tau, np.nan)
        with np.errstate(divide="ignore", invalid="ignore"):
            CAVG = auctau / tau
            p.update(
                AUCTAU=auctau, CMIN=CMIN, CTROUGH=np.where(is_ss, ctrough, np.nan), CAVG=CAVG,
                FLUCP=100.0 * (CMAX - CMIN) / CAVG, SWING=(CMAX - CMIN) / CMIN,
                AILAMZ=1.0 / (1.0 - np.exp(-LAMZ * tau)),
            )
            p["CLFTAU" if o.route == "extravascular" else "CLTAU"] = dose / auctau
        flags["tau_extrapolated"] = tau_extrap & is_ss

    # partial areas -------------------------------------------------------------
    for name, start, end in parts:
        a_end, ext_end = cum.at(end)
        a_start, ext_start = cum.at(start)
        p[name] = a_end - a_start
        flags["partial_extrapolated"] |= ext_end | ext_start

    # 6. flags and sample status ---------------------------------------------------
    nofit = has_pos & np.isnan(LAMZ)
    qc = o.qc
    with np.errstate(invalid="ignore"):
        flags["no_measurable"] = ~has_pos
        flags["no_lambda_z"] = nofit
        flags["few_points"] = has_pos & ~nofit & (fit.npoints < qc.min_points)
        flags["r2adj_low"] = (fit.r2adj < qc.min_r2adj)
        flags["extrapolation_high"] = AUCPEO > qc.max_extrapolated_pct
        flags["span_short"] = LAMZSPN < qc.min_span
        predose = np.where(bolus | is_ss, np.nan, ctrough)
        flags["predose_high"] = predose > qc.max_predose_pct / 100.0 * CMAX
    flags["manual_terminal"] = manual
    flags["points_excluded"] = (excl & usable).any(axis=0)
    for k in p:
        p[k] = np.where(has_pos, p[k], np.nan)

    # status and fit mask back in input order
    with np.errstate(invalid="ignore"):
        after_last = Us & (Ts > TLST) & ~added
    back = np.empty(M * P, dtype=np.intp)  # flattened sorted position of each input sample
    back[flat.reshape(-1)] = np.arange(M * P)
    back = back.reshape(M, P)[1:]
    used_in = np.ascontiguousarray(fit.used).reshape(-1).take(back)
    late = after_last.reshape(-1).take(back)
    status[late & (status == S.USED)] = S.AFTER_TLAST
    status[~has_pos & (status == S.USED) & present] = S.NO_MEASURABLE
    return p, flags, np.ascontiguousarray(status.T), np.ascontiguousarray(used_in.T)


def _sort_order(T, U):
    """Per profile (column), the stable argsort of T with the unusable cells (U False) moved to the end.

    Profiles whose usable times already increase (the usual case) are ordered
    by a stable partition, O(samples); only the others are sorted.  Both give
    exactly what ``np.argsort(np.where(U, T, inf), axis=0, kind="stable")``
    gives.
    """
    M, P = T.shape
    rows = np.arange(M)[:, None]
    nu = _running_count(U)  # usable samples up to and including each row
    dest = np.where(U, nu - 1, nu[-1] + rows - nu)  # usable first, each group in input order
    profiles = np.arange(P)
    order = np.empty((M, P), dtype=np.intp)
    order.reshape(-1)[(dest * P + profiles).reshape(-1)] = np.repeat(np.arange(M), P)
    ts = T.reshape(-1).take(order * P + profiles)
    both_usable = rows[1:] < nu[-1]
    out_of_order = np.flatnonzero(((ts[1:] <= ts[:-1]) & both_usable).any(axis=0))
    if out_of_order.size:
        key = np.where(U[:, out_of_order], T[:, out_of_order], np.inf)
        order[:, out_of_order] = np.argsort(key, axis=0, kind="stable")
    return order


def _running_count(mask):
    """Number of True values down axis 0 up to each row (as ``np.cumsum(mask, axis=0)``)."""
    out = np.empty(mask.shape, dtype=np.intp)
    out[0] = mask[0]
    for i in range(1, mask.shape[0]):
        np.add(out[i - 1], mask[i], out=out[i])
    return out


def _running_sum(s):
    """``[0, s0, s0 + s1, ...]`` down axis 0: the additions of ``np.cumsum``, one row at a time."""
    out = np.empty((s.shape[0] + 1,) + s.shape[1:])
    out[0] = 0.0
    if s.shape[0]:
        out[1] = s[0]
    for i in range(1, s.shape[0]):
        np.add(out[i], s[i], out=out[i + 1])
    return out


def _bolus_c0(t, value, usable):
    """Back-extrapolated C0 from the first two post-dose samples (log-linear) when they decline."""
    P, N = t.shape
    key = np.where(usable & (t > 0), t, np.inf)
    o = np.argsort(key, axis=1, kind="stable")[:, :2]
    t12 = np.take_along_axis(t, o, axis=1)
    c12 = np.take_along_axis(value, o, axis=1)
    ok = np.take_along_axis(usable & (t > 0), o, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        declining = ok[:, 1] & (c12[:, 1] < c12[:, 0]) & (c12[:, 1] > 0)
        slope = (np.log(c12[:, 1]) - np.log(c12[:, 0])) / (t12[:, 1] - t12[:, 0])
        back = np.exp(np.log(c12[:, 0]) - slope * t12[:, 0])
    first = np.where(ok[:, 0], c12[:, 0], np.nan)
    return np.where(declining, back, first), declining


class _Cumulative:
    """AUC from dose time to any time x: interpolated inside the data, lambda-z beyond TLST."""

    def __init__(self, Ts, Vs, Us, A, is_log, TLST, CLST, AUCLST, LAMZ):
        self.Ts, self.Vs, self.Us, self.A = Ts, Vs, Us, A
        self.is_log = np.concatenate([is_log, np.zeros((1, Ts.shape[1]), dtype=bool)], axis=0)
        self.TLST, self.CLST, self.AUCLST, self.LAMZ = TLST, CLST, AUCLST, LAMZ

    def at(self, x):
        """Return (area, extrapolated) for x of shape (profiles,); NaN x gives NaN."""
        Ts, Vs = self.Ts, self.Vs
        M = Ts.shape[0]
        with np.errstate(invalid="ignore"):
            k = np.maximum((self.Us & (Ts <= x)).sum(axis=0) - 1, 0)
            k1 = np.minimum(k + 1, M - 1)
            seg_area, _ = area_to(x, _pick(Ts, k), _pick(Vs, k), _pick(Ts, k1), _pick(Vs, k1),
                                  _pick(self.is_log, k))
            inside = _pick(self.A, k) + seg_area
            extrap = x > self.TLST
            with np.errstate(over="ignore"):
                tail = self.AUCLST + self.CLST / self.LAMZ * -np.expm1(-self.LAMZ * (x - self.TLST))
        area = np.where(extrap, tail, inside)
        return np.where(np.isnan(x), np.nan, area), extrap
