"""Read bench-instrument, data-logger and circuit-simulator captures (CSV, ``.npz``) into SI.

A capture is a table of samples: a time axis and one or more channels among our glossary
names ``"b"`` [T], ``"flux"`` [Wb], ``"v"`` [V] (winding voltage), ``"v_sense"`` [V]
(sense-winding or shunt voltage) and ``"i"`` [A] (primary current).

Text files as instruments write them are read as they are:

* delimiters ``,`` ``;`` tab or runs of whitespace, and a decimal point or a decimal
  comma (``0,5;1,2``), both detected from the first rows of the table whatever the file's
  length, or given with ``delimiter=`` and ``decimal=``;
* a preamble of ``key<sep>value`` lines (``Sample Interval;4,0E-09``), kept as metadata;
  a sample-interval or sample-rate line stands in for a missing time column;
* a header row whose names may carry units (``t [us]``, ``v_sense (mV)``, ``U/V``) and an
  optional row of units under it (``s;V;A``);
* channel meaning from the header name, from circuit-simulator probe names (``V(n003)`` is
  a voltage, ``I(L1)`` a current), or for generic names (``CH1``, ``CH2``, ...) from their
  unit (see :mod:`workbench.capture._meaning`); every guess can be overridden with
  ``channels=`` (column -> meaning) or ``columns=`` (meaning -> column);
* uneven time steps are kept exactly as written.

The head of the file (at most 1 MiB or 10000 text lines) is read as text to find where the
numbers start; the table itself goes to a compiled parser (pandas' C engine when pandas is
installed, otherwise :func:`numpy.loadtxt`), which fills preallocated columns so that the
peak memory of a long file stays near the size of its numbers.

Rows and columns in error messages are counted from 1, as a text editor shows them: "row 12"
is line 12 of the file, "column 2" the second field. Column *indices* given to the readers
(``columns={"v": 1}``) are 0-based Python indices. Every refusal is one
:class:`CaptureError` line of at most 290 characters naming the file.

Safety: captures are taken on live converters. Probing a winding at mains-derived or
switching voltages, and touching cores that run hot in a loss test, can hurt. Use rated
differential probes and isolation, follow local electrical codes and your site's licensed
practice; nothing in this module makes a measurement safe.
"""
from __future__ import annotations

import dataclasses
import math
import os
import re
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import IO, Any, Final

import numpy as np

from workbench.capture import _meaning
from workbench.capture._common import (
    CHANNEL_UNITS,
    MIN_SAMPLES,
    CaptureData,
    CaptureError,
    brief,
    check_magnitude,
    check_overrides,
    check_time,
    clipping,
    name_list,
    readonly,
    shorten,
)
from workbench.capture._npz import read_npz
from workbench.capture.sources import Source
from workbench.units import parse_quantity, scale_by_power_of_ten, unit_exponent

__all__ = [
    "CHANNEL_UNITS",
    "CaptureData",
    "CaptureError",
    "read_capture",
    "read_csv_capture",
    "read_npz_capture",
]

#: Head limits: a capture whose numbers do not start within these is refused.
MAX_HEADER_BYTES: Final = 1 << 20
MAX_HEADER_LINES: Final = 10_000
#: Rows of the table looked at to settle the delimiter and the decimal mark.
DIALECT_ROWS: Final = 256

_INTERVAL_KEYS: Final = frozenset(
    ["sample interval", "sampling interval", "sample period", "sampling period",
     "time step", "timestep", "dt", "delta t", "x increment", "xincrement",
     "time interval", "horizontal interval", "interval", "time resolution",
     "sample time", "sampling time"]
)
_RATE_KEYS: Final = frozenset(
    ["sample rate", "sampling rate", "sample frequency", "sampling frequency", "fs",
     "samplerate"]
)
_NUM_RE: Final = {
    # one way to match each string (no nested optional digit runs): linear time on a cell
    # of any length, where "\d+\.?\d*" backtracks quadratically on a long run of digits
    ".": re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$", re.ASCII),
    ",": re.compile(r"^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$", re.ASCII),
}
_NONFINITE_RE: Final = re.compile(r"^[+-]?(?:nan|inf|infinity)$", re.IGNORECASE)
_DECIMAL_COMMA_RE: Final = re.compile(r"^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$", re.ASCII)
_WS_HEADER_RE: Final = re.compile(r"[^\s\[(]+(?:\s*[\[(][^\])]*[\])])?|[\[(][^\])]*[\])]")
_DELIMITERS: Final = (",", ";", "\t", None)  # None = runs of whitespace
_DELIM_NAMES: Final = {",": "','", ";": "';'", "\t": "tab", None: "whitespace"}
_DELIM_WORDS: Final = {
    ",": ",", "comma": ",", ";": ";", "semicolon": ";", "\t": "\t", "tab": "\t",
    " ": None, "space": None, "whitespace": None,
}
_DECIMAL_WORDS: Final = {".": ".", "point": ".", "dot": ".", ",": ",", "comma": ","}


