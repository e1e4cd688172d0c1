"""Fit panel: load a measured loss table, fit a loss model, see data against the fit, save it.

The first half of the module is the panel's state with no widget code (:class:`FitSettings`,
:class:`FitView`, :func:`fit_view`); scripts can call :func:`fit_view` directly. The second
half is the widget view :class:`FitPanel` following the conventions of :mod:`workbench.ui`.
"""
from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from workbench.analysis.fitting import (
    fit_separation,
    fit_steinmetz,
    fit_steinmetz_bands,
    fit_two_frequency,
    save_fitted_material,
)
from workbench.analysis.loss_table import read_loss_table
from workbench.units import format_quantity

__all__ = ["DEMO_TABLE", "FIT_MODELS", "FitSettings", "FitView", "fit_view", "FitPanel"]

#: The bundled demo table (invented data, labelled as such in the file).
DEMO_TABLE = Path(__file__).resolve().parents[2] / "data" / "demo_loss_table.csv"
#: Models the panel can fit.
FIT_MODELS = ("steinmetz", "separation", "two-frequency")
_N_SWEEP = 120


# ==========================================================================================
# state (no widgets)
# ==========================================================================================
@dataclass(frozen=True)
class FitSettings:
    """Inputs of the fit panel (SI units).

    Attributes
    ----------
    path : str
        Loss table file (CSV).
    model : str
        One of :data:`FIT_MODELS`.
    flux_kind : str or None
        ``"peak"`` or ``"pp"`` when the header does not say; None to read it from the header.
    density : float or None
        Density for tables in W/kg [kg/m^3].
    temperature : float or None
        Use only the rows at this temperature [degC]; None for all rows.
    tolerance : float
        Largest relative error of one Steinmetz set before the table is split [-].
    split : bool
        Allow splitting into frequency bands.
    band : str
        ``"confidence"`` or ``"prediction"`` band around the Steinmetz lines.
    thickness : float
        Lamination thickness for the separation [m].
    resistivity : float
        Resistivity for the separation [ohm m] (start value when fitted).
    fit_resistivity : bool
        Fit an effective resistivity in the separation.
    """

    path: str = str(DEMO_TABLE)
    model: str = "steinmetz"
    flux_kind: str | None = None
    density: float | None = None
    temperature: float | None = None
    tolerance: float = 0.25
    split: bool = True
    band: str = "confidence"
    thickness: float = 0.35e-3
    resistivity: float = 52e-8
    fit_resistivity: bool = False

    def __post_init__(self):
        if not str(self.path).strip():
            raise ValueError("path: give the loss table file")
        if self.model not in FIT_MODELS:
            raise ValueError(f"model must be one of {', '.join(FIT_MODELS)}, got {self.model!r}")
        if self.flux_kind not in (None, "peak", "pp"):
            raise ValueError(f"flux_kind must be None, 'peak' or 'pp', got {self.flux_kind!r}")
        if self.band not in ("confidence", "prediction"):
            raise ValueError(f"band must be 'confidence' or 'prediction', got {self.band!r}")
        for name in ("tolerance", "thickness", "resistivity") + (("density",) if self.density is not None else ()):
            value = getattr(self, name)
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise ValueError(f"{name} must be finite and positive, got {value!r}")

    def to_dict(self) -> dict:
        return {"path": str(self.path), "model": self.model, "flux_kind": self.flux_kind,
                "density_kg_m3": self.density, "temperature_degc": self.temperature, "tolerance": self.tolerance,
                "split": self.split, "band": self.band, "thickness_m": self.thickness,
                "resistivity_ohm_m": self.resistivity, "fit_resistivity": self.fit_resistivity}


