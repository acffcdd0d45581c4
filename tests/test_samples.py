"""Lab phytoplankton results in, tidy samples and a rejects ledger out (cyanorisk.ingest.samples).

Fixtures (an invented scenario, fictitious labs and reservoirs):
- tests/data/samples/long_layout.csv: Kestrel Water Laboratory, Hollin Reservoir; one row per
  taxon per sample, a unit column mixing cells/mL and cells/L, comments, a repeated identical
  record (lines 3 and 6), a conflicting repeated record (lines 8 and 9), a bad date (line 12,
  31 June) and a bad count (line 13, 'see comment'); dates day-first, local time Europe/Berlin.
- tests/data/samples/wide_layout.csv: Fernhill Water Laboratory, Lake Wendmere; one row per
  sample, taxa as columns with '(cells/L)' in the header, ';' separator and decimal comma, a
  repeated identical row (lines 4 and 5), a row with no count at all (line 7), a bad count
  (line 8, '1,2,3') and a bad time (line 9, '25:10').

Lab reporting forms ('<100', 'ND', 'TNTC', the letter O for zero, counts per litre) are common
practice, no source.
"""

import dataclasses
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.ingest.quality import IngestError
from cyanorisk.ingest.samples import (
    RECORD_COLUMNS,
    SampleLayout,
    Taxon,
    lookup_taxon,
    read_samples,
    sample_totals,
)

DATA = Path(__file__).parent / "data" / "samples"
LONG_FILE = DATA / "long_layout.csv"
WIDE_FILE = DATA / "wide_layout.csv"
TZ = "Europe/Berlin"  # CEST, UTC+2, in June-August (IANA tz database)
RTOL = 1e-12
"""Counts are exact decimals divided by 1000 at most: only float rounding may differ."""

LONG = SampleLayout(
    shape="long", separator=",", skip_lines=1, date_order="dmy", sample_id_column="SampleID",
    site_column="Site", sampled_date_column="Date", sampled_time_column="Time",
    taxon_column="Taxon", count_column="Count", unit_column="Unit", comment_column="Comment",
    detection_limit_cells_per_ml=100, upper_limit_cells_per_ml=1_000_000, duplicates="last")

WIDE = SampleLayout(
    shape="wide", separator=";", decimal=",", skip_lines=1, date_order="dmy",
    sample_id_column="Sample", sampled_date_column="Date", sampled_time_column="Time",
    chl_a_column="Chl-a (ug/L)", microcystin_column="Microcystin (ug/L)",
    detection_limit_cells_per_ml=100, upper_limit_cells_per_ml=1_000_000)

TAXA = {
    "Microcystis": Taxon(cyanobacterium=True, toxin_producer=True),
    "Dolichospermum": Taxon(cyanobacterium=True, toxin_producer=True),
    "Aphanizomenon": Taxon(cyanobacterium=True, toxin_producer=False),
    "Aulacoseira": Taxon(cyanobacterium=False),
    "Cryptomonas": Taxon(cyanobacterium=False),
    "Asterionella": Taxon(cyanobacterium=False),
}
"""A taxon table like the demo's [taxa]; Planktothrix is deliberately left out (unknown)."""

CONV = "converted_from_cells_per_l"


def utc(stamp: str) -> pd.Timestamp:
    return pd.Timestamp(stamp, tz="UTC")


def read_long(**changes):
    return read_samples(LONG_FILE, dataclasses.replace(LONG, **changes), TZ, bad_rows="reject")


def read_wide(**changes):
    return read_samples(WIDE_FILE, dataclasses.replace(WIDE, **changes), TZ, site_id="wendmere",
                        bad_rows="reject")


def by_key(records: pd.DataFrame) -> dict:
    """Records keyed by (sample_id, taxon)."""
    assert not records.duplicated(["sample_id", "taxon"]).any()
    return {(r.sample_id, r.taxon): r for r in records.itertuples(index=False)}


