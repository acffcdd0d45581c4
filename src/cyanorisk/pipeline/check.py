"""``cyanorisk check``: try everything a site's configuration and files will be asked to do,
without writing anything, and say what would go wrong, what was assumed, and whether the site
is ready.

Every weather and lab file is parsed in full (first row to last) with the configured settings;
the series is put on its grid; the drivers are built and matched against what the station
records; the scheme's measures are looked for in the lab sheets; stamps are compared with the
declared zone (a standard-time logger read as local time shows hours that do not exist); count
limits are compared with the lab's unit; and the seasons the record allows to train on and to
replay are counted. Each problem is a finding with, where one exists, its fix.
"""

from __future__ import annotations

import dataclasses
import json
import zoneinfo
from dataclasses import asdict, dataclass, field
from datetime import datetime, timedelta
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.backtest import MIN_HISTORY_DAYS, history_shortfall, labelled_before
from cyanorisk.errors import CyanoriskError
from cyanorisk.ingest.samples import (
    CELLS_PER_L_IN_ML,
    assemble_samples,
    lookup_taxon,
    parse_sample_file,
    sample_totals,
)
from cyanorisk.ingest.weather import assemble_weather, parse_weather_file
from cyanorisk.levels import meets
from cyanorisk.model import ordinal_outcome, prepare
from cyanorisk.pipeline.clean import require_site_samples
from cyanorisk.training import available_drivers, label_columns, season_of, training_table

USUAL_DETECTION_LIMITS_CELLS_PER_ML = (1.0, 5_000.0)
"""Detection limits of phytoplankton cell counts usually lie within this range [cells mL-1]
(Utermoehl counts of a few mL settled; common practice, no source). A limit outside it is
more often a value in cells/L given as cells/mL, or the reverse."""


@dataclass
class Finding:
    """One thing the check found: an error (the site cannot run as configured), a warning
    (it runs, but something is probably wrong) or a note (what will happen)."""

    kind: str
    text: str
    fix: str = ""


@dataclass
class SiteCheck:
    """What :func:`check_site` found for one site."""

    site_id: str
    site_name: str
    lines: list[str] = field(default_factory=list)
    """What was read, file by file."""
    findings: list[Finding] = field(default_factory=list)
    assumptions: list[str] = field(default_factory=list)
    drivers: dict[str, Any] = field(default_factory=dict)
    seasons: dict[str, Any] = field(default_factory=dict)
    cannot_train: str = ""
    """Why train (and backtest, and the outlook) cannot run yet on these data, if so."""

    def add(self, kind: str, text: str, fix: str = "") -> None:
        self.findings.append(Finding(kind, text, fix))

    def of(self, kind: str) -> list[Finding]:
        return [f for f in self.findings if f.kind == kind]

    @property
    def ready(self) -> bool:
        return not self.of("error")

    @property
    def exit_status(self) -> int:
        """1 with errors, 3 when the data cannot train a model yet, else 0."""
        return 1 if self.of("error") else 3 if self.cannot_train else 0

    @property
    def verdict(self) -> str:
        errors, warnings = len(self.of("error")), len(self.of("warning"))
        if errors:
            return (f"not ready: {errors} error(s) to fix before ingest, train and report can "
                    "run")
        if self.cannot_train:
            return (f"ingest can run; train, backtest and the outlook cannot yet: "
                    f"{self.cannot_train}")
        can = ("ingest, train, backtest and report can run" if self.seasons.get("replayable")
               else "ingest, train and report can run; backtest has no season to replay yet")
        if warnings:
            return f"ready, with {warnings} warning(s) to read: {can}"
        return f"ready: {can}"

    def as_dict(self) -> dict[str, Any]:
        return {"site_id": self.site_id, "site_name": self.site_name, "ready": self.ready,
                "can_train": not self.cannot_train, "verdict": self.verdict, "lines": self.lines,
                "errors": [asdict(f) for f in self.of("error")],
                "warnings": [asdict(f) for f in self.of("warning")],
                "notes": [asdict(f) for f in self.of("note")],
                "assumptions": self.assumptions, "drivers": self.drivers,
                "seasons": self.seasons}

    def text(self) -> str:
        out = [f"{self.site_name} ({self.site_id})"] + [f"  {line}" for line in self.lines]
        for kind, title in (("note", "notes"), ("warning", "warnings"), ("error", "errors")):
            found = self.of(kind)
            if found:
                out.append(f"  {title}:")
                out += [f"    - {f.text}" + (f" Fix: {f.fix}" if f.fix else "") for f in found]
        out.append("  assumptions:" if self.assumptions
                   else "  assumptions: none, every choice is declared in the configuration")
        out += [f"    - {a}" for a in self.assumptions]
        out.append(f"  verdict: {self.verdict}")
        return "\n".join(out)


