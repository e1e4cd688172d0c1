"""Tests of the loss-table fits (workbench.analysis.fitting) and of ``workbench fit``.

Reference values come from closed forms, from scipy used directly in the test
(curve_fit, quad, linregress) and from EN 10106 grade limits; each check names its source.
"""
from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate, optimize, special, stats

from workbench.analysis.fitting import (
    fit_separation,
    fit_steinmetz,
    fit_steinmetz_bands,
    fit_two_frequency,
    fitted_material,
    igse_shape_factor,
    save_fitted_material,
    separation_shape_constants,
)
from workbench.analysis.loss_table import loss_table_from_arrays, read_loss_table

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "data" / "demo_loss_table.csv"

# "true" parameters of the synthetic tables: invented, ferrite-like
K, ALPHA, BETA = 3.0, 1.4, 2.6


def _grid(freqs, fluxes):
    f, b = np.meshgrid(np.asarray(freqs, float), np.asarray(fluxes, float), indexing="ij")
    return f.ravel(), b.ravel()


def _synthetic(seed, sigma=0.05, freqs=(2e4, 5e4, 1e5, 2e5, 4e5), fluxes=(0.05, 0.1, 0.2)):
    rng = np.random.default_rng(seed)
    f, b = _grid(freqs, fluxes)
    p = K * f**ALPHA * b**BETA * np.exp(rng.normal(0.0, sigma, f.size))
    return loss_table_from_arrays(f, b, p, source=f"synthetic-{seed}")


# --- independent iGSE references ---------------------------------------------------------------
def _ki_over_k(alpha, beta):
    """k_i/k by numerical quadrature of the defining integral.

    Venkatachalam, Sullivan, Abdallah, Tacca, IEEE COMPEL 2002, eq. (8):
    k_i = k / ((2 pi)^(alpha-1) * int_0^{2 pi} |cos t|^alpha 2^(beta-alpha) dt).
    """
    integral, _ = integrate.quad(lambda t: abs(math.cos(t)) ** alpha, 0, 2 * math.pi, limit=200)
    return 1.0 / ((2 * math.pi) ** (alpha - 1) * integral * 2 ** (beta - alpha))


def _igse_numeric(dbdt, period, flux_pp, alpha, beta, breaks):
    """(1/T) int k_i |dB/dt|^alpha (dB_pp)^(beta-alpha) dt with scipy quad (k = 1)."""
    ki = _ki_over_k(alpha, beta)
    val, _ = integrate.quad(lambda t: abs(dbdt(t)) ** alpha, 0, period, points=breaks, limit=200)
    return ki * flux_pp ** (beta - alpha) * val / period


@pytest.mark.parametrize("alpha, beta", [(1.2, 2.4), (1.6, 2.8), (2.0, 2.2)])
def test_igse_shape_factor_matches_numerical_igse(alpha, beta):
    f, b, d = 1e5, 0.1, 0.3
    period = 1 / f
    # sine: the iGSE reproduces Steinmetz exactly (Venkatachalam et al. 2002, sec. III)
    sine = _igse_numeric(lambda t: 2 * math.pi * f * b * math.cos(2 * math.pi * f * t), period, 2 * b,
                         alpha, beta, None)
    assert sine / (f**alpha * b**beta) == pytest.approx(1.0, rel=1e-6)
    # triangle of duty d: slopes 2b f/d and -2b f/(1-d) (piecewise-linear flux, closed form slopes)
    tri = _igse_numeric(lambda t: 2 * b * f / d if t < d * period else -2 * b * f / (1 - d), period, 2 * b,
                        alpha, beta, [d * period])
    # trapezoid of duty d: ramps of d/(2f) at slope 4 b f / d, flat between
    ramp = d * period / 2

    def trap(t):
        if t < ramp:
            return 4 * b * f / d
        if period / 2 <= t < period / 2 + ramp:
            return -4 * b * f / d
        return 0.0

    trapz = _igse_numeric(trap, period, 2 * b, alpha, beta, [ramp, period / 2, period / 2 + ramp])
    g = igse_shape_factor(["sine", "triangle", "trapezoid"], [np.nan, d, d], alpha, beta)
    np.testing.assert_allclose(g, [1.0, tri / (f**alpha * b**beta), trapz / (f**alpha * b**beta)], rtol=1e-6)


