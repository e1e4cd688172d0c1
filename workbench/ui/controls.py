"""Widget helpers shared by the panels: unit text boxes, the caution line, the export bar."""
from __future__ import annotations

import html

import ipywidgets as widgets

from workbench.units import parse_quantity

__all__ = ["CAUTION", "QuantityText", "caution_widget", "ExportBar", "heading"]

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
    """Folder and file-name boxes plus one button that writes JSON, CSV and HTML.

    Parameters
    ----------
    export : callable
        ``export(folder, stem) -> dict of paths``; the panel's export method.
    report_error : callable
        ``report_error(exc)``; shows an exception in the panel's error area.
    stem : str
        Default file name without extension.
    """

    def __init__(self, export, report_error, *, stem: str, folder: str = "exports"):
        self._export = export
        self._report_error = report_error
        self.folder = widgets.Text(value=folder, description="export folder", style=_LABEL,
                                   layout=widgets.Layout(width="300px"))
        self.stem = widgets.Text(value=stem, description="file name", style=_LABEL,
                                 layout=widgets.Layout(width="300px"))
        self.button = widgets.Button(description="Export JSON + CSV + HTML", icon="download",
                                     layout=widgets.Layout(width="230px"),
                                     tooltip="Inputs, results and package version to JSON and CSV; plots to a standalone HTML page")
        self.status = widgets.HTML()
        self.button.on_click(self._clicked)
        self.widget = widgets.VBox([widgets.HBox([self.folder, self.stem, self.button]), self.status])

    def _clicked(self, _button=None):
        try:
            paths = self._export(self.folder.value, self.stem.value)
        except Exception as exc:  # shown in the panel, not swallowed
            self.status.value = '<span style="color:#a00">export failed: see the message below</span>'
            self._report_error(exc)
            return
        listed = ", ".join(html.escape(str(p)) for p in paths.values())
        self.status.value = f'<span style="color:#225522">written: {listed}</span>'
