"""A throwaway PostgreSQL server for tests: ``initdb`` into a temporary folder, a server on a free
localhost port (and a unix socket in that folder), stopped and removed at the end.

    with pg_server() as server:
        url = server.create_database("store_test")  # postgresql+psycopg://...

PostgreSQL refuses to run as root: when the tests run as root, ``initdb`` and ``pg_ctl`` run as
the ``postgres`` system user (``runuser -u postgres --``, else ``su postgres -c``) and the
temporary folder is handed to that user. :func:`find_binaries` looks on ``PATH`` and in
``/usr/lib/postgresql/*/bin`` (Debian's layout); :data:`INSTALL_HINT` says what to install when
nothing is found.
"""

from __future__ import annotations

import contextlib
import glob
import os
import re
import shlex
import shutil
import socket
import subprocess
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

SUPERUSER = "cyanorisk"
"""The database superuser that ``initdb`` creates (authentication: trust, localhost only)."""

INSTALL_HINT = ("no PostgreSQL server binaries (initdb, pg_ctl, postgres) on PATH or in "
                "/usr/lib/postgresql/*/bin; install them with `apt-get install postgresql` "
                "(Debian/Ubuntu) to run the PostgreSQL store tests")

NEEDED = ("initdb", "pg_ctl", "postgres")


class PgServerUnavailable(RuntimeError):
    """No PostgreSQL server can be started here (the message says why and what to install)."""


def _version_key(path: str) -> tuple[int, ...]:
    return tuple(int(x) for x in re.findall(r"\d+", path)) or (0,)


def find_binaries() -> Path | None:
    """The folder holding initdb, pg_ctl and postgres: from PATH, else the newest
    /usr/lib/postgresql/<version>/bin; None when there is none."""
    found = [shutil.which(name) for name in NEEDED]
    if all(found):
        folders = {Path(p).resolve().parent for p in found if p}
        if len(folders) == 1:
            return folders.pop()
    for folder in sorted(glob.glob("/usr/lib/postgresql/*/bin"), key=_version_key, reverse=True):
        if all(os.access(Path(folder, name), os.X_OK) for name in NEEDED):
            return Path(folder)
    return None


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _as_postgres(argv: list[str]) -> list[str]:
    """``argv`` run as the ``postgres`` system user (when this process is root)."""
    if shutil.which("runuser"):
        return ["runuser", "-u", "postgres", "--", *argv]
    if shutil.which("su"):
        return ["su", "postgres", "-s", "/bin/sh", "-c", shlex.join(argv)]
    raise PgServerUnavailable("running as root and neither runuser nor su is available to start "
                              "PostgreSQL as the postgres user")


@dataclass
class PgServer:
    """A running throwaway server."""

    bin_dir: Path
    root: Path
    port: int
    as_root: bool

    @property
    def data_dir(self) -> Path:
        return self.root / "data"

    @property
    def socket_dir(self) -> Path:
        return self.root / "socket"

    @property
    def log_file(self) -> Path:
        return self.root / "server.log"

    def url(self, database: str = "postgres") -> str:
        return f"postgresql+psycopg://{SUPERUSER}@127.0.0.1:{self.port}/{database}"

    def _run(self, argv: list[str], timeout: float = 120) -> None:
        cmd = _as_postgres(argv) if self.as_root else argv
        done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
        if done.returncode != 0:
            log = self.log_file.read_text(errors="replace")[-2000:] if self.log_file.exists() else ""
            raise PgServerUnavailable(f"{Path(argv[0]).name} failed ({done.returncode}): "
                                      f"{(done.stderr or done.stdout).strip()[-2000:]}\n{log}")

    def start(self) -> None:
        self.socket_dir.mkdir()
        if self.as_root:
            import pwd

            entry = pwd.getpwnam("postgres")
            os.chown(self.root, entry.pw_uid, entry.pw_gid)
            os.chown(self.socket_dir, entry.pw_uid, entry.pw_gid)
        self._run([str(self.bin_dir / "initdb"), "-D", str(self.data_dir), "-U", SUPERUSER,
                   "--auth=trust", "--encoding=UTF8", "--no-locale", "--no-sync"])
        options = (f"-p {self.port} -k {self.socket_dir} -c listen_addresses=127.0.0.1 "
                   "-c fsync=off -c synchronous_commit=off -c full_page_writes=off "
                   "-c max_connections=100")
        self._run([str(self.bin_dir / "pg_ctl"), "-D", str(self.data_dir), "-o", options,
                   "-l", str(self.log_file), "-w", "-t", "60", "start"])

    def stop(self) -> None:
        if (self.data_dir / "postmaster.pid").exists():
            with contextlib.suppress(PgServerUnavailable, subprocess.TimeoutExpired):
                self._run([str(self.bin_dir / "pg_ctl"), "-D", str(self.data_dir), "-m", "immediate",
                           "-w", "-t", "30", "stop"], timeout=60)

    def execute(self, sql: str, database: str = "postgres") -> None:
        """Run one statement outside a transaction (CREATE DATABASE and the like)."""
        import psycopg

        with psycopg.connect(host="127.0.0.1", port=self.port, user=SUPERUSER, dbname=database,
                             autocommit=True) as conn:
            conn.execute(sql)

    def create_database(self, name: str) -> str:
        """A new empty database; its SQLAlchemy URL."""
        if not re.fullmatch(r"[a-z_][a-z0-9_]*", name):
            raise ValueError(f"{name!r}: not a plain database name")
        self.execute(f"CREATE DATABASE {name}")
        return self.url(name)


@contextlib.contextmanager
def pg_server() -> Iterator[PgServer]:
    """Start a throwaway server; stop it and remove its folder at the end.

    Raises
    ------
    PgServerUnavailable
        When no binaries are found (the message is :data:`INSTALL_HINT`) or the server does not
        start (the message holds the tool's error and the end of the server log).
    """
    bin_dir = find_binaries()
    if bin_dir is None:
        raise PgServerUnavailable(INSTALL_HINT)
    as_root = hasattr(os, "geteuid") and os.geteuid() == 0
    if as_root:
        import pwd

        try:
            pwd.getpwnam("postgres")
        except KeyError:
            raise PgServerUnavailable("running as root and there is no postgres system user to run "
                                      "PostgreSQL as (it comes with `apt-get install postgresql`)") from None
    # not under pytest's tmp_path: that folder is private to root, out of reach of the postgres user
    root = Path(tempfile.mkdtemp(prefix="cyanorisk-pg-"))
    server = PgServer(bin_dir, root, free_port(), as_root)
    try:
        server.start()
        yield server
    finally:
        server.stop()
        shutil.rmtree(root, ignore_errors=True)
