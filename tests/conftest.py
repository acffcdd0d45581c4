"""Shared fixtures.

``demo_site``: the fictitious demo reservoir (cyanorisk.demo) built once per test session with a
smaller record than ``cyanorisk demo`` makes (8 years instead of 12, the seed of
src/cyanorisk/data/demo.toml), ingested by its site pipeline with the demo configuration
re-rooted in a temporary folder (as tests/test_cli.py does), with the model family and its
calibration pinned (the ordinal family, uncalibrated: the fastest, so that the suite's many
backtests replay quickly; the choice itself is tested in tests/test_outlook.py and by
``cyanorisk demo`` in tests/test_cli.py), its training table built and its models fitted and
saved under the temporary models/ folder. Tests must not change what it holds;
tests that write reports or models point a copy of the configuration elsewhere with
:meth:`DemoSite.write_config` (a copy that keeps ``data_dir`` reuses the session's clean tables).
"""

from __future__ import annotations

import re
import shutil
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import pytest

from cyanorisk.config import embedded_demo_text, load_config
from cyanorisk.demo import write_demo
from cyanorisk.model import SiteModels
from cyanorisk.pipeline import CleanData, SitePipeline
from cyanorisk.spec import SiteSpec
from installation import DemoInstall

DEMO_YEARS = 8
DEMO_SEED = 20261202
"""The seed of the demo configuration (src/cyanorisk/data/demo.toml)."""


@dataclass
class DemoSite(DemoInstall):
    """The demo reservoir after ingest and training."""

    pipeline: SitePipeline
    clean: CleanData
    table: pd.DataFrame
    """Training table (cyanorisk.training.training_table)."""
    models: SiteModels
    """Models fitted without cross-validation; saved at ``model_file``."""
    model_file: Path

    @property
    def spec(self) -> SiteSpec:
        return self.site.spec

    @property
    def weather(self) -> pd.DataFrame:
        """The clean weather series."""
        return self.clean.weather

    @property
    def totals(self) -> pd.DataFrame:
        """The per-sample totals."""
        return self.clean.totals


@pytest.fixture(scope="session")
def demo_site(tmp_path_factory) -> DemoSite:
    root = tmp_path_factory.mktemp("demo")
    config_path = root / "demo.toml"
    text = embedded_demo_text()
    assert re.search(r'(?m)^root = "\.\."', text)
    text = re.sub(r'(?m)^root = "\.\."', 'root = "."', text)
    text, n = re.subn(r'(?m)^family = "auto".*$', 'family = "ordinal"', text)
    text, m = re.subn(r'(?m)^calibration = "auto".*$', 'calibration = "none"', text)
    assert n == m == 1
    config_path.write_text(text, encoding="utf-8")
    config = load_config(config_path, check_files=False)
    write_demo(config.demo.out_dir, DEMO_YEARS, DEMO_SEED)
    config = load_config(config_path)
    site = config.sites[0]
    pipeline = SitePipeline.of(config, site)
    clean = pipeline.clean()
    table = pipeline.training_table()
    models, model_file = pipeline.train(table, cross_validation=False)
    return DemoSite(root, config_path, config, site, pipeline, clean, table, models, model_file)


SISTER = "kestrel"
"""A second demo-like site (another seed), for the tests of many sites."""
SISTER_NAME = "Kestrel Weir Pool"
SISTER_YEARS = 2


@dataclass
class TwoSites:
    """The demo reservoir and a sister site in one installation, both trained."""

    demo: DemoSite
    block: str
    """The sister's [[sites]] block."""

    def write_config(self, tmp: Path, extra: str = "", name: str | None = None) -> Path:
        """A configuration of both sites with data, reports and models under ``tmp`` (the clean
        tables and the models copied in); ``extra`` is appended, ``name`` renames the sister."""
        from cyanorisk.integrity import key_path

        work, models = tmp / "work", tmp / "models"
        for site_id in (self.demo.site.id, SISTER):
            shutil.copytree(self.demo.config.data_dir / site_id, work / site_id,
                            ignore=shutil.ignore_patterns(".*"))
            models.mkdir(parents=True, exist_ok=True)
            shutil.copy2(self.demo.config.models_dir / f"{site_id}.json", models)
        shutil.copy2(key_path(self.demo.config.data_dir), key_path(work))
        path = self.demo.write_config(tmp / "sites.toml", data_dir=work,
                                      reports_dir=tmp / "reports", models_dir=models)
        block = self.block if name is None else self.block.replace(SISTER_NAME, name)
        path.write_text(path.read_text(encoding="utf-8") + block + extra, encoding="utf-8")
        return path


@pytest.fixture(scope="session")
def two_sites(demo_site) -> TwoSites:
    from cyanorisk.demo import sister_site_toml

    write_demo(demo_site.config.demo.out_dir, SISTER_YEARS, DEMO_SEED + 1, SISTER)
    block = sister_site_toml(demo_site.config_path.read_text(encoding="utf-8"), SISTER,
                             SISTER_NAME)
    path = demo_site.root / "two.toml"
    path.write_text(demo_site.config_path.read_text(encoding="utf-8") + block, encoding="utf-8")
    config = load_config(path)
    SitePipeline.of(config, config.site(SISTER)).train(cross_validation=False)
    return TwoSites(demo_site, block)
