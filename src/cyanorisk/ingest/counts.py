"""Cell counts as labs and people type them.

:func:`parse_count` reads one entry of a count column and says what it is: a number, a value
censored below ('<100', 'ND') or above ('>200000', 'TNTC'), missing, or something that cannot
be read (with the reason, for the rejects ledger). Censored values stay censored: '<100' is kept
as censor '<' with value 100, never turned into 0, 50 or 100.

Forms understood (decimal mark '.' unless the layout says ','):

- plain and scientific numbers: ``1200``, ``1.2E4``, ``1.2e+04``;
- thousands separators: ``1,200`` and ``1 200`` (and ``1.200`` where the decimal mark is a
  comma); a group separator must be followed by exactly three digits;
- censored below: ``<100``, ``< 100``, ``<1,000``; not detected: ``ND``, ``n.d.``,
  ``not detected``, ``BDL`` (read as below the method's detection limit);
- censored above: ``>200000``, ``TNTC``, ``too numerous to count`` (read as above the
  method's upper counting limit);
- the letter O typed for a zero (``1O0``, ``2,O00``, a lone ``O``): fixed and flagged;
- blank, ``-``, ``NA``: missing.

These conventions are common practice in laboratory reporting, no source.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

CENSOR_BELOW, CENSOR_ABOVE, EXACT = "<", ">", "="

NOT_DETECTED = {"nd", "n.d.", "n.d", "not detected", "none detected", "bdl", "<dl", "<lod", "nil"}
TOO_MANY = {"tntc", "too numerous to count", "too many to count", "tmtc"}
MISSING = {"", "-", "--", "na", "n/a", "nan", "null", "not analysed", "not analyzed", "ns"}

_SCI = re.compile(r"^[0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?$|^[0-9]+\.$")


@dataclass(frozen=True)
class Count:
    """One parsed entry."""

    value: float
    """The number [in the column's unit]; NaN when missing or not readable."""
    censor: str | None
    """'=', '<' or '>'; None when missing or not readable."""
    flag: str = ""
    """What was repaired or assumed: 'letter_o', 'not_detected', 'too_numerous'."""
    reason: str = ""
    """Why the entry cannot be read (empty when it can)."""


def _number(text: str, decimal: str) -> float | None:
    """A plain number with optional thousands grouping; None if it is not one."""
    t = text.replace("\u00a0", " ").strip()
    group = "." if decimal == "," else ","
    if " " in t or group in t:
        parts = re.split(r"[ " + re.escape(group) + r"]", t)
        head, *rest = parts
        tail = rest[-1] if rest else ""
        if decimal in tail:  # 1,200.5
            tail_int, _, frac = tail.partition(decimal)
            rest = rest[:-1] + [tail_int]
            frac = decimal + frac
        else:
            frac = ""
        if not (head.isdigit() and 1 <= len(head) <= 3 and rest
                and all(len(r) == 3 and r.isdigit() for r in rest)):
            return None
        t = head + "".join(rest) + frac
    if decimal == ",":
        t = t.replace(",", ".")
    if not _SCI.match(t):
        return None
    return float(t)


def parse_count(text: str | None, decimal: str = ".", detection_limit: float | None = None,
                upper_limit: float | None = None) -> Count:
    """Read one typed count.

    Parameters
    ----------
    text : str
        The cell as typed.
    decimal : {'.', ','}
        The decimal mark of the file.
    detection_limit : float, optional
        The method's detection limit [column unit], used for 'ND' and the like.
    upper_limit : float, optional
        The method's upper counting limit [column unit], used for 'TNTC' and the like.
    """
    raw = "" if text is None else str(text)
    t = raw.strip()
    low = t.lower()
    if low in MISSING:
        return Count(float("nan"), None)
    if low in NOT_DETECTED:
        if detection_limit is None:
            return Count(float("nan"), None, reason="'not detected' but no detection limit is "
                                                   "configured for this layout")
        return Count(float(detection_limit), CENSOR_BELOW, "not_detected")
    if low in TOO_MANY:
        if upper_limit is None:
            return Count(float("nan"), None, reason="'too numerous to count' but no upper "
                                                   "counting limit is configured for this layout")
        return Count(float(upper_limit), CENSOR_ABOVE, "too_numerous")
    censor = EXACT
    if t[:1] in ("<", ">"):
        censor, t = t[0], t[1:].strip()
        if t.startswith("="):
            t = t[1:].strip()
    flag = ""
    value = _number(t, decimal)
    if value is None and re.search(r"[oO]", t) and re.fullmatch(r"[0-9oO.,\s]+", t):
        fixed = re.sub(r"[oO]", "0", t)
        value = _number(fixed, decimal)
        flag = "letter_o" if value is not None else ""
    if value is None or not math.isfinite(value):
        return Count(float("nan"), None, reason=f"'{raw}' is not a count: expected a number such "
                                                "as 1200, 1,200, 1.2E4, <100, >200000, ND or TNTC")
    return Count(value, censor, flag)
