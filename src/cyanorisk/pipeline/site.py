"""The one orchestrator of a site: its methods follow the data, in this order.

    raw files --clean--> clean tables (reused while the raw files are unchanged)
    clean tables --training_table--> drivers and outcomes per issue day
    training table --train--> the site's models, saved under models/
    models + clean tables --assess(as_of)--> the day's assessment --write_report--> reports/
    training table --backtest--> forecasts and scores of past seasons --tune--> thresholds

The command line and the scheduled service call only this class (and the service keeps its
store, idempotency and notices); the core below it touches no file and reads no clock.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path

import numpy as np
import pandas as pd

from cyanorisk.atomic import write_group
from cyanorisk.backtest import BacktestResult, parse_seasons, walk_forward
from cyanorisk.config import Config, Site
from cyanorisk.errors import (
    CyanoriskError,
    InsufficientDataError,
    ModelFileError,
    NothingToReplayError,
)
from cyanorisk.features import issue_instants
from cyanorisk.forecast import Assessment, InForce, assess, default_as_of, known_samples, lab_level
from cyanorisk.model import SiteModels
from cyanorisk.pipeline.check import SiteCheck, check_site
from cyanorisk.pipeline.clean import CleanData, clean_site, file_digest
from cyanorisk.pipeline.workspace import SiteWorkspace, read_thresholds
from cyanorisk.spec import SiteSpec, Thresholds
from cyanorisk.training import fit_site, season_of, training_table
from cyanorisk.tuning import Choice, accepted_toml, proposal_toml, tune_level

Progress = Callable[[Iterable, int, str], Iterable]


@dataclass(frozen=True)
class RenderedReport:
    """A report rendered (by whichever process assessed it), ready to be written."""

    stem: str
    """File name without suffix: ``<site id>_<date>``."""
    texts: dict[str, str]
    """Suffix ('html', 'json', 'txt') -> the file's text."""
    document: dict
    """The JSON document (as ``texts['json']`` holds it)."""


def render_report(assessment: Assessment) -> RenderedReport:
    """The three renderings of an assessment: page, JSON document, text summary."""
    from cyanorisk.report.daily import render_html, render_json, render_text
    from cyanorisk.report.document import report_document, report_stem

    return RenderedReport(report_stem(assessment),
                          {"html": render_html(assessment), "json": render_json(assessment),
                           "txt": render_text(assessment)}, report_document(assessment))


@dataclass
class BacktestRun:
    """A backtest of a site over a span of seasons, with what its page needs."""

    result: BacktestResult
    span: str
    """The seasons replayed, as 'first-last' (season start years)."""
    totals: pd.DataFrame
    """The site's per-sample totals (for the season timelines)."""


@dataclass
class BacktestInputs:
    """What a site's backtest needs, as one value (a compute task's result)."""

    spec: SiteSpec
    table: pd.DataFrame
    totals: pd.DataFrame
    seasons: list[int]
    thresholds: Thresholds

    def run(self, result: BacktestResult) -> BacktestRun:
        """The backtest run of its result.

        Raises
        ------
        NothingToReplayError
            When no season could be replayed, saying why for each.
        """
        replayed = result.replayed
        if not replayed:
            raise NothingToReplayError("no season could be replayed: " + "; ".join(
                f"season {s}: {why}" for s, why in sorted(result.not_replayed.items())))
        return BacktestRun(result, f"{replayed[0]}-{replayed[-1]}", self.totals)


def backtest_inputs(site: Site, workspace: SiteWorkspace, config_path: str,
                    seasons_text: str | None) -> BacktestInputs:
    """A site's backtest inputs (a compute task: clean data, training table, seasons)."""
    return SitePipeline(site, workspace, config_path).backtest_inputs(seasons_text)


