"""``workbench thermal``: operating temperature of a core, its stability and the runaway margin.

Examples::

    workbench thermal --material mnzn-power-ferrite --shape triangle --duty 0.4 --b-peak 120mT \\
        --freq 100k --volume 5.6cm3 --rth 18 --ambient 40 --winding-loss 0.4
    workbench thermal --material mnzn-power-ferrite --capture buck.csv --turns 14 --area 52mm2 \\
        --path-length 60mm --volume 3.1cm3 --surface-area 30cm2 --ambient 55 --json

The core loss comes from the one loss engine at each temperature; the operating point is
where it (plus the winding loss) meets the heat removal, warming up from ambient. The heat
removal is a fixed thermal resistance (``--rth``) or follows from the surface area
(``--surface-area``): natural convection plus radiation, or ``--cooling handbook`` for the
empirical handbook relation. A capture with a current channel and ``--path-length`` gives
its own DC bias H_dc = N I_dc / l_e. JSON output is SI (degC, W, W/m^3, T, A/m).
"""
from __future__ import annotations

import argparse
import re

from workbench.cli.capture import CAUTION, quantity, table
from workbench.cli.common import add_shape_options, shape_or_capture
from workbench.units import format_quantity, parse_quantity


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``thermal`` sub-command."""
    p = subparsers.add_parser(
        "thermal",
        help="operating temperature of a core from its loss and cooling; stability and runaway margin",
        description=(
            "Find the core temperature where loss (core + winding) meets the heat removal, its loop "
            "gain (stable below 1), thermal runaway below the material's limit temperature, and the "
            "highest ambient and B_peak that still have a stable operating point. An estimate: verify by "
            "measurement; hot cores and thermal runaway can burn people and ignite materials. " + CAUTION
        ),
    )
    add_shape_options(p)
    g = p.add_argument_group("material")
    g.add_argument("--material", required=True, metavar="NAME", help="library material (see `workbench materials`)")
    g.add_argument("--limit-temperature", help="limit temperature, e.g. 130 [degC]: an insulation class below the "
                                               "material's own limit (default: the material's)")
    g.add_argument("--thickness", help="lamination thickness override, e.g. 0.35mm")
    g.add_argument("--resistivity", help="resistivity override, e.g. 52e-8 [ohm m]")
    g.add_argument("--no-skin", action="store_true", help="classical eddy part without the skin effect")
    t = p.add_argument_group("heat removal")
    cool = t.add_mutually_exclusive_group(required=True)
    cool.add_argument("--rth", metavar="K_PER_W", help="surface-to-ambient thermal resistance [K/W]")
    cool.add_argument("--surface-area", metavar="A_S", help="surface area in still air, e.g. 30cm2 [m^2]")
    t.add_argument("--cooling", choices=("convection", "handbook"), default=None,
                   help="with --surface-area: natural convection + radiation (default) or the handbook relation")
    t.add_argument("--height", help="with --surface-area: height for the convection relation, e.g. 25mm "
                                    "(default: edge of the cube of that area)")
    t.add_argument("--emissivity", help="with --surface-area: surface emissivity 0-1 (default 0.9)")
    t.add_argument("--ambient", required=True, help="ambient (still air) temperature [degC]")
    t.add_argument("--winding-loss", help="winding loss added to the core loss, e.g. 0.4 or 400mW [W]")
    b = p.add_argument_group("DC bias")
    bias = b.add_mutually_exclusive_group()
    bias.add_argument("--h-dc", metavar="A_PER_M", help="DC bias field strength, e.g. 40 or 1.2kA/m [A/m]")
    bias.add_argument("--i-dc", help="DC winding current [A]; with --turns and --path-length: H_dc = N I_dc / l_e")
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    # the capture is read with the shared model settings; the temperature is what this command finds
    p.set_defaults(func=run, temperature=None, steinmetz=None)
    return p


def _resistance(text):
    if text is None:
        return None
    m = re.fullmatch(r"\s*(.*?)\s*(K/W)?\s*", text)
    return quantity(m.group(1), "", "--rth")


def _capture_h_dc(result):
    """The DC bias the capture analysis found from its own current (N I_dc / l_e) [A/m], or None."""
    return None if result is None else result.h_dc


def _bias(args, capture, geometry_warnings) -> tuple[float | None, str | None]:
    """H_dc from --h-dc, --i-dc or the capture's own current, with where it came from."""
    from workbench.models.bias import dc_field_strength

    own = _capture_h_dc(capture)
    if args.h_dc is not None:
        h = quantity(args.h_dc, "A/m", "--h-dc", positive=False)
        if own is not None:
            geometry_warnings.append(f"--h-dc {h:g} A/m used in place of the capture's own DC bias ({own:.4g} A/m)")
        return h, "--h-dc"
    if args.i_dc is not None:
        for option in ("turns", "path_length"):
            if getattr(args, option, None) is None:
                raise ValueError(f"--i-dc needs --{option.replace('_', '-')} (H_dc = N I_dc / l_e)")
        h = dc_field_strength(quantity(args.turns, "", "--turns"), quantity(args.i_dc, "A", "--i-dc", positive=False),
                              quantity(args.path_length, "m", "--path-length"))
        if own is not None:
            geometry_warnings.append(f"--i-dc used in place of the capture's own DC bias ({own:.4g} A/m)")
        return h, "--i-dc with --turns and --path-length"
    if own is not None:
        return own, "the capture's current channel (mean of N i / l_e over the period)"
    if capture is not None and getattr(args, "path_length", None) is None:
        geometry_warnings.append("no DC bias used: if the capture has a current channel, give --path-length so that "
                                 "its DC component sets H_dc = N I_dc / l_e (or give --h-dc)")
    return None, None


