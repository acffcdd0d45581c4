"""The command line. Thin: it parses arguments, calls the site pipeline or the service, and
prints their results.

Errors are one sentence naming the file (and line and column where there is one) on stderr,
with a non-zero exit status (see :mod:`cyanorisk.errors`). Nothing heavy is imported before a
command runs, so ``--help`` and ``--version`` answer at once.
"""

from __future__ import annotations

import sys
from collections.abc import Callable

from cyanorisk.errors import EXIT_DATA, EXIT_INSUFFICIENT, ConfigError, CyanoriskError, OptionError
from cyanorisk.version import __version__

TYPE_CHECKING = False  # typing, pathlib and argparse wait until a command needs them
if TYPE_CHECKING:
    import argparse

    from cyanorisk.config import Config
    from cyanorisk.pipeline import SitePipeline


def _config(args: argparse.Namespace, check_files: bool = True) -> Config:
    """The configuration named by ``--config``; with ``--site ID``, only that site of it."""
    import dataclasses

    from cyanorisk.config import load_config

    config = load_config(args.config, check_files=check_files)
    wanted = getattr(args, "site", None)
    if wanted:
        ids = [s.id for s in config.sites]
        if wanted not in ids:
            raise OptionError("--site", f"{wanted!r} is not a site of {config.path}; its sites "
                                        f"are {', '.join(ids)}")
        config = dataclasses.replace(config, sites=tuple(s for s in config.sites
                                                         if s.id == wanted))
    return config


def _print_json(value) -> None:
    import json

    print(json.dumps(value, indent=2, default=str))


def each_site(config: Config, work: Callable[[SitePipeline], int | None], label: str = "", *,
              lock: bool = True) -> int:
    """Do ``work`` for every site, one after another, each under the site's lock (the one the
    daily job takes; ``lock=False`` for commands that only read); a site that fails, or whose
    lock another run holds, is told in one sentence on stderr and the others go on. Returns the
    exit status: the worst of the sites' (a data or configuration problem before an
    insufficient-data report)."""
    from contextlib import nullcontext

    from cyanorisk.compute import Progress
    from cyanorisk.pipeline import SitePipeline
    from cyanorisk.service.locks import site_lock

    statuses = [0]
    bar = Progress(len(config.sites), label, stream=sys.stderr) \
        if label and sys.stderr.isatty() else None
    for site in config.sites:
        try:
            with site_lock(config.data_dir, site.id) if lock else nullcontext():
                statuses.append(work(SitePipeline.of(config, site)) or 0)
        except CyanoriskError as exc:
            print(f"cyanorisk: {exc}", file=sys.stderr)
            statuses.append(exc.exit_status)
        if bar is not None:
            bar.step(site.id)
    return worst(statuses)


def worst(statuses: list[int]) -> int:
    """The exit status of several: a failure (1, 2, 4) before insufficient data (3) before 0."""
    failures = [s for s in statuses if s not in (0, EXIT_INSUFFICIENT)]
    if failures:
        return max(failures)
    return EXIT_INSUFFICIENT if EXIT_INSUFFICIENT in statuses else 0


def cmd_ingest(args: argparse.Namespace) -> int:
    """Ingest every site's weather and lab files; write clean tables and rejects; summarise."""
    from cyanorisk.report.ingest_summary import summary_text

    summaries: list[dict] = []
    status = each_site(_config(args), lambda p: summaries.append(p.clean(reuse=not args.force).summary),
                       "ingest")
    if args.json:
        _print_json(summaries)
    else:
        for summary in summaries:
            print(summary_text(summary))
    return status


def _label_balance_lines(pipeline: SitePipeline, table) -> list[str]:
    from cyanorisk.training import label_balance

    return [f"  {col}: {c['1']:,} reached, {c['0']:,} not reached, {c['missing']:,} without a "
            "sample in the window"
            for col, c in label_balance(table, pipeline.spec.horizon_days).items()]


def cmd_features(args: argparse.Namespace) -> int:
    """Build the daily drivers, align the lab results: write the training table."""
    def work(pipeline: SitePipeline) -> None:
        table = pipeline.training_table()
        written = pipeline.write_training_table(table, csv=args.csv)
        print(f"{pipeline.spec.name} ({pipeline.spec.site_id}): training table of "
              f"{table.shape[0]:,} issue days x {table.shape[1]} columns")
        print("\n".join(_label_balance_lines(pipeline, table)))
        for path in written:
            print(f"  wrote {path}")

    return each_site(_config(args), work)


