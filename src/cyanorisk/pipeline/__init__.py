"""The site pipeline: every file a site has on disk (:class:`SiteWorkspace`) and the one
orchestrator of its data (:class:`SitePipeline`)."""

from cyanorisk.pipeline.clean import CleanData
from cyanorisk.pipeline.site import BacktestRun, SitePipeline
from cyanorisk.pipeline.workspace import SiteWorkspace

__all__ = ["BacktestRun", "CleanData", "SitePipeline", "SiteWorkspace"]
