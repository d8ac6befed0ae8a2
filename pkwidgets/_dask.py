"""Scale-out: :func:`pkwidgets.nca` over a Dask DataFrame.

Profiles are kept whole on one partition by shuffling the rows on the
profile keys (``by``, without the ``occasion`` column so that all occasions
of a subject meet); every partition then runs the same in-memory
:func:`pkwidgets.nca` (and so the same array engine).  Dask is imported only
when a Dask DataFrame is passed (optional extra ``pkwidgets[dask]``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["is_dask_frame", "nca_dask"]

#: Stand-in values for option columns when the result's columns are worked out.
_STAND_IN = {"dose": 1.0, "blq": False, "lloq": 0.01, "dose_time": 0.0, "duration": 0.5, "tau": 24.0,
             "exclude": False}


def is_dask_frame(data) -> bool:
    """True for a Dask DataFrame (checked without importing Dask)."""
    return type(data).__module__.split(".")[0] == "dask" and hasattr(data, "map_partitions")


def nca_dask(data, *, by, **options):
    """NCA of every profile of a Dask DataFrame; returns a lazy Dask DataFrame.

    Parameters
    ----------
    data : dask.dataframe.DataFrame
        Long format, one row per sample, as for :func:`pkwidgets.nca`.
    by, **options
        As for :func:`pkwidgets.nca`.  ``terminal`` and ``exclude`` dicts are
        checked against the profiles present (one pass over the key columns)
        and handed to each partition for its own profiles.

    Returns
    -------
    dask.dataframe.DataFrame
        One row per profile: ``by`` columns, then PPTESTCD codes, as the
        in-memory result (the ``.rows``/``.qc_flags`` record is not carried;
        run :func:`pkwidgets.nca` on a partition's rows to review one).  Rows
        come in partition order: sort by the ``by`` columns for a stable order.
    """
    from .errors import InputDataError
    from .table import nca

    by = [by] if isinstance(by, str) else list(by)
    if not by:
        raise ValueError("by must name at least one column that identifies a profile (e.g. by='subject').")
    missing = [c for c in by if c not in data.columns]
    if missing:
        raise InputDataError(f"dask table: profile key column(s) {missing} not found; columns are "
                             f"{list(data.columns)}.", column=missing[0])
    for name in ("sep", "decimal", "encoding"):
        options.pop(name, None)
    occasion = options.get("occasion")
    keys = [c for c in by if c != occasion] or by

    dicts = {k: options[k] for k in ("terminal", "exclude") if isinstance(options.get(k), dict)}
    if dicts:
        present = {_key(r, by) for r in data[by].drop_duplicates().compute().itertuples(index=False)}
        for name, d in dicts.items():
            unknown = [k for k in d if k not in present]
            if unknown:
                raise InputDataError(f"{name} names profile {unknown[0]!r}, which is not in the data "
                                     f"(profiles are keyed by {by}).")

    meta = _meta(data, by, options, nca)

    def one_partition(df):
        if len(df) == 0:
            return meta.copy()
        opts = dict(options)
        if dicts:
            here = {_key(r, by) for r in df[by].drop_duplicates().itertuples(index=False)}
            for name, d in dicts.items():
                opts[name] = {k: v for k, v in d.items() if k in here}
        res = nca(df.reset_index(drop=True), by=by, **opts)
        return pd.DataFrame(res)[list(meta.columns)]

    return data.shuffle(on=keys).map_partitions(one_partition, meta=meta)


def _key(row, by):
    return row[0] if len(by) == 1 else tuple(row)


def _meta(data, by, options, nca):
    """The result's columns and dtypes, from a one-profile stand-in table with the same columns."""
    sample = data._meta_nonempty
    n = 4
    frame = {c: np.repeat(sample[c].to_numpy()[:1], n) for c in by}
    frame[options.get("time", "time")] = [0.0, 1.0, 2.0, 4.0]
    frame[options.get("conc", "conc")] = [0.0, 2.0, 1.0, 0.5]
    for opt, value in _STAND_IN.items():
        col = options.get(opt)
        if isinstance(col, str) and col in data.columns and col not in frame:
            frame[col] = [value] * n
    stand_in = pd.DataFrame(frame)
    for c in by:
        stand_in[c] = stand_in[c].astype(sample[c].dtype)
    opts = dict(options)
    opts.update(terminal="auto", selections=None) if "selections" in opts else opts.update(terminal="auto")
    if isinstance(opts.get("exclude"), dict):
        opts["exclude"] = None
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = nca(stand_in, by=by, **opts)
    return pd.DataFrame(res).iloc[:0]
