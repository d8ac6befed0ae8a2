"""Bad-input catalogue: every malformed file or table gets a located error or a documented flag.

Each case is one parametrised entry with its expected outcome:

- ``Rejected``: the exception type and a ``match=`` on a message that names the
  file, line, column or subject; the error must be raised from pkwidgets code
  (not from inside numpy or pandas) so the user never sees a deep traceback;
- ``Flagged``: the run completes, the named QC flag is raised on the named
  profile, and the affected rows are listed in ``.samples`` with their reason
  (no row silently dropped).

Sources for the checks:
- the project rule "a clear error naming the file, row, column or subject, or a
  documented flag; never a deep traceback, never a silently dropped row" (issue 7);
- RFC 4180 (CSV: one header line, the same number of fields on every line);
- ISO/IEC 10646 / RFC 3629 (UTF-8: byte 0xE9 alone is not valid UTF-8);
- EMA Guideline on the Investigation of Bioequivalence, CPMP/EWP/QWP/1401/98 Rev.1
  (2010): a pre-dose concentration above 5 % of Cmax is singled out;
- linear and log trapezoidal rules, Gibaldi & Perrier, Pharmacokinetics, 2nd ed.
  (1982), Appendix D: hand values for the "zeros inside a log segment" case;
- linearity of the integral (AUC of k*C is k*AUC, any k > 0): the extreme-magnitude cases;
- BLQ positions and default rules (zero before and after, missing between):
  common practice, no source;
- issue 11 cases: file signatures (ZIP local header ``PK\\x03\\x04``, PKWARE APPNOTE 4.3.7, the
  container of .xlsx per ECMA-376 Part 2; gzip ``1F 8B``, RFC 1952), Unicode byte-order marks
  (Unicode 15, section 23.8), RFC 4180 quoting (a quoted field may hold line breaks; only CR/LF end a
  record, so U+0085 and U+2028 never do), RFC 8259 for records (unique names, section 4; no NaN,
  section 6; a BOM may be ignored, section 8.1), SHA-256 per FIPS 180-4 computed with ``hashlib``.
"""

from __future__ import annotations

import math
import os
import traceback
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pytest

import pkwidgets
from pkwidgets import InputDataError, UnitError, nca

PKG_DIR = os.path.dirname(os.path.abspath(pkwidgets.__file__))

HEADER = "subject,time,conc,dose\n"
#: A clean two-subject study; cases below change one thing in it.
GOOD_ROWS = [
    (1, 0, "0", 100), (1, 1, "5", 100), (1, 2, "8", 100), (1, 4, "6", 100),
    (1, 8, "3", 100), (1, 12, "1.5", 100), (1, 24, "0.4", 100),
    (2, 0, "0", 100), (2, 1, "4", 100), (2, 2, "7", 100), (2, 4, "5", 100),
    (2, 8, "2.5", 100), (2, 12, "1.2", 100), (2, 24, "0.3", 100),
]


def csv_text(rows=GOOD_ROWS, header=HEADER, sep=","):
    body = "".join(sep.join(str(v) for v in r) + "\n" for r in rows)
    return header.replace(",", sep) + body


def frame(rows=GOOD_ROWS):
    return pd.DataFrame(
        [(s, t, float(c) if _is_number(c) else c, d) for s, t, c, d in rows],
        columns=["subject", "time", "conc", "dose"],
    )


def _is_number(x):
    try:
        float(x)
        return True
    except (TypeError, ValueError):
        return False


def replace_row(rows, i, new):
    out = list(rows)
    out[i] = new
    return out


@dataclass
class Rejected:
    """Input -> exception type and message pattern."""

    id: str
    data: object  # text/bytes of a CSV file, or a DataFrame, or another object
    kwargs: dict
    exc: type
    match: str  # regex on the message


@dataclass
class Flagged:
    """Input -> the run completes, flags are raised, affected rows listed with a reason."""

    id: str
    data: object
    kwargs: dict
    flags: set = field(default_factory=set)  # {(subject, flag)}
    unused: dict = field(default_factory=dict)  # {line or row: reason substring}
    check: object = None  # optional extra check(result)


FILE = "study.csv"
F = r"study\.csv"


def _load(case, tmp_path):
    """Write file cases to tmp_path/study.csv; return what nca() receives."""
    if isinstance(case.data, (str, bytes)):
        path = tmp_path / FILE
        if isinstance(case.data, bytes):
            path.write_bytes(case.data)
        else:
            path.write_text(case.data, encoding="utf-8")
        return str(path)
    return case.data


