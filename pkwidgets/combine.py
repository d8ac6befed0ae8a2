"""Combining results of the same analysis: :func:`concat_results`.

Profile ids are renumbered so that they stay unique; the parameters, samples,
flags and engine inputs of every profile move together, so a profile looked
up by key in the combined result shows its own data.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from .result import SAMPLE_COLUMNS, NCAResult, ProfileArrays

__all__ = ["concat_results", "renumber"]


def concat_results(results) -> NCAResult:
    """Combine results of the same options and profile columns; profile ids are renumbered.

    Raises
    ------
    ValueError
        If the results differ in ``by``, options or units, or share a profile key.
    """
    results = list(results)
    if not results:
        raise ValueError("concat_results needs at least one NCAResult.")
    first = results[0]
    for r in results[1:]:
        for what in ("by", "options", "units"):
            if getattr(r, what) != getattr(first, what):
                raise ValueError(f"results differ in {what} ({getattr(first, what)!r} vs {getattr(r, what)!r}); "
                                 "only results of the same analysis can be combined.")
    shifted, offset = [], 0
    for r in results:
        shifted.append(renumber(r, offset))
        offset += int(r.parameters["profile_id"].max()) + 1 if len(r.parameters) else 0
    params = pd.concat([r.parameters for r in shifted], ignore_index=True)
    dup = params.duplicated(list(first.by), keep=False)
    if dup.any():
        raise ValueError(f"profile key(s) {params.loc[dup, list(first.by)].drop_duplicates().values.tolist()[:5]} "
                         "occur in more than one result; keys must be unique.")
    return replace(first, parameters=params,
                   samples=pd.concat([r.samples for r in shifted], ignore_index=True),
                   flags=pd.concat([r.flags for r in shifted], ignore_index=True),
                   settings={**first.settings, "combined_from": [r.settings.get("source") for r in results]},
                   arrays=_concat_arrays([r.arrays for r in shifted]))


def renumber(r: NCAResult, offset: int) -> NCAResult:
    pcol = SAMPLE_COLUMNS["profile"]
    samples = r.samples.copy()
    samples[pcol] = np.where(samples[pcol] >= 0, samples[pcol] + offset, samples[pcol])
    return replace(r, parameters=r.parameters.assign(profile_id=r.parameters["profile_id"] + offset),
                   samples=samples, flags=r.flags.assign(profile_id=r.flags["profile_id"] + offset),
                   arrays=replace(r.arrays, ids=r.arrays.ids + offset))


def _concat_arrays(parts) -> ProfileArrays:
    def per(values):
        return None if any(v is None for v in values) else np.concatenate(
            [np.broadcast_to(v, (len(p.ids),)) for v, p in zip(values, parts)])

    starts = np.cumsum([0] + [p.offsets[-1] for p in parts[:-1]])
    return ProfileArrays(
        ids=np.concatenate([p.ids for p in parts]),
        offsets=np.r_[0, np.concatenate([p.offsets[1:] + s for p, s in zip(parts, starts)])],
        **{k: np.concatenate([getattr(p, k) for p in parts]) for k in ProfileArrays.FLAT},
        terminal=np.concatenate([p.terminal for p in parts]),
        per_profile={k: per([p.per_profile.get(k) for p in parts]) for k in parts[0].per_profile},
        partial={k: (per([p.partial[k][0] for p in parts]), per([p.partial[k][1] for p in parts]))
                 for k in parts[0].partial},
        keys=[k for p in parts for k in p.keys])
