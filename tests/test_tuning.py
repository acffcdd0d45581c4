"""Threshold tuning (cyanorisk.tuning), ``cyanorisk tune`` and the tuned thresholds in the daily
report (cyanorisk.pipeline.SitePipeline.thresholds).

The choice rules are checked on a hand-made forecast set whose answers are worked out by hand
below; the command on the demo reservoir (cyanorisk.demo, 8 years, generated once for this
module in a temporary folder with the demo configuration re-rooted there, as tests/test_cli.py
does).
"""

from __future__ import annotations

import json
import math
import re
import shutil
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cyanorisk.backtest import parse_seasons, walk_forward
from cyanorisk.cli import main
from cyanorisk.config import load_config
from cyanorisk.model import ModelFileError
from cyanorisk.pipeline import SitePipeline
from cyanorisk.spec import DEFAULT_WARN_AT, Thresholds
from cyanorisk.training import season_of
from cyanorisk.tuning import (
    THRESHOLDS,
    choose_by_cost,
    choose_by_hit_rate,
    sweep,
    tune_level,
    warning_view,
)
from cyanorisk.verify import contingency

# ---------------------------------------------------------------------------------------------
# A hand-made forecast set: one level, two seasons of six issue days
# ---------------------------------------------------------------------------------------------

HAND = pd.DataFrame({
    "season": [2020] * 6 + [2021] * 6,
    "level": "L1",
    "horizon_days": 7,
    "issue_date": list(pd.date_range("2020-12-01", periods=6).date)
                  + list(pd.date_range("2021-12-01", periods=6).date),
    "probability": [0.15, 0.35, 0.55, 0.72, 0.85, 0.25,
                    0.05, 0.45, 0.62, 0.92, 0.30, 0.40],
    "outcome": [0, 1, 0, 1, 1, 0,
                0, 1, 0, 1, 0, 0],
})
"""Events (5): p = 0.35, 0.45, 0.72, 0.85, 0.92. Non-events (7): p = 0.05, 0.15, 0.25, 0.30,
0.40, 0.55, 0.62. A warning is raised when p >= threshold."""
HAND_EXCEEDANCES = pd.DataFrame({"season": [2020, 2021], "level": "L1",
                                 "first_exceedance": pd.to_datetime(["2020-12-05", "2021-12-04"])})
"""First samples that met the level in each season."""


def hand_table() -> pd.DataFrame:
    return sweep(HAND, HAND_EXCEEDANCES)


def test_cost_rule_on_the_hand_made_set():
    # cost = miss_cost x misses + false alarms, with the threshold t swept 0.01 ... 0.99.
    # miss cost 3:
    #   t <= 0.05: 0 misses, 7 false alarms -> 7     0.35 < t <= 0.40: 1 miss, 3 FA -> 6
    #   0.05 < t <= 0.15: 0 + 6 -> 6                 0.40 < t <= 0.45: 1 miss, 2 FA -> 5
    #   0.15 < t <= 0.25: 0 + 5 -> 5                 0.45 < t <= 0.55: 2 misses, 2 FA -> 8
    #   0.25 < t <= 0.30: 0 + 4 -> 4                 0.55 < t <= 0.62: 2 misses, 1 FA -> 7
    #   0.30 < t <= 0.35: 0 + 3 -> 3 (smallest)      0.62 < t <= 0.72: 2 misses, 0 FA -> 6
    #   beyond: 3, 4, 5 misses -> 9, 12, 15
    #   smallest cost 3 for t = 0.31 ... 0.35; ties go to the higher threshold: 0.35
    assert choose_by_cost(hand_table(), miss_cost=3) == pytest.approx(0.35, abs=1e-12)
    # miss cost 1: the same counts give 7, 6, 5, 4, 3, 4, 3, 4, 3, then 2 for 0.62 < t <= 0.72,
    #   then 3, 4, 5: smallest 2 for t = 0.63 ... 0.72 -> 0.72
    assert choose_by_cost(hand_table(), miss_cost=1) == pytest.approx(0.72, abs=1e-12)


