"""Frequency sweeps and the eddy/hysteresis crossover frequency.

External references: the closed forms of the separation terms (G. Bertotti,
IEEE Trans. Magn. 24(1), 1988), the slab skin-effect factor written here
independently (J. Lammeraner, M. Stafl, Eddy Currents, 1966, ch. 4) with the
crossover found by scipy.optimize.brentq, and facts of the trade.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from workbench.analysis import crossover_frequency, sweep_frequency

materials = pytest.importorskip("workbench.materials")
try:
    NAMES = materials.list_materials()
except Exception as exc:  # pragma: no cover - only while the library is being written
    pytest.skip(f"material library not ready: {exc}", allow_module_level=True)

MU0 = 4e-7 * np.pi


def steel_035():
    """A 0.35 mm non-oriented silicon steel of the library (EN 10106 grade M...-35A)."""
    names = [n for n in NAMES if n.startswith("M") and n.endswith("-35A")]
    assert names, "the library should hold a 0.35 mm EN 10106 grade"
    return materials.get_material(names[0])


def slab_factor(xi):
    """F(xi) = (3/xi) (sinh xi - sin xi)/(cosh xi - cos xi) (Lammeraner & Stafl 1966, ch. 4)."""
    return 3 / xi * (np.sinh(xi) - np.sin(xi)) / (np.cosh(xi) - np.cos(xi))


def classical_sine(f, b, rho, d, mu_r=None):
    """pi^2 d^2 f^2 B^2 / (6 rho) (Bertotti 1988), times the slab factor when mu_r is given."""
    p = np.pi**2 * d**2 * f**2 * b**2 / (6 * rho)
    if mu_r is not None:
        delta = np.sqrt(rho / (np.pi * f * MU0 * mu_r))
        p = p * slab_factor(d / delta)
    return p


def test_crossover_closed_form_for_sine_without_skin_effect():
    # closed form: k_h f B^beta_h = pi^2 d^2 f^2 B^2/(6 rho)  =>  f_x = 6 rho k_h B^(beta_h-2)/(pi^2 d^2)
    mat = steel_035()
    sep = mat.separation
    b = 1.5
    expected = 6 * mat.resistivity * sep.k_hyst * b ** (sep.beta_hyst - 2) / (np.pi**2 * mat.thickness**2)
    res = crossover_frequency(mat, b_peak=b, skin_effect=False)
    assert res.method == "closed form"
    assert res.freq == pytest.approx(expected, rel=1e-12)  # the ideal sine, not a sampled one
    assert res.hysteresis_from == "separation"


def test_crossover_closed_form_for_triangle():
    # closed form: classical loss of a triangle of duty D is d^2/(12 rho) 4 B^2 f^2 (1/D + 1/(1-D))
    mat = steel_035()
    sep = mat.separation
    b, duty = 1.0, 0.3
    expected = sep.k_hyst * b**sep.beta_hyst * 12 * mat.resistivity / (
        mat.thickness**2 * 4 * b**2 * (1 / duty + 1 / (1 - duty)))
    res = crossover_frequency(mat, b_peak=b, shape="triangle", duty=duty, skin_effect=False)
    assert res.freq == pytest.approx(expected, rel=1e-10)


def test_crossover_with_skin_effect_matches_independent_root_find():
    # reference: brentq on the test's own closed forms (hysteresis k_h f B^beta, classical with the
    # slab factor); the library uses a grid + Brent on log f
    mat = steel_035()
    sep = mat.separation
    b = 1.5

    def g(f):
        return classical_sine(f, b, mat.resistivity, mat.thickness, mat.rel_permeability) - sep.k_hyst * f * b**sep.beta_hyst

    expected = brentq(g, 1.0, 1e5, xtol=1e-10, rtol=1e-12)
    res = crossover_frequency(mat, b_peak=b)
    assert res.method == "root find"
    assert res.freq == pytest.approx(expected, rel=1e-9)


def test_crossover_of_035_mm_silicon_steel_lies_in_the_hundreds_of_hertz():
    # common practice, no source: for 0.35 mm non-oriented steel at 1.5 T eddy loss overtakes
    # hysteresis loss at a few hundred hertz
    res = crossover_frequency(steel_035(), b_peak=1.5)
    assert 100.0 <= res.freq <= 1000.0, res.message


def test_thin_nanocrystalline_ribbon_crosses_over_far_higher():
    # common practice, no source: a thin, resistive nanocrystalline ribbon keeps hysteresis dominant
    # up to many kilohertz, far above silicon steel
    nano = [materials.get_material(n) for n in NAMES if materials.get_material(n).family == "nanocrystalline"]
    assert nano
    steel = crossover_frequency(steel_035(), b_peak=1.5).freq
    for mat in nano:
        assert mat.thickness <= 30e-6
        res = crossover_frequency(mat, b_peak=min(1.0, 0.8 * mat.b_sat))
        assert res.freq is not None and res.freq > 10 * steel, res.message


def test_no_crossover_in_range_gives_a_clear_answer():
    mat = steel_035()
    low = crossover_frequency(mat, b_peak=1.5, f_range=(1.0, 10.0))
    assert low.freq is None and "stays below" in low.message and "no crossover" in low.message
    high = crossover_frequency(mat, b_peak=1.5, f_range=(1e4, 1e5))
    assert high.freq is None and "already exceeds" in high.message
    closed = crossover_frequency(mat, b_peak=1.5, skin_effect=False, f_range=(1.0, 10.0))
    assert closed.freq is None and "outside the range" in closed.message


def test_sweep_parts_follow_their_laws_in_frequency():
    # closed forms: iGSE of a sine = Steinmetz k f^alpha B^beta (Venkatachalam et al., COMPEL 2002);
    # hysteresis k_h f B^beta_h and excess 8.76 k_e (f B)^1.5 (Bertotti 1988); classical with the slab factor
    mat = steel_035()
    st, sep = mat.steinmetz, mat.separation
    b = 1.2
    f = np.geomspace(10.0, 1e5, 25)
    sw = sweep_frequency(mat, "sine", b_peak=b, freqs=f)
    np.testing.assert_allclose(sw.total, st.k * f**st.alpha * b**st.beta, rtol=1e-12)
    np.testing.assert_allclose(sw.hysteresis, sep.k_hyst * f * b**sep.beta_hyst, rtol=1e-12)
    np.testing.assert_allclose(sw.excess, 8.763 * sep.k_excess * (f * b) ** 1.5, rtol=1e-3)
    expected_cl = classical_sine(f, b, mat.resistivity, mat.thickness, mat.rel_permeability)
    np.testing.assert_allclose(sw.classical, expected_cl, rtol=1e-9)
    np.testing.assert_allclose(sw.separation_total, sw.hysteresis + sw.classical + sw.excess, rtol=1e-12)
    np.testing.assert_allclose(sw.energy_per_cycle(sw.total), sw.total / f)
    lo, hi = st.freq_range
    np.testing.assert_array_equal(sw.extrapolated, (f < lo) | (f > hi))


def test_sweep_eddy_scales_as_f_squared_then_bends():
    # common practice, no source: f^2 at low frequency, towards f^1.5 once the skin effect sets in
    mat = steel_035()
    f = np.array([1.0, 2.0, 1e6, 2e6])
    sw = sweep_frequency(mat, "triangle", b_peak=0.1, freqs=f)
    low = np.log(sw.classical[1] / sw.classical[0]) / np.log(2)
    high = np.log(sw.classical[3] / sw.classical[2]) / np.log(2)
    assert low == pytest.approx(2.0, abs=1e-3)
    assert high == pytest.approx(1.5, abs=0.05)


def test_sweep_relaxation_matches_hand_calculation_for_trapezoid():
    # Hand calculation from the i2GSE relaxation term, J. Muehlethaler et al., IEEE Trans. Power
    # Electron. 27(2), 2012: per flat interval E = k_r |dB/dt|^alpha_r (dB)^beta_r (1 - exp(-t/tau)),
    # Q = 1 because the flux reverses after each dwell. A trapezoid of duty D rises 2 B_peak in
    # D T / 2, dwells (1 - D) T / 2, falls, dwells again: two intervals per period.
    mat = materials.get_material("mnzn-power-ferrite")
    rx = mat.relaxation
    b, duty = 0.1, 0.5
    f = np.array([1e3, 1e5, 1e7])
    sw = sweep_frequency(mat, "trapezoid", b_peak=b, duty=duty, freqs=f, temperature=90.0)
    slope = 2 * b / (duty / (2 * f))
    dwell = (1 - duty) / (2 * f)
    energy = rx.k_r * slope**rx.alpha_r * (2 * b) ** rx.beta_r * (1 - np.exp(-dwell / rx.tau))
    assert sw.relaxation == pytest.approx(2 * energy * f, rel=1e-9)
    assert sw.loss_model == "i2GSE"


# ---------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("f_range", [(10.0, 1.0), (0.0, 10.0), (1.0, np.inf)])
def test_bad_frequency_range_is_rejected(f_range):
    with pytest.raises(ValueError, match=r"f_range must be two increasing positive frequencies, got"):
        crossover_frequency(steel_035(), b_peak=1.0, f_range=f_range)


@pytest.mark.parametrize("freqs", [[-1.0, 10.0], [0.0], [np.nan], []])
def test_bad_sweep_frequencies_are_rejected(freqs):
    with pytest.raises(ValueError, match=r"freqs must be a 1-D array of finite positive frequencies"):
        sweep_frequency(steel_035(), "sine", b_peak=1.0, freqs=freqs)


def test_unknown_shape_and_bad_flux_are_rejected():
    with pytest.raises(ValueError, match=r"shape must be one of sine, triangle, trapezoid; got 'square'"):
        sweep_frequency(steel_035(), "square", b_peak=1.0)
    with pytest.raises(ValueError, match=r"b_peak must be a finite positive number, got -1"):
        crossover_frequency(steel_035(), b_peak=-1.0)
    with pytest.raises(ValueError, match=r"duty must lie in \(0, 1\), got 1\.0"):
        crossover_frequency(steel_035(), b_peak=1.0, shape="triangle", duty=1.0)
    with pytest.raises(ValueError, match=r"thickness must be finite and positive \[m\], got 0"):
        crossover_frequency(steel_035(), b_peak=1.0, thickness=0.0)
