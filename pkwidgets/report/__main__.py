"""``python -m pkwidgets.report EXECUTED.ipynb [RECORD.html] [--pdf]``: same as ``pkwidgets report``.

``python -m pkwidgets.report --refresh analyses/*.ipynb`` re-executes the analysis notebooks in place
(stored outputs for nbval).  ``--pdf`` also prints the record to PDF with headless Chromium.
"""

import sys

from ..cli import main


def _main(argv) -> int:
    if "--pdf" not in argv:
        return main(["report", *argv])
    argv = [a for a in argv if a != "--pdf"]
    status = main(["report", *argv])
    if status == 0:
        import os

        from .pdf import write_pdf

        paths = [a for a in argv if not a.startswith("-")]
        html = paths[1] if len(paths) == 2 else os.path.splitext(paths[0])[0] + ".html"
        print(write_pdf(html))
    return status


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
