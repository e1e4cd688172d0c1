"""What every panel shares: control wiring, one ``_update()``, error display, export."""
from __future__ import annotations

import contextlib
import traceback
from types import SimpleNamespace

import ipywidgets as widgets

from workbench.report import build_record, write_bundle

__all__ = ["PanelBase"]


class PanelBase:
    """Base of the workbench panels (see :mod:`workbench.ui` for the conventions).

    Subclasses set ``kind`` and ``export_stem``, build ``self.controls`` (a
    namespace of widgets whose ``value`` drives the panel), their bokeh figures
    and sources, call :meth:`_wire` and then :meth:`_update` once, and implement

    * ``_refresh()``: read the controls, compute through the library, replace
      each ``source.data`` as a whole, update the text widgets;
    * ``record()``: inputs and results for export (a dict from
      :func:`workbench.report.build_record`);
    * ``table()``: the columns written to CSV;
    * ``plots``: the bokeh layout written to HTML.
    """

    kind = "panel"
    export_stem = "panel"

    def __init__(self):
        self.controls = SimpleNamespace()
        self.errors = widgets.Output(layout=widgets.Layout(border="0px"))
        self.last_error: str | None = None
        self._hold_depth = 0
        self._pending = False

    # -- wiring ------------------------------------------------------------------------
    def _wire(self, *, skip=()):
        """Route every control's ``value`` to :meth:`_update` (except names in ``skip``)."""
        for name, control in vars(self.controls).items():
            if name not in skip:
                control.observe(self._update, names="value")

    @contextlib.contextmanager
    def hold(self):
        """Change several controls and recompute once on leaving the block."""
        self._hold_depth += 1
        try:
            yield self
        finally:
            self._hold_depth -= 1
            if self._hold_depth == 0 and self._pending:
                self._pending = False
                self._update()

    def _update(self, change=None):
        """The one route from any control to the plots: recompute and show, or show the error."""
        if self._hold_depth:
            self._pending = True
            return
        try:
            self._refresh()
        except Exception as exc:  # shown in the panel, never swallowed
            self.report_error(exc)
        else:
            self.clear_error()

    def _refresh(self):  # pragma: no cover - abstract
        raise NotImplementedError

    # -- errors ------------------------------------------------------------------------
    def report_error(self, exc: BaseException):
        """Show an exception in the panel's error area and keep it in ``last_error``."""
        if isinstance(exc, ValueError):
            text = f"Input problem: {exc}\n"
        else:
            text = "".join(traceback.format_exception(exc))
        self.last_error = text
        self.errors.outputs = ({"output_type": "stream", "name": "stderr", "text": text},)

    def clear_error(self):
        self.last_error = None
        self.errors.outputs = ()

    # -- export ------------------------------------------------------------------------
    def record(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def table(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def export(self, folder, stem: str | None = None) -> dict:
        """Write ``<stem>.json``, ``<stem>.csv`` and ``<stem>.html`` of the current state into ``folder``.

        Returns the written paths by format. Raises ``ValueError`` while the panel
        shows an input error (there is no consistent result to write).
        """
        if self.last_error is not None:
            raise ValueError(f"nothing to export: the panel shows an error ({self.last_error.strip()})")
        return write_bundle(folder, stem or self.export_stem, self.record(), self.table(), self.plots,
                            title=f"{self.title} - fluxheat workbench")

    def _record(self, inputs: dict, results: dict) -> dict:
        return build_record(self.kind, inputs, results)
