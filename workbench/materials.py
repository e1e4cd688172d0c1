"""Material data types and the loader of the material library.

The bundled library lives in ``data/materials.toml`` (installed as
``workbench/_data/materials.toml`` in a wheel). A user library with the same
format (default ``~/.config/fluxheat/materials.toml``, or the file named by the
``WORKBENCH_USER_LIBRARY`` environment variable) adds materials of one's own;
it may not reuse a bundled name. The file format and the provenance rules are
described in ``data/README.md``.

Every numeric value in a library file is written as
``field = { value = ..., source = "..." }``: the number and where it comes
from. Loading checks every value (finite, positive where physical, exponents in
plausible ranges, ranges ordered, a source for every number) and fails with a
``ValueError`` that names the file, the material, the field and the value.

All quantities are SI: loss densities in W/m^3, frequency in Hz, flux density
in T, resistivity in ohm m, thickness in m, density in kg/m^3, temperature in
degC.

Only the standard library and numpy are imported here.
"""
from __future__ import annotations

import functools
import math
import os
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType

import numpy as np

from workbench.fileio import locked, write_text_atomic

__all__ = [
    "TemperatureCoefficients",
    "SteinmetzParams",
    "SeparationParams",
    "RelaxationParams",
    "BiasParams",
    "Material",
    "bundled_library_path",
    "user_library_path",
    "load_materials",
    "get_material",
    "list_materials",
    "material_to_toml",
    "save_user_material",
]

SCHEMA_VERSION = 1
USER_LIBRARY_ENV = "WORKBENCH_USER_LIBRARY"

# family -> True when the material is a metal in sheet, strip or ribbon form
# (laminated: the classical eddy-current formula for a thin sheet applies).
_FAMILIES: Mapping[str, bool] = MappingProxyType({
    "electrical-steel-no": True,    # non-oriented fully processed silicon steel
    "electrical-steel-go": True,    # grain-oriented silicon steel
    "soft-iron": True,              # low-carbon (pure) iron sheet
    "cobalt-iron": True,
    "nickel-iron": True,
    "amorphous": True,              # amorphous ribbon
    "nanocrystalline": True,        # nanocrystalline ribbon
    "mnzn-ferrite": False,
    "nizn-ferrite": False,
    "iron-powder": False,           # insulated iron powder, distributed gap
    "alloy-powder": False,          # insulated alloy powder, distributed gap
})

_NAME_RE = re.compile(r"[A-Za-z0-9][A-Za-z0-9 ._+%()/-]{0,63}")

# Temperatures over which a temperature factor must stay positive [degC].
_TEMPERATURE_CHECK = (-40.0, 200.0)


# --------------------------------------------------------------------------
# data types
# --------------------------------------------------------------------------
@dataclass(frozen=True)
class TemperatureCoefficients:
    """Quadratic temperature factor of a power ferrite's Steinmetz loss.

    Parameters
    ----------
    ct0 : float
        Constant term [-].
    ct1 : float
        Linear coefficient [1/degC] (subtracted).
    ct2 : float
        Quadratic coefficient [1/degC^2].
    valid_range : tuple of float, optional
        Core temperatures the factor was fitted over, (low, high) [degC]; outside it
        the factor is extrapolated (the engine says so).

    Notes
    -----
    The loss density at temperature :math:`T` is the Steinmetz value times

    .. math:: c(T) = c_{t0} - c_{t1} T + c_{t2} T^2

    with :math:`T` in degC; the coefficients are normally chosen so that
    :math:`c(T) = 1` at the loss minimum (80-100 degC for power ferrites).

    References
    ----------
    .. [1] E. C. Snelling, "Soft Ferrites: Properties and Applications",
       2nd ed., Butterworths, 1988 (temperature dependence of ferrite loss).
    """

    ct0: float
    ct1: float
    ct2: float
    valid_range: tuple[float, float] | None = None

    def __post_init__(self):
        if self.valid_range is not None:
            object.__setattr__(self, "valid_range", _as_pair(self.valid_range))

    def factor(self, temperature):
        """Loss multiplier at a core temperature.

        Parameters
        ----------
        temperature : float or array_like
            Core temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            Factor :math:`c_{t0} - c_{t1} T + c_{t2} T^2` [-], same shape as
            ``temperature`` (a float for scalar input).

        Raises
        ------
        ValueError
            If any temperature is not finite.
        """
        from workbench.models.steinmetz import steinmetz_temperature_factor  # the one home of the formula

        return steinmetz_temperature_factor(temperature, self.ct0, self.ct1, self.ct2)


@dataclass(frozen=True)
class SteinmetzParams:
    """Steinmetz coefficients with their range of validity.

    Parameters
    ----------
    k : float
        Coefficient [W/m^3 for f in Hz and B_peak in T].
    alpha : float
        Frequency exponent [-].
    beta : float
        Flux-density exponent [-].
    freq_range : tuple of float
        Frequencies over which the set is valid, (low, high) [Hz].
    b_range : tuple of float
        Peak flux densities over which the set is valid, (low, high) [T].
    temperature : TemperatureCoefficients or None
        Temperature factor (ferrites); None where the set is for one
        temperature only.

    Notes
    -----
    Sinusoidal loss density :math:`P = k f^{\\alpha} B_{peak}^{\\beta}` [W/m^3],
    times :math:`c(T)` when ``temperature`` is given.

    References
    ----------
    .. [1] C. P. Steinmetz, "On the law of hysteresis", Trans. AIEE, 9,
       pp. 3-64, 1892.
    """

    k: float
    alpha: float
    beta: float
    freq_range: tuple[float, float]
    b_range: tuple[float, float]
    temperature: TemperatureCoefficients | None = None

    def __post_init__(self):
        object.__setattr__(self, "freq_range", _as_pair(self.freq_range))
        object.__setattr__(self, "b_range", _as_pair(self.b_range))


