"""Write the corpus of malformed capture files used by tests/test_readers.py.

Run from the project root to regenerate (the output is deterministic, byte for byte)::

    .venv/bin/python tests/data/make_malformed.py

Every file is a small, invented capture of a bench test of a 100 kHz flyback choke (or a
20 kHz inverter output filter choke) with one thing wrong, named in the file name. The
values are invented for the tests; no real instrument or person produced them.

``tests/data/malformed/``   files the reader must refuse with a clear CaptureError.
``tests/data/capture_edge/`` files that read fine but that the analysis layer must refuse or
                             warn about (less than one period, a clipped channel).

The two oversized cases (a header of ~1.2 MB, more than 10000 text lines) are too large to
keep in the repository; the tests build them in a temporary directory with
:func:`huge_header_bytes` and :func:`many_text_lines_bytes`.
"""
from __future__ import annotations

import io
import math
import os
import sys
import tempfile
import zipfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
MALFORMED = HERE / "malformed"
EDGE = HERE / "capture_edge"

HEADER = "time (s),v (V),i (A)\n"
META = "Instrument,bench scope (invented)\nSetup,100 kHz flyback choke test (invented data)\n"


def _rows(n: int, start: int = 0) -> list[str]:
    """n good rows of a 100 kHz test at 10 ns sampling: time, winding voltage, current."""
    out = []
    for k in range(start, start + n):
        t = k * 1e-8
        v = 24.0 if (k % 1000) < 400 else -16.0
        i = 0.5 + 0.001 * (k % 1000)
        out.append(f"{t:.3e},{v:.3f},{i:.4f}\n")
    return out


def _csv(*parts: str | list[str]) -> bytes:
    text = "".join(p if isinstance(p, str) else "".join(p) for p in parts)
    return text.encode("ascii")


def _npz(**arrays) -> bytes:
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    return buf.getvalue()


def _npz_object_array() -> bytes:
    buf = io.BytesIO()
    np.savez(buf, t=np.arange(5) * 1e-8, v=np.array([1.0, "x", None, 2, 3], dtype=object))
    return buf.getvalue()


