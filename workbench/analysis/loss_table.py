"""Reader for measured core-loss tables (CSV): frequency, flux, loss density, and optionally
temperature, waveform shape and duty.

A loss table is one row per measured operating point. The header names each column and,
in brackets, its unit::

    # invented demo data ...            <- comment lines start with '#'
    freq (Hz), b_peak (T), loss (W/m3)
    50, 0.5, 310
    ...

Understood column names (case and spacing do not matter):

=============  ======================================================  =================
glossary name  header spellings                                        units
=============  ======================================================  =================
freq           f, freq, frequency                                      Hz, kHz, MHz
b_peak         b, b_peak, bpeak, b_pk, bpk, b_max, bmax, bm, b_hat     T, mT, G-free SI
flux_pp        b_pp, bpp, flux_pp, delta_b, db, b_peak_to_peak         T, mT
loss           p, pv, p_v, loss, core_loss, loss_density, p_loss       W/m3, kW/m3, mW/cm3,
                                                                       W/cm3, W/kg, mW/g
temperature    temp, temperature, t_core, theta                        C, degC, °C, K
shape          shape, waveform, wave                                   (text)
duty           duty, duty_cycle, d                                     fraction or %
h_dc           h_dc, hdc, h_bias, dc_bias_h                            A/m, kA/m
b_dc           b_dc, bdc, b_bias, dc_bias_b                            T, mT
=============  ======================================================  =================

``h_dc`` / ``b_dc`` are the DC bias (premagnetisation) of the row: field strength or flux
density; a table carries at most one of them.

A column named only ``b`` or ``flux`` is ambiguous (peak or peak-to-peak) and needs the
``flux_kind`` option. Loss given per kilogram needs the material ``density``. Every unit
can also be given as an option when the header has none.

Files as spreadsheets and instruments write them are read as they are: comma, semicolon
or tab delimiters; a decimal point or a decimal comma (``0,5;120``, detected when the
delimiter is not a comma, or given with ``decimal=``); a preamble of ``key<sep>value``
lines before the header (kept in :attr:`LossTable.metadata`). Only regular files are read
(a FIFO, a device or a directory is refused). Cells must be plain ASCII numbers: ``1_000``,
full-width digits or ``True`` are refused with the cell named, and so are values outside
what any core-loss measurement holds (``PLAUSIBLE``), such as a loss of 1e300 W/m^3 or a
temperature below absolute zero.

Row numbers in error messages are physical line numbers of the file (1-based, the header
and comment lines included), so an editor jumps straight to the bad line.
"""
from __future__ import annotations

import csv
import io
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from workbench.capture.sources import open_regular_file
from workbench.units import unit_scale

__all__ = [
    "LossTable",
    "SHAPES",
    "read_loss_table",
    "loss_table_from_arrays",
    "write_loss_table",
]

#: Waveform shapes a table row may name, with accepted spellings.
SHAPES = ("sine", "triangle", "trapezoid")
_SHAPE_ALIASES = {
    "sine": "sine", "sin": "sine", "sinusoidal": "sine", "sinus": "sine",
    "triangle": "triangle", "tri": "triangle", "triangular": "triangle",
    "trapezoid": "trapezoid", "trap": "trapezoid", "trapezoidal": "trapezoid",
}

_NAME_ALIASES: dict[str, tuple[str, ...]] = {
    "freq": ("f", "freq", "frequency", "fsw"),
    "b_peak": ("b_peak", "bpeak", "b_pk", "bpk", "b_max", "bmax", "bm", "b_hat", "bhat",
               "b_amplitude", "peak_flux_density"),
    "flux_pp": ("b_pp", "bpp", "flux_pp", "delta_b", "db", "b_peak_to_peak", "b_p2p", "dbpp"),
    "flux": ("b", "flux", "flux_density"),
    "loss": ("p", "pv", "p_v", "loss", "losses", "core_loss", "loss_density", "p_loss",
             "ploss", "pcv", "p_cv", "ps", "specific_loss"),
    "temperature": ("temp", "temperature", "t_core", "theta", "t_c"),
    "shape": ("shape", "waveform", "wave", "waveshape"),
    "duty": ("duty", "duty_cycle", "d", "dutycycle"),
    "h_dc": ("h_dc", "hdc", "h_bias", "dc_bias_h", "h_dc_bias"),
    "b_dc": ("b_dc", "bdc", "b_bias", "dc_bias_b", "b_dc_bias"),
}
_LOOKUP = {alias: key for key, aliases in _NAME_ALIASES.items() for alias in aliases}
_HEADER_RE = re.compile(r"^\s*(?P<name>[^(\[]*?)\s*(?:[(\[]\s*(?P<unit>[^)\]]*?)\s*[)\]])?\s*$")
_TEMPERATURE_UNITS = {"c": 0.0, "degc": 0.0, "°c": 0.0, "deg c": 0.0, "℃": 0.0, "k": -273.15}

