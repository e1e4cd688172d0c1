"""Capture analysis: captured records -> flux, measured loss, predicted loss.

Synthetic captures are built here from known flux; the reference loss is the core
library's iGSE on the clean waveform (comparing the capture pipeline against the core
model), and the two-winding checks use closed forms (area of an ellipse).
"""
from pathlib import Path

import numpy as np
import pytest

from workbench import models
from workbench import waveforms as wf
from workbench.analysis.breakdown import breakdown
from workbench.analysis.capture import (
    SteinmetzSet,
    analyse_file,
    analyse_record,
    classify_waveform,
    measured_loss,
    rising_fraction,
)
from workbench.materials import get_material

ROOT = Path(__file__).resolve().parents[1]
# Steinmetz set for the comparisons, typical of MnZn power ferrite (from memory); the
# comparison is model-on-capture against the same model on the clean waveform.
FERRITE_SET = SteinmetzSet(k=1.8, alpha=1.45, beta=2.6)
TURNS, AREA = 10, 1e-4


def _minor_loop(b_peak, freq):
    period = 1.0 / freq
    return wf.FluxWaveform([0, 0.3 * period, 0.4 * period, 0.5 * period],
                           [-b_peak, 0.6 * b_peak, 0.2 * b_peak, b_peak], period)


SHAPES = {
    "sine": lambda f: wf.sine(0.1, f, samples=4096),
    "triangle-duty-0.3": lambda f: wf.triangle(0.1, f, 0.3),
    "trapezoid-duty-0.6": lambda f: wf.trapezoid(0.1, f, 0.6),
    "minor-loop": lambda f: _minor_loop(0.1, f),
}


def _sample(ref: wf.FluxWaveform, t):
    """B(t) and dB/dt(t) of a piecewise-linear periodic reference at arbitrary times."""
    T = ref.period
    tau = np.mod(t, T)
    tp = np.append(ref.t, T)
    b = np.interp(tau, tp, np.append(ref.b, ref.b[0]))
    seg = np.clip(np.searchsorted(tp, tau, side="right") - 1, 0, ref.n_samples - 1)
    return b, ref.dbdt()[seg]


def _capture(ref, *, fs, n_periods, kind, noise, offset, seed=7):
    rng = np.random.default_rng(seed)
    t = np.arange(int(n_periods * fs * ref.period)) / fs + 0.37 / fs
    b, s = _sample(ref, t)
    if kind == "b":
        y = b + offset + rng.normal(0.0, noise * ref.b_peak, t.size)
    else:
        v = TURNS * AREA * s  # Faraday's law, v = N A dB/dt
        y = v + offset + rng.normal(0.0, noise * np.abs(v).max(), t.size)
    return t, {kind: y}


@pytest.mark.parametrize("name", list(SHAPES))
@pytest.mark.parametrize("kind", ["b", "v"])
def test_synthetic_capture_recovers_frequency_flux_and_loss(name, kind):
    freq = 98.7e3
    ref = SHAPES[name](freq)
    # 500 samples per period, 10.37 periods, noise 0.3 % of peak (b) or 1 % of peak (v),
    # plus a probe offset
    t, ch = _capture(ref, fs=50e6, n_periods=10.37, kind=kind, noise=0.003 if kind == "b" else 0.01,
                     offset=0.02 if kind == "b" else 0.05)
    res = analyse_record(t, ch, turns=TURNS, area=AREA, steinmetz=FERRITE_SET)
    assert res.freq == pytest.approx(freq, rel=1e-3)  # built at `freq`
    assert res.periods_used == 10
    assert res.flux_pp == pytest.approx(ref.flux_pp, rel=0.01)  # built with 0.2 T peak-to-peak
    clean = models.igse(ref, FERRITE_SET.k, FERRITE_SET.alpha, FERRITE_SET.beta)
    assert res.model_loss == pytest.approx(clean, rel=0.02)


