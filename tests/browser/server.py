"""A private Jupyter server for one test module: its own port, token, root and config directory."""

from __future__ import annotations

import contextlib
import json
import os
import secrets
import shutil
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

#: Lab plugins switched off in every test server: the news toast covers the lower right of the output.
DISABLED = {"@jupyterlab/apputils-extension:announcements": True}
START_TIMEOUT = 90.0


@dataclass(frozen=True)
class Server:
    """A running server: where to point the browser and where its log goes."""

    app: str
    port: int
    token: str
    root: Path
    log: Path

    @property
    def base(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def url(self, notebook: str) -> str:
        """The page that opens ``notebook`` (a file name in the root) in this app."""
        # each notebook gets a JupyterLab workspace of its own, so a second page does not reopen the first's tabs
        stem = Path(notebook).stem
        path = f"/lab/workspaces/{stem}/tree/{notebook}" if self.app == "lab" else f"/notebooks/{notebook}"
        return f"{self.base}{path}?token={self.token}"

    def tail(self, lines: int = 60) -> str:
        """The end of the server's log, for failure messages."""
        try:
            return "\n".join(self.log.read_text(errors="replace").splitlines()[-lines:])
        except OSError:
            return "(no server log)"


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def config_dir(where: Path) -> Path:
    """A JUPYTER_CONFIG_DIR that disables the announcements plugin (and so the news toast)."""
    cfg = where / "config"
    (cfg / "labconfig").mkdir(parents=True)
    page = {"disabledExtensions": DISABLED}
    (cfg / "labconfig" / "page_config.json").write_text(json.dumps(page))
    # JupyterLab's own settings: never ask about news, never check for updates.
    settings = cfg / "lab" / "user-settings" / "@jupyterlab" / "apputils-extension"
    settings.mkdir(parents=True)
    (settings / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False}))
    return cfg


def _wait_ready(proc: subprocess.Popen, server: Server) -> None:
    deadline = time.monotonic() + START_TIMEOUT
    status = f"{server.base}/api/status?token={server.token}"
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"jupyter {server.app} exited with code {proc.returncode}:\n{server.tail()}")
        try:
            with urllib.request.urlopen(status, timeout=2) as reply:
                if reply.status == 200:
                    return
        except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
            pass
        time.sleep(0.25)
    raise RuntimeError(f"jupyter {server.app} did not answer within {START_TIMEOUT:.0f} s:\n{server.tail()}")


@contextlib.contextmanager
def jupyter_server(app: str, notebooks: dict[str, Path | dict]) -> Iterator[Server]:
    """Start ``jupyter lab`` or ``jupyter notebook`` in a fresh root holding copies of ``notebooks``.

    ``notebooks`` maps a file name to a path to copy or to a notebook dict to write.
    The server is stopped when the block ends, whatever happens: terminate, wait, kill.
    """
    if app not in ("lab", "notebook"):
        raise ValueError(f"app must be 'lab' or 'notebook', got {app!r}")
    tmp = Path(tempfile.mkdtemp(prefix=f"sw-{app}-"))
    root = tmp / "root"
    root.mkdir()
    for name, source in notebooks.items():
        if isinstance(source, dict):
            (root / name).write_text(json.dumps(source))
        else:
            shutil.copy(source, root / name)
    env = dict(os.environ)
    env.update(JUPYTER_CONFIG_DIR=str(config_dir(tmp)), JUPYTER_RUNTIME_DIR=str(tmp / "runtime"),
               IPYTHONDIR=str(tmp / "ipython"), JUPYTER_DATA_DIR=str(tmp / "data"), JUPYTER_PLATFORM_DIRS="1", PYTHONUNBUFFERED="1")
    # the kernel imports schedwidget from this work tree, installed or not
    repo = str(Path(__file__).resolve().parents[2])
    env["PYTHONPATH"] = repo + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    server = Server(app, free_port(), secrets.token_hex(16), root, tmp / "server.log")
    cls = "LabApp" if app == "lab" else "JupyterNotebookApp"
    cmd = [sys.executable, "-m", "jupyter", app, "--no-browser", "--ServerApp.ip=127.0.0.1",
           f"--ServerApp.port={server.port}", "--ServerApp.port_retries=0",
           f"--IdentityProvider.token={server.token}", f"--ServerApp.root_dir={root}", "--allow-root",
           f"--{cls}.expose_app_in_browser=True",
           f"--LabServerApp.workspaces_dir={tmp / 'workspaces'}"]
    if app == "lab":
        cmd.append("--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate")
    with open(server.log, "wb") as log:
        proc = subprocess.Popen(cmd, cwd=root, env=env, stdout=log, stderr=subprocess.STDOUT,
                                start_new_session=True)
    try:
        _wait_ready(proc, server)
        yield server
    finally:
        stop(proc, tmp)


def stop(proc: subprocess.Popen, tmp: Path) -> None:
    """End a server started with ``start_new_session=True``, the kernels it left behind, and its scratch root."""
    proc.terminate()
    try:
        proc.wait(timeout=15)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(timeout=15)
    # kernels are children of the server; end the ones it left behind (its own process group only)
    with contextlib.suppress(ProcessLookupError, PermissionError):
        os.killpg(proc.pid, 9)
    shutil.rmtree(tmp, ignore_errors=True)
