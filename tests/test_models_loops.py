"""Loop decomposition against ASTM E1049-85 rainflow counting, and conservation of the flux path.

External reference: the ``rainflow`` package (ASTM E1049-85 four-point rainflow
counting). Its ``extract_cycles`` is applied to the periodic flux sequence
rotated to start at its global maximum and closed on it, which is the standard's
treatment of a repeating history (sec. 5.4.4 and its note on periodic loading):
the two half cycles of the residue then have the same range and pair up into the
major loop.
"""
from __future__ import annotations

import numpy as np
import pytest
import rainflow
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import workbench.waveforms as wfm
from workbench import models, waveforms

SETTINGS = settings(max_examples=40, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])


def rainflow_full_cycle_ranges(b: np.ndarray) -> np.ndarray:
    """Ranges of the full cycles of a periodic sequence per ASTM E1049-85 (``rainflow`` package).

    The sequence is rotated to start at its maximum and closed on it; half
    cycles must pair up (equal ranges) into full cycles.
    """
    start = int(np.argmax(b))
    closed = np.append(np.roll(b, -start), b[start])
    full, halves = [], []
    for rng, _mean, count, _i0, _i1 in rainflow.extract_cycles(closed):
        (full if count == 1.0 else halves).append(rng)
    halves = sorted(halves)
    assert len(halves) % 2 == 0, f"unpaired half cycles {halves}"
    for a, b_ in zip(halves[::2], halves[1::2]):
        assert a == pytest.approx(b_, rel=1e-12, abs=1e-15), "half cycles of a periodic history must pair"
    return np.sort(np.array(full + halves[::2]))


def waveform_from_levels(levels, seg_samples=None) -> waveforms.FluxWaveform:
    """Piecewise-linear periodic waveform through the given reversal levels (1 s period)."""
    levels = np.asarray(levels, dtype=float)
    if seg_samples is None:
        return waveforms.FluxWaveform(np.arange(levels.size) / levels.size, levels, 1.0)
    # several samples per segment: linear interpolation between the reversals
    closed = np.append(levels, levels[0])
    knots = np.arange(closed.size, dtype=float)
    tt = np.arange(levels.size * seg_samples) / seg_samples
    return waveforms.FluxWaveform(tt / levels.size, np.interp(tt, knots, closed), 1.0)


def alternating(draw_values) -> np.ndarray:
    """Make a strictly alternating reversal sequence from positive step sizes."""
    steps = np.asarray(draw_values, dtype=float)
    signs = np.where(np.arange(steps.size) % 2 == 0, 1.0, -1.0)
    return np.cumsum(steps * signs)


# ---------------------------------------------------------------------------
# agreement with ASTM E1049-85 (rainflow package)
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("levels", [2, 3])
@pytest.mark.parametrize("m", [0.5, 0.9])
def test_pwm_loops_match_astm_e1049_rainflow(levels, m):
    # reference: ASTM E1049-85 rainflow counting as implemented by the rainflow package
    w = waveforms.pwm(1.2, 50.0, 1500.0, m, levels=levels, samples_per_carrier=32)
    loops = models.decompose_loops(w)
    expected = rainflow_full_cycle_ranges(w.b)
    got = np.sort(loops.flux_pp)
    assert got.size == expected.size
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-12)
    assert loops.n_minor == expected.size - 1
    assert loops.flux_pp[0] == pytest.approx(w.flux_pp, rel=1e-12)  # major loop first


@SETTINGS
@given(st.lists(st.floats(0.01, 1.0), min_size=4, max_size=60).filter(lambda s: len(s) % 2 == 0))
def test_random_reversal_sequences_match_astm_e1049_rainflow(steps):
    # reference: ASTM E1049-85 rainflow counting (rainflow package) on the same periodic sequence
    levels = alternating(steps)
    w = waveform_from_levels(levels)
    loops = models.decompose_loops(w, threshold=1e-9)
    expected = rainflow_full_cycle_ranges(w.b)
    np.testing.assert_allclose(np.sort(loops.flux_pp), expected, rtol=1e-10, atol=1e-12)


def test_random_sequence_with_samples_between_reversals_matches_rainflow():
    # reference: rainflow package; samples on the ramps between reversals change nothing
    rng = np.random.default_rng(11)
    levels = alternating(rng.uniform(0.05, 1.0, 40))
    w = waveform_from_levels(levels, seg_samples=7)
    loops = models.decompose_loops(w)
    np.testing.assert_allclose(np.sort(loops.flux_pp), rainflow_full_cycle_ranges(levels), rtol=1e-10)


