"""Start and stop a local Voilà server for one notebook (browser tests and bench/widget_speed.py).

How to drive Voilà here is in /work/shared/STACK.md (measured on these machines): bind to 127.0.0.1,
wait for the port with a TCP connect (an HTTP GET would start an extra kernel), keep Jupyter state
out of $HOME, start the server with a recorded process group and stop it in ``finally``.

This module is test plumbing and holds no check values, so it names no source for any.
"""

from __future__ import annotations

import contextlib
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]
_JUPYTER_DIRS = (("JUPYTER_CONFIG_DIR", "config"), ("JUPYTER_RUNTIME_DIR", "runtime"),
                 ("JUPYTERLAB_WORKSPACES_DIR", "ws"), ("IPYTHONDIR", "ipython"), ("JUPYTER_DATA_DIR", "data"))


def free_port() -> int:
    """A TCP port on 127.0.0.1 that is free now."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_port(port, proc, log_path, timeout):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if proc.poll() is not None:
            raise RuntimeError(f"the server exited early with code {proc.returncode}; see {log_path}")
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5):
                return
        except OSError:
            time.sleep(0.2)
    raise RuntimeError(f"the server did not open port {port} within {timeout} s; see {log_path}")


def jupyter_env(state_dir) -> dict:
    """The environment of a test server: every Jupyter folder inside ``state_dir``, none in $HOME."""
    env = dict(os.environ)
    for var, sub in _JUPYTER_DIRS:
        env[var] = str(Path(state_dir) / sub)
    env["JUPYTER_PATH"] = str(Path(sys.prefix) / "share" / "jupyter")
    return env


@contextlib.contextmanager
def voila_server(notebook, state_dir, *, token="pkwtest", timeout=60):
    """Serve ``notebook`` with Voilà on 127.0.0.1; yield the page URL; stop the server on exit.

    Parameters
    ----------
    notebook : path
        The notebook to serve (its folder is the server's working folder).
    state_dir : path
        Empty folder for the Jupyter config, runtime and data folders and ``voila.log``.
    token : str
        Access token put in the URL.
    timeout : float
        Seconds to wait for the port to open.

    Raises
    ------
    RuntimeError
        If the server exits or does not open its port in time (the message names the log file).
    """
    notebook, state_dir = Path(notebook), Path(state_dir)
    port = free_port()
    cmd = [sys.executable, "-m", "voila", str(notebook), "--no-browser", "--Voila.ip=127.0.0.1", f"--port={port}",
           f"--token={token}"]
    with serving(cmd, port, cwd=notebook.parent, env=jupyter_env(state_dir), log_path=state_dir / "voila.log",
                 timeout=timeout):
        yield f"http://127.0.0.1:{port}/?token={token}"


@contextlib.contextmanager
def serving(cmd, port, *, cwd, env, log_path, timeout):
    """Run a server command in its own process group, logging to ``log_path``; return once ``port`` opens.

    The process group is stopped on exit (SIGTERM, then SIGKILL after 15 s).  Raises ``RuntimeError`` naming
    the log file when the server exits early or does not open the port within ``timeout`` seconds.
    """
    with open(log_path, "w") as log:
        proc = subprocess.Popen(cmd, cwd=cwd, env=env, stdout=log, stderr=subprocess.STDOUT, start_new_session=True)
        try:
            _wait_port(port, proc, log_path, timeout)
            yield proc
        finally:
            try:
                os.killpg(proc.pid, signal.SIGTERM)
                proc.wait(timeout=15)
            except ProcessLookupError:
                pass
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=15)
