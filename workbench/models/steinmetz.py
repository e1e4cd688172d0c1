"""Steinmetz-family loss models: Steinmetz, iGSE with minor loops, i2GSE, temperature.

All functions return loss per unit volume [W/m^3] with the Steinmetz parameters in
SI form: ``P = k * f**alpha * B_peak**beta`` with f in Hz and B_peak in T.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from workbench.checks import finite_result, positive_array
from workbench.models.loops import LoopSet, decompose_loops, loop_abs_dbdt_integrals
from workbench.waveforms import FluxWaveform

__all__ = [
    "steinmetz",
    "igse_coefficient",
    "mean_abs_cos_power",
    "igse",
    "igse_loops",
    "IgseResult",
    "i2gse",
    "I2gseResult",
    "flat_intervals",
    "relaxation_factors",
    "steinmetz_temperature_factor",
]


def _check_steinmetz(k, alpha, beta):
    for name, value in (("k", k), ("alpha", alpha), ("beta", beta)):
        positive_array(value, name)


def steinmetz(freq, b_peak, k, alpha, beta):
    """Steinmetz equation for sinusoidal flux.

    Parameters
    ----------
    freq : array_like
        Frequency [Hz].
    b_peak : array_like
        Peak flux density [T].
    k : float
        Steinmetz coefficient [W/m^3 with f in Hz and B in T].
    alpha : float
        Frequency exponent [-].
    beta : float
        Flux exponent [-].

    Returns
    -------
    ndarray or float
        Loss per unit volume [W/m^3], broadcast over ``freq`` and ``b_peak``.

    Notes
    -----
    .. math:: P_v = k f^{\\alpha} \\hat B^{\\beta}

    References
    ----------
    .. [1] C. P. Steinmetz, "On the law of hysteresis", Trans. AIEE 9, 1892,
       pp. 3-64 (the power law in B); the frequency exponent is the common
       empirical extension used for ferrites.
    """
    f = positive_array(freq, "freq")
    b = np.asarray(b_peak, dtype=float)
    if not np.all(np.isfinite(b)) or np.any(b < 0):
        raise ValueError(f"b_peak must be finite and non-negative, got {b_peak!r}")
    _check_steinmetz(k, alpha, beta)
    with np.errstate(over="ignore", invalid="ignore"):
        out = k * f**alpha * b**beta
    finite_result(out, "Steinmetz loss", freq=freq, b_peak=b_peak, k=k)
    return float(out) if out.ndim == 0 else out


def mean_abs_cos_power(exponent):
    """Average of ``|cos(theta)|**exponent`` over a period, in closed form.

    Parameters
    ----------
    exponent : array_like
        Exponent a > -1 [-].

    Notes
    -----
    .. math:: \\frac{1}{2\\pi}\\int_0^{2\\pi}|\\cos\\theta|^a d\\theta
              = \\frac{\\Gamma((a+1)/2)}{\\sqrt{\\pi}\\,\\Gamma(a/2+1)}

    References
    ----------
    .. [1] F. W. J. Olver, D. W. Lozier, R. F. Boisvert, C. W. Clark (eds.), *NIST
       Handbook of Mathematical Functions*, Cambridge University Press, 2010,
       eq. 5.12.2 (beta function as an integral of powers of sine and cosine);
       online as https://dlmf.nist.gov/5.12
    """
    a = np.asarray(exponent, dtype=float)
    if not np.all(np.isfinite(a)) or np.any(a <= -1):
        raise ValueError(f"exponent must be finite and greater than -1, got {exponent!r}")
    # math.lgamma keeps scipy.special (about 0.3 s to import) off the import path
    lg = np.vectorize(math.lgamma, otypes=[float])
    out = np.exp(lg((a + 1) / 2) - lg(a / 2 + 1) - 0.5 * np.log(np.pi))
    return float(out) if out.ndim == 0 else out


def igse_coefficient(k, alpha, beta):
    """Coefficient k_i of the improved generalized Steinmetz equation.

    Parameters
    ----------
    k, alpha, beta : float
        Steinmetz parameters [W/m^3, Hz, T].

    Returns
    -------
    float
        k_i [W/m^3 / ((T/s)**alpha T**(beta-alpha))].

    Notes
    -----
    .. math:: k_i = \\frac{k}{(2\\pi)^{\\alpha-1}\\int_0^{2\\pi}|\\cos\\theta|^{\\alpha}
              2^{\\beta-\\alpha} d\\theta}

    The integral is evaluated in closed form with gamma functions
    (:func:`mean_abs_cos_power`).

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
       prediction of ferrite core loss with nonsinusoidal waveforms using only
       Steinmetz parameters", IEEE COMPEL 2002, eq. (8).
    """
    _check_steinmetz(k, alpha, beta)
    a = float(alpha)
    # mean of |cos|**a in closed form (see mean_abs_cos_power), scalar math for speed
    mean_cos = math.exp(math.lgamma((a + 1) / 2) - math.lgamma(a / 2 + 1) - 0.5 * math.log(math.pi))
    integral = 2 * math.pi * mean_cos
    return float(k / ((2 * math.pi) ** (a - 1) * integral * 2 ** (beta - a)))


@dataclass(frozen=True)
class IgseResult:
    """iGSE loss of one waveform with its loops.

    Attributes
    ----------
    total : float
        Loss per unit volume over the period [W/m^3].
    major : float
        Part from the major loop [W/m^3].
    minor : float
        Part from all minor loops [W/m^3].
    loop_flux_pp : ndarray
        Peak-to-peak flux of each loop, major first [T].
    loop_loss : ndarray
        Loss per unit volume of each loop, averaged over the period [W/m^3].
    threshold : float
        Reversal threshold used [T].
    """

    total: float
    major: float
    minor: float
    loop_flux_pp: np.ndarray
    loop_loss: np.ndarray
    threshold: float

    @property
    def minor_share(self) -> float:
        """Fraction of the total that comes from minor loops [-]."""
        return self.minor / self.total if self.total > 0 else 0.0


def igse_loops(waveform: FluxWaveform, k, alpha, beta, *, minor_loops: bool = True, threshold=None, loops: LoopSet | None = None) -> IgseResult:
    """iGSE with the minor-loop procedure, returning the loss of every loop.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    k, alpha, beta : float
        Steinmetz parameters [W/m^3, Hz, T].
    minor_loops : bool, optional
        Split the waveform into its major and minor loops (default) [-]. If False,
        the whole period is one loop weighted by its peak-to-peak flux.
    threshold : float, optional
        Smallest reversal counted [T]; default derived from the data.
    loops : LoopSet, optional
        A decomposition already computed for this waveform (flux levels [T]).

    Returns
    -------
    IgseResult

    Notes
    -----
    .. math:: P_v = \\frac{1}{T}\\sum_j \\int_{T_j} k_i \\left|\\frac{dB}{dt}\\right|^{\\alpha}
              (\\Delta B_j)^{\\beta-\\alpha} dt

    where loop j occupies the time set T_j and has peak-to-peak flux ΔB_j. With
    piecewise-linear flux the integral over each segment is exact.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, IEEE COMPEL 2002,
       eqs. (9)-(11) and sec. IV.
    """
    if not isinstance(waveform, FluxWaveform):
        raise ValueError(f"waveform must be a FluxWaveform, got {type(waveform).__name__}")
    ki = igse_coefficient(k, alpha, beta)
    if not minor_loops:
        pp = waveform.flux_pp
        if pp == 0:
            return IgseResult(0.0, 0.0, 0.0, np.array([0.0]), np.array([0.0]), 0.0)
        with np.errstate(over="ignore", invalid="ignore"):
            total = ki * pp ** (beta - alpha) * waveform.mean_abs_dbdt_power(alpha)
        finite_result(total, "iGSE loss", k=k, flux_pp=pp, period=waveform.period)
        return IgseResult(total, total, 0.0, np.array([pp]), np.array([total]), 0.0)
    if loops is None:
        loops = decompose_loops(waveform, threshold)
    if loops.flux_pp.size == 0:
        return IgseResult(0.0, 0.0, 0.0, loops.flux_pp, np.zeros(0), loops.threshold)
    integrals = loop_abs_dbdt_integrals(waveform, loops, alpha)
    with np.errstate(over="ignore", invalid="ignore"):
        per_loop = ki * loops.flux_pp ** (beta - alpha) * integrals / waveform.period
        total = float(per_loop.sum())
    finite_result(total, "iGSE loss", k=k, flux_pp=waveform.flux_pp, period=waveform.period)
    return IgseResult(total, float(per_loop[0]), float(per_loop[1:].sum()), loops.flux_pp, per_loop, loops.threshold)


def igse(waveform: FluxWaveform, k, alpha, beta, *, minor_loops: bool = True, threshold=None) -> float:
    """Improved generalized Steinmetz equation (iGSE) for an arbitrary flux waveform.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    k, alpha, beta : float
        Steinmetz parameters [W/m^3, Hz, T] from sinusoidal data.
    minor_loops : bool, optional
        Apply the minor-loop procedure (default True) [-].
    threshold : float, optional
        Smallest reversal counted as a loop [T]; default derived from the data.

    Returns
    -------
    float
        Loss per unit volume averaged over the period [W/m^3].

    Notes
    -----
    .. math:: P_v = \\frac{1}{T}\\int_0^T k_i \\left|\\frac{dB}{dt}\\right|^{\\alpha}
              (\\Delta B)^{\\beta-\\alpha} dt

    For a sine it reproduces the Steinmetz equation exactly; for a triangle of
    duty D it gives ``k_i (2 B_peak)**beta f**alpha (D**(1-alpha) + (1-D)**(1-alpha))``.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
       prediction of ferrite core loss with nonsinusoidal waveforms using only
       Steinmetz parameters", IEEE Workshop on Computers in Power Electronics
       (COMPEL), 2002, pp. 36-41.
    """
    return igse_loops(waveform, k, alpha, beta, minor_loops=minor_loops, threshold=threshold).total


def _run_medians(s: np.ndarray, w: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Weighted median of ``s[lo[r]:hi[r]]`` with weights ``w`` for each run r (runs are disjoint).

    Where the cumulative weight lands exactly on half the run's weight, the mean of the
    two middle values is returned (as :func:`numpy.median` does for equal weights).
    """
    size = hi - lo
    first = np.cumsum(size) - size
    last = first + size - 1
    lab = np.repeat(np.arange(lo.size), size)
    idx = np.arange(int(size.sum())) - np.repeat(first - lo, size)
    order = np.lexsort((s[idx], lab))
    sv = s[idx][order]
    wv = w[idx][order]
    cum = np.cumsum(wv)
    before = np.where(first > 0, cum[first - 1], 0.0)
    target = before + 0.5 * (cum[last] - before)
    lower = np.clip(np.searchsorted(cum, target, side="left"), first, last)
    upper = np.clip(np.searchsorted(cum, target, side="right"), first, last)
    return 0.5 * (sv[lower] + sv[upper])


