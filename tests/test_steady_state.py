"""Period detection, whole-period averaging and denoising of captured records.

Expected values are the parameters the test signals are built from (closed forms),
never outputs of the code under test.
"""
import numpy as np
import pytest

from workbench.analysis.steady_state import (
    denoise_period,
    detect_period,
    fold_periods,
    uniform_grid,
)


def _record(freq, fs, n_periods, shape, *, noise=0.0, offset=0.0, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(int(n_periods * fs / freq)) / fs + 1.3e-7
    w = 2 * np.pi * freq * t
    y = shape(w) + offset + rng.normal(0.0, noise, t.size)
    return t, y


@pytest.mark.parametrize(
    "shape",
    [
        lambda w: np.sin(w),
        # fundamental with strong odd and even harmonics (closed-form test signal)
        lambda w: np.sin(w) + 0.4 * np.sin(3 * w + 0.3) + 0.3 * np.cos(2 * w),
        # a second harmonic larger than the fundamental: the period is still 1/f
        lambda w: 0.5 * np.sin(w) + np.sin(2 * w),
        # triangle (sawtooth-like ramp, closed form via arcsin of sine)
        lambda w: np.arcsin(np.sin(w)),
    ],
    ids=["sine", "harmonics", "strong-2nd", "triangle"],
)
@pytest.mark.parametrize("n_periods", [3.37, 8.81])
def test_period_detected_within_0p1_percent(shape, n_periods):
    freq = 101.3e3
    t, y = _record(freq, 20e6, n_periods, shape, noise=0.05, offset=0.7, seed=3)
    est = detect_period(t, y)
    # the signal is built at exactly `freq`: closed form
    assert est.freq == pytest.approx(freq, rel=1e-3)
    assert est.n_periods == pytest.approx(n_periods, rel=2e-3)


def test_period_detection_is_sub_sample():
    # 37.3 samples per period: a lag found only to the nearest sample would miss by up to 1.3 %
    freq, fs = 1.0 / 37.3, 1.0
    t, y = _record(freq, fs, 20.5, lambda w: np.sin(w) + 0.2 * np.sin(2 * w), noise=0.01, seed=1)
    assert detect_period(t, y).period == pytest.approx(37.3, rel=2e-4)


def test_less_than_one_and_a_half_periods_is_refused():
    t, y = _record(50.0, 10e3, 0.9, np.sin)
    with pytest.raises(ValueError, match="period"):
        detect_period(t, y)


def test_noise_only_is_refused():
    rng = np.random.default_rng(5)
    t = np.arange(5000) * 1e-6
    with pytest.raises(ValueError, match="repeating|period"):
        detect_period(t, rng.normal(size=t.size))


def test_constant_signal_is_refused():
    t = np.arange(100) * 1e-6
    with pytest.raises(ValueError, match="constant"):
        detect_period(t, np.ones(100))


def test_fold_reproduces_a_periodic_signal_and_counts_whole_periods():
    freq, fs = 1e3, 1e6
    t, y = _record(freq, fs, 4.6, lambda w: np.sin(w) + 0.1 * np.sin(5 * w))
    fold = fold_periods(t, y, 1 / freq)
    assert fold.n_periods == 4  # floor(4.6)
    w = 2 * np.pi * freq * (fold.t_start + fold.phase)
    expected = np.sin(w) + 0.1 * np.sin(5 * w)  # closed form at the grid times
    np.testing.assert_allclose(fold.mean[0], expected, atol=1e-5)
    assert fold.spread[0] < 1e-6


def test_fold_spread_measures_the_noise():
    # white noise of std s on J periods: RMS of (period - average) is s*sqrt((J-1)/J)
    # (sample variance about the mean, common practice, no source)
    freq, fs, s = 1e3, 2e6, 0.02
    t, y = _record(freq, fs, 10.2, np.sin, noise=s, seed=11)
    fold = fold_periods(t, y, 1 / freq)
    j = fold.n_periods
    assert fold.spread[0] == pytest.approx(s * np.sqrt((j - 1) / j) / 2.0, rel=0.03)


def test_fold_needs_a_whole_period():
    t = np.arange(100) * 1e-3
    with pytest.raises(ValueError, match="less than one period"):
        fold_periods(t, np.sin(t), 1.0)


def test_denoise_recovers_a_sine_from_noise():
    n = 2048
    x = np.arange(n) / n
    clean = np.sin(2 * np.pi * x) + 0.2 * np.sin(2 * np.pi * 3 * x)
    rng = np.random.default_rng(2)
    noisy = clean + rng.normal(0.0, 0.01, n)
    out = denoise_period(noisy)
    assert out.filtered
    # the noise std is recovered (MAD estimate) and the result is far closer to the clean signal
    assert out.noise == pytest.approx(0.01, rel=0.1)
    err_in = np.sqrt(np.mean((noisy - clean) ** 2))
    err_out = np.sqrt(np.mean((out.values - clean) ** 2))
    assert err_out < 0.3 * err_in


def test_denoise_leaves_a_clean_period_alone():
    n = 512
    x = np.arange(n) / n
    clean = np.sin(2 * np.pi * x)
    out = denoise_period(clean)
    assert not out.filtered
    np.testing.assert_array_equal(out.values, clean)


def test_denoise_keeps_the_mean_and_is_zero_phase():
    # a zero-phase filter keeps an even signal even (closed form: cos terms only)
    n = 1024
    x = np.arange(n) / n
    rng = np.random.default_rng(4)
    y = 0.3 + np.cos(2 * np.pi * x) + rng.normal(0.0, 0.02, n)
    out = denoise_period(y)
    assert out.values.mean() == pytest.approx(y.mean(), abs=1e-12)
    peak = int(np.argmax(out.values))
    assert min(peak, n - peak) <= 8  # the maximum stays at phase 0


def test_uniform_grid_keeps_samples_with_rounded_time_stamps():
    t = np.round(np.arange(1000) * 1.0e-7 + 3e-9, 8)  # 10 ns print resolution on a 100 ns step
    y = np.sin(t * 1e5)
    tg, ys, resampled = uniform_grid(t, y)
    assert not resampled
    np.testing.assert_array_equal(ys[0], y)
    assert np.ptp(np.diff(tg)) < 1e-15


def test_uniform_grid_resamples_a_record_with_a_gap():
    t = np.concatenate((np.arange(100), np.arange(150, 250))) * 1e-3
    tg, ys, resampled = uniform_grid(t, 2.0 * t)
    assert resampled
    np.testing.assert_allclose(ys[0], 2.0 * tg)  # linear signal: interpolation is exact


def test_long_record_with_hundreds_of_periods():
    # 700 k samples: the coarse estimate runs on a block-averaged copy, the refinement in
    # stages must not slip to a neighbouring multiple of the period
    freq = 100.3e3
    t, y = _record(freq, 200e6, 350.4, lambda w: np.arcsin(np.sin(w)) + 0.3 * np.sin(2 * w), noise=0.05, seed=9)
    est = detect_period(t, y)
    assert est.freq == pytest.approx(freq, rel=1e-5)  # built at `freq`
    assert est.multiple > 100