@dataclass(frozen=True)
class SeparationParams:
    """Coefficients of the three-term loss separation of a laminated metal.

    Parameters
    ----------
    k_hyst : float
        Hysteresis coefficient [W/m^3 for f in Hz and B_peak in T].
    beta_hyst : float
        Hysteresis flux exponent [-].
    k_excess : float
        Excess (anomalous) loss coefficient [W/m^3 / (T/s)^1.5].

    Notes
    -----
    Loss density [W/m^3] with sheet thickness :math:`d` and resistivity
    :math:`\\rho` from the material:

    .. math::

        P = k_h f B_{peak}^{\\beta_h}
            + \\frac{d^2}{12 \\rho} \\langle (dB/dt)^2 \\rangle
            + k_e \\langle |dB/dt|^{1.5} \\rangle

    For a sine the last two terms are :math:`\\pi^2 d^2 f^2 B_{peak}^2/(6\\rho)`
    and :math:`8.763\\, k_e (f B_{peak})^{1.5}`.

    References
    ----------
    .. [1] G. Bertotti, "General properties of power losses in soft
       ferromagnetic materials", IEEE Trans. Magn., 24(1), pp. 621-630, 1988.
    """

    k_hyst: float
    beta_hyst: float
    k_excess: float


@dataclass(frozen=True)
class RelaxationParams:
    """Relaxation-loss coefficients of the i2GSE.

    Parameters
    ----------
    k_r : float
        Relaxation coefficient [J/m^3 for dB/dt in T/s and flux change in T].
    alpha_r : float
        Exponent of the rate of change of flux density before the flat
        interval [-].
    beta_r : float
        Exponent of the flux change [-].
    tau : float
        Relaxation time constant [s].
    q_r : float
        Exponent describing how the relaxation energy depends on the
        ratio of the rates of change before and after a switching event [-].

    Notes
    -----
    Energy per transition to a flat (zero-voltage) interval of length
    :math:`t` [J/m^3]:

    .. math:: E_r = k_r |dB/dt|^{\\alpha_r} (\\Delta B)^{\\beta_r} (1 - e^{-t/\\tau})

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Improved
       core-loss calculation for magnetic components employed in power
       electronic systems", IEEE Trans. Power Electron., 27(2),
       pp. 964-973, 2012. doi:10.1109/TPEL.2011.2162252
    """

    k_r: float
    alpha_r: float
    beta_r: float
    tau: float
    q_r: float


@dataclass(frozen=True)
class BiasParams:
    """Steinmetz parameters under DC bias, as a table against the bias field strength.

    Parameters
    ----------
    h_dc : tuple of float
        DC bias field strengths, increasing from 0 [A/m].
    k_ratio : tuple of float
        k at each bias over k without bias [-] (1 at 0 A/m).
    alpha_shift : tuple of float
        alpha at each bias minus alpha without bias [-] (0 at 0 A/m).
    beta_shift : tuple of float
        beta at each bias minus beta without bias [-] (0 at 0 A/m).

    Notes
    -----
    At bias :math:`H_{dc}` the sine loss density is

    .. math:: P = k\\, r_k(H_{dc})\\, f^{\\alpha + \\Delta\\alpha(H_{dc})}
              \\hat B^{\\beta + \\Delta\\beta(H_{dc})}

    with the material's unbiased k, alpha, beta and the table interpolated linearly
    (:func:`workbench.models.bias.bias_steinmetz`).

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Core losses under the DC
       bias condition based on Steinmetz parameters", IEEE Trans. Power Electron.,
       27(2), pp. 953-963, 2012 (Steinmetz parameters against premagnetisation).
    """

    h_dc: tuple
    k_ratio: tuple
    alpha_shift: tuple
    beta_shift: tuple

    def __post_init__(self):
        for name in _BIAS_FIELDS:
            object.__setattr__(self, name, tuple(getattr(self, name)))