def flat_intervals(waveform: FluxWaveform, rel_slope: float = 1e-3):
    """Intervals where the flux stays constant (zero winding voltage), with the ramps around them.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    rel_slope : float, optional
        A segment is flat when ``|dB/dt| <= rel_slope * max|dB/dt|`` [-].

    Returns
    -------
    duration, slope_before, slope_after : ndarray
        One entry per flat interval: its length [s], the slope dB/dt of the ramp
        that enters it and of the ramp that leaves it [T/s].

    Notes
    -----
    These are the intervals after which the i2GSE adds relaxation loss; runs of
    flat segments that wrap around the end of the period count as one interval.
    With the voltage v = N A dB/dt, a flat interval is one with v = 0.

    The ramp entering a flat interval is the run of sloped segments just before
    it that all go in one direction (rising or falling); the ramp leaving it is
    the run just after it. Each ramp's slope is the time-weighted median of its
    segment slopes: exact for a straight ramp, and a corner rounded over a few
    samples (capture bandwidth, filtering) does not stand in for the ramp.
    A rise, a fall and a dwell (discontinuous conduction) thus enters the dwell
    with the slope of the fall and leaves it with the slope of the next rise; a
    pause inside a rise (staircase) leaves it with the slope of the next step.

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Improved core-loss
       calculation for magnetic components employed in power electronic systems",
       IEEE Trans. Power Electron. 27(2), 2012, pp. 964-973.
    """
    rel_slope = float(rel_slope)
    if not (np.isfinite(rel_slope) and 0 <= rel_slope < 1):
        raise ValueError(f"rel_slope must lie in [0, 1), got {rel_slope!r}")
    empty = (np.zeros(0), np.zeros(0), np.zeros(0))
    s = waveform.dbdt()
    dt = waveform.segment_durations
    smax = np.max(np.abs(s))
    if smax == 0:
        return empty
    flat = np.abs(s) <= rel_slope * smax
    if flat.all() or not flat.any():
        return empty
    # direction of each segment (0 flat, +1 rising, -1 falling) and its maximal runs;
    # rotated to start on a run boundary so that no run wraps around the period
    g = np.where(flat, 0, np.sign(s)).astype(np.int8)
    first = int(np.argmax(g != np.roll(g, 1)))  # a flat and a sloped run exist: some boundary does
    g = np.roll(g, -first)
    s = np.roll(s, -first)
    dt = np.roll(dt, -first)
    lo = np.flatnonzero(g != np.roll(g, 1))
    hi = np.append(lo[1:], g.size)
    flats = np.flatnonzero(g[lo] == 0)
    csum = np.concatenate(([0.0], np.cumsum(dt)))
    duration = csum[hi[flats]] - csum[lo[flats]]
    # neighbours of a flat run are sloped (runs are maximal); a periodic waveform rises
    # and falls, so there are at least three runs and the two neighbours differ
    n_runs = lo.size
    prev = (flats - 1) % n_runs
    nxt = (flats + 1) % n_runs
    ramps = np.union1d(prev, nxt)
    slope = np.zeros(n_runs)
    slope[ramps] = _run_medians(s, dt, lo[ramps], hi[ramps])
    return duration, slope[prev], slope[nxt]


