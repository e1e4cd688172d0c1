"""Widget helpers shared by the panels: unit text boxes, log sliders with an exact text box,
messages beside a control, the caution line and the export bar."""
from __future__ import annotations

import html
import math
from pathlib import Path

import ipywidgets as widgets
import traitlets

from workbench.report import default_export_folder
from workbench.units import parse_quantity

__all__ = ["CAUTION", "QuantityText", "LogValue", "Field", "caution_widget", "ExportBar", "heading",
           "LOG_STEP", "INVALID_CLASS"]

#: Exponent step of the log sliders: one arrow press multiplies the value by 1.02.
LOG_STEP = math.log10(1.02)
#: CSS class put on a control whose input is invalid (browser tests look for it).
INVALID_CLASS = "fluxheat-invalid"

#: The caution line shown in every panel.
CAUTION = (
    "Results are estimates from generic material data; verify the temperature rise of a real core by test. "
    "Capturing converter waveforms means working near hazardous voltages: use isolated or differential probes "
    "and follow local electrical codes and licensed practice."
)

_LABEL = {"description_width": "initial"}


class QuantityText(widgets.Text):
    """A text box for a quantity with units (``"25 mm2"``, ``"100k"``), read as SI.

    Parameters
    ----------
    value : str
        Initial text.
    unit : str
        SI unit of the result (``"m2"``, ``"Hz"``, ``""`` for a plain number).
    name : str
        Parameter name used in error messages.
    description : str
        Label shown beside the box (carry the expected unit in it).

    Notes
    -----
    ``continuous_update`` is False: the value changes on Enter or when the box
    loses focus, not on every keystroke. :meth:`si` raises ``ValueError``
    naming the parameter and the text when it cannot be read.
    """

    def __init__(self, value: str, *, unit: str, name: str, description: str, **kwargs):
        kwargs.setdefault("continuous_update", False)
        kwargs.setdefault("style", _LABEL)
        kwargs.setdefault("layout", widgets.Layout(width="260px"))
        super().__init__(value=value, description=description, **kwargs)
        self.unit = unit
        self.quantity_name = name

    def si(self) -> float:
        """The box's quantity in SI units."""
        return parse_quantity(self.value, self.unit, name=self.quantity_name)


class Field(widgets.HBox):
    """A control with its message beside it: red and explained while its input is invalid.

    Parameters
    ----------
    control : ipywidgets.Widget
        The control (text box, slider, dropdown, or a :class:`LogValue`).
    """

    def __init__(self, control, **kwargs):
        self.control = control
        self.message = widgets.HTML(value="", layout=widgets.Layout(margin="0 0 0 6px"))
        super().__init__([control, self.message], **kwargs)
        self.add_class("fluxheat-field")

    def mark(self, text: str | None):
        """Show ``text`` beside the control and mark it invalid; None clears both."""
        target = self.control.text if isinstance(self.control, LogValue) else self.control
        if text:
            self.message.value = (f'<span class="fluxheat-field-error" style="color:#b00020;font-weight:600">'
                                  f'&#10007; {html.escape(text)}</span>')
            target.add_class(INVALID_CLASS)
            self.add_class(INVALID_CLASS)
            if hasattr(target, "layout"):
                target.layout.border = "2px solid #b00020"
        else:
            self.message.value = ""
            target.remove_class(INVALID_CLASS)
            self.remove_class(INVALID_CLASS)
            if hasattr(target, "layout"):
                target.layout.border = None

    def note(self, text: str | None):
        """A neutral note beside the control (e.g. a value capped to the material); None clears it."""
        if INVALID_CLASS in self._dom_classes:
            return
        self.message.value = (f'<span class="fluxheat-field-note" style="color:#6b4b00">{html.escape(text)}</span>'
                              if text else "")


