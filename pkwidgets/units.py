"""Units of reported parameters, derived with pint from the study's declared units.

The engine computes in the units the data were given in (time, concentration,
dose).  Each parameter's unit follows from its unit kind (see
:mod:`pkwidgets.parameters`); clearance and volume are converted to litres
(per kilogram when the dose is per kilogram) so that CL reads in L/h rather
than mg/(h*ng/mL).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache

import pint

from .choices import check_choice
from .errors import UnitError
from .parameters import PARAMETERS

__all__ = ["StudyUnits", "coerce_units", "parameter_unit", "ureg", "UNIT_ROLES"]

#: The roles a study declares units for, in the order StudyUnits takes them.
UNIT_ROLES = ("time", "conc", "dose")
_UNSET = object()

ureg = pint.UnitRegistry()


@lru_cache(maxsize=256)
def _unit(text: str, role: str):
    try:
        return ureg.Unit(text)
    except (pint.errors.UndefinedUnitError, AttributeError, TypeError, ValueError) as exc:
        raise UnitError(
            f"{role} unit {text!r} is not a unit pint knows ({exc}). "
            "Use forms like 'h', 'min', 'ng/mL', 'nmol/L', 'mg', 'mg/kg'."
        ) from None


@dataclass(frozen=True, init=False)
class StudyUnits:
    """The declared units of a study.

    Parameters
    ----------
    time : str
        Unit of sampling times, e.g. ``"h"``.
    conc : str
        Unit of concentrations, e.g. ``"ng/mL"``.
    dose : str or None
        Unit of doses, e.g. ``"mg"`` or ``"mg/kg"``; None if no dose is given.

    Time and concentration have no default: a unit left out is an error
    naming it (a default concentration unit would make CL/F wrong by the
    ratio of the units), and a misspelt name gets a suggestion.

    Examples
    --------
    >>> u = StudyUnits("h", "ng/mL", "mg")
    >>> u.unit_of("AUCLST")
    ('h·ng/mL', 1.0)
    >>> u.unit_of("CLFO")
    ('L/h', 1000.0)
    >>> StudyUnits("h", "nmol/L", "mg").unit_of("CLFO")
    Traceback (most recent call last):
    ...
    pkwidgets.errors.UnitError: Clearance from dose unit 'mg' and concentration unit 'nmol/L' has dimension ...
    >>> StudyUnits(time="h", dose="mg")
    Traceback (most recent call last):
    ...
    pkwidgets.errors.UnitError: The 'units' option must give the time and concentration units together (and the dose unit when doses are used); 'conc' is missing (got time='h', dose='mg'). Add e.g. 'conc': 'ng/mL', or pass units=None.
    """

    time: str
    conc: str
    dose: str | None = None

    def __init__(self, time=_UNSET, conc=_UNSET, dose=None, **unknown):
        if unknown:
            _unknown_roles(unknown)
        given = {"time": time, "conc": conc, "dose": dose}
        missing = [r for r in ("time", "conc") if given[r] is _UNSET]
        if missing:
            _missing_roles(missing, {k: v for k, v in given.items() if v is not _UNSET and v is not None})
        object.__setattr__(self, "time", time)
        object.__setattr__(self, "conc", conc)
        object.__setattr__(self, "dose", dose)
        self.__post_init__()

    def __post_init__(self):
        if self.time is None or self.conc is None:
            raise UnitError("time and concentration units must be declared (e.g. time='h', conc='ng/mL').")
        t = _unit(self.time, "time")
        if t.dimensionality != ureg.h.dimensionality:
            raise UnitError(f"time unit {self.time!r} is not a unit of time.")
        c = _unit(self.conc, "concentration")
        if c.dimensionality not in (
            (ureg.g / ureg.L).dimensionality,
            (ureg.mol / ureg.L).dimensionality,
        ):
            raise UnitError(
                f"concentration unit {self.conc!r} is neither mass nor amount per volume."
            )
        if self.dose is not None:
            _unit(self.dose, "dose")

    def unit_of(self, code: str) -> tuple[str, float]:
        """Unit text and the factor that converts an engine value into it.

        ``code`` is a PPTESTCD code or a partial-AUC column (``AUCINT_...``).
        """
        kind = "auc" if code.startswith("AUCINT") else PARAMETERS[code].unit_kind
        return _kind_unit(kind, self.time, self.conc, self.dose)


def _unknown_roles(unknown):

    for name in unknown:
        try:
            check_choice("A key of the 'units' option", name, UNIT_ROLES)
        except ValueError as exc:
            raise UnitError(f"{exc} Units are declared as {{'time': ..., 'conc': ..., 'dose': ...}}.") from None


def _missing_roles(missing, given):
    got = ", ".join(f"{k}={v!r}" for k, v in given.items()) or "nothing"
    example = {"time": "'time': 'h'", "conc": "'conc': 'ng/mL'", "dose": "'dose': 'mg'"}
    names = " and ".join(repr(m) for m in missing)
    raise UnitError(
        "The 'units' option must give the time and concentration units together (and the dose unit when doses "
        f"are used); {names} {'is' if len(missing) == 1 else 'are'} missing (got {got}). Add e.g. "
        f"{', '.join(example[m] for m in missing)}, or pass units=None.")


def coerce_units(units, *, needs_dose=False) -> StudyUnits | None:
    """Validate the ``units`` option of :func:`pkwidgets.nca` and friends.

    Parameters
    ----------
    units : None, StudyUnits or mapping
        ``{"time": ..., "conc": ..., "dose": ...}``.  Either no units
        (None) or all that the analysis needs: time and concentration always,
        and the dose unit when ``needs_dose``.
    needs_dose : bool
        True when the analysis uses doses (a dose column or amount): then a
        missing dose unit is an error, since CL, V and dose-normalised values
        would otherwise be reported without a unit.

    Returns
    -------
    StudyUnits or None

    Raises
    ------
    UnitError
        A missing role (named), a misspelt key (with a suggestion), an unknown
        or ill-fitting unit.
    TypeError
        ``units`` is neither None, a StudyUnits nor a mapping.

    Examples
    --------
    >>> coerce_units({"time": "h", "conc": "ng/mL"}).conc
    'ng/mL'
    >>> coerce_units({"tme": "h", "conc": "ng/mL", "dose": "mg"})
    Traceback (most recent call last):
    ...
    pkwidgets.errors.UnitError: A key of the 'units' option must be one of 'time', 'conc', 'dose'; got 'tme'. Did you mean 'time'? Units are declared as {'time': ..., 'conc': ..., 'dose': ...}.
    """
    if units is None:
        return None
    if isinstance(units, Mapping):
        bad = [k for k in units if not isinstance(k, str) or k not in UNIT_ROLES]
        if bad:
            _unknown_roles(bad)
        units = StudyUnits(**units)
    elif not isinstance(units, StudyUnits):
        raise TypeError(f"The 'units' option must be None, a StudyUnits or a dict like {{'time': 'h', 'conc': "
                        f"'ng/mL', 'dose': 'mg'}}; got {type(units).__name__}.")
    if needs_dose and units.dose is None:
        _missing_roles(["dose"], {"time": units.time, "conc": units.conc})
    return units


def parameter_unit(code: str, units: StudyUnits) -> tuple[str, float]:
    """Functional form of :meth:`StudyUnits.unit_of`."""
    return units.unit_of(code)


_LITRE = re.compile(r"(?<![A-Za-z])([a-zµμ]?)l(?![A-Za-z])")


def _fmt(u) -> str:
    """Short pretty unit text, with the litre written ``L`` (``mL``, ``L/h``)."""
    text = f"{u:~P}"
    return _LITRE.sub(lambda m: m.group(1) + "L", text) if text else "1"


@lru_cache(maxsize=1024)
def _kind_unit(kind: str, time: str, conc: str, dose: str | None) -> tuple[str, float]:
    t = _unit(time, "time")
    c = _unit(conc, "concentration")
    if kind == "conc":
        return _fmt(c), 1.0
    if kind == "time":
        return _fmt(t), 1.0
    if kind == "per_time":
        return _fmt(t**-1), 1.0
    if kind == "auc":
        return _fmt(t * c), 1.0
    if kind == "aumc":
        return _fmt(t**2 * c), 1.0
    if kind == "percent":
        return "%", 1.0
    if kind in ("count", "ratio"):
        return "1", 1.0
    if dose is None:
        return "", 1.0
    d = _unit(dose, "dose")
    if kind == "conc_per_dose":
        return f"{_fmt(c)}/{_fmt(d)}", 1.0
    if kind == "auc_per_dose":
        return f"{_fmt(t * c)}/{_fmt(d)}", 1.0
    if kind == "clearance":
        return _to_litres(d / (c * t), t**-1, "Clearance", dose, conc)
    if kind == "volume":
        return _to_litres(d / c, ureg.dimensionless, "Volume", dose, conc)
    raise KeyError(f"unknown unit kind {kind!r}")


def _to_litres(raw, per, what, dose, conc):
    """Express ``raw`` as litres times ``per`` (optionally per kg of body weight)."""
    q = 1.0 * raw
    for target in (ureg.L * per, ureg.L * per / ureg.kg):
        try:
            # 12 significant digits: pint's conversion leaves 999.9999999999999 for 1000
            return _fmt(target), float(f"{q.to(target).magnitude:.12g}")
        except pint.errors.DimensionalityError:
            continue
    raise UnitError(
        f"{what} from dose unit {dose!r} and concentration unit {conc!r} has dimension "
        f"{q.dimensionality}, not a volume{' per time' if what == 'Clearance' else ''}. "
        "Declare dose and concentration on the same basis (mass with mass per volume, "
        "or amount with amount per volume)."
    )