def cmd_train(args: argparse.Namespace) -> int:
    """Fit each site's risk model, save it under models/, print its model card."""
    from cyanorisk.report.modelcard import model_card_text

    def work(pipeline: SitePipeline) -> None:
        models, path = pipeline.train(cross_validation=not args.no_cv)
        print(model_card_text(models.card, str(path)))

    return each_site(_config(args), work)


def _report(pipeline: SitePipeline, as_of, store_url: str, out: list | None = None) -> int:
    """Write one site's report; print its headline, or with ``out`` append its JSON document
    and files there instead."""
    from cyanorisk.forecast import STATUS_ASSESSED, changes_since
    from cyanorisk.report.document import report_document
    from cyanorisk.service.history import previous_from

    assessment = pipeline.assess(as_of)
    assessment.changes = changes_since(assessment, previous_from(
        store_url, pipeline.spec.site_id, str(assessment.as_of.date())))
    paths = pipeline.write_report(assessment)
    if out is not None:
        out.append({"site_id": pipeline.spec.site_id, "files": [str(p) for p in paths],
                    "report": report_document(assessment)})
    else:
        print(f"{pipeline.spec.name}: {assessment.headline}")
        for p in paths:
            print(f"  wrote {p}")
    return 0 if assessment.status == STATUS_ASSESSED else EXIT_INSUFFICIENT


def cmd_report(args: argparse.Namespace) -> int:
    """Write each site's daily report (HTML, JSON, text) under reports/. Exit status 3 when a
    site's data were insufficient for an outlook (the report says so and is written)."""
    config = _config(args)
    out: list | None = [] if args.json else None
    status = each_site(config, lambda p: _report(p, args.as_of, config.store_url, out))
    if out is not None:
        _print_json(out)
    return status


def _backtests(config: Config, seasons: str | None, bar: bool) -> dict:
    """Every site's backtest, spread over the engine of ``[compute]``: site id -> its run, or
    the exception that stopped it."""
    from cyanorisk.compute import open_engine
    from cyanorisk.pipeline.many import backtest_sites

    with open_engine(config.compute) as engine:
        return backtest_sites(config, seasons, engine, progress=bar, stream=sys.stderr)


def _given(run):
    """A site's backtest run, or raise what stopped it (for :func:`each_site` to tell)."""
    if isinstance(run, Exception):
        if isinstance(run, CyanoriskError):
            raise run
        from cyanorisk.errors import BacktestError

        # not a lack of data (status 3) but a fault: said in one sentence, status 1
        raise BacktestError(f"the backtest failed: {type(run).__name__}: {run}")
    return run


def cmd_backtest(args: argparse.Namespace) -> int:
    """Walk-forward backtest of each site over past seasons; write forecasts, scores, page.
    Sites and seasons are spread over the engine of ``[compute]``."""
    out: list | None = [] if args.json else None
    config = _config(args)
    runs = _backtests(config, args.seasons, out is None)
    status = each_site(config, lambda p: _backtest(p, _given(runs[p.spec.site_id]), out))
    if out is not None:
        _print_json(out)
    return status


def _backtest(pipeline: SitePipeline, run, out: list | None = None) -> None:
    from cyanorisk.report.backtest_page import season_sentences

    paths = pipeline.write_backtest(run)
    result = run.result
    if out is not None:
        out.append({"site_id": pipeline.spec.site_id, "seasons": run.span,
                    "replayed": result.replayed,
                    "not_replayed": {str(k): v for k, v in result.not_replayed.items()},
                    "overall": result.overall.to_dict(orient="records"),
                    "seasons_in_words": {title: sentences for title, sentences
                                         in season_sentences(result, pipeline.spec.levels)},
                    "files": [str(p) for p in paths]})
        return
    print(f"{pipeline.spec.name} ({pipeline.spec.site_id}): backtest of seasons {run.span}"
          + (f" (not replayed: {', '.join(str(s) for s in sorted(result.not_replayed))})"
             if result.not_replayed else ""))
    overall = result.overall[result.overall["source"] == "model"]
    for _, r in overall.iterrows():
        clim = result.overall[(result.overall["source"] == "climatology")
                              & (result.overall["level"] == r["level"])].iloc[0]
        print(f"  {r['level']}: ROC AUC {r['roc_auc']:.3f} [{r['roc_auc_low']:.3f}, "
              f"{r['roc_auc_high']:.3f}] (climatology {clim['roc_auc']:.3f}); Brier skill "
              f"vs climatology {r['brier_skill']:.3f} [{r['brier_skill_low']:.3f}, "
              f"{r['brier_skill_high']:.3f}]")
    for title, sentences in season_sentences(result, pipeline.spec.levels):
        print(f"  {title}:")
        for sentence in sentences:
            print(f"    {sentence}")
    for note in result.notes:
        print(f"  note: {note}")
    for p in paths:
        print(f"  wrote {p}")


