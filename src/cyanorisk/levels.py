"""Alert-level schemes of published guidelines, as documented data, and classification.

A scheme is an ordered list of levels; a level is met when any of its thresholds is met
(cyanobacterial cell count, toxin-producer cell count, biovolume, chlorophyll-a or microcystin,
whichever the sample carries). Values and their status are those of ``shared/REFERENCES.md``:
'V' read in the source or a secondary source quoting it, 'M' from memory, not checked against
the primary document. The source of each scheme is named in :attr:`Scheme.source`.

Each level also says what it asks for: its role (vigilance, alert, action), how often to sample
while it is in force, and, per scheme, when a level in force may be stepped down. The toxin
guideline values of :data:`TOXIN_VALUES` raise cautions of their own.

Censored results are honoured: '<X' cannot meet a threshold at or above X, and a '>X' result meets
every threshold at or below X; anything else is undecided (NaN), never guessed. A detection
threshold (Vigilance) is met by any count of cells seen and not met by 'not detected' ('<X').
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from enum import StrEnum

import numpy as np
import pandas as pd

MEASURES = {
    "cyano_cells_per_ml": "total cyanobacteria [cells mL-1]",
    "toxic_cells_per_ml": "known toxin producers, e.g. Microcystis aeruginosa [cells mL-1]",
    "biovolume_mm3_per_l": "cyanobacterial biovolume [mm3 L-1]",
    "chl_a_ug_per_l": "chlorophyll-a, cyanobacteria dominant [ug L-1]",
    "microcystin_ug_per_l": "total microcystins [ug L-1]",
}
"""Measures a threshold may use: columns of the per-sample table (see ``sample_totals``)."""

MEASURE_UNITS = {"cyano_cells_per_ml": "cells/mL", "toxic_cells_per_ml": "cells/mL",
                 "biovolume_mm3_per_l": "mm3/L", "chl_a_ug_per_l": "ug/L",
                 "microcystin_ug_per_l": "ug/L", "cylindrospermopsin_ug_per_l": "ug/L"}
MEASURE_WORDS = {"cyano_cells_per_ml": "cyanobacteria", "toxic_cells_per_ml": "toxin producers",
                 "biovolume_mm3_per_l": "biovolume", "chl_a_ug_per_l": "chlorophyll-a",
                 "microcystin_ug_per_l": "microcystins",
                 "cylindrospermopsin_ug_per_l": "cylindrospermopsin"}

CENSOR_COLUMNS = {"cyano_cells_per_ml": "cyano_censor", "toxic_cells_per_ml": "toxic_censor",
                  "microcystin_ug_per_l": "microcystin_censor",
                  "cylindrospermopsin_ug_per_l": "cylindrospermopsin_censor"}


class Role(StrEnum):
    """What a level asks of the people watching the water body."""

    NONE = "none"
    """Below every level: routine monitoring."""
    VIGILANCE = "vigilance"
    """Cyanobacteria seen: watch closely, sample more often."""
    ALERT = "alert"
    """Counts high enough to matter: tell the health authority, act on treatment or use."""
    ACTION = "action"
    """A bloom: toxins, treatment, advice to the public."""


STEP_DOWN_COMMON = ("two consecutive samples below the level's thresholds (the source is silent "
                    "on stepping down; common practice, no source, REFERENCES.md, M)")
ROUTINE_COMMON = "monthly outside a level (common practice, no source)"


@dataclass(frozen=True)
class Threshold:
    """``measure >= value`` (or ``>`` when not inclusive)."""

    measure: str
    value: float
    inclusive: bool = True
    status: str = "V"
    """'V' verified (primary or secondary source), 'M' from memory, 'C' computed, 'S' set by
    the site's configuration."""
    detection: bool = False
    """Met by any cells seen (an exact count above 0 or a '>' result), not by '<X'."""


@dataclass(frozen=True)
class Level:
    """One alert level: met when any of its thresholds is met."""

    name: str
    thresholds: tuple[Threshold, ...]
    note: str = ""
    role: Role = Role.ALERT
    sample_every_days: float = 7.0
    """How often to sample while the level is in force [d]."""
    sampling_source: str = "weekly at least (common practice, no source)"
    colour: str | None = None
    """The guideline's own colour for the level, where the guideline names one (hex)."""


