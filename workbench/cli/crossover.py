"""``workbench crossover``: frequency at which eddy-current loss overtakes hysteresis loss.

Examples::

    workbench crossover --material M270-35A --b-peak 1.5T
    workbench crossover --material M270-35A --b-peak 1.5T --thickness 0.2mm --with-excess --json
    workbench crossover --material nanocrystalline --b-peak 0.5T --no-skin

JSON output is SI (Hz, T, m, ohm m).
"""
from __future__ import annotations

import argparse

from workbench.cli.capture import quantity, table
from workbench.units import format_quantity


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``crossover`` sub-command."""
    from workbench.analysis.shapes import SHAPES

    p = subparsers.add_parser(
        "crossover",
        help="frequency at which eddy-current loss overtakes hysteresis loss for a material",
        description=(
            "Frequency at which the classical eddy-current loss (optionally with the excess part) "
            "equals the hysteresis loss, for one flux level and waveform shape."
        ),
    )
    p.add_argument("--material", required=True, metavar="NAME", help="library material")
    p.add_argument("--b-peak", required=True, help="peak flux density, e.g. 1.5T")
    p.add_argument("--shape", choices=SHAPES, default="sine", help="waveform shape (default sine)")
    p.add_argument("--duty", default="0.5", help="duty cycle of the shape (default 0.5)")
    p.add_argument("--thickness", help="lamination thickness override, e.g. 0.35mm")
    p.add_argument("--resistivity", help="resistivity override [ohm m]")
    p.add_argument("--temperature", help="core temperature [degC]")
    p.add_argument("--no-skin", action="store_true", help="classical part without the skin effect (closed form)")
    p.add_argument("--with-excess", action="store_true", help="count the excess part as eddy-current loss")
    p.add_argument("--f-min", default="1", help="lower end of the search, e.g. 1 [Hz] (default 1 Hz)")
    p.add_argument("--f-max", default="100M", help="upper end of the search (default 100 MHz)")
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    """Run ``workbench crossover``; returns the exit status."""
    from workbench.analysis.sweep import crossover_frequency
    from workbench.cli.main import emit_json
    from workbench.materials import get_material

    material = get_material(args.material)
    b_peak = quantity(args.b_peak, "T", "--b-peak")
    duty = quantity(args.duty, "", "--duty")
    thickness = quantity(args.thickness, "m", "--thickness")
    resistivity = quantity(args.resistivity, "ohm m", "--resistivity")
    temperature = quantity(args.temperature, "degC", "--temperature", positive=False)
    f_range = (quantity(args.f_min, "Hz", "--f-min"), quantity(args.f_max, "Hz", "--f-max"))
    res = crossover_frequency(material, b_peak=b_peak, shape=args.shape, duty=duty, thickness=thickness,
                              resistivity=resistivity, skin_effect=not args.no_skin,
                              include_excess=args.with_excess, temperature=temperature, f_range=f_range)
    out = {
        "material": material.name, "crossover_hz": res.freq, "method": res.method, "message": res.message,
        "b_peak_t": b_peak, "shape": args.shape, "duty": duty,
        "thickness_m": material.thickness if thickness is None else thickness,
        "resistivity_ohm_m": material.resistivity if resistivity is None else resistivity,
        "skin_effect": not args.no_skin, "eddy_includes_excess": res.eddy_includes_excess,
        "hysteresis_from": res.hysteresis_from, "f_range_hz": list(res.f_range),
    }
    if args.json:
        emit_json(out)
        return 0
    print(table([
        ("material", material.name),
        ("B_peak", format_quantity(b_peak, "T", 4)),
        ("thickness", format_quantity(out["thickness_m"], "m", 3)),
        ("resistivity", format_quantity(out["resistivity_ohm_m"], "ohm m", 3)),
        ("crossover frequency", "none in range" if res.freq is None else format_quantity(res.freq, "Hz", 4)),
        ("method", res.method),
    ]))
    print(res.message)
    return 0
