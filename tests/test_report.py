"""Export of records to JSON, CSV and standalone HTML, written atomically."""
import csv
import json
import os
import tomllib
from pathlib import Path

import numpy as np
import pytest

from workbench import __version__, fileio
from workbench.report import atomic_write_text, build_record, write_bundle, write_csv, write_html, write_json

ROOT = Path(__file__).resolve().parents[1]


def _project_version():
    with open(ROOT / "pyproject.toml", "rb") as fh:
        return tomllib.load(fh)["project"]["version"]


def test_record_carries_the_package_version_and_converts_numpy():
    rec = build_record("demo", {"b_peak_t": np.float64(0.1), "n": np.int64(3)},
                       {"curve_w_m3": np.array([1.0, np.nan, np.inf]), "ok": np.bool_(True), "parts": (1, 2)})
    assert rec["version"] == __version__ == _project_version()  # the installed metadata, not a copy
    assert rec["package"] == "fluxheat-workbench"
    assert rec["inputs"] == {"b_peak_t": 0.1, "n": 3}
    assert rec["results"] == {"curve_w_m3": [1.0, None, None], "ok": True, "parts": [1, 2]}
    assert rec["created_utc"].endswith("+00:00")


def test_json_round_trip_with_nan_as_null(tmp_path):
    rec = build_record("demo", {"x": 1.5}, {"y": [float("nan"), 2.0]})
    path = write_json(tmp_path / "r.json", rec)
    back = json.loads(path.read_text())
    assert back["results"]["y"] == [None, 2.0]
    assert back["version"] == _project_version()


def test_csv_has_meta_lines_header_and_exact_values(tmp_path):
    rec = build_record("demo", {"material": "M270-35A", "b_peak_t": 1.0},
                       {"crossover_hz": 281.7, "warnings": ["one", "two"], "curve": [1, 2]})
    freq = np.geomspace(10, 1e6, 7)
    path = write_csv(tmp_path / "t.csv", {"frequency_hz": freq, "loss_w_m3": [1.0, np.nan, 3, 4, 5, 6, 7],
                                          "material": ["a"] * 7}, rec)
    lines = path.read_text().splitlines()
    meta = [x for x in lines if x.startswith("#")]
    assert f"# version: {_project_version()}" in meta
    assert "# inputs.material: M270-35A" in meta
    assert "# results.crossover_hz: 281.7" in meta
    assert "# results.warnings: one" in meta and "# results.warnings: two" in meta
    rows = list(csv.reader(x for x in lines if not x.startswith("#")))
    assert rows[0] == ["frequency_hz", "loss_w_m3", "material"]
    assert len(rows) == 8
    np.testing.assert_array_equal([float(r[0]) for r in rows[1:]], freq)  # repr keeps every bit
    assert rows[2][1] == ""  # NaN is an empty cell


def test_csv_refuses_ragged_columns(tmp_path):
    with pytest.raises(ValueError, match="column 'b' has 2 values, expected 3 like column 'a'"):
        write_csv(tmp_path / "t.csv", {"a": [1, 2, 3], "b": [1, 2]})
    assert not any(tmp_path.iterdir())


def test_failed_write_keeps_the_old_file_and_leaves_no_temp(tmp_path, monkeypatch):
    target = tmp_path / "keep.json"
    atomic_write_text(target, "old\n")

    def broken_replace(src, dst):
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(fileio.os, "replace", broken_replace)
    with pytest.raises(OSError, match="simulated"):
        atomic_write_text(target, "new\n")
    assert target.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.json"]


def test_missing_folder_is_named(tmp_path):
    missing = tmp_path / "nope"
    with pytest.raises(ValueError, match="export folder .*nope.* does not exist"):
        atomic_write_text(missing / "x.txt", "x")


def test_html_is_standalone_with_inline_bokehjs(tmp_path):
    from bokeh.plotting import figure

    fig = figure(name="demo_plot", title="demo")
    fig.line([1, 2, 3], [1, 4, 9])
    path = write_html(tmp_path / "p.html", fig, title="demo page")
    text = path.read_text()
    assert "<title>demo page</title>" in text
    assert "demo_plot" in text
    assert "cdn.bokeh.org" not in text and "<script src=" not in text.replace(" ", "")
    assert "Bokeh" in text and len(text) > 300_000  # BokehJS itself is in the page


def test_bundle_writes_three_files_and_checks_the_stem(tmp_path):
    from bokeh.plotting import figure

    fig = figure(name="p")
    fig.line([1, 2], [1, 2])
    paths = write_bundle(tmp_path / "out", "run-1", build_record("demo", {}, {}), {"a": [1, 2]}, fig)
    assert sorted(p.name for p in paths.values()) == ["run-1.csv", "run-1.html", "run-1.json"]
    for bad in ("", "../up", "a b", ".hidden"):
        with pytest.raises(ValueError, match="stem must be"):
            write_bundle(tmp_path, bad, {}, {"a": [1]})
    assert not any(p.name.endswith(".tmp") for p in (tmp_path / "out").iterdir())
    assert os.listdir(tmp_path / "out") and all(not n.startswith(".") for n in os.listdir(tmp_path / "out"))


def test_unexportable_value_is_named():
    with pytest.raises(ValueError, match="cannot export a value of type object"):
        build_record("demo", {"x": object()}, {})


