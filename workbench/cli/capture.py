"""``workbench capture FILE``: flux, measured loss and predicted loss from one capture.

Examples::

    workbench capture data/captures/flyback_dcm_ferrite_100k.csv --turns 12 --area 52mm2 \\
        --material mnzn-power-ferrite
    workbench capture bench.csv --turns 100 --sense-turns 20 --area 1e-3 --path-length 0.3 \\
        --material M270-35A --json
    workbench capture scope.csv --turns 8 --area 0.6cm2 --steinmetz 1.8 1.45 2.6

All JSON output is SI: Hz, T, W/m^3, A/m, m^3.

Safety: probing live converters exposes you to hazardous voltages and hot cores; use rated
differential probes and isolation, and follow local electrical codes and licensed practice.
"""
from __future__ import annotations

import argparse
import math

from workbench.cli.reader_options import add_reader_arguments, reader_options_from_args
from workbench.units import format_quantity, parse_checked, parse_quantity

#: One-line caution printed under every human-readable result.
CAUTION = (
    "Caution: results are estimates; verify the temperature rise by test. Converter waveforms are "
    "captured at hazardous voltages: use rated isolated probes and follow local codes and licensed practice."
)


# ---------------------------------------------------------------------------
# helpers shared by the sub-commands of this package (folder, shape)
# ---------------------------------------------------------------------------
#: options checked against the plausible range of their quantity (workbench.checks.PLAUSIBLE)
OPTION_KINDS = {
    "--turns": "turns", "--sense-turns": "turns", "--area": "area", "--volume": "volume",
    "--path-length": "path_length", "--thickness": "thickness", "--resistivity": "resistivity",
    "--temperature": "temperature", "--b-peak": "b_peak", "--freq": "freq",
}


def quantity(text, unit: str, name: str, *, positive: bool = True, warnings: list | None = None):
    """Parse an optional command-line quantity into SI (None stays None).

    Options named in ``OPTION_KINDS`` are checked against their plausible range: values
    orders of magnitude off are refused; unusual ones add a sentence to ``warnings``.
    """
    if text is None:
        return None
    if name in OPTION_KINDS:
        value, notes = parse_checked(text, OPTION_KINDS[name], name=name, unit=unit)
        if warnings is not None:
            warnings.extend(notes)
    else:
        value = parse_quantity(text, unit, name=name)
    if positive and not (math.isfinite(value) and value > 0):
        raise ValueError(f"{name}: must be positive, got {text!r}")
    return value


def add_model_options(p: argparse.ArgumentParser, *, required: bool = False) -> None:
    """--material NAME | --steinmetz K ALPHA BETA, with the lamination overrides."""
    g = p.add_argument_group("loss model")
    m = g.add_mutually_exclusive_group(required=required)
    m.add_argument("--material", metavar="NAME", help="library material (see `workbench materials`)")
    m.add_argument("--steinmetz", nargs=3, metavar=("K", "ALPHA", "BETA"),
                   help="bare Steinmetz set: P = K f^ALPHA B_peak^BETA [W/m^3, Hz, T]")
    g.add_argument("--temperature", help="core temperature, e.g. 90 [degC] (materials with temperature data)")
    g.add_argument("--thickness", help="lamination thickness override, e.g. 0.35mm")
    g.add_argument("--resistivity", help="resistivity override, e.g. 52e-8 or '52 uohm cm' [ohm m]")
    g.add_argument("--no-skin", action="store_true", help="classical eddy part without the skin effect")
    g.add_argument("--h-dc", metavar="A_PER_M", help="DC bias field strength, e.g. 60 [A/m] (a capture with a current "
                                                     "channel and --path-length brings its own N I_dc / l_e)")


def model_settings(args) -> dict:
    """Material / Steinmetz set and overrides from parsed arguments, as analysis keywords."""
    from workbench.analysis.capture import SteinmetzSet

    out = {
        "temperature": quantity(args.temperature, "degC", "--temperature", positive=False),
        "thickness": quantity(args.thickness, "m", "--thickness"),
        "resistivity": quantity(args.resistivity, "ohm m", "--resistivity"),
        "skin_effect": not args.no_skin,
        "h_dc": quantity(getattr(args, "h_dc", None), "A/m", "--h-dc", positive=False),
        "material": None,
        "steinmetz": None,
    }
    if args.material:
        from workbench.materials import get_material

        out["material"] = get_material(args.material)
    elif args.steinmetz:
        k, a, b = (parse_quantity(x, "", name=f"--steinmetz {n}") for x, n in zip(args.steinmetz, ("K", "ALPHA", "BETA")))
        out["steinmetz"] = SteinmetzSet(k, a, b)
    return out


def add_capture_options(p: argparse.ArgumentParser, *, required: bool = True) -> None:
    """Geometry and reader options of a capture (``required=False`` where a capture is one choice of several)."""
    g = p.add_argument_group("core and windings")
    g.add_argument("--turns", required=required, help="turns of the measured winding; primary turns N1 of a two-winding capture")
    g.add_argument("--area", required=required, help="effective core area A_e, e.g. 52mm2 or 5.2e-5 [m^2]")
    g.add_argument("--volume", help="effective core volume V_e, e.g. 5.6cm3 [m^3] (default A_e * l_e)")
    g.add_argument("--path-length", help="effective magnetic path length l_e, e.g. 107mm [m]")
    g.add_argument("--sense-turns", help="turns N2 of the sense winding: the voltage channel is the sense winding's "
                                         "and a current channel must exist (two-winding method)")
    g.add_argument("--winding-resistance", help="resistance R of the winding of a single-winding V-I capture, e.g. "
                                                "0.8 or 800m [ohm]: R i is taken off the voltage and I_rms^2 R off the loss")
    g.add_argument("--deskew", help="delay of the current probe against the voltage probe, e.g. 3ns [s]: the current "
                                    "is shifted back by it before the loss integral")
    add_reader_arguments(p)