@dataclass(frozen=True)
class Material:
    """A magnetic material with its loss coefficients and their provenance.

    Parameters
    ----------
    name : str
        Library name (unique, case-insensitively).
    family : str
        Material family, e.g. ``"electrical-steel-no"`` or ``"mnzn-ferrite"``.
    description : str
        One or two sentences for people.
    density : float
        Mass density [kg/m^3].
    resistivity : float
        Electrical resistivity [ohm m].
    b_sat : float
        Saturation flux density [T].
    rel_permeability : float
        Typical a.c. relative permeability, used for the skin depth [-].
    thickness : float
        Lamination or ribbon thickness; for bulk ferrites and powders the
        characteristic eddy-current dimension documented in the library [m].
    steinmetz : SteinmetzParams
        Steinmetz coefficients.
    separation : SeparationParams or None
        Loss-separation coefficients (laminated metals).
    relaxation : RelaxationParams or None
        i2GSE relaxation coefficients.
    limit_temperature : float or None
        Highest core temperature that is a working point [degC]: the Curie temperature
        of a ferrite, the insulation class otherwise; None when not given.
    bias : BiasParams or None
        Steinmetz parameters under DC bias.
    sources : Mapping[str, str]
        Provenance of every numeric value, keyed by field path
        (``"density"``, ``"steinmetz.k"``, ``"steinmetz.temperature.ct0"``,
        ``"separation.k_hyst"``, ...).
    origin : str
        ``"bundled"`` or the path of the file the material came from.
    """

    name: str
    family: str
    description: str
    density: float
    resistivity: float
    b_sat: float
    rel_permeability: float
    thickness: float
    steinmetz: SteinmetzParams
    separation: SeparationParams | None = None
    relaxation: RelaxationParams | None = None
    limit_temperature: float | None = None
    bias: BiasParams | None = None
    sources: Mapping[str, str] = field(default_factory=dict, hash=False)
    origin: str = "bundled"

    def __post_init__(self):
        object.__setattr__(self, "sources", MappingProxyType(dict(self.sources)))

    @property
    def is_laminated(self) -> bool:
        """True for metals in sheet, strip or ribbon form."""
        return _FAMILIES.get(self.family, False)


def _as_pair(value) -> tuple[float, float]:
    items = tuple(value)
    if len(items) != 2:
        raise ValueError(f"a range needs exactly two values (low, high); got {value!r}")
    return (items[0], items[1])


# --------------------------------------------------------------------------
# field table: (field path, lower bound, upper bound, bound inclusive, hint)
# --------------------------------------------------------------------------
_TOP_FIELDS = ("density", "resistivity", "b_sat", "rel_permeability", "thickness")
_STEINMETZ_FIELDS = ("k", "alpha", "beta")
_RANGE_FIELDS = ("freq_range", "b_range")
_TEMPERATURE_FIELDS = ("ct0", "ct1", "ct2")
_SEPARATION_FIELDS = ("k_hyst", "beta_hyst", "k_excess")
_RELAXATION_FIELDS = ("k_r", "alpha_r", "beta_r", "tau", "q_r")
_BIAS_FIELDS = ("h_dc", "k_ratio", "alpha_shift", "beta_shift")

# path -> (low, high, low_inclusive, hint); None means unbounded
_LIMITS: Mapping[str, tuple] = MappingProxyType({
    "density": (1000.0, 25000.0, True, "kg/m^3 expected (7650, not 7.65)"),
    "resistivity": (0.0, 1e12, False, "ohm m expected (0.5 micro-ohm m is 5e-7)"),
    "b_sat": (0.0, 3.0, False, "tesla expected (480 mT is 0.48)"),
    "rel_permeability": (1.0, 1e7, True, "relative permeability, dimensionless"),
    "thickness": (0.0, 0.1, False, "metres expected (0.35 mm is 3.5e-4)"),
    "steinmetz.k": (0.0, None, False, "W/m^3 with f in Hz and B in T"),
    "steinmetz.alpha": (1.0, 3.0, True, "plausible Steinmetz frequency exponent"),
    "steinmetz.beta": (1.0, 4.0, True, "plausible Steinmetz flux exponent"),
    "steinmetz.temperature.ct0": (None, None, True, ""),
    "steinmetz.temperature.ct1": (None, None, True, ""),
    "steinmetz.temperature.ct2": (None, None, True, ""),
    "separation.k_hyst": (0.0, None, False, "W/m^3 with f in Hz and B in T"),
    "separation.beta_hyst": (1.0, 3.0, True, "plausible hysteresis flux exponent"),
    "separation.k_excess": (0.0, None, True, "W/m^3 / (T/s)^1.5"),
    "relaxation.k_r": (0.0, None, False, "J/m^3 with dB/dt in T/s and B in T"),
    "relaxation.alpha_r": (1.0, 3.0, True, "plausible exponent"),
    "relaxation.beta_r": (1.0, 4.0, True, "plausible exponent"),
    "relaxation.tau": (0.0, 1.0, False, "seconds expected"),
    "relaxation.q_r": (0.0, None, False, "positive exponent"),
    "limit_temperature": (25.0, 1000.0, True,
                          "degC expected (a Curie temperature or an insulation class, e.g. 155)"),
})


def _fail(where: str, name: str, path: str, value, problem: str) -> ValueError:
    return ValueError(f"{where}: material '{name}': field '{path}' = {value!r}: {problem}")


def _check_number(where, name, path, value):
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise _fail(where, name, path, value, "must be a number")
    x = float(value)
    if not math.isfinite(x):
        raise _fail(where, name, path, value, "must be finite")
    low, high, low_inclusive, hint = _LIMITS[path]
    hint = f"; {hint}" if hint else ""
    if low is not None:
        if (x < low) if low_inclusive else (x <= low):
            relation = ">=" if low_inclusive else ">"
            raise _fail(where, name, path, value, f"must be {relation} {low:g}{hint}")
    if high is not None and x > high:
        raise _fail(where, name, path, value, f"must be <= {high:g}{hint}")
    return x


