"""Flux waveform type and constructors: analytic identities (after scipy's tests/test_waveforms.py).

Expected values are closed forms written in this file (RMS of ideal shapes,
Parseval's theorem, derivatives of known shapes, Faraday's law) or numpy
computations on the raw samples; none is computed by the code under test.
"""
from __future__ import annotations

import numpy as np
import pytest

from workbench import waveforms


def pl_mean_square(w: waveforms.FluxWaveform) -> float:
    """Exact time average of B^2 for piecewise-linear periodic flux.

    For a segment from a to b: integral of the linear interpolant squared = dt (a^2 + a b + b^2) / 3.
    """
    a = w.b
    b = np.append(w.b[1:], w.b[0])
    dt = np.diff(np.append(w.t, w.period))
    return float(np.sum(dt * (a * a + a * b + b * b) / 3) / w.period)


# ---------------------------------------------------------------------------
# RMS, Parseval, derivatives
# ---------------------------------------------------------------------------
def test_rms_of_sine_is_peak_over_sqrt2():
    # closed form: RMS of B sin(wt) is B/sqrt(2); the uniformly sampled mean of sin^2 is exactly 1/2
    w = waveforms.sine(1.3, 50.0, samples=512)
    assert np.sqrt(np.mean(w.b**2)) == pytest.approx(1.3 / np.sqrt(2), rel=1e-12)
    # the piecewise-linear reading underestimates it by about (pi/n)^2 / 6
    assert np.sqrt(pl_mean_square(w)) == pytest.approx(1.3 / np.sqrt(2), rel=1e-4)


@pytest.mark.parametrize("duty", [0.5, 0.2, 0.9])
def test_rms_of_triangle_is_peak_over_sqrt3(duty):
    # closed form: a triangle between -B and +B has RMS B/sqrt(3) for any duty
    w = waveforms.triangle(0.25, 10e3, duty)
    assert np.sqrt(pl_mean_square(w)) == pytest.approx(0.25 / np.sqrt(3), rel=1e-12)
    # Parseval on the resampled triangle (spectrum resamples to 4096 points)
    s = w.spectrum(samples=4096)
    ms = s.amplitude[0] ** 2 + np.sum(s.amplitude[1:-1] ** 2) / 2 + s.amplitude[-1] ** 2
    assert np.sqrt(ms) == pytest.approx(0.25 / np.sqrt(3), rel=1e-5)


@pytest.mark.parametrize("n", [256, 301])
def test_spectrum_parseval(n):
    # reference: Parseval's theorem for the DFT: mean(b^2) = c0^2 + sum_{k>=1} A_k^2 / 2
    # (with the Nyquist bin, for even n, counted as a full square)
    rng = np.random.default_rng(5)
    b = rng.normal(0.1, 0.3, n)
    w = waveforms.FluxWaveform(np.arange(n) / (n * 400.0), b, 1 / 400.0)
    s = w.spectrum(samples=n)
    amp = s.amplitude
    if n % 2 == 0:
        ms = amp[0] ** 2 + np.sum(amp[1:-1] ** 2) / 2 + amp[-1] ** 2
    else:
        ms = amp[0] ** 2 + np.sum(amp[1:] ** 2) / 2
    assert ms == pytest.approx(np.mean(b**2), rel=1e-12)
    np.testing.assert_allclose(s.freq[:3], [0.0, 400.0, 800.0])


def test_spectrum_of_sine_with_harmonic():
    # closed form: B = 0.1 + 0.8 sin(wt) + 0.2 cos(3wt) has amplitudes 0.1, 0.8, 0, 0.2
    n = 1024
    t = np.arange(n) / (n * 50.0)
    b = 0.1 + 0.8 * np.sin(2 * np.pi * 50 * t) + 0.2 * np.cos(2 * np.pi * 150 * t)
    s = waveforms.FluxWaveform(t, b, 0.02).spectrum(4)
    np.testing.assert_allclose(s.amplitude, [0.1, 0.8, 0.0, 0.2, 0.0], atol=1e-12)
    assert s.phase[3] == pytest.approx(0.0, abs=1e-12)
    assert s.phase[1] == pytest.approx(-np.pi / 2, abs=1e-12)  # sin = cos(x - pi/2)


