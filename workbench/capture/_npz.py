"""Reader of numpy ``.npz`` captures: only the members used are read, sizes checked first.

An ``.npz`` is a zip archive of ``.npy`` members. The archive is opened with :mod:`zipfile`
(never with pickle); each member's ``.npy`` header (dtype and shape) is read from the first
bytes of the member, and its declared size is checked against the member's size in the
zip directory before anything is allocated. Members the capture does not use (an unused
array, a text file in a zip) are never decompressed.
"""
from __future__ import annotations

import math
import zipfile
from collections.abc import Mapping
from types import MappingProxyType
from typing import Any, Final

import numpy as np
from numpy.lib import format as npy_format

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
from workbench.capture.sources import Source
from workbench.units import scale_by_power_of_ten, unit_exponent

_NPZ_TIME_NAMES: Final = ("t", "time")
_NPZ_ALIASES: Final = {"phi": "flux"}
#: Deflate cannot expand data more than about 1032 : 1 (zlib technical notes, from
#: memory); a member claiming more is corrupt or crafted.
_DEFLATE_MAX_RATIO: Final = 1100
_MAX_MEMBERS: Final = 1024
_MAX_TEXT_BYTES: Final = 1 << 16
_READ_CHUNK: Final = 1 << 24


class _Member:
    """One ``.npy`` member: its zip entry, dtype, shape and header length."""

    def __init__(self, info: zipfile.ZipInfo, dtype: np.dtype, shape: tuple[int, ...],
                 header_bytes: int):
        self.info = info
        self.dtype = dtype
        self.shape = shape
        self.header_bytes = header_bytes
        self.count = math.prod(shape)


def _read_header(label: str, zf: zipfile.ZipFile, name: str, info: zipfile.ZipInfo) -> _Member:
    if info.compress_type == zipfile.ZIP_STORED:
        if info.file_size != info.compress_size:
            raise CaptureError(f"{label}: member {name!r} declares {info.file_size} bytes but "
                               f"stores {info.compress_size}: corrupt archive")
    elif info.file_size > _DEFLATE_MAX_RATIO * max(info.compress_size, 1) + 1024:
        raise CaptureError(
            f"{label}: member {name!r} declares {info.file_size} bytes from "
            f"{info.compress_size} compressed, more than compression can produce: corrupt "
            "archive"
        )
    try:
        with zf.open(info) as fh:
            version = npy_format.read_magic(fh)
            if version == (1, 0):
                shape, _, dtype = npy_format.read_array_header_1_0(fh)
            elif version == (2, 0):
                shape, _, dtype = npy_format.read_array_header_2_0(fh)
            else:
                shape, _, dtype = npy_format._read_array_header(fh, version)  # noqa: SLF001
            header_bytes = fh.tell()
    except (ValueError, OSError, EOFError, zipfile.BadZipFile, RuntimeError,
            NotImplementedError, KeyError, TypeError, SyntaxError) as exc:
        raise CaptureError(
            f"{label}: member {name!r} is not a readable numpy array ({shorten(str(exc), 80)})"
        ) from None
    member = _Member(info, dtype, tuple(int(s) for s in shape), header_bytes)
    return member


def _check_size(label: str, name: str, m: _Member) -> None:
    if m.dtype.hasobject:
        raise CaptureError(
            f"{label}: array {name!r} holds Python objects, which cannot be read without "
            "pickle (object arrays are refused)"
        )
    declared = m.count * m.dtype.itemsize
    held = m.info.file_size - m.header_bytes
    if declared != held:
        raise CaptureError(
            f"{label}: array {name!r} declares shape {m.shape} of {m.dtype} "
            f"({declared} bytes) but the archive holds {held} bytes of data: truncated or "
            "corrupt member"
        )


