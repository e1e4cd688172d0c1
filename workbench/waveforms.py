"""One period of flux density B(t): the type, its constructors and derived quantities.

A :class:`FluxWaveform` holds samples of B [T] at times t [s] within one period
``0 <= t < period``. Between samples B is taken as linear, and the waveform wraps
around from the last sample back to the first one period later. That reading is
exact for the piecewise-linear flux of two- and three-level converters (triangle,
trapezoid, PWM), and converges quadratically for smooth shapes.

References
----------
.. [1] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics: Converters,
   Applications and Design*, 3rd ed., Wiley, 2003, ch. 8 (sine-triangle PWM).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "FluxWaveform",
    "Spectrum",
    "sine",
    "triangle",
    "trapezoid",
    "pwm",
    "from_samples",
    "from_voltage",
    "estimate_noise",
    "code_flicker",
    "default_threshold",
    "quantisation_step",
    "reversal_indices",
]


def _as_positive(value, name: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, got {value!r}") from None
    if not np.isfinite(x) or x <= 0:
        raise ValueError(f"{name} must be a finite positive number, got {x!r}")
    return x


def _as_fraction(value, name: str, *, allow_one: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, got {value!r}") from None
    upper_ok = x <= 1 if allow_one else x < 1
    if not (np.isfinite(x) and x > 0 and upper_ok):
        bound = "(0, 1]" if allow_one else "(0, 1)"
        raise ValueError(f"{name} must lie in {bound}, got {x!r}")
    return x


@dataclass(frozen=True)
class Spectrum:
    """Harmonic content of a periodic flux waveform.

    Attributes
    ----------
    freq : ndarray
        Harmonic frequencies n*f, n = 0, 1, ... [Hz].
    amplitude : ndarray
        Peak amplitude of each harmonic [T] (the n = 0 entry is the mean flux).
    phase : ndarray
        Phase of each harmonic as a cosine term [rad].
    """

    freq: np.ndarray
    amplitude: np.ndarray
    phase: np.ndarray


@dataclass(frozen=True, eq=False)
class FluxWaveform:
    """One period of flux density, piecewise linear between samples and periodic.

    Parameters
    ----------
    t : array_like
        Sample times within the period, strictly increasing, ``0 <= t < period`` [s].
        ``t[0]`` is shifted to 0 on construction.
    b : array_like
        Flux density at those times [T].
    period : float
        Length of the period [s]; must exceed ``t[-1] - t[0]``.

    Notes
    -----
    The arrays are copied and made read-only, so a waveform never changes after
    construction. Use the module's constructors rather than this class directly.
    """

    t: np.ndarray
    b: np.ndarray
    period: float
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self):
        t = np.array(self.t, dtype=float).ravel()
        b = np.array(self.b, dtype=float).ravel()
        period = _as_positive(self.period, "period")
        if t.size != b.size:
            raise ValueError(f"t and b must have the same length, got {t.size} and {b.size}")
        if t.size < 2:
            raise ValueError(f"a waveform needs at least 2 samples, got {t.size}")
        bad = ~np.isfinite(t)
        if bad.any():
            raise ValueError(f"t has a non-finite value at index {int(np.argmax(bad))}: {float(t[bad][0])!r}")
        bad = ~np.isfinite(b)
        if bad.any():
            raise ValueError(f"b has a non-finite value at index {int(np.argmax(bad))}: {float(b[bad][0])!r}")
        steps = np.diff(t)
        if (steps <= 0).any():
            i = int(np.argmax(steps <= 0))
            raise ValueError(
                f"t must be strictly increasing; t[{i + 1}] = {float(t[i + 1])!r} follows t[{i}] = {float(t[i])!r}"
            )
        t = t - t[0]
        if t[-1] >= period * (1 - 1e-12):
            raise ValueError(
                f"period ({period!r} s) must be longer than the sampled span ({float(t[-1])!r} s)"
            )
        t.setflags(write=False)
        b.setflags(write=False)
        object.__setattr__(self, "t", t)
        object.__setattr__(self, "b", b)
        object.__setattr__(self, "period", period)

    # ---- basic quantities -------------------------------------------------
    @property
    def freq(self) -> float:
        """Fundamental frequency [Hz]."""
        return 1.0 / self.period

    @property
    def n_samples(self) -> int:
        return int(self.t.size)

    @property
    def flux_pp(self) -> float:
        """Peak-to-peak flux density [T]."""
        return float(self.b.max() - self.b.min())

    @property
    def b_peak(self) -> float:
        """Peak flux density, half the peak-to-peak value [T]."""
        return 0.5 * self.flux_pp

    @property
    def b_dc(self) -> float:
        """Time-average flux density over the period [T] (exact for piecewise-linear B)."""
        b_next = np.roll(self.b, -1)
        return float(np.sum(0.5 * (self.b + b_next) * self.segment_durations) / self.period)

    @property
    def segment_durations(self) -> np.ndarray:
        """Duration of each linear segment, including the wrap-around one [s]."""
        if "dt" not in self._cache:
            dt = np.empty_like(self.t)
            dt[:-1] = np.diff(self.t)
            dt[-1] = self.period - self.t[-1]
            dt.setflags(write=False)
            self._cache["dt"] = dt
        return self._cache["dt"]

    @property
    def segment_increments(self) -> np.ndarray:
        """Flux change over each segment, including the wrap-around one [T]."""
        if "db" not in self._cache:
            db = np.empty_like(self.b)
            db[:-1] = np.diff(self.b)
            db[-1] = self.b[0] - self.b[-1]
            db.setflags(write=False)
            self._cache["db"] = db
        return self._cache["db"]

    def dbdt(self) -> np.ndarray:
        """Slope dB/dt of each linear segment [T/s]; segment i runs from t[i] to t[i+1]."""
        return self.segment_increments / self.segment_durations

    def mean_abs_dbdt_power(self, exponent: float) -> float:
        """Time average of |dB/dt|**exponent over the period [(T/s)**exponent].

        Parameters
        ----------
        exponent : float
            Power of the slope [-].

        Notes
        -----
        Exact for piecewise-linear flux: each segment contributes
        |dB_i|**exponent * dt_i**(1 - exponent).
        """
        exponent = float(exponent)
        if not np.isfinite(exponent):
            raise ValueError(f"exponent must be finite, got {exponent!r}")
        db = np.abs(self.segment_increments)
        dt = self.segment_durations
        return float(np.sum(db**exponent * dt ** (1.0 - exponent)) / self.period)

    def is_uniform(self, rtol: float = 1e-9) -> bool:
        """True when the samples, with the wrap-around step, are evenly spaced.

        Parameters
        ----------
        rtol : float, optional
            Allowed spread of the steps relative to their mean [-].
        """
        dt = self.segment_durations
        return bool(np.ptp(dt) <= rtol * dt.mean())

    # ---- transforms --------------------------------------------------------
    def resample(self, n: int) -> "FluxWaveform":
        """Return the same waveform on ``n`` evenly spaced samples (linear interpolation).

        Parameters
        ----------
        n : int
            Number of samples per period [-], at least 2.
        """
        n = int(n)
        if n < 2:
            raise ValueError(f"n must be at least 2, got {n}")
        t_new = np.arange(n) * (self.period / n)
        tp = np.append(self.t, self.period)
        bp = np.append(self.b, self.b[0])
        return FluxWaveform(t_new, np.interp(t_new, tp, bp), self.period)

    def shifted(self, delay: float) -> "FluxWaveform":
        """Return B(t - delay), rotated within the period.

        Parameters
        ----------
        delay : float
            Time shift [s]; any finite value (taken modulo the period).

        Notes
        -----
        The samples move with the waveform; where no sample lands on t = 0 one
        is added there (linear interpolation, exact for piecewise-linear flux).
        """
        delay = float(delay)
        if not np.isfinite(delay):
            raise ValueError(f"delay must be finite, got {delay!r}")
        tau = np.mod(self.t + delay, self.period)
        tau[tau >= self.period * (1 - 1e-12)] = 0.0
        order = np.argsort(tau, kind="stable")
        tau = tau[order]
        b = self.b[order]
        if tau[0] > 0:
            phase0 = np.mod(-delay, self.period)
            b0 = np.interp(phase0, np.append(self.t, self.period), np.append(self.b, self.b[0]))
            tau = np.concatenate(([0.0], tau))
            b = np.concatenate(([b0], b))
        return FluxWaveform(tau, b, self.period)

    def scaled(self, factor: float) -> "FluxWaveform":
        """Return the waveform with B multiplied by ``factor`` (negative flips polarity).

        Parameters
        ----------
        factor : float
            Scale of the flux density [-].
        """
        return FluxWaveform(self.t, self.b * float(factor), self.period)

    def with_period(self, period: float) -> "FluxWaveform":
        """Return the same shape played at another period (time axis stretched).

        Parameters
        ----------
        period : float
            New period [s].
        """
        period = _as_positive(period, "period")
        return FluxWaveform(self.t * (period / self.period), self.b, period)

    # ---- spectrum and reversals -------------------------------------------
    def spectrum(self, n_harmonics: int | None = None, *, samples: int | None = None) -> Spectrum:
        """Harmonic spectrum from an FFT of the evenly resampled period.

        Parameters
        ----------
        n_harmonics : int, optional
            Number of harmonics to return (default: all the resampled grid resolves).
        samples : int, optional
            Resampling size; default is the waveform's own sample count, at least 256.

        Returns
        -------
        Spectrum
            ``amplitude[n]`` is the peak amplitude of the n-th harmonic [T].
        """
        if n_harmonics is not None and (int(n_harmonics) != n_harmonics or n_harmonics < 0):
            raise ValueError(f"n_harmonics must be a non-negative integer, got {n_harmonics!r}")
        if samples is not None and (int(samples) != samples or samples < 2):
            raise ValueError(f"samples must be an integer of at least 2, got {samples!r}")
        n = int(samples) if samples else max(256, self.n_samples)
        w = self if (self.is_uniform() and self.n_samples == n) else self.resample(n)
        c = np.fft.rfft(w.b) / n
        amp = np.abs(c) * 2.0
        amp[0] = np.abs(c[0])
        if n % 2 == 0:
            amp[-1] = np.abs(c[-1])
        phase = np.angle(c)
        k = np.arange(c.size)
        if n_harmonics is not None:
            m = int(n_harmonics) + 1
            k, amp, phase = k[:m], amp[:m], phase[:m]
        return Spectrum(freq=k * self.freq, amplitude=amp, phase=phase)

    def reversals(self, threshold: float | None = None) -> np.ndarray:
        """Indices of the flux reversal points (turning points) within the period.

        Parameters
        ----------
        threshold : float, optional
            Smallest flux swing counted as a reversal [T]; default from the data.

        Notes
        -----
        See :func:`reversal_indices`; the first index is that of the global maximum.
        """
        return reversal_indices(self.b, threshold=threshold)


# ---------------------------------------------------------------------------
# Reversal detection with a noise threshold
# ---------------------------------------------------------------------------
#: Largest number of differences :func:`estimate_noise` looks at; longer
#: records are sampled at an even stride (the median of 2**16 values is known to
#: about 0.5 %, plenty for a threshold of 12 sigma).
NOISE_SAMPLE_SIZE = 1 << 16

#: Fewer samples than this carry no statistical evidence of noise: every sample is
#: taken as an exact vertex of the flux (a waveform given by its corner points).
NOISE_MIN_SAMPLES = 32

#: Standard deviation of white noise per unit median absolute 2nd and 3rd difference.
_MAD2 = 0.6745 * np.sqrt(6.0)
_MAD3 = 0.6745 * np.sqrt(20.0)
#: Noise estimates below this many units of double rounding of max|b| are rounding.
_ROUNDING = 64.0 * np.finfo(float).eps


def _median(a: np.ndarray) -> float:
    """Median of a 1-D array, overwriting it (the mean of the two middle values for an even size)."""
    m = a.size
    half = m // 2
    if m % 2:
        return float(np.partition(a, half)[half])
    part = np.partition(a, (half - 1, half))
    return 0.5 * (float(part[half - 1]) + float(part[half]))


def _noise_stride(n: int, order: int) -> int:
    """Stride at which :func:`estimate_noise` reads differences of the given order."""
    return max(1, (n - order) // NOISE_SAMPLE_SIZE)


def estimate_noise(b) -> float:
    """Robust estimate of the white-noise standard deviation in a sampled signal [same unit as b].

    From the median absolute second differences, or the third differences where
    those give less than half of it: both ignore the corners of piecewise-linear
    flux (a corner touches two or three differences, a minority) and both read
    white noise alike, while smooth content (the curvature of a sine) enters the
    second differences as (w dt)**2 and the third only as (w dt)**3.

    Parameters
    ----------
    b : array_like
        Samples [any unit, e.g. T]. Records longer than ``NOISE_SAMPLE_SIZE``
        samples are read at an even stride.

    Returns
    -------
    float
        Noise standard deviation [same unit as ``b``]; 0 for fewer than
        ``NOISE_MIN_SAMPLES`` samples, where the samples are taken as exact
        vertices (nothing in so few samples tells noise from corners), 0 for
        noise-free piecewise-linear flux with more straight samples than corners,
        and 0 below 64 units of rounding of max|b| (floating-point rounding).

    Notes
    -----
    For white noise of standard deviation s the second difference has standard
    deviation sqrt(6) s and the third sqrt(20) s; the median absolute deviation
    of a normal variable is 0.6745 times its standard deviation:

    .. math:: s_2 = \\frac{\\mathrm{med}|\\Delta^2 b|}{0.6745\\sqrt 6}, \\quad
              s_3 = \\frac{\\mathrm{med}|\\Delta^3 b|}{0.6745\\sqrt{20}}, \\quad
              s = s_3 \\text{ if } s_3 < s_2/2 \\text{ else } s_2

    References
    ----------
    .. [1] F. R. Hampel, "The influence curve and its role in robust estimation",
       J. Am. Stat. Assoc. 69(346), 1974 (median absolute deviation).
    """
    b = np.asarray(b, dtype=float)
    if b.size < NOISE_MIN_SAMPLES:
        return 0.0
    s = _noise_stride(b.size, 2)
    d2 = b[2::s] - 2.0 * b[1:-1:s] + b[:-2:s]
    sigma2 = _median(np.abs(d2)) / _MAD2
    if sigma2 <= _ROUNDING * max(float(b.max()), -float(b.min())):
        return 0.0  # floating-point rounding of the samples, not noise
    if s == 1 and _noise_stride(b.size, 3) == 1:
        d3 = d2[1:] - d2[:-1]
    else:
        s = _noise_stride(b.size, 3)
        d3 = (b[3::s] - 2.0 * b[2:-1:s] + b[1:-2:s]) - (b[2:-1:s] - 2.0 * b[1:-2:s] + b[:-3:s])
    a3 = np.abs(d3, out=d3)
    # smooth content dominates the second differences where the third-difference estimate is below
    # half the second-difference one (more than half of |d3| below that level)
    if 2 * np.count_nonzero(a3 < 0.5 * sigma2 * _MAD3) > a3.size:
        return _median(a3) / _MAD3
    return sigma2


def code_flicker(b) -> int:
    """Number of one-sample excursions from a dwell: evidence of noise in quantised samples [-].

    Parameters
    ----------
    b : array_like
        Samples [any unit]. Records longer than ``NOISE_SAMPLE_SIZE`` samples are
        read at an even stride.

    Returns
    -------
    int
        Count of samples i with ``b[i-1] == b[i+1] != b[i]`` where the flux also
        dwells on ``b[i-1]`` just before or on ``b[i+1]`` just after.

    Notes
    -----
    Rounding to a recorder's codes is a monotone map, so a noise-free quantised
    record rises and falls only where the flux does; it dwells on a code and
    steps on. Leaving a code for one sample and coming straight back to it is
    what noise of less than a code does near a code boundary, and such
    flickers are invisible to the median-based noise estimate.
    """
    b = np.asarray(b, dtype=float)
    if b.size < NOISE_MIN_SAMPLES:
        return 0
    s = _noise_stride(b.size, 4)
    l2, l1, c, r1, r2 = (b[k : b.size - 4 + k : s] for k in range(5))
    hit = (l1 == r1) & (c != l1) & ((l2 == l1) | (r2 == r1))
    return int(np.count_nonzero(hit))


#: Reversals smaller than this many noise standard deviations are treated as noise.
NOISE_THRESHOLD_SIGMAS = 12.0
#: With evidence of noise, quantised samples flicker by up to this many steps.
QUANTISATION_THRESHOLD_STEPS = 2.5


def _threshold(b: np.ndarray, span: float) -> float:
    """:func:`default_threshold` with the peak-to-peak span given."""
    sigma = estimate_noise(b)
    h = max(NOISE_THRESHOLD_SIGMAS * sigma, 1e-12 * span)
    q = _quantisation_step(b, span)
    if q > 0 and (sigma > 0 or code_flicker(b) > 0):
        h = max(h, QUANTISATION_THRESHOLD_STEPS * q)
    return h


def default_threshold(b) -> float:
    """Reversal threshold derived from the evidence of noise in the data [T].

    Parameters
    ----------
    b : array_like
        One period of flux samples [T].

    Returns
    -------
    float
        Smallest flux swing counted as a reversal [T]: ``12 * estimate_noise(b)``
        and ``1e-12`` times the peak-to-peak flux; where the samples sit on a grid
        of step q (:func:`quantisation_step`) and show noise (a noise estimate
        above 0, or code flicker, :func:`code_flicker`), at least ``2.5 q``.

    Notes
    -----
    Twelve sigma keeps the chance that pure Gaussian noise on a 10-million-sample
    ramp fakes a reversal negligible (the largest of 1e7 normal samples is about
    5.3 sigma, so a noise-made swing rarely exceeds 11 sigma). A waveform with
    no evidence of noise (corner points, noise-free PWM on any grid, a clean
    quantised record) loses no reversal: equal steps alone are not taken as
    recorder codes, and rounding alone makes no reversal.

    References
    ----------
    .. [1] F. R. Hampel, "The influence curve and its role in robust estimation",
       J. Am. Stat. Assoc. 69(346), 1974 (median absolute deviation).
    """
    b = np.asarray(b, dtype=float)
    span = float(np.ptp(b)) if b.size else 0.0
    return _threshold(b, span)


def quantisation_step(b) -> float:
    """Step of the grid the samples sit on, or 0 when they are not visibly quantised [unit of b].

    Parameters
    ----------
    b : array_like
        Samples [any unit]. Records longer than ``NOISE_SAMPLE_SIZE`` samples are
        read at an even stride.

    Returns
    -------
    float
        The smallest non-zero sample-to-sample change q, when at least 95 % of the
        non-zero changes are whole multiples of it (within 1 %) and it is at
        least 1e-9 of the span; otherwise 0.

    Notes
    -----
    A recorder of B bits over a range R stores multiples of R / 2**B; where the
    signal moves by less than a few steps per sample its quantisation, not its
    noise, sets the smallest swing that carries meaning. Equal steps alone are
    no evidence of a recorder (a noise-free PWM flux has them too): the step
    matters to :func:`default_threshold` only with evidence of noise.
    """
    b = np.asarray(b, dtype=float)
    if b.size < 5:
        return 0.0
    return _quantisation_step(b, float(np.ptp(b)))


def _quantisation_step(b: np.ndarray, span: float) -> float:
    """:func:`quantisation_step` with the peak-to-peak span given."""
    if b.size < 5:
        return 0.0
    step = max(1, (b.size - 1) // NOISE_SAMPLE_SIZE)
    d = np.abs(b[1::step] - b[:-1:step])
    d = d[d > 0]
    if d.size < 10 or span == 0:
        return 0.0
    q = float(d.min())
    if q < 1e-9 * span:
        return 0.0
    ratio = d / q
    whole = np.abs(ratio - np.round(ratio)) <= 0.01
    return q if whole.mean() >= 0.95 else 0.0


#: Block length of the quiet-block reduction in :func:`reversal_indices`.
_BLOCK = 128
#: Below this many samples the reduction is not worth its overhead.
_REDUCE_MIN_SAMPLES = 1 << 15


def _block_extremes(b: np.ndarray):
    """Per-block argmax/argmin of the first ``n // _BLOCK * _BLOCK`` samples, and their values."""
    nb = b.size // _BLOCK
    blocks = b[: nb * _BLOCK].reshape(nb, _BLOCK)
    # max/min reductions, then the first position of each: ndarray.argmax(axis=1)
    # would copy a read-only array (a waveform's samples) as a whole
    vmax = blocks.max(axis=1)
    vmin = blocks.min(axis=1)
    amax = np.empty(nb, dtype=np.intp)
    amin = np.empty(nb, dtype=np.intp)
    step = 1 << 13  # rows per pass: the boolean scratch stays small
    for r0 in range(0, nb, step):
        r1 = min(r0 + step, nb)
        rows = blocks[r0:r1]
        amax[r0:r1] = (rows == vmax[r0:r1, None]).argmax(axis=1)
        amin[r0:r1] = (rows == vmin[r0:r1, None]).argmax(axis=1)
    return amax, amin, vmax, vmin


