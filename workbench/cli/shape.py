"""``workbench shape``: loss of a synthetic flux waveform (sine, triangle, trapezoid) on a material.

Examples::

    workbench shape --shape triangle --duty 0.3 --b-peak 100mT --freq 100k --material mnzn-power-ferrite
    workbench shape --shape trapezoid --duty 0.8 --b-peak 0.5T --freq 20k --material nanocrystalline --json
    workbench shape --shape sine --b-peak 1.5T --freq 50 --steinmetz 8.1 1.3 1.9

``--duty`` is the rising fraction of a triangle and the fraction of the period with voltage
applied for a trapezoid (three-level). JSON output is SI (Hz, T, W/m^3, W/kg).
"""
from __future__ import annotations

import argparse

from workbench.cli.capture import CAUTION, add_model_options, model_settings, quantity, table
from workbench.units import format_quantity


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``shape`` sub-command."""
    from workbench.analysis.shapes import SHAPES

    p = subparsers.add_parser(
        "shape",
        help="loss of a synthetic waveform (shape, duty, B_peak, frequency) on a material",
        description="Evaluate the iGSE loss and the separation parts of a synthetic flux waveform. " + CAUTION,
    )
    p.add_argument("--shape", choices=SHAPES, default="sine", help="waveform shape (default sine)")
    p.add_argument("--duty", default="0.5", help="duty cycle, 0-1 or e.g. 30%% (default 0.5)")
    p.add_argument("--b-peak", required=True, help="peak flux density, e.g. 100mT")
    p.add_argument("--freq", required=True, help="frequency, e.g. 100k")
    add_model_options(p, required=True)
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    """Run ``workbench shape``; returns the exit status."""
    from workbench.analysis.capture import predict_loss
    from workbench.analysis.shapes import make_shape
    from workbench.cli.main import emit_json

    b_peak = quantity(args.b_peak, "T", "--b-peak")
    freq = quantity(args.freq, "Hz", "--freq")
    duty = quantity(args.duty, "", "--duty")
    settings = model_settings(args)
    wave = make_shape(args.shape, b_peak=b_peak, freq=freq, duty=duty)
    bd, total, hyst, classical, excess, name, warnings, notes = predict_loss(
        wave, settings["material"], settings["steinmetz"], None, temperature=settings["temperature"],
        thickness=settings["thickness"], resistivity=settings["resistivity"], skin_effect=settings["skin_effect"])
    if bd is not None:
        out = bd.to_dict()
    else:
        out = {"material": name, "frequency_hz": wave.freq, "b_peak_t": wave.b_peak, "flux_pp_t": wave.flux_pp,
               "loss_w_m3": total, "loss_model": "iGSE", "classical_w_m3": classical,
               "warnings": warnings, "notes": notes}
    out.update(shape=args.shape, duty=duty if args.shape != "sine" else None)
    if args.json:
        emit_json(out)
        return 0
    rows = [("material", name), ("shape", args.shape + ("" if args.shape == "sine" else f", duty {duty:g}")),
            ("frequency", format_quantity(freq, "Hz", 4)), ("B_peak", format_quantity(b_peak, "T", 4)),
            (f"loss ({out['loss_model']})", format_quantity(total, "W/m3", 4))]
    if bd is not None:
        rows.append(("loss per mass", format_quantity(bd.total_w_kg, "W/kg", 4)))
    if bd is not None and bd.n_minor_loops:
        rows.append(("  from minor loops", f"{100 * bd.minor_loop_share:.1f} % ({bd.n_minor_loops} loop{'' if bd.n_minor_loops == 1 else 's'})"))
    if hyst is not None:
        rows += [("separation model", format_quantity(hyst + classical + excess, "W/m3", 4)),
                 ("  hysteresis", format_quantity(hyst, "W/m3", 4)), ("  classical eddy", format_quantity(classical, "W/m3", 4)),
                 ("  excess", format_quantity(excess, "W/m3", 4))]
    elif classical is not None:
        rows.append(("classical eddy part", format_quantity(classical, "W/m3", 4)))
    print(table(rows))
    for w in out.get("warnings", []):
        print(f"warning: {w}")
    for n in out.get("notes", []):
        print(f"note: {n}")
    print(CAUTION)
    return 0
