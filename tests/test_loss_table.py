"""Tests of the loss-table reader (workbench.analysis.loss_table)."""
from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np
import pytest

from workbench.analysis.loss_table import (
    LossTable,
    loss_table_from_arrays,
    read_loss_table,
    write_loss_table,
)

REPO = Path(__file__).resolve().parent.parent


def _write(tmp_path, text, name="table.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


# --- headers and units ------------------------------------------------------------------------
def test_plain_si_header_needs_no_options(tmp_path):
    path = _write(tmp_path, "freq (Hz), b_peak (T), loss (W/m3)\n50, 1.0, 100\n100, 1.5, 400\n")
    t = read_loss_table(path)
    np.testing.assert_array_equal(t.freq, [50.0, 100.0])
    np.testing.assert_array_equal(t.b_peak, [1.0, 1.5])
    np.testing.assert_array_equal(t.loss, [100.0, 400.0])
    assert t.shape == ("sine", "sine")
    assert t.temperature is None
    assert t.rows.tolist() == [2, 3]
    assert t.source == str(path)


def test_engineering_header_units_are_converted_to_si(tmp_path):
    path = _write(tmp_path, "f [kHz], B_pp (mT), P (mW/cm3), temp (C)\n100, 200, 80, 100\n")
    t = read_loss_table(path)
    # SI prefixes (BIPM SI brochure, 9th ed., 2019): 1 kHz = 1e3 Hz, 1 mT = 1e-3 T,
    # 1 mW/cm3 = 1e-3 W / 1e-6 m3 = 1e3 W/m3; peak = peak-to-peak / 2 (definition).
    assert t.freq[0] == pytest.approx(100e3, rel=1e-12)
    assert t.b_peak[0] == pytest.approx(0.1, rel=1e-12)
    assert t.loss[0] == pytest.approx(80e3, rel=1e-12)
    assert t.temperature[0] == 100.0
    assert t.columns["flux_pp"] == "B_pp (mT)"


@pytest.mark.parametrize("unit, factor", [("kW/m3", 1e3), ("W/cm3", 1e6), ("mW/cm3", 1e3), ("W/m3", 1.0)])
def test_volumetric_loss_units(tmp_path, unit, factor):
    # SI prefixes, BIPM SI brochure 2019; (1 cm)^3 = 1e-6 m^3
    path = _write(tmp_path, f"freq (Hz), b_peak (T), loss ({unit})\n50, 1, 2.5\n")
    assert read_loss_table(path).loss[0] == pytest.approx(2.5 * factor, rel=1e-12)


def test_specific_loss_needs_density(tmp_path):
    path = _write(tmp_path, "freq (Hz), b_peak (T), loss (W/kg)\n50, 1.5, 4.0\n")
    with pytest.raises(ValueError, match="density"):
        read_loss_table(path)
    t = read_loss_table(path, density=7700.0)
    # P_v = P_m * density (definition of specific loss)
    assert t.loss[0] == pytest.approx(4.0 * 7700.0, rel=1e-12)
    assert t.density == 7700.0


def test_units_as_options_when_header_has_none(tmp_path):
    path = _write(tmp_path, "f, b, p\n100, 50, 12\n")
    with pytest.raises(ValueError, match="peak or peak-to-peak"):
        read_loss_table(path, freq_unit="kHz", flux_unit="mT", loss_unit="kW/m3")
    t = read_loss_table(path, freq_unit="kHz", flux_unit="mT", loss_unit="kW/m3", flux_kind="pp")
    assert t.freq[0] == pytest.approx(1e5)
    assert t.b_peak[0] == pytest.approx(0.025)
    assert t.loss[0] == pytest.approx(12e3)


def test_missing_unit_is_an_error_naming_the_column(tmp_path):
    path = _write(tmp_path, "freq, b_peak (T), loss (W/m3)\n50, 1, 10\n")
    with pytest.raises(ValueError, match=r"table\.csv: column 'freq' has no unit"):
        read_loss_table(path)


def test_unit_option_contradicting_header_is_an_error(tmp_path):
    path = _write(tmp_path, "freq (kHz), b_peak (T), loss (W/m3)\n50, 1, 10\n")
    with pytest.raises(ValueError, match="states unit 'kHz', option says 'Hz'"):
        read_loss_table(path, freq_unit="Hz")


def test_wrong_dimension_unit(tmp_path):
    path = _write(tmp_path, "freq (mT), b_peak (T), loss (W/m3)\n50, 1, 10\n")
    with pytest.raises(ValueError, match="'mT' is not a unit of Hz"):
        read_loss_table(path)


def test_column_mapping_option(tmp_path):
    path = _write(tmp_path, "Frequenz (Hz); Bmax (T); Verlust (W/kg)\n50; 1.0; 1.7\n")
    t = read_loss_table(path, columns={"freq": "Frequenz", "b_peak": "Bmax", "loss": "Verlust"}, density=7650)
    assert t.freq[0] == 50 and t.b_peak[0] == 1.0
    assert t.loss[0] == pytest.approx(1.7 * 7650)


def test_shapes_duty_and_temperature_in_kelvin(tmp_path):
    text = (
        "freq (Hz), b_peak (T), loss (W/m3), temperature (K), shape, duty (%)\n"
        "1e5, 0.1, 5e4, 373.15, sine,\n"
        "1e5, 0.1, 6e4, 373.15, triangle, 30\n"
        "1e5, 0.1, 6e4, 373.15, Tri,\n"
        "1e5, 0.1, 7e4, 373.15, trapezoid, 80\n"
    )
    t = read_loss_table(_write(tmp_path, text))
    assert t.shape == ("sine", "triangle", "triangle", "trapezoid")
    assert math.isnan(t.duty[0])
    # 30 % = 0.30; a triangle without duty is the symmetric one (common practice, no source)
    np.testing.assert_allclose(t.duty[1:], [0.3, 0.5, 0.8])
    # 0 degC = 273.15 K (SI brochure 2019, sec. 2.3.1)
    np.testing.assert_allclose(t.temperature, 100.0)


def test_comment_lines_count_in_row_numbers(tmp_path):
    text = "# invented\n# second comment\nfreq (Hz), b_peak (T), loss (W/m3)\n\n50, 1, 10\n60, 1, abc\n"
    with pytest.raises(ValueError) as info:
        read_loss_table(_write(tmp_path, text))
    msg = str(info.value)
    assert "table.csv" in msg and "row 6" in msg and "'loss (W/m3)'" in msg and "'abc'" in msg


# --- malformed tables -----------------------------------------------------------------------
HEAD = "freq (Hz), b_peak (T), loss (W/m3)\n"


@pytest.mark.parametrize(
    "body, pattern",
    [
        ("50, 1, -3\n", r"row 2, column 'loss \(W/m3\)': loss must be positive, got -3"),
        ("50, 1, 0\n", r"row 2, column 'loss \(W/m3\)': loss must be positive"),
        ("50, 1, nan\n", r"row 2, column 'loss \(W/m3\)': value must be finite, got 'nan'"),
        ("50, , 10\n", r"row 2, column 'b_peak \(T\)': empty cell"),
        ("50, 1, 10\n60, x1, 10\n", r"row 3, column 'b_peak \(T\)': cannot read 'x1' as a number"),
        ("-50, 1, 10\n", r"row 2, column 'freq \(Hz\)': frequency must be positive"),
        ("50, 1, 10, 4\n", r"row 2: 4 cells, the header has 3"),
        ("\"50,5\", 1, 10\n", r"'50,5' as a number \(a decimal comma"),
    ],
)
def test_bad_cells_name_file_row_and_column(tmp_path, body, pattern):
    path = _write(tmp_path, HEAD + body, name="bench.csv")
    with pytest.raises(ValueError, match=pattern) as info:
        read_loss_table(path)
    assert "bench.csv" in str(info.value)


def test_bad_shape_and_duty(tmp_path):
    head = "freq (Hz), b_peak (T), loss (W/m3), shape, duty\n"
    with pytest.raises(ValueError, match="row 2, column 'shape': unknown shape 'square'"):
        read_loss_table(_write(tmp_path, head + "50, 1, 10, square, 0.5\n"))
    with pytest.raises(ValueError, match=r"row 2, column 'duty': triangle duty must lie in \(0, 1\), got 1.5"):
        read_loss_table(_write(tmp_path, head + "50, 1, 10, triangle, 1.5\n"))
    with pytest.raises(ValueError, match="row 2, column 'duty': empty cell"):
        read_loss_table(_write(tmp_path, head + "50, 1, 10, trapezoid,\n"))


def test_missing_columns_and_empty_files(tmp_path):
    with pytest.raises(ValueError, match="no loss column"):
        read_loss_table(_write(tmp_path, "freq (Hz), b_peak (T)\n50, 1\n"))
    with pytest.raises(ValueError, match="no flux column"):
        read_loss_table(_write(tmp_path, "freq (Hz), loss (W/m3)\n50, 1\n"))
    with pytest.raises(ValueError, match="no data rows"):
        read_loss_table(_write(tmp_path, HEAD))
    with pytest.raises(ValueError, match="no header and no data"):
        read_loss_table(_write(tmp_path, "# only a comment\n"))
    with pytest.raises(ValueError, match="more than one flux column"):
        read_loss_table(_write(tmp_path, "freq (Hz), b_peak (T), b_pp (T), loss (W/m3)\n50, 1, 2, 3\n"))


def test_missing_file_is_a_clear_error(tmp_path):
    with pytest.raises(ValueError, match=r"absent\.csv: cannot read the loss table: no such file"):
        read_loss_table(tmp_path / "absent.csv")


def test_buffer_input():
    t = read_loss_table(io.StringIO(HEAD + "50, 1, 10\n"))
    assert t.source == "<buffer>" and t.loss[0] == 10


# --- table object ---------------------------------------------------------------------------
def test_table_is_read_only_and_subsets():
    t = loss_table_from_arrays([50, 100, 200], [1.0, 1.0, 1.5], [10, 25, 70], temperature=[25, 25, 100])
    with pytest.raises(ValueError):
        t.freq[0] = 3.0
    hot = t.at_temperature(100)
    assert len(hot) == 1 and hot.rows.tolist() == [3]
    with pytest.raises(ValueError, match="no rows at temperature 60"):
        t.at_temperature(60)
    assert isinstance(t.subset([0, 1]), LossTable)


def test_arrays_are_checked():
    with pytest.raises(ValueError, match="row 2: loss must be finite and positive"):
        loss_table_from_arrays([50, 60], [1, 1], [10, -1])
    with pytest.raises(ValueError, match="shape must be one of"):
        loss_table_from_arrays([50], [1], [10], shape="square")


def test_write_round_trip_is_atomic(tmp_path):
    t = loss_table_from_arrays([1e5, 2e5], [0.1, 0.1], [5e4, 1.2e5], temperature=100.0,
                               shape=["sine", "triangle"], duty=[np.nan, 0.25])
    path = write_loss_table(t, tmp_path / "out.csv", comment="invented")
    back = read_loss_table(path)
    np.testing.assert_allclose(back.loss, t.loss)
    np.testing.assert_allclose(back.duty, t.duty)
    assert back.shape == t.shape
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]


