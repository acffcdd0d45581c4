"""Loading and validating the TOML site configuration.

Every key is checked on load: an unknown key, a value of the wrong type or outside its allowed
set, an unknown time zone or a weather file pattern that matches nothing gives a
:class:`ConfigError` whose one sentence names the file and the key, e.g.::

    config/demo.toml: key 'sites[0].timezone': 'Europe/Atlantis' is not an IANA time zone

Relative paths are read from ``root``, itself relative to the configuration file's folder
(default: that folder). The embedded demo configuration (``cyanorisk demo`` without
``--config``) has no folder of its own and reads its paths from the working directory.
``config/demo.toml`` in the repository is the same file as the embedded one.
"""

from __future__ import annotations

import dataclasses
import glob
import re
import tomllib
import types
import typing
import zoneinfo
from dataclasses import dataclass, field
from datetime import date, datetime
from importlib import resources
from pathlib import Path
from typing import Any

import pandas as pd

from cyanorisk.drivers import DEFAULT_DRIVERS, lookup
from cyanorisk.errors import ConfigError
from cyanorisk.features import FeatureSettings
from cyanorisk.ingest.dialects import (
    DATE_ORDERS,
    DEFAULT_MISSING,
    STAMP_MARKS,
    ColumnSpec,
    WeatherDialect,
)
from cyanorisk.ingest.lines import line_and_byte
from cyanorisk.ingest.quality import (
    BAD_ROW_POLICIES,
    DEFAULT_BAD_ROWS,
    DEFAULT_DUPLICATES,
    DEFAULT_OFF_GRID,
    DUPLICATE_POLICIES,
    OFF_GRID_POLICIES,
)
from cyanorisk.ingest.samples import SampleLayout, Taxon
from cyanorisk.ingest.stamps import EARLIEST_DATE
from cyanorisk.levels import SCHEMES, Scheme, custom_scheme
from cyanorisk.levels import scheme as preset_scheme
from cyanorisk.spec import (
    DEFAULT_AUTHORITY,
    DEFAULT_HORIZON_DAYS,
    DEFAULT_LAB_DELAY_DAYS,
    DEFAULT_OUTLOOK_DAYS,
    DEFAULT_SEASON_START_MONTH,
    SITE_ID,
    SiteSpec,
)

EMBEDDED_DEMO = "demo.toml"
BLANK = "FILL IN"
"""A value a drafted configuration leaves for the user (``cyanorisk init``): any string value that
starts with it is refused, naming the key, until it is filled in."""
USES = ("drinking", "recreation")

__all__ = ["Config", "ConfigError", "Site", "embedded_demo_text", "load_config"]


@dataclass(frozen=True)
class IngestSettings:
    """Policies of the cleaning steps (see :func:`cyanorisk.ingest.read_weather`)."""

    bad_rows: str = DEFAULT_BAD_ROWS
    off_grid: str = DEFAULT_OFF_GRID
    duplicates: str = DEFAULT_DUPLICATES
    earliest_date: date = EARLIEST_DATE
    """Readings and samples dated before this go to the rejects ledger (``implausible_date``)."""
    latest_date: date | None = None
    """Readings and samples dated after this go to the ledger; by default the day after the
    run."""


@dataclass(frozen=True)
class WeatherSource:
    """Where a site's weather files are and how they are laid out."""

    patterns: tuple[str, ...]
    """File patterns as written in the configuration (globs allowed)."""
    files: tuple[Path, ...]
    """Files matched, in pattern order and sorted by name within a pattern."""
    dialect: str
    period: tuple[str | None, str | None] | None = None
    parsing: WeatherDialect = field(default_factory=WeatherDialect)
    """The dialect named by ``dialect``."""


