"""Capture panel: one averaged period of a captured waveform, its B-H loop and the loss breakdown."""
from __future__ import annotations

import dataclasses
import hashlib
import html
import io
from pathlib import Path

import ipywidgets as widgets
from bokeh.layouts import column
from bokeh.models import ColumnDataSource, HoverTool
from jupyter_bokeh import BokehModel

import workbench
from workbench.capture import read_capture
from workbench.materials import get_material, list_materials
from workbench.report import file_entry, material_entry
from workbench.report.numbers import eng_column
from workbench.report.plotting import apply_axis_format, hover_formatter
from workbench.ui.base import PanelBase
from workbench.ui.controls import ExportBar, QuantityText, caution_widget, heading
from workbench.ui.state import (
    READER_DECIMALS,
    READER_DELIMITERS,
    CaptureSettings,
    CaptureView,
    InputError,
    ReaderSettings,
    capture_presets,
    capture_view,
)
from workbench.ui.style import ROLE_COLOURS, new_figure, style_figure

__all__ = ["CapturePanel", "demo_capture_folder", "demo_captures"]

_NO_MODEL = "(no model)"
_UPLOAD_PREFIX = "uploaded: "
_BOX = {"style": {"description_width": "250px"}, "layout": widgets.Layout(width="430px")}
#: Reads kept in memory (one per capture and reader options; the oldest is dropped).
_CACHE_SIZE = 4
#: Options of the analysis named in its messages -> the control that sets it.
_OPTION_CONTROLS = (("turns", "--turns"), ("sense_turns", "--sense-turns"), ("area", "--area"), ("volume", "--volume"),
                    ("path_length", "--path-length"), ("temperature", "--temperature"), ("deskew", "--deskew"),
                    ("winding_resistance", "--winding-resistance"), ("h_dc", "--h-dc"))


def demo_capture_folder() -> Path:
    """Folder of the bundled demo captures (``data/captures`` of a source checkout)."""
    return Path(workbench.__file__).resolve().parents[1] / "data" / "captures"


def demo_captures() -> list[str]:
    """File names of the bundled demo captures (invented data), sorted."""
    folder = demo_capture_folder()
    if not folder.is_dir():
        return []
    return sorted(p.name for p in folder.iterdir() if p.suffix.lower() in (".csv", ".npz"))


