"""Walk-forward backtests (cyanorisk.backtest) on the demo reservoir, and ``cyanorisk backtest``.

The demo data are the session's (tests/conftest.py, ``demo_site``): 8 years ending on 14 January
2025 (demo.END), so the record holds the bloom seasons (July to June) starting 2016 to 2024, the
first and last of them partial.
"""

from __future__ import annotations

import base64
import math
import re
from dataclasses import dataclass
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from cyanorisk.align import known_from
from cyanorisk.backtest import (
    BacktestError,
    BacktestResult,
    parse_seasons,
    season_scores,
    walk_forward,
)
from cyanorisk.cli import main
from cyanorisk.model import prepare
from cyanorisk.spec import SiteSpec, Thresholds
from cyanorisk.training import fit_models, season_of, training_table

DEMO_SEASONS = list(range(2016, 2025))
"""Season start years of the 8-year demo record (14 January 2017 to 14 January 2025 local)."""
FORECAST_COLUMNS = ["probability", "climatology", "persistence"]
LEVELS = ["Vigilance", "Alert Level 1", "Alert Level 2"]
"""The levels of the demo's scheme (WHO 1999 drinking water, REFERENCES.md)."""


@dataclass
class Demo:
    """The session's demo site (tests/conftest.py) with what the backtests need besides."""

    site_data: object
    available: list[int]
    warn_at: Thresholds

    def __getattr__(self, name: str):
        return getattr(self.site_data, name)

    def config_copy(self, path: Path, **dirs: Path) -> Path:
        """The demo configuration at ``path`` with its output folders moved (conftest)."""
        return self.site_data.write_config(path, **dirs)


@pytest.fixture(scope="module")
def demo(demo_site) -> Demo:
    site, table = demo_site.spec, demo_site.table
    available = sorted(set(season_of(table["issue_date"], site.season_start_month).tolist()))
    return Demo(demo_site, available, Thresholds.default(site.levels))


@pytest.fixture(scope="module")
def result(demo) -> BacktestResult:
    """The backtest of every season but the first (the default of ``cyanorisk backtest``)."""
    seasons = parse_seasons(None, demo.available)
    return walk_forward(demo.spec, demo.table, demo.totals, seasons, demo.warn_at)


def local_midnight_utc(site: SiteSpec, year: int, month: int) -> pd.Timestamp:
    """The start of the first day of a month, local time of the site, in UTC."""
    return pd.Timestamp(year=year, month=month, day=1).tz_localize(site.timezone).tz_convert("UTC")


