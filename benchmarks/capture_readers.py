"""Speed and memory of reading a long CSV capture (pandas C parser and numpy fallback).

Writes an invented 100 kHz flyback choke capture (3 metadata lines, a header with units,
time, winding voltage and current at 10 ns sampling) to a temporary directory, then reads it
with :func:`workbench.capture.read_capture` in a fresh process per parser and prints:

* wall time of the read (pandas' C engine; numpy.loadtxt with pandas hidden);
* peak resident memory of the read above the process baseline over the size of the numbers
  returned (target: near 1x, at most about 3x);

and one JSON line per parser (key ``capture_reader_mem_ratio``, peak RSS in MiB) for logs.

``--decimal-comma`` writes the same capture as a semicolon-separated file with decimal
commas and a 15-line preamble (the style of many bench instruments), to show that the
detected dialect costs no memory.

Ratios are printed, not judged: machines are noisy. The default is 20 million rows
(~0.7 GB of text, 480 MB of numbers); ``--quick`` uses 1 million.

Usage::

    .venv/bin/python benchmarks/capture_readers.py [--quick] [--rows N] [--decimal-comma]
        [--parsers pandas,numpy]
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def write_capture(path: Path, rows: int, decimal_comma: bool = False) -> None:
    """Invented flyback capture, written in blocks of a million rows."""
    import io

    import numpy as np

    rng = np.random.default_rng(1)
    with open(path, "w") as fh:
        if decimal_comma:
            fh.write("".join(f"Note {k};invented bench export line {k}\n" for k in range(14)))
            fh.write("Sample Interval;1,0E-08\nTIME;CH1;CH2\ns;V;A\n")
        else:
            fh.write("Model,bench scope (invented)\nSample interval,1e-8\ntime (s),v (V),i (A)\n")
        for start in range(0, rows, 1_000_000):
            m = min(1_000_000, rows - start)
            k = np.arange(start, start + m)
            v = np.where(k % 1000 < 400, 24.0, -16.0) + rng.normal(0, 0.3, m)
            i = 0.5 + 0.001 * (k % 1000) + rng.normal(0, 0.002, m)
            if decimal_comma:
                buf = io.StringIO()
                np.savetxt(buf, np.column_stack([k * 1e-8, v, i]), fmt="%.10g", delimiter=";")
                fh.write(buf.getvalue().replace(".", ","))
            else:
                np.savetxt(fh, np.column_stack([k * 1e-8, v, i]), fmt="%.10g", delimiter=",")


def _status(field: str) -> int:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(field + ":"):
                return int(line.split()[1]) * 1024
    raise KeyError(field)


def _rss_reset_peak() -> int:
    """Reset the peak-RSS mark (Linux: write 5 to clear_refs); return the current RSS."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return _status("VmRSS")
    except OSError:  # not Linux: fall back to the high-water mark
        import resource

        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def _peak_rss() -> int:
    try:
        return _status("VmHWM")
    except OSError:
        import resource

        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def measure(path: str, parser: str) -> dict:
    """Read once in this process; return seconds, peak RSS increase and data size [bytes]."""
    import time

    if parser == "numpy":
        sys.modules["pandas"] = None  # type: ignore[assignment]
    else:
        import pandas  # noqa: F401  (its import is part of the baseline, not of the read)
    sys.path.insert(0, str(ROOT))
    from workbench.capture import read_capture

    base = _rss_reset_peak()
    t0 = time.perf_counter()
    cap = read_capture(path)
    seconds = time.perf_counter() - t0
    peak = _peak_rss()
    data = cap.time.nbytes + sum(a.nbytes for a in cap.channels.values())
    return {"seconds": seconds, "peak": peak - base, "data": data}


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1 million rows")
    ap.add_argument("--rows", type=int, help="number of rows (default 20 million)")
    ap.add_argument("--decimal-comma", action="store_true",
                    help="semicolons, decimal commas and a 15-line preamble")
    ap.add_argument("--parsers", default="pandas,numpy", help="comma-separated: pandas, numpy")
    ap.add_argument("--measure", nargs=2, metavar=("PATH", "PARSER"), help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.measure:
        print(json.dumps(measure(*args.measure)))
        return
    rows = args.rows or (1_000_000 if args.quick else 20_000_000)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "flyback_capture.csv"
        write_capture(path, rows, args.decimal_comma)
        style = "semicolon/decimal comma" if args.decimal_comma else "comma/decimal point"
        print(f"{rows} rows ({style}), {path.stat().st_size / 2**20:.0f} MiB of text")
        for parser in args.parsers.split(","):
            out = subprocess.run(
                [sys.executable, __file__, "--measure", str(path), parser],
                check=True, capture_output=True, text=True,
            )
            r = json.loads(out.stdout)
            print(
                f"  {parser:6s}: {r['seconds']:6.2f} s, peak memory {r['peak'] / 2**20:6.0f} MiB"
                f" = {r['peak'] / r['data']:.2f} x the {r['data'] / 2**20:.0f} MiB of numbers"
                " (target <= ~3x)"
            )
            print(json.dumps({
                "benchmark": "capture_reader", "parser": parser, "rows": rows, "style": style,
                "csv_mib": round(path.stat().st_size / 2**20, 1), "seconds": round(r["seconds"], 2),
                "peak_rss_mib": round(r["peak"] / 2**20, 1), "numbers_mib": round(r["data"] / 2**20, 1),
                "capture_reader_mem_ratio": round(r["peak"] / r["data"], 3),
            }))


if __name__ == "__main__":
    main()
