r"""The selection record: hand-made lambda-z choices, justified and replayable.

A :class:`SelectionRecord` is a JSON file kept next to an analysis.  Every
manual choice (a terminal window, excluded sampling times, or a return to
the automatic search) is appended as an entry with the profile key, the
choice, a reason, an author, a UTC timestamp and a fingerprint of that
profile's input data.  :func:`pkwidgets.nca` reads the record
(``selections=``) and applies the latest choice of each profile, so an
unattended re-run (papermill, CI) reproduces the parameters; a profile whose
data no longer match the fingerprint falls back to the automatic search and
is flagged ``selection_stale``.

File layout (``schema_version`` 1)::

    {
      "schema": "pkwidgets.selection-record",
      "schema_version": 1,
      "fingerprint": "<description of the canonical form>",
      "entries": [
        {"profile": ["1"],
         "choice": {"action": "window", "start": 2.0, "end": 24.0},
         "state": {"window": [2.0, 24.0], "exclude": []},
         "reason": "absorption still visible at 1 h",
         "author": "jdoe",
         "timestamp": "2026-01-05T10:31:07Z",
         "fingerprint": "9f86d0..."},
        ...
      ]
    }

``choice`` is what the person did; ``state`` is the whole selection of that
profile after it (window or ``null`` for automatic, excluded times).  The
record is append-only: the history stays readable and the latest entry of a
profile is the one applied.  When an entry's fingerprint differs from the
one before it for the same profile, the earlier selection is not carried
over: the state restarts from automatic before the new choice is applied.

Profile keys are stored as lists of text, one item per ``by`` column
(``str(value).strip()``), so a key typed as the integer 1 in a DataFrame and
read as the text "1" from a CSV file name the same profile.

The fingerprint (:func:`profile_fingerprint`) covers the times, the
concentrations and the BLQ marks of the profile as given to the engine
(times after the dose), not the dose, the LLOQ or the options.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
import os

import numpy as np

from .errors import InputDataError
from .io import write_atomic

__all__ = [
    "SelectionRecord",
    "SelectionState",
    "profile_fingerprint",
    "canonical_key",
    "SCHEMA",
    "SCHEMA_VERSION",
]

SCHEMA = "pkwidgets.selection-record"
SCHEMA_VERSION = 1
FINGERPRINT_FORM = (
    "SHA-256 (hex) of UTF-8 text: one line per sample with a time, sorted by time; "
    "each line 'time;conc;blq' with time and conc as float64 in float.hex() form "
    "(-0.0 written as 0.0, NaN as 'nan'), conc written 'blq' when the sample is BLQ, "
    "blq as 1 or 0; lines joined by '\\n'; samples without a time are left out"
)


def _hex(x: float) -> str:
    x = float(x)
    if math.isnan(x):
        return "nan"
    return (x + 0.0).hex()


def profile_fingerprint(time, conc, blq=None) -> str:
    r"""SHA-256 fingerprint of one profile's input data.

    Parameters
    ----------
    time, conc : array_like, 1-D
        Sampling times after the dose and concentrations (NaN = missing);
        NaN-padded entries (no time) are ignored.
    blq : array_like of bool, optional
        True where the sample is below the LLOQ (its conc value is then not
        part of the fingerprint, as the engine ignores it).

    Returns
    -------
    str
        64 hexadecimal characters.

    Notes
    -----
    Canonical form: one line per sample that has a time, sorted by time;
    each line is ``time;conc;blq`` where numbers are written with
    :meth:`float.hex` (exact for float64, independent of platform and
    locale), ``-0.0`` as ``0.0``, NaN as ``nan``, a BLQ sample's conc as
    ``blq`` and the BLQ mark as ``1``/``0``.  Lines are joined by ``\n``,
    encoded as UTF-8 and hashed with SHA-256 (FIPS 180-4).  The order of
    the input rows does not change the fingerprint; any change of a time,
    a concentration or a BLQ mark does.

    Examples
    --------
    >>> a = profile_fingerprint([0, 1, 2], [0.0, 5.0, 2.5])
    >>> a == profile_fingerprint([2, 0, 1], [2.5, 0.0, 5.0])
    True
    >>> a == profile_fingerprint([0, 1, 2], [0.0, 5.0, 2.6])
    False
    """
    t = np.asarray(time, dtype=np.float64).ravel()
    c = np.asarray(conc, dtype=np.float64).ravel()
    if t.shape != c.shape:
        raise ValueError(f"time has {t.size} values but conc has {c.size}; they must match.")
    b = np.zeros(t.shape, dtype=bool) if blq is None else np.asarray(blq, dtype=bool).ravel()
    if b.shape != t.shape:
        raise ValueError(f"blq has {b.size} values but time has {t.size}; they must match.")
    keep = ~np.isnan(t)
    order = np.argsort(t[keep], kind="stable")
    tk, ck, bk = t[keep][order], c[keep][order], b[keep][order]
    lines = [
        f"{_hex(ti)};{'blq' if bi else _hex(ci)};{int(bi)}" for ti, ci, bi in zip(tk, ck, bk)
    ]
    return hashlib.sha256("\n".join(lines).encode("utf-8")).hexdigest()


def canonical_key(key) -> tuple:
    """Profile key as a tuple of text, one item per ``by`` column.

    Parameters
    ----------
    key : scalar, or list, tuple or 1-D array of scalars
        One value per ``by`` column; a scalar is a one-column key.

    Returns
    -------
    tuple of str
        ``str(value).strip()`` of each item (NumPy scalars first turned into
        Python ones), so the integer ``1`` of a DataFrame and the text ``"1"``
        read from a CSV file name the same profile.

    Examples
    --------
    >>> canonical_key(1)
    ('1',)
    >>> canonical_key(("1", " A"))
    ('1', 'A')
    """
    if isinstance(key, (list, tuple, np.ndarray)):
        items = np.ravel(key).tolist() if isinstance(key, np.ndarray) else key
    else:
        items = (key,)
    out = []
    for v in items:
        if isinstance(v, (np.generic,)):
            v = v.item()
        out.append(str(v).strip())
    return tuple(out)


class SelectionState(dict):
    """The selection of one profile after its latest record entry.

    A ``dict`` with the keys ``window`` (``[start, end]`` or None for the
    automatic search) and ``exclude`` (times left out of the fit), plus
    ``fingerprint``, ``reason``, ``author`` and ``timestamp`` of that entry;
    the properties give the first ones typed.
    """

    @property
    def window(self):
        """(start, end) as floats, or None for the automatic search."""
        w = self.get("window")
        return None if w is None else (float(w[0]), float(w[1]))

    @property
    def exclude(self) -> list:
        """Sampling times left out of the lambda-z fit (floats, sorted as recorded)."""
        return [float(x) for x in self.get("exclude", [])]

    @property
    def fingerprint(self):
        """:func:`profile_fingerprint` of the data the choice was made on, or None."""
        return self.get("fingerprint")

    @property
    def is_automatic(self) -> bool:
        """True when there is no window and nothing is left out."""
        return self.window is None and not self.exclude


def _author(author):
    if author is None:
        author = os.environ.get("USER") or os.environ.get("LOGNAME") or "unknown"
    author = str(author).strip()
    if not author:
        raise ValueError("author must be a non-empty name; pass author= or set the USER environment variable.")
    return author


def _reason(reason):
    if not isinstance(reason, str) or not reason.strip():
        raise ValueError(
            f"reason must be a short non-empty text saying why the choice was made; got {reason!r}."
        )
    return reason.strip()


def _now():
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z")


def _finite(x, name, key):
    try:
        v = float(x)
    except (TypeError, ValueError):
        raise TypeError(f"{name} of profile {_label(key)} must be a number (a sampling time); "
                        f"got {x!r}.") from None
    if not math.isfinite(v):
        raise ValueError(f"{name} of profile {_label(key)} must be a finite time; got {v!r}.")
    return v


class SelectionRecord:
    """Append-only record of hand-made lambda-z choices, one JSON file.

    Parameters
    ----------
    path : str or os.PathLike, optional
        File the record is saved to by :meth:`save` (and was loaded from).

    Examples
    --------
    >>> rec = SelectionRecord()
    >>> fp = profile_fingerprint([0, 1, 2, 4, 8], [0, 9, 7, 4, 1.2])
    >>> _ = rec.set_window("S01", 2, 8, "absorption visible until 2 h", author="analyst", fingerprint=fp)
    >>> rec.state("S01").window
    (2.0, 8.0)
    >>> rec.set_window("S01", 8, 2, "typo")
    Traceback (most recent call last):
    ...
    ValueError: window end (2.0) must be after its start (8.0) for profile S01.
    """

    def __init__(self, path=None, entries=None):
        self.path = None if path is None else os.fspath(path)
        self.entries: list[dict] = list(entries or [])
        # profile key tuple -> positions of its entries in ``entries``, oldest first; built
        # incrementally, so appending is O(1) amortised and loading is linear in the entries
        self._by_key: dict[tuple, list[int]] = {}
        self._indexed = 0

    def _positions(self) -> dict:
        """``{key tuple: [entry positions]}``, caught up with any entries appended since the last call."""
        n = len(self.entries)
        if n < self._indexed:  # entries were removed or replaced: index again from the start
            self._by_key, self._indexed = {}, 0
        for i in range(self._indexed, n):
            self._by_key.setdefault(tuple(self.entries[i]["profile"]), []).append(i)
        self._indexed = n
        return self._by_key

    # ---------------------------------------------------------------- I/O
    @classmethod
    def load(cls, path) -> "SelectionRecord":
        """Read a record file; a missing file gives an empty record bound to ``path``.

        Raises
        ------
        InputDataError
            If the file cannot be read, is not JSON, or is not a selection
            record of a known schema version.  The file is left untouched.
        """
        path = os.fspath(path)
        if not os.path.exists(path):
            return cls(path)
        try:
            with open(path, "rb") as fh:
                raw = fh.read()
        except OSError as exc:
            raise InputDataError(f"selection record {path} cannot be read ({exc.strerror}); check the path "
                                 "and its permissions.", file=path) from None
        try:
            doc = json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            where = f" at line {exc.lineno}, column {exc.colno}" if isinstance(exc, json.JSONDecodeError) else ""
            raise InputDataError(
                f"selection record {path} is not valid JSON{where}; it was not changed. Restore it from version "
                "control or a backup, or move it aside to start a new record.", file=path) from None
        if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
            raise InputDataError(f"{path} is not a pkwidgets selection record (missing \"schema\": \"{SCHEMA}\"); "
                                 "it was not changed.", file=path)
        version = doc.get("schema_version")
        if version != SCHEMA_VERSION:
            raise InputDataError(f"selection record {path} has schema_version {version!r}; this version of "
                                 f"pkwidgets reads version {SCHEMA_VERSION}. It was not changed.", file=path)
        entries = doc.get("entries")
        if not isinstance(entries, list):
            raise InputDataError(f"selection record {path}: \"entries\" must be a list; it was not changed.",
                                 file=path)
        for i, e in enumerate(entries):
            problem = _entry_problem(e)
            if problem:
                raise InputDataError(f"selection record {path}, entry {i}: {problem}; the file was not changed.",
                                     file=path)
        return cls(path, entries)

    def to_json(self) -> str:
        """The file text: the schema header and every entry, indented JSON ending in a newline."""
        doc = {"schema": SCHEMA, "schema_version": SCHEMA_VERSION, "fingerprint": FINGERPRINT_FORM,
               "entries": self.entries}
        return json.dumps(doc, indent=1, ensure_ascii=False) + "\n"

    def save(self, path=None) -> str:
        """Write the record atomically (temporary file, then rename); return the path."""
        path = self.path if path is None else os.fspath(path)
        if path is None:
            raise ValueError("this record has no file yet: pass save(path) or create it with SelectionRecord.load(path).")
        write_atomic(path, self.to_json())
        self.path = path
        return path

    # -------------------------------------------------------------- choices
    def _append(self, key, choice, state_fn, reason, author, fingerprint):
        k = canonical_key(key)
        entry_fp = None if fingerprint is None else str(fingerprint)
        prev = self.state(k)
        if prev is None or prev.fingerprint != entry_fp:
            base = {"window": None, "exclude": []}
        else:
            base = {"window": prev.get("window"), "exclude": list(prev.get("exclude", []))}
        entry = {
            "profile": list(k),
            "choice": choice,
            "state": state_fn(base),
            "reason": _reason(reason),
            "author": _author(author),
            "timestamp": _now(),
            "fingerprint": entry_fp,
        }
        self.entries.append(entry)
        return entry

    def set_window(self, key, start, end, reason, author=None, *, fingerprint=None) -> dict:
        """Fit lambda z of profile ``key`` on the points in ``[start, end]``.

        ``fingerprint`` is :func:`profile_fingerprint` of the profile's data;
        a choice without one is never applied by :func:`pkwidgets.nca`
        (it cannot be checked against the data).
        """
        s = _finite(start, "window start", key)
        e = _finite(end, "window end", key)
        if not e > s:
            raise ValueError(f"window end ({e!r}) must be after its start ({s!r}) for profile {_label(key)}.")

        def apply(st):
            st["window"] = [s, e]
            return st

        return self._append(key, {"action": "window", "start": s, "end": e}, apply, reason, author, fingerprint)

    def set_exclusions(self, key, times, reason, author=None, *, fingerprint=None) -> dict:
        """Leave the samples at ``times`` out of the lambda-z fit of ``key`` (empty: none)."""
        ts = sorted({_finite(x, "excluded time", key) for x in np.ravel(np.asarray(times, dtype=object))})

        def apply(st):
            st["exclude"] = ts
            return st

        return self._append(key, {"action": "exclude", "times": ts}, apply, reason, author, fingerprint)

    def reset(self, key, reason, author=None, *, fingerprint=None) -> dict:
        """Return profile ``key`` to the automatic search without exclusions."""
        return self._append(key, {"action": "automatic"}, lambda st: {"window": None, "exclude": []},
                            reason, author, fingerprint)

    # --------------------------------------------------------------- reading
    def state(self, key):
        """Latest :class:`SelectionState` of a profile, or None if it has no entry.

        Parameters
        ----------
        key : scalar or sequence
            Profile key; ``1`` and ``"1"`` name the same profile (:func:`canonical_key`).
        """
        pos = self._positions().get(canonical_key(key))
        return None if not pos else _state_of(self.entries[pos[-1]])

    def states(self) -> dict:
        """``{key tuple: SelectionState}`` of every profile in the record (latest entry of each)."""
        return {k: _state_of(self.entries[pos[-1]]) for k, pos in self._positions().items()}

    def history(self, key) -> list:
        """All entries of one profile, oldest first (empty list if it has none)."""
        return [self.entries[i] for i in self._positions().get(canonical_key(key), [])]

    def __len__(self):
        return len(self.entries)

    def __repr__(self):
        return f"SelectionRecord(path={self.path!r}, profiles={len(self.states())}, entries={len(self.entries)})"


def _state_of(entry) -> SelectionState:
    """The :class:`SelectionState` an entry leaves its profile in."""
    st = SelectionState(entry["state"])
    st["fingerprint"] = entry.get("fingerprint")
    st["reason"] = entry["reason"]
    st["author"] = entry["author"]
    st["timestamp"] = entry["timestamp"]
    return st


def _label(key):
    k = canonical_key(key)
    return k[0] if len(k) == 1 else "/".join(k)


def _entry_problem(e):
    if not isinstance(e, dict):
        return "an entry must be an object"
    for name in ("profile", "choice", "state", "reason", "author", "timestamp"):
        if name not in e:
            return f"field {name!r} is missing"
    if not isinstance(e["profile"], list) or not all(isinstance(x, str) for x in e["profile"]):
        return "'profile' must be a list of text"
    st = e["state"]
    if not isinstance(st, dict) or "window" not in st or "exclude" not in st:
        return "'state' must hold 'window' and 'exclude'"
    w = st["window"]
    if w is not None and not (isinstance(w, list) and len(w) == 2 and all(_is_time(x) for x in w) and w[1] > w[0]):
        return f"'state.window' must be null or [start, end] with finite times, end after start; got {w!r}"
    if not isinstance(st["exclude"], list) or not all(_is_time(x) for x in st["exclude"]):
        return f"'state.exclude' must be a list of finite times; got {st['exclude']!r}"
    if not isinstance(e["reason"], str) or not e["reason"].strip():
        return "'reason' must be a non-empty text"
    fp = e.get("fingerprint")
    if fp is not None and not (isinstance(fp, str) and len(fp) == 64
                               and all(ch in "0123456789abcdef" for ch in fp)):
        return "'fingerprint' must be 64 lower-case hexadecimal characters or null"
    return ""


def _is_time(x):
    """A JSON number that is a finite time (not a boolean, NaN or infinity)."""
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def coerce_record(selections) -> SelectionRecord:
    """Accept a SelectionRecord or a path (loaded; a missing file is an empty record)."""
    if isinstance(selections, SelectionRecord):
        return selections
    if isinstance(selections, (str, os.PathLike)):
        return SelectionRecord.load(selections)
    raise TypeError(f"selections must be a SelectionRecord or the path of a record file; got "
                    f"{type(selections).__name__}.")


def apply_selections(record: SelectionRecord, key_texts, time, conc, blq, exclude, terminal):
    """Apply the latest choice of each recorded profile to the engine inputs.

    Parameters
    ----------
    record : SelectionRecord
    key_texts : list of tuple of str
        Canonical key (:func:`canonical_key`) of each profile, in row order.
    time, conc, blq, exclude : ndarray, shape (profiles, samples)
        Engine inputs (times after the dose; ``exclude`` is copied, not changed).
    terminal : "auto", (start, end) or ndarray (profiles, 2)

    Returns
    -------
    terminal : ndarray (profiles, 2)
        NaN rows are automatic.
    exclude : ndarray of bool
    stale : ndarray of bool (profiles,)
        Recorded profiles whose data no longer match the fingerprint (or whose
        entry has none): they are set to automatic without exclusions.
    applied : ndarray of bool (profiles,)
        Profiles whose recorded choice was applied.
    fingerprints : list of str
        Fingerprint of every profile's data.
    """
    P = time.shape[0]
    term = np.full((P, 2), np.nan)
    if not (terminal is None or (isinstance(terminal, str) and terminal == "auto")):
        term[:] = np.broadcast_to(np.asarray(terminal, dtype=np.float64), (P, 2))
    excl = np.array(exclude, dtype=bool, copy=True)
    stale = np.zeros(P, dtype=bool)
    applied = np.zeros(P, dtype=bool)
    fps = [profile_fingerprint(time[p], conc[p], blq[p]) for p in range(P)]
    states = record.states()
    for p, k in enumerate(key_texts):
        st = states.get(tuple(k))
        if st is None:
            continue
        term[p] = np.nan
        excl[p] = False
        if st.fingerprint != fps[p]:
            stale[p] = True
            continue
        applied[p] = True
        if st.window is not None:
            term[p] = st.window
        for x in st.exclude:
            excl[p] |= np.isclose(time[p], x, rtol=1e-9, atol=1e-12)
    return term, excl, stale, applied, fps
