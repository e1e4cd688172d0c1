"""Frequency panel: the three loss parts and their sum against frequency, with the eddy/hysteresis crossover."""
from __future__ import annotations

import html

import ipywidgets as widgets
import numpy as np
from bokeh.layouts import column
from bokeh.models import BoxAnnotation, ColumnDataSource, HoverTool, Label, Span
from jupyter_bokeh import BokehModel

from workbench.analysis import SHAPES
from workbench.materials import get_material, list_materials
from workbench.ui.base import PanelBase
from workbench.ui.controls import ExportBar, QuantityText, caution_widget, heading
from workbench.ui.state import FrequencySettings, FrequencyView, frequency_view
from workbench.ui.style import EXTRAPOLATED_FILL, FONT, ROLE_COLOURS, ROLE_DASHES, new_figure, style_figure

__all__ = ["FrequencyPanel"]

_SLIDER = {"style": {"description_width": "170px"}, "layout": widgets.Layout(width="440px")}
_PARTS = (
    ("hysteresis", "hysteresis"),
    ("classical", "classical eddy"),
    ("excess", "excess"),
    ("total", "sum of the three parts"),
    ("steinmetz", "iGSE (Steinmetz set)"),
)
_COLUMN_NAMES = {
    "freq": "frequency_hz",
    **{k: f"{k}_w_m3" for k, _ in _PARTS},
    **{f"e_{k}": f"{k}_per_cycle_j_m3" for k, _ in _PARTS},
    "extrapolated": "outside_fitted_frequency_range",
}


