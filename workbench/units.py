"""Engineering quantities at the edges: ``"100k"``, ``"50 mT"``, ``"25 mm2"`` <-> SI floats.

The core of the workbench works in SI units only. Text typed by a person (command line,
widget text boxes) or written in a file header (``t [us]``, ``B (mT)``) is turned into SI
here and nowhere else; numbers shown to a person are formatted back here.

Two things are parsed:

* a *quantity*: a number followed by an optional unit, e.g. ``"100 kHz"``, ``"100k"``,
  ``"0.35mm"``, ``"25 mm^2"``, ``"3.2 cm3"``, ``"1.2e-3"``, ``"2u"``, ``"48 uohm cm"``;
* a *unit expression*: ``"mV"``, ``"us"``, ``"kW/m3"``, ``"ohm mm2/m"``, ``"mT"``.

Unit grammar
------------
A unit expression is a numerator and an optional denominator separated by one ``/``.
Each side is a product of atoms separated by spaces, ``*``, ``.`` or a middle dot. An atom
is an optional SI prefix (``p n u µ m c k M G``; ``K`` is accepted as kilo), a base unit
(``Hz s m g T Wb V A W ohm Ω %`` and ``degC``/``°C``) and an optional integer exponent
(``m2``, ``m^2``, ``m²``, ``m^-3``). The prefix is raised with the exponent as SI requires:
1 mm2 = (1e-3 m)^2 = 1e-6 m2, 1 cm3 = 1e-6 m3.

A quantity whose unit part is a bare prefix (``"100k"``, ``"2u"``, ``"500 n"``) takes the
expected unit. Where the bare suffix spells the expected unit itself, the unit wins:
``parse_quantity("0.35m", "m")`` is 0.35 metres, but ``parse_quantity("50m", "T")`` is 50 mT.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Final

__all__ = [
    "UnitScale",
    "parse_unit",
    "unit_exponent",
    "unit_scale",
    "scale_by_power_of_ten",
    "parse_quantity",
    "parse_checked",
    "format_quantity",
]

# --- dimensions: exponents of (m, kg, s, A, degC) ------------------------------------------
_Dim = tuple[int, int, int, int, int]
_NONE: Final[_Dim] = (0, 0, 0, 0, 0)

# base unit spelling -> (decimal exponent of its scale to SI, dimension). Every scale in
# this grammar is a power of ten, so it is kept as an integer exponent and applied with one
# correctly rounded multiplication or division ("25 mm2" gives exactly 2.5e-05).
_BASES: Final[dict[str, tuple[int, _Dim]]] = {
    "Hz": (0, (0, 0, -1, 0, 0)),
    "s": (0, (0, 0, 1, 0, 0)),
    "m": (0, (1, 0, 0, 0, 0)),
    "g": (-3, (0, 1, 0, 0, 0)),
    "T": (0, (0, 1, -2, -1, 0)),
    "Wb": (0, (2, 1, -2, -1, 0)),
    "V": (0, (2, 1, -3, -1, 0)),
    "A": (0, (0, 0, 0, 1, 0)),
    "W": (0, (2, 1, -3, 0, 0)),
    "ohm": (0, (2, 1, -3, -2, 0)),
    "%": (-2, _NONE),
    "degC": (0, (0, 0, 0, 0, 1)),
}
_BASE_ALIASES: Final[dict[str, str]] = {
    "hz": "Hz", "HZ": "Hz", "Ω": "ohm", "Ohm": "ohm", "OHM": "ohm", "°C": "degC",
    "℃": "degC", "\u2126": "ohm", "sec": "s", "secs": "s",
}
_PREFIXES: Final[dict[str, int]] = {
    "p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3, "c": -2,
    "k": 3, "K": 3, "M": 6, "G": 9,
}
_SUPERSCRIPTS: Final = str.maketrans("⁻¹²³⁴", "-1234")

_base_alt = "|".join(
    re.escape(b) for b in sorted([*_BASES, *_BASE_ALIASES], key=len, reverse=True)
)
_prefix_alt = "|".join(re.escape(p) for p in _PREFIXES)
_ATOM_RE: Final = re.compile(
    rf"^(?P<prefix>{_prefix_alt})?(?P<base>{_base_alt})(?:\^?(?P<exp>-?\d+))?$"
)
_NUMBER_RE: Final = re.compile(
    r"^\s*(?P<num>[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+))(?:[eE](?P<exp>[+-]?[0-9]+))?\s*(?P<unit>.*?)\s*$"
)
_SEPARATORS_RE: Final = re.compile(r"[\s*·⋅.]+")


@dataclass(frozen=True)
class UnitScale:
    """A parsed unit expression.

    Attributes
    ----------
    text : str
        The expression as written.
    exponent10 : int
        Decimal exponent of the factor that turns a number in this unit into SI.
    dimension : tuple of int
        Exponents of (metre, kilogram, second, ampere, degree Celsius).
    """

    text: str
    exponent10: int
    dimension: _Dim

    @property
    def scale(self) -> float:
        """Factor that turns a number in this unit into SI [-]."""
        return 10.0**self.exponent10


def scale_by_power_of_ten(value, exponent10: int):
    """Multiply `value` (scalar or array) by 10**exponent10 with one rounding.

    Parameters
    ----------
    value : float or numpy.ndarray
        Number(s) to scale [any unit].
    exponent10 : int
        Decimal exponent.

    Returns
    -------
    float or numpy.ndarray
        ``value * 10**exponent10``, computed as a division for negative exponents so that
        ``500 / 1e9`` gives the correctly rounded 5e-07 rather than ``500 * 1e-9``.
    """
    if exponent10 == 0:
        return value
    if exponent10 > 0:
        return value * 10.0**exponent10
    return value / 10.0 ** (-exponent10)


def _parse_atom(atom: str) -> tuple[int, _Dim]:
    match = _ATOM_RE.match(atom.translate(_SUPERSCRIPTS))
    if match is None:
        raise ValueError(f"unknown unit {atom!r}")
    base = _BASE_ALIASES.get(match["base"], match["base"])
    base_scale, dim = _BASES[base]
    exp = int(match["exp"]) if match["exp"] else 1
    if exp == 0:
        raise ValueError(f"zero exponent in unit {atom!r}")
    prefix = match["prefix"]
    if prefix is not None and base in ("%", "degC"):
        raise ValueError(f"a prefix is not allowed on {base!r} in {atom!r}")
    power = (_PREFIXES[prefix] if prefix else 0) + base_scale
    return power * exp, tuple(d * exp for d in dim)  # type: ignore[return-value]


def _parse_side(side: str) -> tuple[int, _Dim]:
    scale, dim = 0, list(_NONE)
    atoms = [a for a in _SEPARATORS_RE.split(side.strip()) if a]
    if not atoms:
        raise ValueError("empty unit")
    for atom in atoms:
        s, d = _parse_atom(atom)
        scale += s
        dim = [x + y for x, y in zip(dim, d)]
    return scale, tuple(dim)  # type: ignore[return-value]


def parse_unit(text: str) -> UnitScale:
    """Parse a unit expression such as ``"mV"``, ``"kW/m3"`` or ``"ohm mm2/m"``.

    Parameters
    ----------
    text : str
        Unit expression (grammar in the module docstring). An empty string is dimensionless
        with scale 1.

    Returns
    -------
    UnitScale
        Scale to SI and dimension.

    Raises
    ------
    ValueError
        If the expression uses an unknown unit or is malformed; the message shows `text`.

    Notes
    -----
    For an expression :math:`\\prod_i (p_i u_i)^{e_i} / \\prod_j (p_j u_j)^{e_j}` the scale
    is :math:`\\prod_i (p_i s_i)^{e_i} / \\prod_j (p_j s_j)^{e_j}` where :math:`p` are prefix
    factors and :math:`s` the base-unit factors to SI (1 except g = 1e-3 kg and % = 1e-2).

    References
    ----------
    .. [1] BIPM, "The International System of Units (SI)", 9th edition, 2019,
       section 3 (SI prefixes) and 5.4.
    """
    raw = str(text)
    stripped = raw.strip()
    if not stripped:
        return UnitScale(raw, 0, _NONE)
    if stripped.count("/") > 1:
        raise ValueError(f"unit {raw!r} has more than one '/'")
    num, _, den = stripped.partition("/")
    try:
        if num.strip() in ("", "1"):
            scale, dim = 0, _NONE
        else:
            scale, dim = _parse_side(num)
        if den:
            den_scale, den_dim = _parse_side(den.strip().strip("()"))
            scale -= den_scale
            dim = tuple(a - b for a, b in zip(dim, den_dim))  # type: ignore[assignment]
    except ValueError as exc:
        raise ValueError(f"cannot read unit {raw!r}: {exc}") from None
    return UnitScale(raw, scale, dim)


def unit_exponent(text: str, unit: str) -> int:
    """Decimal exponent of the factor that turns a number in unit `text` into `unit`.

    Parameters
    ----------
    text : str
        Unit as written, e.g. ``"mV"``, ``"us"``, ``"mW/cm3"``.
    unit : str
        Expected SI unit, e.g. ``"V"``, ``"s"``, ``"W/m3"``.

    Returns
    -------
    int
        Decimal exponent of the scale factor, e.g. -3 for ``("mV", "V")``.

    Raises
    ------
    ValueError
        If `text` is not a unit or has a different dimension from `unit`.

    Notes
    -----
    value_SI = value * 10**(e(text) - e(unit)); the expected unit normally has e = 0.
    """
    got = parse_unit(text)
    want = parse_unit(unit)
    if got.dimension != want.dimension:
        raise ValueError(f"unit {text!r} is not a unit of {unit or 'a plain number'!r}")
    return got.exponent10 - want.exponent10


def unit_scale(text: str, unit: str) -> float:
    """Factor that turns a number in unit `text` into the unit `unit`.

    Parameters
    ----------
    text : str
        Unit as written, e.g. ``"mV"``, ``"us"``, ``"mW/cm3"``.
    unit : str
        Expected SI unit, e.g. ``"V"``, ``"s"``, ``"W/m3"``.

    Returns
    -------
    float
        Scale factor [-], e.g. 1e-3 for ``("mV", "V")``.

    Raises
    ------
    ValueError
        If `text` is not a unit or has a different dimension from `unit`.
    """
    return 10.0 ** unit_exponent(text, unit)


def parse_quantity(text: str | float | int, unit: str, *, name: str) -> float:
    """Read an engineering quantity typed by a person and return it in SI.

    Parameters
    ----------
    text : str or float
        The quantity, e.g. ``"100k"``, ``"100 kHz"``, ``"50 mT"``, ``"0.35mm"``,
        ``"25 mm^2"``, ``"3.2 cm3"``, ``"1.2e-3"``, ``"2u"``, ``"500 n"``. A bare number
        is taken as already in SI. A real number passes through (checked to be finite).
    unit : str
        Expected SI unit: ``"Hz"``, ``"T"``, ``"m"``, ``"m2"``, ``"m3"``, ``"s"``, ``"V"``,
        ``"A"``, ``"W/m3"``, ``"W/kg"``, ``"ohm m"``, ``"degC"`` or ``""`` for a plain number
        (turns, duty). Other expressions of the grammar work too.
    name : str
        Name of the parameter, used in error messages.

    Returns
    -------
    float
        The value in the SI unit `unit`.

    Raises
    ------
    ValueError
        On garbage, a decimal comma, a wrong unit (``"50 mm"`` where T is expected) or a
        non-finite value; the message names `name` and shows `text`.

    Notes
    -----
    value_SI = number * prefix^exponent * base_scale, with the unit grammar of the module
    docstring. The number and the unit's power of ten are combined into one decimal
    literal before conversion, so ``"3.2 cm3"`` returns exactly ``float("3.2e-6")``.

    References
    ----------
    .. [1] BIPM, "The International System of Units (SI)", 9th edition, 2019.
    """
    want = unit or "a plain number"
    if isinstance(text, bool):
        raise ValueError(f"{name}: expected a quantity in {want}, got {text!r}")
    if isinstance(text, (int, float)):
        value = float(text)
        if not math.isfinite(value):
            raise ValueError(f"{name}: value must be finite, got {text!r}")
        return value
    if not isinstance(text, str):
        raise ValueError(f"{name}: expected text or a number, got {text!r}")
    if text.strip().lower().lstrip("+-") in ("inf", "infinity", "nan"):
        raise ValueError(f"{name}: value must be finite, got {text!r}")
    if re.search(r"[0-9]_[0-9]", text):
        raise ValueError(f"{name}: cannot read {text!r} as a quantity in {want} "
                         "(write numbers without digit separators)")
    match = _NUMBER_RE.match(text)
    if match is None:
        hint = ""
        if re.match(r"^\s*[+-]?\d+,\d+", text):
            hint = " (use a decimal point, not a comma)"
        elif any(c.isdigit() and not c.isascii() for c in text):
            hint = " (use the digits 0-9)"
        raise ValueError(f"{name}: cannot read {text!r} as a quantity in {want}{hint}")
    suffix = match["unit"]
    if suffix.startswith(","):
        raise ValueError(
            f"{name}: cannot read {text!r} as a quantity in {want} "
            "(use a decimal point, not a comma)"
        )
    try:
        power = _suffix_exponent(suffix, unit)
    except ValueError as exc:
        raise ValueError(f"{name}: cannot read {text!r} as a quantity in {want}: {exc}") from None
    # one decimal-to-binary conversion: "3.2 cm3" -> float("3.2e-6"), exactly as typed in SI
    exponent = int(match["exp"] or 0) + power
    value = float(f"{match['num']}e{exponent}") if abs(exponent) < 100_000 else math.inf
    if not math.isfinite(value):
        raise ValueError(f"{name}: value must be finite, got {text!r}")
    return value


def parse_checked(text: str | float | int, kind: str, *, name: str,
                  unit: str | None = None) -> tuple[float, tuple[str, ...]]:
    """Read a quantity typed by a person and check it against its plausible range.

    Parameters
    ----------
    text : str or float
        The quantity, as for :func:`parse_quantity`.
    kind : str
        Kind of quantity, a key of :data:`workbench.checks.PLAUSIBLE` (``"area"``,
        ``"thickness"``, ``"temperature"``, ``"resistivity"``, ``"turns"``, ...).
    name : str
        Name of the parameter or option, used in messages (``"--area"``).
    unit : str, optional
        Expected SI unit (default the kind's own: ``"m2"`` for an area, ``"degC"`` for a
        temperature, ``""`` for turns).

    Returns
    -------
    value : float
        The value in SI.
    warnings : tuple of str
        One sentence when the value is outside the usual range of its kind (for the
        result's warnings), else empty.

    Raises
    ------
    ValueError
        Unreadable text (see :func:`parse_quantity`), or a value beyond the hard limits of
        :func:`workbench.checks.check_quantity` (``--temperature -300``, ``--thickness 1e3``,
        ``--resistivity 1e-300``, ``--turns 1e-300``).

    Notes
    -----
    The parsing is :func:`parse_quantity`; the range check is
    :func:`workbench.checks.check_quantity`, so the edges and the library share one rule.

    References
    ----------
    .. [1] BIPM, "The International System of Units (SI)", 9th edition, 2019.
    """
    from workbench.checks import PLAUSIBLE, check_quantity

    if kind not in PLAUSIBLE:
        raise ValueError(f"unknown quantity kind {kind!r}; known: {', '.join(sorted(PLAUSIBLE))}")
    if unit is None:
        unit = _KIND_UNITS.get(kind, PLAUSIBLE[kind].unit)
    value = parse_quantity(text, unit, name=name)
    return check_quantity(value, kind, name=name)


#: SI unit spelling of each plausibility kind in this module's grammar.
_KIND_UNITS: Final[dict[str, str]] = {
    "area": "m2", "volume": "m3", "path_length": "m", "thickness": "m", "resistivity": "ohm m",
    "temperature": "degC", "turns": "", "freq": "Hz", "b_peak": "T", "density": "kg/m3",
}


def _suffix_exponent(suffix: str, unit: str) -> int:
    if not suffix:
        return 0
    expected = parse_unit(unit)
    if suffix in _PREFIXES and expected.dimension not in ((0, 0, 0, 0, 1),):
        # a bare suffix that also spells a unit of the expected dimension is that unit
        try:
            return unit_exponent(suffix, unit)
        except ValueError:
            return _PREFIXES[suffix]
    return unit_exponent(suffix, unit)


# --- formatting ----------------------------------------------------------------------------
_DISPLAY_PREFIXES: Final[dict[str, tuple[str, ...]]] = {
    "m": ("n", "µ", "m", "", "k"),
    "m2": ("µ", "m", "c", ""),
    "m3": ("m", "c", ""),
    "s": ("p", "n", "µ", "m", ""),
    "": ("",),
    "degC": ("",),
    "%": ("",),
    "ohm m": ("µ", "m", ""),
}
_DEFAULT_DISPLAY: Final = ("p", "n", "µ", "m", "", "k", "M", "G")


def _round_sig(value: float, digits: int) -> float:
    if value == 0.0:
        return 0.0
    exponent = math.floor(math.log10(abs(value)))
    return round(value, digits - 1 - exponent)


def _mantissa_text(value: float, digits: int) -> str:
    if value == 0.0:
        return f"{0.0:.{max(digits - 1, 0)}f}"
    exponent = math.floor(math.log10(abs(value)))
    decimals = max(digits - 1 - exponent, 0)
    return f"{value:.{decimals}f}"


def format_quantity(value: float, unit: str, digits: int = 3) -> str:
    """Format an SI value for display with an engineering prefix.

    Parameters
    ----------
    value : float
        Value in the SI unit `unit`.
    unit : str
        SI unit of `value`, e.g. ``"W/m3"``, ``"T"``, ``"Hz"``, ``"m2"``; ``""`` for a
        plain number.
    digits : int, optional
        Significant figures shown (default 3).

    Returns
    -------
    str
        E.g. ``"2.50 kW/m3"``, ``"35.0 mT"``, ``"120 kHz"``, ``"25.0 mm2"``.

    Raises
    ------
    ValueError
        If `digits` < 1 or `unit` is not a valid unit expression.

    Notes
    -----
    The prefix p (with the first atom's exponent e) is the largest one with
    :math:`|v| / p^e \\ge 1`; the value is rounded to `digits` significant figures before
    choosing, so 999.7 Hz shows as ``"1.00 kHz"``.
    """
    if digits < 1:
        raise ValueError(f"digits must be >= 1, got {digits!r}")
    parse_unit(unit)  # validates
    value = float(value)
    sep = " " if unit else ""
    if not math.isfinite(value):
        return f"{value}{sep}{unit}"
    stripped = unit.strip()
    first_atom = _SEPARATORS_RE.split(stripped.split("/")[0].strip())[0] if stripped else ""
    exp_match = re.search(r"\^?(-?\d+)$", first_atom.translate(_SUPERSCRIPTS))
    exponent = int(exp_match.group(1)) if exp_match else 1
    prefixes = _DISPLAY_PREFIXES.get(stripped, _DEFAULT_DISPLAY)
    if stripped.split("/")[0].strip() in ("", "1"):
        prefixes = ("",)
    rounded = _round_sig(value, digits)
    chosen = prefixes[0]
    for prefix in prefixes:  # ascending scale; keep the largest with mantissa >= 1
        power = (_PREFIXES[prefix] if prefix else 0) * exponent
        if abs(scale_by_power_of_ten(rounded, -power)) >= 1.0 - 1e-12:
            chosen = prefix
    if rounded == 0.0:
        chosen = ""
    power = (_PREFIXES[chosen] if chosen else 0) * exponent
    mantissa = _round_sig(scale_by_power_of_ten(rounded, -power), digits)
    return f"{_mantissa_text(mantissa, digits)}{sep}{chosen}{unit}"