def cmd_tune(args: argparse.Namespace) -> int:
    """Tune each level's warning threshold on a backtest and write a proposal; with
    ``--accept``, put the proposal in force."""
    if args.accept:
        if args.miss_cost is not None or args.target_hit_rate is not None:
            raise OptionError("--accept", "accepts the proposal already written; give it alone, "
                                          "without --miss-cost or --target-hit-rate")
        from cyanorisk.service.jobs import utc_clock

        when = utc_clock()  # the clock is read here, at the edge
        return each_site(_config(args), lambda p: _accept(p, when))
    if (args.miss_cost is None) == (args.target_hit_rate is None):
        raise ConfigError(args.config, None, "give either --miss-cost or --target-hit-rate")
    out: list | None = [] if args.json else None
    config = _config(args)
    runs = _backtests(config, args.seasons, out is None)
    status = each_site(config, lambda p: _tune(p, _given(runs[p.spec.site_id]), args, out))
    if out is not None:
        _print_json(out)
    return status


def _accept(pipeline: SitePipeline, when: str) -> None:
    path, thresholds = pipeline.accept_tuning(when)
    print(f"{pipeline.spec.name} ({pipeline.spec.site_id}): thresholds accepted and in force "
          "from the next report: " + ", ".join(f"{n} {v:.2f}" for n, v in
                                               thresholds.warn_at.items()))
    print(f"  wrote {path}")


def _tune(pipeline: SitePipeline, run, args: argparse.Namespace, out: list | None = None) -> None:
    choices, problems = pipeline.tune(run, miss_cost=args.miss_cost,
                                      target_hit_rate=args.target_hit_rate)
    if out is not None:
        written = pipeline.write_tuning(choices, run.span) if choices else []
        out.append({"site_id": pipeline.spec.site_id, "seasons": run.span,
                    "proposed": {c.level: {"warn_at": c.threshold, "rule": c.rule,
                                           "verdict": c.verdict()} for c in choices},
                    "problems": problems, "in_force": False,
                    "files": [str(p) for p in written]})
        return
    print(f"{pipeline.spec.name} ({pipeline.spec.site_id}): thresholds tuned on seasons "
          f"{run.span}")
    for c in choices:
        print(f"  {c.level}: {c.rule}")
        cols = ["threshold", "hits", "misses", "false_alarms", "event_hits", "event_misses",
                "hit_rate", "false_alarm_ratio", "mean_lead_time_days"]
        rows = c.table[c.table["threshold"].isin([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9,
                                                  c.threshold])]
        print("    " + rows[cols].to_string(index=False, float_format=lambda v: f"{v:.2f}")
              .replace("\n", "\n    "))
        print(f"    proposed: warn at {c.threshold:.2f}; {c.verdict()}")
    for problem in problems:
        print(f"  {problem}")
    if choices:
        for p in pipeline.write_tuning(choices, run.span):
            print(f"  wrote {p}")
        config_hint = f" --config {args.config}" if args.config else ""
        print(f"  the proposal is not in force: review it, then `cyanorisk tune{config_hint} "
              "--accept`")


