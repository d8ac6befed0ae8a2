"""Column parsing of a study table, with every error located.

:class:`TableSource` wraps a DataFrame or a CSV file being analysed: it reads
numeric, concentration (numbers and BLQ markers) and yes/no columns, forms
profiles from the key columns, takes per-profile values (dose, tau, ...) that
must be constant within a profile, and names the file, line and column of
anything it cannot read.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

from .blq import BLQ_MARKERS, parse_concentrations
from .errors import InputDataError
from .io import LINE, read_study_csv, wrong_delimiter_hint
from .keys import canonical_keys, spelling_notes
from .numbers import describe_bad_number, parse_numbers

__all__ = ["TableSource", "key_of", "terminal_windows"]

_TRUE = {"1", "true", "t", "yes", "y", "blq"}
_FALSE = {"0", "false", "f", "no", "n", ""}


def key_of(row_values, by):
    """The profile key as users write it: a scalar for one ``by`` column, else a tuple."""
    return row_values[0] if len(by) == 1 else tuple(row_values)



def terminal_windows(terminal, keys, by, P):
    """``terminal`` as the engine takes it: a dict of profile key -> window becomes a (profiles, 2) array."""
    if not isinstance(terminal, dict):
        return terminal
    arr = np.full((P, 2), np.nan)
    lookup = {key_of(list(r), by): i for i, r in enumerate(keys.itertuples(index=False))}
    for k, win in terminal.items():
        if k not in lookup:
            raise InputDataError(f"terminal names profile {k!r}, which is not in the data (profiles are keyed by {by}).")
        if win is None or (isinstance(win, str) and win == "auto"):
            continue
        arr[lookup[k]] = win
        if not arr[lookup[k], 1] > arr[lookup[k], 0]:
            raise InputDataError(f"terminal window for profile {k!r} must have end > start; got {tuple(win)!r}.",
                                 profile=k)
    return arr



def _comma_hint(raw, decimal):
    return " It looks like a decimal comma: pass decimal=','." if decimal == "." and "," in str(raw) else ""


class TableSource:
    """A table being parsed, with the means to name any cell in an error."""

    def __init__(self, frame, file, name):
        self.frame = frame
        self.file = file
        self.name = name

    @classmethod
    def open(cls, data, *, sep, encoding):
        if isinstance(data, (str, os.PathLike)):
            return cls(read_study_csv(data, sep=sep, encoding=encoding), os.fspath(data), os.fspath(data))
        if isinstance(data, pd.DataFrame):
            if len(data) == 0:
                raise InputDataError("the table is empty: expected one row per sample.")
            if data.columns.duplicated().any():
                d = data.columns[data.columns.duplicated()][0]
                raise InputDataError(f"column name {d!r} appears more than once; give each column a distinct name.",
                                     column=d)
            return cls(data, None, "table")
        raise TypeError(f"data must be a pandas DataFrame or the path of a CSV file; got {type(data).__name__}.")

    def line(self, i):
        if self.file is not None:
            return int(self.frame[LINE].iloc[i])
        return self.frame.index[i]

    def where_row(self, i):
        return f"line {self.line(i)}" if self.file is not None else f"row {self.line(i)!r}"

    def at(self, i, column):
        return f"{self.name}, {self.where_row(i)}, column {column!r}"

    def original(self):
        """The rows as given (without the reader's line column)."""
        return self.frame[[c for c in self.frame.columns if c != LINE]].copy()

    def lines(self):
        """File line of every row (None for a DataFrame)."""
        return self.frame[LINE].to_numpy() if self.file is not None else None

    def require(self, columns):
        missing = [c for c in dict.fromkeys(columns) if c not in self.frame.columns]
        if missing:
            have = [c for c in self.frame.columns if c != LINE]
            raise InputDataError(
                f"{self.name}: required column(s) {missing} not found; columns are {have}."
                + wrong_delimiter_hint(have) + " Map your names with time=, conc=, by=, dose=.",
                file=self.file, column=missing[0])

    def _text(self, column):
        return self.frame[column].astype(str).str.strip()

    def numeric(self, column, decimal="."):
        """A numeric column under the one strict rule of :func:`pkwidgets.numbers.parse_numbers`."""
        s = self.frame[column]
        if pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s):
            return s.to_numpy(dtype=np.float64, na_value=np.nan)
        vals, bad = parse_numbers(s, decimal=decimal)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise InputDataError(
                f"{self.at(i, column)}: {describe_bad_number(s.iloc[i], decimal=decimal)} ({int(bad.sum())} such "
                f"value(s) in the column).{_comma_hint(s.iloc[i], decimal)}",
                file=self.file, line=self.line(i), column=column)
        return vals

    def concentrations(self, column, decimal="."):
        """Numbers (strict rule), BLQ markers and ``<LLOQ`` text: values, BLQ flags, LLOQ from the text."""
        s = self.frame[column]
        n = len(s)
        if pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s):
            return s.to_numpy(dtype=np.float64, na_value=np.nan), np.zeros(n, bool), np.full(n, np.nan)
        vals, bad = parse_numbers(s, decimal=decimal)
        vals = np.array(vals)  # writable
        blq = np.zeros(n, dtype=bool)
        lloq = np.full(n, np.nan)
        todo = np.flatnonzero(bad)
        if todo.size:
            raw = s.iloc[todo].to_numpy(dtype=object)
            _, b, lq, _ = parse_concentrations(list(np.where(pd.isna(raw), None, raw)))
            if not b.all():  # only BLQ text is read here: numbers follow the strict rule alone
                i = int(todo[np.flatnonzero(~b)[0]])
                raise InputDataError(
                    f"{self.at(i, column)}: {s.iloc[i]!r} is neither a number nor a BLQ marker "
                    f"({', '.join(BLQ_MARKERS)}, or '<' followed by the LLOQ); "
                    f"{describe_bad_number(s.iloc[i], decimal=decimal).split(': ', 1)[-1]}."
                    f"{_comma_hint(s.iloc[i], decimal)}",
                    file=self.file, line=self.line(i), column=column)
            vals[todo], blq[todo], lloq[todo] = np.nan, True, lq
        return vals, blq, lloq

    def boolean(self, column):
        s = self.frame[column]
        if pd.api.types.is_bool_dtype(s):
            return s.to_numpy(dtype=bool, na_value=False)
        text = self._text(column).str.lower()
        text = text.where(~s.isna(), "")
        t = text.isin(_TRUE).to_numpy()
        fz = text.isin(_FALSE).to_numpy()
        bad = ~t & ~fz
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise InputDataError(
                f"{self.at(i, column)}: {s.iloc[i]!r} is not a yes/no value (use true/false, yes/no or 1/0).",
                file=self.file, line=self.line(i), column=column)
        return t

    def profiles(self, by, keep):
        """Profile id of every row (-1 where not kept), by the key rule of :mod:`pkwidgets.keys`.

        Returns the ids, the key table (one row per id, values under the key
        rule) and the notes on merged or case-only spellings.
        """
        for col in by:
            miss = self.frame[col].isna().to_numpy() | (self._text(col) == "").to_numpy()
            if (miss & keep).any():
                i = int(np.flatnonzero(miss & keep)[0])
                raise InputDataError(f"{self.at(i, col)}: profile key is empty; every sample needs a {col!r}.",
                                     file=self.file, line=self.line(i), column=col)
        canon = pd.DataFrame({col: canonical_keys(self.frame[col]) for col in by}, index=self.frame.index)
        notes = [n for col in by for n in spelling_notes(self.frame[col][keep], canon[col][keep], col,
                                                         lambda j: self.where_row(int(np.flatnonzero(keep)[j])))]
        prof = np.full(len(self.frame), -1, dtype=np.int64)
        prof[keep] = canon.loc[keep].groupby(by, sort=True, dropna=False).ngroup().to_numpy()
        P = int(prof.max()) + 1 if keep.any() else 0
        first = np.full(P, -1, dtype=np.int64)
        valid = np.flatnonzero(prof >= 0)
        first[:] = valid[np.unique(prof[valid], return_index=True)[1]]
        keys = canon.iloc[first].reset_index(drop=True)
        for col in by:
            if all(isinstance(v, (int, np.integer)) for v in keys[col]):
                keys[col] = keys[col].astype(np.int64)
            elif all(isinstance(v, (float, np.floating)) for v in keys[col]):
                keys[col] = keys[col].astype(np.float64)
        return prof, keys, notes

    def per_profile(self, value, prof, P, name, decimal):
        if not isinstance(value, str):
            return value
        vals = self.numeric(value, decimal)
        ok = prof >= 0
        df = pd.DataFrame({"p": prof[ok], "v": vals[ok]}).dropna()
        spread = df.groupby("p")["v"].agg(["min", "max"])
        conflict = spread.index[spread["min"] != spread["max"]]
        if len(conflict):
            p = int(conflict[0])
            lines = [self.where_row(i) for i in np.flatnonzero(prof == p)[:6]]
            raise InputDataError(
                f"{self.name}: column {value!r} differs within one profile ({spread.loc[p, 'min']:g} and "
                f"{spread.loc[p, 'max']:g}; {', '.join(lines)}); a profile has one {name}. Split the profile "
                "with another by= column (e.g. period or day) or correct the value.",
                file=self.file, column=value)
        out = np.full(P, np.nan)
        out[spread.index.to_numpy()] = spread["min"].to_numpy()
        return out

    def check_doses(self, column, dose_p, prof, keys):
        """A dose column asks for CL, V and dose-normalised values: every profile needs a finite dose > 0."""
        with np.errstate(invalid="ignore"):
            bad = np.flatnonzero(~(dose_p > 0) | np.isinf(dose_p))
        if bad.size:
            p = int(bad[0])
            rows = np.flatnonzero(prof == p)
            key = keys.iloc[p].to_dict()
            got = "no value" if np.isnan(dose_p[p]) else f"dose {float(dose_p[p]):g}"
            raise InputDataError(
                f"{self.name}: profile {key} has {got} in column {column!r} "
                f"({', '.join(self.where_row(i) for i in rows[:6])}); CL, V and dose-normalised values need "
                "a finite dose > 0. Correct the dose, leave the profile out, or pass dose=None to analyse "
                "without doses.",
                file=self.file, line=self.line(rows[0]), column=column, profile=key)

    def exclusions(self, exclude, prof, keys, t, by):
        n = len(self.frame)
        if exclude is None:
            return np.zeros(n, dtype=bool)
        if isinstance(exclude, str):
            return self.boolean(exclude)
        if isinstance(exclude, dict):
            lookup = {key_of(list(r), by): i for i, r in enumerate(keys.itertuples(index=False))}
            mask = np.zeros(n, dtype=bool)
            for k, times in exclude.items():
                if k not in lookup:
                    raise InputDataError(f"exclude names profile {k!r}, which is not in the data.")
                rows = np.flatnonzero(prof == lookup[k])
                for x in np.atleast_1d(times):
                    hit = rows[np.isclose(t[rows], float(x), rtol=1e-9, atol=1e-12)]
                    if hit.size == 0:
                        raise InputDataError(f"exclude lists time {float(x)!r} for profile {k!r}, which has no "
                                             "sample then.", profile=k)
                    mask[hit] = True
            return mask
        raise TypeError(f"exclude must be None, a column name or a dict of profile -> times; got {type(exclude).__name__}.")
