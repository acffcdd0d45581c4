"""The problems cyanorisk reports to people, each told in one sentence.

This module imports nothing heavy, so that the command line can catch every one of them
without loading pandas or a database driver first. Each error carries the exit status the
command line gives it (documented in the README):

- 2: a configuration or option problem (:class:`ConfigError`, :class:`OptionError`);
- 1: a data problem: an input file, a model file, a backtest that cannot be run as asked
  (:class:`IngestError`, :class:`ModelFileError`, :class:`BacktestError`);
- 3: the data are insufficient for an assessment (see ``cyanorisk report`` and ``run``), or
  for a backtest to replay any season (:class:`NothingToReplayError`);
- 4: the store cannot be used, or another run holds a lock (:class:`StoreError`,
  :class:`RunLockedError`).
"""

from __future__ import annotations

EXIT_OK = 0
EXIT_DATA = 1
EXIT_CONFIG = 2
EXIT_INSUFFICIENT = 3
EXIT_STORE = 4


class CyanoriskError(Exception):
    """A problem told in one sentence; ``exit_status`` is what the command line returns."""

    exit_status = EXIT_DATA


class ConfigError(CyanoriskError, ValueError):
    """A configuration problem, told in one sentence naming the file and the key."""

    exit_status = EXIT_CONFIG

    def __init__(self, path: object, key: str | None, message: str) -> None:
        self.path, self.key = str(path), key
        where = f"{path}: key '{key}'" if key else f"{path}"
        super().__init__(f"{where}: {message}")


class OptionError(CyanoriskError, ValueError):
    """A command-line option with a value it cannot take, told in one sentence naming it."""

    exit_status = EXIT_CONFIG

    def __init__(self, option: str, message: str) -> None:
        self.option = option
        super().__init__(f"option {option}: {message}")


class IngestError(CyanoriskError, ValueError):
    """A problem with an input file, told in one sentence that names file, line and column."""

    def __init__(self, path: object, message: str, line: int | None = None,
                 column: str | None = None, byte_in_line: int | None = None) -> None:
        self.path = str(path)
        self.line = line
        self.column = column
        self.reason = message
        self.byte_in_line = byte_in_line
        """For an encoding error: 1-based position of the bad byte in its line."""
        where = self.path
        if line is not None:
            where += f", line {line}"
        if column is not None:
            where += f", column '{column}'"
        super().__init__(f"{where}: {message}")


class ModelFileError(CyanoriskError, ValueError):
    """A model or thresholds file that cannot be used: missing, from another version, altered,
    or not such a file."""


class BacktestError(CyanoriskError, ValueError):
    """A backtest that cannot be run as asked (e.g. seasons outside the data)."""


class InsufficientDataError(CyanoriskError, ValueError):
    """The data hold too little to fit a model (every labelled day alike, no labelled day)."""

    exit_status = EXIT_INSUFFICIENT


class NothingToReplayError(BacktestError):
    """No season asked for has enough history before it to be replayed (insufficient data)."""

    exit_status = EXIT_INSUFFICIENT


class StoreError(CyanoriskError, RuntimeError):
    """The store cannot be used (newer schema, unreachable database, busy, no store there)."""

    exit_status = EXIT_STORE


class SiteLockedError(StoreError):
    """Another process holds the lock of a site and day in a shared store."""


class LockError(CyanoriskError, RuntimeError):
    """A run lock cannot be taken (held elsewhere, or an unsafe lock path)."""

    exit_status = EXIT_STORE


class RunLockedError(LockError):
    """Another run holds the lock of a site."""


class ComputeError(CyanoriskError, RuntimeError):
    """The compute engine cannot be started or reached (Dask missing, no scheduler there)."""


class WorkerLostError(ComputeError):
    """A worker (or the connection to the cluster) was lost mid-run: the run is marked
    interrupted and the next run completes what it left."""
