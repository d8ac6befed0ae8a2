"""Rows of a study table placed into the engine's profiles x samples arrays.

:class:`ProfilePadding` orders the rows of each profile by time, gives every
row its (profile, sample) slot, pads shorter profiles with NaN, and maps
per-sample engine outputs back onto the input rows, so that every row is
accounted for.
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

    def array(self, values):
        """Per-row values as a (profiles, samples) array, NaN (or False) where no sample."""
        out = np.zeros(self.shape, dtype=bool) if values.dtype == bool else np.full(self.shape, np.nan)
        out[self.profile, self.slot] = values[self.order]
        return out

    def per_row(self, array, fill):
        """A (profiles, samples) array back onto the input rows; ``fill`` for rows not placed."""
        out = np.full(self.n, fill, dtype=np.int16 if array.dtype != bool else bool)
        out[self.order] = array[self.profile, self.slot]
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
