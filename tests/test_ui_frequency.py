"""Frequency panel driven from code: controls in, plotted columns and texts out."""
import json

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

from workbench.analysis import crossover_frequency  # noqa: E402
from workbench.materials import get_material  # noqa: E402
from workbench.ui import FrequencyPanel  # noqa: E402
from workbench.ui.state import FrequencySettings, frequency_view  # noqa: E402


@pytest.fixture
def panel():
    p = FrequencyPanel("M270-35A", b_peak=1.0)
    assert p.last_error is None
    return p


def test_starts_with_a_full_sweep(panel):
    data = panel.source.data
    assert len(data["freq"]) == 400
    assert data["freq"][0] == pytest.approx(10.0) and data["freq"][-1] == pytest.approx(1e6)
    for key in ("hysteresis", "classical", "excess", "total", "steinmetz"):
        assert np.all(np.asarray(data[key]) > 0), key
    # energy per cycle is P/f
    np.testing.assert_allclose(data["e_classical"], np.asarray(data["classical"]) / np.asarray(data["freq"]))
    assert panel.loss_figure.name == "loss_vs_frequency" and panel.energy_figure.name == "energy_per_cycle"
    assert panel.loss_figure.x_scale.__class__.__name__ == "LogScale"
    assert panel.loss_figure.y_scale.__class__.__name__ == "LogScale"


def test_crossover_marker_sits_where_the_analysis_puts_it(panel):
    panel.controls.b_peak.value = 1.2
    m = get_material("M270-35A")
    expected = crossover_frequency(m, b_peak=1.2, thickness=m.thickness, resistivity=m.resistivity)
    assert panel.crossover_span.location == pytest.approx(expected.freq, rel=1e-9)
    assert panel.crossover_span.visible
    assert f"{expected.freq:.4g} Hz" in panel.crossover_text


def test_thin_sheet_classical_part_matches_the_closed_form(panel):
    c = panel.controls
    with panel.hold():
        c.skin_effect.value = False
        c.thickness_mm.value = 0.5
        c.resistivity_uohm_m.value = 0.4
    f = np.asarray(panel.source.data["freq"])
    # Bertotti, IEEE Trans. Magn. 24(1), 1988, eq. (2): P_cl = pi^2 d^2 f^2 B^2 / (6 rho) for a sine
    expected = np.pi**2 * (0.5e-3) ** 2 * f**2 * 1.0**2 / (6 * 0.4e-6)
    # rtol 1e-5: the library samples the sine at 1024 points; linear segments lower mean (dB/dt)^2 by
    # about (pi/1024)^2/3 = 3e-6
    np.testing.assert_allclose(panel.source.data["classical"], expected, rtol=1e-5)


def test_thickness_moves_the_crossover_by_the_closed_form(panel):
    m = get_material("M270-35A")
    sep = m.separation
    c = panel.controls
    c.skin_effect.value = False
    before_text = panel.crossover_text
    before_classical = np.asarray(panel.source.data["classical"]).copy()
    c.thickness_mm.value = 0.5
    assert panel.crossover_text != before_text
    after_classical = np.asarray(panel.source.data["classical"])
    # thin-sheet classical loss goes as d^2 (Bertotti 1988, eq. (2))
    np.testing.assert_allclose(after_classical / before_classical, (0.5 / 0.35) ** 2, rtol=1e-9)
    # f_x = 6 rho k_h B^(beta_h - 2) / (pi^2 d^2) for a sine (equate k_h f B^beta_h with Bertotti's eq. (2))
    fx = 6 * m.resistivity * sep.k_hyst * 1.0 ** (sep.beta_hyst - 2) / (np.pi**2 * 0.5e-3**2)
    # rel 1e-5: sampled sine, as above
    assert panel.view.crossover_freq == pytest.approx(fx, rel=1e-5)
    assert panel.crossover_span.location == pytest.approx(fx, rel=1e-5)


def test_resistivity_scales_the_crossover(panel):
    panel.controls.skin_effect.value = False
    f1 = panel.view.crossover_freq
    panel.controls.resistivity_uohm_m.value = 2 * get_material("M270-35A").resistivity * 1e6
    # f_x is proportional to rho (same closed form as above)
    assert panel.view.crossover_freq == pytest.approx(2 * f1, rel=1e-9)


def test_skin_effect_knee_and_its_marker(panel):
    assert panel.knee_span.visible and "Skin-effect knee" in panel.knee_text
    panel.controls.skin_effect.value = False
    assert not panel.knee_span.visible and "Skin effect off" in panel.knee_text


