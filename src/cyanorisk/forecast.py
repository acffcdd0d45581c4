"""The daily assessment of one site: probabilities, the forecast level, freshness and cautions.

Pure computation on data already in memory (the clean weather series, the per-sample totals and
the fitted models); :mod:`cyanorisk.report` renders it and builds its JSON document, the site
pipeline reads and writes files.

A forecast level is only given when the data allow one: when the last weather reading or the
last known sample is too old, or too many drivers are missing, the status is 'insufficient data'
and the headline says why, instead of showing a falsely low level.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.align import known_from, last_known
from cyanorisk.features import FeatureBuilder, issue_instants
from cyanorisk.levels import DEFERRAL, cautions, level_name
from cyanorisk.model import PersistenceModel, SiteModels, prepare
from cyanorisk.spec import SiteSpec, Thresholds

STATUS_ASSESSED = "assessed"
STATUS_INSUFFICIENT = "insufficient data"
STATUS_NONE = "no assessment today"

HISTORY_DRIVERS = ("water_temp_mean_c_7d", "degree_days_20c_7d", "wind_run_km_1d", "calm_h_7d",
                   "rain_mm_1d")
"""Drivers the report plots over its history."""


@dataclass
class Forecast:
    """The model's outlook for the horizon. Probabilities in [0, 1], keyed by level name."""

    horizon_days: int
    """The horizon [d]: probabilities are of reaching each level within this many days."""
    probabilities: dict[str, float] = field(default_factory=dict)
    """P(a sample taken within the horizon meets the level), per level."""
    level_rank: int | None = None
    """Highest level whose probability reaches its warning threshold (0: none); None when no
    level is given."""
    level: str | None = None
    """Name of that level ('below Alert Level 1' for 0)."""
    thresholds: Thresholds | None = None
    """The warning thresholds applied, and their source."""
    climatology: dict[str, float] = field(default_factory=dict)
    """The base rate for the time of year, per level."""
    persistence: dict[str, float | None] = field(default_factory=dict)
    """1 for the levels the last observed sample met, 0 above; None without a sample."""
    expected_cells_per_ml: float | None = None
    """The count model's median of the largest count within the horizon [cells mL-1]."""
    interval_80_cells_per_ml: tuple[float, float] | None = None
    """Its 80% prediction interval [cells mL-1]."""
    drivers: list[dict[str, Any]] = field(default_factory=list)
    """The drivers that push today's forecast most (see :meth:`RiskModel.explain`)."""
    missing_drivers: list[str] = field(default_factory=list)
    """Drivers without a value today (imputed by the model)."""


@dataclass
class Observed:
    """The last lab result known at the issue time."""

    last_sampled_at: pd.Timestamp | None = None
    """When that sample was taken [UTC]."""
    known_since: pd.Timestamp | None = None
    """From when its result was known [UTC]."""
    cyano_cells_per_ml: float | None = None
    """Its total of cyanobacteria [cells mL-1] (the limit, for a censored result)."""
    censor: str | None = None
    """'=', '<' or '>'."""
    level_rank: float | None = None
    """Level it met (0 below the first; NaN when undecided)."""
    level: str | None = None
    """Name of that level."""
    age_days: float | None = None
    """From sampling to the issue time [d]."""


@dataclass
class Freshness:
    """How old the data behind the assessment are."""

    last_weather: pd.Timestamp | None = None
    """End of the last interval with a weather reading before the issue time [UTC]."""
    weather_age_days: float | None = None
    """From that reading to the issue time [d]."""
    lab_delay_days: float = 0.0
    """Days from sampling until a result is known, assumed when the lab gives no date [d]."""


@dataclass
class ModelInfo:
    """Which model the assessment used."""

    trained_with: str | None = None
    """cyanorisk version that trained it."""
    training_window: list[str] | None = None
    """First and last issue day of its training table."""
    fingerprint: str | None = None
    """SHA-256 of its training table."""
    drivers: list[str] | None = None


@dataclass
class Assessment:
    """Everything a report shows; :func:`cyanorisk.report.document.report_document` builds the
    JSON document from it."""

    spec: SiteSpec
    as_of: pd.Timestamp
    """The local date assessed (midnight, no zone)."""
    issue: pd.Timestamp
    """The issue instant [UTC]."""
    status: str
    """'assessed', 'insufficient data' or 'no assessment today'."""
    reasons: list[str]
    """Why the status is not 'assessed' (empty when it is)."""
    headline: str
    forecast: Forecast
    observed: Observed
    freshness: Freshness
    cautions: list[str]
    deferral: str
    model: ModelInfo
    quality: dict[str, Any] = field(default_factory=dict)
    """Data-quality notes and the row accounts of the ingest."""
    counts: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Samples of the history shown, known at issue time: sampled_at (UTC), cyano_cells_per_ml,
    cyano_censor."""
    history: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Per issue day of the history shown: probability per level and the plotted drivers."""


