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
