"""The run lock of one host: a lock file that one process at a time holds for a run.

Portable (``filelock``: ``flock`` on POSIX, ``LockFileEx`` on Windows; no ``fcntl`` import here),
never waiting (a held lock is refused at once), and created safely: the lock path must not be a
symbolic link (it is refused, and whatever it points to is left untouched), the file is created
with ``O_NOFOLLOW`` where the platform has it, and its folder is created when missing. The file
stays in place after release.

Across hosts sharing one store, :meth:`cyanorisk.service.store.Store.site_day_lock` is the lock
that counts; this one keeps two runs of one installation apart.

    with RunLock(data_dir / ".cyanorisk-run.lock"):
        ...
"""

from __future__ import annotations

import errno
import os
from pathlib import Path
from types import TracebackType

import filelock

from cyanorisk.errors import LockError, RunLockedError

__all__ = ["LockError", "LockHeldError", "RunLock", "site_lock"]


class LockHeldError(RunLockedError):
    """Another process, or another lock in this process, holds the run lock."""


class RunLock:
    """Hold the lock file at ``path`` for the duration of a with-block.

    Raises
    ------
    LockHeldError
        When another holder (another process, or another RunLock in this process) has it.
    LockError
        When the lock path is a symbolic link or the lock file cannot be created.
    """

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = Path(path)
        self._lock: filelock.BaseFileLock | None = None

    @property
    def held(self) -> bool:
        return self._lock is not None

    def acquire(self) -> None:
        if self._lock is not None:
            raise LockHeldError(f"{self.path}: this lock is held already (by this same holder)")
        path = self.path
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise LockError(f"{path}: cannot create the lock's folder ({exc.strerror or exc})") from None
        if path.is_symlink():
            raise LockError(f"{path}: the lock path is a symbolic link; refusing to use it (remove the "
                            "link)")
        try:
            fd = os.open(path, os.O_WRONLY | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0), 0o644)
        except OSError as exc:
            if exc.errno == errno.ELOOP or path.is_symlink():
                raise LockError(f"{path}: the lock path is a symbolic link; refusing to use it (remove "
                                "the link)") from None
            raise LockError(f"{path}: cannot create the lock file ({exc.strerror or exc})") from None
        os.close(fd)
        lock = filelock.FileLock(str(path), timeout=0)
        try:
            lock.acquire()
        except filelock.Timeout:
            raise LockHeldError(f"{path}: another cyanorisk run holds the lock; try again when it has "
                                "finished") from None
        except OSError as exc:
            if exc.errno == errno.ELOOP or path.is_symlink():
                raise LockError(f"{path}: the lock path is a symbolic link; refusing to use it (remove "
                                "the link)") from None
            raise LockError(f"{path}: cannot lock the lock file ({exc.strerror or exc})") from None
        self._lock = lock

    def release(self) -> None:
        lock, self._lock = self._lock, None
        if lock is not None:
            lock.release()

    def __enter__(self) -> RunLock:
        self.acquire()
        return self

    def __exit__(self, kind: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        self.release()


def site_lock(data_dir: str | os.PathLike[str], site_id: str) -> RunLock:
    """One installation's lock of one site: a file in the site's data folder. Runs, ingests and
    other commands that write for a site take it, so that one of them at a time writes its
    files; other sites go on."""
    return RunLock(Path(data_dir) / site_id / ".run.lock")