class SitePipeline:
    """Everything cyanorisk does for one site, over its :class:`SiteWorkspace`.

    Parameters
    ----------
    site : cyanorisk.config.Site
        The site's settings (``site.spec`` is what the core computes with).
    workspace : SiteWorkspace
        Where its files are.
    config_path : str
        The configuration's name, for hints in messages.
    run_day : datetime.date, optional
        The day of this run (by default today, by this machine's clock): readings and samples
        dated after the day after it are not plausible (``[ingest] latest_date`` overrides).
    """

    def __init__(self, site: Site, workspace: SiteWorkspace, config_path: str = "",
                 run_day: date | None = None) -> None:
        self.site = site
        self.workspace = workspace
        self.config_path = config_path
        self.run_day = run_day or date.today()
        self._digests: dict[str, str] | None = None
        self._clean: CleanData | None = None
        self._thresholds: Thresholds | None = None

    @classmethod
    def of(cls, config: Config, site: Site, run_day: date | None = None) -> SitePipeline:
        """The pipeline of a configured site."""
        return cls(site, SiteWorkspace.of(config, site.id), config.path, run_day)

    @property
    def spec(self) -> SiteSpec:
        return self.site.spec

    # inputs ------------------------------------------------------------------------------------

    def raw_files(self) -> list[Path]:
        """The site's weather files, then its lab files, as configured."""
        samples = list(self.site.samples.files) if self.site.samples else []
        return list(self.site.weather.files) + samples

    def digests(self) -> dict[str, str]:
        """Content hashes of the raw files (computed once per pipeline).

        Raises
        ------
        ConfigError
            When a file pattern of the site matches nothing (this site fails, not the others).
        """
        if self.site.problems:
            raise self.site.problems[0]
        if self._digests is None:
            self._digests = {str(p): file_digest(p) for p in self.raw_files()}
        return self._digests

    def check(self) -> SiteCheck:
        """Try everything this site will be asked to do, writing nothing: every file parsed,
        the series put on its grid, the drivers built and matched against the station, the
        seasons counted (see :mod:`cyanorisk.pipeline.check`)."""
        return check_site(self)

    # 1. clean data -----------------------------------------------------------------------------

    def clean(self, *, reuse: bool = True) -> CleanData:
        """The clean tables: reused while the raw files and their settings are unchanged,
        otherwise ingested (each raw file parsed again only if its bytes changed) and written."""
        if self._clean is None or not reuse:
            latest = self.site.ingest.latest_date or self.run_day + timedelta(days=1)
            self._clean = clean_site(self.site, self.workspace, self.digests(), reuse=reuse,
                                     latest=latest)
        return self._clean

    # 2. training table -------------------------------------------------------------------------

    def training_table(self) -> pd.DataFrame:
        """Drivers for every issue day, the last count known then and the outcome labels."""
        clean = self.clean()
        return training_table(self.spec, clean.weather, clean.totals)

    def write_training_table(self, table: pd.DataFrame, csv: bool = False) -> list[Path]:
        target = self.workspace.training_table
        writers = {target: lambda tmp: table.to_parquet(tmp, engine="pyarrow")}
        if csv:
            writers[target.with_suffix(".csv")] = lambda tmp: table.to_csv(tmp)
        return write_group(writers)

    # 3. train ----------------------------------------------------------------------------------

    def train(self, table: pd.DataFrame | None = None, *,
              cross_validation: bool = True) -> tuple[SiteModels, Path]:
        """Fit the site's models, save them atomically, and return them with their file.

        Raises
        ------
        InsufficientDataError
            When the data cannot fit a model, saying why (nothing is written).
        """
        try:
            models = fit_site(self.spec, self.training_table() if table is None else table,
                              cross_validation=cross_validation)
        except (ValueError, RuntimeError) as exc:
            if isinstance(exc, CyanoriskError):
                raise
            raise InsufficientDataError(f"{self.spec.name} ({self.spec.site_id}): the model "
                                        f"cannot be fitted: {exc}") from None
        path, text = self.workspace.model_text(models)
        write_group({path: lambda tmp: tmp.write_text(text, encoding="utf-8")})
        return models, path

    def models(self) -> SiteModels:
        return self.workspace.load_models(self.config_path)

    def thresholds(self) -> Thresholds:
        """The warning thresholds in force for the site (read once per pipeline): those set in
        the configuration, else the accepted tuned ones, else the default."""
        if self._thresholds is None:
            spec = self.spec
            if spec.warn_at:
                self._thresholds = Thresholds({**Thresholds.default(spec.levels).warn_at,
                                               **spec.warn_at}, spec.warn_at_source)
            else:
                self._thresholds = self.workspace.load_thresholds(spec.levels)
        return self._thresholds

    # 4. assess and report ----------------------------------------------------------------------

    def assess(self, as_of: pd.Timestamp | str | None = None) -> Assessment:
        """The assessment of the local date ``as_of`` (default: the last day of the weather
        record), from the clean data and the saved models."""
        models = self.models()
        thresholds = self.thresholds()
        clean = self.clean()
        day = (pd.Timestamp(as_of) if as_of is not None
               else default_as_of(clean.weather, self.spec.timezone))
        return assess(self.spec, models, clean.weather, clean.totals, day, thresholds, clean.rows)

    def lab_level_or_none(self, as_of: pd.Timestamp | str) -> InForce | None:
        """The level in force from the lab on a day, when the clean data can be read (for the
        'no assessment today' report); None when they cannot."""
        try:
            clean = self.clean()
            day = pd.Timestamp(as_of).normalize()
            issue = issue_instants(pd.DatetimeIndex([day]), self.spec.timezone,
                                   self.spec.issue_time)[0]
            return lab_level(known_samples(clean.totals, issue, self.spec), self.spec)
        except Exception:  # the data are what failed: the report says the level is not known
            return None

    def write_report(self, assessment: Assessment) -> list[Path]:
        """Write the HTML, JSON and text renderings atomically, as a group."""
        return self.write_rendered(render_report(assessment))

    def write_rendered(self, rendered: RenderedReport) -> list[Path]:
        """Write a rendered report's files atomically, as a group."""
        files = self.workspace.report_files(rendered.stem)
        return write_group({files[suffix]: (lambda tmp, text=text: tmp.write_text(text, encoding="utf-8"))
                            for suffix, text in rendered.texts.items()})

    # 5. backtest and tune ----------------------------------------------------------------------

    def backtest_inputs(self, seasons_text: str | None = None) -> BacktestInputs:
        """What a backtest over the requested seasons ('2015-2022'; default: all but the
        first) needs: the training table, the per-sample totals, the seasons, the thresholds."""
        table = self.training_table()
        available = sorted(set(season_of(table["issue_date"], self.spec.season_start_month).tolist()))
        seasons = parse_seasons(seasons_text, available)
        return BacktestInputs(self.spec, table, self.clean().totals, seasons, self.thresholds())

    def backtest(self, seasons_text: str | None = None,
                 progress: Progress | None = None) -> BacktestRun:
        """The walk-forward backtest over the requested seasons ('2015-2022'; default: all but
        the first), in this process."""
        b = self.backtest_inputs(seasons_text)
        return b.run(walk_forward(b.spec, b.table, b.totals, b.seasons, b.thresholds, progress))

    def write_backtest(self, run: BacktestRun) -> list[Path]:
        """Forecasts (CSV), scores per season and overall (CSV) and the page, as a group."""
        from cyanorisk.report.backtest_page import render_backtest

        spec = self.spec
        cells = [(lvl.name, t.value) for lvl in spec.scheme.levels for t in lvl.thresholds
                 if t.measure == "cyano_cells_per_ml" and not t.detection]
        folder = self.workspace.backtest_folder(run.span)
        result = run.result
        page = render_backtest(spec.name, result, _season_counts(spec, run.totals), spec.levels,
                               cells, run.span, dict(self.thresholds().warn_at))
        by_horizon = [f"{kind}_{h}d" for h in spec.horizons for kind in ("probability", "outcome")]
        forecasts = result.forecasts[["site_id", "season", "issue_date", "level", "horizon_days",
                                      "probability", "outcome", "climatology", "persistence",
                                      "warned", "warn_horizon_days", "warn_probability",
                                      "warn_outcome", "family", *by_horizon]]
        return write_group({
            folder / "forecasts.csv": lambda tmp: forecasts.to_csv(tmp, index=False),
            folder / "scores_by_season.csv": lambda tmp: result.scores.to_csv(tmp, index=False),
            folder / "scores_overall.csv": lambda tmp: result.overall.to_csv(tmp, index=False),
            folder / "scores_by_horizon.csv":
                lambda tmp: result.horizon_scores.to_csv(tmp, index=False),
            folder / "reliability.csv": lambda tmp: result.reliability.to_csv(tmp, index=False),
            folder / "backtest.html": lambda tmp: tmp.write_text(page, encoding="utf-8"),
        })

    def tune(self, run: BacktestRun, *, miss_cost: float | None,
             target_hit_rate: float | None) -> tuple[list[Choice], list[str]]:
        """Tune every level's threshold on a backtest; levels whose target cannot be met are
        reported, not guessed."""
        choices, problems = [], []
        for level in self.spec.levels:
            try:
                choices.append(tune_level(run.result.forecasts, run.result.exceedances, level,
                                          miss_cost=miss_cost, target_hit_rate=target_hit_rate))
            except ValueError as exc:
                problems.append(f"{level}: {exc}; its threshold is left as it was")
        return choices, problems

    def write_tuning(self, choices: list[Choice], span: str) -> list[Path]:
        """The thresholds proposal (not in force until accepted) and the trade-off plot."""
        from cyanorisk.report.backtest_page import tradeoff_plot
        from cyanorisk.report.figures import new_figure, png_bytes

        fig, axes = new_figure(8, 3.2 * len(choices) + 0.4, max(len(choices), 1), 1)
        tradeoff_plot(choices, np.ravel(axes))
        tuned = {c.level for c in choices}
        earlier = self.workspace.load_thresholds(self.spec.levels)
        kept = ({level: v for level, v in earlier.warn_at.items() if level not in tuned}
                if earlier.tuned else {})  # levels not tuned now keep their threshold
        text = proposal_toml(self.spec.site_id, choices, span, kept)
        image = png_bytes(fig)
        return write_group({
            self.workspace.proposal_file: lambda tmp: tmp.write_text(text, encoding="utf-8"),
            self.workspace.tuning_plot(span): lambda tmp: tmp.write_bytes(image),
        })

    def accept_tuning(self, accepted_at: str) -> tuple[Path, Thresholds]:
        """Put the proposed thresholds in force; the time of acceptance is kept with them.

        Raises
        ------
        ModelFileError
            When there is no proposal, or it is not one the site's scheme can use.
        """
        proposal = self.workspace.proposal_file
        if not proposal.exists():
            raise ModelFileError(f"{proposal}: no thresholds proposal for site "
                                 f"'{self.spec.site_id}'; run `cyanorisk tune` first")
        read_thresholds(proposal, self.spec.levels)  # a proposal the scheme cannot use stops here
        text = accepted_toml(proposal.read_text(encoding="utf-8"), accepted_at)
        target = self.workspace.thresholds_file
        write_group({target: lambda tmp: tmp.write_text(text, encoding="utf-8")})
        self._thresholds = None
        return target, self.workspace.load_thresholds(self.spec.levels)

def _season_counts(spec: SiteSpec, totals: pd.DataFrame) -> pd.DataFrame:
    """Per-sample counts with their local date and season, for the timelines."""
    if totals.empty:
        return pd.DataFrame(columns=["date", "season", "cyano_cells_per_ml"])
    local = totals["sampled_at"].dt.tz_convert(spec.timezone).dt.tz_localize(None)
    return pd.DataFrame({"date": local, "season": season_of(local, spec.season_start_month),
                         "cyano_cells_per_ml": totals["cyano_cells_per_ml"].to_numpy()})