def test_derivative_of_triangle():
    # closed form: slopes 2B f / D and -2B f / (1-D)
    b, f, duty = 0.2, 25e3, 0.35
    w = waveforms.triangle(b, f, duty)
    np.testing.assert_allclose(w.dbdt(), [2 * b * f / duty, -2 * b * f / (1 - duty)], rtol=1e-12)


def test_derivative_of_sine_chords():
    # closed form: the chord slope of B sin(wt) over [t1, t2] is 2 B cos(w tm) sin(w dt/2) / dt
    bp, f, n = 0.5, 60.0, 64
    w = waveforms.sine(bp, f, samples=n)
    om = 2 * np.pi * f
    dt = 1 / (f * n)
    tm = w.t + dt / 2
    np.testing.assert_allclose(w.dbdt(), 2 * bp * np.cos(om * tm) * np.sin(om * dt / 2) / dt, rtol=1e-9, atol=1e-9)


def test_mean_abs_dbdt_power_of_triangle():
    # closed form: <|dB/dt|^a> = (2B)^a f^a (D^(1-a) + (1-D)^(1-a))
    b, f, duty, a = 0.1, 1e4, 0.3, 1.7
    w = waveforms.triangle(b, f, duty)
    expected = (2 * b) ** a * f**a * (duty ** (1 - a) + (1 - duty) ** (1 - a))
    assert w.mean_abs_dbdt_power(a) == pytest.approx(expected, rel=1e-12)


# ---------------------------------------------------------------------------
# constructors
# ---------------------------------------------------------------------------
def test_trapezoid_levels_and_flat_times():
    # closed form: ramps of D/(2f) between -B and +B, flat for (1-D)/(2f)
    b, f, duty = 0.12, 100e3, 0.4
    w = waveforms.trapezoid(b, f, duty)
    assert w.b.max() == pytest.approx(b) and w.b.min() == pytest.approx(-b)
    dt = w.segment_durations
    flat = np.abs(w.segment_increments) == 0
    assert np.sum(dt[flat]) == pytest.approx((1 - duty) / f, rel=1e-12)
    assert np.sum(dt[~flat]) == pytest.approx(duty / f, rel=1e-12)
    assert w.b_dc == pytest.approx(0.0, abs=1e-15)


def test_trapezoid_with_full_duty_is_the_symmetric_triangle():
    w = waveforms.trapezoid(0.1, 1e3, 1.0)
    np.testing.assert_allclose(w.dbdt(), [400.0, -400.0])  # 0.2 T in 0.5 ms


@pytest.mark.parametrize("levels", [2, 3])
def test_pwm_fundamental_amplitude_equals_b_peak(levels):
    # reference: naturally sampled sine-triangle PWM carries exactly m times the DC-link voltage at
    # the fundamental (D. G. Holmes, T. A. Lipo, Pulse Width Modulation for Power Converters, 2003,
    # ch. 3, from memory); its integral has the fundamental flux b_peak. 1024 samples per carrier
    # resolve the switching instants to 0.1 %.
    w = waveforms.pwm(0.9, 50.0, 5000.0, 0.8, levels=levels, samples_per_carrier=1024)
    s = w.spectrum(3, samples=w.n_samples)
    assert s.amplitude[1] == pytest.approx(0.9, rel=2e-3)
    assert s.amplitude[0] == pytest.approx(0.0, abs=1e-12)  # no DC flux from a voltage


def test_pwm_flux_ripple_levels():
    # closed form: two-level PWM flux rises and falls with |dB/dt| = V_dc/(N A) = b_peak w1 / m; the
    # removal of the flux gained over the period by the sampled switching tilts slopes by < 0.5 %
    bp, f1, m = 1.0, 50.0, 0.8
    w = waveforms.pwm(bp, f1, 2500.0, m, levels=2)
    rel = np.abs(w.dbdt()) / (bp * 2 * np.pi * f1 / m)
    np.testing.assert_allclose(rel, 1.0, rtol=5e-3)
    # three-level: slopes of +-V and (nearly) 0
    w3 = waveforms.pwm(bp, f1, 2500.0, m, levels=3)
    rel3 = np.abs(w3.dbdt()) / (bp * 2 * np.pi * f1 / m)
    assert np.all((rel3 < 5e-3) | (np.abs(rel3 - 1) < 5e-3))
    assert np.any(rel3 < 5e-3) and np.any(np.abs(rel3 - 1) < 5e-3)


