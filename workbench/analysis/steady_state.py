"""Former home of period detection and folding: now :mod:`workbench.capture.steady_state`.

Kept so that notebooks and older code importing from here keep working.
"""
from workbench.capture.steady_state import (
    DenoisedPeriod,
    FoldedPeriod,
    PeriodEstimate,
    denoise_period,
    detect_period,
    fold_periods,
    uniform_grid,
    uniform_step,
)

__all__ = [
    "DenoisedPeriod",
    "FoldedPeriod",
    "PeriodEstimate",
    "denoise_period",
    "detect_period",
    "fold_periods",
    "uniform_grid",
    "uniform_step",
]
