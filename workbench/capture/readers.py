"""Read bench-instrument and data-logger captures (CSV, ``.npz``) into SI arrays.

A capture is a table of samples: a time axis and one or more channels among our glossary
names ``"b"`` [T], ``"flux"`` [Wb], ``"v"`` [V] (winding voltage), ``"v_sense"`` [V]
(sense-winding or shunt voltage) and ``"i"`` [A] (primary current).

CSV files may start with metadata lines (``Sample interval,1e-8``), then an optional header
row whose names may carry units (``t [us]``, ``v_sense (mV)``), an optional row of units,
and the numeric table. The head of the file (at most 1 MiB or 10000 text lines) is read as
text to find where the numbers start; the table itself goes to a compiled parser
(pandas' C engine when pandas is installed, otherwise :func:`numpy.loadtxt`). Both give
bit-identical arrays.

Rows and columns in error messages are counted from 1, as a text editor shows them: "row 12"
is line 12 of the file, "column 2" the second field. Column *indices* given to the readers
(``columns={"v": 1}``) are 0-based Python indices.

Safety: captures are taken on live converters. Probing a winding at mains-derived or
switching voltages, and touching cores that run hot in a loss test, can hurt. Use rated
differential probes and isolation, follow local electrical codes and your site's licensed
practice; nothing in this module makes a measurement safe.
"""
from __future__ import annotations

import io
import math
import os
import re
import zipfile
import dataclasses
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import IO, Any, Final

import numpy as np

from workbench.units import parse_quantity, parse_unit, scale_by_power_of_ten, unit_exponent

__all__ = [
    "CHANNEL_UNITS",
    "CaptureData",
    "CaptureError",
    "read_capture",
    "read_csv_capture",
    "read_npz_capture",
]

#: Glossary channel name -> SI unit of its samples.
CHANNEL_UNITS: Final[Mapping[str, str]] = MappingProxyType(
    {"b": "T", "flux": "Wb", "v": "V", "v_sense": "V", "i": "A"}
)

#: Head limits: a capture whose numbers do not start within these is refused.
MAX_HEADER_BYTES: Final = 1 << 20
MAX_HEADER_LINES: Final = 10_000
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

# normalised header name -> glossary name (normalised: lower case, "_-./" and runs of
# spaces collapsed to one space)
_NAME_ALIASES: Final[Mapping[str, str]] = MappingProxyType(
    {
        **dict.fromkeys(["time", "t", "s", "sec", "seconds", "time s"], "time"),
        **dict.fromkeys(["b", "flux density", "b field", "bfield", "induction"], "b"),
        **dict.fromkeys(["phi", "flux", "φ", "magnetic flux"], "flux"),
        **dict.fromkeys(
            ["v", "voltage", "v1", "ch1", "ch 1", "channel 1", "v winding", "winding voltage"],
            "v",
        ),
        **dict.fromkeys(
            ["v2", "v sense", "vsense", "sense", "ch2", "ch 2", "channel 2", "sense voltage"],
            "v_sense",
        ),
        **dict.fromkeys(["i", "current", "i1", "i primary", "primary current", "ip"], "i"),
    }
)
_INTERVAL_KEYS: Final = frozenset(
    ["sample interval", "sampling interval", "sample period", "sampling period",
     "time step", "timestep", "dt", "delta t", "x increment", "xincrement",
     "time interval", "horizontal interval"]
)
_RATE_KEYS: Final = frozenset(
    ["sample rate", "sampling rate", "sample frequency", "sampling frequency", "fs"]
)
_NUM_RE: Final = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_NONFINITE_RE: Final = re.compile(r"^[+-]?(?:nan|inf|infinity)$", re.IGNORECASE)
_DECIMAL_COMMA_RE: Final = re.compile(r"^[+-]?\d+,\d+(?:[eE][+-]?\d+)?$")
_NAME_UNIT_RE: Final = re.compile(r"^(?P<name>.*?)\s*[\[(]\s*(?P<unit>[^\])]*?)\s*[\])]\s*$")
_WS_HEADER_RE: Final = re.compile(r"[^\s\[(]+(?:\s*[\[(][^\])]*[\])])?|[\[(][^\])]*[\])]")
_DELIMITERS: Final = (",", ";", "\t", None)  # None = runs of whitespace
_DELIM_NAMES: Final = {",": "','", ";": "';'", "\t": "tab", None: "whitespace"}


class CaptureError(ValueError):
    """A capture file cannot be read; the message names the file, row/column and problem."""


@dataclass(frozen=True)
class CaptureData:
    """Samples of one capture, in SI units.

    Attributes
    ----------
    time : numpy.ndarray
        Sample times [s], float64, strictly increasing (read-only array).
    channels : Mapping[str, numpy.ndarray]
        Glossary name -> samples in SI: ``"b"`` [T], ``"flux"`` [Wb], ``"v"`` [V],
        ``"v_sense"`` [V], ``"i"`` [A]. Same length as `time`, read-only arrays.
    source : str
        File path, or ``"<buffer>"`` for an in-memory buffer.
    metadata : Mapping[str, str]
        Metadata lines of the file (``key -> value`` where they look like that, otherwise
        ``"line N" -> text``), plus reader notes: ``"format"``, ``"delimiter"``,
        ``"time_source"``, ``"unit.<name>"`` (unit as written), ``"clipped_channels"``
        (comma-separated names, empty when none) and ``"clipping.<name>"`` details.
    columns : Mapping[str, str]
        Glossary name (and ``"time"``) -> original header text, ``"column 3"`` for a file
        without header, or the array name in an ``.npz``.
    """

    time: np.ndarray
    channels: Mapping[str, np.ndarray]
    source: str
    metadata: Mapping[str, str] = field(default_factory=dict)
    columns: Mapping[str, str] = field(default_factory=dict)

    @property
    def n_samples(self) -> int:
        """Number of samples [-]."""
        return int(self.time.size)

    @property
    def clipped_channels(self) -> tuple[str, ...]:
        """Names of channels flagged as clipped (flat-topped at a rail) at read time."""
        text = self.metadata.get("clipped_channels", "")
        return tuple(name for name in text.split(",") if name)


