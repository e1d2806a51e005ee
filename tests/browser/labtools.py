"""Helpers for driving JupyterLab in headless chromium from the browser tests.

The fixtures in ``conftest.py`` hand out a running :class:`Lab` (one per test session) and a
Playwright ``page`` guarded against outside requests. The functions here write notebooks into the
lab's folder, open and run them, and read back what the kernel printed. Import them in a test file
of this folder with ``import labtools``.

Everything waits on a condition (``page.wait_for_function``), never on a fixed sleep; the
conditions read ``window.jupyterapp``, which the server exposes because it is started with
``--LabApp.expose_app_in_browser=True``.
"""

from __future__ import annotations

import json
import os
import pathlib
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.parse
import urllib.request
from dataclasses import dataclass, field

import nbformat

REPO_ROOT = pathlib.Path(__file__).resolve().parents[2]
OUTPUT_DIR = REPO_ROOT / "test-output" / "browser"
CHROMIUM = "/usr/bin/chromium"

# Flags that keep Debian's chromium from trying hosts it cannot reach (see BROWSER_TESTING.md).
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]

# JupyterLab user settings: keep every cell in the DOM (so selectors find off-screen cells) and
# stop news and update look-ups.
USER_SETTINGS = {
    "@jupyterlab/notebook-extension/tracker.jupyterlab-settings": {"windowingMode": "none"},
    "@jupyterlab/apputils-extension/notification.jupyterlab-settings": {
        "fetchNews": "false",
        "checkForUpdates": False,
    },
}

LOCAL_HOSTS = {"127.0.0.1", "localhost"}
LOCAL_SCHEMES = {"blob", "data", "file", "about"}

START_TIMEOUT_S = 120.0
STOP_TIMEOUT_S = 15.0


class LabError(RuntimeError):
    """JupyterLab did not start, or a notebook did not run as expected."""


@dataclass
class Lab:
    """A JupyterLab server started for the tests.

    Attributes
    ----------
    base_url : str
        ``http://127.0.0.1:PORT/`` (with the trailing slash).
    token : str
        The server's token; :meth:`url` adds it to every address.
    root_dir : pathlib.Path
        The folder the server shows; notebooks for a test are written here.
    """

    base_url: str
    token: str
    root_dir: pathlib.Path
    process: subprocess.Popen = field(repr=False)
    home: pathlib.Path = field(repr=False)
    log_path: pathlib.Path = field(repr=False)

    def url(self, path: str = "") -> str:
        """Address of ``path`` on this server, with the token in the query string."""
        sep = "&" if "?" in path else "?"
        return f"{self.base_url}{path.lstrip('/')}{sep}token={self.token}"

    def api(self, method: str, path: str, timeout: float = 10.0):
        """Call the server's REST API; returns the decoded JSON body, or None when empty."""
        request = urllib.request.Request(
            self.base_url + path.lstrip("/"),
            method=method,
            headers={"Authorization": f"token {self.token}"},
        )
        with urllib.request.urlopen(request, timeout=timeout) as response:
            body = response.read()
        return json.loads(body) if body else None

    def log_tail(self, n_chars: int = 4000) -> str:
        """The end of the server's log, for error messages."""
        try:
            return self.log_path.read_text(errors="replace")[-n_chars:]
        except OSError:
            return "(no log)"


def is_local_url(url: str) -> bool:
    """True for addresses on this machine (and for blob:, data:, file:, about: ones)."""
    parts = urllib.parse.urlsplit(url)
    if parts.scheme in LOCAL_SCHEMES:
        return True
    return parts.scheme in {"http", "https", "ws", "wss"} and parts.hostname in LOCAL_HOSTS


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _write_user_settings(settings_dir: pathlib.Path) -> None:
    for rel, value in USER_SETTINGS.items():
        path = settings_dir / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(value))


