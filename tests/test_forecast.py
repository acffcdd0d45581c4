"""The daily assessment (cyanorisk.forecast), its renderings (cyanorisk.report.daily), the report
orchestration (cyanorisk.reporting) and the ``cyanorisk report`` command, on the demo reservoir.

DESIGN.md: a report states the data's freshness, gives no level when the data are stale
('insufficient data'), and says plainly that the advisory decision belongs to the local water
authority or health department. The HTML page is self-contained (no network resources).
"""

from __future__ import annotations

import base64
import dataclasses
import json
from collections import Counter
from html.parser import HTMLParser
from importlib import resources
from pathlib import Path

import jsonschema
import pandas as pd
import pytest

from cyanorisk import words
from cyanorisk.cli import main
from cyanorisk.config import load_config
from cyanorisk.features import issue_instants
from cyanorisk.forecast import STATUS_ASSESSED, STATUS_INSUFFICIENT, Assessment, assess
from cyanorisk.ingest.samples import empty_totals
from cyanorisk.levels import DEFERRAL, GENERAL_CAUTIONS, Role, cautions
from cyanorisk.pipeline import SitePipeline
from cyanorisk.report.daily import render_json
from cyanorisk.report.document import report_document
from cyanorisk.spec import Thresholds

SECTIONS = ["summary", "outlook", "lab", "cautions", "drivers", "freshness", "plots", "quality",
            "model", "deferral"]
"""Section ids of the HTML page, in page order (cyanorisk.report.daily.render_html): the
summary strip and what a manager acts on first, then the details."""
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
"""The first eight bytes of every PNG file (PNG specification, ISO/IEC 15948, section 5.2)."""
VOID = {"meta", "img", "br", "hr", "link", "input", "source", "col", "area", "base", "wbr"}
"""HTML elements without an end tag (HTML Living Standard, 13.1.2 'Void elements')."""
WEATHER_FREE_DRIVERS = {"last_count_log10", "last_count_censored", "last_count_age_days",
                        "season_sin", "season_cos"}
"""Default drivers that do not come from the weather record (cyanorisk.model.prepare)."""
GENERAL_KEYWORDS = ("Boiling water does not remove", "children, pets and livestock",
                    "see a doctor")
"""What the general cautions must say (cyanorisk.levels.GENERAL_CAUTIONS)."""


def report_schema() -> dict:
    text = resources.files("cyanorisk").joinpath("data", "report.schema.json").read_text("utf-8")
    return json.loads(text)


def validate(document: dict) -> None:
    schema = report_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator(schema).validate(document)


def strict_json(text: str):
    """Parse standard JSON only (RFC 8259 has no NaN or Infinity)."""
    def refuse(constant: str):
        raise ValueError(f"{constant} is not JSON (RFC 8259)")
    return json.loads(text, parse_constant=refuse)


def files_under(folder: Path) -> list[str]:
    """Every file under ``folder``, hidden temporary files included."""
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*") if p.is_file())