def known_by(demo: Demo, cut: pd.Timestamp) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Weather and lab totals as they existed at the UTC instant ``cut``: weather before it, and
    the samples taken before it whose results were known before it."""
    totals = demo.totals
    lab_delay = demo.spec.lab_delay_days
    known = known_from(totals, lab_delay, demo.spec.timezone)
    weather = demo.weather[demo.weather.index < cut]
    kept = totals[((totals["sampled_at"] < cut) & (known < cut)).to_numpy()]
    assert len(weather) < len(demo.weather) and len(kept) < len(totals)
    return weather, kept


def season_rows(forecasts: pd.DataFrame, season: int) -> pd.DataFrame:
    f = forecasts[forecasts["season"] == season]
    return f.sort_values(["level", "issue_date"]).reset_index(drop=True)


# ---------------------------------------------------------------------------------------------
# Seasons asked for
# ---------------------------------------------------------------------------------------------


def test_demo_record_holds_the_expected_seasons(demo):
    assert demo.available == DEMO_SEASONS


@pytest.mark.parametrize(("text", "want"), [
    ("2019-2021", [2019, 2020, 2021]),
    ("2020", [2020]),
    ("2024-2024", [2024]),
    (None, DEMO_SEASONS[1:]),  # all but the first, which has nothing before it to learn from
    ("", DEMO_SEASONS[1:]),
])
def test_parse_seasons(demo, text, want):
    assert parse_seasons(text, demo.available) == want


@pytest.mark.parametrize("text", ["2030-2032", "2005", "2021-2019"])
def test_seasons_outside_the_data_are_refused_naming_the_available_seasons(demo, text):
    with pytest.raises(BacktestError) as err:
        parse_seasons(text, demo.available)
    message = str(err.value)
    assert repr(text) in message
    assert "2016 to 2024" in message


def test_seasons_that_are_not_years_are_refused():
    with pytest.raises(BacktestError, match="expected a year or a range such as 2015-2022"):
        parse_seasons("last summer", DEMO_SEASONS)


# ---------------------------------------------------------------------------------------------
# No leakage
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("season", [2019, 2022])
def test_forecasts_of_a_season_do_not_change_without_the_data_after_it(demo, result, season):
    # The record cut at the end of the season (1 July of the next year, local): weather and lab
    # results as they stood then; the training table rebuilt from them.
    weather, totals = known_by(demo, local_midnight_utc(demo.spec, season + 1, 7))
    table = training_table(demo.spec, weather, totals)
    cut = walk_forward(demo.spec, table, totals, [season], demo.warn_at)
    want, got = season_rows(result.forecasts, season), season_rows(cut.forecasts, season)
    n = len(demo.spec.levels)  # Vigilance, Alert Levels 1 and 2
    assert len(want) == n * 365 + n * (season == 2019)  # 2020 was a leap year
    assert want["probability"].notna().all()  # the season was forecast
    pd.testing.assert_series_equal(got["issue_date"], want["issue_date"])
    pd.testing.assert_series_equal(got["level"], want["level"])
    for column in FORECAST_COLUMNS:
        np.testing.assert_allclose(got[column], want[column], rtol=0, atol=1e-9, err_msg=column)


def test_the_season_model_is_fitted_on_what_was_known_when_the_season_began(demo, result):
    # Data as they stood on the season's first day; the model fitted on the issue days whose
    # outcome window and lab delay ended before it (the rule of cyanorisk.backtest), then asked
    # about the season's issue days. Its forecasts are the backtest's.
    season, site = 2021, demo.spec
    start = pd.Timestamp(year=season, month=site.season_start_month, day=1)
    weather, totals = known_by(demo, local_midnight_utc(site, season, site.season_start_month))
    table = training_table(site, weather, totals)
    closed = pd.to_datetime(table["issue_date"]) + pd.Timedelta(
        days=site.outlook_days + site.lab_delay_days) < start
    fitted = fit_models(site, table[closed.to_numpy()])
    X = prepare(demo.table)
    in_season = season_of(X["issue_date"], site.season_start_month) == season
    p = fitted.outlook.at(X[in_season], site.horizon_days)
    c = fitted.climatology.predict_proba(X.loc[in_season, "issue_date"])
    f = result.forecasts[result.forecasts["season"] == season]
    for name in site.levels:
        rows = f[f["level"] == name]
        np.testing.assert_array_equal(rows["issue_date"].to_numpy(),
                                      X.loc[in_season, "issue_date"].to_numpy())
        np.testing.assert_allclose(rows["probability"], p[name], rtol=0, atol=1e-9)
        np.testing.assert_allclose(rows["climatology"], c[name], rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------------------------
# Seasons without an exceedance, or without a forecast
# ---------------------------------------------------------------------------------------------


def check_quiet(scores: pd.DataFrame, season: int, level: str) -> None:
    rows = scores[(scores["season"] == season) & (scores["level"] == level)]
    assert sorted(rows["source"]) == ["climatology", "model", "persistence"]
    assert (rows["events"] == 0).all()
    assert (rows["n"] > 0).all()
    assert rows["roc_auc"].isna().all()
    assert rows["brier"].between(0, 1).all()  # the Brier score is still defined
    assert rows["note"].str.contains("no exceedance in this season").all()
    model = rows[rows["source"] == "model"].iloc[0]
    assert "no sample met the level this season" in model["note"]
    assert math.isnan(model["lead_time_days"])


def test_a_season_without_an_exceedance_is_reported_not_dropped(result):
    # The demo ends on 14 January 2025, before the 2024-25 season reached Alert Level 2.
    level = "Alert Level 2"
    ex = result.exceedances
    assert pd.isna(ex.loc[(ex["season"] == 2024) & (ex["level"] == level), "first_exceedance"]).all()
    assert sorted(result.scores["season"].unique()) == DEMO_SEASONS[1:]
    check_quiet(result.scores, 2024, level)


def test_a_whole_season_without_an_exceedance_is_reported_for_every_level(demo):
    # The demo's 2020-21 counts capped below Alert Level 1 (2,000 cells/mL, WHO 1999): a quiet
    # season at both alert levels (cells are still seen: Vigilance), with the seasons around it
    # as they were.
    site = demo.spec
    totals = demo.totals.copy()
    in_2020 = season_of(totals["sampled_at"].dt.tz_convert(site.timezone).dt.tz_localize(None),
                        site.season_start_month) == 2020
    assert in_2020.sum() > 20
    for column in ("cyano_cells_per_ml", "cyano_upper_cells_per_ml", "toxic_cells_per_ml"):
        totals.loc[in_2020, column] = totals.loc[in_2020, column].clip(upper=1500.0)
    table = training_table(site, demo.weather, totals)
    quiet = walk_forward(site, table, totals, [2019, 2020, 2021], demo.warn_at)
    alert_levels = [lvl for lvl in site.levels if lvl != "Vigilance"]
    ex = quiet.exceedances
    assert ex.loc[(ex["season"] == 2020) & ex["level"].isin(alert_levels),
                  "first_exceedance"].isna().all()
    assert sorted(quiet.scores["season"].unique()) == [2019, 2020, 2021]
    for level in alert_levels:
        check_quiet(quiet.scores, 2020, level)
    assert sorted(quiet.overall["seasons"].unique()) == [3]


def test_season_scores_keep_a_season_without_events():
    # hand-built: season 2030 has no event, 2031 has two
    forecasts = pd.DataFrame({
        "season": [2030] * 4 + [2031] * 4, "level": "L1", "horizon_days": 7,
        "issue_date": list(pd.date_range("2030-12-01", periods=4).date)
                      + list(pd.date_range("2031-12-01", periods=4).date),
        "probability": [0.1, 0.2, 0.6, 0.3, 0.2, 0.7, 0.9, 0.4],
        "outcome": [0, 0, 0, 0, 0, 1, 1, 0],
        "climatology": 0.25, "persistence": [0, 0, 0, 0, 0, 0, 1, 1]})
    exceedances = pd.DataFrame({"season": [2030, 2031], "level": "L1",
                                "first_exceedance": [pd.NaT, pd.Timestamp("2031-12-03")]})
    scores = season_scores(forecasts, exceedances, ["L1"], Thresholds({"L1": 0.5}))
    quiet = scores[scores["season"] == 2030]
    assert len(quiet) == 3
    assert (quiet["events"] == 0).all() and (quiet["n"] == 4).all()
    assert quiet["roc_auc"].isna().all()
    assert quiet["note"].str.contains("no exceedance in this season").all()
    model = quiet[quiet["source"] == "model"].iloc[0]
    # Brier 1950: (0.01 + 0.04 + 0.36 + 0.09) / 4 = 0.125; climatology 0.0625; skill 1 - 2 = -1
    assert model["brier"] == pytest.approx(0.125, abs=1e-12)
    assert model["brier_skill"] == pytest.approx(-1.0, abs=1e-12)
    assert (model["false_alarms"], model["correct_negatives"]) == (1, 3)
    busy = scores[(scores["season"] == 2031) & (scores["source"] == "model")].iloc[0]
    # warned from 2031-12-02 (0.7): one day before the first exceedance on the 3rd
    assert busy["lead_time_days"] == pytest.approx(1.0, abs=1e-12)
    assert busy["roc_auc"] == pytest.approx(1.0, abs=1e-12)


def test_a_season_without_enough_history_is_noted_and_kept(result):
    # 2017-18: only the half season from January 2017 was known before it
    assert any(n.startswith("season 2017: not replayed, only") for n in result.notes)
    assert set(result.not_replayed) == {2017}
    assert "labelled issue days were known before it" in result.not_replayed[2017]
    assert 2017 not in result.replayed and 2018 in result.replayed
    rows = result.scores[(result.scores["season"] == 2017) & (result.scores["source"] == "model")]
    assert len(rows) == len(LEVELS)
    assert (rows["n"] == 0).all() and not rows["replayed"].any()
    assert rows["note"].str.startswith("not replayed: only").all()
    f = result.forecasts[result.forecasts["season"] == 2017]
    assert f["probability"].isna().all() and f["persistence"].notna().any()
    assert f["warned"].isna().all()  # blank, never 'not warned', where nothing was forecast
    replayed = result.forecasts[result.forecasts["season"] == 2018]
    assert replayed["warned"].notna().all()


def test_a_season_without_forecasts_is_not_reported_as_missed(result):
    # 2017-18 was met at both levels, but the model issued no forecast: not a miss
    rows = result.scores[(result.scores["season"] == 2017) & (result.scores["source"] == "model")]
    assert len(rows) == len(LEVELS)
    assert result.exceedances.loc[result.exceedances["season"] == 2017,
                                  "first_exceedance"].notna().all()
    assert not rows["note"].str.contains("missed").any()


# ---------------------------------------------------------------------------------------------
# Skill and its uncertainty
# ---------------------------------------------------------------------------------------------


def test_model_beats_climatology_overall(result):
    overall = result.overall.set_index(["level", "source"])
    for level in ("Alert Level 1", "Alert Level 2"):
        model, clim = overall.loc[(level, "model")], overall.loc[(level, "climatology")]
        # Brier skill score = 1 - BS / BS_ref (standard forecast verification)
        assert model["brier_skill"] == pytest.approx(1 - model["brier"] / clim["brier"], rel=1e-9)
        assert 0 < model["brier_skill"] <= 1, level  # the point of the tool
        assert clim["brier_skill"] == pytest.approx(0.0, abs=1e-12)
        assert model["seasons"] == len(result.replayed) == len(DEMO_SEASONS) - 2  # 2017 not


def test_bootstrap_intervals_contain_the_point_estimates(result):
    overall = result.overall
    assert len(overall) == len(LEVELS) * 3  # three sources
    for score in ("brier", "brier_skill", "roc_auc"):
        point, low, high = overall[score], overall[f"{score}_low"], overall[f"{score}_high"]
        assert point.notna().all() and low.notna().all() and high.notna().all(), score
        assert ((low <= point + 1e-12) & (point <= high + 1e-12)).all(), score
    model = overall[overall["source"] == "model"]
    assert (model["brier_high"] - model["brier_low"] > 0).all()  # seasons do differ


def test_season_scores_follow_from_the_forecasts(result):
    # one row per season, level and source; the model's Brier score is that of its forecasts
    assert len(result.scores) == (len(DEMO_SEASONS) - 1) * len(LEVELS) * 3
    f = season_rows(result.forecasts, 2020)
    for level in ("Alert Level 1", "Alert Level 2"):
        rows = f[f["level"] == level]
        keep = rows["probability"].notna() & rows["outcome"].notna()
        want = float(np.mean((rows.loc[keep, "probability"] - rows.loc[keep, "outcome"]) ** 2))
        got = result.scores[(result.scores["season"] == 2020) & (result.scores["level"] == level)
                            & (result.scores["source"] == "model")].iloc[0]
        assert got["brier"] == pytest.approx(want, rel=1e-12)
        assert got["n"] == int(keep.sum())
        assert got["events"] == int(rows["outcome"].sum())


# ---------------------------------------------------------------------------------------------
# cyanorisk backtest
# ---------------------------------------------------------------------------------------------

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}


class PageCheck(HTMLParser):
    """Parses a page, checking that every element is closed in order; collects ids, images and
    any reference to a resource outside the page."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.problems: list[str] = []
        self.ids: set[str] = set()
        self.images: list[str] = []
        self.outside: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "img":
            self.images.append(a.get("src") or "")
        for key in ("src", "href", "data", "srcset", "poster"):
            value = a.get(key)
            if value is not None and not value.startswith(("data:", "#")):
                self.outside.append(f"<{tag} {key}={value[:60]}>")
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.problems.append(f"</{tag}> closes <{self.stack[-1] if self.stack else ''}>")
        else:
            self.stack.pop()


