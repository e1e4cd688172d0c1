"""Command-line contract: JSON keys and types, exit codes, outputs of a folder run.

Run through subprocesses as a user would. Numeric checks use closed forms named beside
them; the demo captures are invented data (data/captures/README.md).
"""
import json
import math
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CAPTURES = ROOT / "data" / "captures"
FLYBACK = ["capture", str(CAPTURES / "flyback_dcm_ferrite_100k.csv"), "--turns", "20", "--area", "60mm2",
           "--volume", "4.2cm3", "--material", "mnzn-power-ferrite"]
INVERTER = ["capture", str(CAPTURES / "inverter_pwm_sisteel_50hz.csv"), "--turns", "100", "--sense-turns", "50",
            "--area", "2cm2", "--path-length", "0.25", "--material", "M270-35A"]


def wb(*args, cwd=ROOT):
    env = {**os.environ, "PYTHONWARNINGS": "error"}
    return subprocess.run([sys.executable, "-m", "workbench", *args], capture_output=True, text=True,
                          cwd=cwd, env=env, timeout=300)


def _one_error_line(proc, *needles):
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    for needle in needles:
        assert needle in lines[0]


# ---------------------------------------------------------------------------
# capture
# ---------------------------------------------------------------------------
def test_capture_json_contract_voltage_capture():
    proc = wb(*FLYBACK, "--json")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    for key in ("frequency_hz", "flux_pp_t", "b_peak_t", "loss_w_m3", "classical_w_m3"):
        assert isinstance(d[key], float) and math.isfinite(d[key]) and d[key] > 0, key
    assert isinstance(d["periods_used"], int) and d["periods_used"] == 7  # 7.43 periods in the file
    assert isinstance(d["warnings"], list)
    assert "measured_loss_w_m3" not in d  # not a two-winding capture
    # the generator's switching frequency and Faraday's law: pp = V_in D T / (N A)
    # = 48 V * 0.35 / 100.4 kHz / (20 * 60 mm2) (closed form)
    assert d["frequency_hz"] == pytest.approx(100.4e3, rel=1e-3)
    assert d["flux_pp_t"] == pytest.approx(48 * 0.35 / 100.4e3 / (20 * 60e-6), rel=0.02)
    assert d["b_peak_t"] == pytest.approx(d["flux_pp_t"] / 2)


def test_capture_json_contract_two_winding_with_separation():
    proc = wb(*INVERTER, "--json")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    for key in ("loss_w_m3", "hysteresis_w_m3", "classical_w_m3", "excess_w_m3", "measured_loss_w_m3",
                "skew_sensitivity_per_ns", "measured_to_model_ratio"):
        assert isinstance(d[key], float), key
    assert d["frequency_hz"] == pytest.approx(50.0, rel=1e-3)
    assert d["periods_used"] == 3
    assert d["measured_to_model_ratio"] == pytest.approx(d["measured_loss_w_m3"] / d["loss_w_m3"])


def test_capture_with_a_bare_steinmetz_set():
    proc = wb(*FLYBACK[:8], "--steinmetz", "1.8", "1.45", "2.6", "--json")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["loss_w_m3"] > 0 and "hysteresis_w_m3" not in d


def test_capture_human_output_has_units_warnings_and_the_caution():
    proc = wb(*INVERTER)
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    assert "frequency" in out and "Hz" in out and "W/m3" in out and "measured loss" in out
    assert "estimates" in out and "temperature rise" in out and "hazardous voltages" in out


@pytest.mark.parametrize(
    "args, needles",
    [
        (["capture", "no/such/file.csv", "--turns", "10", "--area", "1e-4"], ["no/such/file.csv"]),
        ([*FLYBACK[:3], "abc", *FLYBACK[4:]], ["--turns", "abc"]),
        ([*FLYBACK[:5], "60 mm", *FLYBACK[6:]], ["--area", "60 mm"]),
        ([*FLYBACK[:5], "-1", *FLYBACK[6:]], ["--area"]),
        ([*FLYBACK[:9], "unobtainium"], ["unobtainium"]),
        ([*FLYBACK[:8], "--steinmetz", "1.8", "x", "2.6"], ["ALPHA"]),
        ([*FLYBACK[:8], "--steinmetz", "1.8", "1.45", "-2"], ["beta"]),
        ([*FLYBACK, "--column", "v"], ["--column"]),
    ],
)
def test_capture_bad_arguments_exit_2_with_one_line(args, needles):
    proc = wb(*args, "--json")
    _one_error_line(proc, *needles)
    assert proc.stdout == ""


