"""Steinmetz sets per contiguous frequency band, when one set misses a tolerance."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from workbench.analysis.loss_table import LossTable
from workbench.fitting._common import _check_table
from workbench.fitting.steinmetz import fit_steinmetz
from workbench.jsonsafe import to_jsonable

__all__ = ["SteinmetzBands", "fit_steinmetz_bands"]


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
        What was done, and which frequencies no band's data covers.
    gaps : tuple of (float, float)
        Frequency intervals [Hz] between neighbouring bands' data, open at both ends: there
        the set of the nearer band (split at ``edges``) is extrapolated.
    """

    bands: tuple
    edges: np.ndarray
    tolerance: float
    tolerance_met: bool
    split: bool
    message: str
    gaps: tuple = ()

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
        return to_jsonable({
            "split": self.split, "tolerance": self.tolerance, "tolerance_met": self.tolerance_met,
            "message": self.message, "edges": self.edges,
            "uncovered_hz": [list(g) for g in self.gaps],
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
    gaps = tuple((float(a.freq_range[1]), float(b.freq_range[0])) for a, b in zip(bands[:-1], bands[1:])
                 if b.freq_range[0] > a.freq_range[1] * (1 + 1e-9))
    if met:
        msg = (f"one set misses the {tolerance:.0%} tolerance (worst point {whole.max_rel_error:.1%}); "
               f"split into {nb} frequency bands, worst point {worst_err:.1%}")
    else:
        msg = (f"no split into bands of at least {min_freqs} frequencies meets the {tolerance:.0%} tolerance; "
               f"best found: {nb} band(s), worst point {worst_err:.1%}")
    if gaps:
        msg += ("; no band's data covers " + ", ".join(f"{lo:.4g}-{hi:.4g} Hz" for lo, hi in gaps)
                + " (between measured frequencies: the nearer band's set is extrapolated there)")
    return SteinmetzBands(bands, np.array(edges), float(tolerance), met, nb > 1, msg, gaps)
