"""Panel states: what each panel is set to and what it shows, with no widget or bokeh imports.

Each panel's settings are a frozen dataclass in SI units, validated on
construction (``ValueError`` naming the parameter and the value). A pure
function turns settings into a *view*: the plotted columns (numpy arrays keyed
as the panel's ``ColumnDataSource``) and the texts, computed only through the
library. The widget classes read their controls into settings, call the
function and copy the view into bokeh; scripts and benchmarks call the
function directly.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from workbench.analysis import SHAPES, sweep_frequency
from workbench.analysis.compare import MaterialComparison, compare_materials, skin_knee_frequency
from workbench.analysis.sweep import FrequencySweep
from workbench.checks import positive_number
from workbench.materials import get_material
from workbench.report.numbers import eng
from workbench.units import parse_quantity, unit_scale

__all__ = [
    "InputError",
    "FREQUENCY_PARTS",
    "material_defaults",
    "parse_frequency_list",
    "FrequencySettings",
    "FrequencyView",
    "frequency_view",
    "ComparisonSettings",
    "ComparisonView",
    "comparison_view",
    "CaptureSettings",
    "ReaderSettings",
    "READER_DELIMITERS",
    "READER_DECIMALS",
    "CaptureView",
    "capture_view",
    "capture_presets",
]


class InputError(ValueError):
    """A ValueError about named settings (``params``), so a panel can mark the controls that set them.

    Parameters
    ----------
    params : sequence of str
        Setting names the message is about (``("f_min", "f_max")``).
    message : str
        The message, naming the parameter and the value.
    """

    def __init__(self, params, message: str):
        self.params = tuple(params)
        super().__init__(message)


def _check_positive(name: str, value) -> float:
    try:
        return positive_number(value, name)
    except ValueError as exc:
        raise InputError((name,), str(exc)) from None


def _check_common(shape, duty, f_min, f_max, n_points):
    if shape not in SHAPES:
        raise InputError(("shape",), f"shape must be one of {', '.join(SHAPES)}, got {shape!r}")
    if not 0.0 < float(duty) < 1.0:
        raise InputError(("duty",), f"duty must lie strictly between 0 and 1, got {duty!r}")
    lo = _check_positive("f_min", f_min)
    hi = _check_positive("f_max", f_max)
    if not lo < hi:
        raise InputError(("f_min", "f_max"),
                         f"f_min must be below f_max, got f_min={f_min!r} Hz and f_max={f_max!r} Hz")
    if not isinstance(n_points, (int, np.integer)) or not 2 <= n_points <= 20000:
        raise InputError(("n_points",), f"n_points must be an integer from 2 to 20000, got {n_points!r}")


def _check_temperature(value) -> float | None:
    """A core temperature as typed in a panel [degC], or None (the engine refuses what lies above a material's limit)."""
    if value is None:
        return None
    try:
        t = float(value)
    except (TypeError, ValueError):
        t = math.nan
    if not math.isfinite(t) or t < -273.15:
        raise InputError(("temperature",), f"temperature must be a finite temperature in degC, got {value!r}")
    return t


def _check_h_dc(value) -> float | None:
    if value is None:
        return None
    try:
        h = float(value)
    except (TypeError, ValueError):
        h = math.nan
    if not math.isfinite(h):
        raise InputError(("h_dc",), f"DC bias H_dc must be a finite field strength in A/m, got {value!r}")
    return h


def _hz(x: float) -> str:
    return eng(x, "Hz", 4)


# ==========================================================================================
# frequency explorer
# ==========================================================================================
#: Parts drawn by the frequency explorer, in legend order: (key, legend label).
FREQUENCY_PARTS = (
    ("hysteresis", "hysteresis"),
    ("classical", "classical eddy"),
    ("excess", "excess"),
    ("eddy", "classical + excess (eddy, as counted)"),
    ("total", "sum of the three parts"),
    ("steinmetz", "model total"),
)


def _nice_decade(x: float, up: bool) -> float:
    e = math.log10(x)
    return 10.0 ** (math.ceil(e - 1e-9) if up else math.floor(e + 1e-9))


def material_defaults(material, b_peak: float | None = None) -> dict:
    """Sweep range and B_peak that suit a material, and why a value was changed.

    Parameters
    ----------
    material : str or workbench.materials.Material
        Library material.
    b_peak : float, optional
        The B_peak in use [T]; kept when it lies inside the material's fitted flux range and
        below 80 % of its saturation, otherwise capped (or raised) to the nearest such value.

    Returns
    -------
    dict
        ``f_min``, ``f_max`` [Hz] (from a tenth of the fitted range's low end to thirty
        times its high end, on whole decades), ``b_peak`` [T], ``b_peak_message``
        (None when ``b_peak`` was kept), ``b_max`` [T] (the cap).
    """
    m = get_material(material) if isinstance(material, str) else material
    f_lo, f_hi = m.steinmetz.freq_range
    b_lo, b_hi = m.steinmetz.b_range
    cap = min(b_hi, 0.8 * m.b_sat)  # 0.8 B_sat: common practice, no source (the engine warns above it too)
    out = {"f_min": _nice_decade(f_lo / 10, up=False), "f_max": _nice_decade(f_hi * 30, up=True),
           "b_max": cap, "b_peak": b_peak, "b_peak_message": None}
    if b_peak is None:
        out["b_peak"] = min(max(0.5 * (b_lo + b_hi), b_lo), cap)
    elif b_peak > cap:
        why = ("the top of its fitted flux range" if cap == b_hi else "80 % of its saturation flux density")
        out["b_peak"] = cap
        out["b_peak_message"] = (f"B_peak capped from {eng(b_peak, 'T', 4)} to {eng(cap, 'T', 4)}: {why} for "
                                 f"{m.name} (fitted {eng(b_lo, 'T')} to {eng(b_hi, 'T')}, saturation {eng(m.b_sat, 'T')})")
    elif b_peak < b_lo:
        out["b_peak"] = b_lo
        out["b_peak_message"] = (f"B_peak raised from {eng(b_peak, 'T', 4)} to {eng(b_lo, 'T', 4)}: the bottom of the "
                                 f"fitted flux range of {m.name}")
    return out


def parse_frequency_list(text: str) -> tuple[float, ...]:
    """Operating frequencies typed as ``"50, 400, 20k"`` -> Hz (empty text: none).

    Parameters
    ----------
    text : str
        Comma- or semicolon-separated frequencies, each with an optional prefix or unit.

    Returns
    -------
    tuple of float
        Frequencies [Hz] in the order typed, duplicates removed.
    """
    items = [t.strip() for t in str(text).replace(";", ",").split(",") if t.strip()]
    if len(items) > 12:
        raise InputError(("operating_freqs",), f"operating frequencies: at most 12, got {len(items)}")
    out = []
    for t in items:
        try:
            f = parse_quantity(t, "Hz", name="operating frequency")
        except ValueError as exc:
            raise InputError(("operating_freqs",), str(exc)) from None
        if not (math.isfinite(f) and f > 0):
            raise InputError(("operating_freqs",), f"operating frequency must be positive, got {t!r}")
        if f not in out:
            out.append(f)
    return tuple(out)


@dataclass(frozen=True)
class FrequencySettings:
    """Inputs of the frequency explorer (SI units).

    Attributes
    ----------
    material : str
        Library material name.
    shape : str
        Waveform shape, one of :data:`workbench.analysis.SHAPES`, or ``"waveform"`` to
        sweep ``waveform`` (a captured period) instead.
    duty : float
        Duty cycle [-] (ignored for the sine).
    b_peak : float
        Peak flux density [T] (of the shape; a waveform keeps its own flux).
    thickness : float or None
        Lamination thickness [m]; None for the material's.
    resistivity : float or None
        Resistivity [ohm m]; None for the material's.
    skin_effect : bool
        Skin effect in the classical part.
    include_excess : bool
        Whether the crossover counts the excess part as eddy loss.
    f_min, f_max : float
        Sweep range [Hz].
    n_points : int
        Number of log-spaced frequencies.
    temperature : float or None
        Core temperature [degC]; None for the material's reference temperature.
    per_mass : bool
        Show W/kg (and J/kg) instead of W/m^3.
    volume : float or None
        Core volume [m^3] for the loss in watts at the operating points.
    operating_freqs : tuple of float
        Frequencies [Hz] marked on the plot with a readout row each.
    compare_thickness, compare_resistivity : float or None
        A second lamination drawn over the first (thickness [m], resistivity [ohm m];
        None for the first one's); no overlay when both are None.
    waveform : workbench.waveforms.FluxWaveform or None
        One period of flux to sweep when ``shape == "waveform"`` (time scaled, flux kept).
    waveform_name : str
        What the waveform is (file name), for texts and reports.
    h_dc : float or None
        DC bias field strength [A/m] passed to the engine; None for no bias.
    """

    material: str = "M270-35A"
    shape: str = "sine"
    duty: float = 0.5
    b_peak: float = 1.0
    thickness: float | None = None
    resistivity: float | None = None
    skin_effect: bool = True
    include_excess: bool = False
    f_min: float = 10.0
    f_max: float = 1e6
    n_points: int = 400
    temperature: float | None = None
    per_mass: bool = False
    volume: float | None = None
    operating_freqs: tuple = ()
    compare_thickness: float | None = None
    compare_resistivity: float | None = None
    waveform: object = field(default=None, repr=False, compare=False)
    waveform_name: str = ""
    h_dc: float | None = None

    def __post_init__(self):
        if self.shape == "waveform":
            if self.waveform is None:
                raise InputError(("shape",), "shape 'waveform' needs a waveform (a captured period); none is loaded")
            _check_common("sine", self.duty, self.f_min, self.f_max, self.n_points)
        else:
            _check_common(self.shape, self.duty, self.f_min, self.f_max, self.n_points)
        _check_positive("b_peak", self.b_peak)
        for name in ("thickness", "resistivity", "volume", "compare_thickness", "compare_resistivity"):
            if getattr(self, name) is not None:
                _check_positive(name, getattr(self, name))
        object.__setattr__(self, "temperature", _check_temperature(self.temperature))
        freqs = tuple(float(f) for f in self.operating_freqs)
        for f in freqs:
            _check_positive("operating_freqs", f)
        object.__setattr__(self, "operating_freqs", freqs)
        object.__setattr__(self, "h_dc", _check_h_dc(self.h_dc))

    @property
    def has_overlay(self) -> bool:
        """Whether a second lamination is drawn."""
        return self.compare_thickness is not None or self.compare_resistivity is not None

    def to_dict(self) -> dict:
        return {
            "material": self.material, "shape": self.shape if self.shape != "waveform" else f"waveform: {self.waveform_name}",
            "duty": self.duty if self.shape in ("triangle", "trapezoid") else None,
            "b_peak_t": self.b_peak if self.shape != "waveform" else None,
            "thickness_m": self.thickness, "resistivity_ohm_m": self.resistivity, "skin_effect": self.skin_effect,
            "excess_counted_as_eddy": self.include_excess, "temperature_c": self.temperature,
            "f_min_hz": self.f_min, "f_max_hz": self.f_max, "n_points": self.n_points,
            "loss_axis": "W/kg" if self.per_mass else "W/m3", "core_volume_m3": self.volume,
            "operating_frequencies_hz": list(self.operating_freqs),
            "second_thickness_m": self.compare_thickness, "second_resistivity_ohm_m": self.compare_resistivity,
            "h_dc_a_m": self.h_dc,
        }


@dataclass(frozen=True)
class FrequencyView:
    """What the frequency explorer shows for one set of inputs.

    Attributes
    ----------
    settings : FrequencySettings
        The inputs.
    sweep : workbench.analysis.FrequencySweep
        The library's sweep.
    columns : dict of str to numpy.ndarray
        Plotted columns: ``freq`` [Hz]; the parts of :data:`FREQUENCY_PARTS` in ``unit``
        (W/m^3, or W/kg with ``per_mass``): ``hysteresis``, ``classical``, ``excess``,
        ``eddy`` (classical + excess, NaN unless the excess counts as eddy), ``total``
        (separation sum), ``steinmetz`` (the model total); the same with an ``e_`` prefix as
        energy per cycle P/f [J/m^3 or J/kg]; ``extrapolated`` (bool). Missing parts are NaN.
    unit, energy_unit : str
        ``"W/m3"``/``"J/m3"`` or ``"W/kg"``/``"J/kg"``.
    drawn : tuple of str
        Keys of the parts that have values (the legend lists only these).
    crossover_freq : float or None
        Crossover frequency [Hz] (the library's :func:`crossover_frequency`).
    knee_freq : float or None
        Skin-effect knee [Hz] (None with the skin effect off).
    crossover_text, knee_text : str
        The same in words.
    operating_rows : tuple of dict
        One row per operating frequency, computed there by the library (not read off the
        grid): ``frequency_hz``, ``hysteresis_w_m3``, ``classical_w_m3``, ``excess_w_m3``,
        ``separation_total_w_m3``, ``loss_w_m3`` (model total), ``loss_w_kg``, ``loss_w``
        (None without a volume), ``extrapolated``.
    overlay : dict or None
        The second lamination: ``columns`` (``freq``, ``classical``, ``eddy``, ``total``,
        ``steinmetz`` in ``unit``), ``sweep``, ``crossover_freq``, ``text``.
    warnings : tuple of str
        Things to check.
    """

    settings: FrequencySettings
    sweep: FrequencySweep
    columns: dict
    unit: str
    energy_unit: str
    drawn: tuple
    crossover_freq: float | None
    knee_freq: float | None
    crossover_text: str
    knee_text: str
    operating_rows: tuple = ()
    overlay: dict | None = None
    warnings: tuple[str, ...] = field(default=())


def _sweep(s: FrequencySettings, freqs, thickness, resistivity):
    shape = s.waveform if s.shape == "waveform" else s.shape
    return sweep_frequency(s.material, shape, b_peak=None if s.shape == "waveform" else s.b_peak, duty=s.duty,
                           freqs=freqs, thickness=thickness, resistivity=resistivity, skin_effect=s.skin_effect,
                           include_excess=s.include_excess, temperature=s.temperature, h_dc=s.h_dc)


def _parts(sw, include_excess: bool) -> dict:
    nan = np.full(sw.freq.shape, np.nan)
    eddy = sw.classical + sw.excess if include_excess and sw.excess is not None else nan
    return {
        "hysteresis": nan if sw.hysteresis is None else sw.hysteresis,
        "classical": sw.classical,
        "excess": nan if sw.excess is None else sw.excess,
        "eddy": eddy,
        "total": nan if sw.separation_total is None else sw.separation_total,
        "steinmetz": sw.total,
    }


def frequency_view(settings: FrequencySettings) -> FrequencyView:
    """Compute everything the frequency explorer shows (one refresh).

    Parameters
    ----------
    settings : FrequencySettings
        Inputs.

    Returns
    -------
    FrequencyView
    """
    s = settings
    material = get_material(s.material)
    freqs = np.geomspace(s.f_min, s.f_max, s.n_points)
    sw = _sweep(s, freqs, s.thickness, s.resistivity)
    parts = _parts(sw, s.include_excess)
    if s.per_mass:
        unit, energy_unit = "W/kg", "J/kg"
        shown = {k: sw.specific(v) for k, v in parts.items()}
    else:
        unit, energy_unit = "W/m3", "J/m3"
        shown = parts
    columns = {"freq": freqs}
    columns.update(shown)
    columns.update({f"e_{k}": sw.energy_per_cycle(v) for k, v in shown.items()})
    columns["extrapolated"] = sw.extrapolated
    drawn = tuple(k for k, _ in FREQUENCY_PARTS if np.any(np.isfinite(shown[k])))

    cx = sw.crossover
    if cx.freq is not None:
        crossover_text = f"Crossover at {eng(cx.freq, 'Hz', 4)}: {cx.message}."
    else:
        crossover_text = f"No crossover: {cx.message}."
    knee = None
    if s.skin_effect:
        knee = skin_knee_frequency(sw.resistivity, sw.thickness, material.rel_permeability)
        knee_text = (f"Skin-effect knee at {eng(knee, 'Hz', 4)} (thickness = 3 skin depths for mu_r = "
                     f"{material.rel_permeability:.4g}): above it the classical part grows as f^1.5 instead of f^2.")
    else:
        knee_text = "Skin effect off: the classical part follows the thin-sheet law (f^2) at every frequency."

    rows = []
    if s.operating_freqs:
        ops = np.array(sorted(s.operating_freqs))
        at = _sweep(s, ops, s.thickness, s.resistivity)
        lo, hi = at.valid_freq_range
        for i, f in enumerate(ops):
            def pick(a, i=i):
                return None if a is None else float(a[i])

            total = float(at.total[i])
            rows.append({
                "frequency_hz": float(f), "hysteresis_w_m3": pick(at.hysteresis), "classical_w_m3": pick(at.classical),
                "excess_w_m3": pick(at.excess), "separation_total_w_m3": pick(at.separation_total),
                "loss_w_m3": total, "loss_w_kg": pick(at.specific(at.total)),
                "loss_w": None if s.volume is None else total * s.volume,
                "extrapolated": bool(f < lo or f > hi)})

    overlay = None
    if s.has_overlay:
        d2 = s.compare_thickness if s.compare_thickness is not None else sw.thickness
        r2 = s.compare_resistivity if s.compare_resistivity is not None else sw.resistivity
        sw2 = _sweep(s, freqs, d2, r2)
        p2 = _parts(sw2, s.include_excess)
        if s.per_mass:
            p2 = {k: sw2.specific(v) for k, v in p2.items()}
        cx2 = sw2.crossover
        first = eng(cx.freq, "Hz", 4) if cx.freq is not None else "none in range"
        second = eng(cx2.freq, "Hz", 4) if cx2.freq is not None else "none in range"
        text = (f"Second lamination {eng(d2, 'm', 3, prefix='m')}, {eng(r2, 'ohm m', 3)}: crossover {second} "
                f"(first lamination {eng(sw.thickness, 'm', 3, prefix='m')}, {eng(sw.resistivity, 'ohm m', 3)}: "
                f"{first}).")
        overlay = {"columns": {"freq": freqs, "classical": p2["classical"], "eddy": p2["eddy"], "total": p2["total"],
                               "steinmetz": p2["steinmetz"]},
                   "sweep": sw2, "crossover_freq": cx2.freq, "text": text, "thickness_m": d2, "resistivity_ohm_m": r2}

    warnings = list(sw.warnings) + [w for w in cx.warnings if w not in sw.warnings]
    st = material.steinmetz
    f_lo, f_hi = st.freq_range
    b_lo, b_hi = st.b_range
    warnings.append(f"{material.name}: Steinmetz set fitted over {eng(f_lo, 'Hz')} to {eng(f_hi, 'Hz')} and "
                    f"{eng(b_lo, 'T')} to {eng(b_hi, 'T')}; grey bands are extrapolated.")
    if s.shape != "waveform" and s.b_peak > 0.8 * material.b_sat and not any("saturation" in w for w in warnings):
        warnings.append(f"B_peak {eng(s.b_peak, 'T')} is {100 * s.b_peak / material.b_sat:.0f} % of the saturation flux "
                        f"density of {material.name} ({eng(material.b_sat, 'T')}): loss models lose validity near saturation.")
    if sw.hysteresis is None:
        warnings.append(f"{material.name} has no loss-separation set: hysteresis and excess are not drawn and the "
                        "crossover compares the classical part with the model total.")
    if s.per_mass and sw.density is None:
        raise InputError(("per_mass",), f"{material.name} has no density: W/kg cannot be shown")
    return FrequencyView(s, sw, columns, unit, energy_unit, drawn, cx.freq, knee, crossover_text, knee_text,
                         tuple(rows), overlay, tuple(dict.fromkeys(warnings)))


# ==========================================================================================
# material comparison
# ==========================================================================================
@dataclass(frozen=True)
class ComparisonSettings:
    """Inputs of the material comparison (SI units).

    Attributes
    ----------
    materials : tuple of str
        Library material names.
    shape : str
        Waveform shape.
    duty : float
        Duty cycle [-].
    b_peak : float
        Peak flux of the loss curves [T].
    loss_density : float
        Allowed loss density of the f * B_peak curves [W/m^3].
    design_freq : float
        Frequency at which the summary table is read [Hz].
    f_min, f_max : float
        Sweep range [Hz].
    n_points : int
        Number of log-spaced frequencies.
    per_mass : bool
        Loss curves in W/kg instead of W/m^3.
    volume : float or None
        Core volume [m^3] for the loss in watts at the design frequency.
    h_dc : float or None
        DC bias field strength [A/m] passed to the engine; None for no bias.
    temperature : float or None
        Core temperature [degC]; None for each material's reference temperature (stated in the warnings).
    """

    materials: tuple[str, ...] = ("M270-35A", "fe-amorphous", "nanocrystalline", "mnzn-power-ferrite")
    shape: str = "sine"
    duty: float = 0.5
    b_peak: float = 0.1
    loss_density: float = 200e3
    design_freq: float = 20e3
    f_min: float = 10.0
    f_max: float = 1e6
    n_points: int = 400
    per_mass: bool = False
    volume: float | None = None
    h_dc: float | None = None
    temperature: float | None = None

    def __post_init__(self):
        _check_common(self.shape, self.duty, self.f_min, self.f_max, self.n_points)
        object.__setattr__(self, "h_dc", _check_h_dc(self.h_dc))
        object.__setattr__(self, "temperature", _check_temperature(self.temperature))
        if self.volume is not None:
            _check_positive("volume", self.volume)
        if isinstance(self.materials, str) or not self.materials:
            raise InputError(("materials",), f"materials must be a non-empty sequence of names, got {self.materials!r}")
        object.__setattr__(self, "materials", tuple(self.materials))
        _check_positive("b_peak", self.b_peak)
        _check_positive("loss_density", self.loss_density)
        _check_positive("design_freq", self.design_freq)

    def to_dict(self) -> dict:
        return {
            "materials": list(self.materials), "shape": self.shape, "duty": self.duty, "b_peak_t": self.b_peak,
            "loss_density_w_m3": self.loss_density, "design_frequency_hz": self.design_freq,
            "f_min_hz": self.f_min, "f_max_hz": self.f_max, "n_points": self.n_points,
            "loss_axis": "W/kg" if self.per_mass else "W/m3", "core_volume_m3": self.volume, "h_dc_a_m": self.h_dc,
            "temperature_c": self.temperature,
        }


@dataclass(frozen=True)
class ComparisonView:
    """What the material comparison shows.

    Attributes
    ----------
    settings : ComparisonSettings
    comparison : workbench.analysis.compare.MaterialComparison
    loss_lines, loss_lines_extrapolated : dict
        Multi-line columns (``xs``, ``ys``, ``material``, ``colour``, ``dash``) of the loss
        curves [Hz, W/m^3 or W/kg with ``per_mass``], inside and outside the fitted ranges
        (NaN elsewhere).
    fb_lines, fb_lines_extrapolated : dict
        Same for f * B_peak [Hz, Hz T].
    summary_rows : tuple of dict
        One row per material at the design frequency (computed there, not read off the grid);
        ``loss_w`` is the loss in the core volume [W] (None without a volume).
    best_fb : str or None
        Material with the largest f * B_peak inside its fitted ranges at the design frequency.
    notes : tuple of str
    warnings : tuple of str
        The engine's warnings for the materials (e.g. a bias without bias data), each once.
    """

    settings: ComparisonSettings
    comparison: MaterialComparison
    loss_lines: dict
    loss_lines_extrapolated: dict
    fb_lines: dict
    fb_lines_extrapolated: dict
    summary_rows: tuple
    best_fb: str | None
    notes: tuple[str, ...]
    warnings: tuple[str, ...] = ()


def _split(values: np.ndarray, valid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Values inside (NaN elsewhere) and outside (NaN elsewhere, joined to the inside at the edges)."""
    inside = np.where(valid, values, np.nan)
    out_mask = ~valid
    joined = out_mask.copy()
    joined[1:] |= out_mask[:-1]
    joined[:-1] |= out_mask[1:]
    outside = np.where(joined, values, np.nan)
    return inside, outside


def comparison_view(settings: ComparisonSettings, *, colours=None, dashes=None) -> ComparisonView:
    """Compute everything the material comparison shows (one refresh).

    Parameters
    ----------
    settings : ComparisonSettings
        Inputs.
    colours, dashes : sequence of str, optional
        Line colour and dash per material (default all black, solid).

    Returns
    -------
    ComparisonView
    """
    s = settings
    mats = [get_material(name) for name in s.materials]
    freqs = np.geomspace(s.f_min, s.f_max, s.n_points)
    cmp = compare_materials(mats, s.shape, b_peak=s.b_peak, loss_density=s.loss_density, duty=s.duty, freqs=freqs,
                            h_dc=s.h_dc, temperature=s.temperature)
    n = len(cmp.curves)
    colours = list(colours) if colours is not None else ["#000000"] * n
    dashes = list(dashes) if dashes is not None else ["solid"] * n
    names = [c.material for c in cmp.curves]

    def lines(kind):
        ins, outs = [], []
        for c in cmp.curves:
            loss = c.loss_w_kg if s.per_mass else c.loss
            values, valid = (loss, c.loss_valid) if kind == "loss" else (c.fb, c.fb_valid)
            a, b = _split(values, valid)
            ins.append(a)
            outs.append(b)
        base = {"material": names, "colour": colours[:n], "dash": dashes[:n]}
        return ({"xs": [freqs] * n, "ys": ins, **base}, {"xs": [freqs] * n, "ys": outs, **base})

    loss_in, loss_out = lines("loss")
    fb_in, fb_out = lines("fb")
    at = compare_materials(mats, s.shape, b_peak=s.b_peak, loss_density=s.loss_density, duty=s.duty,
                           freqs=np.array([s.design_freq]), h_dc=s.h_dc, temperature=s.temperature)
    rows = []
    for c in at.curves:
        rows.append({
            "material": c.material,
            "frequency_hz": float(s.design_freq),
            "loss_w_m3": float(c.loss[0]),
            "loss_w_kg": float(c.loss_w_kg[0]),
            "loss_w": None if s.volume is None else float(c.loss[0]) * s.volume,
            "loss_valid": bool(c.loss_valid[0]),
            "b_peak_at_loss_density_t": float(c.b_usable[0]),
            "saturation_limited": bool(c.saturation_limited[0]),
            "f_b_peak_t_hz": float(c.fb[0]),
            "f_b_peak_valid": bool(c.fb_valid[0]),
        })
    best = at.best_at(s.design_freq, by="fb")
    warnings = tuple(dict.fromkeys([*cmp.warnings, *at.warnings]))
    return ComparisonView(s, cmp, loss_in, loss_out, fb_in, fb_out, tuple(rows), best, cmp.notes, warnings)


# ==========================================================================================
# capture analysis
# ==========================================================================================
#: Options of a demo file's ``analyse with:`` metadata line -> CaptureSettings field.
_PRESET_OPTIONS = {"--turns": "turns", "--sense-turns": "sense_turns", "--area": "area", "--volume": "volume",
                   "--path-length": "path_length", "--material": "material"}


def capture_presets(metadata) -> dict:
    """Geometry and material a capture file suggests for itself, as typed (not parsed).

    Parameters
    ----------
    metadata : Mapping[str, str]
        Reader metadata; the ``analyse with`` entry holds ``--turns 20 --area 60mm2 ...``.

    Returns
    -------
    dict
        CaptureSettings field name -> text, for the options present.
    """
    text = str(dict(metadata).get("analyse with", ""))
    tokens = text.split()
    out = {}
    for key, value in zip(tokens, tokens[1:]):
        if key in _PRESET_OPTIONS and not value.startswith("--"):
            out[_PRESET_OPTIONS[key]] = value
    return out


#: Delimiter choices of the capture reader ("detected": the reader's guess).
READER_DELIMITERS = ("detected", "comma", "semicolon", "tab", "space")
#: Decimal-mark choices of the capture reader ("detected": the reader's guess).
READER_DECIMALS = ("detected", "point", "comma")


@dataclass(frozen=True)
class ReaderSettings:
    """How a capture file is read: overrides of the reader's guesses (defaults: detected).

    Attributes
    ----------
    delimiter : str
        One of :data:`READER_DELIMITERS`.
    decimal : str
        One of :data:`READER_DECIMALS`.
    time_unit : str
        Unit of the time column as written (``"us"``); empty for the header's (else s).
    channels : str
        What columns hold, typed ``"NAME=MEANING, ..."`` (NAME a header name or 0-based
        index; MEANING voltage, sense voltage, current, flux density, flux, time or ignore),
        parsed as the command line's ``--channel``
        (:func:`workbench.cli.reader_options.parse_channel_map`); empty for the guesses.
    """

    delimiter: str = "detected"
    decimal: str = "detected"
    time_unit: str = ""
    channels: str = ""

    def __post_init__(self):
        if self.delimiter not in READER_DELIMITERS:
            raise InputError(("delimiter",), f"delimiter must be one of {', '.join(READER_DELIMITERS)}, "
                                             f"got {self.delimiter!r}")
        if self.decimal not in READER_DECIMALS:
            raise InputError(("decimal",), f"decimal mark must be one of {', '.join(READER_DECIMALS)}, "
                                           f"got {self.decimal!r}")
        object.__setattr__(self, "time_unit", str(self.time_unit).strip())
        object.__setattr__(self, "channels", str(self.channels).strip())
        if self.time_unit:
            try:
                unit_scale(self.time_unit, "s")
            except ValueError as exc:
                raise InputError(("time_unit",), f"time unit {self.time_unit!r}: {exc}") from None
        self.channel_map()  # malformed pairs are refused here, at the box

    def channel_map(self) -> dict:
        """Column -> meaning from ``channels`` (empty when nothing is typed)."""
        from workbench.cli.reader_options import parse_channel_map

        items = [t.strip() for t in self.channels.replace(";", ",").split(",") if t.strip()]
        try:
            return parse_channel_map(items, "channel mapping")
        except ValueError as exc:
            raise InputError(("channels",), str(exc)) from None

    def options(self) -> dict:
        """Keyword arguments of :func:`workbench.capture.read_capture` (only the overrides given)."""
        out: dict = {}
        if self.delimiter != "detected":
            out["delimiter"] = self.delimiter
        if self.decimal != "detected":
            out["decimal"] = self.decimal
        if self.time_unit:
            out["time_unit"] = self.time_unit
        channels = self.channel_map()
        if channels:
            out["channels"] = channels
        return out

    def key(self) -> tuple:
        """Hashable form of the options (a panel caches one read per file and options)."""
        opts = self.options()
        return tuple(sorted((k, tuple(sorted((str(c), m) for c, m in v.items())) if isinstance(v, dict) else v)
                            for k, v in opts.items()))

    def to_dict(self) -> dict:
        channels = {str(k): v for k, v in self.channel_map().items()}
        return {"delimiter": self.delimiter, "decimal_mark": self.decimal, "time_unit": self.time_unit or None,
                "channel_mapping": channels or None}


@dataclass(frozen=True)
class CaptureSettings:
    """Inputs of the capture panel besides the capture itself (SI units; None = not given).

    Attributes
    ----------
    turns : float or None
        Turns N1 of the winding the voltage (or the current, two-winding) is on [-].
    sense_turns : float or None
        Turns N2 of the sense winding [-]; default ``turns``.
    area : float or None
        Effective cross-section A_e [m^2].
    volume : float or None
        Effective volume V_e [m^3]; default ``area * path_length``.
    path_length : float or None
        Effective path length l_e [m].
    material : str or None
        Library material for the model loss.
    temperature : float or None
        Core temperature [degC].
    deskew : float or None
        Delay of the current probe against the voltage probe [s] (the current is read
        this much later before the loss integral); None for none.
    winding_resistance : float or None
        Resistance of the winding of a single-winding V-I capture [ohm].
    h_dc : float or None
        DC bias field strength [A/m] overriding the capture's own ``N I_dc / l_e``.
    """

    turns: float | None = None
    sense_turns: float | None = None
    area: float | None = None
    volume: float | None = None
    path_length: float | None = None
    material: str | None = None
    temperature: float | None = None
    deskew: float | None = None
    winding_resistance: float | None = None
    h_dc: float | None = None

    def __post_init__(self):
        for name in ("turns", "sense_turns", "area", "volume", "path_length"):
            if getattr(self, name) is not None:
                _check_positive(name, getattr(self, name))
        object.__setattr__(self, "temperature", _check_temperature(self.temperature))
        if self.deskew is not None and not math.isfinite(float(self.deskew)):
            raise InputError(("deskew",), f"deskew must be a finite time in s, got {self.deskew!r}")
        if self.winding_resistance is not None:
            r = float(self.winding_resistance)
            if not (math.isfinite(r) and r >= 0):
                raise InputError(("winding_resistance",),
                                 f"winding resistance must be zero or positive in ohm, got {self.winding_resistance!r}")
        object.__setattr__(self, "h_dc", _check_h_dc(self.h_dc))

    @property
    def effective_volume(self) -> float | None:
        """V_e [m^3]: the volume given, else area * path length, else None."""
        if self.volume is not None:
            return self.volume
        if self.area is not None and self.path_length is not None:
            return self.area * self.path_length
        return None

    def to_dict(self) -> dict:
        return {"turns": self.turns, "sense_turns": self.sense_turns, "area_m2": self.area, "volume_m3": self.volume,
                "path_length_m": self.path_length, "material": self.material, "temperature_c": self.temperature,
                "deskew_s": self.deskew, "winding_resistance_ohm": self.winding_resistance, "h_dc_a_m": self.h_dc}


@dataclass(frozen=True)
class CaptureView:
    """What the capture panel shows.

    Attributes
    ----------
    settings : CaptureSettings
    analysis : workbench.analysis.capture.CaptureAnalysis
        The library's result.
    period : dict of str to numpy.ndarray
        One averaged period, closed at t = T: ``t`` [s], ``t_display`` (in ``time_unit``),
        ``b`` [T], ``dbdt`` [T/s] (slope of the segment starting at each sample), ``h`` [A/m]
        (NaN without a current channel).
    time_unit : str
        ``"ms"`` or ``"µs"``.
    has_loop : bool
        Whether a B-H loop exists.
    loss_rows : tuple of (str, float, float or None, float or None)
        (part, W/m^3, W/kg, W in the core) rows: separation parts, model total, measured.
    summary : str
        Frequency, periods used, spread, waveform class in words.
    """

    settings: CaptureSettings
    analysis: object
    period: dict
    time_unit: str
    has_loop: bool
    loss_rows: tuple
    summary: str


def capture_view(data, settings: CaptureSettings) -> CaptureView:
    """Analyse a capture through :func:`workbench.analysis.capture.analyse_capture` and lay out what to show.

    Parameters
    ----------
    data : workbench.capture.CaptureData
        The capture as read.
    settings : CaptureSettings
        Geometry and material.

    Returns
    -------
    CaptureView
    """
    from workbench.analysis.capture import analyse_capture

    s = settings
    material = get_material(s.material) if s.material else None
    a = analyse_capture(data, turns=s.turns, sense_turns=s.sense_turns, area=s.area, volume=s.volume,
                        path_length=s.path_length, material=material, temperature=s.temperature, deskew=s.deskew,
                        winding_resistance=s.winding_resistance, h_dc=s.h_dc)
    w = a.waveform
    t = np.append(w.t, w.period)
    b = np.append(w.b, w.b[0])
    slopes = w.dbdt()
    dbdt = np.append(slopes, slopes[0])
    h = np.full(t.shape, np.nan) if a.h is None else np.append(a.h, a.h[0])
    scale, unit = (1e3, "ms") if w.period >= 2e-3 else (1e6, "µs")
    period = {"t": t, "t_display": t * scale, "b": b, "dbdt": dbdt, "h": h}
    density = material.density if material is not None else None
    volume = a.volume if a.volume is not None else s.effective_volume

    def row(label, value):
        if value is None:
            return None
        return (label, float(value), None if density is None else float(value) / density,
                None if volume is None else float(value) * volume)

    rows = [row("hysteresis", a.hysteresis), row("classical eddy", a.classical), row("excess", a.excess)]
    sep_total = getattr(a.model, "separation_total", None) if a.model is not None else None
    if sep_total is not None:
        rows.append(row("sum of the three parts", sep_total))
    if a.model_loss is not None:
        label = f"{a.model.total_model if a.model is not None else 'iGSE'} prediction ({a.model_name})"
        rows.append(row(label, a.model_loss))
    if a.measured_loss is not None:
        method = a.measured_method or "two-winding"
        copper = " incl. copper loss" if method == "single-winding" and not a.inputs.get("winding_resistance_ohm") else ""
        rows.append(row(f"measured ({method}{copper})", a.measured_loss))
    summary = (f"Detected frequency {_hz(a.freq)}; {a.periods_used} whole periods averaged of "
               f"{a.periods_in_record:.3g} in the record (period-to-period spread {100 * a.spread:.2g} %); "
               f"B_peak {eng(a.b_peak, 'T', 4)}, B_dc {eng(w.b_dc if abs(w.b_dc) > 1e-4 * a.b_peak else 0.0, 'T', 3)}; {a.waveform_class} waveform, "
               f"flux rising for {100 * a.duty:.3g} % of the period; flux from {a.kind} channel(s).")
    if a.h_dc is not None:
        how = "as typed" if s.h_dc is not None else "N I_dc / l_e from the capture's mean current"
        summary += f" DC bias H_dc {eng(a.h_dc, 'A/m', 4)} ({how})."
    else:
        summary += " No DC bias applied (H_dc not given and none derived from the capture)."
    if a.ratio is not None:
        summary += f" Measured / predicted = {a.ratio:.3g}."
    return CaptureView(s, a, period, unit, a.h is not None, tuple(r for r in rows if r is not None), summary)
