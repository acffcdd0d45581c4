"""Quality flags, the rejects ledger, row accounting and the ingest error.

Nothing is lost in ingest: every raw row either lands in the clean output (as itself, merged with
an identical duplicate, or aggregated into its interval) or in the rejects ledger with a reason.
:class:`RowAccount` counts where each row went and :meth:`RowAccount.check` proves the balance.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from enum import IntEnum

import numpy as np
import pandas as pd

from cyanorisk.errors import IngestError

__all__ = ["IngestError"]  # raised by every reader; defined with the other errors

BAD_ROW_POLICIES = ("reject", "stop")
"""A row that cannot be read: into the rejects ledger ('reject'), or an error ('stop')."""
OFF_GRID_POLICIES = ("aggregate", "drop")
"""Readings between grid points: combined into their interval, or dropped (ledger)."""
DUPLICATE_POLICIES = ("last", "first")
"""Conflicting rows for one stamp (or one sample and taxon): which one to keep, in file order."""
AFTER_LATEST = "the latest plausible date"
"""Words in the ledger message of a row dated after the latest plausible date (the day after the
run, by default), so that such rows can be told from those dated too early."""
DEFAULT_BAD_ROWS = "stop"
"""Stop at the first bad row, naming file, line and column, unless told to reject and go on."""
DEFAULT_OFF_GRID = "aggregate"
DEFAULT_DUPLICATES = "last"


class Flag(IntEnum):
    """Quality flag of one value on the regular grid.

    The integer is the precedence: where several apply to one value, the highest is reported.
    """

    OK = 0
    """A reading on the grid, kept as read (after unit conversion)."""
    AGGREGATED = 1
    """Combined from several readings in the interval by the variable's resample rule, or one
    reading stamped between grid points, moved to its interval."""
    DUPLICATE_CONFLICT = 2
    """Several rows had this stamp with different values; the duplicate policy chose one."""
    MISSING = 3
    """No usable reading; the gap was too long to fill (or the variable is never filled)."""
    FILLED = 4
    """Filled across a short gap (linear in time, or through vector components)."""
    VARIABLE = 5
    """Wind direction reported as variable ('VRB'): speed known, direction undefined."""
    CALM = 6
    """Wind direction reported as calm: direction undefined."""
    OUT_OF_RANGE = 7
    """A reading outside the variable's plausible range; the value is set to NaN."""


FLAG_NAMES: list[str] = [f.name.lower() for f in Flag]
"""Flag names in precedence order, as they appear in the ``*_flag`` columns."""


def flag_column(codes: np.ndarray) -> pd.Categorical:
    """Turn an array of :class:`Flag` codes into the categorical stored in ``*_flag`` columns."""
    return pd.Categorical.from_codes(codes.astype(np.int8), categories=FLAG_NAMES)


class AccountingError(AssertionError):
    """Row accounting does not balance: a bug, never a property of the input."""


@dataclass
class RowAccount:
    """Where every raw data row went.

    ``read == kept + duplicates_identical + duplicates_conflicting + off_grid + rejected``.
    Blank lines, the header and preamble lines are not data rows and are not counted.
    """

    read: int = 0
    """Data rows read from the files."""
    kept: int = 0
    """Rows that became the value of their grid interval as they were."""
    duplicates_identical: int = 0
    """Rows with the same stamp and the same values as the kept row: merged, nothing lost."""
    duplicates_conflicting: int = 0
    """Rows with the same stamp but other values, superseded by the duplicate policy (ledger)."""
    off_grid: int = 0
    """Rows stamped between grid points: aggregated into their interval, or dropped (ledger)."""
    rejected: int = 0
    """Rows that could not be used (ledger, with reason)."""

    def check(self) -> RowAccount:
        """Raise :class:`AccountingError` unless the account balances; return self."""
        placed = (self.kept + self.duplicates_identical + self.duplicates_conflicting
                  + self.off_grid + self.rejected)
        if placed != self.read:
            raise AccountingError(f"row accounting does not balance: read {self.read}, "
                                  f"placed {placed} ({asdict(self)})")
        return self

    def __add__(self, other: RowAccount) -> RowAccount:
        return RowAccount(**{k: v + getattr(other, k) for k, v in asdict(self).items()})

    def as_dict(self) -> dict[str, int]:
        return asdict(self)


LEDGER_COLUMNS = ["file", "line", "column", "raw", "reason", "message"]


@dataclass
class Ledger:
    """Accumulates rejected rows; :meth:`frame` gives the rejects ledger as a table."""

    parts: list[pd.DataFrame] = field(default_factory=list)

    def add(self, file: str, lines: np.ndarray, column: str | np.ndarray | list,
            raw: np.ndarray | list, reason: str, message: str | np.ndarray | list) -> None:
        """Record rows (one per entry of ``lines``) with one reason."""
        n = len(lines)
        if n == 0:
            return
        self.parts.append(pd.DataFrame({
            "file": np.full(n, file, dtype=object),
            "line": np.asarray(lines, dtype=np.int64),
            "column": column if not isinstance(column, str) else np.full(n, column, dtype=object),
            "raw": raw,
            "reason": np.full(n, reason, dtype=object),
            "message": message if not isinstance(message, str) else np.full(n, message, object),
        }))

    def frame(self) -> pd.DataFrame:
        """All recorded rows, sorted by file and line."""
        if not self.parts:
            return pd.DataFrame({c: pd.Series(dtype="int64" if c == "line" else object)
                                 for c in LEDGER_COLUMNS})
        out = pd.concat(self.parts, ignore_index=True)
        return out.sort_values(["file", "line"], kind="stable", ignore_index=True)
