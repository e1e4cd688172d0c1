"""Thermal panel: the core's loss P(T) against the heat removal, the operating point and the runaway limit.

State without widgets (:class:`ThermalSettings`, :func:`thermal_view`) plus the view
(:class:`ThermalPanel`). Every number comes from
:func:`workbench.analysis.thermal.thermal_operating_point`, which takes the core loss from
the one loss engine.
"""
from __future__ import annotations

import html
import math
from dataclasses import dataclass

import ipywidgets as widgets
import numpy as np
from bokeh.layouts import column
from bokeh.models import ColumnDataSource, HoverTool, Span
from jupyter_bokeh import BokehModel

from workbench.analysis.thermal import make_cooling, thermal_operating_point
from workbench.materials import list_materials
from workbench.shapes import SHAPES, ShapeSpec
from workbench.ui.base import PanelBase
from workbench.ui.controls import ExportBar, QuantityText, caution_widget, heading
from workbench.ui.state import InputError
from workbench.ui.style import ROLE_COLOURS, new_figure, style_figure

__all__ = ["ThermalPanel", "ThermalSettings", "ThermalView", "thermal_view"]

_WAVEFORM = "waveform"
_TEXT = {"style": {"description_width": "190px"}, "layout": widgets.Layout(width="340px")}


@dataclass(frozen=True)
class ThermalSettings:
    """Inputs of the thermal panel in SI units.

    Parameters
    ----------
    material : Material or str
        Material or library name.
    waveform : FluxWaveform or ShapeSpec
        One period of flux.
    volume : float
        Core volume [m^3].
    ambient : float
        Ambient temperature [degC].
    r_th : float or None
        Thermal resistance [K/W] (or give ``surface_area``).
    surface_area : float or None
        Surface area in still air [m^2].
    winding_loss : float
        Winding loss [W].
    h_dc : float
        DC bias field strength [A/m] (0: none).
    """

    material: object
    waveform: object
    volume: float
    ambient: float
    r_th: float | None = None
    surface_area: float | None = None
    winding_loss: float = 0.0
    h_dc: float = 0.0

    def __post_init__(self):
        for name in ("volume",):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
                raise InputError((name,), f"{name} must be finite and positive, got {v!r}")
        if not (math.isfinite(self.winding_loss) and self.winding_loss >= 0):
            raise InputError(("winding_loss",), f"winding loss must be >= 0 W, got {self.winding_loss!r}")
        if not math.isfinite(self.h_dc):
            raise InputError(("h_dc",), f"h_dc must be finite, got {self.h_dc!r}")


@dataclass(frozen=True)
class ThermalView:
    """What the panel shows: the thermal result and the plotted columns.

    Parameters
    ----------
    result : workbench.analysis.thermal.ThermalResult
        The analysis.
    curves : dict
        ``temperature``, ``power``, ``removed``, ``removed_limit`` columns [degC, W, W, W].
    point : dict
        ``temperature`` and ``power`` of the operating point (empty lists under runaway).
    """

    result: object
    curves: dict
    point: dict


def thermal_view(settings: ThermalSettings) -> ThermalView:
    """Compute the panel's view from its settings (no widgets).

    Parameters
    ----------
    settings : ThermalSettings
        Inputs.

    Returns
    -------
    ThermalView
    """
    try:
        cooling = make_cooling(r_th=settings.r_th, surface_area=settings.surface_area)
    except ValueError as exc:
        raise InputError(("r_th", "surface_area"), str(exc)) from None
    res = thermal_operating_point(settings.waveform, settings.material, volume=settings.volume,
                                  ambient=settings.ambient, cooling=cooling, winding_loss=settings.winding_loss,
                                  h_dc=settings.h_dc or None)
    c = res.curve
    n = c["temperature_c"].size
    limit_line = c["removed_at_max_ambient_w"]
    curves = {"temperature": c["temperature_c"], "power": c["power_w"], "removed": c["removed_w"],
              "removed_limit": np.full(n, np.nan) if limit_line is None else limit_line}
    point = ({"temperature": [res.temperature_c], "power": [res.total_w]} if res.temperature_c is not None
             else {"temperature": [], "power": []})
    return ThermalView(res, curves, point)