def _write_kernelspec(data_dir: pathlib.Path) -> None:
    # Pin the notebook kernel to the interpreter running the tests (the project's venv), so the
    # kernel imports the same mwkin and widget libraries as the tests themselves.
    spec_dir = data_dir / "kernels" / "python3"
    spec_dir.mkdir(parents=True, exist_ok=True)
    spec = {
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "Python 3 (mwkin tests)",
        "language": "python",
    }
    (spec_dir / "kernel.json").write_text(json.dumps(spec))


def start_lab() -> Lab:
    """Start an isolated JupyterLab on a free port of 127.0.0.1 and wait until it answers.

    Returns
    -------
    Lab

    Raises
    ------
    LabError
        If the server exits or does not answer ``/api/status`` within ``START_TIMEOUT_S``.

    Notes
    -----
    Jupyter's config, data, runtime and IPython folders point into a temporary home, so nothing
    of the user's own set-up leaks in. The lab extensions of ipywidgets, bqplot and anywidget
    are still found: Jupyter searches ``sys.prefix/share/jupyter`` after ``JUPYTER_DATA_DIR``,
    and the server runs on ``sys.executable``, the venv's interpreter.
    """
    home = pathlib.Path(tempfile.mkdtemp(prefix="mwkin-lab-"))
    root_dir = home / "notebooks"
    settings_dir = home / "settings"
    for sub in ("config", "data", "runtime", "ipython", "workspaces", "notebooks"):
        (home / sub).mkdir()
    _write_user_settings(settings_dir)
    _write_kernelspec(home / "data")

    port = free_port()
    token = secrets.token_hex(16)
    env = dict(os.environ)
    env.update(
        JUPYTER_CONFIG_DIR=str(home / "config"),
        JUPYTER_DATA_DIR=str(home / "data"),
        JUPYTER_RUNTIME_DIR=str(home / "runtime"),
        IPYTHONDIR=str(home / "ipython"),
        JUPYTER_PLATFORM_DIRS="0",
        PYDEVD_DISABLE_FILE_VALIDATION="1",
    )
    cmd = [
        sys.executable,
        "-m",
        "jupyterlab",
        "--no-browser",
        "--allow-root",
        "--ServerApp.ip=127.0.0.1",
        f"--ServerApp.port={port}",
        "--ServerApp.port_retries=0",
        f"--IdentityProvider.token={token}",
        f"--ServerApp.root_dir={root_dir}",
        "--ServerApp.terminals_enabled=False",
        "--LabApp.expose_app_in_browser=True",
        "--LabApp.news_url=None",
        "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
        "--LabApp.extension_manager=readonly",
        f"--LabApp.user_settings_dir={settings_dir}",
        f"--LabApp.workspaces_dir={home / 'workspaces'}",
    ]
    log_path = home / "server.log"
    log = open(log_path, "wb")  # noqa: SIM115 - the child writes to it for the whole session
    process = subprocess.Popen(
        cmd,
        cwd=root_dir,
        env=env,
        stdout=log,
        stderr=subprocess.STDOUT,
        stdin=subprocess.DEVNULL,
        start_new_session=True,
    )
    log.close()
    lab = Lab(
        base_url=f"http://127.0.0.1:{port}/",
        token=token,
        root_dir=root_dir,
        process=process,
        home=home,
        log_path=log_path,
    )

    deadline = time.monotonic() + START_TIMEOUT_S
    while True:
        if process.poll() is not None:
            raise LabError(f"JupyterLab exited with code {process.returncode}:\n{lab.log_tail()}")
        try:
            urllib.request.urlopen(lab.url("api/status"), timeout=2).close()
            return lab
        except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
            pass
        if time.monotonic() > deadline:
            stop_lab(lab)
            raise LabError(f"JupyterLab did not answer within {START_TIMEOUT_S:.0f} s:\n{lab.log_tail()}")
        time.sleep(0.25)


def shutdown_kernels(lab: Lab) -> None:
    """Delete every session, then every remaining kernel, through the REST API."""
    try:
        for session in lab.api("GET", "api/sessions") or []:
            lab.api("DELETE", f"api/sessions/{session['id']}")
        for kernel in lab.api("GET", "api/kernels") or []:
            lab.api("DELETE", f"api/kernels/{kernel['id']}")
    except (urllib.error.URLError, ConnectionError, OSError):
        if lab.process.poll() is None:
            raise


