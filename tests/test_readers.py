"""Tests of workbench.capture.readers: CSV and .npz captures into SI arrays.

Reference values are the numbers the tests themselves write into the files (plain string
formatting or numpy.savetxt with 17 significant digits, which round-trips a float64 exactly:
IEEE 754-2008 section 5.12.2). Unit factors follow the SI brochure (BIPM, 9th edition, 2019,
Table 7). All scenarios and values are invented for the tests.
"""
from __future__ import annotations

import importlib.util
import io
import math
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from workbench.capture import CaptureData, CaptureError, read_capture, read_csv_capture, read_npz_capture

DATA = Path(__file__).resolve().parent / "data"
MALFORMED = DATA / "malformed"
EDGE = DATA / "capture_edge"


def _load_generator():
    spec = importlib.util.spec_from_file_location("make_malformed", DATA / "make_malformed.py")
    module = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(module)
    return module


@pytest.fixture(params=["pandas", "numpy"])
def parser(request, monkeypatch):
    """Run a test once with pandas' C parser and once with the numpy.loadtxt fallback."""
    if request.param == "numpy":
        monkeypatch.setitem(sys.modules, "pandas", None)  # import pandas -> ImportError
    else:
        pytest.importorskip("pandas")
    return request.param


# --------------------------------------------------------------------------------------------
# malformed corpus: file -> fragments the message must contain (beside the file name)
# --------------------------------------------------------------------------------------------
EXPECTED_ERRORS: dict[str, list[str]] = {
    "empty_file.csv": ["file is empty"],
    "whitespace_only.csv": ["file is empty"],
    "header_only.csv": ["header only", "header row 1"],
    "only_metadata_lines.csv": ["no numeric data rows", "rows 1-3"],
    "single_column_time_only.csv": ["single column", "no data channel"],
    "single_column_no_header.csv": ["single column", "no data channel"],
    "text_in_numeric_cell_row7.csv": ["row 7", "column 2 ('v (V)')", "'24.OOO'", "numeric cell"],
    "nan_in_voltage_row5.csv": ["row 5", "column 2 ('v (V)')", "NaN"],
    "inf_in_current_row4.csv": ["row 4", "column 3 ('i (A)')", "Inf"],
    "empty_cell_row6.csv": ["row 6", "column 2 ('v (V)')", "empty cell"],
    "time_not_increasing_row6.csv": ["row 6", "not increasing", "2.5e-08 s after 3e-08 s", "row 5"],
    "duplicate_time_stamp_row5.csv": ["row 5", "duplicate time stamp 2e-08 s", "row 4"],
    "fewer_than_three_rows.csv": ["only 2 data row(s)", "at least 3 samples"],
    "mixed_delimiters_row5.csv": ["row 5", "mixed delimiters", "';'", "','"],
    "absurd_time_unit_parsecs.csv": ["'parsecs'", "column 1 ('time (parsecs)')"],
    "absurd_voltage_unit_kV_per_furlong.csv": ["'kV/furlong'", "column 2", "furlong"],
    "wrong_unit_flux_density_in_mm.csv": ["'mm'", "column 2 ('B (mm)')", "unit of T"],
    "binary_file.csv": ["binary file"],
    "utf16_encoded.csv": ["UTF-16"],
    "ragged_row_extra_field_row4.csv": ["row 4", "inconsistent column count", "4 field(s)", "has 3"],
    "ragged_row_missing_field_row5.csv": ["row 5", "inconsistent column count", "2 field(s)"],
    "bom_then_garbage.csv": ["no numeric data rows"],
    "decimal_comma_in_a_comma_delimited_table_row3.csv": ["row 3", "inconsistent column count",
                                                          "decimal comma"],
    "header_names_3_data_fields_2.csv": ["header row 1 has 3 names", "have 2 fields"],
    "no_time_column_no_interval.csv": ["no time column", "no sample interval", "time_column="],
    "unrecognised_column_names.csv": ["no column of the header", "'probe A'", "columns="],
    "two_columns_look_like_voltage.csv": ["column 2 ('v (V)')", "column 3 ('voltage (V)')", "'v'"],
    "headerless_without_column_map.csv": ["no header row", "columns="],
    "unreadable_sample_interval.csv": ["sample interval", "'fast'"],
    "negative_sample_interval.csv": ["'-1e-8'", "not a positive sample interval"],
    "truncated_last_row.csv": ["row 7", "inconsistent column count", "1 field(s)"],
    "time_backwards_after_blank_lines_row10.csv": ["row 10", "not increasing", "row 8"],
    "npz_not_a_zip.npz": ["not an .npz archive"],
    "npz_object_array.npz": ["pickle"],
    "npz_lengths_differ.npz": ["differ in length", "'t' has 5", "'v' has 4"],
    "npz_nan_in_b_sample3.npz": ["array 'b'", "sample 3", "nan"],
    "npz_two_dimensional_v.npz": ["array 'v'", "shape (5, 2)"],
    "npz_no_channel_arrays.npz": ["no channel array", "temperature"],
    "npz_time_not_increasing_sample2.npz": ["array 't', sample 2", "not increasing"],
    # hostile files of issue 11: one clear line instead of a traceback or a memory blow-up
    "zip_named_csv_with_text_member.csv": ["no numpy arrays", "'notes.txt'"],
    "npz_member_not_an_array.npz": ["member 'v'", "not a readable numpy array"],
    "npz_header_declares_1e11_samples.npz": ["array 'v'", "shape (100000000000,)", "0 bytes"],
    "npz_inf_in_v_beside_a_text_member.npz": ["array 'v'", "sample 4", "inf"],
    "values_plus_minus_1e308_row3.csv": ["row 3", "column 2 ('v (V)')", "1e+308 V",
                                         "beyond any physical"],
    "fullwidth_digit_row4.csv": ["row 4", "column 2 ('v (V)')", "text '\uff15'"],
    "digit_separator_1_000_row3.csv": ["row 3", "column 2 ('v (V)')", "text '1_000'"],
    "time_steps_of_1e-300_s.csv": ["mean step of 1e-300 s", "check the time unit"],
    "current_column_in_volts.csv": ["'V'", "column 3 ('current (V)')", "unit of A"],
}


