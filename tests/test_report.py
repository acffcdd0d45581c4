"""The daily report as a manager reads it: the level in force never drops below the lab's, the
numbers agree and say what they are, explanations keep the literature's directions, and the page
is escaped, fits a phone and prints its summary on the first A4 page.

Uses the session's demo site (tests/conftest.py). Outside checks are named beside each: the
alert-level framework (REFERENCES.md), the two-consecutive-samples step-down rule (common
practice, no source), the HTML Living Standard for escaping, Chromium's own print to PDF.
"""

from __future__ import annotations

import dataclasses
import html
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.align import known_from, lab_record
from cyanorisk.cli import main
from cyanorisk.drivers import Effect, lookup
from cyanorisk.forecast import (
    STATUS_ASSESSED,
    STATUS_INSUFFICIENT,
    assess,
    count_check,
    no_assessment,
    peak_band,
)
from cyanorisk.levels import classify, level_in_force
from cyanorisk.pipeline import SitePipeline
from cyanorisk.report.daily import render_html, render_text
from cyanorisk.report.document import report_document
from cyanorisk.spec import Thresholds
from cyanorisk.training import season_of

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")


def print_to_pdf(page: Path, pdf: Path, profile: Path) -> None:
    """Print a page to PDF with headless Chromium, as a browser's Print would (no header or
    footer); ``profile`` is a throwaway user-data folder."""
    subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                    "--disable-background-networking", "--disable-component-update",
                    "--disable-sync", f"--user-data-dir={profile}",
                    "--no-pdf-header-footer", f"--print-to-pdf={pdf}", page.as_uri()],
                   check=True, capture_output=True, timeout=120)


def assess_day(demo_site, day, *, totals=None, thresholds=None, spec=None, window_days=None):
    """The demo's assessment of a local day; ``window_days`` keeps only that much weather
    before the day (enough for the drivers' windows) to make a scan of many days quick."""
    spec = spec or demo_site.spec
    weather = demo_site.weather
    day = pd.Timestamp(day)
    if window_days is not None:
        start = (day - pd.Timedelta(days=window_days)).tz_localize(spec.timezone)
        end = (day + pd.Timedelta(days=1)).tz_localize(spec.timezone)
        weather = weather[(weather.index >= start) & (weather.index < end)]
    return assess(spec, demo_site.models, weather,
                  demo_site.totals if totals is None else totals, day,
                  thresholds or Thresholds.default(spec.levels), demo_site.clean.rows)


@pytest.fixture(scope="module")
def scan(demo_site):
    """Every day of the demo's last season and the second half of the one before (2024-01-01
    to the record's end: a bloom's decline, a winter and a new bloom), assessed with one day of
    history each."""
    spec = dataclasses.replace(demo_site.spec, history_days=1)
    days = pd.date_range("2024-01-01", "2025-01-14", freq="D")
    assert set(season_of(days, spec.season_start_month)) == {2023, 2024}
    record = lab_record(demo_site.totals, spec.scheme, spec.lab_delay_days, spec.timezone)
    return [assess_day(demo_site, d, spec=spec, window_days=10, totals=record) for d in days]


# ---------------------------------------------------------------------------------------------
# 1. The level in force
# ---------------------------------------------------------------------------------------------

def test_the_level_stated_is_never_below_the_lab_confirmed_level_in_force(scan, demo_site):
    spec = demo_site.spec
    totals = demo_site.totals
    known_at = known_from(totals, spec.lab_delay_days, spec.timezone)
    levels = classify(totals, spec.scheme)
    at_alert = 0
    for a in scan:
        assert a.level_rank is not None
        assert a.level_rank >= a.in_force.rank
        # independent of the code's rule: with two consecutive samples needed to step down
        # (common practice, no source), the level in force is at least the higher level of the
        # last two decided samples known at the issue time
        known = (known_at <= a.issue).to_numpy() & ~np.isnan(levels)
        order = np.argsort(totals["sampled_at"].to_numpy()[known], kind="stable")
        last_two = levels[known][order][-2:]
        assert a.level_rank >= last_two.max()
        # its cautions are those of the level stated, never routine while the lab is higher
        if a.in_force.rank >= 2:
            at_alert += 1
            assert "Routine monitoring: keep the usual sampling schedule." not in a.cautions
    assert at_alert > 30  # the scan did cover days at an alert level


