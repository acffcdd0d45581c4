"""Walk-forward backtests: how early and how reliably would the forecasts have warned?

For each season in the requested range, the models are fitted on what was known before the
season started (issue days whose outcome windows, and the lab delay after them, ended before
the season's first day), then a forecast is issued for every issue day of the season exactly as
the daily job would: the same causal drivers, the last count known at issue time, nothing from
the future. The climatology and persistence baselines are issued beside it.

Scores come per season and overall, with bootstrap intervals that resample whole seasons. A
season without an exceedance is reported as such, and a score that cannot be computed is NaN
with the reason, never dropped.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from cyanorisk.align import known_from
from cyanorisk.errors import BacktestError
from cyanorisk.levels import meets
from cyanorisk.model import ClimatologyModel, PersistenceModel, ordinal_outcome, prepare
from cyanorisk.spec import SiteSpec, Thresholds
from cyanorisk.training import fit_models, label_columns, outcomes, season_of
from cyanorisk.verify import (
    brier_score,
    brier_skill_score,
    contingency,
    event_counts,
    lead_time_days,
    reliability_table,
    roc_auc,
)

MIN_HISTORY_DAYS = 300
"""Labelled issue days a season's model needs to have learned from (about a season's worth):
fewer invite perfect separation and wild coefficients."""
SOURCES = ("model", "climatology", "persistence")
COLUMN = {"model": "probability", "climatology": "climatology", "persistence": "persistence"}
"""The forecasts column of each source."""


@dataclass
class BacktestResult:
    """Everything a backtest produced. Probabilities in [0, 1]; dates are local issue dates."""

    forecasts: pd.DataFrame
    """One row per issue day and level: site_id, season, issue_date, level, horizon_days,
    probability, outcome, climatology, persistence, warned (probability >= warn_at)."""
    scores: pd.DataFrame
    """Per season, level and source: n, events (labelled days with an exceedance), brier,
    brier_skill (vs climatology), roc_auc, contingency scores at the warning threshold in days
    (hits, misses, false_alarms, ...) and in events (exceedance_events, event_hits,
    event_misses, false_alarm_spells), lead_time_days and a note."""
    overall: pd.DataFrame
    """Per level and source, pooled over seasons, with 90% bootstrap intervals by season; and
    ``brier_skill_persistence``, the Brier skill against persistence on the days both forecast."""
    exceedances: pd.DataFrame
    """Per season and level: the first sample that met the level (NaT if none)."""
    notes: list[str]
    not_replayed: dict[int, str] = field(default_factory=dict)
    """Seasons asked for that could not be replayed -> why (no forecast was issued in them)."""
    horizon_scores: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Per level, horizon and source, pooled over the replayed seasons: n, events, brier,
    brier_skill (vs climatology), brier_skill_persistence, roc_auc."""
    reliability: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Per level and probability bin of the headline horizon: forecasts, mean forecast,
    observed frequency (:func:`cyanorisk.verify.reliability_table`)."""
    families: dict[int, str] = field(default_factory=dict)
    """Season -> the model family ``train`` would have chosen at its start."""

    @property
    def replayed(self) -> list[int]:
        """Seasons with forecasts, in order."""
        seasons = sorted(int(s) for s in self.forecasts["season"].unique()) \
            if len(self.forecasts) else []
        return [s for s in seasons if s not in self.not_replayed]


def parse_seasons(text: str | None, available: Sequence[int]) -> list[int]:
    """'2015-2022' or '2018' -> season start years; None -> all but the first season (which
    has nothing before it to learn from)."""
    if not text:
        return list(available)[1:]
    try:
        first, _, last = text.partition("-")
        lo, hi = int(first), int(last or first)
    except ValueError:
        raise BacktestError(f"seasons {text!r}: expected a year or a range such as 2015-2022") from None
    chosen = [s for s in available if lo <= s <= hi]
    if not chosen:
        raise BacktestError(f"seasons {text!r}: the data hold seasons {available[0]} to "
                            f"{available[-1]}")
    return chosen


@dataclass
class SeasonReplay:
    """One season replayed: its forecasts (the rows of :attr:`BacktestResult.forecasts`), or
    why it could not be (then the plain persistence rule stands in its rows)."""

    season: int
    forecasts: pd.DataFrame
    not_replayed: str | None = None
    family: str | None = None


def walk_forward(spec: SiteSpec, table: pd.DataFrame, totals: pd.DataFrame, seasons: Iterable[int],
                 thresholds: Thresholds,
                 progress: Callable[[Iterable, int, str], Iterable] | None = None) -> BacktestResult:
    """Run the walk-forward backtest of one site over ``seasons`` (season start years), one
    season after another (:func:`replay_season`, then :func:`combine`; the compute engine runs
    the seasons of many sites side by side with the same two functions).

    At each season start the models are fitted exactly as ``train`` would fit them on what was
    known then, the choice of family and its calibration included (:func:`fit_models`)."""
    seasons = list(seasons)
    loop = progress(seasons, len(seasons), "backtest") if progress else seasons
    return combine(spec, totals, seasons, thresholds,
                   [replay_season(spec, table, s, thresholds) for s in loop])


def replay_season(spec: SiteSpec, table: pd.DataFrame, s: int,
                  thresholds: Thresholds) -> SeasonReplay:
    """Replay one season: fit on what was known before it started, forecast its every issue
    day as the daily job would, beside the climatology and persistence baselines."""
    names = spec.levels
    h, horizons = spec.horizon_days, spec.horizons
    j_head, j_warn = horizons.index(h), horizons.index(spec.warn_horizon_days)
    X = prepare(table)
    ordinal, o = outcomes(X, spec)
    y = ordinal[h]
    issue_day = pd.to_datetime(X["issue_date"])
    season = season_of(X["issue_date"], spec.season_start_month)
    start = pd.Timestamp(year=int(s), month=spec.season_start_month, day=1)
    in_season = np.asarray(season == s)
    known_before = np.asarray((issue_day + pd.Timedelta(days=spec.outlook_days + spec.lab_delay_days))
                              < start)
    part = pd.DataFrame({"site_id": spec.site_id, "season": s,
                         "issue_date": X.loc[in_season, "issue_date"].to_numpy()})
    history = int((known_before & ~np.isnan(y)).sum())
    fitted = None
    why = history_shortfall(history)
    if why is None:
        try:
            fitted = fit_models(spec, table[known_before], keep_forecasts=False)
        except (ValueError, RuntimeError) as exc:
            why = f"the model could not be fitted on the data known before it ({exc})"
    n = int(in_season.sum())
    p = np.full((n, len(names), len(horizons)), np.nan)
    c = np.full((n, len(names), len(horizons)), np.nan)
    family = None
    if why is not None:
        # no history to learn persistence from: the plain rule (the last level stays)
        per = PersistenceModel(names, horizons).fit().predict(X.loc[in_season, "last_level"])
    else:
        family = fitted.choice["family"]
        p = fitted.outlook.predict(X[in_season])
        per = fitted.persistence.predict(X.loc[in_season, "last_level"])
        c = climatology_by_horizon(spec, X[known_before], ordinal, known_before,
                                   X.loc[in_season, "issue_date"])
    blocks = []
    for k, name in enumerate(names):
        block = part.copy()
        block["level"] = name
        block["horizon_days"] = h
        block["probability"] = p[:, k, j_head]
        block["outcome"] = o[in_season, k, j_head]
        block["climatology"] = c[:, k, j_head]
        block["persistence"] = per[:, k, j_head]
        block["warn_horizon_days"] = spec.warn_horizon_days
        block["warn_probability"] = p[:, k, j_warn]
        block["warn_outcome"] = o[in_season, k, j_warn]
        block["warned"] = warned_flags(block["warn_probability"], thresholds.at(name))
        block["family"] = family or ""
        for j, g in enumerate(horizons):
            block[f"probability_{g}d"] = p[:, k, j]
            block[f"outcome_{g}d"] = o[in_season, k, j]
            block[f"climatology_{g}d"] = c[:, k, j]
            block[f"persistence_{g}d"] = per[:, k, j]
        blocks.append(block)
    return SeasonReplay(int(s), pd.concat(blocks, ignore_index=True), why, family)


def combine(spec: SiteSpec, totals: pd.DataFrame, seasons: Sequence[int], thresholds: Thresholds,
            replays: Iterable[SeasonReplay]) -> BacktestResult:
    """The backtest of a site from its seasons' replays (in any order): forecasts in season
    order, scores per season and overall, by horizon, reliability."""
    names = spec.levels
    by_season = {r.season: r for r in replays}
    ordered = [by_season[int(s)] for s in seasons if int(s) in by_season]
    parts = [r.forecasts for r in ordered]
    not_replayed = {r.season: r.not_replayed for r in ordered if r.not_replayed is not None}
    notes = [f"season {s}: not replayed, {why}" for s, why in not_replayed.items()]
    families = {r.season: r.family for r in ordered if r.family is not None}
    forecasts = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()
    exceedances = first_exceedances(totals, spec, seasons)
    scores = season_scores(forecasts, exceedances, names, thresholds, not_replayed)
    replayed = forecasts[~forecasts["season"].isin(list(not_replayed))] if len(forecasts) \
        else forecasts
    overall = overall_scores(replayed, names)
    if len(overall) and len(scores):
        overall = overall.merge(median_leads(scores), on=["level", "source"], how="left")
    result = BacktestResult(forecasts, scores, overall, exceedances, notes, not_replayed)
    result.horizon_scores = horizon_scores(replayed, names, horizons=spec.horizons)
    result.reliability = reliability(replayed, names)
    result.families = families
    return result


def climatology_by_horizon(spec: SiteSpec, history: pd.DataFrame,
                           ordinal: dict[int, np.ndarray], rows: np.ndarray,
                           dates: pd.Series) -> np.ndarray:
    """Climatology (days, levels, horizons) of the issue ``dates``, fitted per horizon on the
    ``rows`` of the table known before the season."""
    out = np.empty((len(dates), len(spec.levels), len(spec.horizons)))
    for j, g in enumerate(spec.horizons):
        clim = ClimatologyModel(spec.levels).fit(history["issue_date"], ordinal[g][rows])
        out[:, :, j] = clim.predict_proba(dates).to_numpy()
    return out


def labelled_before(spec: SiteSpec, table: pd.DataFrame, seasons: Iterable[int]) -> dict[int, int]:
    """Labelled issue days whose outcome (and the lab delay after it) was known before each
    season started: what a replay of that season can learn from."""
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(spec))
    issue_day = pd.to_datetime(X["issue_date"])
    ends = issue_day + pd.Timedelta(days=spec.outlook_days + spec.lab_delay_days)
    out = {}
    for s in seasons:
        start = pd.Timestamp(year=int(s), month=spec.season_start_month, day=1)
        out[int(s)] = int(((ends < start).to_numpy() & ~np.isnan(y)).sum())
    return out


def history_shortfall(labelled_days_before: int) -> str | None:
    """Why a season cannot be replayed for lack of history, or None when it can."""
    if labelled_days_before >= MIN_HISTORY_DAYS:
        return None
    return (f"only {labelled_days_before} labelled issue days were known before it (at least "
            f"{MIN_HISTORY_DAYS}, about a season's worth, are needed)")


def warning_view(forecasts: pd.DataFrame) -> pd.DataFrame:
    """The backtest rows as warnings see them: the probability, outcome and horizon of the
    horizon that raises warnings (``warn_*`` columns) in place of the headline horizon's."""
    if "warn_probability" not in forecasts:
        return forecasts
    return forecasts.assign(probability=forecasts["warn_probability"],
                            outcome=forecasts["warn_outcome"],
                            horizon_days=forecasts["warn_horizon_days"])


