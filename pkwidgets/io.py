"""Reading study files: one place for file I/O and its error messages.

:func:`read_study_csv` reads every cell as text so that later parsing can
name the exact file, line and column of a bad value.  One :mod:`csv` reader
splits the file into rows (RFC 4180: a quoted field may hold the delimiter,
doubled quotes and line breaks) and gives the line numbers; only ``\\n``,
``\\r`` and ``\\r\\n`` end a line, so characters such as U+0085 or U+2028
inside a cell never start a row.  Line numbers count the header as line 1
(after any blank lines before it); a row whose quoted field spans several
lines is numbered by the line it starts on.
"""

from __future__ import annotations

import codecs
import csv
import errno
import io
import os
import tempfile

import pandas as pd

from .errors import InputDataError

__all__ = ["read_study_csv", "write_atomic", "write_csv_atomic", "LINE", "MissingFileError"]

#: Column added to a table read from a file: its line number in the file.
LINE = "__line__"

#: Leading bytes of file types that are not text tables: (signature, description, what to do).
_SIGNATURES = (
    (b"PK\x03\x04", "a ZIP archive (an Excel .xlsx or OpenDocument .ods workbook?)",
     "export the sheet as CSV (UTF-8), or read it with pandas.read_excel and pass the DataFrame"),
    (b"PK\x05\x06", "an empty ZIP archive", "export the sheet as CSV (UTF-8)"),
    (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", "an Office compound file (a legacy Excel .xls workbook?)",
     "export the sheet as CSV (UTF-8), or read it with pandas.read_excel and pass the DataFrame"),
    (b"\x1f\x8b", "gzip-compressed", "decompress it first (gunzip) or read it with pandas.read_csv"),
    (b"%PDF", "a PDF document", "export the table from its source as CSV (UTF-8)"),
)
_UTF_BOMS = (
    (codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
    (codecs.BOM_UTF16_LE, "utf-16"), (codecs.BOM_UTF16_BE, "utf-16"),
)


class MissingFileError(InputDataError, FileNotFoundError):
    """A file named by the user does not exist.

    Both an :class:`~pkwidgets.errors.InputDataError` (a ``ValueError``) and a
    ``FileNotFoundError``, so either ``except`` clause catches it.
    """

    def __init__(self, message, *, file):
        super().__init__(message, file=file)
        self.message = message
        self.errno, self.strerror, self.filename = errno.ENOENT, os.strerror(errno.ENOENT), file

    def __str__(self):
        return self.message


def read_study_csv(path, *, sep=",", encoding="utf-8") -> pd.DataFrame:
    """Read a long-format concentration file as text.

    Parameters
    ----------
    path : str or os.PathLike
    sep : str
        Field delimiter (one character).
    encoding : str
        Text encoding of the file.  A UTF-8 byte-order mark is skipped.

    Returns
    -------
    pandas.DataFrame
        All columns as strings (empty cells as ""), plus a ``__line__`` column
        with the line each row starts on.  Blank lines are skipped.

    Raises
    ------
    MissingFileError
        If ``path`` does not exist (also a ``FileNotFoundError``).
    InputDataError
        A folder, an unreadable file, a workbook, archive or other binary
        file, a UTF-16/32 file read as UTF-8, bytes that are not
        ``encoding``, an empty file, a header without data, duplicate column
        names, broken quoting, rows with the wrong number of fields.
    """
    path = os.fspath(path)
    raw = _read_bytes(path, "data file")
    text = _decode(raw, path, encoding)
    header_line, header, body = _rows(text, path, sep)
    _check_header(header, path, header_line)
    if not body:
        raise InputDataError(f"{path} has a header but no data rows.", file=path)
    width = len(header)
    for lineno, row in body:
        if len(row) != width:
            raise InputDataError(f"{path}, line {lineno}: expected {width} fields as in the header, found "
                                 f"{len(row)}.{_width_hint(header, row)}", file=path, line=lineno)
    frame = pd.DataFrame([row for _, row in body], columns=header, dtype=object)
    frame[LINE] = [ln for ln, _ in body]
    return frame


def _read_bytes(path, what):
    """The bytes of a file, with a clear message for a missing path, a folder or no permission."""
    if os.path.isdir(path):
        raise InputDataError(f"{path} is a folder, not a file: give the path of the {what} inside it.", file=path)
    try:
        with open(path, "rb") as fh:
            return fh.read()
    except FileNotFoundError:
        raise MissingFileError(f"{what} {path} does not exist; check the path (working folder: {os.getcwd()}).",
                               file=path) from None
    except OSError as exc:
        raise InputDataError(f"{what} {path} cannot be read ({exc.strerror}); check the path and its permissions.",
                             file=path) from None


def _decode(raw: bytes, path, encoding) -> str:
    """Text of a file after checks for binary formats, UTF-16/32 and invalid bytes; a UTF-8 BOM is dropped."""
    try:
        codec = codecs.lookup(encoding).name
    except (LookupError, TypeError):
        raise ValueError(f"The 'encoding' option must name a text encoding Python knows (e.g. 'utf-8', "
                         f"'latin-1'); got {encoding!r}.") from None
    for sig, what, fix in _SIGNATURES:
        if raw.startswith(sig):
            raise InputDataError(f"{path} is {what}, not a CSV text file: {fix}.", file=path)
    wide = codec.startswith(("utf-16", "utf-32"))
    if not wide:
        for bom, name in _UTF_BOMS:
            if raw.startswith(bom):
                raise InputDataError(f"{path} is {name.upper()} text (it starts with a {name.upper()} byte-order "
                                     f"mark) but is read as {encoding}: re-save it as UTF-8 or pass "
                                     f"encoding={name!r}.", file=path)
        if b"\x00" in raw[:4096]:
            guess = " (every other byte is zero: UTF-16 without a byte-order mark?)" if raw[1:4096:2].count(0) > \
                0.9 * len(raw[1:4096:2]) or raw[0:4096:2].count(0) > 0.9 * len(raw[0:4096:2]) else ""
            raise InputDataError(f"{path} holds NUL bytes{guess}: it is not {encoding} text. Re-save it as UTF-8 "
                                 "CSV, or pass the encoding it was written in.", file=path)
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
    text = text[1:] if text.startswith("\ufeff") else text
    if not text.strip():
        raise InputDataError(f"{path} is empty (only a byte-order mark or blank characters): expected a header "
                             "line and one row per sample.", file=path)
    return text


def _rows(text, path, sep):
    """(header line, header, [(line, fields), ...]) from one csv reader; blank lines skipped."""
    if not (isinstance(sep, str) and len(sep) == 1) or sep in "\"\r\n":
        raise ValueError(f"The 'sep' option must be one character other than a quote or a line break; got {sep!r}.")
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=sep, strict=True)
    rows, start = [], 1
    try:
        for row in reader:
            if row and not (len(row) == 1 and not row[0].strip()):
                rows.append((start, row))
            start = reader.line_num + 1
    except csv.Error as exc:
        raise InputDataError(_quote_message(path, start, reader.line_num, exc), file=path, line=start) from None
    if not rows:
        raise InputDataError(f"{path} is empty (only blank lines): expected a header line and one row per sample.",
                             file=path)
    header_line, header = rows[0]
    return header_line, [h.strip() for h in header], rows[1:]


