"""The one number formatter of the workbench: engineering notation with SI prefixes.

Every number a panel, a report or a plot axis shows goes through here, so 1 MHz reads
``1.00 MHz`` everywhere (never ``1m``), 1.17 T reads ``1.17 T`` (never ``1.17e+03 mT``)
and a table column carries one unit (``kW/m³``) for all its rows.

* :func:`eng` - one value with its unit, ``eng(830.66, "Hz", 4) == "830.7 Hz"``.
* :func:`eng_column` - a column of values sharing one prefix, for tables.
* :func:`unit_label` - the unit as shown (``"W/m3"`` -> ``"W/m³"``, ``"ohm m"`` -> ``"Ω·m"``).
* :func:`tick_prefixes` - the prefixes an axis of that unit may use (bokeh tick formatters in
  :mod:`workbench.ui.format` apply the same rule in the browser).

Units are written as in :mod:`workbench.units` (``"Hz"``, ``"T"``, ``"W/m3"``, ``"m3"``,
``"ohm m"``, ``"degC"``); values are in that SI unit. Each unit has the prefixes an engineer
uses for it: flux density in T or mT (not kT), frequency in Hz, kHz, MHz, GHz, areas in mm²,
cm² or m², volumes in mm³, cm³ or m³.
"""
from __future__ import annotations

import math
from collections.abc import Iterable

__all__ = ["eng", "eng_parts", "eng_column", "unit_label", "tick_prefixes", "MISSING"]

#: Text shown for a missing or non-finite value.
MISSING = "–"

_LETTER = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}

#: Decimal exponents of the prefixes used with each unit (common practice, no source).
_ALLOWED = {
    "Hz": (0, 3, 6, 9),
    "T": (-6, -3, 0),
    "Wb": (-9, -6, -3, 0),
    "W/m3": (-3, 0, 3, 6, 9),
    "W/kg": (-3, 0, 3),
    "W": (-6, -3, 0, 3, 6),
    "J/m3": (-6, -3, 0, 3, 6),
    "J/kg": (-6, -3, 0, 3),
    "T/s": (0, 3, 6, 9),
    "A/m": (0, 3, 6),
    "A": (-6, -3, 0, 3),
    "V": (-6, -3, 0, 3),
    "m": (-9, -6, -3, 0),
    "s": (-12, -9, -6, -3, 0),
    "Hz T": (0, 3, 6, 9),
    "ohm m": (-6, 0),
    "kg/m3": (0,),
    "kg": (-3, 0),
    "degC": (0,),
    "K": (0,),
    "": (0,),
}
#: Units whose prefix is raised with an exponent: (SI factor, shown unit).
_POWER_UNITS = {
    "m2": ((1e-6, "mm²"), (1e-4, "cm²"), (1.0, "m²")),
    "m3": ((1e-9, "mm³"), (1e-6, "cm³"), (1.0, "m³")),
    "%": ((0.01, "%"),),
}
_PRETTY = (("ohm", "Ω"), ("degC", "°C"), ("m3", "m³"), ("m2", "m²"), ("^-1", "⁻¹"))


def unit_label(unit: str) -> str:
    """The unit as shown on screen: ``"W/m3"`` -> ``"W/m³"``, ``"ohm m"`` -> ``"Ω·m"``.

    Parameters
    ----------
    unit : str
        Unit in the spelling of :mod:`workbench.units`.

    Returns
    -------
    str
    """
    text = str(unit).strip()
    for a, b in _PRETTY:
        text = text.replace(a, b)
    return " ".join(text.split()).replace(" ", "·")


def _scales(unit: str) -> tuple[tuple[float, str], ...]:
    """(SI factor, shown unit) pairs a value of ``unit`` may be shown in, ascending."""
    key = " ".join(str(unit).split())
    if key in _POWER_UNITS:
        return _POWER_UNITS[key]
    exps = _ALLOWED.get(key, (-12, -9, -6, -3, 0, 3, 6, 9))
    pretty = unit_label(key)
    return tuple((10.0 ** e, _LETTER[e] + pretty) for e in exps)


def tick_prefixes(unit: str) -> list[tuple[int, str]]:
    """Decimal exponents and prefix letters an axis in ``unit`` may label its ticks with.

    Parameters
    ----------
    unit : str
        Unit of the axis values (shown in the axis title, not on each tick).

    Returns
    -------
    list of (int, str)
        E.g. ``[(0, ""), (3, "k"), (6, "M"), (9, "G")]`` for ``"Hz"``.
    """
    key = " ".join(str(unit).split())
    if key in _POWER_UNITS:
        return [(0, "")]
    return [(e, _LETTER[e]) for e in _ALLOWED.get(key, (-12, -9, -6, -3, 0, 3, 6, 9))]


def _round_sig(x: float, digits: int) -> float:
    if x == 0.0:
        return 0.0
    return round(x, digits - 1 - math.floor(math.log10(abs(x))))