@pytest.mark.parametrize("kind", ["b", "v"])
def test_noise_makes_no_spurious_minor_loops(kind):
    ref = wf.triangle(0.1, 50e3, 0.5)
    t, ch = _capture(ref, fs=20e6, n_periods=6.4, kind=kind, noise=0.01, offset=0.0, seed=12)
    res = analyse_record(t, ch, turns=TURNS, area=AREA, material=get_material("mnzn-power-ferrite"))
    assert res.model.n_minor_loops == 0
    assert res.threshold > 0
    assert res.threshold < 0.05 * res.flux_pp


def test_a_real_minor_loop_is_kept():
    ref = _minor_loop(0.1, 50e3)  # minor loop of 0.04 T
    t, ch = _capture(ref, fs=20e6, n_periods=6.4, kind="b", noise=0.005, offset=0.0)
    res = analyse_record(t, ch, material=get_material("mnzn-power-ferrite"))
    assert res.model.n_minor_loops == 1


def test_material_breakdown_matches_the_core_library_on_the_clean_waveform():
    material = get_material("M270-35A")
    ref = wf.sine(1.2, 50.0, samples=4096)
    t, ch = _capture(ref, fs=100e3, n_periods=5.3, kind="v", noise=0.01, offset=0.02)
    res = analyse_record(t, ch, turns=TURNS, area=AREA, material=material)
    clean = breakdown(ref, material)
    assert res.model_loss == pytest.approx(clean.total, rel=0.02)
    assert res.hysteresis == pytest.approx(clean.hysteresis, rel=0.02)
    assert res.classical == pytest.approx(clean.classical, rel=0.02)
    assert res.excess == pytest.approx(clean.excess, rel=0.02)
    d = res.to_dict()
    for key in ("frequency_hz", "flux_pp_t", "b_peak_t", "periods_used", "loss_w_m3", "hysteresis_w_m3",
                "classical_w_m3", "excess_w_m3", "warnings"):
        assert key in d
    assert "measured_loss_w_m3" not in d and "measured_method" not in d  # no current: nothing measured


@pytest.mark.parametrize(
    "name, expected",
    [("sine", "sine-like"), ("triangle-duty-0.3", "triangular"), ("trapezoid-duty-0.6", "trapezoidal"),
     ("minor-loop", "other")],
)
def test_waveform_class_and_duty_from_a_capture(name, expected):
    ref = SHAPES[name](20e3)
    t, ch = _capture(ref, fs=10e6, n_periods=6.6, kind="v", noise=0.01, offset=0.1)
    res = analyse_record(t, ch, turns=TURNS, area=AREA)
    assert res.waveform_class == expected
    # rising fraction of the built shapes: sine 1/2, triangle its duty 0.3, three-level
    # trapezoid half its duty (0.6/2), the minor-loop shape 0.3 + 0.1 (closed form)
    duty = {"sine": 0.5, "triangle-duty-0.3": 0.3, "trapezoid-duty-0.6": 0.3, "minor-loop": 0.4}[name]
    assert res.duty == pytest.approx(duty, abs=0.03)


def test_classify_clean_shapes():
    assert classify_waveform(wf.sine(0.1, 1e3)) == "sine-like"
    assert classify_waveform(wf.triangle(0.1, 1e3, 0.2).resample(1000)) == "triangular"
    assert classify_waveform(wf.trapezoid(0.1, 1e3, 0.5).resample(1000)) == "trapezoidal"
    assert rising_fraction(wf.triangle(0.1, 1e3, 0.2).resample(1000)) == pytest.approx(0.2, abs=2e-3)


# ---------------------------------------------------------------------------
# two-winding captures
# ---------------------------------------------------------------------------
def _ellipse(freq, *, b0=0.2, h0=40.0, phi=0.35, fs=None, n_periods=6.3, n1=10, n2=5, area=1e-4, path=0.1,
             noise=0.0, skew=0.0, seed=0):
    fs = fs or 2000 * freq
    rng = np.random.default_rng(seed)
    t = np.arange(int(n_periods * fs / freq)) / fs
    w = 2 * np.pi * freq
    v2 = n2 * area * b0 * w * np.cos(w * t)  # Faraday: v2 = N2 A dB/dt with B = b0 sin(wt)
    i1 = h0 * np.sin(w * (t - skew) + phi) * path / n1  # H = N1 i1 / l_e
    v2 = v2 + 0.01 + rng.normal(0.0, noise * np.abs(v2).max(), t.size)
    i1 = i1 + rng.normal(0.0, noise * np.abs(i1).max(), t.size)
    return t, {"v_sense": v2, "i": i1}


