"""Input and result object of the sparse-sampling NCA (:mod:`pkwidgets.sparse`)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .errors import InputDataError
from .parameters import PARAMETERS
from .columns import TableSource
from .units import StudyUnits

__all__ = ["SparseResult", "read_sparse_table"]

CODES = ("CMAX", "TMAX", "CLST", "TLST", "AUCLST")
#: Columns of ``parameters`` after the codes (own words; not CDISC codes).
EXTRA = ("AUCLST_SE", "AUCLST_CI_lower", "AUCLST_CI_upper", "AUCLST_df", "variance_method", "n_animals")


@dataclass
class SparseResult:
    """Result of :func:`pkwidgets.nca_sparse`.

    Attributes
    ----------
    parameters : DataFrame
        One row per group: group keys, CMAX, TMAX, CLST, TLST, AUCLST of the
        mean profile, then AUCLST_SE, AUCLST_CI_lower, AUCLST_CI_upper,
        AUCLST_df (inf for the normal quantile), variance_method, n_animals.
    mean_profile : DataFrame
        Per group and time: n (values used), n_blq, mean, sd, se, in_auclst, weight.
    samples : DataFrame
        Every input row with its value, used and reason.
    flags : DataFrame
        Group keys, flag, detail.
    units : dict
        Code -> unit text.
    settings : dict
    """

    parameters: pd.DataFrame
    mean_profile: pd.DataFrame
    samples: pd.DataFrame
    flags: pd.DataFrame
    units: dict
    settings: dict = field(default_factory=dict)

    @classmethod
    def build(cls, rows, means, samples, flags, settings):
        group = settings["group"]
        params = pd.DataFrame(rows, columns=group + list(CODES) + list(EXTRA))
        mp = (pd.concat(means, ignore_index=True) if means else
              pd.DataFrame(columns=["time", "n", "n_blq", "mean", "sd", "se", "in_auclst", "weight"]))
        mp = mp[group + [c for c in mp.columns if c not in group]]
        su = StudyUnits(settings["units"]["time"], settings["units"]["conc"])
        units = {c: su.unit_of(c)[0] for c in CODES}
        return cls(params, mp, samples, pd.DataFrame(flags, columns=group + ["flag", "detail"]), units, settings)

    def group(self, key) -> pd.Series:
        """The parameters of one group, looked up by its key (a value, or a tuple for several keys)."""
        by = self.settings["group"]
        key = key if isinstance(key, tuple) else (key,)
        if len(key) != len(by):
            raise KeyError(f"a group key has {len(by)} value(s) ({by}); got {key!r}.")
        hit = np.logical_and.reduce([self.parameters[b].astype(str).to_numpy() == str(k) for b, k in zip(by, key)])
        if hit.sum() != 1:
            raise KeyError(f"no group {dict(zip(by, key))} in the result.")
        return self.parameters.loc[hit].iloc[0].drop(by).infer_objects()

    def to_long(self) -> pd.DataFrame:
        """One row per group and code: keys, PPTESTCD, PPTEST, value, unit, and se / ci_lower / ci_upper on AUCLST."""
        by = self.settings["group"]
        long = self.parameters.melt(id_vars=by, value_vars=list(CODES), var_name="PPTESTCD", value_name="value")
        long["PPTEST"] = long["PPTESTCD"].map(lambda c: PARAMETERS[c].name + " (mean profile)")
        long["unit"] = long["PPTESTCD"].map(self.units)
        extra = self.parameters[by + ["AUCLST_SE", "AUCLST_CI_lower", "AUCLST_CI_upper"]].assign(PPTESTCD="AUCLST")
        long = long.merge(extra, on=by + ["PPTESTCD"], how="left").rename(columns={
            "AUCLST_SE": "se", "AUCLST_CI_lower": "ci_lower", "AUCLST_CI_upper": "ci_upper"})
        long["method"] = self.settings["method"]
        return long

    def __repr__(self):
        return (f"SparseResult: {len(self.parameters)} group(s), {int(self.samples['used'].sum())} of "
                f"{len(self.samples)} sample(s) used, {len(self.flags)} flag(s)\n{self.parameters!r}")


def _fail(src, i, column, what):
    raise InputDataError(f"{src.at(i, column)}: {what}", file=src.file, line=src.line(i), column=column)


def read_sparse_table(data, *, group, time, conc, animal, lloq, blq, sep, encoding):
    """Parse the samples; one row per input row with ``value``, ``blq``, ``used`` and ``reason``."""
    src = TableSource.open(data, sep=sep, encoding=encoding)
    src.require(group + [time, conc] + [c for c in (animal, lloq) if c])
    t = src.numeric(time)
    c, is_blq, lloq_text = src.concentrations(conc)
    for col in group + ([animal] if animal else []):
        bad = np.flatnonzero(src.frame[col].isna().to_numpy())
        if bad.size:
            _fail(src, bad[0], col, "the value is empty; every sample needs its group and animal.")
    for col, x, what in ((time, t, "the time is empty or negative; give the nominal time after the dose."),
                         (conc, c, "the concentration is negative.")):
        bad = np.flatnonzero((np.isnan(x) | (x < 0)) if col == time else (x < 0))
        if bad.size:
            _fail(src, bad[0], col, what)
    out = pd.DataFrame(index=src.frame.index)
    if src.file is None:
        out["row"] = src.frame.index
    else:
        out["line"] = src.lines()
    for g in group:
        out[g] = src.frame[g].to_numpy()
    out["animal"] = src.frame[animal].astype(str).to_numpy() if animal else [f"row {i}" for i in range(len(out))]
    out["time"], out["conc"], out["blq"] = t, c, is_blq
    lq = src.numeric(lloq) if lloq else lloq_text
    _values(src, out, lq, blq, conc)
    _check_duplicates(src, out, group, animal)
    return out


def _values(src, out, lq, blq, conc):
    b = out["blq"].to_numpy()
    value = out["conc"].to_numpy().copy()
    reason = np.full(len(out), "", dtype=object)
    if blq == "zero":
        value[b] = 0.0
        reason[b] = "BLQ: counted as 0"
    elif blq == "half-lloq":
        bad = np.flatnonzero(b & np.isnan(lq))
        if bad.size:
            _fail(src, bad[0], conc, "BLQ without an LLOQ: give an lloq column (or '<x' text) for blq='half-lloq'.")
        value[b] = lq[b] / 2.0
        reason[b] = "BLQ: counted as LLOQ/2"
    else:
        reason[b] = "BLQ: left out (rule 'missing')"
    missing = np.isnan(out["conc"].to_numpy()) & ~b
    reason[missing] = "no concentration: not used"
    out["value"] = value
    out["used"] = ~np.isnan(value)
    out["reason"] = reason


def _check_duplicates(src, out, group, animal):
    if not animal:
        return
    dup = out.duplicated(group + ["animal", "time"], keep="first").to_numpy()
    if dup.any():
        i = int(np.flatnonzero(dup)[0])
        _fail(src, i, animal, f"animal {out['animal'].iloc[i]!r} has two samples at time {out['time'].iloc[i]:g} "
                              "in one group; keep one per animal and time.")
