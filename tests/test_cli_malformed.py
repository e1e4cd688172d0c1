"""Every malformed or unusable capture ends with exit status 2 and one clear line on stderr.

The corpus lives in tests/data/malformed/ (written by tests/data/make_malformed.py) and
tests/data/capture_edge/ (a capture shorter than one period and a clipped one). Each file
goes through the real command line in a subprocess, as a user would run it.
"""
import os
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CORPUS = sorted(
    p for folder in ("malformed", "capture_edge") for p in (ROOT / "tests" / "data" / folder).iterdir()
    if p.is_file() and p.suffix in (".csv", ".npz", ".txt")
)


def _run(path: Path):
    env = {**os.environ, "PYTHONWARNINGS": "error"}
    return subprocess.run(
        [sys.executable, "-m", "workbench", "capture", str(path), "--turns", "10", "--area", "1e-4", "--json"],
        capture_output=True, text=True, cwd=ROOT, env=env, timeout=120,
    )


@pytest.fixture(scope="module")
def results():
    with ThreadPoolExecutor(max_workers=4) as pool:
        return dict(zip(CORPUS, pool.map(_run, CORPUS)))


def test_corpus_is_large_enough():
    assert len(CORPUS) >= 25


@pytest.mark.parametrize("path", CORPUS, ids=lambda p: f"{p.parent.name}/{p.name}")
def test_bad_capture_exits_2_with_one_clear_line(results, path):
    proc = results[path]
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert path.name in lines[0]  # names the file
    assert proc.stdout == ""  # no partial JSON document


def test_edge_captures_say_what_is_wrong(results):
    edge = ROOT / "tests" / "data" / "capture_edge"
    assert "clipped" in results[edge / "clipped_flat_topped_v_sense.csv"].stderr
    assert "period" in results[edge / "fewer_than_one_period_100kHz.csv"].stderr
