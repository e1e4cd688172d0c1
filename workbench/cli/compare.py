"""``workbench compare``: several materials at one waveform and frequency; optionally the flux each reaches at a loss budget.

Examples::

    workbench compare --materials mnzn-power-ferrite,nanocrystalline,fe-amorphous \\
        --shape trapezoid --duty 0.8 --b-peak 100mT --freq 50k
    workbench compare --materials M270-35A,M400-50A --b-peak 1.5T --freq 400 --loss-density 200k --json

JSON output is SI (W/m^3, W/kg, T, Hz T).
"""
from __future__ import annotations

import argparse

from workbench.cli.capture import CAUTION, quantity, table
from workbench.cli.common import add_shape_options, shape_or_capture
from workbench.units import format_quantity


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``compare`` sub-command."""
    p = subparsers.add_parser(
        "compare",
        help="compare materials at one waveform and frequency (loss, and flux at a loss budget)",
        description="Loss of several materials at one waveform, and the peak flux each reaches at a loss budget. " + CAUTION,
    )
    p.add_argument("--materials", required=True, help="comma-separated library names, e.g. M270-35A,M400-50A")
    add_shape_options(p, capture=False, b_peak_required=True)
    p.add_argument("--loss-density", help="allowed loss density, e.g. 200k [W/m^3]: reports B_peak and f*B_peak reached")
    p.add_argument("--temperature", help="core temperature [degC] (materials with temperature data)")
    p.add_argument("--h-dc", metavar="A_PER_M", help="DC bias field strength [A/m]")
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    """Run ``workbench compare``; returns the exit status."""
    from workbench.analysis.compare import compare_materials
    from workbench.cli.main import emit_json
    from workbench.materials import get_material

    names = [n.strip() for n in args.materials.split(",") if n.strip()]
    if not names:
        raise ValueError(f"--materials: give at least one material name, got {args.materials!r}")
    mats = [get_material(n) for n in names]
    spec, _, described = shape_or_capture(args)
    temperature = quantity(args.temperature, "degC", "--temperature", positive=False)
    budget = quantity(args.loss_density, "W/m3", "--loss-density")
    h_dc = quantity(args.h_dc, "A/m", "--h-dc", positive=False)
    cmp = compare_materials(mats, spec.shape, b_peak=spec.b_peak, duty=spec.duty, freqs=[spec.freq],
                            loss_density=budget if budget is not None else 1.0, temperature=temperature, h_dc=h_dc)
    rows = []
    for c in cmp.curves:
        row = {"material": c.material, "loss_w_m3": float(c.loss[0]), "loss_w_kg": float(c.loss_w_kg[0]),
               "loss_model": c.loss_model, "valid": bool(c.loss_valid[0])}
        if budget is not None:
            row.update(b_peak_t=float(c.b_usable[0]), fb_hz_t=float(c.fb[0]),
                       saturation_limited=bool(c.saturation_limited[0]))
        rows.append(row)
    out = {"frequency_hz": spec.freq, "temperature_c": temperature, "h_dc_a_m": h_dc, "loss_density_w_m3": budget, **described,
           "materials": rows, "warnings": list(cmp.warnings) + list(cmp.notes)}
    if args.json:
        emit_json(out)
        return 0
    print(table([("waveform", described["shape"] + ("" if described["duty"] is None else f", duty {described['duty']:g}")),
                 ("frequency", format_quantity(spec.freq, "Hz", 4)), ("B_peak", format_quantity(spec.b_peak, "T", 4))]))
    for r in rows:
        line = [("material", r["material"]), ("  loss", format_quantity(r["loss_w_m3"], "W/m3", 4)),
                ("  loss per mass", format_quantity(r["loss_w_kg"], "W/kg", 4))]
        if budget is not None:
            line += [("  B_peak at the budget", format_quantity(r["b_peak_t"], "T", 4)
                      + (" (saturation)" if r["saturation_limited"] else "")),
                     ("  f * B_peak", format_quantity(r["fb_hz_t"], "T/s", 4))]
        print(table(line))
    for w in out["warnings"]:
        print(f"warning: {w}")
    print(CAUTION)
    return 0
