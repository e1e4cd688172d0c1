"""The one loss engine: (waveform, material, operating conditions) -> loss with its parts and warnings.

Every command, panel, batch and analysis that shows a core loss gets it from here.
This is the only module that

* chooses the model (iGSE, or i2GSE where the material has relaxation data and the
  flux has zero-voltage intervals),
* applies the temperature factor (and states the temperature it assumed),
* applies lamination thickness / resistivity overrides (see below), and
* decides which warnings a result carries (valid ranges, saturation, temperature).

A waveform's loss parts are first reduced to their *laws*: coefficients at the
waveform's own frequency and flux, each part with its own power of frequency and of
flux scale (a shape played faster keeps its flux levels and stretches in time). A
single operating point, a frequency sweep, a material comparison at a loss budget and
a crossover search all evaluate the same laws, so they agree to rounding.

Thickness and resistivity overrides. A material's Steinmetz set was fitted to loss
measured at its own lamination thickness and resistivity, so it already contains the
classical eddy part at those values. With an override the headline loss becomes

    P = P_Steinmetz - P_classical(d_material, rho_material) + P_classical(d, rho)

(the classical part is replaced, the rest kept), and the result says so in a note.
Where the material's own classical part would exceed its Steinmetz loss (far outside
the valid range) the remainder is floored at zero and a warning is given.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from workbench import models
from workbench.checks import finite_number, positive_number
from workbench.shapes import ShapeSpec
from workbench.waveforms import FluxWaveform

__all__ = [
    "ABSOLUTE_ZERO_C",
    "BareSteinmetz",
    "Conditions",
    "LossLaws",
    "LossResult",
    "LossSweep",
    "core_loss",
    "core_loss_sweep",
    "loss_laws",
    "reference_temperature",
    "resolve_material",
    "temperature_factor",
]

#: Absolute zero [degC]; no core temperature lies below it.
ABSOLUTE_ZERO_C = -273.15
#: Hottest temperature accepted for a material with no limit temperature of its own [degC]
#: (common practice, no source: above this no insulation system or loss data applies).
DEFAULT_TEMPERATURE_CEILING_C = 400.0
#: Classical share of the total below which we call it negligible.
NEGLIGIBLE_SHARE = 0.01
#: Fraction of the saturation flux density above which we warn.
NEAR_SATURATION = 0.8


# ---------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class BareSteinmetz:
    """A bare Steinmetz set given directly, without a library material.

    Parameters
    ----------
    k : float
        Coefficient [W/m^3 for f in Hz and B_peak in T].
    alpha : float
        Frequency exponent [-].
    beta : float
        Flux-density exponent [-].
    """

    k: float
    alpha: float
    beta: float

    def __post_init__(self):
        for name in ("k", "alpha", "beta"):
            object.__setattr__(self, name, positive_number(getattr(self, name), f"Steinmetz {name}"))
        if not 0.5 <= self.alpha <= 3.5:
            raise ValueError(f"Steinmetz alpha = {self.alpha!r} is implausible (expected 1 to 3)")
        if not 1.0 <= self.beta <= 4.5:
            raise ValueError(f"Steinmetz beta = {self.beta!r} is implausible (expected 1.5 to 3.5)")

    @property
    def name(self) -> str:
        return f"Steinmetz k={self.k:g}, alpha={self.alpha:g}, beta={self.beta:g}"


def resolve_material(material):
    """A library material from a :class:`~workbench.materials.Material`, its name, or a bare Steinmetz set.

    Parameters
    ----------
    material : Material, str or BareSteinmetz
        The material itself, its library name (case-insensitive), or a bare
        Steinmetz set (any object with ``k``, ``alpha`` and ``beta``).

    Returns
    -------
    Material or BareSteinmetz
    """
    if isinstance(material, str):
        from workbench.materials import get_material

        return get_material(material)
    if hasattr(material, "steinmetz") or isinstance(material, BareSteinmetz):
        return material
    if all(hasattr(material, a) for a in ("k", "alpha", "beta")):
        return BareSteinmetz(material.k, material.alpha, material.beta)
    raise ValueError(f"material must be a Material, a library name or a Steinmetz set, got {type(material).__name__}")


def _finite(value, name: str) -> float:
    return finite_number(value, name)


def _positive(value, name: str, unit: str) -> float:
    return positive_number(value, name, unit=unit)


@dataclass(frozen=True)
class Conditions:
    """Operating conditions of one loss evaluation.

    Parameters
    ----------
    temperature : float, optional
        Core temperature [degC]; None evaluates a material with temperature data at
        its reference temperature (stated in the result's warnings).
    thickness : float, optional
        Lamination thickness override [m].
    resistivity : float, optional
        Resistivity override [ohm m].
    skin_effect : bool
        Skin effect in the classical eddy part.
    minor_loops : bool
        Count minor loops separately (iGSE procedure).
    threshold : float, optional
        Smallest flux reversal counted as a loop [T]; default from the data.
    h_dc : float, optional
        DC bias field strength [A/m].
    """

    temperature: float | None = None
    thickness: float | None = None
    resistivity: float | None = None
    skin_effect: bool = True
    minor_loops: bool = True
    threshold: float | None = None
    h_dc: float | None = None

    def __post_init__(self):
        if self.temperature is not None:
            t = _finite(self.temperature, "temperature")
            if t < ABSOLUTE_ZERO_C:
                raise ValueError(f"temperature must lie above absolute zero (-273.15 degC), got {self.temperature!r} degC")
            object.__setattr__(self, "temperature", t)
        if self.thickness is not None:
            object.__setattr__(self, "thickness", _positive(self.thickness, "thickness", "m"))
        if self.resistivity is not None:
            object.__setattr__(self, "resistivity", _positive(self.resistivity, "resistivity", "ohm m"))
        if self.threshold is not None:
            th = _finite(self.threshold, "threshold")
            if th < 0:
                raise ValueError(f"threshold must not be negative [T], got {self.threshold!r}")
            object.__setattr__(self, "threshold", th)
        if self.h_dc is not None:
            object.__setattr__(self, "h_dc", _finite(self.h_dc, "h_dc"))
        for name in ("skin_effect", "minor_loops"):
            if not isinstance(getattr(self, name), (bool, np.bool_)):
                raise ValueError(f"{name} must be True or False, got {getattr(self, name)!r}")


# ---------------------------------------------------------------------------
# temperature: the one temperature factor
# ---------------------------------------------------------------------------
def reference_temperature(coefficients) -> float:
    """Temperature at which a material's temperature factor is 1 [degC].

    Parameters
    ----------
    coefficients : workbench.materials.TemperatureCoefficients
        ``ct0, ct1, ct2`` of ``c(T) = ct0 - ct1 T + ct2 T^2`` [-, 1/degC, 1/degC^2].

    Returns
    -------
    float
        The temperature where ``c(T) = 1`` nearest the factor's minimum (the
        minimum itself when it touches 1) [degC].

    Examples
    --------
    >>> from workbench.materials import TemperatureCoefficients
    >>> round(reference_temperature(TemperatureCoefficients(2.539, 0.0342, 0.00019)), 1)
    90.0
    """
    c0, c1, c2 = float(coefficients.ct0), float(coefficients.ct1), float(coefficients.ct2)
    if c2 == 0:
        if c1 == 0:
            raise ValueError("a constant temperature factor has no reference temperature")
        return (c0 - 1.0) / c1
    t_min = c1 / (2 * c2)
    disc = c1 * c1 - 4 * c2 * (c0 - 1.0)
    if disc <= 1e-9 * c1 * c1:
        return t_min
    roots = ((c1 - math.sqrt(disc)) / (2 * c2), (c1 + math.sqrt(disc)) / (2 * c2))
    return min(roots, key=lambda r: abs(r - t_min))


def _limit_temperature(material) -> tuple[float, str]:
    limit = getattr(material, "limit_temperature", None)
    if limit is None:
        return DEFAULT_TEMPERATURE_CEILING_C, "no working point of a magnetic core lies above it (common practice)"
    label = "its Curie temperature" if "ferrite" in getattr(material, "family", "") else "its limit temperature"
    return float(limit), label


def temperature_factor(material, temperature: float | None) -> tuple[float, float | None, list[str]]:
    """Multiplier of the Steinmetz coefficient at a core temperature, the temperature used, and warnings.

    Parameters
    ----------
    material : Material or BareSteinmetz
        Material data.
    temperature : float or None
        Core temperature [degC]; None takes the material's reference temperature.

    Returns
    -------
    factor : float
        ``c(T)`` [-] (1 for materials without temperature data).
    used : float or None
        Temperature the factor belongs to [degC] (None: not temperature dependent
        and none given).
    warnings : list of str
        The assumption made, in words.
    """
    name = getattr(material, "name", "the material")
    warnings: list[str] = []
    if temperature is not None:
        limit, label = _limit_temperature(material)
        if temperature > limit:
            raise ValueError(
                f"temperature {temperature:g} degC lies above {label} of {name} ({limit:g} degC): not a working point"
            )
    st = getattr(material, "steinmetz", None)
    coeffs = None if st is None else st.temperature
    if coeffs is None:
        if temperature is not None:
            warnings.append(
                f"{name} has no temperature data: its loss is taken as independent of temperature "
                f"(the value at {temperature:g} degC is the data's own)"
            )
        return 1.0, temperature, warnings
    used = temperature
    if used is None:
        used = reference_temperature(coeffs)
        at25 = float(coeffs.factor(25.0))
        warnings.append(
            f"no core temperature given: {name} evaluated at {used:.0f} degC, its data's reference temperature "
            f"(at 25 degC the loss would be {at25:.2g} times as high); give the temperature to evaluate it there"
        )
    valid = getattr(coeffs, "valid_range", None)
    if valid is not None and not valid[0] <= used <= valid[1]:
        warnings.append(
            f"core temperature {used:.4g} degC lies outside the temperature range of {name}'s data "
            f"({valid[0]:g}-{valid[1]:g} degC): the temperature factor is extrapolated"
        )
    factor = float(coeffs.factor(used))
    if not math.isfinite(factor) or factor <= 0:
        raise ValueError(f"temperature {used!r} degC gives a non-positive loss factor for {name}")
    return factor, used, warnings


# ---------------------------------------------------------------------------
# the laws of one waveform
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Relaxation:
    k_r: float
    alpha_r: float
    beta_r: float
    tau: float
    slopes: np.ndarray  # dB/dt entering each flat interval at the reference frequency [T/s]
    durations: np.ndarray  # flat-interval lengths at the reference frequency [s]
    q: np.ndarray  # direction factor of each interval [-]
    flux_pp: float


@dataclass(frozen=True)
class _Classical:
    """Classical eddy part of one waveform as a function of frequency, resistivity and thickness."""

    spectrum: models.EddySpectrum  # harmonic shares of the shape (phase units), from models.eddy_spectrum

    def __call__(self, freq, resistivity, thickness, rel_permeability):
        return np.asarray(self.spectrum.classical(freq, resistivity, thickness, rel_permeability), dtype=float)


@dataclass(frozen=True)
class LossLaws:
    """Loss parts of one waveform on one material, as laws in frequency and flux scale.

    Built by :func:`loss_laws`. ``parts(freq, scale)`` gives every part for the same
    flux shape played at ``freq`` with its flux multiplied by ``scale``:
    iGSE ~ f**alpha s**beta, relaxation per interval ~ |s f dB/dt|**alpha_r (s dB)**beta_r
    (1 - exp(-t/(tau f/f0))), hysteresis ~ f s**beta_h, excess ~ (f s)**1.5, classical
    ~ s**2 times the harmonic sum at f.
    """

    material: object
    ref_freq: float
    b_peak: float
    flux_pp: float
    b_abs_max: float
    alpha: float
    beta: float
    igse_ref: float
    minor_share: float
    n_minor_loops: int
    relaxation: _Relaxation | None
    hyst_ref: float | None
    beta_hyst: float | None
    excess_ref: float | None
    classical: _Classical
    thickness: float | None
    resistivity: float | None
    own_thickness: float | None
    own_resistivity: float | None
    rel_permeability: float | None
    temperature: float | None
    warnings: tuple[str, ...]

    @property
    def has_separation(self) -> bool:
        return self.hyst_ref is not None

    @property
    def model_name(self) -> str:
        return "i2GSE" if self.relaxation is not None else "iGSE"

    def parts(self, freq, scale=1.0, *, thickness=None, resistivity=None) -> dict:
        """Every loss part at frequencies ``freq`` and flux scale ``scale`` [W/m^3].

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz] (the shape is stretched in time).
        scale : array_like
            Flux multiplier [-], broadcast against ``freq``.
        thickness, resistivity : array_like, optional
            Lamination thickness [m] and resistivity [ohm m] of the classical part
            (default: the laws' own, i.e. the override or the material's).

        Returns
        -------
        dict
            ``total``, ``steinmetz`` (before any classical replacement),
            ``relaxation``, ``classical``, ``hysteresis``, ``excess``,
            ``separation_total`` (None where the material has no separation set) and
            ``floored`` (bool array: the override remainder was floored at zero).
        """
        f = np.asarray(freq, dtype=float)
        s = np.asarray(scale, dtype=float)
        u = self.unit_parts(f, thickness=thickness, resistivity=resistivity)
        igse = u["igse"] * s**self.beta
        relax = u["relaxation"] * s**self.relaxation_flux_exponent
        steinmetz = igse + relax
        classical = None if u["classical"] is None else u["classical"] * s**2
        total = steinmetz
        floored = np.zeros(np.shape(steinmetz), dtype=bool)
        if u["own_classical"] is not None:
            rest = steinmetz - u["own_classical"] * s**2
            same = u["same"]
            floored = (rest < 0) & ~same
            total = np.where(same, steinmetz, np.maximum(rest, 0.0) + classical)
        hyst = excess = sep_total = None
        if self.hyst_ref is not None:
            hyst = u["hysteresis"] * s**self.beta_hyst
            excess = u["excess"] * s**1.5
            sep_total = hyst + classical + excess if classical is not None else None
        return {"total": total, "steinmetz": steinmetz, "relaxation": relax, "classical": classical,
                "hysteresis": hyst, "excess": excess, "separation_total": sep_total, "floored": floored}

    @property
    def relaxation_flux_exponent(self) -> float:
        """Power of the flux scale in the relaxation part, alpha_r + beta_r [-] (0 without relaxation)."""
        rx = self.relaxation
        return 0.0 if rx is None else rx.alpha_r + rx.beta_r

    def unit_parts(self, freq, *, thickness=None, resistivity=None) -> dict:
        """The parts at flux scale 1, from which :meth:`parts` scales each by its power of the flux.

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz].
        thickness, resistivity : array_like, optional
            Lamination thickness [m] and resistivity [ohm m] of the classical part.

        Returns
        -------
        dict
            ``igse``, ``relaxation``, ``classical``, ``hysteresis``, ``excess`` [W/m^3] at
            scale 1 (flux powers beta, alpha_r + beta_r, 2, beta_h, 1.5), and for a
            replaced classical part ``own_classical`` (the material's own, power 2) and
            ``same`` (points where the override equals the material's); else None.
        """
        f = np.asarray(freq, dtype=float)
        x = f / self.ref_freq
        igse = self.igse_ref * x**self.alpha
        relax = np.zeros(np.shape(x))
        rx = self.relaxation
        if rx is not None:
            xc = np.asarray(x)[..., None]
            energy = (rx.k_r * np.abs(rx.slopes * xc) ** rx.alpha_r * rx.flux_pp**rx.beta_r
                      * (1.0 - np.exp(-rx.durations / (xc * rx.tau))) * rx.q)
            relax = f * np.sum(energy, axis=-1)
        d = self.thickness if thickness is None else np.asarray(thickness, dtype=float)
        rho = self.resistivity if resistivity is None else np.asarray(resistivity, dtype=float)
        classical = own = same = None
        if d is not None and rho is not None:
            classical = self.classical(f, rho, d, self.rel_permeability)
            overridden = (thickness is not None or resistivity is not None
                          or self.thickness != self.own_thickness or self.resistivity != self.own_resistivity)
            if overridden and self.own_thickness is not None:
                own = self.classical(f, self.own_resistivity, self.own_thickness, self.rel_permeability)
                same = np.asarray((d == self.own_thickness) & (rho == self.own_resistivity))
        hyst = excess = None
        if self.hyst_ref is not None:
            hyst = self.hyst_ref * x
            excess = self.excess_ref * x**1.5
        return {"igse": igse, "relaxation": relax, "classical": classical, "own_classical": own, "same": same,
                "hysteresis": hyst, "excess": excess}


def _relaxation_law(waveform: FluxWaveform, rx) -> _Relaxation | None:
    durations, before, after = models.flat_intervals(waveform)
    if durations.size == 0:
        return None
    q = models.relaxation_factors(before, after, rx.q_r)
    return _Relaxation(float(rx.k_r), float(rx.alpha_r), float(rx.beta_r), float(rx.tau),
                       np.asarray(before, float), np.asarray(durations, float), q, float(waveform.flux_pp))


def _classical_law(waveform: FluxWaveform) -> _Classical:
    return _Classical(models.eddy_spectrum(waveform))


def _sine_spectrum(b_peak: float) -> models.EddySpectrum:
    """Eddy spectrum of an ideal sine: one harmonic holding all of <(dB/dtheta)^2> = 2 pi^2 B^2."""
    share = 2 * math.pi**2 * b_peak**2
    empty = np.zeros(0)
    return models.EddySpectrum(share, np.array([1.0]), np.array([share]), empty, empty, 1, 0.0)


def _exact_sine(laws: "LossLaws", spec: ShapeSpec, k: float, sep) -> "LossLaws":
    """Laws of an ideal sine from closed forms instead of its sampled period.

    Steinmetz for a sine (the iGSE reproduces it exactly, Venkatachalam et al. 2002),
    ``pi^2 d^2 f^2 B^2 / (6 rho)`` for the classical part (mean square dB/dt
    ``2 pi^2 f^2 B^2``) and ``k_e (2 pi f B)^1.5 <|cos|^1.5>`` for the excess part
    (G. Bertotti, IEEE Trans. Magn. 24(1), 1988).
    """
    f, b = float(spec.freq), float(spec.b_peak)
    fields = dict(
        igse_ref=k * f**laws.alpha * b**laws.beta, minor_share=0.0, n_minor_loops=0, relaxation=None,
        classical=_Classical(_sine_spectrum(b)),
    )
    if sep is not None:
        fields.update(hyst_ref=float(sep.k_hyst) * f * b ** float(sep.beta_hyst),
                      excess_ref=float(sep.k_excess) * (2 * math.pi * f * b) ** 1.5 * float(models.mean_abs_cos_power(1.5)))
    return replace(laws, **fields)


# --- DC bias ---
#: Rough rise of loss under DC bias quoted when a material has no bias data.
_BIAS_RULE_OF_THUMB = (
    "under bias the loss of the same flux swing rises, for power ferrites by tens of per cent up to about "
    "twice the unbiased value or more as the bias approaches saturation (from memory, in line with the "
    "measurements of J. Muehlethaler et al., IEEE Trans. Power Electron. 27(2), 2012)"
)


def _bias_adjusted(material, k: float, alpha: float, beta: float, h_dc: float | None) -> tuple[float, float, float, list[str]]:
    """Steinmetz parameters under a DC bias field (the unbiased set when no bias is given)."""
    if h_dc is None or h_dc == 0:
        return k, alpha, beta, []
    name = getattr(material, "name", "the material")
    data = getattr(material, "bias", None)
    if data is None:
        return k, alpha, beta, [
            f"{name} has no DC-bias data: loss evaluated without the bias of {h_dc:.4g} A/m; {_BIAS_RULE_OF_THUMB}"
        ]
    from workbench.models.bias import bias_steinmetz

    b = bias_steinmetz(k, alpha, beta, h_dc, data)
    warnings = []
    if b.extrapolated:
        warnings.append(
            f"DC bias {b.h_dc:.4g} A/m lies beyond {name}'s bias data (up to {b.h_dc_max:g} A/m): the parameters at "
            f"{b.h_dc_max:g} A/m are used, so the loss is likely underestimated"
        )
    return b.k, b.alpha, b.beta, warnings
# --- DC bias ---


def _range_warnings(material, freq: float, b_peak: float) -> list[str]:
    st = getattr(material, "steinmetz", None)
    if st is None:
        return []
    out = []
    f_lo, f_hi = st.freq_range
    b_lo, b_hi = st.b_range
    if not f_lo <= freq <= f_hi:
        out.append(
            f"frequency {freq:.4g} Hz is outside the valid range of {material.name}'s Steinmetz set "
            f"({f_lo:.4g}-{f_hi:.4g} Hz): extrapolated"
        )
    if not b_lo <= b_peak <= b_hi:
        out.append(
            f"peak flux {b_peak:.4g} T is outside the valid range of {material.name}'s Steinmetz set "
            f"({b_lo:.4g}-{b_hi:.4g} T): extrapolated"
        )
    return out


def _as_waveform(waveform) -> FluxWaveform:
    if isinstance(waveform, ShapeSpec):
        return waveform.waveform()
    if not isinstance(waveform, FluxWaveform):
        raise ValueError(f"waveform must be a FluxWaveform or a ShapeSpec, got {type(waveform).__name__}")
    return waveform


def loss_laws(waveform, material, conditions: Conditions | None = None) -> LossLaws:
    """Reduce one waveform on one material to the laws of its loss parts (see :class:`LossLaws`).

    Parameters
    ----------
    waveform : FluxWaveform or ShapeSpec
        One period of flux.
    material : Material, str or BareSteinmetz
        Material, library name, or bare Steinmetz set.
    conditions : Conditions, optional
        Temperature, overrides, skin effect, minor loops, threshold, DC bias.

    Returns
    -------
    LossLaws
    """
    w = _as_waveform(waveform)
    mat = resolve_material(material)
    c = conditions or Conditions()
    warnings: list[str] = []
    factor, t_used, t_warn = temperature_factor(mat, c.temperature)
    warnings += t_warn
    st = getattr(mat, "steinmetz", mat)
    k, alpha, beta, b_warn = _bias_adjusted(mat, float(st.k) * factor, float(st.alpha), float(st.beta), c.h_dc)
    warnings += b_warn
    loops = models.decompose_loops(w, c.threshold) if c.minor_loops else None
    ig = models.igse_loops(w, k, alpha, beta, minor_loops=c.minor_loops, loops=loops)
    rx = getattr(mat, "relaxation", None)
    relax = _relaxation_law(w, rx) if rx is not None else None
    sep = getattr(mat, "separation", None)
    hyst = excess = beta_h = None
    if sep is not None:
        hyst = float(models.hysteresis_loss_waveform(w, sep.k_hyst, sep.beta_hyst, minor_loops=c.minor_loops, loops=loops))
        excess = float(models.excess_loss_waveform(w, sep.k_excess))
        beta_h = float(sep.beta_hyst)
    own_d = getattr(mat, "thickness", None)
    own_rho = getattr(mat, "resistivity", None)
    d = own_d if c.thickness is None else c.thickness
    rho = own_rho if c.resistivity is None else c.resistivity
    if isinstance(mat, BareSteinmetz):
        own_d = own_rho = None  # nothing to replace: the classical part is shown beside the set
        if (d is None) != (rho is None):
            raise ValueError("a bare Steinmetz set needs both thickness and resistivity for its classical eddy part")
    mu_r = getattr(mat, "rel_permeability", None) if c.skin_effect else None
    if isinstance(mat, BareSteinmetz) and c.skin_effect and d is not None:
        warnings.append("bare Steinmetz set: no permeability known, classical eddy part without skin effect")
    n_minor = max(int(ig.loop_flux_pp.size - 1), 0) if c.minor_loops else 0
    laws = LossLaws(
        material=mat, ref_freq=float(w.freq), b_peak=float(w.b_peak), flux_pp=float(w.flux_pp),
        b_abs_max=float(np.max(np.abs(w.b))), alpha=alpha, beta=beta, igse_ref=float(ig.total),
        minor_share=float(ig.minor_share), n_minor_loops=n_minor, relaxation=relax, hyst_ref=hyst,
        beta_hyst=beta_h, excess_ref=excess, classical=_classical_law(w), thickness=d, resistivity=rho,
        own_thickness=own_d, own_resistivity=own_rho, rel_permeability=mu_r, temperature=t_used,
        warnings=tuple(warnings),
    )
    if isinstance(waveform, ShapeSpec) and waveform.shape == "sine":
        laws = _exact_sine(laws, waveform, k, sep)
    return laws


# ---------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------
def _fmt(x) -> str:
    return "None" if x is None else f"{x:.4g}"


@dataclass(frozen=True)
class LossResult:
    """Loss of one waveform on one material. Loss densities in W/m^3.

    Attributes
    ----------
    material : str
        Material name (or the bare Steinmetz set in words).
    freq, b_peak, flux_pp : float
        Fundamental frequency [Hz], peak and peak-to-peak flux [T].
    total : float
        Headline loss [W/m^3]: the Steinmetz family (iGSE, or i2GSE where the
        material has relaxation data), with the classical part replaced when a
        thickness or resistivity override is given.
    total_model : str
        "iGSE" or "i2GSE".
    minor_loop_share : float
        Fraction of the iGSE part that comes from minor loops [-].
    n_minor_loops : int
        Number of minor loops found.
    hysteresis, classical, excess : float or None
        Separation parts [W/m^3]; hysteresis and excess are None where the
        material has no separation set; classical is None for a bare Steinmetz set
        without thickness and resistivity.
    separation_total : float or None
        hysteresis + classical + excess [W/m^3], when all three exist.
    relaxation : float
        i2GSE relaxation part included in ``total`` [W/m^3].
    density : float or None
        Material density [kg/m^3], for the W/kg figures (None for a bare set).
    temperature : float or None
        Core temperature the Steinmetz coefficient was evaluated at [degC].
    thickness, resistivity : float or None
        Lamination thickness [m] and resistivity [ohm m] of the classical part.
    skin_effect : bool
        Whether the classical part includes the skin effect.
    conditions : Conditions
        The conditions as given.
    warnings, notes : tuple of str
        Things to check (assumptions, outside the valid range, near saturation) and remarks.
    """

    material: str
    freq: float
    b_peak: float
    flux_pp: float
    total: float
    total_model: str
    minor_loop_share: float
    n_minor_loops: int
    hysteresis: float | None
    classical: float | None
    excess: float | None
    separation_total: float | None
    relaxation: float
    density: float | None
    temperature: float | None
    thickness: float | None
    resistivity: float | None
    skin_effect: bool
    conditions: Conditions = field(default_factory=Conditions, repr=False)
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    def __repr__(self) -> str:
        return (f"LossResult({self.material}, {self.freq:.4g} Hz, B_peak {self.b_peak:.4g} T: "
                f"{self.total_model} {self.total:.4g} W/m^3, hysteresis {_fmt(self.hysteresis)}, "
                f"classical {_fmt(self.classical)}, excess {_fmt(self.excess)}, {len(self.warnings)} warning(s))")

    # plain-named views -------------------------------------------------------
    @property
    def loss_w_m3(self) -> float:
        """Headline loss density [W/m^3]."""
        return self.total

    @property
    def loss_model(self) -> str:
        return self.total_model

    @property
    def hysteresis_w_m3(self) -> float | None:
        return self.hysteresis

    @property
    def classical_w_m3(self) -> float | None:
        return self.classical

    @property
    def excess_w_m3(self) -> float | None:
        return self.excess

    @property
    def relaxation_w_m3(self) -> float:
        return self.relaxation

    @property
    def temperature_c(self) -> float | None:
        return self.temperature

    def specific(self, value: float | None) -> float | None:
        """Convert a loss density to a specific loss [W/kg].

        Parameters
        ----------
        value : float or None
            Loss density [W/m^3]; None (or an unknown density) gives None.
        """
        return None if value is None or self.density is None else value / self.density

    @property
    def total_w_kg(self) -> float | None:
        return self.specific(self.total)

    loss_w_kg = total_w_kg

    def loss_w(self, volume: float) -> float:
        """Loss in a core of the given volume [W].

        Parameters
        ----------
        volume : float
            Core volume [m^3].
        """
        return self.total * _positive(volume, "volume", "m^3")

    @property
    def difference(self) -> float | None:
        """(separation total - headline total) / headline total [-], or None."""
        if self.separation_total is None or self.total == 0:
            return None
        return (self.separation_total - self.total) / self.total

    def to_dict(self) -> dict:
        """Plain dict with SI-suffixed keys, ready for JSON."""
        c = self.conditions
        out = {
            "material": self.material,
            "frequency_hz": self.freq,
            "b_peak_t": self.b_peak,
            "flux_pp_t": self.flux_pp,
            "loss_w_m3": self.total,
            "loss_w_kg": self.total_w_kg,
            "loss_model": self.total_model,
            "relaxation_w_m3": self.relaxation,
            "minor_loop_share": self.minor_loop_share,
            "n_minor_loops": self.n_minor_loops,
            "classical_w_m3": self.classical,
            "classical_w_kg": self.specific(self.classical),
            "hysteresis_w_m3": self.hysteresis,
            "hysteresis_w_kg": self.specific(self.hysteresis),
            "excess_w_m3": self.excess,
            "excess_w_kg": self.specific(self.excess),
            "separation_total_w_m3": self.separation_total,
            "separation_total_w_kg": self.specific(self.separation_total),
            "separation_vs_igse": self.difference,
            "thickness_m": self.thickness,
            "resistivity_ohm_m": self.resistivity,
            "skin_effect": self.skin_effect,
            "temperature_c": self.temperature,
            "density_kg_m3": self.density,
            "conditions": {
                "temperature_c": c.temperature, "thickness_m": c.thickness, "resistivity_ohm_m": c.resistivity,
                "skin_effect": c.skin_effect, "minor_loops": c.minor_loops, "threshold_t": c.threshold,
                "h_dc_a_m": c.h_dc,
            },
            "warnings": list(self.warnings),
            "notes": list(self.notes),
        }
        return out


def _pick(value, i):
    if value is None:
        return None
    return float(np.asarray(value).reshape(-1)[i])


def _result_from_laws(laws: LossLaws, conditions: Conditions, f: float) -> LossResult:
    p = laws.parts(np.array([f]))
    mat = laws.material
    name = mat.name
    warnings = list(laws.warnings)
    warnings += _range_warnings(mat, f, laws.b_peak)
    b_sat = getattr(mat, "b_sat", None)
    if b_sat is not None and laws.b_abs_max > NEAR_SATURATION * b_sat:
        warnings.append(
            f"flux reaches {laws.b_abs_max:.3g} T, {100 * laws.b_abs_max / b_sat:.0f} % of the saturation flux "
            f"density of {name} ({b_sat:.3g} T): loss models lose validity near saturation"
        )
    notes = []
    total = _pick(p["total"], 0)
    classical = _pick(p["classical"], 0)
    overridden = conditions.thickness is not None or conditions.resistivity is not None
    if overridden and laws.own_thickness is not None:
        notes.append(
            f"classical eddy part replaced: the {laws.model_name} loss of {name} (fitted at "
            f"{laws.own_thickness * 1e3:.3g} mm, {laws.own_resistivity:.3g} ohm m) minus its classical part there, "
            f"plus the classical part at {laws.thickness * 1e3:.3g} mm, {laws.resistivity:.3g} ohm m"
        )
        if bool(np.any(p["floored"])):
            warnings.append(
                f"the classical eddy part of {name} at its own thickness exceeds its {laws.model_name} loss here "
                "(far outside the fitted range): the rest was taken as zero"
            )
    if getattr(mat, "separation", "absent") is None:
        notes.append(f"{name} has no loss-separation set: only the classical eddy part is shown")
    sep_total = _pick(p["separation_total"], 0)
    reference = sep_total if sep_total is not None else total
    if classical is not None and reference > 0 and classical < NEGLIGIBLE_SHARE * reference:
        notes.append(
            f"classical eddy loss is negligible ({100 * classical / reference:.2g} % of the total): "
            f"the resistivity of {name} ({laws.resistivity:.3g} ohm m) keeps eddy currents small"
        )
    if isinstance(mat, BareSteinmetz):
        notes.append("bare Steinmetz set: no valid range, saturation or separation data to check against")
    values = [total] + [v for v in (classical, _pick(p["hysteresis"], 0), _pick(p["excess"], 0)) if v is not None]
    if not all(math.isfinite(v) for v in values):
        raise ValueError(f"the loss of {name} at {f:.4g} Hz, B_peak {laws.b_peak:.4g} T is not finite: "
                         "check the inputs (turns, area, frequency) for values far out of range")
    return LossResult(
        material=name, freq=f, b_peak=laws.b_peak, flux_pp=laws.flux_pp, total=total,
        total_model=laws.model_name, minor_loop_share=laws.minor_share, n_minor_loops=laws.n_minor_loops,
        hysteresis=_pick(p["hysteresis"], 0), classical=classical, excess=_pick(p["excess"], 0),
        separation_total=sep_total, relaxation=_pick(p["relaxation"], 0), density=getattr(mat, "density", None),
        temperature=laws.temperature, thickness=laws.thickness, resistivity=laws.resistivity,
        skin_effect=laws.rel_permeability is not None, conditions=conditions,
        warnings=tuple(warnings), notes=tuple(notes),
    )


def core_loss(waveform, material, *, temperature=None, thickness=None, resistivity=None, skin_effect: bool = True,
              minor_loops: bool = True, threshold=None, h_dc=None) -> LossResult:
    """Core loss of one period of flux on one material: the one place a loss is decided.

    Parameters
    ----------
    waveform : FluxWaveform or ShapeSpec
        One period of flux (a capture's averaged period, or a synthetic shape).
    material : Material, str or BareSteinmetz
        Library material, its name, or a bare Steinmetz set.
    temperature : float, optional
        Core temperature [degC]. None: a material with temperature data is evaluated
        at its reference temperature, and the result's warnings say so.
    thickness : float, optional
        Lamination thickness override [m] (replaces the classical part, see module notes).
    resistivity : float, optional
        Resistivity override [ohm m] (likewise).
    skin_effect : bool, optional
        Include the skin effect in the classical part (default True).
    minor_loops : bool, optional
        Count minor loops separately (iGSE procedure; default True).
    threshold : float, optional
        Smallest flux reversal counted as a loop [T]; default from the data.
    h_dc : float, optional
        DC bias field strength [A/m].

    Returns
    -------
    LossResult

    Notes
    -----
    iGSE [1]_ with the minor-loop procedure, plus the i2GSE relaxation after
    zero-voltage intervals where the material has relaxation data [2]_; beside it,
    the separation ``P = P_hyst + P_classical + P_excess`` [3]_ where the material
    has a separation set. The two models are shown side by side, never forced to agree.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate prediction
       of ferrite core loss with nonsinusoidal waveforms using only Steinmetz
       parameters", IEEE COMPEL 2002, pp. 36-41.
    .. [2] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Improved core-loss
       calculation for magnetic components employed in power electronic systems",
       IEEE Trans. Power Electron. 27(2), 2012, pp. 964-973.
    .. [3] G. Bertotti, "General properties of power losses in soft ferromagnetic
       materials", IEEE Trans. Magn. 24(1), 1988, pp. 621-630.

    Examples
    --------
    >>> from workbench.shapes import make_shape
    >>> r = core_loss(make_shape("sine", b_peak=1.5, freq=50), "M400-50A")
    >>> r.loss_model, round(r.loss_w_kg, 2)
    ('iGSE', 3.53)
    """
    c = Conditions(temperature, thickness, resistivity, skin_effect, minor_loops, threshold, h_dc)
    laws = loss_laws(waveform, material, c)
    return _result_from_laws(laws, c, laws.ref_freq)


# ---------------------------------------------------------------------------
# frequency sweeps and crossover
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class LossSweep:
    """Loss parts of one flux shape across frequency (the shape stretched in time). Arrays in W/m^3.

    Attributes
    ----------
    laws : LossLaws
        The laws the arrays were evaluated from.
    freq : numpy.ndarray
        Frequencies [Hz].
    total, classical : numpy.ndarray
        Headline loss and classical eddy part [W/m^3] (classical None for a bare set
        without lamination data).
    hysteresis, excess, separation_total : numpy.ndarray or None
        Separation parts [W/m^3]; None without a separation set.
    relaxation : numpy.ndarray
        i2GSE relaxation part included in ``total`` [W/m^3].
    warnings : tuple of str
        Assumptions and range warnings.
    """

    laws: LossLaws = field(repr=False)
    freq: np.ndarray
    total: np.ndarray
    classical: np.ndarray | None
    hysteresis: np.ndarray | None
    excess: np.ndarray | None
    separation_total: np.ndarray | None
    relaxation: np.ndarray
    warnings: tuple[str, ...]

    def __repr__(self) -> str:
        return (f"LossSweep({self.laws.material.name}, {self.freq.size} frequencies "
                f"{self.freq[0]:.4g}-{self.freq[-1]:.4g} Hz, {self.laws.model_name}, {len(self.warnings)} warning(s))")

    loss_w_m3 = property(lambda self: self.total)
    hysteresis_w_m3 = property(lambda self: self.hysteresis)
    classical_w_m3 = property(lambda self: self.classical)
    excess_w_m3 = property(lambda self: self.excess)


def _freq_array(freqs) -> np.ndarray:
    f = np.atleast_1d(np.asarray(freqs, dtype=float))
    if f.ndim != 1 or f.size < 1 or not np.all(np.isfinite(f)) or np.any(f <= 0):
        raise ValueError(f"freqs must be a 1-D array of finite positive frequencies [Hz], got {freqs!r}")
    return f


def core_loss_sweep(waveform, material, freqs, *, temperature=None, thickness=None, resistivity=None,
                    skin_effect: bool = True, minor_loops: bool = True, threshold=None, h_dc=None) -> LossSweep:
    """Loss parts of one flux shape played at other frequencies (flux levels kept, time scaled).

    Parameters
    ----------
    waveform : FluxWaveform or ShapeSpec
        One period of flux; a captured period works as well as a synthetic shape.
    material : Material, str or BareSteinmetz
        Material, library name, or bare Steinmetz set.
    freqs : array_like
        Frequencies [Hz].
    temperature, thickness, resistivity, skin_effect, minor_loops, threshold, h_dc
        As in :func:`core_loss` [degC, m, ohm m, -, -, T, A/m].

    Returns
    -------
    LossSweep
        At ``waveform.freq`` the values equal :func:`core_loss` to rounding.

    Examples
    --------
    >>> sw = core_loss_sweep(ShapeSpec("triangle", 0.1, 1.0, 0.3), "nanocrystalline", [10e3, 100e3])
    >>> [round(x) for x in sw.loss_w_m3]
    [2064, 92004]
    """
    f = _freq_array(freqs)
    c = Conditions(temperature, thickness, resistivity, skin_effect, minor_loops, threshold, h_dc)
    laws = loss_laws(waveform, material, c)
    p = laws.parts(f)
    for key in ("total", "classical", "hysteresis", "excess"):
        v = p[key]
        if v is not None and not np.all(np.isfinite(v)):
            raise ValueError(f"the {key} loss of {laws.material.name} is not finite over {f[0]:.4g}-{f[-1]:.4g} Hz")
    warnings = list(laws.warnings)
    st = getattr(laws.material, "steinmetz", None)
    if st is not None:
        lo, hi = st.freq_range
        out = (f < lo) | (f > hi)
        if np.any(out):
            warnings.append(f"{int(out.sum())} of {f.size} frequencies lie outside the valid range of "
                            f"{laws.material.name}'s Steinmetz set ({lo:.4g}-{hi:.4g} Hz): extrapolated there")
        warnings += [w for w in _range_warnings(laws.material, st.freq_range[0], laws.b_peak) if "peak flux" in w]
    if bool(np.any(p["floored"])):
        warnings.append(f"at some frequencies the classical eddy part of {laws.material.name} at its own thickness "
                        "exceeds its Steinmetz loss: the rest was taken as zero there")
    return LossSweep(laws=laws, freq=f, total=p["total"], classical=p["classical"], hysteresis=p["hysteresis"],
                     excess=p["excess"], separation_total=p["separation_total"], relaxation=p["relaxation"],
                     warnings=tuple(warnings))


def flux_scale_at_loss(laws: LossLaws, freq, loss_density: float) -> np.ndarray:
    """Flux multiplier at which the headline loss equals a budget, per frequency.

    Parameters
    ----------
    laws : LossLaws
        Laws of the shape (their flux is scale 1).
    freq : array_like
        Frequencies [Hz].
    loss_density : float
        Allowed loss density [W/m^3].

    Returns
    -------
    numpy.ndarray
        Scale s with ``total(f, s) = loss_density`` [-].

    Notes
    -----
    Every part grows with the flux scale as a power with a positive exponent, so the
    total is increasing in s; the pure iGSE gives the closed form
    ``s = (P / P_igse(f, 1))**(1/beta)``, refined by bisection on log s where
    relaxation or a replaced classical part bend the law.
    """
    f = _freq_array(freq)
    pv = _positive(loss_density, "loss_density", "W/m^3")
    u = laws.unit_parts(f)
    base = laws.parts(f)["total"]
    s = (pv / base) ** (1.0 / laws.beta)
    if laws.relaxation is None and u["own_classical"] is None:
        return s
    gamma = laws.relaxation_flux_exponent

    def total(scale):  # the law of parts(), evaluated from the unit parts: no harmonic sums here
        st = u["igse"] * scale**laws.beta + u["relaxation"] * scale**gamma
        if u["own_classical"] is None:
            return st
        replaced = np.maximum(st - u["own_classical"] * scale**2, 0.0) + u["classical"] * scale**2
        return np.where(u["same"], st, replaced)

    lo = np.log(s) - 20.0
    hi = np.log(s) + 20.0
    for _ in range(80):  # bisection on log s: 40 orders of magnitude to ~1e-12 relative
        mid = 0.5 * (lo + hi)
        above = total(np.exp(mid)) > pv
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    return np.exp(0.5 * (lo + hi))