def test_an_alert_level_steps_down_only_after_two_samples_below(demo_site):
    # REFERENCES.md: stepping down after two consecutive samples below (common practice)
    spec = demo_site.spec
    day = pd.Timestamp("2025-01-14")
    a = assess_day(demo_site, day)
    assert a.in_force.level == "Alert Level 1"
    totals = demo_site.totals.copy()
    # the last known sample now reads 'below detection': one sample below, Alert Level 1 holds
    known = known_from(totals, spec.lab_delay_days, spec.timezone) <= a.issue
    last = totals[known].sort_values("sampled_at").index[-1]
    totals.loc[last, ["cyano_cells_per_ml", "cyano_censor"]] = [100.0, "<"]
    one = assess_day(demo_site, day, totals=totals)
    assert (one.in_force.level, one.in_force.below_since) == ("Alert Level 1", 1)
    assert one.level_rank >= 2
    # and the one before it too: two in a row, it steps down
    before = totals[known].sort_values("sampled_at").index[-2]
    totals.loc[before, ["cyano_cells_per_ml", "cyano_censor"]] = [100.0, "<"]
    two = assess_day(demo_site, day, totals=totals)
    assert two.in_force.rank == 0
    assert level_in_force([2, 0, 0], 2).rank == 0  # the rule itself


def test_at_a_level_now_the_headline_gives_the_chance_of_the_next(scan, demo_site):
    from cyanorisk.words import date, percent

    at_level_1 = [a for a in scan if a.status == STATUS_ASSESSED and a.level_basis == "lab"
                  and a.level == "Alert Level 1"]
    assert at_level_1
    for a in at_level_1:
        p = a.forecast.probabilities["Alert Level 2"]
        when = date(a.in_force.set_by_sampled_at, demo_site.spec.timezone)
        assert a.headline == (f"At Alert Level 1 now (lab, sample of {when}); {percent(p)} "
                              "chance of Alert Level 2 within 7 days")
        assert re.search(r"(?<!\d)(0|100)%", a.headline) is None  # '<1%' and '>99%' at the ends


def test_no_assessment_states_the_level_in_force(demo_site):
    spec = demo_site.spec
    pipeline = demo_site.pipeline
    lab = pipeline.lab_level_or_none("2025-01-14")
    assert lab.level == assess_day(demo_site, "2025-01-14").in_force.level == "Alert Level 1"
    a = no_assessment(spec, pd.Timestamp("2025-01-14"), "the model file is unreadable", lab)
    c = report_document(a)
    assert (c["level"], c["level_basis"]) == ("Alert Level 1", "lab")
    assert "Routine monitoring: keep the usual sampling schedule." not in c["cautions"]
    assert "Level in force from the lab: Alert Level 1" in c["headline"]


def test_toxins_above_a_guideline_value_raise_their_own_caution(demo_site):
    # WHO 2020: 1 ug/L provisional lifetime drinking-water value for microcystins (REFERENCES.md, V)
    spec = demo_site.spec
    a = assess_day(demo_site, "2025-01-14")
    totals = demo_site.totals.copy()
    known = known_from(totals, spec.lab_delay_days, spec.timezone) <= a.issue
    last = totals[known].sort_values("sampled_at").index[-1]
    totals.loc[last, ["microcystin_ug_per_l", "microcystin_censor"]] = [1.28, "="]
    b = assess_day(demo_site, "2025-01-14", totals=totals)
    (toxin,) = b.toxins
    assert toxin.value_ug_per_l == 1.28
    assert [g.value_ug_per_l for g in toxin.above] == [0.3, 1.0]  # not 1.6 nor 12
    said = [c for c in b.cautions if c.startswith("Microcystins of 1.3 ug/L")]
    assert len(said) == 1 and "WHO provisional lifetime drinking-water value of 1.0 ug/L" in said[0]
    assert not [c for c in a.cautions if c.startswith("Microcystins of")]  # '<0.1' raises none


