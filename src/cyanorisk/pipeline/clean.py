"""Clean data of a site: ingest its raw files, or reuse what an earlier ingest wrote.

Two levels of reuse, both keyed by content hashes, so the command line and the service share
them:

- the clean tables as a whole, while every raw file and every setting that shapes them is
  unchanged (the key is kept in ``ingest_summary.json``);
- each raw file's parsed rows (``cache/``), so that a logger file appended each day, or a new
  file, is the only one parsed again; the files are then put together on the grid afresh, which
  is fast.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable
from dataclasses import asdict, dataclass
from datetime import date
from pathlib import Path
from typing import Any

import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.config import Site
from cyanorisk.ingest.quality import AFTER_LATEST, LEDGER_COLUMNS, IngestError
from cyanorisk.ingest.samples import (
    SampleFile,
    assemble_samples,
    empty_totals,
    parse_sample_file,
    sample_totals,
)
from cyanorisk.ingest.weather import (
    FileReport,
    WeatherFile,
    WeatherMeta,
    assemble_weather,
    parse_weather_file,
)
from cyanorisk.pipeline.workspace import SiteWorkspace
from cyanorisk.version import __version__


@dataclass
class CleanData:
    """A site's clean tables and what ingest did to make them."""

    weather: pd.DataFrame
    """Regular UTC series with ``*_flag`` columns (see :func:`cyanorisk.ingest.read_weather`)."""
    totals: pd.DataFrame
    """One row per sample: the cyanobacterial total with its censor, toxins, and
    ``outside_weather`` (sampled outside the span of the weather record)."""
    summary: dict[str, Any]
    """The ingest summary (``ingest_summary.json``): spans, row accounts, rejects by reason."""
    reused: bool = False
    """True when the clean tables were read back because nothing behind them changed."""
    records: pd.DataFrame | None = None
    """One row per sample and taxon (only after a fresh ingest)."""

    @property
    def rows(self) -> dict[str, dict[str, int] | None]:
        """The row accounts of the weather and the lab files."""
        s = self.summary.get("samples")
        return {"weather": self.summary["weather"]["rows"], "samples": s["rows"] if s else None}


def file_digest(path: Path) -> str:
    """Hex SHA-256 of a file's bytes, read in chunks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _key(*parts: Any) -> str:
    text = json.dumps(parts, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()


def weather_settings(site: Site) -> dict[str, Any]:
    """Everything besides a weather file's bytes that shapes its parsed rows."""
    return {"dialect": asdict(site.weather.parsing), "timezone": site.timezone,
            "interval": str(site.interval), "bad_rows": site.ingest.bad_rows,
            "earliest": str(site.ingest.earliest_date)}


def sample_settings(site: Site) -> dict[str, Any]:
    """Everything besides a lab file's bytes that shapes its parsed records."""
    layout = site.samples.parsing if site.samples else None
    return {"layout": asdict(layout) if layout else None, "timezone": site.timezone,
            "site_id": site.id, "bad_rows": site.ingest.bad_rows,
            "earliest": str(site.ingest.earliest_date),
            "aliases": list(site.samples.site_aliases) if site.samples else []}


def inputs_key(site: Site, digests: dict[str, str]) -> str:
    """The key of a site's clean tables: its raw files' hashes and the settings that shape them.
    The run's latest plausible date is not part of it (see :func:`_still_plausible`)."""
    taxa = {k: asdict(v) for k, v in site.samples.taxa.items()} if site.samples else None
    return _key(__version__, digests, weather_settings(site), sample_settings(site),
                taxa, asdict(site.ingest), site.weather.period)


