"""The record as PDF, printed by a headless Chromium (no extra Python package).

Debian's ``chromium`` prints a page with its own print engine:
``chromium --headless --no-sandbox --disable-gpu --no-pdf-header-footer --print-to-pdf=OUT file://RECORD``.
The record's ``@media print`` CSS puts the first page on its own sheet and
keeps figures and table rows whole.

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile

from .errors import RunError

__all__ = ["BROWSERS", "find_browser", "write_pdf"]

#: Browser programs tried in order (the first found on PATH prints).
BROWSERS = ("chromium", "chromium-browser", "google-chrome", "chrome")


def find_browser(program=None) -> str:
    """Path of the browser that prints; ``program`` or the first of :data:`BROWSERS` on PATH.

    Raises
    ------
    RunError
        If none is found (install Debian's ``chromium``: ``apt-get install chromium``).
    """
    for name in ([program] if program else BROWSERS):
        found = shutil.which(name) or (name if os.path.isfile(name) else None)
        if found:
            return found
    raise RunError(f"no browser to print the PDF record: none of {', '.join([program] if program else BROWSERS)} "
                   f"is on PATH. Install Chromium (Debian: apt-get install chromium) or pass browser=PATH.")


def write_pdf(html_path, pdf_path=None, *, browser=None, timeout=120) -> str:
    """Print an HTML record to PDF with headless Chromium.

    Parameters
    ----------
    html_path : str
        The record (``.html``).
    pdf_path : str, optional
        Output; default the record path with ``.pdf``.
    browser : str, optional
        Chromium program; default the first of :data:`BROWSERS` found.
    timeout : float
        Seconds before the print is abandoned.

    Returns
    -------
    str
        Path of the PDF.

    Raises
    ------
    RunError
        If no browser is found, or the browser fails or writes no file.
    """
    html_path = os.path.abspath(os.fspath(html_path))
    pdf_path = os.path.abspath(pdf_path or os.path.splitext(html_path)[0] + ".pdf")
    program = find_browser(browser)
    with tempfile.TemporaryDirectory(prefix="pkw-pdf-") as profile:
        tmp = os.path.join(profile, "record.pdf")
        cmd = [program, "--headless", "--no-sandbox", "--disable-gpu", "--no-pdf-header-footer",
               "--disable-background-networking", "--disable-component-update", "--disable-sync", "--no-first-run",
               f"--user-data-dir={profile}", f"--print-to-pdf={tmp}", "file://" + html_path]
        try:
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, check=False)
        except subprocess.TimeoutExpired:
            raise RunError(f"{program} did not print {html_path} within {timeout:g} s.") from None
        if not os.path.isfile(tmp) or os.path.getsize(tmp) == 0:
            last = (done.stderr.strip().splitlines() or ["no message"])[-1]
            raise RunError(f"{program} printed no PDF of {html_path} (exit status {done.returncode}): {last}")
        shutil.move(tmp, pdf_path)
    return pdf_path
