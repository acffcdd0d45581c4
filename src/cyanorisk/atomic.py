"""Atomic file output: write beside the target, then rename, so readers never see half a file.

A group of files is committed together: every file is written to a temporary name first, and
only when all are written are they renamed into place.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path


def _temporary_beside(path: Path) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    return Path(name)


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
    try:
        for target, write in writers.items():
            tmp = _temporary_beside(Path(target))
            staged.append((tmp, Path(target)))
            write(tmp)
    except BaseException:
        for tmp, _ in staged:
            tmp.unlink(missing_ok=True)
        raise
    for tmp, target in staged:
        os.replace(tmp, target)
    return [target for _, target in staged]