@dataclass(frozen=True)
class Scheme:
    """An ordered alert-level scheme (lowest level first)."""

    key: str
    title: str
    use: str
    """'drinking' or 'recreation'."""
    source: str
    year: int
    levels: tuple[Level, ...]
    note: str = ""
    step_down_samples: int = 2
    """Consecutive samples below a level in force that let it step down."""
    step_down_source: str = STEP_DOWN_COMMON
    routine_sample_every_days: float = 28.0
    """How often to sample below every level [d]."""
    routine_source: str = ROUTINE_COMMON

    @property
    def names(self) -> list[str]:
        return [lvl.name for lvl in self.levels]

    def using(self, measures: tuple[str, ...] | None) -> Scheme:
        """The scheme with only the thresholds on ``measures`` (None keeps all).

        A site whose chlorophyll-a is not dominated by cyanobacteria, for example, should not
        raise alerts on chlorophyll-a alone. A detection level (Vigilance) left without its
        count is dropped; any other level left without a threshold is an error.
        """
        if measures is None:
            return self
        unknown = set(measures) - set(MEASURES)
        if unknown:
            raise ValueError(f"unknown measure(s) {', '.join(sorted(unknown))}; valid: "
                             f"{', '.join(MEASURES)}")
        detection = {lvl.name for lvl in self.levels if all(t.detection for t in lvl.thresholds)}
        levels = tuple(replace(lvl, thresholds=tuple(t for t in lvl.thresholds
                                                      if t.measure in measures))
                       for lvl in self.levels)
        levels = tuple(lvl for lvl in levels if lvl.thresholds or lvl.name not in detection)
        empty = [lvl.name for lvl in levels if not lvl.thresholds]
        if empty:
            raise ValueError(f"with measures {', '.join(measures)}, level(s) {', '.join(empty)} "
                             f"of scheme '{self.key}' have no threshold left")
        return replace(self, levels=levels,
                       note=self.note + f" Thresholds used: {', '.join(measures)}.")

    def level(self, rank: float | None) -> Level | None:
        """The level of a rank (1 is the first level); None below the first or undecided."""
        if rank is None or rank != rank or rank < 1:
            return None
        return self.levels[int(rank) - 1]

    def rank_of(self, name: str | None) -> int | None:
        """The rank of a level name (0 for 'below ...'); None when the name is not this scheme's."""
        if name is None:
            return None
        if name == f"below {self.levels[0].name}":
            return 0
        return self.names.index(name) + 1 if name in self.names else None

    def role(self, rank: float | None) -> Role:
        level = self.level(rank)
        return Role.NONE if level is None else level.role

    def sample_every_days(self, rank: float | None) -> float:
        level = self.level(rank)
        return self.routine_sample_every_days if level is None else level.sample_every_days

    def primary_measure(self) -> str:
        """The count the thresholds are mostly given in (what a count plot shows)."""
        counts = [t.measure for lvl in self.levels for t in lvl.thresholds
                  if t.measure.endswith("_cells_per_ml") and not t.detection]
        return max(set(counts), key=counts.count) if counts else self.levels[0].thresholds[0].measure


def _t(measure: str, value: float, status: str = "V", inclusive: bool = True) -> Threshold:
    return Threshold(measure, value, inclusive, status)


WHO1999_SAMPLING = ("Chorus & Bartram (eds) 1999, ch. 6, alert levels framework (REFERENCES.md, "
                    "from memory)")