def test_separation_shape_constants_match_quadrature():
    d = 0.3
    # mean of (dB/dt)^2 and |dB/dt|^1.5 over one period, f = B = 1, by scipy quad
    sine2, _ = integrate.quad(lambda t: (2 * math.pi * math.cos(2 * math.pi * t)) ** 2, 0, 1)
    sine15, _ = integrate.quad(lambda t: abs(2 * math.pi * math.cos(2 * math.pi * t)) ** 1.5, 0, 1, limit=200)
    tri2 = d * (2 / d) ** 2 + (1 - d) * (2 / (1 - d)) ** 2
    tri15 = d * (2 / d) ** 1.5 + (1 - d) * (2 / (1 - d)) ** 1.5
    trap2, trap15 = d * (4 / d) ** 2, d * (4 / d) ** 1.5
    c2, c15 = separation_shape_constants(["sine", "triangle", "trapezoid"], [np.nan, d, d])
    np.testing.assert_allclose(c2, [sine2, tri2, trap2], rtol=1e-8)
    np.testing.assert_allclose(c15, [sine15, tri15, trap15], rtol=1e-6)
    # Bertotti, IEEE Trans. Magn. 24(1) 1988: sine excess constant 8.76
    assert c15[0] == pytest.approx(8.76, abs=5e-3)


# --- Steinmetz --------------------------------------------------------------------------------
def test_steinmetz_recovers_known_parameters():
    fit = fit_steinmetz(_synthetic(1, sigma=0.03))
    # truth is the generator's parameters (closed form data + known noise)
    assert fit.alpha == pytest.approx(ALPHA, abs=0.03)
    assert fit.beta == pytest.approx(BETA, abs=0.05)
    assert fit.k == pytest.approx(K, rel=0.3)
    assert fit.k_ci95[0] < fit.k < fit.k_ci95[1]  # coverage of the truth: see the many-seed test
    assert fit.rms_rel_error < 0.05 and fit.max_rel_error < 0.12
    assert fit.n_points == 15 and fit.dof == 12


def test_steinmetz_exact_data_gives_exact_parameters():
    f, b = _grid([1e4, 3e4, 1e5], [0.05, 0.15])
    fit = fit_steinmetz(loss_table_from_arrays(f, b, K * f**ALPHA * b**BETA))
    assert (fit.k, fit.alpha, fit.beta) == pytest.approx((K, ALPHA, BETA), rel=1e-9)
    assert fit.max_rel_error < 1e-9


def _curve_fit_reference(table, shape, duty):
    """scipy.optimize.curve_fit of ln P, iGSE factor written independently here."""

    def model(x, lnk, a, b_):
        f, b = x
        ratio = _ki_over_k(a, b_) * 2**b_  # quad, not the project's gamma closed form
        g = np.ones_like(f)
        tri = shape == "triangle"
        g[tri] = ratio * (duty[tri] ** (1 - a) + (1 - duty[tri]) ** (1 - a))
        return lnk + a * np.log(f) + b_ * np.log(b) + np.log(g)

    p0 = (1.0, 1.5, 2.5)
    popt, pcov = optimize.curve_fit(model, (table.freq, table.b_peak), np.log(table.loss), p0=p0)
    return popt, pcov


