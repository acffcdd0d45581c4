"""The daily assessment of one site: the level in force, the model's outlook, freshness, toxins,
sampling and cautions. Pure computation on data already in memory (the clean weather series, the
per-sample totals and the fitted models); :mod:`cyanorisk.report` renders it and builds its JSON
document, the site pipeline reads and writes files.

Two things are stated separately, always:

- the level in force: the level the lab has confirmed, held until the scheme's step-down rule
  is met (:func:`cyanorisk.levels.level_in_force`);
- the outlook: the probability of reaching each level within the horizon, and the level a
  warning threshold raises.

The level the report states is the higher of the two, so a report never states less than the
lab has confirmed. When the data are too old or missing for an outlook, the status is
'insufficient data', no figure of the model is given, and the level in force still stands.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.align import lab_record, last_known
from cyanorisk.drivers import Effect, lookup, stand_in
from cyanorisk.features import FeatureBuilder, issue_instants
from cyanorisk.levels import (
    CENSOR_COLUMNS,
    DEFERRAL,
    MEASURE_WORDS,
    Role,
    ToxinValue,
    cautions,
    level_in_force,
    level_name,
    main_action,
    toxin_values,
)
from cyanorisk.model import SiteModels, prepare
from cyanorisk.spec import SiteSpec, Thresholds
from cyanorisk.words import cells, date, number, percent, time_of_year

STATUS_ASSESSED = "assessed"
STATUS_INSUFFICIENT = "insufficient data"
STATUS_NONE = "no assessment today"

BASIS_LAB, BASIS_OUTLOOK = "lab", "outlook"

HISTORY_DRIVERS = ("water_temp_mean_c_7d", "degree_days_20c_7d", "wind_run_km_1d", "calm_h_7d",
                   "rain_mm_1d")
"""Drivers the report plots over its history."""
TOXINS = ("microcystin_ug_per_l", "cylindrospermopsin_ug_per_l")


def history_drivers(X: pd.DataFrame) -> list[str]:
    """The drivers of :data:`HISTORY_DRIVERS` the table has values of, each replaced by its
    stand-in (water temperature estimated from air temperature) where the station lacks it."""
    out = []
    for col in HISTORY_DRIVERS:
        for name in (col, stand_in(col)):
            if name is not None and name in X and X[name].notna().any():
                out.append(name)
                break
    return out


@dataclass
class Forecast:
    """The model's outlook for the horizon. Probabilities in [0, 1], keyed by level name; every
    figure is None (or empty) when the data are insufficient for an outlook."""

    horizon_days: int
    """The horizon [d]: probabilities are of reaching each level within this many days."""
    probabilities: dict[str, float] | None = None
    """P(a sample taken within the horizon meets the level), per level."""
    level_rank: int | None = None
    """Highest level whose probability reaches its warning threshold (0: none)."""
    level: str | None = None
    """Name of that level ('below <first level>' for 0)."""
    watch: bool = False
    """True when that level was raised by a warning threshold below 50% (a tuned watch)."""
    thresholds: Thresholds | None = None
    """The warning thresholds applied, and their source."""
    climatology: dict[str, float] | None = None
    """The base rate for the time of year, per level."""
    persistence: dict[str, float | None] | None = None
    """Persistence as a probability: how often, in the training seasons, a day whose last
    result stood where today's does reached each level within the horizon; None without a
    sample."""
    outlook: dict[str, list[float]] | None = None
    """Per level, the probability of reaching it within 1, 2 ... ``outlook_days`` days
    (coherent: never higher for a higher level, never lower for a longer horizon)."""
    outlook_days: int = 0
    """Longest horizon of the outlook [d]."""
    warn_horizon_days: int = 0
    """Longest horizon [d] whose probability can raise a warning."""
    warned_within: dict[str, int | None] = field(default_factory=dict)
    """Per level, the shortest horizon [d] whose probability reaches the level's threshold
    (None: no horizon up to ``warn_horizon_days`` does)."""
    family: str | None = None
    """The model family that gave the probabilities ('ordinal' or 'boosted')."""
    reliability: dict[str, Any] | None = None
    """How past out-of-season forecasts like today's came out (see :func:`reliability_line`)."""
    peak_band: dict[str, Any] | None = None
    """The most likely band of the largest count within the horizon, from the probabilities:
    level, low and high [cells mL-1 of the scheme's measure], probability."""
    expected_cells_per_ml: float | None = None
    """The count model's median of the largest count within the horizon [cells mL-1]."""
    interval_80_cells_per_ml: tuple[float, float] | None = None
    """Its 80% prediction interval [cells mL-1]."""
    count_note: str | None = None
    """Set when the count model and the probabilities disagree (the report says so)."""
    drivers: list[dict[str, Any]] = field(default_factory=list)
    """The drivers against their usual value for the time of year (see :func:`explain`)."""
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
class InForce:
    """The level in force from the lab: confirmed by a sample and not stepped down since."""

    rank: int | None = None
    """0 below the first level; None when no lab result is known."""
    level: str | None = None
    set_by_sampled_at: pd.Timestamp | None = None
    """When the sample that set it was taken [UTC]."""
    below_since: int = 0
    """Samples below it since then (stepping down needs ``step_down_samples``)."""
    step_down_samples: int = 2
    step_down_rule: str = ""
    """The scheme's step-down rule, with its source."""


