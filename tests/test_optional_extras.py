"""The widgets are an optional extra: the core imports neither ipywidgets nor bqplot.

Sources: Python's import system (``sys.modules`` lists every module imported in a process; a
``None`` entry makes ``import`` raise ImportError, as documented for ``sys.modules``), and the
packaging metadata of ``pyproject.toml`` read with ``tomllib`` (PEP 621 optional dependencies, the
``[project.scripts]`` entry point table).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]).rstrip(os.pathsep)}
UI = ("ipywidgets", "bqplot")


def _python(code):
    return subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=ENV, capture_output=True, text=True,
                          timeout=120)


def test_core_report_and_cli_import_no_widget_library():
    r = _python("import sys, pkwidgets, pkwidgets.report, pkwidgets.cli, pkwidgets.run, pkwidgets.demo\n"
                "print(sorted(m for m in sys.modules if m.split('.')[0] in ('ipywidgets', 'bqplot')))")
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "[]"


def test_widgets_without_the_extra_say_how_to_install_it():
    r = _python("import sys\nsys.modules['ipywidgets'] = None\nsys.modules['bqplot'] = None\n"
                "try:\n    import pkwidgets.widgets\nexcept ImportError as exc:\n    print(exc)\n"
                "import pkwidgets\nprint('core ok', pkwidgets.nca.__name__)")
    assert r.returncode == 0, r.stderr
    assert 'pip install "pkwidgets[widgets]"' in r.stdout and "core ok nca" in r.stdout


def test_packaging_declares_the_extras_and_the_command():
    meta = tomllib.loads((ROOT / "pyproject.toml").read_text())
    core = " ".join(meta["project"]["dependencies"])
    extras = meta["project"]["optional-dependencies"]
    assert not any(name in core for name in UI)
    assert all(any(d.startswith(name) for d in extras["widgets"]) for name in UI)
    for extra in ("notebooks", "test"):
        assert any(d.startswith("pkwidgets[") and "widgets" in d for d in extras[extra]), extra
    assert meta["project"]["scripts"]["pkwidgets"] == "pkwidgets.cli:main"
    assert "templates/*.j2" in meta["tool"]["setuptools"]["package-data"]["pkwidgets.report"]


@pytest.mark.parametrize("name", UI)
def test_the_widgets_subpackage_still_imports_with_the_extra(name):
    pytest.importorskip(name)
    import pkwidgets.widgets as w

    assert {"StudyNavigator", "TerminalPhasePicker", "MethodToggles"} <= set(w.__all__)
