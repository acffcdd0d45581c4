"""Write the malformed-input corpus (run by hand: ``python tests/data/corpus/make_corpus.py``).

Each input is a small variant of the base site under ``base/`` (an hourly weather logger on
standard time and a long lab sheet in cells/L), named after its problem. What each must lead to
is stated by hand in ``cases.toml``, beside the outside fact it rests on; this script only
writes the bytes.
"""

from __future__ import annotations

import sqlite3
from datetime import datetime, timedelta
from pathlib import Path

HERE = Path(__file__).parent
START = datetime(2024, 3, 1)
HOURS = 96
HEADER = "Date,Time,AirT,Wind"


def weather_rows(hours: int = HOURS) -> list[str]:
    rows = []
    for k in range(hours):
        t = START + timedelta(hours=k)
        rows.append(f"{t:%Y-%m-%d},{t:%H:%M},{14 + k % 7}.5,{1 + k % 3}.2")
    return rows


def weather(rows: list[str], header: str = HEADER) -> str:
    return header + "\n" + "\n".join(rows) + "\n"


def with_row(k: int, row: str) -> str:
    rows = weather_rows()
    rows[k] = row
    return weather(rows)


LAB_HEADER = "SampleID,Site,Date,Taxon,Count"
LAB_ROWS = ["S1,lake,2024-03-01,Microcystis,150000",
            "S2,lake,2024-03-02,Microcystis,<100000",
            "S3,lake,2024-03-03,Microcystis,2500000",
            "S4,lake,2024-03-04,Microcystis,900000"]


def lab(rows: list[str] = LAB_ROWS, header: str = LAB_HEADER) -> str:
    return header + "\n" + "\n".join(rows) + "\n"


def lab_with(k: int, row: str) -> str:
    rows = list(LAB_ROWS)
    rows[k] = row
    return lab(rows)