def test_bundled_demo_table_reads_and_is_labelled_invented():
    path = REPO / "data" / "demo_loss_table.csv"
    first = path.read_text(encoding="utf-8").splitlines()[0]
    assert first.startswith("#") and "INVENTED" in first
    t = read_loss_table(path)
    assert len(t) >= 20
    assert set(t.shape) == {"sine", "triangle"}


# --- dialects of real exports (issue 10) -------------------------------------------------------
# Values are the numbers the tests write; unit factors from the SI brochure (BIPM, 9th
# edition, 2019, Table 7). All tables are invented.
def test_semicolon_decimal_comma_table_with_preamble(tmp_path):
    text = (
        "Material;ferrite sample F-7 (invented)\n"
        "Temperature chamber;100,0 °C\n"
        "Operator;bench 2 (invented)\n"
        "freq (kHz);b_peak (mT);loss (kW/m3);temp (C)\n"
        "100;50,0;12,5;100\n"
        "200;50,0;31,25;100\n"
        "100;100,0;60;100\n"
    )
    t = read_loss_table(_write(tmp_path, text))
    np.testing.assert_allclose(t.freq, [1e5, 2e5, 1e5], rtol=1e-15)
    np.testing.assert_allclose(t.b_peak, [0.05, 0.05, 0.1], rtol=1e-15)
    np.testing.assert_allclose(t.loss, [12.5e3, 31.25e3, 60e3], rtol=1e-15)
    assert t.rows.tolist() == [5, 6, 7]
    assert t.metadata["Temperature chamber"] == "100,0 °C"
    assert t.metadata["decimal"] == "," and t.metadata["delimiter"] == "';'"


