"""What every panel shares: control wiring, one ``_update()``, errors at the control, stale results hidden, export."""
from __future__ import annotations

import contextlib
import html
import traceback
from pathlib import Path
from types import SimpleNamespace

import ipywidgets as widgets

from workbench.report import CAUTIONS, build_record, write_report
from workbench.ui.controls import Field, LogValue
from workbench.ui.state import InputError

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

    Errors at the control: wrap each control shown in :meth:`field` (a :class:`Field` with a
    message beside it) and read controls in ``settings()`` through :meth:`_read`; a
    ``ValueError`` then marks that control and shows its message beside it, and a
    settings check raising :class:`~workbench.ui.state.InputError` marks the controls
    named in ``param_controls[param]``. Until the inputs are valid again the results
    (``self.results_box``) are hidden and ``self.stale_html`` says why.
    """

    #: settings parameter -> names of the controls that set it (default: the same name)
    param_controls: dict = {}

    kind = "panel"
    export_stem = "panel"

    def __init__(self):
        self.controls = SimpleNamespace()
        self.errors = widgets.Output(layout=widgets.Layout(border="0px"))
        self.last_error: str | None = None
        self.fields: dict[str, Field] = {}
        self.stale_html = widgets.HTML()
        self.results_box = widgets.VBox()
        self.stale = False
        self._hold_depth = 0
        self._pending = False

    # -- wiring ------------------------------------------------------------------------
    def _wire(self, *, skip=()):
        """Route every control's ``value`` to :meth:`_update` (except names in ``skip``)."""
        for name, control in vars(self.controls).items():
            if name not in skip:
                control.observe(self._update, names="value")
                if isinstance(control, LogValue):
                    control.observe(self._update, names="error")

    def field(self, name: str) -> Field:
        """The control ``name`` with its message area beside it (made once, shown in the layout)."""
        if name not in self.fields:
            self.fields[name] = Field(getattr(self.controls, name))
        return self.fields[name]

    def _read(self, name: str, read=None):
        """Read control ``name`` (``read()``, default its value); a ValueError names that control."""
        control = getattr(self.controls, name)
        try:
            if isinstance(control, LogValue):
                if control.error:
                    raise ValueError(control.error)
                return control.value if read is None else read()
            return control.value if read is None else read()
        except InputError:
            raise
        except ValueError as exc:
            raise InputError((name,), str(exc)) from None

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
    def _controls_of(self, exc: InputError) -> list[str]:
        names = []
        for p in exc.params:
            for n in self.param_controls.get(p, (p,)):
                if n in self.fields and n not in names:
                    names.append(n)
        return names

    def report_error(self, exc: BaseException):
        """Show an exception: beside the control it concerns, in ``errors`` and ``last_error``; hide stale results."""
        if isinstance(exc, ValueError):
            text = f"Input problem: {exc}\n"
        else:
            text = "".join(traceback.format_exception(exc))
        self.last_error = text
        marked = self._controls_of(exc) if isinstance(exc, InputError) else []
        for name, f in self.fields.items():
            f.mark(str(exc) if name in marked else None)
        self.errors.outputs = ({"output_type": "stream", "name": "stderr", "text": text},)
        self._set_stale(True, "the marked input" if marked else "the input problem shown above")

    def clear_error(self):
        """Inputs valid again: unmark every control and show the results."""
        self.last_error = None
        for f in self.fields.values():
            f.mark(None)
        self.errors.outputs = ()
        self._set_stale(False)

    def _set_stale(self, stale: bool, what: str = ""):
        self.stale = stale
        self.results_box.layout.visibility = "hidden" if stale else "visible"
        self.stale_html.value = (
            f'<div class="fluxheat-stale" style="color:#b00020;font-weight:600;padding:2px 0">'
            f'Results hidden: they belong to earlier inputs. Correct {html.escape(what)} to see results again.</div>'
            if stale else "")

    # -- export ------------------------------------------------------------------------
    def record(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def table(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError

    def export(self, folder=None, stem: str | None = None, *, replace: bool = False) -> dict:
        """Write the report ``<stem>.html`` with ``<stem>.json`` and ``<stem>.csv`` beside it.

        Parameters
        ----------
        folder : str or os.PathLike, optional
            Destination folder (default :func:`workbench.report.default_export_folder`).
        stem : str, optional
            File name without extension (default the panel's).
        replace : bool
            Replace files of that name; otherwise a new name is chosen (``stem-2``).

        Returns
        -------
        dict
            ``{"html", "json", "csv"}`` paths actually written.

        Raises
        ------
        ValueError
            While the panel shows an input error (there is no consistent result to write).
        """
        from workbench.report import default_export_folder, report_paths

        if self.last_error is not None:
            raise ValueError(f"nothing to export: the panel shows an error ({self.last_error.strip()})")
        stem = (stem or self.export_stem).strip()
        if not stem or "/" in stem or "\\" in stem or stem.startswith("."):
            raise ValueError(f"file name must be a plain name without folders, got {stem!r}")
        folder = Path(folder).expanduser() if folder and str(folder).strip() else default_export_folder()
        html_path = write_report(self.record(), folder / f"{stem}.html", plots=self.plots, replace=replace)
        return report_paths(html_path)

    def _record(self, inputs: dict, results: dict, **sections) -> dict:
        sections.setdefault("title", f"{self.title} - fluxheat workbench")
        sections.setdefault("cautions", list(CAUTIONS))
        if sections.get("series") is None:
            sections["series"] = self.table()
        return build_record(self.kind, inputs, results, **sections)