#: Range of each quantity that a core-loss measurement can hold (SI; degC for temperature).
#: Outside it a value is a wrong unit or a corrupt cell, and it would overflow the fits.
#: freq: 1 mHz to 10 GHz, beyond any magnetic-core test (common practice, no source);
#: b_peak: 1e-7 T to 10 T, above the saturation of every core material, Fe-Co near 2.4 T
#: (from memory); loss: 1e-6 to 1e11 W/m^3 (100 kW/cm^3, far above any core that survives
#: a measurement; common practice, no source); temperature: absolute zero -273.15 degC
#: (SI brochure, 9th edition, 2019, 2.3.1) to 1200 degC, above the Curie temperature of
#: every ferromagnetic material (cobalt, 1115 degC; from memory).
PLAUSIBLE = {
    "freq": (1e-3, 1e10, "Hz"),
    "b_peak": (1e-7, 10.0, "T"),
    "loss": (1e-6, 1e11, "W/m^3"),
    "temperature": (-273.15, 1200.0, "degC"),
}
#: Longest line of a table [characters] and longest numeric cell; a row is a few numbers.
MAX_LINE = 10_000
MAX_CELL = 100
_NUMBER_RE = {
    ".": re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$", re.ASCII),
    ",": re.compile(r"^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$", re.ASCII),
}
_DECIMAL_COMMA_RE = re.compile(r"^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$", re.ASCII)
_NONFINITE_RE = re.compile(r"^[+-]?(?:nan|inf|infinity)$", re.IGNORECASE)


def _cut(text: str, limit: int = 40) -> str:
    text = str(text)
    if len(text) <= limit:
        return repr(text)
    return repr(text[: limit - 10] + "...") + f" ({len(text)} characters)"


def _plausible(name: str, values: np.ndarray, rows: np.ndarray, source: str) -> None:
    """Refuse values outside PLAUSIBLE[name], naming the row."""
    lo, hi, unit = PLAUSIBLE[name]
    bad = ~((values >= lo) & (values <= hi))
    if bad.any():
        i = int(np.argmax(bad))
        raise ValueError(
            f"{source}: row {rows[i]}: {name} {float(values[i])!r} {unit} is outside what a "
            f"core-loss measurement holds ({lo:g} to {hi:g} {unit}); check the unit or the cell"
        )


def _refuse_bool(name: str, value) -> None:
    if isinstance(value, (bool, np.bool_)) or (
        isinstance(value, np.ndarray) and value.dtype.kind == "b"
    ):
        raise ValueError(f"{name} must be a number, got a boolean {value!r}")
    if isinstance(value, (list, tuple)) and any(isinstance(v, (bool, np.bool_)) for v in value):
        raise ValueError(f"{name} must hold numbers, got a boolean in {_cut(repr(value))}")


def _normalise_name(name: str) -> str:
    return re.sub(r"[\s\-]+", "_", name.strip().lower())


