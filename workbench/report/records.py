"""Report records of library results, for the command line's ``--report FILE.html``.

Each function turns one library result into a record for :func:`workbench.report.write_report`
(inputs, material with provenance, input files with SHA-256, a result table with units,
statements, warnings, notes, the columns for the CSV and a plot spec), so
``workbench shape``, ``sweep`` and ``capture`` write the same kind of page as the panels.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from workbench.report.document import CAUTIONS, file_entry, material_entry
from workbench.report.export import build_record
from workbench.report.numbers import eng

__all__ = ["loss_result_record", "sweep_record", "capture_record", "condition_inputs", "emit_report"]

_COLUMNS = [{"name": "part", "unit": None, "key": "part"}, {"name": "loss density", "unit": "W/m3", "key": "loss_w_m3"},
            {"name": "specific loss", "unit": "W/kg", "key": "loss_w_kg"}]


def _material(material):
    if material is None or not hasattr(material, "steinmetz") or not hasattr(material, "density"):
        return None
    return material_entry(material)


def _rows(parts, density, volume):
    cols = list(_COLUMNS) + ([{"name": f"in {eng(volume, 'm3')}", "unit": "W", "key": "loss_w"}] if volume else [])
    rows = []
    for label, value in parts:
        if value is None:
            continue
        row = [label, float(value), None if not density else float(value) / density]
        if volume:
            row.append(float(value) * volume)
        rows.append(row)
    return {"columns": cols, "rows": rows}


def _flux_plot(t, b, name="flux_period"):
    return {"name": name, "title": "Flux density over one period", "x": "time_s", "ys": [("b_t", "B")],
            "x_label": "time t [s]", "y_label": "flux density B [T]", "x_unit": "s", "y_unit": "T"}


def condition_inputs(described: dict, conditions: dict, **more) -> dict:
    """Report inputs from a command's described waveform and the engine conditions it passed.

    Parameters
    ----------
    described : dict
        The waveform as the command described it (``shape``, ``duty``, ``b_peak_t`` or ``capture``).
    conditions : dict
        The engine keywords (``material``, ``temperature``, ``thickness``, ``resistivity``,
        ``skin_effect``, ``h_dc``); None means the material's own value.
    **more
        Further inputs (SI, unit in the key).

    Returns
    -------
    dict
    """
    m = conditions.get("material")
    name = getattr(m, "name", None) or (f"Steinmetz k={m.k:g}, alpha={m.alpha:g}, beta={m.beta:g}"
                                        if hasattr(m, "alpha") else str(m))
    out = {**described, "material": name, "temperature_c": conditions.get("temperature"),
           "thickness_m": conditions.get("thickness"), "resistivity_ohm_m": conditions.get("resistivity"),
           "skin_effect": conditions.get("skin_effect", True), "dc_bias_a_m": conditions.get("h_dc")}
    out.update(more)
    return out


def emit_report(record: dict, path, *, to_stderr: bool = False):
    """Write a command's report (never over an existing file) and print where it went."""
    import sys

    from workbench.report.document import write_report

    written = write_report(record, path)
    print(f"report written: {written} (with {written.with_suffix('.json').name} and {written.with_suffix('.csv').name})",
          file=sys.stderr if to_stderr else sys.stdout)
    return written


def loss_result_record(kind: str, inputs: dict, result, *, material=None, volume=None, waveform=None,
                       title: str | None = None) -> dict:
    """A record of one engine result (a loss at one operating point).

    Parameters
    ----------
    kind : str
        What was analysed (``"shape"``).
    inputs : dict
        Inputs as given, SI values with the unit in the key.
    result : workbench.engine.LossResult
        The engine's result.
    material : workbench.materials.Material, optional
        The library material (for its provenance line).
    volume : float, optional
        Core volume [m^3] for the loss in watts.
    waveform : workbench.waveforms.FluxWaveform, optional
        One period of the flux, plotted.
    title : str, optional
        Page title.

    Returns
    -------
    dict
    """
    parts = [(f"model total ({result.loss_model})", result.total), ("hysteresis", result.hysteresis),
             ("classical eddy", result.classical), ("excess", result.excess),
             ("sum of the three parts", result.separation_total)]
    if result.relaxation:
        parts.append(("of which relaxation", result.relaxation))
    series, plots = None, None
    if waveform is not None:
        t = np.append(waveform.t, waveform.period)
        series = {"time_s": t, "b_t": np.append(waveform.b, waveform.b[0])}
        plots = [_flux_plot(t, series["b_t"])]
    statement = (f"{result.material}: {eng(result.total, 'W/m3', 4)} ({result.loss_model}) at "
                 f"{eng(result.freq, 'Hz', 4)}, B_peak {eng(result.b_peak, 'T', 4)}"
                 + (f", {eng(result.loss_w(volume), 'W', 4)} in {eng(volume, 'm3')}" if volume else "") + ".")
    return build_record(kind, inputs, result.to_dict(), title=title or f"Core loss of one waveform ({result.material})",
                        material=_material(material), table=_rows(parts, result.density, volume),
                        statements=[statement], warnings=list(result.warnings), notes=list(result.notes),
                        cautions=list(CAUTIONS), series=series, plots=plots)