SCHEMES: dict[str, Scheme] = {s.key: s for s in (
    Scheme(
        key="who1999_drinking", title="WHO alert levels framework for drinking water",
        use="drinking", year=1999,
        source="Chorus, I. and Bartram, J. (eds) (1999). Toxic Cyanobacteria in Water. WHO / "
               "E & FN Spon, chapter 6",
        levels=(
            Level("Vigilance", (Threshold("cyano_cells_per_ml", 0.0, False, "M", detection=True),),
                  note="cyanobacteria detected (1 colony or 5 filaments per mL, from memory)",
                  role=Role.VIGILANCE, sample_every_days=7.0,
                  sampling_source=f"at least weekly, identify the taxa: {WHO1999_SAMPLING}"),
            Level("Alert Level 1", (_t("cyano_cells_per_ml", 2_000), _t("biovolume_mm3_per_l", 0.2),
                                    _t("chl_a_ug_per_l", 1.0)),
                  role=Role.ALERT, sample_every_days=3.5,
                  sampling_source=f"about twice weekly: {WHO1999_SAMPLING}"),
            Level("Alert Level 2", (_t("cyano_cells_per_ml", 100_000, "M"),
                                    _t("biovolume_mm3_per_l", 10.0, "M"),
                                    _t("chl_a_ug_per_l", 50.0, "M")),
                  role=Role.ACTION, sample_every_days=3.5,
                  sampling_source=f"frequent sampling and toxin testing go on: {WHO1999_SAMPLING}"),
        ),
        note="Vigilance is a detection rule (1 colony or 5 filaments per mL, from memory), read "
             "here as any cyanobacteria counted. Alert Level 2 values are from memory.",
    ),
    Scheme(
        key="who2003_recreation", title="WHO guideline values for recreational waters",
        use="recreation", year=2003,
        source="WHO (2003). Guidelines for Safe Recreational Water Environments, volume 1, "
               "chapter 8",
        levels=(
            Level("Low probability of adverse effects", (_t("cyano_cells_per_ml", 20_000),
                                                         _t("chl_a_ug_per_l", 10.0)),
                  role=Role.ALERT),
            Level("Moderate probability of adverse effects", (_t("cyano_cells_per_ml", 100_000),
                                                              _t("chl_a_ug_per_l", 50.0)),
                  role=Role.ACTION),
        ),
        note="The high-probability level is scum in bathing areas, seen on site, not counted.",
    ),
    Scheme(
        key="nhmrc2008_recreation", title="NHMRC alert levels for recreational water",
        use="recreation", year=2008,
        source="NHMRC (2008). Guidelines for Managing Risks in Recreational Water, chapter 6",
        levels=(
            Level("Green (surveillance)", (_t("toxic_cells_per_ml", 500),
                                           _t("biovolume_mm3_per_l", 0.04, inclusive=False)),
                  role=Role.VIGILANCE, colour="#2f7d32",
                  sampling_source="fortnightly to weekly (NHMRC 2008, ch. 6, from memory)"),
            Level("Amber (alert)", (_t("toxic_cells_per_ml", 5_000), _t("biovolume_mm3_per_l", 0.4)),
                  role=Role.ALERT, colour="#c98a00",
                  sampling_source="weekly (NHMRC 2008, ch. 6, from memory)"),
            Level("Red (action)", (_t("toxic_cells_per_ml", 50_000), _t("microcystin_ug_per_l", 10.0),
                                   _t("biovolume_mm3_per_l", 4.0)),
                  role=Role.ACTION, colour="#b3261e",
                  sampling_source="weekly (NHMRC 2008, ch. 6, from memory)"),
        ),
        note="Cell thresholds are for Microcystis aeruginosa; cyanorisk uses the count of taxa "
             "the taxon table marks as toxin producers. The biovolume thresholds assume a known "
             "toxin producer dominates (10 mm3/L applies where none is present). Scums at the "
             "Red level are seen on site, not counted.",
    ),
)}
"""Preset schemes, by key."""


def scheme(key: str) -> Scheme:
    """Look up a preset scheme; the error lists the valid keys."""
    try:
        return SCHEMES[key]
    except KeyError:
        raise KeyError(f"no alert-level scheme '{key}'; presets: {', '.join(SCHEMES)}") from None


def custom_scheme(key: str, title: str, use: str, source: str, levels: Mapping[str, Mapping[str, float]],
                  year: int = 0) -> Scheme:
    """A scheme from configuration: ``{level name: {measure: threshold}}``, lowest level first.

    The highest of several levels asks for action, the others are alert levels.
    """
    built = []
    for k, (name, thresholds) in enumerate(levels.items(), start=1):
        for measure in thresholds:
            if measure not in MEASURES:
                raise ValueError(f"level '{name}': unknown measure '{measure}'; valid: "
                                 f"{', '.join(MEASURES)}")
        role = Role.ACTION if k == len(levels) and k > 1 else Role.ALERT
        built.append(Level(name, tuple(_t(m, float(v), "S") for m, v in thresholds.items()),
                           role=role))
    return Scheme(key, title, use, source, year, tuple(built))


def meets(samples: pd.DataFrame, level: Level) -> np.ndarray:
    """Whether each sample meets a level: 1.0, 0.0, or NaN when it cannot be decided.

    A level is met when any threshold is met; it is not met when every measure the sample
    carries is decided below its threshold and at least one measure is carried.
    """
    n = len(samples)
    met = np.zeros(n, dtype=bool)
    decided_no = np.zeros(n, dtype=bool)
    undecided = np.zeros(n, dtype=bool)
    for th in level.thresholds:
        if th.measure not in samples:
            continue
        v = samples[th.measure].to_numpy(dtype=float)
        censor_col = CENSOR_COLUMNS.get(th.measure)
        censor = (samples[censor_col].to_numpy(dtype=object) if censor_col in samples
                  else np.full(n, "=", dtype=object))
        censor = np.where(pd.isna(censor), "=", censor)
        have = ~np.isnan(v)
        if th.detection:  # seen at all, or 'not detected'
            seen = have & (((censor == "=") & (v > th.value)) | (censor == ">"))
            met |= seen
            decided_no |= have & ~seen
            continue
        at_or_above = v >= th.value if th.inclusive else v > th.value
        exact_hit = have & (censor == "=") & at_or_above
        above_hit = have & (censor == ">") & (v >= th.value)
        below_no = have & (censor == "<") & (v <= th.value)
        exact_no = have & (censor == "=") & ~at_or_above
        met |= exact_hit | above_hit
        decided_no |= below_no | exact_no
        undecided |= have & ~(exact_hit | above_hit | below_no | exact_no)
    out = np.where(met, 1.0, np.where(decided_no & ~undecided, 0.0, np.nan))
    return out


