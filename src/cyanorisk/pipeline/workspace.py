"""Every file a site has on disk, in one place: nothing else in cyanorisk builds a path.

Layout (``<site>`` is the site's id)::

    data_dir/<site>/weather.parquet          clean weather series (regular UTC grid, flags)
    data_dir/<site>/weather_rejects.csv      its rejects ledger
    data_dir/<site>/samples.parquet          tidy lab records (one per sample and taxon)
    data_dir/<site>/sample_totals.parquet    one row per sample
    data_dir/<site>/samples_rejects.csv      their rejects ledger
    data_dir/<site>/ingest_summary.json      what ingest read and did, and the key of its inputs
    data_dir/<site>/training_table.parquet   written by `cyanorisk features` (and .csv)
    data_dir/<site>/cache/                   parsed raw files, by content hash
    data_dir/<site>/.run.lock                one run at a time for this site
    data_dir/model-signing.key               the key model files are signed with (mode 0600)
    models_dir/<site>.json                   the fitted models (JSON, signed)
    models_dir/<site>.thresholds.toml        tuned warning thresholds
    reports_dir/<site>/<site>_<date>.html    the daily report (.json, .txt beside it)
    reports_dir/<site>/backtest_<seasons>/   forecasts.csv, scores, backtest.html
    reports_dir/<site>/tuning_<seasons>.png  the tuning trade-off plot
    reports_dir/<site>/latest.html           the newest day's report (and latest.json)
    reports_dir/<site>/history.html          every day and revision reported (and history.csv)
    reports_dir/index.html                   the overview of all sites
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from cyanorisk.errors import ModelFileError
from cyanorisk.integrity import installation_key, key_path
from cyanorisk.spec import SITE_ID, Thresholds

if TYPE_CHECKING:
    from cyanorisk.config import Config
    from cyanorisk.model import SiteModels


@dataclass(frozen=True)
class SiteWorkspace:
    """The folders of one site and the files in them."""

    site_id: str
    data_dir: Path
    models_dir: Path
    reports_dir: Path
    outbox_dir: Path
    """Where notices are written (shared by the sites of an installation)."""

    def __post_init__(self) -> None:
        # Every path below is a configured folder joined with the id (and fixed names), so an id
        # of letters, digits, '_' and '-' keeps every file inside its folder.
        if not SITE_ID.fullmatch(self.site_id):
            raise ValueError(f"{self.site_id!r} is not a usable site id: letters, digits, '_' "
                             "and '-' only")

    @classmethod
    def of(cls, config: Config, site_id: str) -> SiteWorkspace:
        """The workspace of a configured site."""
        return cls(site_id, config.data_dir, config.models_dir, config.reports_dir, config.outbox)

    # clean data ----------------------------------------------------------------------------------

    @property
    def folder(self) -> Path:
        return self.data_dir / self.site_id

    @property
    def weather(self) -> Path:
        return self.folder / "weather.parquet"

    @property
    def weather_rejects(self) -> Path:
        return self.folder / "weather_rejects.csv"

    @property
    def samples(self) -> Path:
        return self.folder / "samples.parquet"

    @property
    def sample_totals(self) -> Path:
        return self.folder / "sample_totals.parquet"

    @property
    def samples_rejects(self) -> Path:
        return self.folder / "samples_rejects.csv"

    @property
    def ingest_summary(self) -> Path:
        return self.folder / "ingest_summary.json"

    @property
    def training_table(self) -> Path:
        return self.folder / "training_table.parquet"

    @property
    def cache(self) -> Path:
        return self.folder / "cache"

    def cached(self, kind: str, key: str, suffix: str) -> Path:
        """A parsed raw file in the cache: ``cache/<kind>-<key>.<suffix>``."""
        return self.cache / f"{kind}-{key}.{suffix}"

    @property
    def lock(self) -> Path:
        return self.folder / ".run.lock"

    # models ------------------------------------------------------------------------------------

    @property
    def model_file(self) -> Path:
        return self.models_dir / f"{self.site_id}.json"

    @property
    def thresholds_file(self) -> Path:
        """The warning thresholds in force (accepted by a manager)."""
        return self.models_dir / f"{self.site_id}.thresholds.toml"

    @property
    def proposal_file(self) -> Path:
        """Thresholds proposed by ``cyanorisk tune``, not in force until accepted."""
        return self.models_dir / f"{self.site_id}.thresholds.proposed.toml"

    def load_models(self, config_hint: str = "") -> SiteModels:
        """The site's saved models.

        Raises
        ------
        ModelFileError
            Naming the file, when it is missing, unreadable, altered, or another site's.
        """
        from cyanorisk.model import read_bundle

        path = self.model_file
        if not path.exists():
            hint = f" --config {config_hint}" if config_hint else ""
            raise ModelFileError(f"{path}: no model for site '{self.site_id}'; run `cyanorisk "
                                 f"train{hint}` first")
        try:
            key = installation_key(self.data_dir, create=False)
        except OSError as exc:
            raise ModelFileError(f"{key_path(self.data_dir)}: the model-signing key cannot be "
                                 f"read ({exc.strerror or exc})") from None
        models = read_bundle(path, key)
        if models.site_id != self.site_id:
            raise ModelFileError(f"{path}: this model belongs to site '{models.site_id}', "
                                 f"not '{self.site_id}'")
        return models

    def model_text(self, models: SiteModels) -> tuple[Path, str]:
        """Where the models go and their file's text (written by the pipeline, atomically)."""
        from cyanorisk.model import bundle_text

        return self.model_file, bundle_text(models, installation_key(self.data_dir, create=True))

    def load_thresholds(self, levels: list[str]) -> Thresholds:
        """Warning thresholds of the site: the accepted tuned ones when a thresholds file exists
        (levels it does not name keep the default), else the default for every level. A
        proposal not yet accepted is not applied.

        Raises
        ------
        ModelFileError
            When the thresholds file cannot be read or names levels the site's scheme lacks.
        """
        path = self.thresholds_file
        if not path.exists():
            return Thresholds.default(levels)
        return read_thresholds(path, levels)


    # reports -----------------------------------------------------------------------------------

    @property
    def report_folder(self) -> Path:
        return self.reports_dir / self.site_id

    def report_files(self, stem: str) -> dict[str, Path]:
        """The daily report's three files, by suffix."""
        return {s: self.report_folder / f"{stem}.{s}" for s in ("html", "json", "txt")}

    def backtest_folder(self, span: str) -> Path:
        return self.report_folder / f"backtest_{span}"

    def tuning_plot(self, span: str) -> Path:
        return self.report_folder / f"tuning_{span}.png"

    def latest_file(self, suffix: str) -> Path:
        """The newest day's report (``html`` or ``json``), a stable name beside the dated ones."""
        return self.report_folder / f"latest.{suffix}"

    def history_file(self, suffix: str) -> Path:
        """The site's history of reports (``html`` or ``csv``)."""
        return self.report_folder / f"history.{suffix}"

    def notice_file(self, name: str) -> Path:
        return self.outbox_dir / name