class FrequencyPanel(PanelBase):
    """Loss parts against frequency for one material, waveform shape and lamination.

    Parameters
    ----------
    material : str
        Library material name.
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape.
    duty : float
        Duty cycle [-].
    b_peak : float
        Peak flux density [T].
    thickness, resistivity : float, optional
        Lamination thickness [m] and resistivity [ohm m]; default the material's.
    skin_effect : bool
        Skin effect in the classical part.
    include_excess : bool
        Count the excess part as eddy loss for the crossover.
    f_min, f_max : str
        Sweep range as typed (``"10"``, ``"1M"``) [Hz].

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``material, shape, duty, b_peak, thickness_mm, resistivity_uohm_m, skin_effect,
        include_excess, f_min, f_max``; set ``.value`` to drive the panel.
    source : bokeh.models.ColumnDataSource
        Plotted columns (see :class:`workbench.ui.state.FrequencyView`).
    view : workbench.ui.state.FrequencyView
        Last computed view.
    crossover_text, knee_text : str
        The crossover and skin-effect knee in words.
    loss_figure, energy_figure : bokeh.plotting.figure
        Named ``"loss_vs_frequency"`` and ``"energy_per_cycle"``.
    """

    kind = "frequency-sweep"
    export_stem = "loss-vs-frequency"
    title = "Loss against frequency"

    def __init__(self, material: str = "M270-35A", *, shape: str = "sine", duty: float = 0.5, b_peak: float = 1.0,
                 thickness: float | None = None, resistivity: float | None = None, skin_effect: bool = True,
                 include_excess: bool = False, f_min: str = "10", f_max: str = "1M"):
        super().__init__()
        mat = get_material(material)
        d = mat.thickness if thickness is None else float(thickness)
        rho = mat.resistivity if resistivity is None else float(resistivity)
        c = self.controls
        c.material = widgets.Dropdown(options=list_materials(), value=mat.name, description="material", **_SLIDER)
        c.shape = widgets.Dropdown(options=list(SHAPES), value=shape, description="flux waveform", **_SLIDER)
        c.duty = widgets.FloatSlider(value=duty, min=0.05, max=0.95, step=0.01, description="duty cycle D [-]",
                                     readout_format=".2f", **_SLIDER)
        # log sliders: fine steps (0.23 % per step), because the browser snaps a value set from code to
        # the slider's grid and sends it back
        c.b_peak = widgets.FloatLogSlider(value=b_peak, base=10, min=-3, max=0.4, step=0.001,
                                          description="B_peak [T]", readout_format=".3g", **_SLIDER)
        c.thickness_mm = widgets.FloatLogSlider(value=d * 1e3, base=10, min=-2.5, max=1.5, step=0.001,
                                                description="thickness d [mm]", readout_format=".3g", **_SLIDER)
        c.resistivity_uohm_m = widgets.FloatLogSlider(value=rho * 1e6, base=10, min=-2, max=12, step=0.001,
                                                      description="resistivity ρ [µΩ·m]", readout_format=".3g",
                                                      **_SLIDER)
        c.skin_effect = widgets.Checkbox(value=skin_effect, description="skin effect in the classical part",
                                         indent=False)
        c.include_excess = widgets.Checkbox(value=include_excess, description="count excess loss as eddy loss",
                                            indent=False)
        c.f_min = QuantityText(f_min, unit="Hz", name="lowest frequency", description="from f [Hz]")
        c.f_max = QuantityText(f_max, unit="Hz", name="highest frequency", description="to f [Hz]")

        self.source = ColumnDataSource(data={k: [] for k in _COLUMN_NAMES})
        self._build_figures()
        self.crossover_html = widgets.HTML()
        self.knee_html = widgets.HTML()
        self.warnings_html = widgets.HTML()
        self.export_bar = ExportBar(self.export, self.report_error, stem=self.export_stem)
        self.view: FrequencyView | None = None

        c.material.observe(self._material_changed, names="value")
        self._wire(skip=("material",))
        self._update()  # before the BokehModel is made, so the page starts with the first result
        self.widget = widgets.VBox([
            heading("Loss against frequency",
                    "Hysteresis, classical eddy and excess loss of one waveform shape; where eddy loss overtakes hysteresis."),
            widgets.HBox([widgets.VBox([c.material, c.shape, c.duty, c.b_peak, c.f_min]),
                          widgets.VBox([c.thickness_mm, c.resistivity_uohm_m, c.skin_effect, c.include_excess,
                                        c.f_max])]),
            self.crossover_html,
            self.knee_html,
            BokehModel(self.plots),
            self.warnings_html,
            self.export_bar.widget,
            caution_widget(),
            self.errors,
        ])

    # -- figures -------------------------------------------------------------------------
    def _build_figures(self):
        src = self.source
        self.loss_figure = fig = new_figure(
            "loss_vs_frequency", title="Loss density against frequency", x_label="frequency f [Hz]",
            y_label="loss density P [W/m³]", x_log=True, y_log=True)
        self.energy_figure = efig = new_figure(
            "energy_per_cycle", title="Energy per cycle P/f: hysteresis flat, eddy rising", x_label="frequency f [Hz]",
            y_label="energy per cycle P/f [J/m³]", x_log=True, y_log=True, height=320)
        efig.x_range = fig.x_range
        self._bands = []
        for f in (fig, efig):
            low = BoxAnnotation(right=1.0, fill_color=EXTRAPOLATED_FILL, fill_alpha=0.15, line_alpha=0)
            high = BoxAnnotation(left=1e9, fill_color=EXTRAPOLATED_FILL, fill_alpha=0.15, line_alpha=0)
            f.add_layout(low)
            f.add_layout(high)
            self._bands.append((low, high))
        renderers = {}
        for key, label in _PARTS:
            width = 3.5 if key == "total" else 3
            renderers[key] = fig.line("freq", key, source=src, color=ROLE_COLOURS[key], line_dash=ROLE_DASHES[key],
                                      line_width=width, legend_label=label)
            efig.line("freq", f"e_{key}", source=src, color=ROLE_COLOURS[key], line_dash=ROLE_DASHES[key],
                      line_width=width, legend_label=label)
        self._spans = []
        self._span_labels = []
        for f in (fig, efig):
            suffix = "" if f is fig else "_energy"
            cross = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["marker"], line_width=2.5,
                         line_dash="dashed", visible=False, name=f"crossover_marker{suffix}")
            knee = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["classical"], line_width=2,
                        line_dash="dotted", line_alpha=0.8, visible=False, name=f"knee_marker{suffix}")
            f.add_layout(cross)
            f.add_layout(knee)
            self._spans.append((cross, knee))
        self.crossover_span, self.knee_span = self._spans[0]
        self.crossover_label = Label(x=1.0, y=8, y_units="screen", x_offset=6, text="", visible=False,
                                     text_font_size=FONT["label"], text_color=ROLE_COLOURS["marker"],
                                     background_fill_color="white", background_fill_alpha=0.8)
        fig.add_layout(self.crossover_label)
        fmt = {"@freq": "printf", **{f"@{k}": "printf" for k, _ in _PARTS}, **{f"@e_{k}": "printf" for k, _ in _PARTS}}
        fig.add_tools(HoverTool(renderers=[renderers["steinmetz"]], mode="vline", formatters=fmt, tooltips=[
            ("f", "@freq{%.4g} Hz"), ("hysteresis", "@hysteresis{%.3g} W/m³"), ("classical", "@classical{%.3g} W/m³"),
            ("excess", "@excess{%.3g} W/m³"), ("sum", "@total{%.3g} W/m³"), ("iGSE", "@steinmetz{%.3g} W/m³")]))
        efig.add_tools(HoverTool(mode="vline", renderers=[efig.renderers[-1]], formatters=fmt, tooltips=[
            ("f", "@freq{%.4g} Hz"), ("hysteresis", "@e_hysteresis{%.3g} J/m³"),
            ("classical", "@e_classical{%.3g} J/m³"), ("excess", "@e_excess{%.3g} J/m³"),
            ("sum", "@e_total{%.3g} J/m³"), ("iGSE", "@e_steinmetz{%.3g} J/m³")]))
        for f in (fig, efig):
            style_figure(f)
            f.add_layout(f.legend[0], "right")  # outside the plot: the curves cross where a legend would sit
        self.plots = column(fig, efig, name="frequency_plots")

    # -- behaviour -----------------------------------------------------------------------
    def _material_changed(self, change):
        mat = get_material(change["new"])
        with self.hold():
            self.controls.thickness_mm.value = mat.thickness * 1e3
            self.controls.resistivity_uohm_m.value = mat.resistivity * 1e6
            self._pending = True

    def settings(self) -> FrequencySettings:
        """The controls read into SI settings (raises ValueError on unreadable input)."""
        c = self.controls
        return FrequencySettings(
            material=c.material.value, shape=c.shape.value, duty=float(c.duty.value), b_peak=float(c.b_peak.value),
            thickness=float(c.thickness_mm.value) * 1e-3, resistivity=float(c.resistivity_uohm_m.value) * 1e-6,
            skin_effect=bool(c.skin_effect.value), include_excess=bool(c.include_excess.value),
            f_min=c.f_min.si(), f_max=c.f_max.si())

    def _refresh(self):
        settings = self.settings()
        view = frequency_view(settings)
        self.view = view
        self.controls.duty.disabled = settings.shape == "sine"
        self.source.data = dict(view.columns)
        lo, hi = view.sweep.valid_freq_range
        for low, high in self._bands:
            low.right = lo
            high.left = hi
        for cross, knee in self._spans:
            cross.visible = view.crossover_freq is not None
            if view.crossover_freq is not None:
                cross.location = view.crossover_freq
            knee.visible = view.knee_freq is not None
            if view.knee_freq is not None:
                knee.location = view.knee_freq
        self.crossover_label.visible = view.crossover_freq is not None
        if view.crossover_freq is not None:
            self.crossover_label.x = view.crossover_freq
            self.crossover_label.text = f"crossover {view.crossover_freq:.4g} Hz"
        self.crossover_html.value = (
            f'<div class="fluxheat-crossover" style="font-size:1.2em;padding:2px 0">'
            f'<b>{html.escape(view.crossover_text)}</b></div>')
        self.knee_html.value = f'<div style="font-size:1.05em">{html.escape(view.knee_text)}</div>'
        self.warnings_html.value = "".join(
            f'<div style="color:#6b4b00">&#9656; {html.escape(w)}</div>' for w in view.warnings)

    @property
    def crossover_text(self) -> str:
        return self.view.crossover_text if self.view else ""

    @property
    def knee_text(self) -> str:
        return self.view.knee_text if self.view else ""

    # -- export --------------------------------------------------------------------------
    def record(self) -> dict:
        v = self.view
        cx = v.sweep.crossover
        return self._record(
            v.settings.to_dict(),
            {"crossover_hz": cx.freq, "crossover_method": cx.method, "crossover": v.crossover_text,
             "crossover_eddy_includes_excess": cx.eddy_includes_excess, "hysteresis_from": cx.hysteresis_from,
             "skin_knee_hz": v.knee_freq, "skin_knee": v.knee_text,
             "valid_frequency_range_hz": list(v.sweep.valid_freq_range), "warnings": list(v.warnings),
             "curves": {_COLUMN_NAMES[k]: np.asarray(val) for k, val in v.columns.items()}})

    def table(self) -> dict:
        return {_COLUMN_NAMES[k]: v for k, v in self.view.columns.items()}
