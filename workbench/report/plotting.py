"""Axis ticks in engineering notation (bokeh), by the rule of :mod:`workbench.report.numbers`.

Used by the panels and by the report pages; bokeh is imported inside the functions.

The axis title carries the unit (``frequency f [Hz]``); each tick carries only the number
and its prefix: ``10``, ``100``, ``1k``, ``20k``, ``1M`` on a frequency axis, ``0.5``, ``1``,
``1.5`` on a flux axis (tesla takes no kilo), never ``1m`` for a megahertz or ``1.000e+5``.
Log axes get ticks at 1, 2 and 5 per decade when they span three decades or less, so a
20 Hz - 2 kHz range has more than two labels.
"""
from __future__ import annotations

from workbench.report.numbers import tick_prefixes

__all__ = ["tick_formatter", "hover_formatter", "log_ticker", "apply_axis_format", "PLOT_COLOURS"]

#: Colour cycle of report plots drawn from a spec (Okabe & Ito, "Color Universal Design", 2008).
PLOT_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")

_FORMAT_JS = """
const finite = ticks.filter((t) => Number.isFinite(t));
const span = finite.length ? Math.max(...finite.map((t) => Math.abs(t))) : 0;
if (!Number.isFinite(tick)) { return ""; }
if (span > 0 && Math.abs(tick) < 1e-9 * span) { return "0"; }
if (tick == 0) { return "0"; }
let chosen = exps[0], letter = letters[0];
for (let i = 0; i < exps.length; i++) {
    const m = Math.abs(tick) / Math.pow(10, exps[i]);
    if (Number(m.toPrecision(4)) >= 1) { chosen = exps[i]; letter = letters[i]; }
}
const mant = Number((tick / Math.pow(10, chosen)).toPrecision(4));
return String(mant) + letter;
"""

_LOG_TICKS_JS = """
const lo = Math.min(cb_data.start, cb_data.end), hi = Math.max(cb_data.start, cb_data.end);
if (!(lo > 0) || !(hi > lo)) { return []; }
const a = Math.floor(Math.log10(lo)), b = Math.ceil(Math.log10(hi));
const decades = Math.log10(hi / lo);
const mant = decades <= 1.2 ? [1, 1.5, 2, 3, 4, 5, 6, 7, 8, 9] : (decades <= 3.2 ? [1, 2, 5] : [1]);
const step = decades > 9 ? Math.ceil(decades / 9) : 1;
const out = [];
for (let e = a; e <= b; e++) {
    if (mant.length == 1 && (e - a) % step != 0) { continue; }
    for (const m of mant) {
        const t = Number((m * Math.pow(10, e)).toPrecision(12));
        if (t >= lo && t <= hi) { out.push(t); }
    }
}
return out;
"""

_LOG_MINOR_JS = """
const lo = Math.min(cb_data.start, cb_data.end), hi = Math.max(cb_data.start, cb_data.end);
if (!(lo > 0) || !(hi > lo)) { return []; }
const out = [];
for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) {
    for (let m = 1; m < 10; m++) {
        const t = m * Math.pow(10, e);
        if (t >= lo && t <= hi) { out.push(t); }
    }
}
return out;
"""


def tick_formatter(unit: str):
    """A bokeh tick formatter writing ticks as number + SI prefix for an axis in ``unit``.

    Parameters
    ----------
    unit : str
        SI unit of the axis values (``"Hz"``, ``"W/m3"``, ``"T"``, ...).

    Returns
    -------
    bokeh.models.CustomJSTickFormatter
    """
    from bokeh.models import CustomJSTickFormatter

    pairs = tick_prefixes(unit)
    return CustomJSTickFormatter(args={"exps": [e for e, _ in pairs], "letters": [s for _, s in pairs]},
                                 code=_FORMAT_JS)


_HOVER_JS = """
if (value == null || !Number.isFinite(value)) { return "–"; }
if (value == 0) { return "0 " + base; }
let chosen = exps[0], label = labels[0];
for (let i = 0; i < exps.length; i++) {
    if (Number((Math.abs(value) / Math.pow(10, exps[i])).toPrecision(4)) >= 1) { chosen = exps[i]; label = labels[i]; }
}
return (value / Math.pow(10, chosen)).toPrecision(4) + (label ? " " + label : "");
"""


def hover_formatter(unit: str):
    """A bokeh hover formatter showing a value with four figures, prefix and unit (``"865.2 Hz"``).

    Parameters
    ----------
    unit : str
        SI unit of the column.

    Returns
    -------
    bokeh.models.CustomJSHover
    """
    from bokeh.models import CustomJSHover

    from workbench.report.numbers import unit_label

    pairs = tick_prefixes(unit)
    shown = unit_label(unit)
    labels = [(letter + shown) if (letter or shown) else "" for _, letter in pairs]
    return CustomJSHover(args={"exps": [e for e, _ in pairs], "labels": labels, "base": shown}, code=_HOVER_JS)


def log_ticker():
    """A log-axis ticker: decades, plus 2 and 5 (or every integer) when the view spans few decades."""
    from bokeh.models import CustomJSTicker

    return CustomJSTicker(major_code=_LOG_TICKS_JS, minor_code=_LOG_MINOR_JS)


def apply_axis_format(fig, *, x_unit: str | None = None, y_unit: str | None = None):
    """Engineering tick labels (and the log ticker on log axes) on a bokeh figure, in place.

    Parameters
    ----------
    fig : bokeh.plotting.figure
        The figure.
    x_unit, y_unit : str, optional
        Units of the axes to format; None leaves that axis as it is.

    Returns
    -------
    bokeh.plotting.figure
        ``fig``.
    """
    from bokeh.models import LogScale

    for unit, axes, scale in ((x_unit, fig.xaxis, fig.x_scale), (y_unit, fig.yaxis, fig.y_scale)):
        if unit is None:
            continue
        for axis in axes:
            axis.formatter = tick_formatter(unit)
            if isinstance(scale, LogScale):
                axis.ticker = log_ticker()
    if isinstance(fig.x_scale, LogScale) and x_unit is not None:
        fig.xgrid.ticker = fig.xaxis[0].ticker
    if isinstance(fig.y_scale, LogScale) and y_unit is not None:
        fig.ygrid.ticker = fig.yaxis[0].ticker
    return fig
