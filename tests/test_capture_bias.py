"""A capture's own DC current sets the DC bias of its model loss (H_dc = N I_dc / l_e).

Reference: Ampere's law for a core without gap, H = N I / l_e (common practice, no source),
with the DC current of the invented buck demo capture stated in its header (0.4 A).
"""
from __future__ import annotations

from pathlib import Path

import pytest

from workbench.analysis.capture import analyse_file
from workbench.engine import core_loss

BUCK = Path(__file__).resolve().parents[1] / "data" / "captures" / "buck_inductor_ferrite_dc.csv"
TURNS, PATH_LENGTH, AREA, I_DC = 8, 55e-3, 30e-6, 0.4  # from the capture's header (invented demo)


def test_capture_current_sets_the_bias_of_the_model_loss():
    r = analyse_file(BUCK, turns=TURNS, area=AREA, path_length=PATH_LENGTH, material="mnzn-power-ferrite",
                     temperature=60)
    assert r.i_dc == pytest.approx(I_DC, rel=0.02)
    assert r.h_dc == pytest.approx(TURNS * I_DC / PATH_LENGTH, rel=0.02)
    assert any("H_dc = N I_dc / l_e" in w for w in r.warnings)
    # the engine was asked the same question: the bias reached it
    same = core_loss(r.waveform, "mnzn-power-ferrite", temperature=60, h_dc=r.h_dc, threshold=r.threshold)
    assert r.model_loss == pytest.approx(same.total, rel=1e-12)
    assert r.model.conditions.h_dc == r.h_dc
    assert r.to_dict()["h_dc_a_m"] == r.h_dc


def test_capture_current_without_path_length_is_stated_not_ignored():
    r = analyse_file(BUCK, turns=TURNS, area=AREA, material="mnzn-power-ferrite", temperature=60)
    assert r.h_dc is None
    assert any("DC current" in w and "--path-length" in w for w in r.warnings)


def test_given_bias_overrides_the_capture_own():
    r = analyse_file(BUCK, turns=TURNS, area=AREA, path_length=PATH_LENGTH, material="mnzn-power-ferrite",
                     temperature=60, h_dc=10.0)
    assert r.h_dc == 10.0


def test_folder_and_capture_commands_use_the_given_bias(tmp_path, capsys):
    import json
    import shutil

    from workbench.cli.main import main

    folder = tmp_path / "bench"
    folder.mkdir()
    shutil.copy(BUCK, folder / BUCK.name)
    geo = ["--turns", str(TURNS), "--area", "30mm2", "--material", "mnzn-power-ferrite", "--temperature", "60",
           "--h-dc", "10"]
    assert main(["capture", str(folder / BUCK.name), *geo, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["h_dc_a_m"] == 10.0
    assert main(["folder", str(folder), *geo, "--out", str(tmp_path / "run")]) == 0
    capsys.readouterr()
    row = json.loads((tmp_path / "run.jsonl").read_text().splitlines()[0])
    assert row["h_dc_a_m"] == 10.0


def test_deskew_of_a_sizeable_part_of_the_period_is_a_unit_slip():
    # probe skew is nanoseconds; 1 ms on a 100 kHz capture is a unit typed wrong (common practice, no source)
    with pytest.raises(ValueError, match="check the unit"):
        analyse_file(BUCK, turns=TURNS, area=AREA, path_length=PATH_LENGTH, material="mnzn-power-ferrite",
                     temperature=60, deskew=1e-3)
    ok = analyse_file(BUCK, turns=TURNS, area=AREA, path_length=PATH_LENGTH, material="mnzn-power-ferrite",
                      temperature=60, deskew=3e-9)
    assert ok.measured_method == "single-winding"
