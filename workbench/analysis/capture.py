"""Capture analysis: a record that has been read -> one averaged period of flux, measured and model loss.

The question answered: "my converter is running and I captured the winding voltage
(and maybe the current): how much is the core losing, and does the model agree?"

Where the steps live (one copy each):

* :mod:`workbench.capture.steady_state` -- even grid (gaps refused), period detection,
  whole-period folding, repetition over 2 or 3 periods (subharmonics), denoising;
* :mod:`workbench.capture.flux` -- voltage to flux (Faraday's law);
* :mod:`workbench.capture.measured` -- measured loss, two-winding and single-winding V-I;
* :mod:`workbench.capture.clipping` -- clipping judged on evidence of a recorder's range;
* :mod:`workbench.engine` -- the model loss (the only place a loss is decided);
* this module -- the pipeline that joins them, one function per step, and the shape
  classification of the averaged period. It sits above the engine; the steps below
  it import only numpy.

Kinds of capture (``kind``: how B was obtained):

``"flux"``
    Flux density ``b`` [T], or magnetic flux ``flux`` [Wb] divided by the area.
``"voltage"``
    A winding voltage ``v`` [V] integrated to B with the turns and the area. With the
    current ``i`` of the same winding, the loss is also measured (single-winding V-I
    method, ``measured_method = "single-winding"``).
``"two-winding"``
    Excitation current ``i`` [A] and the voltage of a sense winding (``v_sense``, or
    ``v`` when ``sense_turns`` is given): B from the sense voltage, H = N1 i / l_e,
    and the measured loss (``measured_method = "two-winding"``).

Phase error between the probes: the loss is the small in-phase part of a large,
mostly reactive product v i, so a time skew between the probes turns reactive
power into apparent loss (about :math:`Q\\,2\\pi f\\tau`). A known skew is removed
with ``deskew`` (the current is shifted before the product); the result also
reports the relative change of the measured loss for a further 1 ns delay of the
current (``skew_sensitivity_per_ns``).

Safety: capturing converter waveforms means probing live circuits at hazardous
voltages, and a loss test runs the core hot. Use rated differential probes and
isolation, let cores cool before handling, and follow local electrical codes and
your site's licensed practice. Results are estimates; verify the temperature rise
by test.

References
----------
.. [1] IEC 60404-6:2003, *Magnetic materials - Part 6: Methods of measurement of
   the magnetic properties of magnetic powder cores and soft ferrites*
   (two-winding method, loss from the B-H loop).
.. [2] D. Hou, M. Mu, F. C. Lee, Q. Li, "New high-frequency core loss measurement
   method with partial cancellation concept", IEEE Trans. Power Electron.
   32(4), pp. 2987-2994, 2017 (phase-discrepancy error of the two-winding method).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from workbench.capture.clipping import clipping_evidence
from workbench.capture.flux import flux_density
from workbench.capture.measured import measured_loss
from workbench.capture.steady_state import (
    denoise_period,
    detect_period,
    fold_periods,
    repetition,
    uniform_grid,
)
from workbench.checks import check_quantity, finite_number
from workbench.engine import BareSteinmetz, LossResult, core_loss
from workbench.waveforms import NOISE_THRESHOLD_SIGMAS, FluxWaveform, estimate_noise

__all__ = [
    "KINDS",
    "METHODS",
    "WAVEFORM_CLASSES",
    "CaptureAnalysis",
    "SteinmetzSet",
    "analyse_capture",
    "analyse_file",
    "analyse_record",
    "classify_waveform",
    "flat_mask",
    "flatten_dwells",
    "settle_ringing_dwells",
    "measured_loss",
    "predict_loss",
    "rising_fraction",
]

KINDS = ("flux", "voltage", "two-winding")
METHODS = ("two-winding", "single-winding")
WAVEFORM_CLASSES = ("sine-like", "triangular", "trapezoidal", "other")

#: Fewer whole periods than this gives a warning.
MIN_PERIODS = 3
#: Period-to-period spread (relative to peak-to-peak) above which we warn.
SPREAD_WARNING = 0.02
#: A repetition over 2 or 3 periods that changes the folded flux by more than this is acted on.
SUBHARMONIC_CHANGE = 0.01
#: Samples per averaged period are capped here (longer periods are read at this resolution).
MAX_SAMPLES_PER_PERIOD = 16384
#: Most samples read for the period-to-period spread of an integrated voltage.
SPREAD_POINTS = 1 << 18
#: Probe skew used for the sensitivity figure [s].
SKEW = 1e-9
#: Measured / model ratio outside this band gives a note.
RATIO_BAND = (0.5, 2.0)

#: A bare Steinmetz set (the engine's type; kept under this name for older code).
SteinmetzSet = BareSteinmetz


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
        Fundamental frequency of the folded period [Hz].
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
        Standard deviation of the noise left on the averaged flux [T].
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
        (captures with a current and a path length).
    model : workbench.engine.LossResult or None
        The engine's result for the averaged period.
    model_loss : float or None
        Model total (iGSE or i2GSE) [W/m^3].
    model_name : str
        Material name or the bare Steinmetz set.
    hysteresis, classical, excess : float or None
        Separation parts [W/m^3] where available.
    measured_loss : float or None
        Measured loss density [W/m^3].
    measured_method : {"two-winding", "single-winding"} or None
        How the loss is measured (captures with a current channel); ``measured_loss``
        is None when the volume is missing.
    skew_sensitivity : float or None
        Relative change of the measured loss for the current delayed by a further 1 ns [1/ns].
    volume : float or None
        Effective core volume used [m^3] (given, or A_e l_e).
    i_dc : float or None
        Mean winding current over whole periods [A] (captures with a current channel).
    h_dc : float or None
        DC bias field strength the model loss was evaluated at [A/m]: given, or
        ``N I_dc / l_e`` from the capture's own current.
    inputs : dict
        The settings as given (turns, sense turns, area, volume, path length, winding
        resistance, deskew, material, temperature, overrides), SI-suffixed keys.
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
    model: LossResult | None = None
    model_loss: float | None = None
    model_name: str = ""
    hysteresis: float | None = None
    classical: float | None = None
    excess: float | None = None
    measured_loss: float | None = None
    measured_method: str | None = None
    skew_sensitivity: float | None = None
    volume: float | None = None
    i_dc: float | None = None
    h_dc: float | None = None
    inputs: dict = field(default_factory=dict)
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

    @property
    def loss_w(self) -> float | None:
        """Model loss in the core [W], when the volume is known."""
        return None if self.model_loss is None or self.volume is None else self.model_loss * self.volume

    @property
    def measured_loss_w(self) -> float | None:
        """Measured loss in the core [W]."""
        return None if self.measured_loss is None or self.volume is None else self.measured_loss * self.volume

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
            "loss_w": self.loss_w,
            "classical_w_m3": self.classical,
            "volume_m3": self.volume,
            "i_dc_a": self.i_dc,
            "h_dc_a_m": self.h_dc,
            "inputs": dict(self.inputs),
            "warnings": list(self.warnings),
            "notes": list(self.notes),
        }
        if self.model is not None:
            out["loss_model"] = self.model.total_model
            out["temperature_c"] = self.model.temperature
            out["n_minor_loops"] = self.model.n_minor_loops
            out["minor_loop_share"] = self.model.minor_loop_share
            out["loss_w_kg"] = self.model.total_w_kg
        if self.hysteresis is not None:
            out["hysteresis_w_m3"] = self.hysteresis
            out["excess_w_m3"] = self.excess
        if self.measured_method is not None:  # captures with a current: the measurement, or null where it could not be made
            out["measured_method"] = self.measured_method
            out["measured_loss_w_m3"] = self.measured_loss
            out["measured_loss_w"] = self.measured_loss_w
            out["measured_to_model_ratio"] = self.ratio
            out["skew_sensitivity_per_ns"] = self.skew_sensitivity
            out["h_peak_a_m"] = None if self.h is None else float(0.5 * np.ptp(self.h))
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


def settle_ringing_dwells(waveform: FluxWaveform, *, band: float = 0.03, min_fraction: float = 0.05,
                          entry: float = 0.5) -> tuple[FluxWaveform, int]:
    """Set exactly flat the dwells in which a captured flux only rings (discontinuous conduction).

    Parameters
    ----------
    waveform : FluxWaveform
        One period of (denoised) flux, evenly sampled.
    band : float
        A dwell keeps the flux within this fraction of its peak-to-peak of the level it
        was entered at [-].
    min_fraction : float
        Shortest dwell, as a fraction of the period [-].
    entry : float
        A dwell is entered from a straight ramp (over 3 % of the period its slope stays at
        least this fraction of the peak slope and within 30 % of itself: an edge, not the
        rounded top of a sine) [-].

    Returns
    -------
    waveform : FluxWaveform
        The period with each such dwell set to its mean flux (unchanged when none is found,
        or when the flux would still rise or fall more than once outside the dwells).
    n_dwells : int
        Number of dwells set flat.

    Notes
    -----
    After the switch of a discontinuous-mode converter opens, the winding voltage rings
    with the circuit's capacitance around zero: the flux wobbles by a few per cent of its
    swing while the core idles. The i2GSE relaxation belongs to that idle interval, which
    a slope test alone does not see (the ringing slope reaches a tenth of the edge's).
    Common practice, no source: an idle interval is recognised by the flux staying in a
    narrow band for a good part of the period after a steep edge.
    """
    if not waveform.is_uniform():
        return waveform, 0
    b = np.asarray(waveform.b, dtype=float)
    n = b.size
    pp = float(np.ptp(b))
    s = waveform.dbdt()
    smax = float(np.max(np.abs(s))) if s.size else 0.0
    if n < 16 or pp == 0 or smax == 0:
        return waveform, 0
    fast = np.abs(s) >= entry * smax
    starts = np.flatnonzero(np.roll(fast, 1) & ~fast)  # sample i: segment i-1 is an edge, segment i is not
    min_len = max(2, int(np.ceil(min_fraction * n)))
    keep = np.zeros(n, dtype=bool)
    ramp = max(2, int(np.ceil(0.03 * n)))
    for i0 in starts.tolist():  # a loop over edges (a few per period), not over samples
        # the ramp before the dwell is straight (a converter's constant winding voltage); the slope
        # before a sine's rounded top keeps changing
        before = np.abs(s[(i0 - 1 - np.arange(ramp)) % n])
        if before.min() < entry * smax or before.max() > 1.3 * before.min():
            continue
        rolled = np.roll(b, -i0)
        outside = np.abs(rolled - rolled[0]) > band * pp
        j = int(np.argmax(outside)) if outside.any() else n
        k = j - 1  # last sample inside the band; trim the start of the ramp that leaves it
        while k > 0 and fast[(i0 + k - 1) % n]:
            k -= 1
        if k >= min_len:
            keep[(i0 + np.arange(k + 1)) % n] = True
    if not keep.any() or keep.all():
        return waveform, 0
    out = b.copy()
    starts_k, lengths = _run_bounds(keep)
    for s0, ln in zip(starts_k, lengths):
        idx = (s0 + np.arange(ln)) % n
        out[idx] = out[idx].mean()
    settled = FluxWaveform(waveform.t, out, waveform.period)
    if settled.reversals(0.0).size > 2:  # real minor loops outside the dwells: leave the capture as it is
        return waveform, 0
    return settled, int(starts_k.size)


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




# ---------------------------------------------------------------------------
# model loss: the engine only
# ---------------------------------------------------------------------------
def predict_loss(waveform, material, steinmetz, threshold, *, temperature=None, thickness=None, resistivity=None,
                 skin_effect=True, h_dc=None):
    """Model loss of one period of flux, from :func:`workbench.engine.core_loss` (kept for older callers).

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux.
    material : workbench.materials.Material or None
        Library material.
    steinmetz : SteinmetzSet or None
        Bare Steinmetz set (when ``material`` is None).
    threshold : float or None
        Reversal threshold [T]; None derives it from the data.
    temperature : float, optional
        Core temperature [degC].
    thickness, resistivity : float, optional
        Lamination thickness [m] and resistivity [ohm m] overrides.
    skin_effect : bool
        Skin effect in the classical part.
    h_dc : float, optional
        DC bias field strength [A/m].

    Returns
    -------
    tuple
        ``(LossResult or None, total, hysteresis, classical, excess, model name,
        warnings, notes)``; loss densities in W/m^3, None where not computed.
    """
    chosen = material if material is not None else steinmetz
    if chosen is None:
        return None, None, None, None, None, "", ["no material or Steinmetz set given: model loss not computed"], []
    r = core_loss(waveform, chosen, temperature=temperature, thickness=thickness, resistivity=resistivity,
                  skin_effect=skin_effect, threshold=threshold, h_dc=h_dc)
    return r, r.total, r.hysteresis, r.classical, r.excess, r.material, list(r.warnings), list(r.notes)


# ---------------------------------------------------------------------------
# the pipeline, one step per function
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Settings:
    """Checked settings of one analysis (SI), and the warnings the checks gave."""

    turns: float | None
    area: float | None
    volume: float | None
    path_length: float | None
    sense_turns: float | None
    winding_resistance: float | None
    deskew: float | None
    temperature: float | None
    thickness: float | None
    resistivity: float | None
    warnings: tuple[str, ...]


def _check_settings(source, *, turns, area, volume, path_length, sense_turns, winding_resistance, deskew,
                    temperature, thickness, resistivity, has_model) -> _Settings:
    """Every number checked against the range where it is plausible (refused or warned, see workbench.checks)."""
    warnings: list[str] = []

    def check(value, kind, name):
        if value is None:
            return None
        x, w = check_quantity(value, kind, name=name, source=source)
        warnings.extend(w)
        return x

    turns = check(turns, "turns", "turns")
    sense_turns = check(sense_turns, "turns", "sense turns")
    area = check(area, "area", "area")
    volume = check(volume, "volume", "volume")
    path_length = check(path_length, "path_length", "path length")
    thickness = check(thickness, "thickness", "thickness")
    resistivity = check(resistivity, "resistivity", "resistivity")
    if temperature is not None:
        x, w = check_quantity(temperature, "temperature", name="temperature", source=source)
        temperature = x
        if not has_model:  # with a material the engine judges the temperature against its own limits
            warnings.extend(w)
    if winding_resistance is not None:
        winding_resistance = finite_number(winding_resistance, "winding resistance", unit="ohm", source=source,
                                           minimum=0.0)
    if deskew is not None:
        deskew = finite_number(deskew, "deskew", unit="s", source=source)
    return _Settings(turns, area, volume, path_length, sense_turns, winding_resistance, deskew, temperature,
                     thickness, resistivity, tuple(warnings))


@dataclass(frozen=True)
class _Plan:
    """Which channels are used and how: kind, flux channel, current channel, method, turns of the voltage."""

    kind: str
    flux_channel: str
    current: str | None
    method: str | None
    flux_turns: float | None
    sense_turns: float | None


def _plan(chans, s: _Settings, source) -> tuple[_Plan, list[str]]:
    """Decide what the capture is from its channels and the options given; refuse what cannot be honoured."""
    names = ", ".join(sorted(chans)) or "no channels"
    warnings: list[str] = []
    has_i = "i" in chans
    voltage = "v_sense" if "v_sense" in chans else ("v" if "v" in chans else None)
    if s.sense_turns is not None:
        if voltage is None or not has_i:
            missing = "a current channel (i)" if voltage is not None else "a voltage and a current channel"
            raise ValueError(
                f"{source}: --sense-turns means a two-winding capture (voltage of the sense winding, current of "
                f"the excited one), which needs {missing}; the file has {names}"
            )
        plan = _Plan("two-winding", voltage, "i", "two-winding", s.sense_turns, s.sense_turns)
    elif "v_sense" in chans and has_i:
        if s.turns is None:
            raise ValueError(f"{source}: a two-winding capture needs the primary turns (--turns)")
        warnings.append(f"sense-winding turns not given: taken equal to the primary turns ({s.turns:g})")
        plan = _Plan("two-winding", "v_sense", "i", "two-winding", s.turns, s.turns)
    elif "b" in chans or "flux" in chans:
        plan = _Plan("flux", "b" if "b" in chans else "flux", None, None, None, None)
    elif voltage is not None:
        single = voltage == "v" and has_i
        plan = _Plan("voltage", voltage, "i" if single else None, "single-winding" if single else None,
                     s.turns, None)
    else:
        raise ValueError(f"{source}: no flux channel: need b, flux, v, or i with v_sense; the file has {names}")
    if s.winding_resistance is not None and plan.method != "single-winding":
        raise ValueError(
            f"{source}: --winding-resistance applies to a single-winding capture (voltage and current of one "
            f"winding); this one is {plan.method or plan.kind} (channels {names})"
        )
    if s.deskew is not None and plan.current is None:
        raise ValueError(f"{source}: --deskew shifts the current against the voltage; this capture uses no "
                         f"current channel (channels {names})")
    if plan.kind == "flux" and plan.flux_channel == "flux" and s.area is None:
        raise ValueError(f"{source}: a flux [Wb] capture needs the effective area (--area)")
    if plan.kind != "flux" and (s.turns is None or s.area is None):
        what = "the primary turns (--turns)" if plan.kind == "two-winding" else "the turns (--turns)"
        raise ValueError(f"{source}: a {plan.kind} capture needs {what} and the effective area (--area)")
    if "i" in chans and plan.current is None:
        warnings.append("the current channel is not used: a flux channel gives B directly")
    return plan, warnings


def _checked_channels(t, chans, used, source) -> None:
    n = np.asarray(t).size
    for name in used:
        y = chans[name]
        if y.size != n:
            raise ValueError(f"{source}: channel {name!r} has {y.size} samples, time has {n}")
        lo, hi = float(np.min(y)), float(np.max(y))  # a NaN or an infinity shows in one of them
        if not (np.isfinite(lo) and np.isfinite(hi)):
            j = int(np.argmax(~np.isfinite(y)))
            raise ValueError(f"{source}: channel {name!r} has a non-finite value at sample {j + 1}: {y[j]!r}")
        if hi == lo:
            raise ValueError(f"{source}: channel {name!r} is constant ({y[0]!r}): no waveform")


def _clipping(chans, used, flagged, source) -> list[str]:
    """Channels the reader flagged are refused only on evidence of a recorder's range."""
    warnings = []
    for name in flagged:
        if name not in chans:
            continue
        ev = clipping_evidence(chans[name], noise=estimate_noise(chans[name]))
        if not ev.clipped:
            continue
        if name in used:
            raise ValueError(
                f"{source}: channel {name!r} is clipped ({ev.reason}); the loss would be wrong: capture again "
                "with more vertical range"
            )
        warnings.append(f"channel {name!r} is clipped but not used for the loss")
    return warnings


def _on_grid(t, chans, used, source):
    """The used channels on one even grid: (grid, {name: samples}, warnings)."""
    rows, grid, resampled = {}, None, False
    for name in used:
        try:
            grid, y, r = uniform_grid(t, chans[name])
        except ValueError as exc:
            raise ValueError(f"{source}: {exc}") from None
        rows[name] = y[0]
        resampled = resampled or r
    warnings = ["time stamps are unevenly spaced: the record was interpolated onto an even grid"] if resampled else []
    return grid, rows, warnings


def _core_voltage(rows, plan: _Plan, s: _Settings):
    """The voltage that drives the core: the flux channel, less R i for a single winding with a known R."""
    v = rows[plan.flux_channel]
    if plan.method == "single-winding" and s.winding_resistance:
        return v - s.winding_resistance * rows["i"]
    return v


def _flux_signal(tg, rows, plan: _Plan, s: _Settings):
    """Flux over the whole record, the signal the period is found on [T]."""
    step = (tg[-1] - tg[0]) / (tg.size - 1)
    if plan.kind == "flux":
        y = rows[plan.flux_channel]
        return y / s.area if plan.flux_channel == "flux" else y
    return flux_density(step, _core_voltage(rows, plan, s), turns=plan.flux_turns, area=s.area)


def _find_period(tg, signal, source):
    """(period [s], periods in the record, warnings): detection, then the check over 2 and 3 periods."""
    try:
        est = detect_period(tg, signal, noise=estimate_noise(signal))
    except ValueError as exc:
        raise ValueError(f"{source}: {exc}") from None
    if est.n_periods < 1.0:
        raise ValueError(f"{source}: the record spans less than one period ({est.n_periods:.2f})")
    period = est.period
    step = (tg[-1] - tg[0]) / (tg.size - 1)
    samples = min(max(16, round(period / step)), MAX_SAMPLES_PER_PERIOD)
    rep = repetition(tg, signal, period, samples=samples)
    warnings = []
    excess = rep.change - rep.allowance
    if rep.multiple > 1 and excess > SUBHARMONIC_CHANGE:
        if rep.periods >= 2:
            warnings.append(
                f"the flux repeats only every {rep.multiple} periods of {period:.6g} s (consecutive periods "
                f"differ by {100 * rep.change:.2g} % of the swing): folded over {rep.multiple} periods, "
                f"frequency {1 / (rep.multiple * period):.6g} Hz"
            )
            period *= rep.multiple
        else:
            warnings.append(
                f"consecutive periods differ by {100 * rep.change:.2g} % of the swing (a subharmonic at 1/"
                f"{rep.multiple} of {1 / period:.6g} Hz), but the record holds fewer than 2 of its periods: the "
                "fold over one period is off by about that much; capture a longer record"
            )
    return period, float(est.n_periods * est.period / period), warnings


def _flux_spread(tg, v, period, samples, n_periods, turns, area) -> float:
    """Spread of the per-period flux (each period's voltage integrated on its own), relative to its pp."""
    if n_periods < 2:
        return 0.0
    used = np.unique(np.round(np.linspace(0, n_periods - 1, max(2, min(n_periods, SPREAD_POINTS // samples)))))
    phase = np.arange(samples) * (period / samples)
    dt = period / samples
    rows = np.array([flux_density(dt, np.interp(tg[0] + j * period + phase, tg, v), turns=turns, area=area,
                                  periodic=True) for j in used.astype(int)])
    avg = rows.mean(axis=0)
    pp = float(np.ptp(avg))
    return 0.0 if pp == 0 else float(np.sqrt(np.mean((rows - avg) ** 2)) / pp)


@dataclass(frozen=True)
class _Folded:
    waveform: FluxWaveform
    n_periods: int
    spread: float
    noise: float
    threshold: float
    harmonics_kept: int
    denoised: bool
    waveform_class: str
    current: np.ndarray | None
    notes: tuple[str, ...]


def _fold_flux(tg, rows, plan: _Plan, s: _Settings, period, source) -> _Folded:
    """Whole periods averaged, the voltage integrated over the averaged period, noise, threshold, denoising."""
    step = (tg[-1] - tg[0]) / (tg.size - 1)
    samples = min(max(16, round(period / step)), MAX_SAMPLES_PER_PERIOD)
    signal = rows[plan.flux_channel] if plan.kind == "flux" else _core_voltage(rows, plan, s)
    try:
        # tg comes from uniform_grid: within half a step of an even grid, no need to check it again
        fold = fold_periods(tg, signal, period, samples=samples, even=True)
        current = (fold_periods(tg, rows[plan.current], period, samples=samples, even=True).mean[0]
                   if plan.current else None)
    except ValueError as exc:
        raise ValueError(f"{source}: {exc}") from None
    if plan.kind == "flux":
        b_avg = fold.mean[0] / (s.area if plan.flux_channel == "flux" else 1.0)
        spread = float(fold.spread[0])
    else:
        b_avg = flux_density(period / samples, fold.mean[0], turns=plan.flux_turns, area=s.area, periodic=True)
        spread = _flux_spread(tg, signal, period, samples, fold.n_periods, plan.flux_turns, s.area)
    wander = spread * float(np.ptp(b_avg)) / np.sqrt(max(fold.n_periods - 1, 1))
    white = estimate_noise(b_avg)
    # noise left on the average: the white-noise estimate or, where larger, the period-to-period
    # scatter over sqrt(J - 1) (integrated voltage noise wanders slowly)
    noise = max(white, wander) if fold.n_periods > 1 else white
    threshold = max(NOISE_THRESHOLD_SIGMAS * noise, 1e-12 * float(np.ptp(b_avg)))
    dn = denoise_period(b_avg, noise=white)
    waveform = FluxWaveform(fold.phase, dn.values, period)
    shape_class = classify_waveform(waveform, threshold)
    notes = []
    if shape_class == "other":
        settled, n_rung = settle_ringing_dwells(waveform)
        if n_rung:
            waveform = settled
            shape_class = classify_waveform(waveform, threshold)
            notes.append(f"{n_rung} idle interval{'s' if n_rung > 1 else ''} in which the flux only rang (within 3 % "
                         "of its swing) set flat, so the i2GSE sees the zero-voltage interval")
    if shape_class == "trapezoidal":
        waveform, n_dwells = flatten_dwells(waveform)
        if n_dwells:
            notes.append(f"{n_dwells} zero-voltage intervals set exactly flat (|dB/dt| below 10 % of its peak)")
    return _Folded(waveform, fold.n_periods, spread, float(noise), float(threshold), int(dn.harmonics_kept),
                   bool(dn.filtered), shape_class, current, tuple(notes))


def _steady_state_warnings(f: _Folded) -> list[str]:
    out = []
    if f.n_periods < MIN_PERIODS:
        out.append(f"only {f.n_periods} whole period(s) in the record (at least {MIN_PERIODS} recommended): "
                   "noise and drift are poorly averaged")
    if f.spread > SPREAD_WARNING:
        out.append(f"periods differ by {100 * f.spread:.1f} % RMS of the peak-to-peak flux: "
                   "the converter may not be in steady state, or the period is not constant")
    return out


@dataclass(frozen=True)
class _Measured:
    loss: float | None
    sensitivity: float | None
    h: np.ndarray | None
    volume: float | None
    warnings: tuple[str, ...]
    notes: tuple[str, ...]


def _measure(tg, rows, plan: _Plan, s: _Settings, period, folded: _Folded, model_total) -> _Measured:
    """Measured loss (two-winding or single-winding V-I), its skew sensitivity, and H over the period."""
    warnings: list[str] = []
    notes: list[str] = []
    volume = s.volume if s.volume is not None else (
        s.area * s.path_length if s.area is not None and s.path_length is not None else None)
    if plan.method is None:
        return _Measured(None, None, None, volume, (), ())
    deskew = s.deskew or 0.0
    # Probe skews are nanoseconds to a few microseconds; a shift of a tenth of the period or more
    # is a unit slip (ms typed for ns), not a skew (common practice, no source).
    if abs(deskew) >= 0.1 * period:
        raise ValueError(f"--deskew {deskew:.4g} s is {abs(deskew) / period:.2g} of the period "
                         f"({period:.4g} s): probe skew is far smaller; check the unit (e.g. 3ns)")
    h = None
    if s.path_length is not None:
        phase = folded.waveform.t
        # the current read `deskew` later (periodic within the averaged period)
        i_f = np.interp((phase + deskew) % period, np.append(phase, period),
                        np.append(folded.current, folded.current[0]))
        h = s.turns * i_f / s.path_length
    if volume is None:
        warnings.append("no core volume (--volume, or --path-length with --area): the measured loss is not computed")
        return _Measured(None, None, h, None, tuple(warnings), ())
    step = (tg[-1] - tg[0]) / (tg.size - 1)
    v, i = rows[plan.flux_channel], rows["i"]
    kwargs = {"volume": volume, "turns": s.turns,
              "sense_turns": plan.sense_turns if plan.method == "two-winding" else None,
              "winding_resistance": s.winding_resistance or 0.0}
    meas, _ = measured_loss(step, v, i, period, skew=-deskew, **kwargs)
    skewed, _ = measured_loss(step, v, i, period, skew=-deskew + SKEW, **kwargs)
    sens = (skewed - meas) / meas if meas != 0 else None
    if plan.method == "single-winding" and s.winding_resistance is None:
        warnings.append("single-winding measurement without --winding-resistance: the measured loss includes the "
                        "winding's copper loss (I_rms^2 R and more at high frequency)")
    if s.deskew:
        notes.append(f"current shifted by {s.deskew * 1e9:.3g} ns against the voltage (deskew) before the loss integral")
    if meas <= 0:
        warnings.append(f"measured loss is not positive ({meas:.4g} W/m^3): check the probe polarity and skew")
    if sens is not None and abs(sens) > 0.02:
        warnings.append(f"the measured loss changes by {100 * sens:+.1f} % per ns of probe skew: deskew the "
                        "voltage and current probes (--deskew) before trusting it")
    if model_total and meas > 0:
        r = meas / model_total
        if not RATIO_BAND[0] <= r <= RATIO_BAND[1]:
            notes.append(f"measured loss is {r:.2f} times the model's: check the material choice and the geometry")
    return _Measured(float(meas), sens, h, volume, tuple(warnings), tuple(notes))


def _inputs(s: _Settings, material, steinmetz, skin_effect) -> dict:
    chosen = material if material is not None else steinmetz
    return {"turns": s.turns, "sense_turns": s.sense_turns, "area_m2": s.area, "volume_m3": s.volume,
            "path_length_m": s.path_length, "winding_resistance_ohm": s.winding_resistance, "deskew_s": s.deskew,
            "material": getattr(chosen, "name", None), "temperature_c": s.temperature, "thickness_m": s.thickness,
            "resistivity_ohm_m": s.resistivity, "skin_effect": bool(skin_effect)}


#: DC current below this fraction of the current's AC amplitude counts as no bias (common practice, no source).
DC_CURRENT_NEGLIGIBLE = 0.05


def _dc_bias(tg, rows, plan, s: _Settings, period: float, periods_in_record: float, h_dc):
    """(I_dc [A] or None, H_dc used [A/m] or None, warnings): the given bias, or N I_dc / l_e from the capture."""
    warnings: list[str] = []
    i_dc = None
    if plan.current:
        current = np.asarray(rows[plan.current], dtype=float)
        step = float(tg[1] - tg[0])
        n = max(1, min(current.size, int(round(int(periods_in_record) * period / step))))
        i_dc = float(np.mean(current[:n]))  # whole periods only: a partial one would bias the mean
        amplitude = 0.5 * float(np.ptp(current[:n]))
        significant = abs(i_dc) > DC_CURRENT_NEGLIGIBLE * amplitude
    if h_dc is not None:
        return i_dc, float(h_dc), warnings
    if i_dc is None or not significant:
        return i_dc, None, warnings
    if s.path_length is None or s.turns is None:
        warnings.append(f"the capture carries a DC current of {i_dc:.4g} A but no --path-length was given: "
                        "the loss is evaluated without DC bias")
        return i_dc, None, warnings
    bias = s.turns * i_dc / s.path_length
    warnings.append(f"DC bias from the capture's mean current: H_dc = N I_dc / l_e = {s.turns:g} x {i_dc:.4g} A / "
                    f"{s.path_length:.4g} m = {bias:.4g} A/m (in a gapped core the field in the material is lower)")
    return i_dc, bias, warnings


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
    winding_resistance: float | None = None,
    deskew: float | None = None,
    material=None,
    steinmetz: SteinmetzSet | None = None,
    temperature: float | None = None,
    thickness: float | None = None,
    resistivity: float | None = None,
    skin_effect: bool = True,
    h_dc: float | None = None,
) -> CaptureAnalysis:
    """Analyse a captured record given as arrays.

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
        Channels the reader flagged as flat at an extreme; refused only where the
        record shows a recorder's range (:func:`workbench.capture.clipping.clipping_evidence`).
    turns : float, optional
        Turns of the winding ``v`` is measured on; the excited winding N1 of a
        two-winding capture [-].
    area : float, optional
        Effective core cross-section A_e [m^2].
    volume : float, optional
        Effective core volume V_e [m^3]; default ``area * path_length``.
    path_length : float, optional
        Effective magnetic path length l_e [m].
    sense_turns : float, optional
        Turns N2 of the sense winding [-]: the voltage channel is the sense
        winding's and a current channel must exist (two-winding method).
    winding_resistance : float, optional
        Resistance R of the winding of a single-winding V-I capture [ohm]: R i is
        taken off the voltage before integrating it to flux and before the loss.
    deskew : float, optional
        Delay of the current probe against the voltage probe [s]: the current is
        read this much later before the loss integral.
    material : workbench.materials.Material or str, optional
        Library material for the model loss.
    steinmetz : SteinmetzSet, optional
        A bare Steinmetz set instead of a material.
    temperature : float, optional
        Core temperature [degC].
    thickness, resistivity : float, optional
        Override the lamination thickness [m] and resistivity [ohm m].
    skin_effect : bool
        Include the skin effect in the classical part.
    h_dc : float, optional
        DC bias field strength [A/m]; by default ``N I_dc / l_e`` from the capture's
        own mean current when it has a current channel and a path length is given.

    Returns
    -------
    CaptureAnalysis

    Notes
    -----
    Steps, one function each: check the settings (plausible ranges); decide the
    kind and method from the channels and the options (what cannot be honoured is
    refused); judge clipping on evidence; put the record on an even grid (gaps
    refused); find the period on the flux (a voltage integrated over the record,
    :func:`workbench.capture.flux.flux_density`) and check it over 2 and 3
    periods; fold the whole periods, integrate the averaged voltage, estimate the
    noise left, derive the reversal threshold (12 noise standard deviations) and
    low-pass the period where its harmonics meet the noise; the model loss from
    :func:`workbench.engine.core_loss`; the measured loss
    (:func:`workbench.capture.measured.measured_loss`) with its sensitivity to 1 ns
    of probe skew.
    """
    if material is not None and steinmetz is not None:
        raise ValueError("give either a material or a Steinmetz set, not both")
    chans = {str(k): np.asarray(v, dtype=float).ravel() for k, v in dict(channels).items()}
    s = _check_settings(source, turns=turns, area=area, volume=volume, path_length=path_length,
                        sense_turns=sense_turns, winding_resistance=winding_resistance, deskew=deskew,
                        temperature=temperature, thickness=thickness, resistivity=resistivity,
                        has_model=material is not None or steinmetz is not None)
    warnings = list(s.warnings)
    plan, w = _plan(chans, s, source)
    warnings += w
    used = [plan.flux_channel] + ([plan.current] if plan.current else [])
    _checked_channels(t, chans, used, source)
    warnings += _clipping(chans, used, tuple(clipped), source)
    tg, rows, w = _on_grid(t, chans, used, source)
    warnings += w
    signal = _flux_signal(tg, rows, plan, s)
    period, periods_in_record, w = _find_period(tg, signal, source)
    del signal
    warnings += w
    folded = _fold_flux(tg, rows, plan, s, period, source)
    warnings += _steady_state_warnings(folded)
    notes = list(folded.notes)
    b_peak_w = check_quantity(folded.waveform.b_peak, "b_peak", name="peak flux density from the capture",
                              source=source)[1]
    warnings += [f"{x} (check the turns and the area)" for x in b_peak_w]

    i_dc, bias, w = _dc_bias(tg, rows, plan, s, period, periods_in_record, h_dc)
    warnings += w
    model, total, hyst, classical, excess, model_name, mwarn, mnotes = predict_loss(
        folded.waveform, material, steinmetz, folded.threshold, temperature=s.temperature, thickness=s.thickness,
        resistivity=s.resistivity, skin_effect=skin_effect, h_dc=bias)
    warnings += mwarn
    notes += mnotes
    m = _measure(tg, rows, plan, s, period, folded, total)
    warnings += m.warnings
    notes += m.notes
    return CaptureAnalysis(
        source=source, kind=plan.kind, freq=1.0 / period, periods_used=folded.n_periods,
        periods_in_record=periods_in_record, spread=folded.spread, waveform=folded.waveform,
        noise=folded.noise, threshold=folded.threshold, harmonics_kept=folded.harmonics_kept,
        denoised=folded.denoised, duty=rising_fraction(folded.waveform), waveform_class=folded.waveform_class,
        h=m.h, model=model, model_loss=total, model_name=model_name, hysteresis=hyst, classical=classical,
        excess=excess, measured_loss=m.loss, measured_method=plan.method,
        skew_sensitivity=m.sensitivity, volume=m.volume, i_dc=i_dc, h_dc=bias,
        inputs={**_inputs(s, material, steinmetz, skin_effect), "h_dc_a_m": h_dc},
        warnings=tuple(warnings), notes=tuple(notes),
    )


def analyse_capture(data, **kwargs) -> CaptureAnalysis:
    """Analyse a :class:`workbench.capture.CaptureData` (as returned by the readers).

    Parameters
    ----------
    data : workbench.capture.CaptureData
        Time [s], channels in SI, source and metadata (``clipped_channels``).
    **kwargs
        Geometry, material and options of :func:`analyse_record`.

    Returns
    -------
    CaptureAnalysis
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
        Keyword arguments of :func:`workbench.capture.read_capture`.
    **kwargs
        As :func:`analyse_record`.

    Returns
    -------
    CaptureAnalysis
    """
    from workbench.capture import read_capture

    data = read_capture(path, **dict(reader_options or {}))
    return analyse_capture(data, **kwargs)
