"""Tests for cyanorisk.levels: preset alert-level schemes against their published tables,
threshold boundaries, censored results, classification and restriction to measures.

The preset tables below copy shared/REFERENCES.md ("Alert-level schemes"), value by value, with
the status the table gives: 'V' read in the source or a secondary source quoting it, 'M' from
memory, not checked against the primary document.
"""

from __future__ import annotations

import colorsys

import numpy as np
import pandas as pd
import pytest

from cyanorisk.levels import (
    GENERAL_CAUTIONS,
    MEASURES,
    ROUTINE,
    SCHEMES,
    TOXIN_VALUES,
    Level,
    Role,
    Threshold,
    cautions,
    classify,
    level_in_force,
    meets,
    scheme,
    toxin_values,
)

CELLS = "cyano_cells_per_ml"
TOXIC = "toxic_cells_per_ml"
BIOVOLUME = "biovolume_mm3_per_l"
CHL_A = "chl_a_ug_per_l"
MICROCYSTIN = "microcystin_ug_per_l"

# (level name, measure, threshold, inclusive ('>=' True, '>' False), status)
# Chorus & Bartram (eds) 1999, Toxic Cyanobacteria in Water, ch. 6 (REFERENCES.md):
# Vigilance 'M' (from memory: 1 colony or 5 filaments per mL, a detection rule, read as any
# cyanobacteria counted: cells > 0); Alert Level 1 'V (secondary)'; Alert Level 2 'M' (from memory).
WHO1999_DRINKING_TABLE = [
    ("Vigilance", CELLS, 0.0, False, "M"),  # from memory
    ("Alert Level 1", CELLS, 2_000.0, True, "V"),
    ("Alert Level 1", BIOVOLUME, 0.2, True, "V"),
    ("Alert Level 1", CHL_A, 1.0, True, "V"),
    ("Alert Level 2", CELLS, 100_000.0, True, "M"),  # from memory
    ("Alert Level 2", BIOVOLUME, 10.0, True, "M"),  # from memory
    ("Alert Level 2", CHL_A, 50.0, True, "M"),  # from memory
]

# WHO 2003, Guidelines for Safe Recreational Water Environments vol. 1, ch. 8 (REFERENCES.md,
# 'V (secondary)'); the high-probability level (scum in bathing areas) is seen, not counted.
WHO2003_RECREATION_TABLE = [
    ("Low probability of adverse effects", CELLS, 20_000.0, True, "V"),
    ("Low probability of adverse effects", CHL_A, 10.0, True, "V"),
    ("Moderate probability of adverse effects", CELLS, 100_000.0, True, "V"),
    ("Moderate probability of adverse effects", CHL_A, 50.0, True, "V"),
]

# NHMRC 2008, Guidelines for Managing Risks in Recreational Water, ch. 6 (REFERENCES.md,
# 'V (secondary)' for cells and biovolume). Cells are M. aeruginosa (toxin producers); the
# biovolume thresholds are those where a known toxin producer dominates. Green's biovolume bound
# is strict: '> 0.04 mm3/L'.
NHMRC2008_RECREATION_TABLE = [
    ("Green (surveillance)", TOXIC, 500.0, True, "V"),
    ("Green (surveillance)", BIOVOLUME, 0.04, False, "V"),
    ("Amber (alert)", TOXIC, 5_000.0, True, "V"),
    ("Amber (alert)", BIOVOLUME, 0.4, True, "V"),
    ("Red (action)", TOXIC, 50_000.0, True, "V"),
    ("Red (action)", BIOVOLUME, 4.0, True, "V"),
    # REFERENCES.md gives no status for the microcystin threshold (its status cell covers cells,
    # biovolume and the scum wording only), so its status is not checked here: None.
    ("Red (action)", MICROCYSTIN, 10.0, True, None),
]

PUBLISHED_TABLES = {
    "who1999_drinking": WHO1999_DRINKING_TABLE,
    "who2003_recreation": WHO2003_RECREATION_TABLE,
    "nhmrc2008_recreation": NHMRC2008_RECREATION_TABLE,
}

