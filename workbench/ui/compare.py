"""Comparison panel: several materials at one waveform, loss against frequency and reachable f * B_peak."""
from __future__ import annotations

import html

import ipywidgets as widgets
from bokeh.layouts import column
from bokeh.models import ColumnDataSource, HoverTool, Span
from jupyter_bokeh import BokehModel

from workbench.analysis import SHAPES
from workbench.materials import get_material, list_materials
from workbench.report import material_entry
from workbench.report.numbers import eng, eng_column, unit_label
from workbench.report.plotting import apply_axis_format, hover_formatter, tick_formatter
from workbench.ui.base import PanelBase
from workbench.ui.controls import ExportBar, LogValue, QuantityText, caution_widget, heading
from workbench.ui.state import ComparisonSettings, ComparisonView, comparison_view
from workbench.ui.style import ROLE_COLOURS, MaterialStyles, new_figure, style_figure

__all__ = ["ComparisonPanel"]

_WIDE = {"style": {"description_width": "170px"}, "layout": widgets.Layout(width="440px")}
_EMPTY_LINES = {"xs": [], "ys": [], "material": [], "colour": [], "dash": []}


class ComparisonPanel(PanelBase):
    """Several materials at the same waveform.

    Parameters
    ----------
    materials : sequence of str
        Library material names selected at start.
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape.
    duty : float
        Duty cycle [-].
    b_peak : float
        Peak flux of the loss plot [T].
    loss_density : str
        Allowed loss density of the f * B_peak plot as typed (``"200 kW/m3"``).
    volume : str
        Core volume as typed (``"12 cm3"``) for the loss in watts at the design frequency.
    design_freq : str
        Frequency of the summary table as typed (``"20k"``).
    f_min, f_max : str
        Sweep range as typed [Hz].
    h_dc : str
        DC bias field strength as typed (``"60"`` [A/m]); empty for none.
    temperature : str
        Core temperature as typed (``"80"`` [degC]); empty for each material's reference temperature.

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``materials, shape, duty, b_peak, loss_density, design_freq, f_min, f_max, loss_axis, volume, h_dc,
        temperature``.
        Each material keeps its colour whatever else is selected (:class:`workbench.ui.style.MaterialStyles`).
    loss_source, loss_source_extrapolated, fb_source, fb_source_extrapolated : ColumnDataSource
        Multi-line columns ``xs, ys, material, colour, dash``; the ``_extrapolated``
        sources hold the parts outside each material's fitted ranges.
    view : workbench.ui.state.ComparisonView
        Last computed view (``view.comparison`` is the library result).
    summary_text : str
        The summary table at the design frequency as plain text.
    loss_figure, fb_figure : bokeh.plotting.figure
        Named ``"loss_by_material"`` and ``"fb_by_material"``.
    """

    kind = "material-comparison"
    export_stem = "material-comparison"
    title = "Material comparison"

    def __init__(self, materials=("M270-35A", "fe-amorphous", "nanocrystalline", "mnzn-power-ferrite"), *,
                 shape: str = "sine", duty: float = 0.5, b_peak: float = 0.1, loss_density: str = "200 kW/m3",
                 design_freq: str = "20k", f_min: str = "10", f_max: str = "1M", volume: str = "", h_dc: str = "",
                 temperature: str = ""):
        super().__init__()
        c = self.controls
        names = list_materials()
        self._styles = MaterialStyles(materials)  # a material keeps its colour whatever else is selected
        # every name visible at once: no selected material hides below a scroll
        c.materials = widgets.SelectMultiple(options=names, value=tuple(materials), rows=len(names),
                                             description="materials (ctrl-click)",
                                             style={"description_width": "170px"},
                                             layout=widgets.Layout(width="440px"))
        c.shape = widgets.Dropdown(options=list(SHAPES), value=shape, description="flux waveform", **_WIDE)
        c.duty = widgets.FloatSlider(value=duty, min=0.05, max=0.95, step=0.01, description="duty cycle D [-]",
                                     readout_format=".2f", **_WIDE)
        c.b_peak = LogValue(b_peak, min=1e-3, max=2.5, description="B_peak of loss plot [T]", unit="T",
                            name="B_peak")
        c.loss_density = QuantityText(loss_density, unit="W/m3", name="loss density",
                                      description="allowed loss [W/m³] for f·B_peak")
        c.design_freq = QuantityText(design_freq, unit="Hz", name="design frequency",
                                     description="design frequency [Hz]")
        c.f_min = QuantityText(f_min, unit="Hz", name="lowest frequency", description="from f [Hz]")
        c.f_max = QuantityText(f_max, unit="Hz", name="highest frequency", description="to f [Hz]")
        c.loss_axis = widgets.Dropdown(options=[("per volume, W/m³", "W/m3"), ("per mass, W/kg", "W/kg")],
                                       value="W/m3", description="loss axis", **_WIDE)
        c.volume = QuantityText(volume, unit="m3", name="core volume", description="core volume V_e",
                                placeholder="optional, e.g. 12 cm3")
        c.h_dc = QuantityText(h_dc, unit="A/m", name="DC bias H_dc", description="DC bias H_dc [A/m]",
                              placeholder="optional")
        c.temperature = QuantityText(temperature, unit="degC", name="core temperature",
                                     description="core temperature [°C]", placeholder="material's reference")
        for box in (c.loss_density, c.design_freq, c.f_min, c.f_max, c.volume, c.h_dc, c.temperature):
            box.style = {"description_width": "230px"}
            box.layout = widgets.Layout(width="400px")

        self.loss_source = ColumnDataSource(data=dict(_EMPTY_LINES))
        self.loss_source_extrapolated = ColumnDataSource(data=dict(_EMPTY_LINES))
        self.fb_source = ColumnDataSource(data=dict(_EMPTY_LINES))
        self.fb_source_extrapolated = ColumnDataSource(data=dict(_EMPTY_LINES))
        self._build_figures()
        self.summary_html = widgets.HTML()
        self.notes_html = widgets.HTML()
        self.export_bar = ExportBar(self.export, self.report_error, stem=self.export_stem)
        self.view: ComparisonView | None = None
        self._wire()
        order = ("materials", "shape", "duty", "b_peak", "loss_density", "design_freq", "f_min", "f_max",
                 "loss_axis", "volume", "h_dc", "temperature")
        for n in order:
            self.field(n)
        self._update()  # before the BokehModel is made, so the page starts with the first result
        f = self.fields
        self.results_box.children = [self.summary_html, BokehModel(self.plots), self.notes_html]
        self.widget = widgets.VBox([
            heading("Material comparison",
                    "Loss at one flux, and the f·B_peak each material reaches at one allowed loss, against frequency."),
            widgets.HBox([widgets.VBox([f["materials"]]), widgets.VBox([f[n] for n in order[1:]])]),
            self.errors,
            self.stale_html,
            self.results_box,
            self.export_bar.widget,
            caution_widget(),
        ])
        self.widget.add_class("fluxheat-panel")
        self.widget.add_class(f"fluxheat-panel-{self.kind}")

    def _build_figures(self):
        self.loss_figure = fig = new_figure(
            "loss_by_material", title="Loss density at the chosen B_peak", x_label="frequency f [Hz]",
            y_label="loss density P [W/m³]", x_log=True, y_log=True)
        self.fb_figure = ffig = new_figure(
            "fb_by_material", title="f·B_peak reachable at the allowed loss density", x_label="frequency f [Hz]",
            y_label="f·B_peak [Hz·T]", x_log=True, y_log=True)
        ffig.x_range = fig.x_range
        hovers = []
        for f, src, ext, unit, what in ((fig, self.loss_source, self.loss_source_extrapolated, "W/m3", "loss"),
                                        (ffig, self.fb_source, self.fb_source_extrapolated, "Hz T", "f·B_peak")):
            solid = f.multi_line("xs", "ys", source=src, line_color="colour", line_dash="dash", line_width=3.5,
                                 legend_field="material")
            faint = f.multi_line("xs", "ys", source=ext, line_color="colour", line_dash="dotted", line_width=2,
                                 line_alpha=0.55)
            hovers.append(HoverTool(renderers=[solid, faint], line_policy="interp",
                                    tooltips=[("material", "@material"), ("f", "$x{eng}"), (what, "$y{eng}")],
                                    formatters={"$x": hover_formatter("Hz"), "$y": hover_formatter(unit)}))
            f.add_tools(hovers[-1])
            style_figure(f)
            f.add_layout(f.legend[0], "right")
            apply_axis_format(f, x_unit="Hz", y_unit=unit)
        self.design_spans = []
        for f in (fig, ffig):
            span = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["marker"], line_dash="dashed",
                        line_width=2)
            f.add_layout(span)
            self.design_spans.append(span)
        self._loss_hover = hovers[0]
        self.plots = column(fig, ffig, name="comparison_plots")

    def settings(self) -> ComparisonSettings:
        """The controls read into SI settings (raises ValueError on unreadable input)."""
        c = self.controls
        if not c.materials.value:
            from workbench.ui.state import InputError

            raise InputError(("materials",), "materials: select at least one material")
        volume = self._read("volume", lambda: c.volume.si() if c.volume.value.strip() else None)
        h_dc = self._read("h_dc", lambda: c.h_dc.si() if c.h_dc.value.strip() else None)
        temperature = self._read("temperature", lambda: c.temperature.si() if c.temperature.value.strip() else None)
        return ComparisonSettings(
            materials=tuple(c.materials.value), shape=c.shape.value, duty=float(c.duty.value),
            b_peak=float(self._read("b_peak")), loss_density=self._read("loss_density", c.loss_density.si),
            design_freq=self._read("design_freq", c.design_freq.si), f_min=self._read("f_min", c.f_min.si),
            f_max=self._read("f_max", c.f_max.si), per_mass=c.loss_axis.value == "W/kg", volume=volume, h_dc=h_dc,
            temperature=temperature)

    _axis_unit = None

    def _refresh(self):
        s = self.settings()
        styles = [self._styles.style(name) for name in s.materials]
        view = comparison_view(s, colours=[c for c, _ in styles], dashes=[d for _, d in styles])
        self.view = view
        self.controls.duty.disabled = s.shape == "sine"
        self.loss_source.data = view.loss_lines
        self.loss_source_extrapolated.data = view.loss_lines_extrapolated
        self.fb_source.data = view.fb_lines
        self.fb_source_extrapolated.data = view.fb_lines_extrapolated
        for span in self.design_spans:
            span.location = s.design_freq
        unit = "W/kg" if s.per_mass else "W/m3"
        if unit != self._axis_unit:  # new formatter models make the document re-collect its models: only on change
            self._axis_unit = unit
            self.loss_figure.yaxis.axis_label = f"{'specific loss' if s.per_mass else 'loss density'} P [{unit_label(unit)}]"
            self.loss_figure.title.text = ("Specific loss at the chosen B_peak" if s.per_mass
                                           else "Loss density at the chosen B_peak")
            self.loss_figure.yaxis[0].formatter = tick_formatter(unit)
            self._loss_hover.formatters = {"$x": hover_formatter("Hz"), "$y": hover_formatter(unit)}
        self.summary_html.value = self._summary_html(view)
        notes = [*view.notes, "Solid lines: inside each material's fitted Steinmetz ranges; dotted: extrapolated.",
                 "Loss from the loss engine with each material's Steinmetz set (generic class data): iGSE, "
                 "plus the i2GSE relaxation where a material has relaxation data and the flux dwells."]
        self.notes_html.value = "".join(
            [f'<div class="fluxheat-warning" style="color:#a33">&#9656; warning: {html.escape(w)}</div>'
             for w in view.warnings]
            + [f'<div style="color:#6b4b00">&#9656; {html.escape(n)}</div>' for n in notes])

    @staticmethod
    def _summary_columns(view):
        s = view.settings
        cols = [("material", None, "material"), (f"loss at {eng(s.b_peak, 'T')}", "W/m3", "loss_w_m3"),
                ("specific loss", "W/kg", "loss_w_kg"),
                (f"B_peak at {eng(s.loss_density, 'W/m3')}", "T", "b_peak_at_loss_density_t"),
                ("f·B_peak", "Hz T", "f_b_peak_t_hz")]
        if s.volume is not None:
            cols.insert(3, (f"loss in {eng(s.volume, 'm3')}", "W", "loss_w"))
        return cols

    def _summary_rows_text(self, view) -> list[list[str]]:
        rows = view.summary_rows
        head, texts = [], []
        for name, unit, key in self._summary_columns(view):
            if unit is None:
                head.append(name)
                texts.append([r[key] for r in rows])
                continue
            shown, numbers = eng_column([r[key] for r in rows], unit, 3)
            head.append(f"{name} [{shown}]")
            flags = {"loss_w_m3": "loss_valid", "loss_w_kg": "loss_valid", "loss_w": "loss_valid",
                     "f_b_peak_t_hz": "f_b_peak_valid"}
            if key in flags:
                numbers = [x + ("" if r[flags[key]] else " (extrap.)") for x, r in zip(numbers, rows)]
            if key == "b_peak_at_loss_density_t":
                numbers = [x + (" (B_sat)" if r["saturation_limited"] else "") for x, r in zip(numbers, rows)]
            texts.append(numbers)
        return [head, *[[t[i] for t in texts] for i in range(len(rows))]]

    def _summary_html(self, view) -> str:
        rows = self._summary_rows_text(view)
        f = view.summary_rows[0]["frequency_hz"]

        def cell(i, j, x):
            tag = "th" if i == 0 else "td"
            align = "left" if j == 0 else "right"
            swatch = ""
            if i > 0 and j == 0:
                colour, _ = self._styles.style(x)
                swatch = f'<span style="display:inline-block;width:14px;height:4px;background:{colour};margin:0 6px 3px 0"></span>'
            return f'<{tag} style="padding:2px 10px;text-align:{align}">{swatch}{html.escape(x)}</{tag}>'

        cells = "".join("<tr>" + "".join(cell(i, j, x) for j, x in enumerate(row)) + "</tr>"
                        for i, row in enumerate(rows))
        best = view.best_fb
        best_text = (f"Largest f·B_peak inside its fitted range at {eng(f, 'Hz')}: {best}." if best else
                     f"No material is inside its fitted range at {eng(f, 'Hz')}.")
        return (f'<div style="font-size:1.05em"><b>At the design frequency {html.escape(eng(f, "Hz"))} '
                f'({html.escape(view.settings.shape)}):</b><table class="fluxheat-summary" '
                f'style="border-collapse:collapse">{cells}</table>'
                f'<b class="fluxheat-best">{html.escape(best_text)}</b></div>')

    @property
    def summary_text(self) -> str:
        if self.view is None:
            return ""
        return "\n".join(" | ".join(r) for r in self._summary_rows_text(self.view))

    def record(self) -> dict:
        v = self.view
        cols = self._summary_columns(v)
        table = {"columns": [{"name": n, "unit": u, "key": k} for n, u, k in cols],
                 "rows": [[r[k] for _, _, k in cols] for r in v.summary_rows]}
        best = v.best_fb
        statement = (f"Largest f·B_peak inside its fitted range at {eng(v.settings.design_freq, 'Hz')}: {best}."
                     if best else "No material is inside its fitted range at the design frequency.")
        return self._record(v.settings.to_dict(), {"at_design_frequency": list(v.summary_rows), "best_f_b_peak": best},
                            material=[material_entry(get_material(n)) for n in v.settings.materials], table=table,
                            statements=[statement], warnings=list(v.warnings), notes=list(v.notes))

    def table(self) -> dict:
        """Long table: one row per material and frequency."""
        cmp = self.view.comparison
        cols = {k: [] for k in ("material", "frequency_hz", "loss_w_m3", "loss_w_kg", "loss_valid",
                                "b_peak_at_loss_density_t", "saturation_limited", "f_b_peak_t_hz", "f_b_peak_valid")}
        for c in cmp.curves:
            cols["material"] += [c.material] * cmp.freq.size
            cols["frequency_hz"] += cmp.freq.tolist()
            cols["loss_w_m3"] += c.loss.tolist()
            cols["loss_w_kg"] += c.loss_w_kg.tolist()
            cols["loss_valid"] += c.loss_valid.tolist()
            cols["b_peak_at_loss_density_t"] += c.b_usable.tolist()
            cols["saturation_limited"] += c.saturation_limited.tolist()
            cols["f_b_peak_t_hz"] += c.fb.tolist()
            cols["f_b_peak_valid"] += c.fb_valid.tolist()
        return cols
