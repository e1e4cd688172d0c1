"""Helpers shared by the fits: distinct values, Student's t intervals, covariance, table checks."""
from __future__ import annotations

import math

import numpy as np
from scipy import stats

from workbench.analysis.loss_table import LossTable

_LEVEL = 0.95
_ALPHA_BOUNDS = (0.05, 5.0)
_BETA_BOUNDS = (0.05, 6.0)


def _n_distinct(x, rtol=1e-6) -> int:
    """Number of distinct values, treating values within rtol (relative) as equal."""
    s = np.sort(np.asarray(x, dtype=float))
    if s.size == 0:
        return 0
    gaps = np.diff(s) > rtol * np.abs(s[1:])
    return int(1 + gaps.sum())


def _t_quantile(level: float, dof: int) -> float:
    if dof <= 0:
        return math.nan
    return float(stats.t.ppf(0.5 + level / 2, dof))


def _interval(value: float, std: float, tq: float) -> tuple[float, float]:
    if not (math.isfinite(std) and math.isfinite(tq)):
        return (math.nan, math.nan)
    return (float(value - tq * std), float(value + tq * std))


def _covariance(jac: np.ndarray, residuals: np.ndarray, dof: int) -> tuple[np.ndarray, float]:
    """s^2 (J^T J)^-1 and s^2 = sum r^2 / dof (NaN when dof = 0)."""
    p = jac.shape[1]
    if dof <= 0:
        return np.full((p, p), np.nan), math.nan
    s2 = float(residuals @ residuals) / dof
    # pseudo-inverse via SVD, as scipy.optimize.curve_fit does
    _, sv, vt = np.linalg.svd(jac, full_matrices=False)
    thresh = np.finfo(float).eps * max(jac.shape) * (sv[0] if sv.size else 0.0)
    sv = sv[sv > thresh]
    vt = vt[: sv.size]
    cov = (vt.T / sv**2) @ vt
    if sv.size < p:
        cov = np.full((p, p), np.inf)
    return cov * s2, s2


def _check_table(table) -> LossTable:
    if not isinstance(table, LossTable):
        raise ValueError(f"table must be a LossTable, got {type(table).__name__}")
    for name, unit in (("h_dc", "A/m"), ("b_dc", "T")):
        bias = getattr(table, name, None)
        if bias is not None and np.ptp(bias) > 1e-6 * max(float(np.max(np.abs(bias))), 1e-12):
            levels = np.unique(np.round(bias, 9))
            raise ValueError(
                f"{table.source}: rows at {levels.size} DC-bias levels ({name} {levels.min():g}-{levels.max():g} {unit}) "
                "would be pooled into one set: fit each level with fit_bias (workbench.fitting), or keep one level"
            )
    return table


def _range_message(out_f, out_b, out_t, freq_range, b_range, temp_range) -> str:
    n = int(np.count_nonzero(out_f | out_b | out_t))
    if n == 0:
        return ""
    parts = []
    if out_f.any():
        parts.append(f"frequency outside {freq_range[0]:.4g}..{freq_range[1]:.4g} Hz")
    if out_b.any():
        parts.append(f"b_peak outside {b_range[0]:.4g}..{b_range[1]:.4g} T")
    if out_t.any():
        parts.append(f"temperature outside {temp_range[0]:.4g}..{temp_range[1]:.4g} degC")
    total = out_f.size
    return f"extrapolation: {n} of {total} points lie outside the fitted data ({'; '.join(parts)})"
