"""Loss parts against frequency for a fixed waveform shape, and the eddy/hysteresis crossover.

A shape played at another frequency keeps its flux levels and stretches in time,
so each part follows its own law in f: the iGSE total goes as f**alpha, the
hysteresis part as f, the excess part as f**1.5 and the classical part as f**2
(bent down by the skin effect harmonic by harmonic). A sweep therefore computes
the shape once and scales it, which is exact and fast.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench import models
from workbench.analysis.breakdown import steinmetz_k_at
from workbench.analysis.shapes import make_shape

__all__ = ["FrequencySweep", "CrossoverResult", "ShapeLaws", "shape_laws", "sweep_frequency", "crossover_frequency", "DEFAULT_FREQS"]

#: Default sweep: 400 points from 10 Hz to 1 MHz.
DEFAULT_FREQS = np.geomspace(10.0, 1e6, 400)
#: Harmonics kept for the classical part with skin effect.
N_HARMONICS = 256


@dataclass(frozen=True)
class ShapeLaws:
    """Coefficients of each loss part of one shape, at 1 Hz, for scaling in frequency.

    ``total(f) = igse_1hz * f**alpha + relaxation(f)``, ``hyst(f) = hyst_1hz * f``,
    ``excess(f) = excess_1hz * f**1.5``; the classical part is the harmonic sum
    ``sum_n classical_eddy(n f, amp_n)``.
    """

    alpha: float
    igse_1hz: float
    hyst_1hz: float | None
    excess_1hz: float | None
    harmonic_numbers: np.ndarray
    harmonic_amplitudes: np.ndarray
    classical_1hz_thin: float
    relax_terms: tuple  # (k_r, alpha_r, beta_r, tau, slopes_1hz, durations_1hz, q, flux_pp) or ()

    def igse_total(self, freq):
        """Steinmetz-family total (iGSE plus any i2GSE relaxation) [W/m^3].

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz].
        """
        f = np.asarray(freq, dtype=float)
        out = self.igse_1hz * f**self.alpha
        if self.relax_terms:
            k_r, a_r, b_r, tau, slopes, durations, q, pp = self.relax_terms
            fcol = f[..., None]
            e = k_r * np.abs(slopes * fcol) ** a_r * pp**b_r * (1 - np.exp(-durations / (fcol * tau))) * q
            out = out + fcol[..., 0] * e.sum(axis=-1)
        return out

    def relaxation(self, freq):
        """i2GSE relaxation part of the total [W/m^3] (0 without relaxation data).

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz].
        """
        return self.igse_total(freq) - self.igse_1hz * np.asarray(freq, dtype=float) ** self.alpha

    def classical(self, freq, resistivity, thickness, rel_permeability=None):
        """Classical eddy-current part [W/m^3], with the skin effect per harmonic when a permeability is given.

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz].
        resistivity : float
            Resistivity [ohm m].
        thickness : float
            Lamination thickness [m].
        rel_permeability : float, optional
            Relative permeability [-]; None leaves out the skin effect.
        """
        f = np.asarray(freq, dtype=float)
        if rel_permeability is None:
            return self.classical_1hz_thin * (thickness**2 / (12 * resistivity)) * f**2
        fn = f[..., None] * self.harmonic_numbers
        p = models.classical_eddy(fn, self.harmonic_amplitudes, resistivity, thickness, rel_permeability)
        return np.sum(p, axis=-1)

    def hysteresis(self, freq):
        """Hysteresis part [W/m^3], or None without a separation set.

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz].
        """
        return None if self.hyst_1hz is None else self.hyst_1hz * np.asarray(freq, dtype=float)

    def excess(self, freq):
        """Excess part [W/m^3], or None without a separation set.

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz].
        """
        return None if self.excess_1hz is None else self.excess_1hz * np.asarray(freq, dtype=float) ** 1.5


def shape_laws(material, shape: str = "sine", *, b_peak: float, duty: float = 0.5, temperature=None) -> ShapeLaws:
    """Per-part frequency laws of one waveform shape on one material (see :class:`ShapeLaws`).

    Parameters
    ----------
    material : workbench.materials.Material
        Material data [SI units].
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape.
    b_peak : float
        Peak flux density [T].
    duty : float
        Duty cycle of the shape [-].
    temperature : float, optional
        Core temperature [degC] for the Steinmetz coefficient.

    Returns
    -------
    ShapeLaws
        Coefficients at 1 Hz; each part scales with its own power of f.
    """
    w = make_shape(shape, b_peak=b_peak, freq=1.0, duty=duty)
    st = material.steinmetz
    k = steinmetz_k_at(material, temperature)
    igse_1hz = models.igse(w, k, st.alpha, st.beta)
    sep = material.separation
    hyst = excess = None
    if sep is not None:
        hyst = models.hysteresis_loss_waveform(w, sep.k_hyst, sep.beta_hyst)
        excess = models.excess_loss_waveform(w, sep.k_excess)
    spec = w.spectrum(N_HARMONICS, samples=4 * N_HARMONICS)
    n = np.arange(1, spec.amplitude.size)
    amp = spec.amplitude[1:]
    keep = amp > 1e-9 * amp.max()
    # mean (dB/dt)^2 at 1 Hz, exact for the piecewise-linear shape
    thin = float(np.sum(w.segment_increments**2 / w.segment_durations) / w.period)
    relax = ()
    rx = getattr(material, "relaxation", None)
    if rx is not None:
        durations, before, after = models.flat_intervals(w)
        if durations.size:
            q = np.ones_like(durations)
            if rx.q_r is not None:
                same = np.sign(after) == np.sign(before)
                q = np.where(same, np.exp(-rx.q_r * np.abs(after / before)), 1.0)
            relax = (rx.k_r, rx.alpha_r, rx.beta_r, rx.tau, before, durations, q, w.flux_pp)
    return ShapeLaws(st.alpha, igse_1hz, hyst, excess, n[keep].astype(float), amp[keep], thin, relax)


@dataclass(frozen=True)
class CrossoverResult:
    """Frequency at which eddy-current loss equals hysteresis loss.

    Attributes
    ----------
    freq : float or None
        Crossover frequency [Hz], or None when the curves do not cross in ``f_range``.
    method : str
        "closed form" or "root find".
    message : str
        The answer in words.
    f_range : tuple of float
        Search range [Hz].
    eddy_includes_excess : bool
        Whether "eddy" meant classical + excess rather than classical alone.
    hysteresis_from : str
        "separation" (the material's hysteresis term) or "steinmetz" (the
        iGSE total stands in for hysteresis where no separation set exists).
    """

    freq: float | None
    method: str
    message: str
    f_range: tuple[float, float]
    eddy_includes_excess: bool
    hysteresis_from: str


def _crossover(laws: ShapeLaws, material, rho, d, mu_r, include_excess, f_range) -> CrossoverResult:
    f_lo, f_hi = float(f_range[0]), float(f_range[1])
    if not (np.isfinite(f_lo) and np.isfinite(f_hi) and 0 < f_lo < f_hi):
        raise ValueError(f"f_range must be two increasing positive frequencies, got {f_range!r}")
    eddy_name = "classical + excess eddy loss" if include_excess and laws.excess_1hz is not None else "classical eddy loss"
    use_sep = laws.hyst_1hz is not None
    hyst_from = "separation" if use_sep else "steinmetz"
    hyst_name = "hysteresis loss" if use_sep else "the Steinmetz loss (no separation set, taken as hysteresis-like)"

    def hyst(f):
        return laws.hysteresis(f) if use_sep else laws.igse_total(f)

    def eddy(f):
        e = laws.classical(f, rho, d, mu_r)
        if include_excess and laws.excess_1hz is not None:
            e = e + laws.excess(f)
        return e

    closed = mu_r is None and use_sep and not (include_excess and laws.excess_1hz is not None)
    if closed:
        c2 = laws.classical_1hz_thin * d**2 / (12 * rho)
        fx = laws.hyst_1hz / c2
        method = "closed form"
        found = f_lo <= fx <= f_hi
    else:
        method = "root find"
        grid = np.geomspace(f_lo, f_hi, 241)
        g = np.log(eddy(grid)) - np.log(hyst(grid))
        sign = np.flatnonzero(np.diff(np.sign(g)) != 0)
        found = sign.size > 0
        if found:
            from scipy.optimize import brentq  # imported here: keeps scipy.optimize off the import path

            i = int(sign[0])
            fx = float(np.exp(brentq(lambda lf: float(np.log(eddy(np.exp(lf))) - np.log(hyst(np.exp(lf)))),
                                     np.log(grid[i]), np.log(grid[i + 1]), xtol=1e-12, rtol=1e-10)))
        elif g[0] > 0:
            fx = None
            return CrossoverResult(None, method, f"{eddy_name} already exceeds {hyst_name} at {f_lo:.4g} Hz for {material.name}; no crossover in {f_lo:.4g}-{f_hi:.4g} Hz",
                                   (f_lo, f_hi), include_excess, hyst_from)
        else:
            return CrossoverResult(None, method, f"{eddy_name} stays below {hyst_name} up to {f_hi:.4g} Hz for {material.name}; no crossover in {f_lo:.4g}-{f_hi:.4g} Hz",
                                   (f_lo, f_hi), include_excess, hyst_from)
    if not found:
        side = "below" if fx > f_hi else "above"
        return CrossoverResult(None, method, f"{eddy_name} stays {side} {hyst_name} over {f_lo:.4g}-{f_hi:.4g} Hz for {material.name} (the curves meet at {fx:.4g} Hz, outside the range)",
                               (f_lo, f_hi), include_excess, hyst_from)
    return CrossoverResult(float(fx), method, f"{eddy_name} overtakes {hyst_name} above {fx:.4g} Hz for {material.name}",
                           (f_lo, f_hi), include_excess, hyst_from)


def _resolve(material, thickness, resistivity, skin_effect):
    d = material.thickness if thickness is None else float(thickness)
    rho = material.resistivity if resistivity is None else float(resistivity)
    for name, value in (("thickness", d), ("resistivity", rho)):
        if not np.isfinite(value) or value <= 0:
            raise ValueError(f"{name} must be finite and positive, got {value!r}")
    mu_r = material.rel_permeability if skin_effect else None
    return d, rho, mu_r


def crossover_frequency(material, *, b_peak: float, shape: str = "sine", duty: float = 0.5, thickness=None, resistivity=None,
                        skin_effect: bool = True, include_excess: bool = False, temperature=None, f_range=(1.0, 1e8)) -> CrossoverResult:
    """Frequency at which eddy-current loss overtakes hysteresis loss.

    Parameters
    ----------
    material : workbench.materials.Material
        Material data.
    b_peak : float
        Peak flux density [T].
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape.
    duty : float
        Duty cycle of the shape [-].
    thickness, resistivity : float, optional
        Override the material's lamination thickness [m] and resistivity [ohm m].
    skin_effect : bool
        Bend the classical part by the skin effect (default True).
    include_excess : bool
        Count the excess part as eddy loss too (default False: classical only).
    temperature : float, optional
        Core temperature [degC] for the Steinmetz coefficient.
    f_range : (float, float)
        Search range [Hz].

    Returns
    -------
    CrossoverResult

    Notes
    -----
    Without skin effect and excess, for a sine,
    ``k_h f B**beta_h = pi**2 d**2 f**2 B**2 / (6 rho)`` gives the closed form

    .. math:: f_x = \\frac{6 \\rho k_h \\hat B^{\\beta_h - 2}}{\\pi^2 d^2}

    and in general ``f_x = P_h(1 Hz) / P_cl(1 Hz)``. With the skin effect or the
    excess term, a bracketed root find (Brent) on log f.

    References
    ----------
    .. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
       materials", IEEE Trans. Magn. 24(1), 1988.
    """
    d, rho, mu_r = _resolve(material, thickness, resistivity, skin_effect)
    laws = shape_laws(material, shape, b_peak=b_peak, duty=duty, temperature=temperature)
    return _crossover(laws, material, rho, d, mu_r, include_excess, f_range)


@dataclass(frozen=True)
class FrequencySweep:
    """Loss parts of one shape on one material across frequency. Arrays in W/m^3.

    ``hysteresis``, ``excess`` and ``separation_total`` are None when the
    material has no separation set.
    """

    material: str
    shape: str
    duty: float
    b_peak: float
    thickness: float
    resistivity: float
    density: float
    freq: np.ndarray
    total: np.ndarray
    classical: np.ndarray
    hysteresis: np.ndarray | None
    excess: np.ndarray | None
    separation_total: np.ndarray | None
    crossover: CrossoverResult
    valid_freq_range: tuple[float, float]

    def energy_per_cycle(self, values: np.ndarray) -> np.ndarray:
        """Loss per cycle P/f [J/m^3] of one of the loss arrays.

        Parameters
        ----------
        values : ndarray
            Loss densities at ``self.freq`` [W/m^3].
        """
        return values / self.freq

    @property
    def extrapolated(self) -> np.ndarray:
        """True where the frequency lies outside the material's Steinmetz range."""
        lo, hi = self.valid_freq_range
        return (self.freq < lo) | (self.freq > hi)


