"""Study records: static figures, run headers, and the offline HTML record.

Figures are drawn with matplotlib and embedded in the notebook as PNG, so a
record shows them with no network and no JavaScript.  :func:`write_record`
turns an executed analysis notebook into a self-contained HTML file with a
header (data file SHA-256, package version, settings, date, caution) and no
CDN scripts: require.js, MathJax, Mermaid and the widget manager are left
out (a static page runs no Python; interactive views are for Jupyter).
:func:`run_analysis` executes a notebook with papermill and writes the record.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import html
import json
import os

import numpy as np
import pandas as pd

from .io import write_atomic

__all__ = [
    "CAUTION",
    "sha256_file",
    "run_info",
    "plot_all_profiles",
    "plot_profile",
    "plot_mean_profiles",
    "write_record",
    "run_analysis",
    "refresh_stored_outputs",
]

#: Fixed margins (constrained layout costs more than the drawing itself on a long record).
_GRID = dict(left=0.08, right=0.98, bottom=0.14, top=0.9, wspace=0.25)

CAUTION = "Results support qualified review; follow local regulations and SOPs."

#: File the analysis notebooks write into their output folder; read by :func:`write_record`.
RUN_INFO = "run_info.json"


def sha256_file(path) -> str:
    """SHA-256 hex digest of a file's bytes (read in 1 MiB blocks)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _plain(value):
    """JSON-friendly copy of settings (tuples -> lists, numpy scalars -> Python)."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def run_info(data_path, table, *, notebook, parameters, now=None) -> dict:
    """The record header of one run.

    Parameters
    ----------
    data_path : str
        Analysed data file (its SHA-256 is taken).
    table : NCATable
        Result; its ``settings`` are recorded.
    notebook : str
        Notebook name (e.g. ``"single_dose"``).
    parameters : dict
        The notebook's parameter values.
    now : datetime, optional
        Time stamp; default the current UTC time.

    Returns
    -------
    dict
        ``notebook``, ``data_file``, ``data_sha256``, ``pkwidgets_version``,
        ``date`` (ISO 8601, UTC), ``parameters``, ``settings``, ``caution``.
    """
    from . import __version__

    now = now or _dt.datetime.now(_dt.timezone.utc)
    return _plain({
        "notebook": notebook,
        "data_file": os.path.abspath(os.fspath(data_path)),
        "data_sha256": sha256_file(data_path),
        "pkwidgets_version": __version__,
        "date": now.replace(microsecond=0).isoformat(),
        "parameters": parameters,
        "settings": {k: v for k, v in table.settings.items() if k != "source"},
        "caution": CAUTION,
    })


# ---------------------------------------------------------------------------- figures

def _numeric(s):
    return pd.to_numeric(s, errors="coerce")


def plot_all_profiles(rows, *, time, conc, by, conc_unit="", time_unit="", color_by=None):
    """All profiles on one figure, linear and semi-log side by side.

    Parameters
    ----------
    rows : DataFrame
        Input rows (e.g. ``NCATable.rows``); non-numeric concentrations
        (BLQ text, empty) are not drawn.
    time, conc : str
        Column names.
    by : list of str
        Profile key columns (one line per profile).
    color_by : str, optional
        Column whose values share a colour (e.g. the dose group).

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw=_GRID)
    d = pd.DataFrame({"t": _numeric(rows[time]), "c": _numeric(rows[conc])})
    keys = rows[by].astype(str).agg(" ".join, axis=1)
    groups = rows[color_by].astype(str) if color_by else pd.Series([""] * len(rows), index=rows.index)
    palette = {g: f"C{i % 10}" for i, g in enumerate(sorted(groups.unique()))}
    for ax, log in zip(axes, (False, True)):
        for k in keys.unique():
            m = (keys == k).to_numpy()
            sub = d[m].dropna().sort_values("t")
            if log:
                sub = sub[sub["c"] > 0]
            ax.plot(sub["t"], sub["c"], "-o", ms=2.5, lw=0.8, alpha=0.75, color=palette[groups[m].iloc[0]])
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Concentration ({conc_unit})" if conc_unit else "Concentration")
        ax.set_yscale("log" if log else "linear")
        ax.set_title("semi-log" if log else "linear")
    if color_by:
        handles = [plt.Line2D([], [], color=c, marker="o", lw=1) for c in palette.values()]
        axes[0].legend(handles, [f"{color_by} {g}" for g in palette], fontsize=8)
    return fig