@dataclass
class Sampling:
    """When the next sample is due, from the sampling frequency of the level stated."""

    every_days: float
    """The interval the level asks for [d]."""
    source: str
    last_sampled_at: pd.Timestamp | None = None
    """The last sample taken whose result is known [UTC]."""
    next_due: pd.Timestamp | None = None
    """The local day it is due."""
    overdue: bool = False
    """True when the issue day is past the due day."""


@dataclass
class ToxinResult:
    """The last toxin result of a kind known at the issue time, against the guideline values."""

    measure: str
    value_ug_per_l: float
    censor: str
    sampled_at: pd.Timestamp
    above: list[ToxinValue]
    """Guideline values the result exceeds (for the site's use)."""
    values: list[ToxinValue]
    """Every guideline value of the toxin for the site's use."""


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
    left_out: list[dict[str, Any]] = field(default_factory=list)
    """Drivers left out of the fit, and why."""
    driver_notes: list[str] = field(default_factory=list)
    """Drivers estimated, or left out, because the station does not record their variable."""


@dataclass
class Previous:
    """The previous report of the site, as the store recorded it (for 'what changed')."""

    as_of: str
    status: str
    level: str | None
    probabilities: dict[str, float] | None
    last_sampled_at: str | None = None
    """Its last known sample [UTC, ISO 8601], as its JSON document gives it
    (``observed.last_sampled_at_utc``)."""


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
    level_rank: int | None
    """The level the report states: the higher of the level in force and the outlook's."""
    level: str | None
    level_basis: str | None
    """'lab' (the level in force) or 'outlook' (a warning raised it higher)."""
    in_force: InForce
    forecast: Forecast
    observed: Observed
    freshness: Freshness
    sampling: Sampling | None
    toxins: list[ToxinResult]
    actions: list[str]
    """What to do, the main action first."""
    cautions: list[str]
    deferral: str
    model: ModelInfo
    changes: list[str] = field(default_factory=list)
    """What changed since the previous report (filled by the orchestrator from the store)."""
    quality: dict[str, Any] = field(default_factory=dict)
    """Data-quality notes and the row accounts of the ingest."""
    counts: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Samples of the history shown, known at issue time: sampled_at (UTC), the scheme's count
    measure and its censor."""
    history: pd.DataFrame = field(default_factory=pd.DataFrame)
    """Per issue day of the history shown: probability per level and the plotted drivers."""

    @property
    def role(self) -> Role:
        return self.spec.scheme.role(self.level_rank)


# ---------------------------------------------------------------------------------------------
# Pieces
# ---------------------------------------------------------------------------------------------

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


def warned_within(outlook: dict[str, list[float]], thresholds: Thresholds,
                  warn_horizon_days: int) -> dict[str, int | None]:
    """Per level, the shortest horizon [d] up to ``warn_horizon_days`` whose probability
    reaches the level's threshold, or None."""
    out = {}
    for name, by_horizon in outlook.items():
        hits = [h for h, p in enumerate(by_horizon[:warn_horizon_days], start=1)
                if p >= thresholds.at(name)]
        out[name] = hits[0] if hits else None
    return out


