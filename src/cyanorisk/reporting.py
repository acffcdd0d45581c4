"""Orchestration of the daily report: models from models/, data from ingest, files to reports/."""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.config import Config, Site
from cyanorisk.features import issue_instants
from cyanorisk.forecast import Assessment, Models, Thresholds, assess
from cyanorisk.ingest.samples import empty_totals
from cyanorisk.ingest.sites import SiteSamples, SiteWeather
from cyanorisk.model import ModelFileError, load_bundle, save_bundle
from cyanorisk.report.daily import render_html, render_json, render_text, report_stem
from cyanorisk.training import FittedSite

DEFAULT_WARN_AT = 0.5


def model_path(config: Config, site_id: str) -> Path:
    return config.models_dir / f"{site_id}.json"


def save_models(config: Config, fitted: FittedSite) -> Path:
    """Write a site's model bundle atomically under models/."""
    path = model_path(config, fitted.site.id)
    text = save_bundle(path, fitted.bundle())
    write_group({path: lambda tmp: tmp.write_text(text, encoding="utf-8")})
    return path


def load_models(config: Config, site: Site) -> Models:
    """A site's saved models. Raises ModelFileError naming the file when absent or unusable."""
    path = model_path(config, site.id)
    if not path.exists():
        raise ModelFileError(f"{path}: no model for site '{site.id}'; run `cyanorisk train "
                             f"--config {config.path}` first")
    body = load_bundle(path)
    if body.get("site_id") != site.id:
        raise ModelFileError(f"{path}: this model belongs to site '{body.get('site_id')}', "
                             f"not '{site.id}'")
    return Models.from_bundle(body)


def thresholds_for(config: Config, site: Site) -> Thresholds:
    """Warning thresholds of a site: the tuned ones when ``cyanorisk tune`` wrote a file for it
    (levels it did not tune keep the default), else the default for every level.

    Raises
    ------
    ModelFileError
        When the thresholds file cannot be read or names levels the site's scheme lacks.
    """
    names = site.alert_scheme().names
    warn_at = {n: DEFAULT_WARN_AT for n in names}
    path = config.models_dir / f"{site.id}.thresholds.toml"
    if not path.exists():
        return Thresholds(warn_at, f"default: {DEFAULT_WARN_AT:.0%} for every level "
                                   "(not tuned for this site)")
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
        tuned = {str(k): float(v) for k, v in data["warn_at"].items()}
    except (OSError, tomllib.TOMLDecodeError, KeyError, TypeError, ValueError) as exc:
        raise ModelFileError(f"{path}: not a readable thresholds file ({exc})") from None
    unknown = set(tuned) - set(names)
    if unknown or not all(0 < v < 1 for v in tuned.values()):
        raise ModelFileError(f"{path}: levels {', '.join(sorted(unknown)) or '(none)'} are not in "
                             f"the scheme ({', '.join(names)}), or a threshold is outside (0, 1)")
    warn_at.update(tuned)
    return Thresholds(warn_at, f"tuned on the backtest of seasons {data.get('seasons', '?')} "
                               f"by {data.get('rule', '?')} ({path})")


def quality_notes(weather: pd.DataFrame, weather_rows: dict[str, int],
                  sample_rows: dict[str, int] | None, issue: pd.Timestamp) -> dict[str, Any]:
    """Data-quality notes for the report: fills and gaps of the last 7 days, rejected rows."""
    notes = []
    recent = weather[(weather.index < issue) & (weather.index >= issue - pd.Timedelta(days=7))]
    for col in [c for c in recent.columns if c.endswith("_flag")]:
        flags = recent[col].astype(str)
        filled, missing = int((flags == "filled").sum()), int((flags == "missing").sum())
        if filled or missing:
            notes.append(f"{col[:-5]}: {filled} value(s) filled and {missing} missing in the "
                         "last 7 days")
    if weather_rows.get("rejected"):
        notes.append(f"weather ingest rejected {weather_rows['rejected']} row(s) of "
                     f"{weather_rows['read']:,}; see the rejects ledger")
    if sample_rows and sample_rows.get("rejected"):
        notes.append(f"lab ingest rejected {sample_rows['rejected']} row(s); see the rejects ledger")
    if not notes:
        notes.append("no fills, gaps or rejected rows in the data behind this report")
    return {"notes": notes, "weather_rows": weather_rows, "sample_rows": sample_rows}


def default_as_of(weather: pd.DataFrame, timezone: str) -> pd.Timestamp:
    """The last local day whose issue time the weather record reaches."""
    if weather.empty:
        raise ValueError("no weather data: give the date to report for")
    return weather.index[-1].tz_convert(timezone).tz_localize(None).normalize()


def assess_site(config: Config, site: Site, weather: pd.DataFrame, totals: pd.DataFrame | None,
                rows: dict[str, dict | None], as_of: pd.Timestamp | None) -> Assessment:
    """The day's assessment of a site from its clean data and its saved models."""
    models = load_models(config, site)
    day = as_of if as_of is not None else default_as_of(weather, site.timezone)
    issue = issue_instants(pd.DatetimeIndex([day]), site.timezone, site.drivers.issue_time)[0]
    totals = totals if totals is not None else empty_totals()
    return assess(site, models, weather, totals, day, thresholds_for(config, site),
                  quality_notes(weather, rows["weather"] or {}, rows.get("samples"), issue))


def site_report(config: Config, weather: SiteWeather, samples: SiteSamples | None,
                as_of: pd.Timestamp | None) -> Assessment:
    """:func:`assess_site` on fresh ingest results."""
    rows = {"weather": weather.meta.account.as_dict(),
            "samples": samples.meta.account.as_dict() if samples else None}
    return assess_site(config, weather.site, weather.data,
                       samples.totals if samples is not None else None, rows, as_of)


def write_report(config: Config, assessment: Assessment) -> list[Path]:
    """Write the HTML, JSON and text renderings atomically, as a group, under reports/<site>/."""
    stem = report_stem(assessment.content)
    folder = config.reports_dir / assessment.content["site"]["id"]
    page, doc, text = render_html(assessment), render_json(assessment), render_text(assessment)
    return write_group({
        folder / f"{stem}.html": lambda tmp: tmp.write_text(page, encoding="utf-8"),
        folder / f"{stem}.json": lambda tmp: tmp.write_text(doc, encoding="utf-8"),
        folder / f"{stem}.txt": lambda tmp: tmp.write_text(text, encoding="utf-8"),
    })

