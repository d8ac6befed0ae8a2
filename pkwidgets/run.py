"""``python -m pkwidgets.run``: run an analysis notebook on a study, unattended.

Usage::

    python -m pkwidgets.run analyses/single_dose.ipynb results/my_study \\
        -p data_path my_study.csv -p time_unit min \\
        -y "columns: {subject: ID, time: TAD, conc: CP, dose: AMT}"

``-p NAME VALUE`` sets one parameter of the notebook's ``parameters`` cell
(the value is read as YAML: ``12`` is a number, ``[a, b]`` a list);
``-y TEXT`` sets several from a YAML mapping, or from a YAML file when TEXT
is a path.  The executed notebook, the CSV exports and the offline HTML
record go to the output folder, whose paths are printed.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import argparse
import os
import sys

__all__ = ["parse_parameters", "main"]


def parse_parameters(pairs=(), yaml_texts=()) -> dict:
    """Notebook parameters from ``-p`` pairs and ``-y`` YAML texts or files.

    Examples
    --------
    >>> parse_parameters([("tau", "12"), ("route", "iv-bolus")], ["group_by: [dose]"])
    {'group_by': ['dose'], 'tau': 12, 'route': 'iv-bolus'}
    >>> parse_parameters(yaml_texts=["- not a mapping"])
    Traceback (most recent call last):
    ...
    ValueError: -y must give a YAML mapping of parameter names to values; got list.
    """
    import yaml

    params = {}
    for text in yaml_texts:
        if os.path.isfile(text):
            with open(text, encoding="utf-8") as fh:
                text = fh.read()
        loaded = yaml.safe_load(text)
        if not isinstance(loaded, dict):
            raise ValueError(f"-y must give a YAML mapping of parameter names to values; got {type(loaded).__name__}.")
        params.update(loaded)
    for name, value in pairs:
        params[name] = yaml.safe_load(value)
    return params


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m pkwidgets.run", description=__doc__.split("\n\n")[0])
    ap.add_argument("notebook", help="analysis notebook, e.g. analyses/single_dose.ipynb")
    ap.add_argument("output_dir", help="folder for the executed notebook, CSV exports and HTML record")
    ap.add_argument("-p", nargs=2, action="append", default=[], metavar=("NAME", "VALUE"),
                    help="one notebook parameter (value read as YAML)")
    ap.add_argument("-y", action="append", default=[], metavar="YAML",
                    help="several parameters as a YAML mapping, or the path of a YAML file")
    args = ap.parse_args(argv)
    if not os.path.isfile(args.notebook):
        ap.error(f"{args.notebook} not found: give the path of an analysis notebook (analyses/*.ipynb).")
    try:
        params = parse_parameters(args.p, args.y)
    except ValueError as exc:
        ap.error(str(exc))
    from .report import run_analysis

    paths = run_analysis(args.notebook, args.output_dir, params)
    print("HTML record:       ", paths["html"])
    print("executed notebook: ", paths["notebook"])
    for p in paths["csv"]:
        print("CSV:               ", p)
    print("Results support qualified review; follow local regulations and SOPs.")
    return 0


if __name__ == "__main__":
    sys.exit(main())
