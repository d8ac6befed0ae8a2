"""Input checks for the array engine: shapes, broadcasting and values no rule can read.

:func:`prepare_inputs` turns the arguments of :func:`pkwidgets.nca_arrays` into
one :class:`ProfileArrays` (profiles x samples, per-profile values as 1-D
arrays) or raises a ``ValueError``/``TypeError`` that names the argument and
the (profile, sample) position.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from .parameters import partial_code


@dataclass
class ProfileArrays:
    """Everything the stages read, profiles-major; ``window_*`` NaN where the lambda-z search is automatic."""

    time: np.ndarray            # (profiles, samples), NaN padding
    conc: np.ndarray            # (profiles, samples), NaN where missing
    blq: np.ndarray             # bool (profiles, samples), possibly a broadcast view
    lloq: np.ndarray            # (profiles, samples), possibly a broadcast view
    exclude: np.ndarray         # bool (profiles, samples): left out of the lambda-z fit
    dose: np.ndarray            # (profiles,)
    duration: np.ndarray        # (profiles,)
    tau: np.ndarray             # (profiles,), NaN without a dosing interval
    window_start: np.ndarray    # (profiles,)
    window_end: np.ndarray      # (profiles,)
    partial: list               # [(name, start (profiles,), end (profiles,))]
    first_dose: np.ndarray = None  # bool (profiles,): the interval follows the first dose (nothing before it)

    def rows(self, sl: slice) -> "ProfileArrays":
        """The profiles in ``sl`` (a chunk)."""
        cut = {f.name: getattr(self, f.name)[sl] for f in fields(self) if f.name not in ("partial", "first_dose")}
        cut["first_dose"] = None if self.first_dose is None else self.first_dose[sl]
        return ProfileArrays(**cut, partial=[(n, a[sl], b[sl]) for n, a, b in self.partial])


def prepare_inputs(time, conc, options, *, dose, duration, tau, exclude, blq, lloq, first_dose=None) -> ProfileArrays:
    """Check and broadcast the arguments of :func:`pkwidgets.nca_arrays`.

    ``duration`` and ``tau`` are per-profile arrays or None (then the scalar of
    ``options`` applies).
    """
    t = as_2d(time, "time")
    c = as_2d(conc, "conc")
    if t.shape != c.shape:
        raise ValueError(f"time has shape {t.shape} but conc has shape {c.shape}; they must match.")
    P, N = t.shape
    if N == 0:
        raise ValueError(f"time and conc have shape {t.shape}: no samples; each profile needs at least one column.")
    blq_a = per_sample(blq, t.shape, "blq", bool)
    validate_samples(t, c, blq_a)
    lloq_a = per_sample(lloq, t.shape, "lloq", np.float64)
    excl = per_sample(exclude, t.shape, "exclude", bool)
    dose_a = per_profile(dose, P, "dose", positive=True)
    dur = per_profile(options.duration if duration is None else duration, P, "duration", positive=True)
    if options.route == "iv-infusion" and np.isnan(dur).any():
        raise ValueError("route 'iv-infusion' needs duration= (the infusion time, in the time unit).")
    tau_a = per_profile(options.tau if tau is None else tau, P, "tau", positive=True)
    lo, hi = parse_terminal(options.terminal, P)
    parts = parse_partial(options.partial, P)
    first = np.zeros(P, dtype=bool) if first_dose is None else np.broadcast_to(np.asarray(first_dose, bool), (P,))
    return ProfileArrays(t, c, blq_a, lloq_a, excl, dose_a, dur, tau_a, lo, hi, parts, first)


def as_2d(a, name):
    a = np.asarray(a, dtype=np.float64)
    if a.ndim == 1:
        a = a[None, :]
    if a.ndim != 2:
        raise ValueError(f"{name} must be 1-D (one profile) or 2-D (profiles x samples); got {a.ndim}-D.")
    return a


def per_profile(value, P, name, *, positive=False, allow_none=True):
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


def per_sample(value, shape, name, dtype):
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


def validate_samples(t, c, blq):
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


def parse_terminal(terminal, P):
    """Return (lo, hi) arrays; NaN where the search is automatic."""
    lo = np.full(P, np.nan)
    hi = np.full(P, np.nan)
    if terminal is None or (isinstance(terminal, str) and terminal == "auto"):
        return lo, hi
    if isinstance(terminal, str):
        raise ValueError(f"terminal must be 'auto', a (start, end) pair or an array of pairs; got {terminal!r}.")
    if isinstance(terminal, dict):
        raise ValueError("terminal as a dict of profile key -> (start, end) needs the profile keys of a table: "
                         "use pkwidgets.nca, or give nca_arrays an array of shape (profiles, 2).")
    a = np.asarray(terminal, dtype=np.float64)
    if a.shape == (2,):
        a = np.broadcast_to(a, (P, 2))
    if a.shape != (P, 2):
        raise ValueError(f"terminal must be 'auto', (start, end) or an array of shape ({P}, 2); got shape {a.shape}.")
    bad = np.flatnonzero(~(a[:, 1] > a[:, 0]) & ~np.isnan(a).any(axis=1))
    if bad.size:
        raise ValueError(f"terminal window must have end > start; profile {bad[0]} has {tuple(a[bad[0]].tolist())}.")
    return a[:, 0].copy(), a[:, 1].copy()


def parse_partial(partial, P):
    """List of (name, start array, end array)."""
    items = partial.items() if isinstance(partial, dict) else ((None, iv) for iv in partial)
    out = []
    for name, iv in items:
        try:
            start, end = iv
        except (TypeError, ValueError):
            raise ValueError(f"each partial interval must be a (start, end) pair; got {iv!r}.") from None
        s = per_profile(start, P, "partial start", allow_none=False)
        e = per_profile(end, P, "partial end", allow_none=False)
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
