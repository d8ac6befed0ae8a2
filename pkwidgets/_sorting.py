"""Between stages 2 and 3: the dose-time point joined to the samples, sorted by time, unusable last.

Row 0 of the joined arrays is the dose-time point; each profile (column) is
then ordered by time with the samples that do not enter the areas moved to
the end (their time and value set to NaN), so that stage 3 reads segments
between neighbouring rows.  ``destinations`` maps the input samples to their
sorted places.
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
    destinations: np.ndarray  # (rows, profiles): flattened sorted position of each cell of the joined arrays
    n_usable: np.ndarray    # (profiles,) number of usable rows
    times_sorted: np.ndarray  # (profiles,) bool: input samples were not in time order


def sort_samples(samples: ChunkSamples, classified: ClassifiedSamples, anchor: DoseTimePoint) -> SortedSamples:
    """Join the dose-time point to the samples and order each profile by time.

    Each cell is written to its sorted place (a scatter by the destinations
    of :func:`_destinations`); the usable cells of a profile are its first
    ``n_usable`` sorted rows.
    """
    t, present = samples.time, classified.present
    P = t.shape[1]
    T = np.concatenate([np.zeros((1, P)), t], axis=0)
    U = np.concatenate([(anchor.added & ~np.isnan(anchor.conc))[None, :], anchor.usable], axis=0)
    dest, n_usable, Ts = _destinations(T, U)
    unusable = np.arange(T.shape[0])[:, None] >= n_usable
    np.copyto(Ts, np.nan, where=unusable)
    Vs = _scatter(np.concatenate([anchor.conc[None, :], classified.value], axis=0), dest)
    np.copyto(Vs, np.nan, where=unusable)
    Xs = np.zeros(T.shape, dtype=bool)
    Xs.reshape(-1)[dest[1:].reshape(-1)] = samples.exclude.reshape(-1)
    added = np.zeros(T.shape, dtype=bool)
    added.reshape(-1)[dest[0]] = True
    # a present sample after padding, or earlier than the present sample before it: input not in time order
    # (neighbours of np.where(present, t, inf) decreasing, which includes neighbours of np.where(usable, t, nan))
    times_sorted = (present[1:] & (~present[:-1] | (t[1:] < t[:-1]))).any(axis=0)
    return SortedSamples(Ts, Vs, ~unusable, Xs, added, dest, n_usable, times_sorted)


def _scatter(a, dest):
    """``a`` with each cell written to its flat destination ``dest``."""
    out = np.empty(a.shape, dtype=a.dtype)
    out.reshape(-1)[dest.reshape(-1)] = a.reshape(-1)
    return out


def _destinations(T, U):
    """Flat sorted position of every cell, the number of usable cells per profile, and T sorted.

    The order is the stable argsort of T with the unusable cells (U False)
    moved to the end.  Profiles whose usable times already increase (the
    usual case) are ordered by a stable partition, O(samples); only the
    others are sorted.  Both give exactly what
    ``np.argsort(np.where(U, T, inf), axis=0, kind="stable")`` gives.
    """
    M, P = T.shape
    rows = np.arange(M)[:, None]
    profiles = np.arange(P)
    nu = running_count(U)  # usable samples up to and including each row
    n_usable = nu[-1].copy()
    dest = np.where(U, nu - 1, n_usable + rows - nu)  # usable first, each group in input order
    dest *= P
    dest += profiles
    Ts = _scatter(T, dest)
    out_of_order = np.flatnonzero(((Ts[1:] <= Ts[:-1]) & (rows[1:] < n_usable)).any(axis=0))
    if out_of_order.size:
        key = np.where(U[:, out_of_order], T[:, out_of_order], np.inf)
        order = np.argsort(key, axis=0, kind="stable")
        Ts[:, out_of_order] = np.take_along_axis(T[:, out_of_order], order, axis=0)
        sorted_row = np.empty_like(order)
        np.put_along_axis(sorted_row, order, np.broadcast_to(rows, order.shape), axis=0)
        dest[:, out_of_order] = sorted_row * P + out_of_order
    return dest, n_usable, Ts


def running_count(mask):
    """Number of True values down axis 0 up to each row (as ``np.cumsum(mask, axis=0)``)."""
    out = np.empty(mask.shape, dtype=np.intp)
    out[0] = mask[0]
    for i in range(1, mask.shape[0]):
        np.add(out[i - 1], mask[i], out=out[i])
    return out
