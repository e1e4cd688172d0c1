"""Loss separation: classical eddy current (with skin effect), hysteresis and excess terms.

Main sources: G. Bertotti, "General properties of power losses in soft
ferromagnetic materials", IEEE Trans. Magn. 24(1), 1988 ("Bertotti 1988") for
the three terms; the skin effect is checked against an independent finite-
difference solution of 1-D linear diffusion in a slab written in this file.
"""
from __future__ import annotations

from fractions import Fraction
from math import factorial

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.integrate import quad, simpson
from scipy.sparse.linalg import spsolve

from workbench import models, waveforms

MU0 = 4e-7 * np.pi  # magnetic constant, classical SI value (differs from CODATA 2018 by 5e-10)
RHO = 4.5e-7  # ohm m, silicon-steel-like (invented for the test)
D = 0.35e-3  # m


# ---------------------------------------------------------------------------
# classical term without skin effect
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("freq, b_peak", [(50.0, 1.5), (400.0, 1.0), (5e3, 0.2)])
def test_classical_sine_closed_form_equals_quadrature(freq, b_peak):
    # reference: Bertotti 1988, eq. for the classical loss of a lamination, sigma d^2/12 <(dB/dt)^2>,
    # with the time average done here by scipy.integrate.quad over one period of B = Bp sin(wt)
    w = 2 * np.pi * freq
    mean_sq, _ = quad(lambda t: (b_peak * w * np.cos(w * t)) ** 2, 0.0, 1 / freq, epsrel=1e-12)
    expected = D**2 / (12 * RHO) * mean_sq * freq
    assert models.classical_eddy(freq, b_peak, RHO, D) == pytest.approx(expected, rel=1e-9)
    # the same for the sampled sine through the waveform path (exact to about (pi/n)^2)
    wf = waveforms.sine(b_peak, freq, samples=8192)
    assert models.classical_eddy_waveform(wf, RHO, D) == pytest.approx(expected, rel=1e-6)


def test_classical_triangle_closed_form():
    # closed form: a triangle of duty D has |dB/dt| = 2B f / D and 2B f / (1-D), so
    # <(dB/dt)^2> = 4 B^2 f^2 (1/D + 1/(1-D))
    bp, f, duty = 0.1, 20e3, 0.3
    expected = D**2 / (12 * RHO) * 4 * bp**2 * f**2 * (1 / duty + 1 / (1 - duty))
    w = waveforms.triangle(bp, f, duty)
    assert models.classical_eddy_waveform(w, RHO, D) == pytest.approx(expected, rel=1e-12)


def test_harmonic_sum_without_skin_effect_equals_time_domain_for_triangle():
    # closed form: <(dB/dt)^2> = 4 B^2 f^2 (1/D + 1/(1-D)) for a triangle of duty D (Bertotti 1988,
    # eq. (1) for the loss). Without permeability the spectrum object must give d^2/(12 rho) times it
    # exactly; with mu_r = 1 and a huge resistivity (skin depth far beyond the sheet, xi ~ 1e-3) the
    # harmonic sum with F must reach the same number (Parseval's theorem).
    bp, f, duty = 0.1, 1e3, 0.3
    expected = D**2 / (12 * RHO) * 4 * bp**2 * f**2 * (1 / duty + 1 / (1 - duty))
    spec = models.eddy_spectrum(waveforms.triangle(bp, f, duty))
    assert spec.classical(f, RHO, D) == pytest.approx(expected, rel=1e-12)
    rho = 1e3
    thin = D**2 / (12 * rho) * 4 * bp**2 * f**2 * (1 / duty + 1 / (1 - duty))
    assert spec.classical(f, rho, D, rel_permeability=1.0) == pytest.approx(thin, rel=1e-9)


def skin_factor_closed_form(x):
    """F(xi) = (3/xi)(sinh xi - sin xi)/(cosh xi - cos xi) of a lamination (R. L. Stoll, *The analysis of
    eddy currents*, Clarendon Press, 1974, ch. 3; Lammeraner & Stafl 1966, ch. 4), written with exp(-xi)
    factored out so that it neither overflows nor cancels for xi >= 0.3."""
    e = np.exp(-x)
    return 3.0 / x * (1.0 - e * e - 2.0 * e * np.sin(x)) / (1.0 + e * e - 2.0 * e * np.cos(x))