def _candidates(n: int, extremes, h: float):
    """Sorted indices of the samples that can be reversal points at threshold ``h``.

    Within a block of samples whose range is below ``h`` only the block's
    maximum and minimum can be reversal points: a maximum that survives lies
    between two surviving minima at least ``h`` lower, so no such minimum is in
    the block and the block lies inside the span whose maximum it is. Returns
    None when the reduction would keep most samples anyway.
    """
    m = _BLOCK
    amax, amin, vmax, vmin = extremes
    nb = amax.size
    quiet = (vmax - vmin) < h
    if h <= 0 or np.count_nonzero(quiet) < 0.75 * nb:
        return None
    q = np.flatnonzero(quiet)
    busy = np.flatnonzero(~quiet)
    parts = [
        q * m + np.minimum(amax[q], amin[q]),
        q * m + np.maximum(amax[q], amin[q]),
        (busy[:, None] * m + np.arange(m)).ravel(),
        np.arange(nb * m, n),
    ]
    cand = np.concatenate(parts)
    cand.sort()
    keep = np.empty(cand.size, dtype=bool)
    keep[0] = True
    np.not_equal(cand[1:], cand[:-1], out=keep[1:])  # a constant block gives one index twice
    return cand[keep]


def _turning_points(x: np.ndarray) -> np.ndarray:
    """Sorted indices where the periodic sequence ``x`` changes direction.

    The index returned for a reversal is the first sample of the first
    non-flat segment in the new direction (the end of a flat top or bottom).
    """
    n = x.size
    d = np.empty(n)
    np.subtract(x[1:], x[:-1], out=d[:-1])
    d[-1] = x[0] - x[-1]
    up = d > 0
    n_flat = n - np.count_nonzero(d)
    if n_flat == 0:
        change = np.empty(n, dtype=bool)
        np.not_equal(up[1:], up[:-1], out=change[1:])
        change[0] = up[0] != up[-1]
        return np.flatnonzero(change)
    if n_flat == n:
        return np.zeros(0, dtype=np.intp)
    nz = np.flatnonzero(d)
    s = up[nz]
    change = np.empty(nz.size, dtype=bool)
    np.not_equal(s[1:], s[:-1], out=change[1:])
    change[0] = s[0] != s[-1]
    return nz[change]


