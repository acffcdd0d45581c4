"""Tests for the outlook at several horizons (cyanorisk.outlook), the choice of family, the
stratification drivers (cyanorisk.stratification) and the skill on the evaluation scenario."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from cyanorisk.errors import ModelFileError
from cyanorisk.model import PersistenceModel, SiteModels, bundle_text, expit, read_bundle
from cyanorisk.outlook import (
    BoostedOutlook,
    Calibration,
    OrdinalOutlook,
    Outlook,
    apply_map,
    coherent,
    forest_raw,
    tree_arrays,
)
from cyanorisk.stratification import (
    schmidt_stability_j_m2,
    two_sensor_stability_j_m2,
    water_density_kg_m3,
)

KEY = bytes(range(32))

# ---------------------------------------------------------------------------------------------
# Coherence across levels and horizons
# ---------------------------------------------------------------------------------------------

probability_tables = arrays(float, st.tuples(st.integers(1, 5), st.integers(1, 4), st.integers(1, 8)),
                            elements=st.floats(0.0, 1.0))


@given(probability_tables)
@settings(max_examples=200, deadline=None)
def test_coherent_tables_fall_with_the_level_and_rise_with_the_horizon(p):
    # reaching a higher level implies reaching the lower ones, and reaching a level within
    # h days implies reaching it within any longer horizon (common practice, no source)
    q = coherent(p)
    assert q.shape == p.shape
    assert (np.diff(q, axis=1) <= 1e-15).all()
    assert (np.diff(q, axis=2) >= -1e-15).all()
    assert ((q >= 0) & (q <= 1)).all()
    np.testing.assert_array_equal(coherent(q), q)  # a coherent table is left as it is


def test_coherent_keeps_missing_values_missing():
    p = np.array([[[0.2, np.nan, 0.5], [0.3, 0.1, 0.2]]])
    q = coherent(p)
    assert np.isnan(q[0, 0, 1]) and not np.isnan(q[0, 1]).any()
    assert q[0, 1, 0] <= q[0, 0, 0]


# ---------------------------------------------------------------------------------------------
# Calibration maps, against scikit-learn
# ---------------------------------------------------------------------------------------------

def noisy_forecasts(n: int = 3000, seed: int = 4) -> tuple[np.ndarray, np.ndarray]:
    """Forecasts that are too confident: the truth is p ** 0.6 (made up for the test)."""
    rng = np.random.default_rng(seed)
    p = rng.uniform(0, 1, n)
    o = (rng.uniform(0, 1, n) < p ** 0.6).astype(float)
    return p, o


def as_table(p: np.ndarray) -> np.ndarray:
    return p.reshape(-1, 1, 1)


def test_isotonic_map_is_scikit_learns():
    from sklearn.isotonic import IsotonicRegression

    p, o = noisy_forecasts()
    cal = Calibration.fit(as_table(p), as_table(o), "isotonic")
    reference = IsotonicRegression(y_min=0, y_max=1, out_of_bounds="clip").fit(p, o)
    grid = np.linspace(-0.1, 1.1, 241)
    np.testing.assert_allclose(apply_map(cal.maps[0], grid), reference.predict(grid),
                               rtol=0, atol=1e-12)


def test_sigmoid_map_is_the_maximum_likelihood_logistic_fit():
    from sklearn.linear_model import LogisticRegression

    p, o = noisy_forecasts()
    cal = Calibration.fit(as_table(p), as_table(o), "sigmoid")
    x = np.log(np.clip(p, 1e-6, 1 - 1e-6) / (1 - np.clip(p, 1e-6, 1 - 1e-6)))
    reference = LogisticRegression(C=1e12, tol=1e-10, max_iter=10_000).fit(x[:, None], o)
    assert cal.maps[0]["a"] == pytest.approx(reference.coef_[0, 0], rel=1e-4)
    assert cal.maps[0]["b"] == pytest.approx(reference.intercept_[0], abs=1e-4)


@pytest.mark.parametrize("method", ["isotonic", "sigmoid"])
def test_calibration_maps_are_monotone_and_correct_overconfidence(method):
    p, o = noisy_forecasts()
    cal = Calibration.fit(as_table(p), as_table(o), method)
    grid = np.linspace(0, 1, 501)
    mapped = apply_map(cal.maps[0], grid)
    assert (np.diff(mapped) >= -1e-12).all()
    # the truth p ** 0.6 lies above p: a low forecast comes true more often than it says
    assert apply_map(cal.maps[0], np.array([0.1]))[0] > 0.15


def test_no_calibration_without_both_outcomes():
    cal = Calibration.fit(as_table(np.array([0.1, 0.2])), as_table(np.array([0.0, 0.0])), "isotonic")
    assert cal.methods() == ["none"]
    np.testing.assert_array_equal(cal.apply(as_table(np.array([0.3]))), as_table(np.array([0.3])))


# ---------------------------------------------------------------------------------------------
# The boosted family: its trees, kept as numbers, predict as scikit-learn does
# ---------------------------------------------------------------------------------------------

def synthetic_days(n: int = 1500, seed: int = 7) -> tuple[pd.DataFrame, dict[int, np.ndarray]]:
    """Made-up issue days: warmth raises the risk, wind run lowers it; outcomes at 1 to 4 days
    (a longer window contains the shorter one, so its outcome is never lower)."""
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({"water_temp_mean_c_7d": rng.normal(20, 4, n),
                      "wind_run_km_7d": rng.gamma(4, 60, n),
                      "last_count_age_days": rng.uniform(0, 20, n)})
    X.loc[rng.uniform(size=n) < 0.05, "wind_run_km_7d"] = np.nan
    drive = 0.35 * (X["water_temp_mean_c_7d"] - 21) - 0.006 * (X["wind_run_km_7d"].fillna(240) - 240)
    daily = rng.normal(drive.to_numpy()[:, None] - 2.0, 1.0, (n, 4))
    ever = np.maximum.accumulate(daily > 0, axis=1)
    high = np.maximum.accumulate(daily > 1.5, axis=1)
    outcomes = {h: (ever[:, h - 1].astype(float) + high[:, h - 1]) for h in range(1, 5)}
    for h in outcomes:
        outcomes[h][rng.uniform(size=n) < 0.1] = np.nan  # days without a sample
    return X, outcomes


@pytest.fixture(scope="module")
def boosted():
    X, y = synthetic_days()
    return X, y, BoostedOutlook(list(X.columns), ["level 1", "level 2"], [1, 2, 3, 4]).fit(X, y)


def test_forest_of_saved_trees_predicts_as_scikit_learn():
    from sklearn.ensemble import HistGradientBoostingClassifier

    X, y = synthetic_days()
    Z = X.to_numpy()
    target = (np.nan_to_num(y[3]) >= 1).astype(int)
    clf = HistGradientBoostingClassifier(max_iter=30, max_leaf_nodes=8, monotonic_cst=[1, -1, 0],
                                         random_state=0).fit(Z, target)
    trees = [{k: np.asarray(v) for k, v in tree_arrays(p[0].nodes).items()}
             for p in clf._predictors]
    raw = float(np.ravel(clf._baseline_prediction)[0]) + forest_raw(trees, Z)
    np.testing.assert_allclose(1 / (1 + np.exp(-raw)), clf.predict_proba(Z)[:, 1], rtol=0,
                               atol=1e-12)


def test_boosted_follows_the_glossary_directions(boosted):
    X, _, model = boosted
    base = X.iloc[:200]
    warmer = base.assign(water_temp_mean_c_7d=base["water_temp_mean_c_7d"] + 3)
    windier = base.assign(wind_run_km_7d=base["wind_run_km_7d"] + 150)
    p, p_warm, p_wind = (model.predict_raw(x) for x in (base, warmer, windier))
    assert (p_warm >= p - 1e-12).all()  # warmth raises the risk (the glossary)
    assert (p_wind <= p + 1e-12).all()  # wind mixing lowers it
    assert (np.diff(p, axis=2) >= -1e-12).all()  # and a longer horizon never lowers it


def test_ordinal_outlook_interpolates_between_fitted_horizons():
    X, y = synthetic_days()
    model = OrdinalOutlook(list(X.columns), ["level 1", "level 2"], [1, 2, 3, 4], 3).fit(X, y)
    # fitted at 1 and 3 days (of STACKED_HORIZONS), the longest (4) and the headline (3)
    assert sorted(model.models_) == [1, 3, 4]
    p = model.predict_raw(X.iloc[:50])
    at = {h: model.models_[h].predict_proba(X.iloc[:50])["level 1"].to_numpy() for h in (1, 3)}
    np.testing.assert_allclose(p[:, 0, 0], at[1], rtol=0, atol=1e-12)
    np.testing.assert_allclose(p[:, 0, 2], at[3], rtol=0, atol=1e-12)

    def logit(q):
        return np.log(q / (1 - q))
    # 2 days: half way between 1 and 3 days on the log-odds scale
    np.testing.assert_allclose(logit(p[:, 0, 1]), (logit(at[1]) + logit(at[3])) / 2, rtol=1e-9)


# ---------------------------------------------------------------------------------------------
# Saved without pickle: the model file reloads to identical probabilities, an edit is refused
# ---------------------------------------------------------------------------------------------

def site_models(outlook: Outlook, X: pd.DataFrame, y: dict[int, np.ndarray]) -> SiteModels:
    from cyanorisk.model import ClimatologyModel, CountModel, RiskModel

    drivers = list(X.columns)
    risk = RiskModel(drivers, ["level 1", "level 2"], 4).fit(X, y[4])
    count = CountModel(drivers).fit(X, np.nan_to_num(y[4]) + 2.0)
    clim = ClimatologyModel(["level 1", "level 2"]).fit(
        pd.date_range("2020-01-01", periods=len(X), freq="D"), y[4])
    persistence = PersistenceModel(["level 1", "level 2"], [1, 2, 3, 4]).fit()
    return SiteModels("lake", risk, count, clim, {}, {}, outlook, persistence)


@pytest.mark.parametrize("family", ["boosted", "ordinal"])
def test_saved_outlook_reloads_to_identical_probabilities(tmp_path, boosted, family):
    X, y, model = boosted
    if family == "ordinal":
        model = OrdinalOutlook(list(X.columns), ["level 1", "level 2"], [1, 2, 3, 4], 4).fit(X, y)
    o = np.stack([np.stack([np.where(np.isnan(y[h]), np.nan, (y[h] >= k).astype(float))
                            for h in range(1, 5)], axis=1) for k in (1, 2)], axis=1)
    outlook = Outlook(model, Calibration.fit(model.predict_raw(X), o, "isotonic"))
    path = tmp_path / "lake.json"
    path.write_text(bundle_text(site_models(outlook, X, y), KEY), encoding="utf-8")
    loaded = read_bundle(path, KEY)
    assert loaded.outlook.family == family
    np.testing.assert_array_equal(loaded.outlook.predict(X), outlook.predict(X))
    assert "pickle" not in path.read_text(encoding="utf-8")


def test_an_edited_tree_is_refused(tmp_path, boosted):
    X, y, model = boosted
    outlook = Outlook(model, Calibration([{"method": "none"}] * 2))
    path = tmp_path / "lake.json"
    path.write_text(bundle_text(site_models(outlook, X, y), KEY), encoding="utf-8")
    payload = json.loads(path.read_text(encoding="utf-8"))
    payload["body"]["outlook"]["model"]["trees"][0][0]["value"][1] += 0.5
    path.write_text(json.dumps(payload), encoding="utf-8")
    with pytest.raises(ModelFileError, match="signature does not match"):
        read_bundle(path, KEY)


# ---------------------------------------------------------------------------------------------
# Stratification
# ---------------------------------------------------------------------------------------------

# The worked example of rLakeAnalyzer's schmidt.stability (R package, its help page) as repeated
# in the docstring of pylake.schmidt_stability (pylake 0.1.13 on PyPI, Eawag): a 7 m lake with
# hypsography bthA/bthD and a profile at 0-6 m; pylake gives 21.20 J m-2 (salinity 0.2 PSU, its
# own density formula; ours is fresh water by Martin & McCutcheon, within 0.5%).
EXAMPLE_AREAS_M2 = [1000, 900, 864, 820, 200, 10]
EXAMPLE_AREA_DEPTHS_M = [0, 2.3, 2.5, 4.2, 5.8, 7]
EXAMPLE_TEMPS_C = [28, 27, 26.4, 26, 25.4, 24, 23.3]
EXAMPLE_DEPTHS_M = [0, 1, 2, 3, 4, 5, 6]


def test_schmidt_stability_of_the_worked_example():
    s = schmidt_stability_j_m2(EXAMPLE_TEMPS_C, EXAMPLE_DEPTHS_M, EXAMPLE_AREA_DEPTHS_M,
                               EXAMPLE_AREAS_M2)
    assert s == pytest.approx(21.20, rel=0.005)


def test_a_mixed_column_has_no_stability_and_warm_water_on_top_some():
    flat = schmidt_stability_j_m2([18] * 7, EXAMPLE_DEPTHS_M, EXAMPLE_AREA_DEPTHS_M,
                                  EXAMPLE_AREAS_M2)
    assert flat == pytest.approx(0.0, abs=1e-9)
    two = two_sensor_stability_j_m2(np.array([18.0, 24.0, 26.0]), np.array([18.0, 18.0, 18.0]),
                                    0.0, 6.0, EXAMPLE_AREA_DEPTHS_M, EXAMPLE_AREAS_M2)
    assert two[0] == pytest.approx(0.0, abs=1e-9) and 0 < two[1] < two[2]


def test_water_density_handbook_values():
    # 999.97 kg m-3 at 4 degC and 997.05 at 25 degC (handbook values, REFERENCES.md)
    np.testing.assert_allclose(water_density_kg_m3(np.array([4.0, 25.0])), [999.97, 997.05],
                               atol=0.05)


# ---------------------------------------------------------------------------------------------
# The daily report: the outlook strip and the track-record line
# ---------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def demo_report(demo_site):
    """The demo's report for its last day, with models fitted with season-blocked forecasts
    (so that the model card holds a reliability table)."""
    from cyanorisk.forecast import assess
    from cyanorisk.report.daily import render_html, render_text
    from cyanorisk.report.document import report_document
    from cyanorisk.spec import Thresholds
    from cyanorisk.training import fit_site

    models = fit_site(demo_site.spec, demo_site.table, cross_validation=True)
    day = pd.Timestamp("2025-01-13")
    a = assess(demo_site.spec, models, demo_site.weather, demo_site.totals, day,
               Thresholds.default(demo_site.spec.levels), demo_site.clean.rows)
    return models, report_document(a), render_html(a), render_text(a)


def test_the_report_shows_the_outlook_by_days_ahead(demo_report):
    import re

    from cyanorisk.words import percent

    _, doc, page, text = demo_report
    f = doc["forecast"]
    assert f["outlook"]["days"] == list(range(1, 15))
    strip = re.search(r"<table class='outlook-strip'>.*?</table>", page, re.S).group(0)
    rows = re.findall(r"<tr><th class='lvl'>(.*?)</th>(.*?)</tr>", strip, re.S)
    assert [name for name, _ in rows] == doc["scheme"]["levels"]
    for name, cells_html in rows:
        values = re.findall(r">([^<]*)</td>", cells_html)
        # the same words as the table above it: whole percent, '<1' and '>99' at the ends
        assert values == [percent(p).rstrip("%").replace("<", "&lt;").replace(">", "&gt;")
                          for p in f["outlook"]["by_level"][name]]
        outlined = [i + 1 for i, c in enumerate(re.findall(r"<td([^>]*)>", cells_html))
                    if "warned" in c]
        within = f["warned_within"][name]
        assert (outlined[:1] or [None]) == [within]  # the first outlined day raised the warning
    assert "By days ahead: " in text


def test_the_report_says_how_past_forecasts_like_todays_came_out(demo_report):
    models, doc, page, text = demo_report
    r = doc["forecast"]["reliability"]
    assert r is not None
    rows = models.card["reliability_out_of_season"][r["level"]]
    row = next(x for x in rows if x["low"] == r["low"])
    assert row["low"] <= doc["forecast"]["probabilities"][r["level"]] <= row["high"]
    assert (r["n"], r["observed"]) == (row["n"], row["observed"])
    line = (f"Of past days given {round(100 * r['low'])}%-{round(100 * r['high'])}% for "
            f"{r['level']} within 7 days")
    assert line in page and line in text


def test_boosted_predicts_each_class_of_horizons_once_with_the_same_numbers(boosted):
    # predicting once per class of horizons that every tree treats alike gives what predicting
    # every horizon gives (the trees only ask horizon <= threshold)
    X, _, model = boosted
    Z = model._stacked(X.iloc[:300], model.horizons)
    for k, (trees, base) in enumerate(zip(model.trees_, model.baseline_, strict=True)):
        every = expit(base + forest_raw(trees, Z))
        np.testing.assert_array_equal(model.predict_raw(X.iloc[:300])[:, k, :],
                                      every.reshape(len(model.horizons), 300).T)
