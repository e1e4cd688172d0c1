"""Plain helpers for driving the notebooks in a real browser (used by tests/browser and benchmarks).

A JupyterLab server on 127.0.0.1 with isolated Jupyter folders and its own token, serving temp
copies of the notebooks; Debian's Chromium through Playwright with every request not to
127.0.0.1 aborted. Nothing here imports pytest.
"""
from __future__ import annotations

import contextlib
import io
import json
import os
import re
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
NOTEBOOKS = ROOT / "notebooks"
ARTIFACTS = ROOT / "artifacts" / "browser"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync",
                 "--disable-dev-shm-usage", "--no-proxy-server"]
#: Requests that may leave the page: the local server, data: and blob: URLs, local files.
LOCAL_ONLY = re.compile(r"^(?!https?://127\.0\.0\.1[:/]|data:|blob:|file:).*")


def chromium_path() -> str | None:
    """Debian's Chromium, or None."""
    return shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def get_json(url: str):
    """GET a JSON document (127.0.0.1 only)."""
    with urllib.request.urlopen(url, timeout=5) as r:
        return json.loads(r.read().decode())


@contextlib.contextmanager
def lab_server(notebooks, *, workdir: Path | None = None):
    """A JupyterLab server serving temp copies of ``notebooks``; yields a dict (base, token, log).

    The server is stopped by its own PID on leaving.
    """
    with contextlib.ExitStack() as stack:
        tmp = Path(workdir) if workdir else Path(stack.enter_context(tempfile.TemporaryDirectory(prefix="lab-")))
        work = tmp / "work"
        work.mkdir(parents=True, exist_ok=True)
        for nb in notebooks:
            shutil.copy(nb, work / Path(nb).name)
        settings = tmp / "lab-settings" / "@jupyterlab" / "notebook-extension"
        settings.mkdir(parents=True, exist_ok=True)
        # render every cell, also off-screen ones (JupyterLab virtualises long notebooks by default)
        (settings / "tracker.jupyterlab-settings").write_text(json.dumps({"windowingMode": "none"}))
        apputils = tmp / "lab-settings" / "@jupyterlab" / "apputils-extension"
        apputils.mkdir(parents=True, exist_ok=True)
        (apputils / "notification.jupyterlab-settings").write_text(json.dumps({"fetchNews": "false"}))
        env = {**os.environ, "JUPYTER_CONFIG_DIR": str(tmp / "config"), "JUPYTER_DATA_DIR": str(tmp / "data"),
               "JUPYTER_RUNTIME_DIR": str(tmp / "runtime"), "JUPYTERLAB_SETTINGS_DIR": str(tmp / "lab-settings"),
               "JUPYTERLAB_WORKSPACES_DIR": str(tmp / "workspaces"), "BOKEH_RESOURCES": "inline",
               "FLUXHEAT_EXPORTS": str(tmp / "exports")}
        port = _free_port()
        token = secrets.token_hex(24)
        argv = [sys.executable, "-m", "jupyterlab", "--ip=127.0.0.1", f"--port={port}", "--ServerApp.port_retries=0",
                "--no-browser", f"--ServerApp.root_dir={work}", f"--IdentityProvider.token={token}",
                "--LabApp.news_url=None", "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate"]
        if hasattr(os, "geteuid") and os.geteuid() == 0:
            argv.append("--allow-root")
        log_path = tmp / "server.log"
        log = open(log_path, "wb")
        proc = subprocess.Popen(argv, env=env, stdout=log, stderr=subprocess.STDOUT)
        base = f"http://127.0.0.1:{port}"
        try:
            deadline = time.monotonic() + 90
            while True:
                try:
                    get_json(f"{base}/api/status?token={token}")
                    break
                except (urllib.error.URLError, ConnectionError, TimeoutError):
                    if proc.poll() is not None or time.monotonic() > deadline:
                        raise RuntimeError("JupyterLab did not start:\n" + log_path.read_text()[-3000:]) from None
                    time.sleep(0.3)
            yield {"base": base, "token": token, "log": log_path, "work": work}
        finally:
            proc.send_signal(signal.SIGTERM)  # our own server, by its PID
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()
            log.close()


def shutdown_kernels(server):
    """End every session and its kernel (keeps the 2-core machine free between notebooks)."""
    for sess in get_json(f"{server['base']}/api/sessions?token={server['token']}"):
        req = urllib.request.Request(f"{server['base']}/api/sessions/{sess['id']}?token={server['token']}",
                                     method="DELETE")
        with contextlib.suppress(urllib.error.URLError):
            urllib.request.urlopen(req, timeout=20).close()


def wait_idle(server, timeout=150.0):
    """Wait until every kernel of the server is idle."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        sessions = get_json(f"{server['base']}/api/sessions?token={server['token']}")
        states = [s["kernel"]["execution_state"] for s in sessions if s.get("kernel")]
        if states and all(s == "idle" for s in states):
            return
        time.sleep(0.4)
    raise AssertionError(f"kernel not idle after {timeout} s")


def settle(page, server, selector: str, quiet: float = 2.0, timeout: float = 60.0):
    """Wait until the text of ``selector`` has not changed for ``quiet`` seconds and the kernel is idle.

    Key presses queue several updates; the kernel is idle for a moment between them, so one
    idle reading does not mean the page shows the last state.
    """
    deadline = time.monotonic() + timeout
    last, since = None, time.monotonic()
    while time.monotonic() < deadline:
        text = page.locator(selector).first.inner_text()
        if text != last:
            last, since = text, time.monotonic()
        elif time.monotonic() - since >= quiet:
            wait_idle(server)
            if page.locator(selector).first.inner_text() == last:
                return last
        time.sleep(0.25)
    raise AssertionError(f"{selector} still changing after {timeout} s")


def launch(pw, chromium: str, *, width=1500, height=2600):
    """Browser and context with every request not to 127.0.0.1 aborted."""
    browser = pw.chromium.launch(executable_path=chromium, headless=True, args=CHROMIUM_ARGS)
    context = browser.new_context(viewport={"width": width, "height": height})
    context.route(LOCAL_ONLY, lambda route: route.abort())
    return browser, context


def open_and_run(page, server, notebook_name: str):
    """Open a notebook in JupyterLab (a fresh workspace of its own) and run all cells (Run > Run All Cells)."""
    space = re.sub(r"[^A-Za-z0-9]", "", notebook_name)[:20] + secrets.token_hex(3)
    page.goto(f"{server['base']}/lab/workspaces/{space}/tree/{notebook_name}?reset&token={server['token']}")
    page.wait_for_selector(".jp-Notebook .jp-Cell", timeout=120_000)
    wait_idle(server)
    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(r"^Run$")).click()
    page.locator(".lm-Menu-itemLabel", has_text=re.compile(r"^Run All Cells$")).click()


def ink(png: bytes) -> int:
    """Number of pixels that are not (near) white in a PNG."""
    import numpy as np
    from PIL import Image

    grey = np.asarray(Image.open(io.BytesIO(png)).convert("L"))
    return int(np.count_nonzero(grey < 200))


def figure_length(page, name: str) -> int:
    """Rows in the first data source of the bokeh figure named ``name`` (-1 if not found)."""
    return page.evaluate("""(name) => {
        if (!window.Bokeh) return -1;
        const doc = Bokeh.documents.find(d => d.get_model_by_name(name));
        if (!doc) return -1;
        const fig = doc.get_model_by_name(name);
        const r = fig.renderers.find(r => r.data_source && r.data_source.get_length() > 0);
        return r ? r.data_source.get_length() : 0;
    }""", name)