def classify(samples: pd.DataFrame, scheme: Scheme) -> np.ndarray:
    """Observed level of each sample: 0 below the first level, k when level k (1-based) is the
    highest level met (a level above it may be undecided: k is then a lower bound); NaN when no
    level is met and some level cannot be decided ('<5000 cells/mL' against 2,000)."""
    level = np.zeros(len(samples))
    undecided = np.zeros(len(samples), dtype=bool)
    for k, lvl in enumerate(scheme.levels, start=1):
        m = meets(samples, lvl)
        level = np.where(m == 1.0, k, level)
        undecided |= np.isnan(m)
    return np.where(~undecided | (level > 0), level, np.nan)


@dataclass(frozen=True)
class InForce:
    """The level the lab has confirmed and that still holds under the scheme's step-down rule."""

    rank: int
    """0 below the first level."""
    set_by: int | None
    """Index (in sampling order) of the sample that set it; None without a decided sample."""
    below_since: int
    """Consecutive samples since then below it (fewer than the step-down rule asks)."""


def level_in_force(ranks: Sequence[float], step_down_samples: int) -> InForce:
    """The level in force after samples of these observed ranks, in sampling order.

    A sample at or above the level in force sets it; a level steps down only after
    ``step_down_samples`` consecutive samples below it, to the highest level among them.
    Undecided samples (NaN) neither raise nor step down: in doubt, the level stays.
    """
    rank, set_by, below = 0, None, []
    for i, r in enumerate(ranks):
        if r != r:  # undecided
            continue
        r = int(r)
        if set_by is None or r >= rank:
            rank, set_by, below = r, i, []
            continue
        below.append((r, i))
        if len(below) >= step_down_samples:
            rank = max(b for b, _ in below)
            set_by = max(i for b, i in below if b == rank)
            below = []
    return InForce(rank, set_by, len(below))


# ---------------------------------------------------------------------------------------------
# Toxin guideline values (REFERENCES.md, "Toxin values")
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class ToxinValue:
    """A published guideline value for a cyanotoxin in water."""

    measure: str
    """Column of the per-sample table: ``microcystin_ug_per_l``, ``cylindrospermopsin_ug_per_l``."""
    use: str
    value_ug_per_l: float
    what: str
    source: str
    status: str
    short: str = ""
    """The source in a few words, for tables."""


_WHO2020 = "WHO (2020), Cyanobacterial toxins: microcystins, background document"
_EPA2015 = "US EPA (2015), drinking water health advisories for microcystins and cylindrospermopsin"
_EPA2019 = "US EPA (2019), EPA 822-R-19-001, recreational water quality criteria"

TOXIN_VALUES: tuple[ToxinValue, ...] = (
    ToxinValue("microcystin_ug_per_l", "drinking", 0.3, "US EPA 10-day health advisory for "
               "children under 6", _EPA2015, "V", "US EPA 2015"),
    ToxinValue("microcystin_ug_per_l", "drinking", 1.0, "WHO provisional lifetime drinking-water "
               "value", _WHO2020, "V", "WHO 2020"),
    ToxinValue("microcystin_ug_per_l", "drinking", 1.6, "US EPA 10-day health advisory for older "
               "children and adults", _EPA2015, "V", "US EPA 2015"),
    ToxinValue("microcystin_ug_per_l", "drinking", 12.0, "WHO provisional short-term "
               "drinking-water value", _WHO2020, "M", "WHO 2020"),
    ToxinValue("microcystin_ug_per_l", "recreation", 8.0, "US EPA recreational criterion",
               _EPA2019, "V", "US EPA 2019"),
    ToxinValue("microcystin_ug_per_l", "recreation", 24.0, "WHO provisional recreational value",
               _WHO2020, "M", "WHO 2020"),
    ToxinValue("cylindrospermopsin_ug_per_l", "drinking", 0.7, "US EPA 10-day health advisory for "
               "children under 6", _EPA2015, "V", "US EPA 2015"),
    ToxinValue("cylindrospermopsin_ug_per_l", "drinking", 3.0, "US EPA 10-day health advisory for "
               "older children and adults", _EPA2015, "V", "US EPA 2015"),
    ToxinValue("cylindrospermopsin_ug_per_l", "recreation", 15.0, "US EPA recreational criterion",
               _EPA2019, "V", "US EPA 2019"),
)
"""Guideline values, lowest first within a toxin and use; 'M' from memory."""