# -- the one number formatter ---------------------------------------------------------------------
# SI prefixes and their factors: BIPM, "The International System of Units", 9th edition (2019), Table 7.
@pytest.mark.parametrize("value, unit, digits, text", [
    (1e6, "Hz", 3, "1.00 MHz"),          # M is mega, never "1m"
    (1.17, "T", 3, "1.17 T"),            # never "1.17e+03 mT"
    (0.05, "T", 3, "50.0 mT"),
    (830.66, "Hz", 4, "830.7 Hz"),
    (999.7, "Hz", 3, "1.00 kHz"),        # rounding may move the prefix up
    (1234.5, "W/m3", 3, "1.23 kW/m³"),
    (2.5e-5, "m3", 3, "25.0 cm³"),       # 1 cm3 = (1e-2 m)^3 = 1e-6 m3
    (2.5e-5, "m2", 3, "25.0 mm²"),       # 1 mm2 = 1e-6 m2
    (2e-4, "m", 3, "200 µm"),
    (1.5e-7, "ohm m", 3, "0.150 µΩ·m"),
    (1e5, "T/s", 3, "100 kT/s"),
    (25.0, "degC", 3, "25.0 °C"),
    (None, "W", 3, "– W"),
    (3.5e-4, "m", 3, "350 µm"),
    (float("nan"), "Hz", 3, "– Hz"),
])
def test_engineering_notation(value, unit, digits, text):
    from workbench.report.numbers import eng

    assert eng(value, unit, digits) == text


def test_forced_prefix():
    from workbench.report.numbers import eng

    assert eng(3.5e-4, "m", 3, prefix="m") == "0.350 mm"
    with pytest.raises(ValueError, match="prefix must be one of"):
        eng(1.0, "m", prefix="x")


def test_a_column_shares_one_prefix():
    from workbench.report.numbers import eng_column

    unit, texts = eng_column([1.2e6, 3.4e5, None], "W/m3", 3)
    assert unit == "kW/m³" and texts == ["1200", "340", "–"]
    # a column over decades takes the prefix of its geometric mean (here 1 kW/m3)
    unit, texts = eng_column([10.0, 1e5], "W/m3", 3)
    assert unit == "kW/m³" and texts == ["0.0100", "100"]


def test_tick_prefixes_never_mix_milli_and_mega():
    from workbench.report.numbers import tick_prefixes

    assert dict(tick_prefixes("Hz"))[6] == "M" and -3 not in dict(tick_prefixes("Hz"))
    assert 3 not in dict(tick_prefixes("T"))  # no kilotesla


# -- write_report ---------------------------------------------------------------------------------
def _demo_record():
    from workbench.report import build_record

    f = np.geomspace(10, 1e5, 30)
    return build_record(
        "demo", {"b_peak_t": 1.0, "frequency_hz": 50.0, "material": "M270-35A", "thickness_m": 3.5e-4},
        {"loss_w_m3": 1234.5}, title="Demo report (invented numbers)",
        table={"columns": [{"name": "part", "unit": None, "key": "part"},
                           {"name": "loss density", "unit": "W/m3", "key": "loss_w_m3"}],
               "rows": [["hysteresis", 12345.0], ["classical", 2345.0]]},
        statements=["Crossover at 865.2 Hz: demo statement."], warnings=["demo warning"],
        series={"frequency_hz": f, "loss_w_m3": f ** 1.5},
        plots=[{"name": "demo_loss", "title": "demo", "x": "frequency_hz", "ys": [("loss_w_m3", "loss")],
                "x_label": "f [Hz]", "y_label": "P [W/m³]", "x_unit": "Hz", "y_unit": "W/m3", "x_log": True,
                "y_log": True}])


def test_report_carries_inputs_results_statements_and_never_overwrites(tmp_path):
    from workbench.report import write_report

    rec = _demo_record()
    first = write_report(rec, tmp_path / "run.html")
    second = write_report(rec, tmp_path / "run.html")
    assert first.name == "run.html" and second.name == "run-2.html"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run-2.csv", "run-2.html", "run-2.json", "run.csv",
                                                          "run.html", "run.json"]
    text = first.read_text()
    for needle in ("Demo report", "b peak", "1.000 T", "50.00 Hz", "0.3500 mm", "M270-35A", "loss density [kW/m³]",
                   "12.35", "Crossover at 865.2 Hz", "demo warning", "temperature rise", "hazardous voltages",
                   f"version <span class=\"fluxheat-version\">{__version__}</span>", "demo_loss"):
        assert needle in text, needle
    assert "cdn.bokeh.org" not in text and "<script src=" not in text  # opens offline
    third = write_report(rec, tmp_path / "run.html", replace=True)
    assert third == first
    back = json.loads((tmp_path / "run.json").read_text())
    assert back["inputs"]["b_peak_t"] == 1.0 and back["statements"] and back["warnings"] == ["demo warning"]
    assert "# version: " + _project_version() in (tmp_path / "run.csv").read_text()


def test_report_files_get_the_umask_mode(tmp_path):
    from workbench.report import write_report

    old = os.umask(0o027)
    try:
        path = write_report(_demo_record(), tmp_path / "m.html")
    finally:
        os.umask(old)
    for suffix in (".html", ".json", ".csv"):
        assert (path.with_suffix(suffix).stat().st_mode & 0o777) == 0o640  # 0666 & ~0027 (POSIX creat semantics)


def test_report_refuses_a_wrong_suffix(tmp_path):
    from workbench.report import write_report

    with pytest.raises(ValueError, match="must end in .html"):
        write_report(_demo_record(), tmp_path / "r.txt")
    assert not any(tmp_path.iterdir())


def test_default_export_folder_is_outside_the_repository(monkeypatch, tmp_path):
    from workbench.report import default_export_folder

    monkeypatch.delenv("FLUXHEAT_EXPORTS", raising=False)
    assert ROOT not in default_export_folder().resolve().parents
    monkeypatch.setenv("FLUXHEAT_EXPORTS", str(tmp_path / "x"))
    assert default_export_folder() == tmp_path / "x"
