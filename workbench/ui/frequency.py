"""Frequency panel: the three loss parts and their sum against frequency, with the eddy/hysteresis crossover."""
from __future__ import annotations

import html

import ipywidgets as widgets
import numpy as np
from bokeh.layouts import column
from bokeh.models import BoxAnnotation, ColumnDataSource, HoverTool, Label, LabelSet, Span
from jupyter_bokeh import BokehModel

from workbench.analysis import SHAPES
from workbench.materials import get_material, list_materials
from workbench.report import material_entry
from workbench.report.numbers import eng, eng_column, unit_label
from workbench.report.plotting import apply_axis_format, hover_formatter, tick_formatter
from workbench.ui.base import PanelBase
from workbench.ui.controls import ExportBar, LogValue, QuantityText, caution_widget, heading
from workbench.ui.state import (
    FREQUENCY_PARTS,
    FrequencySettings,
    FrequencyView,
    frequency_view,
    material_defaults,
    parse_frequency_list,
)
from workbench.ui.style import EXTRAPOLATED_FILL, FONT, ROLE_COLOURS, ROLE_DASHES, new_figure, style_figure

__all__ = ["FrequencyPanel"]

_WIDE = {"style": {"description_width": "170px"}, "layout": widgets.Layout(width="440px")}
_TEXT = {"style": {"description_width": "170px"}, "layout": widgets.Layout(width="330px")}
_COLOURS = {**ROLE_COLOURS, "eddy": "#AA3377"}
_DASHES = {**ROLE_DASHES, "eddy": "dashdot", "steinmetz": "dotted"}
_WAVEFORM = "waveform"
_COLUMN_NAMES = {"freq": "frequency_hz", **{k: k for k, _ in FREQUENCY_PARTS},
                 **{f"e_{k}": f"{k}_per_cycle" for k, _ in FREQUENCY_PARTS},
                 "extrapolated": "outside_fitted_frequency_range"}


