"""Numbers as a report says them: percentages, counts, durations and dates, never in scientific
notation. One place, so that the headline, the page, the text summary and the e-mail agree.
"""

from __future__ import annotations

import math

import pandas as pd

MONTHS = ("January", "February", "March", "April", "May", "June", "July", "August", "September",
          "October", "November", "December")


def percent(p: float | None) -> str:
    """A probability as a percentage: '<1%' and '>99%' at the ends, whole percent between.

    Examples
    --------
    >>> percent(0.004), percent(0.113), percent(0.9996)
    ('<1%', '11%', '>99%')
    """
    if p is None or p != p:
        return "n/a"
    if p < 0.005:
        return "<1%"
    if p > 0.995:
        return ">99%"
    return f"{round(100 * p):.0f}%"


def number(x: float | None, unit: str = "") -> str:
    """A value with a sensible number of digits and thousands separators, its unit after it:
    no decimals from 100 up, one from 1, two significant digits below.

    Examples
    --------
    >>> number(545.4, "km"), number(22.54, "degC"), number(0.997), number(0.0123, "ug/L")
    ('545 km', '22.5 degC', '1.0', '0.012 ug/L')
    >>> number(0.3, "ug/L")
    '0.3 ug/L'
    """
    if x is None or x != x:
        return "n/a"
    a = abs(x)
    if a >= 100:
        text = f"{x:,.0f}"
    elif a >= 0.95:
        text = f"{x:,.1f}"
    elif a == 0:
        text = "0"
    else:  # two significant digits below 1, without trailing zeros
        text = f"{x:.{max(1, 1 - math.floor(math.log10(a)))}f}".rstrip("0").rstrip(".")
    return f"{text} {unit}".strip()


def cells(value: float | None, censor: str | None = None, unit: str = "cells/mL") -> str:
    """A count as the lab gave it: '<300 cells/mL', '14,450 cells/mL'."""
    if value is None or value != value:
        return "none"
    prefix = censor if censor in ("<", ">") else ""
    return f"{prefix}{value:,.0f} {unit}"


def duration(days: float | None) -> str:
    """An age in words: '40 minutes', '5.2 hours', '3 days', '19 weeks'."""
    if days is None or days != days:
        return "n/a"
    hours = days * 24
    if hours < 1:
        return f"{hours * 60:.0f} minutes"
    if hours < 48:
        return f"{hours:.1f} hours".replace(".0 hours", " hours")
    if days < 70:
        return f"{days:.0f} days"
    return f"{days / 7:.0f} weeks"


def date(ts: pd.Timestamp | None, tz: str | None = None) -> str:
    """A day as people write it: '14 Jan 2025' (in the site's zone when given)."""
    if ts is None or pd.isna(ts):
        return "n/a"
    t = pd.Timestamp(ts)
    if tz is not None and t.tzinfo is not None:
        t = t.tz_convert(tz)
    return f"{t.day} {t:%b %Y}"


def time_of_year(day: pd.Timestamp) -> str:
    """'early January', 'mid-January' or 'late January' (the dekad of the day)."""
    d = pd.Timestamp(day)
    month = MONTHS[d.month - 1]
    return (f"early {month}" if d.day <= 10 else f"mid-{month}" if d.day <= 20
            else f"late {month}")
