"""Rows of a study table placed into the engine's profiles x samples arrays.

:class:`ProfilePadding` orders the rows of each profile by time and gives
every row its (profile, sample) slot.  Values are kept flat (profile after
profile, in time order, no padding); :meth:`ProfilePadding.batches` groups
profiles of similar length so that each engine call is padded only to the
longest profile of its own batch: memory follows the data, and one very long
profile among many short ones does not widen them all.  Engine outputs are
mapped back onto the input rows, so that every row is accounted for.
"""

from __future__ import annotations

import numpy as np

from .errors import InputDataError

__all__ = ["ProfilePadding"]


class ProfilePadding:
    """Rows of a table placed into (profiles, samples) arrays, ordered by time within each profile.

    Parameters
    ----------
    t : ndarray (rows,)
        Sampling times (NaN for rows not placed).
    prof : ndarray of int (rows,)
        Profile id of each row (-1 for rows not placed).
    keep : ndarray of bool (rows,)
        Rows that take part.
    src : TableSource
        Names rows in errors.
    keys : DataFrame
        Profile keys, one row per profile id.
    time_column : str
        Name of the time column, for errors.

    Raises
    ------
    InputDataError
        If a profile has the same time twice (naming both lines).
    """

    def __init__(self, t, prof, keep, src, keys, time_column):
        idx = np.flatnonzero(keep)
        self.order = order = idx[np.lexsort((t[idx], prof[idx]))]
        self.profile = p_sorted = prof[order]
        self.starts = np.r_[0, np.flatnonzero(np.diff(p_sorted)) + 1]
        counts = np.diff(np.r_[self.starts, len(order)])
        self.slot = np.arange(len(order)) - np.repeat(self.starts, counts)
        self.shape = (int(prof.max()) + 1, int(counts.max()))
        self.counts = np.zeros(self.shape[0], dtype=np.int64)
        self.counts[p_sorted[self.starts]] = counts
        self.offsets = np.r_[0, np.cumsum(self.counts)]
        self.n = len(t)
        t_sorted = t[order]
        dup = (np.diff(p_sorted) == 0) & (np.diff(t_sorted) == 0)
        if dup.any():
            j = int(np.flatnonzero(dup)[0])
            a, b = order[j], order[j + 1]
            key = keys.iloc[p_sorted[j]].to_dict()
            raise InputDataError(
                f"{src.name}: profile {key} has time {t_sorted[j]:g} twice "
                f"({src.where_row(a)} and {src.where_row(b)}); keep one sample per time (or average replicates).",
                file=src.file, line=src.line(a), column=time_column, profile=key)

    def batches(self, max_profiles: int, growth: float = 2.0) -> list:
        """Profile ids in groups of similar sample count (at most ``max_profiles`` each).

        Profiles are taken in order of their count; a new group starts when
        the count exceeds ``growth`` times the first count of the group (plus
        8 samples), so padding wastes at most about half of a group's array.
        """
        order = np.argsort(self.counts, kind="stable")
        out, start = [], 0
        limit = lambda i: growth * self.counts[order[i]] + 8  # noqa: E731
        for j in range(1, len(order) + 1):
            if j == len(order) or j - start >= max_profiles or self.counts[order[j]] > limit(start):
                out.append(np.sort(order[start:j]))
                start = j
        return out

    def flat(self, values):
        """Per-row values in flat profile order (profile after profile, in time order)."""
        return values[self.order]

    def _layout(self, ids):
        pos = np.full(self.shape[0], -1, dtype=np.int64)
        pos[ids] = np.arange(len(ids))
        where = np.flatnonzero(pos[self.profile] >= 0)
        return where, pos[self.profile[where]], self.slot[where], int(self.counts[ids].max())

    def array(self, flat, ids=None):
        """Flat values (:meth:`flat`) as a (len(ids), samples) array, NaN (or False) where no sample."""
        ids = np.arange(self.shape[0]) if ids is None else ids
        where, rows, slots, width = self._layout(ids)
        shape = (len(ids), width)
        out = np.zeros(shape, dtype=bool) if flat.dtype == bool else np.full(shape, np.nan)
        out[rows, slots] = flat[where]
        return out

    def into_flat(self, flat, array, ids):
        """Write a (len(ids), samples) engine array into its places of a flat array."""
        where, rows, slots, _ = self._layout(ids)
        flat[where] = array[rows, slots]

    def per_row(self, flat, fill):
        """Flat per-sample values back onto the input rows; ``fill`` for rows not placed."""
        out = np.full(self.n, fill, dtype=np.int16 if flat.dtype != bool else bool)
        out[self.order] = flat
        return out

    def unsorted(self, t, prof, keep):
        """Per profile: were its rows out of time order in the input?"""
        idx = np.flatnonzero(keep)
        p = prof[idx]
        back = (np.diff(p) == 0) & (np.diff(t[idx]) < 0)
        out = np.zeros(self.shape[0], dtype=bool)
        out[p[1:][back]] = True
        return out

    def row_of(self, profile, sample):
        """Input row of a (profile, sample) position."""
        return int(self.order[self.starts[profile] + sample])
