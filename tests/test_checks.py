"""The one check of numbers (workbench.checks) as every edge sees it: library, units, command line.

Ranges are common practice, no source (absolute zero -273.15 degC by the SI definition of the
kelvin; a winding has at least one turn; laminations are thinner than 10 mm).
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from workbench.checks import PLAUSIBLE, check_quantity, finite_number, plausibility_warnings, positive_number

REPO = Path(__file__).resolve().parents[1]
CAPTURE = REPO / "data" / "captures" / "flyback_dcm_ferrite_100k.csv"


def _cli(*argv):
    return subprocess.run([sys.executable, "-m", "workbench", *map(str, argv)], capture_output=True, text=True,
                          cwd=REPO, timeout=180)


@pytest.mark.parametrize("value", [True, False, "abc", None, [1.0], math.nan, math.inf, -math.inf, 0.0, -1.0])
def test_positive_number_refuses_what_is_not_a_positive_number(value):
    with pytest.raises(ValueError, match="turns") as info:
        positive_number(value, "turns")
    assert repr(value)[:20] in str(info.value)


def test_positive_number_accepts_numpy_scalars_and_ints():
    assert positive_number(np.float32(2.5), "x") == 2.5
    assert positive_number(3, "x") == 3.0


def test_finite_number_limits():
    assert finite_number(-40, "temperature", minimum=-273.15, strict_minimum=True) == -40.0
    with pytest.raises(ValueError, match="above -273.15"):
        finite_number(-273.15, "temperature", unit="degC", minimum=-273.15, strict_minimum=True)


def test_every_kind_has_ordered_limits():
    for kind, spec in PLAUSIBLE.items():
        assert spec.refuse_below <= spec.usual_low < spec.usual_high < spec.refuse_above, kind
        mid = math.sqrt(spec.usual_low * spec.usual_high) if spec.usual_low > 0 else spec.usual_high / 2
        assert check_quantity(mid, kind) == (mid, ()), kind


def test_plausibility_warnings_collects_and_skips_none():
    out = plausibility_warnings(area=2.0, thickness=None, temperature=25.0, source="run.csv")
    assert len(out) == 1 and out[0].startswith("run.csv: area = 2 m^2")


@pytest.mark.parametrize("option, value", [
    ("--turns", "1e-300"), ("--temperature", "-300"), ("--temperature", "1e6"), ("--thickness", "1e3"),
    ("--resistivity", "1e-300"), ("--area", "52"),
])
def test_capture_command_refuses_quantities_orders_of_magnitude_off(option, value):
    args = {"--turns": "12", "--area": "52mm2"}
    args[option] = value
    flat = [x for kv in args.items() for x in kv]
    extra = [] if option in args and option in ("--turns", "--area") else [option, value]
    r = _cli("capture", CAPTURE, "--material", "mnzn-power-ferrite", *flat, *extra, "--json")
    assert r.returncode == 2, r.stdout
    line = r.stderr.strip()
    assert "\n" not in line and len(line) < 300 and option in line
    assert "JSON compliant" not in line


def test_capture_command_json_never_holds_infinity():
    r = _cli("capture", CAPTURE, "--material", "mnzn-power-ferrite", "--turns", "12", "--area", "52mm2", "--json")
    assert r.returncode == 0, r.stderr
    json.loads(r.stdout, parse_constant=lambda c: pytest.fail(f"non-finite {c} in the JSON"))


@pytest.mark.parametrize("call", [
    lambda: __import__("workbench.models", fromlist=["steinmetz"]).steinmetz(1e308, 0.1, 1.0, 1.5, 2.5),
    lambda: __import__("workbench.models", fromlist=["steinmetz"]).steinmetz(1e3, 0.1, 1e308, 1.5, 2.5),
])
def test_library_overflow_is_refused_not_returned_as_inf(call):
    # 1e308 ** 1.5 overflows a double (IEEE 754 maximum ~1.8e308): the library must say so
    with pytest.raises(ValueError, match="not finite .*overflow.*freq="):
        call()


def test_igse_overflow_is_refused():
    from workbench.models import igse
    from workbench.waveforms import FluxWaveform

    w = FluxWaveform(np.array([0.0, 0.25, 0.5, 0.75]) * 1e-3, [0.0, 0.1, 0.2, 0.1], 1e-3)
    with pytest.raises(ValueError, match="iGSE loss is not finite"):
        igse(w, 1e308, 1.5, 2.5)
    assert math.isfinite(igse(w, 1.0, 1.5, 2.5))


def test_json_output_refuses_a_non_finite_field_by_name(capsys):
    from workbench.cli.main import emit_json

    with pytest.raises(ValueError, match=r"result field results.loss_w_m3 is not finite \(inf\)"):
        emit_json({"results": {"loss_w_m3": math.inf, "ok": 1.0}})
    assert capsys.readouterr().out == ""
    emit_json({"a": [1.0, None]})
    assert json.loads(capsys.readouterr().out) == {"a": [1.0, None]}
