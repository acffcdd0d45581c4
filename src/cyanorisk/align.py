"""Aligning lab results with the daily drivers: what was known at issue time, and what followed.

- :func:`known_from`: when a result became known: its reported date if the lab gave one, else
  the sampling date plus the configured lab delay; a result counts from the start of that day
  (local time).
- :func:`last_known`: an as-of join (``pandas.merge_asof``, by site) bringing to each issue
  instant the last cyanobacterial total known by then, with its censor and age.
- :func:`outcome_labels`: for each level and horizon h, 1 if any sample taken in
  (issue, issue + h days] meets the level, 0 if samples were taken then and none meets it,
  missing if none was taken (or none can be decided).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from cyanorisk.levels import Scheme, classify, meets

HORIZONS_DAYS = tuple(range(1, 15))
UTC_NS = "datetime64[ns, UTC]"


def known_from(totals: pd.DataFrame, lab_delay_days: float, timezone: str) -> pd.Series:
    """The UTC instant from which each result is known to the forecaster.

    Reported date when given (already the start of that local day), else the local date of
    sampling plus ``lab_delay_days``, at the start of that day; never before the sample was
    taken.
    """
    local_day = totals["sampled_at"].dt.tz_convert(timezone).dt.tz_localize(None).dt.normalize()
    by_delay = (local_day + pd.Timedelta(days=lab_delay_days)).dt.tz_localize(
        timezone, nonexistent="shift_forward", ambiguous=False).dt.tz_convert("UTC")
    reported = (totals["reported_at"] if "reported_at" in totals
                else pd.Series(pd.NaT, index=totals.index, dtype=UTC_NS))
    known = reported.astype(UTC_NS).where(reported.notna(), by_delay.astype(UTC_NS))
    sampled = totals["sampled_at"].astype(UTC_NS)
    return known.where(known >= sampled, sampled)  # never known before it was taken


def level_slug(name: str) -> str:
    """A column-safe name for a level ('Alert Level 1' -> 'alert_level_1')."""
    out = "".join(c.lower() if c.isalnum() else "_" for c in name)
    return "_".join(p for p in out.split("_") if p)


def lab_record(totals: pd.DataFrame, scheme: Scheme, lab_delay_days: float,
               timezone: str) -> pd.DataFrame:
    """The per-sample totals with when each result became known (``known_at``, see
    :func:`known_from`) and its observed level (``level``), oldest sample first. Functions
    given such a table use these columns instead of computing them again."""
    if "known_at" in totals and "level" in totals:
        return totals
    out = totals.assign(known_at=known_from(totals, lab_delay_days, timezone).to_numpy(),
                        level=classify(totals, scheme))
    return out.sort_values("sampled_at", kind="stable").reset_index(drop=True)


def last_known(issues: pd.DataFrame, totals: pd.DataFrame, scheme: Scheme,
               lab_delay_days: float, timezone: str) -> pd.DataFrame:
    """The last cyanobacterial total known at each issue instant (as-of join by site).

    Parameters
    ----------
    issues : pandas.DataFrame
        Columns ``site_id`` and ``issue_time_utc``.
    totals : pandas.DataFrame
        Per-sample totals (``sample_totals``) with ``site_id``, ``sampled_at``, ``reported_at``
        (or a :func:`lab_record` of them).

    Returns
    -------
    pandas.DataFrame
        Aligned with ``issues``, for the newest sample whose result is known at issue time:
        ``last_count_cells_per_ml``, ``last_count_censor``,
        ``last_count_age_days`` (from sampling to issue [d]), ``last_level`` (observed level of
        that sample, 0 below the first), ``last_sampled_at``, ``last_known_at``.
    """
    t = lab_record(totals, scheme, lab_delay_days, timezone)
    t = t.dropna(subset=["cyano_cells_per_ml"]).sort_values(["known_at", "sampled_at"], kind="stable")
    # the last count is the newest sample known so far: a late result for an older sample does
    # not replace a newer one already known
    newest = t.groupby("site_id")["sampled_at"].cummax()
    t = t[t["sampled_at"] >= newest]
    left = issues[["site_id", "issue_time_utc"]].reset_index(drop=True)
    left["issue_time_utc"] = left["issue_time_utc"].astype(UTC_NS)
    left["_order"] = np.arange(len(left))
    left = left.sort_values("issue_time_utc", kind="stable")
    right = t[["site_id", "known_at", "sampled_at", "cyano_cells_per_ml", "cyano_censor", "level"]]
    right = right.astype({"known_at": UTC_NS, "sampled_at": UTC_NS, "site_id": "str"})
    left["site_id"] = left["site_id"].astype("str")
    merged = pd.merge_asof(left, right, left_on="issue_time_utc", right_on="known_at",
                           by="site_id", direction="backward", allow_exact_matches=True)
    merged = merged.sort_values("_order").reset_index(drop=True)
    age = (merged["issue_time_utc"] - merged["sampled_at"]) / pd.Timedelta(days=1)
    return pd.DataFrame({
        "last_count_cells_per_ml": merged["cyano_cells_per_ml"].to_numpy(),
        "last_count_censor": merged["cyano_censor"].to_numpy(),
        "last_count_age_days": age.to_numpy(),
        "last_level": merged["level"].to_numpy(),
        "last_sampled_at": merged["sampled_at"].array,
        "last_known_at": merged["known_at"].array,
    }, index=issues.index)


def outcome_labels(issues: pd.DataFrame, totals: pd.DataFrame, scheme: Scheme,
                   horizons: Sequence[int] = HORIZONS_DAYS) -> pd.DataFrame:
    """Outcome labels ``reach_<level>_<h>d`` for each issue row, level and horizon.

    1 if any sample taken in (issue, issue + h days] meets the level; 0 if samples were taken in
    that window and every one is decided below it; NaN otherwise.
    """
    out = pd.DataFrame(index=issues.index)
    level_meets = {lvl.name: meets(totals, lvl) for lvl in scheme.levels}
    for site, rows in issues.groupby("site_id", sort=False):
        mine = (totals["site_id"] == site).to_numpy()
        when = totals.loc[mine, "sampled_at"].to_numpy(dtype="datetime64[ns]")
        order = np.argsort(when, kind="stable")
        when = when[order]
        issue = rows["issue_time_utc"].to_numpy(dtype="datetime64[ns]")
        lo = np.searchsorted(when, issue, side="right")  # first sample after the issue instant
        for lvl in scheme.levels:
            m = level_meets[lvl.name][mine][order]
            hit = np.concatenate(([0], np.cumsum(m == 1.0)))
            unknown = np.concatenate(([0], np.cumsum(np.isnan(m))))
            for h in horizons:
                hi = np.searchsorted(when, issue + np.timedelta64(h, "D"), side="right")
                n = hi - lo
                n_hit = hit[hi] - hit[lo]
                n_unknown = unknown[hi] - unknown[lo]
                label = np.where(n_hit > 0, 1.0, np.where((n > 0) & (n_unknown == 0), 0.0, np.nan))
                out.loc[rows.index, f"reach_{level_slug(lvl.name)}_{h}d"] = label
    return out


def outcome_counts(issues: pd.DataFrame, totals: pd.DataFrame, horizon_days: int) -> np.ndarray:
    """log10(largest cyanobacterial total + 1) sampled in (issue, issue + h days] [log10 cells mL-1].

    A total censored below ('<X') enters as X/2 and one censored above ('>X') as X, the usual
    substitutions (common practice, no source); NaN where no sample was taken.
    """
    out = np.full(len(issues), np.nan)
    value = totals["cyano_cells_per_ml"].to_numpy(dtype=float)
    value = np.where(totals["cyano_censor"].to_numpy(dtype=object) == "<", value / 2.0, value)
    sites = issues["site_id"].to_numpy()
    for site in pd.unique(sites):
        rows = np.flatnonzero(sites == site)
        mine = (totals["site_id"] == site).to_numpy() & ~np.isnan(value)
        when = totals.loc[mine, "sampled_at"].to_numpy(dtype="datetime64[ns]")
        order = np.argsort(when, kind="stable")
        when, v = when[order], np.log10(value[mine][order] + 1.0)
        issue = issues["issue_time_utc"].to_numpy(dtype="datetime64[ns]")[rows]
        lo = np.searchsorted(when, issue, side="right")
        hi = np.searchsorted(when, issue + np.timedelta64(horizon_days, "D"), side="right")
        for row, a, b in zip(rows, lo, hi, strict=True):
            if b > a:
                out[row] = v[a:b].max()
    return out


def training_table(drivers: pd.DataFrame, totals: pd.DataFrame, scheme: Scheme, site_id: str,
                   lab_delay_days: float, timezone: str,
                   horizons: Sequence[int] = HORIZONS_DAYS) -> pd.DataFrame:
    """Drivers at each issue day, the last known count, and the outcome labels, for one site."""
    table = drivers.reset_index()
    table.insert(0, "site_id", site_id)
    site_totals = totals[totals["site_id"] == site_id]
    last = last_known(table, site_totals, scheme, lab_delay_days, timezone)
    labels = outcome_labels(table, site_totals, scheme, horizons)
    counts = pd.DataFrame({f"max_count_log10_{h}d": outcome_counts(table, site_totals, h)
                           for h in horizons}, index=table.index)
    return pd.concat([table, last, labels, counts], axis=1)
