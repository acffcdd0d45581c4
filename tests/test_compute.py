"""Many sites at once: the compute engines of [compute] (cyanorisk.compute) and the daily job
spread over them. The results must not depend on the engine: the same functions on the same
inputs, whichever process runs them (the reference is the serial run, in this process)."""

from __future__ import annotations

import io
import json
import os
from pathlib import Path

import dask
import pandas as pd
import pytest

from conftest import SISTER
from cyanorisk import compute
from cyanorisk.compute import DaskEngine, Done, Progress, SerialEngine, open_engine, run_all
from cyanorisk.config import ComputeSettings, load_config
from cyanorisk.errors import ComputeError, ConfigError, WorkerLostError
from cyanorisk.service import jobs
from cyanorisk.service.jobs import assess_site, run_daily
from cyanorisk.service.store import Store
from test_jobs import RISE_DAY, SITE, Clock

NO_MODEL = """
[[sites]]
id = "nomodel"
name = "Pond Without A Model"
timezone = "Australia/Melbourne"
use = "drinking"
interval = "30min"

[sites.weather]
files = ["demo_data/tallowbark/weather/tallowbark_aws_*.txt"]
dialect = "tallowbark_logger"
"""
"""A third site that cannot be assessed (it has never been trained)."""


@pytest.fixture(scope="module")
def local_engine():
    """One two-worker LocalCluster for the module (starting one takes seconds)."""
    with open_engine(ComputeSettings(engine="local", workers=2)) as engine:
        yield engine


def documents(config, outcome) -> dict[str, str]:
    """A site's report files by suffix (text)."""
    return {Path(p).suffix: Path(p).read_text(encoding="utf-8") for p in outcome.paths}


def test_the_local_engine_gives_what_the_serial_one_gives(tmp_path, two_sites, local_engine):
    runs = {}
    for name, engine in (("serial", SerialEngine()), ("local", local_engine)):
        config = load_config(two_sites.write_config(tmp_path / name, extra=NO_MODEL))
        result = run_daily(RISE_DAY, config, clock=Clock(), engine=engine)
        runs[name] = (config, result)
    (c1, serial), (c2, local) = runs["serial"], runs["local"]
    assert [o.site_id for o in local.sites] == [SITE, SISTER, "nomodel"]  # in configuration order
    assert [(o.action, o.status, o.level, o.revision) for o in local.sites] == \
        [(o.action, o.status, o.level, o.revision) for o in serial.sites]
    # one failing site never stops the others: it gets its 'no assessment' report, they theirs
    assert [o.action for o in local.sites] == ["issued", "issued", "failed"]
    assert "no model for site 'nomodel'" in local.sites[2].reason
    assert (serial.status, local.status) == ("partial", "partial")
    for a, b in zip(serial.sites, local.sites, strict=True):
        da, db = documents(c1, a), documents(c2, b)
        assert da.keys() == db.keys() == {".html", ".json", ".txt"}
        for suffix in (".json", ".txt"):  # the paths differ only by the installation's folder
            assert da[suffix].replace(str(tmp_path / "serial"), "") == \
                db[suffix].replace(str(tmp_path / "local"), "")
    with Store(c1.store_url) as s1, Store(c2.store_url) as s2:
        recorded = [json.dumps([(r.site_id, r.level, r.probabilities, r.summary)
                                for r in sorted(store.reports(), key=lambda r: r.site_id)])
                    .replace(str(tmp_path / name), "") for store, name in ((s1, "serial"), (s2, "local"))]
        assert recorded[0] == recorded[1]


def test_the_same_day_again_on_the_local_engine_dispatches_nothing(tmp_path, two_sites,
                                                                   local_engine, monkeypatch):
    config = load_config(two_sites.write_config(tmp_path))
    run_daily(RISE_DAY, config, clock=Clock(), engine=local_engine)
    submitted = []
    real = local_engine.submit
    monkeypatch.setattr(local_engine, "submit",
                        lambda key, fn, *args: submitted.append(key) or real(key, fn, *args))
    again = run_daily(RISE_DAY, config, clock=Clock(), engine=local_engine)
    assert [o.action for o in again.sites] == ["unchanged", "unchanged"]
    assert submitted == []  # settled by the coordinator from the inputs' hashes