@dataclass(frozen=True)
class ModelSettings:
    """How a site's risk model is fitted and evaluated."""

    horizon_days: int = DEFAULT_HORIZON_DAYS
    """Forecast horizon [d]: the probability of reaching each level within this many days
    (1 to 14)."""
    drivers: tuple[str, ...] | None = None
    """Drivers to use; None uses the default set of :mod:`cyanorisk.drivers`."""
    season_start_month: int = DEFAULT_SEASON_START_MONTH
    """First month of a bloom season (7 = July, for the southern hemisphere; 1 in the north)."""
    stale_weather_days: float = 2.0
    """A report whose last weather reading is older than this says 'insufficient data'."""
    stale_sample_days: float = 45.0
    """A report whose last known sample is older than this says 'insufficient data'."""
    outlook_days: int = DEFAULT_OUTLOOK_DAYS
    """Longest horizon of the outlook [d]: probabilities are given for every horizon from 1
    day to this (1 to 14; at least ``horizon_days``)."""
    warn_within_days: int | None = None
    """A level is warned of when its probability within any horizon up to this many days [d]
    reaches its threshold; default: ``outlook_days`` (a longer horizon can raise a warning)."""
    family: str = "auto"
    """Model family: 'auto' (``train`` picks the one with the better season-blocked Brier
    score), 'ordinal' (the transparent proportional-odds model) or 'boosted' (gradient
    boosting with monotonic constraints)."""
    calibration: str = "auto"
    """Calibration of the probabilities on out-of-season forecasts: 'auto' (``train`` keeps
    whichever of none, sigmoid and, with a thousand forecasts or more, isotonic gives the lower
    season-blocked Brier score), 'isotonic', 'sigmoid' or 'none'."""


@dataclass(frozen=True)
class SampleSource:
    """Where a site's lab results are and how they are laid out."""

    patterns: tuple[str, ...]
    files: tuple[Path, ...]
    layout: str
    lab_delay_days: float = DEFAULT_LAB_DELAY_DAYS
    """Days from sampling until a result is known, when the lab gives no reported date."""
    parsing: SampleLayout | None = None
    """The layout named by ``layout``."""
    taxa: dict[str, Taxon] = field(default_factory=dict)
    """The taxon table: which taxa are cyanobacteria and which are toxin producers."""
    site_aliases: tuple[str, ...] = ()
    """Names the lab sheets' site column uses for this site besides its id."""


@dataclass(frozen=True)
class Site:
    """One water body."""

    id: str
    name: str
    timezone: str
    use: str
    """Intended use: 'drinking' or 'recreation'."""
    interval: pd.Timedelta
    weather: WeatherSource
    samples: SampleSource | None = None
    drivers: FeatureSettings = field(default_factory=FeatureSettings)
    scheme: str = "who1999_drinking"
    """Key of the alert-level scheme (a preset of :mod:`cyanorisk.levels`)."""
    measures: tuple[str, ...] | None = None
    """Which of the scheme's measures to use (None: all the samples carry)."""
    model: ModelSettings = field(default_factory=ModelSettings)
    authority: str = DEFAULT_AUTHORITY
    """Who decides advisories, closures and treatment changes (named in every report)."""

    custom_scheme: Scheme | None = None
    """A scheme defined under [schemes] in the configuration, when ``scheme`` names one."""
    ingest: IngestSettings = field(default_factory=IngestSettings)
    """The installation's cleaning policies."""
    warn_at: dict[str, float] | None = None
    """Warning thresholds by level set in the configuration (``[sites.alerts] warn_at``); they
    override tuned thresholds."""
    spec: SiteSpec | None = None
    """What the core computes with, built once from the settings above."""
    problems: tuple[ConfigError, ...] = field(default=(), compare=False, repr=False)
    """Problems of this site alone (a file pattern that matches nothing): they fail the site
    when it is used, and the other sites go on."""

    def alert_scheme(self) -> Scheme:
        """The site's scheme (a preset or a custom one), restricted to its measures."""
        base = self.custom_scheme if self.custom_scheme is not None else preset_scheme(self.scheme)
        return base.using(self.measures)

    def build_spec(self) -> SiteSpec:
        """The core's specification of this site (see :class:`cyanorisk.spec.SiteSpec`)."""
        m = self.model
        return SiteSpec(
            site_id=self.id, timezone=self.timezone, scheme=self.alert_scheme(), name=self.name,
            use=self.use, authority=self.authority, features=self.drivers,
            drivers=tuple(m.drivers) if m.drivers else DEFAULT_DRIVERS,
            horizon_days=m.horizon_days, season_start_month=m.season_start_month,
            lab_delay_days=self.samples.lab_delay_days if self.samples else DEFAULT_LAB_DELAY_DAYS,
            stale_weather_days=m.stale_weather_days, stale_sample_days=m.stale_sample_days,
            outlook_days=m.outlook_days, warn_within_days=m.warn_within_days, family=m.family,
            calibration=m.calibration)