@dataclass(frozen=True)
class I2gseResult:
    """i2GSE loss: the iGSE part plus relaxation after each zero-voltage interval [W/m^3]."""

    total: float
    igse: float
    relaxation: float
    n_intervals: int


_RELAXATION_FIELDS = ("k_r", "alpha_r", "beta_r", "tau")


def relaxation_factors(before, after, q_r=None) -> np.ndarray:
    """Direction factor Q of the i2GSE relaxation term for each flat interval [-].

    Parameters
    ----------
    before, after : array_like
        Slopes dB/dt of the ramps entering and leaving each flat interval [T/s].
    q_r : float, optional
        Decay parameter [-]; None gives Q = 1 for every interval.

    Returns
    -------
    ndarray
        ``exp(-q_r |after / before|)`` where the flux goes on in the same direction
        after the interval, 1 where it reverses [-].

    Notes
    -----
    .. math:: Q_{r,l} = e^{-q_r |\\dot B(t_+) / \\dot B(t_-)|}

    Our reading of [1]_, from memory: t_- is on the ramp entering the zero-voltage
    interval and t_+ on the ramp leaving it, and the factor applies only when the
    flux continues in the same direction (Q = 1 after a reversal). Another reading,
    also from memory, takes t_+ just after the switching instant, inside the flat
    interval, which makes Q = 1 for every flat interval. The two agree whenever the
    flux reverses after the dwell (trapezoid, discontinuous conduction); they
    differ for a pause inside a rise (staircase).

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Improved core-loss
       calculation for magnetic components employed in power electronic systems",
       IEEE Trans. Power Electron. 27(2), 2012, pp. 964-973.
    """
    before = np.asarray(before, dtype=float)
    after = np.asarray(after, dtype=float)
    if q_r is None:
        return np.ones(np.broadcast(before, after).shape)
    same = np.sign(after) == np.sign(before)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.abs(after / before)
    return np.where(same, np.exp(-float(q_r) * ratio), 1.0)


