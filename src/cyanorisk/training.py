"""The training table of a site: drivers at each issue day, the last known count, outcomes.

Orchestration only: the pieces are :class:`cyanorisk.features.FeatureBuilder` and
:func:`cyanorisk.align.training_table`.
"""

from __future__ import annotations

import pandas as pd

from cyanorisk.align import training_table
from cyanorisk.config import Site
from cyanorisk.features import FeatureBuilder


def site_training_table(site: Site, weather: pd.DataFrame, totals: pd.DataFrame | None) -> pd.DataFrame:
    """Drivers for every issue day of the weather record, joined with the lab results."""
    drivers = FeatureBuilder(site.drivers, site.timezone).transform(weather)
    if totals is None:
        totals = pd.DataFrame(columns=["site_id", "sample_id", "sampled_at", "reported_at",
                                       "cyano_cells_per_ml", "cyano_censor"])
    lab_delay = site.samples.lab_delay_days if site.samples else 3.0
    return training_table(drivers, totals, site.alert_scheme(), site.id, lab_delay, site.timezone)


def label_balance(table: pd.DataFrame, horizon_days: int = 7) -> dict[str, dict[str, int]]:
    """Counts of 1, 0 and missing outcome labels at one horizon, per level."""
    out = {}
    for col in table.columns:
        if col.startswith("reach_") and col.endswith(f"_{horizon_days}d"):
            v = table[col]
            out[col] = {"1": int((v == 1).sum()), "0": int((v == 0).sum()),
                        "missing": int(v.isna().sum())}
    return out
