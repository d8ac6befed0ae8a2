"""The selection-record file format: JSON Schema, strict parsing, entry hashes, derived states.

A record file is checked in four steps, each error naming the file, the
entry (numbered from 0, as in the JSON array), its profile and the field:

1. parsing: UTF-8 (a leading UTF-8 byte-order mark is skipped, as RFC 8259
   section 8.1 allows), no duplicate keys in an object, no ``NaN`` or
   ``Infinity`` and no number beyond the float64 range;
2. the header: ``schema`` and a ``schema_version`` this version reads;
3. :data:`RECORD_SCHEMA` (JSON Schema draft 2020-12, checked with
   ``jsonschema``), then finite times with ``end > start``;
4. integrity: each entry's ``hash`` is the SHA-256 of its canonical JSON
   (:func:`entry_hash`), and its ``state`` equals the state derived from
   the choices before it (:func:`derive_state`); a state is never taken
   from the file.

Schema version 1 (written before the entry hash existed) is read and
migrated in memory: its entries are checked by steps 1-3 and by derived
state, and gain their hash.  Their fingerprints are of form 1 (without LLOQ,
BLQ rules and area method), so they never match data fingerprinted by
:func:`pkwidgets.profile_fingerprint` now: such choices are kept in the
history but not replayed (flagged ``selection_stale``: review and record
again).
"""

from __future__ import annotations

import hashlib
import json
import math
import os

import jsonschema

from .errors import InputDataError
from .fingerprint import FINGERPRINT_FORM

__all__ = ["SCHEMA", "SCHEMA_VERSION", "READ_VERSIONS", "RECORD_SCHEMA", "entry_hash", "derive_state",
           "parse_record", "check_entries", "read_record_file", "dump_record", "check_new_entry", "checked_before", "mark_checked"]

SCHEMA = "pkwidgets.selection-record"
SCHEMA_VERSION = 2
#: Versions this code reads (1 is migrated on reading, see the module docstring).
READ_VERSIONS = (1, 2)

_NUMBER = {"type": "number"}
_CHOICE = {
    "type": "object",
    "required": ["action"],
    "properties": {"action": {"enum": ["window", "exclude", "automatic"]}},
    "allOf": [
        {"if": {"properties": {"action": {"const": "window"}}},
         "then": {"required": ["start", "end"], "additionalProperties": False,
                  "properties": {"action": {}, "start": _NUMBER, "end": _NUMBER}}},
        {"if": {"properties": {"action": {"const": "exclude"}}},
         "then": {"required": ["times"], "additionalProperties": False,
                  "properties": {"action": {}, "times": {"type": "array", "items": _NUMBER}}}},
        {"if": {"properties": {"action": {"const": "automatic"}}},
         "then": {"additionalProperties": False, "properties": {"action": {}}}},
    ],
}
_ENTRY = {
    "type": "object",
    "required": ["profile", "choice", "state", "reason", "author", "timestamp", "fingerprint", "hash"],
    "additionalProperties": False,
    "properties": {
        "profile": {"type": "array", "minItems": 1, "items": {"type": "string"}},
        "choice": _CHOICE,
        "state": {"type": "object", "required": ["window", "exclude"], "additionalProperties": False,
                  "properties": {"window": {"type": ["array", "null"], "items": _NUMBER, "minItems": 2,
                                            "maxItems": 2},
                                 "exclude": {"type": "array", "items": _NUMBER}}},
        "reason": {"type": "string", "pattern": r"\S"},
        "author": {"type": "string", "pattern": r"\S"},
        "timestamp": {"type": "string", "pattern": r"^[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}Z$"},
        "fingerprint": {"type": ["string", "null"], "pattern": "^[0-9a-f]{64}$"},
        "hash": {"type": "string", "pattern": "^[0-9a-f]{64}$"},
    },
}
#: JSON Schema (draft 2020-12) of a record file, schema version 2.
RECORD_SCHEMA = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "pkwidgets selection record",
    "type": "object",
    "required": ["schema", "schema_version", "entries"],
    "properties": {
        "schema": {"const": SCHEMA},
        "schema_version": {"const": SCHEMA_VERSION},
        "fingerprint": {"type": "string"},
        "entries": {"type": "array", "items": _ENTRY},
    },
}
_V1_ENTRY = dict(_ENTRY, required=[r for r in _ENTRY["required"] if r not in ("hash", "fingerprint")])
_V1_SCHEMA = dict(RECORD_SCHEMA, properties=dict(RECORD_SCHEMA["properties"], schema_version={"const": 1},
                                                 entries={"type": "array", "items": _V1_ENTRY}))
