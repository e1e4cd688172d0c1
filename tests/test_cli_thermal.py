"""`workbench thermal`: the command-line contract, the same numbers as the API, clear refusals.

Independent values: H_dc = N I_dc / l_e by hand (Ampere's law, common practice, no source) and
the DC current built into the invented demo capture by data/captures/make_buck_capture.py.
"""
from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import pytest

from workbench.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
BUCK = ROOT / "data" / "captures" / "buck_inductor_ferrite_dc.csv"
SHAPE = ["--material", "mnzn-power-ferrite", "--shape", "triangle", "--duty", "0.4", "--b-peak", "120mT",
         "--freq", "100k", "--volume", "5.6cm3", "--ambient", "40"]
CONTRACT = ("temperature_c", "loss_w_m3", "loss_w", "loop_gain", "stable", "runaway", "max_ambient_c",
            "max_b_peak_t", "warnings")


def run(*args):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["thermal", *args])
    return code, out.getvalue(), err.getvalue()


def run_json(*args):
    code, out, err = run(*args, "--json")
    assert code == 0, err
    return json.loads(out)


def test_contract_and_same_number_as_the_api():
    from workbench.analysis.thermal import make_cooling, thermal_operating_point
    from workbench.shapes import ShapeSpec

    d = run_json(*SHAPE, "--rth", "18", "--winding-loss", "400mW")
    for key in CONTRACT:
        assert key in d
    assert d["stable"] is True and d["runaway"] is False
    api = thermal_operating_point(ShapeSpec("triangle", 0.12, 1e5, 0.4), "mnzn-power-ferrite", volume=5.6e-6,
                                  ambient=40.0, cooling=make_cooling(r_th=18.0), winding_loss=0.4)
    assert d["temperature_c"] == pytest.approx(api.temperature_c, rel=1e-12)
    assert d["loss_w_m3"] == pytest.approx(api.loss_w_m3, rel=1e-12)
    assert d["max_ambient_c"] == pytest.approx(api.max_ambient_c, rel=1e-12)
    assert d["max_b_peak_t"] == pytest.approx(api.max_b_peak_t, rel=1e-12)
    assert d["inputs"]["volume_m3"] == pytest.approx(5.6e-6) and d["cautions"]


def test_runaway_prints_null_temperature():
    d = run_json("--material", "mnzn-power-ferrite", "--shape", "sine", "--b-peak", "0.2", "--freq", "200k",
                 "--volume", "8cm3", "--rth", "30", "--ambient", "25")
    assert d["runaway"] is True and d["stable"] is False
    assert d["temperature_c"] is None and d["loss_w"] is None and d["loop_gain"] is None
    assert any("thermal runaway" in w for w in d["warnings"])
    code, text, _ = run("--material", "mnzn-power-ferrite", "--shape", "sine", "--b-peak", "0.2", "--freq", "200k",
                        "--volume", "8cm3", "--rth", "30", "--ambient", "25")
    assert code == 0 and "THERMAL RUNAWAY" in text


def test_surface_area_and_handbook_cooling():
    conv = run_json(*SHAPE, "--surface-area", "40cm2")
    hand = run_json(*SHAPE, "--surface-area", "40cm2", "--cooling", "handbook")
    assert conv["cooling"]["kind"] == "convection_radiation" and hand["cooling"]["kind"] == "handbook"
    assert conv["temperature_c"] > 40 and hand["temperature_c"] > 40


def test_dc_current_gives_h_dc_by_hand():
    # 8 turns, 0.4 A, 55 mm: H = 8 * 0.4 / 0.055 = 58.18 A/m
    d = run_json(*SHAPE, "--rth", "18", "--i-dc", "0.4", "--turns", "8", "--path-length", "55mm")
    assert d["h_dc_a_m"] == pytest.approx(58.18, rel=1e-3)
    assert any("no DC-bias data" in w for w in d["warnings"])


def test_capture_uses_its_own_dc_current():
    if not BUCK.exists():
        pytest.skip("demo capture not generated")
    args = ["--material", "mnzn-power-ferrite", "--capture", str(BUCK), "--turns", "8", "--area", "30mm2",
            "--path-length", "55mm", "--volume", "1.65cm3", "--rth", "45", "--ambient", "55"]
    d = run_json(*args)
    # built into the invented capture: 8 turns x 0.40 A / 55 mm = 58.2 A/m; the averaged period of a
    # noisy record with a probe offset gives it to about 1 %
    assert d["h_dc_a_m"] == pytest.approx(8 * 0.40 / 0.055, rel=0.01)
    assert "capture's current" in d["inputs"]["h_dc_source"]
    over = run_json(*args, "--h-dc", "20")
    assert over["h_dc_a_m"] == 20.0 and any("in place of the capture's own" in w for w in over["warnings"])


@pytest.mark.parametrize("extra, needle", [
    (["--rth", "-4"], "--rth"),
    (["--rth", "10", "--winding-loss", "-1"], "--winding-loss"),
    (["--rth", "10", "--limit-temperature", "400"], "above the limit"),
    (["--rth", "10", "--height", "20mm"], "--surface-area"),
    (["--surface-area", "30cm2", "--emissivity", "1.5"], "emissivity"),
    (["--rth", "10", "--i-dc", "2"], "--i-dc needs --turns"),
])
def test_bad_input_one_line_exit_2(extra, needle):
    code, out, err = run(*SHAPE, *extra)
    assert code == 2 and out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and len(lines[0]) < 300 and needle in lines[0]


def test_ambient_above_limit_and_missing_volume():
    args = [a for a in SHAPE]
    args[args.index("--ambient") + 1] = "230"
    code, _, err = run(*args, "--rth", "10")
    assert code == 2 and "not below the limit" in err
    no_volume = [a for a in SHAPE if a not in ("--volume", "5.6cm3")]
    code, _, err = run(*no_volume, "--rth", "10")
    assert code == 2 and "--volume" in err