def capture_settings(args) -> dict:
    """Geometry keywords of :func:`workbench.analysis.capture.analyse_record` from arguments."""
    return {
        "turns": quantity(args.turns, "", "--turns"),
        "area": quantity(args.area, "m2", "--area"),
        "volume": quantity(args.volume, "m3", "--volume"),
        "path_length": quantity(args.path_length, "m", "--path-length"),
        "sense_turns": quantity(args.sense_turns, "", "--sense-turns"),
        "winding_resistance": quantity(getattr(args, "winding_resistance", None), "ohm", "--winding-resistance",
                                       positive=False),
        "deskew": quantity(getattr(args, "deskew", None), "s", "--deskew", positive=False),
    }


def reader_options(args) -> dict:
    """Keyword arguments of :func:`workbench.capture.read_capture` from arguments."""
    return reader_options_from_args(args)


def _fmt(value, unit: str, digits: int = 4) -> str:
    if value is None:
        return "-"
    return format_quantity(value, unit, digits)


def table(rows) -> str:
    """Two-column text table of (label, value) rows."""
    width = max(len(label) for label, _ in rows)
    return "\n".join(f"  {label:<{width}}  {value}" for label, value in rows)


def render(result) -> str:
    """Human-readable report of a :class:`CaptureAnalysis`."""
    rows = [
        ("capture", result.source),
        ("kind", result.kind),
        ("frequency", _fmt(result.freq, "Hz", 6)),
        ("periods averaged", f"{result.periods_used} of {result.periods_in_record:.2f} in the record"),
        ("period-to-period spread", f"{100 * result.spread:.2f} % of peak-to-peak"),
        ("flux peak-to-peak", _fmt(result.flux_pp, "T")),
        ("B_peak", _fmt(result.b_peak, "T")),
        ("waveform class", result.waveform_class),
        ("duty (rising flux)", f"{result.duty:.3f}"),
        ("noise left on B", _fmt(result.noise, "T", 2)),
        ("reversal threshold", _fmt(result.threshold, "T", 2)),
    ]
    if result.model_name:
        rows.append(("model", result.model_name + (f" ({result.model.total_model})" if result.model else " (iGSE)")))
    rows.append(("model loss", _fmt(result.model_loss, "W/m3")))
    if result.loss_w is not None:
        rows.append(("  in the core", _fmt(result.loss_w, "W")))
    if result.model is not None and result.model.n_minor_loops:
        rows.append(("  from minor loops", f"{100 * result.model.minor_loop_share:.1f} % "
                                           f"({result.model.n_minor_loops} loop{'' if result.model.n_minor_loops == 1 else 's'})"))
    if result.hysteresis is not None:
        separation = result.hysteresis + result.classical + result.excess
        rows += [("separation model", _fmt(separation, "W/m3")),
                 ("  hysteresis", _fmt(result.hysteresis, "W/m3")), ("  classical eddy", _fmt(result.classical, "W/m3")),
                 ("  excess", _fmt(result.excess, "W/m3"))]
    elif result.classical is not None:
        rows.append(("classical eddy part", _fmt(result.classical, "W/m3")))
    if result.measured_method is not None:
        rows.append((f"measured loss ({result.measured_method})", _fmt(result.measured_loss, "W/m3")))
        if result.measured_loss_w is not None:
            rows.append(("  in the core", _fmt(result.measured_loss_w, "W")))
        if result.ratio is not None:
            rows.append(("measured / model", f"{result.ratio:.3f}"))
        if result.skew_sensitivity is not None:
            rows.append(("change per 1 ns probe skew", f"{100 * result.skew_sensitivity:+.3f} %"))
        if result.h is not None:
            rows.append(("H peak (half peak-to-peak)", _fmt(0.5 * float(result.h.max() - result.h.min()), "A/m")))
    text = [table(rows)]
    for w in result.warnings:
        text.append(f"warning: {w}")
    for n in result.notes:
        text.append(f"note: {n}")
    text.append(CAUTION)
    return "\n".join(text)


# ---------------------------------------------------------------------------
def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``capture`` sub-command."""
    p = subparsers.add_parser(
        "capture",
        help="analyse one captured waveform file: flux, measured and predicted loss",
        description=(
            "Analyse one capture (CSV or .npz): flux density b or flux, a winding voltage v, or a "
            "two-winding record (current i and sense voltage v_sense, or v with --sense-turns), or the "
            "voltage and current of one winding (single-winding V-I). Finds the period, averages whole "
            "periods, removes noise, and reports the flux, the model loss and, with a current, the "
            "measured loss; watts in the core with --volume or --path-length. " + CAUTION
        ),
    )
    p.add_argument("file", metavar="FILE", help="capture file (CSV or .npz)")
    add_capture_options(p)
    add_model_options(p)
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    p.add_argument("--report", metavar="FILE.html", help="also write an HTML report (opens offline) with JSON and "
                   "CSV beside it; an existing name gets a new suffix")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    """Run ``workbench capture``; returns the exit status."""
    from pathlib import Path

    from workbench.analysis.capture import analyse_file
    from workbench.cli.main import emit_json

    path = Path(args.file)
    if not path.is_file():
        raise ValueError(f"{args.file}: no such file")
    settings = {**capture_settings(args), **model_settings(args)}
    result = analyse_file(path, reader_options=reader_options(args), **settings)
    if args.report:
        from workbench.report import capture_record, emit_report

        emit_report(capture_record(result, path, material=settings.get("material")), args.report, to_stderr=args.json)
    if args.json:
        emit_json(result.to_dict())
    else:
        print(render(result))
    return 0
