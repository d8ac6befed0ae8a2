"""``python -m pkwidgets.demo``: the main job on the bundled synthetic study.

Runs ``analyses/single_dose.ipynb`` with papermill on ``data/demo_single_dose.csv``
(written by ``data/make_demo.py``), writes the executed notebook, the CSV
exports and the offline HTML record into ``results/single_dose/``, and prints
their paths.  Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import os
import sys

from .report import run_analysis

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def main(root=ROOT) -> dict:
    """Run the single-dose analysis on the demo study; return the paths written."""
    data = os.path.join(root, "data", "demo_single_dose.csv")
    if not os.path.exists(data):
        raise FileNotFoundError(f"{data} not found: write the demo studies first with python data/make_demo.py "
                                "(make demo does both).")
    out = os.path.join(root, "results", "single_dose")
    return run_analysis(os.path.join(root, "analyses", "single_dose.ipynb"), out, {
        "data_path": data,
        "selection_record": os.path.join(out, "terminal_selection.json"),
    })


if __name__ == "__main__":
    paths = main()
    print("HTML record:       ", paths["html"])
    print("executed notebook: ", paths["notebook"])
    for p in paths["csv"]:
        print("CSV:               ", p)
    print("Results support qualified review; follow local regulations and SOPs.")
    sys.exit(0)