# ---------------------------------------------------------------------------- rejected inputs
REJECTED = [
    # --- file structure (RFC 4180) ---
    Rejected("empty-file", "", {}, InputDataError, F + r" is empty: expected a header line"),
    Rejected("blank-lines-only", "\n   \n\n", {}, InputDataError, F + r" is empty"),
    Rejected("header-only", HEADER, {}, InputDataError, F + r" has a header but no data rows"),
    Rejected("wrong-delimiter-semicolon", csv_text(sep=";"), {}, InputDataError,
             F + r": required column\(s\) .* not found.*looks ';'-delimited: pass sep=';'"),
    Rejected("wrong-delimiter-tab", csv_text(sep="\t"), {}, InputDataError,
             F + r": required column\(s\).*looks a tab-delimited: pass sep='\\t'"),
    Rejected("decimal-comma-time", "subject;time;conc;dose\n1;0;0;100\n1;0,5;5,2;100\n", {"sep": ";"},
             InputDataError, F + r", line 3, column 'time': '0,5' is not a number.*decimal comma: pass decimal=','"),
    Rejected("decimal-comma-conc-quoted", HEADER + '1,0,0,100\n1,1,"5,2",100\n', {}, InputDataError,
             F + r", line 3, column 'conc': '5,2' is neither a number nor a BLQ marker.*decimal comma"),
    Rejected("missing-conc-column", "subject,time,dose\n1,0,100\n", {}, InputDataError,
             F + r": required column\(s\) \['conc'\] not found; columns are \['subject', 'time', 'dose'\]"),
    Rejected("missing-by-column", csv_text(), {"by": "period"}, InputDataError,
             F + r": required column\(s\) \['period'\] not found"),
    Rejected("duplicate-column-names", "subject,time,conc,conc\n1,0,0,1\n", {}, InputDataError,
             F + r", line 1: column name 'conc' appears more than once"),
    Rejected("non-utf8-bytes", (HEADER + "1,0,0,100\nJos\xe9,1,5,100\n").encode("latin-1"), {}, InputDataError,
             F + r", line 3: byte b'\\xe9' at offset \d+ is not valid utf-8.*encoding="),
    Rejected("too-few-fields", HEADER + "1,0,0,100\n1,1,5\n", {}, InputDataError,
             F + r", line 3: expected 4 fields as in the header, found 3"),
    Rejected("too-many-fields", HEADER + "1,0,0,100,7\n", {}, InputDataError,
             F + r", line 2: expected 4 fields as in the header, found 5"),
    # --- cell values ---
    Rejected("text-in-time", csv_text(replace_row(GOOD_ROWS, 3, (1, "four", "6", 100))), {}, InputDataError,
             F + r", line 5, column 'time': 'four' is not a number"),
    Rejected("text-in-conc", csv_text(replace_row(GOOD_ROWS, 3, (1, 4, "six", 100))), {}, InputDataError,
             F + r", line 5, column 'conc': 'six' is neither a number nor a BLQ marker"),
    Rejected("unknown-blq-marker", csv_text(replace_row(GOOD_ROWS, 6, (1, 24, "below LOQ", 100))), {},
             InputDataError, F + r", line 8, column 'conc': 'below LOQ' is neither a number nor a BLQ marker \(BLQ"),
    Rejected("blq-marker-without-limit", csv_text(replace_row(GOOD_ROWS, 6, (1, 24, "<", 100))), {},
             InputDataError, F + r", line 8, column 'conc': '<' is neither"),
    Rejected("text-in-dose", csv_text(replace_row(GOOD_ROWS, 9, (2, 2, "7", "ten"))), {}, InputDataError,
             F + r", line 11, column 'dose': 'ten' is not a number"),
    Rejected("nan-time-with-conc", csv_text(replace_row(GOOD_ROWS, 4, (1, "nan", "3", 100))), {}, InputDataError,
             F + r", line 6, column 'time': time is empty but a concentration is given"),
    Rejected("empty-time-with-conc", csv_text(replace_row(GOOD_ROWS, 4, (1, "", "3", 100))), {}, InputDataError,
             F + r", line 6, column 'time': time is empty but a concentration is given"),
    Rejected("inf-time", csv_text(replace_row(GOOD_ROWS, 6, (1, "inf", "0.4", 100))), {}, InputDataError,
             F + r", line 8, column 'time': time is infinite"),
    Rejected("negative-conc", csv_text(replace_row(GOOD_ROWS, 5, (1, 12, "-1.5", 100))), {}, InputDataError,
             F + r", line 7, column 'conc': concentration -1.5 is not a finite value >= 0.*'BLQ'"),
    Rejected("infinite-conc", csv_text(replace_row(GOOD_ROWS, 2, (1, 2, "inf", 100))), {}, InputDataError,
             F + r", line 4, column 'conc': concentration inf is not a finite value >= 0"),
    Rejected("minus-infinite-conc", csv_text(replace_row(GOOD_ROWS, 2, (1, 2, "-inf", 100))), {}, InputDataError,
             F + r", line 4, column 'conc': concentration -inf is not a finite value >= 0"),
    Rejected("blq-flag-not-yes-no", HEADER.replace("dose", "dose,below") + "1,0,0,100,no\n1,1,5,100,maybe\n",
             {"blq": "below"}, InputDataError, F + r", line 3, column 'below': 'maybe' is not a yes/no value"),
    Rejected("empty-subject-key", csv_text(replace_row(GOOD_ROWS, 8, ("", 1, "4", 100))), {}, InputDataError,
             F + r", line 10, column 'subject': profile key is empty"),
    Rejected("no-row-has-a-time", HEADER + "1,,,100\n2,,,100\n", {}, InputDataError,
             F + r": no row has a sampling time; nothing to analyse"),
    # --- profile level ---
    Rejected("duplicate-time-in-profile", csv_text(replace_row(GOOD_ROWS, 10, (2, 2, "5", 100))), {},
             InputDataError, F + r": profile \{'subject': 2\} has time 2 twice \(line 11 and line 12\)"),
    Rejected("conflicting-doses", csv_text(replace_row(GOOD_ROWS, 11, (2, 8, "2.5", 200))), {}, InputDataError,
             F + r": column 'dose' differs within one profile \(100 and 200; line 9, line 10"),
    Rejected("zero-dose-cl-requested", csv_text([(s, t, c, 0 if s == 2 else d) for s, t, c, d in GOOD_ROWS]), {},
             InputDataError, F + r": profile \{'subject': 2\} has dose 0 in column 'dose' \(line 9, line 10"),
    Rejected("negative-dose", csv_text([(s, t, c, -5 if s == 1 else d) for s, t, c, d in GOOD_ROWS]), {},
             InputDataError, F + r": profile \{'subject': 1\} has dose -5 in column 'dose' \(line 2"),
    Rejected("missing-dose-cl-requested", csv_text([(s, t, c, "" if s == 2 else d) for s, t, c, d in GOOD_ROWS]),
             {}, InputDataError, F + r": profile \{'subject': 2\} has no value in column 'dose'.*dose=None"),
    Rejected("half-lloq-rule-without-lloq", csv_text(replace_row(GOOD_ROWS, 7, (2, 0, "BLQ", 100))),
             {"blq_rules": {"before": "half-lloq"}}, InputDataError,
             F + r", line 9, column 'conc', profile \{'subject': 2\}: BLQ rule before='half-lloq' needs the LLOQ"),
    # --- units declared inconsistently ---
    Rejected("units-amount-conc-with-mass-dose", csv_text(), {"units": {"time": "h", "conc": "nmol/L", "dose": "mg"}},
             UnitError, r"dose unit 'mg' and concentration unit 'nmol/L'.*same basis"),
    Rejected("units-time-declared-as-mass", csv_text(), {"units": {"time": "mg", "conc": "ng/mL", "dose": "mg"}},
             UnitError, r"time unit 'mg' is not a unit of time"),
    Rejected("units-conc-not-per-volume", csv_text(), {"units": {"time": "h", "conc": "ng", "dose": "mg"}},
             UnitError, r"concentration unit 'ng' is neither mass nor amount per volume"),
    Rejected("units-unknown-symbol", csv_text(), {"units": {"time": "h", "conc": "ng/mL", "dose": "mgg"}},
             UnitError, r"dose unit 'mgg' is not a unit pint knows"),
    # --- in-memory tables and options ---
    Rejected("table-empty", pd.DataFrame(columns=["subject", "time", "conc"]), {}, InputDataError,
             r"the table is empty"),
    Rejected("table-not-a-table", [(1, 0, 0.0)], {}, TypeError,
             r"data must be a pandas DataFrame or the path of a CSV file; got list"),
    Rejected("table-duplicate-columns", pd.DataFrame([[1, 0, 0.0, 1.0]], columns=["subject", "time", "conc", "conc"]),
             {}, InputDataError, r"column name 'conc' appears more than once"),
    Rejected("table-nan-time", frame(replace_row(GOOD_ROWS, 4, (1, math.nan, "3", 100))), {}, InputDataError,
             r"table, row 4, column 'time': time is empty but a concentration is given"),
    Rejected("table-inf-time", frame(replace_row(GOOD_ROWS, 4, (1, math.inf, "3", 100))), {}, InputDataError,
             r"table, row 4, column 'time': time is infinite"),
    Rejected("table-negative-conc", frame(replace_row(GOOD_ROWS, 12, (2, 12, "-0.1", 100))), {}, InputDataError,
             r"table, row 12, column 'conc': concentration -0.1 is not a finite value >= 0"),
    Rejected("table-minus-inf-conc", frame(replace_row(GOOD_ROWS, 12, (2, 12, "-inf", 100))), {}, InputDataError,
             r"table, row 12, column 'conc': concentration -inf"),
    Rejected("table-missing-subject", frame(replace_row(GOOD_ROWS, 3, (math.nan, 4, "6", 100))), {},
             InputDataError, r"table, row 3, column 'subject': profile key is empty"),
    Rejected("table-zero-dose", frame([(s, t, c, 0.0 if s == 1 else d) for s, t, c, d in GOOD_ROWS]), {},
             InputDataError, r"table: profile \{'subject': 1\} has dose 0 in column 'dose' \(row 0, row 1"),
    Rejected("table-dose-time-differs", frame().assign(dose_at=[0] * 13 + [1]), {"dose_time": "dose_at"},
             InputDataError, r"table: column 'dose_at' differs within one profile \(0 and 1; row 7"),
    Rejected("terminal-unknown-profile", frame(), {"terminal": {9: (4, 24)}}, InputDataError,
             r"terminal names profile 9, which is not in the data"),
    Rejected("terminal-window-reversed", frame(), {"terminal": {2: (24, 4)}}, InputDataError,
             r"terminal window for profile 2 must have end > start; got \(24, 4\)"),
    Rejected("exclude-time-not-sampled", frame(), {"exclude": {1: [5.5]}}, InputDataError,
             r"exclude lists time 5.5 for profile 1, which has no sample then"),
    Rejected("by-empty", frame(), {"by": []}, ValueError, r"by must name at least one column"),
    Rejected("infusion-without-duration", frame(), {"route": "iv-infusion"}, ValueError,
             r"route 'iv-infusion' needs duration="),
    Rejected("unknown-route", frame(), {"route": "oral"}, ValueError, r"'route' option must be one of .*got 'oral'"),
    Rejected("by-none", frame(), {"by": None}, ValueError, r"by must name at least one column"),
    Rejected("by-names-profile-id", frame().assign(profile_id=1), {"by": "profile_id"}, ValueError,
             r"clashes with the result's own 'profile_id' column"),
    Rejected("user-column-with-tool-prefix", frame().assign(nca_used=1), {}, InputDataError,
             r"use the prefix 'nca_' that the result keeps for its own columns"),
    Rejected("unknown-auc-method", frame(), {"auc_method": "log"}, ValueError,
             r"'auc_method' option must be one of .*got 'log'"),
    Rejected("tau-zero", frame(), {"tau": 0}, ValueError, r"'tau' option must be a finite number > 0"),
    Rejected("partial-reversed", frame(), {"partial": [(4, 2)]}, ValueError,
             r"partial interval AUCINT_4-2: need 0 <= start < end"),
    # --- issue 11: file types and encodings (signatures: PKWARE APPNOTE, RFC 1952, ISO 32000; Unicode BOMs) ---
    Rejected("utf16-file", csv_text().encode("utf-16"), {}, InputDataError,
             F + r" is UTF-16 text \(it starts with a UTF-16 byte-order mark\).*encoding='utf-16'"),
    Rejected("xlsx-workbook", b"PK\x03\x04\x14\x00\x06\x00" + bytes(60), {}, InputDataError,
             F + r" is a ZIP archive \(an Excel \.xlsx or OpenDocument \.ods workbook\?\), not a CSV text file"),
    Rejected("gzip-file", b"\x1f\x8b\x08\x00" + bytes(30), {}, InputDataError, F + r" is gzip-compressed"),
    Rejected("nul-bytes", csv_text().replace("\n1,4", "\n1,\x004", 1), {}, InputDataError, F + r" holds NUL bytes"),
    # --- issue 11: CSV quoting (RFC 4180) ---
    Rejected("unclosed-quote", HEADER + '1,0,0,100\n1,1,"5,100\n1,2,8,100\n', {}, InputDataError,
             F + r", line 3: a field opened with a double quote is never closed"),
    Rejected("text-after-closing-quote", HEADER + '1,0,0,100\n1,1,"5"0,100\n', {}, InputDataError,
             F + r", line 3: ',' expected after '\"'"),
    Rejected("trailing-delimiter", HEADER + "1,0,0,100,\n", {}, InputDataError,
             F + r", line 2: expected 4 fields as in the header, found 5\. The extra fields are empty"),
    Rejected("wrong-field-count-after-quoted-newline", HEADER + '1,0,"0",100\n1,1,"5\n",100\n1,2,8\n', {},
             InputDataError, F + r", line 5: expected 4 fields as in the header, found 3"),
    Rejected("u0085-splits-nothing", HEADER + "1,0,0,100\n1,1,5,100\x851,2,8,100\n", {}, InputDataError,
             F + r", line 3: expected 4 fields as in the header, found 7"),
    # --- issue 11: units all or none, keys spelt right ---
    Rejected("units-partial-no-conc", csv_text(), {"units": {"time": "h", "dose": "mg"}}, UnitError,
             r"'conc' is missing \(got time='h', dose='mg'\)"),
    Rejected("units-partial-only-dose", csv_text(), {"units": {"dose": "mg"}}, UnitError,
             r"'time' and 'conc' are missing"),
    Rejected("units-misspelt-time", csv_text(), {"units": {"tme": "h", "conc": "ng/mL", "dose": "mg"}}, UnitError,
             r"A key of the 'units' option must be one of 'time', 'conc', 'dose'; got 'tme'\. Did you mean 'time'\?"),
    Rejected("units-misspelt-conc", csv_text(), {"units": {"time": "h", "cnc": "ng/mL", "dose": "mg"}}, UnitError,
             r"got 'cnc'\. Did you mean 'conc'\?"),
    Rejected("units-not-a-dict", csv_text(), {"units": ["h", "ng/mL", "mg"]}, TypeError,
             r"argument after \*\* must be a mapping|The 'units' option must be None"),
]


