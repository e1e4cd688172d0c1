"""Result type, error type and the checks shared by the capture readers (CSV and .npz).

Safety: captures are taken on live converters. Probing a winding at mains-derived or
switching voltages, and touching cores that run hot in a loss test, can hurt. Use rated
differential probes and isolation, follow local electrical codes and your site's licensed
practice; nothing in this package makes a measurement safe.
"""
from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Final

import numpy as np

#: Glossary channel name -> SI unit of its samples.
CHANNEL_UNITS: Final[Mapping[str, str]] = MappingProxyType(
    {"b": "T", "flux": "Wb", "v": "V", "v_sense": "V", "i": "A"}
)

#: Largest magnitude accepted for a sample, in SI units, per quantity. No bench
#: instrument, data logger or circuit simulation of a magnetic component comes near these
#: (common practice, no source): a value beyond them is a wrong unit or a corrupt file,
#: and keeping them this far below the float64 range keeps squares, products and sums
#: of a whole record finite (1e9 squared times 1e9 samples is 1e27).
MAGNITUDE_LIMITS: Final[Mapping[str, float]] = MappingProxyType(
    {
        "time": 1e11,  # [s] about 3000 years: even an epoch time stamp in seconds fits
        "v": 1e9,  # [V]
        "v_sense": 1e9,  # [V]
        "i": 1e9,  # [A]
        "b": 1e6,  # [T]
        "flux": 1e6,  # [Wb]
    }
)
#: Shortest mean sample interval accepted [s]: 1 fs, a thousand times finer than the
#: fastest real-time digitisers (a few ps per sample); common practice, no source.
MIN_MEAN_STEP: Final = 1e-15

#: A channel is flagged as clipped when more than this fraction of its samples sit in runs
#: of at least ``CLIP_MIN_RUN`` samples exactly at its maximum or minimum.
#: The value at the extreme must also hold more than ``CLIP_SPIKE_RATIO`` times as many
#: samples as the next distinct value inward: a quantised smooth peak (an 8-bit sine) holds
#: its top code for roughly 1.4 to 2.4 times as many samples as the next code down (the dwell
#: near a parabolic peak goes as sqrt(k + 1) - sqrt(k)); a clipped channel piles up at the
#: rail, tens of times more.
CLIP_FRACTION: Final = 0.01
CLIP_MIN_RUN: Final = 3
CLIP_SPIKE_RATIO: Final = 4.0
MIN_SAMPLES: Final = 3
#: Longest message of a CaptureError (characters); longer texts are shortened in the middle.
MAX_MESSAGE: Final = 290


def shorten(text: str, limit: int = 40) -> str:
    """`text` as a repr of at most about `limit` characters (long cells, long names)."""
    text = str(text)
    if len(text) <= limit:
        return repr(text)
    return repr(text[: limit - 10] + "...") + f" ({len(text)} characters)"


def brief(obj: object, limit: int = 40) -> str:
    """``repr(obj)``, cut to about `limit` characters (long arguments in messages)."""
    text = repr(obj)
    if len(text) <= limit:
        return text
    return text[: limit - 10] + f"... ({len(text)} characters)"


def name_list(names: Iterable[str], limit: int = 6) -> str:
    """Comma-separated reprs of the first `limit` names, then how many more."""
    names = list(names)
    shown = ", ".join(shorten(n, 24) for n in names[:limit])
    if len(names) > limit:
        shown += f", ... ({len(names)} in all)"
    return shown


