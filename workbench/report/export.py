"""Writing a record of an analysis: inputs, results and the package version.

Three formats, each written to a temporary file in the target folder and moved
into place with :func:`os.replace`, so a reader never sees a half-written file
and an error leaves any earlier file untouched:

* JSON: ``{"package", "version", "created_utc", "kind", "inputs", "results"}``,
  SI values with the unit in the key (``b_peak_t``, ``loss_w_m3``); NaN and
  infinities become ``null``.
* CSV: ``# key: value`` comment lines (package, version, inputs, scalar results),
  then one header row and the data columns. ``pandas.read_csv(path, comment="#")``
  and any spreadsheet (after the comment lines) read it.
* HTML: a bokeh figure or layout as a standalone page with BokehJS inlined, so it
  opens offline and can be mailed.

bokeh is imported only by :func:`write_html`.
"""
from __future__ import annotations

import csv
import io
import json
import re
from collections.abc import Mapping
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from workbench import __version__
from workbench.fileio import write_text_atomic
from workbench.jsonsafe import to_jsonable

__all__ = [
    "PACKAGE_NAME",
    "atomic_write_text",
    "package_info",
    "to_jsonable",
    "build_record",
    "write_json",
    "write_csv",
    "write_html",
    "write_bundle",
]

PACKAGE_NAME = "fluxheat-workbench"
_STEM_RE = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,99}")


def atomic_write_text(path, text: str, *, encoding: str = "utf-8") -> Path:
    """Write text to ``path`` through a temporary file in the same folder and a rename.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file; its folder must exist.
    text : str
        Content.
    encoding : str
        Text encoding.

    Returns
    -------
    pathlib.Path
        The destination path.

    Raises
    ------
    ValueError
        If the destination folder does not exist or ``path`` is a folder.
    """
    dest = Path(path)
    folder = dest.parent if str(dest.parent) else Path(".")
    if not folder.is_dir():
        raise ValueError(f"export folder {str(folder)!r} does not exist (writing {str(dest)!r})")
    if dest.is_dir():
        raise ValueError(f"export path {str(dest)!r} is a folder, expected a file name")
    return write_text_atomic(dest, text, encoding=encoding)


def package_info() -> dict:
    """Name and version of this package, for every record."""
    return {"package": PACKAGE_NAME, "version": __version__}


def build_record(kind: str, inputs: Mapping, results: Mapping, **extra) -> dict:
    """A record of one analysis: package, version, UTC time, kind, inputs and results.

    Parameters
    ----------
    kind : str
        What was analysed, e.g. ``"frequency-sweep"``.
    inputs : Mapping
        Inputs in SI with the unit in the key.
    results : Mapping
        Results in SI with the unit in the key.
    **extra
        Report sections (see :func:`workbench.report.write_report`): ``title`` (str),
        ``material`` (dict or list of dicts from :func:`workbench.report.material_entry`),
        ``files`` (list from :func:`workbench.report.file_entry`), ``table``
        (``{"columns": [{"name", "unit", "key"}], "rows": [[...]]}``, SI values),
        ``statements``, ``warnings``, ``notes``, ``cautions`` (lists of str), ``series``
        (columns for the CSV and the plots), ``plots`` (list of plot specs).
    """
    allowed = {"title", "material", "files", "table", "statements", "warnings", "notes", "cautions", "series",
               "plots"}
    unknown = sorted(set(extra) - allowed)
    if unknown:
        raise ValueError(f"build_record got unknown section(s) {', '.join(unknown)}; known: {', '.join(sorted(allowed))}")
    record = {
        **package_info(),
        "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "kind": str(kind),
        "inputs": to_jsonable(dict(inputs)),
        "results": to_jsonable(dict(results)),
    }
    for key, value in extra.items():
        if value is not None:
            record[key] = value if key == "plots" else to_jsonable(value)
    return record


def write_json(path, record: Mapping) -> Path:
    """Write a record as indented JSON (atomically). NaN is written as null."""
    text = json.dumps(to_jsonable(dict(record)), indent=2, allow_nan=False) + "\n"
    return atomic_write_text(path, text)


