"""Compartment models for sampling-design studies: the model and its virtual subjects.

A :class:`CompartmentModel` is a one- or two-compartment model with linear
elimination, dosed by IV bolus, constant-rate infusion or first-order
absorption (optional lag time), once or repeatedly every ``tau``
(superposition; the observed dose is the last one and no dose follows it).
Between-subject variability is log-normal (:func:`draw_subjects`); residual
error is proportional and additive, and observations below the LLOQ are
censored (:func:`pkwidgets.design.simulate_profiles`).  The model curve and
the exact values NCA estimates are in :mod:`pkwidgets.design_curves`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["CompartmentModel", "DESIGN_ROUTES", "VARYING", "draw_subjects"]

DESIGN_ROUTES = ("iv-bolus", "iv-infusion", "extravascular")
#: Subject parameters that may vary between subjects (log-normal), in drawing order.
VARYING = ("cl", "v", "q", "v2", "ka", "f", "lag", "duration")


def _positive(name, value, *, allow_zero=False, optional=False):
    if value is None and optional:
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise TypeError(f"The {name!r} option of CompartmentModel must be a number; got {value!r}.") from None
    if not math.isfinite(x) or x < 0 or (x == 0 and not allow_zero):
        need = "non-negative" if allow_zero else "positive"
        raise ValueError(f"The {name!r} option of CompartmentModel must be a finite {need} number; got {value!r}.")
    return x


@dataclass(frozen=True)
class CompartmentModel:
    """A population PK model for simulating virtual subjects (typical values and variability).

    Units are the user's, and consistent: dose in an amount, volumes in a
    volume, time in one unit; concentrations come out in amount/volume.

    Parameters
    ----------
    route : {"extravascular", "iv-bolus", "iv-infusion"}
    dose : float
        Amount per dose (> 0).
    cl, v : float
        Clearance and (central) volume, typical values (> 0).
    q, v2 : float, optional
        Inter-compartmental clearance and peripheral volume; both given makes
        the model two-compartment.
    ka, f, lag : float
        First-order absorption rate constant (needed for ``extravascular``),
        bioavailable fraction (default 1) and lag time (default 0).
    duration : float, optional
        Infusion duration (needed for ``iv-infusion``).
    tau : float, optional
        Dosing interval; needed when ``doses`` is not 1.
    doses : int or "steady-state"
        Number of doses up to and including the observed one (given at time
        0), or ``"steady-state"`` for infinitely many.
    variability : dict
        Standard deviation of the log of a subject parameter (omega), e.g.
        ``{"cl": 0.3, "v": 0.25}``; parameters not named do not vary.
    proportional_error : float
        Standard deviation of the relative residual error (0.1 = 10 %).
    additive_error : float
        Standard deviation of the additive residual error (concentration unit).
    lloq : float, optional
        Observations below it are censored (BLQ).  Without it, observations
        below 0 (possible under additive error) are censored at 0.

    Examples
    --------
    >>> m = CompartmentModel(route="extravascular", dose=100, cl=5, v=50, ka=1.2)
    >>> m.compartments
    1
    >>> CompartmentModel(route="oral", dose=100, cl=5, v=50)
    Traceback (most recent call last):
    ...
    ValueError: The 'route' option of CompartmentModel must be one of 'iv-bolus', 'iv-infusion', 'extravascular'; got 'oral'.
    """

    route: str = "extravascular"
    dose: float = 100.0
    cl: float = 5.0
    v: float = 50.0
    q: float | None = None
    v2: float | None = None
    ka: float | None = None
    f: float = 1.0
    lag: float = 0.0
    duration: float | None = None
    tau: float | None = None
    doses: int | str = 1
    variability: dict = field(default_factory=dict)
    proportional_error: float = 0.0
    additive_error: float = 0.0
    lloq: float | None = None

    def __post_init__(self):
        if self.route not in DESIGN_ROUTES:
            raise ValueError(f"The 'route' option of CompartmentModel must be one of "
                             f"{', '.join(map(repr, DESIGN_ROUTES))}; got {self.route!r}.")
        for name in ("dose", "cl", "v", "f"):
            object.__setattr__(self, name, _positive(name, getattr(self, name)))
        for name in ("q", "v2", "ka", "duration", "tau", "lloq"):
            object.__setattr__(self, name, _positive(name, getattr(self, name), optional=True))
        for name in ("lag", "proportional_error", "additive_error"):
            object.__setattr__(self, name, _positive(name, getattr(self, name), allow_zero=True))
        if (self.q is None) != (self.v2 is None):
            raise ValueError("A two-compartment CompartmentModel needs both 'q' and 'v2'; give both or neither.")
        self._check_route()
        self._check_dosing()
        self._check_variability()

    def _check_route(self):
        if self.route == "extravascular" and self.ka is None:
            raise ValueError("route 'extravascular' needs 'ka' (the absorption rate constant).")
        if self.route == "iv-infusion" and self.duration is None:
            raise ValueError("route 'iv-infusion' needs 'duration' (the infusion time).")
        if self.route != "extravascular" and (self.lag > 0 or self.ka is not None or self.f != 1.0):
            raise ValueError(f"'ka', 'f' and 'lag' apply to the extravascular route only; route is {self.route!r}.")
        if self.route != "iv-infusion" and self.duration is not None:
            raise ValueError(f"'duration' applies to route 'iv-infusion' only; route is {self.route!r}.")

    def _check_dosing(self):
        d = self.doses
        if not (d == "steady-state" or (isinstance(d, (int, np.integer)) and not isinstance(d, bool) and d >= 1)):
            raise ValueError(f"The 'doses' option of CompartmentModel must be a whole number >= 1 or "
                             f"'steady-state'; got {d!r}.")
        if d != 1 and self.tau is None:
            raise ValueError(f"doses={d!r} needs 'tau' (the dosing interval).")
        if self.tau is not None and d != 1:
            for name in ("duration", "lag"):
                value = getattr(self, name)
                if value and (value > self.tau or self.variability.get(name)):
                    raise ValueError(f"{name}={value!r} must stay below tau={self.tau!r} under repeated dosing "
                                     "(and may not vary between subjects there); shorten it or lengthen tau.")

    def _check_variability(self):
        if not isinstance(self.variability, dict):
            raise TypeError(f"The 'variability' option of CompartmentModel must be a dict such as "
                            f"{{'cl': 0.3}}; got {type(self.variability).__name__}.")
        for name, omega in self.variability.items():
            if name not in VARYING or getattr(self, name) in (None, 0.0):
                given = [p for p in VARYING if getattr(self, p) not in (None, 0.0)]
                raise ValueError(f"variability names {name!r}, which is not a parameter of this model; "
                                 f"it may name {', '.join(map(repr, given))}.")
            _positive(f"variability[{name!r}]", omega, allow_zero=True)

    @property
    def compartments(self) -> int:
        """1 or 2."""
        return 1 if self.q is None else 2

    @property
    def steady_state(self) -> bool:
        return self.doses == "steady-state"


def draw_subjects(model: CompartmentModel, n: int, rng: np.random.Generator) -> dict:
    r"""Individual parameters of ``n`` virtual subjects, log-normal around the typical values.

    .. math:: \theta_i = \theta \, e^{\omega \eta_i}, \quad \eta_i \sim N(0, 1)

    Returns
    -------
    dict of str to ndarray (n,)
        Every parameter of the model (``ka``, ``q``, ... only when the model
        has them).  Normals are drawn in the order of :data:`VARYING` for the
        parameters that vary, so the same seed gives the same subjects.
    """
    out = {}
    for name in VARYING:
        typical = getattr(model, name)
        if typical is None:
            continue
        omega = float(model.variability.get(name, 0.0))
        out[name] = typical * np.exp(omega * rng.standard_normal(n)) if omega > 0 else np.full(n, typical)
    return out