def test_a_task_touches_no_store_and_writes_no_report(tmp_path, two_sites):
    """The store is written only by the coordinating process: a site's task returns its
    report rendered, and writes nothing but the site's clean tables (its own cache)."""
    config = load_config(two_sites.write_config(tmp_path))
    site = config.site(SISTER)
    from cyanorisk.pipeline import SitePipeline

    pipeline = SitePipeline.of(config, site)
    inputs = jobs.site_inputs(pipeline)
    result = assess_site(site, pipeline.workspace, config.path, config.service, RISE_DAY,
                         pipeline.run_day, inputs, None, None, None, None)
    assert result.failure is None and result.rendered is not None
    assert json.loads(result.rendered.texts["json"])["site"]["id"] == SISTER
    assert not (config.data_dir / "cyanorisk.db").exists()
    assert not config.reports_dir.exists()
    assert result.fingerprint == jobs.fingerprint(RISE_DAY, inputs)


class LosingEngine(SerialEngine):
    """A serial engine whose worker is lost after ``keep`` tasks."""

    def __init__(self, keep: int) -> None:
        self.keep = keep

    def next_done(self, pending):
        if self.keep == 0:
            raise WorkerLostError("a worker was lost while running kestrel (KilledWorker: test)")
        self.keep -= 1
        return super().next_done(pending)


def test_a_lost_worker_leaves_the_run_interrupted_and_the_next_run_completes_it(tmp_path,
                                                                                 two_sites):
    config = load_config(two_sites.write_config(tmp_path))
    first = run_daily(RISE_DAY, config, clock=Clock(), engine=LosingEngine(keep=1))
    assert first.status == "interrupted"
    assert [(o.site_id, o.action) for o in first.sites] == [(SITE, "issued"),
                                                            (SISTER, "interrupted")]
    assert "the next run completes this site" in first.sites[1].reason
    with Store(config.store_url) as store:
        run = store.runs()[-1]
        assert (run["status"], run["ended_at"] is not None) == ("interrupted", True)
        assert "a worker was lost" in run["error"]
        assert {r.site_id for r in store.reports()} == {SITE}
    second = run_daily(RISE_DAY, config, clock=Clock())
    assert [(o.site_id, o.action) for o in second.sites] == [(SITE, "unchanged"),
                                                             (SISTER, "issued")]
    assert second.status == "ok"


def test_a_killed_dask_worker_is_a_lost_worker():
    """Dask gives up on a task whose worker dies (KilledWorker, here after the first death);
    the engine says the worker was lost, distinct from a task's own error."""
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        with open_engine(ComputeSettings(engine="local", workers=1)) as engine:
            assert isinstance(engine, DaskEngine)
            done = list(run_all(engine, [("fine", divmod, (7, 2)), ("zero", divmod, (1, 0))]))
            assert {d.key: (d.value, type(d.error)) for d in done} == {
                "fine": ((3, 1), type(None)), "zero": (None, ZeroDivisionError)}
            with pytest.raises(WorkerLostError, match="a worker was lost while running boom"):
                list(run_all(engine, [("boom", os._exit, (1,))]))


def test_an_engine_that_cannot_start_leaves_the_run_to_this_process(tmp_path, two_sites,
                                                                    monkeypatch):
    def refuse(settings):
        raise ComputeError("compute.address = 'tcp://nowhere:8786': no Dask scheduler answers")

    monkeypatch.setattr(jobs, "open_engine", refuse)
    config = load_config(two_sites.write_config(tmp_path))
    lines = io.StringIO()
    result = run_daily(RISE_DAY, config, clock=Clock(),
                       progress=Progress(2, "run", stream=lines, bar=False))
    assert [o.action for o in result.sites] == ["issued", "issued"] and result.status == "ok"
    with Store(config.store_url) as store:
        assert "ran one after another in this process" in store.runs()[-1]["error"]
    # and the progress: a line per site as it is filed
    assert lines.getvalue().splitlines() == [f"run: {SITE} issued (1/2)",
                                             f"run: {SISTER} issued (2/2)"]


def test_run_all_keeps_a_window_and_yields_every_task():
    engine = SerialEngine()
    done = list(run_all(engine, [(str(i), pow, (i, 2)) for i in range(5)], window=2))
    assert [(d.key, d.value) for d in done] == [(str(i), i * i) for i in range(5)]
    assert all(isinstance(d, Done) and d.error is None for d in done)


def test_run_all_hands_out_what_a_task_leads_to_before_the_rest():
    def then(done):
        return [(f"{done.key}/sq", pow, (done.value, 2))] if "/" not in done.key else []

    done = list(run_all(SerialEngine(), [("a", abs, (-2,)), ("b", abs, (-3,))], follow=then))
    assert [(d.key, d.value) for d in done] == [("a", 2), ("a/sq", 4), ("b", 3), ("b/sq", 9)]


