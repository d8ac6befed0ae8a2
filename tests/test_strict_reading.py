"""Reading study files and numbers strictly: one csv reader, one number rule, all units or none.

Sources for the checks:
- RFC 4180 (CSV): a field enclosed in double quotes may hold commas, doubled quotes and line breaks;
  records end with CRLF (LF and CR accepted here, as Python's ``csv`` module does);
- Python's documentation of ``str.splitlines`` lists the characters it splits on (\\v, \\f, \\x1c-\\x1e,
  \\x85, \\u2028, \\u2029), none of which ends a CSV record; ``csv`` with ``newline=""`` splits on
  \\n, \\r and \\r\\n only;
- file signatures: ZIP local header ``PK\\x03\\x04`` (PKWARE APPNOTE 4.3.7; .xlsx/.ods are ZIP
  containers, ECMA-376 Part 2), OLE2 compound file ``D0 CF 11 E0 A1 B1 1A E1`` ([MS-CFB] 2.2), gzip
  ``1F 8B`` (RFC 1952 2.3.1), ``%PDF`` (ISO 32000-1 7.5.2), byte-order marks (Unicode 15, sec. 23.8);
- number grammar: decimal floating literals of C99 (ISO/IEC 9899:1999 6.4.4.2) restricted to ASCII
  digits; Python's ``float()`` accepts underscores (PEP 515) and any Unicode Nd digit (Python docs,
  "float"), which the strict rule refuses; for valid text, Python's ``float`` is the reference value;
- IEEE 754 binary64 range: 1e400 overflows, 1e-400 underflows to 0 (both refused, not altered);
- units: a missing or misspelt role is named (issue 11: a default concentration unit made CL/F
  1,000 times wrong).
"""

from __future__ import annotations

import gzip

import numpy as np
import pandas as pd
import pytest

from pkwidgets import InputDataError, UnitError, nca
from pkwidgets.io import LINE, MissingFileError, read_study_csv
from pkwidgets.numbers import describe_bad_number, parse_numbers
from pkwidgets.units import StudyUnits, coerce_units

H = "subject,time,conc\n"


def _file(tmp_path, data, name="study.csv"):
    path = tmp_path / name
    path.write_bytes(data if isinstance(data, bytes) else data.encode("utf-8"))
    return path


# ------------------------------------------------------------------ rows and line numbers
def test_quoted_line_break_is_one_row_and_lines_stay_right(tmp_path):
    # RFC 4180 2.6: a quoted field may contain a line break; the rows after it keep their line numbers
    text = H + '1,0,0\n1,1,"5"\n"1",2,"8\nsee lab note"\n1,4,6\n1,8\n'
    with pytest.raises(InputDataError, match=r"study\.csv, line 7: expected 3 fields as in the header, found 2"):
        read_study_csv(_file(tmp_path, text))
    f = read_study_csv(_file(tmp_path, text.rsplit("1,8\n", 1)[0]))
    assert f[LINE].tolist() == [2, 3, 4, 6]
    assert f["conc"].tolist() == ["0", "5", "8\nsee lab note", "6"]


