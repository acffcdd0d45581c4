"""Command-line option values, checked as they are read: each checker returns the value or
raises ``argparse.ArgumentTypeError`` with the one sentence the command line prints (naming the
option and what would have been accepted). Nothing heavy is imported here.
"""

from __future__ import annotations

import argparse
import math
import re
from datetime import date

FIRST_DATE = date(1900, 1, 1)
LAST_DATE = date(2261, 12, 31)
"""Dates an option may name: the plausible window of the ingest's dates."""
_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_SEASONS = re.compile(r"^(\d{4})(?:-(\d{4}))?$")


def _bad(text: str) -> argparse.ArgumentTypeError:
    return argparse.ArgumentTypeError(text)


def day(text: str) -> str:
    """A calendar date 'YYYY-MM-DD' between 1900 and 2261, returned as written."""
    value = None
    if _DATE.match(text.strip()):
        try:
            value = date.fromisoformat(text.strip())
        except ValueError:
            value = None
    if value is None:
        raise _bad(f"{text!r} is not a date: give a calendar date as YYYY-MM-DD, e.g. 2025-01-14")
    if not FIRST_DATE <= value <= LAST_DATE:
        raise _bad(f"{text!r} is outside the dates cyanorisk reads ({FIRST_DATE} to {LAST_DATE})")
    return value.isoformat()


def seasons(text: str) -> str:
    """Season start years: '2018' or '2015-2022' (first not after last)."""
    found = _SEASONS.match(text.strip())
    if not found:
        raise _bad(f"{text!r} is not a season or a range of seasons: give a start year such "
                   "as 2018, or a range such as 2015-2022")
    first, last = int(found.group(1)), int(found.group(2) or found.group(1))
    if first > last:
        raise _bad(f"{text!r} runs backwards: give the first season first, e.g. {last}-{first}")
    if not FIRST_DATE.year <= first <= LAST_DATE.year:
        raise _bad(f"{text!r} is outside the years cyanorisk reads")
    return f"{first}-{last}"


def _number(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    return value


def cost(text: str) -> float:
    """A cost above 0 (how many false alarms one missed exceedance is worth)."""
    value = _number(text)
    if not (value > 0 and math.isfinite(value)):
        raise _bad(f"{text!r} is not a cost: give how many false alarms one missed exceedance "
                   "is worth, a number above 0, e.g. 5")
    return value


def hit_rate(text: str) -> float:
    """A hit rate: a share above 0 and at most 1."""
    value = _number(text)
    if not 0 < value <= 1:
        raise _bad(f"{text!r} is not a hit rate: give a share above 0 and at most 1, e.g. 0.9")
    return value


def seconds(text: str) -> float:
    """A positive number of seconds."""
    value = _number(text)
    if not (value > 0 and math.isfinite(value)):
        raise _bad(f"{text!r} is not a number of seconds above 0, e.g. 30")
    return value


def years(text: str) -> int:
    """A whole number of years from 1 to 50."""
    try:
        value = int(text)
    except ValueError:
        value = 0
    if not 1 <= value <= 50:
        raise _bad(f"{text!r} is not a number of years: give a whole number from 1 to 50")
    return value


class Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one sentence, ``cyanorisk: option --x: ...``, with
    exit status 2 (no usage block: ``--help`` shows it)."""

    def error(self, message: str) -> None:  # type: ignore[override]
        text = message.replace("argument ", "option ", 1)
        text = text[:1].lower() + text[1:]
        self.exit(2, f"{self.prog.split()[0]}: {text.rstrip('.')}; see "
                     f"{self.prog} --help.\n")


__all__ = ["Parser", "cost", "day", "hit_rate", "seasons", "seconds", "years"]