def test_next_sample_due_follows_the_level_and_flags_overdue(demo_site):
    # Chorus & Bartram 1999 (REFERENCES.md, from memory): about twice weekly at Alert Level 1
    a = assess_day(demo_site, "2025-01-14")
    s = a.sampling
    assert s.every_days == 3.5
    last = pd.Timestamp(s.last_sampled_at).tz_convert(demo_site.spec.timezone)
    assert s.next_due == last.tz_localize(None).normalize() + pd.Timedelta(days=4)
    assert s.overdue == (pd.Timestamp("2025-01-14") > s.next_due)
    assert any(x.startswith("A sample is overdue") for x in a.actions) == s.overdue


# ---------------------------------------------------------------------------------------------
# 2. Numbers that agree
# ---------------------------------------------------------------------------------------------

def test_the_peak_band_comes_from_the_probabilities(demo_site):
    spec = demo_site.spec
    band = peak_band({"Vigilance": 0.95, "Alert Level 1": 0.62, "Alert Level 2": 0.04}, spec)
    # masses: below 0.05, Vigilance 0.33, Alert Level 1 0.58, Alert Level 2 0.04
    assert (band["level"], band["low"], band["high"]) == ("Alert Level 1", 2_000.0, 100_000.0)
    assert band["probability"] == pytest.approx(0.58, abs=1e-12)


def test_a_count_median_against_the_probabilities_is_said():
    from cyanorisk.levels import scheme
    from cyanorisk.spec import SiteSpec

    spec = SiteSpec("x", "UTC", scheme("who1999_drinking"))
    probs = {"Vigilance": 0.9, "Alert Level 1": 0.11, "Alert Level 2": 0.01}
    note = count_check(probs, 2_264.0, spec)  # the case a manager found: 2,264 vs 11%
    assert note is not None and "2,264 cells/mL" in note and "11%" in note
    assert count_check(probs, 900.0, spec) is None


def test_a_tuned_threshold_below_half_is_worded_as_a_watch(demo_site):
    spec = demo_site.spec
    day = "2024-12-04"
    base = assess_day(demo_site, day)
    p1 = base.forecast.probabilities["Alert Level 1"]
    assert 0.07 < p1 < 0.5
    tuned = Thresholds({**Thresholds.default(spec.levels).warn_at, "Alert Level 1": 0.07},
                       "tuned on the backtest of seasons 2017-2024", tuned=True)
    a = assess_day(demo_site, day, thresholds=tuned)
    assert a.forecast.watch and a.level == "Alert Level 1" and a.level_basis == "outlook"
    assert a.headline.startswith("Alert Level 1 watch: ")
    assert "above this site's warning threshold of 7%" in a.headline


def test_insufficient_data_gives_exit_status_3_and_a_written_report(demo_site, tmp_path, capsys):
    config = demo_site.write_config(tmp_path / "site.toml", reports_dir=tmp_path / "reports")
    assert main(["report", "--config", str(config), "--as-of", "2025-01-25"]) == 3
    out = capsys.readouterr().out
    assert "Insufficient data for an outlook" in out
    assert (tmp_path / "reports" / "tallowbark" / "tallowbark_2025-01-25.html").is_file()


# ---------------------------------------------------------------------------------------------
# 3. Explanations a manager can read
# ---------------------------------------------------------------------------------------------

def test_no_driver_shown_has_a_sign_against_its_cited_direction(scan, demo_site):
    # directions from the driver glossary (cyanorisk.drivers, each with its source)
    for name in demo_site.models.risk.drivers:
        info = lookup(name)
        if info.effect is not Effect.NONE:
            coef = dict(zip(demo_site.models.risk.feature_names_in_,
                            demo_site.models.risk.coef_, strict=True))[name]
            assert np.sign(coef) in (0, int(info.effect)), name
    shown = 0
    for a in scan[::7]:
        for d in a.forecast.drivers:
            if d["direction"] not in ("raises", "lowers"):
                continue
            shown += 1
            effect = lookup(d["driver"]).effect
            above = d["difference"] > 0
            assert d["direction"] == ("raises" if above == (effect is Effect.RAISES) else "lowers")
            assert "e+" not in d["text"] and "e-" not in d["text"]  # no scientific notation
    assert shown > 50


def test_the_page_shows_no_log_odds_and_no_season_terms(demo_site):
    page = render_html(assess_day(demo_site, "2025-01-14"))
    assert "log-odds" not in page and "cosine" not in page and "sine" not in page
    assert "mid-January" in page  # drivers against the normal for the time of year


