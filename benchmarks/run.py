"""Benchmark suite of the workbench: ratios against plain numpy/pandas, measured side by side.

Measures, in one run (see benchmarks/README.md for what each figure means):

igse_vs_numpy   capture analysis (even grid, period detection, averaging, iGSE with
                minor loops) of a long noisy flux capture / one numpy pass of
                mean(|dB/dt|**alpha) over the same array               (target <= 2)
csv_vs_plain    workbench.capture.read_capture / pandas.read_csv (C parser) alone
                on the same CSV capture                                 (target <= 1.3)
csv_mem_ratio   extra peak resident memory of read_capture / bytes of the numeric data
                                                                        (target <= 3)
batch_vs_loop   single-waveform iGSE in a Python loop / igse_batch      (target >= 5)
batch_vs_numpy  igse_batch / one vectorised numpy pass of |dB/dt|**alpha over the
                same 2-D array                                          (target <= 1.5)
single_call_us  one iGSE call on a 1024-sample waveform [us]            (target < 100)
panel_ms        one 400-point frequency sweep with all parts and the crossover,
                median [ms]                                             (target <= 30)
import_s        import of workbench, workbench.models, workbench.analysis in a fresh
                interpreter, median of 5 [s]                            (target <= 0.5)

All waveforms are synthetic (invented for this benchmark); the Steinmetz set is invented.
Times are best-of-N wall times unless a median is stated. Nothing here is a pass/fail test.

Usage::

    .venv/bin/python benchmarks/run.py [--quick] [--write-readme]

``--quick`` uses smaller sizes (same ratios; the capture figure keeps its 10M samples) and
finishes in under a minute on two cores.
The last line of output is one JSON object with the eight figures.
"""
from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from workbench import models, waveforms  # noqa: E402
from workbench.analysis import sweep_frequency  # noqa: E402
from workbench.analysis.batch_igse import CHUNK_SAMPLES, igse_batch  # noqa: E402

K, ALPHA, BETA = 5.0, 1.4, 2.5  # invented Steinmetz set, W/m^3 with f in Hz and B in T

FULL = dict(capture=10_000_000, csv_rows=10_000_000, batch_rows=100_000, loop_rows=400, repeat=3)
# the capture figure keeps its full 10M samples in quick mode: it takes about 2 s, and at 1M samples
# the ratio is not the same (the bare numpy pass then runs from the cache, our fixed costs stay)
QUICK = dict(capture=10_000_000, csv_rows=1_000_000, batch_rows=10_000, loop_rows=150, repeat=2)


def best_of(func, repeat: int):
    """Shortest wall time of ``repeat`` calls [s] and the last result."""
    best, result = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = func()
        best = min(best, time.perf_counter() - t0)
    return best, result


def machine() -> dict:
    cpu = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return {"nproc": os.cpu_count(), "cpu": cpu, "numpy": np.__version__, "python": platform.python_version()}


# ---------------------------------------------------------------------------
# synthetic inputs
# ---------------------------------------------------------------------------
def pwm_flux(t, freq, b_peak, ripple_periods=12, ripple=0.4):
    """Triangle at ``freq`` with a ripple that reverses the flux: minor loops every period.

    The ripple rises over 30 % of its own period and falls over 70 %; with ``ripple`` = 0.4 its
    slopes beat the triangle's (4 per period) on both halves when ``ripple_periods`` >= 8, so
    every ripple period makes a minor loop. ``ripple_periods`` may be an array (one per row).
    """
    phase = (t * freq) % 1.0
    base = np.where(phase < 0.5, -1 + 4 * phase, 3 - 4 * phase)
    x = (phase * ripple_periods) % 1.0
    rip = np.where(x < 0.3, x / 0.3, (1 - x) / 0.7)
    return b_peak * (base + ripple * rip)


def turning_points(b):
    """Number of slope reversals per row of periodic rows (a row without minor loops has 2)."""
    d = np.diff(b, axis=1, append=b[:, :1])
    up = d > 0
    return np.count_nonzero(up != np.roll(up, 1, axis=1), axis=1)


def noisy_capture(n: int, seed: int = 1):
    """Flux capture of n samples: 50 kHz PWM-like flux with 12 minor loops a period, 0.2 % noise, 97.3 periods."""
    rng = np.random.default_rng(seed)
    freq = 50e3
    dt = 97.3 / freq / n
    t = np.arange(n) * dt
    b = pwm_flux(t, freq, 0.1) + 2e-4 * rng.standard_normal(n)
    return t, b


