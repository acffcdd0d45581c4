"""Orchestration of backtests and threshold tuning: run them for a site and write their files."""

from __future__ import annotations

from pathlib import Path

import matplotlib.pyplot as plt
import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.backtest import BacktestResult, parse_seasons, walk_forward
from cyanorisk.config import Config, Site
from cyanorisk.reporting import thresholds_for
from cyanorisk.training import season_of
from cyanorisk.tuning import Choice, thresholds_toml, tune_level


def run_backtest(config: Config, site: Site, table: pd.DataFrame, totals: pd.DataFrame,
                 seasons_text: str | None, progress=None) -> tuple[BacktestResult, str]:
    """The walk-forward backtest of a site over the requested seasons ('2015-2022')."""
    available = sorted(set(season_of(table["issue_date"], site.model.season_start_month).tolist()))
    seasons = parse_seasons(seasons_text, available)
    warn_at = thresholds_for(config, site).warn_at
    result = walk_forward(site, table, totals, seasons, warn_at, progress)
    return result, f"{seasons[0]}-{seasons[-1]}"


def season_counts(site: Site, totals: pd.DataFrame) -> pd.DataFrame:
    """Per-sample counts with their local date and season, for the timelines."""
    if totals.empty:
        return pd.DataFrame(columns=["date", "season", "cyano_cells_per_ml"])
    local = totals["sampled_at"].dt.tz_convert(site.timezone).dt.tz_localize(None)
    return pd.DataFrame({"date": local, "season": season_of(local, site.model.season_start_month),
                         "cyano_cells_per_ml": totals["cyano_cells_per_ml"].to_numpy()})


def write_backtest(config: Config, site: Site, result: BacktestResult, totals: pd.DataFrame,
                   span: str) -> list[Path]:
    """Forecasts (CSV), scores per season and overall (CSV) and the HTML page, as a group."""
    from cyanorisk.report.backtest_page import render_backtest

    scheme = site.alert_scheme()
    cells = [t.value for lvl in scheme.levels for t in lvl.thresholds
             if t.measure == "cyano_cells_per_ml"]
    folder = config.reports_dir / site.id / f"backtest_{span}"
    page = render_backtest(site.name, result, season_counts(site, totals), scheme.names, cells, span)
    forecasts = result.forecasts[["site_id", "season", "issue_date", "level", "horizon_days",
                                  "probability", "outcome", "climatology", "persistence", "warned"]]
    return write_group({
        folder / "forecasts.csv": lambda tmp: forecasts.to_csv(tmp, index=False),
        folder / "scores_by_season.csv": lambda tmp: result.scores.to_csv(tmp, index=False),
        folder / "scores_overall.csv": lambda tmp: result.overall.to_csv(tmp, index=False),
        folder / "backtest.html": lambda tmp: tmp.write_text(page, encoding="utf-8"),
    })


def run_tune(site: Site, result: BacktestResult, *, miss_cost: float | None,
             target_hit_rate: float | None) -> tuple[list[Choice], list[str]]:
    """Tune every level; levels whose target cannot be met are reported, not guessed."""
    choices, problems = [], []
    for level in site.alert_scheme().names:
        try:
            choices.append(tune_level(result.forecasts, result.exceedances, level,
                                      miss_cost=miss_cost, target_hit_rate=target_hit_rate))
        except ValueError as exc:
            problems.append(f"{level}: {exc}; its threshold is left as it was")
    return choices, problems


def thresholds_path(config: Config, site_id: str) -> Path:
    return config.models_dir / f"{site_id}.thresholds.toml"


def write_tuning(config: Config, site: Site, choices: list[Choice], span: str) -> list[Path]:
    """The thresholds TOML (read by the daily report) and the trade-off plot."""
    from cyanorisk.report.backtest_page import tradeoff_plot

    fig, ax = plt.subplots(figsize=(7, 3.5))
    tradeoff_plot(choices, ax=ax)
    plot = config.reports_dir / site.id / f"tuning_{span}.png"
    tuned = {c.level for c in choices}
    kept = {}
    if thresholds_path(config, site.id).exists():  # levels not tuned now keep their threshold
        earlier = thresholds_for(config, site).warn_at
        kept = {level: v for level, v in earlier.items() if level not in tuned}
    text = thresholds_toml(site.id, choices, span, kept)
    return write_group({
        thresholds_path(config, site.id): lambda tmp: tmp.write_text(text, encoding="utf-8"),
        plot: lambda tmp: (fig.savefig(tmp, format="png", dpi=110, bbox_inches="tight"),
                           plt.close(fig)),
    })
