"""Start and stop a local JupyterLab server for one folder (the JupyterLab browser test).

How to run JupyterLab here is in /work/shared/STACK.md (measured on these machines): ``--allow-root``,
the extension manager read-only, no update check, autosave off and ``windowingMode: "none"`` in the
user settings (so every cell is in the page), Jupyter folders in a temporary directory, the server
started with a recorded process group and stopped in ``finally``.  ``expose_app_in_browser`` gives the
test ``window.jupyterapp`` to run commands (open, run all cells) instead of guessing menu positions.

This module is test plumbing and holds no check values, so it names no source for any.
"""

from __future__ import annotations

import contextlib
import json
import sys
from pathlib import Path

from _voila import free_port, jupyter_env, serving

#: User settings written for the test server (plugin id -> settings).
LAB_SETTINGS = {
    "@jupyterlab/docmanager-extension/plugin": {"autosave": False},
    "@jupyterlab/notebook-extension/tracker": {"windowingMode": "none"},
    "@jupyterlab/apputils-extension/notification": {"fetchNews": "false", "checkForUpdates": False},
}


def _write_settings(settings_dir: Path):
    for plugin, values in LAB_SETTINGS.items():
        path = settings_dir / f"{plugin}.jupyterlab-settings"
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(values))


@contextlib.contextmanager
def lab_server(root, state_dir, *, token="pkwlab", timeout=90):
    """Serve ``root`` with JupyterLab on 127.0.0.1; yield ``(base_url, token)``; stop the server on exit.

    Parameters
    ----------
    root : path
        Folder the server shows (notebooks to open are put there).
    state_dir : path
        Empty folder for the Jupyter config, runtime, data, workspace and settings folders and ``lab.log``.
    token : str
        Access token (add ``?token=...`` to the first URL opened).
    timeout : float
        Seconds to wait for the port to open.

    Raises
    ------
    RuntimeError
        If the server exits or does not open its port in time (the message names the log file).
    """
    root, state_dir = Path(root), Path(state_dir)
    env = jupyter_env(state_dir)
    env["JUPYTERLAB_SETTINGS_DIR"] = str(state_dir / "lab-settings")
    _write_settings(state_dir / "lab-settings")
    port = free_port()
    log_path = state_dir / "lab.log"
    cmd = [sys.executable, "-m", "jupyterlab", "--no-browser", "--allow-root", "--ServerApp.ip=127.0.0.1",
           f"--ServerApp.port={port}", f"--IdentityProvider.token={token}", f"--ServerApp.root_dir={root}",
           "--LabApp.extension_manager=readonly",
           "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
           "--LabApp.expose_app_in_browser=True", "--LabApp.news_url=None"]
    with serving(cmd, port, cwd=root, env=env, log_path=log_path, timeout=timeout):
        yield f"http://127.0.0.1:{port}", token