def batch_rows(n_rows: int, n: int = 1024, seed: int = 2, minor_share: float = 0.25):
    """Rows of sine, triangle (random duty), trapezoid and PWM-with-ripple (minor loops)."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / n
    b = np.empty((n_rows, n))
    kind = rng.choice(4, size=n_rows, p=[(1 - minor_share) / 3] * 3 + [minor_share])
    amp = rng.uniform(0.05, 0.3, n_rows)[:, None]
    duty = rng.uniform(0.2, 0.8, n_rows)[:, None]
    for k in range(4):
        sel = kind == k
        a, d = amp[sel], duty[sel]
        if k == 0:
            b[sel] = a * np.sin(2 * np.pi * t + rng.uniform(0, 2 * np.pi, (sel.sum(), 1)))
        elif k == 1:
            b[sel] = a * np.where(t < d, -1 + 2 * t / d, 1 - 2 * (t - d) / (1 - d))
        elif k == 2:
            r = d / 2
            b[sel] = a * np.where(t < 0.5, np.minimum(-1 + 2 * t / r, 1), np.maximum(1 - 2 * (t - 0.5) / r, -1))
        else:
            b[sel] = pwm_flux(t[None, :], 1.0, 1.0, rng.integers(8, 16, (sel.sum(), 1))) * a
    return b, kind


# ---------------------------------------------------------------------------
# the measurements
# ---------------------------------------------------------------------------
def bench_igse_capture(size: int, repeat: int, log):
    t, b = noisy_capture(size)
    dt = t[1] - t[0]
    base, _ = best_of(lambda: np.mean(np.abs(np.diff(b) / dt) ** ALPHA), repeat)
    try:
        from workbench.analysis.capture import SteinmetzSet, analyse_record
    except ImportError as exc:  # the capture analysis is not there: iGSE on the whole record
        log(f"  capture analysis unavailable ({exc}); timing the iGSE alone on the whole record")
        w = waveforms.FluxWaveform(t, b, t[-1] + dt)
        ours, loss = best_of(lambda: models.igse(w, K, ALPHA, BETA), repeat)
        what = "iGSE on the whole record, no period detection"
    else:
        st = SteinmetzSet(K, ALPHA, BETA)
        ours, res = best_of(lambda: analyse_record(t, {"b": b}, steinmetz=st), repeat)
        loss = res.model_loss
        from workbench.analysis.steady_state import detect_period, fold_periods, uniform_grid

        t_grid, _ = best_of(lambda: uniform_grid(t, b), repeat)
        t_det, _ = best_of(lambda: detect_period(t, b), repeat)
        m = min(max(16, int(round(1 / res.freq / dt))), 16384)
        t_fold, _ = best_of(lambda: fold_periods(t, b, 1 / res.freq, samples=m), repeat)
        t_ig, _ = best_of(lambda: models.igse(res.waveform, K, ALPHA, BETA, threshold=res.threshold), repeat)
        log(f"  of which uniform_grid {t_grid * 1e3:.1f} ms, detect_period {t_det * 1e3:.1f} ms, "
            f"fold_periods {t_fold * 1e3:.1f} ms, iGSE on the averaged period {t_ig * 1e3:.2f} ms")
        what = f"analyse_record: period {1 / res.freq:.6g} s found, {res.periods_used} periods averaged"
    log(f"igse_vs_numpy: {size:,} samples, PWM-like flux with minor loops + 0.2 % noise")
    log(f"  ours ({what}): {ours * 1e3:.1f} ms, loss {loss:.6g} W/m^3")
    log(f"  numpy mean(|dB/dt|**alpha): {base * 1e3:.1f} ms")
    return ours / base


_CSV_CHILD = r"""
import sys, time, json
sys.path.insert(0, sys.argv[3])
import numpy as np, pandas
from workbench.capture import read_capture
path, which = sys.argv[1], sys.argv[2]
def hwm():
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM"):
            return int(line.split()[1])
with open("/proc/self/clear_refs", "w") as fh:  # reset the peak RSS to the current RSS
    fh.write("5")
before = hwm()
t0 = time.perf_counter()
if which == "ours":
    data = read_capture(path)
    n = data.n_samples
else:
    df = pandas.read_csv(path)
    n = len(df)
