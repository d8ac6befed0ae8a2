"""Exceptions raised for bad input.

Every message says what was wrong, where (file, line, column, profile) and
how to fix it.  ``InputDataError`` is a ``ValueError`` so callers that catch
``ValueError`` keep working.
"""

from __future__ import annotations

__all__ = ["InputDataError", "UnitError", "where"]


class InputDataError(ValueError):
    """A study table or array cannot be analysed as given.

    Attributes
    ----------
    file, line, column, profile : optional
        The location the message refers to (``line`` is the 1-based line in the
        file, the header being line 1; for an in-memory table it is the
        0-based row position).
    """

    def __init__(self, message, *, file=None, line=None, column=None, profile=None):
        self.file = file
        self.line = line
        self.column = column
        self.profile = profile
        super().__init__(message)


class UnitError(ValueError):
    """Declared units are unknown or cannot be combined into a parameter's unit."""


def where(*, file=None, line=None, column=None, profile=None) -> str:
    """Format a location prefix such as ``"data.csv, line 7, column 'conc'"``."""
    parts = []
    if file is not None:
        parts.append(str(file))
    if line is not None:
        parts.append(f"line {line}" if file is not None else f"row {line}")
    if column is not None:
        parts.append(f"column {column!r}")
    if profile is not None:
        parts.append(f"profile {profile}")
    return ", ".join(parts)
