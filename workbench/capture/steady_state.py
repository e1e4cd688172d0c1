"""Steady state of a captured record: fundamental period, whole-period averaging, denoising.

A bench capture holds a few (or many) periods of a periodic signal, with noise,
a probe offset, harmonics and usually a non-integer number of periods. This
module finds the fundamental period to sub-sample precision, folds the whole
periods onto one and reports how much they differ, and removes the noise that
is left after averaging before anything is differentiated.

References
----------
.. [1] J. S. Bendat, A. G. Piersol, *Random Data: Analysis and Measurement
   Procedures*, 4th ed., Wiley, 2010, ch. 5 and 11 (autocorrelation by FFT,
   unbiased estimate).
.. [2] J. O. Smith, *Spectral Audio Signal Processing*, W3K Publishing, 2011,
   "Quadratic interpolation of spectral peaks" (parabolic peak interpolation).
.. [3] D. C. Rife, R. R. Boorstyn, "Single-tone parameter estimation from
   discrete-time observations", IEEE Trans. Inf. Theory 20(5), pp. 591-598, 1974
   (least-squares frequency from the phase of the tone).

This module sits at the bottom of the layers (with the readers): it imports numpy
only, never :mod:`workbench.waveforms`; a noise level it needs is passed in.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

__all__ = [
    "DenoisedPeriod",
    "FoldedPeriod",
    "PeriodEstimate",
    "Repetition",
    "checked_record",
    "denoise_period",
    "detect_period",
    "fold_periods",
    "repetition",
    "uniform_grid",
    "uniform_step",
]

#: An autocorrelation peak counts as "the fundamental" when it reaches this share of the highest one.
PEAK_SHARE = 0.9
#: Longest record used for the coarse (FFT) period estimate, in samples; longer ones are block-averaged.
COARSE_MAX_SAMPLES = 1 << 17
#: Fewest block means per period for the fine estimate to run on the block-averaged record.
MIN_BLOCKS_PER_PERIOD = 32
#: Blocks read (at scattered positions) to measure how much variance block averaging removes.
RETENTION_BLOCKS = 4096
#: Samples handled at a time by the passes over a whole record (a size that stays in the cache).
CHUNK = 1 << 15
#: Rows of at least this many samples are accumulated one by one when folding, shorter ones in blocks.
LONG_ROW = 1 << 15
#: Most (period, phase) points used for the period-to-period spread of a fold.
SPREAD_POINTS = 1 << 18
#: Time stamps within this fraction of a step of the even grid are returned as they are.
EXACT_GRID = 1e-6
#: A time step longer than this many median steps, and than GAP_SHARE of the record, is a gap.
GAP_STEPS = 100.0
GAP_SHARE = 0.1
#: An uneven record is put on a grid of at most this many times its own samples.
MAX_GRID_FACTOR = 16
#: Multiples of the period checked for a subharmonic (a flux that repeats only every k periods).
SUBHARMONIC_MULTIPLES = (2, 3)
#: Harmonics are kept while their amplitude exceeds this many noise standard deviations of one bin.
HARMONIC_SNR = 4.0
#: Noise allowed on the slope after the low-pass, as a fraction of the RMS slope of the signal.
SLOPE_NOISE_SHARE = 0.1
#: Phase bins per period of the repetition check on periods of at least twice as many samples.
REPETITION_BINS = 1024
#: Most bins (or samples, for short periods) the repetition check reads: the leading part of a longer record.
REPETITION_MAX_POINTS = 1 << 20
#: How often the fine search may move its window to follow a minimum on the window's edge.
MAX_WINDOW_SHIFTS = 64

_GOLDEN = 0.6180339887498949  # (sqrt(5) - 1) / 2: an evenly spread sequence i * g mod 1 that never repeats


def checked_record(t, y, y_name: str, caller: str, min_samples: int):
    """Flattened float copies of a sampled record, checked.

    Parameters
    ----------
    t : array_like
        Sample times [s].
    y : array_like
        Samples [any unit].
    y_name : str
        Name of ``y`` used in messages.
    caller : str
        Function named in the message about too few samples.
    min_samples : int
        Fewest samples accepted [-].

    Returns
    -------
    t, y : ndarray
        The record as float arrays.
    steps : ndarray
        Time steps ``diff(t)`` [s].

    Raises
    ------
    ValueError
        Unequal lengths, too few samples, a non-finite value, or a time stamp
        that does not increase (the message names the array and the index).
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if t.size != y.size:
        raise ValueError(f"t and {y_name} must have the same length, got {t.size} and {y.size}")
    if t.size < min_samples:
        raise ValueError(f"{caller} needs at least {min_samples} samples, got {t.size}")
    for name, arr in (("t", t), (y_name, y)):
        bad = ~np.isfinite(arr)
        if bad.any():
            i = int(np.argmax(bad))
            raise ValueError(f"{name} has a non-finite value at index {i}: {float(arr[i])!r}")
    steps = np.diff(t)
    if (steps <= 0).any():
        i = int(np.argmax(steps <= 0))
        kind = "duplicate" if steps[i] == 0 else "decreasing"
        raise ValueError(f"t must be strictly increasing; {kind} time stamp at index {i + 1}: {float(t[i + 1])!r}")
    return t, y, steps


def _grid_deviation(t: np.ndarray, step: float) -> float:
    """Largest |t_i - (t_0 + i step)| [s], one cache-sized chunk at a time; inf if t is not finite."""
    n = t.size
    base = np.arange(min(n, CHUNK), dtype=float) * step
    buf = np.empty(base.size)
    above = below = 0.0
    for s in range(0, n, CHUNK):
        e = min(n, s + CHUNK)
        d = np.subtract(t[s:e], base[: e - s], out=buf[: e - s])
        offset = t[0] + s * step
        hi, lo = float(d.max()), float(d.min())
        if not (np.isfinite(hi) and np.isfinite(lo)):
            return np.inf
        above = max(above, hi - offset)
        below = max(below, offset - lo)
    return max(above, below)


