"""Threshold tuning: which probability should raise each alert level, given what a missed
exceedance costs against a false alarm.

Works on a backtest's issued forecasts (:class:`cyanorisk.backtest.BacktestResult`): for each
level the warning threshold is swept, and the hits, misses, false alarms and correct negatives,
the hit rate, the false alarm ratio and the mean lead time are tabulated. A threshold is chosen
by (a) the smallest expected cost, ``miss_cost`` x misses + false alarms (a false alarm costs 1),
or (b) the highest threshold whose hit rate reaches a target (the fewest false alarms). How
stable the choice is shows in the spread of the thresholds chosen on bootstrap resamples of
whole seasons.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from cyanorisk.backtest import warning_view
from cyanorisk.verify import event_counts, lead_time_days

THRESHOLDS = np.round(np.arange(0.01, 1.0, 0.01), 2)
"""Probability thresholds swept: 0.01 to 0.99."""


def _pct(share: float) -> str:
    """A share as a percentage with no more digits than it has: 0.9 -> 90%, 0.975 -> 97.5%."""
    return f"{round(100 * share, 1):g}%"


def _counts(p: np.ndarray, o: np.ndarray, thresholds: np.ndarray) -> np.ndarray:
    """Hits, false alarms, misses and correct negatives at every threshold: a (4, n) array."""
    keep = ~np.isnan(p) & ~np.isnan(o)
    warn = p[keep, None] >= thresholds[None, :]
    event = (o[keep] == 1)[:, None]
    return np.stack([(warn & event).sum(axis=0), (warn & ~event).sum(axis=0),
                     (~warn & event).sum(axis=0), (~warn & ~event).sum(axis=0)])


def _table(counts: np.ndarray, thresholds: np.ndarray) -> pd.DataFrame:
    a, b, c, d = counts
    with np.errstate(invalid="ignore", divide="ignore"):
        return pd.DataFrame({"threshold": thresholds, "hits": a, "false_alarms": b, "misses": c,
                             "correct_negatives": d, "hit_rate": a / (a + c),
                             "false_alarm_ratio": b / (a + b), "pofd": b / (b + d),
                             "csi": a / (a + b + c)})


def _seasons(forecasts: pd.DataFrame) -> list[tuple[int, np.ndarray, np.ndarray, np.ndarray]]:
    """Per season: its issue dates, probabilities and outcomes as arrays, in date order."""
    out = []
    for s, g in forecasts.groupby("season", sort=True):
        out.append((s, g["issue_date"].to_numpy(dtype="datetime64[D]"),
                    g["probability"].to_numpy(dtype=float), g["outcome"].to_numpy(dtype=float)))
    return out


def sweep(forecasts: pd.DataFrame, exceedances: pd.DataFrame,
          thresholds: np.ndarray = THRESHOLDS, lead_times: bool = True) -> pd.DataFrame:
    """The trade-off table of one level: a row per threshold.

    ``forecasts``: the backtest rows of one level (issue_date, season, probability, outcome,
    horizon_days); ``exceedances``: its first exceedance per season. Contingency counts follow
    :func:`cyanorisk.verify.contingency` (in days), computed for all thresholds at once; with
    ``lead_times``, the mean lead time and the counts in events (:func:`verify.event_counts`).
    """
    table = _table(_counts(forecasts["probability"].to_numpy(dtype=float),
                           forecasts["outcome"].to_numpy(dtype=float), thresholds), thresholds)
    if lead_times:
        first = dict(zip(exceedances["season"], exceedances["first_exceedance"], strict=True))
        horizon = int(forecasts["horizon_days"].iloc[0]) if len(forecasts) else 7
        seasons = _seasons(forecasts)
        leads, events = [], []
        for threshold in thresholds:
            lead, total = [], {"event_hits": 0, "event_misses": 0, "false_alarm_spells": 0}
            for s, dates, p, o in seasons:
                warned = p >= threshold
                counted = event_counts(dates, warned, o)
                for key in total:
                    total[key] += counted[key]
                ex = first.get(s)
                if ex is not None and not pd.isna(ex):
                    lead.append(lead_time_days(dates, warned, [ex], horizon))
            lead = [x for x in lead if x == x]
            leads.append(float(np.mean(lead)) if lead else float("nan"))
            events.append(total)
        table["mean_lead_time_days"] = leads
        for key in ("event_hits", "event_misses", "false_alarm_spells"):
            table[key] = [e[key] for e in events]
    return table


def choose_by_cost(table: pd.DataFrame, miss_cost: float) -> float:
    """The threshold with the smallest ``miss_cost * misses + false_alarms`` (ties: the higher
    threshold, which raises fewer alarms)."""
    if miss_cost <= 0:
        raise ValueError("miss_cost must be positive: it is the cost of a missed exceedance in "
                         "units of one false alarm")
    cost = miss_cost * table["misses"] + table["false_alarms"]
    best = cost.min()
    return float(table.loc[cost == best, "threshold"].max())


def choose_by_hit_rate(table: pd.DataFrame, target: float) -> float:
    """The highest threshold whose hit rate is at least ``target`` (the fewest false alarms).

    Raises ValueError when no threshold reaches the target.
    """
    if not 0 < target <= 1:
        raise ValueError("the target hit rate must be in (0, 1]")
    ok = table[table["hit_rate"] >= target]
    if ok.empty:
        raise ValueError(f"no threshold reaches a hit rate of {_pct(target)} in this backtest "
                         f"(best: {_pct(table['hit_rate'].max())})")
    return float(ok["threshold"].max())


UNSTABLE_RANGE = 0.2
"""A choice whose bootstrap 90% range is wider than this [probability] is called unstable
(common practice, no source: a manager should not adopt it without a second look)."""


@dataclass
class Choice:
    """A tuned threshold of one level and how stable it is."""

    level: str
    threshold: float
    rule: str
    table: pd.DataFrame
    bootstrap: np.ndarray
    """Thresholds chosen on bootstrap resamples of whole seasons."""
    miss_cost: float | None = None
    target_hit_rate: float | None = None

    def spread(self) -> tuple[float, float]:
        """5th and 95th percentiles of the bootstrap choices."""
        b = self.bootstrap[~np.isnan(self.bootstrap)]
        return (float(np.percentile(b, 5)), float(np.percentile(b, 95))) if len(b) else (np.nan,) * 2

    @property
    def unstable(self) -> bool:
        """True when resamples of the seasons choose widely different thresholds, or often
        none."""
        lo, hi = self.spread()
        failed = float(np.isnan(self.bootstrap).mean()) if len(self.bootstrap) else 0.0
        return bool(lo != lo or hi - lo > UNSTABLE_RANGE or failed > 0.1)

    def verdict(self) -> str:
        """One sentence on how far the choice can be trusted."""
        lo, hi = self.spread()
        if lo != lo:
            return "too few seasons to say how stable this choice is"
        if self.unstable:
            return (f"unstable across seasons: resampling the seasons puts it anywhere from "
                    f"{lo:.2f} to {hi:.2f}; adopt it only after a second look")
        return f"stable across seasons (resampling them gives {lo:.2f} to {hi:.2f})"

    def cost(self) -> pd.Series | None:
        """Expected cost per threshold: miss_cost x misses + false alarms [false alarms]."""
        if self.miss_cost is None:
            return None
        return self.miss_cost * self.table["misses"] + self.table["false_alarms"]


def tune_level(forecasts: pd.DataFrame, exceedances: pd.DataFrame, level: str, *,
               miss_cost: float | None = None, target_hit_rate: float | None = None,
               n_boot: int = 200, seed: int = 1) -> Choice:
    """Tune one level's threshold by cost or by target hit rate, with its bootstrap spread."""
    if (miss_cost is None) == (target_hit_rate is None):
        raise ValueError("give either a miss cost or a target hit rate")
    f = warning_view(forecasts)
    f = f[(f["level"] == level) & f["probability"].notna()]
    ex = exceedances[exceedances["level"] == level]

    def pick(table: pd.DataFrame) -> float:
        if miss_cost is not None:
            return choose_by_cost(table, miss_cost)
        return choose_by_hit_rate(table, target_hit_rate)

    table = sweep(f, ex)
    chosen = pick(table)
    rng = np.random.default_rng(seed)
    seasons = np.array(sorted(f["season"].unique()))
    # the choice rules use counts only: a resample of seasons sums the seasons' counts
    per_season = np.stack([_counts(p, o, THRESHOLDS) for _, _, p, o in _seasons(f)]) \
        if len(seasons) else np.zeros((0, 4, len(THRESHOLDS)))
    boot = []
    for _ in range(n_boot if len(seasons) > 1 else 0):
        drawn = rng.choice(len(seasons), len(seasons))
        try:
            boot.append(pick(_table(per_season[drawn].sum(axis=0), THRESHOLDS)))
        except ValueError:
            boot.append(np.nan)
    rule = (f"miss cost {miss_cost:g} (a missed exceedance costs {miss_cost:g} false alarms)"
            if miss_cost is not None else f"target hit rate {_pct(target_hit_rate)}")
    return Choice(level, chosen, rule, table, np.array(boot, dtype=float), miss_cost,
                  target_hit_rate)


