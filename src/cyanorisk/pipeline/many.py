"""Backtests of many sites at once: every site's seasons replayed side by side on the compute
engine, and each site's result put together there too as soon as its last season is in (the
same functions as a one-site backtest, so the same numbers; see :mod:`cyanorisk.compute`)."""

from __future__ import annotations

from typing import TextIO

from cyanorisk.backtest import SeasonReplay, combine, replay_season
from cyanorisk.compute import Done, Engine, Progress, Task, run_all
from cyanorisk.config import Config
from cyanorisk.pipeline.site import BacktestInputs, BacktestRun, backtest_inputs
from cyanorisk.pipeline.workspace import SiteWorkspace

SCORED = "scores"
"""The key suffix ('site/scores') of the task that puts a site's seasons together."""


def backtest_run(b: BacktestInputs, replays: list[SeasonReplay]) -> BacktestRun:
    """A site's backtest run from its seasons' replays (a compute task: scores, reliability).

    Raises
    ------
    NothingToReplayError
        When no season could be replayed, saying why for each.
    """
    return b.run(combine(b.spec, b.totals, b.seasons, b.thresholds, replays))


def backtest_sites(config: Config, seasons_text: str | None, engine: Engine,
                   progress: bool = True,
                   stream: TextIO | None = None) -> dict[str, BacktestRun | Exception]:
    """Each site's backtest over the requested seasons, spread over ``engine``: every site's
    inputs, then all sites' seasons, and a site's scores as soon as its seasons are in. A site
    that fails gets its exception in place of its run; the others go on. ``progress``: a bar
    over the site-seasons on a terminal, a line each otherwise (on ``stream``, or logged)."""
    out: dict[str, BacktestRun | Exception] = {}
    inputs: dict[str, BacktestInputs] = {}
    for done in run_all(engine, [(s.id, backtest_inputs, (s, SiteWorkspace.of(config, s.id),
                                                          config.path, seasons_text))
                                 for s in config.sites]):
        if done.error is not None:  # this site's problem: the others go on
            out[done.key] = done.error
        else:
            inputs[done.key] = done.value
    replays: dict[str, list[SeasonReplay]] = {site_id: [] for site_id in inputs}

    def scores_when_complete(done: Done) -> list[Task]:
        site_id, _, part = done.key.partition("/")
        if part == SCORED:
            return []
        replays[site_id].append(done.value)
        b = inputs[site_id]
        if len(replays[site_id]) < len(b.seasons):
            return []
        return [(f"{site_id}/{SCORED}", backtest_run, (b, replays[site_id]))]

    # the later seasons first, all sites together: they learn from more and take longer, so
    # the short ones come last and no worker is left waiting for the others at the end
    order = sorted(((site_id, s) for site_id, b in inputs.items() for s in b.seasons),
                   key=lambda pair: (-pair[1], pair[0]))
    bar = Progress(len(order), "backtest", stream=stream) if progress else None
    tasks = [(f"{site_id}/{s}", replay_season, (b.spec, b.table, s, b.thresholds))
             for site_id, s in order for b in [inputs[site_id]]]
    for done in run_all(engine, tasks, follow=scores_when_complete):
        site_id, _, part = done.key.partition("/")
        if done.error is not None:
            out.setdefault(site_id, done.error)
        elif part == SCORED:
            out[site_id] = done.value
        if bar is not None and part != SCORED:
            bar.step(done.key, "failed" if done.error is not None else "done")
    return {s.id: out[s.id] for s in config.sites}
