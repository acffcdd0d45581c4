"""The installation's model-signing key: model files are signed with HMAC-SHA256 under a key
kept in the data folder, outside the models folder, readable by its owner only.

What it protects against: a model file edited, or replaced by one made elsewhere, after
``cyanorisk train`` wrote it; whoever can read the data folder's key can still sign a file, so
the key must stay as private as the data folder itself. It is not encryption: a model file
remains readable JSON.
"""

from __future__ import annotations

import hashlib
import hmac
import os
import secrets
from pathlib import Path

KEY_NAME = "model-signing.key"
"""The key's file in the data folder (64 hexadecimal digits, mode 0600)."""


def key_path(data_dir: str | os.PathLike[str]) -> Path:
    return Path(data_dir) / KEY_NAME


def installation_key(data_dir: str | os.PathLike[str], *, create: bool) -> bytes | None:
    """The installation's key; with ``create``, made (owner-only, never over an existing one)
    when missing. None when it is missing and not to be created.

    Raises
    ------
    OSError
        When the key file cannot be read or made (a symbolic link in its place included).
    """
    path = key_path(data_dir)
    if not path.exists() and not path.is_symlink():
        if not create:
            return None
        path.parent.mkdir(parents=True, exist_ok=True)
        flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0)
        try:
            fd = os.open(path, flags, 0o600)
        except FileExistsError:  # made meanwhile by another process: use that one
            pass
        else:
            with os.fdopen(fd, "w", encoding="ascii") as fh:
                fh.write(secrets.token_hex(32) + "\n")
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
    with os.fdopen(fd, encoding="ascii") as fh:
        text = fh.read().strip()
    return bytes.fromhex(text)


def signature(key: bytes, message: bytes) -> str:
    """HMAC-SHA256 of ``message`` (RFC 2104), as 'hmac-sha256:' and 64 hex digits."""
    return "hmac-sha256:" + hmac.new(key, message, hashlib.sha256).hexdigest()


def verify(key: bytes, message: bytes, claimed: object) -> bool:
    """Whether ``claimed`` is the signature of ``message`` (compared in constant time)."""
    return isinstance(claimed, str) and hmac.compare_digest(signature(key, message), claimed)