@dataclass(frozen=True, eq=False)
class LossTable:
    """Measured loss points, in SI units, one entry per table row.

    Attributes
    ----------
    freq : ndarray
        Frequency [Hz].
    b_peak : ndarray
        Peak flux density, half the peak-to-peak swing [T].
    loss : ndarray
        Loss per unit volume [W/m^3].
    temperature : ndarray or None
        Core temperature [degC], None when the table has no temperature column.
    shape : tuple of str
        Waveform shape of each row: ``"sine"``, ``"triangle"`` or ``"trapezoid"``.
    duty : ndarray
        Duty of each row [-]: NaN for sine rows; for a triangle the rising fraction of the
        period, for a trapezoid the fraction with non-zero voltage (as in
        :mod:`workbench.waveforms`).
    rows : ndarray of int
        File line number of each point (1-based; header and comments counted).
    source : str
        File name the table came from (``"<arrays>"`` when built in code).
    columns : dict
        Glossary name -> header text of the column read.
    density : float or None
        Density used to turn W/kg into W/m^3 [kg/m^3], None if not needed.
    h_dc : ndarray or None
        DC bias field strength of each row [A/m], None without such a column.
    b_dc : ndarray or None
        DC bias flux density of each row [T], None without such a column.
    metadata : dict
        Preamble lines of the file before the header (``key -> value`` as written, or
        ``"line N" -> text``) and the reader's ``delimiter`` and ``decimal``.
    """

    freq: np.ndarray
    b_peak: np.ndarray
    loss: np.ndarray
    temperature: np.ndarray | None = None
    shape: tuple = ()
    duty: np.ndarray | None = None
    rows: np.ndarray | None = None
    source: str = "<arrays>"
    columns: dict = field(default_factory=dict)
    density: float | None = None
    h_dc: np.ndarray | None = None
    b_dc: np.ndarray | None = None
    metadata: dict = field(default_factory=dict)

    def __post_init__(self):
        for name in ("freq", "b_peak", "loss", "temperature", "duty", "h_dc", "b_dc"):
            _refuse_bool(name, getattr(self, name))
        f = np.array(self.freq, dtype=float).ravel()
        n = f.size
        b = np.array(self.b_peak, dtype=float).ravel()
        p = np.array(self.loss, dtype=float).ravel()
        for name, arr in (("b_peak", b), ("loss", p)):
            if arr.size != n:
                raise ValueError(f"{self.source}: {name} has {arr.size} values, freq has {n}")
        temp = None if self.temperature is None else np.array(self.temperature, dtype=float).ravel()
        if temp is not None and temp.size != n:
            raise ValueError(f"{self.source}: temperature has {temp.size} values, freq has {n}")
        shape = tuple(self.shape) if len(self.shape) else ("sine",) * n
        if len(shape) != n:
            raise ValueError(f"{self.source}: shape has {len(shape)} values, freq has {n}")
        duty = np.full(n, np.nan) if self.duty is None else np.array(self.duty, dtype=float).ravel()
        if duty.size != n:
            raise ValueError(f"{self.source}: duty has {duty.size} values, freq has {n}")
        rows = np.arange(1, n + 1) if self.rows is None else np.array(self.rows, dtype=int).ravel()
        for name, arr in (("freq", f), ("b_peak", b), ("loss", p)):
            bad = ~(np.isfinite(arr) & (arr > 0))
            if bad.any():
                i = int(np.argmax(bad))
                raise ValueError(
                    f"{self.source}: row {rows[i]}: {name} must be finite and positive, got {arr[i]!r}"
                )
        if temp is not None and not np.all(np.isfinite(temp)):
            i = int(np.argmax(~np.isfinite(temp)))
            raise ValueError(f"{self.source}: row {rows[i]}: temperature must be finite, got {temp[i]!r}")
        for name, arr in (("freq", f), ("b_peak", b), ("loss", p)):
            _plausible(name, arr, rows, self.source)
        if temp is not None:
            _plausible("temperature", temp, rows, self.source)
        for i, s in enumerate(shape):
            if s not in SHAPES:
                raise ValueError(f"{self.source}: row {rows[i]}: shape must be one of {SHAPES}, got {s!r}")
            d = duty[i]
            if s == "sine":
                duty[i] = np.nan
            elif s == "triangle" and not (0 < d < 1):
                raise ValueError(f"{self.source}: row {rows[i]}: triangle duty must lie in (0, 1), got {d!r}")
            elif s == "trapezoid" and not (0 < d <= 1):
                raise ValueError(f"{self.source}: row {rows[i]}: trapezoid duty must lie in (0, 1], got {d!r}")
        bias = {}
        for name in ("h_dc", "b_dc"):
            value = getattr(self, name)
            if value is None:
                continue
            arr = np.array(value, dtype=float).ravel()
            if arr.size != n:
                raise ValueError(f"{self.source}: {name} has {arr.size} values, freq has {n}")
            bad = ~np.isfinite(arr)
            if bad.any():
                i = int(np.argmax(bad))
                raise ValueError(f"{self.source}: row {rows[i]}: {name} must be finite, got {arr[i]!r}")
            arr.setflags(write=False)
            bias[name] = arr
        if len(bias) == 2:
            raise ValueError(f"{self.source}: give the DC bias as h_dc (A/m) or as b_dc (T), not both")
        for name, arr in bias.items():
            object.__setattr__(self, name, arr)
        for arr in (f, b, p, duty, rows) + ((temp,) if temp is not None else ()):
            arr.setflags(write=False)
        object.__setattr__(self, "freq", f)
        object.__setattr__(self, "b_peak", b)
        object.__setattr__(self, "loss", p)
        object.__setattr__(self, "temperature", temp)
        object.__setattr__(self, "shape", shape)
        object.__setattr__(self, "duty", duty)
        object.__setattr__(self, "rows", rows)
        object.__setattr__(self, "columns", dict(self.columns))
        object.__setattr__(self, "metadata", dict(self.metadata))

    def __len__(self) -> int:
        return int(self.freq.size)

    @property
    def is_sine(self) -> np.ndarray:
        """Boolean mask of the sine rows."""
        return np.array([s == "sine" for s in self.shape], dtype=bool)

    @property
    def temperatures(self) -> np.ndarray:
        """Distinct temperatures of the table, sorted [degC] (empty without a column)."""
        if self.temperature is None:
            return np.zeros(0)
        return np.unique(self.temperature)

    def subset(self, mask) -> "LossTable":
        """Rows selected by a boolean mask or index array, as a new table."""
        idx = np.arange(len(self))[np.asarray(mask)]
        if idx.size == 0:
            raise ValueError(f"{self.source}: the selection leaves no rows")
        return LossTable(
            self.freq[idx], self.b_peak[idx], self.loss[idx],
            None if self.temperature is None else self.temperature[idx],
            tuple(self.shape[i] for i in idx), self.duty[idx], self.rows[idx],
            self.source, self.columns, self.density,
            None if self.h_dc is None else self.h_dc[idx],
            None if self.b_dc is None else self.b_dc[idx],
            self.metadata,
        )

    def at_temperature(self, temperature: float, tol: float = 0.5) -> "LossTable":
        """Rows measured within ``tol`` [degC] of ``temperature`` [degC]."""
        if self.temperature is None:
            raise ValueError(f"{self.source}: the table has no temperature column")
        mask = np.abs(self.temperature - float(temperature)) <= tol
        if not mask.any():
            have = ", ".join(f"{t:g}" for t in self.temperatures)
            raise ValueError(
                f"{self.source}: no rows at temperature {temperature!r} degC (table has {have} degC)"
            )
        return self.subset(mask)

    def to_dict(self) -> dict:
        """Plain-Python form in SI units (lists), e.g. for JSON."""
        return {
            "source": self.source,
            "freq": self.freq.tolist(),
            "b_peak": self.b_peak.tolist(),
            "loss": self.loss.tolist(),
            "temperature": None if self.temperature is None else self.temperature.tolist(),
            "shape": list(self.shape),
            "duty": [None if math.isnan(d) else float(d) for d in self.duty],
            "rows": self.rows.tolist(),
            "h_dc": None if self.h_dc is None else self.h_dc.tolist(),
            "b_dc": None if self.b_dc is None else self.b_dc.tolist(),
        }


