"""One profile at a time: :func:`nca_profile` and :func:`partial_auc`.

Both are the one-profile case of :func:`pkwidgets.engine.nca_arrays`; no
arithmetic lives here.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ._docs import fill_doc
from .engine import nca_arrays
from .parameters import PARAMETERS
from .qc import FLAGS, STATUS_REASONS, flag_message
from .units import StudyUnits

__all__ = ["nca_profile", "partial_auc", "ordered_codes", "exclusion_mask"]


def ordered_codes(keys) -> list[str]:
    """Catalogue order for known codes, then the rest (partial areas) as given."""
    keys = list(keys)
    known = [c for c in PARAMETERS if c in keys]
    return known + [k for k in keys if k not in PARAMETERS]


def exclusion_mask(time, exclude, *, profile=None) -> np.ndarray:
    """Boolean mask of the samples whose time is listed in ``exclude``.

    Raises
    ------
    ValueError
        If a listed time is not a sampling time of the profile.
    """
    time = np.asarray(time, dtype=np.float64)
    mask = np.zeros(time.shape, dtype=bool)
    for x in np.atleast_1d(np.asarray(exclude, dtype=np.float64)) if len(exclude) else ():
        hit = np.isclose(time, x, rtol=1e-9, atol=1e-12)
        if not hit.any():
            where = f" in profile {profile}" if profile is not None else ""
            raise ValueError(
                f"exclude lists time {x!r}, which is not a sampling time{where}; "
                f"sampling times are {np.round(time[~np.isnan(time)], 6).tolist()}."
            )
        mask |= hit
    return mask


@fill_doc
def nca_profile(time, conc, *, options=None, dose=None, route="extravascular", duration=None, tau=None,
                auc_method="linear", terminal="auto", exclude=(), blq=None, lloq=None, partial=(),
                blq_rules=None, qc=None, lambda_z_rule=None, units=None):
    """Non-compartmental parameters of one concentration-time profile.

    Parameters
    ----------
    time, conc : array_like, 1-D
        Sampling times after the dose and concentrations (NaN = missing).
        Unsorted times are sorted (flag ``times_sorted``).
    exclude : sequence of float
        Sampling times left out of the lambda-z fit.
    units : StudyUnits or dict, optional
        Declared units (``time``, ``conc``, ``dose``).  When given, values are
        expressed in the derived units (CL in L/h, ...) and ``attrs["units"]``
        names them.
    %(options)s

    Returns
    -------
    pandas.Series
        Values keyed by PPTESTCD code; NaN where a value cannot be computed.
        ``attrs`` holds ``flags`` (names), ``messages`` (flag texts),
        ``units`` (code -> unit text, or None), ``sample_status`` (one reason
        per input sample), ``lambda_z_used`` (bool per input sample) and
        ``settings``.

    Examples
    --------
    >>> r = nca_profile([0, 1, 2, 4, 8, 12], [0, 8, 10, 6, 3, 1.5], dose=100)
    >>> float(r["CMAX"]), float(r["TMAX"]), float(r["AUCLST"])
    (10.0, 2.0, 56.0)
    >>> nca_profile([0, 1], [0, -1])
    Traceback (most recent call last):
    ...
    ValueError: conc is negative (-1.0) at profile 0, sample 1; concentrations must be >= 0 (mark values below the limit of quantitation with blq=True instead).
    """
    time = np.asarray(time, dtype=np.float64)
    conc = np.asarray(conc, dtype=np.float64)
    if time.ndim != 1 or conc.ndim != 1:
        raise ValueError("nca_profile takes 1-D time and conc; use nca_arrays for many profiles.")
    if time.shape != conc.shape:
        raise ValueError(f"time has {time.size} values but conc has {conc.size}; they must match.")
    res = nca_arrays(
        time, conc, options=options, dose=dose, route=route, duration=duration, tau=tau, auc_method=auc_method,
        terminal=terminal, exclude=exclusion_mask(time, exclude), blq=blq, lloq=lloq, partial=partial,
        blq_rules=blq_rules, qc=qc, lambda_z_rule=lambda_z_rule,
    )
    return _profile_series(res, units)


def _profile_series(res, units) -> pd.Series:
    """The one profile of an :class:`~pkwidgets.engine.ArrayResult` as a Series, in units if declared."""
    codes = ordered_codes(res)
    values = {k: float(res[k][0]) for k in codes}
    unit_map = None
    if units is not None:
        su = units if isinstance(units, StudyUnits) else StudyUnits(**units)
        unit_map = {}
        for k in codes:
            text, factor = su.unit_of(k)
            values[k] *= factor
            unit_map[k] = text
    out = pd.Series(values, name="value", dtype=np.float64)
    out.index.name = "PPTESTCD"
    raised = [name for name in FLAGS if res.flags[name][0]]
    out.attrs = {
        "flags": raised,
        "messages": [flag_message(n, res.options.qc) for n in raised],
        "units": unit_map,
        "sample_status": [STATUS_REASONS[int(s)] for s in res.status[0]],
        "lambda_z_used": res.lambda_z_used[0].tolist(),
        "settings": res.settings,
    }
    return out


def partial_auc(time, conc, start, end, *, auc_method="linear", route="extravascular",
                duration=None, terminal="auto", exclude=(), blq=None, lloq=None, blq_rules=None):
    r"""AUC of one profile over ``[start, end]`` (times after the dose).

    Concentrations at ``start`` and ``end`` that fall between samples are
    interpolated with the rule of their segment: linear, or log-linear where
    ``auc_method`` uses the log rule on that (declining) segment.  An end
    after TLST is extrapolated with lambda z,
    :math:`C_{last} e^{-\lambda_z (t - t_{last})}` (``nca_profile`` flags it
    ``partial_extrapolated``); NaN if lambda z cannot be estimated.

    Returns
    -------
    float
        The area in time x concentration units.

    Examples
    --------
    >>> partial_auc([0, 1, 2, 4], [0, 10, 8, 4], 0.5, 2)
    12.75
    >>> partial_auc([0, 1, 2, 4], [0, 10, 8, 4], 2, 1)
    Traceback (most recent call last):
    ...
    ValueError: partial interval AUCINT_2-1: need 0 <= start < end; got (2, 1).
    """
    res = nca_arrays(
        time, conc, route=route, duration=duration, auc_method=auc_method, terminal=terminal,
        exclude=exclusion_mask(time, exclude), blq=blq, lloq=lloq, blq_rules=blq_rules,
        partial=[(start, end)],
    )
    return float(res[res.settings["partial"][0]][0])
