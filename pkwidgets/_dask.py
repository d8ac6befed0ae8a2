"""Scale-out: :func:`pkwidgets.nca` over a Dask DataFrame.

Profiles are kept whole on one partition by shuffling the rows on the
profile keys (``by`` without the ``occasion`` column, so that all occasions
of a subject meet); every partition then runs the same in-memory analysis
(and so the same array engine).  The result carries lazy ``parameters``,
``samples`` and ``flags`` tables; their column types are declared from the
parameter catalogue and the options, not learnt by running on stand-in
data.  Dask is imported only when a Dask DataFrame is passed (optional extra
``pkwidgets[dask]``).  This module imports nothing from :mod:`pkwidgets.table`:
the table layer hands in the function that analyses one partition.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

__all__ = ["is_dask_frame", "nca_dask", "LazyResult"]

#: Profile ids of partition ``i`` are ``i * ID_STRIDE + local id`` (unique across partitions).
ID_STRIDE = 1 << 32


def is_dask_frame(data) -> bool:
    """True for a Dask DataFrame (checked without importing Dask)."""
    return type(data).__module__.split(".")[0] == "dask" and hasattr(data, "map_partitions")


@dataclass(frozen=True)
class LazyResult:
    """Lazy tables of an analysis over a Dask DataFrame.

    Attributes
    ----------
    parameters, samples, flags : dask.dataframe.DataFrame
        As :class:`pkwidgets.NCAResult`; row order follows partitions (sort
        by the keys for a stable order).  Profile ids are unique across
        partitions (partition number x 2**32 + id within the partition).
    partitions : list of dask.delayed.Delayed
        One :class:`pkwidgets.NCAResult` per partition.
    """

    parameters: object
    samples: object
    flags: object
    partitions: list

    def compute(self):
        """Compute every partition once and combine them into one :class:`pkwidgets.NCAResult`."""
        import dask

        from .combine import concat_results

        return concat_results([r for r in dask.compute(*self.partitions) if len(r.parameters)])

    def to_parquet(self, path, **kwargs):
        """Write the parameters (one file per partition)."""
        return self.parameters.to_parquet(path, **kwargs)


def nca_dask(data, spec, run, *, selections=None) -> LazyResult:
    """NCA of every profile of a Dask DataFrame.

    Parameters
    ----------
    data : dask.dataframe.DataFrame
        Long format, one row per sample, as for :func:`pkwidgets.nca`.
    spec : pkwidgets.table.StudySpec
        The validated arguments.
    run : callable
        ``run(frame, spec, selections=...)`` -> NCAResult for one partition.
    """
    import dask
    import dask.dataframe as dd

    from .errors import InputDataError

    by = list(spec.by)
    missing = [c for c in by if c not in data.columns]
    if missing:
        raise InputDataError(f"dask table: profile key column(s) {missing} not found; columns are "
                             f"{list(data.columns)}.", column=missing[0])
    _check_profile_dicts(data, spec, by)
    keys = [c for c in by if c != spec.options.occasion] or by
    metas = _metas(data, spec)
    parts = data.shuffle(on=keys).to_delayed()
    results = [dask.delayed(_one_partition)(part, i, spec, run, selections, metas) for i, part in enumerate(parts)]
    frames = {name: dd.from_delayed([dask.delayed(getattr)(r, name) for r in results], meta=meta, verify_meta=False)
              for name, meta in metas.items()}
    return LazyResult(partitions=results, **frames)


def _one_partition(df, number, spec, run, selections, metas):
    """The analysis of one partition, its profile ids made unique and its key columns of the declared types."""
    from .combine import renumber

    if len(df) == 0:
        return _empty_result(df, spec)
    here = {_key(r, spec.by) for r in df[list(spec.by)].drop_duplicates().itertuples(index=False)}
    options = spec.options
    if isinstance(options.terminal, dict):
        options = options.replace(terminal={k: v for k, v in options.terminal.items() if k in here})
    ex = spec.exclude_times and {k: v for k, v in spec.exclude_times.items() if k in here}
    res = renumber(run(df.reset_index(drop=True), replace(spec, options=options, exclude_times=ex),
                       selections=selections), number * ID_STRIDE)
    keys = list(spec.by)
    return replace(res, **{name: getattr(res, name).astype({k: metas[name][k].dtype for k in keys})
                           for name in ("parameters", "flags")})


def _empty_result(df, spec):
    from .result import NCAResult, ProfileArrays

    metas = _metas_from(df.iloc[:0], spec)
    empty = np.empty(0)
    arrays = ProfileArrays(ids=np.empty(0, np.int64), offsets=np.zeros(1, np.int64), time=empty, conc=empty,
                           blq=empty.astype(bool), lloq=empty, exclude=empty.astype(bool),
                           lambda_z_used=empty.astype(bool), terminal=np.empty((0, 2)))
    return NCAResult(options=spec.options, units={}, settings={}, by=spec.by, arrays=arrays, **metas)


def _key(row, by):
    return row[0] if len(by) == 1 else tuple(row)


def _check_profile_dicts(data, spec, by):
    """Profiles named in ``terminal``/``exclude`` dicts must exist (one pass over the key columns)."""
    from .errors import InputDataError

    dicts = {name: d for name, d in (("terminal", spec.options.terminal), ("exclude", spec.exclude_times))
             if isinstance(d, dict)}
    if not dicts:
        return
    present = {_key(r, by) for r in data[by].drop_duplicates().compute().itertuples(index=False)}
    for name, d in dicts.items():
        unknown = [k for k in d if k not in present]
        if unknown:
            raise InputDataError(f"{name} names profile {unknown[0]!r}, which is not in the data "
                                 f"(profiles are keyed by {by}).")


def _metas(data, spec) -> dict:
    return _metas_from(data._meta, spec)


def _metas_from(sample: pd.DataFrame, spec) -> dict:
    """Empty tables with the result's columns and dtypes, from the catalogue and the options."""
    from .parameters import output_codes, partial_code
    from .profile import ordered_codes
    from .result import SAMPLE_COLUMNS

    o, by = spec.options, list(spec.by)
    partial = o.partial
    names = list(partial) if isinstance(partial, dict) else [partial_code(float(s), float(e)) for s, e in partial]
    codes = list(output_codes(o, partial_names=names, has_dose=spec.columns.dose is not None or "dose" in spec.amounts,
                              has_tau=o.tau is not None or spec.columns.tau is not None))
    if o.occasion is not None:
        codes += ["ARAUC", "ARCMAX"]
    keys = sample[by].iloc[:0]
    ids = pd.DataFrame({"profile_id": np.empty(0, np.int64)})
    parameters = pd.concat([keys, ids, pd.DataFrame({c: np.empty(0) for c in ordered_codes(codes)})], axis=1)
    samples = sample.iloc[:0].copy()
    for name, dtype in (("profile", np.int64), ("time", np.float64), ("used", bool), ("reason", object),
                        ("lambda_z", bool)):
        samples[SAMPLE_COLUMNS[name]] = pd.Series(dtype=dtype)
    flags = pd.concat([keys, ids, pd.DataFrame({"flag": pd.Series(dtype=object), "severity": pd.Series(dtype=object),
                                                "message": pd.Series(dtype=object)})], axis=1)
    return {"parameters": parameters, "samples": samples, "flags": flags}