class CaptureError(ValueError):
    """A capture file cannot be read; the message names the file, row/column and problem.

    Messages are one line of at most ``MAX_MESSAGE`` characters (a long one is cut in the
    middle, keeping the file name at the start and the problem at the end).
    """

    def __init__(self, message: str):
        text = " ".join(str(message).split())
        if len(text) > MAX_MESSAGE:
            keep = MAX_MESSAGE - 5
            text = text[: keep * 2 // 3] + " ... " + text[-(keep - keep * 2 // 3):]
        super().__init__(text)


@dataclass(frozen=True)
class CaptureData:
    """Samples of one capture, in SI units.

    Attributes
    ----------
    time : numpy.ndarray
        Sample times [s], float64, strictly increasing (read-only array). Uneven steps are
        kept exactly as written (no resampling here).
    channels : Mapping[str, numpy.ndarray]
        Glossary name -> samples in SI: ``"b"`` [T], ``"flux"`` [Wb], ``"v"`` [V],
        ``"v_sense"`` [V], ``"i"`` [A]. Same length as `time`, read-only arrays.
    source : str
        File path, or ``"<buffer>"`` for an in-memory buffer.
    metadata : Mapping[str, str]
        Preamble lines of the file (``key -> value`` where they look like that, values as
        written, decimal commas included; otherwise ``"line N" -> text``), plus reader
        notes: ``"format"``, ``"delimiter"``, ``"decimal"`` (``"."`` or ``","``),
        ``"time_source"``, ``"unit.<name>"`` (unit as written and where it came from),
        ``"clipped_channels"`` (comma-separated names, empty when none),
        ``"clipping.<name>"`` details, and ``"time_step.min"``, ``"time_step.max"``
        (shortest and longest step [s], as text).
    columns : Mapping[str, str]
        Glossary name (and ``"time"``) -> original header text, ``"column 3"`` for a file
        without header, or the array name in an ``.npz``.
    units : Mapping[str, str]
        Glossary name (and ``"time"``) -> unit as written in the file or given as an
        argument (``"mV"``, ``"us"``); ``""`` where none was given and SI was taken. The
        arrays are already in SI; this says what the file held.
    meaning : Mapping[str, str]
        Glossary name -> how the reader decided what the column is, e.g.
        ``"header name 'current'"``, ``"unit 'A' of generic name 'CH2'"``,
        ``"simulator name 'V(n003)'"``, ``"argument channels="``.
    notes : tuple of str
        Assumptions the reader made that the user did not state (a decimal comma
        detected, a second voltage channel taken as the sense winding, time built from a
        sample interval). Callers should show them with their result's warnings.
    """

    time: np.ndarray
    channels: Mapping[str, np.ndarray]
    source: str
    metadata: Mapping[str, str] = field(default_factory=dict)
    columns: Mapping[str, str] = field(default_factory=dict)
    units: Mapping[str, str] = field(default_factory=dict)
    meaning: Mapping[str, str] = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def n_samples(self) -> int:
        """Number of samples [-]."""
        return int(self.time.size)

    @property
    def clipped_channels(self) -> tuple[str, ...]:
        """Names of channels flagged as clipped (flat-topped at a rail) at read time."""
        text = self.metadata.get("clipped_channels", "")
        return tuple(name for name in text.split(",") if name)


def readonly(a: np.ndarray) -> np.ndarray:
    """Mark `a` read-only and return it."""
    a.setflags(write=False)
    return a


def _stuck_fraction(mask: np.ndarray) -> float:
    """Fraction of samples in runs of >= CLIP_MIN_RUN consecutive True values."""
    edges = np.diff(np.concatenate(([0], mask.view(np.int8), [0])).astype(np.int8))
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1)
    lengths = ends - starts
    return float(lengths[lengths >= CLIP_MIN_RUN].sum()) / mask.size


def _rail_fraction(x: np.ndarray, rail: float) -> float:
    """Stuck fraction at `rail` if it is a spike against the next value inward, else 0."""
    at_rail = x == rail
    if np.count_nonzero(at_rail) <= CLIP_FRACTION * x.size:  # cheap early exit
        return 0.0
    fraction = _stuck_fraction(at_rail)
    if fraction <= CLIP_FRACTION:
        return 0.0
    if rail >= x.max():  # next distinct value below the top rail, without a masked copy
        neighbour = np.max(x, where=~at_rail, initial=-np.inf)
    else:
        neighbour = np.min(x, where=~at_rail, initial=np.inf)
    if np.isfinite(neighbour) and at_rail.sum() <= CLIP_SPIKE_RATIO * np.count_nonzero(
        x == neighbour
    ):
        return 0.0
    return fraction


