"""The launcher: JupyterLab on 127.0.0.1 with a token on the first notebook."""
from pathlib import Path

import pytest

from workbench import launch


def test_first_notebook_is_found():
    nb = launch.find_notebook()
    assert nb.name.startswith("01_") and nb.suffix == ".ipynb"


def test_plan_binds_localhost_with_a_token_kept_off_the_command_line(tmp_path):
    nb = launch.find_notebook()
    token = "t" * 40
    cfg = tmp_path / "launch_config.py"
    plan = launch.plan_launch(nb, port=8899, token=token, as_root=False, headless=True, python="py", config_file=cfg)
    argv = list(plan.argv)
    # origin settings on the command line, the token in the private config named there
    assert all(a in argv for a in launch.ORIGIN_ARGS) and f"--config={cfg}" in argv
    assert f"c.IdentityProvider.token = '{token}'" in launch.server_config_text(token)
    assert argv[:3] == ["py", "-m", "jupyterlab"]
    assert "--ip=127.0.0.1" in argv and "--port=8899" in argv and "--ServerApp.port_retries=0" in argv
    assert "--no-browser" in argv and "--allow-root" not in argv
    assert f"--LabApp.default_url=/lab/tree/{nb.name}" in argv
    assert not any(token in a for a in argv)  # the process list must not show it
    assert plan.env["JUPYTER_TOKEN"] == token and plan.env["BOKEH_RESOURCES"] == "inline"
    assert plan.url == f"http://127.0.0.1:8899/lab/tree/{nb.name}?token={token}"


def test_allow_root_and_browser_only_where_they_belong():
    nb = launch.find_notebook()
    root = launch.plan_launch(nb, port=8899, token="x" * 32, as_root=True, headless=False)
    assert "--allow-root" in root.argv and "--no-browser" not in root.argv


@pytest.mark.parametrize(("env", "platform", "headless"), [
    ({}, "linux", True), ({"DISPLAY": ":0"}, "linux", False), ({"WAYLAND_DISPLAY": "wayland-0"}, "linux", False),
    ({}, "darwin", False), ({}, "win32", False)])
def test_headless_detection(env, platform, headless):
    assert launch.is_headless(env, platform) is headless


def test_bad_inputs_are_named(tmp_path):
    nb = launch.find_notebook()
    with pytest.raises(ValueError, match="port must be 1-65535, got 0"):
        launch.plan_launch(nb, port=0, token="x" * 32, as_root=False, headless=True)
    with pytest.raises(ValueError, match="token must be at least 32"):
        launch.plan_launch(nb, port=8000, token="short", as_root=False, headless=True)
    with pytest.raises(ValueError, match="does not exist"):
        launch.plan_launch(tmp_path / "missing.ipynb", port=8000, token="x" * 32, as_root=False, headless=True)
    with pytest.raises(ValueError, match="no notebook matching '01_\\*.ipynb'"):
        launch.find_notebook(tmp_path)


def test_dry_run_prints_the_address(capsys):
    assert launch.main(["--dry-run", "--port", "8765"]) == 0
    out = capsys.readouterr().out
    assert "http://127.0.0.1:8765/lab/tree/01_" in out and "?token=" in out
    assert "temperature rise" in out and "hazardous voltages" in out


def test_free_port_is_bindable():
    import socket

    port = launch.free_port()
    with socket.socket() as s:
        s.bind(("127.0.0.1", port))
    assert Path(launch.__file__).name == "launch.py"


# --- the launcher against a hostile Jupyter configuration (issue 11 item 8) -------------------
import http.server  # noqa: E402
import json  # noqa: E402
import os  # noqa: E402
import signal  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import threading  # noqa: E402
import time  # noqa: E402
import urllib.error  # noqa: E402
import urllib.request  # noqa: E402

REPO = Path(__file__).resolve().parents[1]


def _get(url, headers=None):
    req = urllib.request.Request(url, headers=headers or {})
    try:
        with urllib.request.urlopen(req, timeout=10) as r:
            return r.status, dict(r.headers)
    except urllib.error.HTTPError as exc:
        with exc:
            return exc.code, dict(exc.headers)


def _port_open(port):
    import socket

    with socket.socket() as s:
        s.settimeout(1)
        return s.connect_ex(("127.0.0.1", port)) == 0


