"""Loss breakdown of one waveform on one material: iGSE total next to the separation parts."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench import models
from workbench.waveforms import FluxWaveform

__all__ = ["LossBreakdown", "breakdown", "steinmetz_k_at"]

#: Classical share of the separation total below which we call it negligible.
NEGLIGIBLE_SHARE = 0.01
#: Fraction of the saturation flux density above which we warn.
NEAR_SATURATION = 0.8


@dataclass(frozen=True)
class LossBreakdown:
    """Loss of one waveform on one material. Loss densities in W/m^3.

    Attributes
    ----------
    material : str
        Material name.
    freq, b_peak, flux_pp : float
        Fundamental frequency [Hz], peak and peak-to-peak flux [T].
    total : float
        Loss from the Steinmetz family (iGSE, or i2GSE where the material has
        relaxation data) [W/m^3].
    total_model : str
        "iGSE" or "i2GSE".
    minor_loop_share : float
        Fraction of ``total`` that comes from minor loops [-].
    n_minor_loops : int
        Number of minor loops found.
    hysteresis, classical, excess : float or None
        Separation parts [W/m^3]; hysteresis and excess are None where the
        material has no separation set. Classical is always computed from
        resistivity and thickness.
    separation_total : float or None
        hysteresis + classical + excess [W/m^3], when all three exist.
    relaxation : float
        i2GSE relaxation part included in ``total`` [W/m^3].
    density : float
        Material density [kg/m^3], for the W/kg figures.
    temperature : float or None
        Core temperature used for the Steinmetz coefficient [degC].
    thickness, resistivity : float
        Lamination thickness [m] and resistivity [ohm m] used for the classical part.
    skin_effect : bool
        Whether the classical part includes the skin effect.
    warnings, notes : tuple of str
        Things to check (outside the valid range, near saturation) and remarks.
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
    classical: float
    excess: float | None
    separation_total: float | None
    relaxation: float
    density: float
    temperature: float | None
    thickness: float
    resistivity: float
    skin_effect: bool
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    def specific(self, value: float | None) -> float | None:
        """Convert a loss density to a specific loss [W/kg].

        Parameters
        ----------
        value : float or None
            Loss density [W/m^3]; None passes through.
        """
        return None if value is None else value / self.density

    @property
    def total_w_kg(self) -> float:
        return self.total / self.density

    @property
    def difference(self) -> float | None:
        """(separation total - iGSE total) / iGSE total [-], or None."""
        if self.separation_total is None or self.total == 0:
            return None
        return (self.separation_total - self.total) / self.total

    def to_dict(self) -> dict:
        """Plain dict with SI-suffixed keys, ready for JSON."""
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
            "thickness_m": self.thickness,
            "resistivity_ohm_m": self.resistivity,
            "skin_effect": self.skin_effect,
            "temperature_c": self.temperature,
            "density_kg_m3": self.density,
            "warnings": list(self.warnings),
            "notes": list(self.notes),
        }
        if self.hysteresis is not None:
            out.update(
                hysteresis_w_m3=self.hysteresis,
                hysteresis_w_kg=self.specific(self.hysteresis),
                excess_w_m3=self.excess,
                excess_w_kg=self.specific(self.excess),
                separation_total_w_m3=self.separation_total,
                separation_vs_igse=self.difference,
            )
        return out


def steinmetz_k_at(material, temperature: float | None) -> float:
    """Steinmetz coefficient k of a material at a core temperature.

    Parameters
    ----------
    material : workbench.materials.Material
        Material data [SI units].
    temperature : float or None
        Core temperature [degC]; None (or a material without temperature
        coefficients) gives the material's k.

    Returns
    -------
    float
        k [W/m^3 with f in Hz and B in T], times the material's temperature factor.
    """
    st = material.steinmetz
    if temperature is None or st.temperature is None:
        return st.k
    factor = float(st.temperature.factor(temperature))
    if not np.isfinite(factor) or factor <= 0:
        raise ValueError(
            f"temperature {temperature!r} degC gives a non-positive loss factor for {material.name}"
        )
    return st.k * factor


def _range_warnings(material, freq: float, b_peak: float, temperature) -> list[str]:
    st = material.steinmetz
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