_HEADERS = {v: jsonschema.Draft202012Validator(dict(sch, properties=dict(sch["properties"], entries={"type": "array"})))
            for v, sch in ((2, RECORD_SCHEMA), (1, _V1_SCHEMA))}
_ENTRY_VALIDATORS = {2: jsonschema.Draft202012Validator(_ENTRY), 1: jsonschema.Draft202012Validator(_V1_ENTRY)}
#: Hashes of entries that passed every check: an entry with the same canonical JSON needs no schema pass
#: again (jsonschema costs about 1 ms per entry; a record is read again on every save).
_CHECKED: set = set()


class _NotANumber(float):
    """A JSON number token that is not a finite float64 (NaN, Infinity, 1e999): kept to be reported."""

    def __repr__(self):
        return self.text

    __str__ = __repr__


def _not_finite(text):
    v = _NotANumber(float("nan"))
    v.text = text
    return v


def _parse_float(text):
    v = float(text)
    return v if math.isfinite(v) else _not_finite(text)


#: id(document) -> whether parse_record saw a duplicate key in it (read once by check_entries)
_DUPLICATE_SEEN: dict = {}


class _DuplicateKeys(dict):
    """An object in which a key appeared twice (the keys are kept to be reported)."""


def _pairs(pairs):
    out = dict(pairs)
    if len(out) == len(pairs):
        return out
    seen, dup = set(), []
    for k, _ in pairs:
        if k in seen:
            dup.append(k)
        seen.add(k)
    out = _DuplicateKeys(out)
    out.duplicates = dup
    return out


def entry_hash(entry: dict) -> str:
    """SHA-256 (hex) of an entry's canonical JSON, without its ``hash`` field.

    Canonical JSON here: keys sorted, no whitespace (separators ``,`` and
    ``:``), non-ASCII characters as UTF-8, numbers as Python's :mod:`json`
    writes them (``2`` and ``2.0`` differ).  SHA-256 per FIPS 180-4.
    """
    body = {k: v for k, v in entry.items() if k != "hash"}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def derive_state(previous, previous_fingerprint, choice, fingerprint) -> dict:
    """The state an entry leaves its profile in, from the state before it and its choice.

    The earlier state is carried over only when the fingerprint is the same as
    the previous entry's of that profile; otherwise the choice applies to the
    automatic selection (no window, nothing excluded).
    """
    if previous is None or previous_fingerprint != fingerprint:
        state = {"window": None, "exclude": []}
    else:
        state = {"window": previous["window"], "exclude": list(previous["exclude"])}
    action = choice["action"]
    if action == "window":
        state["window"] = [choice["start"], choice["end"]]
    elif action == "exclude":
        state["exclude"] = list(choice["times"])
    else:
        state = {"window": None, "exclude": []}
    return state


def parse_record(raw: bytes, path) -> dict:
    """The JSON document of a record file (step 1 of the module docstring)."""
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    try:
        _has_duplicates = [False]

        def hook(pairs):
            out = _pairs(pairs)
            _has_duplicates[0] |= isinstance(out, _DuplicateKeys)
            return out

        doc = json.loads(raw.decode("utf-8"), object_pairs_hook=hook, parse_constant=_not_finite,
                         parse_float=_parse_float)
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        where = f" at line {exc.lineno}, column {exc.colno}" if isinstance(exc, json.JSONDecodeError) else \
            (" (it is not UTF-8 text)")
        raise InputDataError(
            f"selection record {path} is not valid JSON{where}; it was not changed. Restore it from version "
            "control or a backup, or move it aside to start a new record.", file=path) from None
    _DUPLICATE_SEEN[id(doc)] = _has_duplicates[0]
    if isinstance(doc, _DuplicateKeys):
        raise InputDataError(f"selection record {path}: key {doc.duplicates[0]!r} appears twice at the top level; "
                             "each key may appear once (RFC 8259 section 4). It was not changed.", file=path)
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
        raise InputDataError(f"{path} is not a pkwidgets selection record (missing \"schema\": \"{SCHEMA}\"); "
                             "it was not changed.", file=path)
    version = doc.get("schema_version")
    if isinstance(version, bool) or version not in READ_VERSIONS:
        raise InputDataError(f"selection record {path} has schema_version {version!r}; this version of "
                             f"pkwidgets reads versions {', '.join(map(str, READ_VERSIONS))}. It was not changed.",
                             file=path)
    return doc


