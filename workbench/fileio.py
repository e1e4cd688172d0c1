"""Writing files so that a reader never sees half of one (a leaf module: stdlib only)."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_text_atomic"]


def write_text_atomic(path, text: str, *, encoding: str = "utf-8", newline: str = "", make_parents: bool = False) -> Path:
    """Write ``text`` to ``path`` through a temporary file in the same folder and a rename.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file.
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
        The destination path.

    Notes
    -----
    The content is flushed and fsync'ed before :func:`os.replace`, which is atomic on
    POSIX and Windows within one file system: the destination holds either its old
    or its new content, and no temporary file is left behind on failure. An existing
    destination keeps its permission bits.
    """
    dest = Path(path)
    if make_parents:
        dest.parent.mkdir(parents=True, exist_ok=True)
    folder = dest.parent if str(dest.parent) else Path(".")
    mode = dest.stat().st_mode & 0o777 if dest.exists() else None
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{dest.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding=encoding, newline=newline) as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        if mode is not None:
            os.chmod(tmp, mode)
        os.replace(tmp, dest)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return dest
