"""Steinmetz parameters as functions of the DC bias, fitted to a loss table with a bias column.

Following Muehlethaler et al. (2012), one Steinmetz set (k, alpha, beta) is fitted at each
DC-bias level of the table with :func:`workbench.fitting.fit_steinmetz` (same objective,
95 % intervals and extrapolation flags as every other Steinmetz fit); the sets against the
bias form the table a material carries (:class:`workbench.materials.BiasParams`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from workbench.analysis.loss_table import LossTable
from workbench.fitting._common import _LEVEL, _t_quantile
from workbench.fitting.steinmetz import SteinmetzFit, fit_steinmetz
from workbench.jsonsafe import to_jsonable

__all__ = ["BiasFit", "fit_bias"]

_MIN_POINTS_PER_LEVEL = 4


@dataclass(frozen=True)
class BiasFit:
    """Steinmetz sets at each DC-bias level of a loss table.

    Attributes
    ----------
    variable : str
        ``"h_dc"`` (field strength, A/m) or ``"b_dc"`` (flux density, T).
    unit : str
        ``"A/m"`` or ``"T"``.
    levels : numpy.ndarray
        Bias levels, increasing [A/m or T].
    fits : tuple of SteinmetzFit
        The fit at each level (with its intervals, ranges and notes).
    k, alpha, beta : numpy.ndarray
        Parameters at each level [W/m^3, -, -].
    k_ci95, alpha_ci95, beta_ci95 : numpy.ndarray
        95 % intervals at each level, shape (n, 2).
    k_ratio, k_ratio_ci95 : numpy.ndarray
        k over k at the zero-bias level with its 95 % interval (independent fits:
        variances of ln k add); None without a zero-bias level.
    source : str
        Table the fit came from.
    notes : tuple of str
        Anything a reader should know.
    """

    variable: str
    unit: str
    levels: np.ndarray
    fits: tuple
    k: np.ndarray
    alpha: np.ndarray
    beta: np.ndarray
    k_ci95: np.ndarray
    alpha_ci95: np.ndarray
    beta_ci95: np.ndarray
    k_ratio: np.ndarray | None
    k_ratio_ci95: np.ndarray | None
    source: str
    notes: tuple = ()

    def __repr__(self) -> str:
        return (f"BiasFit({self.source}: {self.levels.size} {self.variable} levels "
                f"{self.levels[0]:g}-{self.levels[-1]:g} {self.unit})")

    def parameters_at(self, bias: float) -> dict:
        """k, alpha, beta interpolated at a bias (log-linear in k), with an extrapolation flag.

        Parameters
        ----------
        bias : float
            Bias in the fit's variable [A/m or T]; its sign does not matter.

        Returns
        -------
        dict
            ``k``, ``alpha``, ``beta``, ``extrapolated`` (bias outside the fitted levels, the
            nearest level's values are used) and ``message``.
        """
        x = float(bias)
        if not math.isfinite(x):
            raise ValueError(f"bias must be finite [{self.unit}]; got {bias!r}")
        x = abs(x)
        lo, hi = float(self.levels[0]), float(self.levels[-1])
        out = x < lo or x > hi
        xx = min(max(x, lo), hi)
        msg = (f"extrapolation: {self.variable} {x:g} {self.unit} lies outside the fitted levels "
               f"{lo:g}..{hi:g} {self.unit}") if out else ""
        return {"k": float(np.exp(np.interp(xx, self.levels, np.log(self.k)))),
                "alpha": float(np.interp(xx, self.levels, self.alpha)),
                "beta": float(np.interp(xx, self.levels, self.beta)),
                "extrapolated": bool(out), "message": msg}

    def extrapolation(self, bias, freq, b_peak) -> tuple[np.ndarray, str]:
        """Flag operating points outside the fitted bias levels or outside a level's data.

        Parameters
        ----------
        bias : array_like
            Bias [A/m or T].
        freq : array_like
            Frequency [Hz].
        b_peak : array_like
            Peak AC flux density [T].

        Returns
        -------
        flags : numpy.ndarray of bool
            True where extrapolated.
        message : str
            Empty when nothing is extrapolated.
        """
        x, f, b = np.broadcast_arrays(np.abs(np.asarray(bias, float)), np.asarray(freq, float),
                                      np.asarray(b_peak, float))
        eps = 1e-9
        out_x = (x < self.levels[0] * (1 - eps)) | (x > self.levels[-1] * (1 + eps))
        # the frequency and flux ranges of the nearest level at or below the bias
        idx = np.clip(np.searchsorted(self.levels, x, side="right") - 1, 0, self.levels.size - 1)
        f_lo = np.array([self.fits[i].freq_range[0] for i in idx.ravel()]).reshape(x.shape)
        f_hi = np.array([self.fits[i].freq_range[1] for i in idx.ravel()]).reshape(x.shape)
        b_lo = np.array([self.fits[i].b_range[0] for i in idx.ravel()]).reshape(x.shape)
        b_hi = np.array([self.fits[i].b_range[1] for i in idx.ravel()]).reshape(x.shape)
        out_f = (f < f_lo * (1 - eps)) | (f > f_hi * (1 + eps))
        out_b = (b < b_lo * (1 - eps)) | (b > b_hi * (1 + eps))
        flags = out_x | out_f | out_b
        parts = []
        if out_x.any():
            parts.append(f"{self.variable} outside {self.levels[0]:g}..{self.levels[-1]:g} {self.unit}")
        if out_f.any():
            parts.append("frequency outside the fitted data of the level")
        if out_b.any():
            parts.append("b_peak outside the fitted data of the level")
        n = int(np.count_nonzero(flags))
        msg = f"extrapolation: {n} of {flags.size} points lie outside the fitted data ({'; '.join(parts)})" if n else ""
        return flags, msg

    def bias_params(self):
        """The fit as a material's bias table (relative to the zero-bias level).

        Returns
        -------
        workbench.materials.BiasParams

        Raises
        ------
        ValueError
            If the fit is against b_dc, or has no zero-bias level.
        """
        from workbench.materials import BiasParams

        if self.variable != "h_dc":
            raise ValueError(f"{self.source}: material bias data are stored against h_dc (A/m); this fit is "
                             "against b_dc: convert the levels with the core's B-H data first")
        if self.k_ratio is None:
            raise ValueError(f"{self.source}: the table has no zero-bias level (lowest {self.levels[0]:g} A/m); "
                             "a material's bias table is relative to the unbiased loss")
        return BiasParams(tuple(float(x) for x in self.levels), tuple(float(x) for x in self.k_ratio),
                          tuple(float(x) for x in self.alpha - self.alpha[0]),
                          tuple(float(x) for x in self.beta - self.beta[0]))

    def to_dict(self) -> dict:
        """Plain-Python form in SI units (NaN as None)."""
        return to_jsonable({
            "model": "steinmetz_against_dc_bias", "variable": self.variable, "unit": self.unit,
            "levels": self.levels, "k": self.k, "alpha": self.alpha, "beta": self.beta,
            "k_ci95": self.k_ci95, "alpha_ci95": self.alpha_ci95, "beta_ci95": self.beta_ci95,
            "k_ratio": self.k_ratio, "k_ratio_ci95": self.k_ratio_ci95,
            "fits": [f.to_dict() for f in self.fits], "source": self.source, "notes": list(self.notes),
        })


def _levels(values, rtol=1e-6, atol=1e-12):
    """Distinct bias levels (values within rtol/atol are one level) and each row's level index."""
    order = np.argsort(values, kind="stable")
    s = values[order]
    new = np.concatenate(([True], np.diff(s) > rtol * np.abs(s[1:]) + atol))
    group_sorted = np.cumsum(new) - 1
    group = np.empty_like(group_sorted)
    group[order] = group_sorted
    levels = np.array([s[group_sorted == g].mean() for g in range(int(group_sorted[-1]) + 1)])
    return levels, group


def fit_bias(table: LossTable, **options) -> BiasFit:
    """Fit k, alpha and beta at each DC-bias level of a loss table.

    Parameters
    ----------
    table : LossTable
        Loss points with an ``h_dc`` [A/m] or ``b_dc`` [T] column.
    **options
        Passed to :func:`workbench.fitting.fit_steinmetz` for every level (``fixed``,
        ``objective``, ``temperature_model``, ``reference_temperature``).

    Returns
    -------
    BiasFit

    Raises
    ------
    ValueError
        No bias column, fewer than two levels, a level with fewer than four points, or
        what :func:`fit_steinmetz` refuses at a level (the message names the level).

    Notes
    -----
    At each bias level :math:`H_i` an independent Steinmetz fit

    .. math:: P = k(H_i)\\, f^{\\alpha(H_i)} \\hat B^{\\beta(H_i)}

    as in the "Steinmetz premagnetisation graph" of [1]_ (from memory: the paper plots
    the three parameters against :math:`H_{dc}` from measurements at each bias; it does
    not prescribe the interpolation between levels). The k ratio's interval uses
    :math:`\\mathrm{var}(\\ln k_i - \\ln k_0) = \\mathrm{var}(\\ln k_i) + \\mathrm{var}(\\ln k_0)`
    with the smaller of the two levels' degrees of freedom.

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Core losses under the DC
       bias condition based on Steinmetz parameters", IEEE Trans. Power Electron. 27(2),
       pp. 953-963, 2012.
    """
    if not isinstance(table, LossTable):
        raise ValueError(f"table must be a LossTable, got {type(table).__name__}")
    src = table.source
    if table.h_dc is not None:
        variable, unit, values = "h_dc", "A/m", np.abs(table.h_dc)
    elif table.b_dc is not None:
        variable, unit, values = "b_dc", "T", np.abs(table.b_dc)
    else:
        raise ValueError(f"{src}: the table has no DC-bias column (h_dc in A/m or b_dc in T)")
    levels, group = _levels(values)
    if levels.size < 2:
        raise ValueError(f"{src}: all rows are at one bias ({levels[0]:g} {unit}): fit them with fit_steinmetz")
    fits: list[SteinmetzFit] = []
    for i, level in enumerate(levels):
        mask = group == i
        n = int(mask.sum())
        if n < _MIN_POINTS_PER_LEVEL:
            rows = ", ".join(str(r) for r in table.rows[mask])
            raise ValueError(f"{src}: bias level {level:g} {unit} has {n} point(s) (rows {rows}); "
                             f"each level needs at least {_MIN_POINTS_PER_LEVEL} for k, alpha, beta and an interval")
        try:
            fits.append(fit_steinmetz(table.subset(mask), **options))
        except ValueError as exc:
            raise ValueError(f"{src}: at bias level {level:g} {unit}: {exc}") from None
    k = np.array([f.k for f in fits])
    alpha = np.array([f.alpha for f in fits])
    beta = np.array([f.beta for f in fits])
    kci = np.array([f.k_ci95 for f in fits], dtype=float)
    aci = np.array([f.alpha_ci95 for f in fits], dtype=float)
    bci = np.array([f.beta_ci95 for f in fits], dtype=float)
    notes = [f"at {lv:g} {unit}: {note}" for lv, f in zip(levels, fits) for note in f.notes]
    k_ratio = k_ratio_ci = None
    if levels[0] == 0.0:
        k_ratio = k / k[0]

        def ln_k_var(fit):
            if "ln_k" not in fit.param_names:
                return 0.0
            j = fit.param_names.index("ln_k")
            return float(fit.covariance[j, j])

        var0 = ln_k_var(fits[0])
        k_ratio_ci = np.empty((levels.size, 2))
        for i, fit in enumerate(fits):
            if i == 0:
                k_ratio_ci[0] = (1.0, 1.0)
                continue
            sd = math.sqrt(ln_k_var(fit) + var0)
            tq = _t_quantile(_LEVEL, min(fit.dof, fits[0].dof))
            k_ratio_ci[i] = (k_ratio[i] * math.exp(-tq * sd), k_ratio[i] * math.exp(tq * sd))
    else:
        notes.append(f"no zero-bias level (lowest {levels[0]:g} {unit}): no k ratio, no material bias table")
    return BiasFit(variable, unit, levels, tuple(fits), k, alpha, beta, kci, aci, bci, k_ratio, k_ratio_ci,
                   src, tuple(notes))