def test_from_voltage_recovers_known_flux_with_offset():
    # reference: Faraday's law v = N A dB/dt. A known flux (sine + 3rd harmonic) is turned into a
    # voltage, a probe offset (which would integrate into a flux drift) is added, and the record
    # covers three periods plus a few samples.
    f, turns, area = 1e3, 12, 80e-6
    n_per = 2000
    t = np.arange(3 * n_per + 5) / (n_per * f)
    om = 2 * np.pi * f
    b_true = lambda tt: 0.2 * np.sin(om * tt) + 0.03 * np.sin(3 * om * tt + 0.4)  # noqa: E731
    dbdt = 0.2 * om * np.cos(om * t) + 0.03 * 3 * om * np.cos(3 * om * t + 0.4)
    v = turns * area * dbdt + 0.05  # 50 mV offset
    w = waveforms.from_voltage(t, v, turns=turns, area=area, freq=f)
    expected = b_true(w.t)
    expected -= expected.mean()
    # trapezoidal integration error, about (w h)^2/12 of the 3rd harmonic's 0.03 T times 9: 2e-6 T
    np.testing.assert_allclose(w.b, expected, atol=5e-6)
    assert w.period == pytest.approx(1 / f)


def test_from_voltage_single_period():
    # Faraday's law on one period without offset: a cosine voltage gives a sine flux
    n, f, turns, area = 4000, 50.0, 100, 1e-3
    t = np.arange(n) / (n * f)
    v = turns * area * 1.2 * 2 * np.pi * f * np.cos(2 * np.pi * f * t)
    w = waveforms.from_voltage(t, v, turns=turns, area=area)
    assert w.b_peak == pytest.approx(1.2, rel=1e-5)


def test_from_samples_averages_periods():
    # closed form: averaging P periods of independent white noise divides its sigma by sqrt(P)
    f, n_per, periods, sigma = 50.0, 1000, 16, 0.01
    t = np.arange(periods * n_per) / (n_per * f)
    clean = np.sin(2 * np.pi * f * t)
    noise = np.random.default_rng(2).normal(0, sigma, t.size)
    w = waveforms.from_samples(t, clean + noise, freq=f)
    assert w.n_samples == n_per
    resid = w.b - np.sin(2 * np.pi * f * w.t)
    assert np.std(resid) == pytest.approx(sigma / np.sqrt(periods), rel=0.1)


def test_from_samples_single_period_keeps_samples():
    t = np.array([0.0, 1.0, 2.0, 3.0]) * 1e-3
    b = np.array([0.0, 0.1, 0.0, -0.1])
    w = waveforms.from_samples(t, b)
    assert w.period == pytest.approx(4e-3)
    np.testing.assert_array_equal(w.b, b)


def test_waveform_is_immutable():
    w = waveforms.sine(0.1, 50.0)
    with pytest.raises(ValueError):
        w.b[0] = 1.0
    with pytest.raises(AttributeError):
        w.period = 1.0


def test_resample_shift_scale_period():
    # closed form: the triangle rises 0.2 T in 0.25 ms and falls 0.2 T in 0.75 ms; on an 8-point grid
    # (0.125 ms) the rise takes 2 steps and the fall 6
    w = waveforms.triangle(0.1, 1e3, 0.25)
    r = w.resample(8)
    np.testing.assert_allclose(r.b, [-0.1, 0.0, 0.1, 0.1 - 0.2 / 6 * 1, 0.1 - 0.2 / 6 * 2, 0.1 - 0.2 / 6 * 3,
                                     0.1 - 0.2 / 6 * 4, 0.1 - 0.2 / 6 * 5], atol=1e-15)
    # B(t - 0.5 ms) at t = 0 is B(0.5 ms), a quarter of a millisecond down the falling ramp
    shifted = w.shifted(0.5e-3)
    assert shifted.b[0] == pytest.approx(0.1 - 0.2 * (0.25 / 0.75))
    np.testing.assert_allclose(shifted.t, [0.0, 0.5e-3, 0.75e-3])  # the vertices moved by 0.5 ms
    assert w.scaled(-2.0).b_peak == pytest.approx(0.2)
    assert w.with_period(2e-3).freq == pytest.approx(500.0)