def weather_inputs() -> dict[str, bytes | str]:
    rows = weather_rows()
    return {
        "empty.csv": "",
        "blank_lines_only.csv": "\n  \n\t\n",
        "header_only.csv": HEADER + "\n",
        "header_and_blank_lines.csv": HEADER + "\n\n\n",
        "spreadsheet_saved_as_csv.csv": b"PK\x03\x04\x14\x00\x06\x00" + bytes(range(256)) * 4,
        "utf16_export.csv": weather(rows).encode("utf-16"),
        "latin1_byte_in_a_value.csv": with_row(10, "2024-03-01,10:00,14.5\xb0,1.2").encode(
            "latin-1"),
        "nul_bytes_in_a_value.csv": with_row(5, "2024-03-01,05:00,1\x00\x009.5,3.2"),
        "nul_padding_after_power_loss.csv": weather(rows) + "\x00" * 12 + "\n",
        "year_2999.csv": with_row(20, "2999-03-01,20:00,16.5,3.2"),
        "year_2262.csv": with_row(20, "2262-04-12,20:00,16.5,3.2"),
        "year_0001.csv": with_row(20, "0001-03-01,20:00,16.5,3.2"),
        "year_1829_before_plausible.csv": with_row(20, "1829-03-01,20:00,16.5,3.2"),
        "day_31_february.csv": with_row(30, "2024-02-31,06:00,14.5,1.2"),
        "month_13.csv": with_row(30, "2024-13-01,06:00,14.5,1.2"),
        "time_25_00.csv": with_row(30, "2024-03-02,25:00,14.5,1.2"),
        "time_12_61.csv": with_row(30, "2024-03-02,12:61,14.5,1.2"),
        "time_blank.csv": with_row(30, "2024-03-02,,14.5,1.2"),
        "date_in_words.csv": with_row(30, "yesterday,06:00,14.5,1.2"),
        "semicolon_separated.csv": weather(rows).replace(",", ";"),
        "unknown_column.csv": weather([r + ",7" for r in rows], HEADER + ",Dewpoint"),
        "declared_column_missing.csv": weather([r.rsplit(",", 1)[0] for r in rows],
                                               "Date,Time,AirT"),
        "text_in_a_number.csv": with_row(40, "2024-03-02,16:00,warm,1.2"),
        "short_row.csv": with_row(41, "2024-03-02,17:00,14.5"),
        "long_row.csv": with_row(42, "2024-03-02,18:00,14.5,1.2,9,9"),
        "repeated_header_name.csv": weather(rows, "Date,Time,AirT,AirT"),
        "every_row_unreadable.csv": weather([f"someday,{k}:xx,warm,breezy" for k in range(20)]),
        "crlf_line_ends.csv": weather(rows).replace("\n", "\r\n"),
        "utf8_byte_order_mark.csv": "\ufeff" + weather(rows),
        "newest_first.csv": weather(rows[::-1]),
        "conflicting_duplicate_stamp.csv": weather(rows[:50] + ["2024-03-03,01:00,30.5,1.2"]
                                                   + rows[50:]),
        "identical_duplicate_stamp.csv": weather(rows[:50] + [rows[49]] + rows[50:]),
        "temperature_out_of_range.csv": with_row(44, "2024-03-02,20:00,999,1.2"),
        "negative_wind.csv": with_row(45, "2024-03-02,21:00,14.5,-3"),
        "fault_code_minus_9999.csv": with_row(46, "2024-03-02,22:00,-9999,1.2"),
        "number_too_large_for_a_float.csv": with_row(47, "2024-03-02,23:00,1e400,1.2"),
        "nan_written_as_text.csv": with_row(48, "2024-03-03,00:00,NaN,1.2"),
        "footer_line.csv": weather(rows) + "END OF DATA\n",
        "title_line_above_header.csv": "Station 4 export, Tallowbark\n" + weather(rows),
        "quoted_fields.csv": weather([",".join(f'"{f}"' for f in r.split(",")) for r in rows],
                                     '"Date","Time","AirT","Wind"'),
        "gap_of_a_day.csv": weather(rows[:30] + rows[54:]),
        "off_grid_reading.csv": weather(rows[:60] + ["2024-03-03,12:20,18.5,2.2"] + rows[60:]),
        "mixed_date_orders.csv": with_row(50, "03/03/2024,02:00,14.5,1.2"),
        "thousands_separator_in_value.csv": with_row(51, '2024-03-03,03:00,"1,234",1.2'),
    }


def lab_inputs() -> dict[str, bytes | str]:
    return {
        "empty.csv": "",
        "header_only.csv": LAB_HEADER + "\n",
        "spreadsheet_saved_as_csv.csv": b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(512),
        "text_count.csv": lab_with(1, "S2,lake,2024-03-02,Microcystis,lots"),
        "negative_count.csv": lab_with(1, "S2,lake,2024-03-02,Microcystis,-500"),
        "count_too_large.csv": lab_with(1, "S2,lake,2024-03-02,Microcystis,1e400"),
        "sampled_in_year_2999.csv": lab_with(3, "S4,lake,2999-03-04,Microcystis,900000"),
        "sampled_in_year_0001.csv": lab_with(3, "S4,lake,0001-03-04,Microcystis,900000"),
        "sampled_after_the_run_day.csv": lab_with(3, "S4,lake,2099-03-04,Microcystis,900000"),
        "day_31_february.csv": lab_with(2, "S3,lake,2024-02-31,Microcystis,2500000"),
        "date_in_words.csv": lab_with(2, "S3,lake,last tuesday,Microcystis,2500000"),
        "blank_taxon.csv": lab_with(2, "S3,lake,2024-03-03,,2500000"),
        "missing_layout_column.csv": lab(header="SampleID,Site,Date,Species,Count"),
        "site_never_named.csv": lab([r.replace(",lake,", ",TL-01,") for r in LAB_ROWS]),
        "latin1_comment.csv": lab([r + ",ok" for r in LAB_ROWS[:2]]
                                  + [LAB_ROWS[2] + ",pr\xe9l\xe8vement tardif"]
                                  + [r + ",ok" for r in LAB_ROWS[3:]],
                                  LAB_HEADER + ",Comment").encode("latin-1"),
        "conflicting_duplicate_record.csv": lab(LAB_ROWS + ["S3,lake,2024-03-03,Microcystis,4000"]),
        "short_row.csv": lab_with(1, "S2,lake,2024-03-02,Microcystis"),
        "nd_and_tntc.csv": lab(LAB_ROWS[:2] + ["S3,lake,2024-03-03,Microcystis,TNTC",
                                               "S4,lake,2024-03-04,Microcystis,ND"]),
        "unknown_taxon.csv": lab(LAB_ROWS + ["S4,lake,2024-03-04,Xenococcus,1000"]),
        "utf16_export.csv": lab().encode("utf-16"),
    }