@pytest.mark.parametrize("case", REJECTED, ids=[c.id for c in REJECTED])
def test_rejected_with_located_message(case, tmp_path):
    data = _load(case, tmp_path)
    kwargs = {"by": "subject", **case.kwargs}
    with pytest.raises(case.exc, match=case.match) as info:
        nca(data, **kwargs)
    # the error comes from pkwidgets' own checks, not from deep inside numpy/pandas
    last = traceback.extract_tb(info.value.__traceback__)[-1]
    assert os.path.dirname(os.path.abspath(last.filename)) == PKG_DIR, last
    # file errors carry the file name as an attribute too
    if isinstance(case.data, (str, bytes)) and isinstance(info.value, InputDataError):
        assert info.value.file is not None and os.path.basename(info.value.file) == FILE


# ---------------------------------------------------------------------------- flagged inputs
def _rows_of(rows, subject):
    return [r for r in rows if r[0] == subject]


def _check_zero_inside_log(res):
    # lin-up/log-down: a segment falling to 0 cannot use the log rule (ln 0): linear there
    # (Gibaldi & Perrier App. D).  Subject 1 data: 0,5,8,0,3,1.5,0.4 at 0,1,2,4,8,12,24.
    lin = [(0, 1, 0, 5), (1, 2, 5, 8), (2, 4, 8, 0), (4, 8, 0, 3)]
    log = [(8, 12, 3, 1.5), (12, 24, 1.5, 0.4)]
    expected = sum((t2 - t1) * (c1 + c2) / 2 for t1, t2, c1, c2 in lin)
    expected += sum((c1 - c2) * (t2 - t1) / math.log(c1 / c2) for t1, t2, c1, c2 in log)
    assert res.profile(1).parameters["AUCLST"] == pytest.approx(expected, rel=1e-12)


