"""Fit loss-model parameters to a measured loss table.

Four fits, each returning a frozen result object with named fields and ``to_dict()`` (SI):

* :func:`fit_steinmetz` -- k, alpha, beta (and, with temperatures in the table, the
  quadratic temperature factor ct0, ct1, ct2), minimising the relative error; non-sine rows
  enter through the iGSE. Parameter covariance, 95 % intervals, prediction bands and
  extrapolation flags.
* :func:`fit_steinmetz_bands` -- split the frequency range into contiguous bands with one
  Steinmetz set each when a single set misses a relative-error tolerance.
* :func:`fit_separation` -- hysteresis (k_hyst, beta_hyst) and excess (k_excess) terms with
  the classical eddy term fixed by resistivity and thickness, or with an effective
  resistivity fitted too.
* :func:`fit_two_frequency` -- energy per cycle against frequency at each flux level:
  hysteresis energy (intercept), eddy slope and the crossover frequency.

:func:`fitted_material` and :func:`save_fitted_material` turn a fit into a user material.
"""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy import optimize, stats

from workbench.analysis.loss_table import LossTable
from workbench.models.separation import EXCESS_SINE_CONSTANT
from workbench.models.steinmetz import igse_coefficient

__all__ = [
    "SteinmetzFit",
    "SteinmetzPrediction",
    "SteinmetzBands",
    "SeparationFit",
    "TwoFrequencyLevel",
    "TwoFrequencyFit",
    "fit_steinmetz",
    "fit_steinmetz_bands",
    "fit_separation",
    "fit_two_frequency",
    "igse_shape_factor",
    "separation_shape_constants",
    "fitted_material",
    "save_fitted_material",
]

_LEVEL = 0.95
_ALPHA_BOUNDS = (0.05, 5.0)
_BETA_BOUNDS = (0.05, 6.0)


# --------------------------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------------------------
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