def test_material_and_steinmetz_together_is_a_usage_error():
    proc = wb(*FLYBACK, "--steinmetz", "1", "1.5", "2.5")
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert "not allowed with" in proc.stderr


# ---------------------------------------------------------------------------
# folder
# ---------------------------------------------------------------------------
@pytest.fixture()
def bench(tmp_path):
    src = tmp_path / "bench"
    src.mkdir()
    # two two-winding captures: the options below give --sense-turns, which a file without a
    # current channel (the flyback capture) has to refuse
    for name in ("inverter_pwm_sisteel_50hz.csv", "inverter_pwm_sisteel_50hz_repeat.csv"):
        (src / name).write_bytes((CAPTURES / "inverter_pwm_sisteel_50hz.csv").read_bytes())
    (src / "broken.csv").write_text("time (s),v (V)\n0,1\n1e-6,nan\n2e-6,3\n", encoding="utf-8")
    return src


FOLDER_OPTS = ["--turns", "100", "--sense-turns", "50", "--area", "2cm2", "--path-length", "0.25",
               "--material", "M270-35A"]


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_folder_writes_one_row_per_file_and_a_summary(bench, tmp_path, jobs):
    out = tmp_path / "out" / "run"
    out.parent.mkdir()
    proc = wb("folder", str(bench), "--out", str(out), "--jobs", jobs, "--json", *FOLDER_OPTS)
    assert proc.returncode == 1  # one file failed; its row carries the error
    errors = [ln for ln in proc.stderr.strip().splitlines() if "capped at the" not in ln]  # one-core machines
    assert "Traceback" not in proc.stderr and len(errors) == 1
    summary = json.loads(proc.stdout)
    assert summary["files_analysed"] == 2 and summary["files_failed"] == 1
    rows = [json.loads(line) for line in (tmp_path / "out" / "run.jsonl").read_text().splitlines()]
    assert sorted(Path(r["file"]).name for r in rows) == ["broken.csv", "inverter_pwm_sisteel_50hz.csv",
                                                         "inverter_pwm_sisteel_50hz_repeat.csv"]
    bad = next(r for r in rows if r["file"].endswith("broken.csv"))
    assert bad["status"] == "error" and "broken.csv" in bad["error"] and "row 3" in bad["error"]
    good = next(r for r in rows if r["file"].endswith("inverter_pwm_sisteel_50hz.csv"))
    assert good["status"] == "ok" and good["measured_loss_w_m3"] > 0
    csv_lines = (tmp_path / "out" / "run.csv").read_text().splitlines()
    assert csv_lines[0].startswith("file,status,error") and len(csv_lines) == 4
    assert json.loads((tmp_path / "out" / "run.summary.json").read_text())["files_failed"] == 1
    assert not [p for p in (tmp_path / "out").iterdir() if p.name.endswith(".tmp")]


def test_folder_resume_skips_files_already_done(bench, tmp_path):
    out = tmp_path / "run"
    first = wb("folder", str(bench), "--out", str(out), "--json", *FOLDER_OPTS)
    assert first.returncode == 1
    # an interrupted write leaves a torn last line; resume must drop it, not choke on it
    with open(tmp_path / "run.jsonl", "a", encoding="utf-8") as fh:
        fh.write('{"file": "half a row')
    second = wb("folder", str(bench), "--out", str(out), "--resume", "--json", *FOLDER_OPTS)
    summary = json.loads(second.stdout)
    assert summary["files_skipped"] == 2 and summary["files_analysed"] == 0
    lines = (tmp_path / "run.jsonl").read_text().splitlines()
    assert all(json.loads(line) for line in lines)  # every line whole
    # changed settings give new keys: nothing is skipped
    third = wb("folder", str(bench), "--out", str(out), "--resume", "--json", *FOLDER_OPTS, "--no-skin")
    assert json.loads(third.stdout)["files_skipped"] == 0


def test_folder_refuses_to_clobber_existing_outputs(bench, tmp_path):
    out = tmp_path / "run"
    (tmp_path / "run.jsonl").write_text("keep me\n")
    proc = wb("folder", str(bench), "--out", str(out), *FOLDER_OPTS)
    _one_error_line(proc, "--resume")
    assert (tmp_path / "run.jsonl").read_text() == "keep me\n"


