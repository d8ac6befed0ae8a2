"""The package keeps the shape its contributor guide states (DEVELOPERS.md, a project rule, no outside source):
modules of at most 400 lines, functions of at most 60 lines of code (the numpydoc docstring, documentation
rather than logic, is not counted), no import cycle between the package's modules, and a core that imports
no UI library.

Import edges are read with the standard library's ``ast`` (module-level and function-level ``from .x import``
statements alike), so a cycle hidden inside a function counts too.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "pkwidgets"


def _modules():
    for path in sorted(PKG.rglob("*.py")):
        yield path, ".".join(path.relative_to(PKG.parent).with_suffix("").parts)


def test_modules_and_functions_are_small():
    long_modules, long_functions = [], []
    for path, name in _modules():
        text = path.read_text(encoding="utf-8")
        if len(text.splitlines()) > 400:
            long_modules.append(name)
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = node.end_lineno - node.lineno + 1
                doc = node.body[0] if node.body and isinstance(node.body[0], ast.Expr) and isinstance(
                    getattr(node.body[0], "value", None), ast.Constant) and isinstance(node.body[0].value.value,
                                                                                       str) else None
                if doc is not None:
                    length -= doc.end_lineno - doc.lineno + 1
                if length > 60:
                    long_functions.append(f"{name}.{node.name} ({length} lines)")
    assert long_modules == []
    assert long_functions == []


def _is_main_block(node) -> bool:
    return (isinstance(node, ast.If) and isinstance(node.test, ast.Compare)
            and isinstance(node.test.left, ast.Name) and node.test.left.id == "__name__")


def _edges():
    edges = {}
    for path, name in _modules():
        package = name.rsplit(".", 1)[0]  # the package a relative import starts from (for __init__: itself)
        targets = set()
        tree = ast.parse(path.read_text(encoding="utf-8"))
        tree.body = [n for n in tree.body if not _is_main_block(n)]  # `python -m` entry points are not imports
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
                targets.add(mod)
        edges[name.removesuffix(".__init__")] = targets
    return edges


def test_no_import_cycle_between_modules():
    edges = _edges()
    known = set(edges)
    graph = {m: {t for t in ts if t in known and t != m and not m.startswith(t + ".")} for m, ts in edges.items()}
    graph.pop("pkwidgets", None)  # the public API re-exports everything by design
    for targets in graph.values():
        targets.discard("pkwidgets")
    state, cycle = {}, []

    def visit(node, chain):
        if state.get(node) == "done" or cycle:
            return
        if state.get(node) == "open":
            cycle.extend(chain[chain.index(node):] + [node])
            return
        state[node] = "open"
        for nxt in sorted(graph.get(node, ())):
            visit(nxt, chain + [node])
        state[node] = "done"

    for module in sorted(graph):
        visit(module, [])
    assert cycle == []


def test_importing_the_package_loads_no_ui_or_heavy_optional_library():
    # (dask is left out of the list: pint imports it when it is installed)
    code = ("import sys, pkwidgets; print(sorted(m for m in ('ipywidgets', 'bqplot', 'matplotlib', 'statsmodels', "
            "'distributed', 'openpyxl', 'pyreadstat', 'tqdm') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