def sweep_record(inputs: dict, sweep, *, material=None, extra_warnings=(), files=None, title: str | None = None) -> dict:
    """A record of a frequency sweep (``workbench sweep``).

    Parameters
    ----------
    inputs : dict
        Inputs as given (SI, unit in the key).
    sweep : workbench.analysis.FrequencySweep
        The library's sweep.
    material : workbench.materials.Material, optional
        The library material (provenance line, skin-effect knee).
    extra_warnings : sequence of str
        Warnings from earlier steps (e.g. the capture's).
    files : list of dict, optional
        Input files (:func:`workbench.report.file_entry`).
    title : str, optional
        Page title.

    Returns
    -------
    dict
    """
    keys = [("total", "model total"), ("hysteresis", "hysteresis"), ("classical", "classical eddy"),
            ("excess", "excess"), ("separation_total", "sum of the three parts")]
    present = [(k, label) for k, label in keys if getattr(sweep, k) is not None]
    series = {"frequency_hz": sweep.freq, **{f"{k}_w_m3": getattr(sweep, k) for k, _ in present}}
    table = {"columns": [{"name": "frequency", "unit": "Hz", "key": "frequency_hz"}]
             + [{"name": label, "unit": "W/m3", "key": f"{k}_w_m3"} for k, label in present],
             "rows": [[float(sweep.freq[i])] + [float(getattr(sweep, k)[i]) for k, _ in present]
                      for i in range(min(sweep.freq.size, 200))]}
    statements = [f"Crossover at {eng(sweep.crossover.freq, 'Hz', 4)}: {sweep.crossover.message}."
                  if sweep.crossover.freq is not None else f"No crossover: {sweep.crossover.message}."]
    mu_r = getattr(material, "rel_permeability", None)
    if mu_r and inputs.get("skin_effect", True) is not False:
        from workbench.analysis.compare import skin_knee_frequency

        knee = skin_knee_frequency(sweep.resistivity, sweep.thickness, mu_r)
        statements.append(f"Skin-effect knee at {eng(knee, 'Hz', 4)} (thickness = 3 skin depths for mu_r = "
                          f"{mu_r:.4g}): above it the classical part grows as f^1.5 instead of f^2.")
    if sweep.freq.size > 200:
        statements.append(f"The table lists the first 200 of {sweep.freq.size} frequencies; the CSV holds all.")
    plots = [{"name": "loss_vs_frequency", "title": "Loss density against frequency", "x": "frequency_hz",
              "ys": [(f"{k}_w_m3", label) for k, label in present], "x_label": "frequency f [Hz]",
              "y_label": "loss density P [W/m³]", "x_unit": "Hz", "y_unit": "W/m3", "x_log": True, "y_log": True}]
    results = sweep.to_dict()
    warnings = list(extra_warnings) + [w for w in results.pop("warnings", []) if w not in extra_warnings]
    return build_record("frequency-sweep", inputs, results, title=title or f"Loss against frequency ({sweep.material})",
                        material=_material(material), files=files, table=table, statements=statements,
                        warnings=warnings, cautions=list(CAUTIONS), series=series, plots=plots)


def capture_record(analysis, path, *, material=None, title: str | None = None) -> dict:
    """A record of a capture analysis (``workbench capture``), with the file's SHA-256.

    Parameters
    ----------
    analysis : workbench.analysis.capture.CaptureAnalysis
        The library's result.
    path : str or os.PathLike
        The capture file.
    material : workbench.materials.Material, optional
        The library material of the prediction.
    title : str, optional
        Page title.

    Returns
    -------
    dict
    """
    a = analysis
    density = getattr(a.model, "density", None) if a.model is not None else getattr(material, "density", None)
    parts = [("hysteresis", a.hysteresis), ("classical eddy", a.classical), ("excess", a.excess),
             ("sum of the three parts", getattr(a.model, "separation_total", None) if a.model is not None else None),
             (f"prediction ({a.model_name or 'model'})", a.model_loss),
             (f"measured ({a.measured_method or 'measured'})", a.measured_loss)]
    w = a.waveform
    t = np.append(w.t, w.period)
    series = {"time_s": t, "b_t": np.append(w.b, w.b[0])}
    plots = [_flux_plot(t, series["b_t"], "capture_flux")]
    if a.h is not None:
        series["h_a_m"] = np.append(a.h, a.h[0])
    statement = (f"Detected frequency {eng(a.freq, 'Hz', 4)}; {a.periods_used} whole periods averaged of "
                 f"{a.periods_in_record:.3g} in the record (spread {100 * a.spread:.2g} %); B_peak "
                 f"{eng(a.b_peak, 'T', 4)}; {a.waveform_class} waveform.")
    statements = [statement]
    if a.ratio is not None:
        statements.append(f"Measured / predicted = {a.ratio:.3g}.")
    inputs = {"capture": Path(path).name, **dict(a.inputs or {})}
    return build_record("capture-analysis", inputs, a.to_dict(), title=title or f"Captured waveform {Path(path).name}",
                        material=_material(material), files=[file_entry(path, role="capture")],
                        table=_rows(parts, density, a.volume), statements=statements, warnings=list(a.warnings),
                        notes=list(a.notes), cautions=list(CAUTIONS), series=series, plots=plots)
