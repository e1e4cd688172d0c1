"""What a capture column holds: header names, simulator probe names, units and their spellings.

A column's meaning comes, in this order, from

1. the user (``channels={"CH2": "current"}`` or ``columns={"i": 2}``);
2. a specific header name (``time``, ``voltage``, ``current``, ``v_sense``, ``B``, ``flux``);
3. a circuit-simulator probe name: ``V(n003)`` is a node voltage, ``I(L1)`` a current
   through a part (the brackets hold a node or part, not a unit);
4. the unit of a generic or unknown name (``CH1``, ``Channel 2``, ``C3``, ``Trace A``, an
   empty name): s -> time, V -> voltage, A -> current, T -> flux density, Wb -> flux;
5. for ``CH1``/``CH2`` without any unit, the old convention (winding voltage, then sense
   voltage), stated in the reader's notes.
"""
from __future__ import annotations

import re
from collections.abc import Mapping
from types import MappingProxyType
from typing import Final

from workbench.units import parse_unit

#: Meaning of an unassigned voltage column: the winding voltage ``v`` or, if that is taken,
#: the sense-winding voltage ``v_sense``.
VOLTAGE: Final = "voltage"
IGNORE: Final = "ignore"

# normalised header name -> meaning (normalised: lower case, "_-./" and runs of spaces
# collapsed to one space)
NAME_ALIASES: Final[Mapping[str, str]] = MappingProxyType(
    {
        **dict.fromkeys(["time", "t", "s", "sec", "seconds", "time s", "zeit", "temps",
                         "tiempo", "timestamp", "time stamp"], "time"),
        **dict.fromkeys(["b", "flux density", "b field", "bfield", "induction"], "b"),
        **dict.fromkeys(["phi", "flux", "φ", "magnetic flux"], "flux"),
        **dict.fromkeys(["v", "voltage", "u", "v winding", "winding voltage", "v primary",
                         "primary voltage", "vp", "u1", "v pri"], "v"),
        **dict.fromkeys(["v sense", "vsense", "sense", "sense voltage", "v secondary",
                         "secondary voltage", "vs", "u2", "v sec"], "v_sense"),
        **dict.fromkeys(["i", "current", "i1", "i primary", "primary current", "ip",
                         "i pri"], "i"),
    }
)
#: Generic names read by the old positional convention when no unit says otherwise.
LEGACY_GENERIC: Final[Mapping[str, str]] = MappingProxyType(
    {
        **dict.fromkeys(["ch1", "ch 1", "channel 1", "v1"], "v"),
        **dict.fromkeys(["ch2", "ch 2", "channel 2", "v2"], "v_sense"),
    }
)
_GENERIC_RE: Final = re.compile(
    r"^(?:ch|chan|channel|c|input|in|trace|tr|probe|signal|sig|analog|analogue|ai|y|x|"
    r"math|m|ref|r|col|column|field|value|data|ampl|amplitude|wave|waveform)?"
    r"\s*(?:[0-9]{1,3}|[a-h])?$",
    re.IGNORECASE | re.ASCII,
)
_SIMULATOR_RE: Final = re.compile(
    r"^\s*(?P<kind>V|I[a-z]?)\((?P<inner>[A-Za-z0-9_:.,+\-]+)\)\s*$", re.IGNORECASE
)
_NAME_UNIT_RE: Final = re.compile(r"^(?P<name>.*?)\s*[\[(]\s*(?P<unit>[^\])]*?)\s*[\])]\s*$")

#: User words for a column's meaning (``channels=`` values) -> meaning.
MEANING_WORDS: Final[Mapping[str, str]] = MappingProxyType(
    {
        **dict.fromkeys(["v", "voltage", "winding voltage", "primary voltage", "v1"], "v"),
        **dict.fromkeys(["v_sense", "v sense", "vsense", "sense", "sense voltage",
                         "secondary voltage", "v2"], "v_sense"),
        **dict.fromkeys(["i", "current", "primary current", "winding current", "i1"], "i"),
        **dict.fromkeys(["b", "flux density", "induction", "b field"], "b"),
        **dict.fromkeys(["flux", "phi", "magnetic flux"], "flux"),
        **dict.fromkeys(["time", "t"], "time"),
        **dict.fromkeys(["ignore", "skip", "none", "-", "unused"], IGNORE),
    }
)

# spelled-out units as instruments and loggers write them -> symbols understood by
# workbench.units (prefix words included)
_PREFIX_WORDS: Final = {"": "", "milli": "m", "micro": "u", "nano": "n", "pico": "p",
                        "kilo": "k", "mega": "M"}