# Publication year of each scheme's source (REFERENCES.md).
PUBLISHED_YEARS = {"who1999_drinking": 1999, "who2003_recreation": 2003, "nhmrc2008_recreation": 2008}


def samples(**columns) -> pd.DataFrame:
    """A per-sample table with the given columns (lists of equal length)."""
    return pd.DataFrame(columns)


def thresholds_of(key: str) -> list[tuple]:
    return [(lvl.name, th.measure, th.value, th.inclusive, th.status)
            for lvl in SCHEMES[key].levels for th in lvl.thresholds]


# ---------------------------------------------------------------------------------------------
# Presets against the published tables
# ---------------------------------------------------------------------------------------------

def test_presets_are_the_published_schemes():
    assert sorted(SCHEMES) == sorted(PUBLISHED_TABLES)


@pytest.mark.parametrize("key", sorted(PUBLISHED_TABLES))
def test_preset_thresholds_equal_published_table(key):
    got = {(name, measure): (value, inclusive) for name, measure, value, inclusive, _ in thresholds_of(key)}
    want = {(name, measure): (value, inclusive)
            for name, measure, value, inclusive, _ in PUBLISHED_TABLES[key]}
    assert got.keys() == want.keys()
    for k, (value, inclusive) in want.items():
        assert got[k][0] == pytest.approx(value, rel=0.0, abs=1e-12), k
        assert got[k][1] is inclusive, k
    # level order as published (lowest first), and no threshold listed twice
    published_order = list(dict.fromkeys(row[0] for row in PUBLISHED_TABLES[key]))
    assert SCHEMES[key].names == published_order
    assert len(thresholds_of(key)) == len(PUBLISHED_TABLES[key])


@pytest.mark.parametrize("key", sorted(PUBLISHED_TABLES))
def test_preset_status_as_published(key):
    got = {(name, measure): status for name, measure, _, _, status in thresholds_of(key)}
    for name, measure, _, _, status in PUBLISHED_TABLES[key]:
        if status is not None:
            assert got[(name, measure)] == status, (name, measure)


@pytest.mark.parametrize("key", sorted(PUBLISHED_TABLES))
def test_preset_names_its_source(key):
    s = scheme(key)
    assert s.key == key
    assert s.year == PUBLISHED_YEARS[key]
    assert str(PUBLISHED_YEARS[key]) in s.source
    assert s.use == ("drinking" if key.endswith("_drinking") else "recreation")


@pytest.mark.parametrize("key", sorted(PUBLISHED_TABLES))
def test_levels_are_ordered(key):
    # a measure shared by two levels has a strictly higher threshold at the higher level
    levels = SCHEMES[key].levels
    for lower, higher in zip(levels, levels[1:], strict=False):
        low = {t.measure: t.value for t in lower.thresholds}
        high = {t.measure: t.value for t in higher.thresholds}
        shared = low.keys() & high.keys()
        assert shared, (lower.name, higher.name)
        for m in shared:
            assert high[m] > low[m], (key, m)


def test_every_threshold_uses_a_known_measure():
    for s in SCHEMES.values():
        for lvl in s.levels:
            for th in lvl.thresholds:
                assert th.measure in MEASURES
                assert th.status in {"V", "M", "C"}


