"""``workbench sweep``: loss parts of one flux shape (or a captured period) across frequency, with the crossover.

Examples::

    workbench sweep --material M400-50A --shape sine --b-peak 1.5T --from 10 --to 10k --json
    workbench sweep --material nanocrystalline --capture data/captures/bridge_trapezoid_nanocrystalline_20k.csv \\
        --turns 6 --area 1.2cm2 --from 1k --to 200k --points 30

The waveform keeps its flux levels and is stretched in time to each frequency. JSON output
is SI (Hz, W/m^3); parts the material has no data for are null.
"""
from __future__ import annotations

import argparse

import numpy as np

from workbench.cli.capture import CAUTION, add_model_options, quantity, table
from workbench.cli.common import add_shape_options, engine_conditions, shape_or_capture
from workbench.units import format_quantity

MAX_POINTS = 100_000


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``sweep`` sub-command."""
    p = subparsers.add_parser(
        "sweep",
        help="loss parts of a shape or a captured period across frequency, and the eddy/hysteresis crossover",
        description="Sweep one flux waveform across frequency (flux kept, time scaled). " + CAUTION,
    )
    add_shape_options(p, freq=False)
    add_model_options(p, required=True)
    p.add_argument("--from", dest="f_from", required=True, help="lowest frequency, e.g. 10 or 1k")
    p.add_argument("--to", dest="f_to", required=True, help="highest frequency, e.g. 1M")
    p.add_argument("--points", default="50", help="number of frequencies, geometric spacing (default 50)")
    p.add_argument("--with-excess", action="store_true", help="the crossover counts the excess part as eddy loss")
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    p.add_argument("--report", metavar="FILE.html", help="also write an HTML report (opens offline) with JSON and "
                   "CSV beside it; an existing name gets a new suffix")
    p.set_defaults(func=run)
    return p


def frequencies(f_from: float, f_to: float, points: int) -> np.ndarray:
    """Geometric spacing with both ends exactly as given.

    Parameters
    ----------
    f_from, f_to : float
        End frequencies [Hz], f_from < f_to.
    points : int
        Number of frequencies (at least 2).
    """
    f = np.geomspace(f_from, f_to, points)
    f[0], f[-1] = f_from, f_to
    return f


def run(args) -> int:
    """Run ``workbench sweep``; returns the exit status."""
    from workbench.analysis.sweep import sweep_frequency
    from workbench.cli.main import emit_json

    f_from = quantity(args.f_from, "Hz", "--from")
    f_to = quantity(args.f_to, "Hz", "--to")
    if not f_from < f_to:
        raise ValueError(f"--from must be below --to, got {args.f_from!r} and {args.f_to!r}")
    try:
        points = int(args.points)
    except ValueError:
        raise ValueError(f"--points must be a whole number, got {args.points!r}") from None
    if not 2 <= points <= MAX_POINTS:
        raise ValueError(f"--points must lie between 2 and {MAX_POINTS}, got {points}")
    wave, capture, described = shape_or_capture(args, need_freq=False)
    cond = engine_conditions(args)
    material = cond.pop("material")
    sw = sweep_frequency(material, wave, freqs=frequencies(f_from, f_to, points), include_excess=args.with_excess, **cond)
    out = sw.to_dict()
    out.update(described)
    if capture is not None:
        out["warnings"] = list(capture.warnings) + out["warnings"]
    if args.report:
        from workbench.report import condition_inputs, emit_report, file_entry, sweep_record

        inputs = condition_inputs(described, {**cond, "material": material}, f_min_hz=f_from, f_max_hz=f_to,
                                  n_points=points, excess_counted_as_eddy=args.with_excess)
        files = [file_entry(described["capture"], role="capture")] if capture is not None else None
        emit_report(sweep_record(inputs, sw, material=material, extra_warnings=capture.warnings if capture else (),
                                 files=files), args.report, to_stderr=args.json)
    if args.json:
        emit_json(out)
        return 0
    head = [("material", sw.material), ("waveform", described.get("capture") or described["shape"]),
            ("B_peak", format_quantity(sw.b_peak, "T", 4)), ("model", sw.loss_model),
            ("crossover", "none in range" if sw.crossover.freq is None else format_quantity(sw.crossover.freq, "Hz", 4))]
    print(table(head))
    cols = [("frequency", sw.freq, "Hz"), ("loss", sw.total, "W/m3"), ("hysteresis", sw.hysteresis, "W/m3"),
            ("classical", sw.classical, "W/m3"), ("excess", sw.excess, "W/m3")]
    cols = [c for c in cols if c[1] is not None]
    print("  " + "  ".join(f"{name:>14}" for name, _, _ in cols))
    for i in range(sw.freq.size):
        print("  " + "  ".join(f"{format_quantity(float(v[i]), unit, 4):>14}" for _, v, unit in cols))
    print(sw.crossover.message)
    for w in out["warnings"]:
        print(f"warning: {w}")
    print(CAUTION)
    return 0
