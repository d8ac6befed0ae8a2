"""``python -m pkwidgets.demo`` (or ``pkwidgets demo``): the main job on the bundled synthetic study.

Runs ``analyses/single_dose.ipynb`` with papermill on ``data/demo_single_dose.csv``
(written by ``data/make_demo.py``), writes the executed notebook, the CSV
exports and the offline HTML record into ``results/single_dose/``, and prints
their paths.  The demo needs a source checkout (``analyses/`` and ``data/``
are not installed with the package).  Results support qualified review;
follow local regulations and SOPs.
"""

from __future__ import annotations

import os
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def main(root=ROOT, output_dir=None) -> dict:
    """Run the single-dose analysis on the demo study; return the paths written.

    Raises
    ------
    RunError
        If the checkout has no ``analyses/single_dose.ipynb`` or the demo data
        have not been written yet (``python data/make_demo.py``), or the run fails.
    """
    from .report import run_analysis
    from .report.errors import RunError

    notebook = os.path.join(root, "analyses", "single_dose.ipynb")
    data = os.path.join(root, "data", "demo_single_dose.csv")
    if not os.path.exists(notebook):
        raise RunError(f"{notebook} not found: the demo runs from a source checkout of pkwidgets (analyses/, data/).")
    if not os.path.exists(data):
        raise RunError(f"{data} not found: write the demo studies first with python data/make_demo.py "
                       "(make demo does both).")
    out = output_dir or os.path.join(root, "results", "single_dose")
    return run_analysis(notebook, out, {"data_path": data})


if __name__ == "__main__":
    from .cli import main as cli_main

    sys.exit(cli_main(["demo", *sys.argv[1:]]))
