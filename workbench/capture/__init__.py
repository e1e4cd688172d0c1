"""Reading oscilloscope and data-logger captures into SI arrays (numpy only at import)."""
from workbench.capture.readers import (
    CHANNEL_UNITS,
    CaptureData,
    CaptureError,
    read_capture,
    read_csv_capture,
    read_npz_capture,
)

__all__ = [
    "CHANNEL_UNITS",
    "CaptureData",
    "CaptureError",
    "read_capture",
    "read_csv_capture",
    "read_npz_capture",
]