def reliability_line(card: dict[str, Any], probabilities: dict[str, float],
                     names: list[str]) -> dict[str, Any] | None:
    """How past out-of-season forecasts in today's bin came out, for the level the outlook is
    most about: the highest level with a probability of at least 10% (else the first level).

    Read from the model card's ``reliability_out_of_season`` (season-blocked forecasts of the
    chosen family, calibrated on the other folds); None when the card has none or the bin held
    no past forecast.
    """
    table = card.get("reliability_out_of_season") or {}
    level = next((n for n in reversed(names) if probabilities.get(n, 0.0) >= 0.1), names[0])
    rows = table.get(level)
    if not rows:
        return None
    p = probabilities[level]
    row = next((r for r in rows if r["low"] <= p < r["high"] or (p == 1.0 and r["high"] == 1.0)),
               None)
    if row is None or not row["n"]:
        return None
    return {"level": level, "low": row["low"], "high": row["high"], "n": row["n"],
            "observed": row["observed"], "probability": p,
            "horizon_days": card.get("horizon_days")}


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
        flags = recent[col]
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


def known_samples(totals: pd.DataFrame, issue: pd.Timestamp, spec: SiteSpec) -> pd.DataFrame:
    """Every sample of the site whose result was known at the issue time, oldest first, with its
    observed level (``level``) and when it became known (``known_at``)."""
    mine = totals[totals["site_id"] == spec.site_id] if len(totals) else totals
    if mine.empty:
        return mine.assign(level=pd.Series(dtype=float), known_at=pd.Series(dtype="datetime64[ns, UTC]"))
    record = lab_record(mine, spec.scheme, spec.lab_delay_days, spec.timezone)
    return record[record["known_at"] <= issue].reset_index(drop=True)


def lab_level(samples: pd.DataFrame, spec: SiteSpec) -> InForce:
    """The level in force from the samples known (see :func:`known_samples`)."""
    scheme = spec.scheme
    rule = scheme.step_down_source
    if samples.empty or samples["level"].isna().all():
        return InForce(step_down_samples=scheme.step_down_samples, step_down_rule=rule)
    held = level_in_force(samples["level"].to_numpy(dtype=float), scheme.step_down_samples)
    return InForce(held.rank, level_name(scheme, held.rank),
                   samples["sampled_at"].iloc[held.set_by], held.below_since,
                   scheme.step_down_samples, rule)


def toxin_results(samples: pd.DataFrame, spec: SiteSpec) -> list[ToxinResult]:
    """The last known result of each toxin the sheets carry, against its guideline values."""
    out = []
    for measure in TOXINS:
        if measure not in samples:
            continue
        have = samples[samples[measure].notna()]
        values = toxin_values(measure, spec.use)
        if have.empty or not values:
            continue
        last = have.iloc[-1]
        censor = last.get(CENSOR_COLUMNS[measure]) or "="
        v = float(last[measure])
        above = [g for g in values if censor != "<" and v > g.value_ug_per_l]
        out.append(ToxinResult(measure, v, str(censor), last["sampled_at"], above, values))
    return out


def sampling(spec: SiteSpec, rank: int | None, samples: pd.DataFrame,
             day: pd.Timestamp) -> Sampling:
    """When the next sample is due at the stated level, and whether it is overdue."""
    scheme = spec.scheme
    level = scheme.level(rank)
    every = scheme.sample_every_days(rank)
    source = level.sampling_source if level is not None else scheme.routine_source
    if samples.empty:
        return Sampling(every, source)
    last = samples["sampled_at"].iloc[-1]
    last_day = pd.Timestamp(last).tz_convert(spec.timezone).tz_localize(None).normalize()
    due = last_day + pd.Timedelta(days=int(np.ceil(every)))
    return Sampling(every, source, last, due, bool(day > due))


def peak_band(probs: dict[str, float], spec: SiteSpec) -> dict[str, Any]:
    """The most likely band of the largest count within the horizon: the masses between the
    levels' thresholds on the scheme's count measure, from the level probabilities."""
    names = spec.levels
    measure = spec.scheme.primary_measure()
    bounds = [next((t.value for t in lvl.thresholds if t.measure == measure), None)
              for lvl in spec.scheme.levels]
    p = [1.0] + [probs[n] for n in names] + [0.0]
    masses = [max(p[k] - p[k + 1], 0.0) for k in range(len(names) + 1)]
    k = int(np.argmax(masses))
    low = 0.0 if k == 0 else bounds[k - 1]
    high = bounds[k] if k < len(names) else None
    return {"level": level_name(spec.scheme, k), "level_rank": k, "measure": measure,
            "low": low, "high": high, "probability": masses[k]}


