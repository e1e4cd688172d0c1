"""``workbench shape``: loss of a synthetic flux waveform (sine, triangle, trapezoid) on a material.

Examples::

    workbench shape --shape triangle --duty 0.3 --b-peak 100mT --freq 100k --material mnzn-power-ferrite
    workbench shape --shape trapezoid --duty 0.8 --b-peak 0.5T --freq 20k --material nanocrystalline --json
    workbench shape --shape sine --b-peak 1.5T --freq 50 --steinmetz 8.1 1.3 1.9

``--duty`` is the rising fraction of a triangle and the fraction of the period with voltage
applied for a trapezoid (three-level). JSON output is SI (Hz, T, W/m^3, W/kg, W).
"""
from __future__ import annotations

import argparse

from workbench.cli.capture import CAUTION, add_model_options, quantity, table
from workbench.cli.common import add_shape_options, engine_conditions, shape_or_capture
from workbench.units import format_quantity


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``shape`` sub-command."""
    p = subparsers.add_parser(
        "shape",
        help="loss of a synthetic waveform (shape, duty, B_peak, frequency) on a material",
        description="Evaluate the iGSE loss and the separation parts of a synthetic flux waveform. " + CAUTION,
    )
    add_shape_options(p, capture=False, b_peak_required=True)
    add_model_options(p, required=True)
    p.add_argument("--volume", help="core volume, e.g. 4.2cm3, for the loss in watts")
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    p.add_argument("--report", metavar="FILE.html", help="also write an HTML report (opens offline) with JSON and "
                   "CSV beside it; an existing name gets a new suffix")
    p.set_defaults(func=run)
    return p


def loss_rows(res, volume=None) -> list:
    """Table rows of a :class:`workbench.engine.LossResult` (shared with other commands)."""
    rows = [(f"loss ({res.loss_model})", format_quantity(res.total, "W/m3", 4))]
    if res.loss_w_kg is not None:
        rows.append(("loss per mass", format_quantity(res.loss_w_kg, "W/kg", 4)))
    if volume is not None:
        rows.append(("loss in the core", format_quantity(res.loss_w(volume), "W", 4)))
    if res.relaxation:
        rows.append(("  of which relaxation", format_quantity(res.relaxation, "W/m3", 4)))
    if res.n_minor_loops:
        rows.append(("  from minor loops", f"{100 * res.minor_loop_share:.1f} % ({res.n_minor_loops} "
                                            f"loop{'' if res.n_minor_loops == 1 else 's'})"))
    if res.temperature is not None:
        rows.append(("core temperature", f"{res.temperature:.4g} degC"))
    if res.hysteresis is not None:
        rows += [("separation model", format_quantity(res.separation_total, "W/m3", 4)),
                 ("  hysteresis", format_quantity(res.hysteresis, "W/m3", 4)),
                 ("  classical eddy", format_quantity(res.classical, "W/m3", 4)),
                 ("  excess", format_quantity(res.excess, "W/m3", 4))]
    elif res.classical is not None:
        rows.append(("classical eddy part", format_quantity(res.classical, "W/m3", 4)))
    return rows


def run(args) -> int:
    """Run ``workbench shape``; returns the exit status."""
    from workbench.cli.main import emit_json
    from workbench.engine import core_loss

    spec, _, described = shape_or_capture(args)
    cond = engine_conditions(args)
    volume = quantity(args.volume, "m3", "--volume")
    res = core_loss(spec, **cond)
    out = res.to_dict()
    out.update(shape=spec.shape, duty=described["duty"])
    if volume is not None:
        out.update(volume_m3=volume, loss_w=res.loss_w(volume))
    if args.report:
        from workbench.report import condition_inputs, emit_report, loss_result_record

        inputs = condition_inputs(described, cond, frequency_hz=spec.freq, volume_m3=volume)
        emit_report(loss_result_record("shape", inputs, res, material=cond["material"], volume=volume,
                                       waveform=spec.waveform()), args.report, to_stderr=args.json)
    if args.json:
        emit_json(out)
        return 0
    rows = [("material", res.material),
            ("shape", spec.shape + ("" if spec.shape == "sine" else f", duty {spec.duty:g}")),
            ("frequency", format_quantity(spec.freq, "Hz", 4)), ("B_peak", format_quantity(spec.b_peak, "T", 4))]
    print(table(rows + loss_rows(res, volume)))
    for w in res.warnings:
        print(f"warning: {w}")
    for n in res.notes:
        print(f"note: {n}")
    print(CAUTION)
    return 0
