"""The configuration reference, ``docs/configuration.md``, generated from the settings
dataclasses (their fields, types, defaults and attribute docstrings) and, for the tables that
are not one dataclass, from the loader's own key lists. ``python -m cyanorisk.reference``
prints it; a test fails when the file is out of date or a key the loader accepts is missing.
"""

from __future__ import annotations

import ast
import dataclasses
import inspect
import re
import textwrap
import types
import typing
from dataclasses import dataclass
from datetime import date

from cyanorisk import config as cfg
from cyanorisk.drivers import DEFAULT_DRIVERS, GLOSSARY
from cyanorisk.features import FeatureSettings
from cyanorisk.ingest.dialects import DATE_ORDERS, STAMP_MARKS, WeatherDialect
from cyanorisk.ingest.quality import BAD_ROW_POLICIES, DUPLICATE_POLICIES, OFF_GRID_POLICIES
from cyanorisk.ingest.samples import SampleLayout, Taxon
from cyanorisk.levels import MEASURES, SCHEMES
from cyanorisk.units import CONVERSIONS
from cyanorisk.variables import WEATHER_VARIABLES


@dataclass(frozen=True)
class Key:
    """One configuration key as the reference shows it."""

    name: str
    kind: str
    default: str
    allowed: str
    doc: str
    unit: str = ""


@dataclass(frozen=True)
class Section:
    """One table of the configuration."""

    title: str
    intro: str
    keys: tuple[Key, ...]


def _field_docs(cls: type) -> dict[str, str]:
    """The attribute docstrings of a dataclass (the string literal under each field)."""
    tree = ast.parse(textwrap.dedent(inspect.getsource(cls)))
    body = tree.body[0].body  # type: ignore[attr-defined]
    docs = {}
    for stmt, after in zip(body, body[1:] + [None], strict=True):
        if isinstance(stmt, ast.AnnAssign) and isinstance(stmt.target, ast.Name) \
                and isinstance(after, ast.Expr) and isinstance(after.value, ast.Constant) \
                and isinstance(after.value.value, str):
            docs[stmt.target.id] = " ".join(after.value.value.split())
    return docs


def _kind(hint: typing.Any) -> str:
    options = typing.get_args(hint) if isinstance(hint, types.UnionType) else (hint,)
    words = []
    for option in options:
        if option is type(None):
            continue
        origin = typing.get_origin(option)
        if origin is tuple:
            words.append(f"list of {_kind(typing.get_args(option)[0])}s")
        elif option is str:
            words.append("string")
        elif option is bool:
            words.append("true or false")
        elif option is int:
            words.append("integer")
        elif option is float:
            words.append("number")
        elif option is date:
            words.append("date (YYYY-MM-DD)")
        elif origin in (dict, typing.Mapping) or option is dict:
            words.append("table")
        else:
            words.append(getattr(option, "__name__", str(option)))
    return " or ".join(words)


def _default(f: dataclasses.Field, none_means: str) -> str:
    if f.default is not dataclasses.MISSING:
        value = f.default
    elif f.default_factory is not dataclasses.MISSING:  # type: ignore[misc]
        value = f.default_factory()  # type: ignore[misc]
    else:
        return "required"
    if value is None:
        return none_means
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, tuple):
        return "[" + ", ".join(f'"{v}"' if isinstance(v, str) else f"{v:g}"
                               if isinstance(v, float) else str(v) for v in value) + "]"
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, dict):
        return "{}"
    return str(value)


_UNIT_IN_DOC = re.compile(r"\[([^\]]+)\]")
_UNIT_BY_SUFFIX = (("_cells_per_ml", "cells/mL"), ("_days", "d"), ("_hours", "h"), ("_c", "degC"),
                   ("_ms", "m/s"), ("_m", "m"), ("_h", "h"))


def _unit(name: str, doc: str) -> str:
    found = _UNIT_IN_DOC.search(doc)
    if found and not found.group(1).startswith(("ingest", "sites", "dialects")):
        return found.group(1)
    for suffix, unit in _UNIT_BY_SUFFIX:
        if name.endswith(suffix):
            return unit
    return ""


