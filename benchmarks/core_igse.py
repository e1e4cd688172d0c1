"""Speed and memory of the iGSE with minor-loop handling on a long noisy flux record.

Prints, from one run:

* iGSE with the minor-loop procedure (reversal detection with the data-derived
  noise threshold, rainflow pairing, first-passage loop integrals) on a
  10-million-sample sine carrying white noise of 0.1 % of its peak, against a
  bare numpy single pass ``mean(|dB/dt|**alpha)`` over the same array
  (target: at most 3x);
* the peak memory the iGSE call allocates (tracemalloc) over the size of the
  flux array (target: at most 5x);
* the same for a noise-free two-level PWM flux of the same length (many minor
  loops, every segment carries flux gain: the slow path);
* the time of one 1024-sample sine (target: well under a millisecond);
* the classical eddy loss with skin effect of a triangle and of a 12,800-sample
  PWM flux: building the harmonic spectrum once, then 400 frequencies at once
  (what a frequency sweep asks of :func:`workbench.models.eddy_spectrum`).

Ratios are printed, not judged: machines are noisy. ``--quick`` uses 1/10 of the
sizes and finishes in a few seconds.

The waveforms are synthetic (invented for this benchmark).

Usage::

    .venv/bin/python benchmarks/core_igse.py [--quick] [--repeat N]
"""
from __future__ import annotations

import argparse
import os
import platform
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from workbench import models, waveforms  # noqa: E402

K, ALPHA, BETA = 5.0, 1.4, 2.5  # invented Steinmetz set, W/m^3 with f in Hz and B in T


def machine() -> str:
    """CPU model and core count, as far as the platform tells."""
    model = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return f"{os.cpu_count()} cores, {model}"


def best_of(func, repeat: int) -> tuple[float, object]:
    """Shortest wall time of ``repeat`` calls [s] and the last result."""
    best = np.inf
    result = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = func()
        best = min(best, time.perf_counter() - t0)
    return best, result


def peak_memory(func) -> int:
    """Peak bytes allocated by one call (tracemalloc, numpy buffers included)."""
    tracemalloc.start()
    tracemalloc.reset_peak()
    func()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def bare_sum(b: np.ndarray, step: float) -> float:
    """The yardstick: one numpy pass mean(|dB/dt|**alpha) with no loop handling."""
    return float(np.mean(np.abs(np.diff(b) / step) ** ALPHA))


def noisy_sine(n: int, freq: float = 50.0, noise: float = 1e-3, seed: int = 7) -> waveforms.FluxWaveform:
    """A 1 T sine of n samples with white noise of ``noise`` times the peak."""
    rng = np.random.default_rng(seed)
    period = 1.0 / freq
    t = np.arange(n) * (period / n)
    b = np.sin(2 * np.pi * freq * t) + noise * rng.standard_normal(n)
    return waveforms.FluxWaveform(t, b, period)


def clean_pwm(n: int) -> waveforms.FluxWaveform:
    """Two-level sine-triangle PWM flux, 50 Hz fundamental, 10 kHz carrier, about n samples."""
    return waveforms.pwm(1.0, 50.0, 10_000.0, 0.8, samples_per_carrier=max(8, n // 200))


def case(name: str, w: waveforms.FluxWaveform, repeat: int) -> dict:
    step = w.period / w.n_samples
    t_bare, _ = best_of(lambda: bare_sum(w.b, step), repeat)
    # each iGSE call starts from a fresh waveform object: nothing cached
    fresh = [waveforms.FluxWaveform.__new__(waveforms.FluxWaveform) for _ in range(repeat + 1)]
    for f in fresh:
        object.__setattr__(f, "t", w.t)
        object.__setattr__(f, "b", w.b)
        object.__setattr__(f, "period", w.period)
        object.__setattr__(f, "_cache", {})
    it = iter(fresh)
    t_igse, res = best_of(lambda: models.igse_loops(next(it), K, ALPHA, BETA), repeat)
    peak = peak_memory(lambda: models.igse_loops(next(it), K, ALPHA, BETA))
    return {
        "name": name,
        "n": w.n_samples,
        "t_bare": t_bare,
        "t_igse": t_igse,
        "ratio": t_igse / t_bare,
        "mem_ratio": peak / w.b.nbytes,
        "loops": res.loop_flux_pp.size,
        "total": res.total,
    }


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="1/10 of the sizes (a few seconds)")
    parser.add_argument("--repeat", type=int, default=5, help="timing repeats, best kept (default 5)")
    args = parser.parse_args(argv)
    n = 1_000_000 if args.quick else 10_000_000
    print(f"machine: {machine()}, Python {platform.python_version()}, numpy {np.__version__}")
    print(f"iGSE with minor loops vs bare numpy mean(|dB/dt|**alpha), alpha = {ALPHA}, {n:,} samples, best of {args.repeat}")
    rows = [
        case("sine + 0.1 % white noise", noisy_sine(n), args.repeat),
        case("2-level PWM, noise-free", clean_pwm(n), args.repeat),
    ]
    print(f"{'waveform':28s} {'samples':>11s} {'bare [s]':>9s} {'iGSE [s]':>9s} {'time ratio':>10s} "
          f"{'peak mem / input':>16s} {'loops':>6s}")
    for r in rows:
        print(f"{r['name']:28s} {r['n']:>11,d} {r['t_bare']:9.4f} {r['t_igse']:9.4f} {r['ratio']:10.2f} "
              f"{r['mem_ratio']:16.2f} {r['loops']:6d}")
    print("targets (noisy sine): time ratio <= 3, peak memory <= 5x the flux array")
    small = waveforms.sine(1.0, 50.0)
    t_small, _ = best_of(lambda: models.igse(small, K, ALPHA, BETA), max(50, 20 * args.repeat))
    t_small_plain, _ = best_of(lambda: models.igse(small, K, ALPHA, BETA, minor_loops=False),
                               max(50, 20 * args.repeat))
    print(f"1024-sample sine: iGSE with minor loops {1e3 * t_small:.3f} ms, "
          f"without {1e3 * t_small_plain:.3f} ms (target: well under 1 ms)")
    freqs = np.geomspace(10.0, 1e6, 400)
    for name, shape in (("triangle (2 corners)", waveforms.triangle(0.1, 1e3, 0.3)),
                        ("PWM, 12,800 samples", waveforms.pwm(1.0, 50.0, 10_000.0, 0.8))):
        def build(shape=shape):
            fresh = waveforms.FluxWaveform(shape.t, shape.b, shape.period)  # no cached spectrum
            return models.eddy_spectrum(fresh)
        t_build, spec = best_of(build, max(5, args.repeat))
        t_sweep, _ = best_of(lambda spec=spec: spec.classical(freqs, 4.5e-7, 0.35e-3, 2000.0), max(5, args.repeat))
        print(f"classical eddy with skin effect, {name}: spectrum {1e3 * t_build:.2f} ms, "
              f"400 frequencies {1e3 * t_sweep:.2f} ms")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