def last_weather_stamp(weather: pd.DataFrame, before: pd.Timestamp) -> pd.Timestamp | None:
    """End of the last interval with any reading that ended by ``before`` [UTC]."""
    if weather.empty:
        return None
    step = weather.index[1] - weather.index[0] if len(weather) > 1 else pd.Timedelta("30min")
    values = weather[[c for c in weather.columns if not c.endswith("_flag")]]
    has = values.notna().any(axis=1).to_numpy() & (weather.index + step <= before)
    if not has.any():
        return None
    return weather.index[np.flatnonzero(has)[-1]] + step


def forecast_rank(probs: dict[str, float], thresholds: Thresholds, names: list[str]) -> int:
    """The highest level whose probability reaches its warning threshold (0: none)."""
    rank = 0
    for k, name in enumerate(names, start=1):
        if probs[name] >= thresholds.at(name):
            rank = k
    return rank


def quality_notes(weather: pd.DataFrame, weather_rows: dict[str, int] | None,
                  sample_rows: dict[str, int] | None, issue: pd.Timestamp) -> dict[str, Any]:
    """Data-quality notes: fills and gaps of the 7 days before the issue time, rejected rows."""
    notes = []
    recent = weather[(weather.index < issue) & (weather.index >= issue - pd.Timedelta(days=7))]
    for col in [c for c in recent.columns if c.endswith("_flag")]:
        flags = recent[col].astype(str)
        filled, missing = int((flags == "filled").sum()), int((flags == "missing").sum())
        if filled or missing:
            notes.append(f"{col[:-5]}: {filled} value(s) filled and {missing} missing in the "
                         "last 7 days")
    weather_rows = weather_rows or {}
    if weather_rows.get("rejected"):
        notes.append(f"weather ingest rejected {weather_rows['rejected']} row(s) of "
                     f"{weather_rows['read']:,}; see the rejects ledger")
    if sample_rows and sample_rows.get("rejected"):
        notes.append(f"lab ingest rejected {sample_rows['rejected']} row(s); see the rejects ledger")
    if not notes:
        notes.append("no fills, gaps or rejected rows in the data behind this report")
    return {"notes": notes, "weather_rows": weather_rows, "sample_rows": sample_rows}


def default_as_of(weather: pd.DataFrame, timezone: str) -> pd.Timestamp:
    """The last local day of the weather record (the day a report is for when none is given)."""
    if weather.empty:
        raise ValueError("no weather data: give the date to report for")
    return weather.index[-1].tz_convert(timezone).tz_localize(None).normalize()


def _staleness(spec: SiteSpec, wx_age_days: float | None, sample_age: float | None,
               missing: list[str], n_drivers: int) -> list[str]:
    reasons = []
    if wx_age_days is None:
        reasons.append("no weather data before the issue time")
    elif wx_age_days > spec.stale_weather_days:
        reasons.append(f"the last weather reading is {wx_age_days:.1f} days old "
                       f"(more than {spec.stale_weather_days:g})")
    if sample_age is None:
        reasons.append("no lab result is known yet")
    elif sample_age > spec.stale_sample_days:
        reasons.append(f"the last known sample is {sample_age:.0f} days old "
                       f"(more than {spec.stale_sample_days:g})")
    if len(missing) > n_drivers / 2:
        reasons.append(f"{len(missing)} of {n_drivers} drivers are missing")
    return reasons