def sweep_frequency(material, shape: str = "sine", *, b_peak: float, duty: float = 0.5, freqs=None, thickness=None, resistivity=None,
                    skin_effect: bool = True, include_excess: bool = False, temperature=None) -> FrequencySweep:
    """Loss parts against frequency for one shape, flux and lamination.

    Parameters
    ----------
    material : workbench.materials.Material
        Material data.
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape.
    b_peak : float
        Peak flux density [T].
    duty : float
        Duty cycle [-].
    freqs : array_like, optional
        Frequencies [Hz]; default 400 points from 10 Hz to 1 MHz.
    thickness, resistivity : float, optional
        Override the material's lamination thickness [m] and resistivity [ohm m].
    skin_effect : bool
        Skin effect in the classical part (default True).
    include_excess : bool
        Whether the crossover counts excess loss as eddy loss.
    temperature : float, optional
        Core temperature [degC].

    Returns
    -------
    FrequencySweep
    """
    f = DEFAULT_FREQS if freqs is None else np.asarray(freqs, dtype=float)
    if f.ndim != 1 or f.size < 1 or not np.all(np.isfinite(f)) or np.any(f <= 0):
        raise ValueError("freqs must be a 1-D array of finite positive frequencies")
    d, rho, mu_r = _resolve(material, thickness, resistivity, skin_effect)
    laws = shape_laws(material, shape, b_peak=b_peak, duty=duty, temperature=temperature)
    classical = laws.classical(f, rho, d, mu_r)
    hyst = laws.hysteresis(f)
    exc = laws.excess(f)
    sep_total = None if hyst is None else hyst + classical + exc
    cross = _crossover(laws, material, rho, d, mu_r, include_excess, (min(1.0, f[0]), max(1e8, f[-1])))
    return FrequencySweep(
        material=material.name, shape=shape, duty=duty, b_peak=float(b_peak), thickness=d, resistivity=rho,
        density=material.density, freq=f, total=laws.igse_total(f), classical=classical, hysteresis=hyst,
        excess=exc, separation_total=sep_total, crossover=cross, valid_freq_range=tuple(material.steinmetz.freq_range),
    )