class CapturePanel(PanelBase):
    """A captured converter waveform: averaged period, B-H loop, detected frequency, loss breakdown.

    Parameters
    ----------
    capture : str, optional
        File name of a bundled demo capture (see :func:`demo_captures`) to load at start;
        default the two-winding demo (it has a B-H loop and a measured loss). Its ``analyse with`` line fills the
        geometry boxes (so does an uploaded file's, when it has one).
    turns, sense_turns, area, volume, path_length : str, optional
        Geometry as typed (``"20"``, ``"60 mm2"``, ``"4.2 cm3"``, ``"70 mm"``); given
        values override the capture's suggestions.
    material : str, optional
        Library material for the prediction.
    deskew, winding_resistance, h_dc : str, optional
        Probe deskew (``"3 ns"``), winding resistance of a single-winding capture
        (``"0.8"`` [ohm]) and a DC bias overriding the capture's own (``"60"`` [A/m]), as typed.
    delimiter, decimal, time_unit, channels : str, optional
        How the file is read (see :class:`workbench.ui.state.ReaderSettings`): ``"semicolon"``,
        ``"comma"``, ``"us"``, ``"CH1=sense voltage, CH2=current"``; default the reader's guesses.

    Attributes
    ----------
    widget : ipywidgets.VBox
        Display this.
    controls : types.SimpleNamespace
        ``capture, turns, sense_turns, area, volume, path_length, material, temperature, deskew,
        winding_resistance, h_dc, delimiter, decimal, time_unit, channels``.
    upload : ipywidgets.FileUpload
        Loads a CSV or .npz capture of one's own (live sessions only).
    source : bokeh.models.ColumnDataSource
        The averaged period (see :class:`workbench.ui.state.CaptureView`).
    view : workbench.ui.state.CaptureView
        Last result; ``view.analysis`` is the library's CaptureAnalysis.
    flux_figure, dbdt_figure, loop_figure : bokeh.plotting.figure
        Named ``"capture_flux"``, ``"capture_dbdt"``, ``"capture_bh_loop"``.
    """

    kind = "capture-analysis"
    export_stem = "capture-analysis"
    title = "Captured waveform"

    def __init__(self, capture: str | None = None, *, turns: str | None = None, sense_turns: str | None = None,
                 area: str | None = None, volume: str | None = None, path_length: str | None = None,
                 material: str | None = None, deskew: str | None = None, winding_resistance: str | None = None,
                 h_dc: str | None = None, delimiter: str = "detected", decimal: str = "detected", time_unit: str = "",
                 channels: str = ""):
        super().__init__()
        self._captures = {}  # (dropdown key, reader options) -> CaptureData (read once)
        self._uploads = {}  # dropdown key -> (file name, bytes) of an uploaded capture, read again on new options
        self._files = {}  # dropdown key -> file entry (name, size, SHA-256) for the report
        demos = demo_captures()
        options = list(demos) or ["(no demo captures found)"]
        preferred = "inverter_pwm_sisteel_50hz.csv"  # two-winding: B-H loop and measured loss
        start = capture or (preferred if preferred in demos else (demos[0] if demos else options[0]))
        if demos and start not in demos:
            raise ValueError(f"capture {start!r} is not a bundled demo capture; available: {', '.join(demos)}")
        c = self.controls
        c.capture = widgets.Dropdown(options=options, value=start, description="capture (invented demos)", **_BOX)
        c.capture.layout = widgets.Layout(width="600px")
        c.turns = QuantityText("", unit="", name="turns N1", description="turns N1 [-]", **_BOX)
        c.sense_turns = QuantityText("", unit="", name="sense turns N2", description="sense turns N2 [-] (optional)",
                                     **_BOX)
        c.area = QuantityText("", unit="m2", name="core area A_e", description="core area A_e [e.g. 25 mm2]", **_BOX)
        c.volume = QuantityText("", unit="m3", name="core volume V_e",
                                description="volume V_e [e.g. 3.2 cm3] (optional)", **_BOX)
        c.path_length = QuantityText("", unit="m", name="path length l_e", description="path length l_e [e.g. 70 mm]",
                                     **_BOX)
        c.material = widgets.Dropdown(options=[_NO_MODEL, *list_materials()], value=_NO_MODEL, description="material",
                                      **_BOX)
        c.temperature = QuantityText("", unit="degC", name="core temperature",
                                     description="core temperature [°C] (optional)", **_BOX)
        c.deskew = QuantityText("", unit="s", name="probe deskew", description="probe deskew [s, e.g. 3 ns]",
                                placeholder="optional", **_BOX)
        c.winding_resistance = QuantityText("", unit="ohm", name="winding resistance",
                                            description="winding resistance R [Ω]", placeholder="optional, V-I capture",
                                            **_BOX)
        c.h_dc = QuantityText("", unit="A/m", name="DC bias H_dc", description="DC bias H_dc [A/m]",
                              placeholder="from N I_dc / l_e", **_BOX)
        c.delimiter = widgets.Dropdown(options=list(READER_DELIMITERS), value=delimiter, description="column delimiter",
                                       **_BOX)
        c.decimal = widgets.Dropdown(options=list(READER_DECIMALS), value=decimal, description="decimal mark", **_BOX)
        c.time_unit = widgets.Text(value=time_unit, description="time unit [e.g. us]", placeholder="from the header",
                                   continuous_update=False, **_BOX)
        c.channels = widgets.Text(value=channels, description="channels [NAME=MEANING, ...]",
                                  placeholder="e.g. CH1=sense voltage, CH2=current, CH3=ignore",
                                  continuous_update=False, style={"description_width": "250px"},
                                  layout=widgets.Layout(width="680px"))
        self.upload = widgets.FileUpload(accept=".csv,.txt,.npz", multiple=False, description="Upload a capture",
                                         layout=widgets.Layout(width="190px"))

        self.source = ColumnDataSource(data={"t": [], "t_display": [], "b": [], "dbdt": [], "h": []})
        self._build_figures()
        self.summary_html = widgets.HTML()
        self.loss_html = widgets.HTML()
        self.warnings_html = widgets.HTML()
        self.export_bar = ExportBar(self.export, self.report_error, stem=self.export_stem)
        self.view: CaptureView | None = None

        c.capture.observe(self._capture_changed, names="value")
        self.upload.observe(self._uploaded, names="value")
        self._wire(skip=("capture",))
        overrides = {"turns": turns, "sense_turns": sense_turns, "area": area, "volume": volume,
                     "path_length": path_length, "material": material, "deskew": deskew,
                     "winding_resistance": winding_resistance, "h_dc": h_dc}
        for n in ("capture", "turns", "sense_turns", "area", "volume", "path_length", "material", "temperature",
                  "deskew", "winding_resistance", "h_dc", "delimiter", "decimal", "time_unit", "channels"):
            self.field(n)
        with self.hold():  # first result before the BokehModel is made, so the page starts with it
            if demos:
                self._apply_presets(start)
            for name, value in overrides.items():
                if value is not None:
                    getattr(c, name).value = value
            self._pending = True
        f = self.fields
        self.results_box.children = [self.summary_html, self.loss_html, BokehModel(self.plots), self.warnings_html]
        self.widget = widgets.VBox([
            heading("Captured waveform",
                    "One averaged period of flux, the B-H loop and where the loss goes; measured against predicted."),
            widgets.HBox([f["capture"], self.upload]),
            widgets.VBox([f[n] for n in ("turns", "sense_turns", "area", "volume", "path_length", "material",
                                         "temperature", "deskew", "winding_resistance", "h_dc")]),
            widgets.HTML('<div style="font-weight:600;margin-top:6px">Reading the file</div>'
                         '<div style="color:#444">The reader guesses these; set one where a guess is wrong '
                         '(applies to the chosen and uploaded files).</div>'),
            widgets.VBox([f[n] for n in ("delimiter", "decimal", "time_unit", "channels")]),
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
        self.flux_figure = f1 = new_figure("capture_flux", title="Flux density over one averaged period",
                                           x_label="time [ms]", y_label="flux density B [T]", height=300)
        self.dbdt_figure = f2 = new_figure("capture_dbdt", title="Rate of change of flux density",
                                           x_label="time [ms]", y_label="dB/dt [T/s]", height=260)
        f2.x_range = f1.x_range
        r1 = f1.line("t_display", "b", source=src, color=ROLE_COLOURS["signal"], line_width=3)
        r2 = f2.step("t_display", "dbdt", source=src, mode="after", color=ROLE_COLOURS["derivative"], line_width=2.5)
        f1.add_tools(HoverTool(renderers=[r1], mode="vline", tooltips=[("t", "@t{eng}"), ("B", "@b{eng}")],
                               formatters={"@t": hover_formatter("s"), "@b": hover_formatter("T")}))
        f2.add_tools(HoverTool(renderers=[r2], mode="vline", tooltips=[("t", "@t{eng}"), ("dB/dt", "@dbdt{eng}")],
                               formatters={"@t": hover_formatter("s"), "@dbdt": hover_formatter("T/s")}))
        self.loop_figure = f3 = new_figure("capture_bh_loop", title="B-H loop", x_label="field strength H [A/m]",
                                           y_label="flux density B [T]", width=560, height=460)
        r3 = f3.line("h", "b", source=src, color=ROLE_COLOURS["signal"], line_width=3)
        f3.add_tools(HoverTool(renderers=[r3], tooltips=[("H", "@h{eng}"), ("B", "@b{eng}")],
                               formatters={"@h": hover_formatter("A/m"), "@b": hover_formatter("T")}))
        for f in (f1, f2, f3):
            style_figure(f, legend=False)
        apply_axis_format(f1, x_unit="", y_unit="T")
        apply_axis_format(f2, x_unit="", y_unit="T/s")
        apply_axis_format(f3, x_unit="A/m", y_unit="T")
        self.plots = column(f1, f2, f3, name="capture_plots")

    # -- captures ------------------------------------------------------------------------
    def reader_settings(self) -> ReaderSettings:
        """The "reading the file" controls as :class:`~workbench.ui.state.ReaderSettings`."""
        c = self.controls
        return ReaderSettings(delimiter=c.delimiter.value, decimal=c.decimal.value, time_unit=c.time_unit.value,
                              channels=c.channels.value)

    @staticmethod
    def _read_error(exc: ValueError, reader: ReaderSettings, name: str) -> InputError:
        """A reader's error, marked at the option it names, else at the overrides that may cause it, else the file."""
        text = str(exc).replace("<buffer>", name, 1)
        low = text.lower()
        opts = reader.options()
        named = [n for n, hit in (("channels", "channels[" in low or "channels=" in low),
                                  ("time_unit", "time_unit" in opts and "'time'" in low and "unit" in low),
                                  ("delimiter", "delimiter" in low), ("decimal", "decimal" in low)) if hit]
        if not named:
            guessed = [n for n in ("delimiter", "decimal", "time_unit", "channels") if n in opts]
            if guessed:
                shown = ", ".join(f"{n.replace('_', ' ')} {getattr(reader, n)!r}" for n in guessed)
                text = f"{text} (read with {shown}; 'detected' or an empty box lets the reader guess)"
            named = guessed or ["capture"]
        return InputError(tuple(named), text)

    def _data(self, key: str, reader: ReaderSettings | None = None):
        """The capture ``key`` read with the reader options (once per capture and options)."""
        reader = self.reader_settings() if reader is None else reader
        cache = (key, reader.key())
        if cache not in self._captures:
            opts = reader.options()
            if key.startswith(_UPLOAD_PREFIX):
                if key not in self._uploads:
                    raise ValueError(f"the uploaded capture {key!r} is no longer in memory; upload it again")
                name, content = self._uploads[key]
                try:
                    data = dataclasses.replace(read_capture(io.BytesIO(content), **opts), source=name)
                except ValueError as exc:  # the reader names a buffer; name the uploaded file instead
                    raise self._read_error(exc, reader, name) from None
            else:
                path = demo_capture_folder() / key
                if not path.is_file():
                    raise ValueError(f"capture: no demo capture named {key!r} in {demo_capture_folder()}")
                try:
                    data = read_capture(path, **opts)
                except ValueError as exc:
                    raise self._read_error(exc, reader, key) from None
                if key not in self._files:
                    self._files[key] = file_entry(path, role="capture")
            while len(self._captures) >= _CACHE_SIZE:
                self._captures.pop(next(iter(self._captures)))
            self._captures[cache] = data
        return self._captures[cache]

    def _apply_presets(self, key: str):
        presets = capture_presets(self._data(key).metadata)
        if key.startswith(_UPLOAD_PREFIX) and not presets:
            return  # a file of one's own without an "analyse with" line keeps the boxes as typed
        for name in ("turns", "sense_turns", "area", "volume", "path_length"):
            getattr(self.controls, name).value = presets.get(name, "")
        if "material" in presets and presets["material"] in self.controls.material.options:
            self.controls.material.value = presets["material"]

    _listing = False

    def _capture_changed(self, change):
        if self._listing:
            return
        try:
            with self.hold():
                self._apply_presets(change["new"])
                self._pending = True
        except Exception as exc:  # shown in the panel, never swallowed
            self.report_error(exc)

    def load_bytes(self, name: str, content: bytes):
        """Load a capture from the bytes of a file (what the upload button does) and select it.

        The file is read with the panel's reader options (and read again when they change);
        one it cannot be read with them is refused with the reader's message naming ``name``.
        """
        key = f"{_UPLOAD_PREFIX}{name}"
        content = bytes(content)
        previous = self._uploads.get(key)
        self._uploads[key] = (name, content)
        for cache in [k for k in self._captures if k[0] == key]:
            del self._captures[cache]
        try:
            self._data(key)
        except ValueError:
            if previous is None:
                del self._uploads[key]
            else:
                self._uploads[key] = previous
            raise
        self._files[key] = {"role": "capture (uploaded)", "name": name, "path": None, "bytes": len(bytes(content)),
                            "sha256": hashlib.sha256(bytes(content)).hexdigest()}
        dd = self.controls.capture
        if dd.value == key:  # the same name uploaded again: show the new content
            self._update()
            return
        if key not in dd.options:
            self._listing = True  # new options move the selection to the first one: no presets from it
            try:
                dd.options = [*[o for o in dd.options if not str(o).startswith("(no demo")], key]
            finally:
                self._listing = False
        dd.value = key

    def _uploaded(self, change):  # live sessions only: the browser sends the file
        files = change["new"]
        if not files:
            return
        item = files[0]
        try:
            self.load_bytes(item["name"], item["content"])
        except Exception as exc:
            self.report_error(exc)

    # -- behaviour -----------------------------------------------------------------------
    def settings(self) -> CaptureSettings:
        """The boxes read into SI settings (empty boxes are None; the reader options are in :meth:`reader_settings`)."""
        c = self.controls

        def opt(name):
            box = getattr(c, name)
            return self._read(name, lambda: box.si() if box.value.strip() else None)

        material = None if c.material.value == _NO_MODEL else c.material.value
        return CaptureSettings(turns=opt("turns"), sense_turns=opt("sense_turns"), area=opt("area"),
                               volume=opt("volume"), path_length=opt("path_length"), material=material,
                               temperature=opt("temperature"), deskew=opt("deskew"),
                               winding_resistance=opt("winding_resistance"), h_dc=opt("h_dc"))

    def _refresh(self):
        settings = self.settings()
        reader = self.reader_settings()
        data = self._read("capture", lambda: self._data(self.controls.capture.value, reader))
        try:
            view = capture_view(data, settings)
        except ValueError as exc:  # the analysis names the option it misses: mark that box
            text = str(exc)
            hits = [n for n, key in _OPTION_CONTROLS if key in text]
            empty = [n for n in hits if not getattr(self.controls, n).value.strip()]
            if hits:  # mark the boxes left empty among those named, else all named
                raise InputError(tuple(empty or hits), text) from None
            raise
        self.view = view
        self.source.data = dict(view.period)
        for f in (self.flux_figure, self.dbdt_figure):
            f.xaxis.axis_label = f"time in the period [{view.time_unit}]"
        # no current channel: no loop, and no empty box for it
        self.loop_figure.visible = view.has_loop
        self.summary_html.value = f'<div style="font-size:1.1em" class="fluxheat-capture-summary">{html.escape(view.summary)}</div>'
        self.loss_html.value = self._loss_table(view)
        a = view.analysis
        items = [*(("warning", w) for w in a.warnings), *(("note", n) for n in a.notes)]
        if a.skew_sensitivity is not None and not any("skew" in t or "delay" in t for _, t in items):
            items.append(("note", f"a 1 ns delay of the current probe changes the measured loss by "
                                  f"{100 * a.skew_sensitivity:.2g} %; deskew the probes before trusting it"))
        self.warnings_html.value = "".join(
            f'<div style="color:{"#a33" if kind == "warning" else "#6b4b00"}">&#9656; {kind}: {html.escape(text)}</div>'
            for kind, text in items)

    @staticmethod
    def _loss_columns(view):
        cols = [("loss", None), ("loss density", "W/m3"), ("specific loss", "W/kg"), ("in this core", "W")]
        rows = view.loss_rows
        return [(i, name, unit) for i, (name, unit) in enumerate(cols)
                if unit is None or any(r[i] is not None for r in rows)]

    @classmethod
    def _loss_table(cls, view: CaptureView) -> str:
        rows = view.loss_rows
        if not rows:
            return '<div class="fluxheat-loss-table">Choose a material for a prediction.</div>'
        heads, texts = [], []
        for i, name, unit in cls._loss_columns(view):
            if unit is None:
                heads.append(name)
                texts.append([r[i] for r in rows])
            else:
                shown, numbers = eng_column([r[i] for r in rows], unit, 4)
                heads.append(f"{name} [{shown}]")
                texts.append(numbers)
        head = "".join(f'<th style="padding:1px 10px;text-align:{"left" if j == 0 else "right"}">{html.escape(h)}</th>'
                       for j, h in enumerate(heads))
        body = "".join("<tr>" + "".join(
            f'<td style="padding:1px 10px;text-align:{"left" if j == 0 else "right"}">{html.escape(t[k])}</td>'
            for j, t in enumerate(texts)) + "</tr>" for k in range(len(rows)))
        return (f'<table class="fluxheat-loss-table" style="font-size:1.05em;border-collapse:collapse">'
                f"<tr>{head}</tr>{body}</table>")

    def frequency_panel(self, **kwargs):
        """A :class:`~workbench.ui.FrequencyPanel` sweeping this capture's averaged period.

        The flux levels of the period are kept and its time is scaled to each frequency
        (the library's ``sweep_frequency`` with a waveform). Keyword arguments go to the
        panel (e.g. ``operating_freqs="50, 400"``); the material defaults to the one chosen here.
        """
        from workbench.ui.frequency import FrequencyPanel

        if self.view is None or self.last_error is not None:
            raise ValueError("no capture analysed: correct the inputs first")
        material = kwargs.pop("material", None) or self.view.settings.material or "M270-35A"
        name = Path(str(self.view.analysis.source)).name
        return FrequencyPanel(material, waveform=self.view.analysis.waveform, waveform_name=name, **kwargs)

    # -- export --------------------------------------------------------------------------
    def record(self) -> dict:
        v = self.view
        a = v.analysis
        key = self.controls.capture.value
        inputs = {"capture": Path(str(a.source)).name, **v.settings.to_dict(),
                  "reading": self.reader_settings().to_dict()}
        results = {**a.to_dict(),
                   "loss_rows": [{"part": r[0], "w_m3": r[1], "w_kg": r[2], "w_in_core": r[3]} for r in v.loss_rows]}
        cols = self._loss_columns(v)
        keys = ("part", "loss_w_m3", "loss_w_kg", "loss_w")
        table = {"columns": [{"name": name, "unit": unit, "key": keys[i]} for i, name, unit in cols],
                 "rows": [[r[i] for i, _, _ in cols] for r in v.loss_rows]}
        notes = list(a.notes)
        if a.skew_sensitivity is not None and not any("skew" in n or "delay" in n for n in notes):
            notes.append(f"a 1 ns delay of the current probe changes the measured loss by "
                         f"{100 * a.skew_sensitivity:.2g} %; deskew the probes before trusting it")
        material = material_entry(get_material(v.settings.material)) if v.settings.material else None
        return self._record(inputs, results, files=[self._files[key]] if key in self._files else None,
                            material=material, table=table, statements=[v.summary], warnings=list(a.warnings),
                            notes=notes)

    def table(self) -> dict:
        p = self.view.period
        return {"time_s": p["t"], "b_t": p["b"], "dbdt_t_s": p["dbdt"], "h_a_m": p["h"]}

    @property
    def loss_text(self) -> str:
        """The loss table as plain text."""
        if self.view is None:
            return ""
        from workbench.report.numbers import eng

        return "\n".join(f"{label}: {eng(wm3, 'W/m3', 4)}" + ("" if wkg is None else f", {eng(wkg, 'W/kg', 3)}")
                         for label, wm3, wkg, _ in self.view.loss_rows)
