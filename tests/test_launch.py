"""The launcher: JupyterLab on 127.0.0.1 with a token on the first notebook."""
from pathlib import Path

import pytest

from workbench import launch


def test_first_notebook_is_found():
    nb = launch.find_notebook()
    assert nb.name.startswith("01_") and nb.suffix == ".ipynb"


def test_plan_binds_localhost_with_a_token_kept_off_the_command_line():
    nb = launch.find_notebook()
    token = "t" * 40
    plan = launch.plan_launch(nb, port=8899, token=token, as_root=False, headless=True, python="py")
    argv = list(plan.argv)
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
