"""Backtests of many sites at once: every site's seasons replayed side by side on the compute
engine, each site's result put together here (the same functions as a one-site backtest, so
the same numbers; see :mod:`cyanorisk.compute`)."""

from __future__ import annotations

from typing import TextIO

from cyanorisk.backtest import SeasonReplay, combine, replay_season
from cyanorisk.compute import Done, Engine, Progress, Task, run_all
from cyanorisk.config import Config
from cyanorisk.errors import CyanoriskError
from cyanorisk.pipeline.site import BacktestInputs, BacktestRun, backtest_inputs
from cyanorisk.pipeline.workspace import SiteWorkspace


def backtest_sites(config: Config, seasons_text: str | None, engine: Engine,
                   progress: bool = True,
                   stream: TextIO | None = None) -> dict[str, BacktestRun | Exception]:
    """Each site's backtest over the requested seasons, spread over ``engine``: every site's
    inputs, and each site's seasons as soon as its inputs are in. A site that fails gets its
    exception in place of its run; the others go on. ``progress``: a bar over the
    site-seasons on a terminal, a line each otherwise (on ``stream``, or logged)."""
    out: dict[str, BacktestRun | Exception] = {}
    inputs: dict[str, BacktestInputs] = {}
    replays: dict[str, list[SeasonReplay]] = {}
    bar = None
    total = 0
    finished: list[tuple[str, str]] = []  # seasons done before the total was known
    answered: set[str] = set()  # sites whose inputs came back (or failed)

    def seasons_of(done: Done) -> list[Task]:
        if "/" in done.key:
            return []
        b: BacktestInputs = done.value
        return [(f"{done.key}/{s}", replay_season, (b.spec, b.table, s, b.thresholds))
                for s in sorted(b.seasons, reverse=True)]

    tasks = [(s.id, backtest_inputs, (s, SiteWorkspace.of(config, s.id), config.path, seasons_text))
             for s in config.sites]
    # one stream: a site's seasons are handed out as soon as its inputs come back, the later
    # seasons first (they learn from more and take longer), so no worker waits for the others
    for done in run_all(engine, tasks, follow=seasons_of):
        site_id, _, season = done.key.partition("/")
        if done.error is not None:  # this site's problem: the others go on
            out.setdefault(site_id, done.error)
        elif not season:
            b = inputs[site_id] = done.value
            replays[site_id] = []
            total += len(b.seasons)
        else:
            replays[site_id].append(done.value)
        if season:
            finished.append((done.key, "failed" if done.error is not None else "done"))
        else:
            answered.add(site_id)
        if progress and bar is None and len(answered) == len(config.sites):
            bar = Progress(total, "backtest", stream=stream)
        if bar is not None:
            for key, what in finished:
                bar.step(key, what)
            finished.clear()
    for site_id, b in inputs.items():
        if site_id in out:
            continue
        try:
            out[site_id] = b.run(combine(b.spec, b.totals, b.seasons, b.thresholds,
                                         replays[site_id]))
        except CyanoriskError as exc:
            out[site_id] = exc
    return {s.id: out[s.id] for s in config.sites}
