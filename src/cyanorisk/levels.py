"""Alert-level schemes of published guidelines, as documented data, and classification.

A scheme is an ordered list of levels; a level is met when any of its thresholds is met
(cyanobacterial cell count, toxin-producer cell count, biovolume, chlorophyll-a or microcystin,
whichever the sample carries). Values and their status are those of ``shared/REFERENCES.md``:
'V' read in the source or a secondary source quoting it, 'M' from memory, not checked against
the primary document. The source of each scheme is named in :attr:`Scheme.source`.

Censored results are honoured: '<X' cannot meet a threshold at or above X, and a '>X' result meets
every threshold at or below X; anything else is undecided (NaN), never guessed.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

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

CENSOR_COLUMNS = {"cyano_cells_per_ml": "cyano_censor", "toxic_cells_per_ml": "toxic_censor",
                  "microcystin_ug_per_l": "microcystin_censor"}


@dataclass(frozen=True)
class Threshold:
    """``measure >= value`` (or ``>`` when not inclusive)."""

    measure: str
    value: float
    inclusive: bool = True
    status: str = "V"
    """'V' verified (primary or secondary source), 'M' from memory, 'C' computed, 'S' set by
    the site's configuration."""


@dataclass(frozen=True)
class Level:
    """One alert level: met when any of its thresholds is met."""

    name: str
    thresholds: tuple[Threshold, ...]
    note: str = ""


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

    @property
    def names(self) -> list[str]:
        return [lvl.name for lvl in self.levels]

    def using(self, measures: tuple[str, ...] | None) -> Scheme:
        """The scheme with only the thresholds on ``measures`` (None keeps all).

        A site whose chlorophyll-a is not dominated by cyanobacteria, for example, should not
        raise alerts on chlorophyll-a alone.
        """
        if measures is None:
            return self
        unknown = set(measures) - set(MEASURES)
        if unknown:
            raise ValueError(f"unknown measure(s) {', '.join(sorted(unknown))}; valid: "
                             f"{', '.join(MEASURES)}")
        levels = tuple(Level(lvl.name, tuple(t for t in lvl.thresholds if t.measure in measures),
                             lvl.note) for lvl in self.levels)
        empty = [lvl.name for lvl in levels if not lvl.thresholds]
        if empty:
            raise ValueError(f"with measures {', '.join(measures)}, level(s) {', '.join(empty)} "
                             f"of scheme '{self.key}' have no threshold left")
        return Scheme(self.key, self.title, self.use, self.source, self.year, levels,
                      self.note + f" Thresholds used: {', '.join(measures)}.")


def _t(measure: str, value: float, status: str = "V", inclusive: bool = True) -> Threshold:
    return Threshold(measure, value, inclusive, status)