def count_check(probs: dict[str, float], median: float, spec: SiteSpec) -> str | None:
    """A sentence when the count model's median and the level probabilities disagree: the median
    is above a level's count threshold while that level is less likely than not, or the other
    way round."""
    if spec.scheme.primary_measure() != "cyano_cells_per_ml":
        return None
    for lvl in spec.scheme.levels:
        t = next((t for t in lvl.thresholds if t.measure == "cyano_cells_per_ml"
                  and not t.detection), None)
        if t is None:
            continue
        if (median >= t.value) != (probs[lvl.name] >= 0.5):
            return (f"The count model's median peak ({cells(median)}) and the probability of "
                    f"{lvl.name} ({percent(probs[lvl.name])} at {cells(t.value)}) disagree; the "
                    "probabilities are the figure the backtests check.")
    return None


def explain(models: SiteModels, today: pd.Series, day: pd.Timestamp) -> list[dict[str, Any]]:
    """Each driver with a direction in the glossary, against its usual value for the time of
    year: the value, the normal, the difference, and the push on the log-odds of the forecast
    that the difference makes (coefficient per unit x difference), largest first.

    Drivers with no set direction (corrections, the calendar) and missingness indicators are
    left out of the list; they are in the model card.
    """
    from cyanorisk.training import dekad

    risk = models.risk
    per_unit = dict(zip(risk.feature_names_in_, risk.coef_ / risk.scaling_.scale, strict=True))
    period = int(dekad(pd.DatetimeIndex([day]))[0])
    when = time_of_year(day)
    out = []
    for name in risk.drivers:
        info = lookup(name)
        if info is None or info.effect == Effect.NONE:
            continue
        value = float(today.get(name, np.nan))
        normal = (models.normals.get(name) or [None] * 36)[period]
        imputed = value != value
        if imputed or normal is None:
            out.append({"driver": name, "label": info.label, "unit": info.unit, "value": None,
                        "normal": normal, "difference": None, "log_odds": 0.0,
                        "direction": "unknown", "strength": "", "imputed": imputed,
                        "text": f"{info.label}: no value today (the model used a typical one)"})
            continue
        push = per_unit[name] * (value - normal)
        shown, usual, unit = value, normal, info.unit
        if name == "last_count_log10":  # said in cells, as the lab gives it
            shown, usual, unit = 10 ** value - 1.0, 10 ** normal - 1.0, "cells/mL"
        diff = shown - usual
        size = abs(push)
        strength = "strongly" if size >= 1.5 else "moderately" if size >= 0.5 else "slightly"
        direction = "raises" if push > 0 else "lowers"
        if size < 0.05:
            direction, strength = "hardly changes", ""
        side = "above" if diff > 0 else "below"
        compare = (f"{number(abs(diff), unit)} {side} the usual {number(usual, unit)} for {when}"
                   if abs(diff) > 0 else f"as usual for {when}")
        words = f"{direction} the risk" if not strength else f"{strength} {direction} the risk"
        out.append({"driver": name, "label": info.label, "unit": unit, "value": shown,
                    "normal": usual, "difference": diff, "log_odds": float(push),
                    "direction": direction if direction != "hardly changes" else "neither",
                    "strength": strength, "imputed": False,
                    "text": f"{info.label}: {number(shown, unit)}, {compare}: {words}"})
    return sorted(out, key=lambda d: -abs(d["log_odds"]))


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


def _what_to_do(reasons: list[str], samp: Sampling | None, spec: SiteSpec) -> list[str]:
    """Actions for insufficient data and overdue samples."""
    out = []
    if any("weather" in r or "drivers" in r for r in reasons):
        out.append("Check the weather station and the transfer of its data; the outlook needs "
                   "readings up to the issue time.")
    if any("lab result" in r or "sample" in r for r in reasons):
        out.append("Take a sample and send it to the laboratory: the outlook needs a recent "
                   "count.")
    if samp is not None and samp.overdue and samp.next_due is not None:
        out.append(f"A sample is overdue (due {date(samp.next_due)} at this level's "
                   f"interval of {number(samp.every_days)} days): take one.")
    return out


