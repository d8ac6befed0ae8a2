"""What a run was made from: file digests, software versions, the run header and the exports.

:func:`run_info` is the header of one run (data file and its SHA-256, the
selection record and its SHA-256, software, settings, date, caution); it is
written as ``run_info.json`` by :func:`export_results` and shown first in the
HTML record.  :func:`software_versions` pins the software: the package,
numpy, scipy, pandas, pint, Python, the platform, and the git commit when the
package runs from a git checkout.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import importlib
import json
import os
import platform
import subprocess

import numpy as np
import pandas as pd

from ..io import write_atomic

__all__ = ["CAUTION", "RUN_INFO", "sha256_file", "software_versions", "git_commit", "run_info", "export_results"]

CAUTION = "Results support qualified review; follow local regulations and SOPs."

#: File the analysis notebooks write into their output folder; read by :func:`~pkwidgets.report.write_record`.
RUN_INFO = "run_info.json"

#: Libraries whose versions a record pins (import name), after the package itself.
PINNED = ("numpy", "scipy", "pandas", "pint")

_PACKAGE_PARENT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def sha256_file(path) -> str:
    """SHA-256 hex digest of a file's bytes (read in 1 MiB blocks)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _git(*args, cwd) -> str | None:
    """Output of one git command in ``cwd``, or None when git is absent or fails."""
    try:
        done = subprocess.run(["git", *args], cwd=cwd, capture_output=True, text=True, timeout=20, check=False)
    except (OSError, subprocess.SubprocessError):
        return None
    return done.stdout.strip() if done.returncode == 0 else None


def git_commit(folder=_PACKAGE_PARENT) -> dict | None:
    """The git commit the package runs from, when ``folder`` is the top of a git checkout.

    A package installed into ``site-packages`` (even inside some other
    repository) gives None: only a checkout whose top folder holds the
    ``pkwidgets`` package counts.

    Returns
    -------
    dict or None
        ``commit`` (40 hex digits) and ``modified`` (True when tracked files
        differ from that commit, so the code that ran is not exactly the commit).
    """
    top = _git("rev-parse", "--show-toplevel", cwd=folder)
    if not top or os.path.realpath(top) != os.path.realpath(folder):
        return None
    commit = _git("rev-parse", "HEAD", cwd=folder)
    if not commit:
        return None
    status = _git("status", "--porcelain", "--untracked-files=no", cwd=folder)
    return {"commit": commit, "modified": None if status is None else bool(status)}


def software_versions() -> dict:
    """Versions of the software that computes a record's numbers.

    Returns
    -------
    dict
        ``pkwidgets``, ``numpy``, ``scipy``, ``pandas``, ``pint``, ``python``
        (version strings), ``platform`` (``platform.platform()``) and
        ``git_commit`` / ``git_modified`` (None when the package does not run
        from a git checkout).

    Examples
    --------
    >>> import numpy
    >>> software_versions()["numpy"] == numpy.__version__
    True
    """
    from .. import __version__

    versions = {"pkwidgets": __version__}
    for name in PINNED:
        versions[name] = getattr(importlib.import_module(name), "__version__", "unknown")
    versions["python"] = platform.python_version()
    versions["platform"] = platform.platform()
    git = git_commit() or {}
    versions["git_commit"] = git.get("commit")
    versions["git_modified"] = git.get("modified")
    return versions


