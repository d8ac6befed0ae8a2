"""Notebook parameters of an unattended run: read from the command line, checked against the notebook.

Values are YAML (``12`` a number, ``[a, b]`` a list, ``{subject: ID}`` a
mapping), with one change to PyYAML's YAML 1.1 rules: a plain number with an
exponent and no dot, such as ``1e3``, is the number 1000.0 (as in YAML 1.2),
not the text ``"1e3"`` that would be taken for a column name.  Quote a value
to keep it as text (``"'1e3'"``).  The notebook's own parameters come from
:func:`papermill.inspect_notebook`; a name the notebook does not declare is
an error listing the names it does, never silently ignored.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import ast
import difflib
import functools
import os
import re

from .errors import ParameterError, RunError
from .notebook import PARAMETER_HELP

__all__ = ["read_value", "parse_parameters", "notebook_parameters", "check_parameters", "describe_parameters",
           "default_value"]

#: A YAML 1.2 float with an exponent that YAML 1.1 (PyYAML) reads as text: 1e3, -2E-4, 5.e2, .5e1.
_EXP_FLOAT = re.compile(r"^[-+]?(?:[0-9][0-9_]*(?:\.[0-9_]*)?|\.[0-9_]+)[eE][-+]?[0-9]+$")


@functools.lru_cache(maxsize=1)
def _loader():
    """PyYAML's safe loader, reading plain (unquoted) ``1e3`` as a float."""
    import yaml

    class Loader(yaml.SafeLoader):
        """Safe loader with the YAML 1.2 exponent floats."""

    Loader.add_implicit_resolver("tag:yaml.org,2002:float", _EXP_FLOAT, list("-+0123456789."))
    return Loader


def _one_line(text) -> str:
    return " ".join(str(text).split())


def read_value(text, *, where="value"):
    """One YAML value, with ``1e3`` read as a number.

    Examples
    --------
    >>> read_value("1e3"), read_value("12"), read_value("'1e3'"), read_value("[dose]")
    (1000.0, 12, '1e3', ['dose'])
    >>> read_value("{subject: ID", where="-p columns")
    Traceback (most recent call last):
    ...
    pkwidgets.report.errors.ParameterError: -p columns: '{subject: ID' is not valid YAML (expected ',' or '}', but got '<stream end>' at line 1, column 13). Quote text and close brackets, e.g. "{subject: ID}".
    """
    import yaml

    try:
        return yaml.load(text, Loader=_loader())  # noqa: S506 - a SafeLoader subclass
    except yaml.YAMLError as exc:
        raise ParameterError(f"{where}: {text!r} is not valid YAML ({_yaml_problem(exc)}). Quote text and "
                             f"close brackets, e.g. \"{{subject: ID}}\".") from None


def _yaml_problem(exc) -> str:
    """What PyYAML found wrong and where, on one line."""
    problem, mark = getattr(exc, "problem", None), getattr(exc, "problem_mark", None)
    if not problem:
        return _one_line(exc)
    return f"{problem} at line {mark.line + 1}, column {mark.column + 1}" if mark else problem


def _read_yaml_text(text) -> dict:
    """One ``-y`` argument: a YAML mapping, or the path of a YAML file holding one."""
    where = "-y"
    if os.path.isfile(text):
        where = f"-y {text}"
        with open(text, encoding="utf-8") as fh:
            text = fh.read()
    loaded = read_value(text, where=where)
    if not isinstance(loaded, dict):
        raise ParameterError(f"{where} must give a YAML mapping of parameter names to values; "
                             f"got {type(loaded).__name__}.")
    return loaded


def parse_parameters(pairs=(), yaml_texts=()) -> dict:
    """Notebook parameters from ``-p`` pairs and ``-y`` YAML texts or files (``-p`` wins).

    Examples
    --------
    >>> parse_parameters([("tau", "12"), ("dose", "1e3")], ["group_by: [dose]"])
    {'group_by': ['dose'], 'tau': 12, 'dose': 1000.0}
    >>> parse_parameters(yaml_texts=["- not a mapping"])
    Traceback (most recent call last):
    ...
    pkwidgets.report.errors.ParameterError: -y must give a YAML mapping of parameter names to values; got list.
    """
    params = {}
    for text in yaml_texts:
        params.update(_read_yaml_text(text))
    for name, value in pairs:
        params[name] = read_value(value, where=f"-p {name}")
    return params


def notebook_parameters(notebook) -> dict:
    """The parameters a notebook declares (its cell tagged ``parameters``), by :func:`papermill.inspect_notebook`.

    Returns
    -------
    dict
        Name -> ``{"default": source text, "help": comment}``, in the cell's order.

    Raises
    ------
    RunError
        If the notebook does not exist or is not a Jupyter notebook.
    """
    notebook = os.fspath(notebook)
    if not os.path.isfile(notebook):
        what = "is a folder" if os.path.isdir(notebook) else "not found"
        raise RunError(f"notebook {notebook} {what}: give the path of an analysis notebook, e.g. "
                       f"analyses/single_dose.ipynb.")
    import papermill

    try:
        found = papermill.inspect_notebook(notebook)
    except Exception as exc:  # nbformat/JSON errors of a file that is not a notebook
        raise RunError(f"notebook {notebook} could not be read as a Jupyter notebook: {_one_line(exc)}") from None
    return {name: {"default": p.get("default", ""), "help": p.get("help") or ""} for name, p in found.items()}


def check_parameters(notebook, params, declared) -> None:
    """Refuse parameters the notebook does not declare, naming the valid ones (and the closest match).

    Raises
    ------
    ParameterError
        ``"analyses/x.ipynb has no parameter 'time_units' (did you mean 'time_unit'?); its parameters are: ..."``
    """
    unknown = [name for name in params if name not in declared]
    if not unknown:
        return
    if not declared:
        raise ParameterError(f"{notebook} declares no parameters (no cell tagged 'parameters'); "
                             f"got {', '.join(map(repr, unknown))}.")
    hints = [f"{n!r}" + (f" (did you mean {m[0]!r}?)" if (m := difflib.get_close_matches(n, declared, 1)) else "")
             for n in unknown]
    raise ParameterError(f"{notebook} has no parameter {', '.join(hints)}; its parameters are: "
                         f"{', '.join(declared)}.")


def default_value(declared, name):
    """The default of a declared parameter as a Python value (None when it is not a literal)."""
    try:
        return ast.literal_eval(declared[name]["default"])
    except (KeyError, ValueError, SyntaxError):
        return None


def describe_parameters(notebook, declared, *, markdown=False) -> str:
    """A notebook's parameters: name, default, and the notebook's comment or
    :data:`~pkwidgets.report.notebook.PARAMETER_HELP`; as text, or as a Markdown table (for the README)."""
    rows = [(name, p["default"], p["help"] or PARAMETER_HELP.get(name, "")) for name, p in declared.items()]
    if markdown:
        lines = ["| parameter | default | meaning |", "|---|---|---|"]
        return "\n".join(lines + [f"| `{n}` | `{d}` | {t.replace('|', '/')} |" for n, d, t in rows])
    width = max([len(n) for n in declared] + [4])
    lines = [f"Parameters of {notebook} (set with -p NAME VALUE, or -y 'NAME: VALUE'; values are YAML):"]
    for name, default, text in rows:
        lines.append(f"  {name:<{width}}  default {default}")
        if text:
            lines.append(f"  {'':<{width}}  {text}")
    return "\n".join(lines)