def check_records(records: pd.DataFrame, expected: dict) -> None:
    """expected: (sample_id, taxon) -> (cells_per_ml, censor, flag, sampled_at UTC)."""
    got = by_key(records)
    assert sorted(got) == sorted(expected)
    for key, (value, censor, flag, when) in expected.items():
        r = got[key]
        if math.isnan(value):
            assert math.isnan(r.cells_per_ml), key
        else:
            assert r.cells_per_ml == pytest.approx(value, rel=RTOL, abs=0.0), key
        assert (None if pd.isna(r.censor) else r.censor) == censor, key
        assert r.flag == flag, key
        assert r.sampled_at == utc(when), key


# --- long layout -------------------------------------------------------------------------------

# Local 09:30 CEST = 07:30 UTC; a blank time is the layout's default 10:00 local, flagged.
LONG_EXPECTED = {
    ("H0703", "Microcystis aeruginosa"): (1200.0, "=", "", "2023-07-03 07:30"),  # '1,200'
    ("H0703", "Dolichospermum flos-aquae"): (100.0, "<", "", "2023-07-03 07:30"),  # '<100' kept
    # 2500000 cells/L / 1000 = 2500 cells/mL (1 L = 1000 mL, SI)
    ("H0703", "Aulacoseira granulata"): (2500.0, "=", CONV, "2023-07-03 07:30"),
    # 'ND' in a cells/L row: the layout's detection limit, 100 cells/mL, censored below
    ("H0710", "Microcystis aeruginosa"): (100.0, "<", f"not_detected,{CONV}", "2023-07-10 08:15"),
    # lines 8 ('1.5E3') and 9 ('1800') conflict; policy 'last' keeps line 9, flagged
    ("H0710", "Aphanizomenon flos-aquae"): (1800.0, "=", "duplicate_conflict", "2023-07-10 08:15"),
    # 'TNTC': the layout's upper counting limit, censored above; time blank -> 10:00 assumed
    ("H0717", "Microcystis aeruginosa"): (1e6, ">", "too_numerous,time_assumed", "2023-07-17 08:00"),
    ("H0717", "Planktothrix rubescens"): (340.0, "=", "letter_o,time_assumed", "2023-07-17 08:00"),
    # '>200000' cells/L -> '>' 200 cells/mL (1 L = 1000 mL, SI)
    ("H0724", "Cryptomonas ovata"): (200.0, ">", CONV, "2023-07-24 07:00"),
}


def test_long_layout_records():
    records, meta = read_long()
    assert list(records.columns) == RECORD_COLUMNS
    check_records(records, LONG_EXPECTED)
    assert set(records["site_id"]) == {"hollin"}
    assert records["file"].eq(str(LONG_FILE)).all()
    got = by_key(records)
    assert got[("H0703", "Aulacoseira granulata")].comment == "net haul"
    assert got[("H0710", "Aphanizomenon flos-aquae")].comment == "recount, second analyst"
    assert got[("H0710", "Aphanizomenon flos-aquae")].line == 9
    assert got[("H0724", "Cryptomonas ovata")].line == 14
    assert meta.flag_counts == {CONV: 3, "time_assumed": 2, "not_detected": 1, "too_numerous": 1,
                                "letter_o": 1, "duplicate_conflict": 1}


def test_long_layout_row_accounting_balances():
    _, meta = read_long()
    # 12 data rows: 2 rejected (12, 13), 1 identical repeat (6 of 3), 1 conflicting loser (8)
    assert meta.account.as_dict() == {"read": 12, "kept": 8, "duplicates_identical": 1,
                                      "duplicates_conflicting": 1, "off_grid": 0, "rejected": 2}
    a = meta.account
    assert a.read == a.kept + a.duplicates_identical + a.duplicates_conflicting + a.rejected


def test_long_layout_every_bad_row_in_the_ledger():
    _, meta = read_long()
    led = meta.rejects
    assert list(led.columns) == ["file", "line", "column", "raw", "reason", "message"]
    assert list(led["line"]) == [8, 12, 13]
    assert list(led["reason"]) == ["duplicate_conflict", "bad_date", "bad_count"]
    assert led["file"].eq(str(LONG_FILE)).all()
    lines = LONG_FILE.read_text(encoding="utf-8").splitlines()
    bad_date, bad_count = led.iloc[1], led.iloc[2]
    assert (bad_date["column"], bad_date["raw"]) == ("Date", lines[12 - 1])
    assert "'31/06/2023' is not a date" in bad_date["message"]
    assert (bad_count["column"], bad_count["raw"]) == ("Count", lines[13 - 1])
    assert "'see comment' is not a count" in bad_count["message"]
    assert "line 9" in led.iloc[0]["message"]  # names the record that was kept