def triangle_classical_by_fourier_series(bp, f, duty, rho, d, mu_r, n_max=1 << 21):
    """Classical eddy loss of a triangle, harmonic by harmonic, from its closed-form Fourier series.

    The triangle rising 2 bp in duty/f and falling in (1 - duty)/f has harmonic amplitudes
    B_n = 2 bp |sin(pi n D)| / (pi^2 n^2 D (1 - D)) (the integral of the Fourier series of a
    rectangular pulse train: A. V. Oppenheim, A. S. Willsky, *Signals and Systems*, 2nd ed., 1997,
    example 3.5); each harmonic loses pi^2 d^2 (n f)^2 B_n^2 F(xi_n) / (6 rho) (Bertotti 1988, eq. (2);
    linear diffusion superposes), with xi_n = d / delta_n. The terms fall as n^-2.5: stopping at
    2**21 harmonics leaves less than 1e-8 of the sum.
    """
    mu0 = 4e-7 * np.pi * (1 + 5.5e-10)  # CODATA 2018 mu_0 = 1.25663706212e-6 H/m
    total = 0.0
    for n0 in range(1, n_max + 1, 1 << 19):
        n = np.arange(n0, min(n0 + (1 << 19), n_max + 1), dtype=float)
        bn = 2 * bp * np.abs(np.sin(np.pi * n * duty)) / (np.pi**2 * n**2 * duty * (1 - duty))
        xi = d * np.sqrt(np.pi * n * f * mu0 * mu_r / rho)
        total += np.sum(np.pi**2 * d**2 * (n * f) ** 2 * bn**2 / (6 * rho) * skin_factor_closed_form(xi))
    return total


@pytest.mark.parametrize("duty", [0.5, 0.3, 0.123])
@pytest.mark.parametrize("freq", [50.0, 2e4, 1e6])
def test_classical_triangle_with_skin_effect_matches_its_fourier_series(duty, freq):
    # reference: the closed-form Fourier series above, summed to 2**21 harmonics in the test; the issue
    # asks for the harmonic sum to converge to 1e-5 relative (a 256-point FFT was 0.1-0.5 % off)
    bp, mu_r = 0.1, 2000.0
    expected = triangle_classical_by_fourier_series(bp, freq, duty, RHO, D, mu_r)
    w = waveforms.triangle(bp, freq, duty)
    assert models.classical_eddy_waveform(w, RHO, D, rel_permeability=mu_r) == pytest.approx(expected, rel=1e-6)
    # the same shape sampled on an even grid takes the FFT path of the spectrum
    fine = w.resample(1000)
    assert models.classical_eddy_waveform(fine, RHO, D, rel_permeability=mu_r) == pytest.approx(expected, rel=1e-6)


def test_spectrum_sweep_equals_point_calculation():
    # one number, one path: the spectrum of a shape evaluated over an array of frequencies must equal
    # the point calculation of the shape played at each frequency (time scaled, flux kept) to 1e-12
    base = waveforms.FluxWaveform(np.array([0, 0.35, 0.60]) * 1e-5, [0.0, 0.15, 0.0], 1e-5)
    freqs = np.geomspace(10.0, 3e6, 9)
    sweep = models.eddy_spectrum(base).classical(freqs, RHO, D, rel_permeability=1800.0)
    points = [models.classical_eddy_waveform(base.with_period(1 / f), RHO, D, rel_permeability=1800.0) for f in freqs]
    np.testing.assert_allclose(sweep, points, rtol=1e-12)
    # resistivity and thickness broadcast against the frequencies
    grid = models.eddy_spectrum(base).classical(freqs[:, None], np.array([RHO, 2 * RHO]), D, 1800.0)
    assert grid.shape == (9, 2)
    np.testing.assert_allclose(grid[:, 0], sweep, rtol=1e-12)
    # without skin effect the loss of a shape grows exactly as f^2 (closed form, Bertotti 1988 eq. (1))
    plain = models.eddy_spectrum(base).classical(freqs, RHO, D)
    np.testing.assert_allclose(plain / freqs**2, plain[0] / freqs[0] ** 2, rtol=1e-12)


