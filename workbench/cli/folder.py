"""``workbench folder DIR``: analyse every capture in a folder, one result row per file.

Examples::

    workbench folder bench/2024-06-11 --turns 20 --area 60mm2 --material mnzn-power-ferrite \\
        --out results
    workbench folder bench/run3 --turns 100 --sense-turns 50 --area 2cm2 --path-length 0.25 \\
        --material M270-35A --out run3 --jobs 2 --resume

Rows are written as each file finishes, to ``OUT.jsonl`` (one JSON object per line) and
``OUT.csv``; each row is appended with one write, flushed and fsync'ed, so an interrupted
run leaves only whole rows. A summary goes to ``OUT.summary.json`` (written to a temporary
name and renamed) and to stdout.

Each row carries a ``key``: the SHA-256 of the file content and of the analysis settings.
Runs resume by default: files whose path and key already have a row with status ok in
``OUT.jsonl`` are skipped, so a changed file or changed settings are analysed again (the new
row replaces the old one), and files that failed are tried again (``--no-resume`` refuses to
touch existing outputs, ``--overwrite`` replaces them). ``--jobs N`` (or ``--workers N``)
analyses files in N worker processes; ``--scheduler ADDRESS`` runs them on a Dask cluster
(see :mod:`workbench.analysis.batch`).

Exit status: 0 when every file was analysed, 1 when some files could not be (their rows
carry the error), 2 on bad arguments or when the outputs cannot be written (nothing is
created then).
"""
from __future__ import annotations

import argparse
import json
import math
import os
import sys
from pathlib import Path

from workbench.analysis.batch import is_result_log, run_batch
from workbench.cli.capture import (
    CAUTION,
    add_capture_options,
    add_model_options,
    capture_settings,
    reader_options,
)
from workbench.cli.main import cli_wording
from workbench.fileio import write_text_atomic

#: Columns of the CSV output, in order (SI units in the names).
CSV_COLUMNS = (
    "file", "status", "error", "kind", "frequency_hz", "flux_pp_t", "b_peak_t", "periods_used",
    "period_spread", "waveform_class", "duty", "loss_w_m3", "hysteresis_w_m3", "classical_w_m3",
    "excess_w_m3", "measured_loss_w_m3", "measured_to_model_ratio", "skew_sensitivity_per_ns",
    "reversal_threshold_t", "warnings", "key",
)
#: File name patterns analysed by default.
DEFAULT_PATTERNS = ("*.csv", "*.txt", "*.npz")


# ---------------------------------------------------------------------------
# pure pieces (no I/O beyond reading the one capture)
# ---------------------------------------------------------------------------
def settings_payload(args) -> dict:
    """Analysis settings as plain JSON-able values (material by name), for workers and keys.

    Every option is parsed here (and refused when it is not a plausible value), so that a
    bad option stops the run before anything is written.
    """
    from workbench.cli.capture import quantity

    quantity(args.temperature, "degC", "--temperature", positive=False)
    quantity(args.thickness, "m", "--thickness")
    quantity(args.resistivity, "ohm m", "--resistivity")
    quantity(args.h_dc, "A/m", "--h-dc", positive=False)
    return {
        "geometry": capture_settings(args),
        "reader": reader_options(args),
        "material": args.material,
        "steinmetz": list(args.steinmetz) if args.steinmetz else None,
        "temperature": args.temperature,
        "thickness": args.thickness,
        "resistivity": args.resistivity,
        "skin_effect": not args.no_skin,
        "h_dc": args.h_dc,
    }


def analyse_one(path: str, settings: dict, key: str, *, data: bytes | None = None) -> dict:
    """Analyse one file and return its result row; user errors become an error row.

    Runs in a worker process: takes and returns plain data only. ``data`` is the file's
    content when the batch already read it (the bytes hashed into ``key``).
    """
    from workbench.analysis.batch import analyse_content
    from workbench.analysis.capture import SteinmetzSet
    from workbench.cli.capture import quantity
    from workbench.units import parse_quantity

    row = {"file": path, "key": key}
    try:
        material = steinmetz = None
        if settings["material"]:
            from workbench.materials import get_material

            material = get_material(settings["material"])
        elif settings["steinmetz"]:
            steinmetz = SteinmetzSet(*(parse_quantity(x, "", name="--steinmetz") for x in settings["steinmetz"]))
        result = analyse_content(
            path, data, reader_options=settings["reader"], material=material, steinmetz=steinmetz,
            temperature=quantity(settings["temperature"], "degC", "--temperature", positive=False),
            thickness=quantity(settings["thickness"], "m", "--thickness"),
            resistivity=quantity(settings["resistivity"], "ohm m", "--resistivity"),
            skin_effect=settings["skin_effect"],
            h_dc=quantity(settings.get("h_dc"), "A/m", "--h-dc", positive=False), **settings["geometry"],
        )
    except (ValueError, OSError) as exc:
        text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        row.update(status="error", error=cli_wording(text))
        return row
    row.update(status="ok", error="")
    row.update(result.to_dict())
    row["file"] = path
    row["warnings"] = [cli_wording(str(w)) for w in row.get("warnings") or ()]
    return row


