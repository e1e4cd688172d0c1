"""The worked session in README.md and the Examples sections of the public functions run as doctests.

The expected values printed there are the library's own output, so these tests guard the
documentation against drift (that the numbers are right is checked against outside
references in the module tests).
"""
from __future__ import annotations

import doctest
import importlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
FLAGS = doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS

MODULES = [
    "workbench.engine",
    "workbench.shapes",
    "workbench.analysis.sweep",
    "workbench.analysis.compare",
    "workbench.waveforms",
    "workbench.models.steinmetz",
    "workbench.models.separation",
]


def test_readme_session(monkeypatch):
    monkeypatch.chdir(ROOT)  # the session names files relative to the project root
    result = doctest.testfile(str(ROOT / "README.md"), module_relative=False, optionflags=FLAGS, verbose=False)
    assert result.attempted > 5
    assert result.failed == 0


@pytest.mark.parametrize("name", MODULES)
def test_module_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=FLAGS, verbose=False)
    assert result.failed == 0