@pytest.mark.parametrize("freq", [50.0, 20e3])
@pytest.mark.parametrize("noise", [0.0, 0.01])
def test_elliptic_loop_gives_frequency_times_loop_area(freq, noise):
    b0, h0, phi = 0.2, 40.0, 0.35
    t, ch = _ellipse(freq, b0=b0, h0=h0, phi=phi, noise=noise)
    res = analyse_record(t, ch, turns=10, sense_turns=5, area=1e-4, path_length=0.1,
                         material=get_material("nanocrystalline"))
    # area of the ellipse B = b0 sin wt, H = h0 sin(wt + phi): pi b0 h0 sin(phi)
    # (area of an ellipse, common practice)
    expected = freq * np.pi * b0 * h0 * np.sin(phi)
    assert res.kind == "two-winding"
    assert res.measured_loss == pytest.approx(expected, rel=0.01)
    assert res.b_peak == pytest.approx(b0, rel=0.01)
    assert 0.5 * np.ptp(res.h) == pytest.approx(h0, rel=0.01)
    assert res.ratio == pytest.approx(res.measured_loss / res.model_loss)
    d = res.to_dict()
    assert d["measured_loss_w_m3"] == res.measured_loss


def test_skew_sensitivity_matches_the_phase_shift_of_the_current():
    # delaying i1 by tau turns phi into phi - w tau, so the loss scales by
    # sin(phi - w tau) / sin(phi) (closed form from the ellipse area)
    freq, phi = 100e3, 0.2
    t, ch = _ellipse(freq, phi=phi, fs=500e6, n_periods=4.4)
    res = analyse_record(t, ch, turns=10, sense_turns=5, area=1e-4, path_length=0.1)
    w = 2 * np.pi * freq
    expected = np.sin(phi - w * 1e-9) / np.sin(phi) - 1.0
    assert res.skew_sensitivity == pytest.approx(expected, rel=0.05)


def test_measured_loss_ignores_a_sense_voltage_offset():
    freq = 1e3
    t, ch = _ellipse(freq, n_periods=3.7)
    period = 1 / freq
    base, _ = measured_loss(t, ch["v_sense"], ch["i"] + 0.2, period, turns=10, sense_turns=5, volume=1e-5)
    shifted, _ = measured_loss(t, ch["v_sense"] + 0.5, ch["i"] + 0.2, period, turns=10, sense_turns=5, volume=1e-5)
    assert shifted == pytest.approx(base, rel=1e-9)


def test_two_winding_without_path_length_warns_and_skips_the_measurement():
    t, ch = _ellipse(50.0)
    res = analyse_record(t, ch, turns=10, sense_turns=5, area=1e-4)
    assert res.measured_loss is None and res.h is None
    assert any("--path-length" in w for w in res.warnings)


# ---------------------------------------------------------------------------
# warnings and errors
# ---------------------------------------------------------------------------
def _clip(y, level):
    """What a recorder's range does: everything beyond +-level is recorded as +-level."""
    return np.clip(y, -level, level)


def test_clipped_channel_used_for_the_loss_is_an_error():
    # a noisy sense voltage clipped at 80 % of its peak: noise everywhere but on the flat runs,
    # entered at full slope (a recorder's range, common practice, no source)
    t, ch = _ellipse(50.0, noise=0.01)
    ch["v_sense"] = _clip(ch["v_sense"], 0.8 * np.abs(ch["v_sense"]).max())
    with pytest.raises(ValueError, match="v_sense.*clipped"):
        analyse_record(t, ch, source="bench.csv", clipped=("v_sense",), turns=10, sense_turns=5, area=1e-4,
                       path_length=0.1)


def test_clipped_channel_not_used_is_a_warning():
    ref = wf.sine(0.1, 1e3)
    t, ch = _capture(ref, fs=1e6, n_periods=5.5, kind="b", noise=0.001, offset=0.0)
    rng = np.random.default_rng(4)
    ch["i"] = _clip(np.sin(2 * np.pi * 1e3 * t) + rng.normal(0, 0.01, t.size), 0.7)  # an extra, clipped channel
    res = analyse_record(t, ch, clipped=("i",))
    assert any("'i' is clipped" in w for w in res.warnings)