def uniform_grid(t, channels):
    """Put a record on an evenly spaced time grid.

    Parameters
    ----------
    t : array_like
        Sample times, strictly increasing [s].
    channels : array_like
        Signals, shape (samples,) or (channels, samples) [any unit].

    Returns
    -------
    t_grid : ndarray
        Evenly spaced times [s].
    values : ndarray
        Signals on that grid, shape (channels, samples).
    resampled : bool
        True when the signals were interpolated (gaps or uneven sampling),
        False when only the printed time stamps were regularised.

    Notes
    -----
    Time stamps printed with few digits deviate from the ideal grid
    :math:`t_0 + i\\,\\Delta t` (with :math:`\\Delta t = (t_{N-1} - t_0)/(N-1)`) by
    rounding; when every deviation is under half an interval, the samples are
    kept and the ideal grid is used. A step longer than 100 median steps and
    10 % of the span is a gap (missing data, two records joined): refused with
    the place named, never bridged by interpolation. Stamps within ``EXACT_GRID`` (1e-6) of an
    interval of the ideal grid already are that grid up to floating-point
    rounding, and are returned as they are (no copy; the values are not copied
    either). Otherwise the signals are linearly interpolated onto a grid with
    the record's fine interval (its 5th-percentile step, so that a simulator's
    fine steps at the edges are resolved; at most 16 times the record's samples). The check runs over the record in cache-sized chunks.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.atleast_2d(np.asarray(channels, dtype=float))
    if t.size < 3:
        raise ValueError(f"a record needs at least 3 samples, got {t.size}")
    if y.shape[1] != t.size:
        raise ValueError(f"channels must have {t.size} samples each, got shape {y.shape}")
    step = (t[-1] - t[0]) / (t.size - 1)
    dev = _grid_deviation(t, step) if np.isfinite(step) and step > 0 else np.inf
    if dev <= EXACT_GRID * step:  # then every interval is within 2e-6 of `step`: increasing
        return t, y, False
    steps = np.diff(t)
    if not (np.isfinite(t).all() and (steps > 0).all()):
        i = int(np.argmax(~(steps > 0))) + 1
        raise ValueError(f"time must be finite and strictly increasing; problem at index {i}: {t[i]!r}")
    if dev <= 0.5 * step:
        return t[0] + np.arange(t.size) * step, y, False
    span = float(t[-1] - t[0])
    step = float(np.median(steps))
    i = int(np.argmax(steps))
    gap = float(steps[i])
    if gap > GAP_STEPS * step and gap > GAP_SHARE * span:
        raise ValueError(
            f"time has a gap of {gap:.4g} s between samples {i} and {i + 1} (t = {t[i]:.6g} s), "
            f"{gap / step:.3g} times the usual step of {step:.3g} s: the record is not one continuous "
            "capture; analyse the parts on either side of the gap separately"
        )
    # a simulator's adaptive steps (many tiny steps on the edges) would make the median grid
    # far denser than the record: the grid holds at most MAX_GRID_FACTOR times its samples
    # The grid resolves the record's fine steps (a simulator steps finely exactly where the
    # signal jumps: the edges of a square voltage), so take its 5th-percentile step, not the median.
    step = max(min(step, float(np.percentile(steps, 5))), span / (MAX_GRID_FACTOR * t.size))
    grid = t[0] + np.arange(int(np.floor(span / step)) + 1) * step
    return grid, np.array([np.interp(grid, t, row) for row in y]), True


def uniform_step(t) -> float:
    """Mean sample interval of a record [s] (``(t[-1] - t[0]) / (n - 1)``).

    Parameters
    ----------
    t : array_like
        Sample times, strictly increasing [s].

    Returns
    -------
    float
        Mean interval [s].
    """
    t = np.asarray(t, dtype=float).ravel()
    if t.size < 3:
        raise ValueError(f"a record needs at least 3 samples, got {t.size}")
    step = (t[-1] - t[0]) / (t.size - 1)
    if not np.isfinite(step) or step <= 0:
        raise ValueError(f"time must be increasing, got a span of {t[-1] - t[0]!r} s")
    return float(step)


@dataclass(frozen=True)
class PeriodEstimate:
    """Fundamental period found in a record.

    Attributes
    ----------
    period : float
        Fundamental period [s].
    freq : float
        Fundamental frequency 1/period [Hz].
    n_periods : float
        Number of periods the record spans (not an integer in general) [-].
    correlation : float
        Normalised autocorrelation at the chosen lag, 1 for a perfectly
        repeating signal [-].
    multiple : int
        Multiple of the period at which the estimate was refined [-].
    """

    period: float
    freq: float
    n_periods: float
    correlation: float
    multiple: int


def _block_mean(y: np.ndarray, factor: int) -> np.ndarray:
    """Means of consecutive blocks of ``factor`` samples (a trailing partial block is dropped); no copy for 1."""
    if factor == 1:
        return y
    n = (y.size // factor) * factor
    return y[:n].reshape(-1, factor).mean(axis=1)


def _autocorrelation_sums(z: np.ndarray) -> np.ndarray:
    """s[m] = sum over i < N - m of z[i] z[i+m], for m in [0, N), by FFT (zero-padded: no wrap-around)."""
    n = z.size
    nfft = 1 << int(np.ceil(np.log2(2 * n)))
    spec = np.fft.rfft(z, nfft)
    return np.fft.irfft(spec.real**2 + spec.imag**2, nfft)[:n]


def _parabolic_peak(r: np.ndarray, i: int) -> tuple[float, float]:
    """Vertex (position, value) of the parabola through r[i-1], r[i], r[i+1]."""
    if i <= 0 or i >= r.size - 1:
        return float(i), float(r[i])
    a, b, c = r[i - 1], r[i], r[i + 1]
    den = a - 2 * b + c
    if den >= 0:
        return float(i), float(b)
    delta = 0.5 * (a - c) / den
    return i + delta, float(b - 0.25 * (a - c) * delta)


def _coarse_lag(sums: np.ndarray) -> tuple[float, float]:
    """Lag [samples of the record it was computed on] of the fundamental, and its correlation.

    ``sums`` are the autocorrelation sums of a record with its mean removed; the
    unbiased estimate divides each by its overlap and is normalised to r[0] = 1.
    """
    n = sums.size
    r = sums / np.arange(n, 0, -1)
    r = r / r[0]
    # only lags with at least a third of the record overlapping are trusted
    usable = r[: max(3, (2 * n) // 3)]
    neg = np.flatnonzero(usable < 0)
    if neg.size == 0:
        raise ValueError("no repeating pattern found: the signal never decorrelates (less than one period?)")
    start = int(neg[0])
    seg = usable[start:]
    inner = np.flatnonzero((seg[1:-1] >= seg[:-2]) & (seg[1:-1] > seg[2:])) + 1
    if inner.size == 0:
        raise ValueError("no repeating pattern found: the record holds less than about 1.5 periods")
    peaks = seg[inner]
    best = peaks.max()
    if best < 0.3:
        raise ValueError(
            f"no repeating pattern found: the best period match correlates only {best:.2f} "
            "(signal not periodic, or mostly noise)"
        )
    chosen = int(inner[np.argmax(peaks >= PEAK_SHARE * best)]) + start
    return _parabolic_peak(usable, chosen)


@dataclass(frozen=True)
class _Coarse:
    """A record (mean removed) at some decimation, its autocorrelation sums and its coarse lag."""

    z: np.ndarray
    sums: np.ndarray
    factor: int
    lag: float
    correlation: float


def _coarse(z: np.ndarray, factor: int) -> _Coarse:
    zc = z - z.mean()
    if not np.any(zc):
        raise ValueError("no repeating pattern found: the block means of the record are constant")
    sums = _autocorrelation_sums(zc)
    lag, corr = _coarse_lag(sums)
    return _Coarse(zc, sums, factor, lag, corr)


class _PrefixSums:
    """Running sums of z, z^2 and z[i] z[i+1] of a record, for the mismatch at any lag in O(1)."""

    def __init__(self, z: np.ndarray, sums: np.ndarray):
        self.z = z
        self.sums = sums
        self.c1 = np.concatenate(([0.0], np.cumsum(z)))
        self.c2 = np.concatenate(([0.0], np.cumsum(z * z)))
        self.cp = np.concatenate(([0.0], np.cumsum(z[:-1] * z[1:])))

    def quadratic(self, k: np.ndarray):
        """Coefficients (var u, cov(u, v), var v) for lags k + f, 0 <= f <= 1 (k integer array)."""
        z, n = self.z, self.z.size
        c1, c2, cp, s = self.c1, self.c2, self.cp, self.sums
        m = n - k - 1  # overlap: i = 0 .. m-1, A = z[i+k], B = z[i+k+1], C = z[i]
        sa, sb, sc = c1[n - 1] - c1[k], c1[n] - c1[k + 1], c1[m]
        saa, sbb, scc = c2[n - 1] - c2[k], c2[n] - c2[k + 1], c2[m]
        sac = s[k] - z[n - 1 - k] * z[n - 1]
        sab = cp[n - 1] - cp[k]
        sbc = s[k + 1]
        su, sv = sa - sc, sb - sa  # u = A - C (difference), v = B - A (step between samples)
        suu = saa - 2.0 * sac + scc
        svv = sbb - 2.0 * sab + saa
        suv = sab - saa - sbc + sac
        return suu / m - (su / m) ** 2, suv / m - su * sv / m**2, svv / m - (sv / m) ** 2


def _direct_quadratic(z: np.ndarray, k: int):
    """(var u, cov(u, v), var v) of :meth:`_PrefixSums.quadratic` summed directly (no running sums)."""
    n = z.size
    u = z[k:n - 1] - z[: n - 1 - k]
    v = z[k + 1:] - z[k:n - 1]
    mu, mv = u.mean(), v.mean()
    u -= mu
    v -= mv
    return float(np.dot(u, u)) / u.size, float(np.dot(u, v)) / u.size, float(np.dot(v, v)) / u.size


def _minimise(var_u, cov, var_v, noise_var: float, f_lo, f_hi):
    """Minimum over f in [f_lo, f_hi] of the mismatch var(u + f v) - ((1-f)^2 + f^2) noise_var."""
    a0 = np.asarray(var_u - noise_var, dtype=float)
    a1 = np.asarray(cov + noise_var, dtype=float)
    a2 = np.asarray(var_v - 2.0 * noise_var, dtype=float)
    convex = a2 > 0
    vertex = np.clip(-a1 / np.where(convex, a2, 1.0), f_lo, f_hi)
    cands = np.stack([np.broadcast_to(f_lo, a0.shape), np.broadcast_to(f_hi, a0.shape),
                      np.where(convex, vertex, f_lo)])
    costs = a0 + 2.0 * a1 * cands + a2 * cands**2
    best = np.argmin(costs, axis=0)
    pick = np.take_along_axis(costs, best[None], 0)[0], np.take_along_axis(cands, best[None], 0)[0]
    return pick


def _refine(coarse: _Coarse, noise_var: float) -> tuple[float, int]:
    """Lag of one period [samples of coarse.z] refined over growing multiples, and the last multiple."""
    z = coarse.z
    n = z.size
    lag = coarse.lag
    ps = _PrefixSums(z, coarse.sums)
    uncertainty = 1.0  # of one period, in samples of z, before refinement
    m, best = 1, None
    while True:
        half = min(3.0 * uncertainty * m + 1.0, 0.3 * lag)
        centre = m * lag
        # the coarse peak of a record holding few periods can sit further off than one
        # sample: while the minimum lands on the edge of the window, follow it
        for _ in range(MAX_WINDOW_SHIFTS):
            lo = max(1.0, centre - half)
            hi = min(n - 2.0, centre + half)
            if hi <= lo:
                break
            k = np.arange(int(lo), int(hi) + 1)
            f_lo = np.clip(lo - k, 0.0, 1.0)
            f_hi = np.clip(hi - k, 0.0, 1.0)
            costs, fs = _minimise(*ps.quadratic(k), noise_var, f_lo, f_hi)
            j = int(np.argmin(costs))
            best = (int(k[j]), float(f_lo[j]), float(f_hi[j]), m)
            found = k[j] + fs[j]
            lag = found / m
            uncertainty = 1.0 / m
            at_edge = (found <= lo + 1e-9 and lo > 1.0) or (found >= hi - 1e-9 and hi < n - 2.0)
            if not at_edge or abs(found / m - coarse.lag) > 0.3 * coarse.lag:
                break
            centre = found
        # the largest multiple that still leaves one period of overlap, with the lag known so far
        m_next = min(4 * m, max(1, int(np.floor((n - 1) / lag)) - 1))
        if m_next <= m:
            break
        m = m_next
    if best is None:
        return lag, 1
    # the chosen interval once more from direct sums, free of the rounding of the running sums
    k_best, f_lo, f_hi, m = best
    _, f_best = _minimise(*_direct_quadratic(z, k_best), noise_var, f_lo, f_hi)
    return (k_best + float(f_best)) / m, m


def _lag_correlation(y: np.ndarray, lag: float) -> float:
    """1 - var(y(t + lag) - y(t)) / (var y(t + lag) + var y(t)) over the whole overlap (lag in samples)."""
    k = int(np.floor(lag))
    frac = lag - k
    shifted = (1 - frac) * y[k:-1] + frac * y[k + 1:]
    base = y[: shifted.size]
    return 1.0 - float(np.var(shifted - base)) / (float(np.var(shifted)) + float(np.var(base)))


def _keeps_signal(y: np.ndarray, z: np.ndarray, factor: int, noise_var: float) -> bool:
    """True when the block means keep at least half the variance of the signal (white noise excluded).

    The variance lost by averaging blocks is the mean variance within a block
    (law of total variance), measured on up to RETENTION_BLOCKS blocks spread
    over the record by a golden-ratio sequence.
    """
    nb = z.size
    idx = (np.arange(min(nb, RETENTION_BLOCKS)) * _GOLDEN % 1.0 * nb).astype(np.intp)
    rows = y[: nb * factor].reshape(nb, factor)[idx]
    within = float(np.mean(rows.var(axis=1)))
    kept = float(np.var(z)) - noise_var / factor
    lost = within - noise_var * (1.0 - 1.0 / factor)
    return kept >= lost


def _check_finite(y: np.ndarray, z: np.ndarray, factor: int) -> None:
    ok = bool(np.isfinite(z).all()) and bool(np.isfinite(y[z.size * factor:]).all())
    if ok:
        return
    bad = ~np.isfinite(y)
    if bad.any():
        i = int(np.argmax(bad))
        raise ValueError(f"signal has a non-finite value at index {i}: {y[i]!r}")
    raise ValueError(f"signal values too large to average: largest magnitude {float(np.max(np.abs(y))):.6g}")


def _choose_coarse(y: np.ndarray, z: np.ndarray, factor: int, noise_var: float) -> _Coarse:
    """Coarse estimate on the block means, or on a finer leading part when the blocks blur the period."""
    try:
        whole = _coarse(z, factor)
        error = None
    except ValueError as exc:
        whole, error = None, exc
        if factor == 1 or np.ptp(y) == 0:
            if not np.any(z - z.mean()):
                raise ValueError("signal is constant: no period to detect") from None
            raise
    if factor == 1:
        return whole
    keeps = _keeps_signal(y, z, factor, noise_var)
    if whole is not None and keeps and whole.lag >= MIN_BLOCKS_PER_PERIOD:
        return whole
    # the period is short against a block, or the block means lost most of the signal (a period
    # under about two blocks aliases): the leading part at a finer decimation, down to every sample
    d = 1
    if whole is not None and keeps:
        d = max(1, int(whole.lag * factor // (2 * MIN_BLOCKS_PER_PERIOD)))
    seg = y[: min(y.size, COARSE_MAX_SAMPLES * d)]
    try:
        lead = _coarse(_block_mean(seg, d), d)
    except ValueError:
        if whole is None:
            raise error from None
        return whole
    if whole is None or 1.5 * whole.lag * factor <= seg.size:
        return lead  # the leading part saw the whole-record lag too and preferred this one
    # the whole-record lag is too long for the leading part to judge: the shorter lag wins only
    # if the full-resolution record repeats nearly as well there (the same 90 % rule)
    if _lag_correlation(y, lead.lag * d) >= PEAK_SHARE * _lag_correlation(y, whole.lag * factor):
        return lead
    return whole


#: Segments the least-squares finish cuts the record into (at most).
PHASE_SEGMENTS = 64
#: Harmonics the least-squares finish looks at, and the share of the strongest one a harmonic needs.
PHASE_HARMONICS = 8
PHASE_MIN_SHARE = 0.05
#: The least-squares finish runs on the block means of the coarse step when a period spans this many blocks.
PHASE_MIN_BLOCKS = 64
#: Columns of the segment matrix read at a time by the least-squares finish.
PHASE_COLUMNS = 1 << 12


def _segment_amplitudes(y: np.ndarray, starts: np.ndarray, length: int, w: float, harmonics) -> np.ndarray:
    """c[s, j] = sum_k (y[a_s + k] - mean_s) exp(-i h_j w k), k < length: every harmonic in one pass.

    The segments are read a block of ``PHASE_COLUMNS`` columns at a time (a
    cache-sized copy of that block of every segment) against a small basis of
    cos and sin of all the harmonics and a column of ones (for the segment
    means); exp(-i h w k) comes from powers of exp(-i w k), one complex
    exponential per column.
    """
    hs = np.asarray(list(harmonics), dtype=np.intp)
    nh = hs.size
    top = int(hs.max())
    windows = sliding_window_view(y, length)
    acc = np.zeros((starts.size, 2 * nh + 1))
    basis_sum = np.zeros(nh, dtype=complex)
    basis = np.empty((min(length, PHASE_COLUMNS), 2 * nh + 1))
    basis[:, -1] = 1.0
    for k0 in range(0, length, PHASE_COLUMNS):
        k1 = min(length, k0 + PHASE_COLUMNS)
        b = basis[: k1 - k0]
        e1 = np.exp(-1j * w * np.arange(k0, k1, dtype=float))
        e = e1.copy()
        j = 0
        for h in range(1, top + 1):
            if h > 1:
                e *= e1
            if j < nh and hs[j] == h:
                b[:, j] = e.real
                b[:, nh + j] = e.imag
                basis_sum[j] += e.sum()
                j += 1
        acc += windows[starts, k0:k1] @ b
    means = acc[:, -1] / length
    return acc[:, :nh] + 1j * acc[:, nh:2 * nh] - means[:, None] * basis_sum[None, :]


def _phase_refine(y: np.ndarray, p: float, limit: float = 1.0) -> float:
    """Period [samples] refined by a straight-line fit to the phase of the harmonics over the record.

    ``p`` is the period found by the lag search. The record is cut into M
    segments of q periods each, of L = round(q p) samples; segment s starts at
    sample :math:`a_s = \\mathrm{round}(s q p)`, so that every segment starts at
    the same point of the waveform to within half a sample. For harmonic h the
    amplitude per segment is
    :math:`c_{s} = \\sum_{k<L} y_{a_s+k} e^{-2\\pi i h (a_s+k)/p}` (all harmonics in
    one pass over the record, :func:`_segment_amplitudes`); a period off by a
    fraction :math:`\\epsilon` turns the phase of :math:`c_s` by
    :math:`-2\\pi h \\epsilon a_s / p`. A least-squares line through the
    unwrapped phases against :math:`a_s` gives, per harmonic, the frequency
    correction; the corrections are combined with weights :math:`h^2 |c_h|^2`.
    Because the segments start in step with the period, what leaks into
    :math:`c_s` from the other harmonics (a segment is not exactly whole
    periods) is the same in every segment and does not tilt the line. Two
    passes; the estimate is kept when the correction stays within ``limit``
    samples per period (one sample of the full record: more than the lag search
    can be off), otherwise ``p`` is returned.
    """
    n = y.size
    n_periods = int(np.floor(n / p))
    if n_periods < 2:
        return p
    segments = min(PHASE_SEGMENTS, n_periods)
    q = n_periods // segments
    harmonics = list(range(1, PHASE_HARMONICS + 1))
    for _ in range(2):
        starts = np.round(np.arange(segments) * (q * p)).astype(np.intp)
        length = min(round(q * p), n - int(starts[-1]))
        if length < 4:
            return p
        w = 2.0 * np.pi / p
        amps = _segment_amplitudes(y, starts, length, w, harmonics)
        x = starts.astype(float)
        slopes, weights, used = [], [], []
        for j, h in enumerate(harmonics):
            # phase of each segment relative to one common time origin
            c = amps[:, j] * np.exp(-1j * w * h * x)
            power = float(np.mean(np.abs(c) ** 2))
            if power <= 0:
                continue
            phi = np.unwrap(np.angle(c))
            slope = float(np.polyfit(x, phi, 1)[0]) if segments > 1 else 0.0
            slopes.append(slope / (2.0 * np.pi * h))  # cycles of the fundamental per sample
            weights.append(h * h * power)
            used.append(h)
        if not weights:
            return p
        weights = np.asarray(weights)
        keep = weights >= PHASE_MIN_SHARE * weights.max()
        harmonics = [h for h, k in zip(used, keep) if k]  # the second pass reads only these
        drift = float(np.sum(np.asarray(slopes)[keep] * weights[keep]) / np.sum(weights[keep]))
        # the frequency in cycles per sample is 1/p + drift
        p_new = 1.0 / (1.0 / p + drift)
        if not np.isfinite(p_new) or abs(p_new - p) > limit:
            return p  # more than the lag search can be off: the phases did not follow one tone
        p = p_new
    return p


def detect_period(t, y, *, noise: float = 0.0) -> PeriodEstimate:
    """Fundamental period of an evenly sampled record, to a fraction of a sample.

    Parameters
    ----------
    t : array_like
        Sample times, evenly spaced [s].
    y : array_like
        The signal (flux, current or voltage) [any unit]; its mean does not matter.
    noise : float
        White-noise standard deviation of the samples [unit of y] (for example
        :func:`workbench.waveforms.estimate_noise`); it steers the search only,
        the final least-squares step needs no noise figure. Default 0.

    Returns
    -------
    PeriodEstimate

    Raises
    ------
    ValueError
        If the record is not evenly sampled, holds less than about 1.5 periods,
        has a non-finite value, or shows no repeating pattern.

    Notes
    -----
    A record longer than ``COARSE_MAX_SAMPLES`` (2^17) samples is first reduced
    to the means of blocks of D = ceil(N / 2^17) samples; a lag of L blocks is
    exactly a lag of L D samples, so the period can be found on the block means
    as long as a period spans many blocks. That is checked: the block means must
    keep at least half of the signal's variance (the variance lost is the mean
    variance within a block, white noise discounted) and a period must span at
    least 32 blocks; otherwise the leading 2^17 D' samples are used at a finer
    D' (one sample when the blocks lost the signal, since a period under about
    two blocks aliases to a false long one). The full record is read about
    once (block means; more only for periods of under 64 blocks) and never copied.

    1. Coarse estimate: the unbiased autocorrelation
       :math:`r(m) = \\frac{1}{N-m}\\sum_i z_i z_{i+m}` by FFT [1]_; beyond its
       first zero crossing, the smallest lag whose local peak reaches 90 % of
       the highest peak (so a strong harmonic does not win, and a sub-multiple
       never does since the signal does not repeat there), refined by a
       parabola through the peak [2]_.
    2. Fine estimate, in stages m = 1, 4, 16, ... up to the largest whole
       multiple of the period that still leaves one period of overlap (each
       stage searches a window a few samples wide around m times the previous
       estimate, so it cannot jump to a neighbouring multiple): the lag
       :math:`k + f` (k whole, 0 <= f <= 1) minimising the mismatch

       .. math:: C(k + f) = \\mathrm{var}(u + f v) - ((1-f)^2 + f^2)\\,\\sigma_z^2,
                 \\quad u_i = z_{i+k} - z_i, \\quad v_i = z_{i+k+1} - z_{i+k}

       (z shifted by a fractional lag through linear interpolation; the
       variance ignores an offset or a drift; the smoothing of white noise of
       variance :math:`\\sigma_z^2` by the interpolation is subtracted). C is a
       parabola in f on each whole-sample interval, so its minimum is found in
       closed form from var u, cov(u, v) and var v; those come for every k from
       running sums of z, z^2 and :math:`z_i z_{i+1}` and the autocorrelation
       sums of step 1, and for the interval finally chosen from direct sums.
       T is the lag / m: the error of one lag is spread over m periods.
    3. Least-squares finish on the whole record (:func:`_phase_refine`): the
       record is cut into segments starting one or more periods apart, the
       complex amplitude of each strong harmonic h is taken per segment at the
       estimated frequency, and the frequency correction is the slope of a
       straight line fitted to the segment phases,
       :math:`\\delta f = \\frac{1}{2\\pi h}\\,d\\varphi/dt`
       (the least-squares frequency of a tone [4]_, combined over harmonics with
       weights :math:`h^2 |c_h|^2`). When a period spans at least 64 of the
       block means of the coarse step, the fit runs on those (a block of under
       1/64 period keeps harmonic 8 to within 3 % and the phase progression
       exactly), otherwise on the record; either way one pass per refinement.
       Quantisation of the record, which the mismatch of step 2 would read as
       noise, averages out here: an 8-bit record of a sine reaches about 1e-7.

    References
    ----------
    .. [1] J. S. Bendat, A. G. Piersol, *Random Data*, 4th ed., Wiley, 2010, sec. 11.4.
    .. [2] J. O. Smith, *Spectral Audio Signal Processing*, W3K, 2011.
    .. [3] A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*,
       3rd ed., Pearson, 2010, sec. 4.6 (averaging before downsampling, aliasing).
    .. [4] D. C. Rife, R. R. Boorstyn, "Single-tone parameter estimation from
       discrete-time observations", IEEE Trans. Inf. Theory 20(5), 1974.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if t.size != y.size:
        raise ValueError(f"t and y must have the same length, got {t.size} and {y.size}")
    step = uniform_step(t)
    n = y.size
    factor = max(1, int(np.ceil(n / COARSE_MAX_SAMPLES)))
    z = _block_mean(y, factor)
    _check_finite(y, z, factor)
    noise = float(noise)
    if not np.isfinite(noise) or noise < 0:
        raise ValueError(f"noise must be finite and not negative, got {noise!r}")
    noise_var = noise**2
    coarse = _choose_coarse(y, z, factor, noise_var)
    lag, m = _refine(coarse, noise_var / coarse.factor)
    p = lag * coarse.factor  # [samples]
    if factor > 1 and p >= PHASE_MIN_BLOCKS * factor:
        # the block means of the whole record carry the harmonics that are fitted
        # (a block of at most 1/64 period attenuates harmonic 8 by under 3 %, and
        # leaves the phase progression from one segment to the next as it is)
        p = _phase_refine(z, p / factor, limit=1.0 / factor) * factor
    else:
        p = _phase_refine(y, p)
    period = p * step
    return PeriodEstimate(period=period, freq=1.0 / period, n_periods=(n * step) / period,
                          correlation=float(coarse.correlation), multiple=m)