def _check_scaled(factor):
    def check(res):
        # linearity of the integral: AUC(k*C) = k*AUC(C); lambda z unchanged (log of k*C shifts by ln k)
        ref = nca(frame(), by="subject", auc_method="lin-up/log-down").parameters
        got = res.parameters
        np.testing.assert_allclose(got["AUCLST"], factor * ref["AUCLST"], rtol=1e-12)
        np.testing.assert_allclose(got["AUCIFO"], factor * ref["AUCIFO"], rtol=1e-12)
        np.testing.assert_allclose(got["CMAX"], factor * ref["CMAX"], rtol=1e-15)
        np.testing.assert_allclose(got["LAMZ"], ref["LAMZ"], rtol=1e-10)
        assert np.isfinite(got["AUCIFO"]).all()
    return check


def _check_single_sample(res):
    r = res.profile(2).parameters
    assert r["CMAX"] == 4.0 and r["TMAX"] == 1.0
    assert r["AUCLST"] == pytest.approx(2.0)  # 0 added at dose time: (1 - 0) * (0 + 4) / 2
    assert math.isnan(r["LAMZ"]) and math.isnan(r["AUCIFO"])


def _check_blq_after_tlast(res):
    # a BLQ sample after TLST (rule 'zero') leaves AUCLST as without it, and adds a linear
    # segment to AUCALL: (36 - 24) * (0.4 + 0) / 2 = 2.4
    ref = nca(frame(), by="subject").profile(1).parameters
    got = res.profile(1).parameters
    assert got["AUCLST"] == pytest.approx(ref["AUCLST"], rel=1e-15)
    assert got["AUCALL"] == pytest.approx(ref["AUCLST"] + 2.4, rel=1e-12)