class ThermalPanel(PanelBase):
    """Operating temperature of a core: P(T) against the heat-removal line, with the runaway limit.

    Parameters
    ----------
    material : Material or str
        Library material (name) or a Material object (e.g. one with bias data).
    shape : {"sine", "triangle", "trapezoid"}
        Waveform shape.
    duty : float
        Duty cycle [-].
    b_peak : str
        Peak flux density as typed (``"100 mT"``).
    freq : str
        Frequency as typed (``"100k"``).
    volume : str
        Core volume as typed (``"5.6 cm3"``).
    ambient : float
        Ambient temperature [degC].
    cooling : {"R_th", "surface area"}
        How the heat removal is given.
    r_th : str
        Thermal resistance as typed [K/W].
    surface_area : str
        Surface area as typed (``"30 cm2"``).
    winding_loss : str
        Winding loss as typed (``"0.3 W"``).
    h_dc : str
        DC bias field strength as typed (``"40 A/m"``).
    waveform : workbench.waveforms.FluxWaveform, optional
        A captured period offered as the shape ``"waveform"`` and selected at start.

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``material, shape, duty, b_peak, freq, volume, ambient, cooling, r_th, surface_area,
        winding_loss, h_dc``; set ``.value`` to drive the panel.
    view : ThermalView
        The last good view.
    source, point_source : bokeh.models.ColumnDataSource
        Curves and operating point.
    """

    kind = "thermal-operating-point"
    export_stem = "thermal"
    title = "Thermal operating point"
    param_controls = {"r_th": ("r_th", "surface_area", "cooling"), "surface_area": ("surface_area", "r_th", "cooling")}

    def __init__(self, material="mnzn-power-ferrite", *, shape="triangle", duty=0.5, b_peak="100 mT",
                 freq="100k", volume="5 cm3", ambient=25.0, cooling="R_th", r_th="20", surface_area="30 cm2",
                 winding_loss="0 W", h_dc="0 A/m", waveform=None):
        super().__init__()
        self._material_object = None if isinstance(material, str) else material
        names = list_materials()
        if self._material_object is not None:
            names = [self._material_object.name] + [n for n in names if n != self._material_object.name]
        self._waveform = waveform
        shapes = list(SHAPES) + ([_WAVEFORM] if waveform is not None else [])
        c = self.controls
        c.material = widgets.Dropdown(options=names, value=names[0] if self._material_object else material,
                                      description="material", **_TEXT)
        c.shape = widgets.Dropdown(options=shapes, value=_WAVEFORM if waveform is not None else shape,
                                   description="shape", **_TEXT)
        c.duty = widgets.BoundedFloatText(value=duty, min=0.01, max=1.0, step=0.01, description="duty [-]", **_TEXT)
        c.b_peak = QuantityText(b_peak, unit="T", name="b_peak", description="B_peak [T]", **_TEXT)
        c.freq = QuantityText(freq, unit="Hz", name="freq", description="frequency [Hz]", **_TEXT)
        c.volume = QuantityText(volume, unit="m3", name="volume", description="core volume [m3]", **_TEXT)
        c.ambient = widgets.FloatSlider(value=ambient, min=-40.0, max=150.0, step=0.5, continuous_update=False,
                                        description="ambient [degC]", **_TEXT)
        c.cooling = widgets.ToggleButtons(options=["R_th", "surface area"], value=cooling, description="heat removal")
        c.r_th = QuantityText(r_th, unit="", name="r_th", description="R_th [K/W]", **_TEXT)
        c.surface_area = QuantityText(surface_area, unit="m2", name="surface_area", description="surface area [m2]",
                                      **_TEXT)
        c.winding_loss = QuantityText(winding_loss, unit="W", name="winding_loss", description="winding loss [W]",
                                      **_TEXT)
        c.h_dc = QuantityText(h_dc, unit="A/m", name="h_dc", description="DC bias H_dc [A/m]", **_TEXT)

        fig = new_figure("thermal_balance", title="Dissipation P(T) and heat removal Q(T)",
                         x_label="core temperature T [degC]", y_label="power [W]")
        self.source = ColumnDataSource({"temperature": [], "power": [], "removed": [], "removed_limit": []})
        self.point_source = ColumnDataSource({"temperature": [], "power": []})
        fig.line("temperature", "power", source=self.source, line_width=2.5,
                 color=ROLE_COLOURS.get("total", "#4477AA"), legend_label="P(T): core + winding")
        fig.line("temperature", "removed", source=self.source, line_width=2, color="#228833",
                 legend_label="heat removal Q(T) at this ambient")
        fig.line("temperature", "removed_limit", source=self.source, line_width=2, line_dash="dashed",
                 color="#EE6677", legend_label="Q(T) at the highest ambient: touches P (runaway limit)")
        fig.scatter("temperature", "power", source=self.point_source, size=12, color="#222222",
                    legend_label="operating point")
        self.limit_span = Span(location=0.0, dimension="height", line_color="#EE6677", line_dash="dotted",
                               line_width=2)
        fig.add_layout(self.limit_span)
        fig.add_tools(HoverTool(tooltips=[("T", "@temperature{0.0} degC"), ("P", "@power{0.000} W"),
                                          ("Q", "@removed{0.000} W")], mode="vline"))
        fig.legend.location = "top_left"
        style_figure(fig)
        self.figure = fig
        self.plots = column(fig, name="thermal_plots")
        self.summary = widgets.HTML()
        self.warnings_html = widgets.HTML()
        self.view = None
        # inputs that do not apply are greyed out, so nothing shown is silently ignored
        c.shape.observe(self._sync_enabled, names="value")
        c.cooling.observe(self._sync_enabled, names="value")
        self._sync_enabled()
        self._wire()
        self._update()
        self.export_bar = ExportBar(self.export, self.report_error, stem=self.export_stem)
        self.results_box.children = [BokehModel(self.plots), self.summary, self.warnings_html]
        controls = widgets.VBox([self.field(n) for n in ("material", "shape", "duty", "b_peak", "freq", "volume",
                                                         "ambient", "cooling", "r_th", "surface_area",
                                                         "winding_loss", "h_dc")])
        self.widget = widgets.VBox([
            heading(self.title, "Where the loss meets the heat removal, warming up from ambient; loop gain below 1 "
                                "is stable."),
            controls, self.errors, self.stale_html, self.results_box, caution_widget(),
            widgets.HTML(f'<div style="color:#5a3a00">&#9888; {html.escape(" ".join(_cautions()))}</div>'),
            self.export_bar.widget])
        self.widget.add_class(f"fluxheat-panel-{self.kind}")
        self.summary.add_class("fluxheat-thermal-summary")

    def _sync_enabled(self, _change=None):
        c = self.controls
        captured = c.shape.value == _WAVEFORM
        for name in ("b_peak", "freq"):
            getattr(c, name).disabled = captured
        c.duty.disabled = captured or c.shape.value == "sine"
        c.r_th.disabled = c.cooling.value != "R_th"
        c.surface_area.disabled = c.cooling.value == "R_th"

    # -- state ---------------------------------------------------------------------------
    def settings(self) -> ThermalSettings:
        """Read the controls into :class:`ThermalSettings` (errors name the control)."""
        c = self.controls
        material = (self._material_object if self._material_object is not None
                    and c.material.value == self._material_object.name else c.material.value)
        if c.shape.value == _WAVEFORM:
            waveform = self._waveform
        else:
            b_peak = self._read("b_peak", c.b_peak.si)
            freq = self._read("freq", c.freq.si)
            duty = self._read("duty")
            try:
                waveform = ShapeSpec(c.shape.value, b_peak, freq, duty)
                waveform.waveform()
            except ValueError as exc:
                raise InputError(("duty", "b_peak"), str(exc)) from None
        use_rth = c.cooling.value == "R_th"
        return ThermalSettings(
            material=material, waveform=waveform, volume=self._read("volume", c.volume.si),
            ambient=float(c.ambient.value),
            r_th=self._read("r_th", c.r_th.si) if use_rth else None,
            surface_area=None if use_rth else self._read("surface_area", c.surface_area.si),
            winding_loss=self._read("winding_loss", c.winding_loss.si), h_dc=self._read("h_dc", c.h_dc.si))

    def _refresh(self):
        try:
            view = thermal_view(self.settings())
        except InputError:
            raise
        except ValueError as exc:
            # the analysis names the parameter; mark the controls it concerns
            text = str(exc)
            names = [n for n in ("ambient", "volume", "r_th", "surface_area", "winding_loss", "h_dc", "material")
                     if n in text or n.replace("_", " ") in text]
            raise InputError(tuple(names or ("material",)), text) from None
        self.view = view
        self.source.data = {k: np.asarray(v, dtype=float) for k, v in view.curves.items()}
        self.point_source.data = {k: list(v) for k, v in view.point.items()}
        r = view.result
        self.limit_span.location = r.limit_temperature_c
        self.summary.value = _summary_html(r)
        self.warnings_html.value = "".join(
            f'<div style="color:#8a4b00">warning: {html.escape(w)}</div>' for w in r.warnings)

    # -- export --------------------------------------------------------------------------
    def record(self) -> dict:
        """Inputs and results for the report."""
        r = self.view.result
        d = r.to_dict()
        inputs = {k: d[k] for k in ("material", "ambient_c", "b_peak_t", "frequency_hz", "h_dc_a_m", "volume_m3",
                                    "winding_loss_w", "cooling", "limit_temperature_c")}
        results = {k: d[k] for k in ("temperature_c", "loss_w_m3", "loss_w", "total_w", "loop_gain", "stable",
                                     "runaway", "escape_temperature_c", "max_ambient_c", "max_b_peak_t")}
        return self._record(inputs, results, warnings=list(r.warnings), cautions=list(r.cautions))

    def table(self) -> dict:
        """Columns for the CSV: temperature and the curves [degC, W]."""
        return {"temperature_c": self.source.data["temperature"], "power_w": self.source.data["power"],
                "removed_w": self.source.data["removed"],
                "removed_at_max_ambient_w": self.source.data["removed_limit"]}