CORNER_POINTS = (np.array([0, 0.12, 0.17, 0.20, 0.31, 0.60]) * 1e-3, [1.0, 0.0, 0.4, 0.2, 0.6, -1.0], 1e-3)


def test_corner_point_waveform_keeps_every_loop_with_default_arguments():
    # reference: ASTM E1049-85 rainflow counting (rainflow package) of the six corner points (issue 9:
    # the default threshold used to read every corner as noise and keep only the major loop)
    w = waveforms.FluxWaveform(*CORNER_POINTS)
    loops = models.decompose_loops(w)
    expected = rainflow_full_cycle_ranges(w.b)
    assert expected.size == 3
    np.testing.assert_allclose(np.sort(loops.flux_pp), expected, rtol=1e-12)


def test_noise_free_pwm_on_16_samples_per_carrier_keeps_every_minor_loop():
    # reference: rainflow package (ASTM E1049-85) on the same periodic sequence; issue 9 saw 188 of 312
    # minor loops kept on such a waveform because its equal steps were taken for recorder codes
    w = waveforms.pwm(1.0, 50.0, 50.0 * 313, 0.8, samples_per_carrier=16)
    loops = models.decompose_loops(w)
    expected = rainflow_full_cycle_ranges(w.b)
    assert expected.size - 1 == 312
    assert loops.n_minor == 312
    np.testing.assert_allclose(np.sort(loops.flux_pp), expected, rtol=1e-10, atol=1e-13)


def test_small_real_loop_on_a_coarsely_sampled_sine_is_kept():
    # reference: rainflow package. A noise-free sine on 256 samples with a dip of 2.2e-3 (a real
    # minor loop); the curvature of the sine is no evidence of noise
    n = 256
    t = np.arange(n) / n
    b = np.sin(2 * np.pi * t)
    b[62] -= 0.004  # just before the peak: down by about 2.2e-3 and back up
    w = waveforms.FluxWaveform(t, b, 1.0)
    loops = models.decompose_loops(w)
    expected = rainflow_full_cycle_ranges(b)
    assert expected.size == 2
    np.testing.assert_allclose(np.sort(loops.flux_pp), expected, rtol=1e-12)


# ---------------------------------------------------------------------------
# conservation of the flux path (closed-form identity of rainflow counting)
# ---------------------------------------------------------------------------
@SETTINGS
@given(st.lists(st.floats(0.01, 1.0), min_size=2, max_size=50).filter(lambda s: len(s) % 2 == 0),
       st.integers(1, 5))
def test_loops_conserve_total_flux_path(steps, seg_samples):
    # closed form: every reversal-to-reversal swing is owned once by one loop half,
    # so sum over loops of 2*flux_pp equals the total variation of the periodic waveform
    w = waveform_from_levels(alternating(steps), seg_samples=seg_samples)
    loops = models.decompose_loops(w, threshold=1e-9)
    total_variation = np.sum(np.abs(np.diff(np.append(w.b, w.b[0]))))
    assert np.sum(2 * loops.flux_pp) == pytest.approx(total_variation, rel=1e-10)
    # the first-passage path of each loop is its two halves, 2*flux_pp long
    path = models.loop_path_integrals(w, loops, np.ones(w.n_samples))
    np.testing.assert_allclose(path, 2 * loops.flux_pp, rtol=1e-10, atol=1e-14)


def test_pwm_conserves_total_flux_path():
    # closed form as above, on a noise-free PWM flux with 200 minor loops
    w = waveforms.pwm(1.0, 50.0, 10_000.0, 0.8)
    loops = models.decompose_loops(w)
    total_variation = np.sum(np.abs(w.segment_increments))
    assert np.sum(2 * loops.flux_pp) == pytest.approx(total_variation, rel=1e-10)


def test_path_integral_with_slope_weight_matches_segment_sum_for_monotonic_halves():
    # closed form: for a triangle each half is one segment, integral of |dB/dt|^a dt = |dB|^a dt^(1-a)
    w = waveforms.triangle(0.2, 1000.0, 0.3)
    loops = models.decompose_loops(w)
    a = 1.6
    expected = (0.4**a * (0.3e-3) ** (1 - a)) + (0.4**a * (0.7e-3) ** (1 - a))
    got = models.loop_abs_dbdt_integrals(w, loops, a)
    assert got.size == 1
    assert got[0] == pytest.approx(expected, rel=1e-12)


def test_constant_waveform_has_no_loops():
    w = waveforms.FluxWaveform([0.0, 0.5], [0.3, 0.3], 1.0)
    loops = models.decompose_loops(w)
    assert loops.flux_pp.size == 0
    assert models.igse(w, 1.0, 1.5, 2.5) == 0.0