# ---------------------------------------------------------------------------
# reversal detection with noise
# ---------------------------------------------------------------------------
def test_estimate_noise_of_white_noise_on_a_ramp():
    # reference: for white noise of sigma s the median |second difference| is 0.6745 sqrt(6) s
    # (normal distribution; Hampel 1974)
    rng = np.random.default_rng(9)
    for n in (10_000, 3_000_000):  # the long one is read at a stride
        b = np.linspace(0, 5, n) + rng.normal(0, 2e-3, n)
        assert waveforms.estimate_noise(b) == pytest.approx(2e-3, rel=0.03)


@pytest.mark.parametrize("n", [2000, 100_000])
def test_reversals_ignore_noise_keep_real_minor_loops(n):
    # common practice, no source: noise makes no reversals with a threshold of 12 sigma;
    # a real minor loop of 40 sigma survives
    rng = np.random.default_rng(4)
    t = np.arange(n) / n
    clean = np.sin(2 * np.pi * t)
    noisy = clean + rng.normal(0, 1e-3, n)
    rev = waveforms.reversal_indices(noisy)
    assert rev.size == 2
    assert rev[0] == np.argmax(noisy)
    assert abs(t[rev[1]] - 0.75) < 0.05
    # add a 0.04 T dip on the falling flank near t = 0.4 (falls further, recovers, falls again)
    bump = 0.04 * np.clip(1 - np.abs((t - 0.4) / 0.003), 0, None)
    rev2 = waveforms.reversal_indices(noisy + bump)
    assert rev2.size == 4


def test_reversals_of_clean_triangle_with_flat_top():
    # a trapezoid has two flat parts; its reversals are one maximum and one minimum
    w = waveforms.trapezoid(0.1, 1e3, 0.5)
    rev = w.reversals()
    np.testing.assert_allclose(w.b[rev], [0.1, -0.1])


# ---------------------------------------------------------------------------
# bad input: ValueError naming the argument and the value
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_flux_is_rejected(bad):
    with pytest.raises(ValueError, match=r"b has a non-finite value at index 2: (nan|inf|-inf)"):
        waveforms.FluxWaveform([0.0, 1.0, 2.0], [0.0, 1.0, bad], 3.0)
    with pytest.raises(ValueError, match=r"b has a non-finite value at index 1"):
        waveforms.from_samples([0.0, 1.0, 2.0], [0.0, bad, 0.5])


def test_non_finite_time_is_rejected():
    with pytest.raises(ValueError, match=r"t has a non-finite value at index 1: nan"):
        waveforms.from_samples([0.0, np.nan, 2.0], [0.0, 1.0, 0.5])


def test_non_finite_voltage_is_rejected_with_index():
    with pytest.raises(ValueError, match=r"v has a non-finite value at index 3: nan"):
        waveforms.from_voltage([0.0, 1.0, 2.0, 3.0], [0.0, 1.0, -1.0, np.nan], turns=1, area=1e-4)


def test_decreasing_time_stamps_are_rejected():
    with pytest.raises(ValueError, match=r"t must be strictly increasing; decreasing time stamp at index 2: 0\.5"):
        waveforms.from_samples([0.0, 1.0, 0.5, 2.0], [0.0, 1.0, 0.5, 0.0])
    with pytest.raises(ValueError, match=r"t must be strictly increasing"):
        waveforms.FluxWaveform([0.0, 2.0, 1.0], [0.0, 1.0, 0.5], 3.0)
    with pytest.raises(ValueError, match=r"t must be strictly increasing.*index 2: 0\.5"):
        waveforms.from_voltage([0.0, 1.0, 0.5, 2.0], [0.0, 1.0, 0.5, 0.0], turns=1, area=1e-4)


def test_duplicate_time_stamps_are_rejected():
    with pytest.raises(ValueError, match=r"duplicate time stamp at index 2: 1\.0"):
        waveforms.from_samples([0.0, 1.0, 1.0, 2.0], [0.0, 1.0, 0.5, 0.0])


