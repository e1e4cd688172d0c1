"""A report one can hand on: one HTML page (opens offline) with a JSON and a CSV file beside it.

:func:`write_report` is the one writer used by the panels' export button and by the
command line (``--report FILE.html``). The page carries what a colleague needs to judge
the numbers without the tool:

* the inputs (files with their SHA-256, geometry, material with its provenance line,
  temperature, overrides), every value with its unit;
* the result table with units, one unit per column (:func:`workbench.report.numbers.eng_column`);
* the statements (crossover, skin effect), the warnings and the cautions;
* interactive plots, BokehJS inlined so the page opens without a network;
* the package name, version and the creation date.

``FILE.json`` holds the same record (SI, unit in each key) and ``FILE.csv`` the plotted or
tabulated columns under ``# key: value`` lines. Nothing is overwritten silently: with
``replace=False`` an existing name gets the next free suffix (``run-2.html``) and the
returned path says which; files are written atomically and get the mode the user's umask
gives a new file.
"""
from __future__ import annotations

import hashlib
import html
import os
import re
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from workbench.report.export import PACKAGE_NAME, atomic_write_text, write_csv, write_json
from workbench.report.numbers import MISSING, eng, eng_column

__all__ = [
    "CAUTIONS",
    "default_export_folder",
    "file_entry",
    "material_entry",
    "write_report",
    "render_report",
    "report_paths",
    "key_unit",
]

#: Cautions printed in every report (the same words as the panels and the command line).
CAUTIONS = (
    "Results are estimates from generic material data; verify the temperature rise of a real core by test.",
    "Capturing converter waveforms means working near hazardous voltages: use isolated or differential probes "
    "and follow local electrical codes and licensed practice.",
)

#: Key suffix -> SI unit, longest first (the glossary's naming: ``b_peak_t``, ``loss_w_m3``).
_SUFFIX_UNITS = (
    ("_ohm_m", "ohm m"), ("_w_m3", "W/m3"), ("_j_m3", "J/m3"), ("_w_kg", "W/kg"), ("_kg_m3", "kg/m3"),
    ("_t_hz", "Hz T"), ("_t_s", "T/s"), ("_a_m", "A/m"), ("_degc", "degC"), ("_m2", "m2"), ("_m3", "m3"),
    ("_hz", "Hz"), ("_c", "degC"), ("_w", "W"), ("_t", "T"), ("_m", "m"), ("_s", "s"), ("_v", "V"),
    ("_a", "A"), ("_pct", "%"),
)


def key_unit(key: str) -> tuple[str, str]:
    """Split a record key into a readable name and its SI unit (``"b_peak_t"`` -> ``("b peak", "T")``).

    Parameters
    ----------
    key : str
        Record key with the unit as suffix.

    Returns
    -------
    (str, str)
        Name with spaces, unit (``""`` when the key has no unit suffix).
    """
    for suffix, unit in _SUFFIX_UNITS:
        if key.endswith(suffix) and len(key) > len(suffix):
            name = key[: -len(suffix)]
            return name.replace("_", " "), unit
    return key.replace("_", " "), ""


def default_export_folder() -> Path:
    """Where exports go unless the user names a folder: ``$FLUXHEAT_EXPORTS`` or ``~/fluxheat-exports``.

    Outside any repository, so a notebook started from a checkout writes nothing into it.
    """
    env = os.environ.get("FLUXHEAT_EXPORTS", "").strip()
    return Path(env).expanduser() if env else Path.home() / "fluxheat-exports"