def i2gse(waveform: FluxWaveform, k, alpha, beta, relaxation, *, minor_loops: bool = True, threshold=None) -> I2gseResult:
    """iGSE with relaxation losses after zero-voltage intervals (i2GSE).

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    k, alpha, beta : float
        Steinmetz parameters [W/m^3, Hz, T].
    relaxation : object
        Relaxation parameters with attributes ``k_r`` (energy density scale
        [J/m^3 / ((T/s)**alpha_r T**beta_r)]), ``alpha_r`` and ``beta_r``
        (exponents of |dB/dt| and ΔB [-]), ``tau`` (time constant [s]) and
        ``q_r`` (decay parameter for an interval after which the flux continues
        in the same direction [-], or None for Q = 1 everywhere); a material's
        ``relaxation`` (:class:`workbench.materials.RelaxationParams`) is one.
    minor_loops : bool, optional
        Minor-loop procedure for the iGSE part [-].
    threshold : float, optional
        Reversal threshold for the iGSE part [T].

    Returns
    -------
    I2gseResult

    Notes
    -----
    For each zero-voltage interval l of duration t_l entered with slope
    dB/dt(t-) and left with slope dB/dt(t+) (:func:`flat_intervals`):

    .. math:: P_v = \\frac{1}{T}\\int_0^T k_i \\left|\\frac{dB}{dt}\\right|^{\\alpha}
              (\\Delta B)^{\\beta-\\alpha} dt + \\sum_l Q_{r,l} P_{r,l}

    .. math:: P_{r,l} = \\frac{1}{T} k_r \\left|\\frac{dB}{dt}(t_-)\\right|^{\\alpha_r}
              (\\Delta B)^{\\beta_r} (1 - e^{-t_l/\\tau})

    with ΔB the waveform's peak-to-peak flux and Q from :func:`relaxation_factors`
    (its form is our reading of [1]_, from memory).

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Improved core-loss
       calculation for magnetic components employed in power electronic systems",
       IEEE Trans. Power Electron. 27(2), 2012, pp. 964-973.
    """
    values = {}
    for name in _RELAXATION_FIELDS + ("q_r",):
        if not hasattr(relaxation, name):
            raise ValueError(
                f"relaxation must have the attributes k_r, alpha_r, beta_r, tau and q_r "
                f"(e.g. a material's relaxation), got {type(relaxation).__name__} without {name!r}"
            )
        values[name] = getattr(relaxation, name)
    for name in _RELAXATION_FIELDS:
        positive_array(values[name], name)
    q_r = values["q_r"]
    if q_r is not None and (isinstance(q_r, bool) or not np.isfinite(q_r) or q_r < 0):
        raise ValueError(f"q_r must be finite and non-negative, got {q_r!r}")
    base = igse(waveform, k, alpha, beta, minor_loops=minor_loops, threshold=threshold)
    duration, before, after = flat_intervals(waveform)
    if duration.size == 0:
        return I2gseResult(base, base, 0.0, 0)
    q = relaxation_factors(before, after, q_r)
    k_r, alpha_r, beta_r, tau = (float(values[n]) for n in _RELAXATION_FIELDS)
    energy = k_r * np.abs(before) ** alpha_r * waveform.flux_pp**beta_r * (1.0 - np.exp(-duration / tau)) * q
    relax = float(np.sum(energy) / waveform.period)
    return I2gseResult(base + relax, base, relax, int(duration.size))


