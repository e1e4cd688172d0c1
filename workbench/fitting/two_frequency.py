"""The two-frequency method: energy per cycle against frequency at each flux level."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from workbench.analysis.loss_table import LossTable
from workbench.checks import positive_number
from workbench.fitting._common import (
    _LEVEL,
    _check_table,
    _interval,
    _n_distinct,
    _t_quantile,
)
from workbench.jsonsafe import to_jsonable

__all__ = ["TwoFrequencyFit", "TwoFrequencyLevel", "fit_two_frequency"]


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
        W_h / s [Hz], where the eddy part equals the hysteresis part; NaN when it is not
        resolved (see ``resolved``) or s <= 0.
    hysteresis_energy_ci95, eddy_slope_ci95 : tuple
        95 % intervals (NaN with only two frequencies).
    n_points, n_freqs : int
    freq_range : tuple
        Frequencies used [Hz].
    rows : ndarray
        File rows used.
    resolved : bool
        False when the 95 % interval of W_h or of s includes zero (or either is not
        positive): the table does not separate the two parts and no crossover is given.
    note : str
        Empty, or why the crossover is not given / has no interval.
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
    resolved: bool = True
    note: str = ""

    def to_dict(self) -> dict:
        return to_jsonable({
            "b_peak": self.b_peak, "hysteresis_energy": self.hysteresis_energy,
            "eddy_slope": self.eddy_slope, "crossover_hz": self.crossover_hz,
            "crossover_resolved": self.resolved, "crossover_note": self.note,
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
        return to_jsonable(out)


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
        bp = positive_number(b_peak, "b_peak", unit="T")
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
        resolved, note = True, ""
        if not (coef[0] > 0 and coef[1] > 0):
            resolved = False
            note = ("not resolved by this table: the fitted "
                    + ("hysteresis energy" if coef[0] <= 0 else "eddy slope") + " is not positive")
        elif math.isfinite(ci_h[0]) and (ci_h[0] <= 0 or ci_s[0] <= 0):
            resolved = False
            note = ("not resolved by this table: the 95 % interval of the "
                    + ("hysteresis energy" if ci_h[0] <= 0 else "eddy slope") + " includes zero")
        elif not math.isfinite(ci_h[0]):
            note = "two frequencies only: the crossover has no interval"
        cross = coef[0] / coef[1] if resolved else math.nan
        levels.append(TwoFrequencyLevel(float(np.median(b[m])), float(coef[0]), float(coef[1]), float(cross),
                                        ci_h, ci_s, int(fi.size), nf, (float(fi.min()), float(fi.max())), rows[m],
                                        resolved, note))
    if not levels:
        raise ValueError(f"{src}: no flux level has two or more frequencies; the two-frequency method needs "
                         "at least two frequencies at one flux level")
    if wanted is not None:
        sel = 0
    else:
        score = [(lv.n_freqs, lv.b_peak) for lv in levels]
        sel = max(range(len(levels)), key=lambda i: score[i])
    return TwoFrequencyFit(tuple(levels), sel, tuple(skipped), int((~sine).sum()), src)