def assess(spec: SiteSpec, models: SiteModels, weather: pd.DataFrame, totals: pd.DataFrame,
           as_of: pd.Timestamp, thresholds: Thresholds,
           rows: dict[str, dict[str, int] | None] | None = None) -> Assessment:
    """Assess one site for the local date ``as_of``, using only what was known at issue time.

    ``rows``: the ingest's row accounts (``{"weather": ..., "samples": ...}``) for the quality
    notes.
    """
    names = spec.levels
    scheme = spec.scheme
    tz = spec.timezone
    day = pd.Timestamp(as_of).normalize().tz_localize(None)
    days = pd.date_range(day - pd.Timedelta(days=spec.history_days - 1), day, freq="D")
    drivers = FeatureBuilder(spec.features, tz).transform(weather, days)
    issue = drivers["issue_time_utc"].iloc[-1]
    table = drivers.reset_index()
    table.insert(0, "site_id", spec.site_id)
    site_totals = totals[totals["site_id"] == spec.site_id]
    table = pd.concat([table, last_known(table, site_totals, scheme, spec.lab_delay_days, tz)],
                      axis=1)
    X = prepare(table)
    probs = models.risk.predict_proba(X)
    today = X.iloc[[-1]]
    last = today.iloc[0]
    p_today = {n: float(probs[n].iloc[-1]) for n in names}
    clim = models.climatology.predict_proba(today["issue_date"]).iloc[0]
    persist = PersistenceModel(names).predict_proba(today["last_level"]).iloc[0]
    expected = models.count.predict(today).iloc[0]
    last_wx = last_weather_stamp(weather, issue)
    wx_age_days = None if last_wx is None else (issue - last_wx) / pd.Timedelta(days=1)
    sample_known = pd.notna(last["last_sampled_at"])
    sample_age = float(last["last_count_age_days"]) if sample_known else None
    missing_drivers = [d for d in models.risk.drivers if pd.isna(last.get(d, np.nan))]
    reasons = _staleness(spec, wx_age_days, sample_age, missing_drivers, len(models.risk.drivers))
    status = STATUS_INSUFFICIENT if reasons else STATUS_ASSESSED
    rank = forecast_rank(p_today, thresholds, names) if status == STATUS_ASSESSED else None
    observed_rank = float(last["last_level"]) if sample_known else None
    undecided = observed_rank is None or np.isnan(observed_rank)
    caution_rank = rank if rank is not None else (0 if undecided else int(observed_rank))
    if status == STATUS_ASSESSED:
        shown = names[max(rank, 1) - 1]  # the level the headline quotes
        headline = (f"Forecast {level_name(scheme, rank)}: probability {p_today[shown]:.0%} of "
                    f"reaching {shown} within {spec.horizon_days} days")
        if 1 <= rank < len(names):
            headline += f"; {p_today[names[rank]]:.0%} for {names[rank]}"
    else:
        headline = "Insufficient data: " + "; ".join(reasons) + ". No forecast level is given."
    quality = quality_notes(weather, (rows or {}).get("weather"), (rows or {}).get("samples"), issue)
    card = models.card
    window = card.get("training_window")
    if window and str(day.date()) < window[1]:
        quality["notes"].append(
            f"this is a report for a past date: the model was trained on issue days up to "
            f"{window[1]}, after it (the drivers and counts shown are those known on the day)")
    forecast = Forecast(
        horizon_days=spec.horizon_days, probabilities=p_today, level_rank=rank,
        level=level_name(scheme, rank) if rank is not None else None, thresholds=thresholds,
        climatology={n: float(clim[n]) for n in names},
        persistence={n: (None if pd.isna(persist[n]) else float(persist[n])) for n in names},
        expected_cells_per_ml=float(expected["expected_cells_per_ml"]),
        interval_80_cells_per_ml=(float(expected["low_cells_per_ml"]),
                                  float(expected["high_cells_per_ml"])),
        drivers=models.risk.explain(today, top=5)[0], missing_drivers=missing_drivers)
    observed = Observed(
        last_sampled_at=last["last_sampled_at"] if sample_known else None,
        known_since=last["last_known_at"] if sample_known else None,
        cyano_cells_per_ml=float(last["last_count_cells_per_ml"]) if sample_known else None,
        censor=last["last_count_censor"] if sample_known else None,
        level_rank=observed_rank, level=level_name(scheme, observed_rank) if sample_known else None,
        age_days=sample_age)
    history = pd.DataFrame({"issue_date": pd.to_datetime(X["issue_date"])})
    for n in names:
        history[n] = probs[n].to_numpy()
    for col in HISTORY_DRIVERS:
        history[col] = X[col].to_numpy() if col in X else np.nan
    return Assessment(
        spec=spec, as_of=day, issue=issue, status=status, reasons=reasons, headline=headline,
        forecast=forecast, observed=observed,
        freshness=Freshness(last_wx, wx_age_days, spec.lab_delay_days),
        cautions=list(cautions(caution_rank, spec.use)),
        deferral=DEFERRAL.format(authority=spec.authority),
        model=ModelInfo(card.get("cyanorisk_version"), card.get("training_window"),
                        card.get("fingerprint"), card.get("drivers")),
        quality=quality, counts=known_counts(totals, issue, days[0], spec), history=history)


def known_counts(totals: pd.DataFrame, issue: pd.Timestamp, first_day: pd.Timestamp,
                 spec: SiteSpec) -> pd.DataFrame:
    """Samples taken since ``first_day`` (local) whose results were known at the issue time."""
    columns = ["sampled_at", "cyano_cells_per_ml", "cyano_censor"]
    mine = totals[totals["site_id"] == spec.site_id] if len(totals) else totals
    if mine.empty:
        return pd.DataFrame(columns=columns)
    known = known_from(mine, spec.lab_delay_days, spec.timezone) <= issue
    recent = mine["sampled_at"].dt.tz_convert(spec.timezone).dt.tz_localize(None) >= first_day
    return mine.loc[known & recent, columns].reset_index(drop=True)


def no_assessment(spec: SiteSpec, as_of: pd.Timestamp, reason: str) -> Assessment:
    """The report of a day on which the site could not be assessed (a corrupt file, a missing
    model): it says so and why, rather than saying nothing or showing a level."""
    day = pd.Timestamp(as_of).normalize().tz_localize(None)
    issue = issue_instants(pd.DatetimeIndex([day]), spec.timezone, spec.issue_time)[0]
    return Assessment(
        spec=spec, as_of=day, issue=issue, status=STATUS_NONE, reasons=[reason],
        headline=f"No assessment today: {reason}",
        forecast=Forecast(horizon_days=spec.horizon_days), observed=Observed(),
        freshness=Freshness(lab_delay_days=spec.lab_delay_days),
        cautions=list(cautions(0, spec.use)) + ["Without today's assessment, rely on the latest "
                                                "lab results and on what is seen on site."],
        deferral=DEFERRAL.format(authority=spec.authority), model=ModelInfo(),
        quality={"notes": [reason]})