def test_material_change_loads_its_lamination(panel):
    panel.controls.material.value = "M470-65A"
    m = get_material("M470-65A")
    assert panel.controls.thickness_mm.value == pytest.approx(m.thickness * 1e3)
    assert panel.controls.resistivity_uohm_m.value == pytest.approx(m.resistivity * 1e6)
    assert panel.view.settings.thickness == pytest.approx(m.thickness)
    assert "M470-65A" in panel.crossover_text


def test_material_without_separation_set_draws_no_hysteresis(panel):
    with panel.hold():
        panel.controls.material.value = "mnzn-power-ferrite"
        panel.controls.b_peak.value = 0.1
    assert panel.last_error is None
    assert np.all(np.isnan(panel.source.data["hysteresis"]))
    assert any("no loss-separation set" in w for w in panel.view.warnings)


def test_extrapolated_bands_follow_the_fitted_range(panel):
    lo, hi = get_material("M270-35A").steinmetz.freq_range
    low, high = panel._bands[0]
    assert (low.right, high.left) == (lo, hi)
    f = np.asarray(panel.source.data["freq"])
    np.testing.assert_array_equal(panel.source.data["extrapolated"], (f < lo) | (f > hi))


def test_duty_is_disabled_for_the_sine(panel):
    assert panel.controls.duty.disabled
    panel.controls.shape.value = "triangle"
    assert not panel.controls.duty.disabled


def test_frequency_range_from_text(panel):
    panel.controls.f_max.value = "20 kHz"
    assert panel.source.data["freq"][-1] == pytest.approx(20e3)


def test_bad_input_is_shown_and_the_plot_keeps_its_data(panel):
    before = panel.source.data
    panel.controls.f_min.value = "10,5"
    assert panel.last_error is not None
    assert "lowest frequency" in panel.last_error and "'10,5'" in panel.last_error
    assert panel.errors.outputs and "lowest frequency" in panel.errors.outputs[0]["text"]
    assert panel.source.data is before
    panel.controls.f_min.value = "2M"  # above f_max
    assert "f_min must be below f_max" in panel.last_error
    panel.controls.f_min.value = "10"
    assert panel.last_error is None and panel.errors.outputs == ()


def test_hold_recomputes_once(panel, monkeypatch):
    import workbench.ui.frequency as mod

    calls = []
    real = mod.frequency_view
    monkeypatch.setattr(mod, "frequency_view", lambda s: calls.append(s) or real(s))
    with panel.hold():
        panel.controls.b_peak.value = 0.8
        panel.controls.thickness_mm.value = 0.27
        panel.controls.shape.value = "trapezoid"
    assert len(calls) == 1 and calls[0].shape == "trapezoid"


def test_view_function_runs_without_widgets():
    view = frequency_view(FrequencySettings(material="M330-50A", b_peak=1.5, f_min=20, f_max=2000, n_points=50))
    assert view.columns["freq"].size == 50
    with pytest.raises(ValueError, match="duty must lie strictly between 0 and 1, got 1.5"):
        FrequencySettings(duty=1.5)


def test_export_writes_inputs_results_and_version(panel, tmp_path):
    panel.controls.b_peak.value = 1.3
    paths = panel.export(tmp_path, "run")
    rec = json.loads(paths["json"].read_text())
    assert rec["inputs"]["b_peak_t"] == pytest.approx(1.3)
    assert rec["results"]["crossover_hz"] == pytest.approx(panel.view.crossover_freq)
    assert rec["version"]
    assert "loss_vs_frequency" in paths["html"].read_text()
    assert paths["csv"].read_text().count("\n") > 400
    # the export button does the same and reports the files
    panel.export_bar.folder.value = str(tmp_path / "button")
    panel.export_bar.button.click()
    assert "written" in panel.export_bar.status.value
    assert (tmp_path / "button" / "loss-vs-frequency.json").exists()


def test_export_refuses_while_an_error_is_shown(panel, tmp_path):
    panel.controls.f_max.value = "abc"
    with pytest.raises(ValueError, match="nothing to export"):
        panel.export(tmp_path)
    panel.export_bar.folder.value = str(tmp_path)
    panel.export_bar.button.click()
    assert "failed" in panel.export_bar.status.value and "nothing to export" in panel.last_error


def test_caution_line_is_shown(panel):
    text = " ".join(getattr(w, "value", "") for w in panel.widget.children if hasattr(w, "value"))
    assert "temperature rise" in text and "hazardous voltages" in text and "local electrical codes" in text