@dataclass(frozen=True)
class ServiceSettings:
    """The scheduled service: its store, notifications and catch-up."""

    store_url: str | None = None
    """SQLAlchemy URL of the store; default: SQLite file ``cyanorisk.db`` in the data folder.
    A PostgreSQL URL (``postgresql://user@host/db``) works too."""
    outbox_dir: str | None = None
    """Where level-rise notifications are written; default: ``outbox`` in the data folder."""
    smtp_host: str | None = None
    """When set, notifications are also sent by e-mail through this SMTP server."""
    smtp_port: int = 25
    """Port of the SMTP server."""
    mail_from: str = "cyanorisk@localhost"
    """Sender address of notification e-mails."""
    mail_to: tuple[str, ...] = ()
    """Recipients of notification e-mails."""
    catch_up: bool = True
    """On start, run the days missed since the last recorded run."""
    misfire_grace_hours: float = 6.0
    """How late a scheduled run may still start (APScheduler's default of 1 s would skip it)."""
    max_catch_up_days: int = 14
    """At most this many missed days are caught up on start (0: none)."""

    def __post_init__(self) -> None:
        if self.max_catch_up_days < 0:
            raise ValueError("max_catch_up_days must be 0 or more")
        if self.misfire_grace_hours <= 0:
            raise ValueError("misfire_grace_hours must be positive")


ENGINES = ("serial", "local", "cluster")


@dataclass(frozen=True)
class ComputeSettings:
    """Where the work of many sites runs (the daily job, backtests and tuning)."""

    engine: str = "serial"
    """'serial': one site after another in this process (nothing to start); 'local': a Dask
    LocalCluster of ``workers`` processes on this machine; 'cluster': the Dask scheduler at
    ``address``. Needs Dask for 'local' and 'cluster' (``pip install 'cyanorisk[dask]'``)."""
    workers: int | None = None
    """Worker processes of the 'local' engine (one thread each); default: the machine's cores."""
    address: str | None = None
    """The Dask scheduler of the 'cluster' engine, e.g. ``tcp://host:8786``; giving it alone
    chooses that engine. Its workers must see the configuration's paths (a shared file system)."""

    def __post_init__(self) -> None:
        if self.engine not in ENGINES:
            raise ValueError(f"engine {self.engine!r} is not one of {', '.join(map(repr, ENGINES))}")
        if self.workers is not None and not 1 <= self.workers <= 256:
            raise ValueError("workers must be from 1 to 256")
        if self.engine == "cluster" and not self.address:
            raise ValueError("engine 'cluster' needs address = \"tcp://host:8786\" (its scheduler)")
        if self.address is not None and self.engine != "cluster":
            raise ValueError(f"address is for engine 'cluster', not {self.engine!r}")
        if self.workers is not None and self.engine != "local":
            raise ValueError(f"workers is for engine 'local', not {self.engine!r} (a cluster's "
                             "workers are started with it)")


@dataclass(frozen=True)
class DemoSettings:
    """What ``cyanorisk demo`` generates."""

    out_dir: Path
    years: int = 12
    seed: int = 20261202


@dataclass(frozen=True)
class Config:
    """A validated configuration."""

    path: str
    """The file it came from (or ``<embedded demo>``)."""
    root: Path
    data_dir: Path
    reports_dir: Path
    models_dir: Path
    ingest: IngestSettings
    dialects: dict[str, WeatherDialect]
    sites: tuple[Site, ...]
    demo: DemoSettings | None = None
    raw: dict[str, Any] = field(default_factory=dict, repr=False)
    layouts: dict[str, SampleLayout] = field(default_factory=dict)
    taxa: dict[str, Taxon] = field(default_factory=dict)
    service: ServiceSettings = field(default_factory=ServiceSettings)
    compute: ComputeSettings = field(default_factory=ComputeSettings)

    @property
    def store_url(self) -> str:
        return self.service.store_url or f"sqlite:///{self.data_dir / 'cyanorisk.db'}"

    @property
    def outbox(self) -> Path:
        return self.root / self.service.outbox_dir if self.service.outbox_dir else self.data_dir / "outbox"

    def site(self, site_id: str) -> Site:
        for s in self.sites:
            if s.id == site_id:
                return s
        raise KeyError(f"no site '{site_id}'; sites: {', '.join(s.id for s in self.sites)}")


