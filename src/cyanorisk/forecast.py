"""The daily assessment of one site: probabilities, the forecast level, freshness and cautions.

Pure computation on data already in memory (the clean weather series, the per-sample totals and
the fitted models); :mod:`cyanorisk.report` renders it, the orchestrators read and write files.

A forecast level is only given when the data allow one: when the last weather reading or the
last known sample is too old, or too many drivers are missing, the status is 'insufficient data'
and the headline says why, instead of showing a falsely low level.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

import cyanorisk
from cyanorisk.align import known_from, training_table
from cyanorisk.config import Site
from cyanorisk.features import FeatureBuilder, issue_instants
from cyanorisk.levels import DEFERRAL, Scheme, cautions, level_name
from cyanorisk.model import ClimatologyModel, CountModel, PersistenceModel, RiskModel, prepare

HISTORY_DAYS = 120
STATUS_ASSESSED = "assessed"
STATUS_INSUFFICIENT = "insufficient data"
STATUS_NONE = "no assessment today"


@dataclass
class Thresholds:
    """Which probability raises each level, and where those numbers came from."""

    warn_at: dict[str, float]
    source: str


@dataclass
class Models:
    """A site's fitted models as loaded from its bundle."""

    risk: RiskModel
    count: CountModel
    climatology: ClimatologyModel
    card: dict[str, Any]

    @classmethod
    def from_bundle(cls, body: dict[str, Any]) -> Models:
        return cls(RiskModel.from_dict(body["risk"]), CountModel.from_dict(body["count"]),
                   ClimatologyModel.from_dict(body["climatology"]), body["card"])


@dataclass
class Assessment:
    """Everything a report shows. ``content`` is the JSON document; the frames feed the plots."""

    content: dict[str, Any]
    counts: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Samples of the last 120 days: sampled_at (local), cyano_cells_per_ml, cyano_censor."""
    history: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Per issue day of the last 120 days: probability per level and the weather drivers."""


def _local(ts: pd.Timestamp | None, tz: str) -> str | None:
    if ts is None or pd.isna(ts):
        return None
    return pd.Timestamp(ts).tz_convert(tz).strftime("%Y-%m-%d %H:%M %Z")


def scheme_content(scheme: Scheme) -> dict[str, Any]:
    """The alert-level scheme as the report's JSON document carries it."""
    return {"key": scheme.key, "title": scheme.title, "source": scheme.source,
            "year": scheme.year, "levels": scheme.names,
            "thresholds": [[{"measure": t.measure, "value": t.value, "inclusive": t.inclusive,
                             "status": t.status} for t in lvl.thresholds] for lvl in scheme.levels]}


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
        if probs[name] >= thresholds.warn_at.get(name, 0.5):
            rank = k
    return rank