def _check_range(where, name, path, value, *, upper_limit=None, upper_label=""):
    try:
        pair = tuple(value)
    except TypeError:
        raise _fail(where, name, path, value, "must be a pair [low, high]") from None
    if len(pair) != 2:
        raise _fail(where, name, path, value, "must be a pair [low, high]")
    for x in pair:
        if isinstance(x, bool) or not isinstance(x, (int, float, np.integer, np.floating)):
            raise _fail(where, name, path, value, "both ends must be numbers")
        if not math.isfinite(float(x)) or float(x) <= 0.0:
            raise _fail(where, name, path, value, "both ends must be finite and > 0")
    low, high = float(pair[0]), float(pair[1])
    if not low < high:
        raise _fail(where, name, path, value, "must be ordered low < high")
    if upper_limit is not None and high > upper_limit:
        raise _fail(where, name, path, value,
                    f"upper end must not exceed {upper_label} = {upper_limit!r}")
    return (low, high)


def _numeric_paths(material: Material) -> list[str]:
    paths = list(_TOP_FIELDS)
    paths += [f"steinmetz.{f}" for f in _STEINMETZ_FIELDS + _RANGE_FIELDS]
    if material.steinmetz.temperature is not None:
        paths += [f"steinmetz.temperature.{f}" for f in _TEMPERATURE_FIELDS]
        if material.steinmetz.temperature.valid_range is not None:
            paths.append("steinmetz.temperature.valid_range")
    if material.separation is not None:
        paths += [f"separation.{f}" for f in _SEPARATION_FIELDS]
    if material.relaxation is not None:
        paths += [f"relaxation.{f}" for f in _RELAXATION_FIELDS]
    if material.limit_temperature is not None:
        paths.append("limit_temperature")
    if material.bias is not None:
        paths += [f"bias.{f}" for f in _BIAS_FIELDS]
    return paths


def _validate_name(where, name):
    if not isinstance(name, str) or not _NAME_RE.fullmatch(name):
        raise ValueError(
            f"{where}: material name {name!r} is not allowed: use 1-64 characters, "
            "letters, digits, space and . _ + % ( ) / - , starting with a letter or digit")


def _validate_material(material: Material, where: str) -> None:
    """Check every value of ``material``; raise ValueError naming the field."""
    if not isinstance(material, Material):
        raise ValueError(f"{where}: expected a Material; got {type(material).__name__}")
    name = material.name
    _validate_name(where, name)
    if material.family not in _FAMILIES:
        raise _fail(where, name, "family", material.family,
                    "unknown family; choose one of " + ", ".join(sorted(_FAMILIES)))
    if not isinstance(material.description, str) or not material.description.strip():
        raise _fail(where, name, "description", material.description,
                    "must be a non-empty string")
    for path in _TOP_FIELDS:
        _check_number(where, name, path, getattr(material, path))
    st = material.steinmetz
    if not isinstance(st, SteinmetzParams):
        raise _fail(where, name, "steinmetz", st, "must be a SteinmetzParams")
    for f in _STEINMETZ_FIELDS:
        _check_number(where, name, f"steinmetz.{f}", getattr(st, f))
    _check_range(where, name, "steinmetz.freq_range", st.freq_range)
    _check_range(where, name, "steinmetz.b_range", st.b_range,
                 upper_limit=material.b_sat, upper_label="b_sat")
    if st.temperature is not None:
        tc = st.temperature
        if not isinstance(tc, TemperatureCoefficients):
            raise _fail(where, name, "steinmetz.temperature", tc,
                        "must be a TemperatureCoefficients")
        for f in _TEMPERATURE_FIELDS:
            _check_number(where, name, f"steinmetz.temperature.{f}", getattr(tc, f))
        temps = np.linspace(*_TEMPERATURE_CHECK, 241)
        values = tc.ct0 - tc.ct1 * temps + tc.ct2 * temps**2
        if np.any(values <= 0.0):
            bad = float(temps[np.argmax(values <= 0.0)])
            raise _fail(where, name, "steinmetz.temperature", tc,
                        f"factor must stay > 0 from {_TEMPERATURE_CHECK[0]:g} to "
                        f"{_TEMPERATURE_CHECK[1]:g} degC; it is <= 0 at {bad:g} degC")
    if material.separation is not None:
        if not isinstance(material.separation, SeparationParams):
            raise _fail(where, name, "separation", material.separation,
                        "must be a SeparationParams")
        for f in _SEPARATION_FIELDS:
            _check_number(where, name, f"separation.{f}", getattr(material.separation, f))
    if material.relaxation is not None:
        if not isinstance(material.relaxation, RelaxationParams):
            raise _fail(where, name, "relaxation", material.relaxation,
                        "must be a RelaxationParams")
        for f in _RELAXATION_FIELDS:
            _check_number(where, name, f"relaxation.{f}", getattr(material.relaxation, f))
    if material.limit_temperature is not None:
        _check_number(where, name, "limit_temperature", material.limit_temperature)
    if material.bias is not None:
        _check_bias(where, name, material.bias)
    needed = _numeric_paths(material)
    for path in needed:
        text = material.sources.get(path)
        if not isinstance(text, str) or not text.strip():
            raise _fail(where, name, path, _value_at(material, path),
                        "has no source: give its provenance (a named publication, "
                        "'from memory', 'derived: ...' or 'fitted to demo data')")
    extra = sorted(set(material.sources) - set(needed))
    if extra:
        raise _fail(where, name, f"sources.{extra[0]}", material.sources[extra[0]],
                    "is a source for a value the material does not have")