def breakdown(
    waveform: FluxWaveform,
    material,
    *,
    temperature: float | None = None,
    thickness: float | None = None,
    resistivity: float | None = None,
    skin_effect: bool = True,
    minor_loops: bool = True,
    threshold: float | None = None,
) -> LossBreakdown:
    """Total loss and its hysteresis / classical eddy / excess parts for one waveform.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux.
    material : workbench.materials.Material
        Material data (see :func:`workbench.materials.get_material`).
    temperature : float, optional
        Core temperature [degC], used when the material has temperature coefficients.
    thickness : float, optional
        Lamination thickness [m]; default the material's.
    resistivity : float, optional
        Resistivity [ohm m]; default the material's.
    skin_effect : bool, optional
        Include the skin effect in the classical part (uses the material's
        relative permeability). Default True.
    minor_loops : bool, optional
        Count minor loops separately (iGSE procedure). Default True.
    threshold : float, optional
        Smallest reversal counted as a loop [T]; default derived from the data.

    Returns
    -------
    LossBreakdown

    Notes
    -----
    Two models of one loss are reported side by side and never forced to agree:
    the Steinmetz family (iGSE [1]_, i2GSE [2]_) and the separation
    ``P = P_hyst + P_classical + P_excess`` [3]_.

    References
    ----------
    .. [1] K. Venkatachalam et al., IEEE COMPEL 2002.
    .. [2] J. Muehlethaler et al., IEEE Trans. Power Electron. 27(2), 2012.
    .. [3] G. Bertotti, IEEE Trans. Magn. 24(1), 1988.
    """
    if not isinstance(waveform, FluxWaveform):
        raise ValueError(f"waveform must be a FluxWaveform, got {type(waveform).__name__}")
    d = material.thickness if thickness is None else float(thickness)
    rho = material.resistivity if resistivity is None else float(resistivity)
    for name, value in (("thickness", d), ("resistivity", rho)):
        if not np.isfinite(value) or value <= 0:
            raise ValueError(f"{name} must be finite and positive, got {value!r}")
    st = material.steinmetz
    k = steinmetz_k_at(material, temperature)
    loops = models.decompose_loops(waveform, threshold) if minor_loops else None
    ig = models.igse_loops(waveform, k, st.alpha, st.beta, minor_loops=minor_loops, loops=loops)
    total = ig.total
    model_name = "iGSE"
    relaxation = 0.0
    rx = getattr(material, "relaxation", None)
    if rx is not None:
        duration, _, _ = models.flat_intervals(waveform)
        if duration.size:
            res = models.i2gse(
                waveform, k, st.alpha, st.beta, rx.k_r, rx.alpha_r, rx.beta_r, rx.tau, rx.q_r,
                minor_loops=minor_loops, threshold=threshold,
            )
            total, relaxation, model_name = res.total, res.relaxation, "i2GSE"

    mu_r = material.rel_permeability if skin_effect else None
    classical = models.classical_eddy_waveform(waveform, rho, d, mu_r)
    sep = material.separation
    hyst = excess = sep_total = None
    if sep is not None:
        hyst = models.hysteresis_loss_waveform(waveform, sep.k_hyst, sep.beta_hyst, minor_loops=minor_loops, loops=loops)
        excess = models.excess_loss_waveform(waveform, sep.k_excess)
        sep_total = hyst + classical + excess

    warnings = _range_warnings(material, waveform.freq, waveform.b_peak, temperature)
    b_abs = float(np.max(np.abs(waveform.b)))
    if b_abs > NEAR_SATURATION * material.b_sat:
        warnings.append(
            f"flux reaches {b_abs:.3g} T, {100 * b_abs / material.b_sat:.0f} % of the saturation flux "
            f"density of {material.name} ({material.b_sat:.3g} T): loss models lose validity near saturation"
        )
    if temperature is not None and st.temperature is None:
        warnings.append(f"{material.name} has no temperature coefficients: temperature {temperature} degC ignored")
    notes = []
    if sep is None:
        notes.append(f"{material.name} has no loss-separation set: only the classical eddy part is shown")
    reference = sep_total if sep_total is not None else total
    if reference > 0 and classical < NEGLIGIBLE_SHARE * reference:
        notes.append(
            f"classical eddy loss is negligible ({100 * classical / reference:.2g} % of the total): "
            f"the resistivity of {material.name} ({rho:.3g} ohm m) keeps eddy currents small"
        )
    n_minor = int(ig.loop_flux_pp.size - 1) if minor_loops else 0
    return LossBreakdown(
        material=material.name,
        freq=waveform.freq,
        b_peak=waveform.b_peak,
        flux_pp=waveform.flux_pp,
        total=float(total),
        total_model=model_name,
        minor_loop_share=ig.minor_share,
        n_minor_loops=max(n_minor, 0),
        hysteresis=hyst,
        classical=float(classical),
        excess=excess,
        separation_total=sep_total,
        relaxation=relaxation,
        density=material.density,
        temperature=temperature,
        thickness=d,
        resistivity=rho,
        skin_effect=mu_r is not None,
        warnings=tuple(warnings),
        notes=tuple(notes),
    )
