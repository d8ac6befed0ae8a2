"""Running an analysis notebook unattended with papermill, and refreshing the stored demo outputs.

:func:`run_analysis` checks the notebook's parameters against the ones it
declares, checks the data file and the output folder before starting a
kernel, executes the notebook into a staging folder
(:mod:`pkwidgets.report.staging`), writes the HTML record there, and switches
the whole run into the output folder.  Every expected failure is a
:class:`~pkwidgets.report.errors.RunError` with a one-line message.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import json
import os

from ..io import write_atomic
from .arguments import check_parameters, default_value, notebook_parameters
from .errors import RunError
from .html import write_record
from .provenance import RUN_INFO
from .staging import MANIFEST, check_output_folder, staged_folder

__all__ = ["run_analysis", "refresh_stored_outputs", "SELECTION_FILE"]

#: Default selection record in the output folder (read by the run, kept across runs).
SELECTION_FILE = "terminal_selection.json"
_PATH_PARAMETERS = ("data_path", "selection_record", "pc_path", "ex_path", "plasma_path")
#: The kernel logs critical messages only: its start-up notices (local TCP transport) and the "KeyboardInterrupt
#: caught in kernel" logged when a failed run's kernel is interrupted at shutdown would bury the run's one-line
#: outcome (a failed cell is reported from the executed notebook, a dead kernel by papermill).
_KERNEL_ARGUMENTS = ["--IPKernelApp.log_level=CRITICAL"]


def _data_files(notebook, declared, params) -> list:
    """(parameter, path) of the data files the run will read: ``data_path``, or ``pc_path``/``ex_path`` for SDTM.

    A parameter not given takes the notebook's default, from its folder.
    """
    def value(name):
        if params.get(name) is not None:
            return params[name]
        default = default_value(declared, name)
        return os.path.join(os.path.dirname(notebook), default) if isinstance(default, str) else None

    data_format = params.get("data_format", default_value(declared, "data_format"))
    names = ("pc_path", "ex_path") if data_format == "sdtm" else ("data_path",)
    return [(name, value(name)) for name in names if name in declared and value(name) is not None]


def _check_data_file(name, path, final) -> None:
    path = os.path.abspath(path)
    what = "the study table" if name == "data_path" else f"the SDTM {name[:2].upper()} domain"
    if not os.path.exists(path):
        raise RunError(f"data file {path} not found (parameter {name}): give {what} with -p {name} FILE.")
    if not os.path.isfile(path):
        raise RunError(f"data file {path} is a folder, not a file (parameter {name}): give {what}.")
    if os.path.commonpath([path, final]) == final:
        raise RunError(f"data file {path} is inside the output folder {final}, which a run replaces as a whole: "
                       f"move the data file out or choose another output folder.")


def _resolve(notebook, declared, parameters, final) -> dict:
    """Checked parameters: absolute paths from the current folder, the selection record kept in ``final``."""
    params = {k: v for k, v in dict(parameters or {}).items() if k != "output_dir"}
    check_parameters(notebook, params, declared)
    for name in _PATH_PARAMETERS:  # the kernel runs in the notebook's folder
        if isinstance(params.get(name), (str, os.PathLike)):
            params[name] = os.path.abspath(os.fspath(params[name]))
    kept = os.path.join(final, SELECTION_FILE)  # the output folder's own record, once one has been saved there
    if "selection_record" in declared and params.get("selection_record") is None and os.path.exists(kept):
        params["selection_record"] = kept
    for name, path in _data_files(notebook, declared, params):
        _check_data_file(name, path, final)
    return params


def _execute(notebook, out_nb, params, *, kernel_name, timeout) -> None:
    """Run the notebook with papermill; a failing cell or kernel becomes a one-line RunError."""
    import papermill as pm
    from jupyter_client.kernelspec import NoSuchKernel
    from nbclient.exceptions import CellTimeoutError, DeadKernelError

    try:
        pm.execute_notebook(notebook, out_nb, parameters=params, kernel_name=kernel_name,
                            execution_timeout=timeout, progress_bar=False, cwd=os.path.dirname(notebook),
                            extra_arguments=_KERNEL_ARGUMENTS)
    except pm.PapermillExecutionError as exc:
        message = " ".join(str(exc.evalue).split())
        raise RunError(f"{os.path.basename(notebook)} failed in cell {exc.exec_count}: {exc.ename}: "
                       f"{message}") from exc
    except (NoSuchKernel, CellTimeoutError, DeadKernelError) as exc:
        raise RunError(f"{os.path.basename(notebook)} did not run: {type(exc).__name__}: "
                       f"{' '.join(str(exc).split())}") from exc


def _finish_run_info(stage, final) -> None:
    """Record in ``run_info.json`` the output folder the run lands in and how it got there."""
    path = os.path.join(stage, RUN_INFO)
    if not os.path.exists(path):
        raise RunError(f"the notebook wrote no {RUN_INFO}: its export cell did not run (the record needs it).")
    with open(path, encoding="utf-8") as fh:
        info = json.load(fh)
    info.setdefault("parameters", {})["output_dir"] = final
    info["output"] = {"folder": final, "staging_folder": stage, "manifest": MANIFEST}
    write_atomic(path, json.dumps(info, indent=1))


def run_analysis(notebook, output_dir, parameters=None, *, kernel_name="python3", timeout=600, pdf=False) -> dict:
    """Execute an analysis notebook with papermill and write its HTML record, as one complete run.

    Parameters
    ----------
    notebook : str
        Path of the parameterised notebook (e.g. ``analyses/single_dose.ipynb``).
    output_dir : str
        Folder for the executed notebook, the record and the notebook's CSV
        exports: new, empty, or a previous run, which the new run replaces
        as a whole at its end (see :mod:`pkwidgets.report.staging`).
    parameters : dict, optional
        Values for the notebook's ``parameters`` cell; names it does not
        declare are refused.  ``output_dir`` is set from the argument.
        Relative ``data_path`` and ``selection_record`` are taken from the
        current folder (the kernel runs in the notebook's folder, where the
        defaults point); no ``selection_record`` means
        ``terminal_selection.json`` in ``output_dir``, kept across runs.
    pdf : bool
        Also print the record to PDF (headless Chromium); its path is under ``pdf``.

    Returns
    -------
    dict
        ``notebook``, ``html`` and ``manifest`` paths, plus ``csv``: the list
        of CSV files in ``output_dir``.

    Raises
    ------
    RunError
        One-line message: notebook or data file missing, unknown parameter,
        output folder unusable, or a notebook cell failed (then ``output_dir``
        is unchanged and ``output_dir + ".failed"`` holds the failed run).
    """
    notebook = os.path.abspath(os.fspath(notebook))
    if not os.path.isfile(notebook):  # before the output folder's checks: the first thing to name
        notebook_parameters(notebook)
    final = check_output_folder(output_dir)
    declared = notebook_parameters(notebook)
    params = _resolve(notebook, declared, parameters, final)
    stem = os.path.splitext(os.path.basename(notebook))[0]
    with staged_folder(final, carry=[p for p in [params.get("selection_record")] if p]) as stage:
        params["output_dir"] = stage
        _execute(notebook, os.path.join(stage, f"{stem}.ipynb"), params, kernel_name=kernel_name,
                 timeout=timeout)
        _finish_run_info(stage, final)
        write_record(os.path.join(stage, f"{stem}.ipynb"), pdf=pdf)
    csvs = sorted(os.path.join(final, f) for f in os.listdir(final) if f.endswith(".csv"))
    return {"notebook": os.path.join(final, f"{stem}.ipynb"), "html": os.path.join(final, f"{stem}.html"),
            "manifest": os.path.join(final, MANIFEST), "csv": csvs,
            **({"pdf": os.path.join(final, f"{stem}.pdf")} if pdf else {})}


def refresh_stored_outputs(notebook, *, timeout=600) -> str:
    """Re-execute an analysis notebook in place on its default (demo) parameters, for nbval.

    The stored outputs are what ``pytest --nbval`` compares; refresh them
    after an intended change of results.  Images are dropped from the stored
    copy (nbval does not compare them, and they would bloat the repository);
    their ``text/plain`` stand-ins are kept.

    Returns
    -------
    str
        The notebook path.
    """
    import nbformat
    from nbclient import NotebookClient

    notebook = os.fspath(notebook)
    nb = nbformat.read(notebook, as_version=4)
    NotebookClient(nb, timeout=timeout, kernel_name="python3",
                   resources={"metadata": {"path": os.path.dirname(os.path.abspath(notebook))}}).execute()
    for cell in nb.cells:
        cell.metadata.pop("execution", None)  # run timings: noise in the repository's history
        for out in cell.get("outputs", []):
            for key in ("image/png", "image/svg+xml"):
                out.get("data", {}).pop(key, None)
    nb.metadata.pop("widgets", None)
    nbformat.write(nb, notebook)
    return notebook
