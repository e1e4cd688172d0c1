"""Analyses built on the models: breakdown, frequency sweeps, crossover, comparisons."""
from workbench.analysis.breakdown import LossBreakdown, breakdown
from workbench.analysis.shapes import SHAPES, make_shape
from workbench.analysis.sweep import CrossoverResult, FrequencySweep, crossover_frequency, sweep_frequency

__all__ = [
    "SHAPES",
    "CrossoverResult",
    "FrequencySweep",
    "LossBreakdown",
    "breakdown",
    "crossover_frequency",
    "make_shape",
    "sweep_frequency",
]