def plot_profile(table, index, *, time, conc, conc_unit="", time_unit=""):
    """One profile, linear and semi-log, with the lambda-z fit marked.

    Used samples are filled circles, unused ones open; samples in the
    lambda-z fit are ringed and the fitted line
    :math:`\\hat C(t) = C_{last,pred} e^{-\\lambda_z (t - t_{last})}` (CLSTP,
    LAMZ, TLST from the table) is drawn over the fit interval
    [LAMZLL, LAMZUL].

    Parameters
    ----------
    table : NCATable
    index : int
        Row position of the profile in ``table``.
    time, conc : str
        Column names in ``table.rows``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    r = table.rows
    sub = r[r["profile"] == index]
    t = _numeric(sub[time]).to_numpy()
    c = _numeric(sub[conc]).to_numpy()
    used = sub["used"].to_numpy()
    lz = sub["lambda_z"].to_numpy()
    row = table.iloc[index]
    key = ", ".join(f"{k} {row[k]}" for k in table.record.by)
    fig, axes = plt.subplots(1, 2, figsize=(10, 3.4), gridspec_kw=_GRID)
    order = np.argsort(t)
    for ax, log in zip(axes, (False, True)):
        ok = ~np.isnan(c) & (c > 0 if log else True)
        ax.plot(t[order][ok[order]], c[order][ok[order]], "-", color="0.6", lw=0.8)
        ax.plot(t[used & ok], c[used & ok], "o", color="C0", ms=4, label="used")
        ax.plot(t[~used & ok], c[~used & ok], "o", mfc="none", color="C7", ms=4, label="not used")
        ax.plot(t[lz & ok], c[lz & ok], "o", mfc="none", mec="C3", ms=9, mew=1.4, label="λz fit points")
        lam, clp, tl = row.get("LAMZ", np.nan), row.get("CLSTP", np.nan), row.get("TLST", np.nan)
        lo, hi = row.get("LAMZLL", np.nan), row.get("LAMZUL", np.nan)
        if np.isfinite([lam, clp, tl, lo, hi]).all():
            tt = np.linspace(lo, hi, 50)
            ax.plot(tt, clp * np.exp(-lam * (tt - tl)), "--", color="C3", lw=1.2,
                    label=f"λz fit, t½ {np.log(2) / lam:.3g} {time_unit}")
        ax.set_yscale("log" if log else "linear")
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Concentration ({conc_unit})" if conc_unit else "Concentration")
        ax.set_title(f"{key} — {'semi-log' if log else 'linear'}", fontsize=9)
    axes[1].legend(fontsize=7)
    return fig


def plot_mean_profiles(means, *, group_by, time_unit="", conc_unit=""):
    """Mean ± SD concentration by group, linear and semi-log.

    On the semi-log panel only the upper bar (mean + SD) is drawn, since
    mean − SD may be 0 or negative; points with a mean of 0 are left out there.

    Parameters
    ----------
    means : DataFrame
        From :func:`pkwidgets.summary.mean_profiles`: group columns, ``time``,
        ``n``, ``mean``, ``sd``.
    group_by : list of str

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(11, 4), gridspec_kw=_GRID)
    labels = means[group_by].astype(str).agg(", ".join, axis=1) if group_by else pd.Series("all", index=means.index)
    for i, g in enumerate(dict.fromkeys(labels)):
        m = means[(labels == g).to_numpy()]
        for ax, log in zip(axes, (False, True)):
            keep = (m["mean"] > 0).to_numpy() if log else np.ones(len(m), bool)
            sd = m["sd"].fillna(0).to_numpy()[keep]
            mu = m["mean"].to_numpy()[keep]
            lower = np.zeros_like(sd) if log else sd  # semi-log: upper bar only (a lower bar can cross 0)
            ax.errorbar(m["time"].to_numpy()[keep], mu, yerr=[lower, sd], fmt="-o", ms=3, lw=1, capsize=2,
                        color=f"C{i % 10}", label=f"{', '.join(group_by)} {g}" if group_by else g)
    for ax, log in zip(axes, (False, True)):
        ax.set_yscale("log" if log else "linear")
        ax.set_xlabel(f"Time ({time_unit})" if time_unit else "Time")
        ax.set_ylabel(f"Mean ± SD ({conc_unit})" if conc_unit else "Mean ± SD")
        ax.set_title("semi-log" if log else "linear")
    axes[0].legend(fontsize=8)
    return fig