# ------------------------------------------------------------------------------------------
# public entry points
# ------------------------------------------------------------------------------------------
def read_capture(
    path_or_buffer: str | os.PathLike[str] | IO[Any],
    *,
    time_column: int | str | None = None,
    columns: Mapping[str, int | str] | None = None,
    channels: Mapping[int | str, str] | None = None,
    delimiter: str | None = None,
    decimal: str | None = None,
    time_unit: str | None = None,
    units: Mapping[str, str] | None = None,
) -> CaptureData:
    """Read a capture file (CSV text or ``.npz``), choosing the reader by content.

    Parameters
    ----------
    path_or_buffer : str, os.PathLike or file-like
        File path (a regular file: directories, FIFOs and devices are refused), or an open
        text/binary buffer.
    time_column : int or str, optional
        0-based index or header name of the time column. Default: the column named
        time/t/s, or a generic column in seconds; else a sample interval from the
        metadata; else (no header) column 0.
    columns : Mapping[str, int or str], optional
        Glossary name (``"b"``, ``"flux"``, ``"v"``, ``"v_sense"``, ``"i"``) -> 0-based
        column index or header name (array name for ``.npz``). When given, exactly these
        channels are read. Default: recognised columns.
    channels : Mapping[int or str, str], optional
        Column (header name or 0-based index) -> meaning, overriding the reader's guess
        for that column: a glossary name or a word such as ``"voltage"``,
        ``"sense voltage"``, ``"current"``, ``"flux density"``, ``"flux"``, ``"time"``,
        or ``"ignore"``. Other columns keep their guessed meaning.
    delimiter : str, optional
        ``","``, ``";"``, ``"\\t"`` or ``" "`` (runs of whitespace); the words
        ``"comma"``, ``"semicolon"``, ``"tab"``, ``"space"`` also work. Default: detected.
    decimal : str, optional
        Decimal mark of the numbers, ``"."`` or ``","`` (``"point"``, ``"comma"``).
        Default: detected from the first rows of the table.
    time_unit : str, optional
        Unit of the time column, e.g. ``"us"``; overrides the header.
    units : Mapping[str, str], optional
        Glossary name (or ``"time"``) -> unit as written, e.g. ``{"v_sense": "mV"}``;
        overrides the header. Columns without a unit are taken as SI (and a note says so).

    Returns
    -------
    CaptureData
        Time [s] and channels in SI units with metadata, units, meanings and notes.

    Raises
    ------
    CaptureError
        If the file cannot be read as a capture; one line naming the file and, where it
        applies, the row and column and the offending text.
    """
    source = Source.of(path_or_buffer, CaptureError)
    if (source.path is not None and source.path.lower().endswith(".npz")) or source.is_zip():
        for name, value in (("delimiter", delimiter), ("decimal", decimal)):
            if value is not None:
                raise CaptureError(f"{source.label}: {name}= does not apply to an .npz file")
        return read_npz(source, time_column, _npz_columns(source.label, columns, channels),
                        time_unit, units)
    return _read_csv(source, time_column, columns, channels, delimiter, decimal, time_unit, units)


