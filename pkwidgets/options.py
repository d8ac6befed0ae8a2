"""One options object for every entry point, validated from one table of constraints.

:class:`NCAOptions` holds the rules of an analysis (route, area method,
terminal phase, BLQ rules, QC thresholds, partial areas, dosing interval);
:class:`ColumnMap` says which column of a study table plays which role.
:func:`pkwidgets.nca`, :func:`pkwidgets.nca_profile`,
:func:`pkwidgets.nca_arrays`, the widgets and the analysis notebooks all take
an ``NCAOptions``; keyword arguments build one.

Every constraint lives in :data:`OPTION_RULES`; :func:`check_option` turns a
violation into one message form, modelled on scikit-learn's parameter
validation: ``The 'route' option must be one of 'extravascular', 'iv-bolus',
'iv-infusion'; got 'iv bolus'. Did you mean 'iv-bolus'?``
"""

from __future__ import annotations

import math
from dataclasses import MISSING, dataclass, field, fields, replace
from typing import Any, Mapping

from .blq import BLQRules
from .choices import check_choice
from .qc import QCThresholds
from .terminal_rules import TERMINAL_RULES

__all__ = ["NCAOptions", "ColumnMap", "OPTION_RULES", "ROUTES", "AUC_METHODS", "LAMBDA_Z_RULES",
           "check_option", "check_choice", "build_options"]  # check_choice: re-exported from .choices

#: Dosing routes.
ROUTES = ("extravascular", "iv-bolus", "iv-infusion")
#: Area rules (CDISC PK analytical methods, codelist C172330).
AUC_METHODS = ("linear", "lin-up/log-down", "lin-log")
#: Automatic terminal-phase selection rules (see :mod:`pkwidgets.terminal_rules`).
LAMBDA_Z_RULES = TERMINAL_RULES


def _positive_or_none(name, value):
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise TypeError(f"The {name!r} option must be a number > 0 or None; got {type(value).__name__} {value!r}.")
    if not (math.isfinite(value) and value > 0):
        raise ValueError(f"The {name!r} option must be a finite number > 0 or None; got {value!r}.")
    return float(value)


def _terminal(name, value):
    if value is None or (isinstance(value, str) and value == "auto"):
        return "auto"
    if isinstance(value, str):
        raise ValueError(f"The {name!r} option must be 'auto', a (start, end) pair or a dict of profile key -> "
                         f"(start, end); got {value!r}.")
    if isinstance(value, Mapping):
        return dict(value)
    return value  # pairs and arrays: checked against the profiles by the engine


def _partial(name, value):
    if value is None:
        return ()
    if isinstance(value, Mapping):
        return dict(value)
    try:
        return tuple(value)
    except TypeError:
        raise TypeError(f"The {name!r} option must be a sequence of (start, end) pairs or a dict of "
                        f"name -> (start, end); got {type(value).__name__}.") from None


def _blq_rules(name, value):
    return BLQRules.coerce(value)


def _qc(name, value):
    if value is None:
        return QCThresholds()
    if isinstance(value, QCThresholds):
        return value
    if isinstance(value, Mapping):
        known = {f.name for f in fields(QCThresholds)}
        unknown = sorted(set(value) - known)
        if unknown:
            raise ValueError(f"The {name!r} option has unknown threshold(s) {unknown}; known are {sorted(known)}.")
        return QCThresholds(**value)
    raise TypeError(f"The {name!r} option must be None, a QCThresholds or a dict; got {type(value).__name__}.")


def _fraction(name, value):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not (0.0 <= value <= 1.0):
        raise ValueError(f"The {name!r} option must be a number from 0 to 1 (a share of tau); got {value!r}.")
    return float(value)


def _occasion(name, value):
    if value is not None and not isinstance(value, str):
        raise TypeError(f"The {name!r} option must be a column name (str) or None; got {type(value).__name__}.")
    return value


def _choice(choices):
    return lambda name, value: check_choice(f"The {name!r} option", value, choices)


#: Option name -> validator(name, value) returning the normalised value.
OPTION_RULES = {
    "route": _choice(ROUTES),
    "auc_method": _choice(AUC_METHODS),
    "lambda_z_rule": _choice(LAMBDA_Z_RULES),
    "duration": _positive_or_none,
    "tau": _positive_or_none,
    "terminal": _terminal,
    "partial": _partial,
    "blq_rules": _blq_rules,
    "qc": _qc,
    "occasion": _occasion,
    "predose_window": _fraction,
}


def check_option(name: str, value):
    """Validate and normalise one option by its rule in :data:`OPTION_RULES`."""
    if name not in OPTION_RULES:
        check_choice("An NCA option name", name, tuple(OPTION_RULES))
    return OPTION_RULES[name](name, value)


