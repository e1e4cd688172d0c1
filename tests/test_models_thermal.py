"""Heat removal from a component's surface (workbench.models.thermal) against outside references.

References used here:
* Incropera, DeWitt, Bergman, Lavine, "Fundamentals of Heat and Mass Transfer", 6th ed., Wiley,
  2007, table A.4 (air at 1 atm) -- values from memory; that table's densities sit about 1.3 %
  below the ideal-gas value at 101 325 Pa, so density-based checks use 2.5 %.
* The laminar similarity solution of natural convection on an isothermal vertical plate
  (S. Ostrach, NACA Report 1111, 1953), solved here with scipy.integrate.solve_bvp.
* Stefan-Boltzmann law by hand.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants
from scipy.integrate import solve_bvp

from workbench.models import thermal as th

# Incropera et al. 2007, table A.4 (from memory): T [K] -> (rho, mu, nu, k, alpha, Pr)
INCROPERA_TABLE_A4_AIR = {
    300.0: (1.1614, 184.6e-7, 15.89e-6, 26.3e-3, 22.5e-6, 0.707),
    350.0: (0.9950, 208.2e-7, 20.92e-6, 30.0e-3, 29.9e-6, 0.700),
    400.0: (0.8711, 230.1e-7, 26.41e-6, 33.8e-3, 38.3e-6, 0.690),
}


@pytest.mark.parametrize("kelvin", sorted(INCROPERA_TABLE_A4_AIR))
def test_air_properties_match_handbook_table(kelvin):
    rho, mu, nu, k, alpha, pr = INCROPERA_TABLE_A4_AIR[kelvin]
    air = th.air_properties(kelvin - 273.15)
    assert air.density == pytest.approx(rho, rel=0.025)
    assert air.viscosity == pytest.approx(mu, rel=0.01)
    assert air.kinematic_viscosity == pytest.approx(nu, rel=0.025)
    assert air.conductivity == pytest.approx(k, rel=0.01)
    assert air.diffusivity == pytest.approx(alpha, rel=0.025)
    assert air.prandtl == pytest.approx(pr, rel=0.015)


def _ostrach_minus_theta_prime(pr: float) -> float:
    """-theta'(0) of the laminar similarity solution (Ostrach 1953), solved with solve_bvp.

    f''' + 3 f f'' - 2 f'^2 + theta = 0,  theta'' + 3 Pr f theta' = 0,
    f(0) = f'(0) = 0, theta(0) = 1, f'(inf) = theta(inf) = 0.
    """
    eta = np.linspace(0.0, 12.0, 400)

    def rhs(_x, y):
        f, fp, fpp, t, tp = y
        return np.vstack([fp, fpp, -3 * f * fpp + 2 * fp**2 - t, tp, -3 * pr * f * tp])

    def bc(a, b):
        return np.array([a[0], a[1], a[3] - 1.0, b[1], b[3]])

    guess = np.zeros((5, eta.size))
    guess[3] = np.exp(-eta)
    guess[4] = -np.exp(-eta)
    guess[1] = eta * np.exp(-eta)
    sol = solve_bvp(rhs, bc, eta, guess, tol=1e-8, max_nodes=100000)
    assert sol.success
    return float(-sol.sol(0.0)[4])


def test_similarity_solver_reproduces_published_value():
    # Ostrach (1953), as tabulated in textbooks: -theta'(0) = 0.5046 at Pr = 0.72 (from memory)
    assert _ostrach_minus_theta_prime(0.72) == pytest.approx(0.5046, rel=2e-3)


@pytest.mark.parametrize("rayleigh", [1e5, 1e6, 1e7, 1e8])
def test_churchill_chu_laminar_agrees_with_similarity_solution(rayleigh):
    # Mean Nusselt number of the similarity solution: Nu = (4/3) (-theta'(0)) (Gr/4)^(1/4).
    # The correlation's Ra^(1/4) term is the boundary-layer solution (within the 1-2 % of its
    # Prandtl interpolation); the constant 0.68 adds what thin boundary layers miss on real
    # plates at low Ra (Churchill and Chu 1975).
    pr = 0.71
    gr = rayleigh / pr
    nu_exact = 4.0 / 3.0 * _ostrach_minus_theta_prime(pr) * (gr / 4.0) ** 0.25
    nu = th.nusselt_vertical_churchill_chu(rayleigh, pr)
    assert nu - 0.68 == pytest.approx(nu_exact, rel=0.02)


def test_churchill_chu_full_range_form_above_laminar_limit():
    # Churchill and Chu (1975), whole-range form, by hand at Ra = 1e10, Pr = 0.71:
    # psi = 1 + (0.492/0.71)^(9/16) = 1.8136; Nu = (0.825 + 0.387 * 1e10^(1/6) / psi^(8/27))^2
    psi = 1 + (0.492 / 0.71) ** (9 / 16)
    by_hand = (0.825 + 0.387 * 10 ** (10 / 6) / psi ** (8 / 27)) ** 2
    assert by_hand == pytest.approx(252.3, rel=2e-3)   # hand arithmetic: 0.825 + 15.058 = 15.883, squared
    assert th.nusselt_vertical_churchill_chu(1e10, 0.71) == pytest.approx(by_hand, rel=1e-12)


@pytest.mark.parametrize("dt, height", [(20.0, 0.02), (40.0, 0.03), (60.0, 0.05)])
def test_simplified_relation_against_similarity_solution(dt, height):
    # Holman's simplified laminar relation for air, h = 1.42 (dT/L)^(1/4), is a rounded form of
    # Nu = 0.59 Ra^(1/4) for air near room temperature (from memory). The exact laminar solution
    # with the film properties of air lies about 8-12 % lower; hold the relation to 15 %.
    ta = 25.0
    film = ta + dt / 2
    air = th.air_properties(film)
    gr = constants.g / (film + 273.15) * dt * height**3 / air.kinematic_viscosity**2
    nu_exact = 4.0 / 3.0 * _ostrach_minus_theta_prime(air.prandtl) * (gr / 4.0) ** 0.25
    h_exact = nu_exact * air.conductivity / height
    h = th.convection_coefficient(ta + dt, ta, height, method="simplified")
    assert h == pytest.approx(1.42 * (dt / height) ** 0.25, rel=1e-12)
    assert h == pytest.approx(h_exact, rel=0.15)
    # and the Churchill-Chu coefficient with the same air lies between the two
    h_cc = th.convection_coefficient(ta + dt, ta, height)
    assert h_exact < h_cc < 1.1 * h


def test_radiation_by_hand():
    # Stefan-Boltzmann law (Incropera eq. 1.7, from memory), by hand: a black surface at
    # 400 K facing surroundings at 300 K radiates 5.670e-8 * (400^4 - 300^4) = 992.3 W/m^2
    q = th.radiation_coefficient(400 - 273.15, 300 - 273.15, 1.0) * 100.0
    assert q == pytest.approx(992.3, rel=1e-3)
    # small temperature difference: h_r -> 4 eps sigma T^3 (linearisation, by hand)
    t = 350.0
    hr = th.radiation_coefficient(t - 273.15 + 1e-4, t - 273.15, 0.8)
    assert hr == pytest.approx(4 * 0.8 * constants.Stefan_Boltzmann * t**3, rel=1e-6)


def test_handbook_relation_by_hand():
    # (P[mW] / A[cm^2])^0.833 (from memory): 1 W over 10 cm^2 -> 100^0.833 = 46.35 K
    assert th.handbook_temperature_rise(1.0, 10e-4) == pytest.approx(46.35, rel=1e-3)
    # 0.5 W over 25 cm^2 -> 20^0.833 = 12.12 K
    assert th.handbook_temperature_rise(0.5, 25e-4) == pytest.approx(12.12, rel=1e-3)
    # inverse
    assert th.handbook_heat_loss(12.12, 25e-4) == pytest.approx(0.5, rel=1e-3)


def test_surface_heat_loss_and_resistance_consistent():
    area, height = 30e-4, 0.025
    ta, ts = 40.0, 95.0
    q = th.surface_heat_loss(ts, ta, area, height, 0.9)
    r = th.thermal_resistance(area, ts - ta, t_ambient=ta, height=height, emissivity=0.9)
    assert r == pytest.approx((ts - ta) / q, rel=1e-12)
    # slope against a wide-step finite difference of the heat loss (independent step)
    slope = th.surface_heat_loss_slope(ts, ta, area, height, 0.9)
    wide = (th.surface_heat_loss(ts + 0.5, ta, area, height, 0.9)
            - th.surface_heat_loss(ts - 0.5, ta, area, height, 0.9))
    assert slope == pytest.approx(wide, rel=1e-4)
    # the incremental conductance exceeds the secant one (h grows with dT)
    assert slope > q / (ts - ta)


def test_order_of_magnitude_of_a_small_component():
    # common practice, no source: a compact wound part of 20 cm^2 in still air has a
    # surface-to-ambient resistance of a few tens of K/W at a 40 K rise
    r = th.thermal_resistance(20e-4, 40.0)
    assert 15.0 < r < 50.0


@pytest.mark.parametrize("call, match", [
    (lambda: th.radiation_coefficient(50, 25, 1.5), "emissivity"),
    (lambda: th.convection_coefficient(50, 25, -0.1), "height"),
    (lambda: th.convection_coefficient(50, 25, 0.1, method="x"), "method"),
    (lambda: th.air_properties(math.nan), "temperature"),
    (lambda: th.air_properties(-300.0), "temperature"),
    (lambda: th.handbook_temperature_rise(-1.0, 1e-3), "power"),
    (lambda: th.thermal_resistance(0.0, 40.0), "area"),
    (lambda: th.nusselt_vertical_churchill_chu(1e13, 0.7), "rayleigh"),
])
def test_bad_input_is_refused_by_name(call, match):
    with pytest.raises(ValueError, match=match):
        call()
