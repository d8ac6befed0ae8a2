"""Between stages 2 and 3: the dose-time point joined to the samples, sorted by time, unusable last.

Row 0 of the joined arrays is the dose-time point; each profile (column) is
then ordered by time with the samples that do not enter the areas moved to
the end (their time and value set to NaN), so that stage 3 reads segments
between neighbouring rows.  ``positions`` maps back to the input samples.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._anchor import DoseTimePoint
from ._classify import ChunkSamples, ClassifiedSamples

__all__ = ["SortedSamples", "sort_samples", "running_count"]


@dataclass
class SortedSamples:
    """Samples x profiles arrays of (samples + 1) rows, in time order per profile."""

    time: np.ndarray        # NaN where not usable
    value: np.ndarray       # NaN where not usable
    usable: np.ndarray      # bool: enters the areas (all True rows come first)
    excluded: np.ndarray    # bool: left out of the lambda-z fit by hand
    added: np.ndarray       # bool: the dose-time point (input row 0 of the joined arrays)
    positions: np.ndarray   # flattened (rows, profiles) position of each sorted cell in the joined arrays
    n_usable: np.ndarray    # (profiles,) number of usable rows
    times_sorted: np.ndarray  # (profiles,) bool: input samples were not in time order


def sort_samples(samples: ChunkSamples, classified: ClassifiedSamples, anchor: DoseTimePoint) -> SortedSamples:
    """Join the dose-time point to the samples and order each profile by time."""
    t, usable = samples.time, anchor.usable
    P = t.shape[1]
    T = np.concatenate([np.zeros((1, P)), t], axis=0)
    V = np.concatenate([anchor.conc[None, :], classified.value], axis=0)
    U = np.concatenate([(anchor.added & ~np.isnan(anchor.conc))[None, :], usable], axis=0)
    X = np.concatenate([np.zeros((1, P), dtype=bool), samples.exclude], axis=0)
    order = _sort_order(T, U)
    with np.errstate(invalid="ignore"):  # inf - inf between padding cells: NaN, not "out of order"
        times_sorted = (np.diff(np.where(usable, t, np.nan), axis=0) < 0).any(axis=0) | (
            np.diff(np.where(classified.present, t, np.inf), axis=0) < 0
        ).any(axis=0)
    flat = order * P + np.arange(P)  # positions in the flattened (rows, profiles) arrays
    Ts = T.reshape(-1).take(flat)
    Vs = V.reshape(-1).take(flat)
    Us = U.reshape(-1).take(flat)
    Xs = X.reshape(-1).take(flat)
    Ts = np.where(Us, Ts, np.nan)
    Vs = np.where(Us, Vs, np.nan)
    return SortedSamples(Ts, Vs, Us, Xs, order == 0, flat, Us.sum(axis=0), times_sorted)


def _sort_order(T, U):
    """Per profile (column), the stable argsort of T with the unusable cells (U False) moved to the end.

    Profiles whose usable times already increase (the usual case) are ordered
    by a stable partition, O(samples); only the others are sorted.  Both give
    exactly what ``np.argsort(np.where(U, T, inf), axis=0, kind="stable")``
    gives.
    """
    M, P = T.shape
    rows = np.arange(M)[:, None]
    nu = running_count(U)  # usable samples up to and including each row
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


def running_count(mask):
    """Number of True values down axis 0 up to each row (as ``np.cumsum(mask, axis=0)``)."""
    out = np.empty(mask.shape, dtype=np.intp)
    out[0] = mask[0]
    for i in range(1, mask.shape[0]):
        np.add(out[i - 1], mask[i], out=out[i])
    return out