def warned_flags(probability: pd.Series, warn_at: float | None) -> pd.Series:
    """Whether the probability reached the warning threshold; blank (NA) where no forecast
    was issued, so that 'not warned' is never claimed for a day without a forecast."""
    p = probability.to_numpy(dtype=float)
    out = pd.array(p >= (warn_at if warn_at is not None else np.inf), dtype="boolean")
    out[np.isnan(p)] = pd.NA
    return pd.Series(out, index=probability.index)


def first_exceedances(totals: pd.DataFrame, spec: SiteSpec, seasons: Sequence[int]) -> pd.DataFrame:
    """The first sample of each season that met each level (local date) and the local date its
    result became known (``first_reported``: the lab's reported date, else the sampling date
    plus the lab delay), NaT if none."""
    rows = []
    if len(totals):
        local = totals["sampled_at"].dt.tz_convert(spec.timezone).dt.tz_localize(None)
        known = known_from(totals, spec.lab_delay_days, spec.timezone)
        known_local = known.dt.tz_convert(spec.timezone).dt.tz_localize(None)
        season = season_of(local, spec.season_start_month)
    for s in seasons:
        for lvl in spec.scheme.levels:
            first, reported = pd.NaT, pd.NaT
            if len(totals):
                hit = (season == s) & (meets(totals, lvl) == 1.0)
                if hit.any():
                    i = local[hit].idxmin()
                    first = local[i].normalize()
                    reported = known_local[i].normalize()
            rows.append({"season": s, "level": lvl.name, "first_exceedance": first,
                         "first_reported": reported})
    return pd.DataFrame(rows)


