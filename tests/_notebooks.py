"""Shared checks of the analysis notebooks (no check values here): the parameters cell and nbval.

nbval re-executes a notebook and compares every stored output with the new one (its documented behaviour);
the options are those measured in ../shared/STACK.md.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import nbformat

ROOT = Path(__file__).resolve().parents[1]


def notebook(name):
    return nbformat.read(ROOT / "analyses" / f"{name}.ipynb", as_version=4)


def parameter_names(name) -> set:
    """Names assigned in the notebook's one ``parameters`` cell (asserting there is exactly one)."""
    nb = notebook(name)
    assert nb.metadata["kernelspec"]["name"] == "python3"  # STACK.md: other kernelspecs fail under papermill
    tagged = [c for c in nb.cells if "parameters" in c.metadata.get("tags", [])]
    assert len(tagged) == 1
    return {t.id for node in ast.parse(tagged[0].source).body if isinstance(node, ast.Assign) for t in node.targets}


def run_nbval(names):
    """Run nbval on the named notebooks; return the completed process (returncode 0 when all outputs match)."""
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "--nbval", "--nbval-current-env",
           "--nbval-sanitize-with", str(ROOT / "nbval_sanitize.cfg"), "--nbval-cell-timeout", "120",
           "--nbval-kernel-startup-timeout", "120", *[str(ROOT / "analyses" / f"{n}.ipynb") for n in names]]
    return subprocess.run(cmd, cwd=ROOT, capture_output=True, text=True, timeout=900)
