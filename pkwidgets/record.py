r"""The selection record: hand-made lambda-z choices, justified, replayable and append-only.

A :class:`SelectionRecord` is a JSON file kept next to an analysis.  Every
manual choice (a terminal window, excluded sampling times, or a return to
the automatic search) is appended as an entry with the profile key, the
choice, a reason, an author, a UTC timestamp, a fingerprint of what the fit
of that profile sees (:func:`profile_fingerprint`) and a hash of the entry.
:func:`pkwidgets.nca` reads the record (``selections=``) and applies the
latest choice of each profile, so an unattended re-run (papermill, CI)
reproduces the parameters; a profile whose data no longer match the
fingerprint falls back to the automatic search and is flagged
``selection_stale`` (see :mod:`pkwidgets.replay`).

File layout (``schema_version`` 2): a header (``schema``, ``schema_version``,
``fingerprint`` form) and ``entries``, each with ``profile`` (list of text),
``choice`` (``{"action": "window", "start": 2.0, "end": 24.0}``,
``{"action": "exclude", "times": [...]}`` or ``{"action": "automatic"}``),
``state`` (``{"window": [2.0, 24.0] or null, "exclude": [...]}``), ``reason``,
``author``, ``timestamp`` (UTC, ``2026-01-05T10:31:07Z``), ``fingerprint``
and ``hash``; the JSON Schema is :data:`pkwidgets.record_schema.RECORD_SCHEMA`.
``state``, the whole selection after the entry, is written for readers but
never trusted: on reading it must equal the state derived from the choices,
and ``hash`` (SHA-256 of the entry's canonical JSON) must match the entry.
When an entry's fingerprint differs from the one before it for the same
profile, the state restarts from automatic before the new choice applies.

Append-only, also across processes: :meth:`SelectionRecord.save` takes a
lock on the file (``filelock``; a hidden ``.<name>.lock`` beside it), reads
the file again, keeps every entry already there, appends the entries made
since this object last read or wrote it (their states derived again after
the others' entries), and replaces the file atomically.  Two people saving
into one record keep both their entries.

Profile keys are stored as lists of text, one item per ``by`` column
(``str(value).strip()``), so a key typed as the integer 1 in a DataFrame and
read as the text "1" from a CSV file name the same profile.

A path that does not exist is an error for :func:`coerce_record` (what
``nca(selections=...)`` uses) unless ``create=True``: a mistyped path must
not silently apply nothing.  :meth:`SelectionRecord.load` of a missing path
gives an empty record bound to it (the explicit way to start one).
"""

from __future__ import annotations

import collections
import datetime as _dt
import math
import os

import filelock
import numpy as np

from .errors import InputDataError
from .fingerprint import FINGERPRINT_FORM, canonical_key, profile_fingerprint  # noqa: F401 (re-exported)
from .io import MissingFileError, write_atomic
from .record_schema import (SCHEMA, SCHEMA_VERSION, check_new_entry, checked_before, derive_state, dump_record,
                            entry_hash, mark_checked, read_record_file)
from .replay import SelectionReplay, apply_selections  # noqa: F401 (re-exported)

__all__ = [
    "SelectionRecord",
    "SelectionState",
    "SelectionReplay",
    "profile_fingerprint",
    "canonical_key",
    "coerce_record",
    "apply_selections",
    "SCHEMA",
    "SCHEMA_VERSION",
    "FINGERPRINT_FORM",
]