def overview_file(reports_dir: Path) -> Path:
    """The overview of all sites of an installation."""
    return Path(reports_dir) / "index.html"


def read_thresholds(path: Path, levels: list[str]) -> Thresholds:
    """A thresholds file (in force or proposed), checked against the scheme's levels.

    Raises
    ------
    ModelFileError
        When the file cannot be read or names levels the scheme lacks.
    """
    default = Thresholds.default(levels)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
        tuned = {str(k): float(v) for k, v in data["warn_at"].items()}
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError, KeyError, TypeError,
            AttributeError, ValueError) as exc:
        raise ModelFileError(f"{path}: not a readable thresholds file ({exc})") from None
    unknown = set(tuned) - set(levels)
    if unknown or not all(0 < v < 1 for v in tuned.values()):
        raise ModelFileError(f"{path}: levels {', '.join(sorted(unknown)) or '(none)'} are not "
                             f"in the scheme ({', '.join(levels)}), or a threshold is outside "
                             "(0, 1)")
    accepted = data.get("accepted_at")
    when = (f"accepted {accepted}" if accepted else
            "in force before proposals had to be accepted (cyanorisk 0.1)")
    return Thresholds({**default.warn_at, **tuned},
                      f"tuned on the backtest of seasons {data.get('seasons', '?')} by "
                      f"{data.get('rule', '?')}, {when} ({path})", tuned=True)
