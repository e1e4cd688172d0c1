"""DC bias in use (workbench.models.bias and the engine's bias section) against hand calculations.

References: Ampere's law H = N I / l_e (common practice, no source); the Steinmetz equation
P = k f^alpha B^beta for a sine by hand (C. P. Steinmetz 1892, with the frequency exponent
of ferrite practice); the bias table form follows Muehlethaler et al., IEEE TPEL 27(2), 2012.
"""
from __future__ import annotations

import dataclasses
import math

import pytest

from workbench.materials import BiasParams, get_material
from workbench.models.bias import bias_steinmetz, dc_field_strength

TABLE = BiasParams(h_dc=(0.0, 20.0, 60.0), k_ratio=(1.0, 1.5, 3.0), alpha_shift=(0.0, -0.01, -0.04),
                   beta_shift=(0.0, -0.05, -0.2))


def test_dc_field_strength_by_hand():
    # 12 turns, 5 A, 60 mm path: H = 12 * 5 / 0.06 = 1000 A/m
    assert dc_field_strength(12, 5.0, 0.06) == pytest.approx(1000.0, rel=1e-12)
    with pytest.raises(ValueError, match="path_length"):
        dc_field_strength(12, 5.0, 0.0)


def test_interpolation_by_hand():
    # halfway between 20 and 60 A/m: ln k ratio halfway between ln 1.5 and ln 3
    b = bias_steinmetz(2.0, 1.4, 2.5, -40.0, TABLE)
    assert b.k == pytest.approx(2.0 * math.sqrt(1.5 * 3.0), rel=1e-12)
    assert b.alpha == pytest.approx(1.4 - 0.025, abs=1e-12)
    assert b.beta == pytest.approx(2.5 - 0.125, abs=1e-12)
    assert not b.extrapolated and b.h_dc == 40.0
    at0 = bias_steinmetz(2.0, 1.4, 2.5, 0.0, TABLE)
    assert (at0.k, at0.alpha, at0.beta) == (2.0, 1.4, 2.5)
    beyond = bias_steinmetz(2.0, 1.4, 2.5, 100.0, TABLE)
    assert beyond.extrapolated and beyond.k == pytest.approx(6.0)


def test_bias_table_validation():
    from workbench.materials import material_to_toml

    m = get_material("mnzn-power-ferrite")
    bad = BiasParams(h_dc=(5.0, 20.0), k_ratio=(1.0, 1.2), alpha_shift=(0.0, 0.0), beta_shift=(0.0, 0.0))
    src = dict(m.sources, **{f"bias.{f}": "test" for f in ("h_dc", "k_ratio", "alpha_shift", "beta_shift")})
    with pytest.raises(ValueError, match="bias.h_dc"):
        material_to_toml(dataclasses.replace(m, bias=bad, sources=src))
    good = dataclasses.replace(m, bias=TABLE, sources=src)
    text = material_to_toml(good)
    assert "[materials.\"mnzn-power-ferrite\".bias]" in text and "k_ratio" in text


engine = pytest.importorskip("workbench.engine")


def _biased_ferrite():
    m = get_material("mnzn-power-ferrite")
    src = dict(m.sources, **{f"bias.{f}": "test table" for f in ("h_dc", "k_ratio", "alpha_shift", "beta_shift")})
    return dataclasses.replace(m, name="biased-ferrite-test", bias=TABLE, sources=src)


def test_engine_uses_bias_table():
    from workbench.shapes import ShapeSpec

    m = _biased_ferrite()
    spec = ShapeSpec("sine", 0.1, 100e3)
    st = m.steinmetz
    t = 90.0
    factor = st.temperature.ct0 - st.temperature.ct1 * t + st.temperature.ct2 * t * t
    r = engine.core_loss(spec, m, temperature=t, h_dc=40.0)
    # Steinmetz by hand with the interpolated parameters (sine: iGSE = Steinmetz)
    k = st.k * factor * math.sqrt(1.5 * 3.0)
    by_hand = k * 100e3 ** (st.alpha - 0.025) * 0.1 ** (st.beta - 0.125)
    assert r.loss_w_m3 == pytest.approx(by_hand, rel=1e-9)
    assert not any("no DC-bias data" in w for w in r.warnings)
    far = engine.core_loss(spec, m, temperature=t, h_dc=100.0)
    assert any("beyond" in w for w in far.warnings)


def test_engine_without_bias_data_warns_with_rule_of_thumb():
    from workbench.shapes import ShapeSpec

    spec = ShapeSpec("sine", 0.1, 100e3)
    plain = engine.core_loss(spec, "mnzn-power-ferrite", temperature=90.0)
    r = engine.core_loss(spec, "mnzn-power-ferrite", temperature=90.0, h_dc=50.0)
    assert r.loss_w_m3 == plain.loss_w_m3
    msg = [w for w in r.warnings if "no DC-bias data" in w]
    assert msg and "twice" in msg[0] and "Muehlethaler" in msg[0]