#: Seconds :meth:`SelectionRecord.save` waits for another writer's lock before giving up.
LOCK_TIMEOUT = 60.0


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
    entries : list of dict, optional
        Entries already read (see :meth:`load`); they count as on disk.

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
        #: how many leading entries are known to be in the file (read from it or written to it)
        self._on_disk = len(self.entries)
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
            If the path is a folder or cannot be read, or the file is not a
            valid selection record (see :mod:`pkwidgets.record_schema`: the
            message names the entry and field).  The file is left untouched.
        """
        path = os.fspath(path)
        entries = read_record_file(path)
        return cls(path, [] if entries is None else entries)

    def to_json(self) -> str:
        """The file text: the schema header and every entry, indented JSON ending in a newline."""
        return dump_record(self.entries)

    def save(self, path=None) -> str:
        """Merge this record's new entries into the file, under a lock; return the path.

        The file is read again under the lock: entries already in it are kept
        as they are, entries made since this object last read or wrote the
        file are appended (states derived again after them), and the file is
        replaced atomically (:func:`pkwidgets.io.write_atomic`).  Afterwards
        :attr:`entries` holds the whole merged record.

        Raises
        ------
        InputDataError
            If the file on disk is not a valid record, has lost entries this
            object read from it (edited by hand or replaced), or stays locked
            by another writer for :data:`LOCK_TIMEOUT` seconds.  Nothing is
            written then.
        """
        path = self.path if path is None else os.fspath(path)
        if path is None:
            raise ValueError("this record has no file yet: pass save(path) or create it with SelectionRecord.load(path).")
        if path != self.path:
            self._on_disk = 0  # another file: every entry is new to it
        try:
            with filelock.FileLock(_lock_path(path), timeout=LOCK_TIMEOUT, poll_interval=0.005):
                merged = self._merge(path)
                write_atomic(path, dump_record(merged))
        except filelock.Timeout:
            raise InputDataError(f"selection record {path} is locked by another writer (lock file "
                                 f"{_lock_path(path)}) for more than {LOCK_TIMEOUT:g} s; nothing was written. Try "
                                 "again; if no one else is saving, delete the lock file.", file=path) from None
        self.entries, self.path, self._on_disk = merged, path, len(merged)
        return path

    def _merge(self, path) -> list:
        """Entries on disk, then this object's new entries with states derived after them."""
        disk = read_record_file(path) or []
        known = collections.Counter(e.get("hash") or entry_hash(e) for e in self.entries[: self._on_disk])
        lost = known - collections.Counter(e["hash"] for e in disk)
        if lost:
            raise InputDataError(
                f"selection record {path} no longer holds {sum(lost.values())} entr(y/ies) that were in it when it "
                "was read (edited by hand, replaced or moved?); nothing was written, as a record only grows. "
                "Restore the file, or save this record to a new path.", file=path)
        merged = list(disk)
        last = {}
        for e in merged:
            last[tuple(e["profile"])] = e
        for e in self.entries[self._on_disk:]:
            if not checked_before(e):
                check_new_entry(dict(e, hash="0" * 64), path, len(merged))
            key = tuple(e["profile"])
            prev = last.get(key)
            e = dict(e, state=derive_state(prev and prev["state"], prev and prev["fingerprint"], e["choice"],
                                           e["fingerprint"]))
            e["hash"] = entry_hash(e)
            mark_checked(e)
            merged.append(e)
            last[key] = e
        return merged

    # -------------------------------------------------------------- choices
    def _append(self, key, choice, reason, author, fingerprint):
        k = canonical_key(key)
        entry_fp = None if fingerprint is None else str(fingerprint)
        pos = self._positions().get(k)
        prev = self.entries[pos[-1]] if pos else None
        entry = {
            "profile": list(k),
            "choice": choice,
            "state": derive_state(prev and prev["state"], prev and prev.get("fingerprint"), choice, entry_fp),
            "reason": _reason(reason),
            "author": _author(author),
            "timestamp": _now(),
            "fingerprint": entry_fp,
        }
        entry["hash"] = entry_hash(entry)
        mark_checked(entry)
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
        return self._append(key, {"action": "window", "start": s, "end": e}, reason, author, fingerprint)

    def set_exclusions(self, key, times, reason, author=None, *, fingerprint=None) -> dict:
        """Leave the samples at ``times`` out of the lambda-z fit of ``key`` (empty: none)."""
        ts = sorted({_finite(x, "excluded time", key) for x in np.ravel(np.asarray(times, dtype=object))})
        return self._append(key, {"action": "exclude", "times": ts}, reason, author, fingerprint)

    def reset(self, key, reason, author=None, *, fingerprint=None) -> dict:
        """Return profile ``key`` to the automatic search without exclusions."""
        return self._append(key, {"action": "automatic"}, reason, author, fingerprint)

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


def _lock_path(path) -> str:
    folder, name = os.path.split(os.path.abspath(path))
    return os.path.join(folder, f".{name}.lock")


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


def coerce_record(selections, *, create=False) -> SelectionRecord:
    """A SelectionRecord from a record or the path of a record file.

    Parameters
    ----------
    selections : SelectionRecord, str or os.PathLike
    create : bool
        What a path that does not exist means: False (default) is an error,
        so that a mistyped path in an unattended run does not silently apply
        nothing; True starts a new, empty record there (written on the first
        save).

    Raises
    ------
    MissingFileError
        The path does not exist and ``create`` is False (an InputDataError
        and a FileNotFoundError, naming the path).
    InputDataError
        The file is not a valid record (see :meth:`SelectionRecord.load`).
    TypeError
        ``selections`` is neither a record nor a path.
    """
    if isinstance(selections, SelectionRecord):
        return selections
    if isinstance(selections, (str, os.PathLike)):
        path = os.fspath(selections)
        if not create and not os.path.lexists(path):
            raise MissingFileError(
                f"selection record {path} does not exist, so no recorded choice could be applied; check the path "
                f"(working folder: {os.getcwd()}). To start a new record there on purpose, pass "
                "selections_new=True (coerce_record(path, create=True)).", file=path)
        return SelectionRecord.load(path)
    raise TypeError(f"selections must be a SelectionRecord or the path of a record file; got "
                    f"{type(selections).__name__}.")
