"""Write data/captures/buck_inductor_ferrite_dc.csv: INVENTED DEMO DATA, not a measurement.

Scenario (our own, invented): the auxiliary 24 V -> 5 V buck converter of a greenhouse
climate controller, about 100 kHz in continuous conduction at light load. Its output inductor
is wound on an ungapped MnZn ferrite toroid (A_e = 30 mm2, l_e = 55 mm, V_e = 1.65 cm3,
8 turns, relative permeability taken as 2200), so the DC current sets a DC bias
H_dc = N I_dc / l_e of about 58 A/m in the core. The bench "recorded" the inductor voltage
(differential probe) and the inductor current (current probe) together.

The signal is physics-based: the inductor voltage is +19 V while the switch conducts (duty
5/24) and -5 V otherwise, with finite edge rates, a probe offset and noise; the current is
the integral of v / L plus the DC current, L = mu_0 mu_r N^2 A_e / l_e. Non-integer number of
periods, 10 ns sample interval, fixed seed.

Run from the project root (same bytes every time)::

    .venv/bin/python data/captures/make_buck_capture.py
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
from scipy.signal import lfilter

HERE = Path(__file__).resolve().parent
OUT = HERE / "buck_inductor_ferrite_dc.csv"
SEED = 20240612

MU_0 = 4e-7 * np.pi
FREQ = 99.7e3           # Hz
FS = 100e6              # S/s
N_PERIODS = 12.37
TURNS, AREA, PATH, MU_R = 8, 30e-6, 55e-3, 2200.0
V_IN, V_OUT = 24.0, 5.0
I_DC = 0.40             # A


def _edge_filter(v: np.ndarray, dt: float, rise: float) -> np.ndarray:
    tau = rise / 2.2
    a = np.exp(-dt / tau)
    return lfilter([1 - a], [1, -a], v, zi=[v[0] * a])[0]


def make(rng: np.random.Generator):
    duty = V_OUT / V_IN
    t = np.arange(int(N_PERIODS * FS / FREQ)) / FS
    ph = np.mod(t * FREQ, 1.0)
    v_ideal = np.where(ph < duty, V_IN - V_OUT, -V_OUT)
    v_ideal = _edge_filter(v_ideal, 1 / FS, 30e-9)
    inductance = MU_0 * MU_R * TURNS**2 * AREA / PATH
    i = np.cumsum(v_ideal) / FS / inductance
    # remove the start-up ramp of the integral: the current ripple is periodic around I_DC
    n_per = int(round(FS / FREQ))
    i = i - np.polyval(np.polyfit(t, i, 1), t) + I_DC
    v = v_ideal + 0.12 + rng.normal(0.0, 0.08, t.size)
    i = i + rng.normal(0.0, 0.004, t.size)
    b_pp = (V_IN - V_OUT) * duty / FREQ / (TURNS * AREA)
    return t, v, i, {"b_pp": b_pp, "h_dc": TURNS * I_DC / PATH, "inductance": inductance, "samples_per_period": n_per}


def main() -> dict:
    rng = np.random.default_rng(SEED)
    t, v, i, info = make(rng)
    lines = [
        "# INVENTED DEMO DATA: synthetic waveform made by data/captures/make_buck_capture.py, not a measurement",
        "# scenario: auxiliary 24 V -> 5 V buck of a greenhouse climate controller (invented), about 100 kHz, CCM",
        "# core: ungapped MnZn ferrite toroid, A_e = 30 mm2, l_e = 55 mm, V_e = 1.65 cm3 (invented)",
        f"# winding: output inductor, 8 turns; DC current {I_DC:g} A (H_dc = N I_dc / l_e = {info['h_dc']:.1f} A/m)",
        "# recorder: fluxheat demo bench recorder (invented); sample interval 10 ns",
        "# analyse with: --turns 8 --area 30mm2 --path-length 55mm --volume 1.65cm3 --material mnzn-power-ferrite",
        "t [us],v [V],i [A]",
    ]
    lines += [f"{a:.4f},{b:.3f},{c:.4f}" for a, b, c in zip(t * 1e6, v, i)]
    fd, tmp = tempfile.mkstemp(dir=OUT.parent, prefix=f".{OUT.name}.", suffix=".tmp")
    with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
        fh.write("\n".join(lines) + "\n")
    os.chmod(tmp, 0o644)
    os.replace(tmp, OUT)
    return {"file": OUT.name, "freq_hz": FREQ, "flux_pp_t": info["b_pp"], "h_dc_a_m": info["h_dc"],
            "inductance_h": info["inductance"]}


if __name__ == "__main__":
    print(main())
