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
    ranks = pd.Series(s).rank(method="average").to_numpy()  # ties share their mean rank
    return float((ranks[o == 1].sum() - n_pos * (n_pos + 1) / 2) / (n_pos * n_neg))


def roc_curve(score: np.ndarray, o: np.ndarray) -> pd.DataFrame:
    """ROC points (false-alarm rate, hit rate) for every distinct threshold, highest first."""
    s, o = _clean(score, o)
    thresholds = np.unique(s)[::-1]
    n_pos, n_neg = max(int((o == 1).sum()), 1), max(int((o == 0).sum()), 1)
    rows = [(np.inf, 0.0, 0.0)]
    for t in thresholds:
        warn = s >= t
        rows.append((t, float((warn & (o == 0)).sum() / n_neg), float((warn & (o == 1)).sum() / n_pos)))
    return pd.DataFrame(rows, columns=["threshold", "false_alarm_rate", "hit_rate"])
