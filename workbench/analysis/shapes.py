"""Named synthetic waveform shapes, as offered by the command line and the panels."""
from __future__ import annotations

from workbench import waveforms as wf

#: Shapes that :func:`make_shape` builds; ``duty`` means what each constructor says.
SHAPES = ("sine", "triangle", "trapezoid")


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
    """
    if shape == "sine":
        return wf.sine(b_peak, freq)
    if shape == "triangle":
        return wf.triangle(b_peak, freq, duty)
    if shape == "trapezoid":
        return wf.trapezoid(b_peak, freq, duty)
    raise ValueError(f"shape must be one of {', '.join(SHAPES)}; got {shape!r}")
