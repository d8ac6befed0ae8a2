"""The offline HTML study record of an executed analysis notebook.

The page is nbconvert's ``lab`` HTML, from the Jinja2 template
``templates/record.html.j2`` (package data): no CDN scripts (require.js,
MathJax, Mermaid and the widget manager are left out; a static page runs no
Python), figures embedded as PNG, code cells hidden (the executed ``.ipynb``
beside the record keeps them), and first a header from
``templates/pkw_header.html.j2``: the run identity, the data and selection
files with their SHA-256, the software that ran (versions, platform, git
commit), the caution, the parameters and the settings.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import json
import os

from ..io import write_atomic
from .provenance import CAUTION, RUN_INFO

__all__ = ["TEMPLATES", "write_record", "header_html", "find_run_info"]

#: Folder of the record's Jinja2 templates (shipped as package data).
TEMPLATES = os.path.join(os.path.dirname(os.path.abspath(__file__)), "templates")
_HEADER = "pkw_header.html.j2"
_RECORD = "record.html.j2"


def _info_for_page(info) -> dict:
    """The run header with the caution filled in when an older ``run_info.json`` lacks it."""
    return {"caution": CAUTION, **dict(info or {})}


def header_html(info) -> str:
    """The record header alone, as HTML (the block the record opens with).

    Parameters
    ----------
    info : dict
        Run header, as written by :func:`~pkwidgets.report.run_info`.

    Returns
    -------
    str
        A ``<section id="pkw-record-header">`` element.

    Examples
    --------
    >>> text = header_html({"notebook": "single_dose", "settings": {"route": "extravascular"}})
    >>> "route" in text and "extravascular" in text and "Results support qualified review" in text
    True
    """
    import jinja2

    env = jinja2.Environment(loader=jinja2.FileSystemLoader(TEMPLATES), autoescape=False)
    return env.get_template(_HEADER).render(resources={"pkw_info": _info_for_page(info)})


def find_run_info(notebook_path, nb=None) -> dict:
    """The run header of an executed notebook: ``run_info.json`` beside it, or in the ``output_dir`` it ran with.

    Raises
    ------
    FileNotFoundError
        If neither exists (the notebook did not run to its end).
    """
    here = os.path.dirname(os.path.abspath(notebook_path))
    candidates = [os.path.join(here, RUN_INFO)]
    out = (nb.metadata.get("papermill", {}).get("parameters", {}).get("output_dir") if nb is not None else None)
    if out:
        candidates += [os.path.join(out, RUN_INFO), os.path.join(here, out, RUN_INFO)]
    found = [p for p in candidates if os.path.exists(p)]
    if not found:
        raise FileNotFoundError(
            f"{RUN_INFO} not found (looked in {', '.join(dict.fromkeys(candidates))}): the record header comes "
            f"from it. Run {notebook_path} to its end (its last cell writes it into output_dir) or pass info=.")
    with open(found[0], encoding="utf-8") as fh:
        return json.load(fh)


#: MIME type of a live widget's output (its plain-text fallback is the widget's state when it was first shown).
_WIDGET_VIEW = "application/vnd.jupyter.widget-view+json"


def _drop_widget_views(nb) -> None:
    """Leave live widgets out of the record: a static page runs none, and the plain text saved beside a
    widget is its state when first shown (a progress bar at 0 %), not its last state.  The widget state
    in the metadata goes too (it would need CDN scripts).  The executed notebook keeps both."""
    nb.metadata.pop("widgets", None)
    for cell in nb.cells:
        if cell.get("cell_type") == "code":
            cell.outputs = [o for o in cell.get("outputs", []) if _WIDGET_VIEW not in o.get("data", {})]


def write_record(notebook_path, html_path=None, *, info=None, hide_code=True, pdf=False) -> str:
    """Write the offline HTML record of an executed analysis notebook.

    Parameters
    ----------
    notebook_path : str
        Executed notebook (``.ipynb``).
    html_path : str, optional
        Output file; default the notebook path with ``.html``.
    info : dict, optional
        Header (see :func:`~pkwidgets.report.run_info`); default read from
        ``run_info.json`` next to the notebook.
    hide_code : bool
        Leave code cells and prompts out of the record (default); the
        executed notebook keeps them.
    pdf : bool
        Also print the record to PDF beside it (headless Chromium,
        :func:`~pkwidgets.report.pdf.write_pdf`).

    Returns
    -------
    str
        Path of the HTML file.

    Raises
    ------
    FileNotFoundError
        If ``info`` is not given and ``run_info.json`` is neither beside the
        notebook nor in the ``output_dir`` papermill recorded (run the
        notebook to its end first).
    """
    import nbformat
    from nbconvert import HTMLExporter

    notebook_path = os.fspath(notebook_path)
    html_path = html_path or os.path.splitext(notebook_path)[0] + ".html"
    nb = nbformat.read(notebook_path, as_version=4)
    info = _info_for_page(find_run_info(notebook_path, nb) if info is None else info)
    _drop_widget_views(nb)
    exporter = HTMLExporter(template_name="lab", extra_template_paths=[TEMPLATES], template_file=_RECORD,
                            exclude_input=hide_code, exclude_input_prompt=hide_code,
                            exclude_output_prompt=hide_code, embed_images=True)
    resources = {"pkw_info": info, "metadata": {"name": f"Study record — {info.get('notebook', '')}"}}
    body, _ = exporter.from_notebook_node(nb, resources=resources)
    write_atomic(html_path, body)
    if pdf:
        from .pdf import write_pdf

        write_pdf(html_path)
    return html_path
