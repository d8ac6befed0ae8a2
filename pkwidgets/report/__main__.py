"""``python -m pkwidgets.report EXECUTED.ipynb [RECORD.html]``: same as ``pkwidgets report``.

``python -m pkwidgets.report --refresh analyses/*.ipynb`` re-executes the analysis notebooks in place
(stored outputs for nbval).
"""

import sys

from ..cli import main

if __name__ == "__main__":
    sys.exit(main(["report", *sys.argv[1:]]))