@dataclass(frozen=True)
class FitView:
    """What the fit panel shows for one set of inputs.

    Attributes
    ----------
    settings : FitSettings
    table : LossTable
        The rows fitted.
    result : object
        The library result: ``SteinmetzBands`` (steinmetz), ``SeparationFit`` or ``TwoFrequencyFit``.
    steinmetz : SteinmetzFit or None
        One Steinmetz set over the whole table (steinmetz model), for saving.
    points : dict of str to ndarray
        One entry per row: ``row, freq, b_peak, loss, fitted, rel_error`` [Hz, T, W/m^3, -],
        ``energy`` (loss/f) [J/m^3], ``shape``, ``level``, ``colour``.
    lines : dict
        Model curves per flux level, multi-line columns ``xs, ys, level, colour`` (inside the
        fitted range; NaN elsewhere); ``lines_extrapolated`` the same outside it.
    band_patches : dict
        Patch columns ``xs, ys, colour`` of the 95 % band around each line (Steinmetz only).
    energy_lines : dict
        Multi-line columns of energy per cycle against frequency ``xs, ys, level, colour``.
    parameters : tuple of tuple
        ``(name, value text, 95 % interval text)`` rows.
    summary : str
        One line: model, errors, split.
    notes : tuple of str
        Extrapolation and other messages.
    """

    settings: FitSettings
    table: object
    result: object
    steinmetz: object
    points: dict
    lines: dict
    lines_extrapolated: dict
    band_patches: dict
    energy_lines: dict
    parameters: tuple
    summary: str
    notes: tuple = field(default=())


def _levels(b: np.ndarray, rtol=0.01):
    order = np.unique(b)
    levels = [order[0]]
    for x in order[1:]:
        if x > levels[-1] * (1 + rtol):
            levels.append(x)
    return np.array(levels)


def _ci_text(pair) -> str:
    lo, hi = pair
    if lo is None or hi is None or not (math.isfinite(lo) and math.isfinite(hi)):
        return "n/a"
    return f"{lo:.4g} .. {hi:.4g}"


def _split_valid(y, valid):
    inside = np.where(valid, y, np.nan)
    outside = np.where(valid, np.nan, y)
    # let the dotted part touch the solid part
    edge = np.flatnonzero(np.diff(valid.astype(int)) != 0)
    for i in edge:
        outside[i] = y[i]
        outside[i + 1] = y[i + 1]
    return inside, outside