class Page(HTMLParser):
    """What the report page holds: sections, images, resource references, text per section,
    and whether every end tag closes the element opened last."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.section: str | None = None
        self.sections: list[str] = []
        self.images: list[tuple[str | None, dict]] = []
        self.references: list[tuple[str, str, str]] = []
        self.tags: Counter = Counter()
        self.text: dict[str, str] = {}
        self.items: dict[str, list[str]] = {}
        self.style = ""
        self.open: list[str] = []
        self.nesting_errors: list[str] = []
        self._li: list[str] | None = None
        self.meta: dict[str, str] = {}
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags[tag] += 1
        if tag not in VOID:
            self.open.append(tag)
        for name, value in attrs:
            if name in ("src", "href", "action", "data", "srcset", "poster"):
                self.references.append((tag, name, value or ""))
        if tag == "section":
            self.section = a.get("id")
            self.sections.append(self.section)
            self.text[self.section] = ""
            self.items[self.section] = []
        if tag == "img":
            self.images.append((self.section, a))
        if tag == "meta" and "name" in a:
            self.meta[a["name"]] = a.get("content", "")
        if tag == "li":
            self._li = []

    def handle_endtag(self, tag):
        if not self.open or self.open[-1] != tag:
            self.nesting_errors.append(f"</{tag}> closes {self.open[-1:]}")
        else:
            self.open.pop()
        if tag == "section":
            self.section = None
        if tag == "li" and self._li is not None and self.section:
            self.items[self.section].append("".join(self._li))
            self._li = None

    def handle_data(self, data):
        if self.open and self.open[-1] == "style":
            self.style += data
        if self.section:
            self.text[self.section] += data
        if self._li is not None:
            self._li.append(data)


def local_day(stamp: pd.Timestamp, timezone: str) -> pd.Timestamp:
    return stamp.tz_convert(timezone).tz_localize(None).normalize()


def last_reading_end(demo_site) -> pd.Timestamp:
    """End of the last interval of the demo's weather record [UTC]."""
    return demo_site.weather.index[-1] + demo_site.site.interval


def report_day(demo_site) -> pd.Timestamp:
    """The local day of the default report: the last day whose issue time the record reaches."""
    return local_day(last_reading_end(demo_site) - pd.Timedelta(minutes=1), demo_site.site.timezone)


def assess_demo(demo_site, as_of, spec=None, totals=None) -> Assessment:
    """The assessment of the demo site for a local day with its saved models and the default
    thresholds, optionally for a variant of its specification or with other per-sample totals."""
    spec = demo_site.spec if spec is None else spec
    return assess(spec, demo_site.models, demo_site.weather,
                  demo_site.totals if totals is None else totals, as_of,
                  Thresholds.default(spec.levels), demo_site.clean.rows)


def write_report(config, assessment: Assessment) -> list[Path]:
    """The site pipeline's writing of a report, under the configuration's reports folder."""
    return SitePipeline.of(config, config.sites[0]).write_report(assessment)


def samples_before(demo_site, day: pd.Timestamp, days: int) -> pd.DataFrame:
    """The demo's per-sample totals without the samples of the ``days`` days before ``day``."""
    totals = demo_site.totals
    cut = (day - pd.Timedelta(days=days)).tz_localize(demo_site.site.timezone)
    return totals[totals["sampled_at"] < cut].reset_index(drop=True)


def find_day(demo_site, wanted) -> tuple[pd.Timestamp, Assessment]:
    """The latest day (going back 10 days at a time) whose assessment satisfies ``wanted``."""
    end = report_day(demo_site)
    for back in range(0, 720, 10):
        day = end - pd.Timedelta(days=back)
        a = assess_demo(demo_site, day)
        if wanted(report_document(a)):
            return day, a
    raise AssertionError("no such day in the demo record")


# ---------------------------------------------------------------------------------------------
# The daily report of the demo reservoir: three files, written together
# ---------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def written(demo_site, tmp_path_factory):
    """The default report of the demo (the last day of the record), written under a fresh
    reports/ folder by the orchestrator."""
    folder = tmp_path_factory.mktemp("written")
    config = load_config(demo_site.write_config(folder / "site.toml",
                                                reports_dir=folder / "reports"))
    assessment = SitePipeline.of(config, config.sites[0]).assess()
    paths = write_report(config, assessment)
    return config, assessment, paths