def file_entry(path, *, role: str = "input") -> dict:
    """Name, size and SHA-256 of an input file, for a record's ``files`` list.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    role : str
        What the file is (``"capture"``, ``"loss table"``).

    Returns
    -------
    dict
        ``{"role", "name", "path", "bytes", "sha256"}``.
    """
    p = Path(path)
    h = hashlib.sha256()
    with open(p, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return {"role": role, "name": p.name, "path": str(p.resolve()), "bytes": p.stat().st_size,
            "sha256": h.hexdigest()}


def material_entry(material) -> dict:
    """A material's name, description and provenance line for a record.

    Parameters
    ----------
    material : workbench.materials.Material
        Library material.

    Returns
    -------
    dict
        ``{"name", "description", "origin", "provenance"}``; the provenance line names where
        the material came from and the source of its Steinmetz set.
    """
    sources = dict(getattr(material, "sources", {}) or {})
    st_source = sources.get("steinmetz.k") or sources.get("steinmetz") or "no source recorded"
    origin = getattr(material, "origin", "") or "unknown"
    where = "bundled library (data/materials.toml)" if origin == "bundled" else f"{origin} library"
    return {"name": material.name, "description": getattr(material, "description", ""), "origin": origin,
            "provenance": f"{material.name} from the {where}; Steinmetz set: {st_source}"}


def _umask() -> int:
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except OSError:
        pass
    mask = os.umask(0o022)  # no getter elsewhere: read by setting and restoring
    os.umask(mask)
    return mask


def report_paths(path) -> dict:
    """The three files of a report at ``path``: ``{"html", "json", "csv"}``.

    Parameters
    ----------
    path : str or os.PathLike
        The HTML file name (``.html`` or ``.htm``).
    """
    p = Path(path).expanduser()
    if p.suffix.lower() not in (".html", ".htm"):
        raise ValueError(f"report path must end in .html, got {str(path)!r}")
    return {"html": p, "json": p.with_suffix(".json"), "csv": p.with_suffix(".csv")}


def _free_name(path: Path) -> Path:
    stem, suffix = path.stem, path.suffix
    m = re.fullmatch(r"(.*)-(\d+)", stem)
    base, n = (m.group(1), int(m.group(2))) if m else (stem, 1)
    for i in range(n + 1, n + 10000):
        candidate = path.with_name(f"{base}-{i}{suffix}")
        if not any(p.exists() for p in report_paths(candidate).values()):
            return candidate
    raise ValueError(f"no free report name next to {str(path)!r}")


# ------------------------------------------------------------------------------------------
# rendering
# ------------------------------------------------------------------------------------------
def _value_text(key: str, value) -> str:
    name, unit = key_unit(key)
    if value is None:
        return MISSING
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        if unit == "m" and "thickness" in key:  # laminations are quoted in mm
            return eng(float(value), unit, 4, prefix="m")
        if unit:
            return eng(float(value), unit, 4)
        return f"{value:.6g}" if isinstance(value, float) else str(value)
    if isinstance(value, (list, tuple)):
        if all(isinstance(v, (int, float)) and v is not None for v in value) and unit:
            return ", ".join(eng(float(v), unit, 4) for v in value)
        return ", ".join(_value_text(key, v) if not isinstance(v, str) else v for v in value)
    if isinstance(value, Mapping):
        return "; ".join(f"{k}: {_value_text(k, v)}" for k, v in value.items())
    return str(value)


def _kv_table(items: Mapping, css: str) -> str:
    rows = []
    for key, value in items.items():
        if isinstance(value, (list, tuple)) and len(value) > 12:
            continue  # arrays belong to the CSV
        name, _unit = key_unit(key)
        rows.append(f"<tr><th>{html.escape(name)}</th><td>{html.escape(_value_text(key, value))}</td></tr>")
    return f'<table class="{css}">{"".join(rows)}</table>'


def _result_table(table: Mapping) -> str:
    cols = list(table.get("columns", ()))
    rows = list(table.get("rows", ()))
    heads, texts = [], []
    for j, col in enumerate(cols):
        unit = col.get("unit", "")
        values = [r[j] for r in rows]
        if unit is None or any(isinstance(v, str) for v in values if v is not None):
            heads.append(html.escape(col["name"]))
            texts.append([MISSING if v is None else html.escape(str(v)) for v in values])
            continue
        shown, numbers = eng_column(values, unit, col.get("digits", 4))
        heads.append(html.escape(col["name"]) + (f" [{html.escape(shown)}]" if shown else ""))
        texts.append(numbers)
    head = "".join(f"<th>{h}</th>" for h in heads)
    body = "".join("<tr>" + "".join(f"<td>{texts[j][i]}</td>" for j in range(len(cols))) + "</tr>"
                   for i in range(len(rows)))
    return f'<table class="fluxheat-results"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def _plots_from_spec(record: Mapping):
    """Bokeh figures from a record's ``plots`` spec and ``series`` columns (for the command line)."""
    from bokeh.layouts import column
    from bokeh.models import ColumnDataSource, HoverTool
    from bokeh.plotting import figure

    from workbench.report.plotting import PLOT_COLOURS, apply_axis_format

    series = record.get("series") or {}
    figs = []
    for spec in record.get("plots") or ():
        data = {k: np.asarray(series[k], dtype=float) for k in (spec["x"], *[y for y, _ in spec["ys"]])}
        src = ColumnDataSource(data=data)
        fig = figure(name=spec["name"], title=spec["title"], x_axis_label=spec["x_label"],
                     y_axis_label=spec["y_label"], x_axis_type="log" if spec.get("x_log") else "linear",
                     y_axis_type="log" if spec.get("y_log") else "linear", width=900, height=360,
                     tools="pan,wheel_zoom,box_zoom,reset,save", active_scroll=None)
        for i, (y, label) in enumerate(spec["ys"]):
            r = fig.line(spec["x"], y, source=src, color=PLOT_COLOURS[i % len(PLOT_COLOURS)],
                         line_dash=("solid", "dashed", "dotdash", "dotted")[i % 4], line_width=2.5, legend_label=label)
            fig.add_tools(HoverTool(renderers=[r], tooltips=[(spec["x_label"], f"@{{{spec['x']}}}{{0.000a}}"),
                                                               (label, f"@{{{y}}}{{0.000a}}")]))
        fig.toolbar.logo = None
        fig.legend.click_policy = "hide"
        apply_axis_format(fig, x_unit=spec.get("x_unit"), y_unit=spec.get("y_unit"))
        figs.append(fig)
    return column(*figs, name="report_plots") if figs else None


_CSS = """
body{font-family:"DejaVu Sans",Arial,sans-serif;margin:24px;color:#111;max-width:1100px}
h1{font-size:1.5em;margin:0 0 4px}h2{font-size:1.15em;margin:22px 0 6px;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:4px 0}th,td{padding:3px 12px;text-align:left;vertical-align:top}
table.fluxheat-results td{text-align:right;font-variant-numeric:tabular-nums}
table.fluxheat-results td:first-child{text-align:left}
table.fluxheat-results thead th{border-bottom:1px solid #888}
.meta{color:#444}.caution{background:#fff6e0;border-left:4px solid #CCBB44;padding:6px 10px;color:#5a3a00}
.warning{color:#8a1f1f}.statement{font-size:1.05em;margin:3px 0}code{font-size:0.95em}
"""


def render_report(record: Mapping, plots=None) -> str:
    """The report page as HTML text (BokehJS inlined).

    Parameters
    ----------
    record : Mapping
        From :func:`workbench.report.build_record`.
    plots : bokeh.model.Model, optional
        Figures or a layout; default built from the record's ``plots`` spec, if any.

    Returns
    -------
    str
    """
    from bokeh.embed import components
    from bokeh.resources import Resources

    # BokehJS inlined (the page opens offline); the core bundle is all these plots use, where
    # bokeh.resources.INLINE with every bundle (maths, tables, WebGL, widgets) would add ~3 MB
    inline = Resources(mode="inline", components=["bokeh"])

    title = str(record.get("title") or record.get("kind") or "analysis")
    if plots is None:
        plots = _plots_from_spec(record)
    parts = [f"<h1>{html.escape(title)}</h1>",
             f'<div class="meta">{html.escape(str(record.get("package", PACKAGE_NAME)))} '
             f'version <span class="fluxheat-version">{html.escape(str(record.get("version", "")))}</span>; '
             f'created <span class="fluxheat-created">{html.escape(str(record.get("created_utc", "")))}</span> (UTC); '
             f'kind: {html.escape(str(record.get("kind", "")))}</div>']
    cautions = list(record.get("cautions") or CAUTIONS)
    parts.append('<div class="caution fluxheat-cautions">' + "<br>".join(f"&#9888; {html.escape(c)}" for c in cautions)
                 + "</div>")
    parts.append("<h2>Inputs</h2>")
    files = list(record.get("files") or ())
    if files:
        rows = "".join(f"<tr><td>{html.escape(str(f.get('role', '')))}</td><td>{html.escape(str(f.get('name', '')))}</td>"
                       f"<td>{f.get('bytes', '')} bytes</td><td><code>sha256 {html.escape(str(f.get('sha256', '')))}</code></td></tr>"
                       for f in files)
        parts.append(f'<table class="fluxheat-files">{rows}</table>')
    material = record.get("material")
    materials = material if isinstance(material, list) else ([material] if material else [])
    for m in materials:
        parts.append(f'<div class="fluxheat-material"><b>Material {html.escape(str(m.get("name", "")))}</b>: '
                     f'{html.escape(str(m.get("description", "")))}<br><span class="meta">Provenance: '
                     f'{html.escape(str(m.get("provenance", "")))}</span></div>')
    parts.append(_kv_table(record.get("inputs") or {}, "fluxheat-inputs"))
    table = record.get("table")
    if table:
        parts.append("<h2>Results</h2>" + _result_table(table))
    scalars = {k: v for k, v in (record.get("results") or {}).items()
               if not isinstance(v, (list, tuple, Mapping)) and k not in ("warnings", "notes")}
    if scalars:
        parts.append(("" if table else "<h2>Results</h2>") + _kv_table(scalars, "fluxheat-scalars"))
    statements = list(record.get("statements") or ())
    if statements:
        parts.append("<h2>Statements</h2>" + "".join(
            f'<div class="statement fluxheat-statement">{html.escape(s)}</div>' for s in statements))
    warnings = list(record.get("warnings") or ())
    notes = list(record.get("notes") or ())
    if warnings or notes:
        parts.append("<h2>Warnings and notes</h2>" + "".join(
            f'<div class="warning fluxheat-warning">&#9656; warning: {html.escape(w)}</div>' for w in warnings)
                     + "".join(f'<div class="fluxheat-note">&#9656; note: {html.escape(n)}</div>' for n in notes))
    head_res = ""
    if plots is not None:
        script, div = components(plots)
        head_res = inline.render_js() + inline.render_css() + script
        parts.append(f'<h2>Plots</h2><div class="fluxheat-plots">{div}</div>')
    parts.append(f'<p class="meta">Written by {html.escape(PACKAGE_NAME)} {html.escape(str(record.get("version", "")))} '
                 f'on {html.escape(str(record.get("created_utc", "")))}. Values in SI with engineering prefixes; the JSON '
                 f'and CSV files beside this page hold the same record.</p>')
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>{html.escape(title)}</title>'
            f"<style>{_CSS}</style>{head_res}</head><body>{''.join(parts)}</body></html>\n")


