"""Reviewer checks (QC flags) and the status of each input sample.

Flags are raised per profile; each names its threshold and where the
threshold comes from.  Sample statuses say, for every input row, whether it
was used and, if not, why (the "nothing lost" account).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

__all__ = ["QCThresholds", "FLAGS", "SampleStatus", "STATUS_REASONS"]


@dataclass(frozen=True)
class QCThresholds:
    """Thresholds of the reviewer checks.

    Parameters
    ----------
    max_extrapolated_pct : float
        Flag AUCPEO above this.  20 %: the EMA bioequivalence guideline
        (CPMP/EWP/QWP/1401/98 Rev.1, 2010) asks that AUC(0-t) cover at least
        80 % of AUC(0-inf).
    min_r2adj : float
        Flag an adjusted R² of the lambda-z fit below this (0.80: common
        practice, no source).
    min_points : int
        Flag a lambda-z fit on fewer points (3: common practice, no source).
    min_span : float
        Flag a fit interval shorter than this many half-lives (2: common
        practice, no source).
    max_predose_pct : float
        Flag a single-dose pre-dose concentration above this share of CMAX
        (5 %: EMA 2010 bioequivalence guideline, which excludes such
        subjects from the BE evaluation).
    max_back_extrapolated_pct : float
        Flag an IV-bolus AUCPBEO above this (20 %: common practice, no source).
    max_rule_disagreement : float
        Flag the terminal phase as ambiguous when the half-life of the rule
        in force and of the comparison rule differ by more than this share of
        the adjusted-R² one (0.25: common practice, no source; the share is
        our choice).
    max_half_life_ratio : float
        Flag a 95 % half-life interval whose upper bound exceeds this multiple
        of its lower bound, or that has no upper bound (2: our choice).
    """

    max_extrapolated_pct: float = 20.0
    min_r2adj: float = 0.80
    min_points: int = 3
    min_span: float = 2.0
    max_predose_pct: float = 5.0
    max_back_extrapolated_pct: float = 20.0
    max_rule_disagreement: float = 0.25
    max_half_life_ratio: float = 2.0

    def as_dict(self) -> dict:
        return asdict(self)


#: Flag name -> (severity, message template).  ``{...}`` fields are filled
#: from the thresholds.  Severity "review" needs a reviewer's attention,
#: "info" records a rule that was applied.
FLAGS: dict[str, tuple[str, str]] = {
    "no_measurable": ("review", "no measurable concentration: parameters not computed"),
    "no_lambda_z": ("review", "lambda z not estimable (fewer than 3 declining points after CMAX, or window given has none)"),
    "few_points": ("review", "lambda z from fewer than {min_points} points"),
    "r2adj_low": ("review", "adjusted R² of the lambda-z fit below {min_r2adj}"),
    "extrapolation_high": ("review", "extrapolated share of AUCIFO above {max_extrapolated_pct}% (EMA 2010)"),
    "span_short": ("review", "lambda-z fit spans fewer than {min_span} half-lives"),
    "predose_high": ("review", "pre-dose concentration above {max_predose_pct}% of CMAX (EMA 2010)"),
    "lambda_z_from_first_sample": ("review", "IV dose: the terminal fit starts at the first sample, so the "
                                             "distribution phase may be in the fit"),
    "back_extrapolation_high": ("review", "AUCPBEO above {max_back_extrapolated_pct}% (large back-extrapolated "
                                          "area to C0)"),
    "terminal_phase_ambiguous": ("review", "terminal phase ambiguous: the half-lives of two selection rules differ "
                                           "by more than {max_rule_disagreement:.0%}"),
    "half_life_interval_wide": ("review", "wide half-life interval: the 95 % upper bound is more than "
                                          "{max_half_life_ratio:g} times the lower, or unbounded"),
    "tau_extrapolated": ("review", "last measurable sample before dose time + tau: AUCTAU extrapolated with lambda z"),
    "partial_extrapolated": ("review", "a partial-AUC end lies after TLST: extrapolated with lambda z"),
    "nonfinite_result": ("review", "a result was infinite (concentrations too large for floating point, or a "
                                   "division by zero such as SWING with CMIN 0) and is reported as NaN"),
    "time0_added": ("info", "no sample at dose time: concentration 0 added at time 0"),
    "predose_shifted": ("info", "steady state: the pre-dose sample taken before dose time is used as the concentration at time 0"),
    "predose_imputed": ("info", "steady state without a pre-dose sample: CMIN of the interval used at time 0"),
    "c0_extrapolated": ("info", "IV bolus: C0 back-extrapolated log-linearly from the first two samples"),
    "c0_first_observed": ("info", "IV bolus: first two samples do not decline, C0 set to the first observed concentration"),
    "manual_terminal": ("info", "terminal phase chosen by hand"),
    "points_excluded": ("info", "points excluded from the lambda-z fit by hand"),
    "times_sorted": ("info", "samples were not in time order and were sorted"),
    "selection_stale": ("review", "the recorded lambda-z choice was made on different data (fingerprint differs): automatic choice used, review and record again"),
}


def flag_message(name: str, qc: QCThresholds) -> str:
    """Message of a flag with its threshold filled in."""
    return FLAGS[name][1].format(**qc.as_dict())


class SampleStatus:
    """Integer codes of what happened to each input sample (see ``STATUS_REASONS``)."""

    USED = 0
    PADDING = 1
    MISSING_CONC = 2
    BLQ_MISSING_BEFORE = 3
    BLQ_MISSING_BETWEEN = 4
    BLQ_MISSING_AFTER = 5
    AFTER_TLAST = 6
    BEFORE_DOSE = 7
    BOLUS_PREDOSE = 8
    NO_MEASURABLE = 9
    PREDOSE_OUTSIDE_WINDOW = 10


#: Status code -> reason written in the unused-rows table.
STATUS_REASONS = {
    SampleStatus.USED: "used",
    SampleStatus.PADDING: "padding (not a sample)",
    SampleStatus.MISSING_CONC: "concentration missing",
    SampleStatus.BLQ_MISSING_BEFORE: "BLQ before first measurable concentration, rule 'missing'",
    SampleStatus.BLQ_MISSING_BETWEEN: "BLQ between measurable concentrations, rule 'missing'",
    SampleStatus.BLQ_MISSING_AFTER: "BLQ after last measurable concentration, rule 'missing'",
    SampleStatus.AFTER_TLAST: "after the last measurable concentration: outside AUCLST, enters AUCALL only",
    SampleStatus.BEFORE_DOSE: "sampled before the dose (negative time after dose)",
    SampleStatus.BOLUS_PREDOSE: "IV bolus pre-dose sample: the back-extrapolated C0 is used at dose time",
    SampleStatus.NO_MEASURABLE: "profile has no measurable concentration",
    SampleStatus.PREDOSE_OUTSIDE_WINDOW: "steady state: pre-dose sample taken earlier than the pre-dose window "
                                         "(predose_window x tau before dose time), not used as the trough",
}