def test_steinmetz_agrees_with_curve_fit_on_mixed_shapes():
    rng = np.random.default_rng(7)
    f, b = _grid([2e4, 5e4, 1e5, 2e5], [0.05, 0.1, 0.2])
    shape = np.array(["sine", "triangle"] * (f.size // 2))
    duty = np.where(shape == "triangle", 0.25, np.nan)
    # iGSE triangle loss (Venkatachalam et al. 2002): k_i (2B)^beta f^alpha (D^(1-a) + (1-D)^(1-a))
    ki = K * _ki_over_k(ALPHA, BETA)
    p = np.where(shape == "sine", K * f**ALPHA * b**BETA,
                 ki * (2 * b) ** BETA * f**ALPHA * (0.25 ** (1 - ALPHA) + 0.75 ** (1 - ALPHA)))
    table = loss_table_from_arrays(f, b, p * np.exp(rng.normal(0, 0.05, f.size)), shape=list(shape), duty=duty)
    fit = fit_steinmetz(table)
    popt, pcov = _curve_fit_reference(table, shape, duty)
    assert math.log(fit.k) == pytest.approx(popt[0], abs=1e-5)
    assert fit.alpha == pytest.approx(popt[1], abs=1e-6)
    assert fit.beta == pytest.approx(popt[2], abs=1e-6)
    np.testing.assert_allclose(fit.covariance, pcov, rtol=2e-3, atol=1e-3 * np.abs(pcov).max())
    # curve_fit's standard errors with Student t (Bates & Watts 1988, ch. 2)
    tq = stats.t.ppf(0.975, f.size - 3)
    assert fit.alpha_ci95[1] == pytest.approx(popt[1] + tq * math.sqrt(pcov[1, 1]), rel=1e-4)
    assert fit.n_nonsine == f.size // 2


def test_relative_objective_agrees_with_curve_fit():
    table = _synthetic(3, sigma=0.1)

    def model(x, k, a, b_):
        return k * x[0] ** a * x[1] ** b_

    # minimising sum (P_fit/P - 1)^2 = curve_fit with sigma = P (relative weights)
    popt, _ = optimize.curve_fit(model, (table.freq, table.b_peak), table.loss, p0=(1.0, 1.5, 2.5),
                                 sigma=table.loss, maxfev=20000)
    fit = fit_steinmetz(table, objective="relative")
    assert (fit.k, fit.alpha, fit.beta) == pytest.approx(tuple(popt), rel=1e-5)


def test_interval_coverage_over_many_seeds():
    hits = np.zeros(3)
    n = 200
    for seed in range(n):
        fit = fit_steinmetz(_synthetic(1000 + seed, sigma=0.08, freqs=(1e4, 5e4, 2e5), fluxes=(0.05, 0.2)))
        hits += [fit.k_ci95[0] <= K <= fit.k_ci95[1],
                 fit.alpha_ci95[0] <= ALPHA <= fit.alpha_ci95[1],
                 fit.beta_ci95[0] <= BETA <= fit.beta_ci95[1]]
    coverage = hits / n
    # nominal 95 %; binomial spread for 200 trials is about 1.5 % (common practice, no source)
    assert np.all((coverage >= 0.88) & (coverage <= 0.99)), coverage


def test_interval_coverage_through_the_igse():
    hits = 0
    n = 100
    shape = ["sine", "triangle"] * 3
    f = np.repeat([2e4, 1e5, 4e5], 2)
    b = np.tile([0.05, 0.2], 3)
    duty = np.where(np.array(shape) == "triangle", 0.2, np.nan)
    g = igse_shape_factor(shape, duty, ALPHA, BETA)  # noiseless model; truth is ALPHA
    for seed in range(n):
        rng = np.random.default_rng(5000 + seed)
        p = K * f**ALPHA * b**BETA * g * np.exp(rng.normal(0, 0.08, f.size))
        fit = fit_steinmetz(loss_table_from_arrays(f, b, p, shape=shape, duty=duty))
        hits += fit.alpha_ci95[0] <= ALPHA <= fit.alpha_ci95[1]
    assert 0.86 <= hits / n <= 1.0


def test_confidence_band_equals_ols_formula():
    table = _synthetic(11)
    fit = fit_steinmetz(table)
    f0 = np.array([1e4, 1e5, 1e6])
    pred = fit.predict(f0, 0.1)
    # OLS confidence interval of the mean of ln P: t * s * sqrt(x0' (X'X)^-1 x0)
    # (Draper & Smith, Applied Regression Analysis, 1998, sec. 3.2)
    x = np.column_stack([np.ones(len(table)), np.log(table.freq), np.log(table.b_peak)])
    coef, res, *_ = np.linalg.lstsq(x, np.log(table.loss), rcond=None)
    dof = len(table) - 3
    s2 = float(res[0]) / dof
    x0 = np.column_stack([np.ones(3), np.log(f0), np.full(3, math.log(0.1))])
    half = stats.t.ppf(0.975, dof) * np.sqrt(s2 * np.einsum("ij,jk,ik->i", x0, np.linalg.inv(x.T @ x), x0))
    np.testing.assert_allclose(np.log(pred.loss), x0 @ coef, rtol=1e-9)
    np.testing.assert_allclose(np.log(pred.upper / pred.loss), half, rtol=1e-6)
    wider = fit.predict(f0, 0.1, band="prediction")
    phalf = stats.t.ppf(0.975, dof) * np.sqrt(half**2 / stats.t.ppf(0.975, dof) ** 2 + s2)
    np.testing.assert_allclose(np.log(wider.upper / wider.loss), phalf, rtol=1e-6)
    # extrapolation flags: 10 kHz and 1 MHz are outside the fitted 20-400 kHz
    assert pred.extrapolated.tolist() == [True, False, True]
    assert "2 of 3 points" in pred.message and "frequency outside" in pred.message
    assert fit.predict(1e5, 0.5).extrapolated.all()


def test_steinmetz_bad_tables():
    f, b = _grid([1e5], [0.05, 0.1, 0.2])
    one_freq = loss_table_from_arrays(f, b, K * f**ALPHA * b**BETA, source="one-f.csv")
    with pytest.raises(ValueError, match=r"one-f\.csv: all points are at one frequency .*alpha cannot be fitted"):
        fit_steinmetz(one_freq)
    f, b = _grid([1e4, 1e5], [0.1])
    with pytest.raises(ValueError, match="one flux level"):
        fit_steinmetz(loss_table_from_arrays(f, b, [1.0, 2.0]))
    with pytest.raises(ValueError, match="2 points cannot determine 3 parameters"):
        fit_steinmetz(loss_table_from_arrays([1e4, 1e5], [0.1, 0.2], [1.0, 20.0]))
    # flux proportional to frequency: alpha and beta are confounded
    f = np.array([1e4, 2e4, 4e4, 8e4])
    with pytest.raises(ValueError, match="vary together"):
        fit_steinmetz(loss_table_from_arrays(f, f * 1e-6, f**2))
    with pytest.raises(ValueError, match="objective"):
        fit_steinmetz(_synthetic(1), objective="squared")
    with pytest.raises(ValueError, match="fixed: unknown parameter 'gamma'"):
        fit_steinmetz(_synthetic(1), fixed={"gamma": 1.0})


@pytest.fixture
def en10106_m400_50a():
    """EN 10106 grade M400-50A, 50 Hz: maximum specific loss at 1.0 T and 1.5 T [W/kg].

    1.5 T: 4.00 W/kg is the grade designation itself (EN 10106).
    1.0 T: 1.70 W/kg, from memory.
    Density 7700 kg/m^3 for this grade class, from memory (it cancels in beta).
    """
    return {"freq": 50.0, "b_peak": [1.0, 1.5], "w_kg": [1.70, 4.00], "density": 7700.0}


def test_en10106_grade_points_give_a_silicon_steel_flux_exponent(en10106_m400_50a, tmp_path):
    g = en10106_m400_50a
    path = tmp_path / "m400.csv"
    path.write_text("f (Hz), B_peak (T), P (W/kg)\n" + "".join(
        f"{g['freq']}, {b}, {p}\n" for b, p in zip(g["b_peak"], g["w_kg"])))
    table = read_loss_table(path, density=g["density"])
    fit = fit_steinmetz(table, fixed={"alpha": 1.0})
    # beta from two points: ln(4.00/1.70)/ln(1.5) (closed form)
    assert fit.beta == pytest.approx(math.log(4.0 / 1.7) / math.log(1.5), rel=1e-9)
    # 1.8 <= beta <= 2.5 is usual for non-oriented silicon steel near 1-1.5 T (common practice, no source)
    assert 1.8 <= fit.beta <= 2.5
    assert fit.dof == 0 and math.isnan(fit.beta_ci95[0])


def test_temperature_coefficients_recovered():
    rng = np.random.default_rng(4)
    ct0, ct1, ct2 = 2.0, 0.022, 1.1e-4  # invented, minimum near 100 degC
    f, b = _grid([5e4, 1e5, 2e5], [0.05, 0.1, 0.2])
    temps = np.array([25.0, 60.0, 100.0, 120.0])
    ff, tt = np.repeat(f, temps.size), np.tile(temps, f.size)
    bb = np.repeat(b, temps.size)
    fac = ct0 - ct1 * tt + ct2 * tt**2
    p = K * ff**ALPHA * bb**BETA * fac * np.exp(rng.normal(0, 0.01, ff.size))
    fit = fit_steinmetz(loss_table_from_arrays(ff, bb, p, temperature=tt), reference_temperature=100.0)
    # normalised at 100 degC: true factor / factor(100) (algebra of the quadratic)
    f100 = ct0 - ct1 * 100 + ct2 * 100**2
    tc = fit.temperature
    assert (tc.ct0, tc.ct1, tc.ct2) == pytest.approx((ct0 / f100, ct1 / f100, ct2 / f100), rel=0.05)
    assert tc.ct0 - tc.ct1 * 100 + tc.ct2 * 100**2 == pytest.approx(1.0, abs=1e-12)
    assert fit.k == pytest.approx(K * f100, rel=0.05)
    assert fit.reference_temperature == 100.0
    assert fit.temperature_ci95["ct2"][0] < ct2 / f100 < fit.temperature_ci95["ct2"][1]
    # predictions at another temperature follow the factor
    assert fit.loss(1e5, 0.1, 25.0) / fit.loss(1e5, 0.1, 100.0) == pytest.approx((ct0 - ct1 * 25 + ct2 * 625) / f100, rel=0.05)
    assert fit.predict(1e5, 0.1, temperature=150.0).extrapolated.all()


def test_several_temperatures_without_factor_is_an_error():
    t = loss_table_from_arrays([1e4, 1e5, 1e4, 1e5], [0.1, 0.2, 0.1, 0.2], [1, 2, 3, 4], temperature=[25, 25, 100, 100])
    with pytest.raises(ValueError, match=r"2 temperatures \(25, 100 degC\)"):
        fit_steinmetz(t, temperature_model="none")


# --- bands -------------------------------------------------------------------------------------
def test_band_split_finds_the_knee():
    # two invented sets joined at 100 kHz (alpha 1.2 below, 2.2 above; continuous at the knee)
    freqs = np.array([1e4, 2e4, 4e4, 7e4, 1e5, 1.5e5, 3e5, 6e5, 1e6])
    f, b = _grid(freqs, [0.05, 0.1, 0.2])
    low = 5.0 * f**1.2 * b**2.5
    high = 5.0 * 1e5**1.2 * (f / 1e5) ** 2.2 * b**2.5
    p = np.where(f <= 1e5, low, high)
    table = loss_table_from_arrays(f, b, p)
    res = fit_steinmetz_bands(table, tolerance=0.25)
    assert res.split and res.tolerance_met and len(res.bands) == 2
    assert res.bands[0].freq_range == (1e4, 1e5)
    assert res.bands[0].alpha == pytest.approx(1.2, rel=1e-6)
    assert res.bands[1].alpha == pytest.approx(2.2, rel=1e-6)
    assert res.edges[1] == pytest.approx(math.sqrt(1e5 * 1.5e5))
    assert "split into 2 frequency bands" in res.message
    np.testing.assert_allclose(res.loss(f, b), p, rtol=1e-6)
    single = fit_steinmetz_bands(_synthetic(2), tolerance=0.25)
    assert not single.split and len(single.bands) == 1 and "one set covers" in single.message


def test_band_split_reports_unmet_tolerance():
    table = _synthetic(5, sigma=0.3)
    res = fit_steinmetz_bands(table, tolerance=0.01)
    assert not res.tolerance_met
    assert "tolerance" in res.message


# --- loss separation ----------------------------------------------------------------------------
KH, BH, KE, RHO, D = 40.0, 1.9, 0.45, 52e-8, 0.35e-3  # invented, silicon-steel-like


def _separation_table(seed=None, sigma=0.0, shape=None, duty=None):
    f, b = _grid([25, 50, 100, 200, 400], [0.5, 0.8, 1.1, 1.4])
    # Bertotti 1988: P = k_h f B^bh + pi^2 d^2 f^2 B^2 / (6 rho) + 8.763 k_e (f B)^1.5 (sine)
    c15 = (2 * math.pi) ** 1.5 * special.gamma(1.25) / (math.sqrt(math.pi) * special.gamma(1.75))
    p = KH * f * b**BH + math.pi**2 * D**2 * f**2 * b**2 / (6 * RHO) + KE * c15 * (f * b) ** 1.5
    if sigma:
        p = p * np.exp(np.random.default_rng(seed).normal(0, sigma, f.size))
    return loss_table_from_arrays(f, b, p, source="sheet.csv")


def test_separation_recovers_known_terms():
    fit = fit_separation(_separation_table(), thickness=D, resistivity=RHO)
    assert (fit.k_hyst, fit.beta_hyst, fit.k_excess) == pytest.approx((KH, BH, KE), rel=1e-6)
    noisy = fit_separation(_separation_table(3, 0.02), thickness=D, resistivity=RHO)
    assert noisy.k_hyst_ci95[0] < KH < noisy.k_hyst_ci95[1]
    assert noisy.k_excess_ci95[0] < KE < noisy.k_excess_ci95[1]
    assert noisy.beta_hyst == pytest.approx(BH, abs=0.1)
    parts = fit.components(50.0, 1.0)
    # classical term closed form at 50 Hz, 1 T (Bertotti 1988 eq. 2)
    assert parts["classical"] == pytest.approx(math.pi**2 * D**2 * 2500 / (6 * RHO), rel=1e-12)


def test_separation_with_free_resistivity():
    fit = fit_separation(_separation_table(), thickness=D, fit_resistivity=True)
    assert fit.resistivity == pytest.approx(RHO, rel=1e-5)
    assert fit.resistivity_fitted


def test_separation_errors():
    with pytest.raises(ValueError, match="resistivity is required"):
        fit_separation(_separation_table(), thickness=D)
    with pytest.raises(ValueError, match="thickness must be finite and positive"):
        fit_separation(_separation_table(), thickness=-1, resistivity=RHO)
    with pytest.raises(ValueError, match="sheet.csv: the classical eddy term alone exceeds"):
        fit_separation(_separation_table(), thickness=D, resistivity=RHO / 100)
    one = loss_table_from_arrays([50, 50], [0.5, 1.0], [1.0, 3.0], source="one.csv")
    with pytest.raises(ValueError, match="one.csv: a loss separation needs 2 or more frequencies"):
        fit_separation(one, thickness=D, resistivity=RHO)


# --- two-frequency method ------------------------------------------------------------------------
def test_two_frequency_recovers_closed_form():
    wh, s = {1.0: 20.0, 1.5: 45.0}, {1.0: 0.08, 1.5: 0.17}  # invented [J/m^3], [J/m^3/Hz]
    f = np.array([25.0, 50.0, 100.0, 25.0, 50.0, 100.0, 50.0])
    b = np.array([1.0, 1.0, 1.0, 1.5, 1.5, 1.5, 0.5])
    p = np.array([(wh.get(bi, 5.0) + s.get(bi, 0.01) * fi) * fi for fi, bi in zip(f, b)])
    res = fit_two_frequency(loss_table_from_arrays(f, b, p, source="ring.csv"))
    assert [lv.b_peak for lv in res.levels] == [1.0, 1.5]
    assert res.skipped == (0.5,)
    for lv in res.levels:
        # closed form: W = P/f = W_h + s f, crossover f_c = W_h / s
        assert lv.hysteresis_energy == pytest.approx(wh[lv.b_peak], rel=1e-10)
        assert lv.eddy_slope == pytest.approx(s[lv.b_peak], rel=1e-10)
        assert lv.crossover_hz == pytest.approx(wh[lv.b_peak] / s[lv.b_peak], rel=1e-10)
    assert res.level.b_peak == 1.5  # most frequencies, highest flux of ties
    picked = fit_two_frequency(loss_table_from_arrays(f, b, p), b_peak=1.0)
    assert picked.hysteresis_energy == pytest.approx(20.0) and len(picked.levels) == 1


def test_two_frequency_matches_linregress_with_noise():
    rng = np.random.default_rng(9)
    f = np.array([20.0, 40.0, 60.0, 100.0, 150.0])
    p = (30.0 + 0.1 * f) * f * np.exp(rng.normal(0, 0.03, f.size))
    res = fit_two_frequency(loss_table_from_arrays(f, 1.2, p))
    ref = stats.linregress(f, p / f)  # scipy reference, ordinary least squares
    assert res.hysteresis_energy == pytest.approx(ref.intercept, rel=1e-10)
    assert res.eddy_slope == pytest.approx(ref.slope, rel=1e-10)
    tq = stats.t.ppf(0.975, f.size - 2)
    assert res.level.eddy_slope_ci95[1] == pytest.approx(ref.slope + tq * ref.stderr, rel=1e-8)


def test_two_frequency_errors():
    single = loss_table_from_arrays([50, 50], [1.0, 1.5], [10, 20], source="single.csv")
    with pytest.raises(ValueError, match="single.csv: no flux level has two or more frequencies"):
        fit_two_frequency(single)
    t = loss_table_from_arrays([50, 100, 50], [1.0, 1.0, 1.5], [10, 25, 20], source="t.csv")
    with pytest.raises(ValueError, match="level 1.5 T has a single frequency"):
        fit_two_frequency(t, b_peak=1.5)
    with pytest.raises(ValueError, match=r"no flux level at b_peak = 0.7 T \(table levels: 1, 1.5 T\)"):
        fit_two_frequency(t, b_peak=0.7)


# --- user material --------------------------------------------------------------------------------
@pytest.fixture
def user_library(tmp_path, monkeypatch):
    path = tmp_path / "user.toml"
    monkeypatch.setenv("WORKBENCH_USER_LIBRARY", str(path))
    return path


def test_save_fitted_material_is_loadable_by_name(user_library):
    from workbench.materials import bundled_library_path, get_material

    bundled_before = bundled_library_path().read_bytes()
    fit = fit_steinmetz(read_loss_table(DEMO).subset(read_loss_table(DEMO).freq <= 1e5))
    path = save_fitted_material("bench ferrite A", fit, base=get_material("mnzn-power-ferrite"), date="2026-01-02")
    assert path == user_library
    m = get_material("bench ferrite A")
    assert (m.steinmetz.k, m.steinmetz.alpha, m.steinmetz.beta) == pytest.approx((fit.k, fit.alpha, fit.beta), rel=1e-12)
    assert m.steinmetz.freq_range == fit.freq_range
    assert m.sources["steinmetz.alpha"].startswith("fitted to demo_loss_table.csv on 2026-01-02")
    assert m.density == get_material("mnzn-power-ferrite").density
    assert bundled_library_path().read_bytes() == bundled_before
    with pytest.raises(ValueError, match="already exists"):
        save_fitted_material("bench ferrite A", fit, base=get_material("mnzn-power-ferrite"))


def test_fitted_material_needs_properties_without_base():
    fit = fit_steinmetz(_synthetic(1))
    with pytest.raises(ValueError, match="density is needed"):
        fitted_material("x", fit)


# --- command line ----------------------------------------------------------------------------------
def _cli(*args, env_extra=None):
    env = dict(os.environ, **(env_extra or {}))
    return subprocess.run([sys.executable, "-m", "workbench", "fit", *map(str, args)],
                          capture_output=True, text=True, cwd=REPO, env=env, timeout=120)


def test_cli_steinmetz_json_contract(tmp_path):
    table = _synthetic(21)
    path = tmp_path / "t.csv"
    path.write_text("freq (Hz), b_peak (T), loss (W/m3)\n" + "".join(
        f"{float(f)!r}, {float(b)!r}, {float(p)!r}\n" for f, b, p in zip(table.freq, table.b_peak, table.loss)))
    out = _cli(path, "--model", "steinmetz", "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    lib = fit_steinmetz(table)
    for key in ("k", "alpha", "beta", "rms_rel_error", "max_rel_error"):
        assert data[key] == pytest.approx(getattr(lib, key), rel=1e-9)
    for key in ("k", "alpha", "beta"):
        lo, hi = data[f"{key}_ci95"]
        assert lo < data[key] < hi
    # independent: plain OLS of ln P (Draper & Smith 1998) gives the same exponents
    x = np.column_stack([np.ones(len(table)), np.log(table.freq), np.log(table.b_peak)])
    coef = np.linalg.lstsq(x, np.log(table.loss), rcond=None)[0]
    assert data["alpha"] == pytest.approx(coef[1], rel=1e-8)
    assert data["split"] is False


def test_cli_two_frequency_json_contract(tmp_path):
    path = tmp_path / "ring.csv"
    f = [25, 50, 100]
    path.write_text("f (Hz), B_peak (T), P (W/m3)\n" + "".join(f"{x}, 1.5, {(45 + 0.17 * x) * x!r}\n" for x in f))
    out = _cli(path, "--model", "two-frequency", "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    # closed form W = 45 + 0.17 f
    assert data["hysteresis_energy"] == pytest.approx(45.0, rel=1e-9)
    assert data["eddy_slope"] == pytest.approx(0.17, rel=1e-9)
    assert data["crossover_hz"] == pytest.approx(45 / 0.17, rel=1e-9)


def test_cli_separation_and_human_output(tmp_path):
    t = _separation_table()
    path = tmp_path / "sheet.csv"
    path.write_text("freq (Hz), b_peak (T), loss (W/m3)\n" + "".join(
        f"{float(f)!r}, {float(b)!r}, {float(p)!r}\n" for f, b, p in zip(t.freq, t.b_peak, t.loss)))
    out = _cli(path, "--model", "separation", "--thickness", "0.35mm", "--resistivity", "52e-8", "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    assert data["k_excess"] == pytest.approx(KE, rel=1e-5)
    human = _cli(DEMO)
    assert human.returncode == 0
    assert "split into 2 frequency bands" in human.stdout and "extrapolation" in human.stdout


def test_cli_bad_input_exit_2_one_line(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("freq (Hz), b_peak (T), loss (W/m3)\n50, 1, 10\n60, 1, oops\n")
    for args in ([bad], [tmp_path / "absent.csv"], [DEMO, "--model", "separation"],
                 [DEMO, "--tolerance", "lots"], [DEMO, "--model", "two-frequency", "--b-peak", "3T"]):
        out = _cli(*args)
        assert out.returncode == 2, (args, out.stdout)
        assert out.stderr.count("\n") == 1 and "Traceback" not in out.stderr, out.stderr
    assert "row 3, column 'loss (W/m3)'" in _cli(bad).stderr


def test_cli_save_as_like(tmp_path):
    lib = tmp_path / "user.toml"
    env = {"WORKBENCH_USER_LIBRARY": str(lib)}
    out = _cli(DEMO, "--save-as", "bench ferrite B", "--like", "mnzn-power-ferrite", env_extra=env)
    assert out.returncode == 2 and "--band" in out.stderr  # the demo table splits into two bands
    out = _cli(DEMO, "--save-as", "bench ferrite B", "--like", "mnzn-power-ferrite", "--band", "1", "--json",
               env_extra=env)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout)["library"] == str(lib)
    check = subprocess.run([sys.executable, "-c",
                            "from workbench.materials import get_material; m = get_material('bench ferrite B');"
                            "print(m.steinmetz.alpha, m.steinmetz.freq_range[1])"],
                           capture_output=True, text=True, cwd=REPO, env=dict(os.environ, **env))
    alpha, fmax = map(float, check.stdout.split())
    assert fmax == 1e5 and 1.0 < alpha < 2.0


# --- fits that must not claim more than the data holds (issue 11 item 9) ----------------------
def test_two_frequency_crossover_not_resolved_when_the_hysteresis_interval_includes_zero():
    rng = np.random.default_rng(4)
    f = np.array([50.0, 100.0, 200.0, 400.0, 800.0])
    # invented: a tiny hysteresis energy buried in 5 % scatter of the energy per cycle
    w = (0.2 + 0.1 * f) * np.exp(rng.normal(0, 0.05, f.size))
    res = fit_two_frequency(loss_table_from_arrays(f, 1.0, w * f, source="scatter.csv"))
    ref = stats.linregress(f, w)  # scipy reference: OLS intercept and its standard error
    tq = stats.t.ppf(0.975, f.size - 2)
    assert ref.intercept - tq * ref.intercept_stderr <= 0  # the interval of W_h includes zero
    lv = res.level
    assert not lv.resolved and math.isnan(lv.crossover_hz)
    assert "not resolved by this table" in lv.note
    d = res.to_dict()
    assert d["crossover_hz"] is None and d["crossover_resolved"] is False
    # a table that does resolve it keeps the crossover and says nothing
    w2 = (30.0 + 0.1 * f) * np.exp(rng.normal(0, 0.01, f.size))
    ref2 = stats.linregress(f, w2)
    assert ref2.intercept - tq * ref2.intercept_stderr > 0
    ok = fit_two_frequency(loss_table_from_arrays(f, 1.0, w2 * f)).level
    assert ok.resolved and ok.note == ""
    assert ok.crossover_hz == pytest.approx(ref2.intercept / ref2.slope, rel=1e-9)


def _write_table(path, f, p):
    path.write_text("freq (Hz), b_peak (T), loss (W/m3)\n" + "".join(f"{float(a)!r}, 1.0, {float(b)!r}\n" for a, b in zip(f, p)))
    return path


def _run_cli(*argv):
    return subprocess.run([sys.executable, "-m", "workbench", *argv], capture_output=True, text=True, timeout=120)


def test_two_frequency_cli_says_not_resolved(tmp_path):
    f = np.array([50.0, 100.0, 200.0, 400.0, 800.0])
    w = (0.2 + 0.1 * f) * np.exp(np.random.default_rng(4).normal(0, 0.05, f.size))
    r = _run_cli("fit", str(_write_table(tmp_path / "scatter.csv", f, w * f)), "--model", "two-frequency")
    assert r.returncode == 0, r.stderr
    assert "not resolved by this table" in r.stdout


@pytest.mark.parametrize("option, value", [("--thickness", "1e3"), ("--resistivity", "1e-300"),
                                           ("--temperature", "-300")])
def test_fit_cli_refuses_quantities_orders_of_magnitude_off(tmp_path, option, value):
    table = _write_table(tmp_path / "t.csv", [50.0, 100.0, 200.0], [10.0, 25.0, 60.0])
    r = _run_cli("fit", str(table), "--model", "separation", "--thickness", "0.35mm", "--resistivity", "52e-8",
             option, value)
    assert r.returncode == 2
    line = r.stderr.strip()
    assert option in line and "\n" not in line and len(line) < 300


def test_band_split_names_the_frequencies_no_band_covers():
    freqs = np.array([1e4, 2e4, 4e4, 7e4, 1e5, 1.5e5, 3e5, 6e5, 1e6])
    f, b = _grid(freqs, [0.05, 0.1, 0.2])
    p = np.where(f <= 1e5, 5.0 * f**1.2 * b**2.5, 5.0 * 1e5**1.2 * (f / 1e5) ** 2.2 * b**2.5)
    res = fit_steinmetz_bands(loss_table_from_arrays(f, b, p), tolerance=0.25)
    # the bands hold 1e4..1e5 and 1.5e5..1e6 Hz: nothing was measured between 100 and 150 kHz
    assert res.gaps == ((1e5, 1.5e5),)
    assert "no band's data covers 1e+05-1.5e+05 Hz" in res.message
    assert res.to_dict()["uncovered_hz"] == [[1e5, 1.5e5]]
    single = fit_steinmetz_bands(_synthetic(2), tolerance=0.25)
    assert single.gaps == () and "covers" in single.message