def test_tab_table_and_explicit_options(tmp_path):
    text = "f (Hz)\tb_peak (T)\tloss (W/m3)\n50\t1,5\t400\n60\t1,5\t500\n"
    path = _write(tmp_path, text)
    t = read_loss_table(path, delimiter="tab", decimal="comma")
    np.testing.assert_array_equal(t.b_peak, [1.5, 1.5])
    with pytest.raises(ValueError, match=r"row 2, column 'b_peak \(T\)': cannot read '1,5'"):
        read_loss_table(path, decimal=".")
    with pytest.raises(ValueError, match="cannot both be a comma"):
        read_loss_table(path, delimiter=",", decimal=",")
    with pytest.raises(ValueError, match="decimal must be"):
        read_loss_table(path, decimal="x")


def test_no_header_row_is_named(tmp_path):
    with pytest.raises(ValueError, match=r"no header row naming the table's columns.*'a', 'b'"):
        read_loss_table(_write(tmp_path, "a,b\n1,2\n"))


# --- hostile cells and files (issue 11) ----------------------------------------------------------
HEAD3 = "freq (Hz), b_peak (T), loss (W/m3)\n"


@pytest.mark.parametrize(
    ("row", "fragment"),
    [
        ("50, 1, 1e300\n", r"row 2: loss 1e\+300 W/m\^3 is outside what a core-loss measurement holds"),
        ("50, 1e-320, 10\n", r"row 2: b_peak 1e-320 T is outside"),
        ("1e-320, 1, 10\n", r"row 2: freq 1e-320 Hz is outside"),
        ("50, 1, 1e999\n", r"'1e999' is beyond the range of a float"),
        ("50, \uff15, 10\n", r"cannot read '\uff15' as a number \(only ASCII digits"),
        ("50, 1, 1_000\n", r"cannot read '1_000' as a number \(digit separators"),
        ("50, True, 10\n", r"cannot read 'True' as a number"),
        ("50, 1, " + "9" * 200 + "\n", r"cannot read '9{30}\.\.\.' \(200 characters\)"),
    ],
)
def test_hostile_cells_are_refused_with_the_cell_named(tmp_path, row, fragment):
    with pytest.raises(ValueError, match=fragment) as info:
        read_loss_table(_write(tmp_path, HEAD3 + row))
    assert len(str(info.value)) < 300


