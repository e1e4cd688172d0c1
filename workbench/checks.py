"""Checks of numbers given to the workbench: the one home of "finite and positive" (a leaf module).

Every layer that takes a number from a person, a file or a caller checks it here:

* :func:`positive_number` / :func:`positive_array` -- finite and > 0 (booleans refused);
* :func:`finite_number` -- finite, optionally within limits (temperatures may be negative);
* :func:`check_quantity` -- a physical quantity against the range where it is plausible:
  outside the hard limits it is refused (``ValueError``), outside the usual range it passes
  with a warning sentence that the caller puts in the result's warnings;
* :func:`finite_result` -- a computed value that overflowed is refused, naming the inputs.

Only numpy is imported, so the models may use it.
"""
from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

__all__ = [
    "PLAUSIBLE",
    "Plausible",
    "check_quantity",
    "finite_number",
    "finite_result",
    "plausibility_warnings",
    "positive_array",
    "positive_number",
]


def _where(source) -> str:
    return f"{source}: " if source else ""


def _unit(unit) -> str:
    return f" [{unit}]" if unit else ""


def _as_float(value, name: str, unit: str, source) -> float:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (numbers.Real, np.ndarray, str)):
        raise ValueError(f"{_where(source)}{name} must be a number{_unit(unit)}, got {value!r}")
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{_where(source)}{name} must be a number{_unit(unit)}, got {value!r}") from None
    return x


def finite_number(value, name: str, *, unit: str = "", source=None, minimum: float | None = None,
                  maximum: float | None = None, strict_minimum: bool = False) -> float:
    """A finite real number, optionally within limits.

    Parameters
    ----------
    value : float or int
        The number (a 0-d array or numeric string is accepted; ``True``/``False`` are not).
    name : str
        Name of the parameter for the message.
    unit : str
        SI unit shown in the message, e.g. ``"degC"``.
    source : str, optional
        File or option the value came from, put in front of the message.
    minimum, maximum : float, optional
        Limits [same unit]; ``minimum`` is excluded when ``strict_minimum``.
    strict_minimum : bool
        Refuse the value equal to ``minimum`` too (absolute zero, zero length).

    Returns
    -------
    float
        The value.

    Raises
    ------
    ValueError
        Not a number, NaN, infinite or outside the limits; the message names the parameter
        and the value.
    """
    x = _as_float(value, name, unit, source)
    if not math.isfinite(x):
        raise ValueError(f"{_where(source)}{name} must be finite{_unit(unit)}, got {value!r}")
    if minimum is not None and (x < minimum or (strict_minimum and x == minimum)):
        rel = "above" if strict_minimum else "at least"
        raise ValueError(f"{_where(source)}{name} must be {rel} {minimum:g}{_unit(unit)}, got {value!r}")
    if maximum is not None and x > maximum:
        raise ValueError(f"{_where(source)}{name} must be at most {maximum:g}{_unit(unit)}, got {value!r}")
    return x


def positive_number(value, name: str, *, unit: str = "", source=None) -> float:
    """A finite number > 0.

    Parameters
    ----------
    value : float or int
        The number (``True``/``False`` are refused).
    name : str
        Name of the parameter for the message.
    unit : str
        SI unit shown in the message.
    source : str, optional
        File or option the value came from.

    Returns
    -------
    float

    Raises
    ------
    ValueError
        ``"{name} must be finite and positive [unit], got {value!r}"``.
    """
    x = _as_float(value, name, unit, source)
    if not (math.isfinite(x) and x > 0):
        raise ValueError(f"{_where(source)}{name} must be finite and positive{_unit(unit)}, got {value!r}")
    return x


def positive_array(value, name: str, *, unit: str = "", source=None) -> np.ndarray:
    """A float array whose every element is finite and > 0.

    Parameters
    ----------
    value : array_like
        Numbers (a boolean array is refused).
    name : str
        Name of the parameter for the message.
    unit : str
        SI unit shown in the message.
    source : str, optional
        File or option the value came from.

    Returns
    -------
    ndarray of float

    Raises
    ------
    ValueError
        Non-numeric, NaN, infinite, zero or negative elements.
    """
    if isinstance(value, (bool, np.bool_)) or (isinstance(value, np.ndarray) and value.dtype == bool):
        raise ValueError(f"{_where(source)}{name} must be a number{_unit(unit)}, got {value!r}")
    if isinstance(value, (int, float)):  # the common scalar case, without numpy overhead
        if math.isfinite(value) and value > 0:
            return np.asarray(float(value))
        raise ValueError(f"{_where(source)}{name} must be finite and positive{_unit(unit)}, got {value!r}")
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{_where(source)}{name} must be a number{_unit(unit)}, got {value!r}") from None
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise ValueError(f"{_where(source)}{name} must be finite and positive{_unit(unit)}, got {value!r}")
    return arr


def finite_result(value, what: str, **inputs):
    """Refuse a computed value that is NaN or infinite, naming the inputs that caused it.

    Parameters
    ----------
    value : float or array_like
        The result.
    what : str
        What was computed, e.g. ``"Steinmetz loss"``.
    **inputs
        The inputs to show in the message (``freq=1e308``).

    Returns
    -------
    float or ndarray
        ``value`` unchanged when every element is finite.

    Raises
    ------
    ValueError
        ``"{what} is not finite (overflow) for freq=1e+308, ...; the inputs are out of range"``.
    """
    if isinstance(value, float):  # the common scalar case, without numpy overhead
        if math.isfinite(value):
            return value
    arr = np.asarray(value)
    if arr.dtype.kind in "fc" and not np.all(np.isfinite(arr)):
        shown = ", ".join(f"{k}={_short(v)}" for k, v in inputs.items())
        raise ValueError(f"{what} is not finite (overflow) for {shown}; the inputs are out of any physical range")
    return value