def loss_table_from_arrays(freq, b_peak, loss, *, temperature=None, shape=None, duty=None,
                           source: str = "<arrays>", h_dc=None, b_dc=None) -> LossTable:
    """Build a :class:`LossTable` from SI arrays.

    Parameters
    ----------
    freq : array_like
        Frequency [Hz].
    b_peak : array_like
        Peak flux density [T].
    loss : array_like
        Loss per unit volume [W/m^3].
    temperature : array_like, optional
        Core temperature [degC].
    shape : str or sequence of str, optional
        Waveform shape (default ``"sine"`` for every row).
    duty : float or array_like, optional
        Duty [-] of triangle/trapezoid rows.
    source : str, optional
        Name used in error messages.
    h_dc : array_like, optional
        DC bias field strength [A/m].
    b_dc : array_like, optional
        DC bias flux density [T].

    Returns
    -------
    LossTable
    """
    for name, value in (("freq", freq), ("b_peak", b_peak), ("loss", loss),
                        ("temperature", temperature), ("duty", duty), ("h_dc", h_dc), ("b_dc", b_dc)):
        _refuse_bool(name, value)
    f = np.atleast_1d(np.asarray(freq, dtype=float))
    n = f.size
    if shape is None:
        shape = ("sine",) * n
    elif isinstance(shape, str):
        shape = (shape,) * n
    if duty is not None:
        duty = np.broadcast_to(np.asarray(duty, dtype=float), (n,))
    if temperature is not None:
        temperature = np.broadcast_to(np.asarray(temperature, dtype=float), (n,))
    bias = {k: None if v is None else np.broadcast_to(np.asarray(v, dtype=float), (n,))
            for k, v in (("h_dc", h_dc), ("b_dc", b_dc))}
    return LossTable(f, np.broadcast_to(np.asarray(b_peak, float), (n,)),
                     np.asarray(loss, float), temperature, tuple(shape), duty, None, source,
                     **bias)


# --------------------------------------------------------------------------------------------
#: Largest loss-table file read [bytes]; a table of measured points is a few kilobytes.
MAX_TABLE_BYTES = 64 << 20


def _read_text(path_or_buffer) -> tuple[str, str]:
    if isinstance(path_or_buffer, (str, os.PathLike)):
        path = Path(path_or_buffer)
        try:
            with open_regular_file(path) as fh:
                raw = fh.read(MAX_TABLE_BYTES + 1)
        except ValueError as exc:  # not a regular file, absent, unreadable
            reason = str(exc).split(": ", 1)[-1]
            raise ValueError(f"{path}: cannot read the loss table: {reason}") from None
        except OSError as exc:
            raise ValueError(f"{path}: cannot read the loss table: {exc.strerror or exc}") from None
        if len(raw) > MAX_TABLE_BYTES:
            raise ValueError(f"{path}: larger than {MAX_TABLE_BYTES >> 20} MiB; not a loss table")
        try:
            text = raw.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            try:
                text = raw.decode("cp1252")  # spreadsheet exports on Windows ("µ", "°")
            except UnicodeDecodeError:
                raise ValueError(
                    f"{path}: not a UTF-8 text file ({exc.reason} at byte {exc.start})"
                ) from None
        if "\x00" in text:
            raise ValueError(f"{path}: binary file (NUL byte); expected a text table")
        return text, str(path)
    if hasattr(path_or_buffer, "read"):
        text = path_or_buffer.read()
        if isinstance(text, bytes):
            text = text.decode("utf-8-sig")
        return text, getattr(path_or_buffer, "name", "<buffer>")
    raise ValueError(f"path_or_buffer must be a path or a file object, got {type(path_or_buffer).__name__}")


