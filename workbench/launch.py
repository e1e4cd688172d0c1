"""Start the workbench: JupyterLab on 127.0.0.1 with a token, opened on the first notebook.

``python -m workbench.launch`` (what ``make lab`` runs) prints the address with
its token and keeps the server in the foreground until Ctrl-C. The server binds
to 127.0.0.1 only, refuses to move to another port, and gets a fresh random
token each time (passed in the environment, not on the command line, so other
users of the machine cannot read it from the process list). No browser is
opened on a machine without a display; ``--allow-root`` is passed only when
running as root (containers, CI).
"""
from __future__ import annotations

import argparse
import os
import secrets
import signal
import socket
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

__all__ = ["LaunchPlan", "find_notebook", "free_port", "is_headless", "plan_launch", "main"]

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


def plan_launch(notebook: Path, *, port: int, token: str, as_root: bool, headless: bool,
                python: str = sys.executable) -> LaunchPlan:
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
    if headless:
        argv.append("--no-browser")
    if as_root:
        argv.append("--allow-root")
    env = {"JUPYTER_TOKEN": token, "BOKEH_RESOURCES": "inline"}
    url = f"http://127.0.0.1:{int(port)}/lab/tree/{notebook.name}?token={token}"
    return LaunchPlan(tuple(argv), env, url)


def _is_root() -> bool:
    return hasattr(os, "geteuid") and os.geteuid() == 0


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m workbench.launch",
                                     description="Open the core-loss workbench in JupyterLab on this machine.")
    parser.add_argument("--port", type=int, default=None, help="port on 127.0.0.1 (default: a free one)")
    parser.add_argument("--notebook", type=Path, default=None, help="notebook to open (default: notebooks/01_*.ipynb)")
    parser.add_argument("--no-browser", action="store_true", help="do not open a browser")
    parser.add_argument("--dry-run", action="store_true", help="print the command and the address, start nothing")
    args = parser.parse_args(argv)
    try:
        notebook = args.notebook or find_notebook()
        plan = plan_launch(notebook, port=args.port or free_port(), token=secrets.token_urlsafe(32),
                           as_root=_is_root(), headless=args.no_browser or is_headless())
    except ValueError as exc:
        print(f"workbench.launch: {exc}", file=sys.stderr)
        return 2
    print("Core-loss workbench: results are estimates; verify temperature rise by test. Capturing converter\n"
          "waveforms involves hazardous voltages: follow local codes and licensed practice.\n")
    print(f"Open this address (it carries the access token):\n\n    {plan.url}\n")
    print("In the notebook, Run > Run All Cells makes the panels live. Ctrl-C stops the server.", flush=True)
    if args.dry_run:
        print(" ".join(plan.argv))
        return 0
    env = {**os.environ, **plan.env}
    proc = subprocess.Popen(plan.argv, env=env)

    def _stop(signum, frame):  # SIGTERM to the launcher stops its server too, not left orphaned
        proc.terminate()

    signal.signal(signal.SIGTERM, _stop)
    try:
        return proc.wait()
    except KeyboardInterrupt:
        proc.send_signal(signal.SIGINT)
        try:
            return proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            proc.terminate()
            return proc.wait()


if __name__ == "__main__":
    sys.exit(main())