def test_ideal_square_voltage_from_a_simulator_is_not_clipped():
    # a noise-free square winding voltage (the textbook converter waveform, what a simulator
    # writes): the flux is a triangle of swing V T / (2 N A) (Faraday's law, closed form)
    freq, volts, n, area = 100e3, 12.0, 8, 50e-6
    t = np.arange(0, 10.5 / freq, 1 / (400 * freq))
    v = np.where(np.mod(t * freq, 1.0) < 0.5, volts, -volts)
    res = analyse_record(t, {"v": v}, clipped=("v",), turns=n, area=area, steinmetz=FERRITE_SET)
    assert res.flux_pp == pytest.approx(volts / (2 * freq * n * area), rel=0.01)
    assert not any("clipped" in w for w in res.warnings)


def test_too_few_periods_warns():
    ref = wf.sine(0.1, 1e3)
    t, ch = _capture(ref, fs=1e6, n_periods=2.6, kind="b", noise=0.001, offset=0.0)
    res = analyse_record(t, ch)
    assert res.periods_used == 2
    assert any("whole period" in w for w in res.warnings)


def test_outside_the_valid_range_warns():
    ref = wf.sine(0.1, 1e3)  # mnzn-power-ferrite set is valid from 20 kHz
    t, ch = _capture(ref, fs=1e6, n_periods=5.5, kind="b", noise=0.001, offset=0.0)
    res = analyse_record(t, ch, material=get_material("mnzn-power-ferrite"))
    assert any("outside the valid range" in w for w in res.warnings)


def test_near_saturation_warns():
    ref = wf.sine(0.45, 100e3)  # 0.45 T on a ferrite saturating at 0.49 T
    t, ch = _capture(ref, fs=50e6, n_periods=5.5, kind="b", noise=0.001, offset=0.0)
    res = analyse_record(t, ch, material=get_material("mnzn-power-ferrite"))
    assert any("saturation" in w for w in res.warnings)


def test_geometry_is_required_for_a_voltage_capture():
    ref = wf.sine(0.1, 1e3)
    t, ch = _capture(ref, fs=1e6, n_periods=5.5, kind="v", noise=0.001, offset=0.0)
    with pytest.raises(ValueError, match="turns"):
        analyse_record(t, ch, source="scope.csv")


def test_material_and_steinmetz_together_are_refused():
    with pytest.raises(ValueError, match="either"):
        analyse_record(np.arange(10.0), {"b": np.arange(10.0)}, material=get_material("M270-35A"),
                       steinmetz=FERRITE_SET)


@pytest.mark.parametrize("bad", [{"k": -1, "alpha": 1.5, "beta": 2.5}, {"k": 1, "alpha": float("nan"), "beta": 2.5}])
def test_bad_steinmetz_set_names_the_parameter(bad):
    with pytest.raises(ValueError, match="Steinmetz"):
        SteinmetzSet(**bad)


# ---------------------------------------------------------------------------
# the demo captures
# ---------------------------------------------------------------------------
def test_demo_two_winding_capture_recovers_the_loss_built_into_it():
    path = ROOT / "data" / "captures" / "inverter_pwm_sisteel_50hz.csv"
    head = path.read_text(encoding="utf-8").splitlines()[:12]
    assert "INVENTED DEMO DATA" in head[0]
    line = next(x for x in head if "loss built into" in x)
    built = float(line.split(":")[1].split()[0])  # the generator's own sum of H dB
    res = analyse_file(path, turns=100, sense_turns=50, area=2e-4, path_length=0.25,
                       material=get_material("M270-35A"))
    assert res.measured_loss == pytest.approx(built, rel=0.01)
    assert res.freq == pytest.approx(50.0, rel=1e-3)


@pytest.mark.parametrize("name", ["flyback_dcm_ferrite_100k.csv", "bridge_trapezoid_nanocrystalline_20k.csv",
                                  "inverter_pwm_sisteel_50hz.csv"])