def embedded_demo_text() -> str:
    """Text of the demo configuration shipped inside the package."""
    return resources.files("cyanorisk").joinpath("data", EMBEDDED_DEMO).read_text("utf-8")


def load_config(path: str | Path | None = None, *, check_files: bool = True) -> Config:
    """Load and validate a configuration file, or the embedded demo configuration.

    Parameters
    ----------
    path : path, optional
        The TOML file; None for the embedded demo configuration.
    check_files : bool
        Require every weather file pattern to match at least one file.

    Raises
    ------
    ConfigError
        With one sentence naming the file and the key.
    """
    if path is None:
        label, text, base = "<embedded demo>", embedded_demo_text(), Path.cwd()
    else:
        p = Path(path)
        label, text, base = str(p), _config_text(p), p.parent
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(label, None, f"not valid TOML: {exc}") from None
    return _Reader(label, base, path is None).config(raw, check_files)


def _config_text(path: Path) -> str:
    """The text of a configuration file, refused in one sentence when it is not one."""
    if path.is_dir():
        raise ConfigError(path, None, "this is a folder, not a configuration file; give the "
                                      "path of the .toml file itself")
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise ConfigError(path, None, "no such configuration file") from None
    except OSError as exc:
        raise ConfigError(path, None, f"cannot be read ({exc.strerror or exc})") from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise ConfigError(path, None, "the file is UTF-16 encoded text: save it as UTF-8, as "
                                      "TOML requires")
    if b"\x00" in raw:
        line, _ = line_and_byte(raw, raw.index(b"\x00"))
        raise ConfigError(path, None, f"line {line} holds a NUL byte: this is not a text file "
                                      "(TOML is UTF-8 text)")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line, column = line_and_byte(raw, exc.start)
        raise ConfigError(path, None, f"line {line}, byte {column} is not UTF-8 (byte "
                                      f"0x{raw[exc.start]:02x}): save the file as UTF-8, as TOML "
                                      "requires") from None


_TOP = {"root", "data_dir", "reports_dir", "models_dir", "ingest", "dialects", "sample_layouts",
        "taxa", "schemes", "sites", "demo", "service", "compute"}
_DIALECT = {"separator", "decimal", "encoding", "skip_lines", "date_column", "time_column",
            "timestamp_column", "date_order", "stamp_zone", "stamp_marks", "missing", "columns",
            "other_columns", "coerce_year"}
_SITE = {"id", "name", "timezone", "use", "interval", "weather", "samples", "drivers", "alerts",
         "model", "authority"}


_LINE_BREAK = re.compile(r"[\x00-\x1f\x7f\u2028\u2029\x85]")


