"""Expected failures of an unattended analysis run, each with a one-line message.

The command line prints the message as one line on stderr and exits non-zero,
without a traceback; the details of a failed notebook (its traceback) go to
``FAILED.txt`` in the failed run's folder.
"""

from __future__ import annotations

__all__ = ["RunError", "ParameterError"]


class RunError(Exception):
    """An analysis run could not start or did not finish (missing notebook or data file, unusable output
    folder, a notebook cell that raised). The message says what, where, and how to fix it."""


class ParameterError(RunError, ValueError):
    """A notebook parameter is unknown to the notebook or its value cannot be read (YAML)."""
