"""Rules for samples below the lower limit of quantitation (BLQ).

A BLQ sample's position in its profile decides which rule applies:

``before``
    before the first measurable concentration (default ``"zero"``);
``between``
    between two measurable concentrations (default ``"missing"``);
``after``
    after the last measurable concentration (default ``"zero"``: such a
    sample lies beyond TLST, so it never enters AUCLST, and enters AUCALL as
    0).

Each position takes one of ``"zero"``, ``"missing"`` (the sample is not
used), ``"half-lloq"`` or ``"lloq"``.  A substituted number is then treated
as an observed concentration everywhere (CMAX, TLST, AUC and the lambda-z
search); choose it knowingly.  The defaults are common practice, no source.
"""

from __future__ import annotations

import re
from dataclasses import asdict, dataclass

import numpy as np

__all__ = ["BLQRules", "BLQ_RULE_VALUES", "parse_concentrations"]

BLQ_RULE_VALUES = ("zero", "missing", "half-lloq", "lloq")

#: Text read as "below the limit of quantitation" in a concentration column.
#: Matching ignores case and surrounding blanks.
BLQ_MARKERS = ("BLQ", "BQL", "<BLQ", "<BQL", "<LLOQ", "<LOQ", "LLOQ", "BLOQ", "ND", "NQ")
_LESS_THAN = re.compile(r"^<\s*([0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)$")


@dataclass(frozen=True)
class BLQRules:
    """How BLQ samples are treated, by position in the profile.

    Parameters
    ----------
    before, between, after : {"zero", "missing", "half-lloq", "lloq"}
        Rule for BLQ samples before the first, between measurable, and after
        the last measurable concentration.

    Examples
    --------
    >>> BLQRules()
    BLQRules(before='zero', between='missing', after='zero')
    >>> BLQRules(after="lloq").after
    'lloq'
    >>> BLQRules(before="drop")
    Traceback (most recent call last):
    ...
    ValueError: BLQ rule 'before' must be one of 'zero', 'missing', 'half-lloq', 'lloq'; got 'drop'.
    """

    before: str = "zero"
    between: str = "missing"
    after: str = "zero"

    def __post_init__(self):
        for pos in ("before", "between", "after"):
            value = getattr(self, pos)
            if value not in BLQ_RULE_VALUES:
                allowed = ", ".join(repr(v) for v in BLQ_RULE_VALUES)
                raise ValueError(f"BLQ rule {pos!r} must be one of {allowed}; got {value!r}.")

    @classmethod
    def coerce(cls, rules) -> "BLQRules":
        """Accept ``None`` (defaults), a ``BLQRules`` or a mapping of positions to rules."""
        if rules is None:
            return cls()
        if isinstance(rules, cls):
            return rules
        if isinstance(rules, dict):
            unknown = set(rules) - {"before", "between", "after"}
            if unknown:
                raise ValueError(
                    f"blq_rules has unknown position(s) {sorted(unknown)}; "
                    "use 'before', 'between' and 'after'."
                )
            return cls(**rules)
        raise TypeError(f"blq_rules must be None, a BLQRules or a dict; got {type(rules).__name__}.")

    def as_dict(self) -> dict:
        return asdict(self)

    def describe(self) -> str:
        """One line for a report header."""
        return (
            f"BLQ before first measurable: {self.before}; between measurable: {self.between}; "
            f"after last measurable: {self.after}"
        )


def parse_concentrations(values):
    """Split a concentration column into numbers, BLQ flags and unreadable entries.

    Parameters
    ----------
    values : array-like of str, float or None
        Raw entries of a concentration column.

    Returns
    -------
    conc : ndarray of float
        The number, or NaN for BLQ, empty and unreadable entries.
    blq : ndarray of bool
        True where the entry is a BLQ marker (``"BLQ"``, ``"<0.50"``, ...).
    lloq_from_text : ndarray of float
        The limit written in a ``"<x"`` marker, else NaN.
    bad : ndarray of bool
        True where the entry is text that is neither a number nor a BLQ marker.

    Examples
    --------
    >>> c, b, l, bad = parse_concentrations(["1.5", "BLQ", "<0.50", "", "abc"])
    >>> c
    array([1.5, nan, nan, nan, nan])
    >>> b.tolist(), l.tolist()[2], bad.tolist()
    ([False, True, True, False, False], 0.5, [False, False, False, False, True])
    """
    n = len(values)
    conc = np.full(n, np.nan)
    blq = np.zeros(n, dtype=bool)
    lloq = np.full(n, np.nan)
    bad = np.zeros(n, dtype=bool)
    markers = {m.upper() for m in BLQ_MARKERS}
    for i, v in enumerate(values):
        if v is None:
            continue
        if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool):
            conc[i] = float(v)
            continue
        s = str(v).strip()
        if s == "" or s.upper() in {"NA", "NAN", "."}:
            continue
        try:
            conc[i] = float(s)
            continue
        except ValueError:
            pass
        if s.upper() in markers:
            blq[i] = True
            continue
        m = _LESS_THAN.match(s)
        if m:
            blq[i] = True
            lloq[i] = float(m.group(1))
            continue
        bad[i] = True
    return conc, blq, lloq, bad
