"""Loss parts against frequency for a fixed flux shape, and the eddy/hysteresis crossover.

A shape played at another frequency keeps its flux levels and stretches in time, so
each part follows its own law in f (iGSE total ~ f**alpha, hysteresis ~ f, excess ~
f**1.5, classical ~ f**2 bent down by the skin effect harmonic by harmonic). The laws
come from the loss engine (:func:`workbench.engine.loss_laws`), so a sweep point equals
the engine's loss at that frequency. The shape is a named shape or any one period of
flux, a captured one included.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from workbench.engine import Conditions, LossLaws, core_loss_sweep, loss_laws
from workbench.shapes import ShapeSpec
from workbench.waveforms import FluxWaveform

__all__ = ["FrequencySweep", "CrossoverResult", "sweep_frequency", "crossover_frequency", "DEFAULT_FREQS"]

#: Default sweep: 400 points from 10 Hz to 1 MHz.
DEFAULT_FREQS = np.geomspace(10.0, 1e6, 400)


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
    warnings : tuple of str
        Things to check (a crossover outside the material's valid range).
    """

    freq: float | None
    method: str
    message: str
    f_range: tuple[float, float]
    eddy_includes_excess: bool
    hysteresis_from: str
    warnings: tuple[str, ...] = ()


def _crossover(laws: LossLaws, include_excess: bool, f_range) -> CrossoverResult:
    f_lo, f_hi = float(f_range[0]), float(f_range[1])
    if not (np.isfinite(f_lo) and np.isfinite(f_hi) and 0 < f_lo < f_hi):
        raise ValueError(f"f_range must be two increasing positive frequencies, got {f_range!r}")
    name = laws.material.name
    warnings: list[str] = []
    if laws.thickness is None:
        return CrossoverResult(None, "none", f"{name}: no lamination thickness and resistivity, so no classical eddy part to compare",
                               (f_lo, f_hi), include_excess, "steinmetz", ())
    with_excess = include_excess and laws.has_separation
    eddy_name = "classical + excess eddy loss" if with_excess else "classical eddy loss"
    use_sep = laws.has_separation
    hyst_from = "separation" if use_sep else "steinmetz"
    hyst_name = "hysteresis loss" if use_sep else "the Steinmetz loss (no separation set, taken as hysteresis-like)"

    def hyst(f):
        return laws.hyst_ref * (np.asarray(f, dtype=float) / laws.ref_freq) if use_sep else laws.parts(f)["total"]

    def eddy(f):  # only the parts needed, each from the laws (the classical harmonic sum is the cost)
        e = laws.classical(f, laws.resistivity, laws.thickness, laws.rel_permeability)
        return e + laws.excess_ref * (np.asarray(f, dtype=float) / laws.ref_freq) ** 1.5 if with_excess else e

    closed = laws.rel_permeability is None and use_sep and not with_excess
    if closed:
        # P_h = a f and P_cl = c f^2: they meet at f = a / c
        fx = laws.ref_freq * laws.hyst_ref / float(laws.parts(np.array([laws.ref_freq]))["classical"][0])
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
            fx = float(np.exp(brentq(lambda lf: float(np.log(eddy(np.exp([lf])))[0] - np.log(hyst(np.exp([lf])))[0]),
                                     np.log(grid[i]), np.log(grid[i + 1]), xtol=1e-13, rtol=1e-12)))
        elif g[0] > 0:
            return CrossoverResult(None, method, f"{eddy_name} already exceeds {hyst_name} at {f_lo:.4g} Hz for {name}; no crossover in {f_lo:.4g}-{f_hi:.4g} Hz",
                                   (f_lo, f_hi), include_excess, hyst_from, ())
        else:
            return CrossoverResult(None, method, f"{eddy_name} stays below {hyst_name} up to {f_hi:.4g} Hz for {name}; no crossover in {f_lo:.4g}-{f_hi:.4g} Hz",
                                   (f_lo, f_hi), include_excess, hyst_from, ())
    if not found:
        side = "below" if fx > f_hi else "above"
        return CrossoverResult(None, method, f"{eddy_name} stays {side} {hyst_name} over {f_lo:.4g}-{f_hi:.4g} Hz for {name} (the curves meet at {fx:.4g} Hz, outside the range)",
                               (f_lo, f_hi), include_excess, hyst_from, ())
    st = getattr(laws.material, "steinmetz", None)
    if st is not None:
        lo, hi = st.freq_range
        if not lo <= fx <= hi:
            warnings.append(f"the crossover at {fx:.4g} Hz lies outside the valid frequency range of {name}'s data "
                            f"({lo:.4g}-{hi:.4g} Hz): the curves there are extrapolated, treat it as an indication only")
    return CrossoverResult(float(fx), method, f"{eddy_name} overtakes {hyst_name} above {fx:.4g} Hz for {name}",
                           (f_lo, f_hi), include_excess, hyst_from, tuple(warnings))


