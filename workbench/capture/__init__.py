"""Reading oscilloscope and data-logger captures into SI arrays (numpy only at import).

The readers load on first use, so the record-handling modules of this package
(steady_state, flux) can be imported by the waveform layer without them.
"""
from __future__ import annotations

import importlib

_READERS = ("CHANNEL_UNITS", "CaptureData", "CaptureError", "read_capture", "read_csv_capture", "read_npz_capture")

__all__ = list(_READERS)


def __getattr__(name: str):
    if name not in _READERS:
        raise AttributeError(f"module 'workbench.capture' has no attribute {name!r}")
    value = getattr(importlib.import_module("workbench.capture.readers"), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
