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
from cyanorisk.drivers import lookup, stand_in
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
from cyanorisk.outlook import (
    FAMILIES,
    MIN_ISOTONIC_EVENTS,
    MIN_ISOTONIC_FORECASTS,
    Calibration,
    OrdinalOutlook,
    Outlook,
    coherent,
    family_model,
    fit_signed,
)
from cyanorisk.spec import SiteSpec
from cyanorisk.variables import WEATHER_VARIABLES
from cyanorisk.verify import brier_score, reliability_table, roc_auc
from cyanorisk.version import __version__


def training_table(spec: SiteSpec, weather: pd.DataFrame,
                   totals: pd.DataFrame | None) -> pd.DataFrame:
    """Drivers for every issue day of the weather record, joined with the lab results: the last
    count known at issue time and the outcome labels ``reach_<level>_<h>d`` (h = 1 to 14)."""
    drivers = FeatureBuilder(spec.features, spec.timezone).transform(weather)
    totals = empty_totals() if totals is None else totals
    return align_training_table(drivers, totals, spec.scheme, spec.site_id, spec.lab_delay_days,
                                spec.timezone, season_start_month=spec.season_start_month)


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


def outcomes(X: pd.DataFrame, spec: SiteSpec) -> tuple[dict[int, np.ndarray], np.ndarray]:
    """The outcomes at every horizon of the outlook: ordinal (highest level reached, NaN
    unknown) by horizon, and per level as an array (days, levels, horizons) of 1, 0 or NaN."""
    ordinal = {h: ordinal_outcome(X, label_columns(spec, h)) for h in spec.horizons}
    L = len(spec.levels)
    o = np.stack([np.where(np.isnan(ordinal[h])[:, None], np.nan,
                           (ordinal[h][:, None] >= np.arange(1, L + 1)).astype(float))
                  for h in spec.horizons], axis=2)
    return ordinal, o


@dataclass
class Fitted:
    """What one fit of a site's models produced (see :func:`fit_models`)."""

    risk: RiskModel
    """The ordinal model at the headline horizon (coefficients and explanations)."""
    count: CountModel
    climatology: ClimatologyModel
    outlook: Outlook
    persistence: PersistenceModel
    choice: dict[str, Any]
    """How the family was chosen: scores per family, the reason, the calibration methods, and
    the chosen family's out-of-season forecasts (``forecasts``, not saved)."""


def season_blocks(seasons: np.ndarray, most: int = 5) -> list[np.ndarray]:
    """The seasons split into at most ``most`` blocks of consecutive seasons (one season each
    when there are few): the folds of season-blocked cross-validation."""
    unique = np.unique(seasons)
    return [b for b in np.array_split(unique, min(most, len(unique))) if len(b)]


def _fit_family(family: str, drivers: list[str], spec: SiteSpec, X: pd.DataFrame,
                ordinal: dict[int, np.ndarray]):
    model = family_model(family, drivers, spec.levels, spec.horizons, spec.horizon_days)
    return model.fit(X, ordinal)


def out_of_season(family: str, drivers: list[str], spec: SiteSpec, X: pd.DataFrame,
                  ordinal: dict[int, np.ndarray], season: np.ndarray) -> np.ndarray:
    """Raw probabilities (days, levels, horizons) of a family for each block of seasons from a
    model fitted on the other blocks (:func:`season_blocks`); NaN where a fold could not be
    fitted."""
    out = np.full((len(X), len(spec.levels), len(spec.horizons)), np.nan)
    for block in season_blocks(season):
        test = np.isin(season, block)
        train = ~test
        try:
            model = _fit_family(family, drivers, spec, X[train],
                                {h: y[train] for h, y in ordinal.items()})
        except (ValueError, RuntimeError):  # a fold with one outcome only cannot be fitted
            continue
        out[test] = model.predict_raw(X[test])
    return out


def cross_fitted(raw: np.ndarray, o: np.ndarray, season: np.ndarray, method: str) -> np.ndarray:
    """Out-of-season forecasts calibrated fold by fold with a map fitted on the other folds'
    forecasts, then made coherent: honest forecasts of the calibrated family."""
    out = np.full_like(raw, np.nan)
    for block in season_blocks(season):
        test = np.isin(season, block)
        cal = Calibration.fit(raw[~test], o[~test], method)
        out[test] = coherent(cal.apply(raw[test]))
    return out