def _fake_server(status, headers=()):
    class Handler(http.server.BaseHTTPRequestHandler):
        def do_GET(self):  # noqa: N802
            self.send_response(status)
            for k, v in headers:
                self.send_header(k, v)
            self.end_headers()
            self.wfile.write(b"{}")

        def log_message(self, *a):
            pass

    srv = http.server.HTTPServer(("127.0.0.1", 0), Handler)
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    return srv


@pytest.mark.parametrize("status, headers, words", [
    (200, (), "answers without the token"),
    (403, (("Access-Control-Allow-Origin", "*"),), "any web page"),
    (403, (), "does not accept the launcher's token"),
])
def test_check_refuses_a_server_that_does_not_demand_the_token(status, headers, words):
    srv = _fake_server(status, headers)
    try:
        with pytest.raises(ValueError, match=words):
            launch.check_token_demanded(srv.server_address[1], "x" * 43, timeout=10)
    finally:
        srv.shutdown()
        srv.server_close()


def test_check_stops_waiting_when_the_server_died():
    with pytest.raises(ValueError, match="stopped before it answered"):
        launch.check_token_demanded(launch.free_port(), "x" * 43, timeout=10, alive=lambda: False)


def test_token_is_masked_in_log_lines():
    line = "[W ServerApp] 403 GET /api/contents?token=abcdefSECRET (127.0.0.1)"
    assert launch.mask_token(line, "abcdefSECRET") == "[W ServerApp] 403 GET /api/contents?token=<token> (127.0.0.1)"


@pytest.mark.slow
def test_launcher_keeps_the_token_against_a_config_that_removes_it(tmp_path):
    pytest.importorskip("jupyterlab")
    cfg = tmp_path / "jupyter-config"
    cfg.mkdir()
    # a throwaway user configuration that switches the token off and allows any origin
    (cfg / "jupyter_server_config.py").write_text(
        "c.IdentityProvider.token = ''\nc.ServerApp.token = ''\nc.ServerApp.allow_origin = '*'\n")
    (cfg / "jupyter_server_config.json").write_text(json.dumps({"ServerApp": {"allow_origin": "*"}}))
    port = launch.free_port()
    env = dict(os.environ, JUPYTER_CONFIG_DIR=str(cfg), JUPYTER_RUNTIME_DIR=str(tmp_path / "rt"),
               JUPYTER_DATA_DIR=str(tmp_path / "data"), PYTHONUNBUFFERED="1")
    proc = subprocess.Popen([sys.executable, "-m", "workbench.launch", "--port", str(port), "--no-browser"],
                            cwd=REPO, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    out_lines, err_lines = [], []
    threading.Thread(target=lambda: out_lines.extend(iter(proc.stdout.readline, "")), daemon=True).start()
    threading.Thread(target=lambda: err_lines.extend(iter(proc.stderr.readline, "")), daemon=True).start()
    try:
        deadline = time.monotonic() + 180
        while not any("?token=" in line for line in out_lines) and time.monotonic() < deadline:
            assert proc.poll() is None, "".join(err_lines)
            time.sleep(0.2)
        url = next(line.strip() for line in out_lines if "?token=" in line)
        token = url.split("?token=")[1]
        base = f"http://127.0.0.1:{port}"
        assert _get(base + "/api/status")[0] == 403  # the user's empty token did not win
        code, headers = _get(base + "/api/status", {"Origin": "http://evil.example"})
        # a cross-origin request without the token is blocked (Jupyter answers 404 to a refused origin;
        # with the user's allow_origin = '*' it would pass the origin check and carry "*")
        assert code in (403, 404) and headers.get("Access-Control-Allow-Origin") != "*"
        assert _get(base + "/api/status", {"Authorization": f"token {token}"})[0] == 200
        # a refused request carrying the token in its URL: Jupyter logs it; the launcher masks it
        # (Jupyter scrubs a `token=` parameter but not a token inside another parameter's value)
        _get(base + f"/api/status?next=%2Flab%3Ftoken%3D{token}")
        _get(base + f"/api/contents?token={token}", {"Origin": "http://evil.example"})
        time.sleep(1.0)
        assert [line for line in err_lines if token in line] == []
        assert not list(tmp_path.glob("workbench-launch-*"))
        # kill -9 of the launcher must not leave the server listening
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        deadline = time.monotonic() + 60
        while _port_open(port) and time.monotonic() < deadline:
            time.sleep(0.5)
        assert not _port_open(port)
    finally:
        proc.kill()
        proc.wait(timeout=30)
        proc.stdout.close()
        proc.stderr.close()