SCHEMES: dict[str, Scheme] = {s.key: s for s in (
    Scheme(
        key="who1999_drinking", title="WHO alert levels framework for drinking water",
        use="drinking", year=1999,
        source="Chorus, I. and Bartram, J. (eds) (1999). Toxic Cyanobacteria in Water. WHO / "
               "E & FN Spon, chapter 6",
        levels=(
            Level("Alert Level 1", (_t("cyano_cells_per_ml", 2_000), _t("biovolume_mm3_per_l", 0.2),
                                    _t("chl_a_ug_per_l", 1.0))),
            Level("Alert Level 2", (_t("cyano_cells_per_ml", 100_000, "M"),
                                    _t("biovolume_mm3_per_l", 10.0, "M"),
                                    _t("chl_a_ug_per_l", 50.0, "M"))),
        ),
        note="The Vigilance level (1 colony or 5 filaments per mL) is a detection rule, not a "
             "count threshold, and is not modelled. Alert Level 2 values are from memory.",
    ),
    Scheme(
        key="who2003_recreation", title="WHO guideline values for recreational waters",
        use="recreation", year=2003,
        source="WHO (2003). Guidelines for Safe Recreational Water Environments, volume 1, "
               "chapter 8",
        levels=(
            Level("Low probability of adverse effects", (_t("cyano_cells_per_ml", 20_000),
                                                         _t("chl_a_ug_per_l", 10.0))),
            Level("Moderate probability of adverse effects", (_t("cyano_cells_per_ml", 100_000),
                                                              _t("chl_a_ug_per_l", 50.0))),
        ),
        note="The high-probability level is scum in bathing areas, seen on site, not counted.",
    ),
    Scheme(
        key="nhmrc2008_recreation", title="NHMRC alert levels for recreational water",
        use="recreation", year=2008,
        source="NHMRC (2008). Guidelines for Managing Risks in Recreational Water, chapter 6",
        levels=(
            Level("Green (surveillance)", (_t("toxic_cells_per_ml", 500),
                                           _t("biovolume_mm3_per_l", 0.04, inclusive=False))),
            Level("Amber (alert)", (_t("toxic_cells_per_ml", 5_000), _t("biovolume_mm3_per_l", 0.4))),
            Level("Red (action)", (_t("toxic_cells_per_ml", 50_000), _t("microcystin_ug_per_l", 10.0),
                                   _t("biovolume_mm3_per_l", 4.0))),
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
    """A scheme from configuration: ``{level name: {measure: threshold}}``, lowest level first."""
    built = []
    for name, thresholds in levels.items():
        for measure in thresholds:
            if measure not in MEASURES:
                raise ValueError(f"level '{name}': unknown measure '{measure}'; valid: "
                                 f"{', '.join(MEASURES)}")
        built.append(Level(name, tuple(_t(m, float(v), "S") for m, v in thresholds.items())))
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
    highest level met; NaN when the lowest level cannot be decided."""
    level = np.zeros(len(samples))
    decided = np.ones(len(samples), dtype=bool)
    for k, lvl in enumerate(scheme.levels, start=1):
        m = meets(samples, lvl)
        level = np.where(m == 1.0, k, level)
        if k == 1:
            decided = ~np.isnan(m)
    return np.where(decided | (level > 0), level, np.nan)


# ---------------------------------------------------------------------------------------------
# Health cautions, in our own words, by level rank and intended use
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

_CAUTIONS: dict[str, dict[int, tuple[str, ...]]] = {
    "drinking": {
        0: ("Routine monitoring: keep the usual sampling schedule.",),
        1: ("Sample more often (at least weekly) and count toxin-producing taxa.",
            "Check that treatment can remove cells without breaking them and can remove "
            "dissolved toxins; consider testing for toxins.",
            "Consider drawing water from another depth or source if one is available."),
        2: ("Test for toxins in raw and treated water and act on the results.",
            "Treatment changes, another source or advice to consumers may be needed: the "
            "water authority and the health department decide, together.",
            "Warn staff working on the water body to avoid skin contact with scums."),
    },
    "recreation": {
        0: ("Routine monitoring: keep the usual sampling schedule.",),
        1: ("Avoid swallowing the water; shower after swimming.",
            "Avoid areas where scum or discoloured water is seen.",
            "Sample more often; put up signs if the local authority decides so."),
        2: ("Avoid swimming, water skiing and any contact with the water; do not let dogs swim "
            "or drink.",
            "Do not eat fish guts or shellfish from the water body.",
            "Closures and warning signs are decided by the local authority."),
    },
}


def cautions(rank: int, use: str) -> tuple[str, ...]:
    """Cautions for a level (0 below the first level, 1 the first, 2 or more the higher ones)
    and an intended use ('drinking' or 'recreation'), then the general cautions."""
    table = _CAUTIONS.get(use)
    if table is None:
        raise KeyError(f"no cautions for use '{use}'; valid: {', '.join(_CAUTIONS)}")
    own = table[min(max(int(rank), 0), max(table))]
    return own + (GENERAL_CAUTIONS if rank > 0 else ())


def level_name(scheme: Scheme, rank: float | None) -> str:
    """The name of a level rank (0 is below the first level); 'unknown' when not decided."""
    if rank is None or rank != rank:
        return "unknown"
    return "below " + scheme.levels[0].name if rank == 0 else scheme.levels[int(rank) - 1].name
