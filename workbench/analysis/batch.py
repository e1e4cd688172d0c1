"""Batch analysis of a folder of captures: parallel on the local cores or on a Dask cluster.

:func:`run_batch` analyses many capture files with one per-file function and
writes one result row per file *as it finishes*, to a JSON-lines log and a CSV
table. Every row is written with a single ``write``, flushed and fsync'ed, so an
interrupted batch leaves only whole rows (at worst one torn last line, which the
next run trims).

Resuming
--------
Each row carries a ``key``: the SHA-256 of the file's content followed by the
canonical JSON of the analysis settings. On a re-run (``resume=True``, the
default) a file is skipped when the log already holds a successful row for the
same path and key. A changed file or changed settings give a new key and are
analysed again and their new row replaces the old one; files whose earlier row
was an error are tried again. The CSV table is rebuilt from the log at the start of a
resumed run, so the two never disagree. Nothing is lost and nothing repeated.

Where the work runs
-------------------
* ``workers=1``: in this process, one file after the other.
* ``workers=N``: N local processes (:class:`concurrent.futures.ProcessPoolExecutor`).
* ``scheduler="tcp://host:8786"``: on an existing Dask cluster through
  ``dask.distributed.Client``; the workers read the files by path, so the folder
  must be visible to them at the same path (a shared file system). Dask is the
  optional ``cluster`` extra: ``pip install fluxheat-workbench[cluster]``.

The results do not depend on where a file was analysed; only the order of the
rows (completion order) may differ.
"""
from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterable

from workbench.fileio import write_text_atomic

__all__ = [
    "BatchSummary",
    "DEFAULT_COLUMNS",
    "INSTALL_HINT",
    "analyse_path",
    "file_key",
    "is_result_log",
    "read_log",
    "run_batch",
]

#: CSV columns written by default (SI units in the names).
DEFAULT_COLUMNS = (
    "file", "status", "error", "kind", "frequency_hz", "flux_pp_t", "b_peak_t", "periods_used",
    "period_spread", "waveform_class", "duty", "loss_w_m3", "hysteresis_w_m3", "classical_w_m3",
    "excess_w_m3", "measured_loss_w_m3", "measured_to_model_ratio", "warnings", "key",
)
INSTALL_HINT = "pip install fluxheat-workbench[cluster]"


@dataclass(frozen=True)
class BatchSummary:
    """What a batch run did.

    Attributes
    ----------
    analysed, failed, skipped : int
        Files analysed successfully, files whose row is an error, files skipped as
        already done.
    rows : tuple of dict
        The rows written by this run, in completion order.
    jsonl, csv : str
        Paths of the log and the table.
    where : str
        "serial", "local processes (N)" or "dask (ADDRESS)".
    """

    analysed: int
    failed: int
    skipped: int
    rows: tuple
    jsonl: str
    csv: str
    where: str


# ---------------------------------------------------------------------------
# keys and the per-file task
# ---------------------------------------------------------------------------
def file_key(path, settings: dict) -> str:
    """SHA-256 of the file content followed by the canonical JSON of the settings.

    Parameters
    ----------
    path : str or os.PathLike
        Capture file.
    settings : dict
        JSON-able analysis settings.

    Returns
    -------
    str
        Hex digest.
    """
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    h.update(json.dumps(settings, sort_keys=True).encode())
    return h.hexdigest()


def analyse_path(path: str, settings: dict, key: str) -> dict:
    """Analyse one capture file; user errors become an error row. Runs in workers.

    Parameters
    ----------
    path : str
        Capture file (CSV or ``.npz``).
    settings : dict
        Plain SI values: ``reader`` (options of :func:`workbench.capture.read_capture`),
        ``geometry`` (``turns``, ``area`` [m^2], ``volume`` [m^3], ``path_length`` [m],
        ``sense_turns``), ``material`` (library name) or ``steinmetz`` ([k, alpha, beta]),
        ``temperature`` [degC], ``thickness`` [m], ``resistivity`` [ohm m], ``skin_effect``.
    key : str
        The row key (see :func:`file_key`).

    Returns
    -------
    dict
        ``file``, ``key``, ``status`` ("ok" or "error"), ``error`` and, when ok, the
        fields of :meth:`workbench.analysis.capture.CaptureAnalysis.to_dict`.
    """
    from workbench.analysis.capture import SteinmetzSet, analyse_file

    row = {"file": path, "key": key}
    try:
        material = steinmetz = None
        if settings.get("material"):
            from workbench.materials import get_material

            material = get_material(settings["material"])
        elif settings.get("steinmetz"):
            steinmetz = SteinmetzSet(*settings["steinmetz"])
        result = analyse_file(
            path, reader_options=settings.get("reader") or {}, material=material, steinmetz=steinmetz,
            temperature=settings.get("temperature"), thickness=settings.get("thickness"),
            resistivity=settings.get("resistivity"), skin_effect=settings.get("skin_effect", True),
            **(settings.get("geometry") or {}),
        )
    except (ValueError, OSError) as exc:
        text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        row.update(status="error", error=text)
        return row
    row.update(result.to_dict())
    row.update(file=path, status="ok", error="")
    return row