def _with_note(notes, default="ok"):
    """The clean study with a 'note' column: text per (subject, time), ``default`` elsewhere."""
    body = "".join(f"{s},{t},{c},{d},{notes.get((s, t), default)}\n" for s, t, c, d in GOOD_ROWS)
    return HEADER.replace("dose", "dose,note") + body


def _check_lines(res, last_line):
    # every input row is one account row, numbered by the line it starts on (RFC 4180 records)
    lines = res.samples["nca_line"].tolist()
    assert lines[-1] == last_line and len(lines) == len(GOOD_ROWS) and lines == sorted(lines)
    ref = nca(frame(), by="subject")
    np.testing.assert_array_equal(res.parameters["AUCLST"].to_numpy(), ref.parameters["AUCLST"].to_numpy())


FLAGGED = [
    Flagged("negative-time-predose", csv_text([(1, -0.5, "0", 100)] + GOOD_ROWS), {},
            unused={2: "sampled before the dose"}),
    Flagged("unsorted-times", csv_text(_rows_of(GOOD_ROWS, 1)[::-1] + _rows_of(GOOD_ROWS, 2)), {},
            flags={("1", "times_sorted")}),
    Flagged("single-sample-profile", frame(_rows_of(GOOD_ROWS, 1) + [(2, 1, "4", 100)]), {},
            flags={(2, "no_lambda_z"), (2, "time0_added")}, check=_check_single_sample),
    Flagged("all-blq-profile", csv_text(_rows_of(GOOD_ROWS, 1) + [(2, t, "BLQ", 100) for _, t, _, _ in
                                                                   _rows_of(GOOD_ROWS, 2)]), {},
            flags={("2", "no_measurable")},
            unused={ln: "no measurable concentration" for ln in range(9, 16)}),
    Flagged("subject-without-samples-after-dose",
            frame(_rows_of(GOOD_ROWS, 1) + [(3, -2, "0", 100), (3, -1, "0", 100)]), {},
            flags={(3, "no_measurable")}, unused={7: "sampled before the dose", 8: "sampled before the dose"}),
    Flagged("zeros-inside-a-log-segment", frame(replace_row(GOOD_ROWS, 3, (1, 4, "0", 100))),
            {"auc_method": "lin-up/log-down"}, check=_check_zero_inside_log),
    Flagged("extreme-magnitude-1e-12", frame([(s, t, float(c) * 1e-12, d) for s, t, c, d in GOOD_ROWS]),
            {"auc_method": "lin-up/log-down"}, check=_check_scaled(1e-12)),
    Flagged("extreme-magnitude-1e12", frame([(s, t, float(c) * 1e12, d) for s, t, c, d in GOOD_ROWS]),
            {"auc_method": "lin-up/log-down"}, check=_check_scaled(1e12)),
    Flagged("concentration-empty", csv_text(replace_row(GOOD_ROWS, 4, (1, 8, "", 100))), {},
            unused={6: "concentration missing"}),
    Flagged("row-without-time-and-conc", csv_text(GOOD_ROWS + [(2, "", "", 100)]), {},
            unused={16: "no time and no concentration recorded"}),
    Flagged("blq-between-measurable", csv_text(replace_row(GOOD_ROWS, 4, (1, 8, "BLQ", 100))), {},
            unused={6: "BLQ between measurable concentrations, rule 'missing'"}),
    Flagged("blq-after-tlast", frame(GOOD_ROWS[:7] + [(1, 36, "BLQ", 100)] + GOOD_ROWS[7:]), {},
            unused={7: "after the last measurable concentration"}, check=_check_blq_after_tlast),
    Flagged("predose-above-5pct-cmax", csv_text(replace_row(GOOD_ROWS, 7, (2, 0, "0.5", 100))), {},
            flags={("2", "predose_high")}),  # 0.5 > 5 % of CMAX 7 (EMA 2010)
    # --- issue 11: RFC 4180 quoted line break; U+0085/U+2028 inside cells; a UTF-8 BOM ---
    Flagged("quoted-newline-in-note", _with_note({(1, 4): '"haemolysed,\nsee lab note"'}), {},
            check=lambda res: _check_lines(res, 16)),
    Flagged("u0085-and-u2028-in-cells", _with_note({}, default="a\x85b\u2028c\u2029d"), {},
            check=lambda res: _check_lines(res, 15)),
    Flagged("utf8-bom", b"\xef\xbb\xbf" + csv_text().encode(), {}, check=lambda res: _check_lines(res, 15)),
]


