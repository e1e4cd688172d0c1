"""Shared look of the workbench plots: palette, roles, fonts and figure styling.

Palette
-------
The seven colours of the qualitative "bright" scheme in P. Tol, "Colour
schemes", SRON technical note SRON/EPS/TN/09-002, issue 3.2 (2021), which was
designed to stay distinct for the common forms of colour-vision deficiency and
in grey-scale print. Each loss part keeps its colour in every panel, and lines
that must still be told apart without colour also differ in dash pattern.
"""
from __future__ import annotations

__all__ = [
    "PALETTE",
    "ROLE_COLOURS",
    "ROLE_DASHES",
    "SERIES_DASHES",
    "FONT",
    "EXTRAPOLATED_FILL",
    "series_style",
    "MATERIAL_COLOURS",
    "MaterialStyles",
    "style_figure",
    "new_figure",
]

#: P. Tol's "bright" qualitative scheme (SRON/EPS/TN/09-002, 2021), in its published order.
PALETTE = ("#4477AA", "#EE6677", "#228833", "#CCBB44", "#66CCEE", "#AA3377", "#BBBBBB")

#: Colour of each loss part, the same in every panel.
ROLE_COLOURS = {
    "hysteresis": PALETTE[0],   # blue
    "classical": PALETTE[1],    # red
    "excess": PALETTE[2],       # green
    "total": "#222222",         # near-black: separation total
    "steinmetz": PALETTE[5],    # purple: iGSE / Steinmetz total
    "measured": PALETTE[3],     # yellow
    "marker": "#555555",        # crossover and knee markers
    "signal": PALETTE[0],
    "derivative": PALETTE[1],
}
#: Dash pattern of each loss part, so the parts read apart without colour too.
ROLE_DASHES = {
    "hysteresis": "solid",
    "classical": "dashed",
    "excess": "dotdash",
    "total": "solid",
    "steinmetz": "dotted",
}
#: Dash cycle for series (materials) beyond the seven colours.
SERIES_DASHES = ("solid", "dashed", "dotdash", "dotted")

#: Fill of the frequency bands outside a Steinmetz set's fitted range.
EXTRAPOLATED_FILL = "#999999"

#: Font sizes chosen to stay legible on a projector at 1024 px width.
FONT = {"title": "15pt", "axis_label": "14pt", "ticks": "12pt", "legend": "12pt", "label": "12pt"}


def series_style(i: int) -> tuple[str, str]:
    """Colour and dash of the i-th series (material) of a comparison plot."""
    colours = PALETTE[:6]  # the grey is kept for annotations
    return colours[i % len(colours)], SERIES_DASHES[(i // len(colours)) % len(SERIES_DASHES)]


def style_figure(fig, *, legend: bool = True):
    """Apply the workbench fonts and grid to a bokeh figure, in place; returns it."""
    fig.title.text_font_size = FONT["title"]
    for axis in (*fig.xaxis, *fig.yaxis):
        axis.axis_label_text_font_size = FONT["axis_label"]
        axis.axis_label_text_font_style = "normal"
        axis.major_label_text_font_size = FONT["ticks"]
    fig.grid.grid_line_alpha = 0.35
    fig.xgrid.minor_grid_line_color = "#dddddd"
    fig.xgrid.minor_grid_line_alpha = 0.4
    fig.ygrid.minor_grid_line_color = "#dddddd"
    fig.ygrid.minor_grid_line_alpha = 0.4
    fig.toolbar.logo = None
    fig.toolbar.autohide = True
    if legend and fig.legend:
        fig.legend.label_text_font_size = FONT["legend"]
        fig.legend.click_policy = "hide"
        fig.legend.background_fill_alpha = 0.85
        fig.legend.spacing = 0
        fig.legend.padding = 6
    return fig


def new_figure(name: str, *, title: str, x_label: str, y_label: str, x_log: bool = False, y_log: bool = False,
               width: int = 980, height: int = 380):
    """A bokeh figure with the workbench defaults and a ``name`` a browser test can find."""
    from bokeh.plotting import figure

    fig = figure(
        name=name, title=title, width=width, height=height,
        x_axis_type="log" if x_log else "linear", y_axis_type="log" if y_log else "linear",
        x_axis_label=x_label, y_axis_label=y_label,
        tools="pan,wheel_zoom,box_zoom,reset,save", active_scroll=None,
    )
    return style_figure(fig, legend=False)


#: Colours of materials in comparisons: the palette of M. Okabe and K. Ito, "Color Universal
#: Design (CUD): how to make figures and presentations that are friendly to colorblind people"
#: (2008), without its yellow (too pale on white).
MATERIAL_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")


class MaterialStyles:
    """Colour and dash of each material, kept for the life of a panel whatever else is selected.

    A material gets the next free colour the first time it is shown, so the first seven
    materials on screen all differ in colour (solid lines); later ones repeat the colours
    with another dash. Once given, a material's style never changes.

    Parameters
    ----------
    names : sequence of str, optional
        Materials to give styles to first, in order.
    """

    def __init__(self, names=()):
        self._styles: dict[str, tuple[str, str]] = {}
        for name in names:
            self.style(name)

    def style(self, name: str) -> tuple[str, str]:
        """(colour, dash) of ``name``.

        Parameters
        ----------
        name : str
            Material name.
        """
        if name not in self._styles:
            i = len(self._styles)
            n = len(MATERIAL_COLOURS)
            self._styles[name] = (MATERIAL_COLOURS[i % n], SERIES_DASHES[(i // n) % len(SERIES_DASHES)])
        return self._styles[name]
