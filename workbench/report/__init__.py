"""Export of inputs, results and plots: JSON, CSV and standalone HTML, written atomically."""
from workbench.report.export import (
    atomic_write_text,
    build_record,
    package_info,
    to_jsonable,
    write_bundle,
    write_csv,
    write_html,
    write_json,
)

__all__ = [
    "atomic_write_text",
    "build_record",
    "package_info",
    "to_jsonable",
    "write_bundle",
    "write_csv",
    "write_html",
    "write_json",
]