def assess(site: Site, models: Models, weather: pd.DataFrame, totals: pd.DataFrame,
           as_of: pd.Timestamp, thresholds: Thresholds,
           quality: dict[str, Any] | None = None) -> Assessment:
    """Assess one site for the local date ``as_of``, using only what was known at issue time."""
    scheme = site.alert_scheme()
    names = scheme.names
    tz = site.timezone
    day = pd.Timestamp(as_of).normalize().tz_localize(None)
    days = pd.date_range(day - pd.Timedelta(days=HISTORY_DAYS - 1), day, freq="D")
    issue = issue_instants(pd.DatetimeIndex([day]), tz, site.drivers.issue_time)[0]
    drivers = FeatureBuilder(site.drivers, tz).transform(weather, days)
    lab_delay = site.samples.lab_delay_days if site.samples else 3.0
    table = training_table(drivers, totals, scheme, site.id, lab_delay, tz, horizons=(1,))
    X = prepare(table)
    probs = models.risk.predict_proba(X)
    today = X.iloc[[-1]]
    p_today = {n: float(probs[n].iloc[-1]) for n in names}
    clim = models.climatology.predict_proba(today["issue_date"]).iloc[0]
    persist = PersistenceModel(names).predict_proba(today["last_level"]).iloc[0]
    expected = models.count.predict(today).iloc[0]
    # freshness
    last_wx = last_weather_stamp(weather, issue)
    wx_age_days = None if last_wx is None else (issue - last_wx) / pd.Timedelta(days=1)
    last = today.iloc[0]
    sample_known = pd.notna(last["last_sampled_at"])
    sample_age = float(last["last_count_age_days"]) if sample_known else None
    missing_drivers = [d for d in models.risk.drivers if pd.isna(today.iloc[0].get(d, np.nan))]
    reasons = []
    if wx_age_days is None:
        reasons.append("no weather data before the issue time")
    elif wx_age_days > site.model.stale_weather_days:
        reasons.append(f"the last weather reading is {wx_age_days:.1f} days old "
                       f"(more than {site.model.stale_weather_days:g})")
    if not sample_known:
        reasons.append("no lab result is known yet")
    elif sample_age > site.model.stale_sample_days:
        reasons.append(f"the last known sample is {sample_age:.0f} days old "
                       f"(more than {site.model.stale_sample_days:g})")
    if len(missing_drivers) > len(models.risk.drivers) / 2:
        reasons.append(f"{len(missing_drivers)} of {len(models.risk.drivers)} drivers are missing")
    status = STATUS_INSUFFICIENT if reasons else STATUS_ASSESSED
    rank = forecast_rank(p_today, thresholds, names) if status == STATUS_ASSESSED else None
    observed_rank = None if not sample_known else float(last["last_level"])
    undecided = observed_rank is None or np.isnan(observed_rank)
    caution_rank = rank if rank is not None else (0 if undecided else int(observed_rank))
    shown = names[max(rank, 1) - 1] if rank is not None else None  # the level the headline quotes
    if status == STATUS_ASSESSED:
        h = models.risk.horizon_days
        headline = (f"Forecast {level_name(scheme, rank)}: probability {p_today[shown]:.0%} of "
                    f"reaching {shown} within {h} days")
        if rank >= 1 and rank < len(names):
            nxt = names[rank]
            headline += f"; {p_today[nxt]:.0%} for {nxt}"
    else:
        headline = "Insufficient data: " + "; ".join(reasons) + ". No forecast level is given."
    explanation = models.risk.explain(today, top=5)[0]
    card = models.card
    quality = dict(quality or {})
    window = card.get("training_window")
    if window and str(day.date()) < window[1]:
        quality["notes"] = list(quality.get("notes", [])) + [
            f"this is a report for a past date: the model was trained on issue days up to "
            f"{window[1]}, after it (the drivers and counts shown are those known on the day)"]
    content: dict[str, Any] = {
        "schema": "cyanorisk-report/1",
        "site": {"id": site.id, "name": site.name, "use": site.use, "timezone": tz},
        "as_of": str(day.date()), "issue_time_utc": issue.isoformat(),
        "issue_time_local": _local(issue, tz),
        "status": status, "status_reasons": reasons, "headline": headline,
        "scheme": scheme_content(scheme),
        "forecast": {
            "level_rank": rank, "level": level_name(scheme, rank) if rank is not None else None,
            "horizon_days": models.risk.horizon_days,
            "probabilities": p_today,
            "warn_at": {n: thresholds.warn_at.get(n, 0.5) for n in names},
            "thresholds_source": thresholds.source,
            "climatology": {n: float(clim[n]) for n in names},
            "persistence": {n: (None if pd.isna(persist[n]) else float(persist[n])) for n in names},
            "expected_cells_per_ml": float(expected["expected_cells_per_ml"]),
            "interval_80_cells_per_ml": [float(expected["low_cells_per_ml"]),
                                         float(expected["high_cells_per_ml"])],
            "drivers": explanation,
            "missing_drivers": missing_drivers,
        },
        "observed": {
            "last_sampled_at": _local(last["last_sampled_at"], tz) if sample_known else None,
            "known_since": _local(last["last_known_at"], tz) if sample_known else None,
            "cyano_cells_per_ml": float(last["last_count_cells_per_ml"]) if sample_known else None,
            "censor": last["last_count_censor"] if sample_known else None,
            "level": level_name(scheme, observed_rank) if sample_known else None,
            "age_days": sample_age,
        },
        "freshness": {"last_weather_utc": None if last_wx is None else last_wx.isoformat(),
                      "last_weather_local": _local(last_wx, tz),
                      "weather_age_days": wx_age_days, "lab_delay_days": lab_delay},
        "quality": quality,
        "cautions": list(cautions(caution_rank, site.use)),
        "deferral": DEFERRAL.format(authority=site.authority),
        "model": {"cyanorisk_version": cyanorisk.__version__,
                  "trained_with": card.get("cyanorisk_version"),
                  "training_window": card.get("training_window"),
                  "fingerprint": card.get("fingerprint"), "drivers": card.get("drivers")},
    }
    history = pd.DataFrame({"issue_date": pd.to_datetime(X["issue_date"])})
    for n in names:
        history[n] = probs[n].to_numpy()
    for col in ("water_temp_mean_c_7d", "degree_days_20c_7d", "wind_run_km_1d", "calm_hours_7d",
                "rain_mm_1d"):
        history[col] = X[col].to_numpy() if col in X else np.nan
    return Assessment(content, known_counts(totals, issue, days[0], tz, lab_delay), history)