# ---------------------------------------------------------------------------------------------
# Boundaries: a value exactly at a threshold
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize(("key", "level", "measure", "value", "expected"), [
    # Vigilance: any cyanobacteria counted (WHO 1999, REFERENCES.md, from memory)
    ("who1999_drinking", 0, CELLS, 1.0, 1.0),
    ("who1999_drinking", 0, CELLS, 0.0, 0.0),
    # '>=' thresholds: exactly at the value meets the level (WHO 1999, REFERENCES.md)
    ("who1999_drinking", 1, CELLS, 2_000.0, 1.0),
    ("who1999_drinking", 1, CELLS, 1_999.0, 0.0),
    ("who1999_drinking", 1, BIOVOLUME, 0.2, 1.0),
    ("who1999_drinking", 1, CHL_A, 1.0, 1.0),
    ("who1999_drinking", 1, CHL_A, 0.999, 0.0),
    ("who1999_drinking", 2, CELLS, 100_000.0, 1.0),
    ("who1999_drinking", 2, CELLS, 99_999.0, 0.0),
    # WHO 2003 recreation (REFERENCES.md)
    ("who2003_recreation", 0, CELLS, 20_000.0, 1.0),
    ("who2003_recreation", 0, CELLS, 19_999.0, 0.0),
    ("who2003_recreation", 1, CHL_A, 50.0, 1.0),
    # NHMRC 2008 Green: '> 0.04 mm3/L' is strict; exactly 0.04 does not meet it (REFERENCES.md)
    ("nhmrc2008_recreation", 0, BIOVOLUME, 0.04, 0.0),
    ("nhmrc2008_recreation", 0, BIOVOLUME, 0.0401, 1.0),
    ("nhmrc2008_recreation", 0, TOXIC, 500.0, 1.0),
    ("nhmrc2008_recreation", 0, TOXIC, 499.0, 0.0),
    # NHMRC 2008 Amber and Red: '>=' thresholds
    ("nhmrc2008_recreation", 1, BIOVOLUME, 0.4, 1.0),
    ("nhmrc2008_recreation", 1, TOXIC, 5_000.0, 1.0),
    ("nhmrc2008_recreation", 2, TOXIC, 50_000.0, 1.0),
    ("nhmrc2008_recreation", 2, BIOVOLUME, 4.0, 1.0),
    ("nhmrc2008_recreation", 2, BIOVOLUME, 3.99, 0.0),
    ("nhmrc2008_recreation", 2, MICROCYSTIN, 10.0, 1.0),
    ("nhmrc2008_recreation", 2, MICROCYSTIN, 9.9, 0.0),
])
def test_threshold_boundaries(key, level, measure, value, expected):
    got = meets(samples(**{measure: [value]}), SCHEMES[key].levels[level])
    np.testing.assert_array_equal(got, [expected])


# ---------------------------------------------------------------------------------------------
# meets: several measures, censoring, missing values
# ---------------------------------------------------------------------------------------------

def test_meets_when_any_measure_meets():
    al1 = scheme("who1999_drinking").levels[1]
    table = samples(**{CELLS: [100.0, 100.0, np.nan, 100.0],
                       CHL_A: [5.0, 0.5, 0.5, np.nan],
                       BIOVOLUME: [np.nan, 0.3, np.nan, np.nan]})
    # chl-a meets; biovolume meets; only chl-a carried and below; only cells carried and below
    np.testing.assert_array_equal(meets(table, al1), [1.0, 1.0, 0.0, 0.0])


def test_sample_without_any_measure_is_undecided():
    al1 = scheme("who1999_drinking").levels[1]
    table = samples(**{CELLS: [np.nan], "depth_m": [1.0]})
    np.testing.assert_array_equal(meets(table, al1), [np.nan])
    table = samples(depth_m=[1.0])  # no measure column at all
    np.testing.assert_array_equal(meets(table, al1), [np.nan])


@pytest.mark.parametrize(("value", "censor", "expected"), [
    (1_000.0, "<", 0.0),  # '<1000': the true count is below 2000, decided not met
    (2_000.0, "<", 0.0),  # '<2000': below the '>=' threshold, decided not met
    (5_000.0, "<", np.nan),  # '<5000': may or may not reach 2000, undecided
    (3_000.0, ">", 1.0),  # '>3000': at least 3000, meets 2000
    (2_000.0, ">", 1.0),
    (1_000.0, ">", np.nan),  # '>1000': may or may not reach 2000
    (3_000.0, "=", 1.0),
    (3_000.0, None, 1.0),  # no censor given: an exact result
])
def test_meets_honours_censoring(value, censor, expected):
    al1 = scheme("who1999_drinking").levels[1]
    table = samples(**{CELLS: [value], "cyano_censor": [censor]})
    np.testing.assert_array_equal(meets(table, al1), [expected])