def _read_data(label: str, zf: zipfile.ZipFile, name: str, m: _Member) -> np.ndarray:
    _check_size(label, name, m)
    out = np.empty(m.count, dtype=m.dtype)
    view = memoryview(out).cast("B") if m.count else memoryview(b"")
    pos = 0
    try:
        with zf.open(m.info) as fh:
            fh.read(m.header_bytes)
            while pos < len(view):
                chunk = fh.read(min(_READ_CHUNK, len(view) - pos))
                if not chunk:
                    break
                view[pos:pos + len(chunk)] = chunk
                pos += len(chunk)
    except (OSError, EOFError, zipfile.BadZipFile, ValueError) as exc:
        raise CaptureError(f"{label}: array {name!r} cannot be read: {shorten(str(exc), 80)}") from None
    if pos != len(view):
        raise CaptureError(f"{label}: array {name!r} ends after {pos} of {len(view)} bytes")
    return out.reshape(m.shape)


def read_npz(
    source: Source,
    time_column: Any,
    columns: Mapping[str, Any] | None,
    time_unit: str | None,
    units: Mapping[str, str] | None,
) -> CaptureData:
    """Read an ``.npz`` capture (see :func:`workbench.capture.readers.read_npz_capture`)."""
    label = source.label
    check_overrides(label, units, time_unit)
    units = dict(units or {})
    if time_unit is not None:
        units["time"] = time_unit
    if not source.is_zip():
        magic = source.first_bytes(4)
        raise CaptureError(
            f"{label}: not an .npz archive (no zip signature at the start; first bytes "
            f"{magic!r})"
        )
    with source.open_binary() as raw:
        try:
            zf = zipfile.ZipFile(raw)
        except (zipfile.BadZipFile, OSError, EOFError, ValueError) as exc:
            raise CaptureError(f"{label}: not a readable .npz archive: {exc}") from None
        with zf:
            return _from_archive(label, zf, time_column, columns, units)


