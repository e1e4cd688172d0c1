"""Write the small realistic capture exports in tests/data/instrument_exports/ (invented data).

Run from the project root to regenerate (deterministic, byte for byte)::

    .venv/bin/python tests/data/instrument_exports/make_exports.py

Each file imitates a *style* of export seen on benches (no particular product): the
numbers are invented for the tests, computed from closed forms given below so that a test
can recompute them independently. No instrument or person produced them.
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

# scope: 200 kHz choke test, 4 ns sampling
SCOPE_DT = 4e-9
SCOPE_N = 1250  # 5 us = one period of 200 kHz
SCOPE_F = 200e3


def scope_v(k: int) -> float:
    """Winding voltage [V]: 24 V sine at 200 kHz (invented)."""
    return 24.0 * math.sin(2 * math.pi * SCOPE_F * k * SCOPE_DT)


def scope_i(k: int) -> float:
    """Winding current [A]: 1.5 A cosine at 200 kHz plus 0.2 A offset (invented)."""
    return 0.2 + 1.5 * math.cos(2 * math.pi * SCOPE_F * k * SCOPE_DT)


def sim_times() -> list[float]:
    """Uneven simulator time steps [s]: 1 ns near the switching edges, 20 ns between."""
    t, out = 0.0, []
    while t < 20e-6:
        out.append(t)
        phase = (t * 100e3) % 1.0
        near_edge = min(phase, abs(phase - 0.4), 1.0 - phase) < 0.01
        t = round(t + (1e-9 if near_edge else 20e-9), 15)
    return out


def sim_v(t: float) -> float:
    """Winding voltage [V] of a 100 kHz flyback, duty 0.4: +48 V, then -32 V (ideal)."""
    return 48.0 if (t * 100e3) % 1.0 < 0.4 else -32.0


def sim_i(t: float) -> float:
    """Magnetising current [A]: triangle from 0.1 A to 2.5 A and back (L = 80 uH, invented)."""
    phase = (t * 100e3) % 1.0
    if phase < 0.4:
        return 0.1 + 48.0 / 80e-6 * phase * 10e-6
    return 2.5 - 32.0 / 80e-6 * (phase - 0.4) * 10e-6


LOG_RATE = 10e3  # logger: 50 Hz mains choke, 10 kS/s, 400 rows = 2 periods


def log_values(k: int) -> tuple[float, float, float]:
    """(U [V], I [A], B [mT]) of a 50 Hz line choke (invented)."""
    w = 2 * math.pi * 50 * k / LOG_RATE
    return 230.0 * math.sqrt(2) * math.cos(w), 4.0 * math.sin(w), 1200.0 * math.sin(w)


def uneven_times_us() -> list[float]:
    """A 20 kHz filter choke logged with jittered steps [us]: 0.5 us +- 0.2 us (invented)."""
    out, t = [], 0.0
    for k in range(400):
        out.append(round(t, 6))
        t += 0.5 + 0.2 * math.sin(1.7 * k)
    return out


def uneven_vs_mv(t_us: float) -> float:
    """Sense-winding voltage [mV] of the 20 kHz choke (invented)."""
    return 350.0 * math.sin(2 * math.pi * 20e3 * t_us * 1e-6)


def uneven_i_ma(t_us: float) -> float:
    """Current [mA] of the 20 kHz choke (invented)."""
    return 800.0 * math.sin(2 * math.pi * 20e3 * t_us * 1e-6 - 1.2)


def files() -> dict[str, str]:
    """File name -> text."""
    preamble = [
        "Format;bench scope export (invented for tests)",
        "Firmware;2,14",
        "Model;four-channel bench scope (invented)",
        "Date;2024-06-11",
        "Time;14:02:33",
        "Setup;200 kHz choke, winding voltage and current (invented data)",
        "Record Length;1250",
        "Sample Interval;4,0E-09",
        "Trigger Point;0",
        "Trigger Level;1,20E+00",
        "Vertical Scale CH1;1,0E+01",
        "Vertical Scale CH2;5,0E-01",
        "Vertical Offset;0,0",
        "Probe Attenuation CH1;100",
        "Coupling;DC",
    ]
    assert len(preamble) == 15
    scope = "\n".join(preamble) + "\nCH1;CH2\nV;A\n" + "".join(
        f"{scope_v(k):.6E};{scope_i(k):.6E}\n".replace(".", ",") for k in range(SCOPE_N)
    )
    sim = "time\tV(n003)\tI(L1)\n" + "".join(
        f"{t:.15e}\t{sim_v(t):.9g}\t{sim_i(t):.9g}\n" for t in sim_times()
    )
    logger = (
        "Logger\tfour-channel data logger (invented)\nSample rate\t10 kS/s\n"
        "Channel note\tline choke test, invented data\n"
        "Time/s\tU/V\tI/A\tB/mT\n"
        + "".join(
            f"{k / LOG_RATE:.4f}\t" + "\t".join(f"{x:.5f}" for x in log_values(k)) + "\n"
            for k in range(400)
        )
    )
    uneven = "# 20 kHz filter choke, uneven logger steps (invented data)\n"
    uneven += "t[us]     v_sense[mV]     i[mA]\n" + "".join(
        f"{t:10.6f}  {uneven_vs_mv(t):14.6f}  {uneven_i_ma(t):12.6f}\n" for t in uneven_times_us()
    )
    return {
        "scope_semicolon_decimal_comma.csv": scope,
        "simulator_tab_uneven.txt": sim,
        "logger_tab_iso_units.tsv": logger,
        "whitespace_uneven_steps.dat": uneven,
    }


def write_all(directory: Path = HERE) -> list[Path]:
    """Write every file (with \\n line ends) and return the paths."""
    out = []
    for name, text in files().items():
        path = directory / name
        path.write_bytes(text.encode("ascii"))
        out.append(path)
    return out


if __name__ == "__main__":
    print(f"wrote {len(write_all())} files", file=sys.stderr)