def _split_lines(text: str, source: str):
    """(line_number, line) of the non-blank, non-comment lines."""
    out = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        out.append((number, line))
    if not out:
        raise ValueError(f"{source}: the file has no header and no data")
    return out


def _delimiter(header: str) -> str:
    counts = {d: header.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=counts.get)
    return best if counts[best] else ","


_DELIM_WORDS = {",": ",", "comma": ",", ";": ";", "semicolon": ";", "\t": "\t", "tab": "\t"}
_DECIMAL_WORDS = {".": ".", "point": ".", "dot": ".", ",": ",", "comma": ","}


def _fields(line: str, delim: str) -> list[str]:
    return [f.strip().strip('"').strip() for f in line.split(delim)]


def _is_header(line: str, delim: str, extra_names) -> bool:
    """True for a line naming at least two table columns (freq, flux, loss, ...)."""
    names = []
    for f in _fields(line, delim):
        m = _HEADER_RE.match(f)
        names.append(m["name"] if m else f)
    known = sum(_normalise_name(n) in _LOOKUP or n in extra_names for n in names)
    return known >= 2


def _find_header(lines, source: str, delimiter, extra_names):
    """(index of the header among `lines`, delimiter, metadata of the preamble lines)."""
    for idx, (_number, line) in enumerate(lines[:200]):
        delim = delimiter or _delimiter(line)
        if _is_header(line, delim, extra_names):
            metadata = {}
            for num, pre in lines[:idx]:
                for sep in (delim, ",", ";", "\t", ":", "="):
                    if sep in pre:
                        key, _, value = pre.partition(sep)
                        if key.strip():
                            metadata[key.strip()] = value.strip().strip(sep).strip()
                            break
                else:
                    metadata[f"line {num}"] = pre.strip()
            return idx, delim, metadata
    first = lines[0][1]
    fields = _fields(first, delimiter or _delimiter(first))
    shown = ", ".join(_cut(f, 24) for f in fields[:6]) + (f", ... ({len(fields)} in all)" if len(fields) > 6 else "")
    raise ValueError(
        f"{source}: no header row naming the table's columns (freq, b_peak or b_pp, loss); "
        f"the first line (row {lines[0][0]}) has {shown}"
    )


def _detect_decimal(data_rows, delim: str) -> str:
    """',' when the delimiter is not a comma and a cell holds a decimal comma."""
    if delim == ",":
        return "."
    for _, rec in data_rows[:500]:
        if any(_DECIMAL_COMMA_RE.match(c.strip()) for c in rec):
            return ","
    return "."


def _scale(unit_text: str, si: str, what: str, source: str) -> float:
    try:
        return unit_scale(unit_text, si)
    except ValueError:
        raise ValueError(f"{source}: {what}: unit {unit_text!r} is not a unit of {si}") from None


def _loss_scale(unit_text: str, density, header: str, source: str) -> tuple[float, float | None]:
    """Scale to W/m^3; W/kg units need a density."""
    try:
        return unit_scale(unit_text, "W/m3"), None
    except ValueError:
        pass
    try:
        per_kg = unit_scale(unit_text, "W/kg")
    except ValueError:
        raise ValueError(
            f"{source}: column {header!r}: unit {unit_text!r} is neither a loss per volume "
            "(W/m3, kW/m3, mW/cm3) nor per mass (W/kg)"
        ) from None
    if density is None:
        raise ValueError(
            f"{source}: column {header!r} is in {unit_text} (per mass): give the material density "
            "[kg/m^3] to convert it to W/m^3"
        )
    dens = float(density)
    if not math.isfinite(dens) or dens <= 0:
        raise ValueError(f"density must be finite and positive [kg/m^3], got {density!r}")
    return per_kg * dens, dens


def _parse_cell(text: str, source: str, row: int, header: str, decimal: str = ".") -> float:
    cell = text.strip()
    where = f"{source}: row {row}, column {_cut(header, 30)}"
    if not cell:
        raise ValueError(f"{where}: empty cell")
    if _NONFINITE_RE.match(cell):
        raise ValueError(f"{where}: value must be finite, got {cell!r}")
    if len(cell) > MAX_CELL or not _NUMBER_RE[decimal].match(cell):
        hint = ""
        if decimal == "." and _DECIMAL_COMMA_RE.match(cell):
            hint = " (a decimal comma: write a decimal point, or use ';' or tab between cells)"
        elif "_" in cell:
            hint = " (digit separators are not read)"
        elif not cell.isascii():
            hint = " (only ASCII digits are read)"
        raise ValueError(f"{where}: cannot read {_cut(cell)} as a number{hint}")
    value = float(cell.replace(",", ".") if decimal == "," else cell)
    if not math.isfinite(value):
        raise ValueError(f"{where}: {cell!r} is beyond the range of a float")
    return value