def cmd_serve(args: argparse.Namespace) -> int:
    """Run the daily jobs on schedule in the foreground until SIGTERM or Ctrl-C."""
    import logging
    import signal

    from apscheduler.schedulers.blocking import BlockingScheduler

    from cyanorisk.service.scheduler import _now, add_jobs, add_listeners, catch_up

    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(name)s %(message)s")
    config = _config(args)
    path = str(args.config) if args.config else None
    if config.service.catch_up and not args.no_catch_up and not args.every:
        catch_up(path, _now())
    scheduler = BlockingScheduler()
    add_listeners(scheduler, config)
    add_jobs(scheduler, config, path, args.every, args.as_of)
    for job in scheduler.get_jobs():
        logging.getLogger("cyanorisk.service").info("scheduled %s: %s", job.id, job.trigger)

    def stop(signum, frame):
        logging.getLogger("cyanorisk.service").info("stopping (signal %s)", signum)
        scheduler.shutdown(wait=False)

    signal.signal(signal.SIGTERM, stop)
    signal.signal(signal.SIGINT, stop)
    scheduler.start()
    return 0


def cmd_status(args: argparse.Namespace) -> int:
    """Per site: last run, its status, last level, data freshness."""
    from cyanorisk.service.scheduler import site_status, status_lines

    config = _config(args)
    if args.json:
        _print_json(site_status(config))
        return 0
    for line in status_lines(config):
        print(line)
    return 0


def cmd_run(args: argparse.Namespace) -> int:
    """Run the daily job once for a date (as the scheduler would), recording it in the store.
    Exit status 1 when a site failed, 3 when a site's data were insufficient for an outlook."""
    from cyanorisk.forecast import STATUS_INSUFFICIENT
    from cyanorisk.service.jobs import run_daily, utc_clock

    config = _config(args)
    as_of = args.as_of
    if as_of is None:  # today, in the first site's zone (the clock is read here, at the edge)
        from cyanorisk.service.scheduler import _now, local_today

        as_of = local_today(config.sites[0], _now())
    from cyanorisk.compute import Progress

    bar = Progress(len(config.sites), f"run {as_of}", stream=sys.stderr)
    result = run_daily(as_of, config, clock=utc_clock, progress=bar)
    if args.json:
        import dataclasses

        _print_json({"as_of": result.as_of, "run_id": result.run_id, "status": result.status,
                     "sites": [dataclasses.asdict(o) for o in result.sites]})
    for o in result.sites if not args.json else ():
        print(f"{result.as_of} {o.site_id}: {o.action} (revision {o.revision}, "
              f"{o.level or o.status}); {o.reason}")
        if o.notification:
            print(f"  notification: {o.notification}")
    if result.status == "interrupted":
        print(f"cyanorisk: the run for {result.as_of} was interrupted (a worker was lost); run it "
              "again to complete it", file=sys.stderr)
    return worst([EXIT_DATA if o.action in ("failed", "interrupted") else
                  EXIT_INSUFFICIENT if o.status == STATUS_INSUFFICIENT else 0 for o in result.sites])


def cmd_check(args: argparse.Namespace) -> int:
    """Try everything each site will be asked to do, writing nothing: parse every file, build
    the drivers, count the seasons; list what is wrong, what was assumed, and a verdict.
    Exit status 1 when a site is not ready, 3 when its data cannot train a model yet."""
    config = _config(args)
    checks: list = []

    def work(pipeline: SitePipeline) -> int:
        found = pipeline.check()
        checks.append(found)
        if not args.json:
            print(found.text())
        return found.exit_status

    status = each_site(config, work, lock=False)
    if args.json:
        _print_json({"config": config.path, "ready": status in (0, EXIT_INSUFFICIENT),
                     "sites": [c.as_dict() for c in checks]})
    elif status == 0:
        print(f"{config.path}: configuration is valid; every site is ready")
    elif status == EXIT_INSUFFICIENT:
        print(f"{config.path}: configuration is valid; some site cannot train yet (see above)")
    else:
        print(f"{config.path}: not ready; fix the errors above and check again")
    return status