def _prune(levels: np.ndarray, idx: np.ndarray, h: float):
    """Remove inner reversal pairs whose swing is below ``h`` (levels closed on the maximum)."""
    while levels.size > 3:
        swing = np.abs(np.diff(levels))
        small = swing < h
        if not small.any():
            break
        left = np.concatenate(([np.inf], swing[:-1]))
        right = np.concatenate((swing[1:], [np.inf]))
        # pairs touching the closing maximum at either end are never removed
        cand = small & (swing <= left) & (swing < right)
        cand[0] = cand[-1] = False
        if not cand.any():
            # only ties among interior pairs remain: break them by position
            cand = small & (swing <= left) & (swing <= right)
            cand[0] = cand[-1] = False
            first = np.flatnonzero(cand)
            if first.size == 0:
                break
            cand = np.zeros_like(cand)
            cand[first[0]] = True
        drop = np.zeros(levels.size, dtype=bool)
        pos = np.flatnonzero(cand)
        drop[pos] = True
        drop[pos + 1] = True
        levels = levels[~drop]
        idx = idx[~drop]
    return levels, idx


def _reversals(b: np.ndarray, threshold: float | None):
    """Reversal indices (starting at the global maximum) and the threshold used."""
    n = b.size
    if threshold is not None:
        h = float(threshold)
        if not np.isfinite(h) or h < 0:
            raise ValueError(f"threshold must be a finite non-negative number, got {threshold!r}")
    if n < _REDUCE_MIN_SAMPLES:
        if threshold is None:
            h = default_threshold(b)
        cand = None
    else:
        extremes = _block_extremes(b)
        if threshold is None:
            # the span from the block extremes and the tail: no extra pass over b
            tail = b[extremes[0].size * _BLOCK :]
            hi = max(float(extremes[2].max()), float(tail.max(initial=-np.inf)))
            lo = min(float(extremes[3].min()), float(tail.min(initial=np.inf)))
            h = _threshold(b, hi - lo)
        cand = _candidates(n, extremes, h)
    if cand is None:
        x = b
        start = int(np.argmax(b))
        ext = _turning_points(b)
    else:
        x = b[cand]
        j = int(np.argmax(x))
        start = int(cand[j])
        ext = cand[_turning_points(x)] if x.size > 1 else np.zeros(0, dtype=np.intp)
    if ext.size == 0:  # constant: no reversal besides the maximum
        return np.array([start]), h
    # the first turning point at or after the maximum is the end of the (flat)
    # maximum; put the maximum itself there and make it the first reversal
    k = int(np.searchsorted(ext, start))
    k = 0 if k == ext.size else k
    ext = ext.copy()
    ext[k] = start
    ext = np.roll(ext, -k)
    pos = (ext - start) % n
    levels = np.append(b[ext], b[start])
    idx = np.append(pos, n)
    levels, idx = _prune(levels, idx, h)
    return (idx[:-1] + start) % n, h