def test_backtest_command_writes_forecasts_scores_and_a_self_contained_page(demo, result,
                                                                           tmp_path, capsys):
    config = demo.config_copy(tmp_path / "site.toml", reports_dir=tmp_path / "reports")
    assert main(["backtest", "--config", str(config), "--seasons", "2019-2021"]) == 0
    out = capsys.readouterr().out
    assert "Tallowbark Reservoir (tallowbark): backtest of seasons 2019-2021" in out
    folder = tmp_path / "reports" / "tallowbark" / "backtest_2019-2021"
    assert sorted(p.name for p in folder.iterdir()) == [
        "backtest.html", "forecasts.csv", "reliability.csv", "scores_by_horizon.csv",
        "scores_by_season.csv", "scores_overall.csv"]

    forecasts = pd.read_csv(folder / "forecasts.csv")
    documented = ["site_id", "issue_date", "level", "horizon_days", "probability", "outcome",
                  "climatology", "persistence"]
    assert set(documented) <= set(forecasts.columns)
    assert sorted(forecasts["season"].unique()) == [2019, 2020, 2021]
    assert (forecasts["site_id"] == "tallowbark").all() and (forecasts["horizon_days"] == 7).all()
    # the same forecasts as the library's backtest of those seasons
    want = result.forecasts[result.forecasts["season"].isin([2019, 2020, 2021])].copy()
    want["issue_date"] = want["issue_date"].astype(str)
    merged = want.merge(forecasts, on=["issue_date", "level"], suffixes=("", "_csv"),
                        validate="one_to_one")
    assert len(merged) == len(forecasts) == len(want)
    for column in [*FORECAST_COLUMNS, "outcome"]:
        np.testing.assert_allclose(merged[f"{column}_csv"], merged[column], rtol=0, atol=1e-9)

    by_season = pd.read_csv(folder / "scores_by_season.csv")
    assert len(by_season) == 3 * len(LEVELS) * 3  # seasons x levels x sources
    assert {"season", "level", "source", "n", "events", "brier", "brier_skill", "roc_auc",
            "lead_time_days", "note"} <= set(by_season.columns)
    overall = pd.read_csv(folder / "scores_overall.csv")
    assert len(overall) == len(LEVELS) * 3 and (overall["seasons"] == 3).all()
    assert {"brier_skill_low", "brier_skill_high", "roc_auc_low", "roc_auc_high",
            "median_lead_time_days", "median_lead_to_report_days"} <= set(overall.columns)
    # every horizon of the outlook scored, per level and source
    by_horizon = pd.read_csv(folder / "scores_by_horizon.csv")
    assert len(by_horizon) == len(LEVELS) * 14 * 3
    assert sorted(by_horizon["horizon_days"].unique()) == list(range(1, 15))
    assert {f"probability_{h}d" for h in range(1, 15)} <= set(forecasts.columns)
    reliability = pd.read_csv(folder / "reliability.csv")
    assert set(reliability["level"]) == set(LEVELS)
    assert reliability.groupby("level")["n"].sum().min() > 0

    page = (folder / "backtest.html").read_text(encoding="utf-8")
    check = PageCheck()
    check.feed(page)
    check.close()
    assert check.problems == [] and check.stack == []
    assert page.lstrip().startswith("<!DOCTYPE html>")
    assert check.outside == []  # no external resources
    assert re.findall(r"url\(|@import", page) == []
    assert {"summary", "overall", "leads", "warnings", "horizons", "curves", "timeline",
            "notes"} <= check.ids
    assert "ROC and reliability" in page and "Season timelines" in page
    # ROC and reliability: one figure per level; timelines: one per season
    assert len(check.images) == len(LEVELS) + 3
    for src in check.images:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"


def test_backtest_command_refuses_seasons_outside_the_data(demo, tmp_path, capsys):
    config = demo.config_copy(tmp_path / "site.toml", reports_dir=tmp_path / "reports")
    assert main(["backtest", "--config", str(config), "--seasons", "1990-1995"]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert err == ["cyanorisk: seasons '1990-1995': the data hold seasons 2016 to 2024"]
    assert not (tmp_path / "reports").exists()
