"""What enters the summaries: profiles left out with a stated reason, actual times gathered into bins.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["leave_out", "bin_times"]


def leave_out(result, exclude) -> pd.DataFrame:
    """Profiles left out of the summaries, each with its stated reason.

    Parameters
    ----------
    result : NCAResult
    exclude : dict or None
        Profile key -> reason, e.g. ``{"S3": "vomited at 1 h"}``; a key of
        several columns as a tuple or as text ``"S3, 2"``.

    Returns
    -------
    pandas.DataFrame
        Key columns, ``profile_id`` and ``reason``: one row per profile left out.

    Raises
    ------
    ValueError
        If a reason is empty, or a key names no profile of the result.
    """
    by = list(result.by)
    rows = []
    for key, reason in dict(exclude or {}).items():
        if not isinstance(reason, str) or not reason.strip():
            raise ValueError(f"exclude_from_summary: profile {key!r} needs a reason (text), e.g. "
                             f"{{{key!r}: 'vomited at 1 h'}}; got {reason!r}.")
        value = tuple(v.strip() for v in key.split(",")) if isinstance(key, str) and len(by) > 1 else key
        try:
            pid = result.profile_id(value)
        except (KeyError, ValueError) as exc:
            raise ValueError(f"exclude_from_summary: {key!r} names no profile (keys are {', '.join(by)}): "
                             f"{exc}") from None
        row = result.parameters.loc[result.parameters["profile_id"] == pid, by].iloc[0].to_dict()
        rows.append({**row, "profile_id": pid, "reason": reason.strip()})
    return pd.DataFrame(rows, columns=by + ["profile_id", "reason"])


def bin_times(times, tolerance=0.1) -> np.ndarray:
    """Actual sampling times gathered into bins, each labelled by its median time.

    Sorted distinct times join the bin before them while they are within
    ``tolerance`` (relative) of that bin's first time, or within 1 % of the
    longest time (common practice for descriptive mean curves, no source).

    Examples
    --------
    >>> bin_times([0.0, 0.5, 0.52, 1.0, 1.05, 24.0]).tolist()
    [0.0, 0.51, 0.51, 1.025, 1.025, 24.0]
    """
    t = np.asarray(times, dtype=np.float64)
    out = np.full_like(t, np.nan)
    finite = np.unique(t[np.isfinite(t)])
    if finite.size == 0:
        return out
    span = 0.01 * float(np.max(np.abs(finite)))
    bins, start = [[finite[0]]], finite[0]
    for x in finite[1:]:
        if x - start <= max(tolerance * abs(start), span):
            bins[-1].append(x)
        else:
            bins.append([x])
            start = x
    for members in bins:
        inside = np.isin(t, members)
        out[inside] = float(np.median(t[inside]))
    return out