_UNIT_WORDS: Final = {
    "volt": "V", "volts": "V", "amp": "A", "amps": "A", "ampere": "A", "amperes": "A",
    "second": "s", "seconds": "s", "sec": "s", "secs": "s", "tesla": "T", "teslas": "T",
    "weber": "Wb", "webers": "Wb",
}
_UNIT_SPELLINGS: Final = {
    **{p + w: sym + u for p, sym in _PREFIX_WORDS.items() for w, u in _UNIT_WORDS.items()},
    "usec": "us", "msec": "ms", "nsec": "ns", "psec": "ps", "µsec": "us", "μsec": "us",
    "vs": "V s", "v*s": "V s", "v.s": "V s", "v s": "V s", "mvs": "mV s", "uvs": "uV s",
    "mv*s": "mV s", "uv*s": "uV s",
}
#: Dimension (exponents of m, kg, s, A, degC) -> meaning of a column in that unit.
_DIMENSION_MEANING: Final = {
    (0, 0, 1, 0, 0): "time",
    (2, 1, -3, -1, 0): VOLTAGE,
    (0, 0, 0, 1, 0): "i",
    (0, 1, -2, -1, 0): "b",
    (2, 1, -2, -1, 0): "flux",
}


def normalise_name(name: str) -> str:
    """Lower case; runs of spaces and ``_-./`` become one space."""
    return re.sub(r"[\s_\-./]+", " ", name.strip().lower()).strip()


def normalise_unit(text: str) -> str:
    """A unit as written, with spelled-out words (``Volt``, ``mSec``) and brackets mapped
    to the symbols of :mod:`workbench.units`."""
    unit = text.strip()
    while len(unit) >= 2 and unit[0] in "[(" and unit[-1] in "])":
        unit = unit[1:-1].strip()
    key = unit.lower()
    if key in _UNIT_SPELLINGS:
        return _UNIT_SPELLINGS[key]
    if unit == "S":  # an upper-case second, as some scopes write it (never siemens here)
        return "s"
    if len(unit) == 2 and unit[1] == "S" and unit[0] in "munpµμ":  # "uS", "mS" for time
        return unit[0] + "s"
    return unit


def looks_like_unit(text: str) -> bool:
    """True if `text` is a unit the workbench can read (after :func:`normalise_unit`)."""
    if not text.strip():
        return False
    try:
        parse_unit(normalise_unit(text))
    except ValueError:
        return False
    return True


def unit_meaning(unit_text: str) -> str | None:
    """Meaning of a column measured in `unit_text` (time, voltage, i, b, flux) or None."""
    if not unit_text.strip():
        return None
    try:
        dim = parse_unit(normalise_unit(unit_text)).dimension
    except ValueError:
        return None
    return _DIMENSION_MEANING.get(dim)


def simulator_probe(text: str) -> str | None:
    """``"v"`` / ``"i"`` kind of a simulator name such as ``V(n003)`` or ``I(L1)``, else None.

    ``V(mV)``, ``I (A)`` or ``v(T)`` are a name with a unit, not probes: the bracket holds
    a unit, or there is a space before it.
    """
    match = _SIMULATOR_RE.match(text)
    if match is None:
        return None
    kind = "v" if match["kind"].lower() == "v" else "i"
    inner = match["inner"].strip()
    if looks_like_unit(inner):  # "V(mV)", "I(A)", "v(T)": a name and a unit
        return None
    return kind


def split_name_unit(field_text: str) -> tuple[str, str]:
    """(name, unit) of a header field: ``t [us]``, ``v (mV)``, ``U/V``; a simulator probe
    name keeps its brackets and has no unit."""
    text = field_text.strip()
    if simulator_probe(text) is not None:
        return text, ""
    match = _NAME_UNIT_RE.match(text)
    if match is not None:
        return match["name"].strip(), match["unit"].strip()
    if "/" in text:  # quantity/unit, as in "t/s", "U/V", "B/mT" (ISO 80000-1 tables)
        name, _, unit = text.rpartition("/")
        if name.strip() and looks_like_unit(unit) and not looks_like_unit(name):
            return name.strip(), unit.strip()
    return text, ""


def is_generic(name: str) -> bool:
    """True for names that do not say what a column holds (CH1, Channel 2, C3, empty)."""
    return bool(_GENERIC_RE.match(normalise_name(name).replace(" ", "")))


def user_meaning(word: object) -> str | None:
    """Meaning of a user's word for a column (``"current"``, ``"v_sense"``) or None."""
    if not isinstance(word, str):
        return None
    return MEANING_WORDS.get(word.strip().lower().replace("-", " ").replace("_", " "),
                             MEANING_WORDS.get(word.strip().lower()))