@pytest.mark.parametrize("case", FLAGGED, ids=[c.id for c in FLAGGED])
def test_flagged_and_rows_accounted(case, tmp_path):
    data = _load(case, tmp_path)
    res = nca(data, by="subject", **case.kwargs)
    raised = set(zip(res.flags["subject"].astype(str).tolist(), res.flags["flag"].tolist()))
    assert {(str(s), f) for s, f in case.flags} <= raised, raised
    rows = res.samples
    # nothing lost: one account row per input row
    n_input = len(data) if isinstance(data, pd.DataFrame) else len(pd.read_csv(data, dtype=str,
                                                                                   skip_blank_lines=True))
    assert len(rows) == n_input
    where = "nca_line" if isinstance(data, str) else None
    unused = res.unused
    listed = dict(zip(unused[where] if where else unused.index, unused["nca_reason"]))
    assert set(listed) == set(case.unused), listed
    for ln, reason in case.unused.items():
        assert reason in listed[ln], (ln, listed[ln])
    assert (rows["nca_reason"].str.len() > 0).all()
    if case.check is not None:
        case.check(res)


def test_catalogue_size():
    # the issue asks for at least 40 cases
    assert len(REJECTED) + len(FLAGGED) + len(RECORD_CASES) >= 40


# ---------------------------------------------------------------------------- selection records
# A record of hand-made lambda-z windows (pkwidgets.record), kept beside an analysis.  The
# fingerprint is SHA-256 (FIPS 180-4) of the profile's data: when the data change, the
# recorded choice must not be applied silently.

def _fingerprint(df, subject):
    p = df[df["subject"] == subject].sort_values("time")
    return pkwidgets.profile_fingerprint(p["time"].to_numpy(float), p["conc"].to_numpy(float),
                                         np.zeros(len(p), bool))


def _record(tmp_path, df, entries):
    """Save a record with windows {subject: (start, end)} fingerprinted on ``df``; return its path."""
    path = tmp_path / "selections.json"
    rec = pkwidgets.SelectionRecord.load(path)
    for subject, (start, end) in entries.items():
        rec.set_window(subject, start, end, "terminal phase judged from the plot", author="analyst",
                       fingerprint=_fingerprint(df, subject) if subject in set(df["subject"]) else
                       _fingerprint(frame(), 1))
    rec.save()
    return path


def _write(tmp_path, text):
    path = tmp_path / "selections.json"
    path.write_text(text, encoding="utf-8")
    return path


def _write_bytes(tmp_path, raw):
    path = tmp_path / "selections.json"
    path.write_bytes(raw)
    return path


VALID_HEAD = '{"schema": "pkwidgets.selection-record", "schema_version": 1, "entries": '