# ------------------------------------------------------------------------------------------
# public entry points
# ------------------------------------------------------------------------------------------
def read_capture(
    path_or_buffer: str | os.PathLike[str] | IO[Any],
    *,
    time_column: int | str | None = None,
    columns: Mapping[str, int | str] | None = None,
    delimiter: str | None = None,
    time_unit: str | None = None,
    units: Mapping[str, str] | None = None,
) -> CaptureData:
    """Read a capture file (CSV text or ``.npz``), choosing the reader by content.

    Parameters
    ----------
    path_or_buffer : str, os.PathLike or file-like
        File path, or an open text/binary buffer.
    time_column : int or str, optional
        0-based index or header name of the time column. Default: the column named
        time/t/s; else a sample interval from the metadata; else (no header) column 0.
    columns : Mapping[str, int or str], optional
        Glossary name (``"b"``, ``"flux"``, ``"v"``, ``"v_sense"``, ``"i"``) -> 0-based
        column index or header name (array name for ``.npz``). When given, exactly these
        channels are read. Default: recognised header names.
    delimiter : str, optional
        ``","``, ``";"``, ``"\\t"`` or ``" "`` (runs of whitespace). Default: sniffed.
    time_unit : str, optional
        Unit of the time column, e.g. ``"us"``; overrides the header.
    units : Mapping[str, str], optional
        Glossary name (or ``"time"``) -> unit as written, e.g. ``{"v_sense": "mV"}``;
        overrides the header. Columns without a unit are taken as SI.

    Returns
    -------
    CaptureData
        Time [s] and channels in SI units with metadata.

    Raises
    ------
    CaptureError
        If the file cannot be read as a capture; the message names the file and, where it
        applies, the row and column and the offending text.
    """
    source = _Source.of(path_or_buffer)
    if source.is_npz():
        if delimiter is not None:
            raise CaptureError(f"{source.label}: delimiter= does not apply to an .npz file")
        return _read_npz(source, time_column, columns, time_unit, units)
    return _read_csv(source, time_column, columns, delimiter, time_unit, units)


def read_csv_capture(
    path_or_buffer: str | os.PathLike[str] | IO[Any],
    *,
    time_column: int | str | None = None,
    columns: Mapping[str, int | str] | None = None,
    delimiter: str | None = None,
    time_unit: str | None = None,
    units: Mapping[str, str] | None = None,
) -> CaptureData:
    """Read a delimited-text capture; parameters as :func:`read_capture`.

    Parameters
    ----------
    path_or_buffer : str, os.PathLike or file-like
        File path, or an open text/binary buffer.
    time_column : int or str, optional
        0-based index or header name of the time column.
    columns : Mapping[str, int or str], optional
        Glossary name -> 0-based column index or header name.
    delimiter : str, optional
        ``","``, ``";"``, ``"\\t"`` or ``" "``; default sniffed.
    time_unit : str, optional
        Unit of the time column, e.g. ``"us"``.
    units : Mapping[str, str], optional
        Glossary name (or ``"time"``) -> unit as written.

    Returns
    -------
    CaptureData
        Time [s] and channels in SI units with metadata.

    Raises
    ------
    CaptureError
        Naming the file, row/column and problem.
    """
    source = _Source.of(path_or_buffer)
    return _read_csv(source, time_column, columns, delimiter, time_unit, units)


def read_npz_capture(
    path_or_buffer: str | os.PathLike[str] | IO[Any],
    *,
    time_column: str | None = None,
    columns: Mapping[str, str] | None = None,
    time_unit: str | None = None,
    units: Mapping[str, str] | None = None,
) -> CaptureData:
    """Read a numpy ``.npz`` capture with arrays named by the glossary.

    Parameters
    ----------
    path_or_buffer : str, os.PathLike or file-like
        ``.npz`` path or binary buffer holding 1-D arrays ``t`` or ``time`` [s], and any of
        ``b`` [T], ``flux`` (or ``phi``) [Wb], ``v`` [V], ``v_sense`` [V], ``i`` [A]; an
        optional scalar ``sample_interval`` [s] replaces a missing time array. 0-d text
        arrays become metadata.
    time_column : str, optional
        Name of the time array if not ``t``/``time``.
    columns : Mapping[str, str], optional
        Glossary name -> array name; when given, exactly these channels are read.
    time_unit : str, optional
        Unit of the stored time array if not seconds, e.g. ``"us"``.
    units : Mapping[str, str], optional
        Glossary name (or ``"time"``) -> unit of the stored array if not SI.

    Returns
    -------
    CaptureData
        Time [s] and channels in SI units with metadata.

    Raises
    ------
    CaptureError
        Naming the file, the array and (for bad values) the 0-based sample index.
    """
    source = _Source.of(path_or_buffer)
    return _read_npz(source, time_column, columns, time_unit, units)


# ------------------------------------------------------------------------------------------
# sources
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Source:
    label: str
    path: str | None
    data: bytes | None

    @classmethod
    def of(cls, obj: Any) -> _Source:
        if isinstance(obj, (str, os.PathLike)):
            path = os.fspath(obj)
            if not os.path.exists(path):
                raise CaptureError(f"{path}: no such file")
            if os.path.isdir(path):
                raise CaptureError(f"{path}: is a directory, not a capture file")
            return cls(path, path, None)
        if hasattr(obj, "read"):
            content = obj.read()
            if isinstance(content, str):
                content = content.encode("utf-8")
            if not isinstance(content, (bytes, bytearray)):
                raise CaptureError(f"<buffer>: read() returned {type(content).__name__}")
            return cls("<buffer>", None, bytes(content))
        raise CaptureError(
            f"path_or_buffer: expected a path or a file-like object, got {obj!r}"
        )

    def open_binary(self) -> IO[bytes]:
        if self.path is not None:
            return open(self.path, "rb")
        return io.BytesIO(self.data or b"")

    def open_text(self, encoding: str) -> IO[str]:
        return io.TextIOWrapper(
            self.open_binary(), encoding=encoding, errors="replace", newline=None
        )

    def first_bytes(self, n: int) -> bytes:
        with self.open_binary() as fh:
            return fh.read(n)

    def is_npz(self) -> bool:
        if self.path is not None and self.path.lower().endswith(".npz"):
            return True
        return self.first_bytes(4) == b"PK\x03\x04"