def test_conflicting_duplicate_policy_first():
    records, meta = read_long(duplicates="first")
    expected = dict(LONG_EXPECTED)
    # policy 'first' keeps line 8 ('1.5E3' = 1500), flagged; line 9 goes to the ledger
    expected[("H0710", "Aphanizomenon flos-aquae")] = (1500.0, "=", "duplicate_conflict",
                                                       "2023-07-10 08:15")
    check_records(records, expected)
    assert by_key(records)[("H0710", "Aphanizomenon flos-aquae")].line == 8
    dup = meta.rejects[meta.rejects["reason"] == "duplicate_conflict"]
    assert list(dup["line"]) == [9]
    assert "line 8" in dup.iloc[0]["message"]
    assert meta.account.as_dict() == {"read": 12, "kept": 8, "duplicates_identical": 1,
                                      "duplicates_conflicting": 1, "off_grid": 0, "rejected": 2}


def test_identical_duplicate_merged_without_ledger_or_flag():
    records, meta = read_long()
    micro = records[(records["sample_id"] == "H0703")
                    & (records["taxon"] == "Microcystis aeruginosa")]
    assert len(micro) == 1
    assert micro.iloc[0]["flag"] == ""
    assert not meta.rejects["line"].isin([3, 6]).any()


def test_not_detected_uses_the_layouts_detection_limit():
    records, _ = read_long(detection_limit_cells_per_ml=20)
    r = by_key(records)[("H0710", "Microcystis aeruginosa")]
    # 20 cells/mL is 20000 cells/L in the row's unit and 20 cells/mL again after conversion
    assert r.cells_per_ml == pytest.approx(20.0, rel=RTOL, abs=0.0)
    assert (r.censor, r.flag) == ("<", f"not_detected,{CONV}")


def test_not_detected_without_detection_limit_is_rejected_not_guessed():
    records, meta = read_long(detection_limit_cells_per_ml=None)
    assert ("H0710", "Microcystis aeruginosa") not in by_key(records)
    row = meta.rejects[meta.rejects["line"] == 7].iloc[0]
    assert (row["column"], row["reason"]) == ("Count", "bad_count")
    assert "detection limit" in row["message"]
    assert meta.account.as_dict() == {"read": 12, "kept": 7, "duplicates_identical": 1,
                                      "duplicates_conflicting": 1, "off_grid": 0, "rejected": 3}


def test_censoring_is_kept_never_turned_into_numbers():
    records, _ = read_long()
    censored = records[records["censor"].isin(["<", ">"])]
    got = sorted(zip(censored["sample_id"], censored["taxon"], censored["censor"],
                     censored["cells_per_ml"], strict=True))
    assert got == [("H0703", "Dolichospermum flos-aquae", "<", 100.0),
                   ("H0710", "Microcystis aeruginosa", "<", 100.0),
                   ("H0717", "Microcystis aeruginosa", ">", 1e6),
                   ("H0724", "Cryptomonas ovata", ">", 200.0)]


def test_bad_rows_stop_names_file_line_and_column():
    with pytest.raises(IngestError) as err:
        read_samples(LONG_FILE, LONG, TZ, bad_rows="stop")
    e = err.value
    assert (e.path, e.line, e.column) == (str(LONG_FILE), 12, "Date")
    assert str(e).startswith(f"{LONG_FILE}, line 12, column 'Date': '31/06/2023' is not a date")


# --- wide layout -------------------------------------------------------------------------------