def test_report_writes_html_json_and_text_under_reports_site(written, demo_site):
    config, assessment, paths = written
    day = report_day(demo_site)
    stem = f"{demo_site.site.id}_{day.date()}"
    folder = config.reports_dir / demo_site.site.id
    assert paths == [folder / f"{stem}.html", folder / f"{stem}.json", folder / f"{stem}.txt"]
    # nothing else: no temporary file left beside them
    assert files_under(config.reports_dir) == [f"{demo_site.site.id}/{stem}.{ext}"
                                               for ext in ("html", "json", "txt")]
    assert report_document(assessment)["as_of"] == str(day.date())
    assert report_document(assessment)["status"] == STATUS_ASSESSED
    # the level is the highest whose probability within some horizon up to the warning horizon
    # reaches its warning threshold; the probabilities are those of the headline horizon
    f = report_document(assessment)["forecast"]
    names = report_document(assessment)["scheme"]["levels"]
    w = f["warn_horizon_days"]
    assert w == 14 and f["horizon_days"] == 7
    reached = [k for k, n in enumerate(names, start=1)
               if max(f["outlook"]["by_level"][n][:w]) >= f["warn_at"][n]]
    assert f["level_rank"] == max(reached, default=0)
    for n in names:
        assert f["probabilities"][n] == f["outlook"]["by_level"][n][6]
        within = f["warned_within"][n]
        if within is None:
            assert max(f["outlook"]["by_level"][n][:w]) < f["warn_at"][n]
        else:
            assert f["outlook"]["by_level"][n][within - 1] >= f["warn_at"][n]
            assert all(p < f["warn_at"][n] for p in f["outlook"]["by_level"][n][:within - 1])
    # the level stated is the higher of the lab's level in force and the outlook's
    c = report_document(assessment)
    assert c["level_rank"] == max(c["in_force"]["level_rank"], f["level_rank"])
    assert c["level_basis"] == ("lab" if c["in_force"]["level_rank"] >= f["level_rank"]
                                else "outlook")


def test_html_page_has_every_section_and_inline_plots_only(written):
    _, assessment, paths = written
    page = Page(paths[0].read_text(encoding="utf-8"))
    assert page.nesting_errors == []
    assert page.open == []  # every element closed
    assert page.sections == SECTIONS
    # three plots, inline PNG images in the plots section
    assert [section for section, _ in page.images] == ["plots"] * 3
    assert page.meta.get("viewport") == "width=device-width, initial-scale=1"  # phones
    for _, attrs in page.images:
        src = attrs["src"]
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1], validate=True)[:8] == PNG_SIGNATURE
        assert attrs.get("alt")
    # no external resources: no link or script element, no reference other than a data URI
    assert (page.tags["link"], page.tags["script"], page.tags["iframe"]) == (0, 0, 0)
    assert [r for r in page.references if not r[2].startswith("data:")] == []
    assert "@import" not in page.style
    assert "url(" not in page.style
    assert report_document(assessment)["headline"] in page.text["summary"]


def test_html_names_the_authority_in_the_deferral_and_lists_the_cautions(written, demo_site):
    _, assessment, paths = written
    page = Page(paths[0].read_text(encoding="utf-8"))
    authority = demo_site.site.authority
    assert authority == "Merrin Falls Water and the regional health unit"  # demo.toml
    assert page.text["deferral"].strip() == DEFERRAL.format(authority=authority)
    assert page.items["cautions"] == report_document(assessment)["cautions"]


def test_json_report_validates_against_the_schema(written):
    _, assessment, paths = written
    document = strict_json(paths[1].read_text(encoding="utf-8"))
    validate(document)
    assert document == json.loads(render_json(assessment))
    assert document["schema"] == "cyanorisk-report/1"
    probabilities = document["forecast"]["probabilities"]
    assert list(probabilities) == ["Vigilance", "Alert Level 1", "Alert Level 2"]
    p = list(probabilities.values())
    assert p == sorted(p, reverse=True)  # a higher level is never more likely


def test_text_summary_carries_headline_cautions_and_deferral(written):
    _, assessment, paths = written
    text = paths[2].read_text(encoding="utf-8")
    lines = text.splitlines()
    c = report_document(assessment)
    assert lines[2] == c["headline"]
    start = lines.index("Cautions:")
    assert lines[start + 1:start + 1 + len(c["cautions"])] == [f"- {x}" for x in c["cautions"]]
    assert lines[-1] == c["deferral"]
    assert text.endswith("\n")


