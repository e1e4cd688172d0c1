"""Loss-separation fit: hysteresis and excess terms beside a classical eddy term."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from workbench.analysis.loss_table import LossTable
from workbench.checks import positive_number
from workbench.fitting._common import (
    _LEVEL,
    _check_table,
    _covariance,
    _interval,
    _n_distinct,
    _t_quantile,
)
from workbench.fitting.tables import separation_shape_constants
from workbench.jsonsafe import to_jsonable
from workbench.models.separation import EXCESS_SINE_CONSTANT

__all__ = ["SeparationFit", "fit_separation"]


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
        return to_jsonable({
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
    d = positive_number(thickness, "thickness", unit="m")
    if resistivity is None and not fit_resistivity:
        raise ValueError("resistivity is required unless the resistivity is fitted (fit_resistivity=True)")
    rho0 = None
    if resistivity is not None:
        rho0 = positive_number(resistivity, "resistivity", unit="ohm m")
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