def malformed_files() -> dict[str, bytes]:
    """File name -> content for every malformed case (deterministic)."""
    t5 = np.arange(5) * 1e-8
    rng = np.random.default_rng(20240611)  # fixed seed: the "binary" file is reproducible
    files: dict[str, bytes] = {
        "empty_file.csv": b"",
        "whitespace_only.csv": b"   \n\n\t\n",
        "header_only.csv": _csv(HEADER),
        "only_metadata_lines.csv": _csv(META, "Sample interval,1e-8\n"),
        "single_column_time_only.csv": _csv("time (s)\n", [f"{k * 1e-8:.3e}\n" for k in range(8)]),
        "single_column_no_header.csv": _csv([f"{0.1 * k:.3f}\n" for k in range(8)]),
        "text_in_numeric_cell_row7.csv": _csv(
            HEADER, _rows(5), "5.000e-08,24.OOO,0.5050\n", _rows(3, 6)
        ),
        "nan_in_voltage_row5.csv": _csv(HEADER, _rows(3), "3.000e-08,nan,0.5030\n", _rows(3, 4)),
        "inf_in_current_row4.csv": _csv(HEADER, _rows(2), "2.000e-08,24.000,inf\n", _rows(3, 3)),
        "empty_cell_row6.csv": _csv(HEADER, _rows(4), "4.000e-08,,0.5040\n", _rows(3, 5)),
        "time_not_increasing_row6.csv": _csv(
            HEADER, _rows(4), "2.500e-08,24.000,0.5040\n", _rows(3, 5)
        ),
        "duplicate_time_stamp_row5.csv": _csv(
            HEADER, _rows(3), "2.000e-08,24.000,0.5030\n", _rows(3, 4)
        ),
        "fewer_than_three_rows.csv": _csv(HEADER, _rows(2)),
        "mixed_delimiters_row5.csv": _csv(HEADER, _rows(3), "3.000e-08;24.000;0.5030\n", _rows(3, 4)),
        "absurd_time_unit_parsecs.csv": _csv("time (parsecs),v (V),i (A)\n", _rows(5)),
        "absurd_voltage_unit_kV_per_furlong.csv": _csv("time (s),v (kV/furlong),i (A)\n", _rows(5)),
        "wrong_unit_flux_density_in_mm.csv": _csv("time (s),B (mm)\n", "0,0.1\n1e-8,0.2\n2e-8,0.3\n"),
        "binary_file.csv": bytes(rng.integers(0, 256, size=2048, dtype=np.uint8)),
        "utf16_encoded.csv": ("\ufeff" + HEADER + "".join(_rows(4))).encode("utf-16-le"),
        "ragged_row_extra_field_row4.csv": _csv(
            HEADER, _rows(2), "2.000e-08,24.000,0.5020,7.7\n", _rows(3, 3)
        ),
        "ragged_row_missing_field_row5.csv": _csv(HEADER, _rows(3), "3.000e-08,24.000\n", _rows(3, 4)),
        "bom_then_garbage.csv": b"\xef\xbb\xbf" + b"%%%% not a capture %%%%\n<<<>>>\n",
        "decimal_comma_in_a_comma_delimited_table_row3.csv": _csv(
            "time (s),v (V)\n", "0,24\n", "1e-8,24,5\n", "2e-8,-16\n"
        ),
        "header_names_3_data_fields_2.csv": _csv(HEADER, "0,24\n1e-8,24\n2e-8,-16\n"),
        "no_time_column_no_interval.csv": _csv("v (V),i (A)\n", "24,0.5\n24,0.6\n-16,0.5\n"),
        "unrecognised_column_names.csv": _csv(
            "time (s),probe A,probe B\n", "0,1,2\n1e-8,1,2\n2e-8,1,2\n"
        ),
        "two_columns_look_like_voltage.csv": _csv(
            "time (s),v (V),voltage (V)\n", "0,1,2\n1e-8,1,2\n2e-8,1,2\n"
        ),
        "headerless_without_column_map.csv": _csv([r.replace(",", " ") for r in _rows(5)]),
        "unreadable_sample_interval.csv": _csv("Sample interval,fast\n", "v (V)\n", "1\n2\n3\n"),
        "negative_sample_interval.csv": _csv("Sample interval,-1e-8\n", "v (V)\n", "1\n2\n3\n"),
        "truncated_last_row.csv": _csv(HEADER, _rows(5), "5.000e-0"),
        "time_backwards_after_blank_lines_row10.csv": _csv(
            HEADER, _rows(3), "\n\n", _rows(2, 3), "\n", "1.000e-08,24.000,0.5010\n"
        ),
        "npz_not_a_zip.npz": b"this is text with an .npz name\n",
        "npz_object_array.npz": _npz_object_array(),
        "npz_lengths_differ.npz": _npz(t=t5, v=np.ones(4)),
        "npz_nan_in_b_sample3.npz": _npz(t=t5, b=np.array([0.1, 0.2, 0.3, np.nan, 0.1])),
        "npz_two_dimensional_v.npz": _npz(t=t5, v=np.ones((5, 2))),
        "npz_no_channel_arrays.npz": _npz(t=t5, temperature=np.full(5, 80.0)),
        "npz_time_not_increasing_sample2.npz": _npz(
            t=np.array([0.0, 2e-8, 1e-8, 3e-8, 4e-8]), v=np.ones(5)
        ),
        # hostile files (issue 11): each once gave a traceback, a hang or a memory blow-up
        "zip_named_csv_with_text_member.csv": _zip({"notes.txt": b"bench notes (invented)\n"}),
        "npz_member_not_an_array.npz": _zip(
            {"t.npy": _npy(t5), "v.npy": b"not an array, only text (invented)\n"}
        ),
        "npz_header_declares_1e11_samples.npz": _zip(
            {"t.npy": _npy(t5), "v.npy": _npy_header_only((10**11,))}
        ),
        "npz_inf_in_v_beside_a_text_member.npz": _zip(
            {"t.npy": _npy(t5), "v.npy": _npy(np.array([1.0, 2.0, 3.0, 4.0, np.inf])),
             "readme.txt": b"invented\n"}
        ),
        "values_plus_minus_1e308_row3.csv": _csv(HEADER, _rows(1), "1.000e-08,1e308,0.5\n",
                                                 "2.000e-08,-1e308,0.5\n", _rows(2, 3)),
        "fullwidth_digit_row4.csv": _csv(HEADER, _rows(2)).replace(b"\n", b"\n", 1)
        + "2.000e-08,\uff15,0.5020\n".encode("utf-8") + _csv(_rows(3, 3)),
        "digit_separator_1_000_row3.csv": _csv(HEADER, _rows(1), "1.000e-08,1_000,0.5010\n",
                                               _rows(3, 2)),
        "time_steps_of_1e-300_s.csv": _csv(
            HEADER, [f"{k * 1e-300!r},{24.0 if k % 2 else -16.0},0.5\n" for k in range(6)]
        ),
        "current_column_in_volts.csv": _csv("time (s),v (V),current (V)\n", _rows(5)),
    }
    return files


