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
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize_scalar

from workbench.waveforms import estimate_noise

__all__ = [
    "PeriodEstimate",
    "FoldedPeriod",
    "DenoisedPeriod",
    "uniform_grid",
    "uniform_step",
    "detect_period",
    "fold_periods",
    "denoise_period",
]

#: An autocorrelation peak counts as "the fundamental" when it reaches this share of the highest one.
PEAK_SHARE = 0.9
#: Longest record used for the coarse (FFT) period estimate, in samples; longer ones are block-averaged.
COARSE_MAX_SAMPLES = 1 << 18
#: Harmonics are kept while their amplitude exceeds this many noise standard deviations of one bin.
HARMONIC_SNR = 4.0
#: Noise allowed on the slope after the low-pass, as a fraction of the RMS slope of the signal.
SLOPE_NOISE_SHARE = 0.1


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
    :math:`t_0 + i\\,\\Delta t` by rounding; when every deviation is under half
    an interval, the samples are kept and the ideal grid is used. Otherwise the
    signals are linearly interpolated onto a grid with the median interval.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.atleast_2d(np.asarray(channels, dtype=float))
    if t.size < 3:
        raise ValueError(f"a record needs at least 3 samples, got {t.size}")
    if y.shape[1] != t.size:
        raise ValueError(f"channels must have {t.size} samples each, got shape {y.shape}")
    steps = np.diff(t)
    if not (np.isfinite(t).all() and (steps > 0).all()):
        i = int(np.argmax(~(steps > 0))) + 1
        raise ValueError(f"time must be finite and strictly increasing; problem at index {i}: {t[i]!r}")
    step = (t[-1] - t[0]) / (t.size - 1)
    ideal = t[0] + np.arange(t.size) * step
    if np.max(np.abs(t - ideal)) <= 0.5 * step:
        return ideal, y, False
    step = float(np.median(steps))
    grid = t[0] + np.arange(int(np.floor((t[-1] - t[0]) / step)) + 1) * step
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
    n = (y.size // factor) * factor
    return y[:n].reshape(-1, factor).mean(axis=1)


def _unbiased_autocorrelation(y: np.ndarray) -> np.ndarray:
    """r[m] = mean over the overlap of y[i] y[i+m], normalised so r[0] = 1, by FFT."""
    n = y.size
    nfft = 1 << int(np.ceil(np.log2(2 * n)))
    spec = np.fft.rfft(y, nfft)
    r = np.fft.irfft(spec * np.conj(spec), nfft)[:n]
    r /= np.arange(n, 0, -1)
    return r / r[0]


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


def _coarse_lag(y: np.ndarray) -> tuple[float, float]:
    """Lag [samples] of the fundamental from the unbiased autocorrelation, and its correlation."""
    r = _unbiased_autocorrelation(y)
    # only lags with at least a third of the record overlapping are trusted
    usable = r[: max(3, (2 * y.size) // 3)]
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
    lag, value = _parabolic_peak(usable, chosen)
    return lag, value


def _mismatch(y: np.ndarray, lag: float, noise_var: float = 0.0) -> float:
    """Variance of the difference between y and y shifted by a fractional lag [samples].

    The variance (not the mean square) ignores a constant difference, so a slow
    drift or an offset left by integration does not bias the lag. Linear
    interpolation at a fractional lag f averages the white noise of two samples,
    lowering its variance to ((1-f)^2 + f^2) sigma^2, which would pull the
    minimum towards half-sample lags; that term is subtracted.
    """
    k = int(np.floor(lag))
    frac = lag - k
    shifted = (1 - frac) * y[k:-1] + frac * y[k + 1:]
    base = y[: shifted.size]
    return float(np.var(shifted - base)) - ((1 - frac) ** 2 + frac**2) * noise_var


def detect_period(t, y) -> PeriodEstimate:
    """Fundamental period of an evenly sampled record, to a fraction of a sample.

    Parameters
    ----------
    t : array_like
        Sample times, evenly spaced [s].
    y : array_like
        The signal (flux, current or voltage) [any unit]; its mean is removed.

    Returns
    -------
    PeriodEstimate

    Raises
    ------
    ValueError
        If the record is not evenly sampled, holds less than about 1.5 periods,
        or shows no repeating pattern.

    Notes
    -----
    1. Coarse estimate: the unbiased autocorrelation
       :math:`r(m) = \\frac{1}{N-m}\\sum_i y_i y_{i+m}` by FFT [1]_; beyond its
       first zero crossing, the smallest lag whose local peak reaches 90 % of
       the highest peak (so a strong harmonic does not win, and a sub-multiple
       never does since the signal does not repeat there), refined by a
       parabola through the peak [2]_.
    2. Fine estimate, in stages m = 1, 4, 16, ... up to the largest whole
       multiple of the period that still leaves one period of overlap (each
       stage searches a window a few samples wide around m times the previous
       estimate, so it cannot jump to a neighbouring multiple): the lag minimising the
       difference :math:`\\mathrm{var}(y(t + mT) - y(t))` (linear
       interpolation between samples, the interpolation's smoothing of white
       noise subtracted, bounded scalar search); T is that lag / m.
       The error of one lag is spread over m periods.

    References
    ----------
    .. [1] J. S. Bendat, A. G. Piersol, *Random Data*, 4th ed., Wiley, 2010, sec. 11.4.
    .. [2] J. O. Smith, *Spectral Audio Signal Processing*, W3K, 2011.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if t.size != y.size:
        raise ValueError(f"t and y must have the same length, got {t.size} and {y.size}")
    if not np.isfinite(y).all():
        i = int(np.argmax(~np.isfinite(y)))
        raise ValueError(f"signal has a non-finite value at index {i}: {y[i]!r}")
    step = uniform_step(t)
    y = y - y.mean()
    if not np.any(y):
        raise ValueError("signal is constant: no period to detect")
    factor = max(1, int(np.ceil(y.size / COARSE_MAX_SAMPLES)))
    yc = _block_mean(y, factor) if factor > 1 else y
    lag_c, corr = _coarse_lag(yc - yc.mean())
    lag = lag_c * factor
    n = y.size
    m_max = max(1, int(np.floor((n - 1) / lag)) - 1)
    noise_var = estimate_noise(y) ** 2
    uncertainty = float(factor)  # of one period, in samples, before refinement
    m = 1
    while True:
        half = min(3.0 * uncertainty * m + 1.0, 0.3 * lag)
        lo = max(1.0, m * lag - half)
        hi = min(n - 2.0, m * lag + half)
        if hi > lo:
            grid = np.linspace(lo, hi, 21)
            costs = np.array([_mismatch(y, g, noise_var) for g in grid])
            j = int(np.argmin(costs))
            a, b = grid[max(j - 1, 0)], grid[min(j + 1, grid.size - 1)]
            res = minimize_scalar(lambda g: _mismatch(y, g, noise_var), bounds=(a, b), method="bounded",
                                  options={"xatol": 1e-4})
            lag = float(res.x) / m
            uncertainty = 1.0 / m
        if m == m_max:
            break
        m = min(4 * m, m_max)
    period = lag * step
    return PeriodEstimate(period=period, freq=1.0 / period, n_periods=(n * step) / period,
                          correlation=float(corr), multiple=m)


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


def fold_periods(t, channels, period: float, *, samples: int | None = None) -> FoldedPeriod:
    """Average the whole periods of one or more channels onto one period.

    Parameters
    ----------
    t : array_like
        Sample times, increasing [s].
    channels : array_like
        Signals, shape (samples,) or (channels, samples) [any unit].
    period : float
        Fundamental period [s].
    samples : int, optional
        Samples per averaged period; default the record's own resolution
        ``round(period / step)``.

    Returns
    -------
    FoldedPeriod

    Raises
    ------
    ValueError
        If the record holds less than one whole period.

    Notes
    -----
    Period j is read at ``t_0 + j T + k T / n`` by linear interpolation, for the
    ``floor(span / T)`` whole periods the record contains; the average is
    :math:`\\bar y_k = \\frac{1}{J}\\sum_j y_{jk}` and the spread
    :math:`\\sqrt{\\langle (y_{jk} - \\bar y_k)^2\\rangle} / \\mathrm{pp}(\\bar y)`.
    Averaging J periods lowers uncorrelated noise by :math:`\\sqrt{J}`.
    """
    t = np.asarray(t, dtype=float).ravel()
    y = np.atleast_2d(np.asarray(channels, dtype=float))
    if y.shape[1] != t.size:
        raise ValueError(f"channels must have {t.size} samples each, got shape {y.shape}")
    period = float(period)
    if not np.isfinite(period) or period <= 0:
        raise ValueError(f"period must be finite and positive, got {period!r}")
    step = (t[-1] - t[0]) / (t.size - 1)
    n_periods = int(np.floor((t[-1] - t[0]) / period + 1e-9))
    if n_periods < 1:
        raise ValueError(
            f"the record spans {t[-1] - t[0]:.6g} s, less than one period of {period:.6g} s"
        )
    if samples is None:
        samples = int(round(period / step))
    samples = max(int(samples), 16)
    phase = np.arange(samples) * (period / samples)
    times = (t[0] + phase[None, :] + period * np.arange(n_periods)[:, None]).ravel()
    means, spreads = [], []
    for row in y:
        rows = np.interp(times, t, row).reshape(n_periods, samples)
        avg = rows.mean(axis=0)
        pp = float(np.ptp(avg))
        rms = float(np.sqrt(np.mean((rows - avg) ** 2))) if n_periods > 1 else 0.0
        means.append(avg)
        spreads.append(rms / pp if pp > 0 else 0.0)
    return FoldedPeriod(phase=phase, mean=np.array(means), spread=np.array(spreads),
                        n_periods=n_periods, t_start=float(t[0]))


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


def denoise_period(y, *, noise: float | None = None, slope_tolerance: float = 0.02) -> DenoisedPeriod:
    """Zero-phase spectral low-pass of one period, cut where the harmonics meet the noise floor.

    Parameters
    ----------
    y : array_like
        One period on an even grid, periodic [any unit].
    noise : float, optional
        White-noise standard deviation of the samples [unit of y]; default
        :func:`workbench.waveforms.estimate_noise`.
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
    sigma = estimate_noise(y) if noise is None else float(noise)
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