def _plain(value):
    """JSON-friendly copy of settings (tuples -> lists, numpy scalars -> Python)."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def _selection_file(settings) -> dict:
    """Path and SHA-256 of the terminal-phase selection record a run read (None when there was none)."""
    sel = settings.get("selections")
    path = sel.get("path") if isinstance(sel, dict) else sel
    if not isinstance(path, (str, os.PathLike)) or not os.path.isfile(path):
        return {"selection_file": None, "selection_sha256": None}
    return {"selection_file": os.path.abspath(os.fspath(path)), "selection_sha256": sha256_file(path)}


def _first_page(table, left_out) -> dict:
    """Rules in words, counts, flags raised and profiles left out (for a result with samples and flags)."""
    from .words import flag_counts, rules_in_words, run_counts

    out = {"rules": [list(pair) for pair in rules_in_words(table.settings)]}
    samples, flags = getattr(table, "samples", None), getattr(table, "flags", None)
    if isinstance(samples, pd.DataFrame) and "nca_used" in samples.columns and hasattr(table, "parameters"):
        out["counts"] = run_counts(table, left_out)
    if isinstance(flags, pd.DataFrame) and {"flag", "severity", "profile_id"} <= set(flags.columns):
        out["flags_raised"] = flag_counts(table).to_dict("records")
    left = [] if left_out is None else left_out.drop(columns=["profile_id"], errors="ignore").to_dict("records")
    return {**out, "left_out": left}


def _study_name(table):
    """The single value of a ``study`` or ``STUDYID`` column of the input rows, else None."""
    for name in ("study", "STUDYID", "studyid", "Study"):
        if name in getattr(getattr(table, "samples", None), "columns", ()):
            values = table.samples[name].dropna().astype(str).unique()
            if len(values) == 1:
                return values[0]
    return None


def run_info(data_path, table, *, notebook, parameters, now=None, left_out=None, study=None) -> dict:
    """The record header of one run.

    Parameters
    ----------
    data_path : str
        Analysed data file (its SHA-256 is taken).
    table : NCATable
        Result; its ``settings`` are recorded.
    notebook : str
        Notebook name (e.g. ``"single_dose"``).
    parameters : dict
        The notebook's parameter values.
    now : datetime, optional
        Time stamp; default the current UTC time.
    left_out : DataFrame, optional
        Profiles left out of the summaries with their reasons
        (:func:`pkwidgets.summary.leave_out`).
    study : str, optional
        Study name for the first page; default the ``study``/``STUDYID``
        column of the data when it holds one value.

    Returns
    -------
    dict
        ``notebook``, ``data_file``, ``data_sha256``, ``selection_file`` (analyses with a terminal-phase
        selection only),
        ``selection_sha256``, ``pkwidgets_version``, ``software`` (see
        :func:`software_versions`), ``date`` (ISO 8601, UTC), ``parameters``,
        ``settings``, ``caution``, and for the first page ``study``,
        ``rules`` (the settings in words), ``counts``, ``flags_raised`` and
        ``left_out``.
    """
    now = now or _dt.datetime.now(_dt.timezone.utc)
    settings = {k: v for k, v in table.settings.items() if k != "source"}
    software = software_versions()
    return _plain({
        "notebook": notebook,
        "study": study if study is not None else _study_name(table),
        **_first_page(table, left_out),
        "data_file": os.path.abspath(os.fspath(data_path)),
        "data_sha256": sha256_file(data_path),
        **(_selection_file(settings) if "selections" in settings else {}),  # only analyses that read one
        "pkwidgets_version": software["pkwidgets"],
        "software": software,
        "date": now.replace(microsecond=0).isoformat(),
        "parameters": parameters,
        "settings": settings,
        "caution": CAUTION,
    })


def export_results(output_dir, frames, info) -> list:
    """Write the analysis exports: each frame as CSV, and the record header as ``run_info.json``.

    Parameters
    ----------
    output_dir : str
        Existing or new folder.
    frames : dict
        File name (``*.csv``) -> DataFrame.
    info : dict
        From :func:`run_info`.

    Returns
    -------
    list of str
        File names written, in order.
    """
    from ..io import write_csv_atomic

    os.makedirs(output_dir, exist_ok=True)
    for name, frame in frames.items():
        write_csv_atomic(frame, os.path.join(output_dir, name))
    write_atomic(os.path.join(output_dir, RUN_INFO), json.dumps(info, indent=1))
    return list(frames) + [RUN_INFO]