def _zip(members: dict[str, bytes]) -> bytes:
    """A zip archive with fixed time stamps (deterministic bytes)."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        for name, content in members.items():
            info = zipfile.ZipInfo(name, date_time=(2024, 6, 11, 12, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            zf.writestr(info, content)
    return buf.getvalue()


def _npy(array: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, array, allow_pickle=False)
    return buf.getvalue()


def _npy_header_only(shape: tuple[int, ...]) -> bytes:
    """A .npy header declaring `shape` float64 samples, followed by no data at all."""
    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(
        buf, {"descr": "<f8", "fortran_order": False, "shape": shape}
    )
    return buf.getvalue()  # the header writer puts the magic string first


def edge_files() -> dict[str, bytes]:
    """Files that read fine but are not analysable as they stand (invented data)."""
    dt = 1e-8
    # 100 kHz flyback choke, 10 ns sampling, 600 samples = 6 us < one 10 us period
    k = np.arange(600)
    t = k * dt
    # invented ripple on the rectangular winding voltage, as a real probe shows; an exactly
    # flat noise-free rectangle would be flagged as clipped by the reader
    ripple = 0.05 * np.sin(2 * math.pi * 7.3e6 * t) + 0.02 * np.sin(2 * math.pi * 31e6 * t)
    v = np.where((k % 1000) < 400, 24.0, -16.0) + ripple
    i = 0.5 + 0.6 * np.where((k % 1000) < 400, (k % 1000) / 400, 1 - ((k % 1000) - 400) / 600)
    short = "time (s),v (V),i (A)\n" + "".join(
        f"{a:.3e},{b:.3f},{c:.5f}\n" for a, b, c in zip(t, v, i)
    )
    # 20 kHz inverter output filter choke: sense winding voltage clipped by the scope at
    # +/-0.4 V while the true signal peaks at 0.5 V, two periods at 100 ns sampling
    n = 1000
    t2 = np.arange(n) * 1e-7
    true = 0.5 * np.sin(2 * math.pi * 20e3 * t2)
    # the recorder's own noise (invented, 3 mV rms) is on every sample it could still measure;
    # past its range it writes the extreme code exactly: that contrast is the evidence of clipping
    noisy = true + 0.003 * np.random.default_rng(7).standard_normal(n)
    clipped = np.clip(np.round(noisy, 4), -0.4, 0.4)
    cur = 2.0 * np.sin(2 * math.pi * 20e3 * t2 - 0.3)
    flat = "Instrument,bench scope (invented)\nSetup,20 kHz filter choke test (invented data)\n"
    flat += "t [us],v_sense [V],i [A]\n" + "".join(
        f"{a * 1e6:.2f},{b:.4f},{c:.4f}\n" for a, b, c in zip(t2, clipped, cur)
    )
    return {
        "fewer_than_one_period_100kHz.csv": short.encode("ascii"),
        "clipped_flat_topped_v_sense.csv": flat.encode("ascii"),
    }


def huge_header_bytes() -> bytes:
    """~1.2 MB of metadata text before the first numeric row (too large to commit)."""
    line = "Comment,invented bench note padding the header of a capture file\n"
    count = 1_200_000 // len(line) + 1
    return (line * count + HEADER + "".join(_rows(5))).encode("ascii")


def wide_header_bytes(columns: int = 10_000) -> bytes:
    """A header of `columns` unrecognised names over rows of as many numbers (~0.3 MB)."""
    header = ",".join(f"probe{k}" for k in range(columns)) + "\n"
    row = ",".join("1" for _ in range(columns)) + "\n"
    return (header + row * 3).encode("ascii")


def zip_bomb_npz_bytes(unused_mib: int = 1024) -> bytes:
    """An .npz of ~1 MB: a small capture and an unused member of `unused_mib` MiB of zeros.

    The zeros are streamed into the archive, never held in memory whole.
    """
    buf = io.BytesIO()
    t = np.arange(1000) * 1e-8
    v = np.where(np.arange(1000) % 100 < 40, 24.0, -16.0) + 0.01 * np.sin(np.arange(1000))
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("t.npy", _npy(t))
        zf.writestr("v.npy", _npy(v))
        hb = io.BytesIO()
        np.lib.format.write_array_header_1_0(
            hb, {"descr": "<f8", "fortran_order": False, "shape": (unused_mib * 2**17,)}
        )
        with zf.open("unused_zeros.npy", "w", force_zip64=True) as member:
            member.write(hb.getvalue())
            block = bytes(1 << 20)
            for _ in range(unused_mib):
                member.write(block)
    return buf.getvalue()


def many_text_lines_bytes() -> bytes:
    """10001 short metadata lines (under 1 MB) before the first numeric row."""
    return ("Note,x\n" * 10_001 + HEADER + "".join(_rows(5))).encode("ascii")


def _write_atomic(path: Path, content: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(content)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def write_all(malformed_dir: Path = MALFORMED, edge_dir: Path = EDGE) -> list[Path]:
    """Write both corpora; return the paths written."""
    written = []
    for directory, files in ((malformed_dir, malformed_files()), (edge_dir, edge_files())):
        directory.mkdir(parents=True, exist_ok=True)
        for name, content in files.items():
            path = directory / name
            _write_atomic(path, content)
            written.append(path)
    return written


if __name__ == "__main__":
    paths = write_all()
    print(f"wrote {len(paths)} files", file=sys.stderr)