def _where(path, i, entry, field=""):
    label = ""
    profile = entry.get("profile") if isinstance(entry, dict) else None
    if isinstance(profile, list) and profile and all(isinstance(x, str) for x in profile):
        label = f" (profile {'/'.join(map(str, entry['profile']))})"
    return f"selection record {path}, entry {i}{label}" + (f", field {field!r}" if field else "")


def _schema_message(error) -> tuple:
    """(entry number or None, field, problem) of a jsonschema error."""
    path = list(error.absolute_path)
    i = path[1] if len(path) > 1 and path[0] == "entries" else None
    field = ".".join(str(p) for p in path[2:]) if i is not None else ".".join(map(str, path))
    if error.validator == "required":
        missing = [r for r in error.validator_value if r not in error.instance]
        return i, ".".join(filter(None, [field, missing[0]])), "is missing"
    if error.validator == "additionalProperties":
        extra = sorted(set(error.instance) - set(error.schema.get("properties", {})))
        return i, ".".join(filter(None, [field, extra[0]])), "is not a field of a record entry (misspelt?)"
    return i, field, error.message


def _duplicates_in(value, field=""):
    """Field path of the first object with a duplicate key inside ``value``, or None."""
    if isinstance(value, _DuplicateKeys):
        return ".".join(filter(None, [field, value.duplicates[0]]))
    items = value.items() if isinstance(value, dict) else enumerate(value) if isinstance(value, list) else ()
    for k, v in items:
        found = _duplicates_in(v, ".".join(filter(None, [field, str(k)])))
        if found:
            return found
    return None


def check_entries(doc: dict, path) -> list:
    """Steps 2-4 of the module docstring; return the entries (version 1 entries gain their hash)."""
    version = doc["schema_version"]
    bad_key = _duplicates_in(doc) if _DUPLICATE_SEEN.pop(id(doc), False) else None
    if bad_key:
        parts = bad_key.split(".")
        if parts[0] == "entries" and len(parts) > 2:
            i = int(parts[1])
            raise InputDataError(f"{_where(path, i, doc['entries'][i], '.'.join(parts[2:]))}: this key appears "
                                 "twice in one object; each key may appear once (RFC 8259 section 4). The file "
                                 "was not changed.", file=path)
        raise InputDataError(f"selection record {path}: key {bad_key!r} appears twice; the file was not changed.",
                             file=path)
    errors = sorted(_HEADERS[version].iter_errors(doc), key=lambda e: len(e.absolute_path))
    if errors:
        _, field, problem = _schema_message(errors[0])
        raise InputDataError(f"selection record {path}, field {field!r}: {problem}; the file was not changed.",
                             file=path)
    entries = doc["entries"]
    known = [checked_before(e) for e in entries]
    for i, e in enumerate(entries):
        if not known[i]:
            _check_entry_schema(e, i, path, version)
    _check_values(entries, path)
    _check_integrity(entries, path, version, known)
    _CHECKED.update(e["hash"] for e in entries)
    return entries


def mark_checked(entry) -> None:
    """Note an entry built by pkwidgets itself (valid by construction) as checked."""
    _CHECKED.add(entry["hash"])


def checked_before(entry) -> bool:
    """Has an entry with this exact content passed every check already (its hash matching)?"""
    try:
        return entry.get("hash") in _CHECKED and entry_hash(entry) == entry["hash"]
    except (AttributeError, TypeError, ValueError):  # not an object, or NaN inside: check in full
        return False