def test_cost_rule_needs_a_positive_miss_cost():
    with pytest.raises(ValueError, match="miss_cost must be positive"):
        choose_by_cost(hand_table(), miss_cost=0)


@pytest.mark.parametrize(("target", "want"), [
    # hit rate = hits / 5: 1.0 for t <= 0.35; 0.8 for t <= 0.45; 0.6 for t <= 0.72;
    # 0.4 for t <= 0.85; 0.2 for t <= 0.92; 0 beyond. The highest threshold reaching the target:
    (1.0, 0.35),
    (0.8, 0.45),
    (0.5, 0.72),
    (0.2, 0.92),
])
def test_target_hit_rate_rule_on_the_hand_made_set(target, want):
    assert choose_by_hit_rate(hand_table(), target) == pytest.approx(want, abs=1e-12)


def test_an_unreachable_target_hit_rate_is_refused_with_the_best_one():
    # the event forecast at 0.35 now forecast at 0: below every threshold swept, so at most 4
    # of the 5 events are ever warned: best hit rate 80%
    forecasts = HAND.copy()
    forecasts.loc[forecasts["probability"] == 0.35, "probability"] = 0.0
    table = sweep(forecasts, HAND_EXCEEDANCES)
    assert table["hit_rate"].max() == pytest.approx(0.8, abs=1e-12)
    with pytest.raises(ValueError, match=r"hit rate of 90% .*\(best: 80%\)"):
        choose_by_hit_rate(table, 0.9)
    assert choose_by_hit_rate(table, 0.8) == pytest.approx(0.45, abs=1e-12)


def test_sweep_rows_of_the_hand_made_set():
    table = hand_table().set_index("threshold")
    assert table.index.tolist() == THRESHOLDS.tolist()
    # at 0.50: warned 0.55, 0.62 (false alarms), 0.72, 0.85, 0.92 (hits); missed 0.35, 0.45
    row = table.loc[0.5]
    assert [row["hits"], row["false_alarms"], row["misses"], row["correct_negatives"]] == [3, 2, 2, 5]
    assert row["hit_rate"] == pytest.approx(3 / 5, abs=1e-12)
    assert row["false_alarm_ratio"] == pytest.approx(2 / 5, abs=1e-12)
    # lead time at 0.50: 2020 warned 3-5 December, first exceedance on the 5th -> 2 days;
    # 2021 warned 3-4 December, exceedance on the 4th -> 1 day; mean 1.5
    assert row["mean_lead_time_days"] == pytest.approx(1.5, abs=1e-12)


def check_against_contingency(forecasts: pd.DataFrame) -> None:
    table = sweep(forecasts, HAND_EXCEEDANCES, lead_times=False)
    p, o = forecasts["probability"].to_numpy(float), forecasts["outcome"].to_numpy(float)
    assert len(table) == len(THRESHOLDS)
    for _, row in table.iterrows():
        want = contingency(p, o, row["threshold"])
        for key, value in want.items():
            if isinstance(value, float) and math.isnan(value):
                assert math.isnan(row[key]), (row["threshold"], key)
            else:
                assert row[key] == pytest.approx(value, abs=1e-12), (row["threshold"], key)


def test_sweep_agrees_with_contingency_at_every_threshold_on_the_hand_made_set():
    check_against_contingency(HAND)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.tuples(st.one_of(st.integers(0, 100).map(lambda k: k / 100),
                                    st.floats(0, 1), st.just(math.nan)),
                          st.sampled_from([0.0, 1.0, math.nan])), min_size=1, max_size=30))
def test_sweep_agrees_with_contingency_at_every_threshold(rows):
    # probabilities on the threshold grid (ties with the thresholds), anywhere in [0, 1], or
    # missing; outcomes 0, 1 or missing
    p, o = zip(*rows, strict=True)
    check_against_contingency(pd.DataFrame({"season": 2020, "horizon_days": 7, "probability": p,
                                            "outcome": o, "issue_date": pd.NaT}))