def test_undecided_measure_blocks_a_no_but_not_a_yes():
    al1 = scheme("who1999_drinking").levels[1]
    table = samples(**{CELLS: [5_000.0, 5_000.0], "cyano_censor": ["<", "<"], CHL_A: [0.5, 3.0]})
    # cells undecided, chl-a decided below -> undecided; chl-a meets -> met
    np.testing.assert_array_equal(meets(table, al1), [np.nan, 1.0])


def test_censored_microcystin():
    red = scheme("nhmrc2008_recreation").levels[2]
    table = samples(**{MICROCYSTIN: [0.3, 20.0, 15.0], "microcystin_censor": ["<", "<", ">"]})
    np.testing.assert_array_equal(meets(table, red), [0.0, np.nan, 1.0])


def test_custom_level_strict_threshold_with_censoring():
    # '> 0.04': a result '<0.04' is decided below, '>0.04' is decided above
    level = Level("strict", (Threshold(CELLS, 0.04, inclusive=False),))
    table = samples(**{CELLS: [0.04, 0.04, 0.04], "cyano_censor": ["=", "<", ">"]})
    np.testing.assert_array_equal(meets(table, level), [0.0, 0.0, 1.0])


# ---------------------------------------------------------------------------------------------
# classify
# ---------------------------------------------------------------------------------------------

def test_classify_gives_highest_level_met():
    s = scheme("who1999_drinking")
    table = samples(**{
        CELLS: [0.0, 1_999.0, 2_000.0, 99_999.0, 100_000.0, 1e6, np.nan, 100.0, np.nan],
        CHL_A: [np.nan, np.nan, np.nan, np.nan, np.nan, np.nan, np.nan, 60.0, np.nan],
    })
    # 0 cells: none seen; 1,999: Vigilance (seen); 2,000: Alert Level 1; 100,000: Alert Level 2
    np.testing.assert_array_equal(classify(table, s), [0, 1, 2, 2, 3, 3, np.nan, 3, np.nan])


def test_classify_censored():
    s = scheme("who1999_drinking")
    table = samples(**{CELLS: [1_000.0, 5_000.0, 150_000.0, 3_000.0, 500_000.0],
                       "cyano_censor": ["<", "<", ">", ">", "<"]})
    # '<1000' -> 0 (not detected); '<5000' undecided at Alert Level 1 -> NaN; '>150000' -> Alert
    # Level 2 (3); '>3000' meets Alert Level 1, Alert Level 2 undecided -> 2 (the highest level
    # met); '<500000' -> NaN
    np.testing.assert_array_equal(classify(table, s), [0, np.nan, 3, 2, np.nan])


def test_classify_nhmrc_red_on_microcystin_alone():
    s = scheme("nhmrc2008_recreation")
    table = samples(**{TOXIC: [100.0, 600.0, 6_000.0, 60_000.0, np.nan, 100.0],
                       BIOVOLUME: [0.01, np.nan, np.nan, np.nan, np.nan, 0.04],
                       MICROCYSTIN: [np.nan, np.nan, np.nan, np.nan, 12.0, np.nan]})
    np.testing.assert_array_equal(classify(table, s), [0, 1, 2, 3, 3, 0])


# ---------------------------------------------------------------------------------------------
# Scheme.using and lookup
# ---------------------------------------------------------------------------------------------

def test_using_restricts_measures():
    full = scheme("who1999_drinking")
    cells_only = full.using((CELLS,))
    assert cells_only.names == full.names
    for lvl in cells_only.levels:
        assert [t.measure for t in lvl.thresholds] == [CELLS]
    assert [lvl.thresholds[0].value for lvl in cells_only.levels] == [0.0, 2_000.0, 100_000.0]
    table = samples(**{CELLS: [100.0], CHL_A: [60.0]})
    np.testing.assert_array_equal(classify(table, full), [3])
    np.testing.assert_array_equal(classify(table, cells_only), [1])  # seen: Vigilance only
    # the preset itself is unchanged
    assert {t.measure for t in full.levels[1].thresholds} == {CELLS, BIOVOLUME, CHL_A}
    # without the cell count, the detection level has nothing to detect with: it is dropped
    assert full.using((CHL_A,)).names == ["Alert Level 1", "Alert Level 2"]