# ---------------------------------------------------------------------------- HTML record

_TEMPLATE = r"""{%- extends 'lab/index.html.j2' -%}
{%- block html_head_js_requirejs -%}{%- endblock html_head_js_requirejs -%}
{% block jupyter_widgets %}{% endblock jupyter_widgets %}
{%- block html_head_js_mathjax -%}{%- endblock html_head_js_mathjax -%}
{%- block html_head_js_mermaidjs -%}{%- endblock html_head_js_mermaidjs -%}
{% block extra_css %}<style>
.pkw-header{font-family:sans-serif;border:1px solid #999;padding:0.6em 1em;margin:1em 1em 1.5em 1em;background:#f7f7f7}
.pkw-header table{border-collapse:collapse;font-size:0.9em}
.pkw-header td{padding:2px 8px;vertical-align:top;border-bottom:1px solid #ddd}
.pkw-header td:first-child{font-weight:bold;white-space:nowrap}
.pkw-caution{font-weight:bold;color:#7a3b00}
.pkw-header pre{margin:0;white-space:pre-wrap;font-size:0.85em}
</style>{% endblock extra_css %}
{%- block body_header -%}
{{ super() }}
{{ resources.pkw_header }}
{%- endblock body_header -%}
"""


def _header_html(info: dict) -> str:
    rows = [
        ("Analysis", info.get("notebook", "")),
        ("Data file", info.get("data_file", "")),
        ("Data SHA-256", info.get("data_sha256", "")),
        ("pkwidgets version", info.get("pkwidgets_version", "")),
        ("Run date (UTC)", info.get("date", "")),
    ]
    body = "".join(f"<tr><td>{html.escape(k)}</td><td>{html.escape(str(v))}</td></tr>" for k, v in rows)
    for name in ("parameters", "settings"):
        text = json.dumps(info.get(name, {}), indent=1, sort_keys=True, default=str)
        body += f"<tr><td>{name.capitalize()}</td><td><pre>{html.escape(text)}</pre></td></tr>"
    caution = html.escape(info.get("caution", CAUTION))
    return (f'<section class="pkw-header" id="pkw-record-header"><h1>Study record</h1>'
            f'<p class="pkw-caution">{caution}</p><table>{body}</table></section>')