def pooled_brier(p: np.ndarray, o: np.ndarray) -> float:
    """Brier score over every labelled (day, level, horizon) both forecast and observed."""
    keep = ~np.isnan(p) & ~np.isnan(o)
    return brier_score(p[keep], o[keep]) if keep.any() else float("nan")


def calibration_candidates(spec: SiteSpec, raw: np.ndarray, o: np.ndarray) -> list[str]:
    """The calibrations compared for a site: the one pinned, or with 'auto' none, sigmoid and,
    where every level with exceedances has enough out-of-season forecasts, isotonic."""
    if spec.calibration != "auto":
        return [spec.calibration]
    keep = ~np.isnan(raw) & ~np.isnan(o)
    per_level = [(int(keep[:, k].sum()), float(o[:, k][keep[:, k]].sum()))
                 for k in range(o.shape[1])]
    enough = all(n >= MIN_ISOTONIC_FORECASTS and e >= MIN_ISOTONIC_EVENTS
                 for n, e in per_level if e > 0)
    return ["none", "sigmoid"] + (["isotonic"] if enough else [])


def choose_family(spec: SiteSpec, drivers: list[str], X: pd.DataFrame,
                  ordinal: dict[int, np.ndarray], o: np.ndarray,
                  keep_forecasts: bool = True) -> dict[str, Any]:
    """Which family forecasts the site, with which calibration, and why: the pair with the
    lower season-blocked Brier score of its calibrated out-of-season forecasts over every
    level and horizon (calibration maps fitted on the other folds: :func:`cross_fitted`),
    unless the configuration pins the family or the calibration.

    With both pinned there is nothing to choose: the out-of-season forecasts are made only
    when ``keep_forecasts`` asks for them (the model card's cross-validated skill), else the
    choice is returned at once (a backtest's replay of ``train``).
    """
    season = season_of(X["issue_date"], spec.season_start_month)
    if not keep_forecasts and spec.family != "auto" and spec.calibration != "auto":
        return {"family": spec.family, "calibration_method": spec.calibration,
                "reason": f"pinned in the configuration (family \"{spec.family}\", "
                          f"calibration \"{spec.calibration}\")",
                "brier_by_family": {}, "brier": {}, "seasons_compared": 0,
                "forecasts": None, "season": season}
    labelled_seasons = np.unique(season[~np.isnan(o).all(axis=(1, 2))])
    candidates = list(FAMILIES) if spec.family == "auto" else [spec.family]
    scores: dict[str, dict[str, float]] = {}
    forecasts = {}
    if len(labelled_seasons) >= 2:
        for family in candidates:
            raw = out_of_season(family, drivers, spec, X, ordinal, season)
            forecasts[family] = {"raw": raw} | {
                method: cross_fitted(raw, o, season, method)
                for method in calibration_candidates(spec, raw, o)}
        # every pair is scored on the same days: those every family could forecast
        common = np.logical_and.reduce([~np.isnan(f["raw"]) for f in forecasts.values()])
        scores = {family: {method: pooled_brier(np.where(common, p, np.nan), o)
                           for method, p in by.items() if method != "raw"}
                  for family, by in forecasts.items()}
    flat = {(f, m): v for f, by in scores.items() for m, v in by.items() if not np.isnan(v)}
    if not flat:
        chosen = (candidates[0], "none")
        reason = ("fewer than two seasons with lab results: no season-blocked comparison is "
                  "possible, so the " + ("transparent ordinal model" if chosen[0] == "ordinal"
                                         else f"pinned {chosen[0]} model") + " is used "
                  "uncalibrated")
    else:
        chosen = min(flat, key=flat.get)
        others = sorted((k for k in flat if k != chosen), key=flat.get)
        how = "pinned in the configuration" if spec.family != "auto" else "chosen by the record"
        reason = (f"{how}: {chosen[0]} with calibration '{chosen[1]}' has the lower "
                  f"season-blocked Brier score over every level and horizon ({flat[chosen]:.4f}"
                  + "".join(f"; {f}/{m} {flat[(f, m)]:.4f}" for f, m in others) + ")")
    oos = forecasts.get(chosen[0])
    return {"family": chosen[0], "calibration_method": chosen[1], "reason": reason,
            "brier_by_family": {f: min(by.values()) for f, by in scores.items() if by},
            "brier": {f"{f}/{m}": v for (f, m), v in flat.items()},
            "seasons_compared": int(len(labelled_seasons)) if scores else 0,
            "forecasts": None if oos is None else {"raw": oos["raw"],
                                                   "calibrated": oos[chosen[1]]},
            "season": season}