def cmd_init(args: argparse.Namespace) -> int:
    """Draft a configuration from the user's own weather exports and lab sheets: every choice
    with its evidence, every guess marked to confirm, site details left as blanks."""
    from cyanorisk.draft import draft_config, write_draft

    try:
        draft = draft_config(args.weather, args.samples or ())
    except ValueError as exc:
        if isinstance(exc, CyanoriskError):
            raise
        raise OptionError("--weather", str(exc)) from None
    out = write_draft(draft, args.out)
    print(f"wrote {out}: a drafted configuration with {len(draft.evidence)} choice(s) read from "
          f"the files")
    if draft.to_confirm:
        print(f"  to confirm ({len(draft.to_confirm)}, marked CONFIRM in the file):")
        for line in draft.to_confirm:
            print(f"    - {line}")
    if draft.blanks:
        print(f"  to fill in ({len(draft.blanks)}, marked FILL IN): {', '.join(draft.blanks)}")
    print(f"  next: fill those in, then `cyanorisk check --config {out}`")
    return 0


def cmd_demo(args: argparse.Namespace) -> int:
    """Generate the demo reservoir's data, then run the whole job on it: ingest, drivers,
    training, and the report for the last day."""
    from cyanorisk.demo import write_demo
    from cyanorisk.report.ingest_summary import summary_text
    from cyanorisk.report.modelcard import model_card_text

    config = _config(args, check_files=False)
    if config.demo is None:
        raise ConfigError(config.path, "demo", "missing; the demo needs a [demo] table")
    years = args.years or config.demo.years
    files = write_demo(config.demo.out_dir, years, config.demo.seed)
    print(f"demo: wrote {len(files.weather)} weather export(s) and {len(files.samples)} lab "
          f"sheet(s) for Tallowbark Reservoir ({years} years) under {config.demo.out_dir}")
    def work(pipeline: SitePipeline) -> None:
        print(summary_text(pipeline.clean().summary))
        table = pipeline.training_table()
        print(f"  training table: {table.shape[0]:,} issue days x {table.shape[1]} columns")
        print("\n".join(_label_balance_lines(pipeline, table)))
        models, path = pipeline.train(table)
        print(model_card_text(models.card, str(path)))

    config = _config(args)
    status = each_site(config, work)
    return worst([status, _demo_days(config)])


DEMO_DAYS = 5
"""Days the demo runs the daily job for (the last of the record and those before it), so that
the overview and the history pages have something to show."""


def _demo_days(config: Config) -> int:
    """Run the daily job over the demo's last days, as the service would have; print the last
    day's reports and where the overview is."""
    import pandas as pd

    from cyanorisk.forecast import STATUS_INSUFFICIENT, default_as_of
    from cyanorisk.pipeline import SitePipeline
    from cyanorisk.service.jobs import run_daily, utc_clock

    pipeline = SitePipeline.of(config, config.sites[0])
    last = default_as_of(pipeline.clean().weather, pipeline.spec.timezone)
    days = pd.date_range(end=last, periods=DEMO_DAYS, freq="D")
    result = None
    for day in days:
        result = run_daily(day, config, clock=utc_clock)
    assert result is not None
    for o in result.sites:
        print(f"{result.as_of} {o.site_id}: {o.level or o.status} ({o.action}); daily job run "
              f"for {days[0].date()} to {days[-1].date()}")
        for p in o.paths:
            print(f"  wrote {p}")
    from cyanorisk.pipeline.workspace import overview_file

    print(f"  overview of all sites: {overview_file(config.reports_dir)}; each site's history: "
          f"{config.reports_dir / '<site>' / 'history.html'}")
    return worst([EXIT_DATA if o.action == "failed" else
                  EXIT_INSUFFICIENT if o.status == STATUS_INSUFFICIENT else 0 for o in result.sites])


