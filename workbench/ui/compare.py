"""Comparison panel: several materials at one waveform, loss against frequency and reachable f * B_peak."""
from __future__ import annotations

import html

import ipywidgets as widgets
from bokeh.layouts import column
from bokeh.models import ColumnDataSource, HoverTool, Span
from jupyter_bokeh import BokehModel

from workbench.analysis import SHAPES
from workbench.materials import list_materials
from workbench.ui.base import PanelBase
from workbench.ui.controls import ExportBar, QuantityText, caution_widget, heading
from workbench.ui.state import ComparisonSettings, ComparisonView, comparison_view
from workbench.ui.style import ROLE_COLOURS, new_figure, series_style, style_figure
from workbench.units import format_quantity

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
    design_freq : str
        Frequency of the summary table as typed (``"20k"``).
    f_min, f_max : str
        Sweep range as typed [Hz].

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``materials, shape, duty, b_peak, loss_density, design_freq, f_min, f_max``.
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
                 design_freq: str = "20k", f_min: str = "10", f_max: str = "1M"):
        super().__init__()
        c = self.controls
        names = list_materials()
        c.materials = widgets.SelectMultiple(options=names, value=tuple(materials), rows=min(len(names), 9),
                                             description="materials (ctrl-click)",
                                             style={"description_width": "170px"},
                                             layout=widgets.Layout(width="440px"))
        c.shape = widgets.Dropdown(options=list(SHAPES), value=shape, description="flux waveform", **_WIDE)
        c.duty = widgets.FloatSlider(value=duty, min=0.05, max=0.95, step=0.01, description="duty cycle D [-]",
                                     readout_format=".2f", **_WIDE)
        c.b_peak = widgets.FloatLogSlider(value=b_peak, base=10, min=-3, max=0.4, step=0.001,
                                          description="B_peak of loss plot [T]", readout_format=".3g", **_WIDE)
        c.loss_density = QuantityText(loss_density, unit="W/m3", name="loss density",
                                      description="allowed loss [W/m³] for f·B_peak")
        c.design_freq = QuantityText(design_freq, unit="Hz", name="design frequency",
                                     description="design frequency [Hz]")
        c.f_min = QuantityText(f_min, unit="Hz", name="lowest frequency", description="from f [Hz]")
        c.f_max = QuantityText(f_max, unit="Hz", name="highest frequency", description="to f [Hz]")
        for box in (c.loss_density, c.design_freq, c.f_min, c.f_max):
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
        self._update()  # before the BokehModel is made, so the page starts with the first result
        self.widget = widgets.VBox([
            heading("Material comparison",
                    "Loss at one flux, and the f·B_peak each material reaches at one allowed loss, against frequency."),
            widgets.HBox([widgets.VBox([c.materials]),
                          widgets.VBox([c.shape, c.duty, c.b_peak, c.loss_density, c.design_freq, c.f_min, c.f_max])]),
            self.summary_html,
            BokehModel(self.plots),
            self.notes_html,
            self.export_bar.widget,
            caution_widget(),
            self.errors,
        ])

    def _build_figures(self):
        self.loss_figure = fig = new_figure(
            "loss_by_material", title="Loss density at the chosen B_peak", x_label="frequency f [Hz]",
            y_label="loss density P [W/m³]", x_log=True, y_log=True)
        self.fb_figure = ffig = new_figure(
            "fb_by_material", title="f·B_peak reachable at the allowed loss density", x_label="frequency f [Hz]",
            y_label="f·B_peak [Hz·T]", x_log=True, y_log=True)
        ffig.x_range = fig.x_range
        hovers = []
        for f, src, ext, unit, what in ((fig, self.loss_source, self.loss_source_extrapolated, "W/m³", "loss"),
                                        (ffig, self.fb_source, self.fb_source_extrapolated, "Hz·T", "f·B_peak")):
            solid = f.multi_line("xs", "ys", source=src, line_color="colour", line_dash="dash", line_width=3.5,
                                 legend_field="material")
            faint = f.multi_line("xs", "ys", source=ext, line_color="colour", line_dash="dotted", line_width=2,
                                 line_alpha=0.55)
            hovers.append(HoverTool(renderers=[solid, faint], line_policy="interp",
                                    tooltips=[("material", "@material"), ("f", "$x{0.[000]a}Hz"),
                                              (what, f"$y{{0.[000]a}} {unit}")]))
            f.add_tools(hovers[-1])
            style_figure(f)
            f.add_layout(f.legend[0], "right")
        self.design_spans = []
        for f in (fig, ffig):
            span = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["marker"], line_dash="dashed",
                        line_width=2)
            f.add_layout(span)
            self.design_spans.append(span)
        self.plots = column(fig, ffig, name="comparison_plots")

    def settings(self) -> ComparisonSettings:
        """The controls read into SI settings (raises ValueError on unreadable input)."""
        c = self.controls
        if not c.materials.value:
            raise ValueError("materials: select at least one material")
        return ComparisonSettings(
            materials=tuple(c.materials.value), shape=c.shape.value, duty=float(c.duty.value),
            b_peak=float(c.b_peak.value), loss_density=c.loss_density.si(), design_freq=c.design_freq.si(),
            f_min=c.f_min.si(), f_max=c.f_max.si())

    def _refresh(self):
        s = self.settings()
        styles = [series_style(i) for i in range(len(s.materials))]
        view = comparison_view(s, colours=[c for c, _ in styles], dashes=[d for _, d in styles])
        self.view = view
        self.controls.duty.disabled = s.shape == "sine"
        self.loss_source.data = view.loss_lines
        self.loss_source_extrapolated.data = view.loss_lines_extrapolated
        self.fb_source.data = view.fb_lines
        self.fb_source_extrapolated.data = view.fb_lines_extrapolated
        for span in self.design_spans:
            span.location = s.design_freq
        self.summary_html.value = self._summary_html(view)
        notes = [*view.notes, "Solid lines: inside each material's fitted Steinmetz ranges; dotted: extrapolated.",
                 "Loss from the iGSE with each material's Steinmetz set (generic class data)."]
        self.notes_html.value = "".join(f'<div style="color:#6b4b00">&#9656; {html.escape(n)}</div>' for n in notes)

    def _summary_rows_text(self, view) -> list[list[str]]:
        s = view.settings
        rows = []
        for r in view.summary_rows:
            rows.append([
                r["material"],
                format_quantity(r["loss_w_m3"], "W/m3") + ("" if r["loss_valid"] else " (extrap.)"),
                f"{r['loss_w_kg']:.3g} W/kg",
                f"{r['b_peak_at_loss_density_t'] * 1e3:.3g} mT" + (" (B_sat)" if r["saturation_limited"] else ""),
                format_quantity(r["f_b_peak_t_hz"], "Hz T") + ("" if r["f_b_peak_valid"] else " (extrap.)"),
            ])
        head = ["material", f"loss at {s.b_peak * 1e3:.3g} mT", "specific loss",
                f"B_peak at {format_quantity(s.loss_density, 'W/m3')}", "f·B_peak"]
        return [head, *rows]

    def _summary_html(self, view) -> str:
        rows = self._summary_rows_text(view)
        f = view.summary_rows[0]["frequency_hz"]
        cells = "".join(
            "<tr>" + "".join(f'<{"th" if i == 0 else "td"} style="padding:2px 10px;text-align:left">{html.escape(x)}'
                             f'</{"th" if i == 0 else "td"}>' for x in row) + "</tr>"
            for i, row in enumerate(rows))
        best = view.best_fb
        best_text = (f"Largest f·B_peak inside its fitted range at {format_quantity(f, 'Hz')}: {best}." if best else
                     f"No material is inside its fitted range at {format_quantity(f, 'Hz')}.")
        return (f'<div style="font-size:1.05em"><b>At the design frequency {html.escape(format_quantity(f, "Hz"))} '
                f'({html.escape(view.settings.shape)}):</b><table style="border-collapse:collapse">{cells}</table>'
                f'<b class="fluxheat-best">{html.escape(best_text)}</b></div>')

    @property
    def summary_text(self) -> str:
        if self.view is None:
            return ""
        return "\n".join(" | ".join(r) for r in self._summary_rows_text(self.view))

    def record(self) -> dict:
        v = self.view
        return self._record(v.settings.to_dict(), {"at_design_frequency": list(v.summary_rows),
                                                   "comparison": v.comparison.to_dict(), "notes": list(v.notes)})

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