MA, DL, AF = "Microcystis aeruginosa", "Dolichospermum lemmermannii", "Asterionella formosa"
# counts in cells/L divided by 1000 (1 L = 1000 mL, SI); '.' groups thousands, ',' is decimal
WIDE_EXPECTED = {
    ("W01", MA): (1200.0, "=", CONV, "2024-06-05 06:40"),  # '1.200.000' cells/L
    ("W01", DL): (100.0, "<", f"not_detected,{CONV}", "2024-06-05 06:40"),  # 'ND': layout limit
    ("W01", AF): (350.0, "=", CONV, "2024-06-05 06:40"),  # '350.000'
    ("W02", MA): (2500.0, "=", CONV, "2024-06-19 07:10"),  # '2,5E6'
    ("W02", DL): (50.0, "<", CONV, "2024-06-19 07:10"),  # '<50.000'; Asterionella blank: no record
    ("W03", MA): (1e6, ">", f"too_numerous,{CONV},time_assumed", "2024-07-03 08:00"),  # 'TNTC'
    ("W03", DL): (120.0, "=", f"{CONV},time_assumed", "2024-07-03 08:00"),  # '1,2E5'
    ("W03", AF): (0.0, "=", f"letter_o,{CONV},time_assumed", "2024-07-03 08:00"),  # 'O'
    ("W04", ""): (math.nan, None, "", "2024-07-17 07:00"),  # no count at all: one record kept
}


def test_wide_layout_records():
    records, meta = read_wide()
    assert list(records.columns) == RECORD_COLUMNS
    check_records(records, WIDE_EXPECTED)
    assert set(records["site_id"]) == {"wendmere"}
    per_sample = records.drop_duplicates("sample_id").set_index("sample_id")
    np.testing.assert_allclose(per_sample["chl_a_ug_per_l"].to_numpy(), [3.5, 12.0, 8.1, 2.0],
                               rtol=RTOL, atol=0)
    np.testing.assert_allclose(per_sample["microcystin_ug_per_l"].to_numpy(),
                               [0.1, 1.4, 0.6, np.nan], rtol=RTOL, atol=0)
    censor = [None if pd.isna(c) else c for c in per_sample["microcystin_censor"]]
    assert censor == ["<", "=", "=", None]


def test_wide_layout_row_accounting_and_ledger():
    _, meta = read_wide()
    # 7 data rows: 2 rejected (8 bad count, 9 bad time), 1 identical repeat (5 of 4)
    assert meta.account.as_dict() == {"read": 7, "kept": 4, "duplicates_identical": 1,
                                      "duplicates_conflicting": 0, "off_grid": 0, "rejected": 2}
    lines = WIDE_FILE.read_text(encoding="utf-8").splitlines()
    led = meta.rejects
    assert list(zip(led["line"], led["column"], led["reason"], strict=True)) == [
        (8, "Microcystis aeruginosa (cells/L)", "bad_count"), (9, "Time", "bad_time")]
    assert list(led["raw"]) == [lines[7], lines[8]]
    assert "'1,2,3' is not a count" in led.iloc[0]["message"]
    assert "'25:10' is not a time of day" in led.iloc[1]["message"]


def test_wide_layout_bad_rows_stop_names_file_line_and_column():
    with pytest.raises(IngestError) as err:
        read_samples(WIDE_FILE, WIDE, TZ, site_id="wendmere", bad_rows="stop")
    e = err.value
    assert (e.path, e.line, e.column) == (str(WIDE_FILE), 8, "Microcystis aeruginosa (cells/L)")
    assert f"{WIDE_FILE}, line 8, column 'Microcystis aeruginosa (cells/L)'" in str(e)


def test_header_unit_cells_per_ml_is_not_converted(tmp_path):
    path = tmp_path / "per_ml.csv"
    path.write_text("Sample,Date,Microcystis aeruginosa (cells/mL),Aphanizomenon (cells/L)\n"
                    "X1,2024-06-05,1500,3000\n", encoding="utf-8")
    layout = SampleLayout(shape="wide", separator=",", skip_lines=0, date_order="ymd",
                          sample_id_column="Sample", sampled_date_column="Date")
    records, meta = read_samples(path, layout, TZ, site_id="s", bad_rows="reject")
    check_records(records, {
        ("X1", "Microcystis aeruginosa"): (1500.0, "=", "time_assumed", "2024-06-05 08:00"),
        # 3000 cells/L / 1000 = 3 cells/mL (1 L = 1000 mL, SI)
        ("X1", "Aphanizomenon"): (3.0, "=", f"{CONV},time_assumed", "2024-06-05 08:00"),
    })
    assert meta.account.as_dict()["kept"] == 1