def test_a_failed_write_leaves_the_earlier_report_and_no_temporary_files(written, demo_site,
                                                                        tmp_path, monkeypatch):
    _, assessment, _ = written
    config = load_config(demo_site.write_config(tmp_path / "site.toml",
                                                reports_dir=tmp_path / "reports"))
    paths = write_report(config, assessment)
    before = {p.name: p.read_bytes() for p in paths}
    changed = dataclasses.replace(assessment, headline="A different headline")
    real_write_text = Path.write_text

    def disk_full_on_text(self, data, *args, **kwargs):
        if ".txt." in self.name:  # the temporary file of the text summary (written last)
            raise OSError(28, "No space left on device", str(self))
        return real_write_text(self, data, *args, **kwargs)

    monkeypatch.setattr(Path, "write_text", disk_full_on_text)
    with pytest.raises(OSError, match="No space left on device"):
        write_report(config, changed)
    monkeypatch.undo()
    assert files_under(config.reports_dir) == sorted(f"{demo_site.site.id}/{n}" for n in before)
    assert {p.name: p.read_bytes() for p in paths} == before


# ---------------------------------------------------------------------------------------------
# Insufficient data: no level is given
# ---------------------------------------------------------------------------------------------

def test_no_sample_for_60_days_gives_insufficient_data_and_no_level(demo_site, tmp_path):
    day = report_day(demo_site)
    totals = samples_before(demo_site, day, 60)
    config = load_config(demo_site.write_config(tmp_path / "site.toml",
                                                reports_dir=tmp_path / "reports"))
    a = assess_demo(demo_site, day, totals=totals)
    c = report_document(a)
    site = demo_site.spec
    issue = issue_instants(pd.DatetimeIndex([day]), site.timezone, site.issue_time)[0]
    age = (issue - totals["sampled_at"].max()) / pd.Timedelta(days=1)
    assert age > 60
    assert c["status"] == STATUS_INSUFFICIENT
    assert c["status_reasons"] == [f"the last known sample is {age:.0f} days old (more than "
                                   f"{site.stale_sample_days:g})"]
    lab = c["in_force"]
    assert c["headline"] == (f"Insufficient data for an outlook: {c['status_reasons'][0]}. Level "
                             f"in force from the lab: {lab['level']} (sample of "
                             f"{words.date(pd.Timestamp(lab['set_by_sampled_at'][:16]))}).")
    assert (c["forecast"]["level_rank"], c["forecast"]["level"]) == (None, None)
    # no withheld figure anywhere: probabilities, baselines and counts are null
    f = c["forecast"]
    assert [f[k] for k in ("probabilities", "climatology", "persistence", "peak_band",
                           "expected_cells_per_ml", "interval_80_cells_per_ml")] == [None] * 6
    assert f["drivers"] == []
    # the level in force from the lab still stands, and the report says what to do
    assert (c["level"], c["level_basis"]) == (lab["level"], "lab")
    assert any(x.startswith("Take a sample") for x in c["actions"])
    assert c["observed"]["age_days"] == pytest.approx(age, abs=1e-9)
    assert c["deferral"] == DEFERRAL.format(authority=demo_site.site.authority)
    validate(strict_json(render_json(a)))
    paths = write_report(config, a)
    page = Page(paths[0].read_text(encoding="utf-8"))
    assert page.sections == SECTIONS
    assert "Insufficient data for an outlook" in page.text["summary"]
    assert [section for section, _ in page.images] == ["plots"] * 2  # no outlook plot
    assert "No outlook plot" in page.text["plots"]
    assert "%" not in page.text["outlook"]
    assert "Not given today" in paths[2].read_text(encoding="utf-8")