@dataclass(frozen=True)
class NCAOptions:
    """The rules of an analysis, validated once.

    Parameters
    ----------
    route : {"extravascular", "iv-bolus", "iv-infusion"}
    auc_method : {"linear", "lin-up/log-down", "lin-log"}
        Area rule for AUC and AUMC (CDISC PK analytical methods).
    duration : float, optional
        Infusion duration in the time unit (``route="iv-infusion"``); a table
        may give it per profile through :class:`ColumnMap` instead.
    tau : float, optional
        Dosing interval for steady-state parameters (or a column, as above).
    terminal : "auto", (start, end), or dict of profile key -> (start, end)
        Lambda-z window: the automatic search, one window for all profiles,
        or windows per profile.
    lambda_z_rule : str
        Automatic terminal-phase rule, one of :data:`LAMBDA_Z_RULES`
        (:mod:`pkwidgets.terminal_rules`).  The default, ``"tail-extension"``,
        is this project's rule: it grows the window back from the last three
        points while earlier points stay on the line within its own noise,
        and starts no earlier than 2 x TMAX for extravascular doses
        (``bench/terminal_accuracy.py`` measures it against the true terminal
        rate).  ``"adjusted-r2"`` is the search for the highest adjusted R².
    blq_rules : BLQRules
    partial : sequence of (start, end) or dict of name -> (start, end)
        Partial-area intervals after the dose.
    qc : QCThresholds
    occasion : str, optional
        A profile-key column that orders dosing occasions (tables only).
    predose_window : float
        At steady state, a pre-dose sample stands at dose time as the trough
        only when taken at most this share of tau before the dose (0.1: within
        1.2 h for tau = 12 h; common practice, no source); earlier ones are
        listed as not used.

    Examples
    --------
    >>> NCAOptions(route="iv-bolus").route
    'iv-bolus'
    >>> NCAOptions(auc_method="log-down")
    Traceback (most recent call last):
    ...
    ValueError: The 'auc_method' option must be one of 'linear', 'lin-up/log-down', 'lin-log'; got 'log-down'. Did you mean 'lin-up/log-down'?
    """

    route: str = "extravascular"
    auc_method: str = "linear"
    duration: float | None = None
    tau: float | None = None
    terminal: Any = "auto"
    lambda_z_rule: str = "tail-extension"
    blq_rules: BLQRules = field(default_factory=BLQRules)
    partial: Any = ()
    qc: QCThresholds = field(default_factory=QCThresholds)
    occasion: str | None = None
    predose_window: float = 0.1

    def __post_init__(self):
        for f in fields(self):
            object.__setattr__(self, f.name, check_option(f.name, getattr(self, f.name)))

    def replace(self, **changes) -> "NCAOptions":
        """A copy with some options changed (validated again)."""
        return replace(self, **changes)

    def as_dict(self) -> dict:
        """Plain values for a settings record (rules and thresholds as dicts)."""
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["blq_rules"] = self.blq_rules.as_dict()
        out["qc"] = self.qc.as_dict()
        return out


@dataclass(frozen=True)
class ColumnMap:
    """Which column of a study table plays which role (None: not in the table).

    ``time``, ``conc`` are required; ``dose``, ``duration``, ``tau`` and
    ``dose_time`` are constant within a profile; ``blq`` holds yes/no flags,
    ``lloq`` the limit of quantitation, ``exclude`` yes/no for samples left
    out of the lambda-z fit.
    """

    time: str = "time"
    conc: str = "conc"
    dose: str | None = "dose"
    blq: str | None = None
    lloq: str | None = None
    dose_time: str | None = None
    duration: str | None = None
    tau: str | None = None
    exclude: str | None = None

    def __post_init__(self):
        for f in fields(self):
            value = getattr(self, f.name)
            if value is not None and not isinstance(value, str):
                raise TypeError(f"The {f.name!r} column must be named by a string; got {type(value).__name__} "
                                f"{value!r}.")

    def used(self) -> dict:
        """Role -> column name, for the roles given."""
        return {f.name: getattr(self, f.name) for f in fields(self) if getattr(self, f.name) is not None}


def _is_default(name, value) -> bool:
    """Is ``value`` the keyword default of option ``name`` (so that it does not override ``options``)?"""
    if value is None:
        return True
    default = _DEFAULTS[name]
    if isinstance(default, str):
        return isinstance(value, str) and value == default
    if isinstance(default, tuple):
        return isinstance(value, tuple) and value == ()
    return False


_DEFAULTS = {f.name: (f.default if f.default is not MISSING else None) for f in fields(NCAOptions)}


def build_options(options: NCAOptions | None = None, **kwargs) -> NCAOptions:
    """An :class:`NCAOptions` from an existing one and keyword arguments.

    Keyword arguments left at their defaults (``None``, ``"auto"``,
    ``"linear"``, ``()``...) do not override ``options``; others replace its
    fields and are validated.  Unknown names raise with a suggestion.

    Examples
    --------
    >>> o = build_options(NCAOptions(tau=12.0), tau=None, route="iv-bolus")
    >>> o.route, o.tau, o.auc_method
    ('iv-bolus', 12.0, 'linear')
    """
    for name in kwargs:
        if name not in _DEFAULTS:
            check_choice("An NCA option name", name, tuple(sorted(_DEFAULTS)))
    base = NCAOptions() if options is None else options
    if not isinstance(base, NCAOptions):
        raise TypeError(f"options must be an NCAOptions (or None); got {type(base).__name__}.")
    given = {k: v for k, v in kwargs.items() if not _is_default(k, v)}
    if options is None:
        given.update({k: v for k, v in kwargs.items() if k not in given and v is not None})
    return replace(base, **given) if given else base
