"""Training a site's models: the training table, the fit, season-blocked cross-validation and
the model card. Pure computation on a :class:`cyanorisk.spec.SiteSpec` and tables in memory.

The pieces are :class:`cyanorisk.features.FeatureBuilder`, :func:`cyanorisk.align.training_table`
and the estimators of :mod:`cyanorisk.model`.

The outcome a model learns, for level k and horizon h: 1 when a lab sample taken in the h days
after the issue time meets level k, 0 when samples were taken then and none meets it, unknown
(left out of fitting and scoring) when no sample was taken (:func:`cyanorisk.align.outcome_labels`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.align import level_slug
from cyanorisk.align import training_table as align_training_table
from cyanorisk.drivers import Effect, lookup, stand_in
from cyanorisk.features import FeatureBuilder
from cyanorisk.ingest.samples import empty_totals
from cyanorisk.model import (
    ClimatologyModel,
    CountModel,
    PersistenceModel,
    RiskModel,
    SiteModels,
    fingerprint,
    ordinal_outcome,
    prepare,
)
from cyanorisk.spec import SiteSpec
from cyanorisk.variables import WEATHER_VARIABLES
from cyanorisk.verify import brier_score, roc_auc
from cyanorisk.version import __version__


def training_table(spec: SiteSpec, weather: pd.DataFrame,
                   totals: pd.DataFrame | None) -> pd.DataFrame:
    """Drivers for every issue day of the weather record, joined with the lab results: the last
    count known at issue time and the outcome labels ``reach_<level>_<h>d`` (h = 1 to 14)."""
    drivers = FeatureBuilder(spec.features, spec.timezone).transform(weather)
    totals = empty_totals() if totals is None else totals
    return align_training_table(drivers, totals, spec.scheme, spec.site_id, spec.lab_delay_days,
                                spec.timezone)


@dataclass(frozen=True)
class DriverChoice:
    """The drivers a site's model can use, given what its station records."""

    used: tuple[str, ...]
    substituted: dict[str, str] = field(default_factory=dict)
    """Driver asked for -> the driver standing in for it."""
    not_recorded: dict[str, str] = field(default_factory=dict)
    """Driver asked for -> the variable the station does not record."""
    no_values: tuple[str, ...] = ()
    """Drivers whose variable is recorded but with no window good enough for a value."""

    @property
    def notes(self) -> list[str]:
        """One sentence per driver standing in or left out, for the model card and the report."""
        out = []
        for asked, used in self.substituted.items():
            out.append(f"{_label(asked)}: not recorded at this station, estimated from air "
                       f"temperature ({used}; air2water, Piccolroaz et al. 2013, simplest form)")
        for asked, variable in self.not_recorded.items():
            out.append(f"{_label(asked)}: left out, the station records no "
                       f"{_variable_label(variable)} ({variable})")
        for name in self.no_values:
            out.append(f"{_label(name)}: left out, no window of the record has enough good "
                       "readings for a value")
        return out


def _label(name: str) -> str:
    info = lookup(name)
    text = info.label if info is not None else name
    return text[:1].upper() + text[1:]


def _variable_label(variable: str) -> str:
    v = WEATHER_VARIABLES.get(variable)
    return v.description if v is not None else variable


def available_drivers(asked: tuple[str, ...] | list[str], table: pd.DataFrame) -> DriverChoice:
    """The drivers asked for that the table can give (see :func:`training_table`): a driver's
    column is there when the station records its variable (the feature builder computes every
    family it can). A driver whose variable is not recorded is replaced by its stand-in where
    it has one (water temperature estimated from air temperature), or else left out; a column
    without a single value is left out too. Never raises: a site with no usable driver at all
    is refused later, by the fit."""
    used, substituted, missing, empty = [], {}, {}, []
    for name in asked:
        if name not in table:
            other = stand_in(name)
            if other is not None and other in table:
                substituted[name] = other
                name = other
            else:
                info = lookup(name)
                missing[name] = info.family.variable if info and info.family.variable else name
                continue
        if table[name].notna().any():
            used.append(name)
        else:
            empty.append(name)
    return DriverChoice(tuple(dict.fromkeys(used)), substituted, missing, tuple(empty))


def label_balance(table: pd.DataFrame, horizon_days: int) -> dict[str, dict[str, int]]:
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


def label_columns(spec: SiteSpec, horizon_days: int | None = None) -> list[str]:
    """The outcome columns of the spec's levels at a horizon (default: the spec's)."""
    h = horizon_days or spec.horizon_days
    return [f"reach_{level_slug(n)}_{h}d" for n in spec.levels]


def fit_signed(drivers: list[str], levels: list[str], horizon_days: int, X: pd.DataFrame,
               y: np.ndarray) -> RiskModel:
    """The risk model fitted with the directions of the driver glossary.

    A driver whose fitted effect runs against the direction the literature gives it (warmth,
    light and calm raise the risk, wind mixing and flushing lower it; :mod:`cyanorisk.drivers`)
    is left out, not reversed, and the model is fitted again without it, until no driver is
    against its direction. The most confidently reversed driver goes first, so that of two
    overlapping drivers (water temperature and degree-days rise together) the one that carries
    the signal stays. What was left out, and why, is kept in ``left_out_``.
    """
    drivers = list(drivers)
    left_out: list[dict[str, Any]] = []
    while True:
        risk = RiskModel(drivers, levels, horizon_days).fit(X, y)
        coef = dict(zip(risk.feature_names_in_, risk.coef_, strict=True))
        se = dict(zip(risk.feature_names_in_, risk.coef_se_, strict=True))
        wrong = [d for d in drivers if (info := lookup(d)) is not None and info.effect != Effect.NONE
                 and np.sign(coef[d]) == -int(info.effect)]
        if not wrong or len(drivers) == 1:
            risk.left_out_ = left_out
            return risk
        worst = max(wrong, key=lambda d: abs(coef[d]) / (se[d] if se[d] > 0 else 1.0))
        effect = "raise" if lookup(worst).effect == Effect.RAISES else "lower"
        left_out.append({"driver": worst, "per_sd": float(coef[worst]),
                         "reason": f"its fitted effect ran against the direction the literature "
                                   f"gives it (it should {effect} the risk); left out, not "
                                   "reversed"})
        drivers.remove(worst)