# ------------------------------------------------------------------------------------------
# CSV: head scan
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Head:
    encoding: str
    data_start: int  # 0-based index of the first numeric line (= lines to skip)
    delimiter: str | None
    ncols: int
    header_line: int | None  # 1-based line number of the header row
    header: tuple[str, ...] | None
    header_units: tuple[str, ...] | None
    metadata: dict[str, str]
    trailing_delimiter: bool = False
    head_chars: int = 0  # characters before the first numeric row
    row_chars: float = 1.0  # mean characters per row over the first rows of the table


def _strip_field(text: str) -> str:
    text = text.strip()
    if len(text) >= 2 and text[0] == text[-1] and text[0] in "\"'":
        text = text[1:-1].strip()
    return text


def _split(text: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return [_strip_field(f) for f in text.split()]
    fields = [_strip_field(f) for f in text.split(delimiter)]
    if len(fields) > 1 and fields[-1] == "":
        fields.pop()  # one trailing delimiter, as some loggers write
    return fields


def _is_number(text: str) -> bool:
    return bool(_NUM_RE.match(text) or _NONFINITE_RE.match(text))


def _numeric_split(text: str, delimiters: tuple[str | None, ...]) -> tuple[str | None, int] | None:
    """Delimiter that splits `text` into the most fields that all look numeric."""
    best: tuple[str | None, int] | None = None
    for delim in delimiters:
        fields = _split(text, delim)
        if fields and all(_is_number(f) for f in fields):
            if best is None or len(fields) > best[1]:
                best = (delim, len(fields))
    return best


def _detect_encoding(label: str, head: bytes) -> str:
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise CaptureError(
            f"{label}: file is UTF-16 encoded text; save it as UTF-8 or ASCII text"
        )
    sample = head[:8192]
    nul = sample.find(b"\x00")
    if nul >= 0:
        raise CaptureError(
            f"{label}: binary file (NUL byte at offset {nul}); expected a text table "
            "(CSV) or an .npz archive"
        )
    control = sum(sample.count(bytes([c])) for c in range(32) if c not in (9, 10, 12, 13))
    if sample and control > 0.01 * len(sample):
        raise CaptureError(
            f"{label}: binary file ({control} control bytes in the first {len(sample)}); "
            "expected a text table (CSV) or an .npz archive"
        )
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 4:  # not just a character cut at the end of the sample
            return "cp1252"  # Windows exports: "µs" is byte 0xB5; undefined bytes replaced
    return "utf-8-sig"


def _normalise_name(name: str) -> str:
    return re.sub(r"[\s_\-./]+", " ", name.strip().lower()).strip()


def _split_name_unit(field_text: str) -> tuple[str, str]:
    match = _NAME_UNIT_RE.match(field_text)
    if match is None:
        return field_text.strip(), ""
    return match["name"].strip(), match["unit"].strip()


def _split_header(text: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return [_strip_field(f) for f in _WS_HEADER_RE.findall(text)]
    return _split(text, delimiter)


def _looks_like_unit(text: str) -> bool:
    if not text:
        return False
    try:
        parse_unit(text)
    except ValueError:
        return False
    return True


def _parse_metadata_line(text: str, delimiter: str | None, line_no: int) -> tuple[str, str]:
    body = text.strip().lstrip("#").strip()
    for sep in ([delimiter] if delimiter not in (None, " ") else []) + [",", ";", "\t", ":", "="]:
        if sep and sep in body:
            key, _, value = body.partition(sep)
            key = key.strip().rstrip(":").strip()
            value = value.strip()
            if sep in (",", ";", "\t"):
                value = ", ".join(v for v in (_strip_field(x) for x in value.split(sep)) if v)
            if key:
                return key, value
    return f"line {line_no}", body


def _scan_head(source: _Source, delimiter: str | None) -> _Head:
    label = source.label
    raw_head = source.first_bytes(MAX_HEADER_BYTES + 65536)
    if not raw_head.strip():
        raise CaptureError(f"{label}: file is empty (no text, no numbers)")
    encoding = _detect_encoding(label, raw_head)
    delimiters = _DELIMITERS if delimiter is None else (delimiter,)
    lines: list[tuple[int, str]] = []  # (1-based line number, text) of non-blank lines
    consumed = 0
    with source.open_text(encoding) as fh:
        pending: list[str] = []  # lines read ahead and not yet consumed

        def next_line() -> str:
            return pending.pop(0) if pending else fh.readline(MAX_HEADER_BYTES + 1)

        line_index = 0
        while True:
            text = next_line()
            if not text:
                break
            line_index += 1
            consumed += len(text)
            body = text.rstrip("\r\n")
            if body.strip():
                found = _numeric_split(body, delimiters)
                if found is not None and found[1] == 1:
                    # a bare number among metadata lines (e.g. a record length on its own
                    # line) is not the table if the next row is text or has more fields
                    while True:
                        ahead = fh.readline(MAX_HEADER_BYTES + 1)
                        pending.append(ahead)
                        if not ahead or ahead.strip():
                            break
                    after = _numeric_split(ahead.rstrip("\r\n"), delimiters) if ahead else None
                    if ahead.strip() and (after is None or after[1] > 1):
                        found = None
                if found is not None:
                    trailing = found[0] is not None and body.rstrip().endswith(found[0])
                    head = _finish_head(label, encoding, line_index - 1, found, lines, trailing)
                    rest = pending + [fh.readline() for _ in range(max(0, 255 - len(pending)))]
                    sample = [x for x in [len(text)] + [len(r) for r in rest] if x]
                    return dataclasses.replace(
                        head, head_chars=consumed - len(text), row_chars=sum(sample) / len(sample)
                    )
                lines.append((line_index, body))
            if consumed > MAX_HEADER_BYTES or len(lines) > MAX_HEADER_LINES:
                raise CaptureError(
                    f"{label}: header too large: no numeric row within the first "
                    f"{MAX_HEADER_BYTES // 1024} KiB / {MAX_HEADER_LINES} text lines "
                    f"(read {consumed} characters, {len(lines)} text lines); is this a "
                    "capture table?"
                )
    _raise_no_data(label, lines, delimiters)
    raise AssertionError("unreachable")  # pragma: no cover


def _raise_no_data(label: str, lines: list[tuple[int, str]], delimiters: tuple) -> None:
    for line_no, text in lines:
        for delim in (";", "\t", None):
            fields = _split(text, delim)
            if len(fields) >= 2 and any(_DECIMAL_COMMA_RE.match(f) for f in fields) and all(
                _DECIMAL_COMMA_RE.match(f) or _is_number(f) for f in fields
            ):
                raise CaptureError(
                    f"{label}: row {line_no} uses decimal commas ({text.strip()[:60]!r}); "
                    "export the capture with a decimal point"
                )
    if not lines:  # pragma: no cover - empty handled before
        raise CaptureError(f"{label}: file is empty")
    last_no, last = lines[-1]
    fields = max((_split_header(last, d) for d in delimiters), key=len)
    names = [_normalise_name(_split_name_unit(f)[0]) for f in fields]
    if len(fields) >= 2 and any(n in _NAME_ALIASES for n in names):
        raise CaptureError(
            f"{label}: header only: header row {last_no} ({last.strip()[:80]!r}) is not "
            "followed by any numeric data rows"
        )
    raise CaptureError(
        f"{label}: no numeric data rows: {len(lines)} line(s) of text only "
        f"(rows {lines[0][0]}-{last_no})"
    )


def _finish_head(
    label: str,
    encoding: str,
    data_start: int,
    found: tuple[str | None, int],
    lines: list[tuple[int, str]],
    trailing: bool,
) -> _Head:
    delimiter, ncols = found
    header_line: int | None = None
    header: tuple[str, ...] | None = None
    header_units: tuple[str, ...] | None = None
    meta_lines = list(lines)
    if meta_lines:
        cand_no, cand = meta_lines[-1]
        fields = _split_header(cand, delimiter)
        first_numeric = bool(fields) and _is_number(fields[0])
        if first_numeric and len(fields) > 1:
            bad = next((j for j, f in enumerate(fields) if not _is_number(f)), 0)
            raise CaptureError(
                f"{label}: row {cand_no}, column {bad + 1}: text {fields[bad]!r} in a "
                "numeric cell"
            )
        if len(fields) == ncols:
            meta_lines.pop()
            header_line, header = cand_no, tuple(fields)
            if (
                meta_lines
                and all(_looks_like_unit(f) or f == "" for f in fields)
                and any(fields)
                and len(_split_header(meta_lines[-1][1], delimiter)) == ncols
            ):
                header_units = header
                header_line, prev = meta_lines.pop()
                header = tuple(_split_header(prev, delimiter))
        else:
            names = [_normalise_name(_split_name_unit(f)[0]) for f in fields]
            recognised = sum(n in _NAME_ALIASES for n in names)
            if recognised >= 1 and len(fields) >= 2 and not any(_is_number(f) for f in fields):
                raise CaptureError(
                    f"{label}: header row {cand_no} has {len(fields)} names "
                    f"({', '.join(fields)}) but the data rows from row {data_start + 1} have "
                    f"{ncols} fields"
                )
    metadata: dict[str, str] = {}
    for line_no, text in meta_lines:
        key, value = _parse_metadata_line(text, delimiter, line_no)
        if key in metadata:
            key = f"{key} (line {line_no})"
        metadata[key] = value
    return _Head(encoding, data_start, delimiter, ncols, header_line, header, header_units,
                 metadata, trailing)


# ------------------------------------------------------------------------------------------
# CSV: columns, units, sample interval
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Column:
    index: int
    label: str  # header text or "column N"
    unit_text: str
    unit_origin: str  # "header", "argument" or "none (taken as SI)"


def _column_label(head: _Head, index: int) -> str:
    if head.header is not None:
        return f"column {index + 1} ({head.header[index]!r})"
    return f"column {index + 1}"


def _resolve_index(label: str, head: _Head, key: str, spec: int | str) -> int:
    if isinstance(spec, bool) or not isinstance(spec, (int, str, np.integer)):
        raise CaptureError(f"{label}: {key} must be a 0-based column index or a header name, "
                           f"got {spec!r}")
    if isinstance(spec, (int, np.integer)):
        if not 0 <= int(spec) < head.ncols:
            raise CaptureError(
                f"{label}: {key}={int(spec)} is outside the {head.ncols} columns "
                f"(0-based indices 0..{head.ncols - 1})"
            )
        return int(spec)
    if head.header is None:
        raise CaptureError(
            f"{label}: {key}={spec!r} names a column but the file has no header row; "
            "use a 0-based column index"
        )
    wanted = spec.strip().lower()
    for j, text in enumerate(head.header):
        if text.strip().lower() == wanted:
            return j
    for j, text in enumerate(head.header):
        if _split_name_unit(text)[0].strip().lower() == wanted:
            return j
    raise CaptureError(
        f"{label}: {key}={spec!r} matches no header name; the header (row "
        f"{head.header_line}) has {', '.join(repr(h) for h in head.header)}"
    )


def _sample_interval(label: str, metadata: Mapping[str, str]) -> tuple[float, str] | None:
    for key, value in metadata.items():
        norm = _normalise_name(key)
        try:
            if norm in _INTERVAL_KEYS:
                dt = parse_quantity(value, "s", name=f"metadata {key!r}")
            elif norm in _RATE_KEYS:
                text = re.sub(r"(?i)\s*(sa/s|s/s|samples/s|sps)\s*$", "Hz", value.strip())
                dt = 1.0 / parse_quantity(text, "Hz", name=f"metadata {key!r}")
            else:
                continue
        except (ValueError, ZeroDivisionError) as exc:
            raise CaptureError(f"{label}: cannot read the sample interval: {exc}") from None
        if not (math.isfinite(dt) and dt > 0):
            raise CaptureError(
                f"{label}: metadata {key!r} = {value!r} is not a positive sample interval"
            )
        return dt, key
    return None


def _choose_columns(
    label: str,
    head: _Head,
    time_column: int | str | None,
    columns: Mapping[str, int | str] | None,
    interval: tuple[float, str] | None,
) -> tuple[int | None, dict[str, int]]:
    names = (
        [_normalise_name(_split_name_unit(h)[0]) for h in head.header]
        if head.header is not None
        else [""] * head.ncols
    )
    if time_column is not None:
        t_idx: int | None = _resolve_index(label, head, "time_column", time_column)
    else:
        hits = [j for j, n in enumerate(names) if _NAME_ALIASES.get(n) == "time"]
        if hits:
            t_idx = hits[0]
        elif interval is not None:
            t_idx = None
        elif head.header is None:
            t_idx = 0
        else:
            raise CaptureError(
                f"{label}: no time column (looked for time/t/s in the header, row "
                f"{head.header_line}: {', '.join(repr(h) for h in head.header)}) and no "
                "sample interval in the metadata; pass time_column="
            )
    chosen: dict[str, int] = {}
    if columns is not None:
        for key, spec in columns.items():
            if key not in CHANNEL_UNITS:
                raise CaptureError(
                    f"{label}: columns key {key!r} is not a channel name; expected one of "
                    f"{', '.join(CHANNEL_UNITS)}"
                )
            chosen[key] = _resolve_index(label, head, f"columns[{key!r}]", spec)
    elif head.header is not None:
        for j, n in enumerate(names):
            key = _NAME_ALIASES.get(n)
            if j == t_idx or key in (None, "time"):
                continue
            if key in chosen:
                raise CaptureError(
                    f"{label}: {_column_label(head, chosen[key])} and "
                    f"{_column_label(head, j)} both look like channel {key!r}; pass "
                    "columns= to choose"
                )
            chosen[key] = j
    if t_idx is not None and t_idx in chosen.values():
        key = next(k for k, v in chosen.items() if v == t_idx)
        raise CaptureError(
            f"{label}: {_column_label(head, t_idx)} is used both as time and as channel "
            f"{key!r}"
        )
    if not chosen:
        if head.ncols == 1:
            raise CaptureError(
                f"{label}: a single column (no data channel): the table from row "
                f"{head.data_start + 1} has one field per row"
            )
        if head.header is None:
            raise CaptureError(
                f"{label}: no header row, so channels cannot be recognised; pass columns= "
                f"with 0-based indices, e.g. columns={{'v': 1, 'i': 2}} "
                f"({head.ncols} columns from row {head.data_start + 1})"
            )
        raise CaptureError(
            f"{label}: no column of the header (row {head.header_line}: "
            f"{', '.join(repr(h) for h in head.header)}) is recognised as a channel "
            f"({', '.join(CHANNEL_UNITS)}); pass columns="
        )
    return t_idx, chosen


def _column_unit(
    label: str,
    head: _Head,
    index: int,
    key: str,
    si_unit: str,
    override: str | None,
) -> tuple[_Column, int]:
    col_label = _column_label(head, index)
    if override is not None:
        unit_text, origin = override, "argument"
    else:
        unit_text, origin = "", "none (taken as SI)"
        if head.header_units is not None and head.header_units[index]:
            unit_text, origin = head.header_units[index], "units row"
        elif head.header is not None:
            _, in_header = _split_name_unit(head.header[index])
            if in_header:
                unit_text, origin = in_header, "header"
    try:
        power = unit_exponent(unit_text, si_unit) if unit_text.strip() else 0
    except ValueError as exc:
        where = "argument" if origin == "argument" else f"header of {col_label}"
        raise CaptureError(
            f"{label}: unknown or wrong unit {unit_text!r} in the {where} for {key!r} "
            f"(expected a unit of {si_unit}): {exc}"
        ) from None
    return _Column(index, head.header[index] if head.header else f"column {index + 1}",
                   unit_text, origin), power


# ------------------------------------------------------------------------------------------
# CSV: the compiled parse and diagnosis of bad rows
# ------------------------------------------------------------------------------------------
def _import_pandas():
    try:
        import pandas
    except ImportError:
        return None
    return pandas


def _parse_table(source: _Source, head: _Head, usecols: list[int]) -> list[np.ndarray]:
    """Numeric table as one contiguous float64 array per column, via a compiled parser.

    Peak memory: with pandas, the rows are counted first (a fast byte count) and the
    parsed chunks are copied into preallocated columns, so the peak is the numbers plus
    one chunk (pandas' own concatenation of a whole-file read peaks near 3.5x);
    numpy.loadtxt fills one (n, k) array that is split into contiguous columns (2x).
    """
    pd = _import_pandas()
    if pd is not None:
        target: Any = source.path if source.path is not None else source.open_binary()
        reader = pd.read_csv(
            target,
            chunksize=_CHUNK_ROWS,
            sep=r"\s+" if head.delimiter is None else head.delimiter,
            header=None,
            skiprows=head.data_start,
            usecols=usecols if head.trailing_delimiter else None,
            dtype=np.float64,
            engine="c",
            encoding=_table_encoding(source, head),
            encoding_errors="replace",
            skip_blank_lines=True,
            quotechar='"',
        )
        return _fill_from_chunks(reader, _estimate_rows(source, head))
    with source.open_text(head.encoding) as fh:
        table = np.loadtxt(
            fh,
            delimiter=head.delimiter,
            skiprows=head.data_start,
            usecols=usecols if head.trailing_delimiter else None,
            dtype=np.float64,
            ndmin=2,
            comments=None,
            quotechar='"',
        )
    return [np.ascontiguousarray(table[:, j]) for j in range(table.shape[1])]


_CHUNK_ROWS: Final = 1 << 20


def _table_encoding(source: _Source, head: _Head) -> str:
    """Encoding for pandas: plain utf-8 (its fast path) unless a BOM sits on a data row."""
    if head.encoding != "utf-8-sig":
        return head.encoding
    if head.data_start == 0 and source.first_bytes(3) == b"\xef\xbb\xbf":
        return "utf-8-sig"
    return "utf-8"


def _estimate_rows(source: _Source, head: _Head) -> int:
    """Generous estimate of the table rows from the file size and the first rows' length.

    Over-estimating costs nothing resident: pages of an ``np.empty`` buffer that are never
    written are never touched. Under-estimating costs one copy (see _fill_from_chunks).
    """
    size = os.path.getsize(source.path) if source.path is not None else len(source.data or b"")
    rows = max(size - head.head_chars, 0) / max(head.row_chars, 1.0)
    return int(rows * 1.25) + 1024


def _fill_from_chunks(reader, expected_rows: int) -> list[np.ndarray]:
    """Copy pandas chunks into preallocated float64 columns (peak: numbers + one chunk)."""
    columns: list[np.ndarray] | None = None
    overflow: list[list[np.ndarray]] = []
    filled = 0
    with reader:
        for chunk in reader:
            m = len(chunk)
            parts = [chunk[c].to_numpy(dtype=np.float64, copy=False) for c in chunk.columns]
            if columns is None:
                columns = [np.empty(max(expected_rows, m), dtype=np.float64) for _ in parts]
            if overflow or filled + m > columns[0].size:  # estimate too low: keep the rest
                overflow.append([p.copy() for p in parts])
                continue
            for out, part in zip(columns, parts):
                out[filled:filled + m] = part
            filled += m
    if columns is None:
        return []
    if overflow:
        return [
            np.concatenate([col[:filled], *(o[j] for o in overflow)])
            for j, col in enumerate(columns)
        ]
    return [col[:filled] for col in columns]


def _parse_table_filtered(source: _Source, head: _Head, usecols: list[int]) -> list[np.ndarray]:
    """numpy fallback for tables with whitespace-only lines, which loadtxt does not skip."""
    with source.open_text(head.encoding) as fh:
        for _ in range(head.data_start):
            fh.readline()
        table = np.loadtxt(
            (line for line in fh if line.strip()),
            delimiter=head.delimiter,
            usecols=usecols if head.trailing_delimiter else None,
            dtype=np.float64,
            ndmin=2,
            comments=None,
            quotechar='"',
        )
    return [np.ascontiguousarray(table[:, j]) for j in range(table.shape[1])]


def _iter_data_lines(source: _Source, head: _Head) -> Iterator[tuple[int, str]]:
    """(1-based line number, text) of the non-blank lines of the table."""
    with source.open_text(head.encoding) as fh:
        for _ in range(head.data_start):
            fh.readline()
        for offset, text in enumerate(fh):
            if text.strip():
                yield head.data_start + offset + 1, text.rstrip("\r\n")


def _diagnose(label: str, head: _Head, line_no: int, text: str, usecols: list[int]) -> str | None:
    """Describe what is wrong with one table row, or None if it is a good row."""
    fields = _split(text, head.delimiter)
    if len(fields) == head.ncols - 1 and head.delimiter is not None:
        raw = [_strip_field(f) for f in text.split(head.delimiter)]
        if len(raw) == head.ncols:
            fields = raw  # the last cell is empty, not a trailing delimiter
    if len(fields) != head.ncols:
        others = [d for d in _DELIMITERS if d != head.delimiter]
        alt = _numeric_split(text, tuple(others))
        if alt is not None and alt[1] == head.ncols:
            return (
                f"{label}: row {line_no}: mixed delimiters: this row is separated by "
                f"{_DELIM_NAMES[alt[0]]} but the table (from row {head.data_start + 1}) by "
                f"{_DELIM_NAMES[head.delimiter]}"
            )
        return (
            f"{label}: row {line_no}: inconsistent column count: {len(fields)} "
            f"field(s) where the table (from row {head.data_start + 1}) has "
            f"{head.ncols}"
        )
    for j in range(head.ncols):
        cell = fields[j]
        where = f"{label}: row {line_no}, {_column_label(head, j)}"
        if cell == "":
            return f"{where}: empty cell"
        if _NONFINITE_RE.match(cell):
            kind = "NaN" if "nan" in cell.lower() else "Inf (infinite value)"
            return f"{where}: {kind} {cell!r}; every sample must be a finite number"
        if not _NUM_RE.match(cell):
            hint = " (decimal comma? export with a decimal point)" if _DECIMAL_COMMA_RE.match(
                cell) else ""
            return f"{where}: text {cell!r} in a numeric cell{hint}"
    return None


def _first_bad_row(source: _Source, head: _Head, usecols: list[int]) -> str | None:
    label = source.label
    for line_no, text in _iter_data_lines(source, head):
        problem = _diagnose(label, head, line_no, text, usecols)
        if problem is not None:
            return problem
    return None


def _line_of_row(source: _Source, head: _Head, row: int) -> tuple[int, str]:
    for k, (line_no, text) in enumerate(_iter_data_lines(source, head)):
        if k == row:
            return line_no, text
    raise AssertionError(f"table row {row} not found")  # pragma: no cover


def _read_numbers(source: _Source, head: _Head, usecols: list[int]) -> list[np.ndarray]:
    try:
        return _parse_table(source, head, usecols)
    except (ValueError, IndexError) as exc:  # pandas ParserError is a ValueError
        parse_error = exc
    problem = _first_bad_row(source, head, usecols)
    if problem is not None:
        raise CaptureError(problem) from None
    if _import_pandas() is None:
        try:
            return _parse_table_filtered(source, head, usecols)
        except ValueError as exc:
            parse_error = exc
    raise CaptureError(f"{source.label}: cannot parse the numeric table: {parse_error}") from None


# ------------------------------------------------------------------------------------------
# common checks
# ------------------------------------------------------------------------------------------
def _readonly(a: np.ndarray) -> np.ndarray:
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


def _clipping(channels: Mapping[str, np.ndarray]) -> dict[str, str]:
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


def _check_time(label: str, t: np.ndarray, where_row) -> None:
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
            f"{float(t[k - 1])!r} s at "
            f"{prev}"
        )


def _check_overrides(label: str, units: Mapping[str, str] | None, time_unit: str | None) -> None:
    if units is not None:
        for key in units:
            if key != "time" and key not in CHANNEL_UNITS:
                raise CaptureError(
                    f"{label}: units key {key!r} is not 'time' or a channel name "
                    f"({', '.join(CHANNEL_UNITS)})"
                )
    if time_unit is not None and units is not None and "time" in units:
        raise CaptureError(f"{label}: give the time unit once: time_unit= or units['time']")


# ------------------------------------------------------------------------------------------
# CSV reader
# ------------------------------------------------------------------------------------------
def _read_csv(
    source: _Source,
    time_column: int | str | None,
    columns: Mapping[str, int | str] | None,
    delimiter: str | None,
    time_unit: str | None,
    units: Mapping[str, str] | None,
) -> CaptureData:
    label = source.label
    if delimiter is not None:
        if delimiter in (" ", "whitespace"):
            delimiter = None
        elif delimiter not in (",", ";", "\t"):
            raise CaptureError(
                f"{label}: delimiter={delimiter!r}; expected ',', ';', '\\t' or ' '"
            )
    _check_overrides(label, units, time_unit)
    units = dict(units or {})
    if time_unit is not None:
        units["time"] = time_unit
    head = _scan_head(source, delimiter)
    interval = _sample_interval(label, head.metadata)
    t_idx, chosen = _choose_columns(label, head, time_column, columns, interval)

    plan: list[tuple[str, _Column, int]] = []  # (name, column, power of ten)
    if t_idx is not None:
        col, power = _column_unit(label, head, t_idx, "time", "s", units.get("time"))
        plan.append(("time", col, power))
    elif "time" in units:
        raise CaptureError(f"{label}: a time unit was given but the file has no time column")
    for key, j in chosen.items():
        col, power = _column_unit(label, head, j, key, CHANNEL_UNITS[key], units.get(key))
        plan.append((key, col, power))
    # every column is parsed (not only the used ones) so that ragged rows and stray text
    # are caught the same way by both parsers
    # (a trailing delimiter on every row adds an empty last field, dropped by usecols)
    usecols = list(range(head.ncols))

    table = _read_numbers(source, head, usecols)
    n = table[0].size
    first_row = head.data_start + 1
    if n < MIN_SAMPLES:
        raise CaptureError(
            f"{label}: only {n} data row(s) from row {first_row}; a capture needs at least "
            f"{MIN_SAMPLES} samples"
        )
    # a finite sum means every sample is finite (NaN and Inf propagate); only an overflowing
    # sum or a real NaN/Inf costs the element-wise search
    suspect = [col for col in table if not np.isfinite(np.sum(col))]
    bad_rows = [np.flatnonzero(~np.isfinite(col)) for col in suspect]
    if any(b.size for b in bad_rows):
        k = min(int(b[0]) for b in bad_rows if b.size)
        line_no, text = _line_of_row(source, head, k)
        problem = _diagnose(label, head, line_no, text, usecols)
        raise CaptureError(problem or f"{label}: row {line_no}: non-finite value")

    position = {j: r for r, j in enumerate(usecols)}
    arrays: dict[str, np.ndarray] = {}
    for key, col, power in plan:
        arrays[key] = scale_by_power_of_ten(table[position[col.index]], power)

    metadata = dict(head.metadata)
    metadata.update(format="csv", delimiter=_DELIM_NAMES[head.delimiter],
                    rows=str(n), first_data_row=str(first_row))
    if head.header is not None:
        metadata["header"] = ", ".join(head.header)
    labels: dict[str, str] = {}
    for key, col, _ in plan:
        labels[key] = col.label
        metadata[f"unit.{key}"] = f"{col.unit_text or '(none)'} [{col.unit_origin}]"

    if t_idx is None:
        assert interval is not None
        dt, key = interval
        time = np.arange(n, dtype=np.float64) * dt
        metadata["time_source"] = f"sample interval {dt!r} s from metadata {key!r}"
    else:
        time = arrays.pop("time")
        metadata["time_source"] = f"column {t_idx + 1} ({labels['time']!r})"
        if interval is not None:
            metadata["sample_interval_metadata"] = repr(interval[0])

        def where_row(k: int) -> str:
            line_no, _ = _line_of_row(source, head, k)
            return f"row {line_no}"

        _check_time(label, time, where_row)
    channel_arrays = {k: _readonly(np.ascontiguousarray(v)) for k, v in arrays.items()}
    metadata.update(_clipping(channel_arrays))
    return CaptureData(
        time=_readonly(np.ascontiguousarray(time)),
        channels=MappingProxyType(channel_arrays),
        source=label,
        metadata=MappingProxyType(metadata),
        columns=MappingProxyType(labels),
    )


# ------------------------------------------------------------------------------------------
# NPZ reader
# ------------------------------------------------------------------------------------------
_NPZ_TIME_NAMES: Final = ("t", "time")
_NPZ_ALIASES: Final = {"phi": "flux"}


def _read_npz(
    source: _Source,
    time_column: int | str | None,
    columns: Mapping[str, int | str] | None,
    time_unit: str | None,
    units: Mapping[str, str] | None,
) -> CaptureData:
    label = source.label
    _check_overrides(label, units, time_unit)
    units = dict(units or {})
    if time_unit is not None:
        units["time"] = time_unit
    magic = source.first_bytes(4)
    if magic != b"PK\x03\x04":
        raise CaptureError(
            f"{label}: not an .npz archive (no zip signature at the start; first bytes "
            f"{magic!r})"
        )
    try:
        with source.open_binary() as fh, np.load(fh, allow_pickle=False) as archive:
            stored = {name: archive[name] for name in archive.files}
    except (zipfile.BadZipFile, OSError, EOFError) as exc:
        raise CaptureError(f"{label}: not a readable .npz archive: {exc}") from None
    except ValueError as exc:
        raise CaptureError(
            f"{label}: .npz holds an array that cannot be read without pickle (object "
            f"arrays are refused): {exc}"
        ) from None
    if not stored:
        raise CaptureError(f"{label}: .npz archive holds no arrays")

    metadata: dict[str, str] = {}
    for name, arr in stored.items():
        if arr.ndim == 0 and arr.dtype.kind in "US":
            metadata[name] = str(arr)

    def numeric(name: str) -> np.ndarray:
        arr = stored[name]
        if arr.dtype.kind not in "fiu":
            raise CaptureError(
                f"{label}: array {name!r} has dtype {arr.dtype}; expected real numbers"
            )
        return arr

    if time_column is not None:
        if not isinstance(time_column, str) or time_column not in stored:
            raise CaptureError(
                f"{label}: time_column={time_column!r} is not an array of the archive "
                f"({', '.join(stored)})"
            )
        t_name: str | None = time_column
    else:
        t_name = next((n for n in _NPZ_TIME_NAMES if n in stored), None)
    chosen: dict[str, str] = {}
    if columns is not None:
        for key, spec in columns.items():
            if key not in CHANNEL_UNITS:
                raise CaptureError(
                    f"{label}: columns key {key!r} is not a channel name; expected one of "
                    f"{', '.join(CHANNEL_UNITS)}"
                )
            if not isinstance(spec, str) or spec not in stored:
                raise CaptureError(
                    f"{label}: columns[{key!r}]={spec!r} is not an array of the archive "
                    f"({', '.join(stored)})"
                )
            chosen[key] = spec
    else:
        for name in stored:
            key = _NPZ_ALIASES.get(name, name)
            if key in CHANNEL_UNITS:
                if key in chosen:
                    raise CaptureError(
                        f"{label}: arrays {chosen[key]!r} and {name!r} both hold channel "
                        f"{key!r}; pass columns= to choose"
                    )
                chosen[key] = name
    if not chosen:
        raise CaptureError(
            f"{label}: no channel array ({', '.join(CHANNEL_UNITS)}) in the archive; it "
            f"holds {', '.join(stored)}"
        )

    arrays: dict[str, np.ndarray] = {}
    labels: dict[str, str] = {}
    for key, name in ([("time", t_name)] if t_name else []) + list(chosen.items()):
        arr = numeric(name)
        if arr.ndim != 1:
            raise CaptureError(
                f"{label}: array {name!r} has shape {arr.shape}; expected one dimension"
            )
        si = "s" if key == "time" else CHANNEL_UNITS[key]
        unit_text = units.get(key, "")
        try:
            power = unit_exponent(unit_text, si) if unit_text.strip() else 0
        except ValueError as exc:
            raise CaptureError(f"{label}: unit for {key!r}: {exc}") from None
        values = scale_by_power_of_ten(arr.astype(np.float64), power)
        bad = np.flatnonzero(~np.isfinite(values))
        if bad.size:
            k = int(bad[0])
            raise CaptureError(
                f"{label}: array {name!r}, sample {k} (0-based): {float(arr[k])!r} is not "
                "finite (NaN or Inf)"
            )
        arrays[key] = values
        labels[key] = name
        metadata[f"unit.{key}"] = f"{unit_text or '(none)'} [{'argument' if unit_text else 'SI'}]"
    lengths = {labels[k]: v.size for k, v in arrays.items()}
    if len(set(lengths.values())) > 1:
        raise CaptureError(
            f"{label}: arrays differ in length: "
            + ", ".join(f"{k!r} has {n}" for k, n in lengths.items())
        )
    n = next(iter(lengths.values()))
    if n < MIN_SAMPLES:
        raise CaptureError(
            f"{label}: only {n} sample(s); a capture needs at least {MIN_SAMPLES}"
        )
    if t_name is None:
        if "sample_interval" not in stored:
            raise CaptureError(
                f"{label}: no time array ('t' or 'time') and no 'sample_interval' scalar"
            )
        si_arr = stored["sample_interval"]
        if si_arr.size != 1 or si_arr.dtype.kind not in "fiu":
            raise CaptureError(
                f"{label}: 'sample_interval' must be one number [s], got shape "
                f"{si_arr.shape} dtype {si_arr.dtype}"
            )
        dt = float(si_arr.reshape(()))
        if not (math.isfinite(dt) and dt > 0):
            raise CaptureError(f"{label}: 'sample_interval' = {dt!r} is not a positive time")
        time = np.arange(n, dtype=np.float64) * dt
        metadata["time_source"] = f"sample_interval {dt!r} s"
    else:
        time = arrays.pop("time")
        metadata["time_source"] = f"array {t_name!r}"
        _check_time(label, time, lambda k: f"array {t_name!r}, sample {k} (0-based)")
    channel_arrays = {k: _readonly(v) for k, v in arrays.items()}
    metadata.update(format="npz", rows=str(n))
    metadata.update(_clipping(channel_arrays))
    return CaptureData(
        time=_readonly(time),
        channels=MappingProxyType(channel_arrays),
        source=label,
        metadata=MappingProxyType(metadata),
        columns=MappingProxyType(labels),
    )