BASE_CONFIG = """\
root = "."
data_dir = "work"
reports_dir = "reports"
models_dir = "models"

[ingest]
bad_rows = "reject"

[dialects.aws]
separator = ","
date_column = "Date"
time_column = "Time"
date_order = "ymd"
stamp_zone = "+10:00"
stamp_marks = "start"
[dialects.aws.columns]
AirT = { variable = "air_temp_c", unit = "degC" }
Wind = { variable = "wind_speed_ms", unit = "m/s" }

[sample_layouts.lab]
shape = "long"
separator = ","
date_order = "ymd"
sample_id_column = "SampleID"
site_column = "Site"
sampled_date_column = "Date"
taxon_column = "Taxon"
count_column = "Count"
count_unit = "cells/L"
detection_limit = "100000 cells/L"
upper_limit = "5000000 cells/L"

[taxa]
"Microcystis" = { cyanobacterium = true, toxin_producer = true }

[[sites]]
id = "lake"
name = "Corpus Lake"
timezone = "Australia/Melbourne"
interval = "1h"
authority = "Merrin Falls Water"
[sites.weather]
files = ["weather.csv"]
dialect = "aws"
[sites.samples]
files = ["lab.csv"]
layout = "lab"
"""


def config(old: str, new: str) -> str:
    assert old in BASE_CONFIG, old
    return BASE_CONFIG.replace(old, new)


def config_inputs() -> dict[str, bytes | str]:
    return {
        "not_utf8.toml": config('name = "Corpus Lake"', 'name = "Lac \xe9"').encode("latin-1"),
        "utf16.toml": BASE_CONFIG.encode("utf-16"),
        "nul_bytes.toml": BASE_CONFIG + "\x00\x00\n",
        "invalid_toml.toml": config('bad_rows = "reject"', 'bad_rows = reject'),
        "empty.toml": "",
        "no_sites.toml": BASE_CONFIG.split("[[sites]]")[0],
        "site_id_with_dots.toml": config('id = "lake"', 'id = "../outside"'),
        "site_id_with_space.toml": config('id = "lake"', 'id = "corpus lake"'),
        "line_break_in_name.toml": config('name = "Corpus Lake"',
                                          'name = "Corpus\\nBcc: x@example.org"'),
        "line_break_in_authority.toml": config('authority = "Merrin Falls Water"',
                                               'authority = "Merrin\\r\\nFalls"'),
        "line_break_in_mail_to.toml": BASE_CONFIG
        + '\n[service]\nmail_to = ["a@example.org\\nBcc: b@example.org"]\n',
        "unknown_key.toml": config('bad_rows = "reject"', 'bad_rows = "reject"\nspeed = 3'),
        "fill_in_left.toml": config('authority = "Merrin Falls Water"',
                                    'authority = "FILL IN: the authority that decides"'),
        "wrong_type.toml": config('interval = "1h"', 'interval = 60'),
        "unknown_time_zone.toml": config('timezone = "Australia/Melbourne"',
                                         'timezone = "Mars/Olympus"'),
        "bad_count_unit.toml": config('count_unit = "cells/L"', 'count_unit = "cells/cup"'),
        "no_count_unit.toml": config('count_unit = "cells/L"\n', ""),
        "pattern_matches_nothing.toml": config('files = ["weather.csv"]',
                                               'files = ["missing/*.csv"]'),
        "limit_disagrees_with_old_key.toml": config(
            'detection_limit = "100000 cells/L"',
            'detection_limit = "100000 cells/L"\ndetection_limit_cells_per_ml = 5'),
        "duplicate_site_ids.toml": BASE_CONFIG + BASE_CONFIG[BASE_CONFIG.index("[[sites]]"):],
    }