def _toxin_cautions(toxins: list[ToxinResult], tz: str) -> list[str]:
    out = []
    for t in toxins:
        if not t.above:
            continue
        top = t.above[-1]
        out.append(f"{MEASURE_WORDS[t.measure].capitalize()} of {number(t.value_ug_per_l, 'ug/L')} "
                   f"(sample of {date(t.sampled_at, tz)}) are above the {top.what} of "
                   f"{number(top.value_ug_per_l, 'ug/L')} ({top.source}"
                   f"{', from memory' if top.status == 'M' else ''}): treat the water as "
                   "unsafe for that use until the authority decides otherwise.")
    return out


def _headline(spec: SiteSpec, status: str, reasons: list[str], lab: InForce,
              f: Forecast, basis: str | None) -> str:
    names, h = spec.levels, spec.horizon_days
    tz = spec.timezone
    lab_text = ("no lab result is known" if lab.rank is None else
                f"{lab.level} (sample of {date(lab.set_by_sampled_at, tz)})")
    if status != STATUS_ASSESSED:
        return (f"Insufficient data for an outlook: {'; '.join(reasons)}. Level in force from the "
                f"lab: {lab_text}.")
    p = f.probabilities
    if basis == BASIS_LAB and lab.rank:
        text = f"At {lab.level} now (lab, sample of {date(lab.set_by_sampled_at, tz)})"
        if lab.rank < len(names):
            nxt = names[lab.rank]
            text += f"; {percent(p[nxt])} chance of {nxt} within {h} days"
        return text
    if basis == BASIS_LAB:  # below every level, lab and outlook alike
        return (f"Below {names[0]}: {percent(p[names[0]])} chance of reaching {names[0]} within "
                f"{h} days (lab: {lab_text})")
    name = f.level
    threshold = f.thresholds.at(name) if f.thresholds else 0.5
    within = f.warned_within.get(name) or h
    p_within = f.outlook[name][within - 1] if f.outlook else p[name]
    if f.watch:
        text = (f"{name} watch: {percent(p_within)} chance of reaching {name} within {within} "
                f"days, above this site's warning threshold of {percent(threshold)}")
    else:
        text = (f"Forecast {name}: {percent(p_within)} chance of reaching {name} within "
                f"{within} days")
    if within != h:
        text += f" ({percent(p[name])} within {h})"
    if f.level_rank < len(names):
        nxt = names[f.level_rank]
        p_next = f.outlook[nxt][within - 1] if f.outlook else p[nxt]
        text += f"; {percent(p_next)} for {nxt}"
    return text + f" (lab: {lab_text})"


