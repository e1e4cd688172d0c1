"""Steinmetz fit (k, alpha, beta and a temperature factor) with intervals and prediction bands."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize

from workbench.analysis.loss_table import LossTable
from workbench.checks import positive_array
from workbench.fitting._common import (
    _ALPHA_BOUNDS,
    _BETA_BOUNDS,
    _LEVEL,
    _check_table,
    _covariance,
    _interval,
    _n_distinct,
    _range_message,
    _t_quantile,
)
from workbench.fitting.tables import igse_shape_factor
from workbench.jsonsafe import to_jsonable

__all__ = ["SteinmetzFit", "SteinmetzPrediction", "fit_steinmetz"]


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
        return to_jsonable({
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
            positive_array(arr, name)
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
        return to_jsonable(out)


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