elapsed = time.perf_counter() - t0
after = hwm()
print(json.dumps({"s": elapsed, "extra_kib": after - before, "rows": n}))
"""


def bench_csv(rows: int, repeat: int, log, workdir: Path):
    path = workdir / f"capture_{rows}.csv"
    if not path.exists():
        t, b = noisy_capture(rows, seed=3)
        v = np.gradient(b, t) * 1e-4 * 10  # invented winding voltage: 10 turns, 1 cm^2 (not used by the reader timing)
        import pandas

        tmp = path.with_suffix(".tmp")
        pandas.DataFrame({"time (s)": t, "b (T)": b, "v (V)": v}).to_csv(tmp, index=False, float_format="%.9g")
        os.replace(tmp, path)
    numeric = rows * 3 * 8  # float64 time, b and v

    def child(which):
        out = subprocess.run([sys.executable, "-c", _CSV_CHILD, str(path), which, str(ROOT)],
                             capture_output=True, text=True, check=True)
        return json.loads(out.stdout.strip().splitlines()[-1])

    ours = [child("ours") for _ in range(repeat)]
    plain = [child("plain") for _ in range(repeat)]
    t_ours = min(r["s"] for r in ours)
    t_plain = min(r["s"] for r in plain)
    mem = min(r["extra_kib"] for r in ours) * 1024 / numeric
    mem_plain = min(r["extra_kib"] for r in plain) * 1024 / numeric
    log(f"csv_vs_plain: {rows:,} rows x 3 columns ({path.stat().st_size / 1e6:.0f} MB), each read in a fresh process")
    log(f"  read_capture: {t_ours * 1e3:.0f} ms, extra peak RSS {mem:.2f}x the numeric data")
    log(f"  pandas.read_csv alone: {t_plain * 1e3:.0f} ms, extra peak RSS {mem_plain:.2f}x")
    return t_ours / t_plain, mem


def numpy_pass(b, dt, repeat):
    """Best time of |dB/dt|**alpha over a 2-D array: whole array or in row chunks, whichever is faster."""
    whole, _ = best_of(lambda: np.abs(np.diff(b, axis=1, append=b[:, :1]) / dt) ** ALPHA, repeat)
    step = max(1, CHUNK_SAMPLES // b.shape[1])

    def chunked():
        for i in range(0, b.shape[0], step):
            blk = b[i:i + step]
            np.abs(np.diff(blk, axis=1, append=blk[:, :1]) / dt) ** ALPHA

    part, _ = best_of(chunked, repeat)
    return min(whole, part)


def bench_batch(n_rows: int, loop_rows: int, repeat: int, log):
    b, kind = batch_rows(n_rows)
    n = b.shape[1]
    period = 1e-5
    dt = period / n
    base = numpy_pass(b, dt, repeat)
    ours, losses = best_of(lambda: igse_batch(b, period, K, ALPHA, BETA), repeat)
    tt = np.arange(n) * dt
    idx = np.linspace(0, n_rows - 1, loop_rows).astype(int)

    def loop():
        return [models.igse(waveforms.FluxWaveform(tt, b[i], period), K, ALPHA, BETA) for i in idx]

    t_loop, ref = best_of(loop, 1)
    t_loop_all = t_loop / loop_rows * n_rows
    err = float(np.max(np.abs(np.asarray(ref) / losses[idx] - 1)))
    minor = float(np.mean(turning_points(b) > 2))
    log(f"batch: {n_rows:,} x {n} samples; {100 * minor:.0f} % of rows with minor loops (PWM-like, 8-15 each), "
        "rest sine/triangle/trapezoid")
    log(f"  igse_batch: {ours * 1e3:.0f} ms ({ours / b.size * 1e9:.1f} ns/sample)")
    log(f"  numpy |dB/dt|**alpha over the array: {base * 1e3:.0f} ms ({base / b.size * 1e9:.1f} ns/sample)")
    log(f"  loop of igse(FluxWaveform) over {loop_rows} rows, scaled to {n_rows:,}: {t_loop_all:.2f} s "
        f"(max rel. difference {err:.1e})")
    from workbench.analysis import batch_igse

    how = "exp(alpha*log|dB|), numpy's vector exp/log" if batch_igse._simd_exp_log() else "np.power"
    log(f"  |dB|**alpha evaluated as {how}")
    # the two ends, reported for honesty: no row with minor loops, and every row with them
    b_none, _ = batch_rows(max(1000, n_rows // 10), minor_share=0.0, seed=5)
    base_none = numpy_pass(b_none, dt, repeat)
    ours_none, _ = best_of(lambda: igse_batch(b_none, period, K, ALPHA, BETA), repeat)
    log(f"  no row with minor loops ({b_none.shape[0]:,} rows): igse_batch / numpy = {ours_none / base_none:.2f}")
    b_all, _ = batch_rows(max(1000, n_rows // 10), minor_share=1.0, seed=4)
    assert np.all(turning_points(b_all) > 2)
    base_all = numpy_pass(b_all, dt, repeat)
    ours_all, _ = best_of(lambda: igse_batch(b_all, period, K, ALPHA, BETA), repeat)
    log(f"  all rows with minor loops ({b_all.shape[0]:,} rows): igse_batch / numpy = {ours_all / base_all:.2f}")
    return t_loop_all / ours, ours / base


def bench_single(log):
    w = waveforms.sine(0.1, 1e5, samples=1024)
    models.igse(w, K, ALPHA, BETA)
    times = []
    for _ in range(7):
        t0 = time.perf_counter()
        for _ in range(200):
            models.igse(w, K, ALPHA, BETA)
        times.append((time.perf_counter() - t0) / 200)
    us = statistics.median(times) * 1e6
    log(f"single_call_us: igse on a prebuilt 1024-sample sine: {us:.1f} us (median of 7 x 200 calls)")
    return us


def bench_panel(log):
    from workbench.materials import get_material

    mat = get_material("M330-35A")
    freqs = np.geomspace(10, 1e6, 400)
    sweep_frequency(mat, "triangle", b_peak=1.0, duty=0.3, freqs=freqs)
    times = []
    for _ in range(21):
        t0 = time.perf_counter()
        s = sweep_frequency(mat, "triangle", b_peak=1.0, duty=0.3, freqs=freqs)
        times.append(time.perf_counter() - t0)
    ms = statistics.median(times) * 1e3
    log(f"panel_ms: sweep_frequency (400 points, all parts, skin effect, crossover {s.crossover.freq:.4g} Hz) "
        f"on M330-35A: median {ms:.2f} ms of 21")
    return ms


def bench_import(log):
    code = ("import time; t0 = time.perf_counter(); import workbench, workbench.models, workbench.analysis; "
            "print(time.perf_counter() - t0)")
    # as an installed package imports: with its bytecode cached (a machine that sets
    # PYTHONDONTWRITEBYTECODE would otherwise time the compiler, not the import)
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT, env=env)
    vals = []
    for _ in range(5):
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT, env=env)
        vals.append(float(out.stdout.strip()))
    s = statistics.median(vals)
    log(f"import_s: median of 5 fresh interpreters, bytecode cached: {s:.3f} s")
    return s


def write_readme(figures: dict, mach: dict, quick: bool, lines: list[str]) -> None:
    """Replace the suite's section of benchmarks/README.md, keeping other sections."""
    path = ROOT / "benchmarks" / "README.md"
    start, end = "<!-- suite:start -->", "<!-- suite:end -->"
    text = path.read_text() if path.exists() else "# Benchmarks\n"
    body = [start, "## Latest figures of `benchmarks/run.py`" + (" --quick" if quick else ""), "",
            f"Machine: {mach['nproc']} cores, {mach['cpu']}, numpy {mach['numpy']}, Python {mach['python']}.", "",
            "| figure | value | target |", "|---|---|---|"]
    targets = {"igse_vs_numpy": "<= 2", "csv_vs_plain": "<= 1.3", "csv_mem_ratio": "<= 3", "batch_vs_loop": ">= 5",
               "batch_vs_numpy": "<= 1.5", "single_call_us": "< 100", "panel_ms": "<= 30", "import_s": "<= 0.5"}
    for k, v in figures.items():
        body.append(f"| `{k}` | {v:.3g} | {targets[k]} |")
    body += ["", "Run log:", "", "```", *lines, "```", end]
    section = "\n".join(body)
    if start in text and end in text:
        pre, rest = text.split(start, 1)
        _, post = rest.split(end, 1)
        text = pre + section + post
    else:
        text = text.rstrip("\n") + "\n\n" + section + "\n"
    tmp = path.with_suffix(".md.tmp")
    tmp.write_text(text)
    os.replace(tmp, path)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, same ratios (under a minute)")
    parser.add_argument("--write-readme", action="store_true", help="write the figures into benchmarks/README.md")
    parser.add_argument("--workdir", default=None, help="where to keep the generated CSV (default: a temp dir)")
    args = parser.parse_args(argv)
    size = QUICK if args.quick else FULL
    lines: list[str] = []

    def log(msg):
        print(msg, flush=True)
        lines.append(msg)

    mach = machine()
    log(f"machine: {mach['nproc']} cores, {mach['cpu']}, numpy {mach['numpy']}, Python {mach['python']}")
    figures = {}
    figures["igse_vs_numpy"] = bench_igse_capture(size["capture"], size["repeat"], log)
    with tempfile.TemporaryDirectory() as tmp:
        workdir = Path(args.workdir) if args.workdir else Path(tmp)
        workdir.mkdir(parents=True, exist_ok=True)
        figures["csv_vs_plain"], figures["csv_mem_ratio"] = bench_csv(size["csv_rows"], size["repeat"], log, workdir)
    figures["batch_vs_loop"], figures["batch_vs_numpy"] = bench_batch(size["batch_rows"], size["loop_rows"], size["repeat"], log)
    figures["single_call_us"] = bench_single(log)
    figures["panel_ms"] = bench_panel(log)
    figures["import_s"] = bench_import(log)
    figures = {k: round(float(v), 4) for k, v in figures.items()}
    if args.write_readme:
        write_readme(figures, mach, args.quick, lines)
    print(json.dumps(figures))
    return 0


if __name__ == "__main__":
    sys.exit(main())