@dataclass(frozen=True)
class FoldedPeriod:
    """Whole periods of a record averaged into one.

    Attributes
    ----------
    phase : ndarray
        Times within the period, ``k * period / samples`` [s].
    mean : ndarray
        Average over the whole periods, one row per channel, shape (channels, samples).
    spread : ndarray
        Period-to-period spread of each channel: RMS over periods and samples of
        (period - average), divided by the peak-to-peak of the average [-].
    n_periods : int
        Number of whole periods averaged [-].
    t_start : float
        Time of the first sample of the first period in the record [s].
    """

    phase: np.ndarray
    mean: np.ndarray
    spread: np.ndarray
    n_periods: int
    t_start: float


def _shifted_row_sums(y: np.ndarray, starts: np.ndarray, weights: np.ndarray, width: int):
    """S = sum_j y[a_j : a_j + width] and E = sum_j e_j y[a_j : a_j + width] (rows inside y)."""
    total_s = np.zeros(width)
    total_e = np.zeros(width)
    if width >= LONG_ROW:  # long rows: one in-place pass per row, nothing copied
        tmp = np.empty(width)
        for a, e in zip(starts.tolist(), weights.tolist()):
            row = y[a:a + width]
            total_s += row
            np.multiply(row, e, out=tmp)
            total_e += tmp
        return total_s, total_e
    if starts.size == 0:  # no row lies wholly inside y (a record barely longer than the fold)
        return total_s, total_e
    rows = sliding_window_view(y, width)
    per = max(1, CHUNK // width)
    for s in range(0, starts.size, per):
        block = rows[starts[s:s + per]]  # a cache-sized copy of `per` rows
        total_s += block.sum(axis=0)
        total_e += weights[s:s + per] @ block
    return total_s, total_e


def _fold_even(y: np.ndarray, p: float, n_periods: int, samples: int):
    """Mean and spread of whole periods of an evenly sampled row; p = period in samples."""
    n = y.size
    x = np.arange(n_periods) * p  # period starts [samples]
    a = np.floor(x).astype(np.intp)
    e = x - a
    q = np.arange(samples) * (p / samples)  # output phases [samples]
    qi = np.floor(q).astype(np.intp)
    qf = q - qi
    width = int(qi[-1]) + 3
    inside = a + width <= n
    total_s, total_e = _shifted_row_sums(y, a[inside], e[inside], width)
    if not inside.all():  # the last period(s): the row runs past the record end, held at the last sample
        idx = a[~inside][:, None] + np.arange(width)
        block = np.take(y, idx, mode="clip")
        total_s += block.sum(axis=0)
        total_e += e[~inside] @ block
    # the average at whole-sample phases m (each period read at j p + m), then at the output phases
    at_samples = (total_s[:-1] - total_e[:-1] + total_e[1:]) / n_periods
    mean = at_samples[qi] + qf * (at_samples[qi + 1] - at_samples[qi])
    if n_periods == 1:
        return mean, 0.0
    # spread: each recorded sample against the average at its own phase (whole-sample phases m
    # of period j lie at m - e_j); for long records an even subset of the periods
    width = min(int(np.floor(p)), at_samples.size)
    used = np.flatnonzero(a + width <= n)
    if used.size * width > SPREAD_POINTS:
        used = used[np.unique(np.round(np.linspace(0, used.size - 1, max(2, SPREAD_POINTS // width))).astype(np.intp))]
    if width < 2 or used.size == 0:
        return mean, 0.0
    rows = sliding_window_view(y, width)[a[used]]
    lead, here = at_samples[: width - 1], at_samples[1:width]
    res = rows[:, 1:] - here
    res -= e[used, None] * (lead - here)
    return mean, float(np.sqrt(np.mean(res * res)))


def fold_periods(t, channels, period: float, *, samples: int | None = None,
                 even: bool | None = None) -> FoldedPeriod:
    """Average the whole periods of one or more channels onto one period.

    Parameters
    ----------
    t : array_like
        Sample times, increasing, normally evenly spaced [s].
    channels : array_like
        Signals, shape (samples,) or (channels, samples) [any unit].
    period : float
        Fundamental period [s].
    samples : int, optional
        Samples per averaged period; default the record's own resolution
        ``round(period / step)``.
    even : bool, optional
        True when ``t`` is known to lie within half a step of an even grid (as
        :func:`uniform_grid` returns it): the check, one pass over ``t``, is
        skipped. By default the stamps are checked.

    Returns
    -------
    FoldedPeriod

    Raises
    ------
    ValueError
        If the record holds less than one whole period.

    Notes
    -----
    Period j (of the :math:`J = \\lfloor (\\mathrm{span} + \\min(\\Delta t, T/n)) / T \\rfloor` whole
    periods, a period counting as whole when the record reaches its last output phase) starts at :math:`t_0 + jT`; the average is
    :math:`\\bar y_k = \\frac{1}{J}\\sum_j y_{jk}` with :math:`y_{jk}` the record
    at :math:`t_0 + jT + kT/n`, and the spread
    :math:`\\sqrt{\\langle (y_{jk} - \\bar y_k)^2\\rangle} / \\mathrm{pp}(\\bar y)`.
    Averaging J periods lowers uncorrelated noise by :math:`\\sqrt{J}`.

    On an even grid (stamps within half a step of it, as :func:`uniform_grid`
    accepts) the average is formed without reading the periods one point at a
    time: with p = T / step samples a period and period j starting at sample
    :math:`a_j + e_j` (:math:`a_j` whole, :math:`0 \\le e_j < 1`), the periods
    read at whole-sample phases m by linear interpolation sum to
    :math:`S_m - E_m + E_{m+1}` with :math:`S_m = \\sum_j y_{a_j+m}` and
    :math:`E_m = \\sum_j e_j\\,y_{a_j+m}` (sums of shifted rows, a single pass over
    the record); that average is then interpolated linearly at the phases
    :math:`k p / n` (a second linear interpolation: at a record's own
    resolution, corners are rounded over about one more sample than by reading
    each period at the output phases). The spread is taken over the recorded
    samples themselves, each against the average at its own phase
    :math:`m - e_j` (no interpolation of the noisy record, so every sample
    carries its full noise variance whatever its alignment); when that exceeds
    2^18 samples, over an even subset of the periods. Uneven records
    are read period by period by interpolation at the exact times.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.atleast_2d(np.asarray(channels, dtype=float))
    if t.size < 2:
        raise ValueError(f"a record needs at least 2 samples, got {t.size}")
    if y.shape[1] != t.size:
        raise ValueError(f"channels must have {t.size} samples each, got shape {y.shape}")
    period = float(period)
    if not np.isfinite(period) or period <= 0:
        raise ValueError(f"period must be finite and positive, got {period!r}")
    span = t[-1] - t[0]
    step = span / (t.size - 1)
    if samples is None:
        samples = round(period / step)
    samples = max(int(samples), 16)
    # the last period is whole when the record reaches its last output phase, T / samples
    # (or one sample step, if coarser) before the next period starts
    n_periods = int(np.floor((span + min(step, period / samples)) / period + 1e-9))
    if n_periods < 1:
        raise ValueError(f"the record spans {span:.6g} s, less than one period of {period:.6g} s")
    phase = np.arange(samples) * (period / samples)
    if even is None:
        even = bool(np.isfinite(step) and step > 0 and _grid_deviation(t, step) <= 0.5 * step)
    means, spreads = [], []
    for row in y:
        if even:
            avg, rms = _fold_even(row, period / step, n_periods, samples)
        else:
            times = (t[0] + phase[None, :] + period * np.arange(n_periods)[:, None]).ravel()
            rows = np.interp(times, t, row).reshape(n_periods, samples)
            avg = rows.mean(axis=0)
            rms = float(np.sqrt(np.mean((rows - avg) ** 2))) if n_periods > 1 else 0.0
        pp = float(np.ptp(avg))
        means.append(avg)
        spreads.append(rms / pp if pp > 0 else 0.0)
    return FoldedPeriod(phase=phase, mean=np.array(means), spread=np.array(spreads),
                        n_periods=n_periods, t_start=float(t[0]))


@dataclass(frozen=True)
class Repetition:
    """How a record repeats over multiples of its detected period.

    Attributes
    ----------
    multiple : int
        The multiple k of the period over which the signal differs most from
        one period to the next (1 when no multiple was testable) [-].
    change : float
        Largest difference between the k periods of the fold over k T and their
        average, relative to the average's peak-to-peak [-].
    allowance : float
        The part of ``change`` that noise alone could explain (4 standard
        deviations of a difference of averages), same scale [-].
    periods : int
        Whole periods of k T in the record [-].
    """

    multiple: int
    change: float
    allowance: float
    periods: int


def _phase_bins(y: np.ndarray, p: float, bins: int, periods: int) -> np.ndarray:
    """Means of y over ``bins`` equal phase intervals of each of the first ``periods`` periods of p samples.

    Interval r of period j holds the samples from round(j p + r p / bins) up to
    the next edge (half a sample of rounding at each edge); one pass over that
    part of the record (``np.add.reduceat``), shape (periods, bins).
    """
    edges = np.floor(np.arange(periods * bins + 1) * (p / bins) + 0.5).astype(np.intp)
    sums = np.add.reduceat(y[: edges[-1]], edges[:-1])
    return (sums / np.diff(edges)).reshape(periods, bins)


def repetition(t, y, period: float, *, samples: int | None = None) -> Repetition:
    """Check whether a record repeats only every 2 or 3 detected periods (a subharmonic).

    Parameters
    ----------
    t : array_like
        Sample times, evenly spaced [s].
    y : array_like
        The signal whose period was detected (flux, for example) [any unit].
    period : float
        Detected period T [s].
    samples : int, optional
        Points per period T of the folds (default the record's resolution; at
        most ``REPETITION_BINS``, 1024, on a period of 2048 samples or more).

    Returns
    -------
    Repetition
        For the multiple k in (2, 3) with the largest change, among those of
        which the record holds at least one whole period.

    Notes
    -----
    The record is folded over k T; the fold is cut into its k periods
    :math:`y_j` and compared with their average :math:`\\bar y`:
    :math:`c_k = \\max_{j,\\varphi} |y_j - \\bar y| / \\mathrm{pp}(\\bar y)`. A
    subharmonic of relative amplitude a changes the fold over T by up to a
    (10 % of the flux at half the frequency: 5 % of the swing is lost).
    Noise allows :math:`4\\,s\\sqrt{2/J_k}` with s the fold's period-to-period
    spread and :math:`J_k` the whole periods of k T.

    A subharmonic is slow, so a period of at least 2 R samples (R =
    ``REPETITION_BINS``) is read as R phase bins: the mean of the samples in
    each R-th of every period (edges rounded to the nearest sample; one pass,
    no interpolation, so a steep edge falls into the same bins in every period
    and cannot fake a difference between them), and the folds are means of
    those rows. Shorter periods are folded by :func:`fold_periods` at the given
    resolution. Either way at most ``REPETITION_MAX_POINTS`` (2^20) bins or
    samples are read, the leading part of a longer record (still at least 512
    periods), so the check costs a bounded time and memory on a huge record.
    Bin means average the noise as well, so change and allowance stay on one
    footing.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if t.size != y.size:
        raise ValueError(f"t and y must have the same length, got {t.size} and {y.size}")
    step = uniform_step(t)
    period = float(period)
    if not np.isfinite(period) or period <= 0:
        raise ValueError(f"period must be finite and positive, got {period!r}")
    p = period / step  # [samples]
    samples = max(16, round(p) if samples is None else int(samples))
    best = Repetition(1, 0.0, 0.0, 0)
    if p >= 2 * REPETITION_BINS:
        bins = min(samples, REPETITION_BINS)
        whole = int((y.size - 0.5) // p)
        periods = min(whole, REPETITION_MAX_POINTS // bins)
        if periods < 2:
            return best
        rows = _phase_bins(y, p, bins, periods)
        for k in SUBHARMONIC_MULTIPLES:
            jk = periods // k
            if jk < 1:
                continue
            folds = rows[: jk * k].reshape(jk, k * bins)
            mean = folds.mean(axis=0)
            parts = mean.reshape(k, bins)
            avg = parts.mean(axis=0)
            pp = float(np.ptp(avg))
            if pp <= 0:
                continue
            change = float(np.max(np.abs(parts - avg))) / pp
            rms = float(np.sqrt(np.mean((folds - mean) ** 2))) if jk > 1 else 0.0
            allowance = 4.0 * rms / pp * np.sqrt(2.0 / jk)
            if change - allowance > best.change - best.allowance:
                best = Repetition(k, change, allowance, jk)
        return best
    used = min(y.size, REPETITION_MAX_POINTS)
    t, y = t[:used], y[:used]
    for k in SUBHARMONIC_MULTIPLES:
        if (t[-1] - t[0]) + step < k * period:
            continue
        fold = fold_periods(t, y, k * period, samples=k * samples)
        parts = fold.mean[0].reshape(k, samples)
        avg = parts.mean(axis=0)
        pp = float(np.ptp(avg))
        if pp <= 0:
            continue
        change = float(np.max(np.abs(parts - avg))) / pp
        allowance = 4.0 * float(fold.spread[0]) * float(np.ptp(fold.mean[0])) / pp * np.sqrt(2.0 / fold.n_periods)
        if change - allowance > best.change - best.allowance:
            best = Repetition(k, change, allowance, fold.n_periods)
    return best


@dataclass(frozen=True)
class DenoisedPeriod:
    """One period after the noise left by averaging has been removed.

    Attributes
    ----------
    values : ndarray
        Denoised samples of the period (same grid as the input) [unit of input].
    noise : float
        Noise standard deviation estimated on the input [unit of input].
    harmonics_kept : int
        Highest harmonic kept by the low-pass [-].
    filtered : bool
        False when the noise was too small to matter and the input was kept.
    """

    values: np.ndarray
    noise: float
    harmonics_kept: int
    filtered: bool


def denoise_period(y, *, noise: float, slope_tolerance: float = 0.02) -> DenoisedPeriod:
    """Zero-phase spectral low-pass of one period, cut where the harmonics meet the noise floor.

    Parameters
    ----------
    y : array_like
        One period on an even grid, periodic [any unit].
    noise : float
        White-noise standard deviation of the samples [unit of y] (for example
        :func:`workbench.waveforms.estimate_noise` of ``y``).
    slope_tolerance : float
        If the noise on the sample-to-sample slope is below this fraction of the
        RMS slope, the period is returned unchanged [-].

    Returns
    -------
    DenoisedPeriod

    Notes
    -----
    With :math:`c_k` the FFT of the n samples divided by n, white noise of
    standard deviation :math:`\\sigma` gives :math:`E|c_k|^2 = \\sigma^2/n`. The
    cut K is the larger of

    * the highest harmonic with :math:`|c_k| > 4\\sigma/\\sqrt{n}`, where the
      spectrum reaches the noise floor, and
    * the highest harmonic for which the noise left on the sample-to-sample
      slope, :math:`\\sum_{k \\le K} (2\\sigma^2/n)\\,4\\sin^2(\\pi k/n)`, stays
      below :math:`(0.1)^2` times the slope power of the signal (a slope noise
      of 10 % RMS biases :math:`\\langle|dB/dt|^{\\alpha}\\rangle` by about
      :math:`\\alpha(\\alpha-1)/2 \\cdot 1\\,\\%`, 0.3 % for alpha = 1.5),

    so that corners of piecewise-linear flux are rounded no more than the noise
    requires. Harmonics up to K are kept, then a raised-cosine roll-off reaches
    zero at 1.25 K + 1 to keep the ringing (Gibbs) of a hard cut small. The
    filter is zero-phase and exactly periodic. It is applied only when noise
    would matter for a derivative: the slope noise :math:`\\sqrt{2}\\sigma`
    per sample compared with the RMS slope per sample.

    References
    ----------
    .. [1] A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*,
       3rd ed., Pearson, 2010, sec. 8.6 (DFT of periodic sequences) and
       sec. 7.5 (window tapers).
    """
    y = np.asarray(y, dtype=float).ravel()
    n = y.size
    sigma = float(noise)
    if not np.isfinite(sigma) or sigma < 0:
        raise ValueError(f"noise must be finite and not negative, got {noise!r}")
    slope = np.diff(np.append(y, y[0]))
    rms_slope = float(np.sqrt(np.mean(slope**2)))
    if sigma <= 0 or rms_slope <= 0 or np.sqrt(2.0) * sigma < slope_tolerance * rms_slope:
        return DenoisedPeriod(values=y.copy(), noise=sigma, harmonics_kept=n // 2, filtered=False)
    c = np.fft.rfft(y) / n
    k = np.arange(c.size)
    floor = HARMONIC_SNR * sigma / np.sqrt(n)
    above = np.flatnonzero(np.abs(c[1:]) > floor) + 1
    k_snr = int(above.max()) if above.size else 1
    # slope (first difference) power per harmonic: signal from the bins above the floor,
    # noise 2 sigma^2/n per harmonic, both times |2 sin(pi k / n)|^2
    gain = 4.0 * np.sin(np.pi * k / n) ** 2
    signal_slope2 = float(np.sum(2.0 * np.abs(c[above]) ** 2 * gain[above]))
    noise_slope2 = np.cumsum(2.0 * sigma**2 / n * gain)
    allowed = np.flatnonzero(noise_slope2 <= SLOPE_NOISE_SHARE**2 * signal_slope2)
    k_slope = int(allowed.max()) if allowed.size else 1
    k_cut = max(k_snr, k_slope, 1)
    # weight 1 up to the cut, raised-cosine roll-off to zero at 1.25 K + 1 (limits ringing)
    k_end = np.ceil(1.25 * k_cut) + 1.0
    x = np.clip((k - k_cut) / (k_end - k_cut), 0.0, 1.0)
    w = 0.5 * (1.0 + np.cos(np.pi * x))
    values = np.fft.irfft(c * w * n, n)
    return DenoisedPeriod(values=values, noise=sigma, harmonics_kept=k_cut, filtered=True)
