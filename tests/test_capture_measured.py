"""Capture analysis against closed forms: single-winding V-I, two-winding with plain headers, deskew,
subharmonics, quantised records, plausibility and gaps (the bench cases of issue 10).

Every capture here is invented for demonstration, written to tmp_path as a bench
instrument or a simulator would write it; the expected values are closed forms.
"""
import json
import subprocess
import sys

import numpy as np
import pytest

from workbench.analysis.capture import analyse_file, analyse_record
from workbench.capture.measured import measured_loss

F, N, AREA, PATH = 20e3, 10, 1e-4, 0.1
VOLUME = AREA * PATH


def _write(path, header, columns):
    lines = ["# invented for demonstration", header]
    lines += [",".join(f"{x:.10g}" for x in row) for row in zip(*columns)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _single_winding(*, b0=0.1, i0=0.5, phi=1.2, r=0.0, periods=8.3, fs=None, delay=0.0):
    """One winding: B = b0 sin(wt), v = N A dB/dt + R i, i = i0 sin(wt + phi) (current lags by `delay`)."""
    fs = fs or 2000 * F
    t = np.arange(int(periods * fs / F)) / fs
    w = 2 * np.pi * F
    i_true = i0 * np.sin(w * t + phi)
    v = N * AREA * b0 * w * np.cos(w * t) + r * i_true
    return t, v, i0 * np.sin(w * (t - delay) + phi)


def _vi_core_loss(b0, i0, phi):
    # mean of (N A b0 w cos wt)(i0 sin(wt + phi)) = N A b0 w i0 sin(phi) / 2: V I cos(angle) / 2 with the
    # angle between the core voltage and the current pi/2 - phi (common practice, no source)
    return N * AREA * b0 * 2 * np.pi * F * i0 * np.sin(phi) / 2 / VOLUME


def test_single_winding_vi_loss_with_resistance_removed(tmp_path):
    r = 0.8
    t, v, i = _single_winding(r=r)
    path = _write(tmp_path / "vi.csv", "time (s),voltage (V),current (A)", [t, v, i])
    res = analyse_file(path, turns=N, area=AREA, path_length=PATH, winding_resistance=r)
    assert res.measured_method == "single-winding"
    assert res.measured_loss == pytest.approx(_vi_core_loss(0.1, 0.5, 1.2), rel=0.01)
    assert res.b_peak == pytest.approx(0.1, rel=0.01)  # R i taken off before integrating
    assert res.measured_loss_w == pytest.approx(_vi_core_loss(0.1, 0.5, 1.2) * VOLUME, rel=0.01)
    assert not any("copper" in w for w in res.warnings)
    d = res.to_dict()
    assert d["measured_method"] == "single-winding" and d["inputs"]["winding_resistance_ohm"] == r


def test_single_winding_without_resistance_includes_copper_loss_and_says_so():
    r = 0.8
    t, v, i = _single_winding(r=r)
    res = analyse_record(t, {"v": v, "i": i}, turns=N, area=AREA, volume=VOLUME)
    # I_rms^2 R = i0^2 R / 2 on top of the core loss (Joule's law, common practice)
    assert res.measured_loss == pytest.approx(_vi_core_loss(0.1, 0.5, 1.2) + 0.5**2 * r / 2 / VOLUME, rel=0.01)
    assert any("copper" in w for w in res.warnings)


def test_measured_loss_of_a_known_sine_pair():
    # mean of V sin(wt) I sin(wt - phi) = V I cos(phi) / 2 (common practice, no source)
    fs, f, vp, ip, phi = 1e6, 1e3, 5.0, 2.0, 0.7
    t = np.arange(int(5.5 * fs / f)) / fs
    v = vp * np.sin(2 * np.pi * f * t)
    i = ip * np.sin(2 * np.pi * f * t - phi)
    loss, periods = measured_loss(t, v, i, 1 / f, volume=2e-6)
    assert periods == 5
    assert loss == pytest.approx(vp * ip * np.cos(phi) / 2 / 2e-6, rel=1e-4)


def test_two_winding_with_plain_word_headers_and_sense_turns(tmp_path):
    # sense winding N2 = 4 open: v2 = N2 A dB/dt; H = N1 i / l_e; loss f pi b0 h0 sin(phi) (ellipse area)
    n2, b0, h0, phi = 4, 0.15, 30.0, 0.3
    fs = 2000 * F
    t = np.arange(int(6.2 * fs / F)) / fs
    w = 2 * np.pi * F
    v2 = n2 * AREA * b0 * w * np.cos(w * t)
    i1 = h0 * PATH / N * np.sin(w * t + phi)
    path = _write(tmp_path / "bench.csv", "time,voltage,current", [t, v2, i1])
    res = analyse_file(path, turns=N, sense_turns=n2, area=AREA, path_length=PATH)
    assert res.kind == "two-winding" and res.measured_method == "two-winding"
    assert res.b_peak == pytest.approx(b0, rel=0.01)  # with N2, not N1
    assert res.measured_loss == pytest.approx(F * np.pi * b0 * h0 * np.sin(phi), rel=0.01)


def test_sense_turns_without_a_current_channel_is_refused():
    t, v, _ = _single_winding()
    with pytest.raises(ValueError, match="sense-turns.*current"):
        analyse_record(t, {"v": v}, turns=N, sense_turns=5, area=AREA)


def test_deskew_recovers_the_loss_of_a_delayed_current_probe():
    phi, delay = 1.2, 3e-9
    t, v, i = _single_winding(phi=phi, delay=delay, fs=2e9, periods=3.3)
    volume = VOLUME
    base = analyse_record(t, {"v": v, "i": i}, turns=N, area=AREA, volume=volume, winding_resistance=0.0)
    fixed = analyse_record(t, {"v": v, "i": i}, turns=N, area=AREA, volume=volume, winding_resistance=0.0,
                           deskew=delay)
    exact = _vi_core_loss(0.1, 0.5, phi)
    # the delayed current has phase phi - w tau: loss scales by sin(phi - w tau) / sin(phi) (closed form)
    assert base.measured_loss == pytest.approx(exact * np.sin(phi - 2 * np.pi * F * delay) / np.sin(phi), rel=2e-3)
    assert fixed.measured_loss == pytest.approx(exact, rel=2e-3)
    assert fixed.skew_sensitivity is not None  # the 1 ns figure is still reported


def test_subharmonic_in_the_flux_is_used_or_warned_about():
    # flux = fundamental + 10 % at half the frequency: it repeats every two periods; folded over two,
    # the swing is that of the sum (closed form: max - min of the built signal)
    fs = 200 * F
    t = np.arange(int(20.4 * fs / F)) / fs
    w = 2 * np.pi * F
    b = 0.1 * np.sin(w * t) + 0.01 * np.sin(0.5 * w * t + 0.3)
    res = analyse_record(t, {"b": b})
    fine = np.arange(200_000) / 200_000 * 2 / F
    swing = np.ptp(0.1 * np.sin(w * fine) + 0.01 * np.sin(0.5 * w * fine + 0.3))
    assert any("repeats only every 2 periods" in x for x in res.warnings)
    assert res.freq == pytest.approx(F / 2, rel=1e-4)
    assert res.flux_pp == pytest.approx(swing, rel=0.01)


def test_quantised_flux_record_gives_the_frequency_to_1e_5():
    # an 8-bit recorder over +-0.12 T of a 0.1 T flux with a 3rd harmonic, 333.3 samples per period
    fs, f = 1e8, 300.03e3
    t = np.arange(int(40.7 * fs / f)) / fs
    w = 2 * np.pi * f
    b = 0.1 * np.sin(w * t) + 0.02 * np.sin(3 * w * t + 0.5)
    q = 0.24 / 256
    res = analyse_record(t, {"b": np.round(b / q) * q})
    assert res.freq == pytest.approx(f, rel=1e-5)


@pytest.mark.parametrize("option, value, needle", [
    ("area", 52.0, "area"), ("thickness", 0.5, "thickness"), ("temperature", -300.0, "temperature"),
])
def test_values_orders_of_magnitude_off_are_refused(option, value, needle):
    t, v, _ = _single_winding()
    with pytest.raises(ValueError, match=needle):
        analyse_record(t, {"v": v}, **{"turns": N, "area": AREA, option: value})


def test_flux_above_what_any_core_carries_is_questioned():
    t, v, _ = _single_winding(b0=0.1)
    res = analyse_record(t, {"v": v}, turns=N, area=AREA / 50)  # wrong area: B = 5 T
    assert any("peak flux density" in w and "check the turns and the area" in w for w in res.warnings)


def test_a_one_second_gap_in_a_small_file_is_refused_quickly():
    t, v, _ = _single_winding(periods=6.0, fs=100 * F)
    t = t.copy()
    t[300:] += 1.0  # a 1 s gap after sample 299
    with pytest.raises(ValueError, match="gap of 1 s.*299"):
        analyse_record(t, {"v": v}, turns=N, area=AREA)


def test_cli_capture_reports_watts_and_echoes_its_inputs(tmp_path):
    r = 0.8
    t, v, i = _single_winding(r=r)
    path = _write(tmp_path / "vi.csv", "time (s),voltage (V),current (A)", [t, v, i])
    proc = subprocess.run(
        [sys.executable, "-m", "workbench", "capture", str(path), "--turns", str(N), "--area", "1cm2",
         "--path-length", "100mm", "--winding-resistance", "0.8", "--deskew", "0ns", "--temperature", "80",
         "--steinmetz", "1.8", "1.45", "2.6", "--json"], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    d = json.loads(proc.stdout)
    assert d["measured_loss_w"] == pytest.approx(_vi_core_loss(0.1, 0.5, 1.2) * VOLUME, rel=0.01)
    assert d["loss_w"] == pytest.approx(d["loss_w_m3"] * VOLUME, rel=1e-9)
    assert d["inputs"]["turns"] == N and d["inputs"]["path_length_m"] == pytest.approx(0.1)
    assert d["inputs"]["winding_resistance_ohm"] == r and d["inputs"]["temperature_c"] == 80


def test_cli_sense_turns_without_current_exits_2(tmp_path):
    t, v, _ = _single_winding()
    path = _write(tmp_path / "v.csv", "time (s),voltage (V)", [t, v])
    proc = subprocess.run([sys.executable, "-m", "workbench", "capture", str(path), "--turns", "10",
                           "--sense-turns", "5", "--area", "1cm2"], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert len(proc.stderr.strip().splitlines()) == 1 and "current" in proc.stderr
