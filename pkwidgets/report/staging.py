"""An output folder that holds one complete run, or the previous one: staging, manifest, switch.

A run writes into a staging folder beside the output folder
(``.NAME.staging-XXXX``, marked by ``IN_PROGRESS.txt`` while it runs).  When
every file is written, ``MANIFEST.sha256`` lists the SHA-256 of each
(``sha256sum -c MANIFEST.sha256`` checks them) and is written last; then the
staging folder is switched into place as a whole: the previous output folder
is renamed aside, the staging folder renamed to the output name, and the
previous run deleted.  A run that fails leaves the output folder as it was
(the previous complete run, or nothing) and moves its staging folder to
``NAME.failed`` with ``FAILED.txt`` saying what went wrong; no file of a
failed run is ever put beside the files of a complete one.

The output folder must be new, empty, or a previous run (it holds
``run_info.json`` or ``MANIFEST.sha256``): a folder of other files is
refused rather than replaced.  Files named in ``carry`` (the terminal-phase
selection record, which lives in the output folder and is read, not written,
by the run) are copied into the new run at the switch, just before it.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import os
import re
import shutil
import tempfile
import traceback
import uuid

from ..io import write_atomic
from .errors import RunError
from .provenance import RUN_INFO, sha256_file

__all__ = ["MANIFEST", "FAILED", "IN_PROGRESS", "check_output_folder", "write_manifest", "staged_folder"]

MANIFEST = "MANIFEST.sha256"
FAILED = "FAILED.txt"
IN_PROGRESS = "IN_PROGRESS.txt"
_ANSI = re.compile(r"\x1b\[[0-9;]*[A-Za-z]")


def check_output_folder(output_dir) -> str:
    """The absolute output folder, after checking a run may write it; its parent folders are created.

    Raises
    ------
    RunError
        If the path is a file, its parent cannot be created or written, or
        it is a folder of files that are not a previous run.
    """
    final = os.path.abspath(os.fspath(output_dir))
    if os.path.exists(final) and not os.path.isdir(final):
        raise RunError(f"output folder {final} is a file: give the path of a folder (it is created if missing).")
    parent = os.path.dirname(final)
    try:
        os.makedirs(parent, exist_ok=True)
    except OSError as exc:
        raise RunError(f"cannot create the output folder's parent {parent}: {exc.strerror}.") from None
    if not os.access(parent, os.W_OK | os.X_OK):
        raise RunError(f"cannot write in {parent} (permission denied): a run stages its files beside the output "
                       f"folder {os.path.basename(final)}; choose a folder you can write to.")
    if os.path.isdir(final) and os.listdir(final) and not _is_run(final):
        sample = sorted(os.listdir(final))[:3]
        raise RunError(f"output folder {final} holds files that are not a pkwidgets run ({', '.join(sample)}...): "
                       f"a run replaces its folder as a whole, so give a new or empty folder.")
    return final


def _is_run(folder) -> bool:
    return any(os.path.exists(os.path.join(folder, name)) for name in (RUN_INFO, MANIFEST))


def write_manifest(folder, *, exclude=()) -> str:
    """Write ``MANIFEST.sha256`` (``sha256sum`` format, sorted paths) over every file of ``folder``.

    Parameters
    ----------
    folder : str
    exclude : iterable of str
        Absolute paths left out (files the run only read, such as the selection record).

    Returns
    -------
    str
        Path of the manifest.
    """
    skip = {os.path.abspath(p) for p in exclude} | {os.path.join(folder, MANIFEST)}
    lines = []
    for root, _, files in os.walk(folder):
        for name in files:
            path = os.path.join(root, name)
            if path not in skip:
                lines.append(f"{sha256_file(path)}  {os.path.relpath(path, folder).replace(os.sep, '/')}")
    path = os.path.join(folder, MANIFEST)
    write_atomic(path, "\n".join(sorted(lines, key=lambda ln: ln[66:])) + "\n")
    return path


def _failed_folder(final) -> str:
    """``NAME.failed`` for the failed run (an older failed run there is replaced; anything else is kept)."""
    target = f"{final}.failed"
    if os.path.isdir(target) and os.path.exists(os.path.join(target, FAILED)):
        shutil.rmtree(target)
    if os.path.exists(target):
        target = f"{final}.failed-{_dt.datetime.now(_dt.timezone.utc):%Y%m%dT%H%M%SZ}"
    return target


def _mark_failed(stage, final, exc) -> str:
    """Write ``FAILED.txt`` into the staging folder and move it to ``NAME.failed``; return that path."""
    previous = "holds the previous complete run, unchanged" if _is_run(final) else "was not changed"
    details = "".join(traceback.format_exception(exc.__cause__ or exc))
    text = (f"This run FAILED: its files are not results.\n\nerror: {exc}\n"
            f"when (UTC): {_dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()}\n"
            f"output folder: {final} ({previous})\n\ndetails:\n{_ANSI.sub('', details)}")
    write_atomic(os.path.join(stage, FAILED), text)
    with contextlib.suppress(FileNotFoundError):
        os.remove(os.path.join(stage, IN_PROGRESS))
    target = _failed_folder(final)
    os.rename(stage, target)
    return target


def _carry_into(stage, final, carry) -> list:
    """Copy files of the output folder named in ``carry`` into the staging folder (same relative path)."""
    copied = []
    for path in carry:
        path = os.path.abspath(os.fspath(path))
        rel = os.path.relpath(path, final)
        target = os.path.join(stage, rel)
        if rel.startswith(os.pardir) or not os.path.isfile(path) or os.path.exists(target):
            continue
        os.makedirs(os.path.dirname(target), exist_ok=True)
        shutil.copy2(path, target)
        copied.append(target)
    return copied


def _switch(stage, final) -> None:
    """Put the staging folder in place of the output folder (two renames), then delete the previous run."""
    previous = None
    if os.path.exists(final):
        previous = os.path.join(os.path.dirname(final), f".{os.path.basename(final)}.previous-{uuid.uuid4().hex[:8]}")
        os.rename(final, previous)
    try:
        os.rename(stage, final)
    except OSError:
        if previous:
            os.rename(previous, final)
        raise
    if previous:
        shutil.rmtree(previous, ignore_errors=True)


@contextlib.contextmanager
def staged_folder(final, *, carry=()):
    """Context manager giving a staging folder that replaces ``final`` as a whole on success.

    On an exception (including KeyboardInterrupt) the staging folder becomes
    ``final + ".failed"`` with ``FAILED.txt``, ``final`` is left as it was, and
    a :class:`RunError` naming both is raised from the exception.

    Parameters
    ----------
    final : str
        Output folder, checked by :func:`check_output_folder`.
    carry : iterable of str
        Files in ``final`` copied into the new run at the switch (not in the manifest).
    """
    name = os.path.basename(final)
    try:
        stage = tempfile.mkdtemp(prefix=f".{name}.staging-", dir=os.path.dirname(final))
    except OSError as exc:
        raise RunError(f"cannot create a staging folder beside {final}: {exc.strerror}.") from None
    umask = os.umask(0o022)
    os.umask(umask)
    os.chmod(stage, 0o777 & ~umask)  # mkdtemp makes it private; the output folder gets the usual mode
    write_atomic(os.path.join(stage, IN_PROGRESS), f"A run of {final} is in progress or was interrupted; "
                                                   "this folder is not a result.\n")
    try:
        yield stage
    except BaseException as exc:
        failed = _mark_failed(stage, final, exc)
        if not isinstance(exc, Exception):  # KeyboardInterrupt, SystemExit: marked failed, then left to stop
            raise
        raise RunError(f"{exc} (run files and FAILED.txt in {failed}; {final} "
                       f"{'still holds the previous complete run' if _is_run(final) else 'was not written'})") from exc
    os.remove(os.path.join(stage, IN_PROGRESS))
    copied = _carry_into(stage, final, carry)
    write_manifest(stage, exclude=copied)
    _switch(stage, final)
