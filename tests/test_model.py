"""The risk models (cyanorisk.model): published reference values, agreement with statsmodels,
the estimator contract, missing drivers, JSON persistence, the baselines, and skill on the demo.

Convergence warnings are errors here (STYLE.md, Tests; as in scikit-learn's
sklearn/linear_model/tests/test_logistic.py ``pytestmark``).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from sklearn.metrics import roc_auc_score
from statsmodels.miscmodels.ordinal_model import OrderedModel

import cyanorisk
from cyanorisk import training
from cyanorisk.model import (
    MIN_MISSING_FOR_INDICATOR,
    ClimatologyModel,
    CountModel,
    ModelFileError,
    NotFittedError,
    PersistenceModel,
    RiskModel,
    SiteModels,
    bundle_text,
    ordinal_outcome,
    prepare,
    read_bundle,
)
from cyanorisk.outlook import Calibration, OrdinalOutlook, Outlook

pytestmark = pytest.mark.filterwarnings("error")

Z95 = stats.norm.ppf(0.975)

# ---------------------------------------------------------------------------------------------
# Published reference: logit on the Spector & Mazzeo (1980) data
# ---------------------------------------------------------------------------------------------

SPECTOR_DRIVERS = ("GPA", "TUCE", "PSI")
GREENE_SPECTOR_LOGIT = {"const": -13.021347, "GPA": 2.826113, "TUCE": 0.095158, "PSI": 2.378688}
"""Logit of GRADE on GPA, TUCE and PSI (Spector & Mazzeo 1980 data, statsmodels.datasets.spector):
Greene, Econometric Analysis; statsmodels documentation (REFERENCES.md, statistics table, V)."""
GREENE_SPECTOR_LOGLIKE = -12.8896
"""Log-likelihood of the same fit; same source (REFERENCES.md, statistics table, V)."""


@pytest.fixture(scope="module")
def spector():
    data = sm.datasets.spector.load_pandas().data  # ships with statsmodels: no download
    return data[list(SPECTOR_DRIVERS)], data["GRADE"].to_numpy()


@pytest.fixture(scope="module")
def spector_model(spector):
    X, y = spector
    return RiskModel(SPECTOR_DRIVERS, ("grade improved",), horizon_days=7).fit(X, y)


def test_spector_logit_reproduces_published_coefficients(spector_model):
    # A binary outcome is the one-cut case of the ordinal model: P(Y >= 1) = F(x.b - cut), so
    # the logit intercept is minus the cut point on the original scale.
    coef = spector_model.coefficients()["per_unit"]
    got = {"const": float(-spector_model.intercept_original_scale()[0]),
           **{d: float(coef[d]) for d in SPECTOR_DRIVERS}}
    for name, want in GREENE_SPECTOR_LOGIT.items():  # published to 6 decimals; checked to 3
        assert got[name] == pytest.approx(want, abs=5e-4), name
    assert spector_model.loglike_ == pytest.approx(GREENE_SPECTOR_LOGLIKE, abs=5e-5)
    assert spector_model.n_train_ == 32


def test_spector_standard_errors_match_statsmodels_logit(spector, spector_model):
    X, y = spector
    # Reference library: statsmodels Logit (Newton's method, analytic Hessian).
    reference = sm.Logit(y, sm.add_constant(X)).fit(method="newton", disp=0)
    c = spector_model.coefficients()
    se_per_unit = (c["per_unit_high"] - c["per_unit_low"]) / (2 * Z95)
    for d in SPECTOR_DRIVERS:
        assert se_per_unit[d] == pytest.approx(reference.bse[d], rel=1e-4), d
        assert c.loc[d, "per_unit"] == pytest.approx(reference.params[d], abs=1e-5), d
    assert spector_model.loglike_ == pytest.approx(reference.llf, abs=1e-7)


def test_spector_standard_errors_match_statsmodels_ordered_model(spector, spector_model):
    X, y = spector
    # Reference library: statsmodels OrderedModel, the same proportional-odds likelihood.
    reference = OrderedModel(y.astype(int), X, distr="logit").fit(method="bfgs", gtol=1e-8,
                                                                  maxiter=10_000, disp=0)
    c = spector_model.coefficients()
    se_per_unit = (c["per_unit_high"] - c["per_unit_low"]) / (2 * Z95)
    np.testing.assert_allclose(se_per_unit[list(SPECTOR_DRIVERS)].to_numpy(),
                               reference.bse[list(SPECTOR_DRIVERS)].to_numpy(), rtol=1e-4)


# ---------------------------------------------------------------------------------------------
# Agreement with statsmodels OrderedModel on three ordered classes
# ---------------------------------------------------------------------------------------------

def three_class_data(seed: int = 7, n: int = 400) -> tuple[pd.DataFrame, np.ndarray]:
    """Drivers on very different scales and a proportional-odds outcome with classes 0, 1, 2."""
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({"a": rng.normal(10, 3, n), "b": rng.normal(0, 0.2, n),
                      "c": rng.uniform(0, 50, n)})
    latent = 0.4 * X["a"] - 2.0 * X["b"] + 0.03 * X["c"] + rng.logistic(size=n)
    return X, np.digitize(latent, [4.0, 6.0]).astype(float)


@pytest.fixture(scope="module")
def three_class():
    X, y = three_class_data()
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2"), horizon_days=7).fit(X, y)
    return X, y, model


def test_agrees_with_statsmodels_ordered_model(three_class):
    X, y, model = three_class
    assert np.bincount(y.astype(int)).min() >= 80  # three well-filled classes
    reference = OrderedModel(y.astype(int), X, distr="logit").fit(method="bfgs", gtol=1e-8,
                                                                  maxiter=10_000, disp=0)
    np.testing.assert_allclose(model.coefficients()["per_unit"].to_numpy(),
                               reference.params[["a", "b", "c"]].to_numpy(), rtol=0, atol=1e-4)
    cuts = reference.model.transform_threshold_params(reference.params)[1:-1]  # drop -inf, inf
    np.testing.assert_allclose(model.intercept_original_scale(), cuts, rtol=0, atol=1e-4)
    assert model.loglike_ == pytest.approx(reference.llf, abs=1e-6)
    se = model.coefficients()["se_per_sd"].to_numpy() / X.std(ddof=0).to_numpy()
    np.testing.assert_allclose(se, reference.bse[["a", "b", "c"]].to_numpy(), rtol=1e-4)
    # Probabilities of reaching each level: P(Y >= k) from the reference's class probabilities.
    p = np.asarray(reference.predict(X))
    got = model.predict_proba(X)
    np.testing.assert_allclose(got["level 1"], p[:, 1] + p[:, 2], rtol=0, atol=1e-5)
    np.testing.assert_allclose(got["level 2"], p[:, 2], rtol=0, atol=1e-5)


finite_or_missing = st.one_of(st.floats(-1e6, 1e6, allow_nan=False), st.just(float("nan")))


@settings(max_examples=150, deadline=None)
@given(rows=st.lists(st.tuples(finite_or_missing, finite_or_missing, finite_or_missing),
                     min_size=1, max_size=25))
def test_probabilities_are_coherent_on_any_input(three_class, rows):
    _, _, model = three_class
    X = pd.DataFrame(rows, columns=["a", "b", "c"])
    p = model.predict_proba(X)
    assert list(p.columns) == ["level 1", "level 2"]
    values = p.to_numpy()
    assert np.isfinite(values).all()
    assert ((values >= 0.0) & (values <= 1.0)).all()
    assert (p["level 2"] <= p["level 1"]).all()  # a higher level is never more likely


def test_probabilities_are_coherent_on_seeded_random_fits():
    rng = np.random.default_rng(2024)
    for seed in range(5):
        X, y = three_class_data(seed=seed, n=250)
        model = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
        new = pd.DataFrame(rng.normal(0, 50, (500, 3)), columns=["a", "b", "c"])
        p = model.predict_proba(new)
        assert ((p.to_numpy() >= 0) & (p.to_numpy() <= 1)).all()
        assert (p["level 2"] <= p["level 1"]).all()
        assert np.all(np.diff(model.cuts_) > 0)  # ordered cut points


# ---------------------------------------------------------------------------------------------
# Estimator contract (scikit-learn doc/developers/develop.rst; STYLE.md, Models)
# ---------------------------------------------------------------------------------------------

def test_init_stores_settings_and_fit_returns_self_with_underscore_attributes():
    X, y = three_class_data()
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2"), horizon_days=5)
    assert vars(model) == {"drivers": ("a", "b", "c"), "levels": ("level 1", "level 2"),
                           "horizon_days": 5}
    assert model.fit(X, y) is model
    learned = set(vars(model)) - {"drivers", "levels", "horizon_days"}
    assert {"coef_", "cuts_", "feature_names_in_", "n_train_", "classes_"} <= learned
    assert sorted(a for a in learned if not a.endswith("_")) == []
    assert (model.drivers, model.levels, model.horizon_days) == (("a", "b", "c"),
                                                                 ("level 1", "level 2"), 5)


def test_count_model_init_stores_settings_and_fit_returns_self():
    X, y = three_class_data()
    model = CountModel(("a", "b"), coverage=0.9)
    assert vars(model) == {"drivers": ("a", "b"), "coverage": 0.9}
    assert model.fit(X, y + 2.0) is model
    assert sorted(a for a in vars(model) if a not in ("drivers", "coverage")
                  and not a.endswith("_")) == []


@pytest.mark.parametrize(("model", "call"), [
    (RiskModel(("a",)), lambda m: m.predict_proba(pd.DataFrame({"a": [1.0]}))),
    (RiskModel(("a",)), lambda m: m.explain(pd.DataFrame({"a": [1.0]}))),
    (CountModel(("a",)), lambda m: m.predict(pd.DataFrame({"a": [1.0]}))),
    (ClimatologyModel(), lambda m: m.predict_proba(["2024-01-01"])),
])
def test_predicting_before_fit_raises_a_clear_error(model, call):
    with pytest.raises(NotFittedError, match=rf"this {type(model).__name__} is not fitted yet"):
        call(model)


def test_a_frame_missing_drivers_is_refused_naming_them(three_class):
    X, y, model = three_class
    with pytest.raises(ValueError, match=r"missing b, c$"):
        model.predict_proba(X.drop(columns=["b", "c"]))
    with pytest.raises(ValueError, match=r"missing a$"):
        model.explain(X.drop(columns=["a"]))
    with pytest.raises(ValueError, match=r"missing c$"):
        RiskModel(("a", "b", "c")).fit(X.drop(columns=["c"]), y)
    count = CountModel(("a", "b")).fit(X, y + 2.0)
    with pytest.raises(ValueError, match=r"missing b$"):
        count.predict(X.drop(columns=["b"]))
    # Extra columns are fine (a training table has many); their order does not matter.
    shuffled = X[["c", "a", "b"]].assign(other=1.0)
    pd.testing.assert_frame_equal(model.predict_proba(shuffled), model.predict_proba(X))


# ---------------------------------------------------------------------------------------------
# Missing drivers: imputed with an indicator, rows never dropped (module notes of model.py)
# ---------------------------------------------------------------------------------------------

def with_gaps(n_missing_a: int, n_missing_b: int, seed: int = 3):
    X, y = three_class_data(seed=seed, n=400)
    rng = np.random.default_rng(seed)
    X = X.copy()
    X.loc[rng.choice(len(X), n_missing_a, replace=False), "a"] = np.nan
    X.loc[rng.choice(len(X), n_missing_b, replace=False), "b"] = np.nan
    y = y.copy()
    y[rng.choice(len(X), 30, replace=False)] = np.nan  # issue days without a label
    return X, y


def test_rows_with_missing_drivers_are_kept_and_predicted():
    X, y = with_gaps(MIN_MISSING_FOR_INDICATOR + 5, 7)
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
    labelled = int((~np.isnan(y)).sum())
    assert (model.n_train_, model.n_unlabelled_) == (labelled, 30)
    assert sum(model.class_counts_.values()) == labelled
    gaps = X["a"].isna() | X["b"].isna()
    p = model.predict_proba(X[gaps])
    assert len(p) == int(gaps.sum())
    assert np.isfinite(p.to_numpy()).all()


@pytest.mark.parametrize(("n_missing", "indicator"), [
    (MIN_MISSING_FOR_INDICATOR, True),
    (MIN_MISSING_FOR_INDICATOR - 1, False),
])
def test_indicator_only_for_drivers_missing_often_enough(n_missing, indicator):
    X, y = with_gaps(n_missing, 0)
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
    want = ["a", "b", "c"] + (["a__missing"] if indicator else [])
    assert model.feature_names_in_ == want
    assert list(model.coefficients().index) == want


def test_drivers_missing_on_the_same_rows_share_one_indicator():
    X, y = with_gaps(0, 0)
    rows = np.arange(0, 400, 10)  # 40 rows, both a and c missing on them
    X.loc[rows, ["a", "c"]] = np.nan
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
    assert model.feature_names_in_ == ["a", "b", "c", "a__missing"]
    assert model.scaling_.indicators == {"a__missing": ["a", "c"]}


def test_a_rare_gap_is_imputed_with_the_training_median():
    X, y = with_gaps(0, 7)  # b: too few gaps for an indicator
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
    median_b = float(np.nanmedian(X.loc[~np.isnan(y), "b"]))
    row = X.iloc[[0]].copy()
    row["b"] = np.nan
    filled = row.assign(b=median_b)
    pd.testing.assert_frame_equal(model.predict_proba(row), model.predict_proba(filled),
                                  check_exact=False, rtol=0, atol=1e-15)


def test_explain_gives_the_values_the_model_used_for_missing_drivers():
    X, y = with_gaps(MIN_MISSING_FOR_INDICATOR + 5, 7)
    model = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
    median = dict(zip(["a", "b", "c"], model.scaling_.median, strict=True))
    complete = X.dropna().iloc[[0]]
    gaps = complete.assign(a=np.nan, b=np.nan)
    top = len(model.feature_names_in_)
    items = {d["driver"]: d for d in model.explain(gaps, top=top)[0]}
    assert sorted(items) == ["a", "a__missing", "b", "c"]
    # The report schema requires a number; the value shown is the one the model used.
    assert items["a__missing"]["value"] == 1.0
    assert items["a"]["value"] == pytest.approx(median["a"], rel=1e-12)
    assert items["b"]["value"] == pytest.approx(median["b"], rel=1e-12)
    assert items["c"]["value"] == complete["c"].iloc[0]
    assert {k: d["imputed"] for k, d in items.items()} == {
        "a": True, "a__missing": False, "b": True, "c": False}
    # with every driver present, the indicator is 0 (not NaN)
    items = {d["driver"]: d for d in model.explain(complete, top=top)[0]}
    assert items["a__missing"]["value"] == 0.0
    assert [d["imputed"] for d in items.values()] == [False] * 4


def test_explain_contributions_add_up_to_the_log_odds(three_class):
    X, _, model = three_class
    rows = X.iloc[:20]
    explained = model.explain(rows, top=3)
    z = (rows[["a", "b", "c"]].to_numpy() - model.scaling_.mean) / model.scaling_.scale
    full = z * model.coef_
    for r, items in enumerate(explained):
        assert len(items) == 3
        assert sorted(d["driver"] for d in items) == ["a", "b", "c"]
        sizes = [abs(d["log_odds"]) for d in items]
        assert sizes == sorted(sizes, reverse=True)
        for d in items:
            j = ["a", "b", "c"].index(d["driver"])
            assert d["log_odds"] == pytest.approx(full[r, j], rel=1e-12, abs=1e-14)
            assert d["direction"] == ("raises" if full[r, j] > 0 else "lowers")
            assert d["value"] == rows.iloc[r][d["driver"]]
    # the log-odds of reaching level 1 is the sum of all contributions minus the first cut
    logit = np.log(model.predict_proba(rows)["level 1"] / (1 - model.predict_proba(rows)["level 1"]))
    np.testing.assert_allclose(logit, full.sum(axis=1) - model.cuts_[0], rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------------------------
# JSON persistence (pastas/io/pas.py refuses files it cannot read; STYLE.md, Models)
# ---------------------------------------------------------------------------------------------

@pytest.fixture
def saved(tmp_path):
    """A bundle of the three fitted models written to a file, and the models."""
    X, y = with_gaps(MIN_MISSING_FOR_INDICATOR + 5, 7)
    dates = pd.date_range("2020-01-01", periods=len(X), freq="D")
    risk = RiskModel(("a", "b", "c"), ("level 1", "level 2")).fit(X, y)
    count = CountModel(("a", "b", "c")).fit(X, np.where(np.isnan(y), np.nan, y + 2.5))
    clim = ClimatologyModel(("level 1", "level 2")).fit(dates, y)
    outlook = Outlook(OrdinalOutlook(("a", "b", "c"), ("level 1", "level 2"), (7,)).fit(X, {7: y}),
                      Calibration([{"method": "none"}] * 2))
    persistence = PersistenceModel(("level 1", "level 2"), (7,)).fit()
    path = tmp_path / "lake.json"
    path.write_text(bundle_text(SiteModels("lake", risk, count, clim, {}, {}, outlook, persistence),
                                KEY), encoding="utf-8")
    return path, X, dates, (risk, count, clim)


KEY = bytes(range(32))
"""A signing key for the tests (an installation makes its own at random)."""


def test_json_round_trip_gives_identical_predictions(saved):
    path, X, dates, (risk, count, clim) = saved
    payload = json.loads(path.read_text(encoding="utf-8"))
    assert (payload["format"], payload["format_version"]) == ("cyanorisk-model", 4)
    assert payload["cyanorisk_version"] == cyanorisk.__version__
    loaded = read_bundle(path, KEY)
    assert loaded.site_id == "lake"
    risk2, count2, clim2 = loaded.risk, loaded.count, loaded.climatology
    pd.testing.assert_frame_equal(risk2.predict_proba(X), risk.predict_proba(X), check_exact=True)
    pd.testing.assert_frame_equal(count2.predict(X), count.predict(X), check_exact=True)
    pd.testing.assert_frame_equal(clim2.predict_proba(dates), clim.predict_proba(dates),
                                  check_exact=True)
    for got, want in zip(risk2.explain(X.iloc[:10]), risk.explain(X.iloc[:10]), strict=True):
        pd.testing.assert_frame_equal(pd.DataFrame(got), pd.DataFrame(want), check_exact=True)
    assert risk2.feature_names_in_ == risk.feature_names_in_
    assert risk2.scaling_.indicators == risk.scaling_.indicators
    assert (risk2.n_train_, risk2.n_unlabelled_, risk2.class_counts_) == (
        risk.n_train_, risk.n_unlabelled_, risk.class_counts_)


def edit(path, change) -> None:
    payload = json.loads(path.read_text(encoding="utf-8"))
    change(payload)
    path.write_text(json.dumps(payload, indent=1), encoding="utf-8")


def test_a_file_from_another_version_is_refused_naming_file_and_versions(saved):
    path = saved[0]
    edit(path, lambda p: p.update(cyanorisk_version="0.0.1"))
    with pytest.raises(ModelFileError) as info:
        read_bundle(path, KEY)
    message = str(info.value)
    assert message.startswith(f"{path}: ")
    assert "written by cyanorisk 0.0.1" in message
    assert f"this is cyanorisk {cyanorisk.__version__}" in message
    assert "retrain" in message


def test_a_file_of_another_format_version_is_refused(saved):
    path = saved[0]
    edit(path, lambda p: p.update(format_version=1))
    with pytest.raises(ModelFileError, match=r"\(format 1\)"):
        read_bundle(path, KEY)


def test_a_file_edited_by_hand_is_refused_by_its_signature(saved):
    path = saved[0]

    def nudge(payload):
        payload["body"]["risk"]["coef"][0] += 0.25

    edit(path, nudge)
    with pytest.raises(ModelFileError) as info:
        read_bundle(path, KEY)
    assert str(info.value).startswith(f"{path}: the signature does not match")


def test_an_edit_with_a_recomputed_plain_hash_cannot_forge_the_signature(saved):
    # HMAC-SHA256 (RFC 2104) needs the key: a SHA-256 of the edited body, or an HMAC under
    # any other key, does not verify.
    import hashlib
    import hmac

    from cyanorisk.model import _signed_text

    path = saved[0]

    def forge(payload):
        payload["body"]["risk"]["coef"] = [0.0 for _ in payload["body"]["risk"]["coef"]]
        text = _signed_text(payload["body"], payload["cyanorisk_version"])
        payload["signature"] = "hmac-sha256:" + hmac.new(b"guess", text, hashlib.sha256).hexdigest()

    edit(path, forge)
    with pytest.raises(ModelFileError, match="the signature does not match"):
        read_bundle(path, KEY)
    with pytest.raises(ModelFileError, match="has no model-signing key"):
        read_bundle(path, None)


@pytest.mark.parametrize(("change", "words"), [
    (lambda b: b.pop("count"), "'body.count' is missing"),
    (lambda b: b["risk"].update(coef=["0.1", "0.2"]), "'body.risk.coef' is not a list of numbers"),
    (lambda b: b["risk"].update(horizon_days="seven"), "'body.risk.horizon_days' is not a whole"),
])
def test_a_signed_but_malformed_file_is_refused_before_use(saved, change, words):
    # the body is re-signed with the right key: only the shape check can catch it
    from cyanorisk.integrity import signature
    from cyanorisk.model import _signed_text

    path = saved[0]

    def malform(payload):
        change(payload["body"])
        payload["signature"] = signature(KEY, _signed_text(payload["body"],
                                                            payload["cyanorisk_version"]))

    edit(path, malform)
    with pytest.raises(ModelFileError) as info:
        read_bundle(path, KEY)
    assert words in str(info.value) and "retrain" in str(info.value)


def test_a_pickle_named_json_is_refused_in_one_sentence(tmp_path):
    import pickle

    path = tmp_path / "lake.json"
    path.write_bytes(pickle.dumps({"coef": [1.0, 2.0]}))
    with pytest.raises(ModelFileError) as info:
        read_bundle(path, KEY)
    assert str(info.value).startswith(f"{path}: not a cyanorisk model file (not text")


@pytest.mark.parametrize(("text", "problem"), [
    ('{"name": "not a model", "values": [1, 2, 3]}', "not a cyanorisk model file"),
    ("[1, 2, 3]", "not a cyanorisk model file"),
    ("coef = 1.0\n", "not a readable model file"),
])
def test_a_file_that_is_not_a_model_is_refused(tmp_path, text, problem):
    path = tmp_path / "other.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ModelFileError) as info:
        read_bundle(path, KEY)
    assert str(info.value).startswith(f"{path}: {problem}")


def test_demo_models_saved_under_models_load_with_identical_predictions(demo_site):
    models = demo_site.pipeline.models()
    X = prepare(demo_site.table)
    fitted = demo_site.models
    pd.testing.assert_frame_equal(models.risk.predict_proba(X), fitted.risk.predict_proba(X),
                                  check_exact=True)
    pd.testing.assert_frame_equal(models.count.predict(X), fitted.count.predict(X),
                                  check_exact=True)
    assert models.card["fingerprint"] == fitted.card["fingerprint"]


# ---------------------------------------------------------------------------------------------
# CountModel: the normal linear model's prediction interval
# ---------------------------------------------------------------------------------------------

def linear_counts(rng: np.random.Generator, n: int) -> tuple[pd.DataFrame, np.ndarray]:
    """log10 counts linear in two drivers with normal noise (sd 0.35) around 10^3 cells/mL."""
    X = pd.DataFrame({"warm": rng.normal(20, 4, n), "wind": rng.gamma(2.0, 2.0, n)})
    return X, 1.0 + 0.12 * X["warm"].to_numpy() - 0.08 * X["wind"].to_numpy() + rng.normal(0, 0.35, n)


def test_count_interval_covers_80_percent_and_matches_statsmodels_ols():
    rng = np.random.default_rng(20261202)
    X, y = linear_counts(rng, 300)
    model = CountModel(("warm", "wind")).fit(X, y)
    new_X, new_y = linear_counts(rng, 2000)
    pred = model.predict(new_X)
    cells = 10 ** new_y - 1.0
    covered = (pred["low_cells_per_ml"] <= cells) & (cells <= pred["high_cells_per_ml"])
    assert 0.74 <= covered.mean() <= 0.86
    # Reference library: statsmodels OLS prediction interval for new observations (obs_ci) at
    # alpha = 0.2, back-transformed from log10(count + 1) to cells per mL.
    ols = sm.OLS(y, sm.add_constant(X)).fit()
    frame = ols.get_prediction(sm.add_constant(new_X)).summary_frame(alpha=0.2)
    back = lambda v: 10 ** np.asarray(v) - 1.0  # noqa: E731
    np.testing.assert_allclose(pred["expected_cells_per_ml"], back(frame["mean"]), rtol=1e-8)
    np.testing.assert_allclose(pred["low_cells_per_ml"], back(frame["obs_ci_lower"]), rtol=1e-8)
    np.testing.assert_allclose(pred["high_cells_per_ml"], back(frame["obs_ci_upper"]), rtol=1e-8)


def test_count_model_leaves_out_unlabelled_rows_and_never_goes_below_zero():
    rng = np.random.default_rng(5)
    X, y = linear_counts(rng, 200)
    y[:25] = np.nan
    model = CountModel(("warm", "wind")).fit(X, y)
    assert model.n_train_ == 175
    ols = sm.OLS(y[25:], sm.add_constant(X.iloc[25:])).fit()
    np.testing.assert_allclose(model.params_, ols.params.to_numpy(), rtol=1e-12)
    very_low = pd.DataFrame({"warm": [-40.0], "wind": [30.0]})  # log10 mean far below 0
    pred = model.predict(very_low).iloc[0]
    assert (pred["expected_cells_per_ml"], pred["low_cells_per_ml"]) == (0.0, 0.0)
    assert 0.0 <= pred["high_cells_per_ml"] < 1.0


# ---------------------------------------------------------------------------------------------
# Baselines
# ---------------------------------------------------------------------------------------------

def test_climatology_is_the_share_of_nearby_days_of_year_that_reached_each_level():
    dates = pd.date_range("2021-01-01", "2021-12-31", freq="D")  # doy 1..365
    y = np.zeros(len(dates))
    y[:31] = 1.0  # every day of January reached level 1
    y[:5] = 2.0  # and the first five level 2
    y[200] = np.nan  # an unlabelled day does not count
    model = ClimatologyModel(("level 1", "level 2"), window_days=15).fit(dates, y)
    p = model.predict_proba(pd.to_datetime(["2021-01-16", "2021-02-15", "2021-01-01",
                                            "2030-07-20"]))
    # 16 Jan: days of year 1..31, all reached level 1, five reached level 2.
    assert p.iloc[0].tolist() == pytest.approx([31 / 31, 5 / 31], abs=1e-15)
    # 15 Feb (doy 46): doy 31..61, only 31 January reached level 1.
    assert p.iloc[1].tolist() == pytest.approx([1 / 31, 0.0], abs=1e-15)
    # 1 Jan: the window wraps round the year end: doy 1..16 and 352..365 (14 days).
    assert p.iloc[2].tolist() == pytest.approx([16 / 30, 5 / 30], abs=1e-15)
    # 20 July (doy 201): doy 186..216 minus the unlabelled day: none reached a level.
    assert p.iloc[3].tolist() == [0.0, 0.0]


def test_climatology_falls_back_to_the_overall_rate_where_no_day_is_near():
    dates = pd.date_range("2021-01-01", "2021-01-31", freq="D")
    y = np.r_[np.ones(10), np.zeros(21)]
    model = ClimatologyModel(("level 1",), window_days=15).fit(dates, y)
    p = model.predict_proba(pd.to_datetime(["2022-07-01"]))
    assert p["level 1"].tolist() == pytest.approx([10 / 31], abs=1e-15)


def test_persistence_keeps_the_last_level_and_is_missing_without_a_sample():
    model = PersistenceModel(("level 1", "level 2")).fit()
    p = model.predict_proba(np.array([0.0, 1.0, 2.0, np.nan]))
    expected = pd.DataFrame({"level 1": [0.0, 1.0, 1.0, np.nan],
                             "level 2": [0.0, 0.0, 1.0, np.nan]})
    pd.testing.assert_frame_equal(p, expected, check_exact=True)


# ---------------------------------------------------------------------------------------------
# Skill on the demo reservoir: the point of the tool
# ---------------------------------------------------------------------------------------------

def test_model_ranks_demo_issue_days_better_than_climatology(demo_site):
    spec, table = demo_site.spec, demo_site.table
    cv = training.cross_validate(spec, table)
    names = spec.levels
    assert names == ["Vigilance", "Alert Level 1", "Alert Level 2"]
    # every season with labels was forecast by models fitted on the other seasons
    X = prepare(table)
    y = ordinal_outcome(X, training.label_columns(spec))
    seasons = training.season_of(X["issue_date"], spec.season_start_month)
    assert sorted(cv["season"].unique()) == sorted(np.unique(seasons[~np.isnan(y)]))
    assert len(cv) == int((~np.isnan(y)).sum())
    model = training.skill(cv, names)["Alert Level 1"]["roc_auc"]
    climatology = training.skill(cv, names, "climatology")["Alert Level 1"]["roc_auc"]
    # cyanorisk.verify.roc_auc agrees with the reference library (scikit-learn); Alert Level 1
    # is the second level (outcome_2)
    assert model == pytest.approx(roc_auc_score(cv["outcome_2"], cv["model_2"]), abs=1e-12)
    assert climatology == pytest.approx(roc_auc_score(cv["outcome_2"], cv["climatology_2"]),
                                        abs=1e-12)
    assert model > climatology