def _short(v) -> str:
    a = np.asarray(v)
    if a.ndim == 0:
        try:
            return f"{float(a):g}"
        except (TypeError, ValueError):
            return repr(v)[:40]
    return f"array of {a.size} values in [{np.nanmin(a):g}, {np.nanmax(a):g}]" if a.size and a.dtype.kind in "fiu" else f"array of {a.size}"


@dataclass(frozen=True)
class Plausible:
    """Where a physical quantity is plausible.

    Attributes
    ----------
    label : str
        What it is, for messages.
    unit : str
        SI unit.
    refuse_below, refuse_above : float
        Values at or beyond these are refused (orders of magnitude off, or unphysical).
    usual_low, usual_high : float
        Values outside ``[usual_low, usual_high]`` pass with a warning.
    hint : str
        What to check, appended to the messages.
    """

    label: str
    unit: str
    refuse_below: float
    usual_low: float
    usual_high: float
    refuse_above: float
    hint: str = ""


#: Plausible ranges of the quantities the workbench takes from people and files (SI).
#: Sources: common practice, no source (sizes of cores from chip inductors to power
#: transformers; resistivities from silicon steel, ~5e-7 ohm m, to NiZn ferrite, ~1e5 ohm m
#: and above; laminations are 0.02-1 mm, tape 10-50 um).
PLAUSIBLE: dict[str, Plausible] = {
    "area": Plausible("core cross-section area", "m^2", 1e-12, 1e-9, 1.0, 10.0,
                      "check the unit, e.g. 52mm2 for 52 square millimetres"),
    "volume": Plausible("core volume", "m^3", 1e-15, 1e-12, 1.0, 100.0, "check the unit, e.g. 3.2cm3"),
    "path_length": Plausible("magnetic path length", "m", 1e-6, 1e-4, 10.0, 100.0, "check the unit, e.g. 120mm"),
    "thickness": Plausible("lamination thickness", "m", 1e-8, 1e-6, 10e-3, 0.1,
                           "a lamination over 10 mm is unusual; check the unit, e.g. 0.35mm"),
    "resistivity": Plausible("resistivity", "ohm m", 1e-10, 5e-8, 1e7, 1e12,
                             "check the unit, e.g. 52e-8 or '52 uohm cm'"),
    "temperature": Plausible("core temperature", "degC", -273.15, -60.0, 250.0, 2000.0,
                             "the working range of magnetic materials is about -60 to 250 degC"),
    "turns": Plausible("number of turns", "", 1.0, 1.0, 1e5, 1e7, "a winding has at least one turn"),
    "freq": Plausible("frequency", "Hz", 0.0, 1e-2, 1e9, 1e12, "check the unit, e.g. 100k for 100 kHz"),
    "b_peak": Plausible("peak flux density", "T", 0.0, 1e-6, 3.0, 100.0,
                        "no core material saturates above about 2.5 T"),
    "density": Plausible("density", "kg/m^3", 10.0, 1000.0, 20000.0, 1e5, "check the unit (kg/m^3)"),
}


def check_quantity(value, kind: str, *, name: str | None = None, source=None) -> tuple[float, tuple[str, ...]]:
    """Check a physical quantity against its plausible range.

    Parameters
    ----------
    value : float
        The quantity in SI [the unit of ``PLAUSIBLE[kind]``].
    kind : str
        A key of :data:`PLAUSIBLE` (``"area"``, ``"thickness"``, ``"temperature"``, ...).
    name : str, optional
        Name of the parameter or option for the message (default ``kind``).
    source : str, optional
        File or option the value came from.

    Returns
    -------
    value : float
        The value as a float.
    warnings : tuple of str
        Empty inside the usual range; one sentence outside it.

    Raises
    ------
    ValueError
        Not a finite number, or at/beyond the hard limits: unphysical (below absolute zero,
        under one turn) or orders of magnitude off for what the quantity is.
    """
    spec = PLAUSIBLE.get(kind)
    if spec is None:
        raise ValueError(f"unknown quantity kind {kind!r}; known: {', '.join(sorted(PLAUSIBLE))}")
    name = name or kind
    x = finite_number(value, name, unit=spec.unit, source=source)
    unit = f" {spec.unit}" if spec.unit else ""
    where = _where(source)
    lo_ok = x >= spec.refuse_below if kind == "turns" else x > spec.refuse_below
    if not lo_ok or x >= spec.refuse_above:
        side = "too small" if not lo_ok else "too large"
        raise ValueError(f"{where}{name} = {x:g}{unit} is {side} for a {spec.label} "
                         f"(accepted {spec.refuse_below:g} to {spec.refuse_above:g}{unit}); {spec.hint}")
    if x < spec.usual_low or x > spec.usual_high:
        return x, (f"{where}{name} = {x:g}{unit} is outside the usual range of a {spec.label} "
                   f"({spec.usual_low:g} to {spec.usual_high:g}{unit}); {spec.hint}",)
    return x, ()


def plausibility_warnings(*, source=None, **quantities) -> list[str]:
    """Check several quantities at once; None values are skipped.

    Parameters
    ----------
    source : str, optional
        File or option the values came from.
    **quantities
        ``kind=value`` pairs with kinds of :data:`PLAUSIBLE`.

    Returns
    -------
    list of str
        The warnings, in argument order.

    Raises
    ------
    ValueError
        The first value beyond its hard limits (see :func:`check_quantity`).
    """
    out: list[str] = []
    for kind, value in quantities.items():
        if value is not None:
            out.extend(check_quantity(value, kind, source=source)[1])
    return out
