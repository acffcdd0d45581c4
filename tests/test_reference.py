"""The configuration reference is complete and up to date: every key the loader accepts is in
``docs/configuration.md``, and the file is what the generator writes today."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from cyanorisk import reference
from cyanorisk.config import _Reader, load_config

DOCS = Path(__file__).parents[1] / "docs" / "configuration.md"

FULL = """
root = "."
data_dir = "w"
reports_dir = "r"
models_dir = "m"
[ingest]
bad_rows = "reject"
[demo]
out_dir = "demo_data"
[service]
catch_up = false
[compute]
engine = "local"
workers = 2
[dialects.logger]
separator = ","
[dialects.logger.columns]
T = { variable = "air_temp_c", unit = "degC" }
[sample_layouts.lab]
shape = "long"
taxon_column = "Taxon"
count_column = "Count"
[taxa]
"Microcystis" = { cyanobacterium = true }
[schemes.local]
title = "Local"
levels = { "Alert" = { cyano_cells_per_ml = 5000 } }
[[sites]]
id = "x"
name = "X"
timezone = "UTC"
[sites.weather]
files = ["w/*.csv"]
dialect = "logger"
[sites.weather.period]
start = 2020-01-01
[sites.samples]
files = ["l/*.csv"]
layout = "lab"
[sites.drivers]
issue_time = "06:00"
[sites.alerts]
scheme = "local"
[sites.model]
horizon_days = 7
"""

TABLES = {"ingest", "dialects", "sample_layouts", "taxa", "schemes", "sites", "demo", "service",
          "compute", "columns", "weather", "samples", "drivers", "alerts", "model", "period"}
"""Keys that open a table of their own (documented as a section, not as a key)."""


def section_of(where: str) -> str:
    """The reference section of a place the loader names (as in its error messages)."""
    plain = re.sub(r"\[\d+\]", "", where)
    parts = plain.split(".") if plain else []
    if not parts:
        return "Top level"
    head = parts[0]
    if head == "sites":
        return "[[sites]]" if len(parts) == 1 else f"[sites.{'.'.join(parts[1:])}]"
    if head in ("dialects", "sample_layouts", "schemes"):
        if len(parts) >= 3 and parts[2] == "columns":
            return "[dialects.NAME.columns]"
        return f"[{head}.NAME]"
    return f"[{head}]"


@pytest.fixture(scope="module")
def accepted(tmp_path_factory) -> dict[str, set[str]]:
    """Section -> the keys the loader accepts there, recorded while it reads FULL."""
    seen: dict[str, set[str]] = {}
    real = _Reader.keys

    def recording(self, table, allowed, where):
        seen.setdefault(section_of(where), set()).update(set(allowed) - TABLES)
        return real(self, table, allowed, where)

    path = tmp_path_factory.mktemp("ref") / "full.toml"
    path.write_text(FULL, encoding="utf-8")
    _Reader.keys = recording
    try:
        load_config(path, check_files=False)
    finally:
        _Reader.keys = real
    return seen


def test_every_key_the_loader_accepts_is_documented(accepted):
    documented = reference.documented()
    for section, keys in accepted.items():
        assert section in documented, f"no section {section} in the reference"
        assert keys <= documented[section], (section, sorted(keys - documented[section]))


def test_the_reference_documents_no_key_the_loader_refuses(accepted):
    for section, keys in reference.documented().items():
        extra = keys - accepted.get(section, set()) - TABLES  # a sub-table may be shown as a key
        assert not extra, (section, sorted(extra))


def test_every_key_has_a_type_a_default_and_a_meaning():
    for s in reference.sections():
        for k in s.keys:
            assert k.kind and k.default and k.doc, (s.title, k.name)


def test_the_reference_file_is_up_to_date():
    assert DOCS.read_text(encoding="utf-8") == reference.markdown(), (
        "docs/configuration.md is out of date: run `make docs`")
