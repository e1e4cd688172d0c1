"""Captured waveforms -> one averaged period of flux, measured loss and predicted loss.

The question this module answers: "my converter is running and I captured the
winding voltage (and maybe the current): how much is the core losing, and does
the model agree?" Three kinds of capture are handled:

``"flux"``
    Flux density ``b`` [T] directly, or magnetic flux ``flux`` [Wb] divided by the
    effective area.
``"voltage"``
    A winding voltage ``v`` [V], integrated to B with the turns and the effective
    area (Faraday's law); the probe offset is removed with the mean over whole
    periods.
``"two-winding"``
    Primary current ``i`` [A] and sense-winding voltage ``v_sense`` [V]: B from the
    sense voltage (turns N2, area A_e), H = N1 i1 / l_e, the B-H loop and the
    measured loss density

    .. math:: P = \\frac{N_1}{N_2}\\,\\frac{1}{V_e\\,mT}\\int_0^{mT} v_2\\,i_1\\,dt
              = \\frac{1}{T}\\oint H\\,dB

    over m whole periods.

Phase error between the probes
------------------------------
In a two-winding measurement the loss is the small in-phase part of a large,
mostly reactive product v2 i1. A time skew between the voltage and current
probes (unequal cable or probe delays, a current probe's own delay) turns part
of the reactive power into apparent loss: a skew :math:`\\tau` shifts the phase
of harmonic n by :math:`2\\pi n f \\tau`, and the error in the loss is about
:math:`Q\\,2\\pi f\\tau` where Q is the reactive volt-amperes. For a core with a
high quality factor (ferrite at low flux: :math:`Q/P` of 10 to 100) one
nanosecond at 100 kHz already moves the result by several percent. The
analysis therefore reports the relative change of the measured loss for a 1 ns
delay of the current (``skew_sensitivity_per_ns``); deskew the probes (a common
reference edge) before trusting the measured figure.

Safety: capturing converter waveforms means probing live circuits at hazardous
voltages, and a loss test runs the core hot. Use rated differential probes and
isolation, let cores cool before handling, and follow local electrical codes
and your site's licensed practice. Results are estimates; verify the
temperature rise by test.

References
----------
.. [1] IEC 60404-6:2003, *Magnetic materials - Part 6: Methods of measurement of
   the magnetic properties of magnetic powder cores and soft ferrites*
   (two-winding method, loss from the B-H loop).
.. [2] D. Hou, M. Mu, F. C. Lee, Q. Li, "New high-frequency core loss measurement
   method with partial cancellation concept", IEEE Trans. Power Electron.
   32(4), pp. 2987-2994, 2017 (phase-discrepancy error of the two-winding method).
.. [3] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
   prediction of ferrite core loss with nonsinusoidal waveforms using only
   Steinmetz parameters", IEEE COMPEL 2002.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from workbench import models
from workbench.analysis.breakdown import LossBreakdown, breakdown
from workbench.analysis.steady_state import (
    denoise_period,
    detect_period,
    fold_periods,
    uniform_grid,
)
from workbench.waveforms import NOISE_THRESHOLD_SIGMAS, FluxWaveform, estimate_noise

__all__ = [
    "SteinmetzSet",
    "CaptureAnalysis",
    "analyse_capture",
    "analyse_record",
    "analyse_file",
    "classify_waveform",
    "flat_mask",
    "flatten_dwells",
    "rising_fraction",
    "measured_loss",
    "predict_loss",
    "KINDS",
    "WAVEFORM_CLASSES",
]

KINDS = ("flux", "voltage", "two-winding")
WAVEFORM_CLASSES = ("sine-like", "triangular", "trapezoidal", "other")

#: Fewer whole periods than this gives a warning.
MIN_PERIODS = 3
#: Period-to-period spread (relative to peak-to-peak) above which we warn.
SPREAD_WARNING = 0.02
#: Samples per averaged period are capped here (longer periods are read at this resolution).
MAX_SAMPLES_PER_PERIOD = 16384
#: Probe skew used for the sensitivity figure [s].
SKEW = 1e-9
#: Measured / model ratio outside this band gives a note.
RATIO_BAND = (0.5, 2.0)


@dataclass(frozen=True)
class SteinmetzSet:
    """A bare Steinmetz set given directly, without a library material.

    Parameters
    ----------
    k : float
        Coefficient [W/m^3 for f in Hz and B_peak in T].
    alpha : float
        Frequency exponent [-].
    beta : float
        Flux-density exponent [-].
    """

    k: float
    alpha: float
    beta: float

    def __post_init__(self):
        for name in ("k", "alpha", "beta"):
            value = getattr(self, name)
            try:
                x = float(value)
            except (TypeError, ValueError):
                raise ValueError(f"Steinmetz {name} must be a number, got {value!r}") from None
            if not np.isfinite(x) or x <= 0:
                raise ValueError(f"Steinmetz {name} must be finite and positive, got {value!r}")
            object.__setattr__(self, name, x)
        if not 0.5 <= self.alpha <= 3.5:
            raise ValueError(f"Steinmetz alpha = {self.alpha!r} is implausible (expected 1 to 3)")
        if not 1.0 <= self.beta <= 4.5:
            raise ValueError(f"Steinmetz beta = {self.beta!r} is implausible (expected 1.5 to 3.5)")

    @property
    def name(self) -> str:
        return f"Steinmetz k={self.k:g}, alpha={self.alpha:g}, beta={self.beta:g}"


@dataclass(frozen=True)
class CaptureAnalysis:
    """Result of analysing one capture. SI units throughout; loss densities in W/m^3.

    Attributes
    ----------
    source : str
        File the capture came from.
    kind : {"flux", "voltage", "two-winding"}
        How B was obtained.
    freq : float
        Fundamental frequency [Hz].
    periods_used : int
        Whole periods averaged [-].
    periods_in_record : float
        Periods the record spans [-].
    spread : float
        Period-to-period spread of the flux: RMS difference of each period from
        the average, relative to its peak-to-peak [-].
    waveform : FluxWaveform
        The averaged, denoised period of flux.
    noise : float
        Standard deviation of the noise left on the averaged flux [T]: the larger
        of the sample-to-sample (white) estimate and the period-to-period scatter
        divided by sqrt(periods - 1).
    threshold : float
        Reversal threshold used for the minor loops, 12 times ``noise`` [T].
    harmonics_kept : int
        Highest harmonic kept by the denoising low-pass [-].
    denoised : bool
        Whether the low-pass was applied.
    duty : float
        Fraction of the period with rising flux [-].
    waveform_class : str
        One of :data:`WAVEFORM_CLASSES`.
    h : ndarray or None
        Field strength H over the averaged period, on ``waveform.t`` [A/m]
        (two-winding captures with a path length).
    model : LossBreakdown or None
        Model loss for a library material.
    model_loss : float or None
        Model total (iGSE or i2GSE) [W/m^3].
    model_name : str
        Material name or the bare Steinmetz set.
    hysteresis, classical, excess : float or None
        Separation parts [W/m^3] where available.
    measured_loss : float or None
        Measured loss density of a two-winding capture [W/m^3].
    skew_sensitivity : float or None
        Relative change of the measured loss for the current delayed by 1 ns [1/ns].
    volume : float or None
        Effective core volume used [m^3].
    warnings, notes : tuple of str
        Things to check, and remarks.
    """

    source: str
    kind: str
    freq: float
    periods_used: int
    periods_in_record: float
    spread: float
    waveform: FluxWaveform
    noise: float
    threshold: float
    harmonics_kept: int
    denoised: bool
    duty: float
    waveform_class: str
    h: np.ndarray | None = None
    model: LossBreakdown | None = None
    model_loss: float | None = None
    model_name: str = ""
    hysteresis: float | None = None
    classical: float | None = None
    excess: float | None = None
    measured_loss: float | None = None
    skew_sensitivity: float | None = None
    volume: float | None = None
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def flux_pp(self) -> float:
        """Peak-to-peak flux density [T]."""
        return self.waveform.flux_pp

    @property
    def b_peak(self) -> float:
        """Peak flux density, half the peak-to-peak [T]."""
        return self.waveform.b_peak

    @property
    def ratio(self) -> float | None:
        """Measured / model loss [-], when both exist."""
        if self.measured_loss is None or not self.model_loss:
            return None
        return self.measured_loss / self.model_loss

    def to_dict(self) -> dict:
        """Plain dict with SI-suffixed keys, ready for JSON (no arrays)."""
        out = {
            "source": self.source,
            "kind": self.kind,
            "frequency_hz": self.freq,
            "period_s": 1.0 / self.freq,
            "flux_pp_t": self.flux_pp,
            "b_peak_t": self.b_peak,
            "b_dc_t": self.waveform.b_dc,
            "periods_used": self.periods_used,
            "periods_in_record": self.periods_in_record,
            "period_spread": self.spread,
            "noise_t": self.noise,
            "reversal_threshold_t": self.threshold,
            "harmonics_kept": self.harmonics_kept,
            "denoised": self.denoised,
            "duty": self.duty,
            "waveform_class": self.waveform_class,
            "model": self.model_name or None,
            "loss_w_m3": self.model_loss,
            "classical_w_m3": self.classical,
            "warnings": list(self.warnings),
            "notes": list(self.notes),
        }
        if self.model is not None:
            out["loss_model"] = self.model.total_model
            out["n_minor_loops"] = self.model.n_minor_loops
            out["minor_loop_share"] = self.model.minor_loop_share
            out["loss_w_kg"] = self.model.total_w_kg
        if self.hysteresis is not None:
            out["hysteresis_w_m3"] = self.hysteresis
            out["excess_w_m3"] = self.excess
        if self.kind == "two-winding":
            out["measured_loss_w_m3"] = self.measured_loss
            out["measured_to_model_ratio"] = self.ratio
            out["skew_sensitivity_per_ns"] = self.skew_sensitivity
            out["h_peak_a_m"] = None if self.h is None else float(0.5 * np.ptp(self.h))
            out["volume_m3"] = self.volume
        return out


# ---------------------------------------------------------------------------
# small pure pieces
# ---------------------------------------------------------------------------
def rising_fraction(waveform: FluxWaveform, rel_slope: float = 0.05) -> float:
    """Fraction of the period during which the flux rises [-].

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux.
    rel_slope : float
        Slopes below this fraction of the largest |dB/dt| count as flat
        (see :func:`flat_mask`) [-].

    Returns
    -------
    float
        :math:`\\frac{1}{T}\\sum_{i:\\,\\dot B_i > \\epsilon} \\Delta t_i` with
        :math:`\\epsilon = ` ``rel_slope`` :math:`\\max|\\dot B|`: the duty cycle of
        a triangle, half the duty of a three-level trapezoid.
    """
    s = waveform.dbdt()
    if not np.any(s):
        return 0.0
    rising = (s > 0) & ~flat_mask(waveform, rel_slope)
    return float(np.sum(waveform.segment_durations[rising]) / waveform.period)


def _runs(mask: np.ndarray) -> int:
    """Number of runs of True in a periodic boolean sequence."""
    if mask.all():
        return 1
    if not mask.any():
        return 0
    return int(np.sum(mask & ~np.roll(mask, 1)))


def _run_bounds(mask: np.ndarray):
    """(starts, lengths) of the runs of True in a periodic mask that is not all True."""
    n = mask.size
    shift = int(np.argmin(mask))  # a False sample: no run wraps across the rotated start
    m = np.roll(mask, -shift).astype(np.int8)
    d = np.diff(np.concatenate(([0], m, [0])))
    starts = np.flatnonzero(d == 1)
    ends = np.flatnonzero(d == -1)
    return (starts + shift) % n, ends - starts


def _clean_mask(mask: np.ndarray, min_len: int) -> np.ndarray:
    """Fill gaps shorter than ``min_len`` in a periodic mask, then drop runs shorter than it."""
    out = mask.copy()
    n = out.size
    for value in (False, True):
        target = out == value
        if target.all() or not target.any():
            continue
        starts, lengths = _run_bounds(target)
        for s0, ln in zip(starts, lengths):
            if ln < min_len:
                out[(s0 + np.arange(ln)) % n] = not value
    return out


def flat_mask(waveform: FluxWaveform, rel_slope: float = 0.1, min_fraction: float = 0.01) -> np.ndarray:
    """Segments of a uniformly sampled period where the flux is flat (zero-voltage intervals).

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux, evenly sampled.
    rel_slope : float
        |dB/dt| below this fraction of its peak counts as flat [-].
    min_fraction : float
        Flat runs, and gaps between them, shorter than this fraction of the
        period are ignored (ringing of a filtered edge) [-].

    Returns
    -------
    ndarray of bool
        One entry per segment.
    """
    s = waveform.dbdt()
    smax = float(np.max(np.abs(s)))
    if smax == 0:
        return np.ones(s.size, dtype=bool)
    mask = np.abs(s) < rel_slope * smax
    return _clean_mask(mask, max(1, int(round(min_fraction * s.size))))


def flatten_dwells(waveform: FluxWaveform, rel_slope: float = 0.1, min_fraction: float = 0.01) -> tuple[FluxWaveform, int]:
    """Make the zero-voltage intervals of a captured trapezoid exactly flat.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of (denoised) flux, evenly sampled.
    rel_slope : float
        |dB/dt| below this fraction of its peak counts as a dwell [-].
    min_fraction : float
        Shortest dwell considered, as a fraction of the period [-].

    Returns
    -------
    waveform : FluxWaveform
        The period with each dwell set to its mean flux.
    n_dwells : int
        Number of dwells flattened.

    Notes
    -----
    Residual noise and filter ringing leave the flat parts of a captured
    trapezoid with small slopes; the relaxation term of the i2GSE only sees an
    interval whose slope is essentially zero. Setting each dwell to its mean
    moves the flux by at most ``rel_slope`` times the peak slope times the
    dwell, a small fraction of the peak-to-peak.
    """
    mask = flat_mask(waveform, rel_slope, min_fraction)
    if mask.all() or not mask.any():
        return waveform, 0
    n = mask.size
    b = np.array(waveform.b)
    starts, lengths = _run_bounds(mask)
    for s0, ln in zip(starts, lengths):
        idx = (s0 + np.arange(ln + 1)) % n  # segment run covers samples s0 .. s0+ln
        b[idx] = b[idx].mean()
    return FluxWaveform(waveform.t, b, waveform.period), int(starts.size)


def classify_waveform(waveform: FluxWaveform, threshold: float | None = None) -> str:
    """Waveform class from the shape of dB/dt.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of (denoised) flux.
    threshold : float, optional
        Reversal threshold [T] for counting minor loops.

    Returns
    -------
    str
        ``"sine-like"``, ``"triangular"``, ``"trapezoidal"`` or ``"other"``.

    Notes
    -----
    * sine-like: dB/dt correlates with a sinusoid at the fundamental above 0.99
      (a square wave, the dB/dt of a triangle, reaches only
      :math:`\\sqrt{8}/\\pi \\approx 0.90`);
    * otherwise, with more than one rise and one fall (minor loops): other;
    * trapezoidal: one or two flat intervals (|dB/dt| below 10 % of its peak)
      covering at least 5 % of the period: the zero-voltage intervals of a
      three-level bridge, or the idle interval of a discontinuous-mode converter;
    * triangular: no flat interval, and on at least 80 % of the rising and of
      the falling time the slope stays within 20 % of its median (|dB/dt| takes
      two levels);
    * anything else: other.
    """
    w = waveform.resample(max(256, min(waveform.n_samples, 1 << 14))) if not waveform.is_uniform() else waveform
    s = w.dbdt()
    s0 = s - s.mean()
    energy = float(np.sum(s0**2))
    if energy <= 0:
        return "other"
    c = np.fft.rfft(s0)
    n = s0.size
    corr = float(np.sqrt(2.0 * np.abs(c[1]) ** 2 / n / energy)) if c.size > 1 else 0.0
    if corr > 0.99:
        return "sine-like"
    if w.reversals(threshold).size > 2:
        return "other"
    flat = flat_mask(w)
    # one dwell (the idle interval of a discontinuous-mode converter) or two (a three-level
    # bridge): either way the flux stops while the winding voltage is zero
    if flat.mean() >= 0.05 and _runs(flat) in (1, 2):
        return "trapezoidal"
    if flat.mean() < 0.05:
        ok = []
        moving = ~flat
        for part in (s[moving & (s > 0)], -s[moving & (s < 0)]):
            if part.size == 0:
                return "other"
            med = np.median(part)
            ok.append(np.mean(np.abs(part - med) <= 0.2 * med) >= 0.8)
        if all(ok):
            return "triangular"
    return "other"


def _periodic_integral(v: np.ndarray, period: float) -> np.ndarray:
    """Integral over one period of an evenly sampled periodic signal, mean removed [unit*s].

    The mean of ``v`` (a probe offset; a winding's average voltage is zero in
    steady state) is removed first, then the cumulative trapezoid sum, then the
    mean of the result.
    """
    n = v.size
    dt = period / n
    vv = v - v.mean()
    x = np.concatenate(([0.0], np.cumsum(0.5 * (vv[1:] + vv[:-1]) * dt)))
    return x - x.mean()


def measured_loss(t, v_sense, current, period: float, *, turns: float, sense_turns: float, volume: float,
                  skew: float = 0.0) -> tuple[float, int]:
    """Loss density of a two-winding measurement over whole periods.

    Parameters
    ----------
    t : array_like
        Sample times, evenly spaced [s].
    v_sense : array_like
        Sense-winding voltage [V].
    current : array_like
        Primary (excitation) current [A].
    period : float
        Fundamental period [s].
    turns : float
        Primary turns N1 [-].
    sense_turns : float
        Sense-winding turns N2 [-].
    volume : float
        Effective core volume V_e [m^3].
    skew : float
        Delay applied to the current before the product [s] (for the skew
        sensitivity; 0 for the measurement).

    Returns
    -------
    loss : float
        Loss density [W/m^3].
    periods : int
        Whole periods used [-].

    Notes
    -----
    .. math:: P = \\frac{N_1}{N_2}\\,\\frac{1}{V_e\\,mT}\\int_{t_0}^{t_0+mT}
              (v_2 - \\bar v_2)\\,i_1\\,dt

    over the m whole periods in the record, with the mean (probe offset) of the
    sense voltage over those periods removed, since the average voltage of a
    winding in steady state is zero. The product is averaged on the folded
    period grid, which integrates exactly whole periods.

    References
    ----------
    .. [1] IEC 60404-6:2003, two-winding (wattmeter) method.
    """
    t = np.asarray(t, dtype=float)
    v = np.asarray(v_sense, dtype=float)
    i = np.asarray(current, dtype=float)
    if skew:
        i = np.interp(t - skew, t, i)
    step = (t[-1] - t[0]) / (t.size - 1)
    samples = min(max(16, int(round(period / step))), 4 * MAX_SAMPLES_PER_PERIOD)
    fold = fold_periods(t, np.vstack([v, i, v * i]), period, samples=samples)
    v_mean, i_mean, p_mean = (float(row.mean()) for row in fold.mean)
    power = p_mean - v_mean * i_mean
    return (turns / sense_turns) * power / volume, fold.n_periods


# ---------------------------------------------------------------------------
# model loss
# ---------------------------------------------------------------------------
def predict_loss(waveform, material, steinmetz, threshold, *, temperature=None, thickness=None, resistivity=None,
                 skin_effect=True):
    """Model loss of one period of flux for a library material or a bare Steinmetz set.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux.
    material : workbench.materials.Material or None
        Library material: :func:`workbench.analysis.breakdown.breakdown` is used.
    steinmetz : SteinmetzSet or None
        Bare Steinmetz set (when ``material`` is None): iGSE with minor loops.
    threshold : float or None
        Reversal threshold [T]; None derives it from the data.
    temperature : float, optional
        Core temperature [degC] (materials).
    thickness, resistivity : float, optional
        Lamination thickness [m] and resistivity [ohm m]; with a bare set, both
        are needed for the classical eddy part (no skin effect).
    skin_effect : bool
        Skin effect in the classical part (materials).

    Returns
    -------
    tuple
        ``(breakdown or None, total, hysteresis, classical, excess, model name,
        warnings, notes)``; loss densities in W/m^3, None where not computed.

    Notes
    -----
    iGSE [1]_: :math:`P = \\frac{1}{T}\\int_0^T k_i |dB/dt|^{\\alpha} (\\Delta B)^{\\beta-\\alpha} dt`,
    loop by loop.

    References
    ----------
    .. [1] K. Venkatachalam et al., IEEE COMPEL 2002.
    """
    if material is not None:
        bd = breakdown(waveform, material, temperature=temperature, thickness=thickness,
                       resistivity=resistivity, skin_effect=skin_effect, threshold=threshold)
        return bd, bd.total, bd.hysteresis, bd.classical, bd.excess, material.name, list(bd.warnings), list(bd.notes)
    if steinmetz is not None:
        res = models.igse_loops(waveform, steinmetz.k, steinmetz.alpha, steinmetz.beta, threshold=threshold)
        classical = None
        notes = ["bare Steinmetz set: no valid range, saturation or separation data to check against"]
        if thickness is not None and resistivity is not None:
            classical = float(models.classical_eddy_waveform(waveform, resistivity, thickness, None))
            notes.append("classical eddy part from the given thickness and resistivity, without skin effect")
        return None, float(res.total), None, classical, None, steinmetz.name, [], notes
    return None, None, None, None, None, "", [
        "no material or Steinmetz set given: model loss not computed"], []


# ---------------------------------------------------------------------------
# the pipeline
# ---------------------------------------------------------------------------
def _positive(value, name, source):
    if value is None:
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{source}: {name} must be a number, got {value!r}") from None
    if not np.isfinite(x) or x <= 0:
        raise ValueError(f"{source}: {name} must be finite and positive, got {value!r}")
    return x


def _choose_kind(channels, source):
    if "i" in channels and "v_sense" in channels:
        return "two-winding"
    if "b" in channels or "flux" in channels:
        return "flux"
    if "v" in channels or "v_sense" in channels:
        return "voltage"
    raise ValueError(
        f"{source}: no flux channel: need b, flux, v, or i with v_sense; the file has "
        f"{', '.join(sorted(channels)) or 'no channels'}"
    )


def analyse_record(
    t,
    channels,
    *,
    source: str = "<arrays>",
    clipped=(),
    turns: float | None = None,
    area: float | None = None,
    volume: float | None = None,
    path_length: float | None = None,
    sense_turns: float | None = None,
    material=None,
    steinmetz: SteinmetzSet | None = None,
    temperature: float | None = None,
    thickness: float | None = None,
    resistivity: float | None = None,
    skin_effect: bool = True,
) -> CaptureAnalysis:
    """Analyse a captured record given as arrays (see :func:`analyse_capture`).

    Parameters
    ----------
    t : array_like
        Sample times [s], strictly increasing.
    channels : Mapping[str, array_like]
        Glossary name -> samples in SI: ``"b"`` [T], ``"flux"`` [Wb], ``"v"`` [V],
        ``"v_sense"`` [V], ``"i"`` [A].
    source : str
        Name used in messages.
    clipped : iterable of str
        Channels flagged as clipped by the reader.
    turns : float, optional
        Turns of the winding ``v`` is measured on; the primary N1 of a
        two-winding capture [-].
    area : float, optional
        Effective core cross-section A_e [m^2].
    volume : float, optional
        Effective core volume V_e [m^3]; default ``area * path_length``.
    path_length : float, optional
        Effective magnetic path length l_e [m].
    sense_turns : float, optional
        Turns N2 of the sense winding [-]; default ``turns``.
    material : workbench.materials.Material, optional
        Library material for the model loss.
    steinmetz : SteinmetzSet, optional
        A bare Steinmetz set instead of a material.
    temperature : float, optional
        Core temperature [degC].
    thickness, resistivity : float, optional
        Override the lamination thickness [m] and resistivity [ohm m].
    skin_effect : bool
        Include the skin effect in the classical part (materials only).

    Returns
    -------
    CaptureAnalysis
    """
    if material is not None and steinmetz is not None:
        raise ValueError("give either a material or a Steinmetz set, not both")
    chans = {str(k): np.asarray(v, dtype=float).ravel() for k, v in dict(channels).items()}
    turns = _positive(turns, "turns", source)
    area = _positive(area, "area", source)
    volume = _positive(volume, "volume", source)
    path_length = _positive(path_length, "path length", source)
    sense_turns = _positive(sense_turns, "sense turns", source)
    thickness = _positive(thickness, "thickness", source)
    resistivity = _positive(resistivity, "resistivity", source)
    kind = _choose_kind(chans, source)
    warnings: list[str] = []
    notes: list[str] = []

    if kind == "two-winding":
        used = ["v_sense", "i"]
    elif kind == "flux":
        used = ["b"] if "b" in chans else ["flux"]
    else:
        used = ["v"] if "v" in chans else ["v_sense"]
    clipped = tuple(clipped)
    for name in used:
        if name in clipped:
            raise ValueError(
                f"{source}: channel {name!r} is clipped (flat-topped at the instrument's range); "
                "the loss would be wrong: capture again with more vertical range"
            )
    for name in clipped:
        if name not in used:
            warnings.append(f"channel {name!r} is clipped but not used for the loss")

    # geometry needed by each kind
    if kind == "flux" and "flux" in used and area is None:
        raise ValueError(f"{source}: a flux [Wb] capture needs the effective area (--area)")
    if kind == "voltage":
        n_wind = turns if used[0] == "v" else (sense_turns or turns)
        if n_wind is None or area is None:
            raise ValueError(f"{source}: a winding-voltage capture needs the turns (--turns) and the effective area (--area)")
    if kind == "two-winding":
        if turns is None or area is None:
            raise ValueError(f"{source}: a two-winding capture needs the primary turns (--turns) and the effective area (--area)")
        if sense_turns is None:
            sense_turns = turns
            warnings.append(f"sense-winding turns not given: taken equal to the primary turns ({turns:g})")

    for name in used:
        y = chans[name]
        if y.size != np.asarray(t).size:
            raise ValueError(f"{source}: channel {name!r} has {y.size} samples, time has {np.asarray(t).size}")
        bad = ~np.isfinite(y)
        if bad.any():
            j = int(np.argmax(bad))
            raise ValueError(f"{source}: channel {name!r} has a non-finite value at sample {j + 1}: {y[j]!r}")
        if np.ptp(y) == 0:
            raise ValueError(f"{source}: channel {name!r} is constant ({y[0]!r}): no waveform")

    tg, ys, resampled = uniform_grid(t, np.vstack([chans[name] for name in used]))
    if resampled:
        warnings.append("time stamps are unevenly spaced: the record was interpolated onto an even grid")
    step = (tg[-1] - tg[0]) / (tg.size - 1)
    rows = dict(zip(used, ys))

    # the signal used to find the period: flux (voltage integrated over the record)
    if kind == "flux":
        b_raw = rows[used[0]] / (area if used[0] == "flux" else 1.0)
        detect_signal = b_raw
    else:
        v_name = "v_sense" if kind == "two-winding" else used[0]
        vv = rows[v_name] - rows[v_name].mean()
        x = np.concatenate(([0.0], np.cumsum(0.5 * (vv[1:] + vv[:-1]) * step)))
        detect_signal = x - np.polyval(np.polyfit(tg - tg[0], x, 1), tg - tg[0])
    try:
        est = detect_period(tg, detect_signal, noise=estimate_noise(detect_signal))
    except ValueError as exc:
        raise ValueError(f"{source}: {exc}") from None
    period = est.period
    if est.n_periods < 1.0:
        raise ValueError(f"{source}: the record spans less than one period ({est.n_periods:.2f})")

    samples = min(max(16, int(round(period / step))), MAX_SAMPLES_PER_PERIOD)
    try:
        fold = fold_periods(tg, ys, period, samples=samples)
    except ValueError as exc:
        raise ValueError(f"{source}: {exc}") from None
    folded = dict(zip(used, fold.mean))
    spreads = dict(zip(used, fold.spread))

    if kind == "flux":
        b_avg = folded[used[0]] / (area if used[0] == "flux" else 1.0)
        spread = float(spreads[used[0]])
        wander = spread * float(np.ptp(b_avg)) / np.sqrt(max(fold.n_periods - 1, 1))
    else:
        v_name = "v_sense" if kind == "two-winding" else used[0]
        n_wind = (sense_turns if kind == "two-winding" else
                  (turns if v_name == "v" else (sense_turns or turns)))
        b_avg = _periodic_integral(folded[v_name], period) / (n_wind * area)
        # spread of the flux, from the spread of each period's voltage integral
        spread = _flux_spread(tg, ys[used.index(v_name)], period, samples, fold.n_periods)
        wander = spread * float(np.ptp(b_avg)) / np.sqrt(max(fold.n_periods - 1, 1))

    white = estimate_noise(b_avg)
    # noise left on the average: the white-noise estimate, or, where larger, the
    # period-to-period scatter divided by sqrt(J - 1) (integrated voltage noise wanders
    # slowly, which a sample-to-sample estimate cannot see)
    noise = max(white, wander) if fold.n_periods > 1 else white
    threshold = max(NOISE_THRESHOLD_SIGMAS * noise, 1e-12 * float(np.ptp(b_avg)))
    dn = denoise_period(b_avg, noise=white)
    waveform = FluxWaveform(fold.phase, dn.values, period)
    shape_class = classify_waveform(waveform, threshold)
    if shape_class == "trapezoidal":
        waveform, n_dwells = flatten_dwells(waveform)
        if n_dwells:
            notes.append(f"{n_dwells} zero-voltage intervals set exactly flat (|dB/dt| below 10 % of its peak)")

    if fold.n_periods < MIN_PERIODS:
        warnings.append(
            f"only {fold.n_periods} whole period(s) in the record (at least {MIN_PERIODS} recommended): "
            "noise and drift are poorly averaged"
        )
    if spread > SPREAD_WARNING:
        warnings.append(
            f"periods differ by {100 * spread:.1f} % RMS of the peak-to-peak flux: "
            "the converter may not be in steady state, or the period is not constant"
        )

    bd, total, hyst, classical, excess, model_name, mwarn, mnotes = predict_loss(
        waveform, material, steinmetz, threshold, temperature=temperature, thickness=thickness,
        resistivity=resistivity, skin_effect=skin_effect)
    warnings.extend(mwarn)
    notes.extend(mnotes)

    h = None
    meas = sens = None
    if kind == "two-winding":
        if path_length is None:
            warnings.append("no magnetic path length (--path-length): H and the measured loss are not computed")
        else:
            h = turns * folded["i"] / path_length
            vol = volume if volume is not None else area * path_length
            volume = vol
            v2, i1 = rows["v_sense"], rows["i"]
            meas, _ = measured_loss(tg, v2, i1, period, turns=turns, sense_turns=sense_turns, volume=vol)
            skewed, _ = measured_loss(tg, v2, i1, period, turns=turns, sense_turns=sense_turns, volume=vol, skew=SKEW)
            sens = (skewed - meas) / meas if meas != 0 else None
            if meas <= 0:
                warnings.append(
                    f"measured loss is not positive ({meas:.4g} W/m^3): check the probe polarity and skew"
                )
            if sens is not None and abs(sens) > 0.02:
                warnings.append(
                    f"the measured loss changes by {100 * sens:+.1f} % per ns of probe skew: deskew the "
                    "voltage and current probes before trusting it"
                )
            if total and meas > 0:
                r = meas / total
                if not RATIO_BAND[0] <= r <= RATIO_BAND[1]:
                    notes.append(f"measured loss is {r:.2f} times the model's: check the material choice and the geometry")
    return CaptureAnalysis(
        source=source, kind=kind, freq=1.0 / period, periods_used=fold.n_periods,
        periods_in_record=float(est.n_periods), spread=float(spread), waveform=waveform,
        noise=float(noise), threshold=float(threshold), harmonics_kept=int(dn.harmonics_kept),
        denoised=bool(dn.filtered), duty=rising_fraction(waveform),
        waveform_class=shape_class, h=h, model=bd, model_loss=total,
        model_name=model_name, hysteresis=hyst, classical=classical, excess=excess,
        measured_loss=meas, skew_sensitivity=sens, volume=volume, warnings=tuple(warnings), notes=tuple(notes),
    )


def _flux_spread(t, v, period, samples, n_periods) -> float:
    """Spread of the per-period flux (voltage integrated period by period), relative to its pp."""
    phase = np.arange(samples) * (period / samples)
    times = (t[0] + phase[None, :] + period * np.arange(n_periods)[:, None]).ravel()
    rows = np.interp(times, t, v).reshape(n_periods, samples)
    rows = rows - rows.mean(axis=1, keepdims=True)
    dt = period / samples
    x = np.cumsum(rows, axis=1) * dt
    x = x - x.mean(axis=1, keepdims=True)
    avg = x.mean(axis=0)
    pp = float(np.ptp(avg))
    if n_periods < 2 or pp == 0:
        return 0.0
    return float(np.sqrt(np.mean((x - avg) ** 2)) / pp)


def analyse_capture(data, **kwargs) -> CaptureAnalysis:
    """Analyse a :class:`workbench.capture.CaptureData` (as returned by the readers).

    Parameters
    ----------
    data : workbench.capture.CaptureData
        Time [s], channels in SI, source and metadata (``clipped_channels``).
    **kwargs
        Geometry, material and options of :func:`analyse_record` (``turns``,
        ``area``, ``volume``, ``path_length``, ``sense_turns``, ``material``,
        ``steinmetz``, ``temperature``, ``thickness``, ``resistivity``,
        ``skin_effect``).

    Returns
    -------
    CaptureAnalysis

    Notes
    -----
    Steps: put the record on an even grid; find the fundamental period
    (:func:`workbench.analysis.steady_state.detect_period`) on the flux (a
    winding voltage is integrated over the record first, so switching edges
    do not dominate); average the whole periods; integrate a voltage over the
    averaged period with the offset removed (Faraday, :math:`B = \\frac{1}{NA}\\int v\\,dt`);
    estimate the noise left, derive the reversal threshold (12 noise standard
    deviations) and low-pass the period where its harmonics meet the noise
    (:func:`workbench.analysis.steady_state.denoise_period`); then the iGSE and
    separation parts, and for two-winding captures the measured loss and its
    sensitivity to a 1 ns probe skew.
    """
    clipped = getattr(data, "clipped_channels", ())
    return analyse_record(data.time, data.channels, source=str(data.source), clipped=clipped, **kwargs)


def analyse_file(path, *, reader_options=None, **kwargs) -> CaptureAnalysis:
    """Read a capture file and analyse it.

    Parameters
    ----------
    path : str or os.PathLike
        CSV or ``.npz`` capture.
    reader_options : Mapping, optional
        Keyword arguments of :func:`workbench.capture.read_capture`
        (``time_column``, ``columns``, ``delimiter``, ``time_unit``, ``units``).
    **kwargs
        As :func:`analyse_record`.

    Returns
    -------
    CaptureAnalysis
    """
    from workbench.capture import read_capture

    data = read_capture(path, **dict(reader_options or {}))
    return analyse_capture(data, **kwargs)