def _choices(values) -> str:
    return ", ".join(f'"{v}"' for v in values)


def _from_dataclass(cls: type, *, none_means: str = "not set", skip: tuple[str, ...] = (),
                    allowed: dict[str, str] | None = None, docs: dict[str, str] | None = None,
                    sniffed: tuple[str, ...] = (),
                    unset_means: dict[str, str] | None = None) -> tuple[Key, ...]:
    """The keys of a settings dataclass; ``sniffed`` fields left unset are read from the file,
    fields in ``unset_means`` say what leaving them out does, other unset optional fields mean
    ``none_means``."""
    hints = typing.get_type_hints(cls)
    found = _field_docs(cls) | (docs or {})
    allowed = allowed or {}
    out = []
    for f in dataclasses.fields(cls):
        if f.name in skip:
            continue
        doc = found.get(f.name, "")
        unset = "sniffed" if f.name in sniffed else (unset_means or {}).get(f.name, none_means)
        out.append(Key(f.name, _kind(hints[f.name]), _default(f, unset),
                       allowed.get(f.name, ""), doc, _unit(f.name, doc)))
    return tuple(out)


def _key(name: str, kind: str, default: str, doc: str, allowed: str = "", unit: str = "") -> Key:
    return Key(name, kind, default, allowed, doc, unit)