@dataclass
class RecordCase:
    id: str
    make: object  # tmp_path -> record path
    data: object  # the study table analysed with the record
    outcome: str  # "raises", "stale", "warns"
    match: str = ""
    stale: set = field(default_factory=set)  # subjects flagged selection_stale
    applied: set = field(default_factory=set)  # subjects whose recorded window is applied
    kwargs: dict = field(default_factory=dict)  # further nca() options of the run


def _changed():
    df = frame()
    df.loc[(df["subject"] == 2) & (df["time"] == 8), "conc"] = 2.6  # one value corrected after the record
    return df


def _other_study():
    # another study with the same subject numbers: same design, different values
    df = frame()
    df["conc"] = df["conc"] * 1.07
    return df


def _bom(path):
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    return path


def _edit_text(path, old, new):
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return path


def _rehashed(path):
    # recompute each entry's hash as a careful hand-editor would (FIPS 180-4 via hashlib, canonical JSON)
    import hashlib
    import json

    doc = json.loads(path.read_text(encoding="utf-8"))
    for e in doc["entries"]:
        body = {k: v for k, v in e.items() if k != "hash"}
        e["hash"] = hashlib.sha256(json.dumps(body, sort_keys=True, separators=(",", ":"),
                                              ensure_ascii=False).encode()).hexdigest()
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def _excluding(tmp_path, df, subject, times):
    path = tmp_path / "selections.json"
    rec = pkwidgets.SelectionRecord.load(path)
    rec.set_exclusions(subject, times, "sample re-assayed", author="analyst", fingerprint=_fingerprint(df, subject))
    rec.save()
    return path


def _blq_frame(last):
    """Subject 1 with its 24 h sample BLQ, written ``last`` (e.g. '<0.5')."""
    df = frame()
    df["conc"] = df["conc"].astype(object)
    df.loc[(df["subject"] == 1) & (df["time"] == 24), "conc"] = last
    return df


def _record_fit(tmp_path, **fit):
    """A window for subject 1 fingerprinted on the '<0.5' data as the fit sees them (pkwidgets.record)."""
    df = _blq_frame("<0.5")
    p = df[df["subject"] == 1].sort_values("time")
    blq = (p["conc"] == "<0.5").to_numpy()
    conc = pd.to_numeric(p["conc"].where(~blq), errors="coerce").to_numpy(float)
    fp = pkwidgets.profile_fingerprint(p["time"].to_numpy(float), conc, blq, **fit)
    path = tmp_path / "selections.json"
    rec = pkwidgets.SelectionRecord.load(path)
    rec.set_window(1, 4, 24, "terminal phase judged from the plot", author="analyst", fingerprint=fp)
    rec.save()
    return path


