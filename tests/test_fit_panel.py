"""Fit panel driven from code: controls in, plotted columns and texts out."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

from workbench.ui.fit_panel import DEMO_TABLE, FitPanel, FitSettings, fit_view  # noqa: E402


@pytest.fixture
def panel():
    p = FitPanel()
    assert p.last_error is None, p.last_error
    return p


def _write(tmp_path, name, rows, head="freq (Hz), b_peak (T), loss (W/m3)"):
    path = tmp_path / name
    path.write_text(head + "\n" + "".join(", ".join(repr(float(x)) for x in r) + "\n" for r in rows))
    return path


def test_demo_table_points_and_fit(panel):
    data = panel.points_source.data
    assert len(data["freq"]) == 23 and data["row"][0] == 4  # first data line of the file
    # relative error is fitted/measured - 1, shown in %
    np.testing.assert_allclose(data["rel_error_pct"], 100 * (np.asarray(data["fitted"]) / np.asarray(data["loss"]) - 1))
    # the invented demo table needs two bands at 25 %; each band's rows within 25 %
    assert panel.view.result.split and "split into 2 frequency bands" in panel.summary_html.value
    assert np.max(np.abs(data["rel_error"])) < 0.25
    assert panel.loss_figure.name == "fit_loss" and panel.residual_figure.name == "fit_residuals"
    assert panel.loss_figure.x_scale.__class__.__name__ == "LogScale"
    assert panel.loss_figure.y_scale.__class__.__name__ == "LogScale"
    # one line and one band per flux level
    assert len(panel.line_source.data["xs"]) == 4 == len(panel.band_source.data["xs"])


def test_lines_follow_the_steinmetz_law_and_flag_extrapolation(tmp_path):
    f = np.repeat([1e4, 3e4, 1e5], 2)
    b = np.tile([0.05, 0.2], 3)
    p = 2.0 * f**1.5 * b**2.5  # closed form, exact data
    path = _write(tmp_path, "exact.csv", zip(f, b, p))
    panel = FitPanel(str(path))
    assert panel.last_error is None, panel.last_error
    xs = np.asarray(panel.line_source.data["xs"][0])
    inside = np.asarray(panel.line_source.data["ys"][0])
    outside = np.asarray(panel.line_source_extrapolated.data["ys"][0])
    full = np.where(np.isnan(inside), outside, inside)
    # Steinmetz equation at 50 mT (Steinmetz, Trans. AIEE 1892)
    np.testing.assert_allclose(full, 2.0 * xs**1.5 * 0.05**2.5, rtol=1e-8)
    # solid only inside the table's 10-100 kHz
    in_range = (xs >= 1e4 * (1 - 1e-9)) & (xs <= 1e5 * (1 + 1e-9))
    np.testing.assert_array_equal(~np.isnan(inside), in_range)
    assert "extrapolated" in panel.notes_html.value


def test_model_switch_to_two_frequency_recovers_closed_form(tmp_path):
    f = np.array([25.0, 50.0, 100.0, 200.0])
    path = _write(tmp_path, "ring.csv", [(x, 1.5, (45 + 0.17 * x) * x) for x in f])
    panel = FitPanel(str(path))
    panel.controls.model.value = "two-frequency"
    assert panel.last_error is None, panel.last_error
    lv = panel.view.result.level
    # closed form W = 45 + 0.17 f, crossover 45 / 0.17
    assert lv.hysteresis_energy == pytest.approx(45.0, rel=1e-9)
    assert lv.crossover_hz == pytest.approx(45 / 0.17, rel=1e-9)
    ys = np.asarray(panel.energy_source.data["ys"][0])
    xs = np.asarray(panel.energy_source.data["xs"][0])
    np.testing.assert_allclose(ys, 45 + 0.17 * xs, rtol=1e-9)
    assert any(name.startswith("crossover") for name, _, _ in panel.view.parameters)


def test_separation_controls(tmp_path):
    f, b = np.meshgrid([25.0, 50, 100, 200, 400], [0.5, 0.8, 1.1, 1.4], indexing="ij")
    f, b = f.ravel(), b.ravel()
    d, rho = 0.35e-3, 52e-8
    # Bertotti 1988 with the sine excess constant 8.763
    p = 40 * f * b**1.9 + math.pi**2 * d**2 * f**2 * b**2 / (6 * rho) + 0.45 * 8.763 * (f * b) ** 1.5
    panel = FitPanel(str(_write(tmp_path, "sheet.csv", zip(f, b, p))))
    with panel.hold():
        panel.controls.model.value = "separation"
        panel.controls.thickness.value = "0.35 mm"
        panel.controls.resistivity.value = "52 uohm cm"
    assert panel.last_error is None, panel.last_error
    assert panel.view.result.k_hyst == pytest.approx(40, rel=1e-3)
    assert np.max(np.abs(panel.points_source.data["rel_error"])) < 1e-3


def test_bad_input_is_shown_and_last_plot_kept(panel, tmp_path):
    before = list(panel.points_source.data["loss"])
    bad = tmp_path / "bad.csv"
    bad.write_text("freq (Hz), b_peak (T), loss (W/m3)\n50, 1, 10\n60, 1, -4\n")
    panel.controls.path.value = str(bad)
    assert "bad.csv: row 3, column 'loss (W/m3)'" in panel.last_error
    assert list(panel.points_source.data["loss"]) == before
    panel.controls.path.value = str(tmp_path / "missing.csv")
    assert "cannot read the loss table" in panel.last_error
    panel.demo_button.click()
    assert panel.last_error is None and panel.controls.path.value == str(DEMO_TABLE)
    panel.controls.tolerance.value = "a lot"
    assert "tolerance" in panel.last_error


def test_temperature_choices_follow_the_file(tmp_path):
    rows = []
    for t, fac in ((25.0, 1.6), (100.0, 1.0)):
        for f in (1e4, 3e4, 1e5):
            for b in (0.05, 0.2):
                rows.append((f, b, fac * 2.0 * f**1.5 * b**2.5, t))
    path = _write(tmp_path, "temps.csv", rows, head="freq (Hz), b_peak (T), loss (W/m3), temp (C)")
    panel = FitPanel(str(path))
    assert panel.last_error is None, panel.last_error
    assert [v for _, v in panel.controls.temperature.options] == ["all", 25.0, 100.0]
    assert panel.view.steinmetz.temperature is not None  # two temperatures: linear factor
    panel.controls.temperature.value = 100.0
    assert panel.view.steinmetz.k == pytest.approx(2.0, rel=1e-8)


def test_save_as_user_material_and_export(panel, tmp_path, monkeypatch):
    lib = tmp_path / "user.toml"
    monkeypatch.setenv("WORKBENCH_USER_LIBRARY", str(lib))
    from workbench.materials import get_material

    panel.controls.save_name.value = "panel ferrite"
    panel.controls.save_like.value = "mnzn-power-ferrite"
    panel.controls.save_band.value = 2
    panel.save_button.click()
    assert "saved panel ferrite" in panel.save_status.value, panel.last_error
    m = get_material("panel ferrite")
    band = panel.view.result.bands[1]
    assert m.steinmetz.alpha == pytest.approx(band.alpha, rel=1e-12)
    assert m.steinmetz.freq_range == band.freq_range
    panel.save_button.click()  # second time: the name exists
    assert "already exists" in panel.last_error
    paths = FitPanel().export(tmp_path / "out")
    record = json.loads(paths["json"].read_text())
    assert record["results"]["fit"]["split"] is True


def test_state_function_without_widgets():
    view = fit_view(FitSettings(model="two-frequency"))
    assert view.points["energy"] == pytest.approx(view.points["loss"] / view.points["freq"])
    with pytest.raises(ValueError, match="model must be one of"):
        FitSettings(model="quadratic")