analyse_one.accepts_data = True


def summarise(rows: list[dict], skipped: int) -> dict:
    """Counts, the rows with errors and with warnings (those first), and the loss ranges.

    ``problems`` lists the error rows, then the rows with warnings, each with its file and
    first message; ``files_with_warnings`` counts successful rows that carry warnings.
    """
    ok = [r for r in rows if r.get("status") == "ok"]
    warned = [r for r in ok if r.get("warnings")]
    out = {"files_analysed": len(ok), "files_failed": len(rows) - len(ok), "files_skipped": skipped,
           "files_with_warnings": len(warned),
           "failed": [{"file": r["file"], "error": r["error"]} for r in rows if r.get("status") != "ok"]}
    out["problems"] = [{"file": f["file"], "status": "error", "message": f["error"]} for f in out["failed"]]
    out["problems"] += [{"file": r["file"], "status": "warning", "message": str(r["warnings"][0]),
                         "n_warnings": len(r["warnings"])} for r in warned]
    for key in ("loss_w_m3", "measured_loss_w_m3"):
        vals = [r[key] for r in ok if isinstance(r.get(key), (int, float)) and math.isfinite(r[key])]
        if vals:
            out[f"{key}_min"] = min(vals)
            out[f"{key}_max"] = max(vals)
    return out


# ---------------------------------------------------------------------------
def register(subparsers) -> argparse.ArgumentParser:
    """Add the ``folder`` sub-command."""
    p = subparsers.add_parser(
        "folder",
        help="analyse every capture in a folder; one result row per file (JSON lines + CSV)",
        description=(
            "Analyse every capture file in a folder with the same core, windings and model. Rows "
            "are written as each file finishes; --resume skips files already done with the same "
            "content and settings. " + CAUTION
        ),
    )
    p.add_argument("folder", metavar="DIR", help="folder of capture files")
    p.add_argument("--out", required=True, metavar="STEM",
                   help="output path without extension: writes STEM.jsonl, STEM.csv, STEM.summary.json")
    p.add_argument("--pattern", action="append", metavar="GLOB",
                   help=f"file name pattern, repeatable (default {' '.join(DEFAULT_PATTERNS)})")
    p.add_argument("--jobs", "--workers", dest="jobs", default="1", metavar="N",
                   help="worker processes on this machine (default 1)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on a Dask cluster, e.g. tcp://10.0.0.5:8786 (needs the 'cluster' extra: "
                        "pip install fluxheat-workbench[cluster]; the files must be readable by the "
                        "workers at the same path)")
    p.add_argument("--resume", action="store_true", default=True,
                   help="continue existing outputs, skipping files already done (the default)")
    p.add_argument("--no-resume", dest="resume", action="store_false",
                   help="refuse to touch existing outputs instead of continuing them")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    add_capture_options(p)
    add_model_options(p)
    p.add_argument("--json", action="store_true", help="print the summary as JSON (SI units)")
    p.set_defaults(func=run)
    return p


def _files(folder: Path, patterns) -> list[Path]:
    found = set()
    for pat in patterns:
        found.update(q for q in folder.glob(pat) if q.is_file())
    return sorted(found)


def _writable_ancestor(folder: Path) -> Path:
    q = folder.absolute()
    while not q.exists():
        q = q.parent
    return q


class _Progress:
    """``[12/40] name`` on one terminal line of stderr, rewritten in place; silent when not a terminal."""

    def __init__(self, total: int, stream=None):
        self.stream = stream if stream is not None else sys.stderr
        self.live = bool(getattr(self.stream, "isatty", lambda: False)())
        self.total, self.done, self.failed, self.width = total, 0, 0, 0

    def __call__(self, row: dict) -> None:
        self.done += 1
        self.failed += row.get("status") == "error"
        if self.live:
            name = Path(str(row.get("file", ""))).name[:40]
            text = f"[{self.done}/{self.total}] {self.failed} failed  {name}"
            self.stream.write("\r" + text.ljust(self.width))
            self.width = len(text)
            self.stream.flush()

    def close(self) -> None:
        if self.live and self.width:
            self.stream.write("\r" + " " * self.width + "\r")
            self.stream.flush()


