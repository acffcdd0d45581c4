"""Forecast verification scores: pure functions of forecast probabilities and outcomes.

Outcomes are 0 or 1; NaN outcomes (no sample in the window) are left out of every score. A
score that cannot be computed (no outcome, or only one class for ROC) is NaN, never a guess.
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def _clean(p: np.ndarray, o: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    p = np.asarray(p, dtype=float)
    o = np.asarray(o, dtype=float)
    keep = ~np.isnan(p) & ~np.isnan(o)
    return p[keep], o[keep]


def brier_score(p: np.ndarray, o: np.ndarray) -> float:
    """Brier score: mean((p - o)^2) [-], 0 is perfect.

    References
    ----------
    .. [1] Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
       Monthly Weather Review 78(1): 1-3.

    Examples
    --------
    >>> brier_score([0.1, 0.9, 0.8, 0.3], [0, 1, 1, 0])
    0.0375
    """
    p, o = _clean(p, o)
    return float(np.mean((p - o) ** 2)) if len(p) else float("nan")


def brier_skill_score(p: np.ndarray, o: np.ndarray, p_ref: np.ndarray) -> float:
    """Brier skill score against a reference forecast: 1 - BS / BS_ref [-].

    Positive when the forecast beats the reference (climatology or persistence). Standard
    forecast verification (Wilks, Statistical Methods in the Atmospheric Sciences, ch. 8).
    """
    p = np.asarray(p, dtype=float)
    p_ref = np.asarray(p_ref, dtype=float)
    o = np.asarray(o, dtype=float)
    keep = ~np.isnan(p) & ~np.isnan(p_ref) & ~np.isnan(o)
    bs, ref = brier_score(p[keep], o[keep]), brier_score(p_ref[keep], o[keep])
    return float(1.0 - bs / ref) if ref > 0 else float("nan")


def roc_auc(score: np.ndarray, o: np.ndarray) -> float:
    """Area under the ROC curve, ties counted half [-].

    Equal to the Mann-Whitney probability that a random event scores above a random non-event.

    References
    ----------
    .. [1] Hanley, J. A. and McNeil, B. J. (1982). The meaning and use of the area under a
       receiver operating characteristic (ROC) curve. Radiology 143: 29-36.

    Examples
    --------
    >>> roc_auc([0.1, 0.4, 0.35, 0.8], [0, 0, 1, 1])
    0.75
    """
    s, o = _clean(score, o)
    n_pos, n_neg = int((o == 1).sum()), int((o == 0).sum())
    if n_pos == 0 or n_neg == 0:
        return float("nan")
    ranks = average_ranks(s)  # ties share their mean rank
    return float((ranks[o == 1].sum() - n_pos * (n_pos + 1) / 2) / (n_pos * n_neg))


def average_ranks(x: np.ndarray) -> np.ndarray:
    """Ranks 1..n of the values, ties sharing their mean rank (as ``scipy.stats.rankdata``)."""
    order = np.argsort(x, kind="mergesort")
    sorted_x = x[order]
    first = np.concatenate(([True], sorted_x[1:] != sorted_x[:-1]))
    group = np.cumsum(first) - 1
    starts = np.flatnonzero(first)
    ends = np.concatenate((starts[1:], [len(x)]))
    mean_rank = (starts + ends + 1) / 2.0  # mean of the 1-based ranks starts+1 .. ends
    out = np.empty(len(x))
    out[order] = mean_rank[group]
    return out


def roc_curve(score: np.ndarray, o: np.ndarray) -> pd.DataFrame:
    """ROC points (false-alarm rate, hit rate) for every distinct threshold, highest first.

    One sort and cumulative sums of events and non-events down the scores (Fawcett 2006, An
    introduction to ROC analysis, Pattern Recognition Letters 27: 861-874, algorithm 1): a
    threshold warns on every score at or above it. A rate without cases to count is undefined
    (NaN), as in scikit-learn.
    """
    s, o = _clean(score, o)
    order = np.argsort(-s, kind="mergesort")
    s, o = s[order], o[order]
    last_of_tie = np.concatenate((s[1:] != s[:-1], [True])) if len(s) else np.zeros(0, bool)
    hits = np.cumsum(o == 1)[last_of_tie]
    false_alarms = np.cumsum(o == 0)[last_of_tie]
    n_pos, n_neg = int((o == 1).sum()), int((o == 0).sum())
    nan = float("nan")
    far = false_alarms / n_neg if n_neg else np.full(len(hits), nan)
    hr = hits / n_pos if n_pos else np.full(len(hits), nan)
    return pd.DataFrame({
        "threshold": np.concatenate(([np.inf], s[last_of_tie])),
        "false_alarm_rate": np.concatenate(([0.0 if n_neg else nan], far)).astype(float),
        "hit_rate": np.concatenate(([0.0 if n_pos else nan], hr)).astype(float)})


def reliability_table(p: np.ndarray, o: np.ndarray, bins: int = 10) -> pd.DataFrame:
    """Forecast probability binned against the observed frequency, with counts.

    Bins are equal-width on [0, 1] (the last one closed). A bin without forecasts has NaN
    means and a count of 0. Standard forecast verification (Wilks, Statistical Methods in the
    Atmospheric Sciences, ch. 8, reliability diagram).
    """
    p, o = _clean(p, o)
    edges = np.round(np.linspace(0.0, 1.0, bins + 1), 12)  # 0.3, not 0.30000000000000004
    which = np.clip(np.digitize(p, edges[1:-1], right=False), 0, bins - 1)
    rows = []
    for b in range(bins):
        sel = which == b
        rows.append({"bin_low": edges[b], "bin_high": edges[b + 1], "n": int(sel.sum()),
                     "mean_forecast": float(p[sel].mean()) if sel.any() else float("nan"),
                     "observed_frequency": float(o[sel].mean()) if sel.any() else float("nan")})
    return pd.DataFrame(rows)


def contingency(p: np.ndarray, o: np.ndarray, threshold: float) -> dict[str, float]:
    """Scores of warnings issued when ``p >= threshold``.

    hits a, false alarms b, misses c, correct negatives d;
    hit rate (probability of detection) POD = a/(a+c); false alarm ratio FAR = b/(a+b);
    probability of false detection POFD = b/(b+d); critical success index CSI = a/(a+b+c).
    A ratio whose denominator is zero is NaN. Standard 2x2 verification (Wilks, ch. 8).
    """
    p, o = _clean(p, o)
    warn = p >= threshold
    a = int((warn & (o == 1)).sum())
    b = int((warn & (o == 0)).sum())
    c = int((~warn & (o == 1)).sum())
    d = int((~warn & (o == 0)).sum())

    def ratio(num: int, den: int) -> float:
        return num / den if den else float("nan")

    return {"hits": a, "false_alarms": b, "misses": c, "correct_negatives": d,
            "hit_rate": ratio(a, a + c), "false_alarm_ratio": ratio(b, a + b),
            "pofd": ratio(b, b + d), "csi": ratio(a, a + b + c)}


def lead_time_days(dates: np.ndarray, warned: np.ndarray, exceed_dates: np.ndarray,
                   horizon_days: int = 7) -> float:
    """Days from the first warning to the first observed exceedance in one season.

    ``dates`` are the season's consecutive issue days, ``warned`` whether a warning at or above
    the level was issued on each, ``exceed_dates`` the days of samples that met the level.

    The first warning counted is the start of the warning spell (consecutive warning days) that
    was running within ``horizon_days`` before the first exceedance, so that a false alarm months
    earlier does not pass for a long lead time. Positive: the warning came first; zero: on the
    day; negative: the first warning came that many days after the exceedance (late); NaN: no
    exceedance this season, or no warning at all.
    """
    exceed = np.sort(np.asarray(exceed_dates, dtype="datetime64[D]"))
    dates = np.asarray(dates, dtype="datetime64[D]")
    warned = np.asarray(warned, dtype=bool)
    if not len(exceed) or not warned.any():
        return float("nan")
    first = exceed[0]
    day = np.timedelta64(1, "D")
    before = warned & (dates <= first)
    if before.any() and first - dates[before].max() <= horizon_days * day:
        k = int(np.flatnonzero(before)[-1])
        while k > 0 and warned[k - 1] and dates[k] - dates[k - 1] == day:
            k -= 1
        return float((first - dates[k]) / day)
    after = warned & (dates > first)
    return float(-((dates[after].min() - first) / day)) if after.any() else float("nan")


def _runs(mask: np.ndarray, dates: np.ndarray) -> list[np.ndarray]:
    """Index arrays of the runs of consecutive days where ``mask`` holds (a missing day ends a
    run)."""
    idx = np.flatnonzero(mask)
    if not len(idx):
        return []
    day = np.timedelta64(1, "D")
    breaks = np.flatnonzero(np.diff(dates[idx]) != day) + 1
    return np.split(idx, breaks)


def event_counts(dates: np.ndarray, warned: np.ndarray, outcome: np.ndarray) -> dict[str, int]:
    """Hits and misses counted in events, not days, for one season and level.

    An event is a run of consecutive issue days whose outcome is 1 (a sample in the window met
    the level); it is warned when a warning was issued on any of its days, else missed. A
    false-alarm spell is a run of consecutive warning days none of which had an exceedance and
    at least one of which was decided without one. Common practice in warning verification
    (counting episodes rather than days), no source.
    """
    dates = np.asarray(dates, dtype="datetime64[D]")
    warned = np.asarray(warned, dtype=bool)
    o = np.asarray(outcome, dtype=float)
    events = _runs(o == 1, dates)
    hits = sum(bool(warned[run].any()) for run in events)
    spells = _runs(warned, dates)
    false = sum(bool(not (o[run] == 1).any() and (o[run] == 0).any()) for run in spells)
    return {"events": len(events), "event_hits": hits, "event_misses": len(events) - hits,
            "false_alarm_spells": false}