def _cautions():
    from workbench.analysis.thermal import CAUTIONS

    return [c[0].upper() + c[1:] + "." for c in CAUTIONS]


def _summary_html(r) -> str:
    rows = []
    if r.temperature_c is None:
        rows.append('<b style="color:#b00020">THERMAL RUNAWAY: no stable operating point below '
                    f'{r.limit_temperature_c:g} degC ({html.escape(r.limit_source)})</b>')
    else:
        rows.append(f"<b>operating temperature {r.temperature_c:.1f} degC</b> at {r.ambient_c:g} degC ambient; "
                    f"core loss {r.loss_w:.3g} W ({r.loss_w_m3 / 1e3:.4g} kW/m<sup>3</sup>), total {r.total_w:.3g} W")
        rows.append(f"loop gain {r.loop_gain:.3g}: {'stable' if r.stable else 'NOT stable (runaway)'}; limit "
                    f"{r.limit_temperature_c:g} degC ({html.escape(r.limit_source)})")
    rows.append("highest ambient with a stable point: "
                + ("none" if r.max_ambient_c is None else f"{r.max_ambient_c:.1f} degC")
                + "; highest B_peak here: " + ("none" if r.max_b_peak_t is None else f"{r.max_b_peak_t * 1e3:.4g} mT"))
    return "<div>" + "<br>".join(rows) + "</div>"