def test_tune_level_chooses_as_the_rules_do_with_a_bootstrap_over_seasons():
    choice = tune_level(HAND, HAND_EXCEEDANCES, "L1", miss_cost=3, n_boot=50)
    assert choice.threshold == pytest.approx(0.35, abs=1e-12)
    assert choice.rule == "miss cost 3 (a missed exceedance costs 3 false alarms)"
    assert len(choice.bootstrap) == 50
    assert np.isin(choice.bootstrap, THRESHOLDS).all()
    lo, hi = choice.spread()
    assert THRESHOLDS[0] <= lo <= hi <= THRESHOLDS[-1]
    by_rate = tune_level(HAND, HAND_EXCEEDANCES, "L1", target_hit_rate=0.8, n_boot=10)
    assert by_rate.threshold == pytest.approx(0.45, abs=1e-12)
    assert by_rate.rule == "target hit rate 80%"


@pytest.mark.parametrize("kwargs", [{}, {"miss_cost": 3, "target_hit_rate": 0.8}])
def test_tune_level_needs_exactly_one_rule(kwargs):
    with pytest.raises(ValueError, match="give either a miss cost or a target hit rate"):
        tune_level(HAND, HAND_EXCEEDANCES, "L1", **kwargs)


# ---------------------------------------------------------------------------------------------
# cyanorisk tune on the demo, and the daily report that follows
# ---------------------------------------------------------------------------------------------

SITE_ID = "tallowbark"


@dataclass
class Demo:
    """The session's demo site (tests/conftest.py), as the tuning tests use it."""

    site_data: object

    def __getattr__(self, name: str):
        return getattr(self.site_data, name)

    def config_copy(self, folder: Path) -> Path:
        """The demo configuration in ``folder``, reading the demo's data (and reusing the
        session's clean tables) and writing reports and models under ``folder``; the fitted
        models copied there."""
        (folder / "models").mkdir()
        shutil.copy(self.model_file, folder / "models" / self.model_file.name)
        return self.site_data.write_config(folder / "site.toml", reports_dir=folder / "reports",
                                           models_dir=folder / "models")


def thresholds_for(config_path: Path) -> Thresholds:
    """The thresholds the site pipeline applies for the configuration's site."""
    config = load_config(config_path)
    return SitePipeline.of(config, config.sites[0]).thresholds()


@pytest.fixture(scope="module")
def demo(demo_site) -> Demo:
    return Demo(demo_site)


@pytest.fixture(scope="module")
def result(demo):
    """The library's backtest of the demo over the seasons ``cyanorisk tune`` uses by default
    (all but the first), with the default thresholds."""
    names = demo.spec.levels
    seasons = parse_seasons(None, sorted(set(season_of(demo.table["issue_date"], 7).tolist())))
    assert seasons == list(range(2017, 2025))
    return walk_forward(demo.spec, demo.table, demo.totals, seasons, Thresholds.default(names))


def best_hit_rate(result, level: str) -> float:
    view = warning_view(result.forecasts)
    f = view[(view["level"] == level) & view["probability"].notna()]
    return float(sweep(f, result.exceedances, lead_times=False)["hit_rate"].max())


def thresholds_file(config_path: Path) -> Path:
    return config_path.parent / "models" / f"{SITE_ID}.thresholds.toml"


def proposal_file(config_path: Path) -> Path:
    return config_path.parent / "models" / f"{SITE_ID}.thresholds.proposed.toml"


def report_forecast(config: Path, capsys) -> dict:
    """The forecast block of the report `cyanorisk report` writes for the demo's last day."""
    assert main(["report", "--config", str(config)]) == 0
    capsys.readouterr()
    path = config.parent / "reports" / SITE_ID / f"{SITE_ID}_2025-01-14.json"  # the last day
    return json.loads(path.read_text(encoding="utf-8"))["forecast"]


