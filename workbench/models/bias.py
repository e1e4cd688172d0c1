"""Steinmetz parameters under a DC bias (premagnetisation) of the core.

A DC current in a winding shifts the operating point of the hysteresis loop; the loss
of the same AC flux swing rises. Following Muehlethaler et al. (2012), the Steinmetz
parameters k, alpha and beta are taken as functions of the DC bias field strength
H_dc; the material carries them as a table (:class:`workbench.materials.BiasParams`),
relative to its unbiased set.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from workbench.checks import positive_number

__all__ = ["BiasedSteinmetz", "bias_steinmetz", "dc_field_strength"]


@dataclass(frozen=True)
class BiasedSteinmetz:
    """Steinmetz parameters at a DC bias.

    Parameters
    ----------
    k : float
        Coefficient [W/m^3 with f in Hz and B in T].
    alpha : float
        Frequency exponent [-].
    beta : float
        Flux exponent [-].
    h_dc : float
        Bias field strength the parameters belong to (its magnitude) [A/m].
    h_dc_max : float
        Largest bias of the material's data [A/m].
    extrapolated : bool
        True when ``h_dc`` lies beyond the data (the values at ``h_dc_max`` are used).
    """

    k: float
    alpha: float
    beta: float
    h_dc: float
    h_dc_max: float
    extrapolated: bool


def bias_steinmetz(k, alpha, beta, h_dc, bias) -> BiasedSteinmetz:
    """Steinmetz parameters of a material at a DC bias field strength.

    Parameters
    ----------
    k : float
        Unbiased Steinmetz coefficient (with any temperature factor applied) [W/m^3].
    alpha : float
        Unbiased frequency exponent [-].
    beta : float
        Unbiased flux exponent [-].
    h_dc : float
        DC bias field strength [A/m]; its sign does not matter.
    bias : workbench.materials.BiasParams
        The material's bias table: ``h_dc`` [A/m], ``k_ratio`` [-], ``alpha_shift`` [-],
        ``beta_shift`` [-].

    Returns
    -------
    BiasedSteinmetz

    Notes
    -----
    .. math::

        k(H) = k\\, r_k(H), \\quad \\alpha(H) = \\alpha + \\Delta\\alpha(H), \\quad
        \\beta(H) = \\beta + \\Delta\\beta(H)

    with :math:`\\ln r_k`, :math:`\\Delta\\alpha` and :math:`\\Delta\\beta` interpolated
    linearly in :math:`|H_{dc}|` between the table's levels (log-linear in k because the
    bias multiplies the loss). Beyond the last level the values there are held and the
    result is flagged as extrapolated. The tabulated form follows the "Steinmetz
    premagnetisation graph" of [1]_, which plots k, alpha and beta against H_dc; the
    interpolation is our choice (the paper's functional forms are not reproduced here,
    from memory).

    References
    ----------
    .. [1] J. Muehlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Core losses under the DC
       bias condition based on Steinmetz parameters", IEEE Trans. Power Electron. 27(2),
       pp. 953-963, 2012. doi:10.1109/TPEL.2011.2160971
    """
    for name, value in (("k", k), ("alpha", alpha), ("beta", beta)):
        positive_number(value, name)
    if not isinstance(h_dc, (int, float, np.integer, np.floating)) or not math.isfinite(h_dc):
        raise ValueError(f"h_dc must be a finite number [A/m]; got {h_dc!r}")
    h = abs(float(h_dc))
    levels = np.asarray(bias.h_dc, dtype=float)
    h_max = float(levels[-1])
    extrapolated = h > h_max
    hh = min(h, h_max)
    ln_ratio = float(np.interp(hh, levels, np.log(np.asarray(bias.k_ratio, dtype=float))))
    d_alpha = float(np.interp(hh, levels, np.asarray(bias.alpha_shift, dtype=float)))
    d_beta = float(np.interp(hh, levels, np.asarray(bias.beta_shift, dtype=float)))
    return BiasedSteinmetz(float(k) * math.exp(ln_ratio), float(alpha) + d_alpha, float(beta) + d_beta,
                           h, h_max, bool(extrapolated))


def dc_field_strength(turns, current, path_length):
    """DC field strength of a winding current in a core of given magnetic path length.

    Parameters
    ----------
    turns : float
        Number of turns [-].
    current : float or array_like
        DC (average) winding current [A].
    path_length : float
        Effective magnetic path length of the core [m].

    Returns
    -------
    float or numpy.ndarray
        :math:`H_{dc}` [A/m].

    Notes
    -----
    Ampere's law around the core, no air gap:

    .. math:: H_{dc} = N I_{dc} / l_e

    With an air gap most of the ampere-turns drop across the gap; the field in the core
    material is then lower (use the core's own B-H data, or B_dc).

    References
    ----------
    .. [1] E. C. Snelling, "Soft Ferrites: Properties and Applications", 2nd ed.,
       Butterworths, 1988 (effective core parameters; from memory).
    """
    n = positive_number(turns, "turns")
    le = positive_number(path_length, "path_length", unit="m")
    i = np.asarray(current, dtype=float)
    if not np.all(np.isfinite(i)):
        raise ValueError(f"current must be finite [A]; got {current!r}")
    out = n * i / le
    return float(out) if out.ndim == 0 else out
