"""Units of reported parameters, derived with pint from the study's declared units.

The engine computes in the units the data were given in (time, concentration,
dose).  Each parameter's unit follows from its unit kind (see
:mod:`pkwidgets.parameters`); clearance and volume are converted to litres
(per kilogram when the dose is per kilogram) so that CL reads in L/h rather
than mg/(h*ng/mL).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

import pint

from .errors import UnitError
from .parameters import PARAMETERS

__all__ = ["StudyUnits", "parameter_unit", "ureg"]

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


@dataclass(frozen=True)
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
    """

    time: str = "h"
    conc: str = "ng/mL"
    dose: str | None = None

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