def test_using_none_keeps_everything():
    full = scheme("nhmrc2008_recreation")
    assert full.using(None) is full


def test_using_refuses_to_empty_a_level():
    with pytest.raises(ValueError, match=r"Green \(surveillance\), Amber \(alert\)") as err:
        scheme("nhmrc2008_recreation").using((MICROCYSTIN,))
    assert "nhmrc2008_recreation" in str(err.value)
    with pytest.raises(ValueError, match="no threshold left"):
        scheme("who2003_recreation").using((BIOVOLUME,))


def test_using_refuses_unknown_measure():
    with pytest.raises(ValueError, match="unknown measure.*cells_per_litre") as err:
        scheme("who1999_drinking").using((CELLS, "cells_per_litre"))
    for m in MEASURES:
        assert m in str(err.value)


def test_unknown_scheme_lists_valid_keys():
    with pytest.raises(KeyError, match="who2021_drinking") as err:
        scheme("who2021_drinking")
    for key in SCHEMES:
        assert key in str(err.value)


# ---------------------------------------------------------------------------------------------
# Vigilance: a detection rule
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize(("value", "censor", "expected"), [
    (300.0, "=", 1.0),  # cells counted: detected
    (0.0, "=", 0.0),  # none in the count
    (100.0, "<", 0.0),  # '<100', 'ND': not detected at the method's limit
    (500.0, ">", 1.0),
])
def test_vigilance_is_met_by_any_cyanobacteria_detected(value, censor, expected):
    # Chorus & Bartram (eds) 1999, ch. 6: Vigilance on detection of 1 colony or 5 filaments per
    # mL (REFERENCES.md, from memory), read as any cyanobacteria counted
    vigilance = scheme("who1999_drinking").levels[0]
    assert vigilance.name == "Vigilance"
    table = samples(**{CELLS: [value], "cyano_censor": [censor]})
    np.testing.assert_array_equal(meets(table, vigilance), [expected])


# ---------------------------------------------------------------------------------------------
# The level in force and stepping down
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize(("ranks", "rank", "set_by", "below"), [
    ([], 0, None, 0),
    ([0, 1, 2], 2, 2, 0),
    ([3, 1], 3, 0, 1),  # one sample below: Alert Level 2 stays
    ([3, 1, 0], 1, 1, 0),  # two in a row below: steps down to the higher of the two
    ([3, 1, np.nan, 0], 1, 1, 0),  # an undecided sample neither raises nor breaks the run
    ([3, 1, 3, 0], 3, 2, 1),  # a new sample at the level starts the count again
    ([2, 2, 0, 0, 0], 0, 4, 0),  # the latest sample at the level in force confirms it
    ([np.nan, np.nan], 0, None, 0),
])
def test_level_in_force_steps_down_after_two_samples_below(ranks, rank, set_by, below):
    # the two-consecutive-samples rule: common practice, no source (REFERENCES.md, M)
    held = level_in_force(ranks, 2)
    assert (held.rank, held.set_by, held.below_since) == (rank, set_by, below)


@pytest.mark.parametrize("key", sorted(PUBLISHED_TABLES))
def test_step_down_rule_is_declared_with_its_source(key):
    s = scheme(key)
    # REFERENCES.md, 'stepping down a level': two consecutive samples below (common practice,
    # no source, M); the schemes' own documents are silent on it as far as recalled
    assert s.step_down_samples == 2
    assert "two consecutive samples" in s.step_down_source
    assert "common practice" in s.step_down_source


def test_sampling_frequency_per_level_of_the_1999_framework():
    # REFERENCES.md, alert-level actions (Chorus & Bartram 1999, ch. 6; from memory): Vigilance
    # at least weekly, Alert Level 1 about twice weekly, Alert Level 2 frequent sampling goes on
    s = scheme("who1999_drinking")
    assert [lvl.sample_every_days for lvl in s.levels] == [7.0, 3.5, 3.5]
    assert all("from memory" in lvl.sampling_source for lvl in s.levels)
    assert s.sample_every_days(0) == s.routine_sample_every_days == 28.0  # common practice
    assert [lvl.role for lvl in s.levels] == [Role.VIGILANCE, Role.ALERT, Role.ACTION]


