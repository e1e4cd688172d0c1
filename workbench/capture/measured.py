"""Measured core loss from a winding voltage and current over whole periods.

Two methods, one integral:

two-winding
    Excitation current i1 in the primary (N1 turns) and the open-circuit voltage
    v2 of a sense winding (N2 turns): no current flows in the sense winding, so
    no copper loss enters, and

    .. math:: P_v = \\frac{N_1}{N_2}\\,\\frac{1}{V_e}\\,\\frac{1}{mT}\\int_0^{mT} v_2\\,i_1\\,dt

single-winding (V-I)
    Voltage and current of the same winding. The product includes the resistive
    loss of the winding; with its resistance R known,

    .. math:: P_v = \\frac{1}{V_e}\\,\\frac{1}{mT}\\int_0^{mT} (v - R\\,i)\\,i\\,dt
              = \\frac{1}{V_e}\\Big(\\frac{1}{mT}\\int_0^{mT} v\\,i\\,dt - I_{rms}^2 R\\Big)

over m whole periods. The mean of the voltage that drives the core (a probe
offset: in steady state the flux returns, so that voltage averages to zero) is
removed before the product.

Probe skew: the loss is the small in-phase part of a mostly reactive product, so
a delay between the probes moves it by about :math:`Q\\,2\\pi f\\tau`. A known
delay is removed by shifting the current (``skew``) before the product.

This module sits at the bottom of the layers (numpy only).

References
----------
.. [1] IEC 60404-6:2003, *Magnetic materials - Part 6: Methods of measurement of
   the magnetic properties of magnetic powder cores and soft ferrites*
   (two-winding method).
.. [2] D. Hou, M. Mu, F. C. Lee, Q. Li, "New high-frequency core loss measurement
   method with partial cancellation concept", IEEE Trans. Power Electron.
   32(4), pp. 2987-2994, 2017 (phase-discrepancy error).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from workbench.checks import positive_number

__all__ = ["PeriodProducts", "measured_loss", "period_products"]

#: Samples handled at a time (bounded temporaries on long records).
CHUNK = 1 << 16


@dataclass(frozen=True)
class PeriodProducts:
    """Means over whole periods of a voltage, a (shifted) current and their products.

    Attributes
    ----------
    v, i : float
        Mean voltage [V] and current [A].
    vi : float
        Mean of v i [W].
    ii : float
        Mean of i^2 [A^2].
    n_periods : int
        Whole periods averaged [-].
    """

    v: float
    i: float
    vi: float
    ii: float
    n_periods: int


def period_products(step: float, v, current, period: float, *, skew: float = 0.0) -> PeriodProducts:
    """Means over the whole periods of an evenly sampled record of v, i, v i and i^2.

    Parameters
    ----------
    step : float
        Sample interval [s].
    v : array_like
        Voltage samples [V].
    current : array_like
        Current samples [A], same length.
    period : float
        Fundamental period [s].
    skew : float
        Delay applied to the current before the products [s]: the current used at
        time t is i(t - skew) (linear interpolation between samples). A current
        probe that lags by tau is corrected by ``skew = -tau``.

    Returns
    -------
    PeriodProducts

    Notes
    -----
    The shifted current is :math:`(1-f)\\,i_{k+a} + f\\,i_{k+a+1}` with a whole and
    f fractional, the same for every sample. The means are rectangle-rule
    averages over exactly m whole periods, :math:`W = mT/\\Delta t` samples (the
    last one weighted by the fraction of W), starting at the first sample where
    the shifted current exists; they are summed a chunk at a time.
    """
    v = np.asarray(v, dtype=float).ravel()
    i = np.asarray(current, dtype=float).ravel()
    n = v.size
    if i.size != n:
        raise ValueError(f"voltage and current must have the same length, got {n} and {i.size}")
    if not (math.isfinite(step) and step > 0 and math.isfinite(period) and period > 0):
        raise ValueError(f"step and period must be finite and positive, got {step!r} and {period!r}")
    d = float(skew) / step
    if not math.isfinite(d):
        raise ValueError(f"skew must be finite, got {skew!r}")
    a = math.floor(-d)
    f = -d - a
    k0 = max(0, -a)
    k_end = min(n, n - a - 1)  # exclusive: i[k + a + 1] must exist
    available = k_end - k0
    n_periods = math.floor(available * step / period + 1e-9)
    if n_periods < 1:
        raise ValueError(
            f"the record ({n * step:.6g} s, less the current shift of {skew:.3g} s) holds less than one "
            f"period of {period:.6g} s"
        )
    width = n_periods * period / step
    whole = min(math.floor(width), available)
    frac = width - whole if whole < available else 0.0
    sums = np.zeros(4)
    for s in range(k0, k0 + whole + (1 if frac > 0 else 0), CHUNK):
        e = min(k0 + whole + (1 if frac > 0 else 0), s + CHUNK)
        vv = v[s:e]
        ii = (1.0 - f) * i[s + a:e + a] + f * i[s + a + 1:e + a + 1]
        wts = np.ones(e - s)
        if frac > 0 and e == k0 + whole + 1:
            wts[-1] = frac
        sums += (np.dot(wts, vv), np.dot(wts, ii), np.dot(wts * vv, ii), np.dot(wts * ii, ii))
    sums /= width
    return PeriodProducts(float(sums[0]), float(sums[1]), float(sums[2]), float(sums[3]), int(n_periods))


def measured_loss(t, v_sense, current, period: float, *, volume: float, turns: float = 1.0,
                  sense_turns: float | None = None, winding_resistance: float = 0.0,
                  skew: float = 0.0) -> tuple[float, int]:
    """Measured loss density of a winding record over whole periods.

    Parameters
    ----------
    t : array_like or float
        Sample times, evenly spaced [s], or the sample interval [s].
    v_sense : array_like
        Voltage [V]: of the sense winding (two-winding) or of the excited winding itself
        (single-winding).
    current : array_like
        Excitation current [A].
    period : float
        Fundamental period [s].
    volume : float
        Effective core volume V_e [m^3].
    turns : float
        Turns N1 of the excited winding [-].
    sense_turns : float, optional
        Turns N2 of the sense winding [-]; None for the single-winding method (ratio 1).
    winding_resistance : float
        Resistance R of the excited winding [ohm] (single-winding only): R i is taken
        off the voltage, which removes I_rms^2 R from the power.
    skew : float
        Delay applied to the current before the product [s] (see :func:`period_products`).

    Returns
    -------
    loss : float
        Loss density [W/m^3].
    periods : int
        Whole periods used [-].

    Notes
    -----
    With :math:`u = v - R\\,i` (the voltage that drives the core) and means over m whole
    periods,

    .. math:: P_v = \\frac{N_1}{N_2 V_e}\\big(\\langle u\\,i\\rangle - \\langle u\\rangle\\langle i\\rangle\\big)
              = \\frac{N_1}{N_2 V_e}\\big(\\langle v i\\rangle - R\\langle i^2\\rangle
                - (\\langle v\\rangle - R\\langle i\\rangle)\\langle i\\rangle\\big)

    (:math:`N_1/N_2 = 1` for a single winding; :math:`\\langle u\\rangle` is the probe
    offset, zero in steady state).

    References
    ----------
    .. [1] IEC 60404-6:2003, two-winding (wattmeter) method.
    """
    if np.ndim(t) == 0:
        step = float(t)
    else:
        tt = np.asarray(t, dtype=float).ravel()
        step = (tt[-1] - tt[0]) / (tt.size - 1)
    for name, value in (("volume", volume), ("turns", turns)):
        positive_number(value, name)
    ratio = 1.0 if sense_turns is None else float(turns) / float(sense_turns)
    r = float(winding_resistance)
    if not (math.isfinite(r) and r >= 0):
        raise ValueError(f"winding_resistance must be finite and not negative, got {winding_resistance!r}")
    m = period_products(step, v_sense, current, period, skew=skew)
    power = m.vi - r * m.ii - (m.v - r * m.i) * m.i
    return ratio * power / float(volume), m.n_periods
