"""Start the workbench: JupyterLab on 127.0.0.1 with a token, opened on the first notebook.

``python -m workbench.launch`` (what ``make lab`` runs) prints the address with
its token and keeps the server in the foreground until Ctrl-C. The server binds
to 127.0.0.1 only, refuses to move to another port, and gets a fresh random
token each time. No browser is opened on a machine without a display;
``--allow-root`` is passed only when running as root (containers, CI).

What the launcher guarantees, whatever Jupyter configuration the machine has:

* the token and the origin settings are given with the highest precedence: the
  origin settings on the command line, the token in a private (0600) config file
  named on the command line (``--config``, read after the user's own config files;
  the token itself stays out of the process list and the file is deleted once the
  server runs);
* before printing the address, it asks the server for ``/api/status`` without the
  token and refuses to go on (stopping the server, exit 2) unless the answer is a
  refusal and the same request with the token succeeds;
* the server's log lines pass through the launcher with the token masked;
* the server dies with the launcher, even on ``kill -9`` of the launcher
  (``PR_SET_PDEATHSIG`` on Linux; elsewhere the server is stopped on SIGTERM/Ctrl-C).
"""
from __future__ import annotations

import argparse
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
import urllib.error
import urllib.request
from dataclasses import dataclass
from pathlib import Path

__all__ = [
    "LaunchPlan",
    "check_token_demanded",
    "find_notebook",
    "free_port",
    "is_headless",
    "main",
    "mask_token",
    "plan_launch",
    "server_config_text",
]

#: Origin settings given on the command line: no cross-origin access, no remote access.
ORIGIN_ARGS = (
    "--ServerApp.allow_origin=",
    "--ServerApp.allow_origin_pat=",
    "--ServerApp.allow_remote_access=False",
    "--ServerApp.disable_check_xsrf=False",
)
TOKEN_MASK = "<token>"

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOKS = ROOT / "notebooks"
FIRST_NOTEBOOK_GLOB = "01_*.ipynb"


@dataclass(frozen=True)
class LaunchPlan:
    """What the launcher will run.

    Attributes
    ----------
    argv : tuple of str
        Command line of the server.
    env : dict
        Environment additions (the token, inline BokehJS).
    url : str
        Address of the first notebook, with the token.
    """

    argv: tuple[str, ...]
    env: dict
    url: str


def find_notebook(folder: Path = NOTEBOOKS) -> Path:
    """The first notebook (``01_*.ipynb``) in ``folder``; ValueError if there is none."""
    found = sorted(Path(folder).glob(FIRST_NOTEBOOK_GLOB))
    if not found:
        raise ValueError(f"no notebook matching {FIRST_NOTEBOOK_GLOB!r} in {str(folder)!r}")
    return found[0]