def model_inputs() -> dict[str, bytes | str]:
    """Model files: raw bytes, or a recipe (``*.recipe.json``) the runner applies to the demo's
    own model file: set or drop a part of it, and sign the result with the installation's key
    (``"sign": "installation"``), with another key, or not at all."""
    pickle = b"\x80\x04\x95\x1a\x00\x00\x00\x00\x00\x00\x00}\x94\x8c\x04coef\x94]\x94G?\xf0\x00" \
             b"\x00\x00\x00\x00\x00as."
    return {
        "pickle_renamed.json": pickle,
        "empty.json": "",
        "truncated.json": '{"format": "cyanorisk-model", "format_version": 3, "body": {"risk": ',
        "json_array.json": "[1, 2, 3]\n",
        "another_format.json": '{"format": "some-other-model", "weights": [1, 2]}\n',
        "format_1_file.json": '{"format": "cyanorisk-model", "format_version": 1, '
                              '"cyanorisk_version": "0.1.0", "body": {}, "checksum": "00"}\n',
        "utf16.json": '{"format": "cyanorisk-model"}'.encode("utf-16"),
        "edited_coefficient.recipe.json":
            '{"set": [["body", "risk", "coef", 0], 25.0], "sign": "keep"}\n',
        "edited_with_a_recomputed_sha256.recipe.json":
            '{"set": [["body", "risk", "cuts", 0], -30.0], "sign": "sha256"}\n',
        "signed_by_another_installation.recipe.json": '{"sign": "other"}\n',
        "signature_removed.recipe.json": '{"drop": ["signature"], "sign": "keep"}\n',
        "count_section_missing.recipe.json": '{"drop": ["body", "count"], "sign": "installation"}\n',
        "string_coefficients.recipe.json":
            '{"set": [["body", "risk", "coef"], ["0.1", "0.2"]], "sign": "installation"}\n',
        "levels_not_a_list.recipe.json":
            '{"set": [["body", "risk", "levels"], "Alert Level 1"], "sign": "installation"}\n',
        "no_signing_key_in_data_folder.recipe.json": '{"sign": "keep", "remove_key": true}\n',
    }


def store_inputs() -> dict[str, bytes]:
    garbage = b"this is not a database\n" * 40
    out = {"not_a_database.db": garbage, "empty_file.db": b""}
    path = HERE / "store" / "truncated.db"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.unlink(missing_ok=True)
    with sqlite3.connect(path) as db:
        db.execute("CREATE TABLE t (x)")
        db.executemany("INSERT INTO t VALUES (?)", [("x" * 500,)] * 200)
    whole = path.read_bytes()
    path.unlink()
    out["truncated.db"] = whole[:len(whole) // 3]
    return out


def write_all() -> None:
    for folder, inputs in (("weather", weather_inputs()), ("lab", lab_inputs()),
                           ("config", config_inputs()), ("model", model_inputs()),
                           ("store", store_inputs())):
        for name, data in inputs.items():
            path = HERE / folder / name
            path.parent.mkdir(parents=True, exist_ok=True)
            if isinstance(data, str):
                data = data.encode("utf-8")
            path.write_bytes(data)
    (HERE / "base").mkdir(exist_ok=True)
    (HERE / "base" / "weather.csv").write_text(weather(weather_rows()), encoding="utf-8")
    (HERE / "base" / "lab.csv").write_text(lab(), encoding="utf-8")
    (HERE / "base" / "site.toml").write_text(BASE_CONFIG, encoding="utf-8")


if __name__ == "__main__":
    write_all()
