"""Waveform constants of loss-table rows: iGSE shape factor and separation constants."""
from __future__ import annotations

import numpy as np

from workbench.models.separation import EXCESS_SINE_CONSTANT
from workbench.models.steinmetz import igse_coefficient

__all__ = ["igse_shape_factor", "separation_shape_constants"]


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