def _shape(shape, b_peak, duty):
    """A ShapeSpec from a shape name (at its reference 1 Hz), or the waveform itself."""
    if isinstance(shape, (FluxWaveform, ShapeSpec)):
        if b_peak is not None:
            raise ValueError("b_peak is given by the waveform itself; pass b_peak only with a shape name")
        return shape
    if b_peak is None:
        raise ValueError(f"b_peak [T] is needed with the shape name {shape!r}")
    return ShapeSpec(shape, float(b_peak), 1.0, float(duty))


def crossover_frequency(material, *, b_peak: float | None = None, shape="sine", duty: float = 0.5, thickness=None,
                        resistivity=None, skin_effect: bool = True, include_excess: bool = False, temperature=None,
                        f_range=(1.0, 1e8)) -> CrossoverResult:
    """Frequency at which eddy-current loss overtakes hysteresis loss.

    Parameters
    ----------
    material : workbench.materials.Material or str
        Material data or its library name.
    b_peak : float, optional
        Peak flux density [T] (with a shape name).
    shape : {"sine", "triangle", "trapezoid"} or FluxWaveform
        Waveform shape, or one period of flux (a captured one) whose flux levels are kept.
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

    and in general ``f_x = P_h(f_0) f_0 / P_cl(f_0)``. With the skin effect or the
    excess term, a bracketed root find (Brent) on log f.

    References
    ----------
    .. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
       materials", IEEE Trans. Magn. 24(1), 1988.

    Examples
    --------
    >>> r = crossover_frequency("M400-50A", b_peak=1.5, skin_effect=False)
    >>> r.method, round(r.freq, 1)
    ('closed form', 132.4)
    """
    cond = Conditions(temperature=temperature, thickness=thickness, resistivity=resistivity, skin_effect=skin_effect)
    laws = loss_laws(_shape(shape, b_peak, duty), material, cond)
    return _crossover(laws, include_excess, f_range)