@pytest.mark.parametrize("n", [0, 1])
def test_fewer_than_two_samples_is_rejected(n):
    with pytest.raises(ValueError, match=rf"at least 2 samples, got {n}"):
        waveforms.from_samples(np.arange(n, dtype=float), np.zeros(n))
    with pytest.raises(ValueError, match=rf"at least 2 samples, got {n}"):
        waveforms.FluxWaveform(np.arange(n, dtype=float), np.zeros(n), 1.0)


@pytest.mark.parametrize("bad", [0.0, -50.0, np.nan, "fifty"])
def test_bad_frequency_is_rejected(bad):
    for make in (lambda: waveforms.sine(0.1, bad), lambda: waveforms.triangle(0.1, bad),
                 lambda: waveforms.trapezoid(0.1, bad, 0.5)):
        with pytest.raises(ValueError, match=r"freq must be (a finite positive number|a number), got"):
            make()
    with pytest.raises(ValueError, match=r"freq must be"):
        waveforms.from_samples([0.0, 1.0, 2.0], [0.0, 1.0, 0.0], freq=bad)


@pytest.mark.parametrize("bad", [0.0, -0.1, np.inf])
def test_bad_flux_is_rejected(bad):
    with pytest.raises(ValueError, match=r"b_peak must be a finite positive number, got"):
        waveforms.sine(bad, 50.0)
    with pytest.raises(ValueError, match=r"b_peak must be a finite positive number, got"):
        waveforms.pwm(bad, 50.0, 5e3, 0.8)


@pytest.mark.parametrize("duty", [0.0, 1.0, -0.2, 1.5, np.nan])
def test_triangle_duty_outside_unit_interval_is_rejected(duty):
    with pytest.raises(ValueError, match=r"duty must lie in \(0, 1\), got"):
        waveforms.triangle(0.1, 1e3, duty)


@pytest.mark.parametrize("duty", [0.0, 1.2])
def test_trapezoid_duty_outside_unit_interval_is_rejected(duty):
    with pytest.raises(ValueError, match=r"duty must lie in \(0, 1\], got"):
        waveforms.trapezoid(0.1, 1e3, duty)


def test_pwm_bad_settings_are_rejected():
    with pytest.raises(ValueError, match=r"modulation_index must lie in \(0, 1\].*got 1\.2"):
        waveforms.pwm(1.0, 50.0, 5e3, 1.2)
    with pytest.raises(ValueError, match=r"carrier_freq / fundamental_freq must be an integer.*got 100\.5"):
        waveforms.pwm(1.0, 50.0, 5025.0, 0.8)
    with pytest.raises(ValueError, match=r"levels must be 2 or 3, got 5"):
        waveforms.pwm(1.0, 50.0, 5e3, 0.8, levels=5)


def test_from_voltage_bad_turns_and_area():
    t = np.arange(10) * 1e-3
    with pytest.raises(ValueError, match=r"turns must be a finite positive number, got 0"):
        waveforms.from_voltage(t, np.sin(t), turns=0, area=1e-4)
    with pytest.raises(ValueError, match=r"area must be a finite positive number, got -0\.0001"):
        waveforms.from_voltage(t, np.sin(t), turns=5, area=-1e-4)


def test_record_shorter_than_a_period_is_rejected():
    t = np.arange(10) * 1e-3
    with pytest.raises(ValueError, match=r"less than one period|shorter than one period"):
        waveforms.from_samples(t, np.sin(t), freq=10.0)


def test_period_must_exceed_sampled_span():
    with pytest.raises(ValueError, match=r"period \(1\.0 s\) must be longer than the sampled span \(1\.0 s\)"):
        waveforms.FluxWaveform([0.0, 1.0], [0.0, 1.0], 1.0)
    with pytest.raises(ValueError, match=r"period must be a finite positive number, got 0"):
        waveforms.sine(0.1, 50.0).with_period(0)


def test_reversal_indices_rejects_non_finite_and_short_input():
    with pytest.raises(ValueError, match=r"b has a non-finite value at index 1: nan"):
        waveforms.reversal_indices([0.0, np.nan, 1.0])
    with pytest.raises(ValueError, match=r"at least 2 samples"):
        waveforms.reversal_indices([1.0])