def _clean(x):
    """JSON-friendly: NaN/inf -> None, numpy -> Python, tuples -> lists."""
    if isinstance(x, dict):
        return {k: _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if isinstance(x, np.ndarray):
        return _clean(x.tolist())
    if isinstance(x, (np.floating, float)):
        return float(x) if math.isfinite(x) else None
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x


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


def igse_shape_factor(shape, duty, alpha, beta) -> np.ndarray:
    """iGSE loss of a shape over the Steinmetz loss of a sine of the same f and B_peak.

    Parameters
    ----------
    shape : sequence of str
        ``"sine"``, ``"triangle"`` or ``"trapezoid"`` per point.
    duty : array_like
        Duty per point [-] (ignored for sine): rising fraction of the period for a
        triangle; fraction with non-zero voltage for a trapezoid.
    alpha, beta : float
        Steinmetz exponents [-].

    Returns
    -------
    ndarray
        Factor g [-], 1 for sine rows.

    Notes
    -----
    With :math:`k_i` from :func:`workbench.models.igse_coefficient`, the iGSE gives for a
    triangle of duty D

    .. math:: P = k_i (2\\hat B)^{\\beta} f^{\\alpha} (D^{1-\\alpha} + (1-D)^{1-\\alpha})

    and for a trapezoid (ramps of length D/(2f), flat tops)

    .. math:: P = k_i (2\\hat B)^{\\beta} f^{\\alpha}\\, 2^{\\alpha} D^{1-\\alpha}

    so ``g = P / (k f**alpha B**beta)``.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate prediction of
       ferrite core loss with nonsinusoidal waveforms using only Steinmetz parameters",
       IEEE COMPEL 2002, pp. 36-41.
    """
    shape = np.asarray(shape)
    d = np.asarray(duty, dtype=float)
    g = np.ones(shape.shape)
    tri = shape == "triangle"
    trap = shape == "trapezoid"
    if tri.any() or trap.any():
        ratio = igse_coefficient(1.0, alpha, beta) * 2.0**beta
        if tri.any():
            dt = d[tri]
            g[tri] = ratio * (dt ** (1 - alpha) + (1 - dt) ** (1 - alpha))
        if trap.any():
            g[trap] = ratio * 2.0**alpha * d[trap] ** (1 - alpha)
    return g


def separation_shape_constants(shape, duty) -> tuple[np.ndarray, np.ndarray]:
    """Waveform constants of the classical and excess terms, relative to (f B_peak).

    Parameters
    ----------
    shape : sequence of str
        Waveform shape per point.
    duty : array_like
        Duty per point [-] (ignored for sine).

    Returns
    -------
    c2, c15 : ndarray
        ``mean((dB/dt)**2) / (f B)**2`` and ``mean(|dB/dt|**1.5) / (f B)**1.5`` [-].

    Notes
    -----
    Sine: :math:`c_2 = 2\\pi^2`, :math:`c_{1.5} = 8.763`. Triangle of duty D (slopes
    :math:`2\\hat Bf/D` and :math:`2\\hat Bf/(1-D)`): :math:`c_2 = 4(1/D + 1/(1-D))`,
    :math:`c_{1.5} = 2^{1.5}(D^{-1/2} + (1-D)^{-1/2})`. Trapezoid (slope
    :math:`4\\hat Bf/D` during a fraction D): :math:`c_2 = 16/D`,
    :math:`c_{1.5} = 4^{1.5} D^{-1/2}`.

    References
    ----------
    .. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
       materials", IEEE Trans. Magn. 24(1), 1988, pp. 621-630.
    """
    shape = np.asarray(shape)
    d = np.asarray(duty, dtype=float)
    c2 = np.full(shape.shape, 2 * np.pi**2)
    c15 = np.full(shape.shape, EXCESS_SINE_CONSTANT)
    tri = shape == "triangle"
    trap = shape == "trapezoid"
    c2[tri] = 4 * (1 / d[tri] + 1 / (1 - d[tri]))
    c15[tri] = 2**1.5 * (d[tri] ** -0.5 + (1 - d[tri]) ** -0.5)
    c2[trap] = 16 / d[trap]
    c15[trap] = 4**1.5 * d[trap] ** -0.5
    return c2, c15


def _check_table(table) -> LossTable:
    if not isinstance(table, LossTable):
        raise ValueError(f"table must be a LossTable, got {type(table).__name__}")
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


# --------------------------------------------------------------------------------------------
# Steinmetz
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SteinmetzPrediction:
    """Predicted sine loss with a band, along a sweep.

    Attributes
    ----------
    freq, b_peak : ndarray
        Operating points [Hz, T].
    temperature : ndarray or None
        Core temperature [degC] (None for a fit without temperature).
    loss : ndarray
        Predicted loss per unit volume [W/m^3].
    lower, upper : ndarray
        Band limits [W/m^3].
    band : str
        ``"confidence"`` (of the mean curve) or ``"prediction"`` (of a new measurement).
    level : float
        Coverage of the band [-].
    extrapolated : ndarray of bool
        True where the point lies outside the fitted frequency, flux or temperature range.
    message : str
        Empty, or a sentence saying how many points are extrapolated and why.
    """

    freq: np.ndarray
    b_peak: np.ndarray
    temperature: np.ndarray | None
    loss: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    band: str
    level: float
    extrapolated: np.ndarray
    message: str

    def to_dict(self) -> dict:
        return _clean({
            "freq": self.freq, "b_peak": self.b_peak,
            "temperature": self.temperature, "loss": self.loss, "lower": self.lower,
            "upper": self.upper, "band": self.band, "level": self.level,
            "extrapolated": self.extrapolated, "message": self.message,
        })


@dataclass(frozen=True)
class SteinmetzFit:
    """Steinmetz parameters fitted to a loss table.

    Attributes
    ----------
    k : float
        Coefficient [W/m^3 with f in Hz, B in T]; at the reference temperature when the fit
        has a temperature factor.
    alpha, beta : float
        Frequency and flux exponents [-].
    k_ci95, alpha_ci95, beta_ci95 : tuple of float
        95 % confidence intervals (t-distribution; the k interval is exp of the ln k one).
    temperature : TemperatureCoefficients or None
        ct0, ct1, ct2 of ``ct0 - ct1 T + ct2 T**2`` [-, 1/degC, 1/degC^2], normalised to 1 at
        ``reference_temperature``; None without temperatures.
    temperature_ci95 : dict
        Intervals of ct0, ct1, ct2 (empty without temperatures).
    reference_temperature : float or None
        Temperature at which the factor is 1 [degC].
    rms_rel_error, max_rel_error : float
        RMS and largest |P_fit / P_measured - 1| over the points [-].
    covariance : ndarray
        Covariance of the free parameters named in ``param_names`` (ln k, alpha, beta,
        then a, c of the factor ``1 + a (T - T_ref) + c (T - T_ref)**2``).
    param_names : tuple of str
        Names of the rows/columns of ``covariance``.
    residual_variance : float
        s^2 of the fit residuals (log or relative, see ``objective``) [-].
    dof : int
        Degrees of freedom, points minus free parameters.
    n_points : int
        Points fitted.
    freq_range, b_range : tuple of float
        Fitted data range [Hz], [T].
    temperature_range : tuple of float or None
        Fitted temperature range [degC].
    fixed : dict
        Parameters held fixed and their values.
    objective : str
        ``"log"`` (residual ln(P_fit/P)) or ``"relative"`` (P_fit/P - 1).
    n_nonsine : int
        Points fitted through the iGSE (triangle or trapezoid).
    source : str
        Table the fit came from.
    rows : ndarray
        File rows of the points fitted.
    notes : tuple of str
        Anything a reader should know (bounds reached, intervals unavailable).
    """

    k: float
    alpha: float
    beta: float
    k_ci95: tuple
    alpha_ci95: tuple
    beta_ci95: tuple
    temperature: object
    temperature_ci95: dict
    reference_temperature: float | None
    rms_rel_error: float
    max_rel_error: float
    covariance: np.ndarray
    param_names: tuple
    residual_variance: float
    dof: int
    n_points: int
    freq_range: tuple
    b_range: tuple
    temperature_range: tuple | None
    fixed: dict
    objective: str
    n_nonsine: int
    source: str
    rows: np.ndarray = field(repr=False)
    notes: tuple = ()

    # -- parameters -----------------------------------------------------------------------
    def _factor(self, temperature):
        if self.temperature is None:
            return 1.0
        t = np.asarray(temperature, dtype=float)
        tc = self.temperature
        return tc.ct0 - tc.ct1 * t + tc.ct2 * t**2

    def loss(self, freq, b_peak, temperature=None):
        """Sine loss per unit volume [W/m^3] at freq [Hz], b_peak [T], temperature [degC]."""
        f = np.asarray(freq, dtype=float)
        b = np.asarray(b_peak, dtype=float)
        t = self.reference_temperature if temperature is None else temperature
        out = self.k * f**self.alpha * b**self.beta * self._factor(t)
        return float(out) if np.ndim(out) == 0 else out

    def table_loss(self, table: LossTable) -> np.ndarray:
        """Model loss [W/m^3] at every row of a table, through the iGSE for non-sine rows."""
        _check_table(table)
        g = igse_shape_factor(table.shape, table.duty, self.alpha, self.beta)
        t = table.temperature if (table.temperature is not None and self.temperature is not None) else None
        fac = self._factor(t) if t is not None else 1.0
        return self.k * table.freq**self.alpha * table.b_peak**self.beta * g * fac

    def extrapolation(self, freq, b_peak, temperature=None) -> tuple[np.ndarray, str]:
        """Flag points outside the fitted range.

        Returns
        -------
        flags : ndarray of bool
            True where the point is outside the fitted frequency, flux or temperature range.
        message : str
            Empty when nothing is extrapolated.
        """
        f, b = np.broadcast_arrays(np.asarray(freq, float), np.asarray(b_peak, float))
        eps = 1e-9
        out_f = (f < self.freq_range[0] * (1 - eps)) | (f > self.freq_range[1] * (1 + eps))
        out_b = (b < self.b_range[0] * (1 - eps)) | (b > self.b_range[1] * (1 + eps))
        out_t = np.zeros(f.shape, dtype=bool)
        if temperature is not None and self.temperature_range is not None:
            t = np.broadcast_to(np.asarray(temperature, float), f.shape)
            out_t = (t < self.temperature_range[0] - 1e-9) | (t > self.temperature_range[1] + 1e-9)
        flags = out_f | out_b | out_t
        return flags, _range_message(out_f, out_b, out_t, self.freq_range, self.b_range, self.temperature_range)

    def predict(self, freq, b_peak, *, temperature=None, band: str = "confidence",
                level: float = _LEVEL) -> SteinmetzPrediction:
        """Sine loss with a band from the delta method on ln P.

        Parameters
        ----------
        freq : array_like
            Frequencies [Hz], e.g. a sweep.
        b_peak : array_like
            Peak flux density [T], broadcast against ``freq``.
        temperature : float or array_like, optional
            Core temperature [degC]; default the reference temperature.
        band : {"confidence", "prediction"}
            Band of the mean curve, or of a new measurement (adds the residual variance).
        level : float
            Coverage in (0, 1), default 0.95.

        Returns
        -------
        SteinmetzPrediction

        Notes
        -----
        With gradient :math:`g = \\partial \\ln P / \\partial\\theta` over the free parameters
        :math:`\\theta` and their covariance C:

        .. math:: \\ln P \\pm t_{(1+L)/2,\\,\\nu} \\sqrt{g^T C g\\ [+\\, s^2]}

        References
        ----------
        .. [1] N. R. Draper, H. Smith, *Applied Regression Analysis*, 3rd ed., Wiley, 1998,
           ch. 24 (intervals for nonlinear least squares by linearisation).
        """
        if band not in ("confidence", "prediction"):
            raise ValueError(f"band must be 'confidence' or 'prediction', got {band!r}")
        if not (0 < level < 1):
            raise ValueError(f"level must lie in (0, 1), got {level!r}")
        f, b = np.broadcast_arrays(np.asarray(freq, float), np.asarray(b_peak, float))
        for name, arr in (("freq", f), ("b_peak", b)):
            if not np.all(np.isfinite(arr)) or np.any(arr <= 0):
                raise ValueError(f"{name} must be finite and positive, got {arr!r}")
        t_given = temperature
        t = None
        if self.temperature is not None:
            t = np.broadcast_to(np.asarray(self.reference_temperature if temperature is None else temperature, float), f.shape)
        p = self.loss(f, b, t)
        p = np.broadcast_to(np.asarray(p, float), f.shape)
        grads = {"ln_k": np.ones(f.shape), "alpha": np.log(f), "beta": np.log(b)}
        if t is not None:
            fac = self._factor(t)
            dt = t - self.reference_temperature
            grads["a"] = dt / fac
            grads["c"] = dt**2 / fac
        g = np.stack([grads[n] for n in self.param_names], axis=-1)
        var = np.einsum("...i,ij,...j->...", g, self.covariance, g)
        if band == "prediction":
            var = var + self.residual_variance
        half = _t_quantile(level, self.dof) * np.sqrt(var)
        flags, msg = self.extrapolation(f, b, t if t_given is not None else None)
        return SteinmetzPrediction(f, b, None if t is None else np.asarray(t, float), p,
                                   p * np.exp(-half), p * np.exp(half), band, float(level), flags, msg)

    @property
    def params(self):
        """The set as :class:`workbench.materials.SteinmetzParams` (validity = fitted range)."""
        from workbench.materials import SteinmetzParams

        return SteinmetzParams(self.k, self.alpha, self.beta, self.freq_range, self.b_range, self.temperature)

    def to_dict(self) -> dict:
        """Plain-Python form in SI units (NaN as None)."""
        out = {
            "model": "steinmetz",
            "k": self.k, "alpha": self.alpha, "beta": self.beta,
            "k_ci95": self.k_ci95, "alpha_ci95": self.alpha_ci95, "beta_ci95": self.beta_ci95,
            "rms_rel_error": self.rms_rel_error, "max_rel_error": self.max_rel_error,
            "n_points": self.n_points, "dof": self.dof, "n_nonsine": self.n_nonsine,
            "freq_range": self.freq_range, "b_range": self.b_range,
            "objective": self.objective, "fixed": dict(self.fixed),
            "residual_variance": self.residual_variance,
            "param_names": list(self.param_names), "covariance": self.covariance,
            "source": self.source, "notes": list(self.notes),
            "units": {"k": "W/m^3 (f in Hz, B_peak in T)", "freq": "Hz", "b_peak": "T",
                      "temperature": "degC"},
        }
        if self.temperature is not None:
            tc = self.temperature
            out.update({"ct0": tc.ct0, "ct1": tc.ct1, "ct2": tc.ct2,
                        "reference_temperature": self.reference_temperature,
                        "temperature_range": self.temperature_range})
            out.update({f"{k}_ci95": v for k, v in self.temperature_ci95.items()})
        return _clean(out)


def _steinmetz_design(table, t_ref, temp_model):
    cols = [np.ones(len(table)), np.log(table.freq), np.log(table.b_peak)]
    names = ["ln_k", "alpha", "beta"]
    if temp_model != "none":
        dt = table.temperature - t_ref
        cols.append(dt)
        names.append("a")
        if temp_model == "quadratic":
            cols.append(dt**2)
            names.append("c")
    return np.column_stack(cols), names


def fit_steinmetz(table: LossTable, *, fixed: dict | None = None, objective: str = "log",
                  temperature_model: str = "auto", reference_temperature: float | None = None) -> SteinmetzFit:
    """Fit k, alpha, beta (and a temperature factor) to a loss table.

    Parameters
    ----------
    table : LossTable
        Measured points; triangle and trapezoid rows enter through the iGSE.
    fixed : dict, optional
        Parameters held at a value, e.g. ``{"alpha": 1.0}`` for a table at one frequency.
        Keys ``"k"`` [W/m^3], ``"alpha"``, ``"beta"`` [-].
    objective : {"log", "relative"}
        Residual per point: ``ln(P_fit/P)`` (default; the maximum-likelihood choice for
        multiplicative scatter) or ``P_fit/P - 1``.
    temperature_model : {"auto", "none", "linear", "quadratic"}
        Temperature factor: "auto" fits a quadratic when the table has three or more
        temperatures, a linear one with two, none with one.
    reference_temperature : float, optional
        Temperature at which the factor is 1 [degC]; default the table temperature with the
        most points (the lowest of ties).

    Returns
    -------
    SteinmetzFit

    Raises
    ------
    ValueError
        Too few points, a single frequency or flux level for a free exponent, frequency and
        flux varying together, or bad options; the message names the table.

    Notes
    -----
    Model of row i (shape factor :math:`g_i` from :func:`igse_shape_factor`, temperature
    factor :math:`c(T) = 1 + a (T-T_r) + c (T-T_r)^2`):

    .. math:: P_i = k f_i^{\\alpha} \\hat B_i^{\\beta} g_i(\\alpha, \\beta)\\, c(T_i)

    Start from ordinary least squares of ln P on (1, ln f, ln B, ...) and refine with
    :func:`scipy.optimize.least_squares` (exponents bounded to [0.05, 5] and [0.05, 6]).
    Covariance :math:`s^2 (J^TJ)^{-1}` with the Jacobian at the optimum and
    :math:`s^2 = \\sum r_i^2/(n-p)`; intervals with Student's t on n - p degrees of freedom.
    The temperature factor is reported as ``ct0 - ct1 T + ct2 T^2`` with
    :math:`c_{t2} = c`, :math:`c_{t1} = 2cT_r - a`, :math:`c_{t0} = 1 - aT_r + cT_r^2`.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, IEEE COMPEL 2002 (iGSE).
    .. [2] D. M. Bates, D. G. Watts, *Nonlinear Regression Analysis and Its Applications*,
       Wiley, 1988, ch. 2 (linear approximation inference).
    """
    from workbench.materials import TemperatureCoefficients

    table = _check_table(table)
    src = table.source
    if objective not in ("log", "relative"):
        raise ValueError(f"objective must be 'log' or 'relative', got {objective!r}")
    fixed = dict(fixed or {})
    for key, value in fixed.items():
        if key not in ("k", "alpha", "beta"):
            raise ValueError(f"fixed: unknown parameter {key!r}; use k, alpha or beta")
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise ValueError(f"fixed: {key} must be a finite positive number, got {value!r}")
    n_temps = table.temperatures.size
    if temperature_model not in ("auto", "none", "linear", "quadratic"):
        raise ValueError(f"temperature_model must be auto, none, linear or quadratic, got {temperature_model!r}")
    if temperature_model == "auto":
        temperature_model = "quadratic" if n_temps >= 3 else "linear" if n_temps == 2 else "none"
    if temperature_model != "none" and n_temps < (3 if temperature_model == "quadratic" else 2):
        raise ValueError(f"{src}: a {temperature_model} temperature factor needs "
                         f"{3 if temperature_model == 'quadratic' else 2} or more temperatures, the table has {n_temps}")
    if temperature_model == "none" and n_temps > 1:
        have = ", ".join(f"{t:g}" for t in table.temperatures)
        raise ValueError(f"{src}: the table has {n_temps} temperatures ({have} degC): fit a temperature "
                         "factor or select one temperature")
    t_ref = None
    if temperature_model != "none":
        if reference_temperature is None:
            temps, counts = np.unique(table.temperature, return_counts=True)
            t_ref = float(temps[np.argmax(counts)])
        else:
            t_ref = float(reference_temperature)
            if not math.isfinite(t_ref):
                raise ValueError(f"reference_temperature must be finite, got {reference_temperature!r}")
    free_exp = [n for n in ("alpha", "beta") if n not in fixed]
    if "alpha" in free_exp and _n_distinct(table.freq) < 2:
        raise ValueError(f"{src}: all points are at one frequency ({table.freq[0]:g} Hz): alpha cannot be "
                         "fitted; fix alpha or add frequencies")
    if "beta" in free_exp and _n_distinct(table.b_peak) < 2:
        raise ValueError(f"{src}: all points are at one flux level ({table.b_peak[0]:g} T): beta cannot be "
                         "fitted; fix beta or add flux levels")

    x_full, names = _steinmetz_design(table, t_ref, temperature_model)
    name_to_fixed = {"ln_k": math.log(fixed["k"]) if "k" in fixed else None,
                     "alpha": fixed.get("alpha"), "beta": fixed.get("beta")}
    free = [i for i, n in enumerate(names) if name_to_fixed.get(n) is None]
    fixed_idx = [i for i in range(len(names)) if i not in free]
    fixed_vals = np.array([name_to_fixed[names[i]] for i in fixed_idx], dtype=float)
    n, p = len(table), len(free)
    if n < p:
        raise ValueError(f"{src}: {n} points cannot determine {p} parameters; need at least {p}")
    y = np.log(table.loss)
    offset = x_full[:, fixed_idx] @ fixed_vals if fixed_idx else np.zeros(n)
    xf = x_full[:, free]
    if np.linalg.matrix_rank(xf) < p:
        raise ValueError(f"{src}: frequency, flux{' and temperature' if temperature_model != 'none' else ''} "
                         "vary together in this table, so the parameters cannot be separated; "
                         "add points that vary one at a time")
    theta0, *_ = np.linalg.lstsq(xf, y - offset, rcond=None)

    shape = np.asarray(table.shape)
    nonsine = shape != "sine"
    temp = table.temperature
    ia, ib = names.index("alpha"), names.index("beta")

    def full(theta):
        v = np.empty(len(names))
        v[free] = theta
        v[fixed_idx] = fixed_vals
        return v

    def log_model(theta):
        v = full(theta)
        out = x_full[:, :3] @ v[:3]
        if nonsine.any():
            out = out + np.log(igse_shape_factor(shape, table.duty, v[ia], v[ib]))
        if temperature_model != "none":
            dt = temp - t_ref
            fac = 1 + v[3] * dt + (v[4] * dt**2 if temperature_model == "quadratic" else 0.0)
            out = out + np.log(np.maximum(fac, 1e-300))
        return out

    def residual(theta):
        r = log_model(theta) - y
        return r if objective == "log" else np.expm1(r)

    lo = np.full(p, -np.inf)
    hi = np.full(p, np.inf)
    for j, i in enumerate(free):
        if names[i] == "alpha":
            lo[j], hi[j] = _ALPHA_BOUNDS
        elif names[i] == "beta":
            lo[j], hi[j] = _BETA_BOUNDS
    start = np.clip(theta0, lo + 1e-6, hi - 1e-6)
    notes = []
    if p > 0:
        with np.errstate(all="ignore"):
            res = optimize.least_squares(residual, start, bounds=(lo, hi), method="trf",
                                         x_scale="jac", xtol=1e-12, ftol=1e-12, gtol=1e-12)
        theta = res.x
        jac = res.jac
        r = res.fun
        if temperature_model != "none":
            v = full(theta)
            dtr = temp - t_ref
            fac = 1 + v[3] * dtr + (v[4] * dtr**2 if temperature_model == "quadratic" else 0.0)
            if np.any(fac <= 0):
                raise ValueError(f"{src}: the fitted temperature factor is not positive over the table; "
                                 "the temperatures do not support this factor")
        for j, i in enumerate(free):
            if names[i] in ("alpha", "beta") and (np.isclose(theta[j], lo[j], rtol=1e-6) or np.isclose(theta[j], hi[j], rtol=1e-6)):
                notes.append(f"{names[i]} stopped at its bound {theta[j]:g}: check the table")
    else:
        theta = np.zeros(0)
        r = residual(theta)
        jac = np.zeros((n, 0))
    dof = n - p
    cov, s2 = _covariance(jac, r, dof) if p else (np.zeros((0, 0)), float(r @ r) / max(dof, 1))
    if dof <= 0:
        notes.append("as many parameters as points: the fit is exact and has no intervals")
    tq = _t_quantile(_LEVEL, dof)
    v = full(theta)
    std = {names[i]: math.sqrt(cov[j, j]) if math.isfinite(cov[j, j]) and cov[j, j] >= 0 else math.nan
           for j, i in enumerate(free)}

    def ci(name, value):
        if name not in std:
            return (value, value)
        return _interval(value, std[name], tq)

    ln_lo, ln_hi = ci("ln_k", v[0])
    k_ci = (math.exp(ln_lo), math.exp(ln_hi)) if math.isfinite(ln_lo) else (math.nan, math.nan)
    rel = np.expm1(log_model(theta) - y)
    tcoef, tci, t_range = None, {}, None
    if temperature_model != "none":
        a = v[3]
        c = v[4] if temperature_model == "quadratic" else 0.0
        tcoef = TemperatureCoefficients(ct0=1 - a * t_ref + c * t_ref**2, ct1=2 * c * t_ref - a, ct2=c)
        # ct = M @ (a, c): exact linear propagation of the covariance
        jdx = [free.index(names.index(nm)) for nm in ("a", "c") if nm in names]
        m = np.array([[-t_ref, t_ref**2], [-1.0, 2 * t_ref], [0.0, 1.0]])[:, : len(jdx)]
        cov_ac = cov[np.ix_(jdx, jdx)]
        cov_ct = m @ cov_ac @ m.T
        for idx, (nm, val) in enumerate((("ct0", tcoef.ct0), ("ct1", tcoef.ct1), ("ct2", tcoef.ct2))):
            sd = math.sqrt(cov_ct[idx, idx]) if np.isfinite(cov_ct[idx, idx]) and cov_ct[idx, idx] > 0 else (0.0 if nm == "ct2" and temperature_model == "linear" else math.nan)
            tci[nm] = _interval(val, sd, tq)
        t_range = (float(temp.min()), float(temp.max()))
    return SteinmetzFit(
        k=float(math.exp(v[0])), alpha=float(v[1]), beta=float(v[2]),
        k_ci95=k_ci, alpha_ci95=ci("alpha", v[1]), beta_ci95=ci("beta", v[2]),
        temperature=tcoef, temperature_ci95=tci, reference_temperature=t_ref,
        rms_rel_error=float(np.sqrt(np.mean(rel**2))), max_rel_error=float(np.max(np.abs(rel))),
        covariance=cov, param_names=tuple(names[i] for i in free), residual_variance=s2,
        dof=dof, n_points=n,
        freq_range=(float(table.freq.min()), float(table.freq.max())),
        b_range=(float(table.b_peak.min()), float(table.b_peak.max())),
        temperature_range=t_range, fixed=fixed, objective=objective,
        n_nonsine=int(nonsine.sum()), source=src, rows=table.rows, notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# bands
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SteinmetzBands:
    """One Steinmetz set per contiguous frequency band.

    Attributes
    ----------
    bands : tuple of SteinmetzFit
        Fits in order of frequency; each fit's ``freq_range`` is its band's data range.
    edges : ndarray
        Band limits for look-up [Hz]: ``len(bands) + 1`` values, the outer ones the table's
        frequency range, the inner ones geometric means of neighbouring table frequencies.
    tolerance : float
        Required max relative error per band [-].
    tolerance_met : bool
        Whether every band is within the tolerance.
    split : bool
        True when the table needed more than one band.
    message : str
        One sentence saying what was done.
    """

    bands: tuple
    edges: np.ndarray
    tolerance: float
    tolerance_met: bool
    split: bool
    message: str

    @property
    def max_rel_error(self) -> float:
        """Worst relative error over all bands [-]."""
        return max(b.max_rel_error for b in self.bands)

    def band_index(self, freq) -> np.ndarray:
        """Index of the band used at each frequency [Hz] (outer bands extend outwards)."""
        f = np.asarray(freq, dtype=float)
        return np.clip(np.searchsorted(self.edges[1:-1], f, side="right"), 0, len(self.bands) - 1)

    def loss(self, freq, b_peak, temperature=None):
        """Sine loss [W/m^3], each frequency with its band's set."""
        f, b = np.broadcast_arrays(np.asarray(freq, float), np.asarray(b_peak, float))
        idx = self.band_index(f)
        out = np.empty(f.shape)
        for i, fit in enumerate(self.bands):
            m = idx == i
            if m.any():
                out[m] = fit.loss(f[m], b[m], temperature)
        return float(out) if out.ndim == 0 else out

    def table_loss(self, table: LossTable) -> np.ndarray:
        """Model loss [W/m^3] at every row of a table, each row with its frequency band's set."""
        _check_table(table)
        idx = self.band_index(table.freq)
        out = np.empty(len(table))
        for i, fit in enumerate(self.bands):
            m = idx == i
            if m.any():
                out[m] = fit.table_loss(table.subset(m))
        return out

    def to_dict(self) -> dict:
        return _clean({
            "split": self.split, "tolerance": self.tolerance, "tolerance_met": self.tolerance_met,
            "message": self.message, "edges": self.edges,
            "bands": [dict(b.to_dict(), freq_low=b.freq_range[0], freq_high=b.freq_range[1]) for b in self.bands],
        })


def _minimax_partition(err: np.ndarray, max_bands: int):
    """best[nb][j]: min over partitions of the first j groups into nb bands of the worst error."""
    m = err.shape[0]
    best = np.full((max_bands + 1, m + 1), np.inf)
    arg = np.zeros((max_bands + 1, m + 1), dtype=int)
    best[0, 0] = 0.0
    for nb in range(1, max_bands + 1):
        for j in range(1, m + 1):
            cand = np.maximum(best[nb - 1, :j], err[:j, j - 1])
            i = int(np.argmin(cand))
            best[nb, j], arg[nb, j] = cand[i], i
    return best, arg


def fit_steinmetz_bands(table: LossTable, *, tolerance: float = 0.25, min_freqs: int = 3,
                        max_bands: int | None = None, **fit_kwargs) -> SteinmetzBands:
    """Fit one Steinmetz set, or split the frequency range into bands when one set is not enough.

    Parameters
    ----------
    table : LossTable
        Measured points.
    tolerance : float
        Largest acceptable |P_fit/P - 1| in any band [-], default 0.25.
    min_freqs : int
        Distinct frequencies a band must contain (default 3).
    max_bands : int, optional
        Most bands tried (default: as many as ``min_freqs`` allows).
    **fit_kwargs
        Passed to :func:`fit_steinmetz` (``fixed``, ``objective``, ``temperature_model``,
        ``reference_temperature``).

    Returns
    -------
    SteinmetzBands

    Notes
    -----
    The distinct frequencies are sorted into groups; every contiguous run of at least
    ``min_freqs`` groups is fitted once. For each band count the partition minimising the
    worst band error is found by dynamic programming; the fewest bands that meet the
    tolerance win. If no count meets it, the partition with the lowest worst error is
    returned with ``tolerance_met = False``.

    References
    ----------
    .. [1] R. Bellman, "On the approximation of curves by line segments using dynamic
       programming", Commun. ACM 4(6), 1961, p. 284.
    """
    table = _check_table(table)
    if not (isinstance(tolerance, (int, float)) and math.isfinite(tolerance) and tolerance > 0):
        raise ValueError(f"tolerance must be a positive fraction (0.25 = 25 %), got {tolerance!r}")
    if int(min_freqs) < 2:
        raise ValueError(f"min_freqs must be at least 2, got {min_freqs!r}")
    min_freqs = int(min_freqs)
    whole = fit_steinmetz(table, **fit_kwargs)
    if whole.max_rel_error <= tolerance:
        return SteinmetzBands((whole,), np.array(whole.freq_range), float(tolerance), True, False,
                              f"one set covers the table within {tolerance:.0%} (worst point {whole.max_rel_error:.1%})")
    # group frequencies
    order = np.argsort(table.freq, kind="stable")
    fs = table.freq[order]
    new_group = np.concatenate(([True], np.diff(fs) > 1e-6 * fs[1:]))
    group_of_sorted = np.cumsum(new_group) - 1
    group = np.empty(len(table), dtype=int)
    group[order] = group_of_sorted
    m = int(group.max()) + 1
    g_freq = np.array([fs[group_of_sorted == i][0] for i in range(m)])
    limit = m // min_freqs
    max_bands = limit if max_bands is None else min(int(max_bands), limit)
    if max_bands < 2:
        return SteinmetzBands((whole,), np.array(whole.freq_range), float(tolerance), False, False,
                              f"one set misses the {tolerance:.0%} tolerance (worst point {whole.max_rel_error:.1%}) "
                              f"and the table has too few frequencies ({m}) to split into bands of {min_freqs}")
    err = np.full((m, m), np.inf)
    fits = {}
    for i in range(m):
        for j in range(i + min_freqs - 1, m):
            try:
                fit = fit_steinmetz(table.subset((group >= i) & (group <= j)), **fit_kwargs)
            except ValueError:
                continue
            err[i, j] = fit.max_rel_error
            fits[i, j] = fit
    best, arg = _minimax_partition(err, max_bands)
    worst = best[1:, m]
    ok = np.flatnonzero(worst <= tolerance)
    met = ok.size > 0
    nb = int(ok[0]) + 1 if met else int(np.argmin(worst)) + 1
    if not np.isfinite(best[nb, m]):
        return SteinmetzBands((whole,), np.array(whole.freq_range), float(tolerance), False, False,
                              f"one set misses the {tolerance:.0%} tolerance and no split into bands could be fitted")
    cuts, j = [], m
    for b in range(nb, 0, -1):
        i = arg[b, j]
        cuts.append((i, j - 1))
        j = i
    cuts.reverse()
    bands = tuple(fits[c] for c in cuts)
    if nb == 1:
        bands = (whole,)
    edges = [float(g_freq[0])]
    for (_, j0), (i1, _) in zip(cuts[:-1], cuts[1:]):
        edges.append(float(np.sqrt(g_freq[j0] * g_freq[i1])))
    edges.append(float(g_freq[-1]))
    worst_err = max(b.max_rel_error for b in bands)
    if met:
        msg = (f"one set misses the {tolerance:.0%} tolerance (worst point {whole.max_rel_error:.1%}); "
               f"split into {nb} frequency bands, worst point {worst_err:.1%}")
    else:
        msg = (f"no split into bands of at least {min_freqs} frequencies meets the {tolerance:.0%} tolerance; "
               f"best found: {nb} band(s), worst point {worst_err:.1%}")
    return SteinmetzBands(bands, np.array(edges), float(tolerance), met, nb > 1, msg)


# --------------------------------------------------------------------------------------------
# loss separation
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SeparationFit:
    """Hysteresis and excess coefficients fitted with a classical eddy term.

    Attributes
    ----------
    k_hyst : float
        Hysteresis coefficient [J/m^3 / T**beta_hyst] (P_h = k_hyst f B**beta_hyst).
    beta_hyst : float
        Hysteresis flux exponent [-].
    k_excess : float
        Excess coefficient [W/m^3 / (T/s)**1.5].
    resistivity : float
        Resistivity used in the classical term [ohm m]; fitted when ``resistivity_fitted``.
    thickness : float
        Lamination thickness [m].
    resistivity_fitted : bool
        True when the resistivity is an effective value fitted to the table.
    k_hyst_ci95, beta_hyst_ci95, k_excess_ci95, resistivity_ci95 : tuple
        95 % intervals (resistivity: NaN pair when it was fixed).
    rms_rel_error, max_rel_error : float
        RMS and largest |P_fit/P - 1| [-].
    covariance : ndarray
        Covariance of the free parameters in ``param_names``.
    param_names : tuple of str
    dof, n_points : int
    freq_range, b_range : tuple
        Fitted data range [Hz], [T].
    source : str
    notes : tuple of str
    """

    k_hyst: float
    beta_hyst: float
    k_excess: float
    resistivity: float
    thickness: float
    resistivity_fitted: bool
    k_hyst_ci95: tuple
    beta_hyst_ci95: tuple
    k_excess_ci95: tuple
    resistivity_ci95: tuple
    rms_rel_error: float
    max_rel_error: float
    covariance: np.ndarray
    param_names: tuple
    dof: int
    n_points: int
    freq_range: tuple
    b_range: tuple
    source: str
    notes: tuple = ()

    def components(self, freq, b_peak) -> dict:
        """Sine loss parts [W/m^3]: ``hysteresis``, ``classical``, ``excess``, ``total``."""
        f, b = np.broadcast_arrays(np.asarray(freq, float), np.asarray(b_peak, float))
        h = self.k_hyst * f * b**self.beta_hyst
        c = np.pi**2 * self.thickness**2 * f**2 * b**2 / (6 * self.resistivity)
        e = self.k_excess * EXCESS_SINE_CONSTANT * (f * b) ** 1.5
        return {"hysteresis": h, "classical": c, "excess": e, "total": h + c + e}

    def table_loss(self, table: LossTable) -> np.ndarray:
        """Model loss [W/m^3] at every row of a table, each row with its waveform constants."""
        _check_table(table)
        f, b = table.freq, table.b_peak
        c2, c15 = separation_shape_constants(table.shape, table.duty)
        return (self.k_hyst * f * b**self.beta_hyst + self.thickness**2 / (12 * self.resistivity) * c2 * (f * b) ** 2
                + self.k_excess * c15 * (f * b) ** 1.5)

    @property
    def params(self):
        """The coefficients as :class:`workbench.materials.SeparationParams`."""
        from workbench.materials import SeparationParams

        return SeparationParams(self.k_hyst, self.beta_hyst, self.k_excess)

    def to_dict(self) -> dict:
        return _clean({
            "model": "separation",
            "k_hyst": self.k_hyst, "beta_hyst": self.beta_hyst, "k_excess": self.k_excess,
            "resistivity": self.resistivity, "thickness": self.thickness,
            "resistivity_fitted": self.resistivity_fitted,
            "k_hyst_ci95": self.k_hyst_ci95, "beta_hyst_ci95": self.beta_hyst_ci95,
            "k_excess_ci95": self.k_excess_ci95, "resistivity_ci95": self.resistivity_ci95,
            "rms_rel_error": self.rms_rel_error, "max_rel_error": self.max_rel_error,
            "n_points": self.n_points, "dof": self.dof, "freq_range": self.freq_range,
            "b_range": self.b_range, "param_names": list(self.param_names),
            "covariance": self.covariance, "source": self.source, "notes": list(self.notes),
            "units": {"k_hyst": "J/m^3/T^beta_hyst", "k_excess": "W/m^3/(T/s)^1.5",
                      "resistivity": "ohm m", "thickness": "m"},
        })


def fit_separation(table: LossTable, *, thickness: float, resistivity: float | None = None,
                   fit_resistivity: bool = False) -> SeparationFit:
    """Fit the hysteresis and excess terms of the loss separation.

    Parameters
    ----------
    table : LossTable
        Measured points (any shape; each row uses its own waveform constants).
    thickness : float
        Lamination thickness [m].
    resistivity : float, optional
        Resistivity [ohm m] fixing the classical term; required unless ``fit_resistivity``.
    fit_resistivity : bool
        Fit an effective resistivity too (needs three or more frequencies).

    Returns
    -------
    SeparationFit

    Notes
    -----
    .. math:: P_i = k_h f \\hat B^{\\beta_h}
              + \\frac{d^2}{12\\rho} c_{2,i} (f\\hat B)^2
              + k_e c_{1.5,i} (f\\hat B)^{3/2}

    with the waveform constants of :func:`separation_shape_constants` (sine:
    :math:`\\pi^2 d^2 f^2 \\hat B^2/(6\\rho)` and :math:`8.763 k_e (f\\hat B)^{1.5}`).
    For each beta_h of a grid the model is linear in (k_h, k_e[, 1/rho]), solved by
    non-negative least squares in relative terms; the best grid point starts a
    :func:`scipy.optimize.least_squares` fit of ln P.

    References
    ----------
    .. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
       materials", IEEE Trans. Magn. 24(1), 1988, pp. 621-630.
    """
    table = _check_table(table)
    src = table.source
    d = float(thickness)
    if not (math.isfinite(d) and d > 0):
        raise ValueError(f"thickness must be finite and positive [m], got {thickness!r}")
    if resistivity is None and not fit_resistivity:
        raise ValueError("resistivity is required unless the resistivity is fitted (fit_resistivity=True)")
    rho0 = None
    if resistivity is not None:
        rho0 = float(resistivity)
        if not (math.isfinite(rho0) and rho0 > 0):
            raise ValueError(f"resistivity must be finite and positive [ohm m], got {resistivity!r}")
    if table.temperatures.size > 1:
        raise ValueError(f"{src}: the table has several temperatures; select one for a loss separation")
    nf = _n_distinct(table.freq)
    if nf < (3 if fit_resistivity else 2):
        raise ValueError(f"{src}: a loss separation needs {3 if fit_resistivity else 2} or more frequencies, "
                         f"the table has {nf}")
    if _n_distinct(table.b_peak) < 2:
        raise ValueError(f"{src}: a loss separation needs two or more flux levels to fit beta_hyst, the table has one")
    n = len(table)
    p = 4 if fit_resistivity else 3
    if n < p:
        raise ValueError(f"{src}: {n} points cannot determine {p} parameters")
    f, b, y = table.freq, table.b_peak, table.loss
    c2, c15 = separation_shape_constants(table.shape, table.duty)
    eddy_unit = d**2 / 12 * c2 * (f * b) ** 2          # times 1/rho
    exc_unit = c15 * (f * b) ** 1.5                    # times k_e
    lny = np.log(y)

    def parts(theta):
        lnkh, bh, ke = theta[0], theta[1], theta[2]
        g = theta[3] if fit_resistivity else 1.0 / rho0
        return np.exp(lnkh) * f * b**bh + g * eddy_unit + ke * exc_unit

    def residual(theta):
        return np.log(np.maximum(parts(theta), 1e-300)) - lny

    # start: grid over beta_h, NNLS in relative terms
    best = None
    for bh in np.linspace(1.0, 3.0, 41):
        cols = [f * b**bh, exc_unit] + ([eddy_unit] if fit_resistivity else [])
        a = np.column_stack(cols) / y[:, None]
        rhs = (y - (0 if fit_resistivity else eddy_unit / rho0)) / y
        x, rnorm = optimize.nnls(a, rhs)
        if x[0] > 0 and (best is None or rnorm < best[0]):
            best = (rnorm, bh, x)
    if best is None:
        raise ValueError(f"{src}: the classical eddy term alone exceeds the measured loss; check resistivity "
                         "and thickness, or fit the resistivity")
    _, bh0, x0 = best
    start = [math.log(x0[0]), bh0, max(x0[1], 0.0)]
    lo, hi = [-np.inf, 0.5, 0.0], [np.inf, 4.0, np.inf]
    if fit_resistivity:
        start.append(max(x0[2], 1e-3 / (rho0 or 1e-6)) if x0[2] <= 0 else x0[2])
        lo.append(0.0)
        hi.append(np.inf)
    start = np.clip(np.array(start, float), np.array(lo) + 1e-12, np.array(hi) - 1e-9)
    with np.errstate(all="ignore"):
        res = optimize.least_squares(residual, start, bounds=(lo, hi), x_scale="jac",
                                     xtol=1e-12, ftol=1e-12, gtol=1e-12)
    theta, r = res.x, res.fun
    dof = n - p
    cov, _ = _covariance(res.jac, r, dof)
    tq = _t_quantile(_LEVEL, dof)
    sd = [math.sqrt(cov[i, i]) if np.isfinite(cov[i, i]) and cov[i, i] >= 0 else math.nan for i in range(p)]
    notes = []
    lnk_ci = _interval(theta[0], sd[0], tq)
    ke_ci = _interval(theta[2], sd[2], tq)
    if theta[2] <= 1e-12 * max(1.0, abs(start[2])):
        notes.append("k_excess stopped at zero: the table shows no excess loss beyond the other terms")
    ke_ci = (max(ke_ci[0], 0.0), ke_ci[1]) if math.isfinite(ke_ci[0]) else ke_ci
    rho = 1.0 / theta[3] if fit_resistivity else rho0
    rho_ci = (math.nan, math.nan)
    if fit_resistivity:
        g_ci = _interval(theta[3], sd[3], tq)
        rho_ci = (1 / g_ci[1] if g_ci[1] > 0 else math.inf, 1 / g_ci[0] if g_ci[0] > 0 else math.inf) \
            if math.isfinite(g_ci[0]) else (math.nan, math.nan)
        if theta[3] <= 0:
            raise ValueError(f"{src}: the fitted classical term is zero; the table does not show eddy loss")
    rel = np.expm1(residual(theta))
    if dof <= 0:
        notes.append("as many parameters as points: no intervals")
    return SeparationFit(
        k_hyst=float(math.exp(theta[0])), beta_hyst=float(theta[1]), k_excess=float(theta[2]),
        resistivity=float(rho), thickness=d, resistivity_fitted=bool(fit_resistivity),
        k_hyst_ci95=tuple(math.exp(v) if math.isfinite(v) else math.nan for v in lnk_ci),
        beta_hyst_ci95=_interval(theta[1], sd[1], tq), k_excess_ci95=ke_ci, resistivity_ci95=rho_ci,
        rms_rel_error=float(np.sqrt(np.mean(rel**2))), max_rel_error=float(np.max(np.abs(rel))),
        covariance=cov, param_names=("ln_k_hyst", "beta_hyst", "k_excess") + (("inv_resistivity",) if fit_resistivity else ()),
        dof=dof, n_points=n, freq_range=(float(f.min()), float(f.max())),
        b_range=(float(b.min()), float(b.max())), source=src, notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# two-frequency method
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class TwoFrequencyLevel:
    """Energy per cycle against frequency at one flux level.

    Attributes
    ----------
    b_peak : float
        Flux level [T] (mean of the rows grouped into it).
    hysteresis_energy : float
        Intercept W_h of W = P/f = W_h + s f [J/m^3].
    eddy_slope : float
        Slope s [J/m^3/Hz].
    crossover_hz : float
        W_h / s [Hz], where the eddy part equals the hysteresis part; NaN if s <= 0.
    hysteresis_energy_ci95, eddy_slope_ci95 : tuple
        95 % intervals (NaN with only two frequencies).
    n_points, n_freqs : int
    freq_range : tuple
        Frequencies used [Hz].
    rows : ndarray
        File rows used.
    """

    b_peak: float
    hysteresis_energy: float
    eddy_slope: float
    crossover_hz: float
    hysteresis_energy_ci95: tuple
    eddy_slope_ci95: tuple
    n_points: int
    n_freqs: int
    freq_range: tuple
    rows: np.ndarray = field(repr=False)

    def to_dict(self) -> dict:
        return _clean({
            "b_peak": self.b_peak, "hysteresis_energy": self.hysteresis_energy,
            "eddy_slope": self.eddy_slope, "crossover_hz": self.crossover_hz,
            "hysteresis_energy_ci95": self.hysteresis_energy_ci95,
            "eddy_slope_ci95": self.eddy_slope_ci95, "n_points": self.n_points,
            "n_freqs": self.n_freqs, "freq_range": self.freq_range, "rows": self.rows,
        })


@dataclass(frozen=True)
class TwoFrequencyFit:
    """The two-frequency method at every usable flux level of a table.

    Attributes
    ----------
    levels : tuple of TwoFrequencyLevel
        One per flux level with two or more frequencies, in order of flux.
    selected : int
        Index of the level reported at the top (the requested one, else the level with the
        most frequencies, the highest flux among ties).
    skipped : tuple of float
        Flux levels [T] left out because they have a single frequency.
    n_nonsine_ignored : int
        Non-sine rows not used (the method is for sine flux).
    source : str
    """

    levels: tuple
    selected: int
    skipped: tuple
    n_nonsine_ignored: int
    source: str

    @property
    def level(self) -> TwoFrequencyLevel:
        return self.levels[self.selected]

    @property
    def hysteresis_energy(self) -> float:
        return self.level.hysteresis_energy

    @property
    def eddy_slope(self) -> float:
        return self.level.eddy_slope

    @property
    def crossover_hz(self) -> float:
        return self.level.crossover_hz

    def table_loss(self, table: LossTable) -> np.ndarray:
        """(W_h + s f) f [W/m^3] at the rows used by a level (matched by file row), NaN elsewhere."""
        _check_table(table)
        out = np.full(len(table), np.nan)
        for lv in self.levels:
            m = np.isin(table.rows, lv.rows) & table.is_sine
            out[m] = (lv.hysteresis_energy + lv.eddy_slope * table.freq[m]) * table.freq[m]
        return out

    def to_dict(self) -> dict:
        out = {"model": "two-frequency", **self.level.to_dict(),
               "levels": [lv.to_dict() for lv in self.levels], "skipped_b_peak": list(self.skipped),
               "n_nonsine_ignored": self.n_nonsine_ignored, "source": self.source,
               "units": {"hysteresis_energy": "J/m^3", "eddy_slope": "J/m^3/Hz", "crossover_hz": "Hz",
                         "b_peak": "T"}}
        return _clean(out)


def _group_levels(b, rtol):
    order = np.argsort(b, kind="stable")
    bs = b[order]
    new = np.concatenate(([True], np.diff(bs) > rtol * bs[1:]))
    label_sorted = np.cumsum(new) - 1
    label = np.empty(b.size, dtype=int)
    label[order] = label_sorted
    return label, int(label_sorted[-1]) + 1


def fit_two_frequency(table: LossTable, *, b_peak: float | None = None, rtol: float = 0.01) -> TwoFrequencyFit:
    """Split loss into hysteresis and eddy parts from energy per cycle against frequency.

    Parameters
    ----------
    table : LossTable
        Measured points; only sine rows are used.
    b_peak : float, optional
        Flux level to fit [T]; default every level with two or more frequencies.
    rtol : float
        Relative tolerance grouping flux values into one level (default 1 %).

    Returns
    -------
    TwoFrequencyFit

    Raises
    ------
    ValueError
        No sine rows, no level with two distinct frequencies, or the requested level missing
        or at a single frequency.

    Notes
    -----
    At a fixed flux the energy per cycle is, to first order,

    .. math:: W(f) = P/f = W_h + s f

    fitted by ordinary least squares; :math:`W_h` is the hysteresis energy per cycle, the
    eddy part (classical + excess lumped) is :math:`s f`, and the two are equal at
    :math:`f_c = W_h / s`.

    References
    ----------
    .. [1] G. Bertotti, *Hysteresis in Magnetism*, Academic Press, 1998, ch. 12 (energy
       per cycle against frequency; extrapolation to zero frequency).
    """
    table = _check_table(table)
    src = table.source
    sine = table.is_sine
    if not sine.any():
        raise ValueError(f"{src}: the two-frequency method needs sine rows; the table has none")
    if table.temperatures.size > 1:
        raise ValueError(f"{src}: the table has several temperatures; select one for the two-frequency method")
    f, b, p, rows = table.freq[sine], table.b_peak[sine], table.loss[sine], table.rows[sine]
    label, n_levels = _group_levels(b, rtol)
    wanted = None
    if b_peak is not None:
        bp = float(b_peak)
        if not (math.isfinite(bp) and bp > 0):
            raise ValueError(f"b_peak must be finite and positive [T], got {b_peak!r}")
        means = np.array([b[label == i].mean() for i in range(n_levels)])
        i = int(np.argmin(np.abs(means - bp)))
        if abs(means[i] - bp) > rtol * bp:
            have = ", ".join(f"{m:.4g}" for m in means)
            raise ValueError(f"{src}: no flux level at b_peak = {bp:g} T (table levels: {have} T)")
        wanted = i
    levels, skipped = [], []
    for i in range(n_levels):
        m = label == i
        fi, wi = f[m], p[m] / f[m]
        nf = _n_distinct(fi)
        if nf < 2:
            if wanted == i:
                raise ValueError(f"{src}: the flux level {b[m].mean():.4g} T has a single frequency "
                                 f"({fi[0]:g} Hz); the two-frequency method needs at least two")
            skipped.append(float(b[m].mean()))
            continue
        if wanted is not None and i != wanted:
            continue
        x = np.column_stack([np.ones(fi.size), fi])
        coef, *_ = np.linalg.lstsq(x, wi, rcond=None)
        dof = fi.size - 2
        if dof > 0:
            r = wi - x @ coef
            cov = np.linalg.inv(x.T @ x) * (r @ r) / dof
            tq = _t_quantile(_LEVEL, dof)
            ci_h = _interval(coef[0], math.sqrt(cov[0, 0]), tq)
            ci_s = _interval(coef[1], math.sqrt(cov[1, 1]), tq)
        else:
            ci_h = ci_s = (math.nan, math.nan)
        cross = coef[0] / coef[1] if coef[1] > 0 and coef[0] > 0 else math.nan
        levels.append(TwoFrequencyLevel(float(np.median(b[m])), float(coef[0]), float(coef[1]), float(cross),
                                        ci_h, ci_s, int(fi.size), nf, (float(fi.min()), float(fi.max())), rows[m]))
    if not levels:
        raise ValueError(f"{src}: no flux level has two or more frequencies; the two-frequency method needs "
                         "at least two frequencies at one flux level")
    if wanted is not None:
        sel = 0
    else:
        score = [(lv.n_freqs, lv.b_peak) for lv in levels]
        sel = max(range(len(levels)), key=lambda i: score[i])
    return TwoFrequencyFit(tuple(levels), sel, tuple(skipped), int((~sine).sum()), src)


# --------------------------------------------------------------------------------------------
# user material
# --------------------------------------------------------------------------------------------
_MATERIAL_FIELDS = ("density", "resistivity", "b_sat", "rel_permeability", "thickness")


def fitted_material(name: str, fit, *, base=None, family: str | None = None, description: str | None = None,
                    separation: SeparationFit | None = None, date: str | None = None, **properties):
    """Build a :class:`workbench.materials.Material` from a fit.

    Parameters
    ----------
    name : str
        New material name.
    fit : SteinmetzFit
        Steinmetz set (its fitted range becomes the validity range).
    base : Material, optional
        Material lending family, density, resistivity, b_sat, rel_permeability, thickness
        (with their sources) unless given in ``properties``.
    family, description : str, optional
        Override the base's family; description defaults to one naming the table.
    separation : SeparationFit, optional
        Separation coefficients fitted to the same table.
    date : str, optional
        ISO date for the provenance (default today).
    **properties
        ``density`` [kg/m^3], ``resistivity`` [ohm m], ``b_sat`` [T], ``rel_permeability``
        [-], ``thickness`` [m]; required where there is no base.

    Returns
    -------
    Material
        Every fitted value with the source ``"fitted to FILE on DATE"``.
    """
    from workbench.materials import Material

    if not isinstance(fit, SteinmetzFit):
        raise ValueError(f"fit must be a SteinmetzFit, got {type(fit).__name__}")
    unknown = sorted(set(properties) - set(_MATERIAL_FIELDS))
    if unknown:
        raise ValueError(f"unknown material property {unknown[0]!r}; use {', '.join(_MATERIAL_FIELDS)}")
    date = date or _dt.date.today().isoformat()
    prov = f"fitted to {Path(fit.source).name} on {date}"
    values, sources = {}, {}
    for key in _MATERIAL_FIELDS:
        if properties.get(key) is not None:
            v = float(properties[key])
            if not (math.isfinite(v) and v > 0):
                raise ValueError(f"{key} must be finite and positive, got {properties[key]!r}")
            values[key], sources[key] = v, "given by the user when saving the fit"
        elif base is not None:
            values[key], sources[key] = getattr(base, key), f"from {base.name}: {base.sources.get(key, 'no source')}"
        else:
            raise ValueError(f"{key} is needed for the material: give it or a base material to take it from")
    fam = family or (base.family if base is not None else None)
    if fam is None:
        raise ValueError("family is needed for the material: give it or a base material")
    for key in ("k", "alpha", "beta", "freq_range", "b_range"):
        sources[f"steinmetz.{key}"] = prov + (f" ({fit.n_points} points, rms error {fit.rms_rel_error:.1%})" if key == "k" else "")
    if fit.temperature is not None:
        for key in ("ct0", "ct1", "ct2"):
            sources[f"steinmetz.temperature.{key}"] = f"{prov} (factor 1 at {fit.reference_temperature:g} degC)"
    if separation is not None:
        for key in ("k_hyst", "beta_hyst", "k_excess"):
            sources[f"separation.{key}"] = prov
    desc = description or (f"Fitted to the loss table {Path(fit.source).name} on {date}"
                           + (f"; other properties from {base.name}" if base is not None else "") + ".")
    return Material(name=name, family=fam, description=desc, steinmetz=fit.params,
                    separation=None if separation is None else separation.params,
                    sources=sources, origin="fitted", **values)


def save_fitted_material(name: str, fit, *, path=None, overwrite: bool = False, **kwargs) -> Path:
    """Build the material of :func:`fitted_material` and store it in the user library.

    Parameters
    ----------
    name : str
        New material name (not a bundled one).
    fit : SteinmetzFit
        The fitted set.
    path : str or path, optional
        User library file (default the user library of :mod:`workbench.materials`).
    overwrite : bool
        Replace an existing user material of that name.
    **kwargs
        Passed to :func:`fitted_material`.

    Returns
    -------
    Path
        The library file written (atomically, by :func:`workbench.materials.save_user_material`).
    """
    from workbench.materials import save_user_material

    material = fitted_material(name, fit, **kwargs)
    return save_user_material(material, path=path, overwrite=overwrite)
