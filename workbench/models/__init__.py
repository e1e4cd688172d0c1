"""Pure loss formulas: loss per unit volume [W/m^3], no I/O, no plotting."""
from workbench.models.loops import LoopSet, decompose_loops, loop_abs_dbdt_integrals, loop_path_integrals
from workbench.models.separation import (
    EXCESS_SINE_CONSTANT,
    MU_0,
    EddySpectrum,
    classical_eddy,
    classical_eddy_waveform,
    eddy_spectrum,
    excess_loss,
    excess_loss_waveform,
    hysteresis_loss,
    hysteresis_loss_waveform,
    skin_depth,
    skin_effect_factor,
)
from workbench.models.steinmetz import (
    I2gseResult,
    IgseResult,
    flat_intervals,
    i2gse,
    igse,
    igse_coefficient,
    igse_loops,
    mean_abs_cos_power,
    relaxation_factors,
    steinmetz,
    steinmetz_temperature_factor,
)

__all__ = [
    "EXCESS_SINE_CONSTANT",
    "MU_0",
    "EddySpectrum",
    "I2gseResult",
    "IgseResult",
    "LoopSet",
    "batch_thresholds",
    "classical_eddy",
    "classical_eddy_waveform",
    "decompose_loops",
    "eddy_spectrum",
    "excess_loss",
    "excess_loss_waveform",
    "flat_intervals",
    "hysteresis_loss",
    "hysteresis_loss_waveform",
    "i2gse",
    "igse_batch",
    "igse",
    "igse_coefficient",
    "igse_loops",
    "loop_abs_dbdt_integrals",
    "loop_path_integrals",
    "mean_abs_cos_power",
    "relaxation_factors",
    "skin_depth",
    "skin_effect_factor",
    "steinmetz",
    "steinmetz_temperature_factor",
]


def __getattr__(name: str):
    # the 2-D batch kernel loads on first use: most users of the models never need it
    if name in ("batch_thresholds", "igse_batch"):
        from workbench.models import batch

        return getattr(batch, name)
    raise AttributeError(f"module 'workbench.models' has no attribute {name!r}")