def reversal_indices(b, threshold: float | None = None) -> np.ndarray:
    """Turning points of one period of flux, ignoring reversals smaller than ``threshold``.

    Parameters
    ----------
    b : array_like
        One period of samples [T], periodic (sample n-1 is followed by sample 0).
    threshold : float, optional
        Smallest flux swing that counts as a reversal [T]. Default: derived from the
        data by :func:`default_threshold` (12 noise standard deviations).

    Returns
    -------
    ndarray of int
        Sample indices of alternating maxima and minima, starting at the global
        maximum and going forward in time (wrapping around the end of the array).
        Consecutive reversals differ by at least ``threshold``.

    Notes
    -----
    The sequence of local extrema is pruned by repeatedly removing the adjacent
    pairs whose swing is both below the threshold and a local minimum of the
    swing sequence; such a pair always lies inside its neighbours' range, so
    removing it never discards a larger extremum (the same inner-pair rule that
    rainflow counting uses). Each pass is vectorised. Long records are first
    reduced block by block: in a block of 128 samples whose range is below the
    threshold only the block's maximum and minimum can be reversal points, so
    on noisy data the pruning sees a few per cent of the samples.

    References
    ----------
    .. [1] ASTM E1049-85 (2017), *Standard Practices for Cycle Counting in Fatigue
       Analysis*, sec. 5.4.4 (rainflow counting, inner-range removal).
    """
    b = np.asarray(b, dtype=float)
    if b.ndim != 1 or b.size < 2:
        raise ValueError(f"b must be a 1-D array of at least 2 samples, got shape {b.shape}")
    if not np.isfinite(b).all():
        i = int(np.argmax(~np.isfinite(b)))
        raise ValueError(f"b has a non-finite value at index {i}: {float(b[i])!r}")
    return _reversals(b, threshold)[0]