def check_site(pipeline) -> SiteCheck:
    """Check one site (a :class:`cyanorisk.pipeline.SitePipeline`) end to end, writing nothing."""
    site = pipeline.site
    report = SiteCheck(site.id, site.name)
    for problem in site.problems:
        report.add("error", str(problem), "check the pattern; it is read from the "
                                          "configuration's root")
    latest = site.ingest.latest_date or pipeline.run_day + timedelta(days=1)
    weather = _check_weather(site, report, latest)
    records = _check_samples(site, report, latest)
    totals = None
    if records is not None:
        totals = sample_totals(records, site.samples.taxa)
        _check_measures(site, report, totals)
        _check_limits(site, report, records)
    if weather is not None:
        _check_drivers_and_seasons(pipeline, report, weather, totals)
    return report


# weather ---------------------------------------------------------------------------------------

def _check_weather(site, report: SiteCheck, latest) -> pd.DataFrame | None:
    dialect = site.weather.parsing
    policy = site.ingest.bad_rows
    report.lines.append(f"weather: {len(site.weather.files)} file(s), dialect "
                        f"'{site.weather.dialect}', zone {site.timezone}, interval "
                        f"{_interval_text(site.interval)}")
    if not site.weather.files:
        if not site.problems:
            report.add("error", "no weather file is configured ([sites.weather] files)")
        return None
    parsed = []
    for path in site.weather.files:
        try:
            wf = parse_weather_file(path, dialect, site.timezone, site.interval,
                                    bad_rows="reject", earliest=site.ingest.earliest_date)
        except CyanoriskError as exc:
            report.add("error", str(exc))
            continue
        parsed.append(wf)
        r = wf.report
        report.lines.append(f"  {path.name}: {r.rows_read:,} rows parsed, {len(wf.rejects):,} "
                            "unreadable" + (f"; columns ignored: {', '.join(r.ignored_columns)}"
                                            if r.ignored_columns else ""))
        report.assumptions += [f"{path.name}: {a}" for a in r.assumptions]
        for text in r.warnings:
            report.add("error" if policy == "stop" else "warning", f"{path.name}: {text}",
                       "map the column under its name in this file, or check the export")
        _rejected_rows(report, wf.rejects, path.name, policy)
        _standard_time(site, report, wf, path.name)
    report.assumptions = _grouped(report.assumptions, [p.name for p in site.weather.files])
    if len(parsed) < len(site.weather.files):
        return None
    try:
        data, meta = assemble_weather(parsed, site.interval, site.timezone,
                                      period=site.weather.period, off_grid=site.ingest.off_grid,
                                      duplicates=site.ingest.duplicates,
                                      encoding=dialect.encoding, latest=latest)
    except CyanoriskError as exc:
        report.add("error", str(exc))
        return None
    variables = [c for c in data.columns if not c.endswith("_flag")]
    if meta.start is None:
        report.add("error", "the weather files hold no reading")
        return None
    report.lines.append(f"  series: {meta.start:%Y-%m-%d} to {meta.end:%Y-%m-%d} (UTC), "
                        f"{len(data):,} intervals; variables {', '.join(variables)}")
    late = meta.rejects[meta.rejects["reason"] == "implausible_date"]
    if len(late):
        first = site.ingest.earliest_date
        report.add("warning", f"{len(late):,} weather row(s) are dated outside {first} to "
                              f"{latest}: they go to the rejects ledger")
    return data


def _grouped(assumptions: list[str], names: list[str]) -> list[str]:
    """'f1: a', 'f2: a' -> 'every weather file: a' when all files share an assumption."""
    by: dict[str, list[str]] = {}
    for text in assumptions:
        name, _, said = text.partition(": ")
        by.setdefault(said, []).append(name)
    out = []
    for said, files in by.items():
        if len(names) > 1 and sorted(files) == sorted(names):
            out.append(f"every weather file: {said}")
        else:
            out += [f"{f}: {said}" for f in files]
    return out


