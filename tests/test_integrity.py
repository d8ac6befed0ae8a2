"""Selection-record integrity: concurrent writers, tampered files, derived states, replay that fits the data.

Sources for the checks:
- the issue's rule "nothing silently altered, merged, lost or misapplied": a record only grows, a
  state is derived from the choices, a choice is replayed only on the data (and settings) it was made on;
- RFC 8259 (JSON): section 4 "the names within an object SHOULD be unique", section 6 (NaN and
  Infinity are not JSON numbers), section 8.1 (a parser MAY ignore a byte-order mark);
- FIPS 180-4 SHA-256, computed here with ``hashlib`` on canonical JSON written with the ``json``
  module (keys sorted, no whitespace), independently of the code under test;
- JSON Schema draft 2020-12 semantics as implemented by the ``jsonschema`` package (reference library);
- POSIX ``flock``/``rename``: two processes saving into one file under a lock lose nothing.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from pkwidgets import InputDataError, SelectionRecord, profile_fingerprint
from pkwidgets.io import MissingFileError
from pkwidgets.record import apply_selections, coerce_record
from pkwidgets.record_schema import RECORD_SCHEMA

FP = "a" * 64


def _sha(entry):
    # FIPS 180-4 via hashlib over canonical JSON (sorted keys, no whitespace), written independently here
    body = {k: v for k, v in entry.items() if k != "hash"}
    return hashlib.sha256(json.dumps(body, sort_keys=True, separators=(",", ":"),
                                     ensure_ascii=False).encode("utf-8")).hexdigest()


def _saved(tmp_path, n=2):
    path = tmp_path / "sel.json"
    rec = SelectionRecord.load(path)
    for i in range(n):
        rec.set_window(f"S{i}", 2, 8, f"reason {i}", author="analyst", fingerprint=FP)
    rec.save()
    return path


# ------------------------------------------------------------------ concurrent writers
_WRITER = textwrap.dedent('''
    import os, sys, time
    from pkwidgets import SelectionRecord
    path, who, go = sys.argv[1], sys.argv[2], sys.argv[3]
    rec = SelectionRecord.load(path)
    print("ready", flush=True)
    while not os.path.exists(go):
        time.sleep(0.005)
    for i in range(100):
        rec.set_window(f"{who}-{i % 7}", 2, 8 + i, f"{who} entry {i}", author=who, fingerprint="a" * 64)
        rec.save()
    print("done", len(rec.entries), flush=True)
''')


def test_two_writer_processes_keep_all_200_entries(tmp_path):
    # two processes, each loading once and saving after every one of its 100 choices: a save that wrote
    # back the copy loaded at open would keep only one writer's entries (issue 11)
    path, go = tmp_path / "sel.json", tmp_path / "go"
    SelectionRecord(path).save()
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [os.getcwd(), os.environ.get("PYTHONPATH")])))
    procs = [subprocess.Popen([sys.executable, "-c", _WRITER, str(path), who, str(go)], stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True, env=env) for who in ("A", "B")]
    try:
        for p in procs:
            assert p.stdout.readline().strip() == "ready", p.stderr.read()
        go.write_text("")
        outs = [p.communicate(timeout=300) for p in procs]
    finally:
        for p in procs:
            if p.poll() is None:
                p.kill()
    assert all(p.returncode == 0 for p in procs), [o[1] for o in outs]
    rec = SelectionRecord.load(path)
    reasons = [e["reason"] for e in rec.entries]
    assert len(reasons) == 200 and len(set(reasons)) == 200
    for who in ("A", "B"):  # each writer's entries are all there, in the order it made them
        mine = [r for r in reasons if r.startswith(who)]
        assert mine == [f"{who} entry {i}" for i in range(100)]
    assert all(e["hash"] == _sha(e) for e in rec.entries)


def test_two_records_in_one_process_merge_and_derive_states(tmp_path):
    path = _saved(tmp_path, 1)
    a, b = SelectionRecord.load(path), SelectionRecord.load(path)
    a.set_window("S0", 4, 24, "later window", author="a", fingerprint=FP)
    b.set_exclusions("S0", [6.0], "haemolysed", author="b", fingerprint=FP)
    a.save()
    b.save()                           # b's exclusion lands after a's window: the state carries both
    back = SelectionRecord.load(path)
    assert [e["reason"] for e in back.entries] == ["reason 0", "later window", "haemolysed"]
    st = back.state("S0")
    assert st.window == (4.0, 24.0) and st.exclude == [6.0]
    assert len(b.entries) == 3 and b.state("S0").window == (4.0, 24.0)   # b now sees a's entry too


def test_save_refuses_when_entries_vanished_from_disk(tmp_path):
    path = _saved(tmp_path, 3)
    rec = SelectionRecord.load(path)
    doc = json.loads(path.read_text())
    doc["entries"] = doc["entries"][:1]            # someone cut the history by hand
    path.write_text(json.dumps(doc))
    rec.set_window("S9", 1, 2, "new", author="a", fingerprint=FP)
    before = path.read_bytes()
    with pytest.raises(InputDataError, match=r"no longer holds 2 entr.*nothing was written, as a record only grows"):
        rec.save()
    assert path.read_bytes() == before


# ------------------------------------------------------------------ tampered or malformed files
def _edit(path, fn):
    doc = json.loads(path.read_text())
    fn(doc)
    path.write_text(json.dumps(doc))
    return path


def _rehash(doc):
    for e in doc["entries"]:
        e["hash"] = _sha(e)


def _state_edit(doc):
    doc["entries"][1]["state"]["window"] = [1.0, 8.0]     # hand-edited state, choice still says 2..8


def _state_edit_rehashed(doc):
    _state_edit(doc)
    _rehash(doc)                                            # even with a matching hash: state is derived


def _dup_key_text(path):
    text = path.read_text()
    return text.replace('"reason": "reason 1"', '"reason": "reason 1", "reason": "other"', 1)


TAMPERED = [
    ("reason-edited", lambda d: d["entries"][0].update(reason="changed later"),
     r"entry 0 \(profile S0\), field 'hash': the entry was changed after it was written"),
    ("state-edited", _state_edit, r"entry 1 \(profile S1\), field 'hash'"),
    ("state-edited-and-rehashed", _state_edit_rehashed,
     r"entry 1 \(profile S1\), field 'state': the state .* does not follow from the choice"),
    ("misspelt-field", lambda d: d["entries"][1].update(fingerprnt=FP),
     r"entry 1 \(profile S1\), field 'fingerprnt': is not a field of a record entry \(misspelt\?\)"),
    ("unknown-action", lambda d: d["entries"][0]["choice"].update(action="windw"),
     r"entry 0 \(profile S0\), field 'choice.action': 'windw' is not one of \['window', 'exclude', 'automatic'\]"),
    ("window-without-end", lambda d: d["entries"][0]["choice"].pop("end"),
     r"entry 0 \(profile S0\), field 'choice.end': is missing"),
    ("timestamp-not-utc", lambda d: d["entries"][0].update(timestamp="05/01/2026 10:31"),
     r"entry 0 \(profile S0\), field 'timestamp': '05/01/2026 10:31' does not match"),
    ("reason-blank", lambda d: d["entries"][1].update(reason="   "), r"entry 1 \(profile S1\), field 'reason'"),
    ("profile-empty", lambda d: d["entries"][0].update(profile=[]), r"entry 0, field 'profile': \[\] should be non-empty"),
    ("profile-number", lambda d: d["entries"][0].update(profile=[1]),
     r"entry 0, field 'profile.0': 1 is not of type 'string'"),
    ("entries-not-list", lambda d: d.update(entries={"0": {}}), r"field 'entries': .* is not of type 'array'"),
    ("version-as-text", lambda d: d.update(schema_version="2"), r"has schema_version '2'"),
    ("version-true", lambda d: d.update(schema_version=True), r"has schema_version True"),
    ("author-missing", lambda d: d["entries"][0].pop("author"), r"entry 0 \(profile S0\), field 'author': is missing"),
    ("exclude-times-text", lambda d: d["entries"][0].update(choice={"action": "exclude", "times": ["6"]}),
     r"entry 0 \(profile S0\), field 'choice.times.0': '6' is not of type 'number'"),
]


@pytest.mark.parametrize("edit, match", [c[1:] for c in TAMPERED], ids=[c[0] for c in TAMPERED])
def test_tampered_record_is_refused_naming_entry_and_field(tmp_path, edit, match):
    path = _edit(_saved(tmp_path), edit)
    before = path.read_bytes()
    with pytest.raises(InputDataError, match=match):
        SelectionRecord.load(path)
    assert path.read_bytes() == before


@pytest.mark.parametrize("raw, match", [
    (lambda p: _dup_key_text(p), r"entry 1 \(profile S1\), field 'reason': this key appears twice in one object"),
    (lambda p: p.read_text().replace('"schema_version": 2', '"schema_version": 2, "schema_version": 2'),
     r"key 'schema_version' appears twice at the top level"),
    (lambda p: p.read_text().replace('"start": 2.0', '"start": NaN', 1),
     r"entry 0 \(profile S0\), field 'choice.start': NaN is not a finite time"),
    (lambda p: p.read_text().replace('"end": 8.0', '"end": 1e999', 1),
     r"entry 0 \(profile S0\), field 'choice.end': 1e999 is not a finite time"),
    (lambda p: p.read_text().replace('"start": 2.0', '"start": -Infinity', 1),
     r"field 'choice.start': -Infinity is not a finite time"),
])
def test_json_that_python_accepts_but_the_record_does_not(tmp_path, raw, match):
    # RFC 8259: duplicate names are not interoperable (sec. 4); NaN/Infinity are not JSON numbers (sec. 6)
    path = _saved(tmp_path)
    path.write_text(raw(path))
    with pytest.raises(InputDataError, match=match):
        SelectionRecord.load(path)


def test_byte_order_mark_is_read(tmp_path):
    # RFC 8259 sec. 8.1: a parser MAY ignore a BOM; editors on Windows add one
    path = _saved(tmp_path)
    plain = SelectionRecord.load(path).entries
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    assert SelectionRecord.load(path).entries == plain


@pytest.mark.parametrize("raw, match", [
    (lambda p: p.read_text().encode("utf-16"), r"is not valid JSON \(it is not UTF-8 text\)"),
    (lambda p: b"", r"is not valid JSON at line 1, column 1"),
    (lambda p: b"[]", r"is not a pkwidgets selection record"),
])
def test_unreadable_record_bytes(tmp_path, raw, match):
    path = _saved(tmp_path)
    path.write_bytes(raw(path))
    with pytest.raises(InputDataError, match=match):
        SelectionRecord.load(path)


def test_file_validates_against_the_shipped_json_schema(tmp_path):
    # the schema is plain JSON Schema 2020-12: any validator can check a record file
    import jsonschema

    doc = json.loads(_saved(tmp_path).read_text())
    jsonschema.validate(doc, RECORD_SCHEMA)
    doc["entries"][0]["state"] = "window"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(doc, RECORD_SCHEMA)


def test_version_1_record_is_migrated_and_its_choices_not_replayed(tmp_path):
    # version 1 had no hash and a fingerprint without LLOQ/rules/method: read, hashed on the next save,
    # old entries unchanged otherwise; their choices cannot match today's fingerprint
    path = tmp_path / "old.json"
    v1 = {"schema": "pkwidgets.selection-record", "schema_version": 1, "fingerprint": "old form",
          "entries": [{"profile": ["1"], "choice": {"action": "window", "start": 2.0, "end": 8.0},
                       "state": {"window": [2.0, 8.0], "exclude": []}, "reason": "r", "author": "a",
                       "timestamp": "2025-01-01T00:00:00Z", "fingerprint": "b" * 64}]}
    path.write_text(json.dumps(v1))
    rec = SelectionRecord.load(path)
    assert rec.entries[0]["hash"] == _sha(rec.entries[0])
    rec.set_window("2", 1, 4, "new", author="a", fingerprint=FP)
    rec.save()
    doc = json.loads(path.read_text())
    assert doc["schema_version"] == 2
    assert {k: v for k, v in doc["entries"][0].items() if k != "hash"} == v1["entries"][0]
    t = np.array([[0, 1, 2, 4, 8.0]])
    c = np.array([[0, 9, 7, 4, 1.2]])
    out = apply_selections(rec, [("1",)], t, c, np.zeros_like(t, bool), np.zeros_like(t, bool), "auto")
    assert out.stale.tolist() == [True] and out.applied.tolist() == [False]


def test_version_1_record_with_edited_state_is_refused(tmp_path):
    path = tmp_path / "old.json"
    path.write_text(json.dumps({"schema": "pkwidgets.selection-record", "schema_version": 1, "entries": [
        {"profile": ["1"], "choice": {"action": "automatic"}, "state": {"window": [2.0, 8.0], "exclude": []},
         "reason": "r", "author": "a", "timestamp": "2025-01-01T00:00:00Z"}]}))
    with pytest.raises(InputDataError, match=r"entry 0 \(profile 1\), field 'state': .*does not follow"):
        SelectionRecord.load(path)


# ------------------------------------------------------------------ the path of a record
def test_missing_record_path_is_an_error_unless_created_on_purpose(tmp_path):
    path = tmp_path / "selectoins.json"   # mistyped
    with pytest.raises(MissingFileError, match=r"selection record .*selectoins\.json does not exist.*selections_new"):
        coerce_record(path)
    with pytest.raises(FileNotFoundError):  # also a FileNotFoundError for callers that catch that
        coerce_record(str(path))
    rec = coerce_record(path, create=True)
    assert len(rec) == 0 and rec.path == str(path) and not path.exists()


def test_record_path_that_is_a_folder(tmp_path):
    with pytest.raises(InputDataError, match=r"selection record .* is a folder, not a file"):
        coerce_record(tmp_path)


def test_record_path_of_wrong_type():
    with pytest.raises(TypeError, match=r"selections must be a SelectionRecord or the path of a record file; got dict"):
        coerce_record({"S1": (2, 8)})


# ------------------------------------------------------------------ replay: what the fit sees
T = np.array([[0, 1, 2, 4, 8, 12, 24.0]])
C = np.array([[0, 9, 7, 4, 1.2, 0.6, np.nan]])
B = np.array([[False] * 6 + [True]])


def _replay(rec, **kw):
    return apply_selections(rec, [("1",)], T, C, B, np.zeros_like(B), "auto", **kw)


def _recorded(**fit):
    rec = SelectionRecord()
    fp = profile_fingerprint(T[0], C[0], B[0], **fit)
    rec.set_window("1", 2, 24, "fit from 2 h", author="a", fingerprint=fp)
    return rec


@pytest.mark.parametrize("made, replayed", [
    (dict(lloq=0.5), dict(lloq=0.05)),                                   # '<0.5' corrected to '<0.05'
    (dict(lloq=0.5), dict(lloq=np.array([0.05]))),                       # one LLOQ per profile
    (dict(lloq=0.5), dict(lloq=np.array([[0.5] * 6 + [0.05]]))),         # one per sample
    (dict(lloq=0.5), dict(lloq=0.5, blq_rules={"after": "lloq"})),
    (dict(lloq=0.5), dict(lloq=0.5, auc_method="lin-up/log-down")),
])
def test_choice_is_not_replayed_on_other_lloq_rules_or_method(made, replayed):
    assert _replay(_recorded(**made), **made).applied.tolist() == [True]
    out = _replay(_recorded(**made), **replayed)
    assert out.stale.tolist() == [True] and out.applied.tolist() == [False]
    assert np.isnan(out.terminal).all()
    assert "fingerprint differs" in out.problems[("1",)]


def test_lloq_of_measured_samples_does_not_matter():
    lq = np.array([[0.01] * 6 + [0.5]])
    assert _replay(_recorded(lloq=0.5), lloq=lq).applied.tolist() == [True]


def test_exclusion_of_a_time_without_sample_is_not_applied_silently():
    rec = SelectionRecord()
    fp = profile_fingerprint(T[0], C[0], B[0])
    rec.set_exclusions("1", [4.0, 5.5], "5.5 h typed by hand", author="a", fingerprint=fp)
    with pytest.warns(UserWarning, match=r"profile 1 excludes 5\.5, a time with no sample.*not applied.*"
                                         r"selection_stale"):
        out = _replay(rec)
    terminal, exclude, stale, applied, fps = out                # still unpacks as five items
    assert stale.tolist() == [True] and applied.tolist() == [False] and not exclude.any()
    assert out.missing_times == {("1",): [5.5]} and "5.5" in out.problems[("1",)]
    assert fps == [fp]


def test_choice_without_fingerprint_says_so():
    rec = SelectionRecord()
    rec.set_window("1", 2, 24, "scripted", author="a")
    out = _replay(rec)
    assert out.problems == {("1",): "the choice has no fingerprint"}