def test_eddy_loss_scales_as_f2_b2_at_low_frequency():
    # common practice, no source: classical eddy loss goes as f^2 B^2 while the sheet is thin
    # against the skin depth
    p = lambda f, b: models.classical_eddy(f, b, RHO, D, rel_permeability=2000.0)  # noqa: E731
    assert p(20.0, 1.0) / p(10.0, 1.0) == pytest.approx(4.0, rel=1e-3)
    assert p(10.0, 1.0) / p(10.0, 0.5) == pytest.approx(4.0, rel=1e-12)


def test_skin_effect_bends_loss_towards_f_to_the_1_5():
    # common practice, no source: once the sheet is many skin depths thick the classical loss at fixed
    # mean flux density rises only as f^1.5
    mu_r = 2000.0
    f = np.array([1e6, 2e6])
    p = models.classical_eddy(f, 0.01, RHO, D, rel_permeability=mu_r)
    slope = np.log(p[1] / p[0]) / np.log(2.0)
    assert slope == pytest.approx(1.5, abs=0.01)
    f_low = np.array([1.0, 2.0])
    p_low = models.classical_eddy(f_low, 0.01, RHO, D, rel_permeability=mu_r)
    assert np.log(p_low[1] / p_low[0]) / np.log(2.0) == pytest.approx(2.0, abs=1e-3)


# ---------------------------------------------------------------------------
# skin effect against an independent numerical solution of 1-D diffusion
# ---------------------------------------------------------------------------
def slab_eddy_loss_fd(freq, d, mu_r, rho, b_mean, n=4001):
    """Eddy loss [W/m^3] of a slab at a given mean flux density amplitude, by finite differences.

    Solves d2H/dx2 = j w mu sigma H on [-d/2, d/2] with H = 1 at both faces (complex phasors,
    second-order central differences, scipy.sparse), then J = dH/dx,
    P = (1/d) integral |J|^2 / (2 sigma) dx, scaled to the requested mean B amplitude.
    """
    sigma = 1 / rho
    mu = MU0 * mu_r
    x = np.linspace(-d / 2, d / 2, n)
    h = x[1] - x[0]
    k2 = 1j * 2 * np.pi * freq * mu * sigma
    m = n - 2  # interior unknowns
    main = np.full(m, -2.0 / h**2 - k2, dtype=complex)
    off = np.full(m - 1, 1.0 / h**2, dtype=complex)
    a = sp.diags([off, main, off], [-1, 0, 1], format="csc")
    rhs = np.zeros(m, dtype=complex)
    rhs[0] = rhs[-1] = -1.0 / h**2  # the boundary values H = 1
    hx = np.empty(n, dtype=complex)
    hx[0] = hx[-1] = 1.0
    hx[1:-1] = spsolve(a, rhs)
    b_avg = abs(mu * simpson(hx, x=x) / d)
    j = np.gradient(hx, h, edge_order=2)
    loss = simpson(np.abs(j) ** 2, x=x) / (2 * sigma) / d
    return loss * (b_mean / b_avg) ** 2


@pytest.mark.parametrize("xi", [0.3, 1.0, 2.0, 3.0, 5.0, 10.0])
def test_skin_effect_matches_finite_difference_diffusion(xi):
    # reference: independent numerical solution of the 1-D linear diffusion equation in a slab
    # (finite differences with scipy.sparse, written above); Lammeraner & Stafl, Eddy Currents, 1966, ch. 4
    mu_r, b_mean = 1500.0, 0.8
    delta = D / xi
    freq = RHO / (np.pi * MU0 * mu_r * delta**2)
    expected = slab_eddy_loss_fd(freq, D, mu_r, RHO, b_mean)
    got = models.classical_eddy(freq, b_mean, RHO, D, rel_permeability=mu_r)
    assert got == pytest.approx(expected, rel=1e-3)


def test_skin_depth_closed_form():
    # closed form: delta = sqrt(rho / (pi f mu0 mu_r)) (Lammeraner & Stafl 1966, ch. 2); copper at 50 Hz is
    # about 9.3 mm (from memory, handbook value for rho = 1.72e-8 ohm m)
    assert models.skin_depth(50.0, 1.72e-8, 1.0) == pytest.approx(9.33e-3, rel=2e-3)