def sections() -> list[Section]:
    """Every table of a configuration, in the order a file usually has them."""
    units = ", ".join(f'"{u}"' for u in CONVERSIONS) + ', "compass" (for wind_dir_deg)'
    variables = "; ".join(f"`{k}` [{v.unit}] {v.description}" for k, v in WEATHER_VARIABLES.items())
    out = [
        Section("Top level", "Folders are relative to `root`, which is relative to the "
                             "configuration file's own folder.", (
            _key("root", "string", '"."', "Folder that every relative path below is read from."),
            _key("data_dir", "string", '"work"', "Clean series, rejects ledgers, the training "
                                                 "table, the store and the outbox, one folder "
                                                 "per site."),
            _key("reports_dir", "string", '"reports"', "Daily reports, backtests and tuning "
                                                       "plots, one folder per site."),
            _key("models_dir", "string", '"models"', "Fitted models and thresholds files."),
        )),
        Section("[ingest]", "How the cleaners treat what they cannot read; shared by all sites.",
                _from_dataclass(cfg.IngestSettings, none_means="the day after the run", allowed={
                    "bad_rows": _choices(BAD_ROW_POLICIES),
                    "off_grid": _choices(OFF_GRID_POLICIES),
                    "duplicates": _choices(DUPLICATE_POLICIES)}, docs={
                    "bad_rows": "'stop': the first unreadable row is an error naming file, line "
                                "and column; 'reject': such rows go to the rejects ledger and "
                                "the rest is read.",
                    "off_grid": "Readings between grid points: 'aggregate' them into their "
                                "interval, or 'drop' them to the ledger.",
                    "duplicates": "Conflicting rows with one stamp: keep the 'last' in file "
                                  "order, or the 'first'."})),
        Section("[dialects.NAME]", "How one station's exports are laid out. A key left out is "
                                   "sniffed from the file and the choice is reported (by "
                                   "`check` and in the ingest summary).",
                _from_dataclass(WeatherDialect, none_means="not used", skip=("columns",),
                                sniffed=("separator", "decimal", "skip_lines", "date_column",
                                         "time_column", "timestamp_column", "date_order",
                                         "stamp_marks"),
                                allowed={"decimal": '".", ","', "date_order": _choices(DATE_ORDERS),
                                         "stamp_marks": _choices(STAMP_MARKS),
                                         "stamp_zone": '"local", "UTC", or an offset such as '
                                                       '"+10:00"',
                                         "other_columns": '"error", "ignore"'},
                                docs={"stamp_zone": "The clock of naive stamps: 'local' is the "
                                                    "site's zone with daylight saving; a logger "
                                                    "that keeps standard time all year needs "
                                                    "its fixed offset here, e.g. '+10:00' "
                                                    "(`check` finds such loggers).",
                                      "missing": "Texts that mean a missing value (a number "
                                                 "such as -9999 too)."})),
        Section("[dialects.NAME.columns]", "One key per file column: `\"ignore\"`, or "
                                           "`{ variable = \"...\", unit = \"...\" }`. A column "
                                           "named like a canonical variable needs no entry. "
                                           f"Variables: {variables}. Source units: {units}.", (
            _key("variable", "string", "required", "The canonical variable the column holds.",
                 ", ".join(f'"{v}"' for v in WEATHER_VARIABLES)),
            _key("unit", "string", "the variable's own unit", "The column's unit; converted "
                                                             "on reading.", units),
        )),
        Section("[sample_layouts.NAME]", "How one laboratory's sheets are laid out; columns "
                                         "are named as in the sheet's header. `shape = \"long\"` "
                                         "has a row per sample and taxon (needs taxon_column "
                                         "and count_column); `\"wide\"` a row per sample and "
                                         "a column per taxon. Without site_column every sample "
                                         "belongs to the site that reads the sheet.",
                _from_dataclass(SampleLayout, none_means="not used",
                                sniffed=("separator", "decimal", "skip_lines", "date_order"),
                                unset_means={"count_unit": "none: the header must say"},
                                allowed={
                    "shape": '"long", "wide"', "date_order": _choices(DATE_ORDERS),
                    "count_unit": '"cells/mL", "cells/L"', "decimal": '".", ","',
                    "duplicates": _choices(DUPLICATE_POLICIES)})),
        Section("[taxa]", "One entry per taxon name: `\"Microcystis\" = { cyanobacterium = true, "
                          "toxin_producer = true }`. A name matches exactly (any case) or by its "
                          "genus, the first word. A taxon not listed is not counted as a "
                          "cyanobacterium (`check` lists such names).",
                _from_dataclass(Taxon, docs={
                    "cyanobacterium": "Counted in the cyanobacterial total.",
                    "toxin_producer": "Counted in the toxin producers' total."})),
        Section("[schemes.NAME]", "A custom alert-level scheme, used by `[sites.alerts] scheme = "
                                  "\"NAME\"`; the presets need none.", (
            _key("title", "string", "NAME", "Shown in reports."),
            _key("use", "string", '"drinking"', "The use the scheme is for.",
                 _choices(cfg.USES)),
            _key("source", "string", '"site configuration"', "Where the thresholds come from."),
            _key("year", "integer", "0", "The year of that source."),
            _key("levels", "table", "required", "Ordered lowest first: `\"Alert\" = { "
                                                "cyano_cells_per_ml = 5000 }`; a level is met "
                                                "when any of its thresholds is.",
                 ", ".join(f"`{m}`" for m in MEASURES)),
        )),
        Section("[[sites]]", "One table per water body.", (
            _key("id", "string", "required", "Short identifier: folder and file names, lab site "
                                             "column."),
            _key("name", "string", "required", "Shown in every report."),
            _key("timezone", "string", "required", "IANA zone, e.g. Australia/Melbourne; local "
                                                   "dates, issue times and local stamps are read "
                                                   "in it."),
            _key("use", "string", '"drinking"', "Decides the health cautions.",
                 _choices(cfg.USES)),
            _key("interval", "string", '"30min"', "The station's reading interval: at least a "
                                                  "minute, dividing a day ('10min', '1h')."),
            _key("authority", "string", f'"{cfg.DEFAULT_AUTHORITY}"', "Who decides advisories; "
                                                                     "named in every report."),
        )),
        Section("[sites.weather]", "The site's station exports.", (
            _key("files", "list of strings", "required", "Paths or glob patterns, from root."),
            _key("dialect", "string", "required", "A [dialects.NAME] table."),
            _key("period", "table", "all", "`{ start = 2020-01-01, end = 2024-12-31 }`: readings "
                                           "outside go to the ledger as outside_period."),
        )),
        Section("[sites.weather.period]", "", (
            _key("start", "date (YYYY-MM-DD)", "not set", "First day kept."),
            _key("end", "date (YYYY-MM-DD)", "not set", "Last day kept."),
        )),
        Section("[sites.samples]", "The site's lab sheets (optional: without them no level in "
                                   "force can be stated and no model trained).", (
            _key("files", "list of strings", "required", "Paths or glob patterns, from root."),
            _key("layout", "string", "required", "A [sample_layouts.NAME] table."),
            _key("lab_delay_days", "number", f"{cfg.DEFAULT_LAB_DELAY_DAYS:g}", "Days from "
                 "sampling until a result is known, when the sheet has no reported date.",
                 unit="d"),
            _key("site_aliases", "list of strings", "[]", "Names the sheets' site column uses "
                                                          "for this site besides its id."),
        )),
        Section("[sites.drivers]", "How the bloom drivers are computed. Default drivers: "
                                   + ", ".join(f"`{d}`" for d in DEFAULT_DRIVERS) + ".",
                _from_dataclass(FeatureSettings)),
        Section("[sites.alerts]", "Which alert levels the reports use.", (
            _key("scheme", "string", '"who1999_drinking"', "A preset or a [schemes.NAME].",
                 _choices(SCHEMES) + ", or a custom scheme's NAME"),
            _key("measures", "list of strings", "all the scheme's", "Only these measures' "
                 "thresholds are used (e.g. leave out chlorophyll-a where other algae carry it).",
                 ", ".join(f'"{m}"' for m in MEASURES)),
            _key("warn_at", "table", "tuned, else 0.3", "Per level, the probability at which "
                 "the outlook raises it: `{ \"Alert Level 1\" = 0.35 }`; above an accepted "
                 "tuning.", "numbers between 0 and 1"),
        )),
        Section("[sites.model]", "How the risk model is fitted.",
                _from_dataclass(cfg.ModelSettings, none_means="the default drivers", allowed={
                    "drivers": "names of the driver glossary: " + ", ".join(
                        f"`{d.pattern}`" for d in GLOSSARY)})),
        Section("[service]", "The scheduled service (`cyanorisk serve`, `run`, `status`).",
                _from_dataclass(cfg.ServiceSettings)),
        Section("[compute]", "Where the work of many sites runs: the daily job (`run`, `serve`) "
                             "spreads sites over the workers, `backtest` and `tune` spread sites "
                             "and seasons. Results are the same whichever engine runs them.",
                _from_dataclass(cfg.ComputeSettings, unset_means={
                    "workers": "the machine's cores"}, allowed={
                    "engine": '"serial", "local", "cluster"'})),
        Section("[demo]", "What `cyanorisk demo` generates.",
                _from_dataclass(cfg.DemoSettings, docs={
                    "out_dir": "Where the generated exports are written, from root.",
                    "years": "Years of data.", "seed": "Random seed (the same seed, the "
                                                       "same data)."})),
    ]
    return out