def test_tune_proposes_and_only_an_accepted_proposal_is_applied(demo, result, tmp_path, capsys):
    config = demo.config_copy(tmp_path)
    assert main(["tune", "--config", str(config), "--miss-cost", "5"]) == 0
    out = capsys.readouterr().out
    proposal = proposal_file(config)
    plot = tmp_path / "reports" / SITE_ID / "tuning_2018-2024.png"  # the seasons replayed
    assert f"wrote {proposal}" in out and f"wrote {plot}" in out
    assert "the proposal is not in force" in out and "--accept" in out
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    tuned = tomllib.loads(proposal.read_text(encoding="utf-8"))
    names = demo.spec.levels
    assert (tuned["site_id"], tuned["seasons"]) == (SITE_ID, "2018-2024")
    assert tuned["rule"] == "miss cost 5 (a missed exceedance costs 5 false alarms)"
    assert sorted(tuned["warn_at"]) == sorted(names)
    # the thresholds the library chooses on the same backtest, written to 2 decimals
    for name in names:
        want = tune_level(result.forecasts, result.exceedances, name, miss_cost=5, n_boot=0)
        assert tuned["warn_at"][name] == pytest.approx(want.threshold, abs=1e-9), name
    # not accepted yet: the report keeps the thresholds in force (here the default)
    assert not thresholds_file(config).exists()
    assert report_forecast(config, capsys)["warn_at"] == {n: DEFAULT_WARN_AT for n in names}

    assert main(["tune", "--config", str(config), "--accept"]) == 0
    assert f"wrote {thresholds_file(config)}" in capsys.readouterr().out
    in_force = tomllib.loads(thresholds_file(config).read_text(encoding="utf-8"))
    assert in_force["warn_at"] == tuned["warn_at"]
    assert pd.Timestamp(in_force["accepted_at"]).tzinfo is not None  # when, in UTC
    forecast = report_forecast(config, capsys)
    assert forecast["warn_at"] == pytest.approx(tuned["warn_at"], abs=1e-12)
    source = forecast["thresholds_source"]
    assert str(thresholds_file(config)) in source and "seasons 2018-2024" in source
    assert "miss cost 5" in source and f"accepted {in_force['accepted_at']}" in source


def test_accept_without_a_proposal_names_the_file(demo, tmp_path, capsys):
    config = demo.config_copy(tmp_path)
    assert main(["tune", "--config", str(config), "--accept"]) == 1
    assert capsys.readouterr().err.strip() == (
        f"cyanorisk: {proposal_file(config)}: no thresholds proposal for site '{SITE_ID}'; run "
        "`cyanorisk tune` first")


@pytest.mark.parametrize(("flags", "option", "words"), [
    (["--miss-cost", "-1"], "--miss-cost", "'-1' is not a cost"),
    (["--miss-cost", "0"], "--miss-cost", "'0' is not a cost"),
    (["--miss-cost", "lots"], "--miss-cost", "'lots' is not a cost"),
    (["--target-hit-rate", "1.5"], "--target-hit-rate", "'1.5' is not a hit rate"),
    (["--target-hit-rate", "0"], "--target-hit-rate", "'0' is not a hit rate"),
    (["--seasons", "2024-2018", "--miss-cost", "5"], "--seasons", "runs backwards"),
    (["--accept", "--miss-cost", "5"], "--accept", "give it alone"),
])
def test_tune_refuses_a_value_it_cannot_take_in_one_sentence(demo, tmp_path, capsys, flags,
                                                              option, words):
    config = demo.config_copy(tmp_path)
    assert main(["tune", "--config", str(config), *flags]) == 2
    captured = capsys.readouterr()
    (line,) = captured.err.strip().splitlines()
    assert line.startswith(f"cyanorisk: option {option}: ") and words in line
    assert captured.out == ""
    assert not proposal_file(config).exists()


def test_an_unstable_choice_is_said_plainly():
    # hand-made: two seasons that want very different thresholds
    from cyanorisk.tuning import Choice

    wide = Choice("L1", 0.2, "miss cost 5", pd.DataFrame(), np.array([0.02] * 50 + [0.37] * 50))
    narrow = Choice("L1", 0.2, "miss cost 5", pd.DataFrame(), np.array([0.18] * 50 + [0.22] * 50))
    assert wide.unstable and "unstable across seasons" in wide.verdict()
    assert "0.02 to 0.37" in wide.verdict()
    assert not narrow.unstable and narrow.verdict().startswith("stable across seasons")


