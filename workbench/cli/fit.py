"""``workbench fit TABLE``: fit loss-model parameters to a measured loss table.

Examples::

    workbench fit data/demo_loss_table.csv                       # Steinmetz, bands if needed
    workbench fit losses.csv --model steinmetz --json
    workbench fit sheet.csv --model separation --thickness 0.35mm --resistivity 52e-8
    workbench fit sheet.csv --model two-frequency --b-peak 1.5T --json
    workbench fit losses.csv --save-as "bench ferrite A" --like N-MnZn-generic

All JSON output is SI: k in W/m^3 (f in Hz, B_peak in T), energies in J/m^3, frequencies
in Hz, flux densities in T, resistivity in ohm m.
"""
from __future__ import annotations

import argparse
import math
import sys

from workbench.units import format_quantity, parse_checked, parse_quantity

MODELS = ("steinmetz", "separation", "two-frequency")


def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``fit`` sub-command."""
    p = subparsers.add_parser(
        "fit",
        help="fit Steinmetz, loss-separation or two-frequency parameters to a loss table",
        description=(
            "Fit loss-model parameters to a measured loss table (CSV with frequency, flux and "
            "loss density columns; units in the header, e.g. 'f [kHz], B_peak (mT), P (mW/cm3)'). "
            "Fitted sets are estimates for the fitted range only."
        ),
    )
    p.add_argument("table", metavar="TABLE", help="loss table (CSV)")
    p.add_argument("--model", choices=MODELS, default="steinmetz", help="what to fit (default steinmetz)")
    p.add_argument("--json", action="store_true", help="print one JSON document (SI units)")
    g = p.add_argument_group("reading the table")
    g.add_argument("--freq-unit", help="unit of the frequency column when the header has none, e.g. kHz")
    g.add_argument("--flux-unit", help="unit of the flux column when the header has none, e.g. mT")
    g.add_argument("--flux", choices=("peak", "pp"), help="the flux column is peak or peak-to-peak")
    g.add_argument("--loss-unit", help="unit of the loss column when the header has none, e.g. kW/m3 or W/kg")
    g.add_argument("--density", help="material density for W/kg tables, e.g. 7650 or '7.65 g/cm3' [kg/m^3]")
    g.add_argument("--column", action="append", default=[], metavar="NAME=HEADER",
                   help="read glossary column NAME (freq, b_peak, flux_pp, loss, temperature, shape, duty) "
                        "from the header HEADER; repeatable")
    g.add_argument("--temperature", help="use only the rows at this temperature, e.g. 100 [degC]")
    s = p.add_argument_group("steinmetz")
    s.add_argument("--tolerance", default="25%",
                   help="largest relative error one set may leave before the table is split into "
                        "frequency bands (default 25%%)")
    s.add_argument("--no-split", action="store_true", help="never split into frequency bands")
    s.add_argument("--objective", choices=("log", "relative"), default="log",
                   help="residual minimised: ln(P_fit/P) (default) or P_fit/P - 1")
    s.add_argument("--fix-alpha", help="hold alpha at this value (tables at one frequency)")
    s.add_argument("--fix-beta", help="hold beta at this value (tables at one flux level)")
    s.add_argument("--reference-temperature", help="temperature where the temperature factor is 1 [degC]")
    e = p.add_argument_group("separation")
    e.add_argument("--thickness", help="lamination thickness, e.g. 0.35mm")
    e.add_argument("--resistivity", help="resistivity, e.g. 52e-8 or '52 uohm cm' [ohm m]")
    e.add_argument("--fit-resistivity", action="store_true",
                   help="fit an effective resistivity instead of holding it fixed")
    t = p.add_argument_group("two-frequency")
    t.add_argument("--b-peak", help="flux level to report, e.g. 1.5T or '100 mT' (default every level)")
    m = p.add_argument_group("saving a user material")
    m.add_argument("--save-as", metavar="NAME", help="store the fitted Steinmetz set as user material NAME")
    m.add_argument("--like", metavar="BASE", help="take family, density, resistivity, b_sat, permeability "
                                                 "and thickness from material BASE")
    m.add_argument("--family", help="material family when there is no --like")
    m.add_argument("--b-sat", help="saturation flux density, e.g. 0.45T")
    m.add_argument("--rel-permeability", help="relative permeability [-]")
    m.add_argument("--band", type=int, help="which frequency band to save when the table was split (1 = lowest)")
    m.add_argument("--library", help="user library file (default the user library)")
    m.add_argument("--overwrite", action="store_true", help="replace a user material of the same name")
    p.set_defaults(func=run)
    return p


# --------------------------------------------------------------------------------------------
#: options checked against the plausible range of their quantity (workbench.checks.PLAUSIBLE)
_KINDS = {"thickness": "thickness", "resistivity": "resistivity", "temperature": "temperature",
          "reference_temperature": "temperature", "density": "density", "b_peak": "b_peak", "b_sat": "b_peak"}


def _opt(args, name, unit, label=None):
    value = getattr(args, name)
    if value is None:
        return None
    label = label or "--" + name.replace("_", "-")
    if name in _KINDS:
        x, warnings = parse_checked(value, _KINDS[name], name=label, unit=unit)
        notes = args.__dict__.setdefault("input_warnings", [])
        notes.extend(w for w in warnings if w not in notes)
        return x
    return parse_quantity(value, unit, name=label)


def _fraction(text: str, name: str) -> float:
    value = parse_quantity(text, "", name=name)
    if not (math.isfinite(value) and value > 0):
        raise ValueError(f"{name}: must be a positive fraction, got {text!r}")
    return value


def _columns(items) -> dict:
    out = {}
    for item in items:
        key, sep, header = item.partition("=")
        if not sep or not key.strip() or not header.strip():
            raise ValueError(f"--column: expected NAME=HEADER, got {item!r}")
        out[key.strip()] = header.strip()
    return out


def _read(args):
    from workbench.analysis.loss_table import read_loss_table

    table = read_loss_table(
        args.table, columns=_columns(args.column) or None, freq_unit=args.freq_unit,
        flux_unit=args.flux_unit, flux_kind=args.flux, loss_unit=args.loss_unit,
        density=_opt(args, "density", "kg/m3"),
    )
    temp = _opt(args, "temperature", "degC")
    if temp is not None:
        table = table.at_temperature(temp)
    return table


def _ci(pair, unit="", digits=4):
    lo, hi = pair
    if lo is None or hi is None or not (math.isfinite(lo) and math.isfinite(hi)):
        return "(no interval)"
    if unit:
        return f"[{format_quantity(lo, unit, digits)}, {format_quantity(hi, unit, digits)}]"
    return f"[{lo:.4g}, {hi:.4g}]"


def _steinmetz_text(fit, indent="  ") -> list[str]:
    lines = [
        f"{indent}k     = {fit.k:.5g}  95% {_ci(fit.k_ci95)}   [W/m^3, f in Hz, B_peak in T]",
        f"{indent}alpha = {fit.alpha:.4f}  95% {_ci(fit.alpha_ci95)}",
        f"{indent}beta  = {fit.beta:.4f}  95% {_ci(fit.beta_ci95)}",
    ]
    if fit.temperature is not None:
        tc = fit.temperature
        lines.append(f"{indent}temperature factor ct0 - ct1 T + ct2 T^2 = 1 at {fit.reference_temperature:g} degC:")
        lines.append(f"{indent}  ct0 = {tc.ct0:.5g}  ct1 = {tc.ct1:.5g} 1/degC  ct2 = {tc.ct2:.5g} 1/degC^2")
    lines.append(f"{indent}relative error: rms {fit.rms_rel_error:.1%}, worst {fit.max_rel_error:.1%}"
                 f"  ({fit.n_points} points, {fit.n_nonsine} through the iGSE)")
    lines.append(f"{indent}valid for f {format_quantity(fit.freq_range[0], 'Hz')} .. "
                 f"{format_quantity(fit.freq_range[1], 'Hz')}, B_peak {format_quantity(fit.b_range[0], 'T')} .. "
                 f"{format_quantity(fit.b_range[1], 'T')}; outside this range it is an extrapolation")
    lines += [f"{indent}note: {n}" for n in fit.notes]
    return lines


def _run_steinmetz(args, table):
    from workbench.analysis.fitting import fit_steinmetz, fit_steinmetz_bands

    fixed = {}
    for name in ("alpha", "beta"):
        v = _opt(args, f"fix_{name}", "")
        if v is not None:
            fixed[name] = v
    kwargs = dict(fixed=fixed or None, objective=args.objective,
                  reference_temperature=_opt(args, "reference_temperature", "degC"))
    whole = fit_steinmetz(table, **kwargs)
    bands = None
    if not args.no_split:
        tol = _fraction(args.tolerance, "--tolerance")
        bands = fit_steinmetz_bands(table, tolerance=tol, **kwargs)
    payload = whole.to_dict()
    if bands is not None:
        payload["split"] = bands.split
        payload["bands"] = bands.to_dict()
        payload["note"] = bands.message
    text = [f"Steinmetz fit to {table.source}:"] + _steinmetz_text(whole)
    if bands is not None:
        text.append(bands.message + ".")
        if bands.split:
            for i, b in enumerate(bands.bands, 1):
                text.append(f"band {i}: {format_quantity(b.freq_range[0], 'Hz')} .. "
                            f"{format_quantity(b.freq_range[1], 'Hz')}")
                text += _steinmetz_text(b, indent="    ")
    return whole, bands, payload, text


def _run_separation(args, table):
    from workbench.analysis.fitting import fit_separation

    if args.thickness is None:
        raise ValueError("--thickness is required for --model separation (e.g. 0.35mm)")
    thickness = _opt(args, "thickness", "m")
    rho = _opt(args, "resistivity", "ohm m")
    if rho is None and not args.fit_resistivity:
        raise ValueError("--resistivity is required for --model separation (e.g. 52e-8), "
                         "or use --fit-resistivity")
    fit = fit_separation(table, thickness=thickness, resistivity=rho, fit_resistivity=args.fit_resistivity)
    text = [
        f"Loss separation fitted to {table.source} (thickness {format_quantity(thickness, 'm')}):",
        f"  k_hyst    = {fit.k_hyst:.5g}  95% {_ci(fit.k_hyst_ci95)}   [J/m^3 / T^beta_hyst]",
        f"  beta_hyst = {fit.beta_hyst:.4f}  95% {_ci(fit.beta_hyst_ci95)}",
        f"  k_excess  = {fit.k_excess:.5g}  95% {_ci(fit.k_excess_ci95)}   [W/m^3 / (T/s)^1.5]",
        f"  resistivity = {fit.resistivity:.4g} ohm m"
        + (f" (effective, fitted)  95% {_ci(fit.resistivity_ci95)}" if fit.resistivity_fitted else " (given)"),
        f"  relative error: rms {fit.rms_rel_error:.1%}, worst {fit.max_rel_error:.1%} ({fit.n_points} points)",
    ] + [f"  note: {n}" for n in fit.notes]
    return fit, fit.to_dict(), text


def _run_two_frequency(args, table):
    from workbench.analysis.fitting import fit_two_frequency

    fit = fit_two_frequency(table, b_peak=_opt(args, "b_peak", "T"))
    text = [f"Two-frequency method on {table.source} (energy per cycle W = P/f = W_h + s f):"]
    for i, lv in enumerate(fit.levels):
        mark = "*" if i == fit.selected else " "
        cross = format_quantity(lv.crossover_hz, "Hz") if math.isfinite(lv.crossover_hz) else lv.note
        text.append(
            f" {mark} B_peak {format_quantity(lv.b_peak, 'T')}: W_h = {lv.hysteresis_energy:.4g} J/m^3 "
            f"{_ci(lv.hysteresis_energy_ci95)}, s = {lv.eddy_slope:.4g} J/m^3/Hz {_ci(lv.eddy_slope_ci95)}, "
            f"crossover {cross}  ({lv.n_freqs} frequencies)")
    if len(fit.levels) > 1:
        text.append("  * the level reported at the top of the JSON output")
    if fit.skipped:
        text.append("  skipped (one frequency only): " + ", ".join(format_quantity(b, "T") for b in fit.skipped))
    if fit.n_nonsine_ignored:
        text.append(f"  {fit.n_nonsine_ignored} non-sine rows ignored (the method is for sine flux)")
    return fit, fit.to_dict(), text


def _save(args, table, whole, bands, separation):
    from workbench.analysis.fitting import save_fitted_material
    from workbench.materials import get_material

    fit = whole
    if bands is not None and bands.split:
        if args.band is None:
            raise ValueError(f"the table was split into {len(bands.bands)} frequency bands; choose the band to "
                             f"save with --band 1..{len(bands.bands)} (or use --no-split)")
        if not 1 <= args.band <= len(bands.bands):
            raise ValueError(f"--band must be 1..{len(bands.bands)}, got {args.band}")
        fit = bands.bands[args.band - 1]
    elif args.band not in (None, 1):
        raise ValueError(f"--band {args.band}: the table was not split into bands")
    base = get_material(args.like) if args.like else None
    props = {
        "density": _opt(args, "density", "kg/m3"),
        "resistivity": _opt(args, "resistivity", "ohm m"),
        "thickness": _opt(args, "thickness", "m"),
        "b_sat": _opt(args, "b_sat", "T"),
        "rel_permeability": _opt(args, "rel_permeability", ""),
    }
    return save_fitted_material(args.save_as, fit, base=base, family=args.family, separation=separation,
                                path=args.library, overwrite=args.overwrite, **props)


def run(args) -> int:
    """Run ``workbench fit``; returns the exit status."""
    from workbench.cli.main import emit_json

    if args.save_as is not None and args.model == "two-frequency":
        raise ValueError("--save-as stores a Steinmetz set: use it with --model steinmetz or separation")
    table = _read(args)
    whole = bands = separation = None
    if args.model == "steinmetz":
        whole, bands, payload, text = _run_steinmetz(args, table)
    elif args.model == "separation":
        separation, payload, text = _run_separation(args, table)
    else:
        _, payload, text = _run_two_frequency(args, table)
    if args.save_as is not None:
        if whole is None:  # separation: the material also needs a Steinmetz set
            from workbench.analysis.fitting import fit_steinmetz

            whole = fit_steinmetz(table)
        path = _save(args, table, whole, bands, separation)
        payload["saved_as"] = args.save_as
        payload["library"] = str(path)
        text.append(f"saved as user material {args.save_as!r} in {path}")
    notes = getattr(args, "input_warnings", [])
    if notes:
        payload["warnings"] = list(payload.get("warnings", [])) + list(notes)
        text.extend("warning: " + w for w in notes)
    if args.json:
        emit_json(payload)
    else:
        sys.stdout.write("\n".join(text) + "\n")
    return 0