def test_skin_effect_factor_limits_and_branch_continuity():
    # closed forms: F -> 1 for thin sheets, F -> 3/xi for thick ones (Lammeraner & Stafl 1966, ch. 4)
    assert models.skin_effect_factor(1e-4) == pytest.approx(1.0, abs=1e-12)
    assert models.skin_effect_factor(200.0) == pytest.approx(3 / 200.0, rel=1e-12)
    # the implementation switches formulas at 1 and 40: no step there
    for x in (1.0, 40.0):
        lo, hi = models.skin_effect_factor(np.array([x * (1 - 1e-12), x * (1 + 1e-12)]))
        assert lo == pytest.approx(hi, rel=1e-13)


def skin_factor_exact(x: Fraction) -> Fraction:
    """(3/x)(sinh x - sin x)/(cosh x - cos x) in exact rational arithmetic, from the power series
    sinh x - sin x = 2 sum x^(4k+3)/(4k+3)!, cosh x - cos x = 2 sum x^(4k+2)/(4k+2)! (Abramowitz &
    Stegun, Handbook of Mathematical Functions, 1964, 4.5.62-63 and 4.3.65-66), summed until the
    terms fall below 1e-40 of the sum: a high-precision evaluation independent of the code."""
    num = den = Fraction(0)
    k = 0
    while True:
        tn = x ** (4 * k + 3) / factorial(4 * k + 3)
        td = x ** (4 * k + 2) / factorial(4 * k + 2)
        num += tn
        den += td
        if k > 2 and tn < num * Fraction(1, 10**40) and td < den * Fraction(1, 10**40):
            return 3 / x * num / den
        k += 1


@pytest.mark.parametrize("x", ["1e-4", "0.003", "0.01", "0.05", "0.2", "0.5", "0.99", "1.01", "3.7", "12", "39", "41"])
def test_skin_effect_factor_equals_high_precision_evaluation(x):
    # reference: exact rational evaluation of the defining power series (above). Near zero the
    # Taylor series is 1 - xi^4/630 + ... (the defect: the code used 1 - 4 xi^4/315, which
    # is off by 1.4e-3 * xi^4 there)
    exact = float(skin_factor_exact(Fraction(x)))
    assert models.skin_effect_factor(float(x)) == pytest.approx(exact, rel=2e-15, abs=0)
    if float(x) < 0.02:
        assert 1 - models.skin_effect_factor(float(x)) == pytest.approx(1 - exact, rel=1e-6)


def test_classical_waveform_with_skin_effect_sums_harmonics():
    # reference: linear diffusion superposes, so the loss of sine + 3rd harmonic is the sum of the
    # two sinusoidal losses (closed form per harmonic; orthogonality of the harmonics)
    f, b1, b3, mu_r = 2e3, 0.5, 0.1, 3000.0
    # the waveform is read as linear between samples: its 3rd harmonic is smaller than the smooth
    # one by about (3 pi / n)^2 / 3 in amplitude, 1.3e-7 of the loss at 16384 samples
    n = 16384
    t = np.arange(n) / (n * f)
    b = b1 * np.sin(2 * np.pi * f * t) + b3 * np.sin(2 * np.pi * 3 * f * t)
    w = waveforms.FluxWaveform(t, b, 1 / f)
    expected = models.classical_eddy(f, b1, RHO, D, mu_r) + models.classical_eddy(3 * f, b3, RHO, D, mu_r)
    assert models.classical_eddy_waveform(w, RHO, D, rel_permeability=mu_r) == pytest.approx(expected, rel=1e-6)


# ---------------------------------------------------------------------------
# hysteresis and excess terms
# ---------------------------------------------------------------------------
def test_excess_sine_constant_is_bertottis_8_76():
    # reference: Bertotti 1988 (the sine constant 8.76 of the excess term); and quadrature of
    # (2 pi)^1.5 <|cos|^1.5> with scipy.integrate.quad
    integral, _ = quad(lambda th: abs(np.cos(th)) ** 1.5, 0, 2 * np.pi, points=[np.pi / 2, 3 * np.pi / 2])
    assert models.EXCESS_SINE_CONSTANT == pytest.approx((2 * np.pi) ** 1.5 * integral / (2 * np.pi), rel=1e-10)
    assert models.EXCESS_SINE_CONSTANT == pytest.approx(8.76, abs=0.005)