def test_a_taxon_column_without_a_unit_refuses_the_sheet_naming_the_column_and_both_fixes(
        tmp_path):
    # A column with no unit beside cells/L columns was read as cells/mL: 1000 times too high.
    path = tmp_path / "mixed.csv"
    path.write_text("Sample,Date,Microcystis (cells/L),Aphanizomenon\n"
                    "X1,2024-06-05,1500000,3000000\n", encoding="utf-8")
    layout = SampleLayout(shape="wide", separator=",", skip_lines=0, date_order="ymd",
                          sample_id_column="Sample", sampled_date_column="Date")
    with pytest.raises(IngestError) as err:
        read_samples(path, layout, TZ, site_id="s", bad_rows="reject")
    e = err.value
    assert (e.path, e.line, e.column) == (str(path), 1, "Aphanizomenon")
    assert "'Aphanizomenon (cells/mL)'" in str(e) and 'count_unit = "cells/mL"' in str(e)


def test_a_declared_count_unit_is_used_for_a_column_without_one(tmp_path):
    path = tmp_path / "mixed.csv"
    path.write_text("Sample,Date,Microcystis (cells/mL),Aphanizomenon\n"
                    "X1,2024-06-05,1500,3000\n", encoding="utf-8")
    layout = SampleLayout(shape="wide", separator=",", skip_lines=0, date_order="ymd",
                          sample_id_column="Sample", sampled_date_column="Date",
                          count_unit="cells/L")
    records, _ = read_samples(path, layout, TZ, site_id="s", bad_rows="reject")
    check_records(records, {
        ("X1", "Microcystis"): (1500.0, "=", "time_assumed", "2024-06-05 08:00"),
        # 3000 cells/L / 1000 = 3 cells/mL (1 L = 1000 mL, SI)
        ("X1", "Aphanizomenon"): (3.0, "=", f"{CONV},time_assumed", "2024-06-05 08:00"),
    })


def test_a_long_row_with_a_blank_unit_and_no_declared_unit_goes_to_the_ledger(tmp_path):
    path = tmp_path / "long.csv"
    path.write_text("Sample,Date,Taxon,Count,Unit\n"
                    "X1,2024-06-05,Microcystis,1500,cells/mL\n"
                    "X2,2024-06-12,Microcystis,1500,\n", encoding="utf-8")
    layout = SampleLayout(shape="long", separator=",", skip_lines=0, date_order="ymd",
                          sample_id_column="Sample", sampled_date_column="Date",
                          taxon_column="Taxon", count_column="Count", unit_column="Unit")
    records, meta = read_samples(path, layout, TZ, site_id="s", bad_rows="reject")
    assert list(records["sample_id"]) == ["X1"]
    rejected = meta.rejects
    assert list(rejected["line"]) == [3] and list(rejected["reason"]) == ["no_unit"]


# --- totals ------------------------------------------------------------------------------------

def make_records(rows: list[tuple[str, str, float, str | None]]) -> pd.DataFrame:
    """Tidy records from (sample_id, taxon, cells_per_ml, censor); one site, one day per sample."""
    out = pd.DataFrame(rows, columns=["sample_id", "taxon", "cells_per_ml", "censor"])
    day = {s: i for i, s in enumerate(dict.fromkeys(out["sample_id"]))}
    out["site_id"] = "hollin"
    out["sampled_at"] = [utc("2023-07-01 08:00") + pd.Timedelta(days=day[s])
                         for s in out["sample_id"]]
    out["reported_at"] = pd.NaT
    for c in ["depth_m", "biovolume_mm3_per_l", "chl_a_ug_per_l", "microcystin_ug_per_l"]:
        out[c] = np.nan
    out["microcystin_censor"] = None
    out["flag"], out["comment"], out["file"], out["line"] = "", "", "made.csv", 0
    return out[RECORD_COLUMNS]