def test_overflowing_cell_never_reaches_the_fit(tmp_path):
    # the Steinmetz fit raised OverflowError on a 1e300 cell; the reader refuses it first
    rows = "".join(f"{f}, {b}, {10.0 * f ** 1.3 * b ** 2.5:.6g}\n" for f in (50, 100, 200) for b in (0.5, 1.0))
    table = read_loss_table(_write(tmp_path, HEAD3 + rows))
    assert len(table) == 6
    with pytest.raises(ValueError, match="outside what a core-loss"):
        read_loss_table(_write(tmp_path, HEAD3 + rows + "400, 1.0, 1e300\n"))


@pytest.mark.parametrize(("cell", "ok"), [("-500", False), ("-273.15", True), ("1300", False), ("25", True)])
def test_temperature_below_absolute_zero_is_refused(tmp_path, cell, ok):
    text = "freq (Hz), b_peak (T), loss (W/m3), temp (C)\n50, 1, 10, " + cell + "\n"
    if ok:
        assert read_loss_table(_write(tmp_path, text)).temperature[0] == float(cell)
    else:
        with pytest.raises(ValueError, match=r"row 2: temperature .* degC is outside"):
            read_loss_table(_write(tmp_path, text))


def test_booleans_are_not_numbers():
    with pytest.raises(ValueError, match="freq must be a number, got a boolean"):
        loss_table_from_arrays(True, 1.0, 10.0)
    with pytest.raises(ValueError, match="b_peak must hold numbers"):
        loss_table_from_arrays([50.0, 60.0], [True, 1.0], [10.0, 12.0])
    with pytest.raises(ValueError, match="density must be a number"):
        read_loss_table(io.StringIO(HEAD3 + "50, 1, 10\n"), density=True)


def test_long_line_and_non_regular_files(tmp_path):
    import os

    long_line = HEAD3 + "50, 1, " + "7" * 200_000 + "\n"
    with pytest.raises(ValueError, match=r"row 2 is 200007 characters long") as info:
        read_loss_table(_write(tmp_path, long_line))
    assert len(str(info.value)) < 300
    fifo = tmp_path / "fifo_table.csv"
    os.mkfifo(fifo)
    for path, fragment in [(fifo, "is a FIFO"), (tmp_path, "is a directory"),
                           ("/dev/zero", "character device")]:
        with pytest.raises(ValueError, match=fragment):
            read_loss_table(path)
