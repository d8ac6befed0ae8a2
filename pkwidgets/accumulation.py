r"""Observed accumulation ratios between dosing occasions.

For each profile of a later occasion (day, dose number) the ratio of its
AUCTAU and CMAX to those of the first occasion with the same other profile
keys and the same dosing interval:

.. math::
    \mathrm{ARAUC} = \frac{AUC_\tau}{AUC_\tau(\text{first})}, \qquad
    \mathrm{ARCMAX} = \frac{C_{max}}{C_{max}(\text{first})}

(CDISC PP definitions of the accumulation ratios; the first occasion has
none).  The profiles are matched by key, never by position.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["accumulation_ratios", "first_occasion"]


def accumulation_ratios(params, keys: pd.DataFrame, by, occasion, tau_p) -> dict:
    """ARAUC and ARCMAX of each profile against the first occasion of the same other keys and tau.

    Parameters
    ----------
    params : mapping of code -> ndarray (profiles,)
        Engine results with ``AUCTAU`` and ``CMAX``.
    keys : DataFrame
        Profile keys, one row per profile (same order as ``params``).
    by : list of str
        Profile key columns; ``occasion`` must be one of them.
    occasion : str
        Column that orders the occasions (its minimum is the first).
    tau_p : float or ndarray (profiles,)
        Dosing interval of each profile.

    Returns
    -------
    dict with ``ARAUC`` and ``ARCMAX`` arrays (NaN for first occasions).
    """
    ref = first_occasion(keys, by, occasion, tau_p)
    later = ref != np.arange(len(keys))
    with np.errstate(divide="ignore", invalid="ignore"):
        return {
            "ARAUC": np.where(later, params["AUCTAU"] / params["AUCTAU"][ref], np.nan),
            "ARCMAX": np.where(later, params["CMAX"] / params["CMAX"][ref], np.nan),
        }


def first_occasion(keys: pd.DataFrame, by, occasion, tau_p) -> np.ndarray:
    """For each profile, the position of the first occasion with the same other keys and tau.

    A profile whose position is its own is a first occasion (taken as the
    first dose: nothing was given before it).
    """
    if occasion not in by:
        raise ValueError(f"The 'occasion' option must be one of the by columns {by}; got {occasion!r}.")
    if tau_p is None:
        raise ValueError("occasion= gives accumulation ratios over a dosing interval: pass tau= as well.")
    P = len(keys)
    tau_p = np.broadcast_to(np.asarray(tau_p, dtype=np.float64), (P,))
    others = [b for b in by if b != occasion]
    frame = keys.copy()
    frame["__tau__"] = tau_p
    frame["__pos__"] = np.arange(P)
    group = frame.groupby(others + ["__tau__"], sort=False, dropna=False) if others else frame.groupby("__tau__")
    first_pos = frame.loc[group[occasion].idxmin(), "__pos__"].to_numpy()
    ref = np.full(P, -1)
    ref[frame["__pos__"].to_numpy()] = first_pos[group.ngroup().to_numpy()]
    return ref