@dataclass(frozen=True)
class FrequencySweep:
    """Loss parts of one shape on one material across frequency. Arrays in W/m^3.

    ``hysteresis``, ``excess`` and ``separation_total`` are None when the
    material has no separation set. ``shape`` is the shape name, or "waveform" for
    a given period of flux (then ``duty`` is None).
    """

    material: str
    shape: str
    duty: float | None
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
    loss_model: str = "iGSE"
    relaxation: np.ndarray | None = field(default=None, repr=False)
    temperature: float | None = None
    warnings: tuple[str, ...] = ()

    def __repr__(self) -> str:
        cx = "none" if self.crossover.freq is None else f"{self.crossover.freq:.4g} Hz"
        return (f"FrequencySweep({self.material}, {self.shape}, B_peak {self.b_peak:.4g} T, {self.freq.size} points "
                f"{self.freq[0]:.4g}-{self.freq[-1]:.4g} Hz, {self.loss_model}, crossover {cx}, "
                f"{len(self.warnings)} warning(s))")

    def energy_per_cycle(self, values: np.ndarray) -> np.ndarray:
        """Loss per cycle P/f [J/m^3] of one of the loss arrays.

        Parameters
        ----------
        values : ndarray
            Loss densities at ``self.freq`` [W/m^3].
        """
        return values / self.freq

    def specific(self, values):
        """Loss per mass [W/kg] of one of the loss arrays (None passes through).

        Parameters
        ----------
        values : ndarray or None
            Loss densities at ``self.freq`` [W/m^3].
        """
        return None if values is None or self.density is None else values / self.density

    @property
    def extrapolated(self) -> np.ndarray:
        """True where the frequency lies outside the material's Steinmetz range."""
        lo, hi = self.valid_freq_range
        return (self.freq < lo) | (self.freq > hi)

    def to_dict(self) -> dict:
        """Plain dict with SI-suffixed keys, ready for JSON."""
        def lst(a):
            return None if a is None else [float(x) for x in a]

        return {
            "material": self.material, "shape": self.shape, "duty": self.duty, "b_peak_t": self.b_peak,
            "thickness_m": self.thickness, "resistivity_ohm_m": self.resistivity, "temperature_c": self.temperature,
            "frequency_hz": lst(self.freq), "loss_w_m3": lst(self.total), "hysteresis_w_m3": lst(self.hysteresis),
            "classical_w_m3": lst(self.classical), "excess_w_m3": lst(self.excess),
            "crossover_hz": self.crossover.freq, "crossover": self.crossover.message,
            "loss_model": self.loss_model, "warnings": list(self.warnings) + list(self.crossover.warnings),
        }


def sweep_frequency(material, shape="sine", *, b_peak: float | None = None, duty: float = 0.5, freqs=None, thickness=None,
                    resistivity=None, skin_effect: bool = True, include_excess: bool = False, temperature=None,
                    h_dc=None) -> FrequencySweep:
    """Loss parts against frequency for one flux shape, flux and lamination.

    Parameters
    ----------
    material : workbench.materials.Material or str
        Material data or its library name.
    shape : {"sine", "triangle", "trapezoid"} or FluxWaveform
        Waveform shape name, or one period of flux (e.g. a capture's averaged
        period): its flux levels are kept and time is scaled to each frequency.
    b_peak : float, optional
        Peak flux density [T] (with a shape name).
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
    h_dc : float, optional
        DC bias field strength [A/m].

    Returns
    -------
    FrequencySweep

    Examples
    --------
    >>> s = sweep_frequency("M400-50A", "sine", b_peak=1.5, freqs=[50, 400])
    >>> [round(x) for x in s.total], s.loss_model, round(s.crossover.freq, 1)
    ([27190, 471467], 'iGSE', 132.9)
    """
    f = DEFAULT_FREQS if freqs is None else freqs
    wave = _shape(shape, b_peak, duty)
    sw = core_loss_sweep(wave, material, f, temperature=temperature, thickness=thickness, resistivity=resistivity,
                         skin_effect=skin_effect, h_dc=h_dc)
    laws = sw.laws
    cross = _crossover(laws, include_excess, (min(1.0, float(sw.freq[0])), max(1e8, float(sw.freq[-1]))))
    mat = laws.material
    st = getattr(mat, "steinmetz", None)
    named = isinstance(wave, ShapeSpec)
    return FrequencySweep(
        material=mat.name, shape=wave.shape if named else "waveform", duty=(wave.duty if named else None),
        b_peak=laws.b_peak, thickness=laws.thickness, resistivity=laws.resistivity,
        density=getattr(mat, "density", None), freq=sw.freq, total=sw.total, classical=sw.classical,
        hysteresis=sw.hysteresis, excess=sw.excess, separation_total=sw.separation_total, crossover=cross,
        valid_freq_range=tuple(st.freq_range) if st is not None else (0.0, np.inf), loss_model=laws.model_name,
        relaxation=sw.relaxation, temperature=laws.temperature, warnings=sw.warnings,
    )