def _from_archive(label: str, zf: zipfile.ZipFile, time_column: Any,
                  columns: Mapping[str, Any] | None, units: dict[str, str]) -> CaptureData:
    infos = [i for i in zf.infolist() if not i.is_dir()]
    arrays_info = {i.filename[:-4]: i for i in infos if i.filename.endswith(".npy")}
    if not arrays_info:
        others = [i.filename for i in infos]
        raise CaptureError(
            f"{label}: zip archive holds no numpy arrays (.npy members)"
            + (f"; it holds {name_list(others, 4)}" if others else "")
        )
    if len(arrays_info) > _MAX_MEMBERS:
        raise CaptureError(
            f"{label}: .npz holds {len(arrays_info)} arrays; a capture has a handful "
            f"(at most {_MAX_MEMBERS} are read)"
        )
    stored = list(arrays_info)
    headers: dict[str, _Member] = {}

    def header(name: str) -> _Member:
        if name not in headers:
            headers[name] = _read_header(label, zf, name, arrays_info[name])
        return headers[name]

    if time_column is not None:
        if not isinstance(time_column, str) or time_column not in arrays_info:
            raise CaptureError(
                f"{label}: time_column={brief(time_column)} is not an array of the "
                f"archive ({name_list(stored)})"
            )
        t_name: str | None = time_column
    else:
        t_name = next((n for n in _NPZ_TIME_NAMES if n in arrays_info), None)
    chosen: dict[str, str] = {}
    if columns is not None:
        for key, spec in columns.items():
            if key not in CHANNEL_UNITS:
                raise CaptureError(
                    f"{label}: columns key {brief(key)} is not a channel name; "
                    f"expected one of {', '.join(CHANNEL_UNITS)}"
                )
            if not isinstance(spec, str) or spec not in arrays_info:
                raise CaptureError(
                    f"{label}: columns[{key!r}]={brief(spec)} is not an array of "
                    f"the archive ({name_list(stored)})"
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
            f"holds {name_list(stored)}"
        )

    # text scalars of the archive become metadata (headers only: small members)
    metadata: dict[str, str] = {}
    for name in stored:
        info = arrays_info[name]
        if name in chosen.values() or name == t_name or info.file_size > _MAX_TEXT_BYTES:
            continue
        try:
            m = header(name)
        except CaptureError:
            continue  # an unused member that is not an array is not our business
        if m.shape == () and m.dtype.kind in "US" and not m.dtype.hasobject:
            metadata[name] = str(_read_data(label, zf, name, m).reshape(()))

    used = ([("time", t_name)] if t_name else []) + list(chosen.items())
    for _key, name in used:  # every header and size checked before any data is read
        m = header(name)
        if m.dtype.hasobject:
            _check_size(label, name, m)
        if m.dtype.kind not in "fiu":
            raise CaptureError(
                f"{label}: array {name!r} has dtype {m.dtype}; expected real numbers"
            )
        if len(m.shape) != 1:
            raise CaptureError(
                f"{label}: array {name!r} has shape {m.shape}; expected one dimension"
            )
        _check_size(label, name, m)
    lengths = {name: header(name).count for _, name in used}
    if len(set(lengths.values())) > 1:
        raise CaptureError(
            f"{label}: arrays differ in length: "
            + ", ".join(f"{k!r} has {n}" for k, n in lengths.items())
        )
    n = next(iter(lengths.values()))
    if n < MIN_SAMPLES:
        raise CaptureError(f"{label}: only {n} sample(s); a capture needs at least {MIN_SAMPLES}")

    arrays: dict[str, np.ndarray] = {}
    labels: dict[str, str] = {}
    unit_texts: dict[str, str] = {}
    for key, name in used:
        raw = _read_data(label, zf, name, header(name))
        si = "s" if key == "time" else CHANNEL_UNITS[key]
        unit_text = units.get(key, "")
        try:
            power = unit_exponent(unit_text, si) if unit_text.strip() else 0
        except ValueError as exc:
            raise CaptureError(f"{label}: unit for {key!r}: {exc}") from None
        values = raw.astype(np.float64, copy=False)
        values = scale_by_power_of_ten(values, power)
        bad = np.flatnonzero(~np.isfinite(values[: n]))
        if bad.size:
            k = int(bad[0])
            raise CaptureError(
                f"{label}: array {name!r}, sample {k} (0-based): {float(raw[k])!r} is not "
                f"a finite number ({'NaN' if math.isnan(float(raw[k])) else 'infinite'})"
            )
        check_magnitude(label, key, values, lambda k, name=name: f"array {name!r}, sample {k} (0-based)")
        arrays[key] = np.ascontiguousarray(values)
        labels[key] = name
        unit_texts[key] = unit_text
        metadata[f"unit.{key}"] = f"{unit_text or '(none)'} [{'argument' if unit_text else 'SI'}]"

    notes: list[str] = []
    if t_name is None:
        if "sample_interval" not in arrays_info:
            raise CaptureError(
                f"{label}: no time array ('t' or 'time') and no 'sample_interval' scalar"
            )
        m = header("sample_interval")
        if m.count != 1 or m.dtype.kind not in "fiu":
            raise CaptureError(
                f"{label}: 'sample_interval' must be one number [s], got shape "
                f"{m.shape} dtype {m.dtype}"
            )
        dt = float(_read_data(label, zf, "sample_interval", m).reshape(()))
        if not (math.isfinite(dt) and dt > 0):
            raise CaptureError(f"{label}: 'sample_interval' = {dt!r} is not a positive time")
        time = np.arange(n, dtype=np.float64) * dt
        metadata["time_source"] = f"sample_interval {dt!r} s"
        notes.append(f"time built from the archive's sample_interval {dt!r} s")
        unit_texts["time"] = "s"
        check_magnitude(label, "time", time, lambda k: f"sample {k} (0-based)")
    else:
        time = arrays.pop("time")
        metadata["time_source"] = f"array {t_name!r}"
    metadata.update(check_time(label, time, lambda k: f"array {t_name or 'time'!r}, sample {k} (0-based)"))
    channel_arrays = {k: readonly(v) for k, v in arrays.items()}
    metadata.update(format="npz", rows=str(n))
    metadata.update(clipping(channel_arrays))
    return CaptureData(
        time=readonly(time),
        channels=MappingProxyType(channel_arrays),
        source=label,
        metadata=MappingProxyType(metadata),
        columns=MappingProxyType(labels),
        units=MappingProxyType(unit_texts),
        meaning=MappingProxyType({k: f"array name {labels[k]!r}" for k in channel_arrays}),
        notes=tuple(notes),
    )
