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
               lab_delay_days: float, timezone: str, season_start_month: int = 1) -> pd.DataFrame:
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
        that sample, 0 below the first), ``last_sampled_at``, ``last_known_at``; for the sample
        before it (the trend of the counts), ``prev_count_cells_per_ml``,
        ``prev_count_censor`` and ``prev_sampled_at``; and ``season_first_level_at``, the
        sampling instant of the first sample of the season (seasons begin on
        ``season_start_month``) known at issue time to meet the lowest level (NaT if none).
    """
    t = lab_record(totals, scheme, lab_delay_days, timezone)
    t = t.dropna(subset=["cyano_cells_per_ml"]).sort_values(["known_at", "sampled_at"], kind="stable")
    n = len(issues)
    nat = np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
    out = {"last_count_cells_per_ml": np.full(n, np.nan), "last_count_censor": np.full(n, None, object),
           "last_level": np.full(n, np.nan), "last_sampled_at": nat.copy(),
           "last_known_at": nat.copy(), "prev_count_cells_per_ml": np.full(n, np.nan),
           "prev_count_censor": np.full(n, None, object), "prev_sampled_at": nat.copy(),
           "season_first_level_at": nat.copy()}
    issue_time = _utc_naive(issues["issue_time_utc"])
    issue_site = issues["site_id"].astype(str).to_numpy()
    t_site = t["site_id"].astype(str).to_numpy()
    for site in pd.unique(issue_site):
        rows = np.flatnonzero(issue_site == site)
        mine = t[t_site == site]
        if mine.empty:
            continue
        known, sampled = _utc_naive(mine["known_at"]), _utc_naive(mine["sampled_at"])
        pos = np.searchsorted(known, issue_time[rows], side="right") - 1  # last known row
        # the last count is the newest sample known so far: a late result for an older sample
        # does not replace a newer one already known
        newest = sampled >= np.maximum.accumulate(sampled)
        order = np.arange(len(mine))
        last = np.maximum.accumulate(np.where(newest, order, -1))  # newest row as of each row
        before = np.full(len(mine), -1)
        newest_rows = np.flatnonzero(newest)
        before[newest_rows[1:]] = newest_rows[:-1]  # the newest row before each newest row
        has = pos >= 0
        at = last[np.where(has, pos, 0)]
        prev = np.where(at >= 0, before[np.maximum(at, 0)], -1)
        ok, ok_prev = has & (at >= 0), has & (prev >= 0)
        fill = {"last_count_cells_per_ml": "cyano_cells_per_ml",
                "last_count_censor": "cyano_censor", "last_level": "level"}
        for key, col in fill.items():
            values = mine[col].to_numpy(dtype=out[key].dtype)
            out[key][rows[ok]] = values[at[ok]]
        out["last_sampled_at"][rows[ok]] = sampled[at[ok]]
        out["last_known_at"][rows[ok]] = known[at[ok]]
        out["prev_count_cells_per_ml"][rows[ok_prev]] = mine["cyano_cells_per_ml"].to_numpy(
            dtype=float)[prev[ok_prev]]
        out["prev_count_censor"][rows[ok_prev]] = mine["cyano_censor"].to_numpy(
            dtype=object)[prev[ok_prev]]
        out["prev_sampled_at"][rows[ok_prev]] = sampled[prev[ok_prev]]
        # the first sample of the issue's season known to meet the lowest level: a late result
        # for an older sample counts here (it is not the last count, but it was the first)
        met = mine["level"].to_numpy(dtype=float) >= 1
        sample_season = _season(mine["sampled_at"], timezone, season_start_month)
        issue_season = _season(issues["issue_time_utc"].iloc[rows], timezone, season_start_month)
        none = np.iinfo(np.int64).max
        for season in np.unique(issue_season[has]):
            candidate = np.where(met & (sample_season == season), sampled.view(np.int64), none)
            running = np.minimum.accumulate(candidate)
            pick = has & (issue_season == season)
            first = running[pos[pick]]
            out["season_first_level_at"][rows[pick]] = np.where(
                first == none, np.datetime64("NaT", "ns"), first.view("datetime64[ns]"))
    age = (issue_time - out["last_sampled_at"]) / np.timedelta64(1, "D")
    frame = {key: out[key] for key in ("last_count_cells_per_ml", "last_count_censor")}
    frame["last_count_age_days"] = age.astype(float)
    frame["last_level"] = out["last_level"]
    for key in ("last_sampled_at", "last_known_at"):
        frame[key] = pd.DatetimeIndex(out[key]).tz_localize("UTC")
    frame["prev_count_cells_per_ml"] = out["prev_count_cells_per_ml"]
    frame["prev_count_censor"] = out["prev_count_censor"]
    for key in ("prev_sampled_at", "season_first_level_at"):
        frame[key] = pd.DatetimeIndex(out[key]).tz_localize("UTC")
    return pd.DataFrame(frame, index=issues.index)


def _utc_naive(instants: pd.Series) -> np.ndarray:
    """UTC instants as naive datetime64[ns] values (NaT stays NaT)."""
    return pd.DatetimeIndex(instants.astype(UTC_NS)).tz_localize(None).to_numpy("datetime64[ns]")


def _season(instants: pd.Series, timezone: str, start_month: int) -> np.ndarray:
    """The year each instant's bloom season starts in (local date; NaT gives -1)."""
    local = pd.DatetimeIndex(instants).tz_convert(timezone)
    year = local.year.to_numpy(dtype=float) - (local.month.to_numpy(dtype=float) < start_month)
    return np.where(np.isnan(year), -1, year).astype(np.int64)


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
                   horizons: Sequence[int] = HORIZONS_DAYS,
                   season_start_month: int = 1) -> pd.DataFrame:
    """Drivers at each issue day, the last known count, and the outcome labels, for one site."""
    table = drivers.reset_index()
    table.insert(0, "site_id", site_id)
    site_totals = totals[totals["site_id"] == site_id]
    last = last_known(table, site_totals, scheme, lab_delay_days, timezone, season_start_month)
    labels = outcome_labels(table, site_totals, scheme, horizons)
    counts = pd.DataFrame({f"max_count_log10_{h}d": outcome_counts(table, site_totals, h)
                           for h in horizons}, index=table.index)
    return pd.concat([table, last, labels, counts], axis=1)