def _check_bias(where, name, bias):
    """Bias table: equal lengths >= 2, h_dc from 0 increasing, ratios > 0, identity at 0."""
    if not isinstance(bias, BiasParams):
        raise _fail(where, name, "bias", bias, "must be a BiasParams")
    columns = {}
    for f in _BIAS_FIELDS:
        values = getattr(bias, f)
        path = f"bias.{f}"
        if len(values) < 2:
            raise _fail(where, name, path, list(values), "needs at least two bias levels")
        for x in values:
            if isinstance(x, bool) or not isinstance(x, (int, float, np.integer, np.floating)) \
                    or not math.isfinite(float(x)):
                raise _fail(where, name, path, list(values), "every entry must be a finite number")
        columns[f] = np.asarray(values, dtype=float)
    n = columns["h_dc"].size
    for f in _BIAS_FIELDS[1:]:
        if columns[f].size != n:
            raise _fail(where, name, f"bias.{f}", list(getattr(bias, f)),
                        f"has {columns[f].size} entries, bias.h_dc has {n}")
    h = columns["h_dc"]
    if h[0] != 0.0 or np.any(np.diff(h) <= 0):
        raise _fail(where, name, "bias.h_dc", list(bias.h_dc),
                    "must start at 0 and increase (A/m)")
    if np.any(columns["k_ratio"] <= 0) or columns["k_ratio"][0] != 1.0:
        raise _fail(where, name, "bias.k_ratio", list(bias.k_ratio),
                    "must be positive and exactly 1 at h_dc = 0")
    for f in ("alpha_shift", "beta_shift"):
        if columns[f][0] != 0.0 or np.any(np.abs(columns[f]) > 1.0):
            raise _fail(where, name, f"bias.{f}", list(getattr(bias, f)),
                        "must be exactly 0 at h_dc = 0 and within +-1")


def _value_at(material: Material, path: str):
    obj = material
    for part in path.split("."):
        obj = getattr(obj, part, None)
    return obj


# --------------------------------------------------------------------------
# reading
# --------------------------------------------------------------------------
def _entry(where, name, table, key, path):
    """Return (value, source) from ``key = { value = ..., source = "..." }``."""
    if key not in table:
        raise ValueError(f"{where}: material '{name}': missing field '{path}'")
    item = table[key]
    if not isinstance(item, dict):
        raise _fail(where, name, path, item,
                    'must be a table { value = ..., source = "..." }')
    unknown = sorted(set(item) - {"value", "source"})
    if unknown:
        raise _fail(where, name, path, item,
                    f"unknown key '{unknown[0]}' (only 'value' and 'source' are allowed)")
    if "value" not in item:
        raise _fail(where, name, path, item, "has no 'value'")
    if "source" not in item or not isinstance(item["source"], str) or not item["source"].strip():
        raise _fail(where, name, path, item.get("value"),
                    "has no source: every number needs its provenance in 'source'")
    return item["value"], item["source"]


def _check_keys(where, name, table, allowed, section):
    unknown = sorted(set(table) - set(allowed))
    if unknown:
        label = f"{section}.{unknown[0]}" if section else unknown[0]
        raise ValueError(
            f"{where}: material '{name}': unknown field '{label}'; "
            f"expected {', '.join(allowed)}")


def _section(where, name, table, key, required):
    if key not in table:
        if required:
            raise ValueError(f"{where}: material '{name}': missing section '{key}'")
        return None
    sub = table[key]
    if not isinstance(sub, dict):
        raise _fail(where, name, key, sub, "must be a table")
    return sub


