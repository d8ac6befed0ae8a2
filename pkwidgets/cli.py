"""The ``pkwidgets`` command line: run an analysis notebook, list its parameters, write a record, run the demo.

::

    pkwidgets run analyses/single_dose.ipynb results/my_study -p data_path my_study.csv -p time_unit min \\
        -y "columns: {subject: ID, time: TAD, conc: CP, dose: AMT}"
    pkwidgets params analyses/single_dose.ipynb     # or: pkwidgets run analyses/single_dose.ipynb --help
    pkwidgets report results/my_study/single_dose.ipynb
    pkwidgets demo

An expected failure (unknown parameter, bad YAML, missing notebook or data
file, unusable output folder, a notebook cell that raised) is one line on
stderr and exit status 1; usage errors exit with 2.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import argparse
import sys

__all__ = ["main", "build_parser"]

_CAUTION = "Results support qualified review; follow local regulations and SOPs."
_EXTRA = 'pip install "pkwidgets[notebooks]"'


def _add_run(sub) -> None:
    p = sub.add_parser("run", add_help=False, help="run an analysis notebook on a study, unattended",
                       description="Run an analysis notebook with papermill into OUTPUT_DIR: the executed notebook, "
                                   "the CSV exports, the HTML record and MANIFEST.sha256, switched into place as a "
                                   "whole at the end. 'pkwidgets run NOTEBOOK --help' lists the notebook's "
                                   "parameters.")
    p.add_argument("notebook", nargs="?", metavar="NOTEBOOK", help="analysis notebook, e.g. analyses/single_dose.ipynb")
    p.add_argument("output_dir", nargs="?", metavar="OUTPUT_DIR",
                   help="folder for the run: new, empty, or a previous run (replaced whole)")
    p.add_argument("-p", nargs=2, action="append", default=[], metavar=("NAME", "VALUE"),
                   help="one notebook parameter (value read as YAML; 1e3 is a number)")
    p.add_argument("-y", action="append", default=[], metavar="YAML",
                   help="several parameters as a YAML mapping, or the path of a YAML file")
    p.add_argument("--timeout", type=float, default=600, help="seconds per cell (default 600)")
    p.add_argument("-h", "--help", action="store_true", help="show this help and the notebook's parameters")
    p.set_defaults(handler=_run, parser=p)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of ``pkwidgets`` (subcommands run, params, report, demo)."""
    ap = argparse.ArgumentParser(prog="pkwidgets", description="Non-compartmental analysis notebooks, run "
                                 f"unattended, with their offline study records. {_CAUTION}")
    sub = ap.add_subparsers(dest="command", metavar="COMMAND", required=True)
    _add_run(sub)
    p = sub.add_parser("params", help="list an analysis notebook's parameters with defaults")
    p.add_argument("notebook", metavar="NOTEBOOK")
    p.add_argument("--markdown", action="store_true", help="as a Markdown table")
    p.set_defaults(handler=_params, parser=p)
    p = sub.add_parser("report", help="write the HTML record of an executed analysis notebook",
                       description="Write the offline HTML record (code hidden) beside an executed notebook, or "
                                   "with --refresh re-execute analysis notebooks in place (stored outputs for nbval).")
    p.add_argument("paths", nargs="+", metavar="PATH", help="EXECUTED.ipynb [RECORD.html], or notebooks with --refresh")
    p.add_argument("--with-code", action="store_true", help="keep the code cells in the record")
    p.add_argument("--refresh", action="store_true", help="re-execute the given notebooks in place")
    p.set_defaults(handler=_report, parser=p)
    p = sub.add_parser("demo", help="run the single-dose analysis on the bundled synthetic demo study")
    p.add_argument("--output-dir", default=None, help="default: results/single_dose in the checkout")
    p.set_defaults(handler=_demo, parser=p)
    return ap


def _print_paths(paths) -> None:
    print("HTML record:       ", paths["html"])
    print("executed notebook: ", paths["notebook"])
    for p in paths["csv"]:
        print("CSV:               ", p)
    if paths.get("manifest"):
        print("file SHA-256:      ", paths["manifest"])
    print(_CAUTION)


def _run(args, parser) -> int:
    from .report import describe_parameters, notebook_parameters, parse_parameters, run_analysis
    from .report.errors import ParameterError

    if args.help:
        parser.print_help()
        if args.notebook:
            print("\n" + describe_parameters(args.notebook, notebook_parameters(args.notebook)))
        return 0
    if not args.notebook or not args.output_dir:
        parser.error("give NOTEBOOK and OUTPUT_DIR, e.g. pkwidgets run analyses/single_dose.ipynb results/study")
    params = parse_parameters(args.p, args.y)
    if "output_dir" in params:
        raise ParameterError("output_dir is set by the OUTPUT_DIR argument: leave out -p/-y output_dir.")
    _print_paths(run_analysis(args.notebook, args.output_dir, params, timeout=args.timeout))
    return 0


def _report(args, parser) -> int:
    from .report import refresh_stored_outputs, write_record
    from .report.errors import RunError

    if args.refresh:
        for path in args.paths:
            print(refresh_stored_outputs(path))
        return 0
    if len(args.paths) > 2:
        parser.error("give EXECUTED.ipynb and optionally RECORD.html (or use --refresh for several notebooks)")
    import os

    if not os.path.isfile(args.paths[0]):
        raise RunError(f"{args.paths[0]} not found: give the notebook papermill wrote (in the run's output folder).")
    path = write_record(args.paths[0], args.paths[1] if len(args.paths) == 2 else None, hide_code=not args.with_code)
    _update_manifest(path)
    print(path)
    return 0


def _update_manifest(html_path) -> None:
    """Re-write the manifest of a run folder whose record was re-written (its digest changed)."""
    import os

    from .report import MANIFEST, write_manifest

    folder = os.path.dirname(os.path.abspath(html_path))
    if os.path.exists(os.path.join(folder, MANIFEST)):
        write_manifest(folder)


def _demo(args, parser) -> int:
    from .demo import main as demo_main

    _print_paths(demo_main(output_dir=args.output_dir))
    return 0


def main(argv=None) -> int:
    """Entry point of the ``pkwidgets`` console script; returns the exit status."""
    args = build_parser().parse_args(argv)
    try:
        return args.handler(args, args.parser)
    except ImportError as exc:
        print(f"pkwidgets {args.command}: error: {exc.name or exc} is missing: {_EXTRA}", file=sys.stderr)
    except KeyboardInterrupt:
        print(f"pkwidgets {args.command}: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:
        if not _expected(exc):
            raise
        print(f"pkwidgets {args.command}: error: {_one_line(exc)}", file=sys.stderr)
    return 1


def _params(args, parser) -> int:
    from .report import describe_parameters, notebook_parameters

    print(describe_parameters(args.notebook, notebook_parameters(args.notebook), markdown=args.markdown))
    return 0


def _expected(exc) -> bool:
    """Failures the command line reports in one line: run errors, bad input data, files and folders."""
    from .errors import InputDataError
    from .report.errors import RunError

    return isinstance(exc, (RunError, InputDataError, OSError))


def _one_line(exc) -> str:
    if isinstance(exc, OSError) and exc.filename and exc.strerror:
        return f"{exc.strerror}: {exc.filename}"
    return " ".join(str(exc).split())


if __name__ == "__main__":
    sys.exit(main())