def test_stale_weather_gives_insufficient_data(demo_site):
    tz = demo_site.site.timezone
    day = report_day(demo_site) + pd.Timedelta(days=5)
    a = assess_demo(demo_site, day)
    c = report_document(a)
    issue = issue_instants(pd.DatetimeIndex([day]), tz, demo_site.spec.issue_time)[0]
    age = (issue - last_reading_end(demo_site)) / pd.Timedelta(days=1)
    assert age > demo_site.spec.stale_weather_days
    assert c["status"] == STATUS_INSUFFICIENT
    assert (f"the last weather reading is {age:.1f} days old "
            f"(more than {demo_site.spec.stale_weather_days:g})") in c["status_reasons"]
    assert c["headline"].startswith("Insufficient data for an outlook: the last weather reading is")
    assert any(x.startswith("Check the weather station") for x in c["actions"])
    assert (c["forecast"]["level_rank"], c["forecast"]["level"]) == (None, None)
    assert c["freshness"]["weather_age_days"] == pytest.approx(age, abs=1e-9)
    assert c["freshness"]["last_weather_utc"] == last_reading_end(demo_site).isoformat()
    validate(strict_json(render_json(a)))


def test_weather_up_to_the_issue_time_is_fresh(demo_site):
    a = assess_demo(demo_site, report_day(demo_site))
    assert report_document(a)["status"] == STATUS_ASSESSED
    assert report_document(a)["status_reasons"] == []
    assert report_document(a)["freshness"]["weather_age_days"] == pytest.approx(0.0, abs=1e-12)


def test_drivers_of_a_day_with_no_weather_in_its_windows_are_reported_missing(demo_site):
    day = report_day(demo_site) + pd.Timedelta(days=10)
    a = assess_demo(demo_site, day)
    drivers = demo_site.models.drivers
    from_weather = [d for d in drivers if d not in WEATHER_FREE_DRIVERS]
    # every weather driver's window (7 or 30 days) has at most 20 of its days with data,
    # below min_good_share (0.8) of the demo configuration
    assert report_document(a)["forecast"]["missing_drivers"] == from_weather


def test_a_site_without_lab_results_gives_insufficient_data(demo_site):
    a = assess_demo(demo_site, report_day(demo_site), totals=empty_totals())
    assert report_document(a)["status"] == STATUS_INSUFFICIENT
    assert "no lab result is known yet" in report_document(a)["status_reasons"]
    assert report_document(a)["observed"]["last_sampled_at"] is None


def test_stale_report_with_an_undecided_last_level_is_still_written(demo_site):
    day = report_day(demo_site)
    totals = samples_before(demo_site, day, 60).copy()
    last = totals.index[-1]
    # '<5000 cells/mL' (a high detection limit) may or may not reach Alert Level 1 (2,000)
    totals.loc[last, ["cyano_cells_per_ml", "cyano_upper_cells_per_ml"]] = 5000.0
    totals.loc[last, "cyano_censor"] = "<"
    a = assess_demo(demo_site, day, totals=totals)
    c = report_document(a)
    assert c["status"] == STATUS_INSUFFICIENT
    assert c["observed"]["level"] == "unknown"
    assert c["deferral"] == DEFERRAL.format(authority=demo_site.site.authority)
    validate(strict_json(render_json(a)))


def test_report_json_is_standard_json_when_a_driver_is_missing(demo_site):
    first = local_day(demo_site.weather.index[0], demo_site.site.timezone)
    day = first + pd.Timedelta(days=5)  # the record is shorter than a 7-day window
    a = assess_demo(demo_site, day)
    assert "water_temp_mean_c_7d" in report_document(a)["forecast"]["missing_drivers"]
    validate(strict_json(render_json(a)))


# ---------------------------------------------------------------------------------------------
# Cautions and the deferral statement
# ---------------------------------------------------------------------------------------------

def test_general_cautions_say_what_they_must():
    text = " ".join(GENERAL_CAUTIONS)
    for phrase in GENERAL_KEYWORDS:
        assert phrase in text


def assert_general_cautions(content: dict, present: bool) -> None:
    listed = " ".join(content["cautions"])
    assert [words in listed for words in GENERAL_KEYWORDS] == [present] * len(GENERAL_KEYWORDS)