# ---------------------------------------------------------------------------
# Constructors
# ---------------------------------------------------------------------------
def sine(b_peak: float, freq: float, *, samples: int = 1024, b_dc: float = 0.0, phase: float = 0.0) -> FluxWaveform:
    """Sinusoidal flux ``B(t) = b_dc + b_peak * sin(2 pi freq t + phase)``.

    Parameters
    ----------
    b_peak : float
        Amplitude [T].
    freq : float
        Frequency [Hz].
    samples : int, optional
        Samples per period (default 1024; the piecewise-linear reading of a sine is
        accurate to about (pi/samples)**2).
    b_dc : float, optional
        Flux offset [T].
    phase : float, optional
        Phase [rad].
    """
    b_peak = _as_positive(b_peak, "b_peak")
    freq = _as_positive(freq, "freq")
    samples = int(samples)
    if samples < 8:
        raise ValueError(f"samples must be at least 8, got {samples}")
    period = 1.0 / freq
    t = np.arange(samples) * (period / samples)
    return FluxWaveform(t, b_dc + b_peak * np.sin(2 * np.pi * freq * t + phase), period)


def triangle(b_peak: float, freq: float, duty: float = 0.5, *, b_dc: float = 0.0) -> FluxWaveform:
    """Triangular flux of a two-level (square or PWM) winding voltage.

    The flux rises linearly from ``-b_peak`` to ``+b_peak`` during ``duty/freq`` and
    falls back during the rest of the period; ``duty = 0.5`` is the symmetric case.

    Parameters
    ----------
    b_peak : float
        Peak flux density, half the peak-to-peak swing [T].
    freq : float
        Switching frequency [Hz].
    duty : float
        Fraction of the period during which the flux rises, in (0, 1) [-].
    b_dc : float, optional
        Flux offset [T].
    """
    b_peak = _as_positive(b_peak, "b_peak")
    freq = _as_positive(freq, "freq")
    duty = _as_fraction(duty, "duty")
    period = 1.0 / freq
    return FluxWaveform([0.0, duty * period], [b_dc - b_peak, b_dc + b_peak], period)