def toxin_values(measure: str, use: str) -> list[ToxinValue]:
    return [v for v in TOXIN_VALUES if v.measure == measure and v.use == use]


# ---------------------------------------------------------------------------------------------
# Health cautions and actions, in our own words, by role and intended use
# ---------------------------------------------------------------------------------------------

DEFERRAL = ("Advisories, closures and changes to treatment are decided by {authority} under local "
            "codes. This report supports that decision; it does not make it.")
"""Printed in every report, with the authority named in the site's configuration."""

GENERAL_CAUTIONS = (
    "Boiling water does not remove cyanobacterial toxins; it can concentrate them.",
    "Keep children, pets and livestock away from scums and discoloured water.",
    "Anyone who feels unwell after contact with the water (skin rash, eye irritation, vomiting, "
    "diarrhoea, fever) should see a doctor and mention the contact with blue-green algae.",
)

ROUTINE = "Routine monitoring: keep the usual sampling schedule."

_CAUTIONS: dict[str, dict[Role, tuple[str, ...]]] = {
    "drinking": {
        Role.NONE: (ROUTINE,),
        Role.VIGILANCE: ("Sample at least weekly and identify the cyanobacteria present.",
                         "Watch the trend of the counts from one sample to the next."),
        Role.ALERT: ("Sample more often (about twice a week) and count toxin-producing taxa.",
                     "Check that treatment can remove cells without breaking them and can remove "
                     "dissolved toxins; consider testing for toxins.",
                     "Consider drawing water from another depth or source if one is available."),
        Role.ACTION: ("Test for toxins in raw and treated water and act on the results.",
                      "Treatment changes, another source or advice to consumers may be needed: the "
                      "water authority and the health department decide, together.",
                      "Warn staff working on the water body to avoid skin contact with scums."),
    },
    "recreation": {
        Role.NONE: (ROUTINE,),
        Role.VIGILANCE: ("Sample at least weekly and look out for discoloured water or scums.",),
        Role.ALERT: ("Avoid swallowing the water; shower after swimming.",
                     "Avoid areas where scum or discoloured water is seen.",
                     "Sample more often; put up signs if the local authority decides so."),
        Role.ACTION: ("Avoid swimming, water skiing and any contact with the water; do not let dogs "
                      "swim or drink.",
                      "Do not eat fish guts or shellfish from the water body.",
                      "Closures and warning signs are decided by the local authority."),
    },
}

_ACTIONS: dict[str, dict[Role, str]] = {
    "drinking": {
        Role.NONE: "Keep the routine sampling schedule.",
        Role.VIGILANCE: "Sample at least weekly and identify the cyanobacteria present.",
        Role.ALERT: "Tell the health authority, sample about twice a week and check that "
                    "treatment can remove cells and toxins.",
        Role.ACTION: "Test raw and treated water for toxins; the water authority and the health "
                     "department decide on treatment and advice to consumers.",
    },
    "recreation": {
        Role.NONE: "Keep the routine sampling schedule.",
        Role.VIGILANCE: "Sample at least weekly and look out for scums.",
        Role.ALERT: "Sample more often; the local authority decides whether to post warnings.",
        Role.ACTION: "Advise against contact with the water; closures are the local authority's "
                     "decision.",
    },
}


def cautions(role: Role | str, use: str) -> tuple[str, ...]:
    """Cautions for a level's role and an intended use ('drinking' or 'recreation'), then the
    general cautions from the alert role up."""
    table = _CAUTIONS.get(use)
    if table is None:
        raise KeyError(f"no cautions for use '{use}'; valid: {', '.join(_CAUTIONS)}")
    role = Role(role)
    general = GENERAL_CAUTIONS if role in (Role.ALERT, Role.ACTION) else ()
    return table[role] + general


def main_action(role: Role | str, use: str) -> str:
    """The one thing to do at a level's role, for an intended use."""
    return _ACTIONS[use][Role(role)]


def level_name(scheme: Scheme, rank: float | None) -> str:
    """The name of a level rank (0 is below the first level); 'unknown' when not decided."""
    if rank is None or rank != rank:
        return "unknown"
    return "below " + scheme.levels[0].name if rank == 0 else scheme.levels[int(rank) - 1].name
