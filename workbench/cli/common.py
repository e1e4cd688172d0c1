"""Options shared by the loss sub-commands: a waveform given by shape or by capture, and the engine conditions.

``shape``, ``sweep``, ``compare``, ``crossover`` and ``thermal`` describe the flux the
same way (``--shape/--duty/--b-peak`` or ``--capture FILE`` with the capture options)
and pass the same conditions to the one loss engine.
"""
from __future__ import annotations

import argparse

from workbench.cli.capture import (
    add_capture_options,
    capture_settings,
    model_settings,
    quantity,
    reader_options,
)
from workbench.shapes import SHAPES, ShapeSpec


def add_shape_options(p: argparse.ArgumentParser, *, freq: bool = True, capture: bool = True, b_peak_required=None) -> None:
    """--shape/--duty/--b-peak[/--freq], and optionally --capture FILE with the capture options."""
    g = p.add_argument_group("waveform")
    g.add_argument("--shape", choices=SHAPES, help="waveform shape (default sine)")
    g.add_argument("--duty", help="duty cycle, 0-1 or e.g. 30%% (default 0.5): rising fraction of a triangle, "
                                  "fraction with voltage applied of a trapezoid")
    g.add_argument("--b-peak", required=bool(b_peak_required), help="peak flux density, e.g. 100mT")
    if freq:
        g.add_argument("--freq", help="frequency, e.g. 100k (with --shape)")
    if capture:
        g.add_argument("--capture", metavar="FILE", help="use the averaged period of a capture instead of a shape")
        add_capture_options(p, required=False)


def shape_or_capture(args, *, need_freq: bool = True):
    """The waveform the arguments describe: a ShapeSpec or a captured period (with the capture analysis).

    Returns
    -------
    (waveform, capture_analysis_or_None, description dict)
    """
    capture = getattr(args, "capture", None)
    if capture:
        for option in ("shape", "duty", "b_peak"):
            if getattr(args, option, None) is not None:
                raise ValueError(f"--{option.replace('_', '-')} describes a shape: give it or --capture, not both")
        if getattr(args, "freq", None) is not None:
            raise ValueError("--freq: a capture has its own frequency; give --freq with --shape only")
        from pathlib import Path

        from workbench.analysis.capture import analyse_file

        geometry = capture_settings(args)
        for option in ("turns", "area"):
            if geometry.get(option) is None:
                raise ValueError(f"--capture needs --{option}")
        # the capture is analysed with the same model settings, so its warnings are about this question
        result = analyse_file(Path(capture), reader_options=reader_options(args), **geometry, **model_settings(args))
        return result.waveform, result, {"capture": str(capture), "frequency_hz": result.freq, "b_peak_t": result.b_peak}
    shape = args.shape or "sine"
    if args.b_peak is None:
        raise ValueError("--b-peak is needed with a shape (or give --capture FILE)")
    b_peak = quantity(args.b_peak, "T", "--b-peak")
    duty = quantity(args.duty if args.duty is not None else "0.5", "", "--duty")
    freq = 1.0
    if need_freq:
        if getattr(args, "freq", None) is None:
            raise ValueError("--freq is needed with a shape")
        freq = quantity(args.freq, "Hz", "--freq")
    spec = ShapeSpec(shape, b_peak, freq, duty)
    spec.waveform()  # checks duty and flux with the constructors' messages
    return spec, None, {"shape": shape, "duty": None if shape == "sine" else duty, "b_peak_t": b_peak}


def engine_conditions(args) -> dict:
    """Material (or bare set) and the engine's condition keywords from the model options."""
    s = model_settings(args)
    material = s["material"] if s["material"] is not None else s["steinmetz"]
    if material is None:
        raise ValueError("give --material NAME or --steinmetz K ALPHA BETA")
    return {"material": material, "temperature": s["temperature"], "thickness": s["thickness"],
            "resistivity": s["resistivity"], "skin_effect": s["skin_effect"], "h_dc": s["h_dc"]}