def fit_view(settings: FitSettings, *, colours=None) -> FitView:
    """Read the table, fit the model and compute everything the panel shows (one refresh).

    Parameters
    ----------
    settings : FitSettings
        Inputs.
    colours : sequence of str, optional
        Colour per flux level (cycled); default a grey.

    Returns
    -------
    FitView

    Raises
    ------
    ValueError
        From the reader or the fit, naming the file, row, column or parameter.
    """
    s = settings
    colours = list(colours or ["#555555"])
    table = read_loss_table(s.path, flux_kind=s.flux_kind, density=s.density)
    if s.temperature is not None:
        table = table.at_temperature(s.temperature)
    levels = _levels(table.b_peak)
    level_of_row = np.array([int(np.argmin(np.abs(levels - b))) for b in table.b_peak])
    colour_of = [colours[i % len(colours)] for i in range(levels.size)]
    fmin, fmax = float(table.freq.min()), float(table.freq.max())
    sweep = np.geomspace(fmin / 2, fmax * 2, _N_SWEEP)
    notes, params = [], []
    whole = None
    patches = {"xs": [], "ys": [], "colour": []}
    line_xs, line_ys, ext_ys, e_ys = [], [], [], []

    if s.model == "steinmetz":
        whole = fit_steinmetz(table)
        result = fit_steinmetz_bands(table, tolerance=s.tolerance) if s.split else None
        if result is None:
            from workbench.analysis.fitting import SteinmetzBands

            result = SteinmetzBands((whole,), np.array(whole.freq_range), s.tolerance,
                                    whole.max_rel_error <= s.tolerance, False, "splitting into bands is off")
        fitted = result.table_loss(table)
        idx = result.band_index(sweep)
        for li, b in enumerate(levels):
            p = np.empty(sweep.size)
            lo = np.empty(sweep.size)
            hi = np.empty(sweep.size)
            out_b = np.zeros(sweep.size, dtype=bool)
            for bi, fit in enumerate(result.bands):
                m = idx == bi
                if m.any():
                    pred = fit.predict(sweep[m], b, band=s.band)
                    p[m], lo[m], hi[m] = pred.loss, pred.lower, pred.upper
                    out_b[m] = (b < fit.b_range[0] * (1 - 1e-9)) | (b > fit.b_range[1] * (1 + 1e-9))
            flags, _ = whole.extrapolation(sweep, b)
            valid = ~(flags | out_b)
            inside, outside = _split_valid(p, valid)
            line_xs.append(sweep)
            line_ys.append(inside)
            ext_ys.append(outside)
            e_ys.append(p / sweep)
            ok = np.isfinite(lo) & np.isfinite(hi)
            if ok.any():
                patches["xs"].append(np.concatenate([sweep[ok], sweep[ok][::-1]]))
                patches["ys"].append(np.concatenate([lo[ok], hi[ok][::-1]]))
                patches["colour"].append(colour_of[li])
        for i, fit in enumerate(result.bands):
            tag = f" (band {i + 1}: {format_quantity(fit.freq_range[0], 'Hz')} .. {format_quantity(fit.freq_range[1], 'Hz')})" \
                if len(result.bands) > 1 else ""
            params += [(f"k{tag}", f"{fit.k:.5g} W/m³", _ci_text(fit.k_ci95)),
                       (f"alpha{tag}", f"{fit.alpha:.4f}", _ci_text(fit.alpha_ci95)),
                       (f"beta{tag}", f"{fit.beta:.4f}", _ci_text(fit.beta_ci95))]
            if fit.temperature is not None:
                tc = fit.temperature
                params += [(f"ct0{tag}", f"{tc.ct0:.5g}", _ci_text(fit.temperature_ci95["ct0"])),
                           (f"ct1{tag}", f"{tc.ct1:.5g} 1/°C", _ci_text(fit.temperature_ci95["ct1"])),
                           (f"ct2{tag}", f"{tc.ct2:.5g} 1/°C²", _ci_text(fit.temperature_ci95["ct2"]))]
        if whole.temperature is not None:
            notes.append(f"Temperature factor normalised to 1 at {whole.reference_temperature:g} °C; lines are drawn "
                         "there, points at other temperatures lie off them by the factor (see the residuals).")
        summary = (f"Steinmetz: one set leaves rms {whole.rms_rel_error:.1%}, worst {whole.max_rel_error:.1%}. "
                   f"{result.message[0].upper()}{result.message[1:]}.")
        notes.append(f"Shaded: {s.band} band (95 %) from the delta method on ln P; dotted: extrapolated beyond the "
                     f"table ({format_quantity(fmin, 'Hz')} .. {format_quantity(fmax, 'Hz')}).")
        notes += list(whole.notes)
    elif s.model == "separation":
        result = fit_separation(table, thickness=s.thickness, resistivity=s.resistivity,
                                fit_resistivity=s.fit_resistivity)
        fitted = result.table_loss(table)
        for b in levels:
            p = result.components(sweep, b)["total"]
            valid = (sweep >= fmin * (1 - 1e-9)) & (sweep <= fmax * (1 + 1e-9))
            inside, outside = _split_valid(p, valid)
            line_xs.append(sweep)
            line_ys.append(inside)
            ext_ys.append(outside)
            e_ys.append(p / sweep)
        params = [("k_hyst", f"{result.k_hyst:.5g} J/m³/T^β", _ci_text(result.k_hyst_ci95)),
                  ("beta_hyst", f"{result.beta_hyst:.4f}", _ci_text(result.beta_hyst_ci95)),
                  ("k_excess", f"{result.k_excess:.5g} W/m³/(T/s)^1.5", _ci_text(result.k_excess_ci95)),
                  ("resistivity", f"{result.resistivity:.4g} Ω m" + (" (fitted)" if result.resistivity_fitted else " (given)"),
                   _ci_text(result.resistivity_ci95))]
        summary = (f"Loss separation: rms {result.rms_rel_error:.1%}, worst {result.max_rel_error:.1%} "
                   f"({result.n_points} points, thickness {format_quantity(s.thickness, 'm')}).")
        notes += list(result.notes)
    else:
        result = fit_two_frequency(table)
        fitted = result.table_loss(table)
        for b in levels:
            lv = min(result.levels, key=lambda x: abs(x.b_peak - b))
            has = abs(lv.b_peak - b) <= 0.01 * b
            w = lv.hysteresis_energy + lv.eddy_slope * sweep if has else np.full(sweep.size, np.nan)
            valid = (sweep >= lv.freq_range[0] * (1 - 1e-9)) & (sweep <= lv.freq_range[1] * (1 + 1e-9))
            inside, outside = _split_valid(w * sweep, valid)
            line_xs.append(sweep)
            line_ys.append(inside)
            ext_ys.append(outside)
            e_ys.append(w)
        for lv in result.levels:
            tag = f" @ {format_quantity(lv.b_peak, 'T')}"
            cross = format_quantity(lv.crossover_hz, "Hz") if math.isfinite(lv.crossover_hz) else "none"
            params += [(f"W_h{tag}", f"{lv.hysteresis_energy:.4g} J/m³", _ci_text(lv.hysteresis_energy_ci95)),
                       (f"slope{tag}", f"{lv.eddy_slope:.4g} J/m³/Hz", _ci_text(lv.eddy_slope_ci95)),
                       (f"crossover{tag}", cross, "")]
        summary = (f"Two-frequency method at {len(result.levels)} flux level(s): energy per cycle W = W_h + s·f; "
                   "the crossover is where the eddy part s·f equals W_h.")
        if result.skipped:
            notes.append("Levels with one frequency skipped: "
                         + ", ".join(format_quantity(b, "T") for b in result.skipped) + ".")
        if result.n_nonsine_ignored:
            notes.append(f"{result.n_nonsine_ignored} non-sine rows are not used by this method.")

    rel = fitted / table.loss - 1.0
    points = {
        "row": table.rows.copy(), "freq": table.freq.copy(), "b_peak": table.b_peak.copy(),
        "loss": table.loss.copy(), "fitted": fitted, "rel_error": rel, "energy": table.loss / table.freq,
        "shape": np.array(table.shape), "level": np.array([format_quantity(levels[i], "T") for i in level_of_row]),
        "colour": np.array([colour_of[i] for i in level_of_row]),
    }
    names = [format_quantity(b, "T") for b in levels]
    lines = {"xs": line_xs, "ys": line_ys, "level": names, "colour": colour_of}
    lines_ext = {"xs": line_xs, "ys": ext_ys, "level": names, "colour": colour_of}
    energy = {"xs": line_xs, "ys": e_ys, "level": names, "colour": colour_of}
    return FitView(s, table, result, whole, points, lines, lines_ext, patches, energy, tuple(params), summary,
                   tuple(notes))


