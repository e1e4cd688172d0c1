"""Voltage to flux: the one integration of a winding voltage (Faraday's law).

A winding of N turns on a core of effective area A_e sees ``v = N A_e dB/dt``, so
``B = (1 / (N A_e)) * integral v dt``. A voltage cannot tell a DC flux, and a
probe offset would integrate into a ramp, so the integral is taken of the
voltage with its time-weighted mean removed (in steady state a winding's average
voltage is zero) and the result is centred on zero. Every path that turns a
voltage into flux (a whole record, one averaged period, the period-to-period
spread) uses :func:`volt_seconds`.

This module sits at the bottom of the layers (numpy only).

References
----------
.. [1] IEC 60404-6:2003, *Magnetic materials - Part 6: Methods of measurement of
   the magnetic properties of magnetic powder cores and soft ferrites*
   (flux from the induced voltage of a sense winding).
"""
from __future__ import annotations

import numpy as np

from workbench.checks import positive_number

__all__ = ["flux_density", "volt_seconds"]

#: Samples handled at a time when a straight line is taken off a long record.
CHUNK = 1 << 16


def _positive(value, name: str) -> float:
    return positive_number(value, name)


def volt_seconds(t, v, *, periodic: bool = False) -> np.ndarray:
    """Integral of a voltage with its mean removed, centred on zero [V s].

    Parameters
    ----------
    t : float or array_like
        Sample times [s], strictly increasing, or the step of an even grid [s]
        (the fast path: no time array is formed).
    v : array_like
        Voltage samples [V].
    periodic : bool
        True when ``v`` is exactly one period on an even grid whose next sample
        would be ``v[0]``: the integral then includes the wrap-around step.

    Returns
    -------
    ndarray
        :math:`x_k = \\int_{t_0}^{t_k} (v - \\bar v)\\,dt` minus its mean, same length as ``v`` [V s].

    Notes
    -----
    Trapezoidal rule. :math:`\\bar v` is the time-weighted (trapezoid) mean, so
    the integral ends where it started; the straight line through its two ends
    (zero up to rounding) is also taken off. On an even grid the sum is formed
    in place: one array the size of the record, the line taken off in chunks.
    """
    v = np.asarray(v, dtype=float).ravel()
    if periodic:
        if np.ndim(t) != 0:
            raise ValueError("periodic=True needs the step of an even grid, not a time array")
        x = volt_seconds(t, np.append(v, v[0]))[:-1]  # the repeated first sample is not part of the period
        x -= x.mean()
        return x
    if v.size < 2:
        raise ValueError(f"a voltage record needs at least 2 samples, got {v.size}")
    if np.ndim(t) == 0:
        step = _positive(t, "step")
        # x_k = step * (cumsum(v)_k - (v_0 + v_k) / 2), formed in place
        x = np.cumsum(v)
        x -= 0.5 * v
        x -= 0.5 * v[0]
        x *= step
        n = v.size
        slope = x[-1] / (n - 1)  # the mean voltage (and rounding) as a straight line per sample
        for s in range(0, n, CHUNK):
            e = min(n, s + CHUNK)
            x[s:e] -= slope * np.arange(s, e, dtype=float)
    else:
        t = np.asarray(t, dtype=float).ravel()
        if t.size != v.size:
            raise ValueError(f"t and v must have the same length, got {t.size} and {v.size}")
        dt = np.diff(t)
        x = np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * dt)))
        x -= x[-1] * (t - t[0]) / (t[-1] - t[0])
    x -= x.mean()
    return x


def flux_density(t, v, *, turns: float, area: float, periodic: bool = False) -> np.ndarray:
    """Flux density from a winding voltage (Faraday's law), offset and drift removed [T].

    Parameters
    ----------
    t : float or array_like
        Sample times [s] or the step of an even grid [s].
    v : array_like
        Winding voltage [V].
    turns : float
        Turns of the winding the voltage was measured on [-].
    area : float
        Effective core cross-section [m^2].
    periodic : bool
        ``v`` is exactly one period on an even grid (see :func:`volt_seconds`).

    Returns
    -------
    ndarray
        Flux density at the sample times, centred on zero [T].

    Notes
    -----
    :math:`B = \\frac{1}{N A_e}\\int (v - \\bar v)\\,dt` (Faraday's law), by
    :func:`volt_seconds`.

    References
    ----------
    .. [1] IEC 60404-6:2003 (flux from the induced voltage of a sense winding).
    """
    turns = _positive(turns, "turns")
    area = _positive(area, "area")
    x = volt_seconds(t, v, periodic=periodic)
    x /= turns * area
    return x
