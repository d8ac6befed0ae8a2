"""Atomic writes: a writer killed mid-write leaves the previous file intact.

A child process writes through :func:`pkwidgets.io.write_atomic`,
:func:`pkwidgets.io.write_csv_atomic` or :meth:`pkwidgets.SelectionRecord.save`
and is killed with SIGKILL (no clean-up code can run), either at a chosen
point inside the write (deterministic) or at varied moments during a loop of
large writes.  Afterwards the target must hold the old content or one complete
new version, never a mixture or a truncated file.

Sources for the checks:
- POSIX ``rename(2)`` (IEEE Std 1003.1): replacing a file by rename is atomic,
  readers see the old or the new file; Python documents ``os.replace`` as
  atomic on POSIX when source and target are on the same file system;
- SIGKILL cannot be caught or ignored (POSIX ``signal.h``), so nothing in the
  child can finish or tidy the write;
- RFC 8259 (JSON) and RFC 4180 (CSV): a truncated file fails to parse or loses
  rows, which the checks below would see.
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
import textwrap
import time

import pandas as pd
import pytest

from pkwidgets import InputDataError, SelectionRecord, profile_fingerprint
from pkwidgets.io import write_atomic, write_csv_atomic

pytestmark = pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX SIGKILL")

# Child-side hook: the temporary file's write() writes the first half, flushes it to
# disk, says "paused" and waits to be killed.
_PAUSE_MID_WRITE = textwrap.dedent('''
    import os, sys, time
    _real_fdopen = os.fdopen

    class _HalfWriter:
        def __init__(self, fh):
            self._fh = fh
        def write(self, text):
            half = len(text) // 2
            self._fh.write(text[:half])
            self._fh.flush()
            os.fsync(self._fh.fileno())
            print("paused", flush=True)
            time.sleep(600)
        def __getattr__(self, name):
            return getattr(self._fh, name)
        def __enter__(self):
            return self
        def __exit__(self, *exc):
            return self._fh.__exit__(*exc)

    def _fdopen(*args, **kwargs):
        return _HalfWriter(_real_fdopen(*args, **kwargs))

    os.fdopen = _fdopen
''')


def _start(code, tmp_path):
    return subprocess.Popen([sys.executable, "-c", code], cwd=tmp_path, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _wait_for(proc, word, timeout=60):
    deadline = time.monotonic() + timeout
    line = ""
    while time.monotonic() < deadline:
        line = proc.stdout.readline()
        if line.strip() == word:
            return
        if line == "" and proc.poll() is not None:
            break
    proc.kill()
    raise AssertionError(f"child never said {word!r}: {line!r} / {proc.stderr.read()}")


def _kill(proc):
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL


def _temp_files(folder):
    return sorted(p for p in os.listdir(folder) if p.startswith(".tmp-"))


def test_killed_mid_write_leaves_old_file(tmp_path):
    target = tmp_path / "params.csv"
    old = "subject,AUCLST\n1,61.4\n"
    write_atomic(target, old)
    code = _PAUSE_MID_WRITE + textwrap.dedent(f'''
        from pkwidgets.io import write_atomic
        write_atomic({str(target)!r}, "subject,AUCLST\\n" + "2,99.9\\n" * 2_000_000)
    ''')
    proc = _start(code, tmp_path)
    _wait_for(proc, "paused")
    # the child is inside the write: half of the new text sits in a temporary file
    tmp = _temp_files(tmp_path)
    assert len(tmp) == 1 and os.path.getsize(tmp_path / tmp[0]) == len("subject,AUCLST\n" + "2,99.9\n" * 2_000_000) // 2
    _kill(proc)
    assert target.read_text(encoding="utf-8") == old
    # what a SIGKILL leaves behind is a hidden temporary file beside the target, never a half target
    assert _temp_files(tmp_path) == tmp


def test_killed_export_leaves_old_parameter_table(tmp_path):
    target = tmp_path / "parameters.csv"
    old = pd.DataFrame({"subject": ["1", "2"], "PPTESTCD": ["AUCLST", "AUCLST"], "value": [61.4, 48.2]})
    write_csv_atomic(old, target)
    code = _PAUSE_MID_WRITE + textwrap.dedent(f'''
        import numpy as np, pandas as pd
        from pkwidgets.io import write_csv_atomic
        n = 300_000
        new = pd.DataFrame({{"subject": np.arange(n).astype(str), "PPTESTCD": "CMAX", "value": np.arange(n) * 0.5}})
        write_csv_atomic(new, {str(target)!r})
    ''')
    proc = _start(code, tmp_path)
    _wait_for(proc, "paused")
    _kill(proc)
    back = pd.read_csv(target, dtype={"subject": str})
    pd.testing.assert_frame_equal(back, old)


@pytest.mark.slow
def test_writes_killed_at_varied_moments_leave_a_complete_version(tmp_path):
    # a loop of large writes, each version self-checking (its SHA-256 on the last line);
    # the child is killed at different moments: every time the file is one whole version
    target = tmp_path / "big.txt"
    write_atomic(target, "version -1\n")
    code = textwrap.dedent(f'''
        import hashlib
        from pkwidgets.io import write_atomic
        print("start", flush=True)
        for v in range(10_000):
            body = f"version {{v}}\\n" + ("x" * 79 + "\\n") * 50_000
            write_atomic({str(target)!r}, body + hashlib.sha256(body.encode()).hexdigest() + "\\n")
    ''')
    versions = []
    for delay in (0.0, 0.1, 0.4):
        proc = _start(code, tmp_path)
        _wait_for(proc, "start")
        time.sleep(delay)
        _kill(proc)
        text = target.read_text(encoding="utf-8")
        if text == "version -1\n":
            versions.append(-1)
            continue
        body, digest = text[:-65], text[-65:-1]
        assert hashlib.sha256(body.encode()).hexdigest() == digest, "target holds a mixed or truncated version"
        versions.append(int(body.split("\n", 1)[0].split()[1]))
    assert len(versions) == 3


def _record_with(path, n):
    rec = SelectionRecord.load(path)
    fp = profile_fingerprint([0, 1, 2, 4, 8], [0, 9, 7, 4, 1.2])
    for i in range(n):
        rec.set_window(f"S{i:03d}", 2, 8, "absorption visible until 2 h", author="analyst", fingerprint=fp)
    rec.save()
    return rec


def test_selection_record_save_killed_mid_write_keeps_old_record(tmp_path):
    path = tmp_path / "selections.json"
    before = _record_with(path, 3)
    old_bytes = path.read_bytes()
    code = _PAUSE_MID_WRITE + textwrap.dedent(f'''
        from pkwidgets import SelectionRecord, profile_fingerprint
        rec = SelectionRecord.load({str(path)!r})
        fp = profile_fingerprint([0, 1, 2, 4, 8], [0, 9, 7, 4, 1.2])
        for i in range(1_000):
            rec.set_window(f"T{{i}}", 4, 8, "later choice", author="analyst", fingerprint=fp)
        rec.save()
    ''')
    proc = _start(code, tmp_path)
    _wait_for(proc, "paused")
    _kill(proc)
    assert path.read_bytes() == old_bytes
    again = SelectionRecord.load(path)  # RFC 8259 JSON that loads as a record
    assert again.entries == before.entries
    # the killed writer held the record's lock; POSIX releases a process's locks when it dies (fcntl(2)), so
    # the next writer saves without waiting for the lock timeout, and keeps every entry
    again.set_window("U1", 4, 8, "chosen after the crash", author="analyst", fingerprint=before.entries[0]["fingerprint"])
    again.save()
    assert [e["reason"] for e in SelectionRecord.load(path).entries][-1] == "chosen after the crash"
    assert len(SelectionRecord.load(path).entries) == len(before.entries) + 1


@pytest.mark.slow
def test_selection_record_saves_killed_at_varied_moments_stay_loadable(tmp_path):
    path = tmp_path / "selections.json"
    _record_with(path, 1)
    code = textwrap.dedent(f'''
        from pkwidgets import SelectionRecord, profile_fingerprint
        rec = SelectionRecord.load({str(path)!r})
        fp = profile_fingerprint([0, 1, 2, 4, 8], [0, 9, 7, 4, 1.2])
        print("start", flush=True)
        for i in range(100_000):
            for j in range(50):
                rec.set_window(f"T{{i}}-{{j}}", 4, 8, "later choice", author="analyst", fingerprint=fp)
            rec.save()
    ''')
    counts = []
    for delay in (0.0, 0.3):
        proc = _start(code, tmp_path)
        _wait_for(proc, "start")
        time.sleep(delay)
        _kill(proc)
        rec = SelectionRecord.load(path)  # raises InputDataError on a corrupt file
        doc = json.loads(path.read_text(encoding="utf-8"))
        assert len(doc["entries"]) == len(rec.entries)
        assert (len(rec.entries) - 1) % 50 == 0  # whole saves only: 1 + 50 k entries
        counts.append(len(rec.entries))
    assert counts == sorted(counts)  # each run appends to what the last one saved


def test_a_truncated_record_is_reported_not_used(tmp_path):
    # what a non-atomic writer would have left: the reader names the file and refuses it
    path = tmp_path / "selections.json"
    _record_with(path, 2)
    raw = path.read_bytes()
    path.write_bytes(raw[: len(raw) // 2])
    with pytest.raises(InputDataError, match=r"selections\.json is not valid JSON at line \d+, column \d+"):
        SelectionRecord.load(path)
    assert path.read_bytes() == raw[: len(raw) // 2]  # and leaves it untouched