RECORD_CASES = [
    RecordCase("record-corrupt-json", lambda p: _write(p, VALID_HEAD + '[{"profile": ["1"], "choi'), frame(),
               "raises", r"selection record .*selections\.json is not valid JSON at line 1, column \d+"),
    RecordCase("record-not-a-record", lambda p: _write(p, '{"subject": 1, "window": [4, 24]}'), frame(),
               "raises", r"selections\.json is not a pkwidgets selection record"),
    RecordCase("record-newer-schema", lambda p: _write(p, VALID_HEAD.replace('"schema_version": 1',
                                                                             '"schema_version": 99') + "[]}"),
               frame(), "raises", r"selections\.json has schema_version 99"),
    RecordCase("record-entry-malformed", lambda p: _write(p, VALID_HEAD + '[{"profile": 1}]}'), frame(),
               "raises", r"selections\.json, entry 0, field 'choice': is missing"),
    RecordCase("record-not-utf8", lambda p: _write_bytes(p, b"\xff\xfe{"), frame(), "raises",
               r"selections\.json is not valid JSON"),
    RecordCase("record-for-data-that-changed", lambda p: _record(p, frame(), {1: (4, 24), 2: (4, 24)}), _changed(),
               "stale", stale={2}, applied={1}),
    RecordCase("record-of-another-study-same-subjects", lambda p: _record(p, frame(), {1: (4, 24), 2: (8, 24)}),
               _other_study(), "stale", stale={1, 2}),
    RecordCase("record-of-another-study-other-subjects", lambda p: _record(p, frame(), {"A-101": (4, 24)}),
               frame(), "warns", r"selection record .*selections\.json has choices for 1 profile\(s\) not in "
               r"table \(A-101\); they were not applied\. None of its profiles is in the data"),
    # --- issue 11: the path, the bytes and the integrity of a record (RFC 8259; FIPS 180-4 hashes) ---
    RecordCase("record-path-mistyped", lambda p: p / "selectoins.json", frame(), "raises",
               r"selection record .*selectoins\.json does not exist, so no recorded choice could be applied"),
    RecordCase("record-path-is-a-folder", lambda p: p, frame(), "raises", r"selection record .* is a folder"),
    RecordCase("record-with-utf8-bom", lambda p: _bom(_record(p, frame(), {1: (4, 24)})), frame(), "stale",
               applied={1}),
    RecordCase("record-duplicate-key", lambda p: _edit_text(_record(p, frame(), {1: (4, 24)}), '"author": "analyst"',
                                                            '"author": "analyst", "author": "someone else"'),
               frame(), "raises", r"entry 0 \(profile 1\), field 'author': this key appears twice"),
    RecordCase("record-state-hand-edited", lambda p: _edit_text(_record(p, frame(), {1: (4, 24)}),
                                                                '"window": [4.0, 24.0]', '"window": [2.0, 24.0]'),
               frame(), "raises", r"entry 0 \(profile 1\), field 'hash': the entry was changed after it was written"),
    RecordCase("record-state-edited-and-rehashed", lambda p: _rehashed(_edit_text(
        _record(p, frame(), {1: (4, 24)}), '"window": [4.0, 24.0]', '"window": [2.0, 24.0]')), frame(), "raises",
        r"entry 0 \(profile 1\), field 'state': the state .* does not follow from the choice"),
    RecordCase("record-reason-edited", lambda p: _edit_text(_record(p, frame(), {1: (4, 24)}),
                                                            '"terminal phase judged', '"terminal phase guessed'),
               frame(), "raises", r"entry 0 \(profile 1\), field 'hash'"),
    RecordCase("record-nan-window", lambda p: _edit_text(_record(p, frame(), {1: (4, 24)}), '"start": 4.0',
                                                         '"start": NaN'),
               frame(), "raises", r"entry 0 \(profile 1\), field 'choice.start': NaN is not a finite time"),
    RecordCase("record-entry-field-misspelt", lambda p: _edit_text(_record(p, frame(), {1: (4, 24)}), '"reason"',
                                                                   '"reasn"'),
               frame(), "raises", r"entry 0 \(profile 1\), field 'reason': is missing"),
    RecordCase("record-exclusion-time-not-sampled", lambda p: _excluding(p, frame(), 1, [5.5]), frame(), "warns",
               r"profile 1 excludes 5\.5, a time with no sample\. Those recorded choices were not applied"),
    RecordCase("record-version-1", lambda p: _write(p, VALID_HEAD + '[{"profile": ["1"], "choice": {"action": '
                                                    '"window", "start": 4.0, "end": 24.0}, "state": {"window": [4.0, '
                                                    '24.0], "exclude": []}, "reason": "r", "author": "a", "timestamp": '
                                                    '"2025-01-01T00:00:00Z", "fingerprint": "' + "c" * 64 + '"}]}'),
               frame(), "stale", stale={1}),
    # --- issue 11: the fingerprint covers the LLOQ of BLQ samples, the BLQ rules and the area method ---
    RecordCase("record-lloq-corrected", lambda p: _record_fit(p, lloq=0.5), _blq_frame("<0.05"), "stale", stale={1},
               kwargs={"blq_rules": {"after": "lloq"}}),
]

# Cases that pass once table.py hands lloq, blq_rules and auc_method to apply_selections (issue 11 wiring).
RECORD_CASES_WIRING = [
    RecordCase("record-area-method-changed", lambda p: _record_fit(p, auc_method="linear"), _blq_frame("<0.5"),
               "stale", stale={1}, kwargs={"auc_method": "lin-up/log-down"}),
    RecordCase("record-same-lloq-rules-method-applied", lambda p: _record_fit(p, lloq=0.5, blq_rules={"after": "lloq"},
                                                                              auc_method="lin-up/log-down"),
               _blq_frame("<0.5"), "stale", applied={1},
               kwargs={"blq_rules": {"after": "lloq"}, "auc_method": "lin-up/log-down"}),
]


@pytest.mark.parametrize("case", RECORD_CASES + RECORD_CASES_WIRING,
                         ids=[c.id for c in RECORD_CASES + RECORD_CASES_WIRING])
def test_selection_record_cases(case, tmp_path):
    path = case.make(tmp_path)
    before = path.read_bytes() if path.is_file() else None
    opts = {"by": "subject", **case.kwargs}
    auto = nca(case.data, **opts)
    if case.outcome == "raises":
        with pytest.raises(InputDataError, match=case.match) as info:
            nca(case.data, selections=path, **opts)
        last = traceback.extract_tb(info.value.__traceback__)[-1]
        assert os.path.dirname(os.path.abspath(last.filename)) == PKG_DIR, last
    elif case.outcome == "warns":
        with pytest.warns(UserWarning, match=case.match):
            res = nca(case.data, selections=path, **opts)
        pd.testing.assert_frame_equal(res.parameters, auto.parameters)  # nothing applied
    else:
        res = nca(case.data, selections=path, **opts)
        flagged = set(res.flags.loc[res.flags["flag"] == "selection_stale", "subject"])
        assert flagged == case.stale
        manual = set(res.flags.loc[res.flags["flag"] == "manual_terminal", "subject"])
        assert manual == case.applied
        for subject in case.stale:  # stale choices fall back to the automatic search
            pd.testing.assert_series_equal(res.profile(subject).parameters, auto.profile(subject).parameters)
        for subject in case.applied:  # a matching choice is applied: the fit starts in the window
            lamzll = res.profile(subject).parameters["LAMZLL"]
            assert 4 <= lamzll
    assert (path.read_bytes() if path.is_file() else None) == before  # reading a record never changes it