def test_reports_at_an_alert_level_carry_the_general_cautions_for_either_use(demo_site):
    day, drinking = find_day(demo_site, lambda c: c["status"] == STATUS_ASSESSED
                             and c["level"] in ("Alert Level 1", "Alert Level 2"))
    rank = drinking.level_rank
    role = demo_site.spec.scheme.role(rank)
    assert role in (Role.ALERT, Role.ACTION)
    recreation_site = dataclasses.replace(demo_site.spec, use="recreation")
    recreation = assess_demo(demo_site, day, spec=recreation_site)
    assert recreation.level_rank == rank  # same model, same day
    assert report_document(drinking)["cautions"][:len(cautions(role, "drinking"))] == list(
        cautions(role, "drinking"))
    assert report_document(recreation)["cautions"][:len(cautions(role, "recreation"))] == list(
        cautions(role, "recreation"))
    assert report_document(drinking)["cautions"] != report_document(recreation)["cautions"]
    for a in (drinking, recreation):
        assert_general_cautions(report_document(a), present=True)
        assert report_document(a)["deferral"] == DEFERRAL.format(authority=demo_site.site.authority)
        validate(strict_json(render_json(a)))


def test_a_report_below_every_level_has_routine_cautions_and_the_deferral(demo_site):
    _, a = find_day(demo_site, lambda c: c["status"] == STATUS_ASSESSED and c["level_rank"] == 0)
    assert report_document(a)["cautions"] == list(cautions(Role.NONE, "drinking"))
    assert_general_cautions(report_document(a), present=False)
    assert report_document(a)["deferral"] == DEFERRAL.format(authority=demo_site.site.authority)


def test_the_deferral_names_the_configured_authority(demo_site):
    site = dataclasses.replace(demo_site.spec, authority="the Kestrel Basin Health Board")
    day = report_day(demo_site)
    statuses = []
    for totals in (None, samples_before(demo_site, day, 60)):
        a = assess_demo(demo_site, day, spec=site, totals=totals)
        statuses.append(report_document(a)["status"])
        assert report_document(a)["deferral"] == (
            "Advisories, closures and changes to treatment are decided by the Kestrel Basin "
            "Health Board under local codes. This report supports that decision; it does not "
            "make it.")
    assert statuses == [STATUS_ASSESSED, STATUS_INSUFFICIENT]  # in every report


# ---------------------------------------------------------------------------------------------
# The report command
# ---------------------------------------------------------------------------------------------

def test_report_command_writes_the_three_files_for_the_date(demo_site, tmp_path, capsys):
    config = demo_site.write_config(tmp_path / "site.toml", reports_dir=tmp_path / "reports")
    day = report_day(demo_site) - pd.Timedelta(days=30)
    date = str(day.date())
    assert main(["report", "--config", str(config), "--as-of", date]) == 0
    captured = capsys.readouterr()
    site = demo_site.site.id
    names = [f"{site}_{date}.{ext}" for ext in ("html", "json", "txt")]
    assert files_under(tmp_path / "reports") == [f"{site}/{n}" for n in names]
    for n in names:
        assert f"  wrote {tmp_path / 'reports' / site / n}" in captured.out.splitlines()
    document = strict_json((tmp_path / "reports" / site / names[1]).read_text(encoding="utf-8"))
    validate(document)
    assert document["as_of"] == date
    assert captured.out.splitlines()[0] == f"{demo_site.site.name}: {document['headline']}"
    assert captured.err == ""


def test_report_command_without_a_trained_model_exits_1_naming_the_file(demo_site, tmp_path,
                                                                        capsys):
    config = demo_site.write_config(tmp_path / "site.toml", reports_dir=tmp_path / "reports",
                                    models_dir=tmp_path / "models")
    assert main(["report", "--config", str(config), "--as-of",
                 str(report_day(demo_site).date())]) == 1
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1
    missing = tmp_path / "models" / f"{demo_site.site.id}.json"
    assert lines[0] == (f"cyanorisk: {missing}: no model for site '{demo_site.site.id}'; run "
                        f"`cyanorisk train --config {config}` first")
    assert not (tmp_path / "reports").exists()
    assert captured.out == ""
