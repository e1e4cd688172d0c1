"""Comparing core materials at one waveform: loss against frequency and the reachable f * B_peak.

Two views that designers of converter magnetics use to shortlist materials:

* the loss density of each material against frequency at one peak flux, and
* the product ``f * B_peak`` each material reaches at one allowed loss density
  (a heat budget), against frequency. A larger product means fewer turns or a
  smaller core for the same volt-seconds at that frequency.

Both come from the loss engine's laws of the shape (:func:`workbench.engine.loss_laws`):
the loss at one flux is the engine's headline loss (iGSE, or i2GSE with relaxation),
and the flux reachable at a loss density solves the same law for the flux scale
(a closed form for the pure iGSE, which scales as ``f**alpha * B_peak**beta``). Every
point outside the range over which the Steinmetz set was fitted is flagged, and the
flux is capped at the material's saturation flux density.

Pure numpy; no widgets, no plotting.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench import models
from workbench.analysis.sweep import DEFAULT_FREQS, _shape
from workbench.checks import positive_number
from workbench.engine import Conditions, flux_scale_at_loss, loss_laws, resolve_material
from workbench.shapes import ShapeSpec

__all__ = [
    "MaterialCurve",
    "MaterialComparison",
    "igse_at_unit_flux",
    "compare_materials",
    "skin_knee_frequency",
]


def _positive_scalar(value, name: str) -> float:
    return positive_number(value, name)


def _freq_array(freqs) -> np.ndarray:
    f = DEFAULT_FREQS if freqs is None else np.asarray(freqs, dtype=float)
    if f.ndim != 1 or f.size < 1 or not np.all(np.isfinite(f)) or np.any(f <= 0):
        raise ValueError(f"freqs must be a 1-D array of finite positive frequencies [Hz], got {freqs!r}")
    return f


def igse_at_unit_flux(material, shape: str = "sine", *, duty: float = 0.5, temperature: float | None = None) -> float:
    """iGSE loss density of a shape at 1 Hz and B_peak = 1 T.

    Parameters
    ----------
    material : workbench.materials.Material
        Material with a Steinmetz set.
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape (see :func:`workbench.analysis.make_shape`).
    duty : float
        Duty cycle of the shape [-].
    temperature : float, optional
        Core temperature [degC] for materials with temperature coefficients.

    Returns
    -------
    float
        ``P1`` [W/m^3] such that ``P(f, B_peak) = P1 * f**alpha * B_peak**beta``.

    Notes
    -----
    The iGSE integrand ``k_i |dB/dt|**alpha (Delta B)**(beta - alpha)`` is
    homogeneous: stretching a shape in time by 1/f multiplies it by ``f**alpha``
    and scaling its flux by B multiplies it by ``B**beta``. One evaluation at
    1 Hz and 1 T therefore gives the whole surface. Minor loops scale the same
    way, so they are kept.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
       prediction of ferrite core loss with nonsinusoidal waveforms using only
       Steinmetz parameters", IEEE COMPEL 2002, pp. 36-41.
    """
    laws = loss_laws(ShapeSpec(shape, 1.0, 1.0, duty), material, Conditions(temperature=temperature))
    return float(laws.igse_ref)


@dataclass(frozen=True)
class MaterialCurve:
    """One material's curves in a comparison. Arrays share the comparison's frequency axis.

    Attributes
    ----------
    material : str
        Material name.
    family : str
        Material family.
    loss : numpy.ndarray
        iGSE loss density at the comparison flux [W/m^3].
    loss_w_kg : numpy.ndarray
        Same as specific loss [W/kg].
    b_loss_limited : numpy.ndarray
        Peak flux that gives the comparison loss density [T] (may exceed saturation).
    b_usable : numpy.ndarray
        ``min(b_loss_limited, b_sat)`` [T].
    fb : numpy.ndarray
        ``freq * b_usable`` [Hz T] (= T/s).
    saturation_limited : numpy.ndarray of bool
        True where the flux is capped at saturation rather than by loss.
    loss_valid : numpy.ndarray of bool
        True where the frequency and the comparison flux lie inside the
        Steinmetz set's fitted ranges.
    fb_valid : numpy.ndarray of bool
        True where the frequency and ``b_usable`` lie inside the fitted ranges.
    alpha, beta : float
        Steinmetz exponents used [-].
    p_unit : float
        iGSE loss at 1 Hz, 1 T for the shape [W/m^3].
    b_sat, density : float
        Saturation flux density [T] and density [kg/m^3].
    freq_range, b_range : tuple of float
        Fitted ranges of the Steinmetz set [Hz], [T].
    loss_model : str
        "iGSE" or "i2GSE", as the engine chose for the shape.
    """

    material: str
    family: str
    loss: np.ndarray
    loss_w_kg: np.ndarray
    b_loss_limited: np.ndarray
    b_usable: np.ndarray
    fb: np.ndarray
    saturation_limited: np.ndarray
    loss_valid: np.ndarray
    fb_valid: np.ndarray
    alpha: float
    beta: float
    p_unit: float
    b_sat: float
    density: float
    freq_range: tuple[float, float]
    b_range: tuple[float, float]
    loss_model: str = "iGSE"

    def __repr__(self) -> str:
        return f"MaterialCurve({self.material}, {self.loss.size} points, {self.loss_model})"


@dataclass(frozen=True)
class MaterialComparison:
    """Several materials at one waveform.

    Attributes
    ----------
    freq : numpy.ndarray
        Frequencies [Hz].
    shape : str
        Waveform shape.
    duty : float
        Duty cycle [-].
    b_peak : float
        Peak flux of the loss curves [T].
    loss_density : float
        Allowed loss density of the f * B_peak curves [W/m^3].
    temperature : float or None
        Core temperature [degC].
    curves : tuple of MaterialCurve
        One per material, in the order given.
    notes : tuple of str
        Remarks in words (materials never valid at the comparison flux, ...).
    """

    freq: np.ndarray
    shape: str
    duty: float
    b_peak: float
    loss_density: float
    temperature: float | None
    curves: tuple[MaterialCurve, ...]
    notes: tuple[str, ...]
    warnings: tuple[str, ...] = ()

    def __repr__(self) -> str:
        names = ", ".join(c.material for c in self.curves)
        return (f"MaterialComparison({self.shape}, B_peak {self.b_peak:.4g} T, {self.loss_density:.4g} W/m^3, "
                f"{self.freq.size} frequencies: {names}; {len(self.warnings)} warning(s))")

    def curve(self, name: str) -> MaterialCurve:
        """The curve of one material by name.

        Parameters
        ----------
        name : str
            Material name.
        """
        for c in self.curves:
            if c.material == name:
                return c
        raise ValueError(f"material {name!r} is not in this comparison; it has {', '.join(c.material for c in self.curves)}")

    def peak_fb(self, name: str) -> tuple[float, float] | None:
        """(frequency [Hz], f*B_peak [Hz T]) where one material's f*B_peak peaks inside its
        fitted ranges, or None when no point is valid.

        Parameters
        ----------
        name : str
            Material name.
        """
        c = self.curve(name)
        if not np.any(c.fb_valid):
            return None
        i = int(np.argmax(np.where(c.fb_valid, c.fb, -np.inf)))
        return float(self.freq[i]), float(c.fb[i])

    def best_at(self, freq: float, *, by: str = "fb") -> str | None:
        """Name of the material with the largest ``fb`` (``by="fb"``) or the lowest loss
        (``by="loss"``) at the sample nearest ``freq``, among points inside the fitted
        ranges; None if no material is valid there.

        Parameters
        ----------
        freq : float
            Frequency [Hz].
        by : {"fb", "loss"}
            What "best" means.
        """
        if by not in ("fb", "loss"):
            raise ValueError(f"by must be 'fb' or 'loss', got {by!r}")
        i = int(np.argmin(np.abs(np.log(self.freq) - np.log(_positive_scalar(freq, "freq")))))
        best, best_value = None, None
        for c in self.curves:
            if by == "fb" and c.fb_valid[i]:
                value = c.fb[i]
                if best_value is None or value > best_value:
                    best, best_value = c.material, value
            elif by == "loss" and c.loss_valid[i]:
                value = c.loss[i]
                if best_value is None or value < best_value:
                    best, best_value = c.material, value
        return best

    def to_dict(self) -> dict:
        """Plain dict with SI-suffixed keys, ready for JSON."""
        return {
            "shape": self.shape,
            "duty": self.duty,
            "b_peak_t": self.b_peak,
            "loss_density_w_m3": self.loss_density,
            "temperature_c": self.temperature,
            "frequency_hz": self.freq.tolist(),
            "materials": [
                {
                    "material": c.material,
                    "family": c.family,
                    "alpha": c.alpha,
                    "beta": c.beta,
                    "b_sat_t": c.b_sat,
                    "valid_frequency_hz": list(c.freq_range),
                    "valid_b_peak_t": list(c.b_range),
                    "loss_w_m3": c.loss.tolist(),
                    "loss_w_kg": c.loss_w_kg.tolist(),
                    "loss_valid": c.loss_valid.tolist(),
                    "b_peak_at_loss_density_t": c.b_usable.tolist(),
                    "saturation_limited": c.saturation_limited.tolist(),
                    "f_b_peak_t_hz": c.fb.tolist(),
                    "f_b_peak_valid": c.fb_valid.tolist(),
                }
                for c in self.curves
            ],
            "notes": list(self.notes),
            "warnings": list(self.warnings),
        }


def compare_materials(materials, shape="sine", *, b_peak: float | None = None, loss_density: float, duty: float = 0.5,
                      freqs=None, temperature: float | None = None, h_dc: float | None = None) -> MaterialComparison:
    """Loss against frequency at one flux, and f * B_peak at one loss density, for several materials.

    Parameters
    ----------
    materials : sequence of workbench.materials.Material or str
        Materials (or library names) to compare (at least one, names unique).
    shape : {"sine", "triangle", "trapezoid"} or FluxWaveform
        Waveform shape, or one period of flux (a captured one): its flux shape is
        kept and time scaled to each frequency.
    b_peak : float, optional
        Peak flux density of the loss curves [T] (with a shape name; a waveform
        brings its own).
    loss_density : float
        Allowed loss density of the f * B_peak curves [W/m^3] (e.g. 200e3 W/m^3 = 200 mW/cm^3).
    duty : float
        Duty cycle of the shape [-].
    freqs : array_like, optional
        Frequencies [Hz]; default 400 points from 10 Hz to 1 MHz.
    temperature : float, optional
        Core temperature [degC] for materials with temperature coefficients.
    h_dc : float, optional
        DC bias field strength [A/m].

    Returns
    -------
    MaterialComparison

    Notes
    -----
    With ``P1`` the iGSE loss of the shape at 1 Hz and 1 T
    (:func:`igse_at_unit_flux`), the loss is ``P = P1 f**alpha B**beta`` and the
    flux that dissipates ``P_v`` is

    .. math:: \\hat B(f) = \\left(\\frac{P_v}{P_1 f^{\\alpha}}\\right)^{1/\\beta}

    capped at ``b_sat``; the figure of merit is ``f * min(B, b_sat)``. For a sine
    ``P1 = k`` and this is the Steinmetz equation solved for B. Where the material has
    relaxation data (i2GSE) the loss is not a single power of B and the flux is found by
    bisection on the engine's law.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, IEEE COMPEL 2002.
    .. [2] C. P. Steinmetz, "On the law of hysteresis", Trans. AIEE 9, 1892.

    Examples
    --------
    >>> c = compare_materials(["M270-35A", "fe-amorphous"], "sine", b_peak=1.0, loss_density=100e3, freqs=[400.0])
    >>> [(x.material, round(float(x.loss[0])), round(float(x.b_usable[0]), 3)) for x in c.curves]
    [('M270-35A', 143872, 0.815), ('fe-amorphous', 6552, 1.56)]
    """
    mats = [resolve_material(m) for m in materials]
    if not mats:
        raise ValueError("materials must name at least one material, got an empty selection")
    names = [m.name for m in mats]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(f"materials must be unique, got {', '.join(dup)} more than once")
    wave = _shape(shape, None if b_peak is None else _positive_scalar(b_peak, "b_peak"), duty)
    named = isinstance(wave, ShapeSpec)
    if named:
        wave = ShapeSpec(wave.shape, wave.b_peak, 1.0, wave.duty)
    b = float(wave.b_peak)
    pv = _positive_scalar(loss_density, "loss_density")
    f = _freq_array(freqs)
    curves = []
    notes = []
    warnings = []
    for m in mats:
        st = m.steinmetz
        laws = loss_laws(wave, m, Conditions(temperature=temperature, h_dc=h_dc))
        warnings += [w if m.name in w else f"{m.name}: {w}" for w in laws.warnings]
        loss = laws.parts(f)["total"]
        b_loss = b * flux_scale_at_loss(laws, f, pv)
        b_use = np.minimum(b_loss, m.b_sat)
        f_lo, f_hi = st.freq_range
        b_lo, b_hi = st.b_range
        f_ok = (f >= f_lo) & (f <= f_hi)
        loss_valid = f_ok & (b_lo <= b <= b_hi)
        fb_valid = f_ok & (b_use >= b_lo) & (b_use <= b_hi)
        if not (b_lo <= b <= b_hi):
            notes.append(f"{m.name}: B_peak {b:.4g} T is outside its fitted flux range "
                         f"{b_lo:.4g}-{b_hi:.4g} T; its loss curve is extrapolated everywhere")
        if b > m.b_sat:
            notes.append(f"{m.name}: B_peak {b:.4g} T exceeds its saturation flux density {m.b_sat:.3g} T")
        if not np.any(fb_valid):
            notes.append(f"{m.name}: no point of the f*B_peak curve lies inside its fitted ranges "
                         f"({f_lo:.4g}-{f_hi:.4g} Hz, {b_lo:.4g}-{b_hi:.4g} T) at {pv:.4g} W/m^3")
        curves.append(MaterialCurve(
            material=m.name, family=m.family, loss=loss, loss_w_kg=loss / m.density,
            b_loss_limited=b_loss, b_usable=b_use, fb=f * b_use, saturation_limited=b_loss > m.b_sat,
            loss_valid=loss_valid, fb_valid=fb_valid, alpha=float(st.alpha), beta=float(st.beta),
            p_unit=float(laws.igse_ref / b**laws.beta), b_sat=float(m.b_sat), density=float(m.density),
            freq_range=(float(f_lo), float(f_hi)), b_range=(float(b_lo), float(b_hi)), loss_model=laws.model_name,
        ))
    return MaterialComparison(freq=f, shape=wave.shape if named else "waveform", duty=float(duty) if named else None,
                              b_peak=b, loss_density=pv,
                              temperature=temperature, curves=tuple(curves), notes=tuple(notes),
                              warnings=tuple(warnings))


def skin_knee_frequency(resistivity: float, thickness: float, rel_permeability: float) -> float:
    """Frequency above which the skin effect bends the classical eddy loss of a lamination.

    Parameters
    ----------
    resistivity : float
        Electrical resistivity [ohm m].
    thickness : float
        Lamination thickness [m].
    rel_permeability : float
        Relative permeability [-].

    Returns
    -------
    float
        Knee frequency [Hz].

    Notes
    -----
    The classical loss is ``P_cl(f) F(d/delta)``, where ``F -> 1`` for thin sheets
    (``P ~ f**2``) and ``F -> 3 delta / d`` once the skin depth is small
    (``P ~ f**1.5``). The two asymptotes meet where ``d = 3 delta``:

    .. math:: f_{knee} = \\frac{9 \\rho}{\\pi \\mu_0 \\mu_r d^2}

    Below about a third of this the thin-sheet formula is within a few per cent.

    References
    ----------
    .. [1] J. Lammeraner, M. Stafl, *Eddy Currents*, Iliffe, 1966, ch. 4.
    .. [2] G. Bertotti, *Hysteresis in Magnetism*, Academic Press, 1998, sec. 12.2.
    """
    rho = _positive_scalar(resistivity, "resistivity")
    d = _positive_scalar(thickness, "thickness")
    mu_r = _positive_scalar(rel_permeability, "rel_permeability")
    return 9.0 * rho / (np.pi * models.MU_0 * mu_r * d**2)