def trapezoid(b_peak: float, freq: float, duty: float, *, b_dc: float = 0.0) -> FluxWaveform:
    """Trapezoidal flux of a three-level winding voltage (+V, 0, -V, 0).

    As in phase-shifted full bridges: the flux rises during ``duty/(2 freq)``,
    stays flat while the voltage is zero for ``(1 - duty)/(2 freq)``, falls
    during ``duty/(2 freq)`` and stays flat again.

    Parameters
    ----------
    b_peak : float
        Peak flux density [T].
    freq : float
        Frequency of the flux waveform [Hz].
    duty : float
        Fraction of the period with non-zero voltage, in (0, 1] [-]; 1 gives the
        symmetric triangle.
    b_dc : float, optional
        Flux offset [T].
    """
    b_peak = _as_positive(b_peak, "b_peak")
    freq = _as_positive(freq, "freq")
    duty = _as_fraction(duty, "duty", allow_one=True)
    period = 1.0 / freq
    if duty == 1.0:
        return triangle(b_peak, freq, 0.5, b_dc=b_dc)
    ramp = 0.5 * duty * period
    half = 0.5 * period
    t = [0.0, ramp, half, half + ramp]
    b = [b_dc - b_peak, b_dc + b_peak, b_dc + b_peak, b_dc - b_peak]
    return FluxWaveform(t, b, period)


