"""Ingest orchestration for configured sites: read each site's files, write its outputs."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.config import Config, Site
from cyanorisk.ingest.weather import WeatherMeta, read_weather


@dataclass
class SiteWeather:
    """The clean weather of one site and what ingest did to get it."""

    site: Site
    data: pd.DataFrame
    """Regular UTC series with ``*_flag`` columns (see :func:`read_weather`)."""
    meta: WeatherMeta


def ingest_site_weather(config: Config, site: Site) -> SiteWeather:
    """Read, clean and regularise a site's weather files as its configuration says."""
    data, meta = read_weather(
        list(site.weather.files), config.dialects[site.weather.dialect], site.interval,
        site.timezone, period=site.weather.period, off_grid=config.ingest.off_grid,
        duplicates=config.ingest.duplicates, bad_rows=config.ingest.bad_rows)
    return SiteWeather(site, data, meta)


def weather_paths(config: Config, site_id: str) -> dict[str, Path]:
    """Where a site's clean weather series and its rejects ledger are kept."""
    folder = config.data_dir / site_id
    return {"series": folder / "weather.parquet", "rejects": folder / "weather_rejects.csv"}


def write_site_weather(config: Config, result: SiteWeather) -> list[Path]:
    """Write the clean series (Parquet) and the rejects ledger (CSV) atomically, as a group."""
    paths = weather_paths(config, result.site.id)
    return write_group({
        paths["series"]: lambda tmp: result.data.to_parquet(tmp, engine="pyarrow"),
        paths["rejects"]: lambda tmp: result.meta.rejects.to_csv(tmp, index=False),
    })


def read_site_weather(config: Config, site_id: str) -> pd.DataFrame:
    """The clean series written by :func:`write_site_weather`."""
    return pd.read_parquet(weather_paths(config, site_id)["series"])