class _Reader:
    """Walks the parsed TOML, checking each key as it goes."""

    def __init__(self, label: str, base: Path, embedded: bool) -> None:
        self.label, self.base, self.embedded = label, base, embedded

    def fail(self, key: str | None, message: str) -> ConfigError:
        return ConfigError(self.label, key, message)

    def keys(self, table: dict, allowed: set[str], where: str) -> None:
        for k in table:
            if k not in allowed:
                key = f"{where}.{k}" if where else k
                raise self.fail(key, f"unknown key; valid keys here: {', '.join(sorted(allowed))}")

    def get(self, table: dict, key: str, kind: type | tuple, where: str, default: Any = ...) -> Any:
        full = f"{where}.{key}" if where else key
        if key not in table:
            if default is ...:
                raise self.fail(full, "missing; it is required")
            return default
        value = table[key]
        if isinstance(value, str) and value.startswith(BLANK):
            raise self.fail(full, f"still to be filled in: {value[len(BLANK):].strip(' :')}")
        kinds = kind if isinstance(kind, tuple) else (kind,)
        if isinstance(value, bool) and bool not in kinds or not isinstance(value, kinds):
            names = " or ".join(k.__name__ for k in kinds)
            raise self.fail(full, f"expected {names}, got {type(value).__name__} {value!r}")
        return value

    def choice(self, table: dict, key: str, allowed: tuple, where: str, default: Any) -> Any:
        value = self.get(table, key, str, where, default)
        if value is not None and value not in allowed:
            full = f"{where}.{key}" if where else key
            raise self.fail(full, f"{value!r} is not one of {', '.join(map(repr, allowed))}")
        return value

    def config(self, raw: dict, check_files: bool) -> Config:
        self.keys(raw, _TOP, "")
        root_text = self.get(raw, "root", str, "", ".")
        root = self.base if self.embedded else (self.base / root_text)
        self.root = root.resolve()
        ing = self.get(raw, "ingest", dict, "", {})
        self.keys(ing, {"bad_rows", "off_grid", "duplicates", "earliest_date", "latest_date"},
                  "ingest")
        ingest = IngestSettings(
            earliest_date=self.day(ing, "earliest_date", "ingest") or EARLIEST_DATE,
            latest_date=self.day(ing, "latest_date", "ingest"),
            bad_rows=self.choice(ing, "bad_rows", BAD_ROW_POLICIES, "ingest", DEFAULT_BAD_ROWS),
            off_grid=self.choice(ing, "off_grid", OFF_GRID_POLICIES, "ingest", DEFAULT_OFF_GRID),
            duplicates=self.choice(ing, "duplicates", DUPLICATE_POLICIES, "ingest",
                                   DEFAULT_DUPLICATES))
        self.ingest = ingest
        dialects = {name: self.dialect(table, f"dialects.{name}")
                    for name, table in self.get(raw, "dialects", dict, "", {}).items()}
        layouts = {name: self.record(table, SampleLayout, f"sample_layouts.{name}")
                   for name, table in self.get(raw, "sample_layouts", dict, "", {}).items()}
        taxa = {name: self.record(table, Taxon, f"taxa.{name}")
                for name, table in self.get(raw, "taxa", dict, "", {}).items()}
        self.layouts, self.taxa = layouts, taxa
        self.schemes = {name: self.custom(table, name)
                        for name, table in self.get(raw, "schemes", dict, "", {}).items()}
        sites_raw = self.get(raw, "sites", list, "")
        if not sites_raw:
            raise self.fail("sites", "no site is configured; add a [[sites]] table")
        sites = tuple(self.site(s, f"sites[{i}]", dialects, check_files)
                      for i, s in enumerate(sites_raw))
        ids = [s.id for s in sites]
        if len(set(ids)) != len(ids):
            raise self.fail("sites", f"site ids must be unique; repeated: "
                                     f"{', '.join(sorted({i for i in ids if ids.count(i) > 1}))}")
        demo = None
        if "demo" in raw:
            d = self.get(raw, "demo", dict, "")
            self.keys(d, {"out_dir", "years", "seed"}, "demo")
            demo = DemoSettings(self.path(self.get(d, "out_dir", str, "demo")),
                                self.get(d, "years", int, "demo", 12),
                                self.get(d, "seed", int, "demo", 20261202))
        return Config(
            path=self.label, root=self.root,
            data_dir=self.path(self.get(raw, "data_dir", str, "", "work")),
            reports_dir=self.path(self.get(raw, "reports_dir", str, "", "reports")),
            models_dir=self.path(self.get(raw, "models_dir", str, "", "models")),
            ingest=ingest, dialects=dialects, sites=sites, demo=demo, raw=raw,
            layouts=layouts, taxa=taxa,
            service=self.service(self.get(raw, "service", dict, "", {})),
            compute=self.compute(self.get(raw, "compute", dict, "", {})))

    def compute(self, table: dict) -> ComputeSettings:
        """The compute settings; an address alone chooses the 'cluster' engine."""
        if "address" in table and "engine" not in table:
            table = {**table, "engine": "cluster"}
        return self.record(table, ComputeSettings, "compute")

    def service(self, table: dict) -> ServiceSettings:
        """The service settings; addresses reach e-mail headers, so no line break is allowed."""
        settings = self.record(table, ServiceSettings, "service")
        for key, value in (("mail_from", settings.mail_from),
                           *((f"mail_to[{i}]", v) for i, v in enumerate(settings.mail_to))):
            if _LINE_BREAK.search(value):
                raise self.fail(f"service.{key}", "an e-mail address cannot hold a line break")
        return settings

    def site_id(self, table: dict, where: str) -> str:
        """A site id names folders and files: letters, digits, '_' and '-' only."""
        value = self.get(table, "id", str, where)
        if not SITE_ID.fullmatch(value):
            raise self.fail(f"{where}.id", f"{value!r} is not a usable site id: use letters, "
                                           "digits, '_' and '-' only (it names folders and files)")
        return value

    def one_line(self, table: dict, key: str, where: str, default: Any = ...) -> str:
        """Text that reaches report headings and e-mail subjects: one line, no control
        characters."""
        value = self.get(table, key, str, where, default)
        if _LINE_BREAK.search(value):
            raise self.fail(f"{where}.{key}", "must be one line of text, without line breaks or "
                                              "control characters")
        return value

    def custom(self, table: Any, name: str) -> Scheme:
        """A custom alert-level scheme: title, use, source, year and ordered levels."""
        where = f"schemes.{name}"
        if not isinstance(table, dict):
            raise self.fail(where, f"expected a table, got {type(table).__name__}")
        if name in SCHEMES:
            raise self.fail(where, f"'{name}' is the name of a preset scheme; choose another name")
        self.keys(table, {"title", "use", "source", "year", "levels"}, where)
        levels = self.get(table, "levels", dict, where)
        if not levels:
            raise self.fail(f"{where}.levels", "no level defined; add e.g. "
                                               "\"Alert\" = { cyano_cells_per_ml = 5000 }")
        for level, thresholds in levels.items():
            if not isinstance(thresholds, dict) or not thresholds:
                raise self.fail(f"{where}.levels.{level}", "expected a table of measure = threshold")
            for measure, value in thresholds.items():
                self.typed(value, float, f"{where}.levels.{level}.{measure}")
        try:
            return custom_scheme(name, self.get(table, "title", str, where, name),
                                 self.choice(table, "use", USES, where, "drinking"),
                                 self.get(table, "source", str, where, "site configuration"),
                                 levels, self.get(table, "year", int, where, 0))
        except ValueError as exc:
            raise self.fail(f"{where}.levels", str(exc)) from None

    def record(self, table: Any, cls: type, where: str) -> Any:
        """Build a settings dataclass from a table, checking each key against its fields."""
        if not isinstance(table, dict):
            raise self.fail(where, f"expected a table, got {type(table).__name__}")
        hints = typing.get_type_hints(cls)
        names = {f.name for f in dataclasses.fields(cls)}
        self.keys(table, names, where)
        values = {k: self.typed(v, hints[k], f"{where}.{k}") for k, v in table.items()}
        try:
            return cls(**values)
        except (TypeError, ValueError) as exc:
            raise self.fail(where, str(exc.args[0] if exc.args else exc)) from None

    def typed(self, value: Any, hint: Any, key: str) -> Any:
        """Check ``value`` against a type hint (str, int, float, bool, tuples, optionals)."""
        if isinstance(value, str) and value.startswith(BLANK):
            raise self.fail(key, f"still to be filled in: {value[len(BLANK):].strip(' :')}")
        options = typing.get_args(hint) if isinstance(hint, types.UnionType) else (hint,)
        for option in options:
            if option is type(None):
                continue
            origin = typing.get_origin(option)
            if origin is tuple and isinstance(value, list):
                inner = typing.get_args(option)[0]
                return tuple(self.typed(v, inner, key) for v in value)
            if option is float and isinstance(value, (int, float)) and not isinstance(value, bool):
                return float(value)
            if option in (str, int, bool) and type(value) is option:
                return value
        wanted = " or ".join("a list" if typing.get_origin(o) is tuple else getattr(o, "__name__", str(o))
                             for o in options if o is not type(None))
        raise self.fail(key, f"expected {wanted}, got {type(value).__name__} {value!r}")

    def files(self, patterns: Any, key: str, check_files: bool) -> tuple[tuple[str, ...], tuple[Path, ...]]:
        """Resolve file patterns; with ``check_files`` each must match something."""
        if not isinstance(patterns, list):
            raise self.fail(key, "expected a list of file paths or patterns")
        found_all: list[Path] = []
        for pattern in patterns:
            if not isinstance(pattern, str):
                raise self.fail(key, "expected a list of file paths or patterns")
            found = sorted(Path(p) for p in glob.glob(str(self.path(pattern))))
            if check_files and not found:  # this site's problem: kept for when it is used
                self.site_problems.append(
                    self.fail(key, f"no file matches {pattern!r} (looked in {self.root})"))
            found_all.extend(found)
        return tuple(patterns), tuple(found_all)

    def path(self, text: str) -> Path:
        p = Path(text)
        return p if p.is_absolute() else self.root / p

    def dialect(self, table: Any, where: str) -> WeatherDialect:
        if not isinstance(table, dict):
            raise self.fail(where, f"expected a table, got {type(table).__name__}")
        self.keys(table, _DIALECT, where)
        columns = {}
        for col, spec in self.get(table, "columns", dict, where, {}).items():
            key = f"{where}.columns.{col}"
            if spec == "ignore":
                columns[col] = ColumnSpec(None)
            elif isinstance(spec, dict):
                self.keys(spec, {"variable", "unit"}, key)
                columns[col] = ColumnSpec(self.get(spec, "variable", str, key),
                                          self.get(spec, "unit", str, key, None))
            else:
                raise self.fail(key, "expected \"ignore\" or a table "
                                     "{ variable = \"...\", unit = \"...\" }")
        missing = self.get(table, "missing", list, where, list(DEFAULT_MISSING))
        if not all(isinstance(m, str) for m in missing):
            raise self.fail(f"{where}.missing", "expected a list of strings")
        kwargs = dict(
            separator=self.get(table, "separator", str, where, None),
            decimal=self.choice(table, "decimal", (".", ","), where, None),
            encoding=self.get(table, "encoding", str, where, "utf-8"),
            skip_lines=self.get(table, "skip_lines", int, where, None),
            date_column=self.get(table, "date_column", str, where, None),
            time_column=self.get(table, "time_column", str, where, None),
            timestamp_column=self.get(table, "timestamp_column", str, where, None),
            date_order=self.choice(table, "date_order", DATE_ORDERS, where, None),
            stamp_zone=self.get(table, "stamp_zone", str, where, "local"),
            stamp_marks=self.choice(table, "stamp_marks", STAMP_MARKS, where, None),
            missing=tuple(missing), columns=columns,
            other_columns=self.choice(table, "other_columns", ("error", "ignore"), where, "error"),
            coerce_year=self.get(table, "coerce_year", int, where, None),
        )
        try:
            return WeatherDialect(**kwargs)
        except (ValueError, KeyError) as exc:
            raise self.fail(where, str(exc.args[0] if exc.args else exc)) from None

    def site(self, table: Any, where: str, dialects: dict, check_files: bool) -> Site:
        if not isinstance(table, dict):
            raise self.fail(where, f"expected a table, got {type(table).__name__}")
        self.keys(table, _SITE, where)
        self.site_problems: list[ConfigError] = []
        tz = self.get(table, "timezone", str, where)
        try:
            zoneinfo.ZoneInfo(tz)
        except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
            raise self.fail(f"{where}.timezone", f"{tz!r} is not an IANA time zone "
                                                 "(e.g. 'Australia/Melbourne', 'UTC')") from None
        interval_text = self.get(table, "interval", str, where, "30min")
        try:
            interval = pd.Timedelta(interval_text)
        except ValueError:
            interval = pd.NaT
        if pd.isna(interval) or interval < pd.Timedelta("1min") or pd.Timedelta("1D") % interval:
            raise self.fail(f"{where}.interval", f"{interval_text!r} is not an interval of at least "
                                                 "a minute that divides a day, e.g. '30min' or '1h'")
        w = self.get(table, "weather", dict, where)
        wk = f"{where}.weather"
        self.keys(w, {"files", "dialect", "period"}, wk)
        dialect = self.get(w, "dialect", str, wk)
        if dialect not in dialects:
            raise self.fail(f"{wk}.dialect", f"{dialect!r} is not defined under [dialects]; "
                                             f"defined: {', '.join(dialects) or 'none'}")
        patterns, files = self.files(self.get(w, "files", list, wk), f"{wk}.files", check_files)
        period = None
        if "period" in w:
            pt = self.get(w, "period", dict, wk)
            self.keys(pt, {"start", "end"}, f"{wk}.period")
            period = (self._date(pt, "start", f"{wk}.period"), self._date(pt, "end", f"{wk}.period"))
        samples = None
        if "samples" in table:
            sk = f"{where}.samples"
            sm = self.get(table, "samples", dict, where)
            self.keys(sm, {"files", "layout", "lab_delay_days", "site_aliases"}, sk)
            layout = self.get(sm, "layout", str, sk)
            if layout not in self.layouts:
                raise self.fail(f"{sk}.layout", f"{layout!r} is not defined under [sample_layouts]; "
                                                f"defined: {', '.join(self.layouts) or 'none'}")
            s_patterns, s_files = self.files(self.get(sm, "files", list, sk), f"{sk}.files",
                                             check_files)
            delay = self.typed(sm.get("lab_delay_days", 3.0), float, f"{sk}.lab_delay_days")
            aliases = self.typed(sm.get("site_aliases", []), tuple[str, ...],
                                 f"{sk}.site_aliases")
            samples = SampleSource(s_patterns, s_files, layout, delay, self.layouts[layout],
                                   self.taxa, aliases)
        drivers = self.record(self.get(table, "drivers", dict, where, {}), FeatureSettings,
                              f"{where}.drivers")
        alerts = self.get(table, "alerts", dict, where, {})
        self.keys(alerts, {"scheme", "measures", "warn_at"}, f"{where}.alerts")
        scheme = self.choice(alerts, "scheme", tuple(SCHEMES) + tuple(self.schemes),
                             f"{where}.alerts", "who1999_drinking")
        custom = self.schemes.get(scheme)
        measures = None
        if "measures" in alerts:
            measures = self.typed(alerts["measures"], tuple[str, ...], f"{where}.alerts.measures")
            try:
                (custom or preset_scheme(scheme)).using(measures)
            except ValueError as exc:
                raise self.fail(f"{where}.alerts.measures", str(exc)) from None
        warn_at = None
        if "warn_at" in alerts:
            key = f"{where}.alerts.warn_at"
            given = self.get(alerts, "warn_at", dict, f"{where}.alerts")
            names = (custom or preset_scheme(scheme)).using(measures).names
            warn_at = {}
            for level, value in given.items():
                if level not in names:
                    raise self.fail(key, f"{level!r} is not a level of the scheme; levels: "
                                         f"{', '.join(names)}")
                warn_at[level] = self.typed(value, float, f"{key}.{level}")
                if not 0 < warn_at[level] < 1:
                    raise self.fail(f"{key}.{level}", "a warning threshold is a probability "
                                                      "between 0 and 1 (e.g. 0.3)")
        model = self.record(self.get(table, "model", dict, where, {}), ModelSettings,
                            f"{where}.model")
        for name in model.drivers or ():
            if lookup(name) is None:
                raise self.fail(f"{where}.model.drivers", f"{name!r} is not a driver of the "
                                f"glossary; the defaults are {', '.join(DEFAULT_DRIVERS)}")
        site = Site(
            id=self.site_id(table, where), name=self.one_line(table, "name", where),
            timezone=tz, use=self.choice(table, "use", USES, where, "drinking"),
            interval=interval,
            weather=WeatherSource(tuple(patterns), tuple(files), dialect, period, dialects[dialect]),
            samples=samples, drivers=drivers, scheme=scheme, measures=measures, custom_scheme=custom,
            model=model, authority=self.one_line(table, "authority", where, DEFAULT_AUTHORITY),
            ingest=self.ingest, warn_at=warn_at, problems=tuple(self.site_problems))
        try:
            return dataclasses.replace(site, spec=dataclasses.replace(
                site.build_spec(), warn_at=warn_at,
                warn_at_source=f"set in the configuration ({self.label}, key "
                               f"{where}.alerts.warn_at)" if warn_at else ""))
        except ValueError as exc:
            raise self.fail(f"{where}.model", str(exc)) from None

    def day(self, table: dict, key: str, where: str) -> date | None:
        """A calendar date written as a TOML date or as 'YYYY-MM-DD'."""
        value = table.get(key)
        if value is None or (isinstance(value, date) and not isinstance(value, datetime)):
            return value
        try:
            return date.fromisoformat(str(value))
        except ValueError:
            raise self.fail(f"{where}.{key}", f"{value!r} is not a date in the form "
                                              "YYYY-MM-DD") from None

    def _date(self, table: dict, key: str, where: str) -> str | None:
        value = table.get(key)
        if value is None:
            return None
        text = str(value)
        try:
            pd.Timestamp(text)
        except ValueError:
            raise self.fail(f"{where}.{key}", f"{text!r} is not a date") from None
        return text