# ==========================================================================================
# widget view
# ==========================================================================================
import ipywidgets as widgets  # noqa: E402  (the widget half of the module)
from bokeh.layouts import column  # noqa: E402
from bokeh.models import ColumnDataSource, HoverTool, Span  # noqa: E402
from jupyter_bokeh import BokehModel  # noqa: E402

from workbench.materials import get_material, list_materials  # noqa: E402
from workbench.report.plotting import apply_axis_format, hover_formatter  # noqa: E402
from workbench.ui.base import PanelBase  # noqa: E402
from workbench.ui.controls import ExportBar, QuantityText, caution_widget, heading  # noqa: E402
from workbench.ui.state import InputError  # noqa: E402
from workbench.ui.style import PALETTE, ROLE_COLOURS, new_figure, style_figure  # noqa: E402

_WIDE = {"style": {"description_width": "170px"}, "layout": widgets.Layout(width="420px")}
_EMPTY_POINTS = {k: [] for k in ("row", "freq", "b_peak", "loss", "fitted", "rel_error", "rel_error_pct", "energy",
                                 "shape", "level", "colour")}
_EMPTY_LINES = {"xs": [], "ys": [], "level": [], "colour": []}
_ALL = "all"  # dropdown value for "no choice" (None would show an empty box)


def _none(value):
    return None if value == _ALL else value


