"""Atomic writes (workbench.fileio): folder fsync, stale temporaries, umask, symlinks, the lock.

The expectations are POSIX facts (common practice, no source): a rename is durable only once its
folder is fsync'ed; a new file's mode is 0o666 & ~umask; flock locks die with their holder.
"""
from __future__ import annotations

import os
import stat
import subprocess
import sys
import time

import pytest

from workbench import fileio
from workbench.fileio import STALE_TEMP_SECONDS, locked, write_text_atomic


def test_folder_is_fsynced_after_the_rename(tmp_path, monkeypatch):
    events = []
    real_fsync, real_replace = os.fsync, os.replace

    def fsync(fd):
        events.append(("fsync", stat.S_ISDIR(os.fstat(fd).st_mode)))
        return real_fsync(fd)

    def replace(a, b):
        events.append(("replace", None))
        return real_replace(a, b)

    monkeypatch.setattr(fileio.os, "fsync", fsync)
    monkeypatch.setattr(fileio.os, "replace", replace)
    write_text_atomic(tmp_path / "a.txt", "x")
    assert events == [("fsync", False), ("replace", None), ("fsync", True)]


def test_stale_temporaries_of_killed_writes_are_removed(tmp_path):
    old = tmp_path / ".a.txt.wbtmp-abcd1234.tmp"
    older_style = tmp_path / ".a.txt.k3j4h5g6.tmp"
    fresh = tmp_path / ".a.txt.wbtmp-zzzz9999.tmp"  # a write in progress elsewhere
    other = tmp_path / ".b.txt.wbtmp-abcd1234.tmp"  # another file's
    mine = tmp_path / "notes.tmp"  # not a temporary of ours at all
    for p in (old, older_style, fresh, other, mine):
        p.write_text("partial")
    past = time.time() - STALE_TEMP_SECONDS - 60
    for p in (old, older_style, other, mine):
        os.utime(p, (past, past))
    write_text_atomic(tmp_path / "a.txt", "whole")
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [fresh.name, other.name, mine.name, "a.txt"])


def test_a_killed_write_leaves_only_a_temporary_that_a_later_write_removes(tmp_path):
    script = (
        "import sys, time, tempfile, os\n"
        "from workbench import fileio\n"
        "real = os.replace\n"
        "def stall(a, b):\n"
        "    print('written', flush=True); time.sleep(60)\n"
        "fileio.os.replace = stall\n"
        "fileio.write_text_atomic(sys.argv[1], 'new' * 1000)\n"
    )
    target = tmp_path / "lib.toml"
    target.write_text("old")
    proc = subprocess.Popen([sys.executable, "-c", script, str(target)], stdout=subprocess.PIPE, text=True)
    try:
        assert proc.stdout.readline().strip() == "written"
        proc.kill()
        proc.wait(timeout=30)
    finally:
        proc.stdout.close()
    temps = [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
    assert len(temps) == 1 and target.read_text() == "old"  # the old content is whole
    past = time.time() - STALE_TEMP_SECONDS - 1
    os.utime(temps[0], (past, past))
    write_text_atomic(target, "newer")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["lib.toml"]


@pytest.mark.parametrize("mask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_new_files_follow_the_umask(tmp_path, mask, mode):
    old = os.umask(mask)
    try:
        write_text_atomic(tmp_path / "new.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "new.txt").stat().st_mode) == mode


def test_existing_file_keeps_its_mode(tmp_path):
    p = tmp_path / "kept.txt"
    p.write_text("x")
    p.chmod(0o640)
    write_text_atomic(p, "y")
    assert stat.S_IMODE(p.stat().st_mode) == 0o640 and p.read_text() == "y"


def test_symlink_is_written_through(tmp_path):
    real = tmp_path / "real" / "data.txt"
    real.parent.mkdir()
    real.write_text("old")
    link = tmp_path / "link.txt"
    link.symlink_to(real)
    assert write_text_atomic(link, "new") == link
    assert link.is_symlink() and real.read_text() == "new"
    assert not [p for p in real.parent.iterdir() if p.name.endswith(".tmp")]


LOCK_HOLDER = (
    "import sys, time\n"
    "from workbench.fileio import locked\n"
    "with locked(sys.argv[1]):\n"
    "    print('held', flush=True)\n"
    "    time.sleep(60)\n"
)


def test_lock_excludes_others_and_dies_with_its_holder(tmp_path):
    guarded = tmp_path / "lib.toml"
    proc = subprocess.Popen([sys.executable, "-c", LOCK_HOLDER, str(guarded)], stdout=subprocess.PIPE, text=True)
    try:
        assert proc.stdout.readline().strip() == "held"
        with pytest.raises(ValueError, match="locked by another process"):
            with locked(guarded, timeout=0.3):
                pass
        proc.kill()
        proc.wait(timeout=30)
        with locked(guarded, timeout=5) as target:  # no stale lock after a kill
            assert target == guarded
    finally:
        proc.kill()
        proc.wait(timeout=30)
        proc.stdout.close()