def totals_of(rows) -> dict:
    t = sample_totals(make_records(rows), TAXA)
    return {r.sample_id: r for r in t.itertuples(index=False)}


def test_totals_all_parts_below_is_below_at_the_sum_of_limits():
    t = totals_of([("S1", "Microcystis aeruginosa", 100.0, "<"),
                   ("S1", "Dolichospermum circinale", 50.0, "<"),
                   ("S1", "Cryptomonas ovata", 800.0, "=")])["S1"]  # not a cyanobacterium
    assert t.cyano_censor == "<"
    assert t.cyano_cells_per_ml == pytest.approx(150.0, rel=RTOL, abs=0.0)  # 100 + 50
    assert t.cyano_upper_cells_per_ml == pytest.approx(150.0, rel=RTOL, abs=0.0)
    assert t.n_taxa == 3


def test_totals_mixed_exact_and_below_is_exact_with_an_upper_bound():
    t = totals_of([("S1", "Microcystis aeruginosa", 1200.0, "="),
                   ("S1", "Aphanizomenon flos-aquae", 300.0, "="),
                   ("S1", "Dolichospermum circinale", 100.0, "<"),
                   ("S1", "Aulacoseira granulata", 5000.0, "=")])["S1"]
    assert t.cyano_censor == "="
    assert t.cyano_cells_per_ml == pytest.approx(1500.0, rel=RTOL, abs=0.0)  # 1200 + 300
    assert t.cyano_upper_cells_per_ml == pytest.approx(1600.0, rel=RTOL, abs=0.0)  # + limit 100
    assert t.toxic_cells_per_ml == pytest.approx(1200.0, rel=RTOL, abs=0.0)  # Microcystis only


def test_totals_any_part_above_is_above():
    t = totals_of([("S1", "Microcystis aeruginosa", 1e6, ">"),
                   ("S1", "Aphanizomenon flos-aquae", 300.0, "="),
                   ("S1", "Dolichospermum circinale", 100.0, "<")])["S1"]
    assert t.cyano_censor == ">"
    # at least 1e6 + 300: a '<' part may be zero, so it adds nothing to the lower bound
    assert t.cyano_cells_per_ml == pytest.approx(1_000_300.0, rel=RTOL, abs=0.0)
    assert t.cyano_upper_cells_per_ml == math.inf


def test_totals_without_any_count_is_unknown_not_zero():
    t = totals_of([("S1", "", math.nan, None),
                   ("S2", "Microcystis aeruginosa", math.nan, None)])
    for s in ("S1", "S2"):
        assert math.isnan(t[s].cyano_cells_per_ml)
        assert math.isnan(t[s].cyano_upper_cells_per_ml)
        assert pd.isna(t[s].cyano_censor)
    assert (t["S1"].n_taxa, t["S2"].n_taxa) == (0, 1)


def test_totals_only_other_algae_is_an_exact_zero():
    t = totals_of([("S1", "Cryptomonas ovata", 400.0, "="),
                   ("S1", "Aulacoseira granulata", 900.0, "=")])["S1"]
    assert (t.cyano_censor, t.cyano_cells_per_ml, t.cyano_upper_cells_per_ml) == ("=", 0.0, 0.0)


def test_totals_of_the_wide_file():
    records, _ = read_wide()
    t = {r.sample_id: r for r in sample_totals(records, TAXA).itertuples(index=False)}
    assert list(t) == ["W01", "W02", "W03", "W04"]
    expected = {  # (total, censor, upper) from WIDE_EXPECTED; Asterionella is not counted
        "W01": (1200.0, "=", 1300.0),  # 1200 exact + ND limit 100
        "W02": (2500.0, "=", 2550.0),  # 2500 exact + '<' 50
        "W03": (1_000_120.0, ">", math.inf),  # TNTC 1e6 + 120
    }
    for s, (total, censor, upper) in expected.items():
        assert t[s].cyano_censor == censor, s
        assert t[s].cyano_cells_per_ml == pytest.approx(total, rel=RTOL, abs=0.0), s
        assert t[s].cyano_upper_cells_per_ml == pytest.approx(upper, rel=RTOL, abs=0.0), s
    assert math.isnan(t["W04"].cyano_cells_per_ml)
    assert t["W04"].chl_a_ug_per_l == pytest.approx(2.0, rel=RTOL, abs=0.0)