def test_folder_creates_a_missing_output_folder(bench, tmp_path):
    # the README example (--out results/run1) on a fresh clone: results/ does not exist yet
    proc = wb("folder", str(bench), "--out", str(tmp_path / "results" / "run1"), "--json", *FOLDER_OPTS)
    assert proc.returncode == 1  # broken.csv
    assert json.loads(proc.stdout)["files_analysed"] == 2
    assert (tmp_path / "results" / "run1.jsonl").exists()


def test_folder_bad_option_creates_no_folder(bench, tmp_path):
    proc = wb("folder", str(bench), "--out", str(tmp_path / "missing" / "run"), *FOLDER_OPTS, "--temperature", "-300")
    _one_error_line(proc, "--temperature")
    assert not (tmp_path / "missing").exists()


def test_folder_accepts_temperature_and_echoes_the_settings(bench, tmp_path):
    proc = wb("folder", str(bench), "--out", str(tmp_path / "run"), "--json", *FOLDER_OPTS, "--temperature", "60")
    assert proc.returncode == 1, proc.stderr
    summary = json.loads(proc.stdout)
    assert summary["settings"]["temperature"] == "60" and summary["files_analysed"] == 2


def test_folder_summary_shows_errors_and_warnings_first(bench, tmp_path):
    proc = wb("folder", str(bench), "--out", str(tmp_path / "run"), *FOLDER_OPTS)
    assert proc.returncode == 1
    lines = proc.stdout.splitlines()
    assert lines[0].startswith("analysed 2 file(s): 1 failed, ") and " with warnings" in lines[0]
    assert lines[1].startswith("  error: broken.csv: ")
    summary = json.loads((tmp_path / "run.summary.json").read_text())
    assert summary["problems"][0]["status"] == "error"
    n_warned = sum(1 for line in (tmp_path / "run.jsonl").read_text().splitlines()
                   if json.loads(line).get("warnings"))
    assert summary["files_with_warnings"] == n_warned
    assert [p["status"] for p in summary["problems"]] == ["error"] + ["warning"] * n_warned


def test_folder_progress_is_quiet_when_piped_and_live_on_a_terminal(bench, tmp_path):
    import io

    from workbench.cli.folder import _Progress

    proc = wb("folder", str(bench), "--out", str(tmp_path / "run"), *FOLDER_OPTS)
    assert "\r" not in proc.stderr and "[1/3]" not in proc.stderr

    class Tty(io.StringIO):
        def isatty(self):
            return True

    tty = Tty()
    progress = _Progress(3, tty)
    for name, status in (("a.csv", "ok"), ("b.csv", "error"), ("c.csv", "skipped")):
        progress({"file": f"/x/{name}", "status": status})
    progress.close()
    text = tty.getvalue()
    assert "[1/3] 0 failed  a.csv" in text and "[3/3] 1 failed  c.csv" in text and text.endswith("\r")


def test_folder_caps_jobs_at_the_cores(bench, tmp_path):
    cores = len(os.sched_getaffinity(0))
    proc = wb("folder", str(bench), "--out", str(tmp_path / "run"), "--jobs", "256", "--json", *FOLDER_OPTS)
    assert proc.returncode == 1
    assert f"--jobs 256 capped at the {cores} core(s) available" in proc.stderr


