"""Tests of workbench.engine: the one place a loss is decided.

Independent references, each named beside its check: Steinmetz and iGSE closed forms for a
sine (Venkatachalam et al., IEEE COMPEL 2002), the thin-sheet classical eddy formula and the
lamination skin-effect factor (G. Bertotti, IEEE Trans. Magn. 24(1), 1988; R. L. Stoll, "The
analysis of eddy currents", Clarendon Press, 1974), and the material data file's own
coefficients read with tomllib (not through the code under test).
"""
from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from workbench.analysis import breakdown, crossover_frequency, sweep_frequency
from workbench.engine import BareSteinmetz, core_loss, core_loss_sweep
from workbench.shapes import ShapeSpec, make_shape
from workbench.waveforms import FluxWaveform

DATA = tomllib.loads((Path(__file__).resolve().parents[1] / "data" / "materials.toml").read_text())["materials"]
MU_0 = 4e-7 * math.pi  # vacuum permeability (pre-2019 SI definition; 1e-9 relative to CODATA 2018)


def value(material: str, *path: str) -> float:
    node = DATA[material]
    for key in path:
        node = node[key]
    return float(node["value"])


def steel_data(name="M400-50A"):
    return {
        "k": value(name, "steinmetz", "k"), "alpha": value(name, "steinmetz", "alpha"),
        "beta": value(name, "steinmetz", "beta"), "rho": value(name, "resistivity"),
        "d": value(name, "thickness"), "mu_r": value(name, "rel_permeability"),
    }


# ---------------------------------------------------------------------------
# thickness and resistivity overrides move the headline loss
# ---------------------------------------------------------------------------
def test_thickness_override_replaces_the_classical_part_thin_sheet():
    m = steel_data()
    f, b, d = 400.0, 1.5, 0.2e-3
    r = core_loss(ShapeSpec("sine", b, f), "M400-50A", thickness=d, skin_effect=False)
    # Steinmetz for a sine (the iGSE reproduces it; Venkatachalam et al. 2002) and the thin-sheet
    # classical part pi^2 d^2 f^2 B^2 / (6 rho) (Bertotti 1988, eq. (2)) at both thicknesses
    steinmetz = m["k"] * f ** m["alpha"] * b ** m["beta"]
    expected = steinmetz + math.pi**2 * f**2 * b**2 * (d**2 - m["d"] ** 2) / (6 * m["rho"])
    assert r.total == pytest.approx(expected, rel=1e-12)
    assert r.total < 0.5 * core_loss(ShapeSpec("sine", b, f), "M400-50A", skin_effect=False).total
    assert any("classical eddy part replaced" in n for n in r.notes)


def _skin_factor(xi):
    # Stoll 1974 / Bertotti 1988: ratio of the lamination's eddy loss with skin effect to the
    # thin-sheet value under sinusoidal flux, xi = d / delta
    return 3.0 / xi * (math.sinh(xi) - math.sin(xi)) / (math.cosh(xi) - math.cos(xi))


def test_resistivity_override_with_skin_effect_matches_the_lamination_formula():
    m = steel_data("M270-35A")
    f, b, rho = 400.0, 1.0, 25e-8  # inside the fitted range: no floor
    r = core_loss(ShapeSpec("sine", b, f), "M270-35A", resistivity=rho)

    def classical(res):
        delta = math.sqrt(res / (math.pi * f * MU_0 * m["mu_r"]))
        return math.pi**2 * m["d"] ** 2 * f**2 * b**2 / (6 * res) * _skin_factor(m["d"] / delta)

    steinmetz = m["k"] * f ** m["alpha"] * b ** m["beta"]
    assert r.classical == pytest.approx(classical(rho), rel=1e-9)
    assert r.total == pytest.approx(steinmetz - classical(m["rho"]) + classical(rho), rel=1e-9)


def test_override_equal_to_the_material_changes_nothing():
    base = core_loss(ShapeSpec("triangle", 1.0, 1000.0, 0.3), "M330-50A")
    same = core_loss(ShapeSpec("triangle", 1.0, 1000.0, 0.3), "M330-50A",
                     thickness=value("M330-50A", "thickness"), resistivity=value("M330-50A", "resistivity"))
    assert same.total == base.total


def test_override_far_outside_the_range_floors_the_rest_and_warns():
    r = core_loss(ShapeSpec("sine", 1.5, 20e3), "M400-50A", thickness=0.05e-3, skin_effect=False)
    assert r.total == pytest.approx(r.classical, rel=1e-12)
    assert any("rest was taken as zero" in w for w in r.warnings)


# ---------------------------------------------------------------------------
# temperature: stated when assumed, validated when given
# ---------------------------------------------------------------------------
def _factor(t):
    c0, c1, c2 = (value("mnzn-power-ferrite", "steinmetz", "temperature", k) for k in ("ct0", "ct1", "ct2"))
    return c0 - c1 * t + c2 * t * t


def test_no_temperature_is_stated_and_uses_the_reference_temperature():
    op = ShapeSpec("triangle", 0.1, 100e3, 0.5)
    r = core_loss(op, "mnzn-power-ferrite")
    # the data file's factor has its minimum of 1 at ct1 / (2 ct2) (quadratic vertex)
    c1, c2 = (value("mnzn-power-ferrite", "steinmetz", "temperature", k) for k in ("ct1", "ct2"))
    t_ref = c1 / (2 * c2)
    assert r.temperature == pytest.approx(t_ref, abs=0.05)
    assert any("no core temperature given" in w and f"{t_ref:.0f} degC" in w for w in r.warnings)
    cold = core_loss(op, "mnzn-power-ferrite", temperature=25.0)
    assert cold.total / r.total == pytest.approx(_factor(25.0) / _factor(t_ref), rel=1e-9)
    assert not any("no core temperature" in w for w in cold.warnings)