def stop_lab(lab: Lab) -> None:
    """Stop the server by its pid (SIGTERM), then kill its process group if it lingers.

    The server's log is kept as ``test-output/browser/jupyterlab.log``; its temporary home goes.
    """
    process = lab.process
    if process.poll() is None:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=STOP_TIMEOUT_S)
        except subprocess.TimeoutExpired:
            pass
    try:
        os.killpg(process.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError):
        pass
    process.wait(timeout=STOP_TIMEOUT_S)
    OUTPUT_DIR.mkdir(parents=True, exist_ok=True)
    if lab.log_path.exists():
        shutil.copyfile(lab.log_path, OUTPUT_DIR / "jupyterlab.log")
    shutil.rmtree(lab.home, ignore_errors=True)


# --- notebooks -------------------------------------------------------------------------------


def write_notebook(lab: Lab, name: str, cells: list[str]) -> str:
    """Write a notebook of code cells into ``lab.root_dir``; returns its name (path in the lab)."""
    if not name.endswith(".ipynb"):
        name += ".ipynb"
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.cells = [nbformat.v4.new_code_cell(source) for source in cells]
    nbformat.write(nb, lab.root_dir / name)
    return name


def copy_notebook(lab: Lab, src_path: str | os.PathLike) -> str:
    """Copy a notebook (e.g. from ``example_notebooks/``) into ``lab.root_dir``; returns its name.

    A relative ``src_path`` is taken from the repository's top folder.
    """
    src = pathlib.Path(src_path)
    if not src.is_absolute():
        src = REPO_ROOT / src
    shutil.copyfile(src, lab.root_dir / src.name)
    return src.name


# --- driving the page ------------------------------------------------------------------------

_CURRENT_NOTEBOOK_JS = """
const app = window.jupyterapp;
const nb = app && app.shell && app.shell.currentWidget;
const ready = nb && nb.context && nb.context.isReady && nb.content && nb.sessionContext;
const kernel = ready && nb.sessionContext.session && nb.sessionContext.session.kernel;
"""

_WAIT_IDLE_JS = (
    "() => {"
    + _CURRENT_NOTEBOOK_JS
    + """
  return !!(kernel && kernel.status === 'idle' && !nb.sessionContext.pendingInput);
}"""
)

_WAIT_OPEN_JS = (
    "(name) => {"
    + _CURRENT_NOTEBOOK_JS
    + """
  return !!(kernel && nb.context.path === name && kernel.status === 'idle');
}"""
)

# 'done' once every code cell has an execution count and the kernel is idle; 'error: ...' as
# soon as an output of type error appears (run-all stops there, so waiting on would only time out).
_RUN_STATE_JS = (
    "() => {"
    + _CURRENT_NOTEBOOK_JS
    + """
  if (!kernel) return false;
  // JupyterLab does not execute an empty code cell, so it never gets an execution count.
  const cells = nb.content.widgets.filter(
    c => c.model.type === 'code' && c.model.sharedModel.getSource().trim() !== '');
  for (const cell of cells) {
    const outputs = cell.model.outputs.toJSON();
    for (const out of outputs) {
      if (out.output_type === 'error') {
        return 'error: ' + out.ename + ': ' + out.evalue + '\\n' + (out.traceback || []).join('\\n');
      }
    }
  }
  const running = cells.some(c => c.model.executionState === 'running');
  const executed = cells.every(c => c.model.executionCount !== null);
  return (executed && !running && kernel.status === 'idle') ? 'done' : false;
}"""
)

_CLEAR_JS = (
    "() => {"
    + _CURRENT_NOTEBOOK_JS
    + """
  for (const cell of nb.content.widgets) {
    if (cell.model.type !== 'code') continue;
    cell.model.outputs.clear();
    cell.model.executionCount = null;
  }
}"""
)