class FrequencyPanel(PanelBase):
    """Loss parts against frequency for one material, waveform shape (or captured period) and lamination.

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
        Count the excess part as eddy loss for the crossover (the combined curve is drawn).
    f_min, f_max : str
        Sweep range as typed (``"10"``, ``"1M"``) [Hz].
    operating_freqs : str
        Frequencies to mark and read out, as typed (``"50, 400, 20k"``).
    volume : str
        Core volume as typed (``"12 cm3"``) for the loss in watts; empty for none.
    waveform : workbench.waveforms.FluxWaveform, optional
        One period of flux (e.g. a capture's averaged period) offered as the shape
        ``"waveform"`` and selected at start; its flux is kept, time is scaled.
    waveform_name : str
        What the waveform is (shown in texts and the report).
    h_dc : str
        DC bias field strength as typed (``"60"`` [A/m]); empty for none.

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``material, shape, duty, b_peak, thickness_mm, resistivity_uohm_m, skin_effect,
        include_excess, f_min, f_max, temperature, h_dc, loss_axis, volume, operating_freqs,
        compare_thickness_mm, compare_resistivity_uohm_m``; set ``.value`` to drive the panel.
        ``b_peak``, ``thickness_mm`` and ``resistivity_uohm_m`` are :class:`LogValue`
        controls: a 2 %-per-step slider and a box whose typed value is used exactly.
    source : bokeh.models.ColumnDataSource
        Plotted columns (see :class:`workbench.ui.state.FrequencyView`).
    overlay_source, op_source : bokeh.models.ColumnDataSource
        The second lamination's curves; the operating points.
    view : workbench.ui.state.FrequencyView
        Last computed view.
    loss_figure, energy_figure : bokeh.plotting.figure
        Named ``"loss_vs_frequency"`` and ``"energy_per_cycle"``.
    """

    kind = "frequency-sweep"
    export_stem = "loss-vs-frequency"
    title = "Loss against frequency"
    param_controls = {"thickness": ("thickness_mm",), "resistivity": ("resistivity_uohm_m",),
                      "compare_thickness": ("compare_thickness_mm",),
                      "compare_resistivity": ("compare_resistivity_uohm_m",), "per_mass": ("loss_axis",),
                      "operating_freqs": ("operating_freqs",)}

    def __init__(self, material: str = "M270-35A", *, shape: str = "sine", duty: float = 0.5, b_peak: float = 1.0,
                 thickness: float | None = None, resistivity: float | None = None, skin_effect: bool = True,
                 include_excess: bool = False, f_min: str = "10", f_max: str = "1M", operating_freqs: str = "",
                 volume: str = "", waveform=None, waveform_name: str = "captured period", h_dc: str = ""):
        super().__init__()
        mat = get_material(material)
        d = mat.thickness if thickness is None else float(thickness)
        rho = mat.resistivity if resistivity is None else float(resistivity)
        self.waveform = waveform
        self.waveform_name = str(waveform_name)
        shapes = [(name, name) for name in SHAPES] + (
            [(f"captured: {self.waveform_name}", _WAVEFORM)] if waveform is not None else [])
        c = self.controls
        c.material = widgets.Dropdown(options=list_materials(), value=mat.name, description="material", **_WIDE)
        c.shape = widgets.Dropdown(options=shapes, value=_WAVEFORM if waveform is not None else shape,
                                   description="flux waveform", **_WIDE)
        c.duty = widgets.FloatSlider(value=duty, min=0.05, max=0.95, step=0.01, description="duty cycle D [-]",
                                     readout_format=".2f", **_WIDE)
        c.b_peak = LogValue(b_peak, min=1e-3, max=2.5, description="B_peak [T]", unit="T", name="B_peak")
        c.thickness_mm = LogValue(d * 1e3, min=10 ** -2.5, max=10 ** 1.5, description="thickness d [mm]", unit="m",
                                  scale=1e-3, name="thickness")
        c.resistivity_uohm_m = LogValue(rho * 1e6, min=1e-2, max=1e12, description="resistivity ρ [µΩ·m]",
                                        unit="ohm m", scale=1e-6, name="resistivity")
        c.skin_effect = widgets.Checkbox(value=skin_effect, description="skin effect in the classical part",
                                         indent=False)
        c.include_excess = widgets.Checkbox(value=include_excess, description="count excess loss as eddy loss",
                                            indent=False)
        c.f_min = QuantityText(f_min, unit="Hz", name="lowest frequency", description="from f [Hz]", **_TEXT)
        c.f_max = QuantityText(f_max, unit="Hz", name="highest frequency", description="to f [Hz]", **_TEXT)
        c.temperature = QuantityText("", unit="degC", name="core temperature", description="core temperature [°C]",
                                     placeholder="material's reference", **_TEXT)
        c.h_dc = QuantityText(h_dc, unit="A/m", name="DC bias H_dc", description="DC bias H_dc [A/m]",
                              placeholder="optional", **_TEXT)
        c.loss_axis = widgets.Dropdown(options=[("per volume, W/m³", "W/m3"), ("per mass, W/kg", "W/kg")],
                                       value="W/m3", description="loss axis", **_WIDE)
        c.volume = QuantityText(volume, unit="m3", name="core volume", description="core volume V_e",
                                placeholder="optional, e.g. 12 cm3", **_TEXT)
        c.operating_freqs = widgets.Text(value=operating_freqs, description="operating points [Hz]",
                                         placeholder="e.g. 50, 400, 20k", continuous_update=False, **_TEXT)
        c.compare_thickness_mm = QuantityText("", unit="", name="second thickness",
                                              description="second thickness [mm]", placeholder="optional", **_TEXT)
        c.compare_resistivity_uohm_m = QuantityText("", unit="", name="second resistivity",
                                                    description="second resistivity [µΩ·m]", placeholder="optional",
                                                    **_TEXT)

        self.source = ColumnDataSource(data={k: [] for k in _COLUMN_NAMES})
        self.overlay_source = ColumnDataSource(data={k: [] for k in ("freq", "classical", "eddy", "total", "steinmetz")})
        self.op_source = ColumnDataSource(data={"freq": [], "y": [], "label": []})
        self._build_figures()
        self.crossover_html = widgets.HTML()
        self.knee_html = widgets.HTML()
        self.overlay_html = widgets.HTML()
        self.readout_html = widgets.HTML()
        self.warnings_html = widgets.HTML()
        self.export_bar = ExportBar(self.export, self.report_error, stem=self.export_stem)
        self.view: FrequencyView | None = None

        c.material.observe(self._material_changed, names="value")
        self._wire(skip=("material",))
        names = ("material", "shape", "duty", "b_peak", "temperature", "h_dc", "f_min", "f_max", "thickness_mm",
                 "resistivity_uohm_m", "skin_effect", "include_excess", "loss_axis", "volume", "operating_freqs",
                 "compare_thickness_mm", "compare_resistivity_uohm_m")
        for n in names:
            self.field(n)
        self._update()  # before the BokehModel is made, so the page starts with the first result
        f = self.fields
        self.results_box.children = [self.crossover_html, self.knee_html, self.overlay_html, self.readout_html,
                                     BokehModel(self.plots), self.warnings_html]
        self.widget = widgets.VBox([
            heading("Loss against frequency",
                    "Hysteresis, classical eddy and excess loss of one waveform; where eddy loss overtakes hysteresis."),
            widgets.HBox([
                widgets.VBox([f[n] for n in ("material", "shape", "duty", "b_peak", "temperature", "h_dc", "f_min",
                                             "f_max")]),
                widgets.VBox([f[n] for n in ("thickness_mm", "resistivity_uohm_m", "skin_effect", "include_excess",
                                             "loss_axis", "volume")]),
            ]),
            widgets.HBox([widgets.VBox([f["operating_freqs"]]),
                          widgets.VBox([f["compare_thickness_mm"], f["compare_resistivity_uohm_m"]])]),
            self.errors,
            self.stale_html,
            self.results_box,
            self.export_bar.widget,
            caution_widget(),
        ])
        self.widget.add_class("fluxheat-panel")
        self.widget.add_class(f"fluxheat-panel-{self.kind}")

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
        self.renderers = {}
        self.energy_renderers = {}
        for key, label in FREQUENCY_PARTS:
            width = 3.5 if key == "total" else 3
            self.renderers[key] = fig.line("freq", key, source=src, color=_COLOURS[key], line_dash=_DASHES[key],
                                           line_width=width, legend_label=label, name=f"curve_{key}")
            self.energy_renderers[key] = efig.line("freq", f"e_{key}", source=src, color=_COLOURS[key],
                                                   line_dash=_DASHES[key], line_width=width, legend_label=label)
        ov = self.overlay_source
        self.overlay_renderers = {}
        for key, label in (("classical", "classical eddy, second lamination"),
                           ("eddy", "classical + excess, second lamination"),
                           ("total", "sum of parts, second lamination"), ("steinmetz", "model total, second lamination")):
            self.overlay_renderers[key] = fig.line("freq", key, source=ov, color=_COLOURS[key], line_dash="dashed",
                                                   line_width=1.8, line_alpha=0.75, legend_label=label,
                                                   name=f"second_{key}")
        self.op_renderer = fig.scatter("freq", "y", source=self.op_source, size=11, marker="diamond",
                                       fill_color="#000000", line_color="white", name="operating_points",
                                       legend_label="operating points")
        fig.add_layout(LabelSet(x="freq", y="y", text="label", source=self.op_source, x_offset=8, y_offset=-18,
                                text_font_size="11pt", background_fill_color="white", background_fill_alpha=0.7))
        self._spans = []
        for f in (fig, efig):
            suffix = "" if f is fig else "_energy"
            cross = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["marker"], line_width=2.5,
                         line_dash="dashed", visible=False, name=f"crossover_marker{suffix}")
            cross2 = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["marker"], line_width=1.5,
                          line_dash="dotted", visible=False, name=f"crossover_marker_second{suffix}")
            knee = Span(location=1.0, dimension="height", line_color=ROLE_COLOURS["classical"], line_width=2,
                        line_dash="dotted", line_alpha=0.8, visible=False, name=f"knee_marker{suffix}")
            for a in (cross, cross2, knee):
                f.add_layout(a)
            self._spans.append((cross, cross2, knee))
        self.crossover_span, self.crossover_span_second, self.knee_span = self._spans[0]
        self.crossover_label = Label(x=1.0, y=8, y_units="screen", x_offset=6, text="", visible=False,
                                     text_font_size=FONT["label"], text_color=ROLE_COLOURS["marker"],
                                     background_fill_color="white", background_fill_alpha=0.8)
        self.crossover_label_second = Label(x=1.0, y=30, y_units="screen", x_offset=6, text="", visible=False,
                                            text_font_size=FONT["label"], text_color=ROLE_COLOURS["marker"],
                                            background_fill_color="white", background_fill_alpha=0.8)
        fig.add_layout(self.crossover_label)
        fig.add_layout(self.crossover_label_second)
        self._hovers = []
        for f, prefix, renderer in ((fig, "", self.renderers["steinmetz"]), (efig, "e_", self.energy_renderers["steinmetz"])):
            hover = HoverTool(renderers=[renderer], mode="vline")
            f.add_tools(hover)
            self._hovers.append((hover, prefix))
        for f in (fig, efig):
            style_figure(f)
            f.add_layout(f.legend[0], "right")  # outside the plot: the curves cross where a legend would sit
            apply_axis_format(f, x_unit="Hz", y_unit="W/m3" if f is fig else "J/m3")
        self.plots = column(fig, efig, name="frequency_plots")

    _hover_key = None

    def _set_hover(self, unit: str, energy_unit: str, drawn):
        # setting bokeh properties makes the document re-collect its models (tens of ms): only on change
        key = (unit, energy_unit, tuple(sorted(drawn)))
        if key == self._hover_key:
            return
        self._hover_key = key
        for hover, prefix in self._hovers:
            u = unit if prefix == "" else energy_unit
            tips = [("f", "@freq{eng}")] + [(label, f"@{prefix}{key}{{eng}}") for key, label in FREQUENCY_PARTS
                                             if key in drawn]
            hover.tooltips = tips
            hover.formatters = {"@freq": hover_formatter("Hz"),
                                **{f"@{prefix}{key}": hover_formatter(u) for key, _ in FREQUENCY_PARTS}}

    # -- behaviour -----------------------------------------------------------------------
    def _material_changed(self, change):
        mat = get_material(change["new"])
        c = self.controls
        with self.hold():
            c.thickness_mm.value = mat.thickness * 1e3
            c.resistivity_uohm_m.value = mat.resistivity * 1e6
            defaults = material_defaults(mat, float(c.b_peak.value))
            if defaults["b_peak"] != c.b_peak.value:
                c.b_peak.value = defaults["b_peak"]
            c.f_min.value = eng(defaults["f_min"], "Hz").replace(" ", "").replace("Hz", "").replace(".00", "")
            c.f_max.value = eng(defaults["f_max"], "Hz").replace(" ", "").replace("Hz", "").replace(".00", "")
            self._pending = True
        self._b_note = defaults["b_peak_message"]
        if "b_peak" in self.fields:
            self.fields["b_peak"].note(self._b_note)

    _b_note = None

    def _optional_mm(self, name: str, scale: float):
        box = getattr(self.controls, name)
        if not box.value.strip():
            return None
        return self._read(name, lambda: box.si() * scale)

    def settings(self) -> FrequencySettings:
        """The controls read into SI settings (raises ValueError on unreadable input)."""
        c = self.controls
        temperature = self._read("temperature", lambda: c.temperature.si() if c.temperature.value.strip() else None)
        volume = self._read("volume", lambda: c.volume.si() if c.volume.value.strip() else None)
        h_dc = self._read("h_dc", lambda: c.h_dc.si() if c.h_dc.value.strip() else None)
        return FrequencySettings(
            material=c.material.value, shape=c.shape.value, duty=float(c.duty.value),
            b_peak=float(self._read("b_peak")), thickness=float(self._read("thickness_mm")) * 1e-3,
            resistivity=float(self._read("resistivity_uohm_m")) * 1e-6,
            skin_effect=bool(c.skin_effect.value), include_excess=bool(c.include_excess.value),
            f_min=self._read("f_min", c.f_min.si), f_max=self._read("f_max", c.f_max.si),
            temperature=temperature, per_mass=c.loss_axis.value == "W/kg", volume=volume,
            operating_freqs=parse_frequency_list(c.operating_freqs.value),
            compare_thickness=self._optional_mm("compare_thickness_mm", 1e-3),
            compare_resistivity=self._optional_mm("compare_resistivity_uohm_m", 1e-6),
            waveform=self.waveform, waveform_name=self.waveform_name, h_dc=h_dc)

    def _refresh(self):
        settings = self.settings()
        view = frequency_view(settings)
        self.view = view
        c = self.controls
        c.duty.disabled = settings.shape in ("sine", _WAVEFORM)
        c.b_peak.disabled = settings.shape == _WAVEFORM
        self.source.data = dict(view.columns)
        self._axes(view)
        self._set_hover(view.unit, view.energy_unit, view.drawn)
        for key, r in self.renderers.items():
            r.visible = key in view.drawn
            self.energy_renderers[key].visible = key in view.drawn
        self._legend_only_drawn(view)
        lo, hi = view.sweep.valid_freq_range
        for low, high in self._bands:
            low.right = lo
            high.left = hi if np.isfinite(hi) else 1e300
        ov = view.overlay
        second = None if ov is None else ov["crossover_freq"]
        for cross, cross2, knee in self._spans:
            cross.visible = view.crossover_freq is not None
            if view.crossover_freq is not None:
                cross.location = view.crossover_freq
            cross2.visible = second is not None
            if second is not None:
                cross2.location = second
            knee.visible = view.knee_freq is not None
            if view.knee_freq is not None:
                knee.location = view.knee_freq
        self.crossover_label.visible = view.crossover_freq is not None
        if view.crossover_freq is not None:
            self.crossover_label.x = view.crossover_freq
            self.crossover_label.text = f"crossover {eng(view.crossover_freq, 'Hz', 4)}"
        self.crossover_label_second.visible = second is not None
        if second is not None:
            self.crossover_label_second.x = second
            self.crossover_label_second.text = f"second lamination {eng(second, 'Hz', 4)}"
        if ov is None:
            self.overlay_source.data = {k: [] for k in ("freq", "classical", "eddy", "total", "steinmetz")}
        else:
            self.overlay_source.data = dict(ov["columns"])
        for key, r in self.overlay_renderers.items():
            r.visible = ov is not None and bool(np.any(np.isfinite(ov["columns"][key])))
        self._op_points(view)
        self.crossover_html.value = (
            f'<div class="fluxheat-crossover" style="font-size:1.2em;padding:2px 0">'
            f'<b>{html.escape(view.crossover_text)}</b></div>')
        self.knee_html.value = f'<div class="fluxheat-knee" style="font-size:1.05em">{html.escape(view.knee_text)}</div>'
        self.overlay_html.value = ("" if ov is None else
                                   f'<div class="fluxheat-overlay" style="font-size:1.05em">{html.escape(ov["text"])}</div>')
        self.readout_html.value = self._readout_html(view)
        self.warnings_html.value = "".join(
            f'<div style="color:#6b4b00">&#9656; {html.escape(w)}</div>' for w in view.warnings)
        if "b_peak" in self.fields:
            self.fields["b_peak"].note(self._b_note)
        self._b_note = None

    def _axes(self, view):
        per_mass = view.unit == "W/kg"
        self.loss_figure.yaxis.axis_label = (f"specific loss P [{unit_label(view.unit)}]" if per_mass
                                             else f"loss density P [{unit_label(view.unit)}]")
        self.energy_figure.yaxis.axis_label = f"energy per cycle P/f [{unit_label(view.energy_unit)}]"
        self.loss_figure.title.text = "Specific loss against frequency" if per_mass else "Loss density against frequency"
        for fig, unit in ((self.loss_figure, view.unit), (self.energy_figure, view.energy_unit)):
            if fig.yaxis[0].formatter.args.get("unit_key") != unit:
                formatter = tick_formatter(unit)
                formatter.args = {**formatter.args, "unit_key": unit}
                fig.yaxis[0].formatter = formatter

    def _legend_only_drawn(self, view):
        visible = {r.name for r in (*self.renderers.values(), *self.overlay_renderers.values(), self.op_renderer)
                   if r.visible}
        for fig in (self.loss_figure, self.energy_figure):
            for item in fig.legend[0].items:
                names = [r.name for r in item.renderers]
                if fig is self.energy_figure:
                    names = [f"curve_{k}" for k, r in self.energy_renderers.items() if r in item.renderers]
                item.visible = any(n in visible for n in names)

    def _op_points(self, view):
        rows = view.operating_rows
        unit = view.unit
        ys = [r["loss_w_kg"] if unit == "W/kg" else r["loss_w_m3"] for r in rows]
        self.op_source.data = {"freq": [r["frequency_hz"] for r in rows], "y": ys,
                               "label": [eng(r["frequency_hz"], "Hz", 4) for r in rows]}
        self.op_renderer.visible = bool(rows)
        self._legend_only_drawn(view)

    @staticmethod
    def _table_columns(view):
        cols = [("frequency", "Hz", "frequency_hz"), ("hysteresis", "W/m3", "hysteresis_w_m3"),
                ("classical eddy", "W/m3", "classical_w_m3"), ("excess", "W/m3", "excess_w_m3"),
                ("sum of parts", "W/m3", "separation_total_w_m3"),
                (f"model total ({view.sweep.loss_model})", "W/m3", "loss_w_m3"), ("specific loss", "W/kg", "loss_w_kg")]
        if view.settings.volume is not None:
            cols.append((f"in {eng(view.settings.volume, 'm3')}", "W", "loss_w"))
        rows = view.operating_rows
        return [c for c in cols if any(r[c[2]] is not None for r in rows)]

    def _readout_html(self, view) -> str:
        rows = view.operating_rows
        if not rows:
            return ('<div class="fluxheat-readout" style="color:#444">Type operating frequencies (e.g. 50, 400, 20k) '
                    'to mark them and read the loss there.</div>')
        cols = self._table_columns(view)
        heads, texts = [], []
        for name, unit, key in cols:
            if key == "frequency_hz":  # the row's label: each in its own prefix
                heads.append(name)
                texts.append([eng(r[key], unit, 4) for r in rows])
                continue
            shown, numbers = eng_column([r[key] for r in rows], unit, 4)
            heads.append(f"{name} [{shown}]")
            texts.append(numbers)
        extra = ["" if not r["extrapolated"] else " (extrapolated)" for r in rows]
        head = "".join(f'<th style="padding:2px 10px;text-align:right">{html.escape(h)}</th>' for h in heads)
        body = "".join("<tr>" + "".join(f'<td style="padding:1px 10px;text-align:right">{html.escape(t[i])}'
                                        f'{html.escape(extra[i]) if j == 0 else ""}</td>'
                                        for j, t in enumerate(texts)) + "</tr>" for i in range(len(rows)))
        return (f'<div class="fluxheat-readout"><b>At the operating points</b> (computed there, not read off the '
                f'curves):<table style="border-collapse:collapse">'
                f"<tr>{head}</tr>{body}</table></div>")

    @property
    def crossover_text(self) -> str:
        return self.view.crossover_text if self.view else ""

    @property
    def knee_text(self) -> str:
        return self.view.knee_text if self.view else ""

    @property
    def readout_rows(self) -> tuple:
        """The operating-point rows of the last view (SI values)."""
        return self.view.operating_rows if self.view else ()

    # -- export --------------------------------------------------------------------------
    def record(self) -> dict:
        v = self.view
        cx = v.sweep.crossover
        statements = [v.crossover_text, v.knee_text] + ([v.overlay["text"]] if v.overlay else [])
        results = {"crossover_hz": cx.freq, "crossover_method": cx.method,
                   "crossover_eddy_includes_excess": cx.eddy_includes_excess, "hysteresis_from": cx.hysteresis_from,
                   "skin_knee_hz": v.knee_freq, "loss_model": v.sweep.loss_model,
                   "temperature_used_c": v.sweep.temperature,
                   "valid_frequency_range_hz": list(v.sweep.valid_freq_range),
                   "second_crossover_hz": None if v.overlay is None else v.overlay["crossover_freq"],
                   "operating_points": list(v.operating_rows)}
        table = None
        if v.operating_rows:
            cols = self._table_columns(v)
            table = {"columns": [{"name": n, "unit": u, "key": k} for n, u, k in cols],
                     "rows": [[r[k] for _, _, k in cols] for r in v.operating_rows]}
        return self._record(v.settings.to_dict(), results, material=material_entry(get_material(v.settings.material)),
                            table=table, statements=statements, warnings=list(v.warnings), series=self.table())

    def table(self) -> dict:
        v = self.view
        out = {"frequency_hz": v.columns["freq"]}
        unit = "w_kg" if v.unit == "W/kg" else "w_m3"
        eunit = "j_kg" if v.unit == "W/kg" else "j_m3"
        for key, _ in FREQUENCY_PARTS:
            if key in v.drawn:
                out[f"{key}_{unit}"] = v.columns[key]
                out[f"{key}_per_cycle_{eunit}"] = v.columns[f"e_{key}"]
        if v.overlay is not None:
            for key in ("classical", "eddy", "total", "steinmetz"):
                if np.any(np.isfinite(v.overlay["columns"][key])):
                    out[f"second_{key}_{unit}"] = v.overlay["columns"][key]
        out["outside_fitted_frequency_range"] = v.columns["extrapolated"]
        return out
