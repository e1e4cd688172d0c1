"""Core-loss workbench: loss of magnetic cores under non-sinusoidal converter flux.

The public API, in one place (each name is loaded on first use, so ``import workbench``
stays light):

* waveforms: :class:`FluxWaveform`, :func:`sine`, :func:`triangle`, :func:`trapezoid`,
  :func:`pwm`, :func:`from_samples`, :func:`from_voltage`, :func:`make_shape`, :class:`ShapeSpec`
* materials: :func:`get_material`, :func:`list_materials`, :class:`Material`
* the loss engine: :func:`core_loss` (-> :class:`LossResult`), :func:`core_loss_sweep`
* analyses on it: :func:`sweep_frequency`, :func:`crossover_frequency`, :func:`compare_materials`
* captures: :func:`read_capture`, :func:`analyse_capture`, :func:`analyse_file`
* loss tables and fits: :func:`read_loss_table`, :func:`fit_steinmetz`, :func:`fit_separation`,
  :func:`fit_two_frequency`

The core needs only numpy and scipy; the widget panels in :mod:`workbench.ui` need the
``ui`` extra.
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

_PUBLIC = {
    "FluxWaveform": "workbench.waveforms",
    "sine": "workbench.waveforms",
    "triangle": "workbench.waveforms",
    "trapezoid": "workbench.waveforms",
    "pwm": "workbench.waveforms",
    "from_samples": "workbench.waveforms",
    "from_voltage": "workbench.waveforms",
    "make_shape": "workbench.shapes",
    "ShapeSpec": "workbench.shapes",
    "SHAPES": "workbench.shapes",
    "Material": "workbench.materials",
    "get_material": "workbench.materials",
    "list_materials": "workbench.materials",
    "core_loss": "workbench.engine",
    "core_loss_sweep": "workbench.engine",
    "LossResult": "workbench.engine",
    "BareSteinmetz": "workbench.engine",
    "sweep_frequency": "workbench.analysis.sweep",
    "crossover_frequency": "workbench.analysis.sweep",
    "compare_materials": "workbench.analysis.compare",
    "read_capture": "workbench.capture",
    "analyse_capture": "workbench.analysis.capture",
    "analyse_file": "workbench.analysis.capture",
    "read_loss_table": "workbench.analysis.loss_table",
    "fit_steinmetz": "workbench.fitting",
    "fit_separation": "workbench.fitting",
    "fit_two_frequency": "workbench.fitting",
}

__all__ = sorted(_PUBLIC) + ["__version__"]


def __getattr__(name: str):
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'workbench' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