def _cell(text: str) -> str:
    return text.replace("|", "\\|").replace("\n", " ")


def markdown() -> str:
    """The reference as Markdown: one table of keys per section."""
    lines = ["# Configuration reference", "",
             "Generated by `python -m cyanorisk.reference` from the settings dataclasses; do "
             "not edit by hand (`make docs` writes it). A configuration is a TOML file; "
             "`cyanorisk init` drafts one from your files, `cyanorisk check` tries it. Any "
             "string value that starts with `FILL IN` is refused, naming its key, until it is "
             "filled in. Unknown keys are refused, naming the valid ones.", ""]
    for s in sections():
        lines += [f"## {s.title}", ""]
        if s.intro:
            lines += [s.intro, ""]
        lines += ["| Key | Type | Default | Unit | Allowed values | Meaning |",
                  "|---|---|---|---|---|---|"]
        for k in s.keys:
            lines.append(f"| `{k.name}` | {_cell(k.kind)} | {_cell(k.default)} | "
                         f"{_cell(k.unit)} | {_cell(k.allowed)} | {_cell(k.doc)} |")
        lines.append("")
    return "\n".join(lines)


def documented() -> dict[str, set[str]]:
    """Section title -> the keys the reference documents (for the completeness test)."""
    return {s.title: {k.name for k in s.keys} for s in sections()}


if __name__ == "__main__":
    print(markdown(), end="")