def clean_site(site: Site, ws: SiteWorkspace, digests: dict[str, str], *,
               reuse: bool = True, latest: date | None = None) -> CleanData:
    """The site's clean data: read back when nothing changed, else ingested and written.
    Readings and samples dated after ``latest`` go to the rejects ledger."""
    key = inputs_key(site, digests)
    if reuse:
        done = _read_back(site, ws, key, latest)
        if done is not None:
            return done
    used: set[Path] = set()
    weather_files = [_weather_file(site, ws, Path(p), digests[str(p)], used)
                     for p in site.weather.files]
    weather, wmeta = assemble_weather(
        weather_files, site.interval, site.timezone, period=site.weather.period,
        off_grid=site.ingest.off_grid, duplicates=site.ingest.duplicates,
        encoding=site.weather.parsing.encoding, latest=latest)
    records = totals = smeta = None
    if site.samples is not None:
        sample_files = [_sample_file(site, ws, Path(p), digests[str(p)], used)
                        for p in site.samples.files]
        records, smeta = assemble_samples(sample_files, site.samples.parsing, latest=latest,
                                          timezone=site.timezone)
        require_site_samples(site, records)
        totals = sample_totals(records, site.samples.taxa)
        totals["outside_weather"] = _outside(totals, wmeta)
    summary = ingest_summary(site, wmeta, smeta, totals, key)
    summary["dates"] = _dates(site, latest, wmeta, smeta)
    writers = {ws.weather: lambda tmp: weather.to_parquet(tmp, engine="pyarrow"),
               ws.weather_rejects: lambda tmp: wmeta.rejects.to_csv(tmp, index=False)}
    if smeta is not None:
        writers[ws.samples] = lambda tmp: records.to_parquet(tmp, engine="pyarrow")
        writers[ws.sample_totals] = lambda tmp: totals.to_parquet(tmp, engine="pyarrow")
        writers[ws.samples_rejects] = lambda tmp: smeta.rejects.to_csv(tmp, index=False)
    summary["outputs"] = [str(p) for p in writers]
    writers[ws.ingest_summary] = lambda tmp: tmp.write_text(json.dumps(summary, indent=1),
                                                            encoding="utf-8")
    write_group(writers)
    _forget_unused(ws, used)
    return CleanData(weather, totals if totals is not None else empty_totals(), summary,
                     records=records)


def require_site_samples(site: Site, records: pd.DataFrame) -> None:
    """Refuse lab sheets whose site column never names the site: every sample would be dropped
    and the site would look as if no result had ever been known.

    Raises
    ------
    IngestError
        Naming the first lab file and the site column, the ids found and the id expected, and
        the ``site_aliases`` key that maps the lab's name to the site.
    """
    layout = site.samples.parsing if site.samples else None
    if layout is None or not layout.site_column or records.empty \
            or (records["site_id"] == site.id).any():
        return
    found = sorted({str(v) for v in records["site_id"].dropna()})
    shown = ", ".join(repr(v) for v in found[:8]) + (" ..." if len(found) > 8 else "")
    raise IngestError(site.samples.files[0],
                      f"no sample names site {site.id!r} in column {layout.site_column!r}: the "
                      f"sheets name {shown}; if one of them is this site, add it under "
                      f"[sites.samples] as site_aliases = {json.dumps(found[:1])}",
                      column=layout.site_column)


def _dates(site: Site, latest: date | None, weather: WeatherMeta, samples) -> dict[str, Any]:
    """The plausible window this ingest used and how many rows fell after its end."""
    late = sum(int(r["message"].str.contains(AFTER_LATEST, regex=False).sum())
               for r in (weather.rejects, samples.rejects if samples is not None else None)
               if r is not None and len(r))
    return {"earliest": str(site.ingest.earliest_date),
            "latest": str(latest) if latest else None, "after_latest": late}


def _still_plausible(summary: dict, latest: date | None) -> bool:
    """Whether clean tables made with one latest date hold for this one: the same date, or a
    later one when no row was refused for being late then (so none would be kept now)."""
    dates = summary.get("dates")
    if not isinstance(dates, dict) or "after_latest" not in dates:
        return False
    then = date.fromisoformat(dates["latest"]) if dates.get("latest") else date.max
    now = latest or date.max
    return now == then or (now > then and dates["after_latest"] == 0)


