"""Reading study files: one place for file I/O and its error messages.

:func:`read_study_csv` reads every cell as text so that later parsing can
name the exact file, line and column of a bad value.  Line numbers count
the header as line 1.
"""

from __future__ import annotations

import csv
import io
import os
import tempfile

import pandas as pd

from .errors import InputDataError

__all__ = ["read_study_csv", "write_atomic", "write_csv_atomic", "LINE"]

#: Column added to a table read from a file: its line number in the file.
LINE = "__line__"


def read_study_csv(path, *, sep=",", encoding="utf-8") -> pd.DataFrame:
    """Read a long-format concentration file as text.

    Parameters
    ----------
    path : str or os.PathLike
    sep : str
        Field delimiter.
    encoding : str
        Text encoding of the file.

    Returns
    -------
    pandas.DataFrame
        All columns as strings (empty cells as ""), plus a ``__line__`` column
        with each row's line number in the file.

    Raises
    ------
    InputDataError
        Empty file, header without data, bytes that are not ``encoding``,
        duplicate column names, rows with the wrong number of fields.
    FileNotFoundError
        If ``path`` does not exist.
    """
    path = os.fspath(path)
    with open(path, "rb") as fh:
        raw = fh.read()
    if not raw.strip():
        raise InputDataError(f"{path} is empty: expected a header line and one row per sample.", file=path)
    try:
        text = raw.decode(encoding)
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputDataError(
            f"{path}, line {line}: byte {raw[exc.start:exc.start + 1]!r} at offset {exc.start} is not valid "
            f"{encoding}; re-save the file as UTF-8 or pass encoding= (e.g. 'latin-1').",
            file=path, line=line,
        ) from None
    text = text.lstrip("\ufeff")
    lines = text.splitlines()
    header = next(csv.reader([lines[0]], delimiter=sep))
    header = [h.strip() for h in header]
    seen = set()
    for h in header:
        if h in seen:
            raise InputDataError(
                f"{path}, line 1: column name {h!r} appears more than once; give each column a distinct name.",
                file=path, line=1, column=h,
            )
        seen.add(h)
    body = [(i + 1, ln) for i, ln in enumerate(lines) if i > 0 and ln.strip()]
    if not body:
        raise InputDataError(f"{path} has a header but no data rows.", file=path)
    rows = list(csv.reader([ln for _, ln in body], delimiter=sep))
    for (lineno, _), row in zip(body, rows):
        if len(row) != len(header):
            hint = ""
            if len(header) == 1 and any(d in lines[0] for d in ";\t|"):
                hint = " The header has one column: is the delimiter ';' or a tab? Pass sep=."
            raise InputDataError(
                f"{path}, line {lineno}: expected {len(header)} fields as in the header, found {len(row)}.{hint}",
                file=path, line=lineno,
            )
    frame = pd.DataFrame(rows, columns=header, dtype=object)
    frame[LINE] = [ln for ln, _ in body]
    return frame


def wrong_delimiter_hint(columns) -> str:
    """A hint when a one-column header looks like another delimiter was used."""
    cols = list(columns)
    if len(cols) <= 2 and cols:
        for d, name in ((";", "';'"), ("\t", "a tab"), ("|", "'|'")):
            if d in str(cols[0]):
                return f" The header {cols[0]!r} looks {name}-delimited: pass sep={d!r}."
    return ""


def write_atomic(path, text: str, *, encoding="utf-8") -> None:
    """Write ``text`` to ``path`` so that readers see the old file or the new one, never half.

    The text goes to a temporary file in the same folder, is flushed to disk,
    then renamed over ``path`` (``os.replace`` is atomic on POSIX and Windows).
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=os.path.basename(path), dir=folder)
    try:
        # mkstemp creates mode 0600: give the file the mode a plain open() would
        # (the existing file's mode, else 0666 less the umask)
        os.chmod(tmp, _target_mode(path))
        with os.fdopen(fd, "w", encoding=encoding, newline="") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def _target_mode(path) -> int:
    try:
        return os.stat(path).st_mode & 0o777
    except FileNotFoundError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def write_csv_atomic(frame: pd.DataFrame, path) -> None:
    """Export a table to CSV atomically (see :func:`write_atomic`)."""
    buf = io.StringIO()
    frame.to_csv(buf, index=False, lineterminator="\n")
    write_atomic(path, buf.getvalue())