def _material_from_table(where: str, name: str, table, origin: str) -> Material:
    _validate_name(where, name)
    if not isinstance(table, dict):
        raise ValueError(f"{where}: material '{name}' must be a table; got {table!r}")
    _check_keys(where, name, table,
                ("family", "description", *_TOP_FIELDS, "steinmetz", "separation",
                 "relaxation", "limit_temperature", "bias"), "")
    sources: dict[str, str] = {}
    values: dict[str, object] = {}
    for key in ("family", "description"):
        if key not in table:
            raise ValueError(f"{where}: material '{name}': missing field '{key}'")
        if not isinstance(table[key], str):
            raise _fail(where, name, key, table[key], "must be a string")
    for key in _TOP_FIELDS:
        values[key], sources[key] = _entry(where, name, table, key, key)

    st = _section(where, name, table, "steinmetz", True)
    _check_keys(where, name, st, (*_STEINMETZ_FIELDS, *_RANGE_FIELDS, "temperature"),
                "steinmetz")
    st_values = {}
    for key in _STEINMETZ_FIELDS + _RANGE_FIELDS:
        path = f"steinmetz.{key}"
        st_values[key], sources[path] = _entry(where, name, st, key, path)
    for key in _RANGE_FIELDS:
        # shape check before the dataclass turns the list into a pair
        _check_range(where, name, f"steinmetz.{key}", st_values[key])
    temperature = None
    tt = _section(where, name, st, "temperature", False)
    if tt is not None:
        _check_keys(where, name, tt, (*_TEMPERATURE_FIELDS, "valid_range"), "steinmetz.temperature")
        tvals = {}
        for key in _TEMPERATURE_FIELDS:
            path = f"steinmetz.temperature.{key}"
            tvals[key], sources[path] = _entry(where, name, tt, key, path)
            _check_number(where, name, path, tvals[key])
        if "valid_range" in tt:
            path = "steinmetz.temperature.valid_range"
            tvals["valid_range"], sources[path] = _entry(where, name, tt, "valid_range", path)
            pair = tvals["valid_range"]
            if (not isinstance(pair, list) or len(pair) != 2
                    or any(isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x) for x in pair)
                    or not -273.15 < pair[0] < pair[1]):
                raise _fail(where, name, path, pair, "must be a pair [low, high] of temperatures in degC, low < high")
        temperature = TemperatureCoefficients(**tvals)
    steinmetz = SteinmetzParams(**st_values, temperature=temperature)

    separation = None
    sp = _section(where, name, table, "separation", False)
    if sp is not None:
        _check_keys(where, name, sp, _SEPARATION_FIELDS, "separation")
        svals = {}
        for key in _SEPARATION_FIELDS:
            path = f"separation.{key}"
            svals[key], sources[path] = _entry(where, name, sp, key, path)
        separation = SeparationParams(**svals)

    relaxation = None
    rp = _section(where, name, table, "relaxation", False)
    if rp is not None:
        _check_keys(where, name, rp, _RELAXATION_FIELDS, "relaxation")
        rvals = {}
        for key in _RELAXATION_FIELDS:
            path = f"relaxation.{key}"
            rvals[key], sources[path] = _entry(where, name, rp, key, path)
        relaxation = RelaxationParams(**rvals)

    limit_temperature = None
    if "limit_temperature" in table:
        limit_temperature, sources["limit_temperature"] = _entry(
            where, name, table, "limit_temperature", "limit_temperature")
        _check_number(where, name, "limit_temperature", limit_temperature)

    bias = None
    bp = _section(where, name, table, "bias", False)
    if bp is not None:
        _check_keys(where, name, bp, _BIAS_FIELDS, "bias")
        bvals = {}
        for key in _BIAS_FIELDS:
            path = f"bias.{key}"
            bvals[key], sources[path] = _entry(where, name, bp, key, path)
            if not isinstance(bvals[key], list):
                raise _fail(where, name, path, bvals[key], "must be a list of numbers")
        bias = BiasParams(**bvals)

    material = Material(
        name=name, family=table["family"], description=table["description"],
        steinmetz=steinmetz, separation=separation, relaxation=relaxation,
        limit_temperature=limit_temperature, bias=bias,
        sources=sources, origin=origin, **values)
    _validate_material(material, where)
    # numbers as plain floats (TOML may give ints)
    return _floats(material)


def _floats(m: Material) -> Material:
    st = m.steinmetz
    tc = st.temperature
    return Material(
        name=m.name, family=m.family, description=m.description,
        density=float(m.density), resistivity=float(m.resistivity), b_sat=float(m.b_sat),
        rel_permeability=float(m.rel_permeability), thickness=float(m.thickness),
        steinmetz=SteinmetzParams(
            k=float(st.k), alpha=float(st.alpha), beta=float(st.beta),
            freq_range=tuple(float(x) for x in st.freq_range),
            b_range=tuple(float(x) for x in st.b_range),
            temperature=None if tc is None else TemperatureCoefficients(
                float(tc.ct0), float(tc.ct1), float(tc.ct2),
                None if tc.valid_range is None else tuple(float(x) for x in tc.valid_range))),
        separation=None if m.separation is None else SeparationParams(
            float(m.separation.k_hyst), float(m.separation.beta_hyst),
            float(m.separation.k_excess)),
        relaxation=None if m.relaxation is None else RelaxationParams(
            *(float(getattr(m.relaxation, f)) for f in _RELAXATION_FIELDS)),
        limit_temperature=None if m.limit_temperature is None else float(m.limit_temperature),
        bias=None if m.bias is None else BiasParams(
            *(tuple(float(x) for x in getattr(m.bias, f)) for f in _BIAS_FIELDS)),
        sources=dict(m.sources), origin=m.origin)


def _parse_text(text: str, where: str, origin: str) -> tuple[Material, ...]:
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{where}: not valid TOML: {exc}") from None
    unknown = sorted(set(doc) - {"schema_version", "materials"})
    if unknown:
        raise ValueError(f"{where}: unknown top-level key '{unknown[0]}'; "
                         "expected 'schema_version' and [materials.<name>] tables")
    version = doc.get("schema_version", SCHEMA_VERSION)
    if version != SCHEMA_VERSION or isinstance(version, bool):
        raise ValueError(f"{where}: schema_version = {version!r} is not supported "
                         f"(this version reads {SCHEMA_VERSION})")
    tables = doc.get("materials", {})
    if not isinstance(tables, dict):
        raise ValueError(f"{where}: 'materials' must be a table of materials; got {tables!r}")
    materials = []
    seen: dict[str, str] = {}
    for name, table in tables.items():
        key = name.casefold()
        if key in seen:
            raise ValueError(f"{where}: material '{name}' duplicates '{seen[key]}' "
                             "(names are compared ignoring case)")
        seen[key] = name
        materials.append(_material_from_table(where, name, table, origin))
    return tuple(materials)


