"""``python -m pkwidgets.run``: run an analysis notebook on a study, unattended (same as ``pkwidgets run``).

Usage::

    python -m pkwidgets.run analyses/single_dose.ipynb results/my_study \\
        -p data_path my_study.csv -p time_unit min \\
        -y "columns: {subject: ID, time: TAD, conc: CP, dose: AMT}"

``-p NAME VALUE`` sets one parameter of the notebook's ``parameters`` cell
(the value is read as YAML: ``12`` and ``1e3`` are numbers, ``[a, b]`` a
list); ``-y TEXT`` sets several from a YAML mapping, or from a YAML file when
TEXT is a path.  A name the notebook does not declare is refused.  The
executed notebook, the CSV exports, the offline HTML record and
``MANIFEST.sha256`` go to the output folder, whose paths are printed.
See :mod:`pkwidgets.cli`.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import sys

from .report.arguments import parse_parameters

__all__ = ["parse_parameters", "main"]


def main(argv=None) -> int:
    """``pkwidgets run`` with these arguments; returns the exit status."""
    from .cli import main as cli_main

    return cli_main(["run", *(sys.argv[1:] if argv is None else argv)])


if __name__ == "__main__":
    sys.exit(main())