def _quote_message(path, start, end, exc):
    text = str(exc)
    if "unexpected end of data" in text:
        return (f"{path}, line {start}: a field opened with a double quote is never closed (the file ends inside "
                "it); close the quote or remove it.")
    return (f"{path}, line {end}: {text}. In CSV (RFC 4180) a field holding the delimiter, a quote or a line "
            "break is enclosed in double quotes, and a quote inside it is written twice (\"\").")


def _check_header(header, path, line):
    seen = {}
    for i, h in enumerate(header, start=1):
        if h in seen and h == "":
            raise InputDataError(
                f"{path}, line {line}: columns {seen[h]} and {i} of the header have no name; name every column "
                "(is the header line missing, or does it end with extra delimiters?).", file=path, line=line)
        if h in seen:
            raise InputDataError(
                f"{path}, line {line}: column name {h!r} appears more than once; give each column a distinct name.",
                file=path, line=line, column=h,
            )
        seen[h] = i


def _width_hint(header, row) -> str:
    if len(header) == 1 and any(d in header[0] for d in ";\t|"):
        return " The header has one column: is the delimiter ';' or a tab? Pass sep=."
    if len(row) > len(header) and not any(f.strip() for f in row[len(header):]):
        return " The extra fields are empty: is there a delimiter at the end of the line?"
    return ""


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