def read_loss_table(path_or_buffer, *, columns=None, freq_unit=None, flux_unit=None, flux_kind=None,
                    loss_unit=None, density=None, temperature_unit=None, delimiter=None,
                    decimal=None) -> LossTable:
    """Read a measured loss table from CSV.

    Parameters
    ----------
    path_or_buffer : str, path or file object
        The CSV file (comma, semicolon or tab separated; ``#`` starts a comment line).
    columns : dict, optional
        Header names for glossary names when the header uses other words, e.g.
        ``{"freq": "Frequenz", "b_peak": "Bmax"}`` (keys: freq, b_peak, flux_pp, loss,
        temperature, shape, duty).
    freq_unit, flux_unit, loss_unit, temperature_unit : str, optional
        Units of the columns when the header does not state them (``"kHz"``, ``"mT"``,
        ``"mW/cm3"``, ``"C"``). If the header states a different unit, that is an error.
    flux_kind : {"peak", "pp"}, optional
        Whether the flux column is the peak or the peak-to-peak value; needed when the
        header name (``b``, ``flux``) does not say.
    density : float, optional
        Material density [kg/m^3], needed when the loss is per mass (W/kg).
    delimiter : str, optional
        ``","``, ``";"`` or ``"\\t"`` (or ``"comma"``, ``"semicolon"``, ``"tab"``);
        default: the most frequent of them in the header row.
    decimal : str, optional
        ``"."`` or ``","`` (``"point"``, ``"comma"``); default: a decimal comma when the
        delimiter is not a comma and a cell is written with one, else a point.

    Returns
    -------
    LossTable
        Points in SI units with their file line numbers; preamble lines in ``metadata``.

    Raises
    ------
    ValueError
        Naming the file, the row (file line) and the column with the bad value: missing
        columns or units, text or empty cells, NaN, non-positive frequency, flux or loss,
        an unknown shape or a duty outside (0, 1).

    Notes
    -----
    Peak-to-peak flux is halved: :math:`\\hat B = \\Delta B / 2`. A loss per mass becomes a
    loss per volume with :math:`P_v = P_m\\,\\rho_m`. Temperatures in K are shifted by
    -273.15 to degC.
    """
    if delimiter is not None:
        if not isinstance(delimiter, str) or delimiter.lower() not in _DELIM_WORDS:
            raise ValueError(f"delimiter must be ',', ';' or tab, got {_cut(repr(delimiter))}")
        delimiter = _DELIM_WORDS[delimiter.lower()]
    if decimal is not None:
        if not isinstance(decimal, str) or decimal.lower() not in _DECIMAL_WORDS:
            raise ValueError(f"decimal must be '.' or ',', got {_cut(repr(decimal))}")
        decimal = _DECIMAL_WORDS[decimal.lower()]
        if decimal == "," and delimiter == ",":
            raise ValueError("delimiter and decimal cannot both be a comma")
    if density is not None:
        _refuse_bool("density", density)
    text, source = _read_text(path_or_buffer)
    lines = _split_lines(text, source)
    for number, line in lines:
        if len(line) > MAX_LINE:
            raise ValueError(f"{source}: row {number} is {len(line)} characters long; a loss-table "
                             f"row is a few numbers (at most {MAX_LINE} characters read)")
    extra = {str(v) for v in dict(columns or {}).values()}
    start, delim, metadata = _find_header(lines, source, delimiter, extra)
    lines = lines[start:]
    header_no, header_line = lines[0]
    try:
        records = list(csv.reader(io.StringIO("\n".join(line for _, line in lines)), delimiter=delim))
    except csv.Error as exc:
        raise ValueError(f"{source}: not a readable table: {exc}") from None
    header = [h.strip() for h in records[0]]
    data_rows = [(num, rec) for (num, _), rec in zip(lines[1:], records[1:])]
    if decimal is None:
        decimal = _detect_decimal(data_rows, delim)
    elif decimal == "," and delim == ",":
        raise ValueError(f"{source}: the table is comma-separated; its decimal mark cannot be a comma")
    metadata.update(delimiter={",": "','", ";": "';'", "\t": "tab"}[delim], decimal=decimal)

    # map header -> glossary name
    parsed = []
    for h in header:
        m = _HEADER_RE.match(h)
        parsed.append((m["name"] if m else h, (m["unit"] if m else None)))
    wanted = {}
    if columns:
        for key, col in dict(columns).items():
            if key not in _NAME_ALIASES or key == "flux":
                raise ValueError(f"columns: unknown key {key!r}; use one of freq, b_peak, flux_pp, loss, temperature, shape, duty")
            names = [p[0] for p in parsed]
            if col in header:
                wanted[key] = header.index(col)
            elif col in names:
                wanted[key] = names.index(col)
            else:
                raise ValueError(f"{source}: columns: no column {col!r} in the header {header}")
    for i, (name, _) in enumerate(parsed):
        key = _LOOKUP.get(_normalise_name(name))
        if key is None or i in wanted.values():
            continue
        if key in ("b_peak", "flux_pp", "flux") and any(k in wanted for k in ("b_peak", "flux_pp", "flux")):
            raise ValueError(f"{source}: more than one flux column in the header {header}")
        if key in wanted:
            raise ValueError(f"{source}: two columns read as {key}: {header[wanted[key]]!r} and {header[i]!r}")
        wanted[key] = i
    if "flux" in wanted:
        if flux_kind is None:
            raise ValueError(
                f"{source}: column {header[wanted['flux']]!r} does not say whether the flux is peak or "
                "peak-to-peak: name it b_peak or b_pp, or give flux_kind ('peak' or 'pp')"
            )
        kind = str(flux_kind).lower().replace("-", "").replace("_", "")
        if kind not in ("peak", "pp", "peaktopeak"):
            raise ValueError(f"flux_kind must be 'peak' or 'pp', got {flux_kind!r}")
        wanted["b_peak" if kind == "peak" else "flux_pp"] = wanted.pop("flux")
    elif flux_kind is not None:
        kind = str(flux_kind).lower().replace("-", "").replace("_", "")
        have = "b_peak" if "b_peak" in wanted else "flux_pp" if "flux_pp" in wanted else None
        if kind not in ("peak", "pp", "peaktopeak"):
            raise ValueError(f"flux_kind must be 'peak' or 'pp', got {flux_kind!r}")
        if have is not None and (have == "b_peak") != (kind == "peak"):
            raise ValueError(f"{source}: flux_kind {flux_kind!r} contradicts the header {header[wanted[have]]!r}")
    for key, label in (("freq", "frequency"), ("loss", "loss")):
        if key not in wanted:
            raise ValueError(f"{source}: no {label} column in the header {header}")
    if "b_peak" not in wanted and "flux_pp" not in wanted:
        raise ValueError(f"{source}: no flux column (b_peak or b_pp) in the header {header}")
    flux_key = "b_peak" if "b_peak" in wanted else "flux_pp"

    def unit_of(key, option, what):
        idx = wanted[key]
        in_header = parsed[idx][1]
        if in_header and option and in_header.strip() != str(option).strip():
            raise ValueError(f"{source}: column {header[idx]!r} states unit {in_header!r}, option says {option!r}")
        unit = in_header or option
        if not unit:
            raise ValueError(f"{source}: column {header[idx]!r} has no unit: write it in the header, "
                             f"e.g. '{parsed[idx][0]} ({what})', or give it as an option")
        return unit

    f_scale = _scale(unit_of("freq", freq_unit, "Hz"), "Hz", f"column {header[wanted['freq']]!r}", source)
    b_scale = _scale(unit_of(flux_key, flux_unit, "T"), "T", f"column {header[wanted[flux_key]]!r}", source)
    if flux_key == "flux_pp":
        b_scale *= 0.5
    p_scale, used_density = _loss_scale(unit_of("loss", loss_unit, "W/m3"), density, header[wanted["loss"]], source)
    t_offset = None
    if "temperature" in wanted:
        idx = wanted["temperature"]
        tu = parsed[idx][1] or temperature_unit or "C"
        if parsed[idx][1] and temperature_unit and parsed[idx][1].strip() != str(temperature_unit).strip():
            raise ValueError(f"{source}: column {header[idx]!r} states unit {parsed[idx][1]!r}, option says {temperature_unit!r}")
        t_offset = _TEMPERATURE_UNITS.get(tu.strip().lower())
        if t_offset is None:
            raise ValueError(f"{source}: column {header[idx]!r}: temperature unit must be C, degC or K, got {tu!r}")
    bias_key = None
    if "h_dc" in wanted and "b_dc" in wanted:
        raise ValueError(f"{source}: columns {header[wanted['h_dc']]!r} and {header[wanted['b_dc']]!r} both give "
                         "the DC bias: keep one (h_dc in A/m or b_dc in T)")
    for key, si in (("h_dc", "A/m"), ("b_dc", "T")):
        if key in wanted:
            idx = wanted[key]
            if not parsed[idx][1]:
                raise ValueError(f"{source}: column {header[idx]!r} has no unit: write it in the header, "
                                 f"e.g. '{parsed[idx][0]} ({si})'")
            bias_key, bias_scale = key, _scale(parsed[idx][1], si, f"column {header[idx]!r}", source)
    duty_scale = 1.0
    if "duty" in wanted:
        du = parsed[wanted["duty"]][1]
        if du:
            duty_scale = _scale(du, "", f"column {header[wanted['duty']]!r}", source)

    if not data_rows:
        raise ValueError(f"{source}: the table has a header but no data rows")
    n = len(data_rows)
    out = {k: np.empty(n) for k in ("freq", "b", "loss", "temp", "duty", "bias")}
    shapes, row_numbers = [], np.empty(n, dtype=int)
    for j, (num, rec) in enumerate(data_rows):
        row_numbers[j] = num
        if len(rec) != len(header):
            raise ValueError(f"{source}: row {num}: {len(rec)} cells, the header has {len(header)}")

        def cell(key, rec=rec, num=num):
            return _parse_cell(rec[wanted[key]], source, num, header[wanted[key]], decimal)

        for key, name, scale in (("freq", "freq", f_scale), ("b", flux_key, b_scale), ("loss", "loss", p_scale)):
            value = cell(name)
            if value <= 0:
                what = {"freq": "frequency", "loss": "loss"}.get(name, "flux")
                raise ValueError(f"{source}: row {num}, column {header[wanted[name]]!r}: {what} must be positive, got {value!r}")
            out[key][j] = value * scale
        out["temp"][j] = cell("temperature") + t_offset if t_offset is not None else np.nan
        out["bias"][j] = cell(bias_key) * bias_scale if bias_key is not None else np.nan
        shape = "sine"
        if "shape" in wanted:
            raw = rec[wanted["shape"]].strip().lower()
            shape = _SHAPE_ALIASES.get(raw, "") if raw else "sine"
            if not shape:
                raise ValueError(f"{source}: row {num}, column {header[wanted['shape']]!r}: unknown shape "
                                 f"{rec[wanted['shape']].strip()!r}; use one of {', '.join(SHAPES)}")
        duty = np.nan
        if "duty" in wanted and (rec[wanted["duty"]].strip() or shape == "trapezoid"):
            duty = cell("duty") * duty_scale
        if shape == "triangle" and np.isnan(duty):
            duty = 0.5
        if shape == "trapezoid" and np.isnan(duty):
            raise ValueError(f"{source}: row {num}: a trapezoid row needs a duty (column 'duty')")
        if shape == "triangle" and not (0 < duty < 1):
            raise ValueError(f"{source}: row {num}, column {header[wanted['duty']]!r}: triangle duty must lie in (0, 1), got {duty!r}")
        if shape == "trapezoid" and not (0 < duty <= 1):
            raise ValueError(f"{source}: row {num}, column {header[wanted['duty']]!r}: trapezoid duty must lie in (0, 1], got {duty!r}")
        shapes.append(shape)
        out["duty"][j] = duty
    cols = {k: header[i] for k, i in wanted.items()}
    bias = {bias_key: out["bias"]} if bias_key is not None else {}
    return LossTable(out["freq"], out["b"], out["loss"], out["temp"] if t_offset is not None else None,
                     tuple(shapes), out["duty"], row_numbers, source, cols, used_density, **bias,
                     metadata=metadata)


