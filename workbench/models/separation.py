"""Loss separation: hysteresis, classical eddy current (with skin effect) and excess loss.

All functions return loss per unit volume [W/m^3].

References
----------
.. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
   materials", IEEE Trans. Magn. 24(1), 1988, pp. 621-630.
.. [2] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, London, 1966, ch. 4
   (linear diffusion in a lamination).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench.checks import positive_array
from workbench.models.loops import decompose_loops
from workbench.models.steinmetz import mean_abs_cos_power
from workbench.waveforms import FluxWaveform

__all__ = [
    "MU_0",
    "skin_depth",
    "skin_effect_factor",
    "classical_eddy",
    "classical_eddy_waveform",
    "EddySpectrum",
    "eddy_spectrum",
    "hysteresis_loss",
    "hysteresis_loss_waveform",
    "excess_loss",
    "excess_loss_waveform",
    "EXCESS_SINE_CONSTANT",
]

#: Magnetic constant [H/m] (CODATA 2018 value).
MU_0 = 1.25663706212e-6

#: (2 pi)**1.5 times the mean of |cos|**1.5: the sine constant of the excess term (about 8.76).
EXCESS_SINE_CONSTANT = float((2 * np.pi) ** 1.5 * mean_abs_cos_power(1.5))


def _positive(value, name):
    return positive_array(value, name)


def _non_negative(value, name):
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)) or np.any(arr < 0):
        raise ValueError(f"{name} must be finite and non-negative, got {value!r}")
    return arr


def _out(x):
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x


def skin_depth(freq, resistivity, rel_permeability):
    """Electromagnetic skin depth in a conductor.

    Parameters
    ----------
    freq : array_like
        Frequency [Hz].
    resistivity : float
        Electrical resistivity [ohm m].
    rel_permeability : float
        Relative permeability [-].

    Returns
    -------
    ndarray or float
        Skin depth [m].

    Notes
    -----
    .. math:: \\delta = \\sqrt{\\rho / (\\pi f \\mu_0 \\mu_r)}

    References
    ----------
    .. [1] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, 1966, ch. 2.
    """
    f = _positive(freq, "freq")
    rho = _positive(resistivity, "resistivity")
    mu_r = _positive(rel_permeability, "rel_permeability")
    return _out(np.sqrt(rho / (np.pi * f * MU_0 * mu_r)))


#: Below this xi the skin-effect factor is taken from its Taylor series.
_SKIN_SERIES_BELOW = 1.0
#: Taylor coefficients of the skin-effect factor in powers of xi**4 (exact fractions
#: 1, -1/630, 1/249480, -1/97297200, 43867/1663116607152000, ... as floats).
_SKIN_SERIES = (
    1.0,
    -1.0 / 630.0,
    1.0 / 249480.0,
    -1.0 / 97297200.0,
    43867.0 / 1663116607152000.0,
    -77683.0 / 1147550458934880000.0,
    657931.0 / 3786916514485104000000.0,
    -1723168255201.0 / 3864493263987427105498464000000.0,
)


def skin_effect_factor(xi):
    """Ratio of the classical eddy loss with skin effect to the low-frequency value.

    Parameters
    ----------
    xi : array_like
        Lamination thickness over skin depth, d/delta [-].

    Returns
    -------
    ndarray or float
        F(xi) [-]: 1 for thin sheets, 3/xi when the skin depth is small.

    Notes
    -----
    For a slab of thickness d with linear permeability driven at a given mean
    flux density amplitude,

    .. math:: F(\\xi) = \\frac{3}{\\xi}\\,\\frac{\\sinh\\xi - \\sin\\xi}{\\cosh\\xi - \\cos\\xi}

    Below xi = 1, where the closed form loses digits to cancellation, its
    Taylor series in xi**4 is used (obtained by dividing the series of
    sinh - sin and cosh - cos), through the xi**28 term:

    .. math:: F(\\xi) = 1 - \\frac{\\xi^4}{630} + \\frac{\\xi^8}{249480}
              - \\frac{\\xi^{12}}{97297200} + \\dots

    (truncation below 1e-20 there); above xi = 40, ``3/xi`` (the hyperbolic terms
    differ from it by less than e**-40).

    References
    ----------
    .. [1] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, 1966, ch. 4.
    .. [2] G. Bertotti, *Hysteresis in Magnetism*, Academic Press, 1998, sec. 12.2.
    """
    x = _non_negative(xi, "xi")
    out = np.ones_like(x, dtype=float)
    small = x < _SKIN_SERIES_BELOW
    large = x > 40
    mid = ~(small | large)
    xm = x[mid]
    # the same ratio with e = exp(-x) factored out of numerator and denominator
    e = np.exp(-xm)
    out[mid] = 3.0 / xm * (1.0 - e * (e + 2.0 * np.sin(xm))) / (1.0 + e * (e - 2.0 * np.cos(xm)))
    y = x[small] ** 4
    acc = np.full_like(y, _SKIN_SERIES[-1])
    for c in _SKIN_SERIES[-2::-1]:  # Horner
        acc = acc * y + c
    out[small] = acc
    out[large] = 3.0 / x[large]
    return _out(out)


def classical_eddy(freq, b_peak, resistivity, thickness, rel_permeability=None):
    """Classical eddy-current loss of a lamination under sinusoidal flux.

    Parameters
    ----------
    freq : array_like
        Frequency [Hz].
    b_peak : array_like
        Peak (mean over the cross-section) flux density [T].
    resistivity : float
        Electrical resistivity [ohm m].
    thickness : float
        Lamination thickness [m].
    rel_permeability : float, optional
        Relative permeability [-]. If given, the skin effect is included.

    Returns
    -------
    ndarray or float
        Loss per unit volume [W/m^3].

    Notes
    -----
    .. math:: P_{cl} = \\frac{\\pi^2 d^2 f^2 \\hat B^2}{6 \\rho}\\, F(d/\\delta)

    with F from :func:`skin_effect_factor` (F = 1 without permeability).

    References
    ----------
    .. [1] G. Bertotti, IEEE Trans. Magn. 24(1), 1988, eq. (2).
    .. [2] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, 1966, ch. 4.
    """
    f = _positive(freq, "freq")
    b = _non_negative(b_peak, "b_peak")
    rho = _positive(resistivity, "resistivity")
    d = _positive(thickness, "thickness")
    p = np.pi**2 * d**2 * f**2 * b**2 / (6.0 * rho)
    if rel_permeability is not None:
        p = p * skin_effect_factor(d / skin_depth(f, rho, rel_permeability))
    return _out(p)


def classical_eddy_waveform(waveform: FluxWaveform, resistivity, thickness, rel_permeability=None) -> float:
    """Classical eddy-current loss of a lamination for any periodic flux waveform.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    resistivity : float
        Electrical resistivity [ohm m].
    thickness : float
        Lamination thickness [m].
    rel_permeability : float, optional
        Relative permeability [-]; if given, each harmonic gets its own skin-effect
        factor (linear diffusion superposes).

    Returns
    -------
    float
        Loss per unit volume averaged over the period [W/m^3].

    Notes
    -----
    Without skin effect:

    .. math:: P_{cl} = \\frac{d^2}{12\\rho}\\,\\overline{\\left(\\frac{dB}{dt}\\right)^2}

    exact for piecewise-linear flux. With skin effect the sum over harmonics n
    of :func:`classical_eddy` at n f and the harmonic amplitude B_n, from the
    exact harmonics of :func:`eddy_spectrum` (``EddySpectrum.classical`` at the
    waveform's own frequency: a point and a frequency sweep give the same number).

    References
    ----------
    .. [1] G. Bertotti, IEEE Trans. Magn. 24(1), 1988, eq. (1).
    """
    rho = float(_positive(resistivity, "resistivity"))
    d = float(_positive(thickness, "thickness"))
    return float(eddy_spectrum(waveform).classical(waveform.freq, rho, d, rel_permeability))


# ---------------------------------------------------------------------------
# classical eddy loss of any periodic waveform, with skin effect
# ---------------------------------------------------------------------------
#: Harmonics summed one by one; above them, harmonics are summed in blocks.
_EDDY_SINGLE = 64
#: Relative width of a block of harmonics (block edges grow geometrically).
_EDDY_BLOCK_RATIO = 1.05
#: Bounds of the number of harmonics computed exactly, and of the work of a direct sum.
_EDDY_N_MIN = 1 << 14
_EDDY_N_MAX = 1 << 21
_EDDY_DIRECT_WORK = 1 << 26
#: Gauss-Legendre rule of the tail integral, and the argument above which F = 3/x.
_TAIL_NODES = np.polynomial.legendre.leggauss(64)
_TAIL_ASYMPTOTE = 60.0


def _tail_weight(u0: np.ndarray) -> np.ndarray:
    """``2 u0**2 * integral_{u0}^inf F(u) u**-3 du``: the mean skin factor of a 1/n**2 tail [-]."""
    u0 = np.asarray(u0, dtype=float)
    out = np.empty_like(u0)
    big = u0 >= _TAIL_ASYMPTOTE
    out[big] = 2.0 / u0[big]  # F = 3/u there: integral of 3 u**-4
    small = ~big
    if small.any():
        x, wq = _TAIL_NODES
        lo = np.log(u0[small])[:, None]
        hi = np.log(_TAIL_ASYMPTOTE)
        s = 0.5 * (hi - lo) * x[None, :] + 0.5 * (hi + lo)
        u = np.exp(s)
        f = np.asarray(skin_effect_factor(u.ravel())).reshape(u.shape)
        integral = 0.5 * (hi - lo[:, 0]) * np.sum(wq * f / u**2, axis=1) + _TAIL_ASYMPTOTE**-3.0
        out[small] = 2.0 * u0[small] ** 2 * integral
    return out


def _harmonic_weights(theta: np.ndarray, jumps: np.ndarray, uniform: bool):
    """Share d_n of each harmonic n = 1..N in the mean square slope, from the slope jumps.

    For flux linear between corners at phases theta_i with slope jumps J_i (per unit
    phase), the n-th Fourier coefficient of the slope is
    ``sum_i J_i exp(-2 pi j n theta_i) / (2 pi j n)`` and its share of the mean square
    is twice its squared modulus.
    """
    m = theta.size
    if uniform:
        # corners on an even grid of m points: the sum is an FFT, periodic in n with period m
        s2 = np.abs(np.fft.fft(jumps)) ** 2
        n_max = int(min(_EDDY_N_MAX, max(_EDDY_N_MIN, 64 * m)))
        n = np.arange(1, n_max + 1)
        return s2[n % m] / (2.0 * np.pi**2 * n.astype(float) ** 2)
    keep = jumps != 0
    theta, jumps = theta[keep], jumps[keep]
    if theta.size == 0:
        return np.zeros(_EDDY_N_MIN)
    gaps = np.diff(np.append(theta, theta[0] + 1.0))
    resolution = 1.0 / max(float(gaps.min()), 1e-12)
    n_max = int(min(_EDDY_N_MAX, max(_EDDY_N_MIN, 64 * resolution)))
    n_max = int(max(_EDDY_N_MIN, min(n_max, _EDDY_DIRECT_WORK // theta.size)))
    out = np.empty(n_max)
    step = max(1, (1 << 20) // theta.size)
    for n0 in range(1, n_max + 1, step):
        n = np.arange(n0, min(n0 + step, n_max + 1), dtype=float)
        phase = np.outer(n, theta)
        phase -= np.floor(phase)  # exact reduction keeps the phase accurate for large n
        phase *= -2.0 * np.pi
        re = np.cos(phase) @ jumps
        im = np.sin(phase) @ jumps
        out[n0 - 1 : n0 - 1 + n.size] = (re**2 + im**2) / (2.0 * np.pi**2 * n**2)
    return out


@dataclass(frozen=True, eq=False)
class EddySpectrum:
    """Harmonic content of one flux shape, for its classical eddy loss at any frequency.

    Built by :func:`eddy_spectrum`. Phases are in units of the period, so the same
    object serves the shape played at any frequency (time scaled, flux unchanged).

    Attributes
    ----------
    mean_sq_slope : float
        Mean over a period of (dB/dtheta)**2, theta = t/T the phase [T^2].
    single_n, single_w : ndarray
        Harmonic numbers summed one by one and their shares of ``mean_sq_slope`` [-, T^2].
    block_n, block_w : ndarray
        Blocks of higher harmonics: weighted mean harmonic number (by the root of n) and
        summed share [-, T^2].
    n_max : int
        Highest harmonic computed exactly [-].
    tail_w : float
        Share of the harmonics above ``n_max``, from Parseval's theorem [T^2].
    """

    mean_sq_slope: float
    single_n: np.ndarray
    single_w: np.ndarray
    block_n: np.ndarray
    block_w: np.ndarray
    n_max: int
    tail_w: float

    def __repr__(self) -> str:
        return (f"EddySpectrum(mean_sq_slope={self.mean_sq_slope:.6g} T^2, n_max={self.n_max}, "
                f"blocks={self.block_n.size}, tail share={self.tail_w / self.mean_sq_slope if self.mean_sq_slope else 0.0:.3g})")

    def classical(self, freq, resistivity, thickness, rel_permeability=None):
        """Classical eddy-current loss of the shape at each frequency [W/m^3].

        Parameters
        ----------
        freq : array_like
            Frequency at which the shape is played (time scaled, flux kept) [Hz].
        resistivity : array_like
            Electrical resistivity [ohm m], broadcast against ``freq``.
        thickness : array_like
            Lamination thickness [m], broadcast against ``freq``.
        rel_permeability : float, optional
            Relative permeability [-]; if given, each harmonic gets its skin-effect factor.

        Returns
        -------
        ndarray or float
            Loss per unit volume [W/m^3], shape of the broadcast arguments.

        Notes
        -----
        .. math:: P_{cl} = \\frac{d^2 f^2}{12\\rho}\\sum_{n\\ge1} D_n\\,F(\\xi_1\\sqrt{n}),
                  \\quad \\xi_1 = d\\sqrt{\\pi f \\mu_0\\mu_r/\\rho}

        with D_n the share of harmonic n in the mean square of dB/dtheta
        (``sum D_n = mean_sq_slope``, Parseval) and F from :func:`skin_effect_factor`.
        Without permeability F = 1 and the sum is exactly ``mean_sq_slope``. The
        harmonics up to ``n_max`` are exact; blocks of 1 % in n take F at their
        weighted mean; above ``n_max`` the remaining share (Parseval) is weighted
        by the mean of F over a 1/n**2 tail, an integral done by Gauss-Legendre
        quadrature. The sum converges to better than 1e-5 relative.

        References
        ----------
        .. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
           materials", IEEE Trans. Magn. 24(1), 1988, eq. (1).
        .. [2] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, 1966, ch. 4
           (linear diffusion in a lamination: harmonics superpose).
        """
        f = positive_array(freq, "freq")
        rho = positive_array(resistivity, "resistivity")
        d = positive_array(thickness, "thickness")
        f, rho, d = np.broadcast_arrays(f, rho, d)
        scale = d**2 * f**2 / (12.0 * rho)
        if rel_permeability is None:
            return _out(scale * self.mean_sq_slope)
        mu_r = float(positive_array(rel_permeability, "rel_permeability"))
        xi1 = (d * np.sqrt(np.pi * f * MU_0 * mu_r / rho)).ravel()
        total = np.empty(xi1.size)
        roots = np.sqrt(np.concatenate((self.single_n, self.block_n)))
        weights = np.concatenate((self.single_w, self.block_w))
        step = max(1, (1 << 18) // max(1, roots.size))
        for i in range(0, xi1.size, step):
            x = xi1[i : i + step]
            fac = np.asarray(skin_effect_factor(np.outer(x, roots).ravel())).reshape(x.size, roots.size)
            total[i : i + step] = fac @ weights
        if self.tail_w > 0:
            total += self.tail_w * _tail_weight(xi1 * np.sqrt(self.n_max + 0.5))
        return _out(scale * total.reshape(f.shape))


def eddy_spectrum(waveform: FluxWaveform) -> EddySpectrum:
    """Harmonic content of a flux waveform for its classical eddy loss at any frequency.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T], linear between samples.

    Returns
    -------
    EddySpectrum
        Use ``.classical(freq, resistivity, thickness, rel_permeability)`` with an
        array of frequencies; the waveform keeps its flux shape, time scaled.

    Notes
    -----
    The slope dB/dtheta (theta = t/T) of flux linear between samples is piecewise
    constant, so its Fourier coefficients are exact sums over its jumps J_i at the
    corners theta_i:

    .. math:: c_n = \\frac{1}{2\\pi j n}\\sum_i J_i e^{-2\\pi j n \\theta_i},
              \\qquad D_n = 2|c_n|^2

    On an even grid of m samples the sum is an FFT of the jumps, periodic in n with
    period m. The result is cached on the waveform.

    References
    ----------
    .. [1] A. V. Oppenheim, A. S. Willsky, *Signals and Systems*, 2nd ed.,
       Prentice Hall, 1997, sec. 3.5 (Fourier series of a derivative) and 3.7 (Parseval).
    """
    if not isinstance(waveform, FluxWaveform):
        raise ValueError(f"waveform must be a FluxWaveform, got {type(waveform).__name__}")
    cached = waveform._cache.get("eddy_spectrum")
    if cached is not None:
        return cached
    period = waveform.period
    theta = waveform.t / period
    dtheta = waveform.segment_durations / period
    slope = waveform.segment_increments / dtheta
    mean_sq = float(np.sum(slope**2 * dtheta))
    jumps = slope - np.roll(slope, 1)
    smax = float(np.max(np.abs(slope)))
    if smax == 0:
        empty = np.zeros(0)
        spec = EddySpectrum(0.0, empty, empty, empty, empty, 0, 0.0)
        waveform._cache["eddy_spectrum"] = spec
        return spec
    jumps[np.abs(jumps) <= 1e-13 * smax] = 0.0  # collinear samples: no corner
    d = _harmonic_weights(theta, jumps, waveform.is_uniform())
    n_max = d.size
    n = np.arange(1, n_max + 1, dtype=float)
    n1 = min(_EDDY_SINGLE, n_max)
    single_n, single_w = n[:n1], d[:n1]
    edges = [n1]
    while edges[-1] < n_max:
        edges.append(min(n_max, max(edges[-1] + 1, int(np.ceil(edges[-1] * _EDDY_BLOCK_RATIO)))))
    edges = np.asarray(edges[:-1], dtype=np.intp)
    if edges.size:
        block_w = np.add.reduceat(d, edges)
        root_w = np.add.reduceat(d * np.sqrt(n), edges)
        mid = 0.5 * (edges + np.append(edges[1:], n_max) - 1) + 1  # harmonic number at the middle
        with np.errstate(invalid="ignore", divide="ignore"):
            block_n = np.where(block_w > 0, (root_w / block_w) ** 2, mid)
    else:
        block_w = block_n = np.zeros(0)
    nz = single_w > 0
    single_n, single_w = single_n[nz], single_w[nz]
    nz = block_w > 0
    block_n, block_w = block_n[nz], block_w[nz]
    tail = max(0.0, mean_sq - float(np.sum(d)))
    spec = EddySpectrum(mean_sq, single_n, single_w, block_n, block_w, int(n_max), tail)
    waveform._cache["eddy_spectrum"] = spec
    return spec


def hysteresis_loss(freq, b_peak, k_hyst, beta_hyst):
    """Hysteresis loss for a single symmetric loop per period.

    Parameters
    ----------
    freq : array_like
        Frequency [Hz].
    b_peak : array_like
        Peak flux density [T].
    k_hyst : float
        Hysteresis energy coefficient [J/m^3 / T**beta_hyst].
    beta_hyst : float
        Hysteresis flux exponent [-].

    Returns
    -------
    ndarray or float
        Loss per unit volume [W/m^3].

    Notes
    -----
    .. math:: P_h = k_h f \\hat B^{\\beta_h}

    The energy per cycle does not depend on frequency or on the waveform shape,
    only on the loops the flux traces.

    References
    ----------
    .. [1] G. Bertotti, IEEE Trans. Magn. 24(1), 1988, sec. II.
    """
    f = _positive(freq, "freq")
    b = _non_negative(b_peak, "b_peak")
    _positive(k_hyst, "k_hyst")
    _positive(beta_hyst, "beta_hyst")
    return _out(k_hyst * f * b**beta_hyst)


def hysteresis_loss_waveform(waveform: FluxWaveform, k_hyst, beta_hyst, *, minor_loops: bool = True, threshold=None, loops=None) -> float:
    """Hysteresis loss of a waveform, every loop counted with its own swing.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    k_hyst, beta_hyst : float
        Hysteresis parameters [J/m^3 / T**beta_hyst, -].
    minor_loops : bool, optional
        Count minor loops (default) [-]; otherwise one loop of the full swing.
    threshold : float, optional
        Smallest reversal counted [T].
    loops : LoopSet, optional
        A decomposition already computed for this waveform (flux levels [T]).

    Returns
    -------
    float
        Loss per unit volume [W/m^3].

    Notes
    -----
    .. math:: P_h = f \\sum_j k_h (\\Delta B_j / 2)^{\\beta_h}

    References
    ----------
    .. [1] G. Bertotti, *Hysteresis in Magnetism*, Academic Press, 1998, ch. 13
       (energy loss of minor loops).
    """
    _positive(k_hyst, "k_hyst")
    _positive(beta_hyst, "beta_hyst")
    if not minor_loops:
        swings = np.array([waveform.flux_pp])
    else:
        if loops is None:
            loops = decompose_loops(waveform, threshold)
        swings = loops.flux_pp
    return float(waveform.freq * np.sum(k_hyst * (0.5 * swings) ** beta_hyst))


def excess_loss(freq, b_peak, k_excess):
    """Excess (anomalous) loss under sinusoidal flux.

    Parameters
    ----------
    freq : array_like
        Frequency [Hz].
    b_peak : array_like
        Peak flux density [T].
    k_excess : float
        Excess-loss coefficient [W/m^3 / (T/s)**1.5], multiplying the mean of
        |dB/dt|**1.5.

    Returns
    -------
    ndarray or float
        Loss per unit volume [W/m^3].

    Notes
    -----
    .. math:: P_{exc} = k_{exc}\\,\\overline{|dB/dt|^{3/2}} = C\\,k_{exc} (f\\hat B)^{3/2},
              \\quad C = (2\\pi)^{3/2}\\,\\overline{|\\cos|^{3/2}} \\approx 8.76

    References
    ----------
    .. [1] G. Bertotti, IEEE Trans. Magn. 24(1), 1988, eq. (27) (the constant 8.76).
    """
    f = _positive(freq, "freq")
    b = _non_negative(b_peak, "b_peak")
    k = float(np.asarray(k_excess))
    if not np.isfinite(k) or k < 0:
        raise ValueError(f"k_excess must be finite and non-negative, got {k_excess!r}")
    return _out(k * EXCESS_SINE_CONSTANT * (f * b) ** 1.5)


def excess_loss_waveform(waveform: FluxWaveform, k_excess) -> float:
    r"""Excess loss for any waveform: ``k_excess * mean(|dB/dt|**1.5)`` [W/m^3].

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    k_excess : float
        Excess-loss coefficient [W/m^3 / (T/s)**1.5].

    Returns
    -------
    float
        Loss per unit volume averaged over the period [W/m^3].

    Notes
    -----
    .. math:: P_{exc} = k_{exc}\,\overline{|dB/dt|^{3/2}}

    exact for piecewise-linear flux (each segment contributes
    ``|dB_i|**1.5 dt_i**-0.5``).

    References
    ----------
    .. [1] G. Bertotti, IEEE Trans. Magn. 24(1), 1988, sec. V.
    """
    k = float(np.asarray(k_excess))
    if not np.isfinite(k) or k < 0:
        raise ValueError(f"k_excess must be finite and non-negative, got {k_excess!r}")
    return k * waveform.mean_abs_dbdt_power(1.5)
