"""Regenerate the invented demo captures of data/captures/ (deterministic seeds).

Run from the project root::

    .venv/bin/python data/captures/make_demo_captures.py

Every file is INVENTED DEMO DATA: a physics-based synthetic signal (Faraday's law
for the winding voltage, a B-H relation with a known loss for the two-winding
record), with probe offset, noise, finite edge rates and a non-integer number of
periods, in a bench-export layout of our own. No instrument, product or person
produced these numbers. The scenarios are our own and described in README.md.

The script prints, for each file, the values that went into it (frequency, flux,
and for the two-winding record the loss density built into the B-H relation), so
that README.md can quote them.
"""
from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent.parent))

from workbench import waveforms as wf  # noqa: E402

MU_0 = 4e-7 * np.pi


def _write_atomic(path: Path, text: str) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def _export(path: Path, meta: list[tuple[str, str]], header: list[str], columns: list[np.ndarray], fmts: list[str]) -> None:
    lines = ["# INVENTED DEMO DATA: synthetic waveform made by data/captures/make_demo_captures.py, not a measurement"]
    lines += [f"# {key}: {value}" for key, value in meta]
    lines.append(",".join(header))
    table = np.column_stack(columns)
    fmt = ",".join(fmts)
    lines += [fmt % tuple(row) for row in table]
    _write_atomic(path, "\n".join(lines) + "\n")


def _edge_filter(v: np.ndarray, dt: float, rise: float) -> np.ndarray:
    """Finite edge rate: a first-order lag of time constant rise/2.2, applied periodically-safe."""
    from scipy.signal import lfilter

    tau = rise / 2.2
    a = np.exp(-dt / tau)
    return lfilter([1 - a], [1, -a], v, zi=[v[0] * a])[0]


def flyback(rng) -> dict:
    """100 kHz DCM flyback transformer on a MnZn ferrite core, primary winding voltage."""
    f = 100.4e3
    fs = 50e6
    n_per = 7.43
    turns, area = 20, 60e-6
    v_in, v_reflected = 48.0, 36.0
    d1 = 0.35
    d2 = v_in * d1 / v_reflected  # volt-second balance
    t = np.arange(int(n_per * fs / f)) / fs
    ph = np.mod(t * f, 1.0)
    v = np.where(ph < d1, v_in, np.where(ph < d1 + d2, -v_reflected, 0.0))
    # ringing of the magnetising inductance with the switch capacitance in the dead (DCM) interval
    dead = ph >= d1 + d2
    tau_d = (ph - d1 - d2) / f
    v = v + np.where(dead, -v_reflected * 0.4 * np.exp(-tau_d / 0.6e-6) * np.cos(2 * np.pi * 1.1e6 * tau_d), 0.0)
    v = _edge_filter(v, 1 / fs, 40e-9)
    v = v + 0.35 + rng.normal(0.0, 0.25, t.size)  # probe offset and noise
    b_pp = v_in * d1 / f / (turns * area)
    _export(
        HERE / "flyback_dcm_ferrite_100k.csv",
        [("scenario", "bench supply for a sensor rack (invented): 48 V in, DCM flyback at about 100 kHz"),
         ("core", "MnZn power ferrite, A_e = 60 mm2, l_e = 70 mm, V_e = 4.2 cm3 (invented)"),
         ("winding", "primary, 20 turns, differential probe across it"),
         ("recorder", "fluxheat demo bench recorder (invented), 8 bit"),
         ("sample interval", "20 ns"),
         ("analyse with", "--turns 20 --area 60mm2 --volume 4.2cm3 --material mnzn-power-ferrite")],
        ["t [us]", "v [V]"], [t * 1e6, v], ["%.4f", "%.3f"],
    )
    return {"file": "flyback_dcm_ferrite_100k.csv", "freq_hz": f, "flux_pp_t": b_pp}


