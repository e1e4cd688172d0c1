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
default) a file is skipped when the log's last row for that path is successful and
has the same key. A changed file or changed settings give a new key and are
analysed again and their new row replaces the old one; files whose earlier row
was an error are tried again. The CSV table is rebuilt from the log at the start and
the end of a run (keeping the last row of each file), so the two never disagree.
Nothing is lost and nothing repeated.

Each file is read once, in the worker, inside the per-file error handling: the key
is the hash of the very bytes that are analysed, and a file that cannot be read
(no permission, vanished, not a regular file) becomes an error row while the run
goes on. Files over :data:`READ_ONCE_LIMIT` are hashed while streaming and read
again by the analysis, so memory stays bounded.

Guarantees
----------
* One run per output: the run holds an exclusive lock (``fcntl.flock``) on
  ``<log>.lock``; a second run on the same output refuses with a message naming
  the holder. The kernel drops the lock when its process dies, so a killed run
  leaves no stale lock.
* Local worker processes die with the run (``PR_SET_PDEATHSIG`` on Linux, and a
  check of the parent's pid before each file elsewhere).
* A scheduler address is connected to before any output is created.
* ``workers`` is capped at the cores this process may use (with a note).
* Text cells of the CSV that a spreadsheet would run as a formula (starting with
  ``= + - @``, tab or carriage return) are prefixed with a single quote.

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
import os
import stat
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterable

from workbench.fileio import write_text_atomic
from workbench.jsonsafe import to_jsonable

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
#: Files up to this size [bytes] are read into memory once: hashed and analysed from the same bytes.
READ_ONCE_LIMIT = 256 * 1024 * 1024
#: First characters that make a spreadsheet treat a text cell as a formula (OWASP, "CSV Injection").
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


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
    notes : tuple of str
        What the run changed or assumed (workers capped at the cores available).
    """

    analysed: int
    failed: int
    skipped: int
    rows: tuple
    jsonl: str
    csv: str
    where: str
    notes: tuple = ()


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
    return read_and_key(path, settings, keep_limit=0)[1]


def _settings_bytes(settings: dict) -> bytes:
    return json.dumps(settings, sort_keys=True).encode()


def read_and_key(path, settings: dict, *, keep_limit: int = READ_ONCE_LIMIT) -> tuple[bytes | None, str]:
    """Read a file once: its bytes (when at most ``keep_limit``) and its row key.

    Parameters
    ----------
    path : str or os.PathLike
        Capture file; must be a regular file.
    settings : dict
        JSON-able analysis settings (hashed into the key).
    keep_limit : int
        Largest file [bytes] whose content is returned; larger files are hashed while
        streaming and ``None`` is returned for the content.

    Returns
    -------
    data : bytes or None
        The content that was hashed.
    key : str
        SHA-256 hex digest of the content followed by the canonical JSON of the settings.

    Raises
    ------
    OSError
        The file cannot be opened or read (permissions, vanished), or is not a regular
        file (a FIFO would block forever; a folder has no content).
    """
    h = hashlib.sha256()
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0)  # a FIFO must not block the open
    fd = os.open(path, flags)
    with os.fdopen(fd, "rb") as fh:
        st = os.fstat(fh.fileno())
        if not stat.S_ISREG(st.st_mode):
            raise OSError(f"{os.fspath(path)}: not a regular file (a folder, FIFO or device); skipped")
        if st.st_size <= keep_limit:
            data = fh.read()
            h.update(data)
        else:
            data = None
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
    h.update(_settings_bytes(settings))
    return data, h.hexdigest()


def _die_with_parent(parent_pid: int) -> None:
    """Worker initialiser: end this worker when the run that started it ends (Linux)."""
    import signal

    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, int(signal.SIGTERM), 0, 0, 0)  # PR_SET_PDEATHSIG = 1
    except (OSError, AttributeError):  # not Linux: the pid check in _one_file covers it
        pass
    if os.getppid() != parent_pid:  # the parent died before prctl took effect
        os._exit(1)
    global _PARENT_PID
    _PARENT_PID = parent_pid


_PARENT_PID: int | None = None


def _one_file(task, path: str, settings: dict, done_key: str | None) -> dict:
    """Read, key and analyse one file in a worker; every failure becomes an error row."""
    if _PARENT_PID is not None and os.getppid() != _PARENT_PID:
        os._exit(1)  # orphaned: the run is gone, nobody will read this row
    try:
        data, key = read_and_key(path, settings, keep_limit=READ_ONCE_LIMIT if getattr(task, "accepts_data", False) else 0)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        return {"file": path, "key": "", "status": "error", "error": f"{path}: cannot read the file: {reason}"}
    if done_key is not None and key == done_key:
        return {"file": path, "key": key, "status": "skipped"}
    try:
        if data is not None:
            return task(path, settings, key, data=data)
        return task(path, settings, key)
    except Exception as exc:  # a bug in one file's analysis must not stop the batch
        return _error_row(path, key, exc)


def analyse_path(path: str, settings: dict, key: str, *, data: bytes | None = None) -> dict:
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
    data : bytes, optional
        The file's content, already read (and hashed into ``key``); default: read ``path``.

    Returns
    -------
    dict
        ``file``, ``key``, ``status`` ("ok" or "error"), ``error`` and, when ok, the
        fields of :meth:`workbench.analysis.capture.CaptureAnalysis.to_dict`.
    """
    from workbench.analysis.capture import SteinmetzSet

    row = {"file": path, "key": key}
    try:
        material = steinmetz = None
        if settings.get("material"):
            from workbench.materials import get_material

            material = get_material(settings["material"])
        elif settings.get("steinmetz"):
            steinmetz = SteinmetzSet(*settings["steinmetz"])
        result = analyse_content(
            path, data, reader_options=settings.get("reader") or {}, material=material, steinmetz=steinmetz,
            temperature=settings.get("temperature"), thickness=settings.get("thickness"),
            resistivity=settings.get("resistivity"), skin_effect=settings.get("skin_effect", True),
            **(settings.get("geometry") or {}),
        )
    except (ValueError, OSError) as exc:
        text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        row.update(status="error", error=text.replace(_BUFFER, path))
        return row
    row.update(result.to_dict())
    row.update(file=path, status="ok", error="")
    return row


analyse_path.accepts_data = True

_BUFFER = "<buffer>"


def analyse_content(path: str, data: bytes | None, *, reader_options=None, **kwargs):
    """Analyse a capture from bytes already read (or from ``path`` when ``data`` is None).

    Parameters
    ----------
    path : str
        The file the bytes came from; named in messages and in the result.
    data : bytes or None
        The file's content.
    reader_options : Mapping, optional
        Keyword arguments of :func:`workbench.capture.read_capture`.
    **kwargs
        As :func:`workbench.analysis.capture.analyse_record`.

    Returns
    -------
    CaptureAnalysis

    Raises
    ------
    ValueError
        As the capture analysis, with the file's name in place of the buffer's.
    """
    from workbench.analysis.capture import analyse_file

    if data is None:
        return analyse_file(path, reader_options=reader_options, **kwargs)
    try:
        result = analyse_file(io.BytesIO(data), reader_options=reader_options, **kwargs)
    except ValueError as exc:
        raise ValueError(str(exc).replace(_BUFFER, path)) from None
    if getattr(result, "source", None) == _BUFFER:
        import dataclasses

        if dataclasses.is_dataclass(result):
            result = dataclasses.replace(result, source=path)
    return result


# ---------------------------------------------------------------------------
# the log and the table
# ---------------------------------------------------------------------------
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
        elif isinstance(v, str) and v.startswith(FORMULA_START):
            v = "'" + v  # a spreadsheet shows the text instead of running it as a formula
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


def _last_rows(rows: list[dict], drop_errors_of: set[str] = frozenset()) -> list[dict]:
    """The last row of each file, in log order; error rows of ``drop_errors_of`` left out (retried)."""
    last = {}
    for i, row in enumerate(rows):
        last[row["file"]] = i
    return [r for i, r in enumerate(rows)
            if last[r["file"]] == i and not (r.get("status") != "ok" and r["file"] in drop_errors_of)]


def _write_outputs(jsonl: Path, csv_path: Path, columns, rows: list[dict]) -> None:
    text = "".join(json.dumps(r, sort_keys=True, allow_nan=False) + "\n" for r in rows)
    if not jsonl.exists() or jsonl.read_text(encoding="utf-8") != text:
        _write_atomic(jsonl, text)
    table = _csv_line({c: c for c in columns}, columns) + "".join(_csv_line(r, columns) for r in rows)
    if not csv_path.exists() or csv_path.read_text(encoding="utf-8") != table:
        _write_atomic(csv_path, table)


def _prepare_outputs(jsonl: Path, csv_path: Path, columns, resume: bool, files: set[str]) -> dict[str, str]:
    """Start the outputs: fresh, or compacted from an earlier log. Returns file -> key of its ok row."""
    if not resume:
        _write_outputs(jsonl, csv_path, columns, [])
        return {}
    kept = _last_rows(read_log(jsonl), drop_errors_of=files)
    _write_outputs(jsonl, csv_path, columns, kept)
    return {r["file"]: r["key"] for r in kept if r.get("status") == "ok"}


class _OutputLock:
    """Exclusive lock of one output (``fcntl.flock`` on ``<log>.lock``); released when the holder dies."""

    def __init__(self, jsonl: Path):
        self.path = jsonl.with_name(jsonl.name + ".lock")
        self._fh = None

    def acquire(self) -> None:
        import fcntl

        fh = open(self.path, "a+", encoding="utf-8")
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            fh.seek(0)
            lines = fh.read().split()
            holder = " ".join(lines[-2:]) if lines else "unknown"
            fh.close()
            raise ValueError(f"{self.path.with_suffix('')} is being written by another run ({holder}); "
                             "wait for it to finish or choose another output") from None
        fh.seek(0)
        fh.truncate()
        fh.write(f"pid {os.getpid()}\n")
        fh.flush()
        self._fh = fh

    def release(self) -> None:
        if self._fh is not None:
            self._fh.truncate(0)  # no holder any more (the file itself is not the lock)
            self._fh.flush()
            self._fh.close()  # closing the descriptor drops the lock; the file may stay (it is not the lock)
            self._fh = None


def usable_cores() -> int:
    """Cores this process may run on (its CPU affinity where the system tells it)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


# ---------------------------------------------------------------------------
# runners
# ---------------------------------------------------------------------------
def _error_row(path: str, key: str, exc: BaseException) -> dict:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return {"file": path, "key": key, "status": "error", "error": f"{type(exc).__name__}: {text}".rstrip(": ")}


def _serial(todo, task, settings):
    for path, done_key in todo:
        yield _one_file(task, path, settings, done_key)


def _local(todo, task, settings, workers):
    pool = ProcessPoolExecutor(max_workers=workers, initializer=_die_with_parent, initargs=(os.getpid(),))
    try:
        futures = {pool.submit(_one_file, task, path, settings, done_key): (path, done_key)
                   for path, done_key in todo}
        for fut in as_completed(futures):
            try:
                yield fut.result()
            except Exception as exc:  # the worker itself died
                yield _error_row(futures[fut][0], "", exc)
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown(wait=True)


def _import_dask():
    try:
        from dask.distributed import Client
        from dask.distributed import as_completed as dask_as_completed
    except ImportError:
        raise ValueError(
            f"running on a Dask cluster needs the optional 'cluster' extra: {INSTALL_HINT} "
            "(without it, use local worker processes)"
        ) from None
    return Client, dask_as_completed


def _probe(scheduler: str, timeout: float = 5.0) -> None:
    """Fail fast on a TCP scheduler address that refuses or does not answer."""
    import socket
    from urllib.parse import urlsplit

    parts = urlsplit(scheduler if "://" in scheduler else "tcp://" + scheduler)
    if parts.scheme not in ("tcp", "tls") or not parts.hostname:
        return  # other transports: left to the client
    try:
        port = parts.port or 8786
    except ValueError:
        raise ValueError(f"cannot reach the Dask scheduler at {scheduler!r}: bad port") from None
    try:
        socket.create_connection((parts.hostname, port), timeout=timeout).close()
    except OSError as exc:
        raise ValueError(f"cannot reach the Dask scheduler at {scheduler!r}: {exc.strerror or exc}") from None


def _connect(scheduler: str):
    client_cls, _ = _import_dask()
    _probe(scheduler)
    try:
        return client_cls(scheduler, timeout=30, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ValueError(f"cannot reach the Dask scheduler at {scheduler!r}: {exc}") from None


def _dask(todo, task, settings, client):
    _, dask_as_completed = _import_dask()
    try:
        if not todo:
            return
        with client.as_current():
            futures = client.map(_one_file, [task] * len(todo), [p for p, _ in todo], [settings] * len(todo),
                                 [k for _, k in todo], pure=False)
            where = {f.key: pk for f, pk in zip(futures, todo)}
            for fut in dask_as_completed(futures):
                try:
                    yield fut.result()
                except Exception as exc:
                    yield _error_row(where[fut.key][0], "", exc)
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
    make_folder: bool = False,
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
        Called with each row after it is written, and with ``{"status": "skipped"}`` rows
        of files already done (progress display).
    make_folder : bool, optional
        Create the output folder (after the scheduler was reached).

    Returns
    -------
    BatchSummary

    Raises
    ------
    ValueError
        Bad arguments, an output that is not a result log, an unreachable scheduler
        or Dask missing (nothing is written in those cases), or an output locked by
        another run (left untouched).
    """
    jsonl, csv_path = Path(jsonl), Path(csv_path)
    if isinstance(workers, bool):
        raise ValueError(f"workers must be a whole number, got {workers!r}")
    try:
        workers = int(workers)
    except (TypeError, ValueError):
        raise ValueError(f"workers must be a whole number, got {workers!r}") from None
    if workers < 1:
        raise ValueError(f"workers must be at least 1, got {workers!r}")
    notes = []
    cores = usable_cores()
    if scheduler is None and workers > cores:
        notes.append(f"{workers} workers asked for, {cores} core(s) available: using {cores}")
        workers = cores
    for p in (jsonl, csv_path):
        if not p.parent.is_dir() and not (make_folder and p.parent == jsonl.parent):
            raise ValueError(f"output folder {str(p.parent)!r} does not exist")
    if resume and jsonl.exists():
        read_log(jsonl)  # a foreign file is refused before anything happens
    paths = [str(f) for f in files]
    client = _connect(scheduler) if scheduler is not None else None  # before any output exists
    lock = None
    try:
        if make_folder:
            jsonl.parent.mkdir(parents=True, exist_ok=True)
        lock = _OutputLock(jsonl)
        lock.acquire()
        done = _prepare_outputs(jsonl, csv_path, columns, resume, set(paths))
        todo = [(p, done.get(p)) for p in paths]
        if client is not None:
            rows_iter, where = _dask(todo, task, settings, client), f"dask ({scheduler})"
            client = None  # closed by the generator
        elif workers > 1 and len(todo) > 1:
            rows_iter, where = _local(todo, task, settings, workers), f"local processes ({workers})"
        else:
            rows_iter, where = _serial(todo, task, settings), "serial"
        sink = _RowSink(jsonl, csv_path, columns)
        written, skipped = [], 0
        try:
            for row in rows_iter:
                if row.get("status") == "skipped":
                    skipped += 1
                else:
                    row = to_jsonable(row)
                    sink.add(row)
                    written.append(row)
                if on_row is not None:
                    on_row(row)
        finally:
            sink.close()
            close = getattr(rows_iter, "close", None)
            if close is not None:
                close()
        rows = read_log(jsonl)
        if len(_last_rows(rows)) != len(rows):  # a file analysed again: its new row replaces the old one
            _write_outputs(jsonl, csv_path, columns, _last_rows(rows))
    finally:
        if client is not None:
            client.close()
        if lock is not None:
            lock.release()
    ok = sum(1 for r in written if r.get("status") == "ok")
    return BatchSummary(ok, len(written) - ok, skipped, tuple(written), str(jsonl), str(csv_path), where, tuple(notes))
