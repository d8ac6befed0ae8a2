"""Time the same workload under two versions of pkwidgets in one process, interleaved (for the bench scripts).

:func:`load_base` unpacks ``pkwidgets/`` of a commit with ``git archive`` and
imports it under another package name (``pkwidgets_base``; the package uses
relative imports only), so that both versions run in the same process on
the same data.  :func:`interleave` then times the workloads turn about,
base, new, base, new, ..., so that both see the same machine state: on a
shared machine the load drifts within seconds, and only a ratio measured
this way is worth reporting.  Each timing records wall time and CPU time,
user and system separately (system time is mostly page faults on freshly
allocated arrays).
"""

from __future__ import annotations

import importlib
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
BASE_NAME = "pkwidgets_base"


def load_base(commit: str):
    """The ``pkwidgets`` package of ``commit``, imported as ``pkwidgets_base`` (a fresh temporary copy)."""
    tmp = unpack(commit)
    shutil.move(str(tmp / "pkwidgets"), str(tmp / BASE_NAME))
    sys.path.insert(0, str(tmp))
    try:
        return importlib.import_module(BASE_NAME)
    finally:
        sys.path.remove(str(tmp))


def _timed(f):
    a, w0 = os.times(), time.perf_counter()
    f()
    b, w = os.times(), time.perf_counter() - w0
    return w, b.user - a.user, b.system - a.system


def interleave(work: dict, rounds: int = 5) -> dict:
    """Median (wall, user, system) seconds of each callable in ``work``, called turn about ``rounds`` times.

    Every callable runs once first (warm-up: imports, first allocations).
    """
    for f in work.values():
        f()
    runs = {k: [] for k in work}
    for _ in range(rounds):
        for k, f in work.items():
            runs[k].append(_timed(f))
    return {k: tuple(statistics.median(r[i] for r in rs) for i in range(3)) for k, rs in runs.items()}


RATIO_HEAD = (f"{'':<44} {'wall s':>7} {'':>7} {'':>7}   {'CPU s':>7} {'':>7} {'':>7}   {'sys s':>6}\n"
              f"{'':<44} {'base':>7} {'new':>7} {'ratio':>7}   {'base':>7} {'new':>7} {'ratio':>7}   "
              f"{'base':>6} {'new':>6}")


def ratio_line(name: str, base: tuple, new: tuple, per: float = 1.0) -> str:
    """One row under :data:`RATIO_HEAD`: wall and CPU (user + system) of base and new scaled by ``per``, base / new."""
    (bw, bu, bs), (nw, nu, ns) = base, new
    return (f"{name:<44} {bw * per:>7.3f} {nw * per:>7.3f} {bw / nw:>6.2f}x   "
            f"{(bu + bs) * per:>7.3f} {(nu + ns) * per:>7.3f} {(bu + bs) / max(nu + ns, 1e-9):>6.2f}x   "
            f"{bs * per:>6.3f} {ns * per:>6.3f}")


#: Appended to a subprocess's set-up code: warm up, time ``work()`` ``repeat`` times, print the best as JSON.
_TIMER = """
import json as _json, os as _os, time as _time
work()
_runs = []
for _ in range({repeat}):
    _a, _w0 = _os.times(), _time.perf_counter()
    work()
    _b, _w = _os.times(), _time.perf_counter() - _w0
    _runs.append((_w, _b.user - _a.user, _b.system - _a.system))
print("@@" + _json.dumps(min(_runs)))
"""


def unpack(commit: str) -> Path:
    """A temporary folder holding ``pkwidgets/`` of ``commit`` (for a subprocess's ``PYTHONPATH``)."""
    tmp = Path(tempfile.mkdtemp(prefix="pkw_base_"))
    archive = subprocess.run(["git", "-C", str(ROOT), "archive", commit, "pkwidgets"], check=True,
                             capture_output=True).stdout
    subprocess.run(["tar", "-x", "-C", str(tmp)], input=archive, check=True)
    return tmp


def alternate_processes(variants: dict, setup: str, *, rounds: int = 3, repeat: int = 2) -> dict:
    """Median (wall, user, system) of ``work()`` in fresh subprocesses, one per variant and round, turn about.

    ``variants`` maps a label to ``(folder holding pkwidgets/, extra environment)``; ``setup`` is
    Python source defining ``work()`` (with ``bench/`` and ``tests/`` importable).  A fresh process per
    run is needed where a variant differs in process-wide state (the heap settings of
    :mod:`pkwidgets._memory`).
    """
    runs = {k: [] for k in variants}
    code = setup + _TIMER.format(repeat=repeat)
    for _ in range(rounds):
        for label, (folder, extra) in variants.items():
            env = dict(os.environ, **extra)
            env["PYTHONPATH"] = os.pathsep.join([str(folder), str(ROOT / "bench"), str(ROOT / "tests")])
            out = subprocess.run([sys.executable, "-c", code], env=env, check=True, stdout=subprocess.PIPE, cwd=folder,
                                 text=True).stdout
            runs[label].append(json.loads(out.split("@@")[-1]))
    return {k: tuple(statistics.median(r[i] for r in rs) for i in range(3)) for k, rs in runs.items()}
