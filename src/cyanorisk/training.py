"""Training orchestration: the training table of a site, fitting its models, the model card.

The pieces are :class:`cyanorisk.features.FeatureBuilder`, :func:`cyanorisk.align.training_table`
and the estimators of :mod:`cyanorisk.model`; this module puts them together per site.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

import cyanorisk
from cyanorisk.align import level_slug, training_table
from cyanorisk.config import Site
from cyanorisk.features import FeatureBuilder
from cyanorisk.ingest.samples import empty_totals
from cyanorisk.model import (
    DEFAULT_DRIVERS,
    ClimatologyModel,
    CountModel,
    PersistenceModel,
    RiskModel,
    fingerprint,
    ordinal_outcome,
    prepare,
)
from cyanorisk.verify import brier_score, roc_auc


def site_training_table(site: Site, weather: pd.DataFrame, totals: pd.DataFrame | None) -> pd.DataFrame:
    """Drivers for every issue day of the weather record, joined with the lab results."""
    drivers = FeatureBuilder(site.drivers, site.timezone).transform(weather)
    if totals is None:
        totals = empty_totals()
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


def season_of(dates: pd.Series | pd.Index, start_month: int) -> np.ndarray:
    """The year a bloom season starts in, for each date (seasons begin on ``start_month``)."""
    d = pd.DatetimeIndex(pd.to_datetime(dates))
    return (d.year - (d.month < start_month)).to_numpy()


def label_columns(site: Site, horizon_days: int | None = None) -> list[str]:
    h = horizon_days or site.model.horizon_days
    return [f"reach_{level_slug(n)}_{h}d" for n in site.alert_scheme().names]


@dataclass
class FittedSite:
    """A site's fitted models and the numbers for its model card."""

    site: Site
    risk: RiskModel
    count: CountModel
    climatology: ClimatologyModel
    card: dict[str, Any]

    def bundle(self) -> dict[str, Any]:
        """The JSON-ready body saved under models/."""
        return {"site_id": self.site.id, "card": self.card, "risk": self.risk.to_dict(),
                "count": self.count.to_dict(), "climatology": self.climatology.to_dict()}


def fit_models(site: Site, table: pd.DataFrame) -> tuple[RiskModel, CountModel, ClimatologyModel]:
    """Fit the risk, count and climatology models of a site on a training table."""
    scheme = site.alert_scheme()
    h = site.model.horizon_days
    drivers = list(site.model.drivers or DEFAULT_DRIVERS)
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(site))
    risk = RiskModel(drivers, scheme.names, h).fit(X, y)
    count = CountModel(drivers).fit(X, X[f"max_count_log10_{h}d"].to_numpy())
    clim = ClimatologyModel(scheme.names).fit(X["issue_date"], y)
    return risk, count, clim


def cross_validate(site: Site, table: pd.DataFrame) -> pd.DataFrame:
    """Leave-one-season-out forecasts of the model and the climatology baseline.

    Each season's issue days are forecast by models fitted on every other season (blocks of
    whole seasons keep the strong day-to-day dependence out of the score).
    Returns one row per labelled issue day: season, outcome per level, model and climatology
    probability per level.
    """
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(site))
    season = season_of(X["issue_date"], site.model.season_start_month)
    names = site.alert_scheme().names
    parts = []
    for s in np.unique(season[~np.isnan(y)]):
        test = (season == s) & ~np.isnan(y)
        train = season != s
        try:
            risk, _, clim = fit_models(site, table[train])
        except ValueError:  # a fold with one outcome only cannot be fitted
            continue
        p = risk.predict_proba(X[test])
        c = clim.predict_proba(X.loc[test, "issue_date"])
        part = pd.DataFrame({"season": s, "issue_date": X.loc[test, "issue_date"].to_numpy()})
        for k, name in enumerate(names):
            part[f"outcome_{k + 1}"] = (y[test] >= k + 1).astype(float)
            part[f"model_{k + 1}"] = p[name].to_numpy()
            part[f"climatology_{k + 1}"] = c[name].to_numpy()
        parts.append(part)
    return pd.concat(parts, ignore_index=True) if parts else pd.DataFrame()


def skill(frame: pd.DataFrame, names: list[str], prefix: str = "model") -> dict[str, dict[str, float]]:
    """ROC AUC and Brier score per level of a frame with outcome_k and <prefix>_k columns."""
    out = {}
    for k, name in enumerate(names, start=1):
        o = frame[f"outcome_{k}"].to_numpy()
        p = frame[f"{prefix}_{k}"].to_numpy()
        out[name] = {"roc_auc": roc_auc(p, o), "brier": brier_score(p, o),
                     "events": int(np.nansum(o)), "n": int((~np.isnan(o)).sum())}
    return out


def fit_site(site: Site, table: pd.DataFrame, cross_validation: bool = True) -> FittedSite:
    """Fit a site's models and assemble its model card."""
    risk, count, clim = fit_models(site, table)
    names = site.alert_scheme().names
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(site))
    labelled = ~np.isnan(y)
    in_sample = pd.DataFrame({f"outcome_{k}": (y[labelled] >= k).astype(float)
                              for k in range(1, len(names) + 1)})
    p = risk.predict_proba(X[labelled])
    c = clim.predict_proba(X.loc[labelled, "issue_date"])
    for k, name in enumerate(names, start=1):
        in_sample[f"model_{k}"] = p[name].to_numpy()
        in_sample[f"climatology_{k}"] = c[name].to_numpy()
    persistence = PersistenceModel(names).fit().predict_proba(X.loc[labelled, "last_level"])
    for k, name in enumerate(names, start=1):
        in_sample[f"persistence_{k}"] = persistence[name].to_numpy()
    card: dict[str, Any] = {
        "site_id": site.id, "site_name": site.name, "scheme": site.scheme,
        "levels": names, "horizon_days": site.model.horizon_days,
        "training_window": [str(X["issue_date"].min()), str(X["issue_date"].max())],
        "issue_days": int(len(X)), "labelled_issue_days": int(labelled.sum()),
        "exceedances": {name: int((y[labelled] >= k).sum()) for k, name in enumerate(names, 1)},
        "coefficients": risk.coefficients().reset_index(names="driver").to_dict(orient="records"),
        "drivers": list(risk.drivers), "fingerprint": fingerprint(table),
        "cyanorisk_version": cyanorisk.__version__,
        "skill_in_sample": {"model": skill(in_sample, names),
                            "climatology": skill(in_sample, names, "climatology"),
                            "persistence": skill(in_sample, names, "persistence")},
    }
    if cross_validation:
        cv = cross_validate(site, table)
        card["skill_cross_validated"] = ({"model": skill(cv, names),
                                          "climatology": skill(cv, names, "climatology"),
                                          "seasons": int(cv["season"].nunique())}
                                         if len(cv) else None)
    return FittedSite(site, risk, count, clim, card)
