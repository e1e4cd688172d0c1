"""Thermal operating point (workbench.analysis.thermal) against closed forms and ODE integration.

References used here:
* Closed form of the linear case: P(T) = P0 + a (T - T0), Q = (T - T_a)/R_th gives
  T* = (T_a + R_th (P0 - a T0)) / (1 - R_th a), and no equilibrium when R_th a >= 1
  (algebra, common practice, no source).
* Direct time integration of C dT/dt = P(T) - Q(T) with scipy.integrate.solve_ivp.
* The engine's own core_loss at the temperature found (the thermal module must use the
  engine's number, not its own).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from workbench.analysis import thermal as th


def linear_power(p0, a, t0):
    return lambda t: p0 + a * (t - t0)


@pytest.mark.parametrize("p0, a, t0, r_th, ta", [
    (1.0, 0.01, 25.0, 20.0, 25.0),
    (2.5, 0.02, 100.0, 12.0, 40.0),
    (0.4, -0.003, 60.0, 35.0, 0.0),     # loss falling with temperature (ferrite below its minimum)
    (3.0, 0.0, 25.0, 10.0, 55.0),       # temperature independent
])
def test_linear_loss_closed_form(p0, a, t0, r_th, ta):
    # closed form (algebra): T* = (T_a + R (P0 - a T0)) / (1 - R a); loop gain R a
    eq = th.solve_equilibrium(linear_power(p0, a, t0), th.FixedResistance(r_th), ta, 150.0)
    expected = (ta + r_th * (p0 - a * t0)) / (1 - r_th * a)
    assert eq.temperature == pytest.approx(expected, abs=1e-8)
    assert eq.loop_gain == pytest.approx(r_th * a, abs=1e-6)
    assert eq.stable and not eq.runaway
    assert eq.power == pytest.approx(p0 + a * (expected - t0), rel=1e-12)


@pytest.mark.parametrize("gain", [0.999, 1.0, 1.001, 1.5])
def test_runaway_exactly_when_loop_gain_reaches_one(gain):
    # closed form: with R a >= 1 the removal line never catches up with the loss line
    r_th, a = 10.0, gain / 10.0
    eq = th.solve_equilibrium(linear_power(0.5, a, 25.0), th.FixedResistance(r_th), 25.0, 1e6, step=1000.0)
    if gain < 1:
        expected = (25.0 + r_th * (0.5 - a * 25.0)) / (1 - r_th * a)
        assert not eq.runaway and eq.temperature == pytest.approx(expected, rel=1e-9)
    else:
        assert eq.runaway and eq.temperature is None and not eq.stable


def test_equilibrium_above_limit_is_runaway():
    # closed form T* = (25 + 20 * 1.0) / (1 - 20 * 0.02) = 75 degC, above a 70 degC limit
    eq = th.solve_equilibrium(linear_power(1.0, 0.02, 0.0), th.FixedResistance(20.0), 25.0, 70.0)
    assert eq.runaway and eq.temperature is None
    eq = th.solve_equilibrium(linear_power(1.0, 0.02, 0.0), th.FixedResistance(20.0), 25.0, 80.0)
    assert eq.temperature == pytest.approx(75.0, abs=1e-9)


def test_max_ambient_closed_form_linear():
    # highest ambient with T* <= limit: T_a = limit - R P(limit) (algebra, linear case R a < 1)
    p = linear_power(1.0, 0.01, 25.0)
    temps = np.linspace(-40.0, 150.0, 191)
    ta_max = th.max_ambient(temps, p(temps), th.FixedResistance(30.0), 150.0)
    assert ta_max == pytest.approx(150.0 - 30.0 * p(150.0), abs=1e-9)


def ferrite_like(p90, ct2=1.9e-4, t_min=90.0):
    # a quadratic loss curve with its minimum at 90 degC (the shape of power-ferrite data)
    return lambda t: p90 * (1.0 + ct2 * (np.asarray(t) - t_min) ** 2)


def integrate_to_steady_state(power, cooling, ta, limit, capacity=5.0):
    """C dT/dt = P(T) - Q(T) from T_a, with solve_ivp; event when T crosses the limit."""

    def rhs(_t, y):
        return [(float(power(y[0])) - float(cooling.removed(y[0], ta))) / capacity]

    def over(_t, y):
        return y[0] - limit
    over.terminal = True
    sol = solve_ivp(rhs, (0.0, 2e6), [ta], method="LSODA", rtol=1e-10, atol=1e-10, events=over)
    return sol


@pytest.mark.parametrize("cooling", [th.FixedResistance(25.0), th.SurfaceCooling(25e-4, 0.02, 0.9),
                                     th.HandbookCooling(25e-4)], ids=["r_th", "surface", "handbook"])
@pytest.mark.parametrize("p90", [0.6, 1.2])
def test_against_time_integration(cooling, p90):
    power = ferrite_like(p90)
    eq = th.solve_equilibrium(power, cooling, 30.0, 215.0)
    sol = integrate_to_steady_state(power, cooling, 30.0, 215.0)
    if sol.status == 1:   # crossed the limit: runaway
        assert eq.runaway
    else:
        assert not eq.runaway
        assert eq.temperature == pytest.approx(sol.y[0, -1], abs=1e-4)
        assert eq.stable


def test_runaway_case_matches_integration():
    # strong rise of loss with temperature and poor cooling: the integration crosses the limit
    power = ferrite_like(2.0, ct2=8e-4)
    cooling = th.FixedResistance(40.0)
    eq = th.solve_equilibrium(power, cooling, 40.0, 215.0)
    sol = integrate_to_steady_state(power, cooling, 40.0, 215.0)
    assert sol.status == 1 and eq.runaway


def test_escape_temperature_of_a_two_crossing_curve():
    # P(T) = 0.5 + 1e-4 (T - 25)^2, Q = (T - 25)/40: crossings where
    # 1e-4 x^2 - x/40 + 0.5 = 0 with x = T - 25: x = (0.025 -+ sqrt(0.025^2 - 2e-4)) / 2e-4
    power = lambda t: 0.5 + 1e-4 * (t - 25.0) ** 2  # noqa: E731
    eq = th.solve_equilibrium(power, th.FixedResistance(40.0), 25.0, 400.0)
    disc = math.sqrt(0.025**2 - 4 * 1e-4 * 0.5)
    assert eq.temperature == pytest.approx(25.0 + (0.025 - disc) / 2e-4, abs=1e-8)
    assert eq.escape_temperature == pytest.approx(25.0 + (0.025 + disc) / 2e-4, abs=1e-8)
    # loop gain R dP/dT = 40 * 2e-4 x at the first crossing
    assert eq.loop_gain == pytest.approx(40 * 2e-4 * (0.025 - disc) / 2e-4, rel=1e-6)


def test_bad_input():
    with pytest.raises(ValueError, match="r_th"):
        th.FixedResistance(-1.0)
    with pytest.raises(ValueError, match="exactly one"):
        th.make_cooling(r_th=10.0, surface_area=1e-3)
    with pytest.raises(ValueError, match="ambient"):
        th.solve_equilibrium(linear_power(1, 0, 0), th.FixedResistance(1.0), 300.0, 200.0)
    with pytest.raises(ValueError, match="emissivity"):
        th.make_cooling(surface_area=1e-3, emissivity=1.2)


# ---------------------------------------------------------------------------
# on the engine
# ---------------------------------------------------------------------------
engine = pytest.importorskip("workbench.engine")
from workbench.shapes import ShapeSpec  # noqa: E402

FERRITE = "mnzn-power-ferrite"


def test_engine_operating_point_is_self_consistent():
    spec = ShapeSpec("triangle", 0.1, 100e3, 0.5)
    vol, r_th, ta, pw = 5e-6, 20.0, 25.0, 0.3
    r = th.thermal_operating_point(spec, FERRITE, volume=vol, ambient=ta, cooling=th.make_cooling(r_th=r_th),
                                   winding_loss=pw)
    assert r.stable and not r.runaway
    direct = engine.core_loss(spec, FERRITE, temperature=r.temperature_c)
    # one number, one path: the reported loss is the engine's at the temperature found
    assert r.loss_w_m3 == pytest.approx(direct.loss_w_m3, rel=1e-12)
    # and the temperature satisfies T = T_a + R (P_core + P_winding)
    assert r.temperature_c == pytest.approx(ta + r_th * (direct.loss_w(vol) + pw), abs=1e-7)
    # loop gain against a wide central difference of the engine's loss
    up = engine.core_loss(spec, FERRITE, temperature=r.temperature_c + 0.5).loss_w(vol)
    down = engine.core_loss(spec, FERRITE, temperature=r.temperature_c - 0.5).loss_w(vol)
    assert r.loop_gain == pytest.approx(r_th * (up - down), rel=1e-3)
    d = r.to_dict()
    for key in ("temperature_c", "loss_w_m3", "loss_w", "loop_gain", "stable", "runaway", "max_ambient_c",
                "max_b_peak_t", "warnings", "cautions"):
        assert key in d


def test_engine_margins_bracket_runaway():
    spec = ShapeSpec("sine", 0.12, 100e3)
    kw = dict(volume=8e-6, cooling=th.make_cooling(r_th=15.0), winding_loss=0.2)
    r = th.thermal_operating_point(spec, FERRITE, ambient=40.0, **kw)
    assert r.stable and r.max_ambient_c is not None and r.max_b_peak_t is not None
    # just below the ambient margin a working point exists, just above it does not
    below = th.thermal_operating_point(spec, FERRITE, ambient=r.max_ambient_c - 0.5, margins=False, **kw)
    above = th.thermal_operating_point(spec, FERRITE, ambient=r.max_ambient_c + 0.5, margins=False, **kw)
    assert below.stable and above.runaway
    # likewise the flux margin at 40 degC ambient
    lo = ShapeSpec("sine", r.max_b_peak_t * 0.995, 100e3)
    hi = ShapeSpec("sine", r.max_b_peak_t * 1.005, 100e3)
    assert th.thermal_operating_point(lo, FERRITE, ambient=40.0, margins=False, **kw).stable
    assert th.thermal_operating_point(hi, FERRITE, ambient=40.0, margins=False, **kw).runaway


def test_engine_runaway_is_said_plainly():
    spec = ShapeSpec("sine", 0.2, 200e3)
    r = th.thermal_operating_point(spec, FERRITE, volume=8e-6, ambient=25.0, cooling=th.make_cooling(r_th=30.0))
    assert r.runaway and r.temperature_c is None and r.loss_w is None
    assert any("thermal runaway" in w for w in r.warnings)
    assert r.to_dict()["temperature_c"] is None


def test_engine_limit_rules():
    spec = ShapeSpec("sine", 0.1, 100e3)
    cool = th.make_cooling(r_th=10.0)
    with pytest.raises(ValueError, match="above the limit"):
        th.thermal_operating_point(spec, FERRITE, volume=1e-6, ambient=25.0, cooling=cool, limit_temperature=300.0)
    with pytest.raises(ValueError, match="not below the limit"):
        th.thermal_operating_point(spec, FERRITE, volume=1e-6, ambient=220.0, cooling=cool)
    r = th.thermal_operating_point(spec, FERRITE, volume=1e-6, ambient=25.0, cooling=cool, limit_temperature=120.0,
                                   margins=False)
    assert r.limit_temperature_c == 120.0 and r.limit_source == "given"
