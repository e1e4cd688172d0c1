"""Opening input files safely: regular files only, checked on the open descriptor.

Every reader of the workbench (captures, loss tables) opens its input through
:func:`open_regular_file`. A FIFO would block a reader forever, a device (``/dev/zero``)
never ends, and a directory is not a file: each is refused with one clear line. The check
is made with ``fstat`` on the descriptor actually opened (opened non-blocking, so that a
FIFO without a writer does not hang the open itself), so a path swapped between a check
and the open cannot slip through.
"""
from __future__ import annotations

import errno
import io
import os
import stat
from typing import IO

__all__ = ["open_regular_file", "regular_file_size"]

_KINDS = (
    (stat.S_ISDIR, "is a directory, not a file"),
    (stat.S_ISFIFO, "is a FIFO (named pipe), not a regular file"),
    (stat.S_ISCHR, "is a character device, not a regular file"),
    (stat.S_ISBLK, "is a block device, not a regular file"),
    (stat.S_ISSOCK, "is a socket, not a regular file"),
)


def _kind_problem(mode: int) -> str | None:
    for test, text in _KINDS:
        if test(mode):
            return text
    if not stat.S_ISREG(mode):
        return "is not a regular file"
    return None


def _refusal(path: str, exc: OSError) -> ValueError:
    if exc.errno == errno.ENOENT:
        return ValueError(f"{path}: no such file")
    if exc.errno == errno.EISDIR:
        return ValueError(f"{path}: is a directory, not a file")
    if exc.errno in (errno.EACCES, errno.EPERM):
        return ValueError(f"{path}: permission denied (cannot read the file)")
    if exc.errno == errno.ENOTDIR:
        return ValueError(f"{path}: a part of the path is not a directory")
    if exc.errno == errno.ELOOP:
        return ValueError(f"{path}: too many levels of symbolic links")
    return ValueError(f"{path}: cannot open: {exc.strerror or exc}")


def open_regular_file(path: str | os.PathLike[str], error: type[ValueError] = ValueError) -> IO[bytes]:
    """Open `path` for binary reading if, and only if, it is a regular file.

    Parameters
    ----------
    path : str or os.PathLike
        File to open.
    error : type, optional
        ``ValueError`` subclass raised on refusal (e.g. the capture reader's
        ``CaptureError``).

    Returns
    -------
    IO[bytes]
        A buffered binary file object, positioned at the start.

    Raises
    ------
    ValueError
        (or `error`) naming the path: no such file, a directory, a FIFO, a device, a
        socket, or permission denied.
    """
    name = os.fspath(path)
    try:
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise error(str(_refusal(name, exc))) from None
    try:
        problem = _kind_problem(os.fstat(fd).st_mode)
        if problem is not None:
            raise error(f"{name}: {problem}")
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
        return io.open(fd, "rb", closefd=True)
    except BaseException:
        os.close(fd)
        raise


def regular_file_size(path: str | os.PathLike[str], error: type[ValueError] = ValueError) -> int:
    """Size of `path` in bytes, after the same checks as :func:`open_regular_file`.

    Parameters
    ----------
    path : str or os.PathLike
        File to measure.
    error : type, optional
        ``ValueError`` subclass raised on refusal.

    Returns
    -------
    int
        Size [bytes].

    Raises
    ------
    ValueError
        (or `error`) as :func:`open_regular_file`.
    """
    with open_regular_file(path, error) as fh:
        return os.fstat(fh.fileno()).st_size


class Source:
    """A capture's bytes: a checked regular file (opened anew for each pass) or a buffer.

    Internal to the readers; ``label`` is the path or ``"<buffer>"`` for messages.
    """

    def __init__(self, label: str, path: str | None, data: bytes | None, error: type[ValueError]):
        self.label = label
        self.path = path
        self.data = data
        self.error = error

    @classmethod
    def of(cls, obj, error: type[ValueError] = ValueError) -> Source:
        """Source of a path (checked to be a regular file) or of a file-like object."""
        if isinstance(obj, (str, os.PathLike)):
            path = os.fspath(obj)
            if isinstance(path, bytes):
                path = os.fsdecode(path)
            with open_regular_file(path, error):
                pass
            return cls(path, path, None, error)
        if hasattr(obj, "read"):
            content = obj.read()
            if isinstance(content, str):
                content = content.encode("utf-8")
            if not isinstance(content, (bytes, bytearray)):
                raise error(f"<buffer>: read() returned {type(content).__name__}, not text or bytes")
            return cls("<buffer>", None, bytes(content), error)
        raise error(
            f"path_or_buffer: expected a path or a file-like object, got {type(obj).__name__}"
        )

    def open_binary(self) -> IO[bytes]:
        """A fresh binary stream at the start of the data."""
        if self.path is not None:
            return open_regular_file(self.path, self.error)
        return io.BytesIO(self.data or b"")

    def open_text(self, encoding: str) -> IO[str]:
        """A fresh text stream (undecodable bytes replaced, universal newlines)."""
        return io.TextIOWrapper(self.open_binary(), encoding=encoding, errors="replace", newline=None)

    def first_bytes(self, n: int) -> bytes:
        """The first `n` bytes (fewer if the data is shorter)."""
        with self.open_binary() as fh:
            return fh.read(n)

    def size(self) -> int:
        """Size of the data [bytes]."""
        if self.path is not None:
            return regular_file_size(self.path, self.error)
        return len(self.data or b"")

    def is_zip(self) -> bool:
        """True for a zip archive (an .npz), judged by its signature, not its name."""
        return self.first_bytes(4) in (b"PK\x03\x04", b"PK\x05\x06")
