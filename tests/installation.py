"""An installation of the demo site that others can be made from: copies of its clean tables,
its signed model (with the key it was signed with) and its configuration. Used by the test
suite's ``demo_site`` fixture (tests/conftest.py) and by benchmarks/bench_faults.py."""

from __future__ import annotations

import re
import shutil
from dataclasses import dataclass
from pathlib import Path

from cyanorisk.config import Config, Site, load_config


@dataclass
class DemoInstall:
    """The demo reservoir's configuration, ingested and trained."""

    root: Path
    config_path: Path
    config: Config
    site: Site

    @classmethod
    def of(cls, config_path: Path) -> DemoInstall:
        config = load_config(config_path)
        return cls(config.root, config_path, config, config.sites[0])

    def seed(self, data_dir: Path) -> None:
        """Copy the clean tables of the demo site into another data folder, so that a
        configuration reading the same raw files from there reuses them instead of ingesting."""
        shutil.copytree(self.config.data_dir / self.site.id, Path(data_dir) / self.site.id,
                        ignore=shutil.ignore_patterns(".*"))

    def copy_model(self, models_dir: Path, data_dir: Path) -> None:
        """Copy the fitted model into another installation's models folder, with the signing key
        it was signed with into that installation's data folder (model files verify only under
        their installation's key)."""
        from cyanorisk.integrity import key_path

        Path(models_dir).mkdir(parents=True, exist_ok=True)
        shutil.copy2(self.config.models_dir / f"{self.site.id}.json", Path(models_dir))
        Path(data_dir).mkdir(parents=True, exist_ok=True)
        shutil.copy2(key_path(self.config.data_dir), key_path(data_dir))

    def write_config(self, path: Path, **dirs: Path) -> Path:
        """A copy of the demo configuration at ``path`` that reads the demo's data, with
        ``data_dir``, ``reports_dir`` or ``models_dir`` moved to the (absolute) paths given."""
        text = self.config_path.read_text(encoding="utf-8")
        text, n = re.subn(r'(?m)^root = "[^"]*"', f'root = "{self.root.as_posix()}"', text)
        assert n == 1
        for key, value in dirs.items():
            text, n = re.subn(rf'(?m)^{key} = "[^"]*"', f'{key} = "{Path(value).as_posix()}"', text)
            assert n == 1, f"no top-level key {key!r} in the demo configuration"
        path.write_text(text, encoding="utf-8")
        return path