@functools.lru_cache(maxsize=32)
def _parse_file_cached(path_str: str, origin: str, stamp: tuple) -> tuple[Material, ...]:
    # ``stamp`` (mtime, size, inode) makes a changed file a new cache entry
    try:
        text = Path(path_str).read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise ValueError(f"{path_str}: not UTF-8 text: {exc}") from None
    return _parse_text(text, path_str, origin)


def _parse_file(path: Path, origin: str) -> tuple[Material, ...]:
    try:
        st = path.stat()
    except FileNotFoundError:
        raise ValueError(f"{path}: material library not found") from None
    return _parse_file_cached(str(path), origin, (st.st_mtime_ns, st.st_size, st.st_ino))


# --------------------------------------------------------------------------
# public functions
# --------------------------------------------------------------------------
def bundled_library_path() -> Path:
    """Path of the bundled material library.

    Returns
    -------
    pathlib.Path
        ``workbench/_data/materials.toml`` when present (wheel install), else
        ``<repository>/data/materials.toml``.
    """
    here = Path(__file__).resolve().parent
    packaged = here / "_data" / "materials.toml"
    if packaged.is_file():
        return packaged
    return here.parent / "data" / "materials.toml"


def user_library_path() -> Path:
    """Path of the user's material library (which need not exist yet).

    Returns
    -------
    pathlib.Path
        ``$WORKBENCH_USER_LIBRARY`` when set and not empty, else
        ``~/.config/fluxheat/materials.toml``.
    """
    env = os.environ.get(USER_LIBRARY_ENV, "").strip()
    if env:
        return Path(env).expanduser()
    return Path.home() / ".config" / "fluxheat" / "materials.toml"


def load_materials(path=None, *, include_user=True) -> dict[str, Material]:
    """Load the material library.

    Parameters
    ----------
    path : str or os.PathLike, optional
        Library file to read in place of the bundled one.
    include_user : bool
        Also read the user library (:func:`user_library_path`) if it exists.

    Returns
    -------
    dict of str to Material
        Materials by name, in file order (bundled or ``path`` first, then user).

    Raises
    ------
    ValueError
        If a file is missing, is not valid TOML, or has an invalid value (the
        message names the file, the material, the field and the value), or if
        a user material has the name of a bundled one.

    Notes
    -----
    Parsed files are cached by path, modification time, size and inode, so a
    changed user library is read again on the next call.
    """
    bundled = bundled_library_path()
    base = bundled if path is None else Path(path).expanduser()
    origin = "bundled" if _same_file(base, bundled) else str(base)
    result = {m.name: m for m in _parse_file(base, origin)}
    if include_user:
        upath = user_library_path()
        if upath.exists() and not _same_file(upath, base):
            folded = {name.casefold(): name for name in result}
            for m in _parse_file(upath, str(upath)):
                clash = folded.get(m.name.casefold())
                if clash is not None:
                    raise ValueError(
                        f"{upath}: material '{m.name}' has the name of the library "
                        f"material '{clash}' in {base}; rename the user material")
                result[m.name] = m
    return result


def get_material(name: str) -> Material:
    """Return a material of the bundled or user library by name.

    Parameters
    ----------
    name : str
        Material name; an exact match first, else a unique match ignoring case.

    Returns
    -------
    Material

    Raises
    ------
    ValueError
        ``unknown material 'X'; available: ...`` when there is no such material.
    """
    materials = load_materials()
    if name in materials:
        return materials[name]
    if isinstance(name, str):
        matches = [m for key, m in materials.items() if key.casefold() == name.casefold()]
        if len(matches) == 1:
            return matches[0]
    raise ValueError(f"unknown material {name!r}; available: {', '.join(materials)}")


def list_materials() -> list[str]:
    """Names of all materials of the bundled and user libraries.

    Returns
    -------
    list of str
        Names in file order: bundled materials first, then the user library.

    Raises
    ------
    ValueError
        If a library file cannot be read (see :func:`load_materials`).
    """
    return list(load_materials())