def test_excess_waveform_of_sine_equals_closed_form():
    # closed form: Bertotti 1988, P_exc = 8.76 k_exc (f B)^1.5 for a sine
    w = waveforms.sine(1.2, 60.0, samples=8192)
    k = 0.9
    assert models.excess_loss_waveform(w, k) == pytest.approx(models.EXCESS_SINE_CONSTANT * k * (60 * 1.2) ** 1.5, rel=1e-6)
    assert models.excess_loss(60.0, 1.2, k) == pytest.approx(8.763 * k * (60 * 1.2) ** 1.5, rel=1e-3)


def test_hysteresis_counts_each_loop_with_its_own_swing():
    # closed form: P_h = f sum_j k_h (Delta B_j / 2)^beta_h for a major loop of 0.4 T and a minor loop
    # of 0.06 T (Bertotti, Hysteresis in Magnetism, 1998, ch. 13: energy per loop depends on its swing)
    t = np.array([0.0, 0.3, 0.4, 0.65]) * 1e-3
    b = np.array([-0.2, 0.05, -0.01, 0.2])
    w = waveforms.FluxWaveform(t, b, 1e-3)
    k_h, beta_h = 120.0, 1.9
    expected = 1e3 * k_h * (0.2**beta_h + 0.03**beta_h)
    assert models.hysteresis_loss_waveform(w, k_h, beta_h) == pytest.approx(expected, rel=1e-12)
    assert models.hysteresis_loss_waveform(w, k_h, beta_h, minor_loops=False) == pytest.approx(1e3 * k_h * 0.2**beta_h)
    # for a sine the single loop reproduces the sinusoidal formula
    assert models.hysteresis_loss_waveform(waveforms.sine(0.2, 1e3), k_h, beta_h) == pytest.approx(
        models.hysteresis_loss(1e3, 0.2, k_h, beta_h), rel=1e-5)


# ---------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("thickness", [0.0, -0.35e-3, np.nan])
def test_classical_rejects_bad_thickness(thickness):
    with pytest.raises(ValueError, match=r"thickness must be finite and positive, got"):
        models.classical_eddy(50.0, 1.0, RHO, thickness)
    with pytest.raises(ValueError, match=r"thickness must be finite and positive, got"):
        models.classical_eddy_waveform(waveforms.sine(1.0, 50.0), RHO, thickness)


@pytest.mark.parametrize("freq", [0.0, -1.0, np.inf])
def test_separation_rejects_bad_frequency(freq):
    for func in (lambda: models.classical_eddy(freq, 1.0, RHO, D),
                 lambda: models.hysteresis_loss(freq, 1.0, 100.0, 1.9),
                 lambda: models.excess_loss(freq, 1.0, 1.0),
                 lambda: models.skin_depth(freq, RHO, 1000.0)):
        with pytest.raises(ValueError, match=r"freq must be finite and positive, got"):
            func()


def test_separation_rejects_bad_flux_and_material_values():
    with pytest.raises(ValueError, match=r"b_peak must be finite and non-negative, got -1"):
        models.classical_eddy(50.0, -1.0, RHO, D)
    with pytest.raises(ValueError, match=r"resistivity must be finite and positive, got 0"):
        models.classical_eddy(50.0, 1.0, 0.0, D)
    with pytest.raises(ValueError, match=r"rel_permeability must be finite and positive, got -5"):
        models.classical_eddy(50.0, 1.0, RHO, D, rel_permeability=-5.0)
    with pytest.raises(ValueError, match=r"k_excess must be finite and non-negative, got nan"):
        models.excess_loss(50.0, 1.0, np.nan)
    with pytest.raises(ValueError, match=r"k_hyst must be finite and positive, got 0"):
        models.hysteresis_loss(50.0, 1.0, 0.0, 1.9)


def test_eddy_spectrum_rejects_bad_input():
    with pytest.raises(ValueError, match=r"waveform must be a FluxWaveform, got ndarray"):
        models.eddy_spectrum(np.zeros(8))
    spec = models.eddy_spectrum(waveforms.triangle(0.1, 1e3))
    with pytest.raises(ValueError, match=r"freq must be finite and positive"):
        spec.classical(np.array([1e3, -1.0]), RHO, D, 1000.0)
    with pytest.raises(ValueError, match=r"rel_permeability must be finite and positive"):
        spec.classical(1e3, RHO, D, rel_permeability=0.0)