class LogValue(widgets.HBox):
    """A positive value set on a log slider (2 % per arrow press) or typed exactly in a text box.

    Parameters
    ----------
    value : float
        Initial value in the display unit.
    min, max : float
        Slider range in the display unit (a typed value outside it widens the range).
    description : str
        Label with the display unit in brackets, e.g. ``"thickness d [mm]"``.
    unit : str
        SI unit of the quantity, for text typed with a unit (``"0.2 mm"``, ``"50 mT"``).
    scale : float
        SI value of one display unit (1e-3 for mm).
    name : str
        Parameter name for error messages.

    Attributes
    ----------
    value : float
        The value used (display unit): exactly what was typed, or the slider position
        rounded to the four figures the box shows. Set it from code to drive the panel.
    error : str
        The reason the typed text is not used ("" while it is valid).
    slider, text : ipywidgets widgets
        The two faces; the panel reads only ``value``.

    Notes
    -----
    The browser snaps a value set from code to the slider's grid and sends the snapped
    value back, sometimes late (after the kernel has set the next value). A slider report
    within half a step of any value the kernel placed on the slider since the last real move
    is such an echo and is ignored, so a typed 0.2 stays 0.2 (not 0.1984).
    """

    value = traitlets.Float()
    error = traitlets.Unicode("")

    def __init__(self, value: float, *, min: float, max: float, description: str, unit: str, scale: float = 1.0,
                 name: str, slider_width: str = "330px", description_width: str = "170px"):
        self.unit = unit
        self.scale = float(scale)
        self.quantity_name = name
        self._syncing = False
        lo, hi = math.log10(min), math.log10(max)
        self.slider = widgets.FloatLogSlider(value=value, base=10, min=lo, max=hi, step=LOG_STEP,
                                             description=description, readout=False, continuous_update=True,
                                             style={"description_width": description_width},
                                             layout=widgets.Layout(width=slider_width))
        self.text = widgets.Text(value=self._show(value), continuous_update=False,
                                 layout=widgets.Layout(width="100px"), tooltip="type an exact value")
        super().__init__([self.slider, self.text])
        self.set_trait("value", float(value))
        self._placed = [float(value)]  # values put on the slider from the kernel, whose echoes may still come
        self.slider.observe(self._slid, names="value")
        self.text.observe(self._typed, names="value")
        self.observe(self._set, names="value")

    @staticmethod
    def _show(v: float) -> str:
        return f"{v:.4g}"

    @property
    def description(self) -> str:
        return self.slider.description

    @property
    def disabled(self) -> bool:
        return self.slider.disabled

    @disabled.setter
    def disabled(self, flag: bool):
        self.slider.disabled = self.text.disabled = bool(flag)

    def _place_slider(self, v: float):
        lv = math.log10(v)
        if lv < self.slider.min:
            self.slider.min = math.floor(lv)
        if lv > self.slider.max:
            self.slider.max = math.ceil(lv)
        self._placed = [*self._placed[-15:], float(v)]
        self.slider.value = v

    def _set(self, change):  # value set from code
        if self._syncing:
            return
        self._syncing = True
        try:
            self.error = ""
            self.text.value = self._show(change["new"])
            self._place_slider(change["new"])
        finally:
            self._syncing = False

    def _slid(self, change):
        if self._syncing:
            return
        new = float(change["new"])
        if new <= 0:
            return
        half = 0.5 * LOG_STEP * 1.001
        for placed in self._placed:
            if abs(math.log10(new) - math.log10(placed)) <= half:
                return  # the browser's echo of a value set from code or typed (possibly a late one)
        shown = float(self._show(new))
        self._placed = []  # a real move: earlier echoes no longer matter
        self._syncing = True
        try:
            self.text.value = self._show(shown)
            self.error = ""
            self.value = shown
        finally:
            self._syncing = False

    def parse(self, text: str) -> float:
        """Text of the box -> value in the display unit (a bare number is in the display unit)."""
        t = str(text).strip()
        try:
            v = float(t)
        except ValueError:
            v = parse_quantity(t, self.unit, name=self.quantity_name) / self.scale
        if not math.isfinite(v) or v <= 0:
            raise ValueError(f"{self.quantity_name} must be a positive number, got {text!r}")
        return v

    def _typed(self, change):
        if self._syncing:
            return
        try:
            v = self.parse(change["new"])
        except ValueError as exc:
            self.error = str(exc)
            return
        self._syncing = True
        try:
            self.error = ""
            self.value = v
            self._place_slider(v)
        finally:
            self._syncing = False


def caution_widget() -> widgets.HTML:
    """The caution line as a small HTML widget."""
    return widgets.HTML(
        f'<div style="font-size:0.95em;color:#5a3a00;background:#fff6e0;border-left:4px solid #CCBB44;'
        f'padding:4px 8px;margin-top:4px">&#9888; {html.escape(CAUTION)}</div>'
    )


def heading(text: str, note: str = "") -> widgets.HTML:
    """Panel heading with an optional one-line note."""
    extra = f'<div style="color:#444;font-size:1.0em">{html.escape(note)}</div>' if note else ""
    return widgets.HTML(f'<div style="font-size:1.35em;font-weight:600;margin:2px 0">{html.escape(text)}</div>{extra}')


class ExportBar:
    """Folder and file-name boxes, a replace switch and one button writing the report.

    The button writes ``<name>.html`` (inputs, results, statements, warnings, cautions and
    interactive plots; opens offline) with ``<name>.json`` and ``<name>.csv`` beside it.
    An existing name is never overwritten unless "replace" is ticked: the next free name
    (``name-2``) is used and shown.

    Parameters
    ----------
    export : callable
        ``export(folder, stem, replace=...) -> dict of paths``; the panel's export method.
    report_error : callable
        ``report_error(exc)``; shows an exception in the panel's error area.
    stem : str
        Default file name without extension.
    folder : str, optional
        Default folder: :func:`workbench.report.default_export_folder` (outside the repository).
    """

    def __init__(self, export, report_error, *, stem: str, folder: str | None = None):
        self._export = export
        self._report_error = report_error
        self.folder = widgets.Text(value=str(folder or default_export_folder()), description="export folder",
                                   style=_LABEL, layout=widgets.Layout(width="380px"))
        self.stem = widgets.Text(value=stem, description="file name", style=_LABEL,
                                 layout=widgets.Layout(width="260px"))
        self.replace = widgets.Checkbox(value=False, description="replace existing files", indent=False,
                                        layout=widgets.Layout(width="180px"))
        self.button = widgets.Button(description="Export report", icon="download",
                                     layout=widgets.Layout(width="170px"),
                                     tooltip="A report page with inputs, results, warnings and plots (opens offline), "
                                             "and the same record as JSON and CSV")
        self.status = widgets.HTML()
        self.button.on_click(self._clicked)
        self.widget = widgets.VBox([widgets.HBox([self.folder, self.stem, self.replace, self.button]), self.status])

    def _clicked(self, _button=None):
        try:
            paths = self._export(self.folder.value, self.stem.value, replace=bool(self.replace.value))
        except Exception as exc:  # shown in the panel, not swallowed
            self.status.value = ('<span style="color:#a00">export failed: '
                                 f'{html.escape(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)}</span>')
            self._report_error(exc)
            return
        listed = ", ".join(html.escape(Path(p).name) for p in paths.values())
        folder = html.escape(str(Path(paths["html"]).parent))
        renamed = Path(paths["html"]).stem != self.stem.value
        extra = " (a file of that name existed: written under a new name)" if renamed else ""
        self.status.value = f'<span style="color:#225522">written in {folder}: {listed}{extra}</span>'