def test_report_without_a_thresholds_file_uses_the_default(demo, tmp_path, capsys):
    config = demo.config_copy(tmp_path)
    assert main(["report", "--config", str(config)]) == 0
    capsys.readouterr()
    forecast = json.loads((tmp_path / "reports" / SITE_ID / f"{SITE_ID}_2025-01-14.json")
                          .read_text(encoding="utf-8"))["forecast"]
    assert forecast["warn_at"] == {n: DEFAULT_WARN_AT for n in demo.spec.levels}
    assert forecast["thresholds_source"] == "default: 50% for every level (not tuned for this site)"


def test_a_level_whose_target_cannot_be_met_keeps_its_earlier_threshold(demo, result, tmp_path,
                                                                         capsys):
    # A target hit rate between the best hit rates of two levels can be met for one of them only.
    best = {name: best_hit_rate(result, name) for name in demo.spec.levels}
    met, unmet = max(best, key=best.get), min(best, key=best.get)
    assert best[unmet] < best[met]
    target = (best[unmet] + best[met]) / 2
    config = demo.config_copy(tmp_path)
    path = thresholds_file(config)
    path.write_text(f'site_id = "{SITE_ID}"\nrule = "by hand"\nseasons = "2017-2024"\n\n'
                    f'[warn_at]\n"{met}" = 0.99\n"{unmet}" = 0.2\n', encoding="utf-8")
    assert main(["tune", "--config", str(config), "--target-hit-rate", f"{target:.6f}"]) == 0
    out = capsys.readouterr().out
    assert f"  {met}: target hit rate" in out
    assert re.search(rf"{unmet}: no threshold reaches a hit rate of .*; its threshold is left "
                     r"as it was", out)
    assert main(["tune", "--config", str(config), "--accept"]) == 0
    warn_at = thresholds_for(config).warn_at
    assert warn_at[met] == pytest.approx(
        choose_by_hit_rate(sweep(warning_view(result.forecasts).query("level == @met")
                                 .dropna(subset=["probability"]), result.exceedances,
                                 lead_times=False), target), abs=1e-9)  # tuned anew
    assert warn_at[unmet] == pytest.approx(0.2, abs=1e-9)  # left as it was


@pytest.mark.parametrize(("body", "problem"), [
    ('[warn_at]\n"Alert Level 1" = 0.3\n"Alert Level 3" = 0.4\n', "levels Alert Level 3 are not in"),
    ('[warn_at]\n"Alert Level 1" = 1.5\n', "a threshold is outside (0, 1)"),
    ('[warn_at\n"Alert Level 1" = 0.3\n', "not a readable thresholds file"),
])
def test_a_thresholds_file_the_scheme_cannot_use_is_refused_naming_the_file(demo, tmp_path, capsys,
                                                                            body, problem):
    config = demo.config_copy(tmp_path)
    path = thresholds_file(config)
    path.write_text(f'site_id = "{SITE_ID}"\n' + body, encoding="utf-8")
    with pytest.raises(ModelFileError) as err:
        thresholds_for(config)
    assert str(err.value).startswith(f"{path}: ")
    assert problem in str(err.value)
    # the daily report refuses it too: one sentence naming the file, exit 1, no report
    assert main(["report", "--config", str(config)]) == 1
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"cyanorisk: {path}: ")
    assert problem in lines[0]
    assert not list((tmp_path / "reports").rglob("*.json"))


@pytest.mark.parametrize("flags", [[], ["--miss-cost", "5", "--target-hit-rate", "0.9"]])
def test_tune_needs_exactly_one_of_miss_cost_and_target_hit_rate(demo, tmp_path, capsys, flags):
    config = demo.config_copy(tmp_path)
    assert main(["tune", "--config", str(config), *flags]) == 2
    captured = capsys.readouterr()
    assert captured.err.strip().splitlines() == [
        f"cyanorisk: {config}: give either --miss-cost or --target-hit-rate"]
    assert captured.out == ""
    assert not thresholds_file(config).exists()
    assert not (tmp_path / "reports").exists()
