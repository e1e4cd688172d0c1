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
* **Errors are shown, never swallowed.** An exception in ``_refresh`` goes to the
  ``panel.errors`` Output widget and ``panel.last_error``; the plots keep the last
  good result.
* **No side effects at import or in constructors:** no ``display()``, no
  ``output_notebook()``. Notebooks call
  ``bokeh.io.output_notebook(resources=INLINE, hide_banner=True)`` themselves.
* **Log sliders** use fine steps (``step=0.001`` in the exponent): the browser
  snaps a value set from code to the slider grid and sends the snapped value back.
* **Look:** colours, dashes and fonts from :mod:`workbench.ui.style` (P. Tol's
  colour-blind-safe "bright" scheme; each loss part keeps its colour in every
  panel); log axes where the physics is log-log; axis labels with units; a hover
  readout; ``continuous_update=False`` on controls whose recompute is heavy.
* **Every panel shows** the caution line (:func:`~workbench.ui.controls.caution_widget`)
  and an export bar (:class:`~workbench.ui.controls.ExportBar`) wired to
  ``PanelBase.export``, which writes ``record()`` to JSON, ``table()`` to CSV and
  ``plots`` to standalone HTML through :mod:`workbench.report` (atomic writes).
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
