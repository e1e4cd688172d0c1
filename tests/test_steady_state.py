"""Period detection, whole-period averaging and denoising of captured records.

Expected values are the parameters the test signals are built from (closed forms),
never outputs of the code under test.
"""
import numpy as np
import pytest

from workbench.capture.steady_state import (
    denoise_period,
    detect_period,
    fold_periods,
    uniform_grid,
)
from workbench.waveforms import estimate_noise


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
    out = denoise_period(noisy, noise=estimate_noise(noisy))
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
    out = denoise_period(clean, noise=estimate_noise(clean))
    assert not out.filtered
    np.testing.assert_array_equal(out.values, clean)


def test_denoise_keeps_the_mean_and_is_zero_phase():
    # a zero-phase filter keeps an even signal even (closed form: cos terms only)
    n = 1024
    x = np.arange(n) / n
    rng = np.random.default_rng(4)
    y = 0.3 + np.cos(2 * np.pi * x) + rng.normal(0.0, 0.02, n)
    out = denoise_period(y, noise=estimate_noise(y))
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


def _samples(period_samples, n, shape, *, noise=0.05, offset=0.7, drift=0.0, seed=0):
    # record on a 10 ns grid; the period in samples is given (closed-form test signals)
    rng = np.random.default_rng(seed)
    i = np.arange(n)
    t = i * 1e-8 + 1.3e-7
    y = shape(2 * np.pi * i / period_samples) + offset + drift * i / n + rng.normal(0.0, noise, n)
    return t, y


@pytest.mark.parametrize("period_samples", [5000.3, 200.3])
def test_long_record_on_block_means_keeps_sub_sample_precision(period_samples):
    # 2 M samples: the coarse and fine estimates run on means of 16-sample blocks (or on a
    # finer leading part for the 200-sample period); a drift of 2 units over the record is ignored
    t, y = _samples(period_samples, 2_000_000, lambda w: np.arcsin(np.sin(w)) + 0.3 * np.sin(2 * w), drift=2.0)
    est = detect_period(t, y)
    assert est.period == pytest.approx(period_samples * 1e-8, rel=1e-6)  # built with this period


@pytest.mark.parametrize("period_samples", [20.3, 8.3])
def test_short_period_in_a_long_record_is_not_aliased(period_samples):
    # periods of about one or two 16-sample blocks: the block means lose or alias the signal,
    # so the period must come from the record at full resolution
    t, y = _samples(period_samples, 2_000_000, np.sin)
    est = detect_period(t, y)
    assert est.period == pytest.approx(period_samples * 1e-8, rel=1e-5)  # built with this period


def test_non_finite_sample_deep_in_a_long_record_is_named():
    t, y = _samples(5000.3, 1_000_000, np.sin)
    y[765_432] = np.nan
    with pytest.raises(ValueError, match="index 765432"):
        detect_period(t, y)


def test_fold_with_non_integer_samples_per_period_matches_the_closed_form():
    # 1000.37 samples a period: every period starts at a different sub-sample offset
    p, n = 1000.37, 46_000
    t, y = _samples(p, n, np.sin, noise=0.0, offset=0.0)
    fold = fold_periods(t, y, p * 1e-8)
    assert fold.n_periods == int((n - 1) // p)
    expected = np.sin(2 * np.pi * fold.phase / (p * 1e-8))  # closed form at the output phases
    # two linear interpolations of a sine with 1000 samples a period: error below
    # 2 * (2 pi / 1000)^2 / 8 = 1e-5 (interpolation error bound h^2 |y''| / 8, common practice, no source)
    np.testing.assert_allclose(fold.mean[0], expected, atol=1e-5)


def test_fold_upsampled_to_the_record_end_matches_the_closed_form():
    # more output samples than the record has a period, and the last period ends on the last sample
    p = 400.0
    t, y = _samples(p, int(3 * p) + 1, lambda w: np.sin(w) + 0.2 * np.cos(3 * w), noise=0.0, offset=0.0)
    fold = fold_periods(t, y, p * 1e-8, samples=1600)
    assert fold.n_periods == 3
    w = 2 * np.pi * fold.phase / (p * 1e-8)
    # linear interpolation bound h^2 |y''| / 8 with |y''| <= (1 + 1.8)(2 pi / 400)^2 (common practice, no source)
    np.testing.assert_allclose(fold.mean[0], np.sin(w) + 0.2 * np.cos(3 * w), atol=1e-4)


@pytest.mark.parametrize("period_samples, n", [(1000.37, 46_000), (2000.3, 2_000_000)])
def test_fold_spread_is_the_sample_noise_at_any_alignment(period_samples, n):
    # white noise of std s on J periods: RMS of (sample - average) is s*sqrt((J-1)/J)
    # (sample variance about the mean, common practice, no source); the long record is
    # judged on an even subset of its periods
    s = 0.02
    t, y = _samples(period_samples, n, np.sin, noise=s, offset=0.0, seed=7)
    fold = fold_periods(t, y, period_samples * 1e-8)
    j = fold.n_periods
    assert fold.spread[0] == pytest.approx(s * np.sqrt((j - 1) / j) / 2.0, rel=0.03)


def test_fold_of_an_uneven_record_reads_the_exact_times():
    # a linear signal is reproduced exactly by linear interpolation whatever the sample times
    rng = np.random.default_rng(3)
    t = np.sort(rng.uniform(0.0, 1.0, 4000))
    fold = fold_periods(t, 3.0 * t, 0.25)
    expected = 3.0 * (t[0] + fold.phase + 0.25 * np.arange(fold.n_periods).mean())  # mean of the periods' lines
    np.testing.assert_allclose(fold.mean[0], expected, rtol=1e-12)


def test_uniform_grid_returns_an_exact_grid_without_copying():
    t = np.arange(100_000) * 1e-7 + 2e-3
    y = np.sin(t * 1e4)
    tg, ys, resampled = uniform_grid(t, y)
    assert not resampled
    assert np.shares_memory(tg, t) and np.shares_memory(ys, y)


def test_uniform_grid_names_a_bad_time_stamp():
    t = np.arange(100_000) * 1e-7
    t[54_321] = np.nan
    with pytest.raises(ValueError, match="index 54321"):
        uniform_grid(t, np.zeros(t.size))
    t = np.arange(100_000) * 1e-7
    t[60_000] = t[59_999]
    with pytest.raises(ValueError, match="index 60000"):
        uniform_grid(t, np.zeros(t.size))


def test_few_periods_with_ripple_follow_the_minimum_beyond_the_coarse_window():
    # by construction (data/captures/make_demo_captures.py) the invented two-winding demo
    # record repeats exactly every 4000 samples (50 Hz at 200 kS/s). Over its 3.3 periods the
    # integrated sense voltage puts the coarse autocorrelation peak ~11 samples off, beyond
    # the first search window: the fine search must follow its minimum there.
    from pathlib import Path

    from workbench.capture import read_capture

    path = Path(__file__).resolve().parents[1] / "data" / "captures" / "inverter_pwm_sisteel_50hz.csv"
    data = read_capture(path)
    t, v = data.time, data.channels["v_sense"]
    step = t[1] - t[0]
    vv = v - v.mean()
    x = np.concatenate(([0.0], np.cumsum(0.5 * (vv[1:] + vv[:-1]) * step)))
    x = x - np.polyval(np.polyfit(t - t[0], x, 1), t - t[0])
    est = detect_period(t, x)
    assert est.freq == pytest.approx(50.0, rel=1e-5)