def fit_models(spec: SiteSpec, table: pd.DataFrame) -> tuple[RiskModel, CountModel, ClimatologyModel]:
    """Fit the risk, count and climatology models of a site on a training table."""
    h = spec.horizon_days
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(spec))
    choice = available_drivers(spec.drivers, X)
    if not choice.used:
        raise ValueError("none of the site's drivers can be computed from what its station "
                         "records: " + "; ".join(choice.notes))
    risk = fit_signed(list(choice.used), spec.levels, h, X, y)
    count = CountModel(list(risk.drivers)).fit(X, X[f"max_count_log10_{h}d"].to_numpy())
    clim = ClimatologyModel(spec.levels).fit(X["issue_date"], y)
    return risk, count, clim


def dekad(dates: pd.Series | pd.Index) -> np.ndarray:
    """Index 0-35 of the ten-day period of the year (days 1-10, 11-20 and 21 to the end of each
    month), the agrometeorological dekad (common practice, no source)."""
    d = pd.DatetimeIndex(pd.to_datetime(dates))
    return ((d.month - 1) * 3 + np.minimum((d.day - 1) // 10, 2)).to_numpy()


def driver_normals(X: pd.DataFrame, drivers: list[str]) -> dict[str, list[float | None]]:
    """The usual value of each driver for the time of year: its median per dekad over the
    training table (the overall median where a dekad has none)."""
    period = dekad(X["issue_date"])
    out = {}
    for d in drivers:
        values = pd.Series(X[d].to_numpy(dtype=float))
        by = values.groupby(period).median().reindex(range(36))
        overall = values.median()
        by = by.fillna(overall)
        out[d] = [None if v != v else float(v) for v in by.to_numpy()]
    return out


def cross_validate(spec: SiteSpec, table: pd.DataFrame) -> pd.DataFrame:
    """Leave-one-season-out forecasts of the model and the climatology baseline.

    Each season's issue days are forecast by models fitted on every other season (blocks of
    whole seasons keep the strong day-to-day dependence out of the score).
    Returns one row per labelled issue day: season, outcome per level, model and climatology
    probability per level.
    """
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(spec))
    season = season_of(X["issue_date"], spec.season_start_month)
    parts = []
    for s in np.unique(season[~np.isnan(y)]):
        test = (season == s) & ~np.isnan(y)
        try:
            risk, _, clim = fit_models(spec, table[season != s])
        except ValueError:  # a fold with one outcome only cannot be fitted
            continue
        p = risk.predict_proba(X[test])
        c = clim.predict_proba(X.loc[test, "issue_date"])
        part = pd.DataFrame({"season": s, "issue_date": X.loc[test, "issue_date"].to_numpy()})
        for k, name in enumerate(spec.levels):
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


def fit_site(spec: SiteSpec, table: pd.DataFrame, cross_validation: bool = True) -> SiteModels:
    """Fit a site's models and assemble its model card."""
    risk, count, clim = fit_models(spec, table)
    names = spec.levels
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(spec))
    labelled = ~np.isnan(y)
    in_sample = pd.DataFrame({f"outcome_{k}": (y[labelled] >= k).astype(float)
                              for k in range(1, len(names) + 1)})
    p = risk.predict_proba(X[labelled])
    c = clim.predict_proba(X.loc[labelled, "issue_date"])
    persistence = PersistenceModel(names).fit().predict_proba(X.loc[labelled, "last_level"])
    for k, name in enumerate(names, start=1):
        in_sample[f"model_{k}"] = p[name].to_numpy()
        in_sample[f"climatology_{k}"] = c[name].to_numpy()
        in_sample[f"persistence_{k}"] = persistence[name].to_numpy()
    card: dict[str, Any] = {
        "site_id": spec.site_id, "site_name": spec.name, "scheme": spec.scheme.key,
        "levels": names, "horizon_days": spec.horizon_days,
        "training_window": [str(X["issue_date"].min()), str(X["issue_date"].max())],
        "issue_days": int(len(X)), "labelled_issue_days": int(labelled.sum()),
        "exceedances": {name: int((y[labelled] >= k).sum()) for k, name in enumerate(names, 1)},
        "coefficients": risk.coefficients().reset_index(names="driver").to_dict(orient="records"),
        "drivers": list(risk.drivers), "fingerprint": fingerprint(table),
        "cyanorisk_version": __version__,
        "skill_in_sample": {"model": skill(in_sample, names),
                            "climatology": skill(in_sample, names, "climatology"),
                            "persistence": skill(in_sample, names, "persistence")},
    }
    if cross_validation:
        cv = cross_validate(spec, table)
        card["skill_cross_validated"] = ({"model": skill(cv, names),
                                          "climatology": skill(cv, names, "climatology"),
                                          "seasons": int(cv["season"].nunique())}
                                         if len(cv) else None)
    card["left_out"] = list(risk.left_out_)
    choice = available_drivers(spec.drivers, X)
    card["drivers_asked"] = list(spec.drivers)
    card["substituted"] = dict(choice.substituted)
    card["not_recorded"] = dict(choice.not_recorded)
    card["driver_notes"] = choice.notes
    return SiteModels(spec.site_id, risk, count, clim, card,
                      driver_normals(X, list(risk.drivers)))
