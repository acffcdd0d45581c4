"""Ingest orchestration for configured sites: read each site's files, write its outputs."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.config import Config, Site
from cyanorisk.ingest.samples import SamplesMeta, read_samples, sample_totals
from cyanorisk.ingest.weather import WeatherMeta, read_weather


@dataclass
class SiteWeather:
    """The clean weather of one site and what ingest did to get it."""

    site: Site
    data: pd.DataFrame
    """Regular UTC series with ``*_flag`` columns (see :func:`read_weather`)."""
    meta: WeatherMeta


@dataclass
class SiteSamples:
    """The lab results of one site."""

    site: Site
    records: pd.DataFrame
    """One row per sample and taxon (see :func:`read_samples`)."""
    totals: pd.DataFrame
    """One row per sample: cyanobacterial total with its censor, chlorophyll-a, toxins, and
    ``outside_weather`` (sampled outside the span of the weather record)."""
    meta: SamplesMeta


def ingest_site_weather(config: Config, site: Site) -> SiteWeather:
    """Read, clean and regularise a site's weather files as its configuration says."""
    data, meta = read_weather(
        list(site.weather.files), config.dialects[site.weather.dialect], site.interval,
        site.timezone, period=site.weather.period, off_grid=config.ingest.off_grid,
        duplicates=config.ingest.duplicates, bad_rows=config.ingest.bad_rows)
    return SiteWeather(site, data, meta)


def ingest_site_samples(config: Config, site: Site, weather: WeatherMeta | None) -> SiteSamples | None:
    """Read a site's lab files (None when the site has none configured)."""
    if site.samples is None:
        return None
    records, meta = read_samples(list(site.samples.files), config.layouts[site.samples.layout],
                                 site.timezone, site_id=site.id, bad_rows=config.ingest.bad_rows)
    totals = sample_totals(records, config.taxa)
    if weather is not None and weather.start is not None and len(totals):
        at = totals["sampled_at"]
        totals["outside_weather"] = ((at < weather.start)
                                     | (at > weather.end + weather.interval)).to_numpy()
    else:
        totals["outside_weather"] = True
    return SiteSamples(site, records, totals, meta)


def site_paths(config: Config, site_id: str) -> dict[str, Path]:
    """Where a site's ingest outputs are kept."""
    folder = config.data_dir / site_id
    return {"weather": folder / "weather.parquet", "weather_rejects": folder / "weather_rejects.csv",
            "samples": folder / "samples.parquet", "sample_totals": folder / "sample_totals.parquet",
            "samples_rejects": folder / "samples_rejects.csv",
            "training": folder / "training_table.parquet"}


def write_site_ingest(config: Config, weather: SiteWeather, samples: SiteSamples | None) -> list[Path]:
    """Write the clean series, the samples and the rejects ledgers atomically, as a group."""
    paths = site_paths(config, weather.site.id)
    writers = {
        paths["weather"]: lambda tmp: weather.data.to_parquet(tmp, engine="pyarrow"),
        paths["weather_rejects"]: lambda tmp: weather.meta.rejects.to_csv(tmp, index=False),
    }
    if samples is not None:
        writers[paths["samples"]] = lambda tmp: samples.records.to_parquet(tmp, engine="pyarrow")
        writers[paths["sample_totals"]] = lambda tmp: samples.totals.to_parquet(tmp, engine="pyarrow")
        writers[paths["samples_rejects"]] = lambda tmp: samples.meta.rejects.to_csv(tmp, index=False)
    return write_group(writers)