def proposal_toml(site_id: str, choices: list[Choice], seasons: str,
                  kept: dict[str, float] | None = None) -> str:
    """The tuned thresholds as a proposal: the daily report does not apply them until a manager
    accepts them (``cyanorisk tune --accept``). ``kept``: thresholds of levels not tuned this
    time, carried over from those in force."""
    lines = [f"# Warning thresholds proposed for site '{site_id}' by `cyanorisk tune`.",
             "# Not in force until accepted: `cyanorisk tune --config FILE --accept`.",
             f'site_id = "{site_id}"',
             f'rule = "{choices[0].rule}"' if choices else 'rule = ""',
             f'seasons = "{seasons}"', "", "[warn_at]"]
    for c in choices:
        lo, hi = c.spread()
        lines.append(f'"{c.level}" = {c.threshold:.2f}    # bootstrap 90% range {lo:.2f} to {hi:.2f}'
                     + ("; unstable" if c.unstable else ""))
    for level, value in (kept or {}).items():
        lines.append(f'"{level}" = {value:.2f}    # kept from those in force: not tuned this time')
    return "\n".join(lines) + "\n"


def accepted_toml(proposal: str, accepted_at: str) -> str:
    """A proposal as accepted: the same thresholds, with when they were accepted."""
    body = [line for line in proposal.splitlines() if not line.startswith("#")]
    head = ["# Warning thresholds in force for this site: tuned by `cyanorisk tune`, accepted",
            "# by `cyanorisk tune --accept`. The daily report applies them and names this file.",
            f'accepted_at = "{accepted_at}"']
    return "\n".join(head + body) + "\n"
