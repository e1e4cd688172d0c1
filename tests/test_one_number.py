"""One operating point, every path, one number.

The loss of a waveform is decided by the engine alone (workbench.engine). Here one operating
point goes through the public API, every command-line command that shows a loss, the folder
batch and the panels' state functions, and every path must give the same total to 1e-9
(common practice, no source: the same inputs must never give two answers).

The first operating point is the one where two answers were once seen: MnZn power ferrite,
trapezoid, duty 0.8, B_peak 0.1 T, 100 kHz (i2GSE, relaxation after the dwells).
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from workbench.analysis import breakdown, sweep_frequency
from workbench.analysis.compare import compare_materials
from workbench.cli.main import main
from workbench.engine import core_loss, core_loss_sweep
from workbench.materials import get_material
from workbench.shapes import ShapeSpec, make_shape

FERRITE = "mnzn-power-ferrite"
RTOL = 1e-9


def _cli_json(capsys, argv):
    assert main(argv + ["--json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("material, shape, duty, b_peak, freq", [
    (FERRITE, "trapezoid", 0.8, 0.1, 100e3),
    ("M400-50A", "sine", 0.5, 1.5, 400.0),
    ("nanocrystalline", "triangle", 0.3, 0.4, 20e3),
])
def test_shape_operating_point_is_one_number_on_every_path(capsys, material, shape, duty, b_peak, freq):
    spec = ShapeSpec(shape, b_peak, freq, duty)
    reference = core_loss(spec, material).total
    assert reference > 0
    values = {}
    values["breakdown(name)"] = breakdown(spec, material).total
    if shape != "sine":  # a sampled sine is a piecewise-linear reading, not the ideal sine
        values["breakdown(waveform)"] = breakdown(make_shape(shape, b_peak=b_peak, freq=freq, duty=duty),
                                                  get_material(material)).total
    values["core_loss_sweep"] = core_loss_sweep(spec, material, [freq]).total[0]
    values["sweep_frequency"] = sweep_frequency(material, shape, b_peak=b_peak, duty=duty, freqs=[freq / 3, freq]).total[1]
    values["compare_materials"] = compare_materials([material], shape, b_peak=b_peak, duty=duty, loss_density=1e5,
                                                    freqs=[freq]).curves[0].loss[0]
    common = ["--shape", shape, "--duty", str(duty), "--b-peak", str(b_peak)]
    values["cli shape"] = _cli_json(capsys, ["shape", "--material", material, "--freq", str(freq)] + common)["loss_w_m3"]
    values["cli sweep"] = _cli_json(capsys, ["sweep", "--material", material, "--from", str(freq), "--to", str(2 * freq),
                                             "--points", "3"] + common)["loss_w_m3"][0]
    values["cli compare"] = _cli_json(capsys, ["compare", "--materials", material, "--freq", str(freq)]
                                      + common)["materials"][0]["loss_w_m3"]

    from workbench.ui.state import ComparisonSettings, FrequencySettings, comparison_view, frequency_view

    fv = frequency_view(FrequencySettings(material=material, shape=shape, duty=duty, b_peak=b_peak, f_min=freq,
                                          f_max=2 * freq, n_points=2))
    values["frequency panel"] = fv.sweep.total[0]
    cv = comparison_view(ComparisonSettings(materials=(material,), shape=shape, duty=duty, b_peak=b_peak,
                                            f_min=freq, f_max=2 * freq, n_points=2, design_freq=freq))
    values["comparison panel"] = cv.comparison.curves[0].loss[0]
    for path, value in values.items():
        assert value == pytest.approx(reference, rel=RTOL), path

    # the thermal command reports the loss at the temperature it finds: the engine at that temperature
    th = _cli_json(capsys, ["thermal", "--material", material, "--freq", str(freq), "--volume", "10cm3",
                            "--rth", "5", "--ambient", "40"] + common)
    if th["temperature_c"] is not None:
        at = core_loss(spec, material, temperature=th["temperature_c"]).total
        assert th["loss_w_m3"] == pytest.approx(at, rel=RTOL), "cli thermal"


def _flux_capture(path, freq=100e3, periods=6, samples=400):
    """A trapezoidal flux capture (invented for this test): time and B columns."""
    w = make_shape("trapezoid", b_peak=0.1, freq=freq, duty=0.7)
    t = np.arange(periods * samples) / (samples * freq)
    b = np.interp(t % w.period, np.append(w.t, w.period), np.append(w.b, w.b[0]))
    path.write_text("time (s),B (T)\n" + "\n".join(f"{x:.12e},{y:.12e}" for x, y in zip(t, b)) + "\n")
    return path


def test_capture_operating_point_is_one_number_on_every_path(tmp_path, capsys):
    from workbench.analysis.capture import analyse_file

    folder = tmp_path / "captures"
    folder.mkdir()
    path = _flux_capture(folder / "trapezoid_flux.csv")
    geometry = {"turns": 10.0, "area": 50e-6}
    analysis = analyse_file(path, material=get_material(FERRITE), **geometry)
    reference = core_loss(analysis.waveform, FERRITE).total
    values = {"analyse_file": analysis.model_loss}
    geo = ["--turns", "10", "--area", "50mm2", "--material", FERRITE]
    values["cli capture"] = _cli_json(capsys, ["capture", str(path)] + geo)["loss_w_m3"]
    sweep = _cli_json(capsys, ["sweep", "--capture", str(path), "--turns", "10", "--area", "50mm2", "--material", FERRITE,
                               "--from", str(analysis.freq), "--to", str(2 * analysis.freq), "--points", "2"])
    values["cli sweep --capture"] = sweep["loss_w_m3"][0]
    out = tmp_path / "run"
    assert main(["folder", str(folder)] + geo + ["--out", str(out)]) == 0
    capsys.readouterr()
    rows = [json.loads(line) for line in (tmp_path / "run.jsonl").read_text().splitlines() if line.strip()]
    values["cli folder"] = rows[0]["loss_w_m3"]

    from workbench.capture import read_capture
    from workbench.ui.state import CaptureSettings, capture_view

    view = capture_view(read_capture(path), CaptureSettings(material=FERRITE, **geometry))
    values["capture panel"] = view.analysis.model_loss
    for name, value in values.items():
        assert value == pytest.approx(reference, rel=RTOL), name