def clipping(channels: Mapping[str, np.ndarray]) -> dict[str, str]:
    """Flag channels stuck at their max or min (a flat top at an instrument's rail).

    A channel is flagged when more than CLIP_FRACTION of its samples sit in runs of at
    least CLIP_MIN_RUN samples exactly at its maximum (or minimum), and that value holds
    more than CLIP_SPIKE_RATIO times as many samples as the next distinct value inward.
    A noise-free synthetic trapezoid (exact flat tops joined by ramps) is flagged too; a
    pure two-level rectangle is not (its next value inward is the other level). Only the
    analysis layer knows whether a flat top is expected.
    """
    notes: dict[str, str] = {}
    flagged: list[str] = []
    for name, x in channels.items():
        hi, lo = x.max(), x.min()
        if hi == lo:
            at_hi, at_lo = 1.0, 0.0  # a dead-flat channel
        else:
            at_hi = _rail_fraction(x, hi)
            at_lo = _rail_fraction(x, lo)
        if max(at_hi, at_lo) > CLIP_FRACTION:
            flagged.append(name)
            parts = []
            if at_hi > CLIP_FRACTION:
                parts.append(f"{at_hi:.3g} of samples stuck at max {hi:.6g} {CHANNEL_UNITS[name]}")
            if at_lo > CLIP_FRACTION:
                parts.append(f"{at_lo:.3g} of samples stuck at min {lo:.6g} {CHANNEL_UNITS[name]}")
            notes[f"clipping.{name}"] = "; ".join(parts)
    notes["clipped_channels"] = ",".join(flagged)
    return notes


def check_time(label: str, t: np.ndarray, where_row: Callable[[int], str]) -> dict[str, str]:
    """Refuse a time axis that does not rise strictly or has a non-physical step.

    Returns the metadata entries ``time_step.min`` and ``time_step.max`` [s].
    """
    not_rising = ~(t[1:] > t[:-1])  # one boolean pass, no float temporary
    if not_rising.any():
        k = int(np.argmax(not_rising)) + 1
        prev, here = where_row(k - 1), where_row(k)
        if t[k] == t[k - 1]:
            raise CaptureError(
                f"{label}: {here}: duplicate time stamp {float(t[k])!r} s (same as {prev})"
            )
        raise CaptureError(
            f"{label}: {here}: time is not increasing: {float(t[k])!r} s after "
            f"{float(t[k - 1])!r} s at {prev}"
        )
    span = float(t[-1]) - float(t[0])
    mean_step = span / (t.size - 1)
    if not mean_step >= MIN_MEAN_STEP:
        raise CaptureError(
            f"{label}: the time axis spans {span!r} s over {t.size} samples, a mean step of "
            f"{mean_step!r} s: shorter than {MIN_MEAN_STEP:g} s, which no instrument "
            "samples at; check the time unit"
        )
    lo, hi = np.inf, 0.0
    chunk = 1 << 20  # steps in chunks: no full-length float temporary
    for start in range(0, t.size - 1, chunk):
        d = np.diff(t[start:start + chunk + 1])
        lo, hi = min(lo, float(d.min())), max(hi, float(d.max()))
    return {"time_step.min": repr(lo), "time_step.max": repr(hi)}


def check_magnitude(
    label: str, key: str, x: np.ndarray, where_row: Callable[[int], str]
) -> None:
    """Refuse a finite sample beyond ``MAGNITUDE_LIMITS[key]`` (SI), naming its row."""
    limit = MAGNITUDE_LIMITS[key]
    hi, lo = float(np.max(x)), float(np.min(x))  # two passes, no temporary
    if hi <= limit and lo >= -limit:
        return
    k = int(np.argmax(np.abs(x) > limit))
    unit = "s" if key == "time" else CHANNEL_UNITS[key]
    what = "time" if key == "time" else f"channel {key!r}"
    raise CaptureError(
        f"{label}: {where_row(k)}: {what} value {float(x[k])!r} {unit} (in SI) is beyond "
        f"any physical capture (|value| > {limit:g} {unit}); check the unit or the file"
    )


def check_overrides(label: str, units: Mapping[str, str] | None, time_unit: str | None) -> None:
    """Refuse unknown keys in `units` and a time unit given twice."""
    if units is not None:
        if not isinstance(units, Mapping):
            raise CaptureError(f"{label}: units= must be a mapping, got {brief(units)}")
        for key, value in units.items():
            if key != "time" and key not in CHANNEL_UNITS:
                raise CaptureError(
                    f"{label}: units key {key!r} is not 'time' or a channel name "
                    f"({', '.join(CHANNEL_UNITS)})"
                )
            if not isinstance(value, str):
                raise CaptureError(f"{label}: units[{key!r}] must be text, got {value!r}")
    if time_unit is not None and not isinstance(time_unit, str):
        raise CaptureError(f"{label}: time_unit must be text such as 'us', got {time_unit!r}")
    if time_unit is not None and units is not None and "time" in units:
        raise CaptureError(f"{label}: give the time unit once: time_unit= or units['time']")
