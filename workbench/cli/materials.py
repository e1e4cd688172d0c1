"""``workbench materials``: list the material library, or show one material with provenance.

Examples::

    workbench materials
    workbench materials show M270-35A
    workbench materials show mnzn-power-ferrite --json

JSON output is SI: kg/m^3, ohm m, T, m; Steinmetz k in W/m^3 with f in Hz and B_peak in T.
"""
from __future__ import annotations

import argparse

from workbench.units import format_quantity


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``materials`` sub-command."""
    p = subparsers.add_parser(
        "materials",
        help="list the material library, or show one material with the source of every value",
        description="List the bundled and user material libraries, or show one material with provenance.",
    )
    p.add_argument("action", nargs="?", choices=("list", "show"), default="list", help="list (default) or show NAME")
    p.add_argument("name", nargs="?", metavar="NAME", help="material to show")
    p.add_argument("--json", action="store_true", help="print JSON (SI units)")
    p.set_defaults(func=run)
    return p


def material_dict(m) -> dict:
    """All values of a material with their sources, SI units, JSON-ready."""
    st = m.steinmetz
    out = {
        "name": m.name, "family": m.family, "description": m.description, "origin": m.origin,
        "laminated": m.is_laminated, "density_kg_m3": m.density, "resistivity_ohm_m": m.resistivity,
        "b_sat_t": m.b_sat, "rel_permeability": m.rel_permeability, "thickness_m": m.thickness,
        "steinmetz": {"k": st.k, "alpha": st.alpha, "beta": st.beta, "freq_range_hz": list(st.freq_range),
                      "b_range_t": list(st.b_range)},
        "sources": dict(m.sources),
    }
    if st.temperature is not None:
        t = st.temperature
        out["steinmetz"]["temperature"] = {"ct0": t.ct0, "ct1": t.ct1, "ct2": t.ct2}
    if m.separation is not None:
        s = m.separation
        out["separation"] = {"k_hyst": s.k_hyst, "beta_hyst": s.beta_hyst, "k_excess": s.k_excess}
    if m.relaxation is not None:
        r = m.relaxation
        out["relaxation"] = {"k_r": r.k_r, "alpha_r": r.alpha_r, "beta_r": r.beta_r, "tau_s": r.tau, "q_r": r.q_r}
    return out


def _show(m) -> str:
    st = m.steinmetz
    src = m.sources
    rows = [
        ("density", f"{m.density:.0f} kg/m3", src.get("density")),
        ("resistivity", format_quantity(m.resistivity, "ohm m", 3), src.get("resistivity")),
        ("saturation flux density", format_quantity(m.b_sat, "T", 3), src.get("b_sat")),
        ("relative permeability", f"{m.rel_permeability:g}", src.get("rel_permeability")),
        ("thickness", format_quantity(m.thickness, "m", 3), src.get("thickness")),
        ("Steinmetz k [W/m3, Hz, T]", f"{st.k:.6g}", src.get("steinmetz.k")),
        ("Steinmetz alpha", f"{st.alpha:.4g}", src.get("steinmetz.alpha")),
        ("Steinmetz beta", f"{st.beta:.4g}", src.get("steinmetz.beta")),
        ("valid frequencies", f"{format_quantity(st.freq_range[0], 'Hz')} to {format_quantity(st.freq_range[1], 'Hz')}",
         src.get("steinmetz.freq_range")),
        ("valid B_peak", f"{format_quantity(st.b_range[0], 'T')} to {format_quantity(st.b_range[1], 'T')}",
         src.get("steinmetz.b_range")),
    ]
    if st.temperature is not None:
        for f in ("ct0", "ct1", "ct2"):
            rows.append((f"temperature {f}", f"{getattr(st.temperature, f):.6g}", src.get(f"steinmetz.temperature.{f}")))
    if m.separation is not None:
        for f, label in (("k_hyst", "hysteresis k_hyst"), ("beta_hyst", "hysteresis beta"), ("k_excess", "excess k_excess")):
            rows.append((label, f"{getattr(m.separation, f):.6g}", src.get(f"separation.{f}")))
    if m.relaxation is not None:
        for f in ("k_r", "alpha_r", "beta_r", "tau", "q_r"):
            rows.append((f"relaxation {f}", f"{getattr(m.relaxation, f):.6g}", src.get(f"relaxation.{f}")))
    width = max(len(r[0]) for r in rows)
    vwidth = max(len(r[1]) for r in rows)
    lines = [f"{m.name} ({m.family}, {m.origin})", f"  {m.description}", ""]
    lines += [f"  {label:<{width}}  {value:<{vwidth}}  source: {source}" for label, value, source in rows]
    lines.append("")
    lines.append("Generic class values for estimates; use the supplier's data or your own measurements for a design.")
    return "\n".join(lines)


def run(args) -> int:
    """Run ``workbench materials``; returns the exit status."""
    from workbench.cli.main import emit_json
    from workbench.materials import get_material, load_materials

    if args.action == "show":
        if not args.name:
            raise ValueError("materials show: give the material NAME (see `workbench materials`)")
        m = get_material(args.name)
        if args.json:
            emit_json(material_dict(m))
        else:
            print(_show(m))
        return 0
    if args.name:
        raise ValueError(f"materials: unexpected argument {args.name!r} (did you mean `materials show {args.name}`?)")
    mats = load_materials()
    if args.json:
        emit_json([{"name": m.name, "family": m.family, "origin": m.origin,
                    "freq_range_hz": list(m.steinmetz.freq_range), "b_range_t": list(m.steinmetz.b_range),
                    "has_separation": m.separation is not None} for m in mats.values()])
        return 0
    nw = max(len(n) for n in mats)
    fw = max(len(m.family) for m in mats.values())
    print(f"  {'name':<{nw}}  {'family':<{fw}}  valid range (Steinmetz)")
    for m in mats.values():
        st = m.steinmetz
        rng = (f"{format_quantity(st.freq_range[0], 'Hz')}-{format_quantity(st.freq_range[1], 'Hz')}, "
               f"{format_quantity(st.b_range[0], 'T')}-{format_quantity(st.b_range[1], 'T')}")
        extra = "" if m.origin == "bundled" else f"  [{m.origin}]"
        print(f"  {m.name:<{nw}}  {m.family:<{fw}}  {rng}{extra}")
    print("Show one with its sources: workbench materials show NAME")
    return 0
