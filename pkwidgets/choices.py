"""One message form for a value that must be one of a few choices (used by every option check).

Modelled on scikit-learn's parameter validation: the name of what was wrong,
the allowed values, what was received, and the nearest allowed value.
"""

from __future__ import annotations

import difflib
from typing import Any

__all__ = ["check_choice"]


def check_choice(what: str, value, choices) -> Any:
    """Return ``value`` if it is one of ``choices``, else raise a ``ValueError`` with a suggestion.

    Examples
    --------
    >>> check_choice("The 'route' option", "iv bolus", ("extravascular", "iv-bolus", "iv-infusion"))
    Traceback (most recent call last):
    ...
    ValueError: The 'route' option must be one of 'extravascular', 'iv-bolus', 'iv-infusion'; got 'iv bolus'. Did you mean 'iv-bolus'?
    """
    if isinstance(value, str) and value in choices:
        return value
    allowed = ", ".join(repr(c) for c in choices)
    near = difflib.get_close_matches(str(value), [str(c) for c in choices], n=1, cutoff=0.6)
    hint = f" Did you mean {near[0]!r}?" if near else ""
    raise ValueError(f"{what} must be one of {allowed}; got {value!r}.{hint}")