def fit_models(spec: SiteSpec, table: pd.DataFrame, keep_forecasts: bool = True) -> Fitted:
    """Fit a site's models on a training table: the family chosen by the record (or pinned)
    with its calibration, the ordinal model at the headline horizon, the count, climatology and
    persistence models. ``keep_forecasts``: see :func:`choose_family`."""
    h = spec.horizon_days
    X = prepare(table)
    ordinal, o = outcomes(X, spec)
    y = ordinal[h]
    choice = available_drivers(spec.drivers, X)
    if not choice.used:
        raise ValueError("none of the site's drivers can be computed from what its station "
                         "records: " + "; ".join(choice.notes))
    drivers = list(choice.used)
    chosen = choose_family(spec, drivers, X, ordinal, o, keep_forecasts)
    model = _fit_family(chosen["family"], drivers, spec, X, ordinal)
    risk = (model.models_[h] if isinstance(model, OrdinalOutlook) and h not in model.borrowed_
            else fit_signed(drivers, spec.levels, h, X, y))
    oos = chosen["forecasts"]
    if oos is None and chosen["calibration_method"] != "none" and chosen["seasons_compared"] == 0 \
            and spec.calibration != "auto":  # pinned: its map needs the out-of-season forecasts
        season = chosen["season"]
        oos = {"raw": out_of_season(chosen["family"], drivers, spec, X, ordinal, season)}
    calibration = (Calibration.fit(oos["raw"], o, chosen["calibration_method"])
                   if oos is not None else Calibration([{"method": "none"}] * len(spec.levels)))
    chosen["calibration"] = calibration.methods()
    outlook = Outlook(model, calibration)
    count = CountModel(list(risk.drivers)).fit(X, X[f"max_count_log10_{h}d"].to_numpy())
    clim = ClimatologyModel(spec.levels).fit(X["issue_date"], y)
    persistence = PersistenceModel(spec.levels, spec.horizons).fit(X["last_level"], o)
    return Fitted(risk, count, clim, outlook, persistence, chosen)


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


def cross_validated(spec: SiteSpec, table: pd.DataFrame, fitted: Fitted) -> pd.DataFrame:
    """Season-blocked forecasts of the chosen family at the headline horizon, calibrated fold
    by fold (:func:`cross_fitted`), beside the climatology of the other seasons.

    Returns one row per labelled issue day: season, outcome per level, model and climatology
    probability per level (empty when fewer than two seasons have lab results).
    """
    oos = fitted.choice["forecasts"]
    if oos is None:
        return pd.DataFrame()
    X = prepare(table)
    _, o = outcomes(X, spec)
    season = fitted.choice["season"]
    j = spec.horizons.index(spec.horizon_days)
    p = oos["calibrated"][:, :, j]
    keep = ~np.isnan(o[:, 0, j]) & ~np.isnan(p[:, 0])
    clim = np.full((len(X), len(spec.levels)), np.nan)
    y = ordinal_outcome(X, label_columns(spec))
    for block in season_blocks(season):
        test = np.isin(season, block)
        c = ClimatologyModel(spec.levels).fit(X.loc[~test, "issue_date"], y[~test])
        clim[test] = c.predict_proba(X.loc[test, "issue_date"]).to_numpy()
    frame = pd.DataFrame({"season": season[keep], "issue_date": X.loc[keep, "issue_date"].to_numpy()})
    for k in range(len(spec.levels)):
        frame[f"outcome_{k + 1}"] = o[keep, k, j]
        frame[f"model_{k + 1}"] = p[keep, k]
        frame[f"climatology_{k + 1}"] = clim[keep, k]
    return frame


def cross_validate(spec: SiteSpec, table: pd.DataFrame) -> pd.DataFrame:
    """Season-blocked forecasts of the model ``train`` would fit (see :func:`cross_validated`)."""
    return cross_validated(spec, table, fit_models(spec, table))


RELIABILITY_BINS = 5
"""Bins of the model card's reliability table (and the daily report's line): fifths of the
probability scale."""


