"""The pages over all sites (cyanorisk.report.overview): the overview index.html, each site's
latest.html and its history, rewritten from the store by every daily run."""

from __future__ import annotations

import csv
import dataclasses
import html
import os
import re

import pytest

from conftest import SISTER
from cyanorisk.config import load_config
from cyanorisk.report.overview import HISTORY_COLUMNS, Row, overview_html, slug
from cyanorisk.service.jobs import run_daily
from cyanorisk.service.store import IssuedReport, Store
from test_jobs import LOW_DAY, NEXT_DAY, RISE_DAY, SITE, THRESHOLDS, Clock
from test_report import CHROMIUM, print_to_pdf

ODD_NAME = "Weir <Pool> & Co's"
"""A site name that must be escaped everywhere it is shown."""


@pytest.fixture(scope="module")
def ran(tmp_path_factory, two_sites):
    """Two sites after the daily runs of three days, the middle one run again after the
    thresholds changed (a second revision)."""
    tmp = tmp_path_factory.mktemp("overview")
    config = load_config(two_sites.write_config(tmp, name=ODD_NAME))
    clock = Clock()
    for day in (LOW_DAY, NEXT_DAY):
        run_daily(day, config, clock=clock)
    run_daily(RISE_DAY, config, clock=clock)  # an earlier day reported after a later one
    (config.models_dir / f"{SITE}.thresholds.toml").write_text(THRESHOLDS, encoding="utf-8")
    run_daily(RISE_DAY, config, clock=clock)
    return config


def rows_of(page: str) -> list[str]:
    return re.findall(r'<tr data-site="([^"]+)"', page)


def test_the_overview_has_a_row_per_site_with_working_links(ran):
    page = (ran.reports_dir / "index.html").read_text(encoding="utf-8")
    assert sorted(rows_of(page)) == sorted([SITE, SISTER])
    for site_id in (SITE, SISTER):
        for link in (f"{site_id}/latest.html", f"{site_id}/history.html"):
            assert f'href="{link}"' in page
            assert (ran.reports_dir / link).is_file()


def test_latest_is_the_report_of_the_newest_day_even_after_an_older_day_is_run(ran):
    # NEXT_DAY is the newest day reported; RISE_DAY (earlier) was run after it
    for site_id in (SITE, SISTER):
        folder = ran.reports_dir / site_id
        assert (folder / "latest.html").read_bytes() == \
            (folder / f"{site_id}_{NEXT_DAY}.html").read_bytes()
        assert (folder / "latest.json").read_bytes() == \
            (folder / f"{site_id}_{NEXT_DAY}.json").read_bytes()


