"""Interactive panels over the library (ipywidgets + bokeh through jupyter_bokeh).

This is the only layer that imports widgets or bokeh. Every number a panel
shows comes from a library function, so the same analysis runs in a script.

Conventions for a panel (follow them when adding one, e.g. a fitting panel)
--------------------------------------------------------------------------
* **State without widgets.** Inputs are a frozen dataclass in SI units that
  validates itself (``ValueError`` naming the parameter and the value); a pure
  function turns it into a *view*: the plotted columns and texts
  (:mod:`workbench.ui.state`). Scripts and benchmarks call that function.
* **View class** deriving from :class:`workbench.ui.base.PanelBase`:
  ``self.controls`` is a namespace of widgets (``panel.controls.b_peak.value = 0.2``
  drives the panel from code); ``self.widget`` is what a notebook displays.
  Quantities typed with units use :class:`~workbench.ui.controls.QuantityText`
  (``"25 mm2"``, ``"100k"``, parsed by :mod:`workbench.units`). Slider titles
  carry the unit in brackets.
* **Build once, update as a whole.** Figures (from
  :func:`workbench.ui.style.new_figure`, each with a ``name=`` a browser test can
  find) and their ``ColumnDataSource`` are built in the constructor. Every
  control is routed through the one ``_update()`` (``self._wire()``), which calls
  the subclass's ``_refresh()``; ``_refresh`` replaces ``source.data`` with a new
  dict, never appends. ``_update()`` runs once in the constructor *before* the
  ``jupyter_bokeh.BokehModel`` is made, so the page starts from the first result
  (later changes travel as document events).
  Use ``with panel.hold():`` to change several controls with one recompute.
* **Errors at the control, never swallowed.** Each shown control sits in a
  :class:`~workbench.ui.controls.Field` (``self.field(name)``) and ``settings()`` reads
  controls through ``self._read(name, ...)``; a ``ValueError`` there, or an
  :class:`~workbench.ui.state.InputError` naming settings (mapped to controls by
  ``param_controls``), marks that control red with the message beside it. The message
  also goes to ``panel.errors`` (shown under the controls) and ``panel.last_error``, and
  the results (``panel.results_box``) are hidden with a notice until the inputs are valid.
* **No side effects at import or in constructors:** no ``display()``, no
  ``output_notebook()``. Notebooks call
  ``bokeh.io.output_notebook(resources=INLINE, hide_banner=True)`` themselves.
* **Log quantities** use :class:`~workbench.ui.controls.LogValue`: a slider whose arrow
  step is 2 % and a text box whose typed value is used exactly; the browser's echoes of
  values set from code (snapped to the slider grid, sometimes late) are ignored.
* **Numbers** on screen, in hovers, on axes and in reports go through
  :mod:`workbench.report.numbers` (:func:`~workbench.report.numbers.eng`,
  :func:`~workbench.report.numbers.eng_column` for one unit per table column) and
  :mod:`workbench.report.plotting` (tick and hover formatters by the same rule).
* **Look:** colours, dashes and fonts from :mod:`workbench.ui.style` (P. Tol's
  colour-blind-safe "bright" scheme for the loss parts, each keeping its colour in every
  panel; Okabe & Ito's palette for materials, a material keeping its colour for the
  panel's life); log axes where the physics is log-log; axis labels with units; a hover
  readout; ``continuous_update=False`` on controls whose recompute is heavy.
* **Every panel shows** the caution line (:func:`~workbench.ui.controls.caution_widget`)
  and an export bar (:class:`~workbench.ui.controls.ExportBar`) wired to
  ``PanelBase.export``, which writes the report page (``record()`` with its inputs, table,
  statements, warnings and cautions, and the panel's ``plots``; opens offline) with the
  JSON and the CSV (``table()``) beside it through :func:`workbench.report.write_report`:
  never over an existing file unless "replace" is ticked, by default into
  :func:`workbench.report.default_export_folder` (outside the repository).
* **Tests** are plain pytest (``tests/test_ui_<panel>.py``): set ``control.value``,
  assert on ``panel.view`` / ``source.data`` against values computed outside the
  panel; the browser test only proves that a panel renders and responds.

Panels
------
:class:`FrequencyPanel`
    Loss parts against frequency, the eddy/hysteresis crossover, energy per cycle.
:class:`ComparisonPanel`
    Several materials: loss at one flux and the f * B_peak reachable at one loss density.
:class:`CapturePanel`
    A captured waveform: one averaged period, B-H loop, breakdown, measured vs predicted.
:class:`FitPanel`
    A measured loss table against a fitted model, with intervals, residuals and saving.
"""
from __future__ import annotations

import importlib

__all__ = ["FrequencyPanel", "ComparisonPanel", "CapturePanel", "FitPanel", "ThermalPanel"]

_PANELS = {
    "FrequencyPanel": "workbench.ui.frequency",
    "ComparisonPanel": "workbench.ui.compare",
    "CapturePanel": "workbench.ui.capture",
    "FitPanel": "workbench.ui.fit_panel",
    "ThermalPanel": "workbench.ui.thermal",
}


def __getattr__(name):
    # panels load on first use, so importing workbench.ui.state needs no widget stack
    if name in _PANELS:
        return getattr(importlib.import_module(_PANELS[name]), name)
    raise AttributeError(f"module 'workbench.ui' has no attribute {name!r}")