# ---------------------------------------------------------------------------------------------
# The assessment
# ---------------------------------------------------------------------------------------------

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
    site_totals = lab_record(totals[totals["site_id"] == spec.site_id], scheme,
                             spec.lab_delay_days, tz)
    table = pd.concat([table, last_known(table, site_totals, scheme, spec.lab_delay_days, tz,
                                          spec.season_start_month)],
                      axis=1)
    X = prepare(table)
    for name in models.drivers:  # a sensor the station no longer has: no value, not a crash
        if name not in X:
            X[name] = np.nan
    today = X.iloc[[-1]]
    last = today.iloc[0]
    samples = known_samples(site_totals, issue, spec)
    lab = lab_level(samples, spec)
    # freshness and sufficiency
    last_wx = last_weather_stamp(weather, issue)
    wx_age_days = None if last_wx is None else (issue - last_wx) / pd.Timedelta(days=1)
    sample_known = pd.notna(last["last_sampled_at"])
    sample_age = float(last["last_count_age_days"]) if sample_known else None
    missing_drivers = [d for d in models.drivers if pd.isna(last.get(d, np.nan))]
    reasons = _staleness(spec, wx_age_days, sample_age, missing_drivers, len(models.drivers))
    status = STATUS_INSUFFICIENT if reasons else STATUS_ASSESSED
    forecast = Forecast(horizon_days=spec.horizon_days, thresholds=thresholds,
                        missing_drivers=missing_drivers)
    probs = None
    if status == STATUS_ASSESSED:
        table_p = models.outlook.predict(X)
        j = models.outlook.horizons.index(spec.horizon_days)
        probs = pd.DataFrame(table_p[:, :, j], columns=names, index=X.index)
        p_today = {n: float(probs[n].iloc[-1]) for n in names}
        outlook = {n: [float(v) for v in table_p[-1, k, :]] for k, n in enumerate(names)}
        forecast.outlook, forecast.outlook_days = outlook, len(models.outlook.horizons)
        forecast.warn_horizon_days = min(spec.warn_horizon_days, forecast.outlook_days)
        forecast.warned_within = warned_within(outlook, thresholds, forecast.warn_horizon_days)
        forecast.family = models.outlook.family
        p_warn = {n: outlook[n][forecast.warn_horizon_days - 1] for n in names}
        rank = forecast_rank(p_warn, thresholds, names)
        expected = models.count.predict(today).iloc[0]
        clim = models.climatology.predict_proba(today["issue_date"]).iloc[0]
        persist = models.persistence.predict_proba(today["last_level"], spec.horizon_days).iloc[0]
        forecast.probabilities = p_today
        forecast.reliability = reliability_line(models.card, p_today, names)
        forecast.level_rank, forecast.level = rank, level_name(scheme, rank)
        forecast.watch = rank > 0 and thresholds.at(names[rank - 1]) < 0.5
        forecast.climatology = {n: float(clim[n]) for n in names}
        forecast.persistence = {n: (None if pd.isna(persist[n]) else float(persist[n]))
                                for n in names}
        forecast.peak_band = peak_band(p_today, spec)
        forecast.expected_cells_per_ml = float(expected["expected_cells_per_ml"])
        forecast.interval_80_cells_per_ml = (float(expected["low_cells_per_ml"]),
                                             float(expected["high_cells_per_ml"]))
        forecast.count_note = count_check(p_today, forecast.expected_cells_per_ml, spec)
        forecast.drivers = explain(models, last, day)
    # the level stated: never below the lab's
    lab_rank = lab.rank if lab.rank is not None else 0
    outlook_rank = forecast.level_rank if forecast.level_rank is not None else 0
    stated = max(lab_rank, outlook_rank)
    if lab.rank is None and forecast.level_rank is None:
        stated_rank, basis = None, None
    else:
        stated_rank = stated
        basis = BASIS_OUTLOOK if outlook_rank > lab_rank else BASIS_LAB
    samp = sampling(spec, stated_rank if stated_rank is not None else 0, samples, day)
    toxins = toxin_results(samples, spec)
    role = scheme.role(stated_rank)
    actions = [main_action(role, spec.use)] + _what_to_do(reasons, samp, spec)
    caution_list = list(cautions(role, spec.use)) + _toxin_cautions(toxins, tz)
    quality = quality_notes(weather, (rows or {}).get("weather"), (rows or {}).get("samples"), issue)
    card = models.card
    window = card.get("training_window")
    if window and str(day.date()) < window[1]:
        quality["notes"].append(
            f"this is a report for a past date: the model was trained on issue days up to "
            f"{window[1]}, after it (the drivers and counts shown are those known on the day)")
    observed = Observed(
        last_sampled_at=last["last_sampled_at"] if sample_known else None,
        known_since=last["last_known_at"] if sample_known else None,
        cyano_cells_per_ml=float(last["last_count_cells_per_ml"]) if sample_known else None,
        censor=last["last_count_censor"] if sample_known else None,
        level_rank=float(last["last_level"]) if sample_known else None,
        level=level_name(scheme, float(last["last_level"])) if sample_known else None,
        age_days=sample_age)
    history = pd.DataFrame({"issue_date": pd.to_datetime(X["issue_date"])})
    for n in names:
        history[n] = probs[n].to_numpy() if probs is not None else np.nan
    for col in history_drivers(X):
        history[col] = X[col].to_numpy()
    return Assessment(
        spec=spec, as_of=day, issue=issue, status=status, reasons=reasons,
        headline=_headline(spec, status, reasons, lab, forecast, basis),
        level_rank=stated_rank, level=level_name(scheme, stated_rank) if stated_rank is not None
        else None, level_basis=basis, in_force=lab, forecast=forecast, observed=observed,
        freshness=Freshness(last_wx, wx_age_days, spec.lab_delay_days), sampling=samp,
        toxins=toxins, actions=actions, cautions=caution_list,
        deferral=DEFERRAL.format(authority=spec.authority),
        model=ModelInfo(card.get("cyanorisk_version"), card.get("training_window"),
                        card.get("fingerprint"), card.get("drivers"), card.get("left_out", []),
                        list(card.get("driver_notes", []))),
        quality=quality, counts=recent_counts(samples, days[0], spec), history=history)


