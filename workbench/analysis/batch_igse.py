"""Former home of the batch iGSE kernel, now :mod:`workbench.models.batch` (re-exported here)."""
from workbench.models.batch import CHUNK_SAMPLES, MINOR_SAMPLES, _simd_exp_log, batch_thresholds, igse_batch  # noqa: F401

__all__ = ["igse_batch", "batch_thresholds", "CHUNK_SAMPLES", "MINOR_SAMPLES"]