# ---------------------------------------------------------------------------
# the log and the table
# ---------------------------------------------------------------------------
def _clean(value):
    """JSON-safe copy: arrays to lists, non-finite floats to None."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "tolist"):
        return _clean(value.tolist())
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _csv_line(row: dict, columns) -> str:
    buf = io.StringIO()
    values = []
    for col in columns:
        v = row.get(col)
        if col == "warnings" and isinstance(v, (list, tuple)):
            v = " | ".join(str(x) for x in v)
        elif v is None:
            v = ""
        elif isinstance(v, float):
            v = repr(v)
        values.append(v)
    csv.writer(buf, lineterminator="\n").writerow(values)
    return buf.getvalue()


def _complete_lines(path: Path) -> tuple[list[str], bool]:
    """Whole lines of a text file, and whether a torn (unterminated) last line was found."""
    if not path.exists():
        return [], False
    data = path.read_bytes()
    torn = bool(data) and not data.endswith(b"\n")
    if torn:
        data = data[: data.rfind(b"\n") + 1]
    return data.decode("utf-8").splitlines(), torn


def read_log(jsonl) -> list[dict]:
    """Rows of a result log, ignoring a torn last line.

    Raises
    ------
    ValueError
        If a complete line is not a result row (names the file and line).
    """
    path = Path(jsonl)
    lines, _ = _complete_lines(path)
    rows = []
    for i, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        try:
            row = json.loads(line)
        except json.JSONDecodeError:
            raise ValueError(f"{path}: line {i} is not a JSON result row: {line[:60]!r}") from None
        if not isinstance(row, dict) or "key" not in row or "file" not in row:
            raise ValueError(f"{path}: line {i} is not a result row (no file/key): {line[:60]!r}")
        rows.append(row)
    return rows


def is_result_log(jsonl) -> bool:
    """True when the file is absent, empty or a result log that can be resumed."""
    try:
        read_log(jsonl)
    except (ValueError, UnicodeDecodeError):
        return False
    return True


def _write_atomic(path: Path, text: str) -> None:
    write_text_atomic(path, text)


class _RowSink:
    """Appends whole rows to the log and the table: one write, flush and fsync per row."""

    def __init__(self, jsonl: Path, csv_path: Path, columns):
        self.columns = tuple(columns)
        self._j = open(jsonl, "a", encoding="utf-8")
        self._c = open(csv_path, "a", encoding="utf-8", newline="")
        if csv_path.stat().st_size == 0:
            self._put(self._c, _csv_line({c: c for c in self.columns}, self.columns))

    @staticmethod
    def _put(fh, text: str) -> None:
        fh.write(text)
        fh.flush()
        os.fsync(fh.fileno())

    def add(self, row: dict) -> None:
        self._put(self._j, json.dumps(row, sort_keys=True, allow_nan=False) + "\n")
        self._put(self._c, _csv_line(row, self.columns))

    def close(self) -> None:
        self._j.close()
        self._c.close()


def _prepare_outputs(jsonl: Path, csv_path: Path, columns, resume: bool, todo_files: set[str]) -> list[dict]:
    """Start the outputs: fresh, or compacted from an earlier log. Returns the rows kept."""
    if not resume:
        _write_atomic(jsonl, "")
        _write_atomic(csv_path, _csv_line({c: c for c in columns}, columns))
        return []
    rows = read_log(jsonl)
    kept, seen = [], set()
    for row in rows:
        ident = (row["file"], row["key"])
        if row["file"] in todo_files or ident in seen:
            continue  # analysed again now (earlier error, changed content or settings), or a repeat
        seen.add(ident)
        kept.append(row)
    text = "".join(json.dumps(r, sort_keys=True, allow_nan=False) + "\n" for r in kept)
    if not jsonl.exists() or jsonl.read_text(encoding="utf-8") != text:
        _write_atomic(jsonl, text)
    table = _csv_line({c: c for c in columns}, columns) + "".join(_csv_line(r, columns) for r in kept)
    _write_atomic(csv_path, table)
    return kept


# ---------------------------------------------------------------------------
# runners
# ---------------------------------------------------------------------------
def _error_row(path: str, key: str, exc: BaseException) -> dict:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return {"file": path, "key": key, "status": "error", "error": f"{type(exc).__name__}: {text}".rstrip(": ")}


def _serial(todo, task, settings):
    for path, key in todo:
        try:
            yield task(path, settings, key)
        except Exception as exc:  # a bug in one file's analysis must not stop the batch
            yield _error_row(path, key, exc)


def _local(todo, task, settings, workers):
    pool = ProcessPoolExecutor(max_workers=workers)
    try:
        futures = {pool.submit(task, path, settings, key): (path, key) for path, key in todo}
        for fut in as_completed(futures):
            try:
                yield fut.result()
            except Exception as exc:
                yield _error_row(*futures[fut], exc)
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown(wait=True)


def _import_dask():
    try:
        from dask.distributed import Client, as_completed as dask_as_completed
    except ImportError:
        raise ValueError(
            f"running on a Dask cluster needs the optional 'cluster' extra: {INSTALL_HINT} "
            "(without it, use local worker processes)"
        ) from None
    return Client, dask_as_completed


def _dask(todo, task, settings, scheduler):
    client_cls, dask_as_completed = _import_dask()
    try:
        client = client_cls(scheduler, timeout=30, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ValueError(f"cannot reach the Dask scheduler at {scheduler!r}: {exc}") from None
    try:
        if not todo:
            return
        with client.as_current():
            paths = [p for p, _ in todo]
            keys = [k for _, k in todo]
            futures = client.map(task, paths, [settings] * len(todo), keys, pure=False)
            where = {f.key: pk for f, pk in zip(futures, todo)}
            for fut in dask_as_completed(futures):
                try:
                    yield fut.result()
                except Exception as exc:
                    yield _error_row(*where[fut.key], exc)
                fut.release()
    finally:
        client.close()


def run_batch(
    files: Iterable,
    settings: dict,
    *,
    jsonl,
    csv_path,
    task: Callable[[str, dict, str], dict] = analyse_path,
    columns=DEFAULT_COLUMNS,
    workers: int = 1,
    scheduler: str | None = None,
    resume: bool = True,
    on_row: Callable[[dict], None] | None = None,
) -> BatchSummary:
    """Analyse many capture files, writing one row per file as it finishes.

    Parameters
    ----------
    files : iterable of str or os.PathLike
        Capture files.
    settings : dict
        JSON-able settings passed to ``task`` (and hashed into the keys).
    jsonl, csv_path : str or os.PathLike
        Result log (JSON lines) and table (CSV).
    task : callable, optional
        ``task(path, settings, key) -> row dict``, a module-level function (it is
        sent to worker processes); default :func:`analyse_path`.
    columns : sequence of str, optional
        CSV columns.
    workers : int, optional
        Local worker processes (1: in this process). Ignored with ``scheduler``.
    scheduler : str, optional
        Address of a Dask scheduler (``tcp://host:port``); needs the ``cluster`` extra.
    resume : bool, optional
        Keep the rows of an earlier run and skip the files already done (default);
        False starts both outputs afresh.
    on_row : callable, optional
        Called with each row after it is written (progress display).

    Returns
    -------
    BatchSummary

    Raises
    ------
    ValueError
        Bad arguments, an output that is not a result log, an unreachable scheduler
        or Dask missing; nothing is written in those cases.
    """
    jsonl, csv_path = Path(jsonl), Path(csv_path)
    try:
        workers = int(workers)
    except (TypeError, ValueError):
        raise ValueError(f"workers must be a whole number, got {workers!r}") from None
    if workers < 1:
        raise ValueError(f"workers must be at least 1, got {workers!r}")
    for p in (jsonl, csv_path):
        if not p.parent.is_dir():
            raise ValueError(f"output folder {str(p.parent)!r} does not exist")
    if scheduler is not None:
        _import_dask()  # fail before touching the outputs
    paths = [str(f) for f in files]
    keys = {p: file_key(p, settings) for p in paths}
    done = set()
    if resume:
        done = {(r["file"], r["key"]) for r in read_log(jsonl) if r.get("status") == "ok"}
    todo = [(p, keys[p]) for p in paths if (p, keys[p]) not in done]
    skipped = len(paths) - len(todo)
    _prepare_outputs(jsonl, csv_path, columns, resume, {p for p, _ in todo})

    if scheduler is not None:
        rows_iter, where = _dask(todo, task, settings, scheduler), f"dask ({scheduler})"
    elif workers > 1 and len(todo) > 1:
        rows_iter, where = _local(todo, task, settings, workers), f"local processes ({workers})"
    else:
        rows_iter, where = _serial(todo, task, settings), "serial"
    sink = _RowSink(jsonl, csv_path, columns)
    written = []
    try:
        for row in rows_iter:
            row = _clean(row)
            sink.add(row)
            written.append(row)
            if on_row is not None:
                on_row(row)
    finally:
        sink.close()
        close = getattr(rows_iter, "close", None)
        if close is not None:
            close()
    ok = sum(1 for r in written if r.get("status") == "ok")
    return BatchSummary(ok, len(written) - ok, skipped, tuple(written), str(jsonl), str(csv_path), where)