def _read_back(site: Site, ws: SiteWorkspace, key: str,
               latest: date | None = None) -> CleanData | None:
    needed = [ws.ingest_summary, ws.weather] + ([ws.sample_totals] if site.samples else [])
    if not all(p.exists() for p in needed):
        return None
    try:
        summary = json.loads(ws.ingest_summary.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(summary, dict) or summary.get("inputs") != key \
            or not _still_plausible(summary, latest):
        return None
    totals = pd.read_parquet(ws.sample_totals) if site.samples else empty_totals()
    return CleanData(pd.read_parquet(ws.weather), totals,
                     summary | {"reused": True, "outputs": []}, reused=True)


def _outside(totals: pd.DataFrame, weather: WeatherMeta) -> object:
    if weather.start is None or not len(totals):
        return True
    at = totals["sampled_at"]
    return ((at < weather.start) | (at > weather.end + weather.interval)).to_numpy()


def _rejects_frame(records: list[dict]) -> pd.DataFrame:
    frame = pd.DataFrame(records, columns=LEDGER_COLUMNS)
    return frame.astype({"line": "int64"}).astype({c: object for c in LEDGER_COLUMNS if c != "line"})


def _cached(ws: SiteWorkspace, kind: str, key: str, used: set[Path],
            load: Callable[[pd.DataFrame, dict], Any],
            parse: Callable[[], tuple[Any, pd.DataFrame, dict]]) -> Any:
    """A raw file's parse from the cache (a table and a JSON sidecar) when the same bytes were
    parsed with the same settings before; else parsed now and kept."""
    table, info = ws.cached(kind, key[:32], "parquet"), ws.cached(kind, key[:32], "json")
    used.update((table, info))
    if table.exists() and info.exists():
        return load(pd.read_parquet(table), json.loads(info.read_text(encoding="utf-8")))
    parsed, frame, meta = parse()
    write_group({table: lambda tmp: frame.to_parquet(tmp, engine="pyarrow"),
                 info: lambda tmp: tmp.write_text(json.dumps(meta, default=int), encoding="utf-8")})
    return parsed


def _weather_file(site: Site, ws: SiteWorkspace, path: Path, digest: str,
                  used: set[Path]) -> WeatherFile:
    """One weather file's parsed rows, from the cache when its bytes were parsed before."""
    def parse() -> tuple[WeatherFile, pd.DataFrame, dict]:
        parsed = parse_weather_file(path, site.weather.parsing, site.timezone, site.interval,
                                    bad_rows=site.ingest.bad_rows,
                                    earliest=site.ingest.earliest_date)
        return parsed, parsed.to_frame(), {
            "report": asdict(parsed.report), "rejects": parsed.rejects.to_dict("records"),
            "n_ambiguous": parsed.n_ambiguous, "n_nonexistent": parsed.n_nonexistent}

    def load(frame: pd.DataFrame, meta: dict) -> WeatherFile:
        return WeatherFile.from_frame(path, frame, _rejects_frame(meta["rejects"]), meta["report"],
                                      meta["n_ambiguous"], meta["n_nonexistent"])

    key = _key(__version__, digest, str(path), weather_settings(site))
    return _cached(ws, "weather", key, used, load, parse)


def _sample_file(site: Site, ws: SiteWorkspace, path: Path, digest: str,
                 used: set[Path]) -> SampleFile:
    """One lab file's parsed records, from the cache when its bytes were parsed before."""
    def parse() -> tuple[SampleFile, pd.DataFrame, dict]:
        parsed = parse_sample_file(path, site.samples.parsing, site.timezone, site_id=site.id,
                                   bad_rows=site.ingest.bad_rows,
                                   earliest=site.ingest.earliest_date,
                                   site_aliases=site.samples.site_aliases)
        return parsed, parsed.records, {"rows_read": parsed.rows_read, "notes": parsed.notes,
                                        "rejects": parsed.rejects.to_dict("records")}

    def load(frame: pd.DataFrame, meta: dict) -> SampleFile:
        return SampleFile(path, frame, meta["rows_read"], _rejects_frame(meta["rejects"]),
                          meta["notes"])

    key = _key(__version__, digest, str(path), sample_settings(site))
    return _cached(ws, "samples", key, used, load, parse)


def _forget_unused(ws: SiteWorkspace, used: set[Path]) -> None:
    """Remove cached parses of file versions the site no longer has."""
    if ws.cache.is_dir():
        for path in ws.cache.iterdir():
            if path not in used and path.suffix in (".parquet", ".json"):
                path.unlink(missing_ok=True)


def _first_reject(rejects: pd.DataFrame) -> dict[str, Any] | None:
    if rejects.empty:
        return None
    first = rejects.iloc[0]
    return {"file": str(first["file"]), "line": int(first["line"]),
            "column": str(first["column"] or ""), "message": str(first["message"])}


def ingest_summary(site: Site, weather: WeatherMeta, samples, totals: pd.DataFrame | None,
                   key: str) -> dict[str, Any]:
    """The summary document of one site's ingest (printed by ``cyanorisk ingest``)."""
    w = weather.summary() | {"interval_minutes": weather.interval / pd.Timedelta(minutes=1),
                             "first_reject": _first_reject(weather.rejects)}
    out: dict[str, Any] = {"site_id": site.id, "site_name": site.name, "inputs": key,
                           "weather": w, "samples": None}
    if samples is not None:
        n = int(len(totals))
        out["samples"] = samples.summary() | {
            "n_samples": n, "outside_weather": int(pd.Series(totals["outside_weather"]).sum()),
            "first_sampled": str(totals["sampled_at"].min()) if n else None,
            "last_sampled": str(totals["sampled_at"].max()) if n else None,
            "censored_below": int((totals["cyano_censor"] == "<").sum()) if n else 0,
            "unknown_taxa": sorted({t.strip() for names in totals["unknown_taxa"] if names
                                    for t in str(names).split(",")}) if n else [],
            "first_reject": _first_reject(samples.rejects)}
    return out


__all__ = ["CleanData", "FileReport", "clean_site", "file_digest", "inputs_key"]