def test_spectrum_and_slope_power_reject_bad_arguments():
    w = waveforms.sine(0.1, 50.0)
    with pytest.raises(ValueError, match=r"n_harmonics must be a non-negative integer, got -3"):
        w.spectrum(-3)
    with pytest.raises(ValueError, match=r"samples must be an integer of at least 2, got 1"):
        w.spectrum(samples=1)
    with pytest.raises(ValueError, match=r"exponent must be finite, got nan"):
        w.mean_abs_dbdt_power(float("nan"))
    with pytest.raises(ValueError, match=r"delay must be finite, got inf"):
        w.shifted(float("inf"))
    with pytest.raises(ValueError, match=r"n must be at least 2, got 1"):
        w.resample(1)


def test_clean_quantised_record_has_no_noise_and_no_spurious_reversal():
    # closed form: rounding to codes is a monotone map, so an 8-bit record of a clean sine rises and
    # falls exactly once per period; with no evidence of noise the threshold stays at the span term
    t = np.arange(4096) / 4096e3
    lsb = 0.1 / 127
    b = np.round(0.1 * np.sin(2 * np.pi * 1e3 * t) / lsb) * lsb
    assert waveforms.quantisation_step(b) == pytest.approx(lsb, rel=1e-9)
    assert waveforms.estimate_noise(b) == 0.0
    assert waveforms.code_flicker(b) == 0
    assert waveforms.default_threshold(b) < 1e-9
    assert waveforms.reversal_indices(b).size == 2


@pytest.mark.parametrize("sigma_codes", [0.1, 0.2, 0.3, 1.0, 2.0])
@pytest.mark.parametrize("n", [4096, 50_000])
def test_quantised_noisy_record_makes_no_spurious_reversal(sigma_codes, n):
    # common practice, no source: a clean sine plus white noise of 0.1-2 codes, rounded to 8 bits,
    # flickers between codes near its peaks (hundreds of reversals at threshold 0); none of them is
    # a loop. The record of 50 000 samples takes the long-record path of the reversal search.
    t = np.arange(n) / n
    lsb = 0.1 / 127
    rng = np.random.default_rng(int(10 * sigma_codes) + n)
    b = np.round((0.1 * np.sin(2 * np.pi * t) + sigma_codes * lsb * rng.standard_normal(n)) / lsb) * lsb
    assert waveforms.reversal_indices(b, threshold=0.0).size > 20  # the flicker is there
    assert waveforms.reversal_indices(b).size == 2


def test_noise_free_pwm_has_no_noise_whatever_its_grid():
    # closed form: flux linear between switching instants; with 16 samples per carrier period every
    # step has the same size, which is no evidence of noise (issue 9)
    w = waveforms.pwm(1.0, 50.0, 50.0 * 313, 0.8, samples_per_carrier=16)
    assert waveforms.estimate_noise(w.b) == 0.0
    assert waveforms.code_flicker(w.b) == 0
    assert waveforms.default_threshold(w.b) < 1e-9 * w.flux_pp


def test_few_samples_are_exact_vertices():
    # fewer than NOISE_MIN_SAMPLES samples carry no statistical evidence of noise: a waveform given by
    # its corner points keeps every reversal (issue 9)
    b = np.array([1.0, 0.0, 0.4, 0.2, 0.6, -1.0])
    assert waveforms.estimate_noise(b) == 0.0
    assert waveforms.default_threshold(b) == pytest.approx(2e-12)
    assert waveforms.reversal_indices(b).size == 6


def test_smooth_curvature_is_not_noise():
    # closed form: a noise-free sine on 256 samples has second differences of (2 pi/256)^2 B sin, which
    # the old estimate read as 2.6e-4 B of noise; its third differences are (2 pi/256)^3 B cos, so the
    # estimate falls below 1e-5 B and a real loop of 2e-3 B is kept
    n = 256
    b = np.sin(2 * np.pi * np.arange(n) / n)
    assert waveforms.estimate_noise(b) < 1e-5


def test_unquantised_samples_have_no_quantisation_step():
    assert waveforms.quantisation_step(waveforms.sine(0.1, 1e3).b) == 0.0