def test_demo_captures_are_labelled_invented_and_small(name):
    path = ROOT / "data" / "captures" / name
    assert path.stat().st_size < 500_000
    assert path.read_text(encoding="utf-8").startswith("# INVENTED DEMO DATA")


def test_discontinuous_mode_flux_is_a_waveform_with_a_zero_voltage_interval():
    # common practice, no source: in discontinuous conduction the winding voltage is zero
    # while the core idles, so the flux rises, falls and then dwells
    t = [0.0, 0.4e-5, 0.8e-5]
    dcm = wf.FluxWaveform(t, [-0.1, 0.1, -0.1], 1e-5).resample(1000)
    assert classify_waveform(dcm) == "trapezoidal"


def test_simulator_export_with_adaptive_steps_keeps_the_square_voltage_exact(tmp_path):
    # A circuit simulator steps finely (1 ns) around each edge of an ideal square winding voltage
    # and coarsely (20 ns) between: the even grid must resolve the fine steps. Reference: the flux
    # swing of a square voltage of amplitude V over half a period, V T / (2 N A_e) (Faraday's law,
    # common practice, no source), and the period the file was made with.
    f, n_turns, area, volts = 100e3, 20, 60e-6, 24.0
    rows, t = [], 0.0
    while t < 6 / f:
        ph = (t * f) % 1
        rows.append(f"{t:.9e}\t{volts if ph < 0.5 else -volts:.6e}")
        t += 1e-9 if min(abs(ph - 0.5), ph, 1 - ph) < 0.01 else 2e-8
    path = tmp_path / "sim_export.txt"
    path.write_text("time\tV(n003)\n" + "\n".join(rows) + "\n")
    r = analyse_file(path, turns=n_turns, area=area)
    assert r.freq == pytest.approx(f, rel=1e-4)
    assert r.flux_pp == pytest.approx(volts / (2 * f) / (n_turns * area), rel=1e-3)
    assert not any("clipped" in w for w in r.warnings)


def test_ringing_idle_interval_of_a_dcm_capture_gets_its_relaxation():
    # The invented flyback demo (data/captures/make_demo_captures.py: 48 V for D1 = 0.35, -36 V until
    # volt-second balance, then an idle interval in which the voltage rings) is read as a dwell, so the
    # i2GSE relaxation after it matches a hand calculation from the published term (J. Muehlethaler
    # et al., IEEE Trans. Power Electron. 27(2), 2012): E = k_r |dB/dt|^alpha_r (dB)^beta_r (1 - exp(-t/tau)),
    # Q = 1 because the flux rises again after the idle interval.
    import tomllib
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    rx = {k: v["value"] for k, v in tomllib.loads((root / "data" / "materials.toml").read_text())[
        "materials"]["mnzn-power-ferrite"]["relaxation"].items()}
    f, d1, turns, area = 100.4e3, 0.35, 20, 60e-6
    d2 = 48.0 * d1 / 36.0
    falling = 36.0 / (turns * area)  # |dB/dt| entering the idle interval [T/s]
    swing = 48.0 * d1 / f / (turns * area)
    idle = (1 - d1 - d2) / f
    expected = f * rx["k_r"] * falling ** rx["alpha_r"] * swing ** rx["beta_r"] * (1 - np.exp(-idle / rx["tau"]))
    r = analyse_file(root / "data" / "captures" / "flyback_dcm_ferrite_100k.csv", turns=turns, area=area,
                     material="mnzn-power-ferrite", temperature=90)
    assert r.waveform_class == "trapezoidal"
    assert r.model.total_model == "i2GSE"
    assert r.model.relaxation == pytest.approx(expected, rel=0.03)  # edges filtered at 40 ns, noise
    assert any("rang" in n for n in r.notes)


def test_sine_capture_is_not_given_dwells():
    # a sine's rounded top is no idle interval: settling dwells must leave it alone (common practice, no source)
    from workbench.analysis.capture import settle_ringing_dwells
    from workbench.waveforms import sine

    w = sine(0.1, 1e4, samples=2048)
    same, n = settle_ringing_dwells(w)
    assert n == 0 and same is w