def known_counts(totals: pd.DataFrame, issue: pd.Timestamp, first_day: pd.Timestamp, tz: str,
                 lab_delay_days: float) -> pd.DataFrame:
    """Samples taken since ``first_day`` (local) whose results were known at the issue time."""
    columns = ["sampled_at", "cyano_cells_per_ml", "cyano_censor"]
    if totals.empty:
        return pd.DataFrame(columns=columns)
    known = known_from(totals, lab_delay_days, tz) <= issue
    recent = totals["sampled_at"].dt.tz_convert(tz).dt.tz_localize(None) >= first_day
    return totals.loc[known & recent, columns].reset_index(drop=True)


def no_assessment(site: Site, as_of: pd.Timestamp, reason: str) -> Assessment:
    """The report of a day on which the site could not be assessed (a corrupt file, a missing
    model): it says so and why, rather than saying nothing or showing a level."""
    scheme = site.alert_scheme()
    day = pd.Timestamp(as_of).normalize().tz_localize(None)
    issue = issue_instants(pd.DatetimeIndex([day]), site.timezone, site.drivers.issue_time)[0]
    content: dict[str, Any] = {
        "schema": "cyanorisk-report/1",
        "site": {"id": site.id, "name": site.name, "use": site.use, "timezone": site.timezone},
        "as_of": str(day.date()), "issue_time_utc": issue.isoformat(),
        "issue_time_local": _local(issue, site.timezone),
        "status": STATUS_NONE, "status_reasons": [reason],
        "headline": f"No assessment today: {reason}",
        "scheme": scheme_content(scheme),
        "forecast": {"level_rank": None, "level": None, "horizon_days": site.model.horizon_days,
                     "probabilities": {}, "warn_at": {}, "thresholds_source": "not applied",
                     "climatology": {}, "persistence": {}, "expected_cells_per_ml": None,
                     "interval_80_cells_per_ml": None, "drivers": [], "missing_drivers": []},
        "observed": {"last_sampled_at": None, "known_since": None, "cyano_cells_per_ml": None,
                     "censor": None, "level": None, "age_days": None},
        "freshness": {"last_weather_utc": None, "last_weather_local": None,
                      "weather_age_days": None,
                      "lab_delay_days": site.samples.lab_delay_days if site.samples else 3.0},
        "quality": {"notes": [reason]},
        "cautions": list(cautions(0, site.use)) + ["Without today's assessment, rely on the "
                                                   "latest lab results and on what is seen on site."],
        "deferral": DEFERRAL.format(authority=site.authority),
        "model": {"cyanorisk_version": cyanorisk.__version__, "trained_with": None,
                  "training_window": None, "fingerprint": None},
    }
    return Assessment(content)