def free_port(host: str = "127.0.0.1") -> int:
    """A TCP port that is free on ``host`` right now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind((host, 0))
        return int(s.getsockname()[1])


def is_headless(environ=None, platform: str | None = None) -> bool:
    """True on a Linux/BSD machine without a graphical display (no DISPLAY or WAYLAND_DISPLAY)."""
    environ = os.environ if environ is None else environ
    platform = sys.platform if platform is None else platform
    if platform.startswith(("win", "darwin")):
        return False
    return not (environ.get("DISPLAY") or environ.get("WAYLAND_DISPLAY"))


def server_config_text(token: str) -> str:
    """Content of the private config file that sets the token (read after the user's files)."""
    if not token or any(c in token for c in "'\\\n\r"):
        raise ValueError("token must be non-empty URL-safe text")
    return (
        "# written by workbench.launch for one server run; deleted once the server runs\n"
        f"c.IdentityProvider.token = '{token}'\n"
        f"c.ServerApp.token = '{token}'\n"
        "c.ServerApp.password = ''\n"
        "c.ServerApp.allow_origin = ''\n"
        "c.ServerApp.allow_origin_pat = ''\n"
    )


def mask_token(text: str, token: str) -> str:
    """``text`` with every occurrence of ``token`` replaced by ``<token>``."""
    return text.replace(token, TOKEN_MASK) if token else text


def plan_launch(notebook: Path, *, port: int, token: str, as_root: bool, headless: bool,
                python: str = sys.executable, config_file: Path | None = None) -> LaunchPlan:
    """Command line, environment and URL of a JupyterLab server for one notebook.

    Parameters
    ----------
    notebook : pathlib.Path
        Notebook to open; its folder becomes the server's root.
    port : int
        TCP port on 127.0.0.1.
    token : str
        Access token (at least 32 characters).
    as_root : bool
        Whether the current user is root (adds ``--allow-root``).
    headless : bool
        Whether there is no display (adds ``--no-browser``).
    python : str
        Interpreter that runs JupyterLab.
    config_file : pathlib.Path, optional
        Private config file with the token (:func:`server_config_text`), passed as
        ``--config`` so that it overrides the user's Jupyter config files.
    """
    if not (1 <= int(port) <= 65535):
        raise ValueError(f"port must be 1-65535, got {port!r}")
    if len(token) < 32:
        raise ValueError("token must be at least 32 characters long")
    notebook = Path(notebook).resolve()
    if not notebook.is_file():
        raise ValueError(f"notebook {str(notebook)!r} does not exist")
    argv = [
        python, "-m", "jupyterlab",
        "--ip=127.0.0.1",
        f"--port={int(port)}",
        "--ServerApp.port_retries=0",
        f"--ServerApp.root_dir={notebook.parent}",
        f"--LabApp.default_url=/lab/tree/{notebook.name}",
    ]
    argv += ORIGIN_ARGS
    if config_file is not None:
        argv.append(f"--config={Path(config_file)}")
    if headless:
        argv.append("--no-browser")
    if as_root:
        argv.append("--allow-root")
    env = {"JUPYTER_TOKEN": token, "BOKEH_RESOURCES": "inline"}
    url = f"http://127.0.0.1:{int(port)}/lab/tree/{notebook.name}?token={token}"
    return LaunchPlan(tuple(argv), env, url)


def _is_root() -> bool:
    return hasattr(os, "geteuid") and os.geteuid() == 0


def _status(port: int, token: str | None, timeout: float = 5.0) -> tuple[int, dict]:
    url = f"http://127.0.0.1:{int(port)}/api/status"
    headers = {"Origin": "http://origin-check.invalid"}
    if token:
        headers["Authorization"] = f"token {token}"
    req = urllib.request.Request(url, headers=headers)
    try:
        with urllib.request.urlopen(req, timeout=timeout) as resp:  # noqa: S310 - fixed local address
            return resp.status, dict(resp.headers)
    except urllib.error.HTTPError as exc:
        with exc:
            return exc.code, dict(exc.headers)


def check_token_demanded(port: int, token: str, *, timeout: float = 120.0, alive=lambda: True) -> None:
    """Wait for the server on 127.0.0.1:``port`` and check that it demands ``token``.

    Parameters
    ----------
    port : int
        Server port on 127.0.0.1.
    token : str
        The token the server must demand.
    timeout : float
        Longest wait for the server to answer [s].
    alive : callable
        Returns False when the server process has ended (stop waiting).

    Raises
    ------
    ValueError
        The server answers without the token, does not accept the token, lets any
        origin read its answers, or does not answer in time.
    """
    deadline = time.monotonic() + timeout
    while True:
        if not alive():
            raise ValueError("the Jupyter server stopped before it answered (see its log above)")
        try:
            code, headers = _status(port, None)
            break
        except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
            if time.monotonic() > deadline:
                raise ValueError(f"no Jupyter server answered on 127.0.0.1:{port} within {timeout:g} s") from None
            time.sleep(0.25)
    if code < 400:
        raise ValueError(f"the server on 127.0.0.1:{port} answers without the token (HTTP {code}): a Jupyter "
                         "configuration switches the token off; refusing to run it")
    if headers.get("Access-Control-Allow-Origin", "").strip() == "*":
        raise ValueError(f"the server on 127.0.0.1:{port} lets any web page read its answers "
                         "(allow_origin = '*'); refusing to run it")
    code, _ = _status(port, token)
    if code != 200:
        raise ValueError(f"the server on 127.0.0.1:{port} does not accept the launcher's token (HTTP {code}); "
                         "is another server using this port?")


def _die_with_launcher(launcher_pid: int):
    """preexec_fn of the server: SIGTERM when the launcher dies, even by kill -9 (Linux)."""

    def setup():
        try:
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGTERM), 0, 0, 0)  # PR_SET_PDEATHSIG
        except (OSError, AttributeError):
            pass
        if os.getppid() != launcher_pid:  # the launcher died before prctl took effect
            os._exit(1)

    return setup