# ---------------------------------------------------------------------------------------------
# 4. The page
# ---------------------------------------------------------------------------------------------

def test_a_censored_count_is_escaped_in_the_page(demo_site):
    spec = demo_site.spec
    a = assess_day(demo_site, "2025-01-14")
    totals = demo_site.totals.copy()
    known = known_from(totals, spec.lab_delay_days, spec.timezone) <= a.issue
    last = totals[known].sort_values("sampled_at").index[-1]
    totals.loc[last, ["cyano_cells_per_ml", "cyano_censor"]] = [300.0, "<"]
    page = render_html(assess_day(demo_site, "2025-01-14", totals=totals))
    # HTML Living Standard 13.1.2.6: '<' in text must be escaped as a character reference
    assert "&lt;300 cells/mL" in page
    assert "<300" not in page
    # the plain-text summary is not HTML: it gives the count as the lab wrote it
    assert "<300 cells/mL" in render_text(assess_day(demo_site, "2025-01-14", totals=totals))


def test_the_summary_strip_carries_level_action_and_who_decides(demo_site):
    a = assess_day(demo_site, "2025-01-14")
    page = render_html(a)
    start, end = page.index('<section id="summary"'), page.index("</section>")
    strip = html.unescape(page[start:end])
    assert a.level.upper() in strip  # the badge's text: the level does not rely on colour
    assert a.actions[0] in strip
    assert a.deferral in strip
    assert '<svg viewBox="0 0 24 24"' in page[start:end]  # a shape for the level


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (Debian package "
                                             "'chromium'; .ci/run installs it)")
def test_the_first_printed_page_holds_the_level_the_action_and_who_decides(demo_site, tmp_path):
    pypdf = pytest.importorskip("pypdf")
    a = assess_day(demo_site, "2025-01-14")
    page = tmp_path / "report.html"
    page.write_text(render_html(a), encoding="utf-8")
    pdf = tmp_path / "report.pdf"
    print_to_pdf(page, pdf, tmp_path / "profile")
    reader = pypdf.PdfReader(pdf)
    first = reader.pages[0]
    # A4 is 595 x 842 points (ISO 216)
    assert (round(float(first.mediabox.width)), round(float(first.mediabox.height))) == (595, 842)
    text = " ".join(first.extract_text().split())
    assert a.level.upper() in text
    assert " ".join(a.actions[0].split()[:6]) in text
    assert "Merrin Falls Water and the regional health unit" in text
    assert len(reader.pages) >= 2  # the details follow on later pages


def test_what_changed_is_said_from_the_previous_report(demo_site, tmp_path):
    from cyanorisk.forecast import Previous, changes_since

    a = assess_day(demo_site, "2025-01-14")
    prev = Previous("2025-01-13", STATUS_ASSESSED, "Vigilance",
                    {"Vigilance": 0.9, "Alert Level 1": 0.4, "Alert Level 2": 0.01}, None)
    said = changes_since(a, prev)
    assert said[0] == "Compared with the report for 2025-01-13:"
    assert f"level Vigilance -> {a.level}" in said
    from cyanorisk.words import date
    when = date(a.observed.last_sampled_at, demo_site.spec.timezone)
    assert any(s.startswith(f"new lab result: sample of {when}") for s in said)
    assert changes_since(a, None) == ["No earlier report is recorded for this site."]
    same = Previous("2025-01-13", STATUS_ASSESSED, a.level, a.forecast.probabilities,
                    pd.Timestamp(a.observed.last_sampled_at).isoformat())
    assert changes_since(a, same)[1:] == ["nothing changed"]


def test_insufficient_status_in_the_scan_keeps_the_level(scan):
    insufficient = [a for a in scan if a.status == STATUS_INSUFFICIENT]
    for a in insufficient:
        assert a.forecast.probabilities is None
        assert a.level_basis in ("lab", None)


def test_the_pipeline_assessment_matches_the_core(demo_site):
    got = SitePipeline.of(demo_site.config, demo_site.site).assess("2025-01-14")
    want = assess_day(demo_site, "2025-01-14")
    assert got.forecast.probabilities == want.forecast.probabilities
    assert Path(demo_site.pipeline.workspace.weather).is_file()