@pytest.mark.parametrize("temperature, message", [
    (-300.0, "absolute zero"), (float("nan"), "finite"), (1e6, "Curie temperature"), (True, "must be a number"),
])
def test_impossible_temperatures_are_refused(temperature, message):
    with pytest.raises(ValueError, match=message):
        core_loss(ShapeSpec("sine", 0.1, 100e3), "mnzn-power-ferrite", temperature=temperature)


def test_ferrite_above_its_limit_temperature_is_not_a_working_point():
    limit = value("mnzn-power-ferrite", "limit_temperature")
    core_loss(ShapeSpec("sine", 0.1, 100e3), "mnzn-power-ferrite", temperature=limit - 1)
    with pytest.raises(ValueError, match="not a working point"):
        core_loss(ShapeSpec("sine", 0.1, 100e3), "mnzn-power-ferrite", temperature=limit + 1)


def test_temperature_on_a_material_without_temperature_data_is_stated():
    r = core_loss(ShapeSpec("sine", 1.5, 50.0), "M400-50A", temperature=60.0)
    assert r.temperature == 60.0
    assert any("no temperature data" in w for w in r.warnings)


# ---------------------------------------------------------------------------
# inputs accepted everywhere, results that read well
# ---------------------------------------------------------------------------
def test_material_by_name_or_object_and_bare_set():
    w = make_shape("sine", b_peak=1.0, freq=50.0)
    from workbench.materials import get_material

    assert breakdown(w, "M270-35A").total == breakdown(w, get_material("M270-35A")).total
    # a bare set on an ideal sine is the Steinmetz equation itself (Venkatachalam et al. 2002)
    bare = core_loss(ShapeSpec("sine", 0.2, 1e3), BareSteinmetz(3.0, 1.4, 2.5))
    assert bare.total == pytest.approx(3.0 * 1e3**1.4 * 0.2**2.5, rel=1e-12)
    assert bare.loss_w_kg is None and bare.classical is None


def test_reprs_are_short_and_results_carry_w_per_kg_for_every_part():
    r = core_loss(ShapeSpec("sine", 1.5, 50.0), "M400-50A")
    assert len(repr(r)) < 300
    sw = sweep_frequency("M400-50A", "sine", b_peak=1.5)
    assert len(repr(sw)) < 300
    d = r.to_dict()
    density = value("M400-50A", "density")
    for part in ("hysteresis", "classical", "excess", "separation_total"):
        assert d[f"{part}_w_kg"] == pytest.approx(d[f"{part}_w_m3"] / density, rel=1e-12)


def test_crossover_far_outside_the_valid_range_is_warned():
    cx = crossover_frequency("mnzn-power-ferrite", b_peak=0.1, temperature=90)
    assert cx.freq is not None and cx.freq > 1e7
    assert any("outside the valid frequency range" in w for w in cx.warnings)


# ---------------------------------------------------------------------------
# a captured waveform swept across frequency
# ---------------------------------------------------------------------------
def _noisy_pwm_like_period():
    """An irregular period with a minor loop: corner points of a converter flux (invented)."""
    t = np.array([0, 0.12, 0.17, 0.20, 0.31, 0.60]) * 1e-3
    return FluxWaveform(t, np.array([1.0, 0.0, 0.4, 0.2, 0.6, -1.0]), 1e-3)


def test_captured_period_swept_matches_the_period_played_at_each_frequency():
    w = _noisy_pwm_like_period()
    freqs = np.array([250.0, 1000.0, 4000.0])
    sw = sweep_frequency("M270-35A", w, freqs=freqs, temperature=40.0)
    for f, total, classical in zip(freqs, sw.total, sw.classical):
        direct = core_loss(w.with_period(1.0 / f), "M270-35A", temperature=40.0)
        assert total == pytest.approx(direct.total, rel=1e-9)
        assert classical == pytest.approx(direct.classical, rel=1e-9)
    assert sw.shape == "waveform" and sw.crossover.freq is not None


def test_sweep_frequency_of_shape_equals_core_loss_sweep():
    op = ShapeSpec("trapezoid", 0.1, 1.0, 0.8)
    freqs = np.geomspace(1e4, 1e6, 7)
    a = sweep_frequency("mnzn-power-ferrite", "trapezoid", b_peak=0.1, duty=0.8, freqs=freqs, temperature=70)
    b = core_loss_sweep(op, "mnzn-power-ferrite", freqs, temperature=70)
    np.testing.assert_array_equal(a.total, b.total)


def test_temperature_outside_the_data_range_is_stated():
    low, high = (float(x) for x in DATA["mnzn-power-ferrite"]["steinmetz"]["temperature"]["valid_range"]["value"])
    inside = core_loss(ShapeSpec("sine", 0.1, 100e3), "mnzn-power-ferrite", temperature=(low + high) / 2)
    assert not any("extrapolated" in w and "temperature" in w for w in inside.warnings)
    hot = core_loss(ShapeSpec("sine", 0.1, 100e3), "mnzn-power-ferrite", temperature=high + 30)
    assert any("outside the temperature range" in w for w in hot.warnings)