def write_loss_table(table: LossTable, path, *, comment: str | None = None) -> Path:
    """Write a table in SI units (``freq (Hz), b_peak (T), loss (W/m3)`` ...) atomically.

    Parameters
    ----------
    table : LossTable
        Points to write.
    path : str or path
        Destination; written to a temporary file in the same folder, then renamed.
    comment : str, optional
        Text of leading ``#`` comment lines (one per line of text).

    Returns
    -------
    Path
        The file written.
    """
    path = Path(path)
    has_shape = any(s != "sine" for s in table.shape)
    head = ["freq (Hz)", "b_peak (T)", "loss (W/m3)"]
    if table.temperature is not None:
        head.append("temp (C)")
    if table.h_dc is not None:
        head.append("h_dc (A/m)")
    if table.b_dc is not None:
        head.append("b_dc (T)")
    if has_shape:
        head += ["shape", "duty"]
    lines = [f"# {c}" for c in (comment.splitlines() if comment else [])]
    lines.append(", ".join(head))
    for i in range(len(table)):
        cells = [f"{table.freq[i]:.6g}", f"{table.b_peak[i]:.6g}", f"{table.loss[i]:.6g}"]
        if table.temperature is not None:
            cells.append(f"{table.temperature[i]:.6g}")
        for bias in (table.h_dc, table.b_dc):
            if bias is not None:
                cells.append(f"{bias[i]:.6g}")
        if has_shape:
            cells += [table.shape[i], "" if np.isnan(table.duty[i]) else f"{table.duty[i]:.6g}"]
        lines.append(", ".join(cells))
    tmp = path.with_name(f".{path.name}.tmp{os.getpid()}")
    try:
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
