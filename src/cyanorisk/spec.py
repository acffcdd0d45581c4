"""The small specification of a site that the core computes with.

The core (features, align, model, training, forecast, backtest, tuning) knows no configuration
file: it takes a :class:`SiteSpec`, which :mod:`cyanorisk.config` builds once per site from the
site's settings, or which a notebook user builds by hand. This module also owns the defaults the
core shares (the warning threshold, the lab delay, the days of history a report shows), so that
each is said once.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from cyanorisk.drivers import DEFAULT_DRIVERS, canonical_driver
from cyanorisk.features import FeatureSettings
from cyanorisk.levels import Scheme
from cyanorisk.levels import scheme as preset_scheme

SITE_ID = re.compile(r"[A-Za-z0-9_-]+")
"""A site id: letters, digits, '_' and '-' (it names the site's folders and files)."""

DEFAULT_WARN_AT = 0.5
"""Probability at which a level is warned of unless tuned thresholds say otherwise (a neutral
starting point: common practice, no source)."""
DEFAULT_LAB_DELAY_DAYS = 3.0
"""Days from sampling until a result is known, when the lab gives no reported date."""
HISTORY_DAYS = 120
"""Days of history a daily report shows (plots and the trend of the probabilities)."""
DEFAULT_HORIZON_DAYS = 7
DEFAULT_OUTLOOK_DAYS = 14
FAMILIES = ("auto", "ordinal", "boosted")
CALIBRATIONS = ("auto", "isotonic", "sigmoid", "none")
DEFAULT_SEASON_START_MONTH = 7
DEFAULT_AUTHORITY = "the local water authority"


@dataclass(frozen=True)
class Thresholds:
    """Which probability raises each level, and where those numbers came from."""

    warn_at: Mapping[str, float]
    source: str = f"default: {DEFAULT_WARN_AT:.0%} for every level (not tuned for this site)"
    tuned: bool = False
    """True when a tuning proposal accepted for the site set them."""

    def at(self, level: str) -> float:
        """The warning threshold of a level (the default where none is set)."""
        return float(self.warn_at.get(level, DEFAULT_WARN_AT))

    @classmethod
    def default(cls, levels: Sequence[str]) -> Thresholds:
        return cls({name: DEFAULT_WARN_AT for name in levels})


@dataclass(frozen=True)
class SiteSpec:
    """What the core needs to know of a site: who it is, its scheme, its drivers and its times."""

    site_id: str
    timezone: str
    """IANA zone of the site; issue times and local dates are in it."""
    scheme: Scheme
    """The alert-level scheme, restricted to the measures the site uses."""
    name: str = ""
    use: str = "drinking"
    """'drinking' or 'recreation'."""
    authority: str = DEFAULT_AUTHORITY
    """Who decides advisories, closures and treatment changes (named in every report)."""
    features: FeatureSettings = field(default_factory=FeatureSettings)
    """How the driver table is built (windows, bases, issue time)."""
    drivers: tuple[str, ...] = DEFAULT_DRIVERS
    """Drivers of the risk model (canonical names of :mod:`cyanorisk.drivers`)."""
    horizon_days: int = DEFAULT_HORIZON_DAYS
    """Forecast horizon [d]: the probability of reaching each level within this many days."""
    season_start_month: int = DEFAULT_SEASON_START_MONTH
    """First month of a bloom season (7 = July in the southern hemisphere, 1 in the north)."""
    lab_delay_days: float = DEFAULT_LAB_DELAY_DAYS
    """Days from sampling until a result is known, when the lab gives no reported date [d]."""
    stale_weather_days: float = 2.0
    """A last weather reading older than this [d] gives 'insufficient data'."""
    stale_sample_days: float = 45.0
    """A last known sample older than this [d] gives 'insufficient data'."""
    history_days: int = HISTORY_DAYS
    """Days of history a report shows."""
    warn_at: Mapping[str, float] | None = None
    """Warning thresholds set in the configuration, by level: they override tuned ones."""
    warn_at_source: str = ""
    outlook_days: int = DEFAULT_OUTLOOK_DAYS
    """Longest horizon of the outlook [d] (probabilities for every horizon from 1 to this)."""
    warn_within_days: int | None = None
    """Warn when the probability within any horizon up to this [d] reaches the threshold
    (default: ``outlook_days``)."""
    family: str = "auto"
    """'auto', 'ordinal' or 'boosted' (see :mod:`cyanorisk.outlook`)."""
    calibration: str = "auto"
    """'auto', 'isotonic', 'sigmoid' or 'none'."""

    def __post_init__(self) -> None:
        object.__setattr__(self, "drivers", tuple(canonical_driver(d) for d in self.drivers))
        if not 1 <= self.horizon_days <= 14:
            raise ValueError("horizon_days must be between 1 and 14")
        if not 1 <= self.season_start_month <= 12:
            raise ValueError("season_start_month must be a month number, 1 to 12")
        if not self.horizon_days <= self.outlook_days <= 14:
            raise ValueError(f"outlook_days must be between horizon_days ({self.horizon_days}) "
                             "and 14")
        if self.warn_within_days is not None and \
                not 1 <= self.warn_within_days <= self.outlook_days:
            raise ValueError(f"warn_within_days must be between 1 and outlook_days "
                             f"({self.outlook_days})")
        if self.family not in FAMILIES:
            raise ValueError(f"family must be one of {', '.join(FAMILIES)}, not {self.family!r}")
        if self.calibration not in CALIBRATIONS:
            raise ValueError(f"calibration must be one of {', '.join(CALIBRATIONS)}, not "
                             f"{self.calibration!r}")

    @property
    def horizons(self) -> list[int]:
        """The outlook's horizons [d]: 1 to ``outlook_days``."""
        return list(range(1, self.outlook_days + 1))

    @property
    def warn_horizon_days(self) -> int:
        """The longest horizon [d] whose probability can raise a warning."""
        return self.warn_within_days or self.outlook_days

    @property
    def levels(self) -> list[str]:
        """Level names of the scheme, lowest first."""
        return self.scheme.names

    @property
    def issue_time(self) -> str:
        """Local time of day (HH:MM) of the daily forecast."""
        return self.features.issue_time

    @classmethod
    def simple(cls, site_id: str, timezone: str, scheme_key: str = "who1999_drinking",
               **kwargs) -> SiteSpec:
        """A specification with a preset scheme, for notebooks and tests."""
        return cls(site_id, timezone, preset_scheme(scheme_key), **kwargs)