def pwm_voltage_states(fundamental_freq, carrier_freq, modulation_index, *, levels=2, samples_per_carrier=64):
    """Switching state (-1, 0, +1) of a sine-triangle PWM bridge over one fundamental period.

    Parameters
    ----------
    fundamental_freq : float
        Output (fundamental) frequency [Hz].
    carrier_freq : float
        Carrier frequency [Hz], an integer multiple (at least 3) of the fundamental.
    modulation_index : float
        Peak of the reference over the carrier peak, in (0, 1] [-].
    levels : {2, 3}
        Two-level bipolar or three-level unipolar bridge [-].
    samples_per_carrier : int
        Grid points per carrier period [-], at least 8.

    Returns
    -------
    t : ndarray
        Sample times, at the middle of each grid step [s].
    state : ndarray
        +/-1 for a two-level half bridge (bipolar), -1/0/+1 for a three-level
        full bridge with unipolar modulation [-].

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics*, 3rd ed.,
       Wiley, 2003, sec. 8-3 (bipolar and unipolar sine-triangle PWM).
    """
    f1 = _as_positive(fundamental_freq, "fundamental_freq")
    fc = _as_positive(carrier_freq, "carrier_freq")
    m = _as_positive(modulation_index, "modulation_index")
    if m > 1:
        raise ValueError(f"modulation_index must lie in (0, 1] (no over-modulation), got {modulation_index!r}")
    ratio = fc / f1
    n_carrier = int(round(ratio))
    if n_carrier < 3 or abs(ratio - n_carrier) > 1e-6 * ratio:
        raise ValueError(
            "carrier_freq / fundamental_freq must be an integer of at least 3 so that one "
            f"fundamental period repeats, got {ratio!r}"
        )
    if levels not in (2, 3):
        raise ValueError(f"levels must be 2 or 3, got {levels!r}")
    spc = int(samples_per_carrier)
    if spc < 8:
        raise ValueError(f"samples_per_carrier must be at least 8, got {samples_per_carrier!r}")
    n = n_carrier * spc
    period = 1.0 / f1
    # sample at segment mid-points so no sample sits exactly on a comparator edge
    t = (np.arange(n) + 0.5) * (period / n)
    ref = m * np.sin(2 * np.pi * f1 * t)
    phase = np.mod(t * fc, 1.0)
    carrier = 1.0 - 4.0 * np.abs(phase - 0.5)  # triangle between -1 and +1
    leg_a = ref > carrier
    if levels == 2:
        state = np.where(leg_a, 1.0, -1.0)
    else:
        leg_b = -ref > carrier
        state = leg_a.astype(float) - leg_b.astype(float)
    return t, state


def pwm(
    b_peak: float,
    fundamental_freq: float,
    carrier_freq: float,
    modulation_index: float,
    *,
    levels: int = 2,
    samples_per_carrier: int = 64,
) -> FluxWaveform:
    """Flux behind a sine-triangle PWM voltage: a fundamental carrying carrier ripple.

    The winding voltage is the bridge output ``v = V_dc * s(t)`` with the switching
    state s from natural sine-triangle comparison; the flux is its integral,
    scaled so that the fundamental component of B has amplitude ``b_peak`` (to
    within the time resolution, see Notes).
    The result has many minor loops (one per carrier period), as in inverter
    output chokes and machine laminations fed by drives.

    Parameters
    ----------
    b_peak : float
        Amplitude of the fundamental flux component [T].
    fundamental_freq : float
        Output (fundamental) frequency [Hz].
    carrier_freq : float
        Carrier (switching) frequency [Hz]; an integer multiple of the fundamental.
    modulation_index : float
        Peak of the reference over the carrier peak, in (0, 1] [-].
    levels : {2, 3}
        Two-level bipolar or three-level unipolar bridge.
    samples_per_carrier : int
        Time resolution of the switching instants.

    Notes
    -----
    The average of s over a carrier period follows ``m sin(w1 t)``, so the
    fundamental flux amplitude is ``m V_dc / (w1 N A)``; V_dc/(N A) is chosen as
    ``b_peak w1 / m`` [1]_, so every ramp has the exact slope of the bridge
    voltage. Switching instants resolved on a grid of ``samples_per_carrier``
    points move the fundamental by up to about 0.5 % from ``b_peak``.

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics*, 3rd ed.,
       Wiley, 2003, sec. 8-3.
    """
    b_peak = _as_positive(b_peak, "b_peak")
    t, state = pwm_voltage_states(
        fundamental_freq, carrier_freq, modulation_index, levels=levels, samples_per_carrier=samples_per_carrier
    )
    f1 = float(fundamental_freq)
    period = 1.0 / f1
    dt = period / t.size
    volts_per_turn_area = b_peak * 2 * np.pi * f1 / float(modulation_index)
    # exact integral of the piecewise-constant voltage at the grid points
    b = np.concatenate(([0.0], np.cumsum(state[:-1]) * dt)) * volts_per_turn_area
    drift = (np.sum(state) * dt) * volts_per_turn_area  # flux gained over a period
    b = b - drift * (np.arange(t.size) / t.size)
    b = b - np.mean(b)
    return FluxWaveform(np.arange(t.size) * dt, b, period)