def test_progress_is_a_bar_on_a_terminal_and_lines_otherwise():
    lines = io.StringIO()
    p = Progress(2, "run 2024-11-30", stream=lines, bar=False)
    p.step("tallowbark", "issued")
    p.step("kestrel", "unchanged")
    assert lines.getvalue().splitlines() == ["run 2024-11-30: tallowbark issued (1/2)",
                                             "run 2024-11-30: kestrel unchanged (2/2)"]
    bar = io.StringIO()
    p = Progress(2, "backtest", stream=bar, bar=True)
    p.step("a")
    p.step("b")
    assert bar.getvalue().endswith("\rbacktest [" + "#" * 30 + "] 2/2\n")


@pytest.mark.parametrize(("table", "key", "fragment"), [
    ('engine = "cluster"', "compute", "engine 'cluster' needs address"),
    ('engine = "serial"\nworkers = 2', "compute", "workers is for engine 'local'"),
    ('engine = "spark"', "compute", "engine 'spark' is not one of"),
    ('engine = "local"\nworkers = 0', "compute", "workers must be from 1 to 256"),
    ('threads = 4', "compute.threads", "unknown key"),
])
def test_compute_settings_are_checked(tmp_path, two_sites, table, key, fragment):
    path = two_sites.write_config(tmp_path, extra=f"\n[compute]\n{table}\n")
    with pytest.raises(ConfigError) as info:
        load_config(path)
    assert info.value.key == key and fragment in str(info.value)


def test_an_address_alone_chooses_the_cluster_engine(tmp_path, two_sites):
    path = two_sites.write_config(tmp_path, extra='\n[compute]\naddress = "tcp://10.0.0.5:8786"\n')
    assert load_config(path).compute == ComputeSettings(engine="cluster",
                                                        address="tcp://10.0.0.5:8786")
    assert load_config(two_sites.write_config(tmp_path / "b")).compute.engine == "serial"


def test_the_local_engine_without_dask_says_how_to_install_it(monkeypatch):
    import builtins

    real = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name == "distributed" or name.startswith("distributed."):
            raise ImportError(name)
        return real(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_dask)
    with pytest.raises(ComputeError, match=r"pip install 'cyanorisk\[dask\]'"):
        compute.open_engine(ComputeSettings(engine="local", workers=1))


def test_backtests_spread_over_sites_and_seasons_give_the_one_site_backtests(tmp_path, two_sites,
                                                                            local_engine):
    from cyanorisk.pipeline import SitePipeline
    from cyanorisk.pipeline.many import backtest_sites

    config = load_config(two_sites.write_config(tmp_path))
    said = io.StringIO()
    spread = backtest_sites(config, "2023-2024", local_engine, progress=True, stream=said)
    assert list(spread) == [SITE, SISTER]
    # one line per site-season (none for putting a site's seasons together), the later first
    lines = said.getvalue().splitlines()
    assert len(lines) == 4 and lines[-1].endswith("(4/4)"), lines
    assert sorted(line.split()[1] for line in lines) == sorted(
        f"{s}/{y}" for s in (SITE, SISTER) for y in (2023, 2024))
    assert spread[SITE].span == "2023-2024"  # the demo's eight seasons: both replayed
    for site in config.sites:
        alone = SitePipeline.of(config, site).backtest("2023-2024")
        run = spread[site.id]
        assert run.span == alone.span and run.result.notes == alone.result.notes
        pd.testing.assert_frame_equal(run.result.forecasts, alone.result.forecasts)
        pd.testing.assert_frame_equal(run.result.overall, alone.result.overall)
        pd.testing.assert_frame_equal(run.result.scores, alone.result.scores)


def test_a_site_whose_backtest_fails_does_not_stop_the_others(tmp_path, two_sites):
    from cyanorisk.errors import BacktestError
    from cyanorisk.pipeline.many import backtest_sites

    config = load_config(two_sites.write_config(tmp_path))
    # the sister's data hold four seasons, the demo's eight: 2018 is the demo's only
    runs = backtest_sites(config, "2018", SerialEngine(), progress=False)
    assert runs[SITE].span == "2018-2018"
    assert isinstance(runs[SISTER], BacktestError) and "the data hold seasons" in str(runs[SISTER])
