"""Backtests of many sites at once: every site's seasons replayed side by side on the compute
engine, each site's result put together here (the same functions as a one-site backtest, so
the same numbers; see :mod:`cyanorisk.compute`)."""

from __future__ import annotations

from typing import TextIO

from cyanorisk.backtest import SeasonReplay, combine, replay_season
from cyanorisk.compute import Engine, Progress, run_all
from cyanorisk.config import Config
from cyanorisk.errors import CyanoriskError
from cyanorisk.pipeline.site import BacktestInputs, BacktestRun, backtest_inputs
from cyanorisk.pipeline.workspace import SiteWorkspace


def backtest_sites(config: Config, seasons_text: str | None, engine: Engine,
                   progress: bool = True,
                   stream: TextIO | None = None) -> dict[str, BacktestRun | Exception]:
    """Each site's backtest over the requested seasons: first every site's inputs, then every
    site-season, spread over ``engine``. A site that fails gets its exception in place of its
    run; the others go on. ``progress``: a bar over the site-seasons on a terminal, a line
    each otherwise (on ``stream``, or logged)."""
    out: dict[str, BacktestRun | Exception] = {}
    inputs: dict[str, BacktestInputs] = {}
    tasks = [(s.id, (s, SiteWorkspace.of(config, s.id), config.path, seasons_text))
             for s in config.sites]
    for done in run_all(engine, backtest_inputs, tasks):
        if done.error is not None:
            out[done.key] = done.error
        else:
            inputs[done.key] = done.value
    # the later seasons first: they learn from more and take longer (the shortest come last,
    # so that no worker is left alone with a long one at the end)
    seasons = [(f"{site_id}/{s}", (b.spec, b.table, s, b.thresholds))
               for site_id, b in inputs.items() for s in b.seasons]
    seasons.sort(key=lambda task: -task[1][2])
    bar = Progress(len(seasons), "backtest", stream=stream) if progress else None
    replays: dict[str, list[SeasonReplay]] = {site_id: [] for site_id in inputs}
    for done in run_all(engine, replay_season, seasons, bar):
        site_id = done.key.split("/")[0]
        if done.error is not None:
            out.setdefault(site_id, done.error)
        else:
            replays[site_id].append(done.value)
    for site_id, b in inputs.items():
        if site_id in out:
            continue
        try:
            out[site_id] = b.run(combine(b.spec, b.totals, b.seasons, b.thresholds,
                                         replays[site_id]))
        except CyanoriskError as exc:
            out[site_id] = exc
    return {s.id: out[s.id] for s in config.sites}