class FitPanel(PanelBase):
    """Fit a loss model to a measured table and look at the result.

    Parameters
    ----------
    path : str, optional
        Loss table to load (default the bundled demo table of invented data).
    model : str
        One of :data:`FIT_MODELS`.

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``path, model, flux_kind, density, temperature, tolerance, split, band, thickness,
        resistivity, fit_resistivity`` (drive the fit); ``save_name, save_like, save_band,
        save_overwrite`` (used by :meth:`save`).
    points_source : ColumnDataSource
        Measured rows with the fitted loss and relative error (``rel_error_pct`` in %).
    line_source, line_source_extrapolated, band_source, energy_source : ColumnDataSource
        Model lines per flux level (inside / outside the fitted range), the 95 % band patches,
        energy-per-cycle lines.
    view : FitView
        Last computed view.
    loss_figure, residual_figure, energy_figure : bokeh.plotting.figure
        Named ``"fit_loss"``, ``"fit_residuals"`` and ``"fit_energy"``.
    """

    kind = "loss-table-fit"
    export_stem = "loss-table-fit"
    title = "Fit to a loss table"

    def __init__(self, path: str | None = None, *, model: str = "steinmetz"):
        super().__init__()
        c = self.controls
        c.path = widgets.Text(value=str(path or DEMO_TABLE), description="loss table (CSV path)",
                              continuous_update=False, style={"description_width": "170px"},
                              layout=widgets.Layout(width="720px"))
        c.model = widgets.Dropdown(options=list(FIT_MODELS), value=model, description="model", **_WIDE)
        # option values are strings: a dropdown whose value is None shows an empty box in the browser
        c.flux_kind = widgets.Dropdown(options=[("from the header", _ALL), ("peak", "peak"), ("peak-to-peak", "pp")],
                                       value=_ALL, description="flux column is", **_WIDE)
        c.density = QuantityText("", unit="kg/m3", name="density", description="density for W/kg tables [kg/m³]")
        c.temperature = widgets.Dropdown(options=[("all rows", _ALL)], value=_ALL, description="temperature [°C]",
                                         **_WIDE)
        c.tolerance = QuantityText("25%", unit="", name="tolerance", description="max error of one set [%]")
        c.split = widgets.Checkbox(value=True, description="split into frequency bands when needed", indent=False)
        c.band = widgets.Dropdown(options=["confidence", "prediction"], value="confidence",
                                  description="95 % band", **_WIDE)
        c.thickness = QuantityText("0.35mm", unit="m", name="thickness", description="sheet thickness [m]")
        c.resistivity = QuantityText("52e-8", unit="ohm m", name="resistivity", description="resistivity [Ω m]")
        c.fit_resistivity = widgets.Checkbox(value=False, description="fit an effective resistivity", indent=False)
        c.save_name = widgets.Text(value="", description="save as material", placeholder="new name",
                                   style={"description_width": "170px"}, layout=widgets.Layout(width="420px"))
        names = list_materials()
        c.save_like = widgets.Dropdown(options=names, value=names[0] if names else None,
                                       description="other properties like", **_WIDE)
        c.save_band = widgets.BoundedIntText(value=1, min=1, max=20, description="band to save", **_WIDE)
        c.save_overwrite = widgets.Checkbox(value=False, description="replace a user material of that name", indent=False)
        for box in (c.density, c.tolerance, c.thickness, c.resistivity):
            box.style = {"description_width": "230px"}
            box.layout = widgets.Layout(width="420px")
        self.demo_button = widgets.Button(description="use demo table (invented data)", layout=widgets.Layout(width="260px"))
        self.demo_button.on_click(lambda _b: setattr(self.controls.path, "value", str(DEMO_TABLE)))
        self.save_button = widgets.Button(description="Save as user material", icon="save",
                                          layout=widgets.Layout(width="220px"))
        self.save_button.on_click(self._save_clicked)
        self.save_status = widgets.HTML()

        self.points_source = ColumnDataSource(data=dict(_EMPTY_POINTS))
        self.line_source = ColumnDataSource(data=dict(_EMPTY_LINES))
        self.line_source_extrapolated = ColumnDataSource(data=dict(_EMPTY_LINES))
        self.band_source = ColumnDataSource(data={"xs": [], "ys": [], "colour": []})
        self.energy_source = ColumnDataSource(data=dict(_EMPTY_LINES))
        self._build_figures()
        self.summary_html = widgets.HTML()
        self.params_html = widgets.HTML()
        self.notes_html = widgets.HTML()
        self.export_bar = ExportBar(self.export, self.report_error, stem=self.export_stem)
        self.view: FitView | None = None
        self._temps_for: str | None = None
        self._wire(skip=("save_name", "save_like", "save_band", "save_overwrite"))
        for n in ("path", "model", "flux_kind", "density", "temperature", "tolerance", "split", "band", "thickness",
                  "resistivity", "fit_resistivity"):
            self.field(n)
        f = self.fields
        self.results_box.children = [self.summary_html, self.params_html, BokehModel(self.plots), self.notes_html]
        self.widget = widgets.VBox([
            heading("Fit to a loss table", "Steinmetz (with iGSE for non-sine rows), loss separation or the "
                                           "two-frequency method, with 95 % intervals."),
            widgets.HBox([f["path"], self.demo_button]),
            widgets.HBox([widgets.VBox([f[n] for n in ("model", "flux_kind", "density", "temperature")]),
                          widgets.VBox([f[n] for n in ("tolerance", "split", "band", "thickness", "resistivity",
                                                       "fit_resistivity")])]),
            self.errors,
            self.stale_html,
            self.results_box,
            widgets.HBox([widgets.VBox([c.save_name, c.save_like]), widgets.VBox([c.save_band, c.save_overwrite]),
                          self.save_button]),
            self.save_status,
            self.export_bar.widget,
            caution_widget(),
        ])
        self.widget.add_class("fluxheat-panel")
        self.widget.add_class(f"fluxheat-panel-{self.kind}")
        self._update()

    # -- figures -------------------------------------------------------------------------
    def _build_figures(self):
        self.loss_figure = fig = new_figure("fit_loss", title="Measured loss and the fit", x_label="frequency f [Hz]",
                                            y_label="loss density P [W/m³]", x_log=True, y_log=True)
        fig.patches("xs", "ys", source=self.band_source, fill_color="colour", fill_alpha=0.15, line_alpha=0)
        fig.multi_line("xs", "ys", source=self.line_source, line_color="colour", line_width=3, legend_field="level")
        fig.multi_line("xs", "ys", source=self.line_source_extrapolated, line_color="colour", line_dash="dotted",
                       line_width=2, line_alpha=0.6)
        pts = fig.scatter("freq", "loss", source=self.points_source, size=9, fill_color="colour", line_color="#222222")
        fig.add_tools(HoverTool(renderers=[pts], tooltips=[("row", "@row"), ("f", "@freq{eng}"),
                                                           ("B_peak", "@level"), ("shape", "@shape"),
                                                           ("measured", "@loss{eng}"), ("fit", "@fitted{eng}"),
                                                           ("error", "@rel_error_pct{0.0} %")],
                                formatters={"@freq": hover_formatter("Hz"), "@loss": hover_formatter("W/m3"),
                                            "@fitted": hover_formatter("W/m3")}))
        fig.legend.location = "top_left"
        fig.legend.title = "B_peak"
        style_figure(fig)
        self.residual_figure = res = new_figure("fit_residuals", title="Relative error of the fit at each row",
                                                x_label="frequency f [Hz]", y_label="P_fit / P_measured − 1 [%]",
                                                x_log=True, height=260)
        res.x_range = fig.x_range
        res.add_layout(Span(location=0, dimension="width", line_color=ROLE_COLOURS["marker"], line_width=1.5))
        self.tolerance_spans = [Span(location=sign * 25.0, dimension="width", line_color=ROLE_COLOURS["marker"],
                                     line_dash="dashed", line_width=1.5) for sign in (1, -1)]
        for span in self.tolerance_spans:
            res.add_layout(span)
        rpts = res.scatter("freq", "rel_error_pct", source=self.points_source, size=8, fill_color="colour",
                           line_color="#222222")
        res.add_tools(HoverTool(renderers=[rpts], tooltips=[("row", "@row"), ("B_peak", "@level"),
                                                            ("error", "@rel_error_pct{0.0} %")]))
        self.energy_figure = en = new_figure("fit_energy", title="Energy per cycle P/f (straight line: W_h + s·f)",
                                             x_label="frequency f [Hz]", y_label="energy per cycle [J/m³]", height=300)
        # a linear frequency axis (the method's straight line), labelled 0, 500k, 1M (never 1m or 5.000e+5)
        apply_axis_format(fig, x_unit="Hz", y_unit="W/m3")
        apply_axis_format(res, x_unit="Hz", y_unit="")
        apply_axis_format(en, x_unit="Hz", y_unit="J/m3")
        en.multi_line("xs", "ys", source=self.energy_source, line_color="colour", line_width=2.5)
        en.scatter("freq", "energy", source=self.points_source, size=8, fill_color="colour", line_color="#222222")
        self.plots = column(fig, res, en, name="fit_plots")

    # -- state ---------------------------------------------------------------------------
    def settings(self) -> FitSettings:
        """The controls read into SI settings (raises ValueError on unreadable input)."""
        c = self.controls
        density = self._read("density", lambda: c.density.si() if c.density.value.strip() else None)
        try:
            return FitSettings(path=c.path.value.strip(), model=c.model.value, flux_kind=_none(c.flux_kind.value),
                               density=density, temperature=_none(c.temperature.value),
                               tolerance=self._read("tolerance", c.tolerance.si), split=bool(c.split.value),
                               band=c.band.value, thickness=self._read("thickness", c.thickness.si),
                               resistivity=self._read("resistivity", c.resistivity.si),
                               fit_resistivity=bool(c.fit_resistivity.value))
        except InputError:
            raise
        except ValueError as exc:
            text = str(exc)
            name = next((n for n in ("path", "tolerance", "thickness", "resistivity", "density") if text.startswith(n)),
                        "path")
            raise InputError((name,), text) from None

    def _table_error(self, exc: ValueError) -> InputError:
        """A reader or fit error, marked at the box it concerns (density, flux column or the file)."""
        text = str(exc)
        low = text.lower()
        if "density" in low:
            return InputError(("density",), text)
        if "peak-to-peak" in low or "flux kind" in low or "flux_kind" in low:
            return InputError(("flux_kind",), text)
        return InputError(("path",), text)

    def _sync_temperatures(self):
        """Offer the table's temperatures when a new file is loaded (one recompute, no loop)."""
        c = self.controls
        path = c.path.value.strip()
        if path == self._temps_for:
            return
        density = c.density.si() if c.density.value.strip() else None
        temps = read_loss_table(path, flux_kind=_none(c.flux_kind.value), density=density).temperatures
        self._temps_for = path
        options = [("all rows", _ALL)] + [(f"{t:g}", float(t)) for t in temps]
        with self.hold():
            c.temperature.options = options
            c.temperature.value = _ALL

    def _refresh(self):
        try:
            self._sync_temperatures()
        except InputError:
            raise
        except ValueError as exc:
            raise self._table_error(exc) from None
        s = self.settings()
        c = self.controls
        c.tolerance.disabled = c.split.disabled = c.band.disabled = s.model != "steinmetz"
        c.thickness.disabled = c.resistivity.disabled = c.fit_resistivity.disabled = s.model != "separation"
        try:
            view = fit_view(s, colours=PALETTE[:6])
        except ValueError as exc:
            if s.model == "separation" and any(k in str(exc) for k in ("thickness", "resistivity")):
                raise InputError(("thickness", "resistivity"), str(exc)) from None
            raise self._table_error(exc) from None
        self.view = view
        pts = dict(view.points)
        pts["rel_error_pct"] = 100.0 * view.points["rel_error"]
        self.points_source.data = pts
        self.line_source.data = dict(view.lines)
        self.line_source_extrapolated.data = dict(view.lines_extrapolated)
        self.band_source.data = dict(view.band_patches)
        self.energy_source.data = dict(view.energy_lines)
        for span, sign in zip(self.tolerance_spans, (1, -1)):
            span.location = sign * 100.0 * s.tolerance
            span.visible = s.model == "steinmetz"
        self.summary_html.value = (f'<div class="fluxheat-fit-summary" style="font-size:1.05em">'
                                   f'<b>{html.escape(view.summary)}</b></div>')
        rows = "".join(f'<tr><td style="padding:1px 10px">{html.escape(n)}</td><td style="padding:1px 10px">'
                       f'{html.escape(v)}</td><td style="padding:1px 10px;color:#444">{html.escape(ci)}</td></tr>'
                       for n, v, ci in view.parameters)
        self.params_html.value = (f'<table style="border-collapse:collapse"><tr><th align="left">parameter</th>'
                                  f'<th align="left">value</th><th align="left">95 % interval</th></tr>{rows}</table>')
        self.notes_html.value = "".join(f'<div style="color:#6b4b00">&#9656; {html.escape(n)}</div>'
                                        for n in (*view.notes, "Data points from the table; lines from the fit."))

    # -- saving ---------------------------------------------------------------------------
    def save(self, name: str | None = None, *, like: str | None = None, band: int | None = None,
             overwrite: bool | None = None, path=None) -> Path:
        """Store the current fit as a user material (atomic write to the user library).

        Parameters
        ----------
        name, like, band, overwrite : optional
            Default to the save controls.
        path : str or path, optional
            User library file (default the user library).

        Returns
        -------
        Path
            The library file written.
        """
        c = self.controls
        name = (name if name is not None else c.save_name.value).strip()
        like = like if like is not None else c.save_like.value
        band = band if band is not None else int(c.save_band.value)
        overwrite = overwrite if overwrite is not None else bool(c.save_overwrite.value)
        if not name:
            raise ValueError("save as material: give a name")
        if self.view is None or self.last_error is not None:
            raise ValueError("nothing to save: the panel shows an error")
        v = self.view
        separation = None
        if v.settings.model == "steinmetz":
            bands = v.result
            if bands.split:
                if not 1 <= band <= len(bands.bands):
                    raise ValueError(f"band to save must be 1..{len(bands.bands)}, got {band}")
                fit = bands.bands[band - 1]
            else:
                fit = v.steinmetz
        elif v.settings.model == "separation":
            fit, separation = fit_steinmetz(v.table), v.result
        else:
            raise ValueError("save as material stores a Steinmetz set: choose the steinmetz or separation model")
        return save_fitted_material(name, fit, base=get_material(like), separation=separation, path=path,
                                    overwrite=overwrite)

    def _save_clicked(self, _button=None):
        try:
            written = self.save()
        except Exception as exc:  # shown in the panel, never swallowed
            self.save_status.value = '<span style="color:#a00">not saved: see the message below</span>'
            self.report_error(exc)
            return
        self.save_status.value = (f'<span style="color:#225522">saved {html.escape(self.controls.save_name.value)} '
                                  f'in {html.escape(str(written))}</span>')

    # -- export --------------------------------------------------------------------------
    def record(self) -> dict:
        v = self.view
        return self._record(v.settings.to_dict(), {"fit": v.result.to_dict(), "summary": v.summary,
                                                   "notes": list(v.notes)})

    def table(self) -> dict:
        """One row per measured point: measured and fitted loss, relative error."""
        p = self.view.points
        return {"row": p["row"].tolist(), "frequency_hz": p["freq"].tolist(), "b_peak_t": p["b_peak"].tolist(),
                "shape": p["shape"].tolist(), "loss_w_m3": p["loss"].tolist(), "fitted_w_m3": p["fitted"].tolist(),
                "rel_error": p["rel_error"].tolist()}