def bridge(rng) -> dict:
    """20 kHz phase-shifted full bridge, three-level voltage, nanocrystalline transformer core."""
    f = 19.93e3
    fs = 10e6
    n_per = 5.61
    turns, area = 20, 4e-4
    v_bus, duty = 400.0, 0.8
    t = np.arange(int(n_per * fs / f)) / fs
    ph = np.mod(t * f, 1.0)
    half = 0.5 * duty
    v = np.where(ph < half, v_bus, np.where(ph < 0.5, 0.0, np.where(ph < 0.5 + half, -v_bus, 0.0)))
    v = _edge_filter(v, 1 / fs, 80e-9)
    v = v + 1.2 + rng.normal(0.0, 2.0, t.size)
    b_pp = v_bus * half / f / (turns * area)
    _export(
        HERE / "bridge_trapezoid_nanocrystalline_20k.csv",
        [("scenario", "charger stage of an electric boat (invented): 400 V bus, phase-shifted bridge, 20 kHz"),
         ("core", "nanocrystalline wound core, A_e = 4.0 cm2, l_e = 0.20 m (invented)"),
         ("winding", "primary, 20 turns, 1000 V-rated differential probe"),
         ("recorder", "fluxheat demo bench recorder (invented), 12 bit"),
         ("sample rate", "10 MHz"),
         ("analyse with", "--turns 20 --area 4cm2 --path-length 0.2 --material nanocrystalline")],
        ["time (s)", "v (V)"], [t, v], ["%.9e", "%.2f"],
    )
    return {"file": "bridge_trapezoid_nanocrystalline_20k.csv", "freq_hz": f, "flux_pp_t": b_pp}


def inverter(rng) -> dict:
    """50 Hz fundamental with 4 kHz PWM ripple on a silicon-steel ring, two-winding record."""
    f1, fc = 50.0, 4000.0
    n1, n2 = 100, 50
    area, path = 2.0e-4, 0.25
    b_peak, m = 1.2, 0.8
    hc, eta, mu_r = 35.0, 0.03, 6000.0
    period_wave = wf.pwm(b_peak, f1, fc, m, levels=2, samples_per_carrier=50)
    dt = period_wave.period / period_wave.n_samples  # 5 us -> 200 kS/s
    b_one = np.array(period_wave.b)
    s_one = np.diff(np.append(b_one, b_one[0])) / dt  # dB/dt of each segment [T/s]
    # B-H relation with a known loss: H = B/mu (1 + (B/1.55)^8) + Hc tanh(s/s0) + eta s
    # Hc tanh(): rate-independent (hysteresis-like) part, every flux reversal (minor loops too)
    # eta s: rate-dependent (eddy-like) part. Energy per cycle = Hc sum|dB| + eta int s^2 dt.
    s0 = 1.0
    h_one = b_one / (MU_0 * mu_r) * (1 + (b_one / 1.55) ** 8) + hc * np.tanh(s_one / s0) + eta * s_one
    loss = f1 * float(np.sum(h_one * s_one * dt))  # f * closed integral of H dB
    n_per = 3.3
    n = int(n_per * period_wave.n_samples)
    idx = np.arange(n) % period_wave.n_samples
    t = np.arange(n) * dt
    v2 = n2 * area * s_one[idx]
    i1 = h_one[idx] * path / n1
    v2 = _edge_filter(v2, dt, 2e-6) + 0.012 + rng.normal(0.0, 0.01, n)
    i1 = i1 - 0.004 + rng.normal(0.0, 0.002, n)
    _export(
        HERE / "inverter_pwm_sisteel_50hz.csv",
        [("scenario", "test bench for a pump-drive motor lamination (invented): inverter-fed 50 Hz, 4 kHz carrier"),
         ("core", "ring stacked from 0.35 mm non-oriented steel, A_e = 2.0 cm2, l_e = 0.25 m (invented)"),
         ("windings", "excitation 100 turns (current probe), sense 50 turns (voltage probe)"),
         ("recorder", "fluxheat demo bench recorder (invented), 16 bit"),
         ("sample interval", "5 us"),
         ("loss built into the synthetic B-H relation", f"{loss:.1f} W/m3"),
         ("analyse with", "--turns 100 --sense-turns 50 --area 2cm2 --path-length 0.25 --material M270-35A")],
        ["time [ms]", "i1 [A]", "v_sense [V]"], [t * 1e3, i1, v2], ["%.4f", "%.5f", "%.4f"],
    )
    return {"file": "inverter_pwm_sisteel_50hz.csv", "freq_hz": f1, "b_peak_t": float(0.5 * np.ptp(b_one)),
            "loss_w_m3": loss}


def main() -> None:
    rng = np.random.default_rng(20240611)
    for make in (flyback, bridge, inverter):
        info = make(rng)
        print(", ".join(f"{k}={v:.6g}" if isinstance(v, float) else f"{k}={v}" for k, v in info.items()))


if __name__ == "__main__":
    main()
