"""Former home of the loss-table fits; they live in :mod:`workbench.fitting` now.

Kept so that ``from workbench.analysis.fitting import fit_steinmetz`` goes on working.
"""
from workbench.fitting import (  # noqa: F401
    SeparationFit,
    SteinmetzBands,
    SteinmetzFit,
    SteinmetzPrediction,
    TwoFrequencyFit,
    TwoFrequencyLevel,
    __all__,
    fit_separation,
    fit_steinmetz,
    fit_steinmetz_bands,
    fit_two_frequency,
    fitted_material,
    igse_shape_factor,
    save_fitted_material,
    separation_shape_constants,
)