def reliability_by_level(cv: pd.DataFrame, names: list[str]) -> dict[str, list[dict[str, Any]]]:
    """Per level, the season-blocked forecasts at the headline horizon in fifths of the
    probability scale (:func:`cyanorisk.verify.reliability_table`): how many, their mean and
    the share that reached the level (None where a bin is empty)."""
    out: dict[str, list[dict[str, Any]]] = {}
    if cv.empty:
        return out
    for k, name in enumerate(names, start=1):
        table = reliability_table(cv[f"model_{k}"].to_numpy(dtype=float),
                                  cv[f"outcome_{k}"].to_numpy(dtype=float), RELIABILITY_BINS)
        out[name] = [{"low": float(r.bin_low), "high": float(r.bin_high), "n": int(r.n),
                      "mean_forecast": None if r.n == 0 else float(r.mean_forecast),
                      "observed": None if r.n == 0 else float(r.observed_frequency)}
                     for r in table.itertuples()]
    return out


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
    """Fit a site's models and assemble its model card. Without ``cross_validation`` and with
    the family and the calibration pinned, no season-blocked forecasts are made: the card then
    has no cross-validated skill and no reliability table (the daily report says it has no
    track record to show)."""
    fitted = fit_models(spec, table, keep_forecasts=cross_validation)
    risk, count, clim = fitted.risk, fitted.count, fitted.climatology
    names = spec.levels
    X = prepare(table)
    y = ordinal_outcome(X, label_columns(spec))
    labelled = ~np.isnan(y)
    in_sample = pd.DataFrame({f"outcome_{k}": (y[labelled] >= k).astype(float)
                              for k in range(1, len(names) + 1)})
    p = fitted.outlook.at(X[labelled], spec.horizon_days)
    c = clim.predict_proba(X.loc[labelled, "issue_date"])
    persistence = fitted.persistence.predict_proba(X.loc[labelled, "last_level"], spec.horizon_days)
    for k, name in enumerate(names, start=1):
        in_sample[f"model_{k}"] = p[name].to_numpy()
        in_sample[f"climatology_{k}"] = c[name].to_numpy()
        in_sample[f"persistence_{k}"] = persistence[name].to_numpy()
    choice = fitted.choice
    card: dict[str, Any] = {
        "site_id": spec.site_id, "site_name": spec.name, "scheme": spec.scheme.key,
        "levels": names, "horizon_days": spec.horizon_days,
        "training_window": [str(X["issue_date"].min()), str(X["issue_date"].max())],
        "issue_days": int(len(X)), "labelled_issue_days": int(labelled.sum()),
        "exceedances": {name: int((y[labelled] >= k).sum()) for k, name in enumerate(names, 1)},
        "coefficients": risk.coefficients().reset_index(names="driver").to_dict(orient="records"),
        "drivers": list(risk.drivers), "fingerprint": fingerprint(table),
        "cyanorisk_version": __version__,
        "family": {"chosen": choice["family"], "reason": choice["reason"],
                   "brier_by_family": {f: float(v) for f, v in choice["brier_by_family"].items()},
                   "seasons_compared": choice["seasons_compared"],
                   "calibration": dict(zip(names, choice["calibration"], strict=True)),
                   "horizons_days": spec.horizons},
        "skill_in_sample": {"model": skill(in_sample, names),
                            "climatology": skill(in_sample, names, "climatology"),
                            "persistence": skill(in_sample, names, "persistence")},
    }
    cv = cross_validated(spec, table, fitted)
    if cross_validation:
        card["skill_cross_validated"] = ({"model": skill(cv, names),
                                          "climatology": skill(cv, names, "climatology"),
                                          "seasons": int(cv["season"].nunique())}
                                         if len(cv) else None)
    card["reliability_out_of_season"] = reliability_by_level(cv, names)
    card["left_out"] = list(risk.left_out_)
    drivers = available_drivers(spec.drivers, X)
    card["drivers_asked"] = list(spec.drivers)
    card["substituted"] = dict(drivers.substituted)
    card["not_recorded"] = dict(drivers.not_recorded)
    card["driver_notes"] = drivers.notes
    return SiteModels(spec.site_id, risk, count, clim, card,
                      driver_normals(X, list(risk.drivers)), fitted.outlook, fitted.persistence)