def _rejected_rows(report: SiteCheck, rejects: pd.DataFrame, name: str, policy: str) -> None:
    if rejects.empty:
        return
    by = rejects["reason"].value_counts()
    first = rejects.iloc[0]
    where = f"{first['file']}, line {first['line']}" + (
        f", column '{first['column']}'" if first["column"] else "")
    counts = ", ".join(f"{k} {v:,}" for k, v in by.items())
    if policy == "stop":
        report.add("error", f"{name}: {len(rejects):,} row(s) cannot be read ({counts}); ingest "
                            f"stops at the first, {where}: {first['message']}",
                   "correct those rows, or set [ingest] bad_rows = \"reject\" to put them in "
                   "the rejects ledger and go on")
    else:
        report.add("warning", f"{name}: {len(rejects):,} row(s) will go to the rejects ledger "
                              f"({counts}); the first, {where}: {first['message']}")


def _standard_offset(timezone: str, year: int) -> tuple[str, bool]:
    """The zone's standard-time offset as '+10:00' and whether it keeps daylight saving."""
    zone = zoneinfo.ZoneInfo(timezone)
    jan, jul = (datetime(year, m, 15, 12, tzinfo=zone) for m in (1, 7))
    dst = jan.dst() or jul.dst()
    standard = (jan.utcoffset() - (jan.dst() or timedelta(0)))
    minutes = int(standard.total_seconds() // 60)
    sign = "+" if minutes >= 0 else "-"
    return f"{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}", bool(dst)


def _standard_time(site, report: SiteCheck, wf, name: str) -> None:
    """A logger on standard time all year, read as local time with daylight saving, writes
    stamps inside the hour clocks skip in spring: say so and give the fixed offset."""
    dialect = site.weather.parsing
    if dialect.stamp_zone != "local" or not len(wf.rows.t):
        return
    year = int(pd.Timestamp(int(np.median(wf.rows.t))).year)
    offset, has_dst = _standard_offset(site.timezone, year)
    if not has_dst:
        return
    skipped = wf.rejects[wf.rejects["reason"] == "nonexistent_local_time"]
    if len(skipped):
        line = int(skipped["line"].iloc[0])
        report.add("error", f"{name}: {len(skipped):,} stamp(s) fall in the hour clocks skip "
                            f"when daylight saving starts in {site.timezone} (first at line "
                            f"{line}): this logger keeps standard time all year, and read as "
                            "local time its summer readings would be an hour off",
                   f"set stamp_zone = \"{offset}\" (standard time of {site.timezone}) in "
                   f"[dialects.{site.weather.dialect}]")


def _interval_text(interval: pd.Timedelta) -> str:
    minutes = int(interval / pd.Timedelta(minutes=1))
    return f"{minutes} min" if minutes < 60 else f"{minutes // 60} h"


# lab sheets ------------------------------------------------------------------------------------

def _check_samples(site, report: SiteCheck, latest) -> pd.DataFrame | None:
    source = site.samples
    if source is None:
        report.add("warning", "no lab results configured ([sites.samples]): the report cannot "
                              "state a level in force, and no model can be trained")
        return None
    layout = source.parsing
    report.lines.append(f"lab: {len(source.files)} file(s), layout '{source.layout}' "
                        f"({layout.shape})")
    if not source.files:
        if not site.problems:
            report.add("error", "no lab file is configured ([sites.samples] files)")
        return None
    files = []
    for path in source.files:
        try:
            sf = parse_sample_file(path, layout, site.timezone, site_id=site.id,
                                   bad_rows="reject", earliest=site.ingest.earliest_date,
                                   site_aliases=source.site_aliases)
        except CyanoriskError as exc:
            report.add("error", str(exc))
            continue
        files.append(sf)
        report.lines.append(f"  {path.name}: {sf.rows_read:,} rows parsed, {len(sf.rejects):,} "
                            f"unreadable, {len(sf.records):,} record(s)")
        report.assumptions += sf.notes
        _rejected_rows(report, sf.rejects, path.name, site.ingest.bad_rows)
    if len(files) < len(source.files):
        return None
    records, meta = assemble_samples(files, layout, latest=latest, timezone=site.timezone)
    try:
        require_site_samples(site, records)
    except CyanoriskError as exc:
        found = sorted({str(v) for v in records["site_id"].dropna()})
        report.add("error", f"{exc.reason} (ids found: {', '.join(found)}; id expected: "
                            f"{site.id})",
                   f"add the lab's name for this site under [sites.samples], e.g. "
                   f"site_aliases = {json.dumps(found[:1])}, or correct the site id")
        return None
    mine = records[records["site_id"] == site.id]
    others = sorted(set(records["site_id"]) - {site.id})
    if others:
        report.add("note", f"the lab sheets also hold samples of {', '.join(others)}: only "
                           f"those of {site.id} are used for this site")
    if layout.sampled_time_column is None:
        report.assumptions.append(f"samples taken at {layout.default_sample_time} local time "
                                  "(the sheets give no sampling time)")
    if layout.reported_date_column is None:
        report.assumptions.append(f"each result known {source.lab_delay_days:g} days after "
                                  "sampling (the sheets give no reported date)")
    _taxa(site, report, mine)
    return mine


def _taxa(site, report: SiteCheck, records: pd.DataFrame) -> None:
    names = sorted({t for t in records["taxon"].dropna() if t})
    table = site.samples.taxa
    cyano = [t for t in names if (k := lookup_taxon(t, table)) is not None and k.cyanobacterium]
    unknown = [t for t in names if lookup_taxon(t, table) is None]
    report.lines.append(f"  taxa: {len(names)} found, {len(cyano)} counted as cyanobacteria"
                        + (f" ({', '.join(cyano[:6])}{' ...' if len(cyano) > 6 else ''})"
                           if cyano else ""))
    if unknown:
        report.add("warning", f"{len(unknown)} taxon name(s) are not in [taxa] and are not "
                              f"counted as cyanobacteria: {', '.join(unknown[:10])}"
                              + (" ..." if len(unknown) > 10 else ""),
                   "add each to [taxa] with cyanobacterium = true or false (a name matches "
                   "exactly or by its genus, the first word)")


def _check_measures(site, report: SiteCheck, totals: pd.DataFrame) -> None:
    """Every measure the scheme's levels use should have values in some sample."""
    scheme = site.spec.scheme
    measures = sorted({t.measure for lvl in scheme.levels for t in lvl.thresholds})
    missing = [m for m in measures if m not in totals or not totals[m].notna().any()]
    found = [m for m in measures if m not in missing]
    if not found:
        report.add("error", f"no sample has a value of the measure(s) the scheme's levels use "
                            f"({', '.join(measures)}): no level could ever be stated",
                   "check that [taxa] marks the cyanobacteria with cyanobacterium = true, "
                   "and that the layout names the count columns")
    elif missing:
        report.add("note", f"the scheme also reads {', '.join(missing)}, which no sample "
                           f"has; levels are judged on {', '.join(found)}",
                   f"to say so, set [sites.alerts] measures = {json.dumps(found)}")


def _check_limits(site, report: SiteCheck, records: pd.DataFrame) -> None:
    """Detection limits against the usual range and against the '<x' results of the sheets."""
    layout = site.samples.parsing
    limit = layout.detection_limit_cells_per_ml
    lo, hi = USUAL_DETECTION_LIMITS_CELLS_PER_ML
    per_l = (layout.count_unit or "").lower().replace(" ", "") in ("cells/l", "cells/litre") \
        or records["flag"].str.contains("converted_from_cells_per_l", regex=False).any()
    if limit is not None and not lo <= limit <= hi:
        as_per_l = limit / CELLS_PER_L_IN_ML
        report.add("warning", f"the detection limit is {limit:,.6g} cells/mL, outside the usual "
                              f"{lo:g} to {hi:,.0f} cells/mL",
                   (f"if the lab gave it in cells/L, write detection_limit = "
                    f"\"{limit:,.6g} cells/L\" ({as_per_l:,.6g} cells/mL)").replace(",", "")
                   if limit > hi else "check the value against the lab's method")
    elif limit is not None and per_l and layout.detection_limit is None:
        report.add("note", f"detection_limit_cells_per_ml = {limit:g} is read in cells/mL "
                           "while the sheets count in cells/L",
                   f"write detection_limit = \"{limit * CELLS_PER_L_IN_ML:.6g} cells/L\" or "
                   f"\"{limit:g} cells/mL\" to say the unit")
    below = records[records["censor"] == "<"]["cells_per_ml"].dropna()
    if limit is not None and len(below):
        usual = float(below.median())
        ratio = limit / usual if usual > 0 else np.nan
        if ratio == ratio and (ratio > 300 or ratio < 1 / 300):
            report.add("warning", f"the sheets' results below a limit ('<') are about "
                                  f"{usual:,.6g} cells/mL, {ratio:,.4g} times apart from the "
                                  f"configured detection limit of {limit:,.6g} cells/mL: "
                                  "a cells/L and cells/mL mix-up is likely",
                       "give the limit with its unit, detection_limit = \"... cells/L\" or "
                       "\"... cells/mL\"")


# drivers and seasons ---------------------------------------------------------------------------

def _check_drivers_and_seasons(pipeline, report: SiteCheck, weather: pd.DataFrame,
                               totals: pd.DataFrame | None) -> None:
    spec = pipeline.spec
    try:
        table = training_table(spec, weather, totals)
    except (CyanoriskError, ValueError) as exc:
        report.add("error", f"the drivers cannot be built: {exc}")
        return
    X = prepare(table)
    choice = available_drivers(spec.drivers, X)
    report.drivers = {"asked": list(spec.drivers), "used": list(choice.used),
                      "substituted": choice.substituted, "not_recorded": choice.not_recorded,
                      "no_values": list(choice.no_values)}
    left = len(choice.not_recorded) + len(choice.no_values)
    report.lines.append(f"drivers: {len(choice.used)} of {len(spec.drivers)} can be computed"
                        + (f", {len(choice.substituted)} estimated" if choice.substituted else "")
                        + (f", {left} left out" if left else ""))
    for note in choice.notes:
        report.add("note", note)
    if not choice.used:
        report.cannot_train = "no driver has a value over this record"
        return
    if totals is None or not len(totals):
        report.cannot_train = "there is no lab result to learn from"
        return
    y = ordinal_outcome(X, label_columns(spec))
    season = season_of(X["issue_date"], spec.season_start_month)
    labelled = ~np.isnan(y)
    seasons = sorted({int(s) for s in season})
    per_season = {int(s): int((labelled & (season == s)).sum()) for s in seasons}
    history = labelled_before(spec, table, seasons[1:])
    replayable = [s for s, n in history.items() if n >= MIN_HISTORY_DAYS]
    not_replayed = {s: history_shortfall(n) for s, n in history.items() if n < MIN_HISTORY_DAYS}
    report.seasons = {"in_record": seasons, "labelled_issue_days": per_season,
                      "replayable": replayable, "not_replayable": not_replayed}
    n_lab = int(labelled.sum())
    report.lines.append(f"seasons: {len(seasons)} in the record ({_span(seasons)}), "
                        f"{n_lab:,} labelled issue days to train on; "
                        f"{len(replayable)} can be replayed"
                        + (f" ({_span(replayable)})" if replayable else ""))
    if n_lab == 0:
        report.cannot_train = ("no issue day has a lab sample in the days after it (do the lab "
                               "sheets' dates overlap the weather record?)")
        return
    outcomes = {int(v) for v in np.unique(y[labelled])}
    absent = sorted(set(range(max(outcomes) + 1)) - outcomes)
    if len(outcomes) < 2 or absent:
        words = "reaches no level" if len(outcomes) < 2 and 0 in outcomes else None
        if words is None:
            k = absent[0] if absent else next(iter(outcomes))
            words = (f"stays below {spec.levels[0]}" if k == 0
                     else f"has {spec.levels[k - 1]} as its highest level")
        report.cannot_train = (f"no labelled issue day {words} while others do (or all are "
                               "alike), so the levels cannot be ordered and no model can be "
                               "fitted")
        _always_met(spec, report, totals)
    for s, why in not_replayed.items():
        report.add("note", f"season {s} cannot be replayed by backtest: {why}")


def _always_met(spec, report: SiteCheck, totals: pd.DataFrame) -> None:
    """Name a measure that meets a level in (nearly) every sample, which leaves the model
    nothing below that level to learn from, and the ``measures`` key that leaves it out."""
    used = sorted({t.measure for lvl in spec.scheme.levels for t in lvl.thresholds
                   if t.measure in totals and totals[t.measure].notna().any()})
    named: set[str] = set()
    for lvl in spec.scheme.levels:
        for t in lvl.thresholds:
            if t.measure not in used or t.measure in named:
                continue
            met = meets(totals, dataclasses.replace(lvl, thresholds=(t,)))
            decided = met[~np.isnan(met)]
            if len(decided) and decided.mean() >= 0.99:
                named.add(t.measure)
                others = [m for m in used if m != t.measure]
                report.add("warning", f"{t.measure} alone meets {lvl.name} in "
                                      f"{decided.mean():.0%} of the {len(decided):,} samples "
                                      "that have it: the level is reached whatever the weather",
                           (f"if that measure mostly reflects other algae here, set "
                            f"[sites.alerts] measures = {json.dumps(others)}") if others else
                           "check the measure's unit and the scheme")


def _span(seasons: list[int]) -> str:
    return f"{seasons[0]} to {seasons[-1]}" if len(seasons) > 1 else str(seasons[0])
