"""Named synthetic flux shapes (sine, triangle, trapezoid), as offered by the command line and the panels.

A leaf above :mod:`workbench.waveforms`: the loss engine and every analysis build
their synthetic waveforms here, so "trapezoid, duty 0.8" means one thing everywhere.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from workbench import waveforms as wf

__all__ = ["SHAPES", "ShapeName", "ShapeSpec", "make_shape"]

#: Shapes that :func:`make_shape` builds; ``duty`` means what each constructor says.
SHAPES = ("sine", "triangle", "trapezoid")
ShapeName = Literal["sine", "triangle", "trapezoid"]


def make_shape(shape: str, *, b_peak: float, freq: float, duty: float = 0.5) -> wf.FluxWaveform:
    """Build one period of a named flux shape.

    Parameters
    ----------
    shape : {"sine", "triangle", "trapezoid"}
        Sine; triangle of a two-level voltage (duty = rising fraction); trapezoid of
        a three-level voltage (duty = fraction of the period with voltage applied).
    b_peak : float
        Peak flux density [T].
    freq : float
        Frequency [Hz].
    duty : float
        Duty cycle [-]; ignored for the sine.

    Returns
    -------
    FluxWaveform
        One period of the shape.

    Examples
    --------
    >>> w = make_shape("triangle", b_peak=0.1, freq=100e3, duty=0.25)
    >>> round(w.flux_pp, 6), round(w.freq)
    (0.2, 100000)
    """
    if shape == "sine":
        return wf.sine(b_peak, freq)
    if shape == "triangle":
        return wf.triangle(b_peak, freq, duty)
    if shape == "trapezoid":
        return wf.trapezoid(b_peak, freq, duty)
    raise ValueError(f"shape must be one of {', '.join(SHAPES)}; got {shape!r}")


@dataclass(frozen=True)
class ShapeSpec:
    """A synthetic waveform described by its name, peak flux, frequency and duty.

    Parameters
    ----------
    shape : {"sine", "triangle", "trapezoid"}
        Shape name.
    b_peak : float
        Peak flux density [T].
    freq : float
        Frequency [Hz].
    duty : float
        Duty cycle [-] (ignored for the sine).
    """

    shape: str
    b_peak: float
    freq: float
    duty: float = 0.5

    def waveform(self) -> wf.FluxWaveform:
        """One period of this shape (see :func:`make_shape`)."""
        return make_shape(self.shape, b_peak=self.b_peak, freq=self.freq, duty=self.duty)