def read_csv_capture(
    path_or_buffer: str | os.PathLike[str] | IO[Any],
    *,
    time_column: int | str | None = None,
    columns: Mapping[str, int | str] | None = None,
    channels: Mapping[int | str, str] | None = None,
    delimiter: str | None = None,
    decimal: str | None = None,
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
    channels : Mapping[int or str, str], optional
        Column -> meaning, overriding the guess for that column.
    delimiter : str, optional
        ``","``, ``";"``, ``"\\t"`` or ``" "``; default detected.
    decimal : str, optional
        ``"."`` or ``","``; default detected.
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
    source = Source.of(path_or_buffer, CaptureError)
    return _read_csv(source, time_column, columns, channels, delimiter, decimal, time_unit, units)


def read_npz_capture(
    path_or_buffer: str | os.PathLike[str] | IO[Any],
    *,
    time_column: str | None = None,
    columns: Mapping[str, str] | None = None,
    channels: Mapping[str, str] | None = None,
    time_unit: str | None = None,
    units: Mapping[str, str] | None = None,
) -> CaptureData:
    """Read a numpy ``.npz`` capture with arrays named by the glossary.

    Only the arrays used are decompressed; each array's declared size is checked against
    the archive before memory is allocated, and nothing is ever unpickled.

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
    channels : Mapping[str, str], optional
        Array name -> meaning (as in :func:`read_capture`); exactly these are read.
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
    source = Source.of(path_or_buffer, CaptureError)
    return read_npz(source, time_column, _npz_columns(source.label, columns, channels),
                    time_unit, units)


def _npz_columns(label: str, columns: Any, channels: Any) -> Mapping[str, Any] | None:
    if channels is None:
        return columns
    if not isinstance(channels, Mapping):
        raise CaptureError(f"{label}: channels= must be a mapping of array name -> meaning")
    out = dict(columns or {})
    for name, word in channels.items():
        meaning = _meaning.user_meaning(word)
        if meaning is None or meaning in ("time", _meaning.IGNORE):
            raise CaptureError(
                f"{label}: channels[{brief(name)}]={brief(word)} is not a "
                f"channel meaning for an .npz array; use one of {', '.join(CHANNEL_UNITS)}"
            )
        if meaning in out and out[meaning] != name:
            raise CaptureError(f"{label}: channel {meaning!r} given twice ({out[meaning]!r}, {name!r})")
        out[meaning] = name
    return out


# ------------------------------------------------------------------------------------------
# CSV: head scan and dialect
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Head:
    encoding: str
    data_start: int  # 0-based index of the first numeric line (= lines to skip)
    delimiter: str | None
    decimal: str
    ncols: int
    header_line: int | None  # 1-based line number of the header row
    header: tuple[str, ...] | None
    header_units: tuple[str, ...] | None
    metadata: dict[str, str]
    meta_fields: dict[str, list[str]] = field(default_factory=dict)
    trailing_delimiter: bool = False
    head_chars: int = 0  # characters before the first numeric row
    row_chars: float = 1.0  # mean characters per row over the first rows of the table
    decimal_detected: bool = False


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


def _is_number(text: str, decimal: str = ".") -> bool:
    return bool(_NUM_RE[decimal].match(text) or _NONFINITE_RE.match(text))


def _dialects(delimiter: str | None, decimal: str | None, fixed_delim: bool) -> list[tuple]:
    delims = (delimiter,) if fixed_delim else _DELIMITERS
    decimals = (decimal,) if decimal is not None else (".", ",")
    return [(d, m) for d in delims for m in decimals if not (d == "," and m == ",")]


def _numeric_splits(text: str, dialects: list[tuple]) -> list[tuple[str | None, str, int]]:
    """Every (delimiter, decimal, field count) under which `text` is all numbers."""
    found = []
    for delim, dec in dialects:
        fields = _split(text, delim)
        if fields and all(_is_number(f, dec) for f in fields):
            found.append((delim, dec, len(fields)))
    return found


def _choose_dialect(
    options: list[tuple[str | None, str, int]], sample: list[str], header: str | None
) -> tuple[str | None, str, int]:
    """Settle delimiter and decimal mark from the first rows and the header candidate."""

    def score(opt: tuple[str | None, str, int]) -> tuple:
        delim, dec, n = opt
        consistent = 0
        comma_seen = False
        for text in sample:
            fields = _split(text, delim)
            if len(fields) == n and all(_is_number(f, dec) for f in fields):
                consistent += 1
                comma_seen = comma_seen or (dec == "," and any("," in f for f in fields))
        header_fit = header is not None and len(_split_header(header, delim)) == n
        # a decimal comma needs evidence: a comma in a number; otherwise the point wins
        evidence = dec == "." or comma_seen
        return (consistent, evidence, header_fit, n, dec == ".")

    return max(options, key=score)


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


def _split_header(text: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return [_strip_field(f) for f in _WS_HEADER_RE.findall(text)]
    return _split(text, delimiter)


def _parse_metadata_line(
    text: str, delimiter: str | None, line_no: int
) -> tuple[str, str, list[str]]:
    body = text.strip().lstrip("#").strip()
    for sep in ([delimiter] if delimiter not in (None, " ") else []) + [",", ";", "\t", ":", "="]:
        if sep and sep in body:
            key, _, value = body.partition(sep)
            key = key.strip().rstrip(":").strip()
            value = value.strip()
            fields = [value]
            if sep in (",", ";", "\t"):
                fields = [v for v in (_strip_field(x) for x in value.split(sep)) if v]
                value = ", ".join(fields)
            if key:
                return key, value, fields
    return f"line {line_no}", body, [body]


def _scan_head(source: Source, delimiter: str | None, decimal: str | None,
               fixed_delim: bool) -> _Head:
    label = source.label
    raw_head = source.first_bytes(MAX_HEADER_BYTES + 65536)
    if not raw_head.strip():
        raise CaptureError(f"{label}: file is empty (no text, no numbers)")
    encoding = _detect_encoding(label, raw_head)
    dialects = _dialects(delimiter, decimal, fixed_delim)
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
                options = _numeric_splits(body, dialects)
                if options:
                    while len(pending) < DIALECT_ROWS:
                        ahead = fh.readline(MAX_HEADER_BYTES + 1)
                        if not ahead:
                            break
                        pending.append(ahead)
                    sample = [p.rstrip("\r\n") for p in pending if p.strip()]
                    header = lines[-1][1] if lines else None
                    found = _choose_dialect(options, [body] + sample[:-1] if len(sample) > 1
                                            else [body] + sample, header)
                    if found[2] == 1:
                        # a bare number among metadata lines (e.g. a record length on its
                        # own line) is not the table if the next row is text or has more
                        # fields
                        after = sample[0] if sample else ""
                        more = _numeric_splits(after, dialects) if after else []
                        if after and (not more or max(m[2] for m in more) > 1):
                            options = []
                    if options:
                        trailing = found[0] is not None and body.rstrip().endswith(found[0])
                        head = _finish_head(label, encoding, line_index - 1, found, lines,
                                            trailing)
                        lengths = [x for x in [len(text)] + [len(r) for r in pending] if x]
                        return dataclasses.replace(
                            head, head_chars=consumed - len(text),
                            row_chars=sum(lengths) / len(lengths),
                            decimal_detected=decimal is None,
                        )
                lines.append((line_index, body))
            if consumed > MAX_HEADER_BYTES or len(lines) > MAX_HEADER_LINES:
                raise CaptureError(
                    f"{label}: header too large: no numeric row within the first "
                    f"{MAX_HEADER_BYTES // 1024} KiB / {MAX_HEADER_LINES} text lines "
                    f"(read {consumed} characters, {len(lines)} text lines); is this a "
                    "capture table?"
                )
    _raise_no_data(label, lines, dialects)
    raise AssertionError("unreachable")  # pragma: no cover


def _raise_no_data(label: str, lines: list[tuple[int, str]], dialects: list[tuple]) -> None:
    for line_no, text in lines:
        for delim in (";", "\t", None):
            fields = _split(text, delim)
            if len(fields) >= 2 and any(_DECIMAL_COMMA_RE.match(f) for f in fields) and all(
                _DECIMAL_COMMA_RE.match(f) or _is_number(f) for f in fields
            ):
                raise CaptureError(
                    f"{label}: row {line_no} uses decimal commas ({shorten(text.strip(), 60)}) "
                    "but a decimal point was asked for; pass decimal=',' or leave it to "
                    "detection"
                )
    if not lines:  # pragma: no cover - empty handled before
        raise CaptureError(f"{label}: file is empty")
    last_no, last = lines[-1]
    delims = sorted({d for d, _ in dialects}, key=lambda d: d or "")
    fields = max((_split_header(last, d) for d in delims), key=len)
    names = [_meaning.normalise_name(_meaning.split_name_unit(f)[0]) for f in fields]
    if len(fields) >= 2 and any(n in _meaning.NAME_ALIASES for n in names):
        raise CaptureError(
            f"{label}: header only: header row {last_no} ({shorten(last.strip(), 80)}) is "
            "not followed by any numeric data rows"
        )
    raise CaptureError(
        f"{label}: no numeric data rows: {len(lines)} line(s) of text only "
        f"(rows {lines[0][0]}-{last_no})"
    )


def _finish_head(
    label: str,
    encoding: str,
    data_start: int,
    found: tuple[str | None, str, int],
    lines: list[tuple[int, str]],
    trailing: bool,
) -> _Head:
    delimiter, decimal, ncols = found
    header_line: int | None = None
    header: tuple[str, ...] | None = None
    header_units: tuple[str, ...] | None = None
    meta_lines = list(lines)
    if meta_lines:
        cand_no, cand = meta_lines[-1]
        fields = _split_header(cand, delimiter)
        first_numeric = bool(fields) and _is_number(fields[0], decimal)
        if first_numeric and len(fields) > 1:
            bad = next((j for j, f in enumerate(fields) if not _is_number(f, decimal)), 0)
            raise CaptureError(
                f"{label}: row {cand_no}, column {bad + 1}: text {shorten(fields[bad])} in a "
                "numeric cell"
            )
        if len(fields) == ncols:
            meta_lines.pop()
            header_line, header = cand_no, tuple(fields)
            if (
                meta_lines
                and all(_meaning.looks_like_unit(f) or f == "" for f in fields)
                and any(fields)
                and len(_split_header(meta_lines[-1][1], delimiter)) == ncols
            ):
                header_units = tuple(_meaning.normalise_unit(f) if f else "" for f in fields)
                header_line, prev = meta_lines.pop()
                header = tuple(_split_header(prev, delimiter))
        else:
            names = [_meaning.normalise_name(_meaning.split_name_unit(f)[0]) for f in fields]
            recognised = sum(n in _meaning.NAME_ALIASES for n in names)
            if recognised >= 1 and len(fields) >= 2 and not any(
                _is_number(f, decimal) for f in fields
            ):
                raise CaptureError(
                    f"{label}: header row {cand_no} has {len(fields)} names "
                    f"({name_list(fields)}) but the data rows from row {data_start + 1} have "
                    f"{ncols} fields"
                )
    metadata: dict[str, str] = {}
    meta_fields: dict[str, list[str]] = {}
    for line_no, text in meta_lines:
        key, value, parts = _parse_metadata_line(text, delimiter, line_no)
        if key in metadata:
            key = f"{key} (line {line_no})"
        metadata[key] = value
        meta_fields[key] = parts
    return _Head(encoding, data_start, delimiter, decimal, ncols, header_line, header,
                 header_units, metadata, meta_fields, trailing)


# ------------------------------------------------------------------------------------------
# CSV: columns, meanings, units, sample interval
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Column:
    index: int
    label: str  # header text or "column N"
    unit_text: str
    unit_origin: str  # "header", "units row", "argument" or "none (taken as SI)"


def _column_label(head: _Head, index: int) -> str:
    if head.header is not None:
        return f"column {index + 1} ({shorten(head.header[index])})"
    return f"column {index + 1}"


def _resolve_index(label: str, head: _Head, key: str, spec: Any) -> int:
    if isinstance(spec, bool) or not isinstance(spec, (int, str, np.integer)):
        raise CaptureError(f"{label}: {key} must be a 0-based column index or a header name, "
                           f"got {brief(spec)}")
    if isinstance(spec, (int, np.integer)):
        if not 0 <= int(spec) < head.ncols:
            raise CaptureError(
                f"{label}: {key}={int(spec)} is outside the {head.ncols} columns "
                f"(0-based indices 0..{head.ncols - 1})"
            )
        return int(spec)
    if spec.strip().isdigit() and head.header is None:
        return _resolve_index(label, head, key, int(spec.strip()))
    if head.header is None:
        raise CaptureError(
            f"{label}: {key}={shorten(spec)} names a column but the file has no header row; "
            "use a 0-based column index"
        )
    wanted = spec.strip().lower()
    for j, text in enumerate(head.header):
        if text.strip().lower() == wanted:
            return j
    for j, text in enumerate(head.header):
        if _meaning.split_name_unit(text)[0].strip().lower() == wanted:
            return j
    if spec.strip().isdigit():
        return _resolve_index(label, head, key, int(spec.strip()))
    raise CaptureError(
        f"{label}: {key}={shorten(spec)} matches no header name; the header (row "
        f"{head.header_line}) has {name_list(head.header)}"
    )


def _number_text(text: str, decimal: str) -> str:
    """A metadata number as Python reads it: a decimal comma becomes a point."""
    text = text.strip()
    if decimal == "," or ("," in text and "." not in text):
        head, _, rest = text.partition(" ")
        if _DECIMAL_COMMA_RE.match(head):
            return (head.replace(",", ".") + " " + rest).strip()
    return text


def _sample_interval(label: str, head: _Head) -> tuple[float, str] | None:
    for key, value in head.metadata.items():
        norm = _meaning.normalise_name(key)
        if norm not in _INTERVAL_KEYS and norm not in _RATE_KEYS:
            continue
        parts = head.meta_fields.get(key, [value])
        if len(value) > 200:
            raise CaptureError(f"{label}: metadata {key!r} = {shorten(value)} is not a sample "
                               "interval")
        text = _number_text(parts[0], head.decimal) if parts else ""
        if len(parts) == 2 and _meaning.looks_like_unit(parts[1]):
            text = f"{text} {_meaning.normalise_unit(parts[1])}"
        try:
            if norm in _INTERVAL_KEYS:
                dt = parse_quantity(text, "s", name=f"metadata {key!r}")
            else:
                text = re.sub(r"(?i)\s*(sa/s|s/s|samples/s|sps)\s*$", "Hz", text)
                dt = 1.0 / parse_quantity(text, "Hz", name=f"metadata {key!r}")
        except (ValueError, ZeroDivisionError) as exc:
            raise CaptureError(f"{label}: cannot read the sample interval: {exc}") from None
        if not (math.isfinite(dt) and dt > 0):
            raise CaptureError(
                f"{label}: metadata {key!r} = {shorten(value)} is not a positive sample "
                "interval"
            )
        return dt, key
    return None


@dataclass
class _Guess:
    meaning: str | None  # glossary name, "time", "voltage", "ignore" or None
    how: str  # for CaptureData.meaning
    positional: bool = False  # a guess by position (stated in the notes)


def _header_unit(head: _Head, j: int) -> str:
    if head.header_units is not None and head.header_units[j]:
        return head.header_units[j]
    if head.header is not None:
        return _meaning.split_name_unit(head.header[j])[1]
    return ""


def _guess(head: _Head, j: int) -> _Guess:
    """What column j holds, judged from its header name and unit."""
    if head.header is None:
        return _Guess(None, "")
    text = head.header[j]
    name, _ = _meaning.split_name_unit(text)
    unit = _header_unit(head, j)
    probe = _meaning.simulator_probe(text)
    if probe is not None:
        return _Guess(_meaning.VOLTAGE if probe == "v" else "i", f"simulator name {text!r}")
    norm = _meaning.normalise_name(name)
    if norm in _meaning.NAME_ALIASES:
        return _Guess(_meaning.NAME_ALIASES[norm], f"header name {shorten(text)}")
    by_unit = _meaning.unit_meaning(unit)
    if by_unit is not None:
        kind = "generic name" if _meaning.is_generic(name) else "name"
        return _Guess(by_unit, f"unit {unit!r} of {kind} {shorten(text)}")
    if norm in _meaning.LEGACY_GENERIC:
        return _Guess(_meaning.LEGACY_GENERIC[norm], f"generic name {shorten(text)} by position",
                      positional=True)
    return _Guess(None, "")


def _choose_columns(
    label: str,
    head: _Head,
    time_column: Any,
    columns: Mapping[str, Any] | None,
    channels: Mapping[Any, str] | None,
    interval: tuple[float, str] | None,
) -> tuple[int | None, dict[str, int], dict[str, str], list[str]]:
    """(time index, glossary name -> index, glossary name -> how decided, notes)."""
    guesses = [_guess(head, j) for j in range(head.ncols)]
    notes: list[str] = []
    if channels is not None:
        if not isinstance(channels, Mapping):
            raise CaptureError(f"{label}: channels= must be a mapping of column -> meaning, "
                               f"got {brief(channels)}")
        for spec, word in channels.items():
            j = _resolve_index(label, head, f"channels[{brief(spec)}]", spec)
            meaning = _meaning.user_meaning(word)
            if meaning is None:
                raise CaptureError(
                    f"{label}: channels[{brief(spec)}]={brief(word)} is not a "
                    "meaning; use voltage, sense voltage, current, flux density, flux, time "
                    f"or ignore (or a glossary name: {', '.join(CHANNEL_UNITS)})"
                )
            guesses[j] = _Guess(meaning, f"argument channels[{spec!r}]")
    if time_column is not None:
        t_idx: int | None = _resolve_index(label, head, "time_column", time_column)
        guesses[t_idx] = _Guess("time", "argument time_column=")
    else:
        hits = [j for j, g in enumerate(guesses) if g.meaning == "time"]
        if hits:
            t_idx = hits[0]
        elif interval is not None:
            t_idx = None
        elif head.header is None:
            t_idx = 0
        else:
            raise CaptureError(
                f"{label}: no time column (none named time/t/s or in seconds in the "
                f"header, row {head.header_line}: {name_list(head.header, 4)}) and no "
                "sample interval in the metadata; give it with time_column= "
                "(--time-column)"
            )
    chosen: dict[str, int] = {}
    how: dict[str, str] = {}
    if columns is not None:
        if not isinstance(columns, Mapping):
            raise CaptureError(f"{label}: columns= must be a mapping of channel -> column")
        for key, spec in columns.items():
            if key not in CHANNEL_UNITS:
                raise CaptureError(
                    f"{label}: columns key {brief(key)} is not a channel name; "
                    f"expected one of {', '.join(CHANNEL_UNITS)}"
                )
            chosen[key] = _resolve_index(label, head, f"columns[{key!r}]", spec)
            how[key] = f"argument columns[{key!r}]"
        for j, g in enumerate(guesses):  # explicit channels= entries join columns=
            if g.how.startswith("argument channels") and g.meaning in CHANNEL_UNITS:
                if g.meaning in chosen and chosen[g.meaning] != j:
                    raise CaptureError(f"{label}: channel {g.meaning!r} given twice, by "
                                       "columns= and channels=")
                chosen[g.meaning], how[g.meaning] = j, g.how
    else:
        voltages: list[int] = []
        for j, g in enumerate(guesses):
            if j == t_idx or g.meaning in (None, "time", _meaning.IGNORE):
                continue
            if g.meaning == _meaning.VOLTAGE:
                voltages.append(j)
                continue
            if g.meaning in chosen:
                raise CaptureError(
                    f"{label}: {_column_label(head, chosen[g.meaning])} and "
                    f"{_column_label(head, j)} both look like channel {g.meaning!r}; pass "
                    "channels= (or --channel NAME=MEANING) to say which is which"
                )
            chosen[g.meaning], how[g.meaning] = j, g.how
            if g.positional:
                notes.append(
                    f"{_column_label(head, j)} has no unit or name saying what it holds: read "
                    f"as {g.meaning!r} by position"
                )
        free = [k for k in ("v", "v_sense") if k not in chosen]
        if len(voltages) > len(free):
            raise CaptureError(
                f"{label}: {len(voltages) + 2 - len(free)} voltage columns "
                f"({name_list(_column_label(head, j) for j in voltages)}); say which is the "
                "winding and which the sense voltage with channels= (--channel NAME=MEANING)"
            )
        for key, j in zip(free, voltages):
            chosen[key], how[key] = j, guesses[j].how
            if key == "v_sense" or len(voltages) > 1:
                notes.append(
                    f"{_column_label(head, j)} read as {'sense-winding voltage v_sense' if key == 'v_sense' else 'winding voltage v'}"
                    " (voltage columns are taken as winding, then sense voltage); pass "
                    "channels= to change"
                )
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
            f"{name_list(head.header)}) is recognised as a channel "
            f"({', '.join(CHANNEL_UNITS)}); pass columns= or channels="
        )
    return t_idx, chosen, how, notes


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
            in_header = _meaning.split_name_unit(head.header[index])[1]
            if in_header:
                unit_text, origin = in_header, "header"
    try:
        text = _meaning.normalise_unit(unit_text)
        power = unit_exponent(text, si_unit) if text.strip() else 0
    except ValueError as exc:
        where = "argument" if origin == "argument" else f"{origin} of {col_label}"
        raise CaptureError(
            f"{label}: unknown or wrong unit {shorten(unit_text)} in the {where} for {key!r} "
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


_CHUNK_ROWS: Final = 1 << 20


def _parse_table(source: Source, head: _Head, usecols: list[int]) -> list[np.ndarray]:
    """Numeric table as one contiguous float64 array per column, via a compiled parser.

    Peak memory: with pandas, the parsed chunks are copied into columns preallocated from
    an estimate of the row count, so the peak is the numbers plus one chunk (pandas' own
    concatenation of a whole-file read peaks near 3.5x); numpy.loadtxt fills one (n, k)
    array that is split into contiguous columns (2x).
    """
    pd = _import_pandas()
    if pd is not None:
        with source.open_binary() as fh:
            reader = pd.read_csv(
                fh,
                chunksize=_CHUNK_ROWS,
                sep=r"\s+" if head.delimiter is None else head.delimiter,
                decimal=head.decimal,
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
        lines: Any = fh
        if head.decimal == ",":
            lines = (line.replace(",", ".") for line in fh)
        table = np.loadtxt(
            lines,
            delimiter=head.delimiter,
            skiprows=head.data_start,
            usecols=usecols if head.trailing_delimiter else None,
            dtype=np.float64,
            ndmin=2,
            comments=None,
            quotechar='"',
        )
    return [np.ascontiguousarray(table[:, j]) for j in range(table.shape[1])]


def _table_encoding(source: Source, head: _Head) -> str:
    """Encoding for pandas: plain utf-8 (its fast path) unless a BOM sits on a data row."""
    if head.encoding != "utf-8-sig":
        return head.encoding
    if head.data_start == 0 and source.first_bytes(3) == b"\xef\xbb\xbf":
        return "utf-8-sig"
    return "utf-8"


def _estimate_rows(source: Source, head: _Head) -> int:
    """Generous estimate of the table rows from the file size and the first rows' length.

    Over-estimating costs nothing resident: pages of an ``np.empty`` buffer that are never
    written are never touched. Under-estimating costs one copy (see _fill_from_chunks).
    """
    rows = max(source.size() - head.head_chars, 0) / max(head.row_chars, 1.0)
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


def _parse_table_filtered(source: Source, head: _Head, usecols: list[int]) -> list[np.ndarray]:
    """numpy fallback for tables with whitespace-only lines, which loadtxt does not skip."""
    with source.open_text(head.encoding) as fh:
        for _ in range(head.data_start):
            fh.readline()
        comma = head.decimal == ","
        table = np.loadtxt(
            ((line.replace(",", ".") if comma else line) for line in fh if line.strip()),
            delimiter=head.delimiter,
            usecols=usecols if head.trailing_delimiter else None,
            dtype=np.float64,
            ndmin=2,
            comments=None,
            quotechar='"',
        )
    return [np.ascontiguousarray(table[:, j]) for j in range(table.shape[1])]


def _iter_data_lines(source: Source, head: _Head) -> Iterator[tuple[int, str]]:
    """(1-based line number, text) of the non-blank lines of the table."""
    with source.open_text(head.encoding) as fh:
        for _ in range(head.data_start):
            fh.readline()
        for offset, text in enumerate(fh):
            if text.strip():
                yield head.data_start + offset + 1, text.rstrip("\r\n")


def _diagnose(label: str, head: _Head, line_no: int, text: str) -> str | None:
    """Describe what is wrong with one table row, or None if it is a good row."""
    fields = _split(text, head.delimiter)
    if len(fields) == head.ncols - 1 and head.delimiter is not None:
        raw = [_strip_field(f) for f in text.split(head.delimiter)]
        if len(raw) == head.ncols:
            fields = raw  # the last cell is empty, not a trailing delimiter
    if len(fields) != head.ncols:
        others = [(d, head.decimal) for d in _DELIMITERS if d != head.delimiter
                  and not (d == "," and head.decimal == ",")]
        alt = _numeric_splits(text, others)
        if alt and alt[0][2] == head.ncols:
            return (
                f"{label}: row {line_no}: mixed delimiters: this row is separated by "
                f"{_DELIM_NAMES[alt[0][0]]} but the table (from row {head.data_start + 1}) by "
                f"{_DELIM_NAMES[head.delimiter]}"
            )
        hint = ""
        if head.delimiter == "," and len(fields) > head.ncols and any(
            _DECIMAL_COMMA_RE.match(f"{a},{b}") for a, b in zip(fields, fields[1:])
        ):
            hint = " (a decimal comma in a comma-separated table?)"
        return (
            f"{label}: row {line_no}: inconsistent column count: {len(fields)} "
            f"field(s) where the table (from row {head.data_start + 1}) has "
            f"{head.ncols}{hint}"
        )
    for j in range(head.ncols):
        cell = fields[j]
        where = f"{label}: row {line_no}, {_column_label(head, j)}"
        if cell == "":
            return f"{where}: empty cell"
        if _NONFINITE_RE.match(cell):
            kind = "NaN" if "nan" in cell.lower() else "Inf (infinite value)"
            return f"{where}: {kind} {cell!r}; every sample must be a finite number"
        if not _NUM_RE[head.decimal].match(cell):
            hint = ""
            if head.decimal == "." and _DECIMAL_COMMA_RE.match(cell):
                hint = " (a decimal comma: pass decimal=',')"
            elif head.decimal == "," and _NUM_RE["."].match(cell):
                hint = " (a decimal point in a table read with decimal commas: pass decimal='.')"
            return f"{where}: text {shorten(cell)} in a numeric cell{hint}"
    return None


def _first_bad_row(source: Source, head: _Head) -> str | None:
    label = source.label
    for line_no, text in _iter_data_lines(source, head):
        problem = _diagnose(label, head, line_no, text)
        if problem is not None:
            return problem
    return None


def _line_of_row(source: Source, head: _Head, row: int) -> tuple[int, str]:
    for k, (line_no, text) in enumerate(_iter_data_lines(source, head)):
        if k == row:
            return line_no, text
    raise AssertionError(f"table row {row} not found")  # pragma: no cover


def _read_numbers(source: Source, head: _Head, usecols: list[int]) -> list[np.ndarray]:
    try:
        return _parse_table(source, head, usecols)
    except (ValueError, IndexError, OverflowError) as exc:  # pandas ParserError is a ValueError
        parse_error = exc
    problem = _first_bad_row(source, head)
    if problem is not None:
        raise CaptureError(problem) from None
    if _import_pandas() is None:
        try:
            return _parse_table_filtered(source, head, usecols)
        except ValueError as exc:
            parse_error = exc
    raise CaptureError(
        f"{source.label}: cannot parse the numeric table: {shorten(str(parse_error), 120)}"
    ) from None


# ------------------------------------------------------------------------------------------
# CSV reader
# ------------------------------------------------------------------------------------------
def _dialect_arguments(label: str, delimiter: Any, decimal: Any) -> tuple[str | None, str | None, bool]:
    fixed = delimiter is not None
    if fixed:
        if not isinstance(delimiter, str) or delimiter.lower() not in _DELIM_WORDS:
            raise CaptureError(
                f"{label}: delimiter={brief(delimiter)}; expected ',', ';', '\\t' or "
                "' ' (comma, semicolon, tab, space)"
            )
        delimiter = _DELIM_WORDS[delimiter.lower()]
    if decimal is not None:
        if not isinstance(decimal, str) or decimal.lower() not in _DECIMAL_WORDS:
            raise CaptureError(
                f"{label}: decimal={brief(decimal)}; expected '.' or ',' (point, comma)"
            )
        decimal = _DECIMAL_WORDS[decimal.lower()]
    if fixed and delimiter == "," and decimal == ",":
        raise CaptureError(f"{label}: delimiter ',' and decimal ',' cannot both be a comma")
    return delimiter, decimal, fixed


def _read_csv(
    source: Source,
    time_column: Any,
    columns: Mapping[str, Any] | None,
    channels: Mapping[Any, str] | None,
    delimiter: Any,
    decimal: Any,
    time_unit: str | None,
    units: Mapping[str, str] | None,
) -> CaptureData:
    label = source.label
    delimiter, decimal, fixed_delim = _dialect_arguments(label, delimiter, decimal)
    check_overrides(label, units, time_unit)
    units = dict(units or {})
    if time_unit is not None:
        units["time"] = time_unit
    head = _scan_head(source, delimiter, decimal, fixed_delim)
    interval = _sample_interval(label, head)
    t_idx, chosen, how, notes = _choose_columns(label, head, time_column, columns, channels,
                                                interval)

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
    n = table[0].size if table else 0
    first_row = head.data_start + 1
    if n < MIN_SAMPLES:
        raise CaptureError(
            f"{label}: only {n} data row(s) from row {first_row}; a capture needs at least "
            f"{MIN_SAMPLES} samples"
        )
    # a finite sum means every sample is finite (NaN and Inf propagate); only an overflowing
    # sum or a real NaN/Inf costs the element-wise search
    position = {j: r for r, j in enumerate(usecols)}
    used = [position[col.index] for _, col, _ in plan]
    with np.errstate(over="ignore", invalid="ignore"):
        suspect = [table[r] for r in used if not np.isfinite(np.sum(table[r]))]
    bad_rows = [np.flatnonzero(~np.isfinite(col)) for col in suspect]
    if any(b.size for b in bad_rows):
        k = min(int(b[0]) for b in bad_rows if b.size)
        line_no, text = _line_of_row(source, head, k)
        problem = _diagnose(label, head, line_no, text)
        raise CaptureError(problem or f"{label}: row {line_no}: non-finite value")

    def where_row(k: int) -> str:
        line_no, _ = _line_of_row(source, head, k)
        return f"row {line_no}"

    arrays: dict[str, np.ndarray] = {}
    for key, col, power in plan:
        values = scale_by_power_of_ten(table[position[col.index]], power)
        check_magnitude(label, key, values, lambda k, col=col: f"{where_row(k)}, "
                        f"{_column_label(head, col.index)}")
        arrays[key] = values

    metadata = dict(head.metadata)
    metadata.update(format="csv", delimiter=_DELIM_NAMES[head.delimiter], decimal=head.decimal,
                    rows=str(n), first_data_row=str(first_row))
    if head.header is not None:
        text = ", ".join(head.header)
        metadata["header"] = text if len(text) <= 400 else text[:380] + f" ... ({len(head.header)} names)"
    labels: dict[str, str] = {}
    unit_texts: dict[str, str] = {}
    no_unit: list[str] = []
    for key, col, _ in plan:
        labels[key] = col.label
        unit_texts[key] = col.unit_text
        metadata[f"unit.{key}"] = f"{col.unit_text or '(none)'} [{col.unit_origin}]"
        if not col.unit_text:
            no_unit.append(f"{key} ({'s' if key == 'time' else CHANNEL_UNITS[key]})")
    if no_unit:
        notes.append(f"no unit given for {', '.join(no_unit)}: taken as SI")
    if head.decimal_detected and head.decimal == ",":
        notes.append("numbers read with a decimal comma (detected from the table)")

    if t_idx is None:
        assert interval is not None
        dt, key = interval
        time = np.arange(n, dtype=np.float64) * dt
        metadata["time_source"] = f"sample interval {dt!r} s from metadata {key!r}"
        notes.append(f"no time column: time built from the sample interval {dt!r} s "
                     f"(metadata {key!r})")
        unit_texts["time"] = "s"
        check_magnitude(label, "time", time, where_row)
    else:
        time = arrays.pop("time")
        metadata["time_source"] = f"column {t_idx + 1} ({labels['time']!r})"
        if interval is not None:
            metadata["sample_interval_metadata"] = repr(interval[0])
    metadata.update(check_time(label, time, where_row))
    channel_arrays = {k: readonly(np.ascontiguousarray(v)) for k, v in arrays.items()}
    metadata.update(clipping(channel_arrays))
    return CaptureData(
        time=readonly(np.ascontiguousarray(time)),
        channels=MappingProxyType(channel_arrays),
        source=label,
        metadata=MappingProxyType(metadata),
        columns=MappingProxyType(labels),
        units=MappingProxyType(unit_texts),
        meaning=MappingProxyType({k: how.get(k, "") for k in channel_arrays}),
        notes=tuple(notes),
    )