def recent_counts(samples: pd.DataFrame, first_day: pd.Timestamp, spec: SiteSpec) -> pd.DataFrame:
    """The known samples taken since ``first_day`` (local): sampled_at and the scheme's count
    measure with its censor (the columns the count plot needs)."""
    measure = spec.scheme.primary_measure()
    censor = CENSOR_COLUMNS.get(measure)
    columns = ["sampled_at", measure] + ([censor] if censor else [])
    if samples.empty or measure not in samples:
        return pd.DataFrame(columns=columns)
    local = samples["sampled_at"].dt.tz_convert(spec.timezone).dt.tz_localize(None)
    out = samples.loc[local >= first_day, [c for c in columns if c in samples]]
    return out.reset_index(drop=True)


def changes_since(a: Assessment, previous: Previous | None) -> list[str]:
    """What changed since the previous report: the level stated, the probabilities, the samples."""
    if previous is None:
        return ["No earlier report is recorded for this site."]
    said = [f"Compared with the report for {previous.as_of}:"]
    if previous.status != a.status:
        said.append(f"status {previous.status} -> {a.status}")
    if previous.level != a.level:
        said.append(f"level {previous.level or 'none'} -> {a.level or 'none'}")
    before, now = previous.probabilities or {}, a.forecast.probabilities or {}
    for name in a.spec.levels:
        if name in before and name in now and percent(before[name]) != percent(now[name]):
            said.append(f"{name}: {percent(before[name])} -> {percent(now[name])}")
    last_now = a.observed.last_sampled_at
    if last_now is not None:
        if pd.Timestamp(last_now).isoformat() != previous.last_sampled_at:
            said.append(f"new lab result: sample of {date(last_now, a.spec.timezone)}, "
                        f"{cells(a.observed.cyano_cells_per_ml, a.observed.censor)}")
    if len(said) == 1:
        said.append("nothing changed")
    return said


def no_assessment(spec: SiteSpec, as_of: pd.Timestamp, reason: str,
                  in_force: InForce | None = None) -> Assessment:
    """The report of a day on which the site could not be assessed (a corrupt file, a missing
    model): it says so and why, and states the level in force from the lab when it is known
    (``in_force``), rather than saying nothing or falling back to routine."""
    day = pd.Timestamp(as_of).normalize().tz_localize(None)
    issue = issue_instants(pd.DatetimeIndex([day]), spec.timezone, spec.issue_time)[0]
    lab = in_force or InForce(step_down_samples=spec.scheme.step_down_samples,
                              step_down_rule=spec.scheme.step_down_source)
    role = spec.scheme.role(lab.rank)
    if in_force is None:
        role_text = ("the level in force could not be read either: treat the water body as at "
                     "the level of the last lab result you hold")
        rank, level = None, None
    elif lab.rank is None:
        role_text = "no lab result is known for this site"
        rank, level = None, None
    else:
        role_text = f"level in force from the lab: {lab.level} (sample of " \
                    f"{date(lab.set_by_sampled_at, spec.timezone)})"
        rank, level = lab.rank, lab.level
    return Assessment(
        spec=spec, as_of=day, issue=issue, status=STATUS_NONE, reasons=[reason],
        headline=f"No assessment today: {reason}. {role_text[0].upper()}{role_text[1:]}.",
        level_rank=rank, level=level, level_basis=BASIS_LAB if rank is not None else None,
        in_force=lab, forecast=Forecast(horizon_days=spec.horizon_days), observed=Observed(),
        freshness=Freshness(lab_delay_days=spec.lab_delay_days), sampling=None, toxins=[],
        actions=[main_action(role, spec.use), "Fix the problem named above and run the day again; "
                 "until then rely on the latest lab results and on what is seen on site."],
        cautions=list(cautions(role, spec.use)),
        deferral=DEFERRAL.format(authority=spec.authority), model=ModelInfo(),
        quality={"notes": [reason]})