def write_record(notebook_path, html_path=None, *, info=None, hide_code=False) -> str:
    """Write the offline HTML record of an executed analysis notebook.

    Parameters
    ----------
    notebook_path : str
        Executed notebook (``.ipynb``).
    html_path : str, optional
        Output file; default the notebook path with ``.html``.
    info : dict, optional
        Header (see :func:`run_info`); default read from ``run_info.json``
        next to the notebook.
    hide_code : bool
        Leave code cells out of the record.

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
    from jinja2 import DictLoader
    from nbconvert import HTMLExporter

    notebook_path = os.fspath(notebook_path)
    html_path = html_path or os.path.splitext(notebook_path)[0] + ".html"
    nb = nbformat.read(notebook_path, as_version=4)
    if info is None:
        here = os.path.dirname(os.path.abspath(notebook_path))
        candidates = [os.path.join(here, RUN_INFO)]
        out = nb.metadata.get("papermill", {}).get("parameters", {}).get("output_dir")
        if out:
            candidates += [os.path.join(out, RUN_INFO), os.path.join(here, out, RUN_INFO)]
        found = [p for p in candidates if os.path.exists(p)]
        if not found:
            raise FileNotFoundError(
                f"{RUN_INFO} not found (looked in {', '.join(dict.fromkeys(candidates))}): the record header comes "
                f"from it. Run {notebook_path} to its end (its last cell writes it into output_dir) or pass info=.")
        with open(found[0], encoding="utf-8") as fh:
            info = json.load(fh)
    nb.metadata.pop("widgets", None)  # a static page runs no widgets; their state would need CDN scripts
    exporter = HTMLExporter(template_name="lab", extra_loaders=[DictLoader({"pkw_record.html.j2": _TEMPLATE})],
                            template_file="pkw_record.html.j2", exclude_input=hide_code, embed_images=True)
    resources = {"pkw_header": _header_html(info), "metadata": {"name": f"Study record — {info.get('notebook', '')}"}}
    body, _ = exporter.from_notebook_node(nb, resources=resources)
    write_atomic(html_path, body)
    return html_path


def run_analysis(notebook, output_dir, parameters=None, *, kernel_name="python3", timeout=600) -> dict:
    """Execute an analysis notebook with papermill and write its HTML record.

    Parameters
    ----------
    notebook : str
        Path of the parameterised notebook (e.g. ``analyses/single_dose.ipynb``).
    output_dir : str
        Folder for the executed notebook, the record and the notebook's CSV exports.
    parameters : dict, optional
        Values for the notebook's ``parameters`` cell; ``output_dir`` is set
        from the argument.  Relative ``output_dir``, ``data_path`` and
        ``selection_record`` are taken from the current folder (the kernel
        itself runs in the notebook's folder, where the defaults point).

    Returns
    -------
    dict
        ``notebook`` and ``html`` paths, plus ``csv``: the list of CSV files
        in ``output_dir``.
    """
    import papermill as pm

    output_dir = os.path.abspath(os.fspath(output_dir))
    os.makedirs(output_dir, exist_ok=True)
    params = dict(parameters or {})
    params["output_dir"] = output_dir
    for name in ("data_path", "selection_record"):  # the kernel runs in the notebook's folder
        if isinstance(params.get(name), (str, os.PathLike)):
            params[name] = os.path.abspath(os.fspath(params[name]))
    stem = os.path.splitext(os.path.basename(notebook))[0]
    out_nb = os.path.join(output_dir, f"{stem}.ipynb")
    pm.execute_notebook(os.fspath(notebook), out_nb, parameters=params, kernel_name=kernel_name,
                        execution_timeout=timeout, progress_bar=False,
                        cwd=os.path.dirname(os.path.abspath(notebook)))
    html_path = write_record(out_nb)
    csvs = sorted(os.path.join(output_dir, f) for f in os.listdir(output_dir) if f.endswith(".csv"))
    return {"notebook": out_nb, "html": html_path, "csv": csvs}


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


if __name__ == "__main__":  # python -m pkwidgets.report executed.ipynb [record.html]
    import sys

    if len(sys.argv) >= 3 and sys.argv[1] == "--refresh":  # python -m pkwidgets.report --refresh analyses/*.ipynb
        for path in sys.argv[2:]:
            print(refresh_stored_outputs(path))
        sys.exit(0)
    if len(sys.argv) not in (2, 3):
        sys.exit("usage: python -m pkwidgets.report EXECUTED.ipynb [RECORD.html]\n"
                 "       python -m pkwidgets.report --refresh analyses/NAME.ipynb ...")
    if not os.path.exists(sys.argv[1]):
        sys.exit(f"{sys.argv[1]} not found: give the notebook papermill wrote (its output path).")
    print(write_record(sys.argv[1], sys.argv[2] if len(sys.argv) == 3 else None))