# ---------------------------------------------------------------------------
# Constructors from sampled records: the record handling (checks, whole-period
# folding, voltage integration) lives in workbench.capture; these build the type.
# ---------------------------------------------------------------------------
def from_samples(t, b, *, freq: float | None = None, samples: int | None = None) -> FluxWaveform:
    """Waveform from sampled flux covering one or more periods.

    Parameters
    ----------
    t : array_like
        Sample times, strictly increasing [s].
    b : array_like
        Flux density at those times [T].
    freq : float, optional
        Fundamental frequency [Hz]. If given, the whole periods contained in the
        record are averaged into one period (on ``samples`` evenly spaced points,
        default the record's own sample spacing; see
        :func:`workbench.capture.steady_state.fold_periods`). If omitted, the
        record is taken to be exactly one period with the last sample one step
        before the period repeats.
    samples : int, optional
        Samples per period of the averaged waveform (only with ``freq``).
    """
    from workbench.capture.steady_state import checked_record, fold_periods  # record handling, loaded on use

    t, b, steps = checked_record(t, b, "b", "from_samples", 2)
    if freq is None:
        period = (t[-1] - t[0]) + steps[-1]
        return FluxWaveform(t - t[0], b, period)
    period = 1.0 / _as_positive(freq, "freq")
    fold = fold_periods(t, b, period, samples=samples)
    return FluxWaveform(fold.phase, fold.mean[0], period)


def integrate_voltage(t, v, *, turns: float, area: float) -> np.ndarray:
    """Flux density from a winding voltage over a record, offset and drift removed [T].

    Parameters
    ----------
    t : array_like
        Sample times [s], strictly increasing.
    v : array_like
        Winding voltage [V].
    turns : float
        Number of turns of the winding the voltage was measured on [-].
    area : float
        Effective core cross-section [m^2].

    Returns
    -------
    ndarray
        Flux density at the sample times, centred on zero [T].

    Notes
    -----
    Faraday's law v = N A_e dB/dt, integrated by
    :func:`workbench.capture.flux.flux_density` (trapezoidal rule, mean voltage removed).
    """
    from workbench.capture.flux import flux_density  # record handling, loaded on use

    return flux_density(np.asarray(t, dtype=float), v, turns=turns, area=area)


def from_voltage(t, v, *, turns: float, area: float, freq: float | None = None, samples: int | None = None) -> FluxWaveform:
    """Waveform from a winding-voltage record (Faraday's law), offset and drift removed.

    Parameters
    ----------
    t : array_like
        Sample times [s].
    v : array_like
        Winding voltage [V].
    turns : float
        Turns of the winding [-].
    area : float
        Effective core cross-section [m^2].
    freq : float, optional
        Fundamental frequency [Hz]; with it, whole periods are cut from the record
        before integration and averaged into one. Without it the record is one period.
    samples : int, optional
        Samples per period of the result (only with ``freq``).

    References
    ----------
    .. [1] IEC 60404-6:2003, *Magnetic materials - Part 6: Methods of measurement
       of the magnetic properties of magnetic powder cores and soft ferrites*
       (flux from the induced voltage of a sense winding).
    """
    from workbench.capture.flux import flux_density
    from workbench.capture.steady_state import checked_record

    t, v, steps = checked_record(t, v, "v", "from_voltage", 3)
    turns = _as_positive(turns, "turns")
    area = _as_positive(area, "area")
    if freq is not None:
        period = 1.0 / _as_positive(freq, "freq")
        step = float(np.median(steps))
        n_periods = int(np.floor((t[-1] - t[0] + 0.5 * step) / period + 1e-9))
        if n_periods < 1:
            raise ValueError(f"the record ({t[-1] - t[0]:.6g} s) is shorter than one period ({period:.6g} s)")
        keep = t <= t[0] + n_periods * period + 0.5 * step
        t, v = t[keep], v[keep]
        return from_samples(t, flux_density(t, v, turns=turns, area=area), freq=freq, samples=samples)
    # one period: close it on the first sample one step later, so that the
    # integral runs over the whole period including the wrap-around step
    tc = np.append(t, t[-1] + steps[-1])
    b = flux_density(tc, np.append(v, v[0]), turns=turns, area=area)[:-1]
    return from_samples(t, b - np.mean(b))
