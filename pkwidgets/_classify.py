"""Stage 1 of the engine: classify every sample and apply the BLQ rules by position.

Arrays here are samples-major (samples x profiles), the layout of every stage
(see :func:`pkwidgets.engine.nca_arrays`).  A BLQ sample is *before* the first
measurable concentration, *between* measurable ones or *after* the last, and
the rule for its position (:class:`pkwidgets.BLQRules`) replaces it by 0, by
the LLOQ or half of it, or leaves it out (status ``BLQ_MISSING_*``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .blq import BLQRules
from .qc import SampleStatus

__all__ = ["ChunkSamples", "ClassifiedSamples", "SampleValueError", "classify_samples", "rule_value"]


@dataclass
class ChunkSamples:
    """The per-sample inputs of one chunk, samples x profiles (contiguous copies)."""

    time: np.ndarray
    conc: np.ndarray
    blq: np.ndarray
    lloq: np.ndarray      # a transposed view (may be a broadcast scalar)
    exclude: np.ndarray

    @classmethod
    def from_profiles(cls, arrays) -> "ChunkSamples":
        """Transpose a chunk of :class:`pkwidgets._inputs.ProfileArrays` to samples x profiles."""
        t, c, blq, excl = (np.ascontiguousarray(a.T) for a in (arrays.time, arrays.conc, arrays.blq,
                                                                arrays.exclude))
        return cls(t, c, blq, arrays.lloq.T, excl)


@dataclass
class ClassifiedSamples:
    """What each sample is, after the BLQ rules (samples x profiles unless noted)."""

    status: np.ndarray        # int8 SampleStatus codes, updated by later stages
    present: np.ndarray       # a sample, not padding
    before_dose: np.ndarray   # sampled at a negative time
    value: np.ndarray         # concentration after the BLQ rules; NaN = not usable
    usable: np.ndarray        # enters the areas (time >= 0 and a value)
    measured: np.ndarray      # a measured positive concentration (not BLQ, not substituted)


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


def rule_value(rule, lloq, where_mask, position):
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


def classify_samples(samples: ChunkSamples, rules: BLQRules) -> ClassifiedSamples:
    """Status of each sample (padding, before dose, missing, BLQ) and its value after the BLQ rules.

    A BLQ sample's position is judged against the first and last measured
    positive concentrations of its profile; rule ``"missing"`` gives it the
    status ``BLQ_MISSING_<position>``.
    """
    t, c, blq, lloq = samples.time, samples.conc, samples.blq, samples.lloq
    S = SampleStatus
    present = ~np.isnan(t)
    before_dose = present & (t < 0)
    after_dose = present & ~before_dose
    # padding, before dose and missing are disjoint: their codes add up to the status of each sample
    status = np.multiply(~present, S.PADDING, dtype=np.int8)
    status += np.multiply(before_dose, S.BEFORE_DOSE, dtype=np.int8)
    status += np.multiply(after_dose & np.isnan(c) & ~blq, S.MISSING_CONC, dtype=np.int8)
    is_blq = after_dose & blq
    with np.errstate(invalid="ignore"):
        measured = after_dose & ~blq & (c > 0)
    value = np.where(blq, np.nan, c)
    if is_blq.any():
        _apply_blq_rules(t, measured, is_blq, lloq, rules, value, status)
    usable = after_dose & ~np.isnan(value)
    return ClassifiedSamples(status, present, before_dose, value, usable, measured)


def _apply_blq_rules(t, measured, is_blq, lloq, rules, value, status):
    """Write the value of each BLQ sample by its position's rule into ``value``; status for rule 'missing'."""
    S = SampleStatus
    t_first = np.min(np.where(measured, t, np.inf), axis=0)
    t_last = np.max(np.where(measured, t, -np.inf), axis=0)
    for position, mask, code in (
        ("before", is_blq & (t < t_first), S.BLQ_MISSING_BEFORE),
        ("after", is_blq & (t > t_last) & np.isfinite(t_last), S.BLQ_MISSING_AFTER),
        ("between", is_blq & (t > t_first) & (t < t_last), S.BLQ_MISSING_BETWEEN),
    ):
        if not mask.any():
            continue
        rule = getattr(rules, position)
        np.copyto(value, rule_value(rule, lloq, mask, position), where=mask)
        if rule == "missing":
            status[mask] = code