def _relay(stream, out, token: str) -> None:
    """Copy the server's log lines to ``out`` with the token masked."""
    for line in iter(stream.readline, ""):
        out.write(mask_token(line, token))
        out.flush()
    stream.close()


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m workbench.launch",
                                     description="Open the core-loss workbench in JupyterLab on this machine.")
    parser.add_argument("--port", type=int, default=None, help="port on 127.0.0.1 (default: a free one)")
    parser.add_argument("--notebook", type=Path, default=None, help="notebook to open (default: notebooks/01_*.ipynb)")
    parser.add_argument("--no-browser", action="store_true", help="do not open a browser")
    parser.add_argument("--dry-run", action="store_true", help="print the command and the address, start nothing")
    args = parser.parse_args(argv)
    token = secrets.token_urlsafe(32)
    private = Path(tempfile.mkdtemp(prefix="workbench-launch-"))  # 0700
    config = private / "launch_config.py"
    try:
        notebook = args.notebook or find_notebook()
        fd = os.open(config, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(server_config_text(token))
        plan = plan_launch(notebook, port=args.port or free_port(), token=token, config_file=config,
                           as_root=_is_root(), headless=args.no_browser or is_headless())
    except ValueError as exc:
        shutil.rmtree(private, ignore_errors=True)
        print(f"workbench.launch: {exc}", file=sys.stderr)
        return 2
    print("Core-loss workbench: results are estimates; verify temperature rise by test. Capturing converter\n"
          "waveforms involves hazardous voltages: follow local codes and licensed practice.\n")
    if args.dry_run:
        shutil.rmtree(private, ignore_errors=True)
        print(f"Open this address (it carries the access token):\n\n    {plan.url}\n")
        print(" ".join(plan.argv))
        return 0
    port = int(plan.url.split(":")[2].split("/")[0])
    env = {**os.environ, **plan.env}
    proc = subprocess.Popen(plan.argv, env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            errors="replace", preexec_fn=_die_with_launcher(os.getpid()))
    relay = threading.Thread(target=_relay, args=(proc.stdout, sys.stderr, token), daemon=True)
    relay.start()

    def _stop(signum, frame):  # SIGTERM to the launcher stops its server too, not left orphaned
        proc.terminate()

    signal.signal(signal.SIGTERM, _stop)
    try:
        try:
            check_token_demanded(port, token, alive=lambda: proc.poll() is None)
        except ValueError as exc:
            print(f"workbench.launch: {exc}", file=sys.stderr, flush=True)
            proc.terminate()
            try:
                proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()
            return 2
        finally:
            shutil.rmtree(private, ignore_errors=True)  # the server has read its config by now
        print(f"Open this address (it carries the access token):\n\n    {plan.url}\n")
        print("The server checked: it refuses requests without the token.")
        print("In the notebook, Run > Run All Cells makes the panels live. Ctrl-C stops the server.", flush=True)
        return proc.wait()
    except KeyboardInterrupt:
        proc.send_signal(signal.SIGINT)
        try:
            return proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.terminate()
            return proc.wait()
    finally:
        if proc.poll() is None:
            proc.terminate()


if __name__ == "__main__":
    sys.exit(main())