def run(args) -> int:
    """Run ``workbench thermal``; returns the exit status."""
    from workbench.analysis.thermal import make_cooling, thermal_operating_point
    from workbench.cli.main import emit_json
    from workbench.materials import get_material

    if args.volume is None:
        raise ValueError("--volume is needed: the core volume, e.g. 5.6cm3 [m^3]")
    if args.rth is not None and (args.cooling or args.height or args.emissivity):
        raise ValueError("--cooling, --height and --emissivity describe --surface-area; they cannot be used with --rth")
    notes: list[str] = []
    volume = quantity(args.volume, "m3", "--volume", warnings=notes)
    ambient = quantity(args.ambient, "degC", "--ambient", positive=False)
    winding = quantity(args.winding_loss, "W", "--winding-loss", positive=False) if args.winding_loss else 0.0
    if winding < 0:
        raise ValueError(f"--winding-loss: must not be negative, got {args.winding_loss!r}")
    limit = quantity(args.limit_temperature, "degC", "--limit-temperature", positive=False)
    emissivity = None
    if args.emissivity is not None:
        emissivity = parse_quantity(args.emissivity, "", name="--emissivity")
    cooling = make_cooling(
        r_th=_resistance(args.rth),
        surface_area=quantity(args.surface_area, "m2", "--surface-area"),
        height=quantity(args.height, "m", "--height"), emissivity=emissivity,
        method=args.cooling or "convection")
    material = get_material(args.material)
    waveform, capture, described = shape_or_capture(args)
    h_dc, h_source = _bias(args, capture, notes)
    res = thermal_operating_point(
        waveform, material, volume=volume, ambient=ambient, cooling=cooling, winding_loss=winding, h_dc=h_dc,
        limit_temperature=limit, thickness=quantity(args.thickness, "m", "--thickness"),
        resistivity=quantity(args.resistivity, "ohm m", "--resistivity"), skin_effect=not args.no_skin)
    warnings = list(notes) + list(res.warnings)
    if capture is not None:
        # the capture's own loss figures are not used here; keep its warnings about the waveform
        own = [w for w in capture.warnings
               if not any(x in w for x in ("model loss not computed", "measured loss", "no core temperature given"))]
        warnings = own + warnings
    out = res.to_dict()
    out["warnings"] = list(dict.fromkeys(warnings))
    out["inputs"] = {**described, "material": material.name, "volume_m3": volume, "ambient_c": ambient,
                     "winding_loss_w": winding, "h_dc_a_m": h_dc, "h_dc_source": h_source,
                     "limit_temperature_c": limit, "cooling": cooling.to_dict()}
    if args.json:
        emit_json(out)
        return 0
    print(render(res, out["warnings"], h_source))
    return 0


def render(res, warnings, h_source=None) -> str:
    """Human-readable report of a :class:`workbench.analysis.thermal.ThermalResult`."""
    rows = [("material", res.material), ("frequency", format_quantity(res.frequency_hz, "Hz", 4)),
            ("B_peak", format_quantity(res.b_peak_t, "T", 4))]
    if res.h_dc_a_m is not None:
        rows.append(("DC bias H_dc", format_quantity(res.h_dc_a_m, "A/m", 4) + (f" ({h_source})" if h_source else "")))
    rows += [("ambient", f"{res.ambient_c:.4g} degC"), ("heat removal", res.cooling.describe()),
             ("limit temperature", f"{res.limit_temperature_c:.4g} degC ({res.limit_source})")]
    if res.runaway and res.temperature_c is None:
        rows.append(("operating point", "THERMAL RUNAWAY: no stable operating point below the limit"))
    else:
        rows += [("operating temperature", f"{res.temperature_c:.1f} degC"),
                 ("core loss", f"{format_quantity(res.loss_w_m3, 'W/m3', 4)}, {format_quantity(res.loss_w, 'W', 4)}"),
                 ("total dissipation", format_quantity(res.total_w, "W", 4)),
                 ("loop gain", f"{res.loop_gain:.3g} ({'stable' if res.stable else 'NOT stable: thermal runaway'})")]
    rows.append(("highest ambient", "-" if res.max_ambient_c is None else f"{res.max_ambient_c:.1f} degC"))
    rows.append(("highest B_peak here", "-" if res.max_b_peak_t is None else format_quantity(res.max_b_peak_t, "T", 4)))
    text = [table(rows)]
    text += [f"warning: {w}" for w in warnings]
    text += [f"caution: {c}" for c in res.cautions]
    return "\n".join(text)