def run(args) -> int:
    """Run ``workbench folder``; returns the exit status."""
    from workbench.analysis.batch import usable_cores
    from workbench.cli.main import emit_json

    folder = Path(args.folder)
    if not folder.is_dir():
        raise ValueError(f"{args.folder}: not a folder")
    try:
        jobs = int(args.jobs)
    except ValueError:
        raise ValueError(f"--jobs: expected a whole number, got {args.jobs!r}") from None
    if jobs < 1:
        raise ValueError(f"--jobs: must be at least 1, got {args.jobs!r}")
    cores = usable_cores()
    if jobs > cores and not args.scheduler:
        sys.stderr.write(f"workbench folder: --jobs {jobs} capped at the {cores} core(s) available\n")
        jobs = cores
    resume = args.resume and not args.overwrite
    stem = Path(args.out)
    out_dir = stem.parent if str(stem.parent) else Path(".")
    if out_dir.exists() and not out_dir.is_dir():
        raise ValueError(f"--out: {str(out_dir)!r} is not a folder")
    if not os.access(_writable_ancestor(out_dir), os.W_OK):
        raise ValueError(f"--out: folder {str(out_dir)!r} is not writable")
    jsonl, csv_path, summary_path = (Path(f"{stem}{ext}") for ext in (".jsonl", ".csv", ".summary.json"))
    existing = [q for q in (jsonl, csv_path) if q.exists()]
    if existing and not (resume or args.overwrite):
        raise ValueError(f"--out: {existing[0]} exists; pass --resume to continue it or --overwrite to replace it")
    if resume and jsonl.exists() and not is_result_log(jsonl):
        raise ValueError(f"--out: {jsonl} exists but is not a result log that --resume can continue; "
                         "pass --overwrite to replace it")

    settings = settings_payload(args)  # validates every option before anything is written
    if args.material:
        from workbench.materials import get_material

        get_material(args.material)
    patterns = args.pattern or DEFAULT_PATTERNS
    outputs = {q.absolute() for q in (jsonl, csv_path, summary_path)}
    files = [q for q in _files(folder, patterns) if q.absolute() not in outputs]
    if not files:
        raise ValueError(f"{args.folder}: no capture files matching {' '.join(patterns)}")

    progress = _Progress(len(files))
    try:
        result = run_batch(
            [str(q) for q in files], settings, jsonl=jsonl, csv_path=csv_path, task=analyse_one,
            columns=CSV_COLUMNS, workers=jobs, scheduler=args.scheduler, resume=resume, on_row=progress,
            make_folder=True,
        )
    finally:
        progress.close()
    rows, skipped = list(result.rows), result.skipped
    summary = summarise(rows, skipped)
    summary.update(outputs={"jsonl": str(jsonl), "csv": str(csv_path), "summary": str(summary_path)},
                   notes=list(result.notes), settings=settings)
    write_text_atomic(summary_path, json.dumps(summary, indent=2, sort_keys=True) + "\n")
    if args.json:
        emit_json(summary)
    else:
        print(f"analysed {summary['files_analysed']} file(s): {summary['files_failed']} failed, "
              f"{summary['files_with_warnings']} with warnings, {skipped} skipped (already done)")
        problems = summary["problems"]
        for item in problems[:20]:
            print(f"  {item['status']}: {Path(item['file']).name}: {item['message']}")
        if len(problems) > 20:
            print(f"  ... and {len(problems) - 20} more (see {summary_path})")
        for key, label in (("loss_w_m3", "model loss"), ("measured_loss_w_m3", "measured loss")):
            if f"{key}_min" in summary:
                print(f"{label}: {summary[key + '_min']:.4g} to {summary[key + '_max']:.4g} W/m3")
        print(f"rows: {jsonl} and {csv_path}; summary: {summary_path}")
        print(CAUTION)
    if summary["files_failed"]:
        first = summary["failed"][0]
        line = f"workbench folder: {summary['files_failed']} file(s) could not be analysed; first: {first['error']}"
        sys.stderr.write(line[:299] + "\n")
        return 1
    return 0