def build_parser() -> argparse.ArgumentParser:
    from pathlib import Path

    from cyanorisk import options

    parser = options.Parser(
        prog="cyanorisk",
        description="Bloom-risk early warning for lakes and reservoirs.")
    parser.add_argument("--version", action="version", version=f"cyanorisk {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def command(name: str, func, help_text: str, config_required: bool = True,
                json_help: str | None = None):
        p = sub.add_parser(name, help=help_text, description=help_text)
        p.add_argument("--config", type=Path, required=config_required, default=None,
                       help="site configuration (TOML)"
                            + ("" if config_required else "; default: the embedded demo"))
        p.add_argument("--site", metavar="ID", help="act on this site only")
        if json_help:
            p.add_argument("--json", action="store_true", help=json_help)
        p.set_defaults(func=func)
        return p

    p = command("demo", cmd_demo, "generate the demo reservoir's data and run the job on it",
                config_required=False)
    p.add_argument("--years", type=options.years, default=None,
                   help="years of data to generate (1 to 50)")
    p = command("ingest", cmd_ingest, "clean every site's weather and lab files; write them and "
                                      "the rejects", json_help="print the summary as JSON")
    p.add_argument("--force", action="store_true", help="ingest again even when no raw file "
                                                        "changed")
    p = command("features", cmd_features, "build the daily drivers and the training table")
    p.add_argument("--csv", action="store_true", help="also write the table as CSV")
    p = command("train", cmd_train, "fit each site's risk model and print its model card")
    p.add_argument("--no-cv", action="store_true", help="skip the cross-validation by season")
    p = command("report", cmd_report, "write each site's daily risk report",
                json_help="print each report's JSON document and files")
    p.add_argument("--as-of", metavar="DATE", type=options.day,
                   help="local date to report for, YYYY-MM-DD (default: the last day of the "
                        "weather record)")
    p = command("backtest", cmd_backtest, "replay past seasons: how early and how reliably it "
                                          "would have warned",
                json_help="print the seasons replayed and the scores as JSON")
    p.add_argument("--seasons", metavar="YYYY-YYYY", type=options.seasons,
                   help="season start years, e.g. 2015-2022 (default: all but the first)")
    p = command("tune", cmd_tune, "choose the probability that raises each level",
                json_help="print the proposal as JSON")
    p.add_argument("--seasons", metavar="YYYY-YYYY", type=options.seasons,
                   help="seasons to tune on (default: all but the first)")
    p.add_argument("--miss-cost", type=options.cost,
                   help="cost of a missed exceedance in false alarms, above 0")
    p.add_argument("--target-hit-rate", type=options.hit_rate,
                   help="smallest acceptable hit rate, above 0 and at most 1, e.g. 0.9")
    p.add_argument("--accept", action="store_true", help="put the thresholds proposal in force")
    p = command("serve", cmd_serve, "run the daily reports on schedule until stopped")
    p.add_argument("--no-catch-up", action="store_true", help="do not run the days missed while "
                                                              "the service was down")
    p.add_argument("--every", type=options.seconds, metavar="SECONDS",
                   help="for trials: run every SECONDS instead of daily")
    p.add_argument("--as-of", metavar="DATE", type=options.day,
                   help="for trials with --every: the date to assess, YYYY-MM-DD")
    command("status", cmd_status, "show each site's last run, level and data freshness",
            json_help="print the status as JSON")
    p = command("run", cmd_run, "run the daily job once for a date and record it",
                json_help="print what each site's run did as JSON")
    p.add_argument("--as-of", metavar="DATE", type=options.day,
                   help="local date to assess, YYYY-MM-DD (default: today in the first site's "
                        "time zone)")
    command("check", cmd_check, "try everything each site will be asked to do, writing nothing",
            json_help="print the findings as JSON")
    p = sub.add_parser("init", help="draft a configuration from your own weather and lab files",
                       description="Draft a configuration from your own weather exports and lab "
                                   "sheets: each choice with its evidence, each guess marked "
                                   "CONFIRM, site details left as FILL IN blanks.")
    p.add_argument("--weather", nargs="+", type=Path, required=True, metavar="FILE",
                   help="the station's exports (one layout)")
    p.add_argument("--samples", nargs="*", type=Path, default=[], metavar="FILE",
                   help="the lab's phytoplankton sheets (one layout)")
    p.add_argument("--out", type=Path, default=Path("site.toml"),
                   help="where to write the draft (default: site.toml; never written over)")
    p.set_defaults(func=cmd_init)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv == ["--version"]:  # answered before anything else is imported
        print(f"cyanorisk {__version__}")
        return 0
    try:
        args = build_parser().parse_args(argv)
    except SystemExit as exc:  # an option refused (one sentence, status 2), or --help
        return exc.code if isinstance(exc.code, int) else 2
    try:
        return args.func(args)
    except CyanoriskError as exc:
        print(f"cyanorisk: {exc}", file=sys.stderr)
        return exc.exit_status
    except OSError as exc:
        print(f"cyanorisk: {exc.filename or ''}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_DATA


if __name__ == "__main__":
    sys.exit(main())