def test_nhmrc_levels_carry_the_guidelines_own_colours_mapped_right():
    # NHMRC 2008 names its levels Green, Amber and Red (REFERENCES.md): each badge takes that
    # hue (hue read with the standard library's colorsys; amber between red and green)
    hues = {}
    for lvl in scheme("nhmrc2008_recreation").levels:
        r, g, b = (int(lvl.colour[i:i + 2], 16) / 255 for i in (1, 3, 5))
        hues[lvl.name.split()[0]] = colorsys.rgb_to_hsv(r, g, b)[0] * 360
    assert 90 <= hues["Green"] <= 150
    assert 30 <= hues["Amber"] <= 50
    assert hues["Red"] <= 10 or hues["Red"] >= 350
    # schemes that name no colours use the report's own palette
    assert all(lvl.colour is None for lvl in scheme("who1999_drinking").levels)


# ---------------------------------------------------------------------------------------------
# Toxin guideline values
# ---------------------------------------------------------------------------------------------

# REFERENCES.md, 'Toxin values': (toxin, use, value [ug/L], source, status)
PUBLISHED_TOXIN_VALUES = [
    (MICROCYSTIN, "drinking", 1.0, "WHO (2020)", "V"),  # provisional lifetime
    (MICROCYSTIN, "drinking", 12.0, "WHO (2020)", "M"),  # short-term, from memory
    (MICROCYSTIN, "recreation", 24.0, "WHO (2020)", "M"),  # from memory
    (MICROCYSTIN, "recreation", 8.0, "EPA 822-R-19-001", "V"),
    ("cylindrospermopsin_ug_per_l", "recreation", 15.0, "EPA 822-R-19-001", "V"),
    (MICROCYSTIN, "drinking", 0.3, "US EPA (2015)", "V"),  # 10-day, under 6 years
    (MICROCYSTIN, "drinking", 1.6, "US EPA (2015)", "V"),  # 10-day, older children and adults
    ("cylindrospermopsin_ug_per_l", "drinking", 0.7, "US EPA (2015)", "V"),
    ("cylindrospermopsin_ug_per_l", "drinking", 3.0, "US EPA (2015)", "V"),
]


def test_toxin_values_equal_the_published_table():
    got = sorted((v.measure, v.use, v.value_ug_per_l, v.status) for v in TOXIN_VALUES)
    want = sorted((m, u, x, s) for m, u, x, _, s in PUBLISHED_TOXIN_VALUES)
    assert got == want
    for measure, use, value, source, _ in PUBLISHED_TOXIN_VALUES:
        (entry,) = [v for v in TOXIN_VALUES if (v.measure, v.use, v.value_ug_per_l)
                    == (measure, use, value)]
        assert source in entry.source
    # lowest first within a toxin and use, as the report lists them
    for measure in (MICROCYSTIN, "cylindrospermopsin_ug_per_l"):
        for use in ("drinking", "recreation"):
            values = [v.value_ug_per_l for v in toxin_values(measure, use)]
            assert values == sorted(values)


@pytest.mark.parametrize("role", list(Role))
def test_drinking_and_recreation_cautions_differ(role):
    drinking, recreation = cautions(role, "drinking"), cautions(role, "recreation")
    own_drinking = [x for x in drinking if x not in GENERAL_CAUTIONS]
    own_recreation = [x for x in recreation if x not in GENERAL_CAUTIONS]
    if role is Role.NONE:  # below every level both keep routine monitoring
        assert own_drinking == own_recreation == [ROUTINE]
    else:
        assert own_drinking and own_recreation
        assert set(own_drinking).isdisjoint(own_recreation)
    general = [x for x in drinking if x in GENERAL_CAUTIONS]
    assert general == (list(GENERAL_CAUTIONS) if role in (Role.ALERT, Role.ACTION) else [])
    assert [x for x in recreation if x in GENERAL_CAUTIONS] == general