def _series_columns(record: Mapping) -> dict:
    series = record.get("series")
    if series:
        return dict(series)
    table = record.get("table") or {}
    cols = list(table.get("columns", ()))
    if cols:
        out = {}
        for j, c in enumerate(cols):
            key = c.get("key") or c["name"]
            out[key] = [r[j] for r in table.get("rows", ())]
        return out
    return {"note": ["no table in this record"]}


def write_report(record: Mapping, path, *, plots=None, replace: bool = False) -> Path:
    """Write the HTML report and its JSON and CSV beside it; never overwrite silently.

    Parameters
    ----------
    record : Mapping
        From :func:`workbench.report.build_record` (inputs, results, table, statements,
        warnings, cautions, files, material, series, plots spec).
    path : str or os.PathLike
        The HTML file (``.html``); ``.json`` and ``.csv`` of the same stem go beside it. The
        folder is created if missing.
    plots : bokeh.model.Model, optional
        Figures for the page (a panel's own); default from the record's ``plots`` spec.
    replace : bool
        Replace existing files of that name. False (default): if any of the three exists,
        the next free name (``stem-2``, ``stem-3``, ...) is used.

    Returns
    -------
    pathlib.Path
        The HTML file written (its stem names the JSON and CSV).

    Raises
    ------
    ValueError
        If ``path`` does not end in ``.html`` or is a folder.
    """
    target = report_paths(path)["html"]
    if target.is_dir():
        raise ValueError(f"report path {str(path)!r} is a folder, expected a file name ending in .html")
    target.parent.mkdir(parents=True, exist_ok=True)
    if not replace and any(p.exists() for p in report_paths(target).values()):
        target = _free_name(target)
    paths = report_paths(target)
    existed = {k: p.exists() for k, p in paths.items()}
    page = render_report(record, plots)  # before any file is touched: a rendering error writes nothing
    plain = {k: v for k, v in record.items() if k not in ("plots",)}
    plain["report_files"] = {k: p.name for k, p in paths.items()}
    write_json(paths["json"], plain)
    write_csv(paths["csv"], _series_columns(record), record)
    atomic_write_text(paths["html"], page)
    mode = 0o666 & ~_umask()
    for k, p in paths.items():
        if not existed[k]:
            os.chmod(p, mode)
    return paths["html"]
