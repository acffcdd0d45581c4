"""Atomic writes: all files of a group or none, with the mode the user's umask gives."""

from __future__ import annotations

import os
import stat
import time

import pytest

from cyanorisk.atomic import STALE_SECONDS, write_group


@pytest.fixture
def umask():
    """Set the process umask for one test, then put it back."""
    before = os.umask(0o022)
    os.umask(before)
    yield lambda value: os.umask(value)
    os.umask(before)


@pytest.mark.parametrize("mask, mode", [(0o022, 0o644), (0o002, 0o664), (0o077, 0o600)])
def test_files_get_the_mode_the_umask_gives(tmp_path, umask, mask, mode):
    # POSIX open(2): a new file's mode is the mode asked for (0666) with the umask's bits
    # cleared.
    umask(mask)
    (path,) = write_group({tmp_path / "a" / "report.html":
                           lambda tmp: tmp.write_text("x", encoding="utf-8")})
    assert stat.S_IMODE(path.stat().st_mode) == mode
    # the same as a plain open() under the same umask
    plain = tmp_path / "plain.txt"
    plain.write_text("x", encoding="utf-8")
    assert stat.S_IMODE(plain.stat().st_mode) == mode


def test_a_failing_writer_leaves_no_file_and_no_temporary(tmp_path):
    def fail(tmp):
        raise RuntimeError("disk full")

    with pytest.raises(RuntimeError):
        write_group({tmp_path / "a.txt": lambda tmp: tmp.write_text("a", encoding="utf-8"),
                     tmp_path / "b.txt": fail})
    assert list(tmp_path.iterdir()) == []


def test_a_crashs_temporary_files_are_removed_on_the_next_write(tmp_path):
    stale = tmp_path / ".report.html.abc123.tmp"
    fresh = tmp_path / ".report.html.def456.tmp"  # perhaps another writer's, still at work
    for p in (stale, fresh):
        p.write_text("half", encoding="utf-8")
    old = time.time() - STALE_SECONDS - 60
    os.utime(stale, (old, old))
    write_group({tmp_path / "report.html": lambda tmp: tmp.write_text("x", encoding="utf-8")})
    assert not stale.exists() and fresh.exists()
    assert (tmp_path / "report.html").read_text(encoding="utf-8") == "x"
