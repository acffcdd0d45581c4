"""Atomic file output: write beside the target, then rename, so readers never see half a file.

A group of files is committed together: every file is written to a temporary name first, and
only when all are written (and flushed to disk) are they renamed into place. Files get the mode
the user's umask gives new files (``0666 & ~umask``, as ``open()`` would), not the private mode
of temporary files, so that a colleague or a web server can read reports where the umask lets
them. Temporary files left behind by a crash are removed the next time the same file is
written.
"""

from __future__ import annotations

import os
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

STALE_SECONDS = 3600.0
"""A temporary file older than this beside its target is a crash's leftover."""


def file_mode() -> int:
    """The mode new files get under the process's umask: ``0o666 & ~umask``."""
    mask = os.umask(0o022)  # reading the umask means setting it; put it straight back
    os.umask(mask)
    return 0o666 & ~mask


def _remove_stale(path: Path) -> None:
    now = time.time()
    for old in path.parent.glob(f".{path.name}.*.tmp"):
        try:
            if now - old.stat().st_mtime > STALE_SECONDS:
                old.unlink()
        except OSError:  # gone already, or not ours to remove
            pass


def temporary_beside(path: Path) -> Path:
    """An empty temporary file in the target's folder (created if missing)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    _remove_stale(path)
    fd, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    return Path(name)


def settle(tmp: Path, mode: int) -> None:
    """Give a written temporary file its final mode and flush it to disk."""
    os.chmod(tmp, mode)
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())


def _sync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:  # some file systems cannot sync a folder
        pass
    finally:
        os.close(fd)


def write_group(writers: dict[Path, Callable[[Path], None]]) -> list[Path]:
    """Write several files atomically as a group.

    Parameters
    ----------
    writers : dict
        Target path -> function that writes the content to the path it is given.

    Returns the target paths. If any writer fails, no target is touched and the temporary files
    are removed.
    """
    staged: list[tuple[Path, Path]] = []
    mode = file_mode()
    try:
        for target, write in writers.items():
            tmp = temporary_beside(Path(target))
            staged.append((tmp, Path(target)))
            write(tmp)
            settle(tmp, mode)
    except BaseException:
        for tmp, _ in staged:
            tmp.unlink(missing_ok=True)
        raise
    for tmp, target in staged:
        os.replace(tmp, target)
    for folder in {target.parent for _, target in staged}:
        _sync_folder(folder)
    return [target for _, target in staged]