def test_corpus_is_complete_and_large_enough():
    on_disk = {p.name for p in MALFORMED.iterdir()}
    assert on_disk == set(EXPECTED_ERRORS), "every corpus file needs an expectation here"
    assert len(on_disk) >= 25


def test_corpus_regenerates_byte_for_byte(tmp_path):
    generator = _load_generator()
    generator.write_all(tmp_path / "malformed", tmp_path / "edge")
    for directory, name in ((MALFORMED, "malformed"), (EDGE, "edge")):
        for path in directory.iterdir():
            if path.suffix == ".md":
                continue
            assert (tmp_path / name / path.name).read_bytes() == path.read_bytes(), path.name


@pytest.mark.parametrize("name", sorted(EXPECTED_ERRORS))
def test_malformed_file_raises_clear_error(name, parser):
    path = MALFORMED / name
    with pytest.raises(CaptureError) as info:
        read_capture(path)
    message = str(info.value)
    assert str(path) in message
    assert "\n" not in message and len(message) < 300, message
    assert "nan" not in message.lower() or "nan" in name  # never a NaN the file does not hold
    for fragment in EXPECTED_ERRORS[name]:
        assert fragment in message, f"{fragment!r} missing from: {message}"


def test_capture_error_is_value_error():
    assert issubclass(CaptureError, ValueError)


def test_huge_header_is_refused(tmp_path, parser):
    generator = _load_generator()
    path = tmp_path / "huge_header_1p2MB.csv"
    path.write_bytes(generator.huge_header_bytes())
    assert path.stat().st_size > 1_100_000
    with pytest.raises(CaptureError, match=r"header too large.*1024 KiB") as info:
        read_capture(path)
    assert str(path) in str(info.value)


def test_too_many_text_lines_is_refused(tmp_path, parser):
    generator = _load_generator()
    path = tmp_path / "more_than_10000_text_lines.csv"
    path.write_bytes(generator.many_text_lines_bytes())
    assert path.stat().st_size < 1_000_000
    with pytest.raises(CaptureError, match=r"header too large.*10000 text lines"):
        read_capture(path)


def test_single_line_without_newline_of_megabytes_is_refused(tmp_path):
    path = tmp_path / "one_long_line.csv"
    path.write_bytes(b"x" * 3_000_000)
    with pytest.raises(CaptureError, match="header too large"):
        read_capture(path)


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(CaptureError, match="no such file"):
        read_capture(tmp_path / "absent.csv")
    with pytest.raises(CaptureError, match="is a directory"):
        read_capture(tmp_path)


# --------------------------------------------------------------------------------------------
# good files in every dialect: exact round trip of the numbers written
# --------------------------------------------------------------------------------------------
N = 50