def _meta_lines(record: Mapping) -> list[str]:
    lines = []
    for key in ("package", "version", "created_utc", "kind"):
        if key in record:
            lines.append(f"# {key}: {record[key]}")
    for section in ("inputs", "results"):
        for key, value in (record.get(section) or {}).items():
            value = to_jsonable(value)
            if isinstance(value, list):
                if value and all(isinstance(v, str) for v in value):
                    for v in value:
                        lines.append(f"# {section}.{key}: {v}")
                continue  # arrays go in the columns
            if isinstance(value, dict):
                continue
            text = "" if value is None else str(value)
            lines.append(f"# {section}.{key}: {text}".replace("\n", " "))
    return lines


def write_csv(path, columns: Mapping, record: Mapping | None = None) -> Path:
    """Write columns of equal length as CSV, headed by ``# key: value`` lines of the record.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file.
    columns : Mapping of str to array_like
        Column name (with unit, e.g. ``frequency_hz``) to values. NaN is written
        as an empty cell.
    record : Mapping, optional
        A record from :func:`build_record`; its scalar inputs and results become
        the comment lines.

    Raises
    ------
    ValueError
        If there are no columns or the columns differ in length (naming the column).
    """
    if not columns:
        raise ValueError("columns must hold at least one column, got none")
    names = list(columns)
    arrays = []
    n = None
    for name in names:
        values = np.asarray(columns[name]).ravel().tolist()
        if n is None:
            n = len(values)
        elif len(values) != n:
            raise ValueError(f"column {name!r} has {len(values)} values, expected {n} like column {names[0]!r}")
        arrays.append(values)
    buf = io.StringIO()
    for line in _meta_lines(record or {}):
        buf.write(line + "\n")
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(names)
    for row in zip(*arrays):
        out = []
        for v in row:
            v = to_jsonable(v)
            out.append("" if v is None else (repr(v) if isinstance(v, float) else v))
        writer.writerow(out)
    return atomic_write_text(path, buf.getvalue())


def write_html(path, obj, *, title: str) -> Path:
    """Write a bokeh figure or layout as a standalone HTML page with BokehJS inlined.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file.
    obj : bokeh.model.Model
        A figure or a layout of figures.
    title : str
        Page title.
    """
    from bokeh.embed import file_html
    from bokeh.resources import INLINE

    html = file_html(obj, resources=INLINE, title=title)
    return atomic_write_text(path, html)


def write_bundle(folder, stem: str, record: Mapping, columns: Mapping, plots=None, *, title: str | None = None) -> dict:
    """Write ``<stem>.json``, ``<stem>.csv`` and (if ``plots``) ``<stem>.html`` into a folder.

    Parameters
    ----------
    folder : str or os.PathLike
        Destination folder; created if missing.
    stem : str
        File name without extension: letters, digits, ``.``, ``_``, ``-``.
    record : Mapping
        From :func:`build_record`.
    columns : Mapping of str to array_like
        Table for the CSV.
    plots : bokeh.model.Model, optional
        Figure or layout for the HTML page.
    title : str, optional
        HTML page title (default: the stem).

    Returns
    -------
    dict
        ``{"json": Path, "csv": Path, "html": Path}`` (``html`` only with ``plots``).
    """
    if not isinstance(stem, str) or not _STEM_RE.fullmatch(stem):
        raise ValueError(f"stem must be 1-100 letters, digits, '.', '_' or '-' (starting with a letter or digit), got {stem!r}")
    out_dir = Path(folder).expanduser()
    out_dir.mkdir(parents=True, exist_ok=True)
    paths = {
        "json": write_json(out_dir / f"{stem}.json", record),
        "csv": write_csv(out_dir / f"{stem}.csv", columns, record),
    }
    if plots is not None:
        paths["html"] = write_html(out_dir / f"{stem}.html", plots, title=title or stem)
    return paths
