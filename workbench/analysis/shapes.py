"""Named synthetic waveform shapes: re-exported from :mod:`workbench.shapes` (their one home)."""
from workbench.shapes import SHAPES, ShapeSpec, make_shape

__all__ = ["SHAPES", "ShapeSpec", "make_shape"]