def _toml_string(text: str) -> str:
    out = ['"']
    for ch in text:
        code = ord(ch)
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ch == "\n":
            out.append("\\n")
        elif ch == "\t":
            out.append("\\t")
        elif ch == "\r":
            out.append("\\r")
        elif code < 0x20 or code == 0x7F:
            out.append(f"\\u{code:04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_number(x) -> str:
    return repr(float(x))


def _toml_item(key: str, value, source: str) -> str:
    if isinstance(value, tuple):
        shown = "[" + ", ".join(_toml_number(v) for v in value) + "]"
    else:
        shown = _toml_number(value)
    return f"{key} = {{ value = {shown}, source = {_toml_string(source)} }}"


def material_to_toml(material: Material) -> str:
    """Write one material in the library's TOML format.

    Parameters
    ----------
    material : Material
        A complete material; every numeric value needs a source.

    Returns
    -------
    str
        TOML text with ``[materials."<name>"]`` and its sub-tables; it can be
        appended to a library file. The ``origin`` is not written.

    Raises
    ------
    ValueError
        If the material does not pass the library's validation.
    """
    _validate_material(material, "material_to_toml")
    src = material.sources
    head = f"materials.{_toml_string(material.name)}"
    lines = [f"[{head}]",
             f"family = {_toml_string(material.family)}",
             f"description = {_toml_string(material.description)}"]
    for key in _TOP_FIELDS:
        lines.append(_toml_item(key, getattr(material, key), src[key]))
    if material.limit_temperature is not None:
        lines.append(_toml_item("limit_temperature", material.limit_temperature,
                                src["limit_temperature"]))
    st = material.steinmetz
    lines += ["", f"[{head}.steinmetz]"]
    for key in _STEINMETZ_FIELDS + _RANGE_FIELDS:
        lines.append(_toml_item(key, getattr(st, key), src[f"steinmetz.{key}"]))
    if st.temperature is not None:
        lines += ["", f"[{head}.steinmetz.temperature]"]
        for key in _TEMPERATURE_FIELDS:
            lines.append(_toml_item(key, getattr(st.temperature, key),
                                    src[f"steinmetz.temperature.{key}"]))
        if st.temperature.valid_range is not None:
            lines.append(_toml_item("valid_range", tuple(st.temperature.valid_range),
                                    src["steinmetz.temperature.valid_range"]))
    for section, fields in (("separation", _SEPARATION_FIELDS),
                            ("relaxation", _RELAXATION_FIELDS),
                            ("bias", _BIAS_FIELDS)):
        params = getattr(material, section)
        if params is not None:
            lines += ["", f"[{head}.{section}]"]
            for key in fields:
                lines.append(_toml_item(key, getattr(params, key), src[f"{section}.{key}"]))
    return "\n".join(lines) + "\n"


_USER_HEADER = f"""\
# User material library of the core-loss workbench (format: data/README.md).
# Units: density kg/m^3, resistivity ohm m, b_sat T, thickness m,
# Steinmetz k in W/m^3 with f in Hz and B_peak in T, k_excess W/m^3/(T/s)^1.5.
schema_version = {SCHEMA_VERSION}
"""


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve()
    except OSError:
        return False


def _write_atomic(path: Path, text: str) -> None:
    write_text_atomic(path, text, newline="\n", make_parents=True)


def save_user_material(material: Material, *, path=None, overwrite=False) -> Path:
    """Add a material to the user library, atomically.

    Parameters
    ----------
    material : Material
        The material; it must pass validation and must not have the name of a
        bundled material.
    path : str or os.PathLike, optional
        User library file; default :func:`user_library_path`. The bundled
        library is refused.
    overwrite : bool
        Replace a user material of the same name (else that is an error).

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    ValueError
        If the material is invalid, has a bundled name, already exists and
        ``overwrite`` is False, the target is the bundled library, or the
        existing user library cannot be read.

    Notes
    -----
    The new file content is written to a temporary file in the same directory
    and renamed over the library (``os.replace``), so a crash leaves either the
    old or the new file; a symlinked library is written through the link. The
    read-modify-write runs under an exclusive lock (:func:`workbench.fileio.locked`),
    so saves from several processes at once all land. A new material is appended to the existing text, which
    keeps hand-written comments; replacing a material rewrites the file from
    its parsed content, which drops comments.
    """
    target = user_library_path() if path is None else Path(path).expanduser()
    bundled = bundled_library_path()
    repo_copy = Path(__file__).resolve().parent.parent / "data" / "materials.toml"
    if _same_file(target, bundled) or _same_file(target, repo_copy):
        raise ValueError(f"{target}: refusing to write into the bundled material library; "
                         "save user materials to the user library")
    where = str(target)
    _validate_material(material, where)
    bundled_names = {m.name.casefold(): m.name for m in _parse_file(bundled, "bundled")}
    if material.name.casefold() in bundled_names:
        raise ValueError(
            f"{where}: material '{material.name}' has the name of the bundled material "
            f"'{bundled_names[material.name.casefold()]}'; choose another name")

    with locked(target, what="user material library"):  # read-modify-write: no save is lost
        if target.exists():
            existing_text = target.read_text(encoding="utf-8")
            existing = _parse_text(existing_text, where, where)
        else:
            existing_text, existing = _USER_HEADER, ()
        same = [m for m in existing if m.name.casefold() == material.name.casefold()]
        if same and not overwrite:
            raise ValueError(f"{where}: material '{same[0].name}' already exists in the user "
                             "library; pass overwrite=True to replace it")
        block = material_to_toml(material)
        if same:
            parts = [_USER_HEADER]
            for m in existing:
                parts.append(block if m is same[0] else material_to_toml(m))
            new_text = "\n".join(parts)
        else:
            sep = "" if existing_text.endswith("\n") or not existing_text else "\n"
            new_text = existing_text + sep + "\n" + block
        # never write something that would not load again
        check = _parse_text(new_text, where, where)
        if material.name not in {m.name for m in check}:
            raise ValueError(f"{where}: internal error: '{material.name}' missing after save")
        _write_atomic(target, new_text)
    return target