def _scores(block: pd.DataFrame, source: str, warn_at: float | None,
            exceed: pd.Timestamp | None, reported: pd.Timestamp | None = None) -> dict:
    p = block[COLUMN[source]].to_numpy(dtype=float)
    o = block["outcome"].to_numpy(dtype=float)
    labelled = ~np.isnan(o) & ~np.isnan(p)
    n = int(labelled.sum())
    events = int(np.nansum(o))  # observed whatever was forecast
    out = {"n": n, "events": events, "brier": brier_score(p, o), "roc_auc": roc_auc(p, o)}
    notes = []
    if np.isnan(p).all():
        notes.append("no forecast issued")
    elif n == 0:
        notes.append("no forecast issued with a sample in its window")
    elif events == 0:
        notes.append("no exceedance in this season: ROC AUC not defined")
    elif events == n:
        notes.append("every labelled day exceeded: ROC AUC not defined")
    clim = block["climatology"].to_numpy(dtype=float)
    out["brier_skill"] = brier_skill_score(p, o, clim) if n else float("nan")
    if source != "climatology" and warn_at is not None:
        # the model's warnings are judged by the horizon that raises them
        view = warning_view(block) if source == "model" else block
        wp = view[COLUMN[source]].to_numpy(dtype=float)
        wo = view["outcome"].to_numpy(dtype=float)
        horizon = int(view["horizon_days"].iloc[0])
        out.update(contingency(wp, wo, warn_at))
        warned = (wp >= warn_at) & ~np.isnan(wp)
        counted = event_counts(block["issue_date"].to_numpy(), warned, wo)
        out.update({k: v for k, v in counted.items() if k != "events"})
        out["exceedance_events"] = counted["events"]
        exceed_dates = [] if exceed is None or pd.isna(exceed) else [exceed]
        lead = lead_time_days(block["issue_date"].to_numpy(), warned, exceed_dates, horizon)
        out["lead_time_days"] = lead
        delay = ((reported - exceed) / pd.Timedelta(days=1)
                 if exceed_dates and reported is not None and not pd.isna(reported) else np.nan)
        out["lead_to_report_days"] = lead + delay
        if not exceed_dates:
            notes.append("no sample met the level this season: no lead time")
        elif np.isnan(p).all():
            pass  # no forecast was issued at all; said above, not a miss
        elif not warned.any():
            notes.append("the level was met but no warning was issued: missed")
    out["note"] = "; ".join(notes)
    return out


