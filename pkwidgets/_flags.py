"""Stage 7 of the engine: reviewer flags, the reported values, and the status of every input sample.

Flags are named in :data:`pkwidgets.qc.FLAGS`.  Reported values are NaN for
a profile without a measured positive concentration, and NaN with the flag
``nonfinite_result`` where a value overflowed to +-inf (an extreme
concentration, or SWING with CMIN 0): an infinite number is never reported.
"""

from __future__ import annotations

import numpy as np

from ._anchor import DoseTimePoint
from ._classify import ChunkSamples, ClassifiedSamples
from ._exposure import Exposure
from ._sorting import SortedSamples
from ._terminal import TerminalPhase
from .qc import FLAGS, QCThresholds, SampleStatus
from .terminal_flags import (back_extrapolation_high, fit_starts_at_first_sample, half_life_interval_wide,
                             terminal_phase_ambiguous)

__all__ = ["review_flags", "reported_values", "sample_status"]


def review_flags(values: dict, stage_flags: dict, exposure: Exposure, terminal: TerminalPhase,
                 anchor: DoseTimePoint, samples: ChunkSamples, qc: QCThresholds, route: str, tau) -> dict:
    """Every flag of :data:`~pkwidgets.qc.FLAGS`, in its order: the stages' and the QC thresholds'."""
    has_pos, fit = exposure.measurable, terminal.fit
    flags = {name: np.zeros(has_pos.shape, dtype=bool) for name in FLAGS}
    flags.update(stage_flags)
    nofit = has_pos & np.isnan(terminal.lamz)
    with np.errstate(invalid="ignore"):
        flags["no_measurable"] = ~has_pos
        flags["no_lambda_z"] = nofit
        flags["few_points"] = has_pos & ~nofit & (fit.npoints < qc.min_points)
        flags["r2adj_low"] = (fit.r2adj < qc.min_r2adj)
        flags["extrapolation_high"] = values["AUCPEO"] > qc.max_extrapolated_pct
        flags["span_short"] = values["LAMZSPN"] < qc.min_span
        predose = np.where((route == "iv-bolus") | ~np.isnan(tau), np.nan, anchor.trough)
        flags["predose_high"] = predose > qc.max_predose_pct / 100.0 * values["CMAX"]
    flags.update(_terminal_review(values, terminal, qc, route))
    flags["manual_terminal"] = terminal.manual
    flags["points_excluded"] = (samples.exclude & anchor.usable).any(axis=0)
    return flags


def _terminal_review(values: dict, terminal: TerminalPhase, qc: QCThresholds, route: str) -> dict:
    """Review conditions on the terminal phase (:mod:`pkwidgets.terminal_flags`)."""
    lamzhl = values["LAMZHL"]
    with np.errstate(divide="ignore", invalid="ignore"):
        other_hl = np.log(2.0) / terminal.lamz_other
        lower, upper = values["LAMZHL_LOWER95"], values["LAMZHL_UPPER95"]
    has_fit = ~np.isnan(lamzhl)
    return {
        "lambda_z_from_first_sample": ~terminal.manual & fit_starts_at_first_sample(
            values["LAMZLL"], terminal.first_time, route != "extravascular"),
        "back_extrapolation_high": back_extrapolation_high(values.get("AUCPBEO", np.nan * lamzhl),
                                                           qc.max_back_extrapolated_pct),
        "terminal_phase_ambiguous": ~terminal.manual & has_fit & terminal_phase_ambiguous(
            lamzhl, other_hl, qc.max_rule_disagreement),
        "half_life_interval_wide": has_fit & (terminal.fit.npoints >= 3) & half_life_interval_wide(
            lower, np.where(np.isnan(upper), np.inf, upper), qc.max_half_life_ratio),
    }


def reported_values(values: dict, codes, measurable):
    """``{code: values}`` for ``codes`` in order, NaN without a measurable concentration or where +-inf.

    Returns the values and the per-profile ``nonfinite_result`` flag.
    """
    out = {}
    nonfinite = np.zeros(measurable.shape, dtype=bool)
    for code in codes:
        v = np.where(measurable, values[code], np.nan)
        bad = np.isinf(v)
        if bad.any():
            nonfinite |= bad
            v[bad] = np.nan
        out[code] = v
    return out, nonfinite


def sample_status(classified: ClassifiedSamples, ordered: SortedSamples, exposure: Exposure,
                  terminal: TerminalPhase):
    """Status and lambda-z membership of each input sample, profiles x samples (input order)."""
    status = classified.status
    with np.errstate(invalid="ignore"):
        after_last = ordered.usable & (ordered.time > exposure.tlst) & ~ordered.added
    back = ordered.destinations[1:]  # flattened sorted position of each input sample
    used_in = np.ascontiguousarray(terminal.fit.used).reshape(-1).take(back)
    late = after_last.reshape(-1).take(back)
    status[late & (status == SampleStatus.USED)] = SampleStatus.AFTER_TLAST
    status[~exposure.measurable & (status == SampleStatus.USED) & classified.present] = SampleStatus.NO_MEASURABLE
    return np.ascontiguousarray(status.T), np.ascontiguousarray(used_in.T)