def steinmetz_temperature_factor(temperature, ct0, ct1, ct2):
    """Quadratic temperature factor of the Steinmetz coefficient used for power ferrites.

    Parameters
    ----------
    temperature : array_like
        Core temperature [degC].
    ct0, ct1, ct2 : float
        Coefficients [-, 1/degC, 1/degC^2].

    Returns
    -------
    ndarray or float
        Factor multiplying k [-].

    Notes
    -----
    .. math:: k(T) = k\\,(c_{t0} - c_{t1} T + c_{t2} T^2)

    The factor has its minimum at ``T = ct1 / (2 ct2)``, where MnZn power
    ferrites are designed to run (typically 80-100 degC).

    References
    ----------
    .. [1] A. Van den Bossche, V. C. Valchev, *Inductors and Transformers for
       Power Electronics*, CRC Press, 2005, ch. 3 (temperature dependence of
       ferrite loss).
    """
    temp = np.asarray(temperature, dtype=float)
    if not np.all(np.isfinite(temp)):
        raise ValueError(f"temperature must be finite, got {temperature!r}")
    for name, value in (("ct0", ct0), ("ct1", ct1), ("ct2", ct2)):
        if not np.isfinite(value):
            raise ValueError(f"{name} must be finite, got {value!r}")
    out = ct0 - ct1 * temp + ct2 * temp**2
    return float(out) if out.ndim == 0 else out
