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

    A series ``1 - 4 xi**4 / 315`` is used below xi = 1e-2, where the closed form
    loses precision, and ``3/xi`` above xi = 40.

    References
    ----------
    .. [1] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, 1966, ch. 4.
    .. [2] G. Bertotti, *Hysteresis in Magnetism*, Academic Press, 1998, sec. 12.2.
    """
    x = _non_negative(xi, "xi")
    out = np.ones_like(x, dtype=float)
    small = x < 1e-2
    large = x > 40
    mid = ~(small | large)
    xm = x[mid]
    out[mid] = 3.0 / xm * (np.sinh(xm) - np.sin(xm)) / (np.cosh(xm) - np.cos(xm))
    out[small] = 1.0 - 4.0 * x[small] ** 4 / 315.0
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


def classical_eddy_waveform(waveform: FluxWaveform, resistivity, thickness, rel_permeability=None, *, n_harmonics=None) -> float:
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
    n_harmonics : int, optional
        Number of harmonics summed with the skin effect [-] (default: all the samples resolve).

    Returns
    -------
    float
        Loss per unit volume averaged over the period [W/m^3].

    Notes
    -----
    Without skin effect:

    .. math:: P_{cl} = \\frac{d^2}{12\\rho}\\,\\overline{\\left(\\frac{dB}{dt}\\right)^2}

    exact for piecewise-linear flux. With skin effect the sum over harmonics n
    of :func:`classical_eddy` at n f and the harmonic amplitude B_n.

    References
    ----------
    .. [1] G. Bertotti, IEEE Trans. Magn. 24(1), 1988, eq. (1).
    """
    rho = float(_positive(resistivity, "resistivity"))
    d = float(_positive(thickness, "thickness"))
    if rel_permeability is None:
        db = waveform.segment_increments
        mean_sq = float(np.sum(db**2 / waveform.segment_durations) / waveform.period)
        return d**2 / (12.0 * rho) * mean_sq
    if n_harmonics is not None and (int(n_harmonics) != n_harmonics or n_harmonics < 1):
        raise ValueError(f"n_harmonics must be a positive integer, got {n_harmonics!r}")
    spec = waveform.spectrum(n_harmonics)
    f = spec.freq[1:]
    amp = spec.amplitude[1:]
    return float(np.sum(classical_eddy(f, amp, rho, d, rel_permeability)))


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