# ---------------------------------------------------------------------------
# noise: long records take the block-reduction path of reversal detection
# ---------------------------------------------------------------------------
def noisy_sine_with_notch(n, sigma, notch, seed=3):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / n
    b = np.sin(2 * np.pi * t)
    if notch:
        # a real small minor loop on the rising flank: down by `notch` and back up
        x = (t - 0.9) / 0.002
        b = b - notch * np.clip(1 - np.abs(x), 0, None)
    return b + sigma * rng.standard_normal(n)


@pytest.mark.parametrize("n", [4096, 200_000])
def test_noise_makes_no_spurious_loops(n):
    # common practice, no source: a reversal threshold of many noise sigmas rejects white noise
    b = noisy_sine_with_notch(n, 1e-3, 0.0)
    w = waveforms.FluxWaveform(np.arange(n) / n, b, 1.0)
    loops = models.decompose_loops(w)
    assert loops.n_minor == 0
    assert loops.flux_pp[0] == pytest.approx(2.0, abs=0.01)


@pytest.mark.parametrize("n", [4096, 200_000])
def test_noise_keeps_real_small_minor_loop(n):
    # a notch of 50 noise sigmas (0.05 T) is a real minor loop and must be kept
    b = noisy_sine_with_notch(n, 1e-3, 0.05)
    w = waveforms.FluxWaveform(np.arange(n) / n, b, 1.0)
    loops = models.decompose_loops(w)
    assert loops.n_minor == 1
    # the notch swings 0.05 T less the sine's own rise over its half width (about 0.01 T)
    assert 0.025 < loops.flux_pp[1] < 0.06


def test_block_reduction_gives_the_same_reversals(monkeypatch):
    # internal consistency, no external source: the long-record shortcut must not change the answer
    b = noisy_sine_with_notch(100_000, 2e-3, 0.05, seed=8)
    fast = waveforms.reversal_indices(b)
    monkeypatch.setattr(wfm, "_REDUCE_MIN_SAMPLES", 10**12)
    slow = waveforms.reversal_indices(b)
    np.testing.assert_array_equal(b[fast], b[slow])


def test_loop_path_integrals_rejects_wrong_weight_length():
    w = waveforms.triangle(0.1, 100.0)
    loops = models.decompose_loops(w)
    with pytest.raises(ValueError, match=r"segment_weight .* \(2\), got shape \(3,\)"):
        models.loop_path_integrals(w, loops, np.ones(3))


def test_negative_threshold_is_rejected():
    w = waveforms.sine(0.1, 50.0)
    with pytest.raises(ValueError, match=r"threshold .* got -0\.1"):
        models.decompose_loops(w, threshold=-0.1)


@pytest.mark.parametrize("rising", [True, False])
@pytest.mark.parametrize("size", [3, 64 * 64 - 1, 64 * 64 + 17, 64 * 200 + 5, 40_000])
def test_blocked_running_extreme_equals_numpy_accumulate(rising, size):
    # reference: numpy's ufunc.accumulate; the blocked version skips rows without a new extreme
    from workbench.models import loops as loops_module

    rng = np.random.default_rng(size)
    x = rng.normal(0, 1, size) + np.linspace(0, 30 if rising else -30, size)
    for carry in (-np.inf, np.inf, 0.5):
        out = np.empty(size)
        loops_module._running_extreme(x, carry, out, rising)
        uf = np.maximum if rising else np.minimum
        np.testing.assert_array_equal(out, uf.accumulate(np.append(carry, x))[1:])


def test_single_swing_shortcut_agrees_with_the_general_path():
    # closed-form identity, common practice, no source: a wiggle far below the reversal
    # threshold sends the waveform through the general reversal path, a clean one through
    # the one-rise-one-fall shortcut; both must give the same loop and the same iGSE
    clean = waveforms.trapezoid(0.1, 1e5, 0.7).resample(2000)
    b = np.array(clean.b)
    b[850] -= 1e-9  # a 1 nT dip in the flat top: a reversal pair of 1e-9 T
    bumped = waveforms.FluxWaveform(clean.t, b, clean.period)
    fast = models.decompose_loops(clean)
    general = models.decompose_loops(bumped, threshold=1e-6)
    assert fast.monotone and not general.monotone
    np.testing.assert_allclose(general.flux_pp, fast.flux_pp, rtol=1e-6)
    p_fast = models.igse(clean, 1.5, 1.4, 2.6)
    p_general = models.igse(bumped, 1.5, 1.4, 2.6, threshold=1e-6)
    assert p_general == pytest.approx(p_fast, rel=1e-6)