@pytest.mark.parametrize("char", ["\x85", "\u2028", "\u2029", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e"])
def test_characters_splitlines_breaks_on_never_make_a_row(tmp_path, char):
    # str.splitlines would split on these (Python docs); a CSV record does not end there
    text = H + f"1,0,0 note{char}1\n1,1,5\n" + f'1,2,"8{char}2,3,4"\n'
    f = read_study_csv(_file(tmp_path, text))
    assert f[LINE].tolist() == [2, 3, 4]
    assert f["conc"].tolist() == [f"0 note{char}1", "5", f"8{char}2,3,4"]


def test_cr_only_and_crlf_line_ends(tmp_path):
    for end in ("\r", "\r\n"):
        f = read_study_csv(_file(tmp_path, H.replace("\n", end) + f"1,0,0{end}1,1,5{end}"))
        assert f[LINE].tolist() == [2, 3] and f["conc"].tolist() == ["0", "5"]


def test_blank_lines_before_the_header_and_between_rows(tmp_path):
    f = read_study_csv(_file(tmp_path, "\n \n" + H + "1,0,0\n\n   \n1,1,5\n"))
    assert f[LINE].tolist() == [4, 7]


def test_utf8_bom_is_read(tmp_path):
    f = read_study_csv(_file(tmp_path, b"\xef\xbb\xbf" + (H + "1,0,0\n").encode()))
    assert list(f.columns) == ["subject", "time", "conc", LINE]


def test_utf16_read_when_declared(tmp_path):
    f = read_study_csv(_file(tmp_path, (H + "1,0,0\n").encode("utf-16")), encoding="utf-16")
    assert f["conc"].tolist() == ["0"]


FILE_ERRORS = [
    ("utf16-bom", (H + "1,0,0\n").encode("utf-16"), r"study\.csv is UTF-16 text .* pass encoding='utf-16'"),
    ("utf16-no-bom", (H + "1,0,0\n").encode("utf-16-le"), r"holds NUL bytes \(every other byte is zero: UTF-16"),
    ("utf32-bom", (H + "1,0,0\n").encode("utf-32"), r"is UTF-32 text .* pass encoding='utf-32'"),
    ("xlsx", b"PK\x03\x04\x14\x00\x06\x00" + b"\x00" * 40, r"is a ZIP archive \(an Excel \.xlsx.*pandas\.read_excel"),
    ("xls", b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 40, r"legacy Excel \.xls workbook"),
    ("gzip", gzip.compress((H + "1,0,0\n").encode()), r"is gzip-compressed, not a CSV text file"),
    ("pdf", b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n", r"is a PDF document"),
    ("nul-inside", (H + "1,0,\x000\n").encode(), r"holds NUL bytes: it is not utf-8 text"),
    ("empty", b"", r"study\.csv is empty: expected a header line"),
    ("bom-only", b"\xef\xbb\xbf", r"is empty \(only a byte-order mark or blank characters\)"),
    ("unicode-blanks-only", "\u2028\n\x85\n\u3000\n".encode(), r"is empty \(only a byte-order mark or blank"),
    ("header-of-blank-names", " , \n\t\n".encode(), r"line 1: columns 1 and 2 of the header have no name"),
    ("header-only-then-blanks", (H + "\n \n\u2028\n").encode(), r"study\.csv has a header but no data rows"),
    ("unclosed-quote", H + '1,0,0\n1,1,"5\n1,2,8\n', r"line 3: a field opened with a double quote is never closed"),
    ("text-after-quote", H + '1,0,0\n1,1,"5"x\n', r"line 3: ',' expected after '\"'.*RFC 4180"),
    ("trailing-delimiter", H + "1,0,0,\n", r"line 2: expected 3 fields .* found 4\. The extra fields are empty"),
    ("duplicate-after-strip", "subject,time,conc,conc \n1,0,0,1\n", r"line 1: column name 'conc' appears more"),
    ("duplicate-header-after-blank", "\n" + "a,a\n1,2\n", r"line 2: column name 'a' appears more than once"),
]


@pytest.mark.parametrize("data, match", [c[1:] for c in FILE_ERRORS], ids=[c[0] for c in FILE_ERRORS])
def test_file_level_errors_name_the_file(tmp_path, data, match):
    path = _file(tmp_path, data)
    with pytest.raises(InputDataError, match=match) as info:
        read_study_csv(path)
    assert info.value.file == str(path)


def test_folder_and_missing_file(tmp_path):
    with pytest.raises(InputDataError, match=r" is a folder, not a file: give the path of the data file"):
        read_study_csv(tmp_path)
    with pytest.raises(MissingFileError, match=r"data file .*nope\.csv does not exist; check the path"):
        read_study_csv(tmp_path / "nope.csv")
    with pytest.raises(FileNotFoundError):
        nca(tmp_path / "nope.csv", by="subject")


@pytest.mark.parametrize("kw, match", [
    ({"encoding": "utf-99"}, r"The 'encoding' option must name a text encoding"),
    ({"sep": ";;"}, r"The 'sep' option must be one character"),
    ({"sep": '"'}, r"The 'sep' option must be one character other than a quote"),
])
def test_reading_options_checked(tmp_path, kw, match):
    with pytest.raises(ValueError, match=match):
        read_study_csv(_file(tmp_path, H + "1,0,0\n"), **kw)


# ------------------------------------------------------------------ numbers
VALID = ["0", "1", "-2", "+3", "1.5", ".5", "5.", "-.25", "1e3", "1E-3", "+2.5e+10", " 7 ", "\t8\t", "0.000",
         "1e-300", "123456789012345678901234567890", "-0"]


@pytest.mark.parametrize("text", VALID)
def test_valid_numbers_equal_python_float(text):
    # for text in the strict grammar, Python's float() is the reference value (IEEE 754 round to nearest)
    v, bad = parse_numbers([text])
    assert not bad[0] and v[0] == float(text)


BAD = [
    ("4_5", "."), ("1_000.5", "."),                           # PEP 515 grouping, accepted by float()
    ("\u0664\u066b\u0665", "."), ("\u0664", "."),             # Arabic-Indic digits
    ("\uff14", "."), ("\u0967", "."), ("\U0001d7d2", "."),    # full-width, Devanagari, mathematical bold 4
    ("4.5", ","), ("1.234", ","), ("1.234,5", ","),           # a point in a decimal-comma file
    ("4,5", "."), ("1,234", "."),                             # a comma in a decimal-point file
    ("1e400", "."), ("1e-400", "."), ("-1e999", "."),         # outside float64
    ("0x1A", "."), ("1 000", "."), ("½", "."), ("--1", "."), ("1e", "."), ("e5", "."), ("1.2.3", "."),
    ("nan(123)", "."), ("NaNa", "."), ("∞", "."), ("1/2", "."), ("5%", "."), ("3 mg", "."),
]


@pytest.mark.parametrize("text, decimal", BAD)
def test_bad_numbers_are_refused_not_altered(text, decimal):
    v, bad = parse_numbers([text], decimal=decimal)
    assert bad.tolist() == [True] and np.isnan(v[0])


@pytest.mark.parametrize("text", ["", "   ", "NA", "na", "NaN", ".", "N/A"])
def test_missing_markers_are_nan_not_bad(text):
    v, bad = parse_numbers([text])
    assert np.isnan(v[0]) and not bad[0]


def test_decimal_comma_and_infinity_and_mixed_objects():
    v, bad = parse_numbers(["1,5", "-,5", "2e3", "inf", "-Infinity", None, 2.5, True, pd.NA], decimal=",")
    assert v[:5].tolist() == [1.5, -0.5, 2000.0, np.inf, -np.inf]
    assert np.isnan(v[5]) and v[6] == 2.5 and bad.tolist() == [False] * 7 + [True, False]


def test_series_dtypes_and_order_kept():
    s = pd.Series(["3", "x", "1"], index=[10, 5, 7], dtype="str")
    v, bad = parse_numbers(s)
    assert v[0] == 3 and v[2] == 1 and bad.tolist() == [False, True, False]
    v2, bad2 = parse_numbers(pd.Series([1, 2, 3]))
    assert v2.tolist() == [1.0, 2.0, 3.0] and not bad2.any()


@pytest.mark.parametrize("text, decimal, phrase", [
    ("4_5", ".", "'_' is not allowed"), ("\u0664", ".", "digits other than ASCII"),
    ("4.5", ",", "declares decimal=','"), ("4,5", ".", "pass decimal=','"), ("1e400", ".", "float64 range"),
])
def test_bad_number_descriptions(text, decimal, phrase):
    assert phrase in describe_bad_number(text, decimal=decimal)


# strict numbers through nca() need the table layer to call parse_numbers (lead's wiring, issue 11)
_BASE = [("1", "0", "0"), ("1", "1", "5"), ("1", "2", "8"), ("1", "4", "6"), ("1", "8", "3"), ("1", "12", "1.5")]


def _table(i, col, value, decimal="."):
    df = pd.DataFrame(_BASE, columns=["subject", "time", "conc"]).assign(dose="100")
    if decimal == ",":
        df["conc"] = df["conc"].str.replace(".", ",")
    df.loc[i, col] = value
    return df


@pytest.mark.parametrize("col, value, decimal", [
    ("conc", "4_5", "."), ("conc", "\u0664", "."), ("conc", "\uff14", "."), ("conc", "1e-400", "."),
    ("conc", "6.5", ","), ("conc", "1.234", ","),
])
def test_strict_numbers_through_nca(col, value, decimal):
    with pytest.raises(InputDataError, match=rf"row 3, column '{col}'"):
        nca(_table(3, col, value, decimal), by="subject", decimal=decimal)


# ------------------------------------------------------------------ units
@pytest.mark.parametrize("units, match", [
    ({"time": "h", "dose": "mg"}, r"'conc' is missing \(got time='h', dose='mg'\)"),
    ({"conc": "ng/mL", "dose": "mg"}, r"'time' is missing"),
    ({"dose": "mg"}, r"'time' and 'conc' are missing"),
    ({}, r"'time' and 'conc' are missing \(got nothing\)"),
    ({"tme": "h", "conc": "ng/mL", "dose": "mg"}, r"got 'tme'\. Did you mean 'time'\?"),
    ({"time": "h", "concentration": "ng/mL", "dose": "mg"}, r"got 'concentration'"),
    ({"time": "h", "conc": "ng/mL", "Dose": "mg"}, r"got 'Dose'\. Did you mean 'dose'\?"),
    ({"time": "h", "conc": "ng/mL", "dose": "mg", "volume": "L"}, r"got 'volume'"),
])
def test_units_partial_or_misspelt_through_nca(units, match):
    df = _table(0, "subject", "1")
    with pytest.raises(UnitError, match=match):
        nca(df, by="subject", units=units)


def test_coerce_units_needs_dose_and_types():
    assert coerce_units(None) is None
    assert coerce_units({"time": "h", "conc": "ng/mL"}).dose is None   # no dose analysed: fine
    with pytest.raises(UnitError, match=r"'dose' is missing \(got time='h', conc='ng/mL'\)"):
        coerce_units({"time": "h", "conc": "ng/mL"}, needs_dose=True)
    with pytest.raises(UnitError, match=r"'dose' is missing"):
        coerce_units(StudyUnits("h", "ng/mL"), needs_dose=True)
    with pytest.raises(TypeError, match=r"The 'units' option must be None, a StudyUnits or a dict"):
        coerce_units("h")
    with pytest.raises(UnitError, match=r"'conc' is missing"):
        StudyUnits(time="h")
