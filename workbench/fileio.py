"""Writing files so that a reader never sees half of one (a leaf module: stdlib only).

* :func:`write_text_atomic` -- temporary file in the destination's folder, fsync, rename,
  fsync of the folder; a symlinked destination is written through the link; a new file
  gets the permissions the user's umask gives; temporary files left by killed writes
  (this module's own names, older than :data:`STALE_TEMP_SECONDS`) are removed.
* :func:`locked` -- an exclusive ``fcntl.flock`` on a sidecar lock file, for
  read-modify-write cycles (the user material library) that must not lose updates.
"""
from __future__ import annotations

import contextlib
import os
import re
import tempfile
import time
from pathlib import Path

__all__ = ["STALE_TEMP_SECONDS", "TEMP_TAG", "locked", "write_text_atomic"]

#: Temporary files of this module carry this tag: ``.NAME.wbtmp-XXXXXXXX.tmp``.
TEMP_TAG = "wbtmp-"
#: A temporary file older than this [s] belongs to a write that was killed.
STALE_TEMP_SECONDS = 600.0


def _umask() -> int:
    """The process umask, read without changing it where the system allows."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)  # no other way: set and restore at once
    os.umask(mask)
    return mask


def _fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return  # e.g. Windows: folders cannot be opened; the rename is what matters there
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _clean_stale_temps(folder: Path, name: str, now: float) -> None:
    pattern = re.compile(rf"^\.{re.escape(name)}\.(?:{TEMP_TAG})?[A-Za-z0-9_]{{8}}\.tmp$")
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return
    for entry in entries:
        if not pattern.match(entry.name):
            continue
        try:
            st = entry.stat(follow_symlinks=False)
            if entry.is_file(follow_symlinks=False) and now - st.st_mtime > STALE_TEMP_SECONDS:
                os.unlink(entry.path)
        except OSError:
            pass  # gone already, or not ours to remove


def write_text_atomic(path, text: str, *, encoding: str = "utf-8", newline: str = "", make_parents: bool = False) -> Path:
    """Write ``text`` to ``path`` through a temporary file in the same folder and a rename.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file (a symlink is followed: its target is replaced, the link stays).
    text : str
        Content.
    encoding : str
        Text encoding.
    newline : str
        Newline translation, as for :func:`open` ("" writes the text as given).
    make_parents : bool
        Create the destination folder if needed.

    Returns
    -------
    pathlib.Path
        The destination path as given.

    Notes
    -----
    The content is flushed and fsync'ed before :func:`os.replace`, which is atomic on
    POSIX and Windows within one file system, and the folder is fsync'ed after it so the
    rename itself survives a power cut: the destination holds either its old or its new
    content, and no temporary file is left behind on failure. An existing destination
    keeps its permission bits; a new one gets ``0o666 & ~umask`` like any file the user
    creates. Temporary files of this function older than :data:`STALE_TEMP_SECONDS`
    (left by a killed process) are removed on the next write to the same name.
    """
    given = Path(path)
    dest = Path(os.path.realpath(given)) if given.is_symlink() else given
    if make_parents:
        dest.parent.mkdir(parents=True, exist_ok=True)
    folder = dest.parent if str(dest.parent) else Path(".")
    mode = dest.stat().st_mode & 0o777 if dest.exists() else 0o666 & ~_umask()
    _clean_stale_temps(folder, dest.name, time.time())
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{dest.name}.{TEMP_TAG}", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding=encoding, newline=newline) as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, dest)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    _fsync_dir(folder)
    return given


@contextlib.contextmanager
def locked(path, *, timeout: float = 60.0, what: str = "file"):
    """Hold an exclusive lock for ``path`` (on the sidecar ``.NAME.lock``) while the block runs.

    Parameters
    ----------
    path : str or os.PathLike
        The file guarded (symlinks resolved, so every link to one file shares the lock).
    timeout : float
        Longest wait for another holder [s].
    what : str
        What the file is, for the message on timeout.

    Yields
    ------
    pathlib.Path
        The guarded file's resolved path.

    Raises
    ------
    ValueError
        When the lock is not free within ``timeout``.

    Notes
    -----
    ``fcntl.flock`` on a separate lock file: the guarded file is replaced by renames,
    so a lock on it would guard an inode that is gone after the first save. The kernel
    drops the lock when its holder dies, so a killed process leaves no stale lock.
    Where ``fcntl`` does not exist (Windows) the block runs unlocked.
    """
    target = Path(os.path.realpath(Path(path).expanduser()))
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows
        yield target
        return
    target.parent.mkdir(parents=True, exist_ok=True)
    lock_path = target.parent / f".{target.name}.lock"
    fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o666 & ~_umask())
    try:
        deadline = time.monotonic() + timeout
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() > deadline:
                    raise ValueError(f"{target}: the {what} is locked by another process "
                                     f"(waited {timeout:g} s); try again") from None
                time.sleep(0.02)
        yield target
    finally:
        os.close(fd)  # drops the lock
