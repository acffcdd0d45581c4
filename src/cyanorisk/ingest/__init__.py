"""Ingest: messy weather-station logs and lab results in, clean tables and a rejects ledger out."""

from cyanorisk.ingest.dialects import ColumnSpec, WeatherDialect
from cyanorisk.ingest.quality import Flag, IngestError, RowAccount
from cyanorisk.ingest.weather import WeatherMeta, read_weather

__all__ = ["ColumnSpec", "Flag", "IngestError", "RowAccount", "WeatherDialect", "WeatherMeta",
           "read_weather"]