def test_library_wording_becomes_option_wording():
    from workbench.cli.folder import cli_wording

    assert cli_wording("no time column; give it with time_column= or a sample interval") == (
        "no time column; use --time-column or a sample interval")
    assert cli_wording("a decimal comma: pass decimal=','") == "a decimal comma: use --decimal"
    assert cli_wording("pass columns= or channels=") == "use --column CHANNEL=COLUMN or use --column CHANNEL=COLUMN"
    assert cli_wording("nothing to change here") == "nothing to change here"


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root ignores directory permissions")
def test_folder_with_output_in_a_read_only_folder_leaves_nothing(bench, tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        proc = wb("folder", str(bench), "--out", str(ro / "run"), *FOLDER_OPTS)
        _one_error_line(proc, "not writable")
        assert list(ro.iterdir()) == []
    finally:
        ro.chmod(0o755)


def test_folder_bad_option_writes_nothing(bench, tmp_path):
    proc = wb("folder", str(bench), "--out", str(tmp_path / "run"), *FOLDER_OPTS[:-1], "nope")
    _one_error_line(proc, "nope")
    assert not list(tmp_path.glob("run*"))


# ---------------------------------------------------------------------------
# materials, shape, crossover
# ---------------------------------------------------------------------------
def test_materials_list_and_show():
    proc = wb("materials", "--json")
    assert proc.returncode == 0
    names = [m["name"] for m in json.loads(proc.stdout)]
    assert "M270-35A" in names
    proc = wb("materials", "show", "M270-35A", "--json")
    d = json.loads(proc.stdout)
    assert d["steinmetz"]["k"] > 0 and d["sources"]["steinmetz.k"]
    text = wb("materials", "show", "M270-35A").stdout
    assert "source:" in text
    _one_error_line(wb("materials", "show", "unobtainium"), "unobtainium")


def test_shape_sine_with_bare_steinmetz_equals_the_steinmetz_equation():
    # for a sine the iGSE reduces to k f^alpha B^beta (Venkatachalam et al., COMPEL 2002)
    proc = wb("shape", "--shape", "sine", "--b-peak", "100mT", "--freq", "100k", "--steinmetz", "1.8", "1.45", "2.6",
              "--json")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["loss_w_m3"] == pytest.approx(1.8 * 1e5**1.45 * 0.1**2.6, rel=1e-3)


def test_shape_triangle_on_a_material():
    proc = wb("shape", "--shape", "triangle", "--duty", "0.3", "--b-peak", "0.1T", "--freq", "100k",
              "--material", "mnzn-power-ferrite", "--json")
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["loss_w_m3"] > 0 and d["duty"] == 0.3 and d["shape"] == "triangle"
    _one_error_line(wb("shape", "--shape", "triangle", "--duty", "1.5", "--b-peak", "0.1T", "--freq", "100k",
                       "--material", "mnzn-power-ferrite"), "duty")


def test_crossover_closed_form_without_skin_effect():
    d = json.loads(wb("materials", "show", "M270-35A", "--json").stdout)
    proc = wb("crossover", "--material", "M270-35A", "--b-peak", "1.5T", "--no-skin", "--json")
    assert proc.returncode == 0, proc.stderr
    out = json.loads(proc.stdout)
    # k_h f B^b_h = pi^2 d^2 f^2 B^2 / (6 rho)  =>  f_x = 6 rho k_h B^(b_h - 2) / (pi^2 d^2)
    # (sine; G. Bertotti, IEEE Trans. Magn. 24(1), 1988)
    sep = d["separation"]
    expected = 6 * d["resistivity_ohm_m"] * sep["k_hyst"] * 1.5 ** (sep["beta_hyst"] - 2) / (
        math.pi**2 * d["thickness_m"] ** 2)
    # rel 1e-4: the library evaluates the sine as 1024 linear segments, exact to ~(pi/1024)^2
    assert out["crossover_hz"] == pytest.approx(expected, rel=1e-4)
    thin = json.loads(wb("crossover", "--material", "M270-35A", "--b-peak", "1.5T", "--no-skin",
                         "--thickness", "0.175mm", "--json").stdout)
    assert thin["crossover_hz"] == pytest.approx(4 * expected, rel=1e-4)  # f_x ~ 1/d^2


def test_crossover_bad_flux_unit():
    _one_error_line(wb("crossover", "--material", "M270-35A", "--b-peak", "1.5 mm"), "--b-peak")


def test_readme_folder_example_runs_on_a_fresh_clone(tmp_path):
    import re
    import shlex
    import shutil

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    line = next(ln for ln in readme.splitlines() if "workbench folder" in ln and "--out" in ln)
    argv = shlex.split(line.split("workbench", 1)[1])
    clone = tmp_path / "clone"
    shutil.copytree(ROOT / "data", clone / "data")  # a fresh clone: data, no results/ folder
    proc = wb(*argv, cwd=clone)
    assert proc.returncode == 0, proc.stderr
    out = argv[argv.index("--out") + 1]
    assert (clone / f"{out}.jsonl").is_file() and (clone / f"{out}.summary.json").is_file()
    # and the materials hint of the README is a real command
    assert re.search(r"materials show NAME", readme)
    shown = wb("materials", "show", "M270-35A")
    assert shown.returncode == 0 and "M270-35A" in shown.stdout


def test_folder_refuses_an_output_another_run_holds(bench, tmp_path):
    import fcntl

    with open(tmp_path / "run.jsonl.lock", "w") as holder:
        fcntl.flock(holder.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        holder.write("pid 777\n")
        holder.flush()
        proc = wb("folder", str(bench), "--out", str(tmp_path / "run"), *FOLDER_OPTS)
    _one_error_line(proc, "being written by another run (pid 777)")
    assert not (tmp_path / "run.jsonl").exists()