# --- DC bias -------------------------------------------------------------------------------------------------
# A bias table invented for demonstration (test data, not any material's): k ratio, alpha and beta shifts
BIAS_H = (0.0, 20.0, 60.0)
BIAS_K, BIAS_ALPHA, BIAS_BETA = (1.0, 1.5, 3.0), (0.0, -0.01, -0.04), (0.0, -0.05, -0.2)


@pytest.fixture
def biased_library(tmp_path, monkeypatch):
    """A user library with one ferrite carrying the invented bias table."""
    import dataclasses

    from workbench.materials import SCHEMA_VERSION, BiasParams, material_to_toml

    m = get_material("mnzn-power-ferrite")
    src = dict(m.sources, **{f"bias.{f}": "invented for demonstration (test table)"
                             for f in ("h_dc", "k_ratio", "alpha_shift", "beta_shift")})
    biased = dataclasses.replace(m, name="biased-ferrite-test", bias=BiasParams(BIAS_H, BIAS_K, BIAS_ALPHA, BIAS_BETA),
                                 sources=src)
    path = tmp_path / "user.toml"
    path.write_text(f"schema_version = {SCHEMA_VERSION}\n\n{material_to_toml(biased)}")
    monkeypatch.setenv("WORKBENCH_USER_LIBRARY", str(path))
    return "biased-ferrite-test"


def _sine_by_hand(f, b, temperature, h_dc):
    """Steinmetz loss of a sine by hand (Steinmetz, Trans. AIEE 9, 1892; iGSE = Steinmetz for a sine), with the
    parameters read off the invented bias table between 20 and 60 A/m: ln k ratio, alpha and beta linear in H."""
    st = get_material("mnzn-power-ferrite").steinmetz
    tc = st.temperature
    factor = tc.ct0 - tc.ct1 * temperature + tc.ct2 * temperature**2
    w = (h_dc - 20.0) / 40.0
    k = st.k * factor * np.exp((1 - w) * np.log(1.5) + w * np.log(3.0))
    alpha = st.alpha + (1 - w) * -0.01 + w * -0.04
    beta = st.beta + (1 - w) * -0.05 + w * -0.2
    return k * f**alpha * b**beta


def test_dc_bias_reaches_the_sweep(biased_library):
    panel = FrequencyPanel(biased_library, b_peak=0.1, f_min="20k", f_max="300k", operating_freqs="100k")
    panel.controls.temperature.value = "90"
    plain = panel.readout_rows[0]["loss_w_m3"]
    panel.controls.h_dc.value = "40"
    assert panel.last_error is None, panel.last_error
    assert panel.view.settings.h_dc == 40.0 and panel.record()["inputs"]["h_dc_a_m"] == 40.0
    got = panel.readout_rows[0]["loss_w_m3"]
    assert got == pytest.approx(_sine_by_hand(100e3, 0.1, 90.0, 40.0), rel=1e-6)
    assert got > 1.5 * plain  # the bias changed the answer: the check can fail
    # the plotted model total carries the bias too (same law at every frequency)
    f = np.asarray(panel.source.data["freq"])
    np.testing.assert_allclose(panel.source.data["steinmetz"], _sine_by_hand(f, 0.1, 90.0, 40.0), rtol=1e-5)
    assert not any("no DC-bias data" in w for w in panel.view.warnings)
    panel.controls.h_dc.value = "100"  # beyond the table: the engine's warning is in the panel's list
    assert any("beyond" in w and "bias" in w for w in panel.view.warnings)
    assert "beyond" in panel.warnings_html.value


def test_dc_bias_without_bias_data_is_warned(panel):
    from workbench.ui.controls import INVALID_CLASS

    before = np.asarray(panel.source.data["steinmetz"])
    panel.controls.h_dc.value = "60"
    assert panel.last_error is None
    # the material has no bias data: the loss is unchanged and the engine says so in the warning list
    np.testing.assert_array_equal(panel.source.data["steinmetz"], before)
    msg = [w for w in panel.view.warnings if "no DC-bias data" in w]
    assert msg and "60 A/m" in msg[0] and "no DC-bias data" in panel.warnings_html.value
    panel.controls.h_dc.value = "sixty"
    assert INVALID_CLASS in panel.fields["h_dc"]._dom_classes and panel.stale
    assert "sixty" in panel.last_error
    panel.controls.h_dc.value = ""
    assert panel.last_error is None and not panel.stale
    assert not any("no DC-bias data" in w for w in panel.view.warnings)
