"""Records of an analysis leaving the tool: an HTML report with JSON and CSV beside it.

:func:`write_report` is the one writer (panels and command line); :mod:`workbench.report.numbers`
is the one number formatter of everything shown on screen or in a report.
"""
from workbench.report.document import (
    CAUTIONS,
    default_export_folder,
    file_entry,
    key_unit,
    material_entry,
    render_report,
    report_paths,
    write_report,
)
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
from workbench.report.numbers import eng, eng_column, eng_parts, unit_label
from workbench.report.records import capture_record, condition_inputs, emit_report, loss_result_record, sweep_record

__all__ = [
    "CAUTIONS",
    "atomic_write_text",
    "build_record",
    "capture_record",
    "condition_inputs",
    "emit_report",
    "loss_result_record",
    "sweep_record",
    "default_export_folder",
    "eng",
    "eng_column",
    "eng_parts",
    "file_entry",
    "key_unit",
    "material_entry",
    "package_info",
    "render_report",
    "report_paths",
    "to_jsonable",
    "unit_label",
    "write_bundle",
    "write_csv",
    "write_html",
    "write_json",
    "write_report",
]