def test_totals_of_the_long_file_with_every_taxon_known():
    records, _ = read_long()
    taxa = {**TAXA, "Planktothrix": Taxon(cyanobacterium=True, toxin_producer=True)}
    t = {r.sample_id: r for r in sample_totals(records, taxa).itertuples(index=False)}
    assert list(t) == ["H0703", "H0710", "H0717", "H0724"]
    expected = {
        "H0703": (1200.0, "=", 1300.0, 1200.0, "="),  # Microcystis 1200 + Dolichospermum '<100'
        # Aphanizomenon 1800 + Microcystis ND (100): the only toxin producer is below detection,
        # so the toxin-producer count is censored '<100', not an exact 0
        "H0710": (1800.0, "=", 1900.0, 100.0, "<"),
        "H0717": (1_000_340.0, ">", math.inf, 1_000_340.0, ">"),  # TNTC 1e6 + Planktothrix 340
        "H0724": (0.0, "=", 0.0, 0.0, "="),  # only Cryptomonas, not a cyanobacterium
    }
    for s, (total, censor, upper, toxic, toxic_censor) in expected.items():
        assert t[s].cyano_censor == censor, s
        assert t[s].cyano_cells_per_ml == pytest.approx(total, rel=RTOL, abs=0.0), s
        assert t[s].cyano_upper_cells_per_ml == pytest.approx(upper, rel=RTOL, abs=0.0), s
        assert t[s].toxic_cells_per_ml == pytest.approx(toxic, rel=RTOL, abs=0.0), s
        assert t[s].toxic_censor == toxic_censor, s
        assert t[s].unknown_taxa == "", s


def test_totals_exclude_and_list_unknown_taxa():
    t = totals_of([("S1", "Microcystis aeruginosa", 1200.0, "="),
                   ("S1", "Planktothrix rubescens", 340.0, "="),
                   ("S1", "Woronichinia naegeliana", 80.0, "="),
                   ("S2", "Aphanizomenon flos-aquae", 500.0, "=")])
    assert t["S1"].cyano_cells_per_ml == pytest.approx(1200.0, rel=RTOL, abs=0.0)
    assert t["S1"].unknown_taxa == "Planktothrix rubescens, Woronichinia naegeliana"
    assert t["S2"].unknown_taxa == ""


def test_totals_of_the_long_file_list_its_unknown_taxon():
    records, _ = read_long()
    t = {r.sample_id: r for r in sample_totals(records, TAXA).itertuples(index=False)}
    assert t["H0717"].unknown_taxa == "Planktothrix rubescens"
    assert t["H0717"].cyano_cells_per_ml == pytest.approx(1e6, rel=RTOL, abs=0.0)
    assert t["H0717"].cyano_censor == ">"


# --- taxon table -------------------------------------------------------------------------------

def test_lookup_taxon_exact_any_case():
    assert lookup_taxon("MICROCYSTIS", TAXA) == Taxon(True, True)
    assert lookup_taxon("  cryptomonas ", TAXA) == Taxon(False)


def test_lookup_taxon_by_genus():
    assert lookup_taxon("Microcystis wesenbergii", TAXA) == Taxon(True, True)
    assert lookup_taxon("Aphanizomenon flos-aquae", TAXA) == Taxon(True, False)


def test_lookup_taxon_exact_name_wins_over_genus():
    table = {"Microcystis": Taxon(True, True), "Microcystis wesenbergii": Taxon(True, False)}
    assert lookup_taxon("microcystis wesenbergii", table) == Taxon(True, False)
    assert lookup_taxon("Microcystis aeruginosa", table) == Taxon(True, True)


def test_lookup_taxon_unknown_is_none():
    assert lookup_taxon("Planktothrix rubescens", TAXA) is None
    assert lookup_taxon("", TAXA) is None