def season_scores(forecasts: pd.DataFrame, exceedances: pd.DataFrame, names: list[str],
                  thresholds: Thresholds | None = None,
                  not_replayed: dict[int, str] | None = None) -> pd.DataFrame:
    """Scores per season, level and source (see :class:`BacktestResult`); a season not
    replayed has ``replayed`` False and the reason in its note."""
    rows = []
    if forecasts.empty:
        return pd.DataFrame()
    not_replayed = not_replayed or {}
    for (s, level), block in forecasts.groupby(["season", "level"], sort=True):
        ex = exceedances[(exceedances["season"] == s) & (exceedances["level"] == level)]
        first = ex["first_exceedance"].iloc[0] if len(ex) else None
        reported = ex["first_reported"].iloc[0] if len(ex) and "first_reported" in ex else None
        threshold = (thresholds or Thresholds({})).at(level)
        why = not_replayed.get(int(s))
        for source in SOURCES:
            row = {"season": s, "level": level, "source": source, "replayed": why is None,
                   **_scores(block, source, threshold, first, reported)}
            if why is not None:
                row["note"] = f"not replayed: {why}"
            rows.append(row)
    return pd.DataFrame(rows)


def _pooled(seasons, p_s: list, o_s: list, c_s: list) -> tuple[float, float, float]:
    """Brier score, Brier skill against climatology and ROC AUC of the seasons (indices into
    the per-season arrays of forecasts, outcomes and climatology) pooled."""
    p, o, c = (np.concatenate([x[i] for i in seasons]) for x in (p_s, o_s, c_s))
    keep = ~np.isnan(p) & ~np.isnan(o) & ~np.isnan(c)
    return (brier_score(p[keep], o[keep]), brier_skill_score(p[keep], o[keep], c[keep]),
            roc_auc(p[keep], o[keep]))


