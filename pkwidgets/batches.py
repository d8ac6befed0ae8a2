"""The engine over batches of profiles of similar length, results gathered by profile id.

:func:`run_batches` pads each batch (:meth:`pkwidgets.padding.ProfilePadding.batches`)
only to its own longest profile, applies recorded terminal-phase choices to
the batch, runs :func:`pkwidgets.nca_arrays`, and writes every output back
to its profile id (parameters, flags) or to its flat sample position (status,
lambda-z membership, exclusions).  The results do not depend on the batches:
the engine treats every profile on its own and NaN padding is not data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .engine import CHUNK, SampleValueError, nca_arrays
from .replay import apply_selections

__all__ = ["run_batches", "BatchRun"]


@dataclass
class BatchRun:
    """Engine outputs of the whole study, by profile id and flat sample position."""

    params: dict
    flags: dict
    status: np.ndarray  # flat, one per placed sample
    lambda_z_used: np.ndarray  # flat
    exclude: np.ndarray  # flat, after recorded choices
    terminal: np.ndarray  # (profiles, 2), NaN rows automatic
    partial_bounds: dict
    settings: dict
    selection: dict | None


def _take(value, ids):
    """A per-profile option for the profiles ``ids``: arrays are sliced, scalars kept."""
    return value[ids] if isinstance(value, np.ndarray) and value.ndim >= 1 else value


def _partial_for(partial, ids):
    if isinstance(partial, dict):
        return {name: (_take(np.asarray(s) if np.ndim(s) else s, ids), _take(np.asarray(e) if np.ndim(e) else e, ids))
                for name, (s, e) in partial.items()}
    return partial


def _one_batch(pad, flat, ids, per_profile, terminal, options, key_texts, record):
    """Engine inputs of one batch, recorded choices applied; the engine result and the replay."""
    arrays = {k: pad.array(flat[k], ids) for k in ("time", "conc", "blq", "lloq", "exclude")}
    term = terminal if isinstance(terminal, str) or np.ndim(terminal) == 1 else terminal[ids]
    replay = None
    if record is not None:
        replay = apply_selections(record, [key_texts[i] for i in ids], arrays["time"], arrays["conc"],
                                  arrays["blq"], arrays["exclude"], term, lloq=arrays["lloq"],
                                  blq_rules=options.blq_rules, auc_method=options.auc_method)
        term, arrays["exclude"] = replay[0], replay[1]
    first = per_profile.get("first_dose")
    res = nca_arrays(arrays["time"], arrays["conc"], dose=_take(per_profile["dose"], ids), route=options.route,
                     first_dose=None if first is None else first[ids],
                     duration=_take(per_profile["duration"], ids), tau=_take(per_profile["tau"], ids),
                     auc_method=options.auc_method, terminal=term, exclude=arrays["exclude"], blq=arrays["blq"],
                     lloq=arrays["lloq"], partial=_partial_for(options.partial, ids), blq_rules=options.blq_rules,
                     qc=options.qc, lambda_z_rule=options.lambda_z_rule)
    return res, arrays["exclude"], term, replay


def run_batches(pad, flat, per_profile, terminal, options, key_texts, record=None) -> BatchRun:
    """Run the engine batch by batch and gather the outputs by profile id.

    Parameters
    ----------
    pad : ProfilePadding
    flat : dict of flat arrays ``time``, ``conc``, ``blq``, ``lloq``, ``exclude``
    per_profile : dict of (profiles,) arrays or None: ``dose``, ``duration``, ``tau``
    terminal : "auto", (start, end) or (profiles, 2) array
    options : NCAOptions
    key_texts : list of canonical key tuples, one per profile id
    record : SelectionRecord, optional

    Raises
    ------
    SampleValueError
        With the profile index made global (a profile id).
    """
    P = pad.shape[0]
    out = None
    for ids in pad.batches(CHUNK):
        try:
            res, excl, term, replay = _one_batch(pad, flat, ids, per_profile, terminal, options, key_texts, record)
        except SampleValueError as exc:
            raise SampleValueError(exc.template, int(ids[exc.profile]), exc.sample) from None
        out = out or _empty(res, P, len(pad.order), record is not None)
        _gather(out, res, excl, term, replay, ids, pad)
    return out


def _empty(res, P, S, with_record) -> BatchRun:
    return BatchRun(
        params={k: np.full(P, np.nan, dtype=v.dtype) for k, v in res.items()},
        flags={k: np.zeros(P, dtype=v.dtype) for k, v in res.flags.items()},
        status=np.zeros(S, dtype=res.status.dtype), lambda_z_used=np.zeros(S, dtype=bool),
        exclude=np.zeros(S, dtype=bool), terminal=np.full((P, 2), np.nan),
        partial_bounds={k: (np.full(P, np.nan), np.full(P, np.nan)) for k in res.partial_bounds},
        settings=dict(res.settings),
        selection={"stale": np.zeros(P, bool), "applied": np.zeros(P, bool), "fingerprints": [None] * P,
                   "problems": {}} if with_record else None)


def _gather(out: BatchRun, res, excl, term, replay, ids, pad):
    for k, v in res.items():
        out.params[k][ids] = v
    for k, v in res.flags.items():
        out.flags[k][ids] = v
    for k, (s, e) in res.partial_bounds.items():
        out.partial_bounds[k][0][ids], out.partial_bounds[k][1][ids] = s, e
    pad.into_flat(out.status, res.status, ids)
    pad.into_flat(out.lambda_z_used, res.lambda_z_used, ids)
    pad.into_flat(out.exclude, excl, ids)
    if not isinstance(term, str):
        out.terminal[ids] = np.broadcast_to(np.asarray(term, dtype=np.float64), (len(ids), 2))
    if replay is not None:
        sel = out.selection
        sel["stale"][ids], sel["applied"][ids] = replay[2], replay[3]
        for i, fp in zip(ids, replay[4]):
            sel["fingerprints"][i] = fp
        sel["problems"].update(replay.problems)
