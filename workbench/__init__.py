"""Core-loss workbench: loss of magnetic cores under non-sinusoidal converter flux.

The core (waveforms, models, materials, analysis, capture) needs only numpy and
scipy; the widget panels in :mod:`workbench.ui` need the ``ui`` extra.
"""
__version__ = "0.1.0"