def _check_entry_schema(entry, i, path, version):
    errors = sorted(_ENTRY_VALIDATORS[version].iter_errors(entry), key=lambda e: len(e.absolute_path))
    if errors:
        _, field, problem = _schema_message(_Shifted(errors[0], i))
        raise InputDataError(f"{_where(path, i, entry, field)}: {problem}; the file was not changed.", file=path)


def _check_values(entries, path):
    """Finite times, window end after start (beyond what JSON Schema says)."""
    for i, e in enumerate(entries):
        c, st = e["choice"], e["state"]
        times = {"choice.start": c.get("start"), "choice.end": c.get("end")}
        times.update({f"choice.times.{k}": x for k, x in enumerate(c.get("times", []))})
        times.update({f"state.window.{k}": x for k, x in enumerate(st["window"] or [])})
        times.update({f"state.exclude.{k}": x for k, x in enumerate(st["exclude"])})
        for field, x in times.items():
            if x is not None and (isinstance(x, _NotANumber) or not math.isfinite(x)):
                raise InputDataError(f"{_where(path, i, e, field)}: {x!r} is not a finite time; the file was not "
                                     "changed.", file=path)
        if c["action"] == "window" and not c["end"] > c["start"]:
            raise InputDataError(f"{_where(path, i, e, 'choice')}: window end {c['end']!r} must be after its start "
                                 f"{c['start']!r}; the file was not changed.", file=path)


def _check_integrity(entries, path, version, known):
    """Each hash matches its entry; each state is the one derived from the choices."""
    last = {}
    for i, e in enumerate(entries):
        if not known[i] and "hash" in e and e["hash"] != entry_hash(e):
            raise InputDataError(
                f"{_where(path, i, e, 'hash')}: the entry was changed after it was written (its content no longer "
                "matches its SHA-256 hash). Entries are never edited: restore the file from version control or a "
                "backup, and record a new choice instead.", file=path)
        key = tuple(e["profile"])
        prev = last.get(key)
        derived = derive_state(prev and prev["state"], prev and prev.get("fingerprint"), e["choice"],
                               e.get("fingerprint"))
        if derived != e["state"]:
            raise InputDataError(
                f"{_where(path, i, e, 'state')}: the state {e['state']} does not follow from the choice "
                f"{e['choice']} (expected {derived}); states are derived from choices, never taken from the file. "
                "Restore the file, and record a new choice instead of editing one.", file=path)
        if version == 1:
            e.setdefault("fingerprint", None)
            e["hash"] = entry_hash(e)
        last[key] = e


def check_new_entry(entry, path, i):
    """Schema check of one entry about to be written (entries built in memory or appended by hand)."""
    errors = sorted(_ENTRY_VALIDATORS[SCHEMA_VERSION].iter_errors(entry), key=lambda e: len(e.absolute_path))
    if errors:
        _, field, problem = _schema_message(_Shifted(errors[0], i))
        raise ValueError(f"{_where(path, i, entry, field)}: {problem}; nothing was written.")


class _Shifted:
    """A jsonschema error on one entry seen as if it were at ``entries[i]`` of the document."""

    def __init__(self, err, i):
        self.absolute_path = ["entries", i] + list(err.absolute_path)
        self.validator, self.validator_value, self.instance = err.validator, err.validator_value, err.instance
        self.schema, self.message = err.schema, err.message


def read_record_file(path):
    """Checked entries of the record file at ``path``; None if there is no file."""
    if os.path.isdir(path):
        raise InputDataError(f"selection record {path} is a folder, not a file: give the path of the record's "
                             "JSON file.", file=path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise InputDataError(f"selection record {path} cannot be read ({exc.strerror}); check the path "
                             "and its permissions.", file=path) from None
    return check_entries(parse_record(raw, path), path)


def dump_record(entries) -> str:
    """The file text: the header, then one entry per line (compact JSON; diffs show whole entries)."""
    def dump(x):
        return json.dumps(x, ensure_ascii=False, allow_nan=False)
    head = (f'{{"schema": {dump(SCHEMA)}, "schema_version": {SCHEMA_VERSION},\n "fingerprint": '
            f'{dump(FINGERPRINT_FORM)},\n "entries": [')
    if not entries:
        return head + "]}\n"
    return head + "\n  " + ",\n  ".join(dump(e) for e in entries) + "\n ]}\n"