def overall_scores(forecasts: pd.DataFrame, names: list[str], n_boot: int = 200,
                   seed: int = 1) -> pd.DataFrame:
    """Pooled scores per level and source with 90% bootstrap intervals (seasons resampled)."""
    if forecasts.empty:
        return pd.DataFrame()
    rng = np.random.default_rng(seed)
    rows = []
    seasons = np.array(sorted(forecasts["season"].unique()))
    draws = [rng.choice(len(seasons), len(seasons)) for _ in range(n_boot)] \
        if len(seasons) > 1 else []
    for level in names:
        f = forecasts[forecasts["level"] == level]
        parts = [f[f["season"] == s] for s in seasons]
        o_s = [g["outcome"].to_numpy(dtype=float) for g in parts]
        c_s = [g["climatology"].to_numpy(dtype=float) for g in parts]
        for source in SOURCES:
            p_s = [g[COLUMN[source]].to_numpy(dtype=float) for g in parts]
            point = _pooled(range(len(seasons)), p_s, o_s, c_s)
            boot = (np.array([_pooled(d, p_s, o_s, c_s) for d in draws]) if draws
                    else np.full((1, 3), np.nan))
            with warnings.catch_warnings():  # a score NaN in every resample stays NaN
                warnings.simplefilter("ignore", RuntimeWarning)
                lo, hi = np.nanpercentile(boot, 5, axis=0), np.nanpercentile(boot, 95, axis=0)
            rows.append({"level": level, "source": source, "seasons": len(seasons),
                         "brier": point[0], "brier_low": lo[0], "brier_high": hi[0],
                         "brier_skill": point[1], "brier_skill_low": lo[1],
                         "brier_skill_high": hi[1], "roc_auc": point[2], "roc_auc_low": lo[2],
                         "roc_auc_high": hi[2],
                         "brier_skill_persistence": brier_skill_score(
                             f[COLUMN[source]].to_numpy(dtype=float),
                             f["outcome"].to_numpy(dtype=float),
                             f["persistence"].to_numpy(dtype=float))})
    return pd.DataFrame(rows)


def median_leads(scores: pd.DataFrame) -> pd.DataFrame:
    """Per level and source, the median over replayed seasons of the lead before the first
    lab-confirmed sample (``median_lead_time_days``) and before its result was reported
    (``median_lead_to_report_days``), and the seasons with a lead (``seasons_with_lead``)."""
    s = scores[scores["replayed"]] if "replayed" in scores else scores
    if "lead_time_days" not in s:
        return pd.DataFrame(columns=["level", "source"])
    rows = []
    for (level, source), g in s.groupby(["level", "source"], sort=False):
        lead = g["lead_time_days"].to_numpy(dtype=float)
        report = g["lead_to_report_days"].to_numpy(dtype=float)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            rows.append({"level": level, "source": source,
                         "median_lead_time_days": float(np.nanmedian(lead)),
                         "median_lead_to_report_days": float(np.nanmedian(report)),
                         "seasons_with_lead": int((~np.isnan(lead)).sum())})
    return pd.DataFrame(rows)


def horizon_scores(forecasts: pd.DataFrame, names: list[str], horizons: Sequence[int]) -> pd.DataFrame:
    """Scores of every horizon, per level and source, pooled over the seasons given."""
    rows = []
    if forecasts.empty:
        return pd.DataFrame()
    for level in names:
        f = forecasts[forecasts["level"] == level]
        for g in horizons:
            o = f[f"outcome_{g}d"].to_numpy(dtype=float)
            c = f[f"climatology_{g}d"].to_numpy(dtype=float)
            r = f[f"persistence_{g}d"].to_numpy(dtype=float)
            for source, column in (("model", "probability"), ("climatology", "climatology"),
                                   ("persistence", "persistence")):
                p = f[f"{column}_{g}d"].to_numpy(dtype=float)
                keep = ~np.isnan(p) & ~np.isnan(o) & ~np.isnan(c) & ~np.isnan(r)
                rows.append({"level": level, "horizon_days": g, "source": source,
                             "n": int(keep.sum()), "events": int(o[keep].sum()),
                             "brier": brier_score(p[keep], o[keep]),
                             "brier_skill": brier_skill_score(p[keep], o[keep], c[keep]),
                             "brier_skill_persistence": brier_skill_score(p[keep], o[keep],
                                                                          r[keep]),
                             "roc_auc": roc_auc(p[keep], o[keep])})
    return pd.DataFrame(rows)


def reliability(forecasts: pd.DataFrame, names: list[str], bins: int = 10) -> pd.DataFrame:
    """Per level, the reliability table of the headline horizon's forecasts: for each
    probability bin, the forecasts in it, their mean and how often the level was reached."""
    parts = []
    if forecasts.empty:
        return pd.DataFrame()
    for level in names:
        f = forecasts[forecasts["level"] == level]
        table = reliability_table(f["probability"].to_numpy(dtype=float),
                                  f["outcome"].to_numpy(dtype=float), bins)
        table.insert(0, "level", level)
        parts.append(table)
    return pd.concat(parts, ignore_index=True)