def _invented_flyback(n: int = N) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Invented 100 kHz flyback choke bench capture: 10 ns sampling, v [V], i [A]."""
    rng = np.random.default_rng(7)
    t = np.arange(n) * 1e-8
    v = np.where(np.arange(n) % 20 < 8, 24.0, -16.0) + rng.normal(0, 0.3, n)
    i = 0.5 + 0.01 * np.arange(n) + rng.normal(0, 0.002, n)
    return t, v, i


def _rows(cols, sep: str, fmt: str = "{!r}") -> str:
    return "".join(sep.join(fmt.format(float(x)) for x in row) + "\n" for row in zip(*cols))


DIALECTS = {
    "comma": ("time (s),v (V),i (A)\n", ","),
    "comma_space": ("time (s), v (V), i (A)\n", ", "),
    "semicolon": ("time (s);v (V);i (A)\n", ";"),
    "tab": ("time (s)\tv (V)\ti (A)\n", "\t"),
    "whitespace": ("time (s)   v (V)   i (A)\n", "   "),
}


@pytest.mark.parametrize("dialect", sorted(DIALECTS))
def test_dialects_round_trip_exactly(tmp_path, dialect, parser):
    t, v, i = _invented_flyback()
    header, sep = DIALECTS[dialect]
    path = tmp_path / f"flyback_{dialect}.csv"
    path.write_text(header + _rows((t, v, i), sep))
    cap = read_capture(path)
    assert isinstance(cap, CaptureData)
    np.testing.assert_array_equal(cap.time, t)
    np.testing.assert_array_equal(cap.channels["v"], v)
    np.testing.assert_array_equal(cap.channels["i"], i)
    assert set(cap.channels) == {"v", "i"}
    assert cap.columns["v"] == "v (V)" and cap.columns["time"] == "time (s)"
    assert cap.source == str(path)
    assert cap.metadata["clipped_channels"] == ""
    assert cap.time.dtype == np.float64


def test_savetxt_whitespace_with_leading_spaces(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "savetxt.txt"
    np.savetxt(path, np.column_stack([t, v, i]), fmt="%25.17g", header="t v i", comments="")
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.time, t)
    np.testing.assert_array_equal(cap.channels["i"], i)


@pytest.mark.parametrize(
    ("encoding", "newline", "prefix"),
    [("ascii", "\r\n", b""), ("utf-8", "\n", b"\xef\xbb\xbf"), ("ascii", "\r\n", b"\xef\xbb\xbf")],
)
def test_line_endings_and_bom(tmp_path, encoding, newline, prefix, parser):
    t, v, i = _invented_flyback()
    text = ("time (s),v (V),i (A)\n" + _rows((t, v, i), ",")).replace("\n", newline)
    path = tmp_path / "crlf_bom.csv"
    path.write_bytes(prefix + text.encode(encoding))
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.channels["v"], v)
    assert cap.columns["time"] == "time (s)"


def test_bom_on_headerless_file(tmp_path, parser):
    t, v, _ = _invented_flyback()
    path = tmp_path / "bom_headerless.csv"
    path.write_bytes(b"\xef\xbb\xbf" + _rows((t, v), ",").encode())
    cap = read_capture(path, columns={"v": 1})
    np.testing.assert_array_equal(cap.time, t)


def test_quoted_fields_and_trailing_delimiter(tmp_path, parser):
    t, v, i = _invented_flyback()
    body = "".join(f'"{a!r}","{b!r}","{c!r}",\n' for a, b, c in zip(t.tolist(), v.tolist(),
                                                                     i.tolist()))
    path = tmp_path / "quoted.csv"
    path.write_text('"time (s)","v (V)","i (A)",\n' + body)
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.channels["v"], v)
    np.testing.assert_array_equal(cap.channels["i"], i)


def test_blank_lines_inside_and_after_table(tmp_path, parser):
    t, v, i = _invented_flyback(6)
    rows = _rows((t, v, i), ",").splitlines(keepends=True)
    path = tmp_path / "blank_lines.csv"
    path.write_text("time (s),v (V),i (A)\n\n" + "".join(rows[:3]) + "\n   \n" + "".join(rows[3:])
                    + "\n\n")
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.time, t)
    np.testing.assert_array_equal(cap.channels["i"], i)


def test_unit_headers_scale_to_si(tmp_path, parser):
    # 20 kHz inverter output filter choke (invented): time in us, sense voltage in mV,
    # flux density in mT, current in kA -> SI (SI brochure Table 7 prefixes)
    t_us = np.arange(N) * 0.05
    vs_mv = np.linspace(-350.0, 410.0, N)
    b_mt = np.linspace(-120.0, 130.0, N)
    i_ka = np.linspace(0.001, 0.002, N)
    path = tmp_path / "units.csv"
    path.write_text("t [us],v_sense [mV],B (mT),Current (kA)\n" + _rows((t_us, vs_mv, b_mt, i_ka), ","))
    cap = read_capture(path)
    eps = np.finfo(float).eps
    np.testing.assert_allclose(cap.time, t_us / 1e6, rtol=eps, atol=0)
    np.testing.assert_allclose(cap.channels["v_sense"], vs_mv / 1e3, rtol=eps, atol=0)
    np.testing.assert_allclose(cap.channels["b"], b_mt / 1e3, rtol=eps, atol=0)
    np.testing.assert_allclose(cap.channels["i"], i_ka * 1e3, rtol=eps, atol=0)
    assert cap.metadata["unit.v_sense"].startswith("mV")
    assert cap.columns["b"] == "B (mT)"


def test_units_row_under_header(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "units_row.csv"
    path.write_text("Time,CH1,CH2\ns,V,mV\n" + _rows((t, v, i * 1000), ","))
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.channels["v"], v)
    np.testing.assert_allclose(cap.channels["v_sense"], i, rtol=4 * np.finfo(float).eps)
    assert cap.columns == {"time": "Time", "v": "CH1", "v_sense": "CH2"}


def test_latin1_micro_sign_in_header(tmp_path, parser):
    t, v, _ = _invented_flyback()
    path = tmp_path / "latin1.csv"
    path.write_bytes(("t [µs];v [V]\n" + _rows((t * 1e6, v), ";")).encode("cp1252"))
    cap = read_capture(path)
    np.testing.assert_allclose(cap.time, t, rtol=4 * np.finfo(float).eps, atol=1e-30)


def test_headerless_selection_by_index(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "headerless.csv"
    path.write_text(_rows((t, i, v), ","))
    cap = read_capture(path, columns={"v": 2, "i": 1})
    np.testing.assert_array_equal(cap.time, t)
    np.testing.assert_array_equal(cap.channels["v"], v)
    np.testing.assert_array_equal(cap.channels["i"], i)
    assert cap.columns == {"time": "column 1", "v": "column 3", "i": "column 2"}


def test_headerless_time_column_and_units_arguments(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "headerless_us.csv"
    path.write_text(_rows((v, t * 1e6, i * 1e3), ","))
    cap = read_capture(path, time_column=1, columns={"v": 0, "i": 2}, time_unit="us",
                       units={"i": "mA"})
    np.testing.assert_allclose(cap.time, t, rtol=4 * np.finfo(float).eps, atol=1e-30)
    np.testing.assert_allclose(cap.channels["i"], i, rtol=4 * np.finfo(float).eps)
    assert cap.metadata["unit.time"] == "us [argument]"


def test_selection_by_header_name(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "by_name.csv"
    path.write_text("X (s),CH1 (V),CH2 (V)\n" + _rows((t, v, i), ","))
    cap = read_capture(path, time_column="X", columns={"v_sense": "CH2", "v": "ch1 (V)"})
    np.testing.assert_array_equal(cap.time, t)
    np.testing.assert_array_equal(cap.channels["v_sense"], i)
    np.testing.assert_array_equal(cap.channels["v"], v)


def test_metadata_lines_are_parsed(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "meta.csv"
    path.write_text(
        "Model,bench scope (invented)\n"
        "Sample interval,1e-8\n"
        f"Record length,{N}\n"
        "# operator: test bench 2 (invented)\n"
        "free text without a separator\n"
        "time (s),v (V),i (A)\n" + _rows((t, v, i), ",")
    )
    cap = read_capture(path)
    assert cap.metadata["Model"] == "bench scope (invented)"
    assert cap.metadata["Sample interval"] == "1e-8"
    assert cap.metadata["Record length"] == str(N)
    assert cap.metadata["operator"] == "test bench 2 (invented)"
    assert cap.metadata["line 5"] == "free text without a separator"
    assert cap.metadata["header"] == "time (s), v (V), i (A)"
    np.testing.assert_array_equal(cap.channels["i"], i)


def test_bare_number_metadata_line_is_not_the_table(parser):
    text = "Bench export (invented)\n100000\ntime (s),v (V)\n0,1\n1e-8,2\n2e-8,3\n"
    cap = read_capture(io.StringIO(text))
    assert cap.metadata["line 2"] == "100000"
    np.testing.assert_array_equal(cap.channels["v"], [1.0, 2.0, 3.0])


@pytest.mark.parametrize(
    ("bad_row", "cell", "fragment"),
    [(7001, "x1", "text 'x1' in a numeric cell"), (9001, "NaN", "NaN 'NaN'"),
     (5003, "", "empty cell")],
)
def test_row_numbers_deep_in_a_long_file(tmp_path, bad_row, cell, fragment, parser):
    # 10 000 rows after 2 header lines and one blank line: the row number in the message is
    # the line number of the file
    t, v, _ = _invented_flyback(10_000)
    lines = ["Setup,20 kHz filter choke (invented)\n", "time (s),v (V)\n", "\n"]
    lines += [f"{a!r},{b!r}\n" for a, b in zip(t.tolist(), v.tolist())]
    lines[bad_row - 1] = f"{float(t[bad_row - 4])!r},{cell}\n"
    path = tmp_path / "long.csv"
    path.write_text("".join(lines))
    with pytest.raises(CaptureError) as info:
        read_capture(path)
    assert f"row {bad_row}, column 2 ('v (V)'): {fragment}" in str(info.value)


@pytest.mark.parametrize(
    ("line", "dt"),
    [("Sample interval,1e-8", 1e-8), ("Sample interval,10 ns", 1e-8),
     ("Sampling rate,100 MS/s", 1e-8), ("X increment: 2e-7", 2e-7)],
)
def test_time_from_sample_interval(tmp_path, line, dt, parser):
    _, v, _ = _invented_flyback()
    path = tmp_path / "interval.csv"
    path.write_text(f"{line}\nv_sense [mV]\n" + _rows((v,), ","))
    cap = read_capture(path)
    # closed form: t_k = k * dt
    np.testing.assert_allclose(cap.time, np.arange(N) * dt, rtol=1e-15, atol=0)
    np.testing.assert_allclose(cap.channels["v_sense"], v / 1e3, rtol=np.finfo(float).eps)
    assert "sample interval" in cap.metadata["time_source"]


def test_buffers_text_and_binary(parser):
    t, v, i = _invented_flyback()
    text = "time (s),v (V),i (A)\n" + _rows((t, v, i), ",")
    for buffer in (io.StringIO(text), io.BytesIO(text.encode())):
        cap = read_csv_capture(buffer)
        assert cap.source == "<buffer>"
        np.testing.assert_array_equal(cap.channels["v"], v)


def test_error_in_buffer_names_buffer(parser):
    with pytest.raises(CaptureError, match=r"^<buffer>: row 3, column 2 \('v'\)"):
        read_capture(io.StringIO("time,v\n0,1\n1,x\n2,3\n"))


def test_bad_arguments(tmp_path):
    t, v, i = _invented_flyback()
    path = tmp_path / "args.csv"
    path.write_text("time (s),v (V),i (A)\n" + _rows((t, v, i), ","))
    cases = [
        ({"delimiter": "|"}, "delimiter='|'"),
        ({"columns": {"voltage": 1}}, "columns key 'voltage' is not a channel name"),
        ({"columns": {"v": 7}}, "columns['v']=7 is outside the 3 columns"),
        ({"columns": {"v": "CH9"}}, "columns['v']='CH9' matches no header name"),
        ({"units": {"volts": "V"}}, "units key 'volts'"),
        ({"time_unit": "mV"}, "unknown or wrong unit 'mV' in the argument for 'time'"),
        ({"time_unit": "us", "units": {"time": "s"}}, "give the time unit once"),
        ({"columns": {"v": 0}}, "used both as time and as channel 'v'"),
    ]
    for kwargs, fragment in cases:
        with pytest.raises(CaptureError) as info:
            read_capture(path, **kwargs)
        assert fragment in str(info.value), (kwargs, str(info.value))
        assert str(path) in str(info.value)


def test_explicit_delimiter(tmp_path, parser):
    t, v, i = _invented_flyback()
    path = tmp_path / "explicit.csv"
    path.write_text("time (s);v (V);i (A)\n" + _rows((t, v, i), ";"))
    cap = read_capture(path, delimiter=";")
    np.testing.assert_array_equal(cap.channels["v"], v)
    with pytest.raises(CaptureError):
        read_capture(path, delimiter=",")


def test_result_is_read_only(tmp_path):
    t, v, i = _invented_flyback()
    path = tmp_path / "ro.csv"
    path.write_text("time (s),v (V),i (A)\n" + _rows((t, v, i), ","))
    cap = read_capture(path)
    with pytest.raises(ValueError):
        cap.time[0] = 1.0
    with pytest.raises(ValueError):
        cap.channels["v"][0] = 1.0
    with pytest.raises(TypeError):
        cap.channels["b"] = v  # type: ignore[index]
    with pytest.raises(AttributeError):
        cap.source = "x"  # type: ignore[misc]
    assert cap.n_samples == N


# --------------------------------------------------------------------------------------------
# pandas C parser and numpy fallback agree bit for bit on a large file
# --------------------------------------------------------------------------------------------
def test_200k_rows_identical_with_pandas_and_numpy(tmp_path, monkeypatch):
    pytest.importorskip("pandas")
    n = 200_000
    rng = np.random.default_rng(11)
    t = np.arange(n) * 1e-8
    v = rng.normal(0.0, 30.0, n)
    i = rng.normal(1.0, 0.1, n)
    b = rng.uniform(-0.3, 0.3, n)
    path = tmp_path / "flyback_200k.csv"
    with open(path, "w") as fh:
        fh.write("Model,bench scope (invented)\nSample interval,1e-8\n")
    with open(path, "a") as fh:
        np.savetxt(fh, np.column_stack([t, v, i, b * 1e3]), delimiter=",", fmt="%.17g",
                   header="time (s),v (V),i (A),B (mT)", comments="")
    with_pandas = read_capture(path)
    monkeypatch.setitem(sys.modules, "pandas", None)
    with_numpy = read_capture(path)
    for name in ("v", "i", "b"):
        np.testing.assert_array_equal(with_pandas.channels[name], with_numpy.channels[name])
    np.testing.assert_array_equal(with_pandas.time, with_numpy.time)
    np.testing.assert_array_equal(with_pandas.time, t)  # the numbers written
    np.testing.assert_array_equal(with_pandas.channels["v"], v)
    np.testing.assert_allclose(with_pandas.channels["b"], b, rtol=4 * np.finfo(float).eps)
    assert dict(with_pandas.metadata) == dict(with_numpy.metadata)


def test_capture_package_imports_numpy_only():
    code = (
        "import sys, workbench.capture, workbench.units\n"
        "bad = [m for m in ('pandas', 'scipy', 'ipywidgets', 'bokeh', 'dask') if m in sys.modules]\n"
        "assert not bad, bad\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)


# --------------------------------------------------------------------------------------------
# clipping flag (not an error at read time)
# --------------------------------------------------------------------------------------------
def _sense_capture(tmp_path, x: np.ndarray, name: str = "sense.csv") -> CaptureData:
    t = np.arange(x.size) * 1e-9
    path = tmp_path / name
    path.write_text("time (s),v_sense (V)\n" + _rows((t, x), ","))
    return read_capture(path)


def _clip_fraction(cap: CaptureData, rail: str) -> float:
    note = cap.metadata["clipping.v_sense"]
    match = re.search(rf"([0-9.]+) of samples stuck at {rail}", note)
    assert match, note
    return float(match.group(1))


def test_clipped_sine_is_flagged_with_closed_form_fraction(tmp_path):
    n = 20_000
    phase = 2 * np.pi * np.arange(n) / n
    c = 0.8
    cap = _sense_capture(tmp_path, np.clip(np.sin(phase), -c, c))
    assert cap.clipped_channels == ("v_sense",)
    # closed form: sin > c for a fraction 1/2 - asin(c)/pi of a period
    expected = 0.5 - math.asin(c) / math.pi
    assert _clip_fraction(cap, "max") == pytest.approx(expected, abs=2e-3)
    assert _clip_fraction(cap, "min") == pytest.approx(expected, abs=2e-3)


def test_quantised_and_noisy_signals_are_not_flagged(tmp_path):
    n = 20_000
    phase = 2 * np.pi * np.arange(n) / n
    rng = np.random.default_rng(3)
    eight_bit_sine = np.round(np.sin(phase) * 127) / 127
    assert _sense_capture(tmp_path, eight_bit_sine, "a.csv").clipped_channels == ()
    assert _sense_capture(tmp_path, np.sin(phase), "b.csv").clipped_channels == ()
    square = np.where(np.sin(phase) >= 0, 1.0, -1.0) + rng.normal(0, 0.02, n)
    assert _sense_capture(tmp_path, np.round(square * 127) / 127, "c.csv").clipped_channels == ()


def test_clipped_noisy_eight_bit_capture_is_flagged(tmp_path):
    n = 20_000
    phase = 2 * np.pi * np.arange(n) / n
    rng = np.random.default_rng(5)
    codes = np.clip(np.round((np.sin(phase) + rng.normal(0, 0.01, n)) * 127), -100, 100)
    cap = _sense_capture(tmp_path, codes / 127)
    assert cap.clipped_channels == ("v_sense",)


def test_below_one_percent_is_not_flagged(tmp_path):
    # a flat top of 0.5 % of the samples: under the 1 % threshold (common practice, no source)
    n = 20_000
    x = np.sin(2 * np.pi * np.arange(n) / n)
    top = np.argsort(x)[-100:]  # the 100 largest samples = 0.5 %
    x[top] = x[top].min()
    assert _sense_capture(tmp_path, x).clipped_channels == ()


def test_edge_files_read_fine(parser):
    short = read_capture(EDGE / "fewer_than_one_period_100kHz.csv")
    assert short.n_samples == 600
    assert short.time[-1] == pytest.approx(599e-8, rel=1e-12)  # < one 10 us period
    assert short.clipped_channels == ()
    flat = read_capture(EDGE / "clipped_flat_topped_v_sense.csv")
    assert flat.clipped_channels == ("v_sense",)
    assert flat.channels["v_sense"].max() == 0.4
    assert flat.time[1] == pytest.approx(1e-7, rel=1e-12)  # t [us] scaled to s
    assert (EDGE / "README.md").exists()


# --------------------------------------------------------------------------------------------
# .npz
# --------------------------------------------------------------------------------------------
def test_npz_round_trip(tmp_path):
    t, v, i = _invented_flyback()
    b = np.linspace(-0.1, 0.1, N)
    path = tmp_path / "flyback.npz"
    np.savez(path, t=t, v=v, i=i, b=b, note=np.array("invented bench data"))
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.time, t)
    np.testing.assert_array_equal(cap.channels["v"], v)
    np.testing.assert_array_equal(cap.channels["b"], b)
    assert cap.metadata["note"] == "invented bench data"
    assert cap.metadata["format"] == "npz"
    assert cap.columns["time"] == "t"


def test_npz_sample_interval_units_and_buffer(tmp_path):
    _, v, _ = _invented_flyback()
    buf = io.BytesIO()
    np.savez(buf, phi=v * 1e3, sample_interval=np.float64(1e-8))
    buf.seek(0)
    cap = read_npz_capture(buf, units={"flux": "mWb"})
    np.testing.assert_allclose(cap.time, np.arange(N) * 1e-8, rtol=1e-15)
    np.testing.assert_allclose(cap.channels["flux"], v, rtol=4 * np.finfo(float).eps)
    assert cap.source == "<buffer>"


def test_npz_columns_and_time_column(tmp_path):
    t, v, _ = _invented_flyback()
    path = tmp_path / "named.npz"
    np.savez(path, stamp=t * 1e6, winding=v)
    cap = read_capture(path, time_column="stamp", columns={"v": "winding"}, time_unit="us")
    np.testing.assert_allclose(cap.time, t, rtol=4 * np.finfo(float).eps, atol=1e-30)
    with pytest.raises(CaptureError, match="delimiter= does not apply"):
        read_capture(path, delimiter=",")
    with pytest.raises(CaptureError, match="no time array"):
        read_capture(path, columns={"v": "winding"})


# --------------------------------------------------------------------------------------------
# real export styles (issue 10): fixtures in tests/data/instrument_exports/, written by make_exports.py
# from closed forms; every value below is recomputed from those forms, not by the reader
# --------------------------------------------------------------------------------------------
EXPORTS = DATA / "instrument_exports"


def _load_exports():
    spec = importlib.util.spec_from_file_location("make_exports", EXPORTS / "make_exports.py")
    module = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(module)
    return module


def test_export_fixtures_regenerate_byte_for_byte(tmp_path):
    gen = _load_exports()
    gen.write_all(tmp_path)
    for path in tmp_path.iterdir():
        assert path.read_bytes() == (EXPORTS / path.name).read_bytes(), path.name
    assert "invented" in (EXPORTS / "README.md").read_text()


def test_scope_export_semicolon_decimal_comma_preamble_units_row(parser):
    gen = _load_exports()
    cap = read_capture(EXPORTS / "scope_semicolon_decimal_comma.csv")
    k = np.arange(gen.SCOPE_N)
    # time from the preamble's "Sample Interval;4,0E-09": closed form t_k = k dt
    np.testing.assert_allclose(cap.time, k * 4e-9, rtol=1e-15, atol=0)
    # values written with 7 significant digits: half a unit in the last place
    v = np.array([gen.scope_v(j) for j in k])
    i = np.array([gen.scope_i(j) for j in k])
    np.testing.assert_allclose(cap.channels["v"], v, rtol=5e-7, atol=5e-12)
    np.testing.assert_allclose(cap.channels["i"], i, rtol=5e-7, atol=5e-12)
    assert cap.columns == {"v": "CH1", "i": "CH2"}  # CH2 in ampere is a current
    assert cap.meaning["i"] == "unit 'A' of generic name 'CH2'"
    assert cap.metadata["Sample Interval"] == "4,0E-09"  # kept as written
    assert cap.metadata["Firmware"] == "2,14"
    assert cap.metadata["decimal"] == "," and cap.metadata["delimiter"] == "';'"
    assert any("decimal comma" in n for n in cap.notes)
    assert any("sample interval" in n for n in cap.notes)


def test_simulator_export_probe_names_and_uneven_steps_kept_exactly(parser):
    gen = _load_exports()
    cap = read_capture(EXPORTS / "simulator_tab_uneven.txt")
    written = np.array([float(f"{t:.15e}") for t in gen.sim_times()])
    np.testing.assert_array_equal(cap.time, written)  # no resampling, bit for bit
    np.testing.assert_array_equal(np.diff(cap.time), np.diff(written))
    assert np.diff(written).min() < 2e-9 < 1.5e-8 < np.diff(written).max()  # truly uneven
    v = np.array([float(f"{gen.sim_v(t):.9g}") for t in gen.sim_times()])
    i = np.array([float(f"{gen.sim_i(t):.9g}") for t in gen.sim_times()])
    np.testing.assert_array_equal(cap.channels["v"], v)
    np.testing.assert_array_equal(cap.channels["i"], i)
    assert cap.columns == {"time": "time", "v": "V(n003)", "i": "I(L1)"}
    assert cap.meaning["v"] == "simulator name 'V(n003)'"
    assert cap.units == {"time": "", "v": "", "i": ""}
    assert cap.clipped_channels == ()  # an ideal square voltage is not clipping evidence here


def test_logger_export_tab_iso_slash_units(parser):
    gen = _load_exports()
    cap = read_capture(EXPORTS / "logger_tab_iso_units.tsv")
    k = np.arange(400)
    vals = np.array([gen.log_values(j) for j in k])
    np.testing.assert_allclose(cap.time, np.round(k / 1e4, 4), rtol=1e-15, atol=0)
    np.testing.assert_allclose(cap.channels["v"], vals[:, 0], rtol=0, atol=5.1e-6)
    np.testing.assert_allclose(cap.channels["i"], vals[:, 1], rtol=0, atol=5.1e-6)
    np.testing.assert_allclose(cap.channels["b"], vals[:, 2] / 1e3, rtol=0, atol=5.1e-9)  # mT
    assert cap.units["b"] == "mT"
    assert cap.metadata["Sample rate"] == "10 kS/s"
    assert cap.metadata["sample_interval_metadata"] == repr(1e-4)


def test_whitespace_export_uneven_steps_in_us(parser):
    gen = _load_exports()
    cap = read_capture(EXPORTS / "whitespace_uneven_steps.dat")
    t_us = np.array(gen.uneven_times_us())
    np.testing.assert_allclose(cap.time, t_us / 1e6, rtol=4e-16, atol=0)
    vs = np.array([gen.uneven_vs_mv(t) for t in t_us]) / 1e3
    np.testing.assert_allclose(cap.channels["v_sense"], vs, rtol=0, atol=5.1e-10)
    steps = np.diff(cap.time)
    assert float(cap.metadata["time_step.min"]) == steps.min()
    assert float(cap.metadata["time_step.max"]) == steps.max()
    assert steps.max() / steps.min() > 2  # uneven, and kept so


# --------------------------------------------------------------------------------------------
# dialects: decimal commas on any length, options that override every guess
# --------------------------------------------------------------------------------------------
def _scope_text(n: int, sep: str = ";", header: str = "TIME;CH1;CH2\ns;V;A\n") -> str:
    t, v, i = np.arange(n) * 4e-9, 12 * np.sin(np.arange(n) / 50), 0.5 * np.cos(np.arange(n) / 50)
    pre = "".join(f"Note {k};invented bench note {k}\n" for k in range(13))
    pre += "Sample Interval;4,0E-09\nRecord Length;%d\n" % n
    rows = "".join(f"{a:.6E}{sep}{b:.5f}{sep}{c:.6f}\n".replace(".", ",") for a, b, c in zip(t, v, i))
    return pre + header + rows


@pytest.mark.parametrize("n", [50, 20_000])
def test_decimal_comma_detected_on_any_length(tmp_path, n, parser):
    # 15 preamble lines, TIME;CH1;CH2 over s;V;A; the old reader gave "header too large"
    # beyond 10 000 rows and read CH2 as a sense voltage although its unit is ampere
    path = tmp_path / "scope.csv"
    path.write_text(_scope_text(n))
    cap = read_capture(path)
    k = np.arange(n)
    np.testing.assert_allclose(cap.time, k * 4e-9, rtol=2e-6, atol=0)  # 7 digits written
    np.testing.assert_allclose(cap.channels["v"], 12 * np.sin(k / 50), rtol=0, atol=5.1e-6)
    np.testing.assert_allclose(cap.channels["i"], 0.5 * np.cos(k / 50), rtol=0, atol=5.1e-7)
    assert set(cap.channels) == {"v", "i"}
    assert cap.metadata["Sample Interval"] == "4,0E-09"
    assert cap.metadata["sample_interval_metadata"] == repr(4e-9)


@pytest.mark.parametrize("sep", ["\t", "  "])
def test_decimal_comma_with_tab_or_whitespace(tmp_path, sep, parser):
    path = tmp_path / "dc.txt"
    path.write_text(f"t (us){sep}v (V)\n" + "".join(f"{k},5{sep}-{k},25\n" for k in range(5)))
    cap = read_capture(path)
    np.testing.assert_allclose(cap.time, (np.arange(5) + 0.5) * 1e-6, rtol=1e-15)
    np.testing.assert_array_equal(cap.channels["v"], -(np.arange(5) + 0.25))


def test_decimal_and_delimiter_options(tmp_path, parser):
    path = tmp_path / "scope.csv"
    path.write_text(_scope_text(30))
    same = read_capture(path, delimiter="semicolon", decimal="comma")
    np.testing.assert_array_equal(same.channels["v"], read_capture(path).channels["v"])
    assert not any("decimal comma" in n for n in same.notes)  # stated, not guessed
    with pytest.raises(CaptureError, match=r"decimal commas .* pass decimal=','"):
        read_capture(path, decimal=".")
    point = tmp_path / "point.csv"
    point.write_text("time;v\n0.5;1.5\n1.5;2.5\n2.5;3.5\n")
    with pytest.raises(CaptureError, match="no numeric data rows"):
        read_capture(point, decimal=",")
    for kwargs, fragment in [({"decimal": ";"}, "decimal=';'"),
                             ({"delimiter": ",", "decimal": ","}, "cannot both be a comma"),
                             ({"decimal": 1}, "decimal=1")]:
        with pytest.raises(CaptureError) as info:
            read_capture(path, **kwargs)
        assert fragment in str(info.value)


def test_late_decimal_comma_row_is_named(tmp_path, parser):
    rows = "".join(f"{k};{k + 1}\n" for k in range(300)) + "300;1,5\n"
    path = tmp_path / "late.csv"
    path.write_text("time;v\n" + rows)
    with pytest.raises(CaptureError, match=r"row 302, column 2 \('v'\): text '1,5' .*decimal=','"):
        read_capture(path)


def test_sample_interval_with_unit_field_and_decimal_comma(parser):
    text = "Sample Interval;2,5;us\nCH1;CH2\nV;V\n1,0;2,0\n1,5;2,5\n2,0;3,0\n"
    cap = read_capture(io.StringIO(text))
    np.testing.assert_allclose(cap.time, [0.0, 2.5e-6, 5e-6], rtol=1e-15)
    assert cap.columns == {"v": "CH1", "v_sense": "CH2"}
    assert any("v_sense" in n and "CH2" in n for n in cap.notes)  # the guess is stated


# --------------------------------------------------------------------------------------------
# channel meaning: names, units, simulator probes, overrides
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("header", "expected"),
    [
        ("X,CH1,CH2,CH3\nSecond,Volt,Ampere,mT\n", {"v": 1.0, "i": 2.0, "b": 3e-3}),
        ("Time [s],CH1 [V],CH2 [A],CH3 [Wb]\n", {"v": 1.0, "i": 2.0, "flux": 3.0}),
        ("t/s,Ch 1/mV,Channel 2/mA,C3/T\n", {"v": 1e-3, "i": 2e-3, "b": 3.0}),
        (",CH1,CH2,CH3\ns,V,mV,A\n", {"v": 1.0, "v_sense": 2e-3, "i": 3.0}),
        ("time,V(out),I(L1),Ix(U1:1)\n", {"v": 1.0, "i": 2.0}),
        ("time,V(mV),I(A),B\n", {"v": 1e-3, "i": 2.0, "b": 3.0}),
    ],
)
def test_channel_meaning_from_units_and_names(header, expected, parser):
    body = "".join(f"{k}e-6,1,2,3\n" for k in range(4))
    if "Ix(" in header:
        with pytest.raises(CaptureError, match="both look like channel 'i'"):
            read_capture(io.StringIO(header + body))
        cap = read_capture(io.StringIO(header + body), channels={"Ix(U1:1)": "ignore"})
    else:
        cap = read_capture(io.StringIO(header + body))
    assert set(cap.channels) == set(expected)
    for key, value in expected.items():
        np.testing.assert_allclose(cap.channels[key], value, rtol=4e-16)
    np.testing.assert_allclose(cap.time, np.arange(4) * 1e-6, rtol=4e-16)


def test_simulator_names_are_not_units(parser):
    # the old reader refused this file with "unknown unit 'n003'"
    text = "time V(n003) V(n005) I(L1)\n" + "".join(f"{k}e-9 {k} {2 * k} 0.5\n" for k in range(4))
    cap = read_capture(io.StringIO(text))
    assert cap.columns == {"time": "time", "v": "V(n003)", "v_sense": "V(n005)", "i": "I(L1)"}
    assert any("V(n005)" in n and "v_sense" in n for n in cap.notes)
    three = "time V(a) V(b) V(c)\n" + "0 1 2 3\n1e-9 1 2 3\n2e-9 1 2 3\n"
    with pytest.raises(CaptureError, match="3 voltage columns"):
        read_capture(io.StringIO(three))
    cap = read_capture(io.StringIO(three), channels={"V(a)": "ignore", "V(c)": "voltage"})
    assert cap.columns == {"time": "time", "v": "V(c)", "v_sense": "V(b)"}


def test_channels_override_every_guess(parser):
    text = "TIME;CH1;CH2\ns;V;V\n0;1;2\n1e-6;1;2\n2e-6;1;2\n"
    guessed = read_capture(io.StringIO(text))
    assert set(guessed.channels) == {"v", "v_sense"}
    # a current shunt read in volts: the user says what CH2 is
    cap = read_capture(io.StringIO(text), channels={"CH2": "current", 1: "sense voltage"},
                       units={"i": "A"})
    assert cap.columns == {"time": "TIME", "v_sense": "CH1", "i": "CH2"}
    assert cap.meaning["i"] == "argument channels['CH2']"
    counter = "TIME;CH1;CH2\ns;V;V\n0;1;2\n1e-6;2;2\n2e-6;3;2\n"
    cap = read_capture(io.StringIO(counter), channels={"TIME": "ignore", "CH1": "time"},
                       time_unit="ms")
    np.testing.assert_array_equal(cap.time, [1e-3, 2e-3, 3e-3])  # ms -> s, SI brochure
    assert cap.columns == {"time": "CH1", "v": "CH2"}
    for bad, fragment in [({"CH2": "voltage please"}, "is not a meaning"),
                          ({"CH9": "current"}, "matches no header name"),
                          ("CH2=i", "must be a mapping")]:
        with pytest.raises(CaptureError) as info:
            read_capture(io.StringIO(text), channels=bad)
        assert fragment in str(info.value)


def test_legacy_generic_names_without_units_are_stated(parser):
    text = "Time,CH1,CH2\n0,1,2\n1e-6,1,2\n2e-6,1,2\n"
    cap = read_capture(io.StringIO(text))
    assert cap.columns == {"time": "Time", "v": "CH1", "v_sense": "CH2"}
    assert sum("by position" in n for n in cap.notes) == 2
    assert any("no unit given" in n for n in cap.notes)


# --------------------------------------------------------------------------------------------
# hostile inputs (issue 11): not regular files, long text, huge declared sizes
# --------------------------------------------------------------------------------------------
def test_only_regular_files_are_read(tmp_path):
    fifo = tmp_path / "capture.csv"
    os.mkfifo(fifo)  # no writer: an ordinary open would block forever
    cases = [(fifo, "is a FIFO"), (tmp_path, "is a directory"),
             (Path("/dev/zero"), "character device"), (tmp_path / "absent.csv", "no such file")]
    for path, fragment in cases:
        for reader in (read_capture, read_csv_capture, read_npz_capture):
            with pytest.raises(CaptureError) as info:
                reader(path)
            assert str(info.value) == f"{path}: " + str(info.value).split(": ", 1)[1]
            assert fragment in str(info.value)


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads files of mode 000")
def test_unreadable_file_is_named(tmp_path):
    path = tmp_path / "locked.csv"
    path.write_text("time,v\n0,1\n1,2\n2,3\n")
    path.chmod(0)
    with pytest.raises(CaptureError, match="permission denied"):
        read_capture(path)


def test_wide_header_and_long_cell_give_short_messages(tmp_path):
    generator = _load_generator()
    path = tmp_path / "wide.csv"
    path.write_bytes(generator.wide_header_bytes(10_000))
    with pytest.raises(CaptureError) as info:
        read_capture(path)
    assert len(str(info.value)) < 300 and "10000 in all" in str(info.value)
    long_cell = tmp_path / "long_cell.csv"
    long_cell.write_text("time,v\n0,1\n1e-6," + "7" * 200_000 + "x\n2e-6,3\n")
    with pytest.raises(CaptureError) as info:
        read_capture(long_cell)
    message = str(info.value)
    assert len(message) < 300 and "row 3, column 2" in message and "200001 characters" in message


def test_npz_unused_member_is_never_decompressed(tmp_path):
    import tracemalloc

    generator = _load_generator()
    path = tmp_path / "bomb.npz"
    path.write_bytes(generator.zip_bomb_npz_bytes(unused_mib=256))
    assert path.stat().st_size < 2_000_000
    tracemalloc.start()
    try:
        cap = read_capture(path)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert cap.n_samples == 1000 and set(cap.channels) == {"v"}
    assert peak < 20 * 2**20, peak  # the 256 MiB member would need 256 MiB


def test_npz_text_member_beside_arrays_is_ignored(tmp_path):
    generator = _load_generator()
    t, v, _ = _invented_flyback()
    path = tmp_path / "with_text.npz"
    path.write_bytes(generator._zip({"t.npy": generator._npy(t), "v.npy": generator._npy(v),
                                     "readme.txt": b"invented\n"}))
    cap = read_capture(path)
    np.testing.assert_array_equal(cap.channels["v"], v)


def test_npz_huge_values_and_channels_option(tmp_path):
    t, v, _ = _invented_flyback()
    path = tmp_path / "huge.npz"
    np.savez(path, t=t, winding=np.where(np.arange(N) == 7, -1e308, v))
    with pytest.raises(CaptureError, match=r"array 'winding', sample 7 .*-1e\+308 V"):
        read_capture(path, channels={"winding": "voltage"})
    with pytest.raises(CaptureError, match="decimal= does not apply"):
        read_capture(path, decimal=",")


# --------------------------------------------------------------------------------------------
# command-line reader options (workbench/cli/reader_options.py) pass through to the reader
# --------------------------------------------------------------------------------------------
def test_cli_reader_options_pass_through(tmp_path):
    import argparse

    from workbench.cli.reader_options import add_reader_arguments, reader_options_from_args

    parser = argparse.ArgumentParser()
    add_reader_arguments(parser)
    args = parser.parse_args(["--delimiter", "semicolon", "--decimal", "comma", "--channel", "CH2=current",
                              "--channel", "1=voltage", "--time-unit", "us", "--unit", "i=mA"])
    options = reader_options_from_args(args)
    assert options == {"delimiter": ";", "decimal": ",", "channels": {"CH2": "current", 1: "voltage"},
                       "time_unit": "us", "units": {"i": "mA"}}
    path = tmp_path / "scope.csv"
    path.write_text("TIME;CH1;CH2\n0;1,5;2\n1;1,5;2\n2;1,5;2\n")
    cap = read_capture(path, **options)
    np.testing.assert_allclose(cap.time, [0, 1e-6, 2e-6], rtol=1e-15)
    np.testing.assert_allclose(cap.channels["i"], 2e-3, rtol=1e-15)
    assert cap.columns["v"] == "CH1"
    assert reader_options_from_args(parser.parse_args([])) == {}
    with pytest.raises(ValueError, match="--channel 'CH2': expected NAME=VALUE"):
        reader_options_from_args(parser.parse_args(["--channel", "CH2"]))
