"""Times of day as configurations write them ('06:00'): the one parser of ``HH:MM``.

Used for the issue time of the daily forecast, the sampling time assumed when a lab sheet gives
none, and the scheduler's trigger, so that all three accept and refuse the same texts.
"""

from __future__ import annotations

import re

_HHMM = re.compile(r"^(\d{2}):(\d{2})$")


def parse_hhmm(text: str) -> tuple[int, int]:
    """Hour and minute of a time of day written ``HH:MM`` (00:00 to 23:59).

    Raises
    ------
    ValueError
        With a sentence that says what is expected.

    Examples
    --------
    >>> parse_hhmm("06:30")
    (6, 30)
    """
    m = _HHMM.match(text) if isinstance(text, str) else None
    if not m or int(m.group(1)) > 23 or int(m.group(2)) > 59:
        raise ValueError(f"{text!r} is not a time of day; expected HH:MM from 00:00 to 23:59")
    return int(m.group(1)), int(m.group(2))


def minutes_after_midnight(text: str) -> int:
    """Minutes after midnight of an ``HH:MM`` text (see :func:`parse_hhmm`)."""
    hour, minute = parse_hhmm(text)
    return hour * 60 + minute