def _mantissa(x: float, digits: int) -> str:
    """``x`` to ``digits`` significant figures, trailing zeros kept, no exponent."""
    x = _round_sig(x, digits)
    if x == 0.0:
        return "0" if digits == 1 else "0." + "0" * (digits - 1)
    decimals = max(digits - 1 - math.floor(math.log10(abs(x))), 0)
    return f"{x:.{decimals}f}"


def _finite(value) -> float | None:
    if value is None:
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"value must be a number or None, got {value!r}") from None
    return x if math.isfinite(x) else None


def _pick(x: float, scales, digits: int) -> tuple[float, str]:
    """The largest scale with |x| / factor >= 1 after rounding (the smallest if none)."""
    chosen = scales[0]
    if x == 0.0:
        return next((s for s in scales if s[0] == 1.0), scales[0])
    for factor, label in scales:
        if abs(_round_sig(x / factor, digits)) >= 1.0:
            chosen = (factor, label)
    return chosen


def eng_parts(value, unit: str = "", digits: int = 3, *, prefix: str | None = None) -> tuple[str, str]:
    """A value as (number, unit) texts in engineering notation.

    Parameters
    ----------
    value : float or None
        Value in the SI unit ``unit``; None, NaN and infinities give ``("–", unit)``.
    unit : str
        SI unit (``"Hz"``, ``"W/m3"``, ``"m3"``, ``""`` for a plain number).
    digits : int
        Significant figures (default 3).
    prefix : str, optional
        Force this prefix (``"m"`` shows a lamination as ``0.350 mm``, matching a control in mm).

    Returns
    -------
    (str, str)
        E.g. ``("830.7", "Hz")``, ``("1.00", "MHz")``, ``("25.0", "cm³")``.
    """
    if not isinstance(digits, int) or digits < 1:
        raise ValueError(f"digits must be a positive integer, got {digits!r}")
    scales = _scales(unit)
    x = _finite(value)
    if x is None:
        base = next((label for factor, label in scales if factor == 1.0), scales[-1][1])
        return MISSING, base
    if prefix is not None:
        exp = {v: k for k, v in _LETTER.items()}.get(prefix.replace("u", "µ"))
        if exp is None:
            raise ValueError(f"prefix must be one of {', '.join(repr(v) for v in _LETTER.values())}, got {prefix!r}")
        factor, label = 10.0 ** exp, prefix.replace("u", "µ") + unit_label(unit)
    else:
        factor, label = _pick(x, scales, digits)
    return _mantissa(x / factor, digits), label


def eng(value, unit: str = "", digits: int = 3, *, prefix: str | None = None) -> str:
    """A value with its unit in engineering notation.

    Parameters
    ----------
    value : float or None
        Value in the SI unit ``unit`` (None or non-finite shows as ``"–"``).
    unit : str
        SI unit, e.g. ``"Hz"``, ``"T"``, ``"W/m3"``, ``"m3"``; ``""`` for a plain number.
    digits : int
        Significant figures (default 3).
    prefix : str, optional
        Force this SI prefix instead of choosing one.

    Returns
    -------
    str
        ``eng(1e6, "Hz") == "1.00 MHz"``, ``eng(1.17, "T") == "1.17 T"``,
        ``eng(0.05, "T") == "50.0 mT"``, ``eng(2.5e-5, "m3") == "25.0 cm³"``.

    Notes
    -----
    The prefix is the largest allowed for the unit that leaves a mantissa of at least 1
    after rounding to ``digits`` figures (999.7 Hz with 3 figures is ``1.00 kHz``).
    """
    number, label = eng_parts(value, unit, digits, prefix=prefix)
    return f"{number} {label}" if label else number


def eng_column(values: Iterable, unit: str = "", digits: int = 3) -> tuple[str, list[str]]:
    """A column of values sharing one prefix: the column's unit and the number texts.

    Parameters
    ----------
    values : iterable of float or None
        Values in the SI unit ``unit``.
    unit : str
        SI unit.
    digits : int
        Significant figures of each value (default 3).

    Returns
    -------
    (str, list of str)
        The shown unit for the column heading (e.g. ``"kW/m³"``) and one text per value
        (``"–"`` for missing ones). The prefix is the one :func:`eng` picks for the geometric
        mean of the magnitudes, so a column spanning decades reads ``6.75 ... 2700`` in one unit
        rather than switching unit from row to row.
    """
    if not isinstance(digits, int) or digits < 1:
        raise ValueError(f"digits must be a positive integer, got {digits!r}")
    xs = [_finite(v) for v in values]
    scales = _scales(unit)
    finite = [abs(x) for x in xs if x is not None and x != 0.0]
    if finite:
        typical = math.exp(sum(math.log(x) for x in finite) / len(finite))
        factor, label = _pick(typical, scales, digits)
    else:
        factor, label = next((s for s in scales if s[0] == 1.0), scales[-1])
    return label, [MISSING if x is None else _mantissa(x / factor, digits) for x in xs]
