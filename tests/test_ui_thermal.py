"""Thermal panel in plain pytest: controls drive the state; plotted columns and marks checked
against values computed outside the panel (the analysis API and the closed form of the
heat-removal line, Q = (T - T_a) / R_th, common practice, no source)."""
from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("bokeh")

from workbench.analysis.thermal import make_cooling, thermal_operating_point  # noqa: E402
from workbench.shapes import ShapeSpec  # noqa: E402
from workbench.ui.thermal import ThermalPanel  # noqa: E402


@pytest.fixture(scope="module")
def panel():
    return ThermalPanel("mnzn-power-ferrite", shape="triangle", duty=0.5, b_peak="100 mT", freq="100k",
                        volume="5 cm3", ambient=25.0, r_th="20", winding_loss="0.2 W")


def test_start_state_matches_the_api(panel):
    assert panel.last_error is None
    api = thermal_operating_point(ShapeSpec("triangle", 0.1, 1e5, 0.5), "mnzn-power-ferrite", volume=5e-6,
                                  ambient=25.0, cooling=make_cooling(r_th=20.0), winding_loss=0.2)
    r = panel.view.result
    assert r.temperature_c == pytest.approx(api.temperature_c, rel=1e-12)
    assert panel.point_source.data["temperature"][0] == pytest.approx(api.temperature_c, rel=1e-12)
    # the removal line is (T - T_a)/R_th; the operating point lies on it
    t = np.asarray(panel.source.data["temperature"])
    assert np.allclose(panel.source.data["removed"], (t - 25.0) / 20.0, rtol=1e-12)
    assert panel.point_source.data["power"][0] == pytest.approx((api.temperature_c - 25.0) / 20.0, rel=1e-9)
    # the runaway-limit line is the same line moved to the highest ambient, and it touches P(T)
    limit_line = np.asarray(panel.source.data["removed_limit"])
    assert np.allclose(limit_line, (t - api.max_ambient_c) / 20.0, rtol=1e-9)
    gap = limit_line - np.asarray(panel.source.data["power"])
    assert gap.max() == pytest.approx(0.0, abs=2e-3)
    assert panel.limit_span.location == 215.0


def test_controls_drive_the_state(panel):
    panel.controls.ambient.value = 55.0
    assert panel.view.result.ambient_c == 55.0
    assert panel.view.result.temperature_c > 55.0
    with panel.hold():
        panel.controls.cooling.value = "surface area"
        panel.controls.surface_area.value = "25 cm2"
    assert panel.view.result.cooling.to_dict()["kind"] == "convection_radiation"
    panel.controls.h_dc.value = "40 A/m"
    assert panel.view.result.h_dc_a_m == 40.0
    assert any("no DC-bias data" in w for w in panel.view.result.warnings)
    assert "no DC-bias data" in panel.warnings_html.value
    with panel.hold():
        panel.controls.cooling.value = "R_th"
        panel.controls.h_dc.value = "0 A/m"
        panel.controls.ambient.value = 25.0


def test_runaway_is_shown_plainly(panel):
    with panel.hold():
        panel.controls.b_peak.value = "200 mT"
        panel.controls.freq.value = "200k"
        panel.controls.r_th.value = "30"
    assert panel.view.result.runaway
    assert "THERMAL RUNAWAY" in panel.summary.value
    assert panel.point_source.data["temperature"] == []
    with panel.hold():
        panel.controls.b_peak.value = "100 mT"
        panel.controls.freq.value = "100k"
        panel.controls.r_th.value = "20"
    assert not panel.view.result.runaway


def test_errors_at_the_control(panel):
    panel.controls.r_th.value = "-3"
    assert panel.stale and "r_th" in panel.last_error
    assert "fluxheat-field-error" in panel.fields["r_th"].message.value
    panel.controls.r_th.value = "20"
    assert not panel.stale and panel.fields["r_th"].message.value == ""
    panel.controls.volume.value = "abc"
    assert panel.stale and "fluxheat-field-error" in panel.fields["volume"].message.value
    panel.controls.volume.value = "5 cm3"
    assert panel.last_error is None


def test_export(panel, tmp_path):
    paths = panel.export(tmp_path, "thermal_test")
    import json
    from pathlib import Path

    record = json.loads(Path(paths["json"]).read_text())
    assert record["results"]["temperature_c"] == pytest.approx(panel.view.result.temperature_c)
    assert any("burn" in c for c in record["cautions"])


def test_inputs_that_do_not_apply_are_greyed_out():
    # a captured period brings its own B_peak and frequency; R_th and a surface area exclude each other
    from workbench.shapes import make_shape
    from workbench.ui.thermal import ThermalPanel

    panel = ThermalPanel("mnzn-power-ferrite", waveform=make_shape("triangle", b_peak=0.1, freq=1e5, duty=0.5))
    c = panel.controls
    assert c.b_peak.disabled and c.freq.disabled and c.duty.disabled
    c.shape.value = "sine"
    assert not c.b_peak.disabled and not c.freq.disabled and c.duty.disabled
    c.shape.value = "trapezoid"
    assert not c.duty.disabled
    c.cooling.value = "R_th"
    assert not c.r_th.disabled and c.surface_area.disabled
    c.cooling.value = "surface area"
    assert c.r_th.disabled and not c.surface_area.disabled
