"""cyanorisk: bloom-risk early warning for lakes and reservoirs.

The main entry points for a notebook, imported on first use (so that ``import cyanorisk`` and
the command line's ``--version`` load nothing heavy)::

    import cyanorisk
    config = cyanorisk.load_config("config/demo.toml")
    pipeline = cyanorisk.SitePipeline.of(config, config.sites[0])
    assessment = pipeline.assess("2025-01-14")
    assessment.forecast.probabilities

or the pieces by themselves: :func:`read_weather`, :func:`read_samples`, :class:`SiteSpec`,
:class:`FeatureBuilder`, :func:`training_table`, :func:`fit_site`, :func:`assess`,
:func:`walk_forward`.
"""

from __future__ import annotations

import importlib

from cyanorisk.version import __version__

TYPE_CHECKING = False  # typing itself is not imported: `cyanorisk --version` stays instant

_EXPORTS = {
    "load_config": "cyanorisk.config", "Config": "cyanorisk.config", "Site": "cyanorisk.config",
    "read_weather": "cyanorisk.ingest.weather", "WeatherDialect": "cyanorisk.ingest.dialects",
    "read_samples": "cyanorisk.ingest.samples", "sample_totals": "cyanorisk.ingest.samples",
    "SampleLayout": "cyanorisk.ingest.samples",
    "SiteSpec": "cyanorisk.spec", "Thresholds": "cyanorisk.spec",
    "FeatureBuilder": "cyanorisk.features", "FeatureSettings": "cyanorisk.features",
    "training_table": "cyanorisk.training", "fit_site": "cyanorisk.training",
    "SiteModels": "cyanorisk.model", "RiskModel": "cyanorisk.model",
    "assess": "cyanorisk.forecast", "Assessment": "cyanorisk.forecast",
    "walk_forward": "cyanorisk.backtest", "BacktestResult": "cyanorisk.backtest",
    "SitePipeline": "cyanorisk.pipeline", "SiteWorkspace": "cyanorisk.pipeline",
    "CyanoriskError": "cyanorisk.errors",
}

__all__ = ["__version__", "Assessment", "BacktestResult", "Config", "CyanoriskError",
           "FeatureBuilder", "FeatureSettings", "RiskModel", "SampleLayout", "Site", "SiteModels",
           "SitePipeline", "SiteSpec", "SiteWorkspace", "Thresholds", "WeatherDialect", "assess",
           "fit_site", "load_config", "read_samples", "read_weather", "sample_totals",
           "training_table", "walk_forward"]


def __getattr__(name: str) -> object:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'cyanorisk' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_EXPORTS))


if TYPE_CHECKING:  # for type checkers and editors
    from cyanorisk.backtest import BacktestResult, walk_forward
    from cyanorisk.config import Config, Site, load_config
    from cyanorisk.errors import CyanoriskError
    from cyanorisk.features import FeatureBuilder, FeatureSettings
    from cyanorisk.forecast import Assessment, assess
    from cyanorisk.ingest.dialects import WeatherDialect
    from cyanorisk.ingest.samples import SampleLayout, read_samples, sample_totals
    from cyanorisk.ingest.weather import read_weather
    from cyanorisk.model import RiskModel, SiteModels
    from cyanorisk.pipeline import SitePipeline, SiteWorkspace
    from cyanorisk.spec import SiteSpec, Thresholds
    from cyanorisk.training import fit_site, training_table