def test_the_history_lists_every_revision_with_its_reason(ran):
    with Store(ran.store_url) as store:
        recorded = store.reports(SITE)
    with open(ran.reports_dir / SITE / "history.csv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    levels = ran.site(SITE).spec.levels
    assert list(rows[0]) == HISTORY_COLUMNS + [f"probability_{slug(n)}" for n in levels]
    assert [(r["as_of"], int(r["revision"]), r["reason"]) for r in rows] == \
        [(r.as_of, r.revision, r.reason) for r in recorded]
    assert [(r["as_of"], r["revision"]) for r in rows] == [
        (LOW_DAY, "1"), (RISE_DAY, "1"), (RISE_DAY, "2"), (NEXT_DAY, "1")]
    assert [r["in_force"] for r in rows] == ["True", "False", "True", "True"]
    assert rows[2]["reason"] == "inputs changed: thresholds changed"
    for row, report in zip(rows, recorded, strict=True):
        assert row["level"] == (report.level or "")
        for name in levels:
            assert float(row[f"probability_{slug(name)}"]) == pytest.approx(
                report.probabilities[name], abs=1e-12)
        assert float(row["last_count_cells_per_ml"]) == report.summary["last_count_cells_per_ml"]
    page = (ran.reports_dir / SITE / "history.html").read_text(encoding="utf-8")
    days = re.findall(r'<tr data-day="([^"]+)"', page)
    assert days == [NEXT_DAY, RISE_DAY, LOW_DAY]  # newest first, one row per day
    assert "revision 2" in page and "inputs changed: thresholds changed" in page


def test_pages_are_escaped_and_self_contained(ran):
    pages = [ran.reports_dir / "index.html", ran.reports_dir / SISTER / "history.html"]
    for path in pages:
        text = path.read_text(encoding="utf-8")
        assert ODD_NAME not in text and html.escape(ODD_NAME) in text
        assert not re.search(r'(src|href)="(https?:)?//', text)  # nothing fetched from elsewhere
        assert "<script src" not in text and "<link" not in text


def test_pages_follow_the_umask(tmp_path, two_sites):
    config = load_config(two_sites.write_config(tmp_path))
    old = os.umask(0o027)
    try:
        run_daily(RISE_DAY, config, clock=Clock())
    finally:
        os.umask(old)
    for path in (config.reports_dir / "index.html", config.reports_dir / SITE / "history.csv",
                 config.reports_dir / SITE / "latest.html"):
        assert path.stat().st_mode & 0o777 == 0o640


def report(site_id: str, rank: int | None, level: str | None, status: str = "assessed",
           probabilities: dict | None = None, as_of: str = NEXT_DAY) -> IssuedReport:
    return IssuedReport(site_id, as_of, 1, status, rank, level, probabilities or {}, None, {},
                        "", {}, [], "", "", summary={"status_reasons": ["weather too old"]})


def test_worse_states_sort_first(ran):
    """Common practice, no source: a watch list puts the sites needing action on top."""
    base = ran.site(SITE)
    site = {k: dataclasses.replace(base, id=k, name=k.title()) for k in "abcdef"}
    levels = base.spec.levels
    rows = [
        Row(site["a"], report("a", 0, f"below {levels[0]}", probabilities={levels[0]: 0.6}), {}, True),
        Row(site["b"], report("b", 2, levels[1]), {}, True),
        Row(site["c"], None, {}, False),  # never reported
        Row(site["d"], report("d", 2, levels[1], "insufficient data"), {"status_reasons": ["old"]},
            True),
        Row(site["e"], report("e", 0, f"below {levels[0]}", probabilities={levels[0]: 0.1}), {}, True),
        Row(site["f"], report("f", 3, levels[2], as_of=LOW_DAY), {}, False),
    ]
    rows.sort(key=Row.sort_key)
    assert [r.site.id for r in rows] == ["f", "d", "b", "c", "a", "e"]
    assert rows[0].attention == f"last report is for {LOW_DAY}"
    page = overview_html(rows, "All sites", NEXT_DAY)
    assert rows_of(page) == ["f", "d", "b", "c", "a", "e"]
    assert "no report recorded yet" in page and "insufficient data: old" in page


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (Debian package "
                                             "'chromium'; .ci/run installs it)")
def test_thirty_sites_print_on_one_a4_page(ran, tmp_path):
    pypdf = pytest.importorskip("pypdf")
    base = ran.site(SITE)
    with Store(ran.store_url) as store:
        latest = store.latest_report(SITE)
    rows = [Row(dataclasses.replace(base, id=f"site{i:02d}", name=f"Reservoir number {i}"),
                dataclasses.replace(latest, site_id=f"site{i:02d}"), latest.summary, True)
            for i in range(30)]
    page = tmp_path / "index.html"
    page.write_text(overview_html(rows, "All sites", NEXT_DAY), encoding="utf-8")
    pdf = tmp_path / "index.pdf"
    print_to_pdf(page, pdf, tmp_path / "profile")
    reader = pypdf.PdfReader(pdf)
    assert len(reader.pages) == 1
    text = " ".join(reader.pages[0].extract_text().split())
    assert text.count("sample ") == 30 and text.count("weather ") == 30  # every row, whole
    assert "cells/mL" in text