_OUTPUTS_TEXT_JS = (
    "() => {"
    + _CURRENT_NOTEBOOK_JS
    + """
  if (!ready) return '';
  const parts = [];
  for (const cell of nb.content.widgets) {
    if (cell.model.type !== 'code') continue;
    for (const out of cell.model.outputs.toJSON()) {
      if (out.output_type === 'stream') parts.push([].concat(out.text).join(''));
      else if (out.output_type === 'error') parts.push(out.ename + ': ' + out.evalue);
      else if (out.data && out.data['text/plain'] !== undefined)
        parts.push([].concat(out.data['text/plain']).join(''));
    }
  }
  return parts.join('\\n');
}"""
)


def wait_idle(page, timeout_ms: int = 60_000) -> None:
    """Wait until the current notebook's kernel is idle."""
    page.wait_for_function(_WAIT_IDLE_JS, timeout=timeout_ms)


def open_and_run(page, lab: Lab, name: str, timeout_ms: int = 180_000) -> None:
    """Open notebook ``name`` of ``lab``, run all cells and wait until every one has run.

    Raises
    ------
    LabError
        If a cell raised; the message carries the kernel's traceback.
    """
    path = urllib.parse.quote(name)
    page.goto(lab.url(f"lab/tree/{path}") + "&reset", timeout=timeout_ms)
    page.wait_for_function(_WAIT_OPEN_JS, arg=name, timeout=timeout_ms)
    # A copied notebook may hold stored outputs and execution counts; clear them first so the
    # wait below sees only what this run produced.
    page.evaluate(_CLEAR_JS)
    page.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
    state = page.wait_for_function(_RUN_STATE_JS, timeout=timeout_ms).json_value()
    if state != "done":
        raise LabError(f"notebook {name} failed in the browser:\n{state}")


def cell_outputs_text(page) -> str:
    """Text of all outputs of the current notebook (streams, text/plain, errors), one per line."""
    return page.evaluate(_OUTPUTS_TEXT_JS)


def screenshot(locator_or_page, name: str) -> pathlib.Path:
    """Save a PNG of a Playwright page or locator as ``test-output/browser/NAME.png``."""
    OUTPUT_DIR.mkdir(parents=True, exist_ok=True)
    path = OUTPUT_DIR / (name if name.endswith(".png") else name + ".png")
    locator_or_page.screenshot(path=str(path))
    return path


def execute_in_kernel(page, code, timeout_ms=60_000):
    """Run ``code`` in the current notebook's kernel (not in a cell); returns its printed text."""
    result = page.evaluate(
        """async ([code, timeout]) => {
          const nb = window.jupyterapp.shell.currentWidget;
          const kernel = nb.sessionContext.session.kernel;
          const future = kernel.requestExecute({ code, store_history: false });
          let text = '';
          future.onIOPub = (msg) => {
            const t = msg.header.msg_type;
            if (t === 'stream') text += msg.content.text;
            if (t === 'error') text += msg.content.ename + ': ' + msg.content.evalue;
          };
          const timer = new Promise((_, reject) => setTimeout(() => reject(new Error('timeout')), timeout));
          const reply = await Promise.race([future.done, timer]);
          return { status: reply.content.status, text };
        }""",
        [code, timeout_ms],
    )
    assert result["status"] == "ok", result["text"]
    return result["text"]


def wait_for_kernel_value(page, expr, predicate, timeout_s=30.0):
    """Poll ``json.dumps(expr)`` in the kernel until ``predicate`` holds; returns the value.

    ipywidgets sends a model's updates one at a time (the next waits for the kernel to finish the
    previous), so a value set in the browser can reach the kernel after a later execute request.
    """
    deadline = time.monotonic() + timeout_s
    while True:
        value = json.loads(execute_in_kernel(page, f"import json as _j; print(_j.dumps({expr}))"))
        if predicate(value) or time.monotonic() > deadline:
            return value
        time.sleep(0.1)
