"""Forecast-verification scores (cyanorisk.verify): published worked examples, agreement with
scikit-learn on random inputs, the 2x2 contingency scores, the reliability table and the lead time.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import brier_score_loss, roc_auc_score
from sklearn.metrics import roc_curve as sk_roc_curve

from cyanorisk.verify import (
    brier_score,
    brier_skill_score,
    contingency,
    lead_time_days,
    reliability_table,
    roc_auc,
    roc_curve,
)

# ---------------------------------------------------------------------------------------------
# Published worked examples (REFERENCES.md, statistics table)
# ---------------------------------------------------------------------------------------------

BRIER_1950_EXAMPLE = {"o": [0, 1, 1, 0], "p": [0.1, 0.9, 0.8, 0.3], "brier": 0.0375}
"""Brier score = mean((p - o)^2): Brier 1950, Mon. Wea. Rev. 78:1-3 (REFERENCES.md, status C:
(0.01 + 0.01 + 0.04 + 0.09) / 4 = 0.0375)."""

SKLEARN_ROC_AUC_EXAMPLE = {"o": [0, 0, 1, 1], "s": [0.1, 0.4, 0.35, 0.8], "auc": 0.75}
"""scikit-learn documentation example of roc_auc_score (REFERENCES.md, status V)."""

HANLEY_MCNEIL_1982_TABLE_1 = {"ratings": [1, 2, 3, 4, 5],
                              "normal": [33, 6, 6, 11, 2],
                              "abnormal": [3, 2, 2, 11, 33],
                              "auc": 0.893}
"""Hanley & McNeil 1982, Radiology 143:29-36, table 1: radiologist's ratings (1 definitely
normal ... 5 definitely abnormal) of 58 normal and 51 abnormal images; area 0.893 with ties
counted half (REFERENCES.md, status V / C)."""


def test_brier_score_of_the_brier_1950_worked_example():
    got = brier_score(BRIER_1950_EXAMPLE["p"], BRIER_1950_EXAMPLE["o"])
    assert got == pytest.approx(BRIER_1950_EXAMPLE["brier"], abs=1e-12)


def test_roc_auc_of_the_scikit_learn_documentation_example():
    got = roc_auc(SKLEARN_ROC_AUC_EXAMPLE["s"], SKLEARN_ROC_AUC_EXAMPLE["o"])
    assert got == pytest.approx(SKLEARN_ROC_AUC_EXAMPLE["auc"], abs=1e-12)


def test_roc_auc_of_hanley_mcneil_1982_table_1():
    t = HANLEY_MCNEIL_1982_TABLE_1
    # one row per image: its rating as the score, 0 for normal and 1 for abnormal
    score = np.repeat(np.tile(t["ratings"], 2), t["normal"] + t["abnormal"])
    outcome = np.repeat([0] * 5 + [1] * 5, t["normal"] + t["abnormal"])
    assert (outcome == 0).sum() == 58 and (outcome == 1).sum() == 51
    # published to 3 decimals: 0.8932... rounds to 0.893
    assert round(roc_auc(score, outcome), 3) == t["auc"]
    assert roc_auc(score, outcome) == pytest.approx(t["auc"], abs=5e-4)


def test_roc_curve_of_the_scikit_learn_documentation_example():
    curve = roc_curve(SKLEARN_ROC_AUC_EXAMPLE["s"], SKLEARN_ROC_AUC_EXAMPLE["o"])
    # thresholds, highest first, with the "warn on nothing" point at +inf in front
    np.testing.assert_array_equal(curve["threshold"], [np.inf, 0.8, 0.4, 0.35, 0.1])
    np.testing.assert_allclose(curve["false_alarm_rate"], [0, 0, 0.5, 0.5, 1], atol=1e-12)
    np.testing.assert_allclose(curve["hit_rate"], [0, 0.5, 0.5, 1, 1], atol=1e-12)


# ---------------------------------------------------------------------------------------------
# Agreement with scikit-learn on random inputs (ties included)
# ---------------------------------------------------------------------------------------------

# Probabilities on a coarse grid so that ties are common.
probabilities = st.integers(0, 10).map(lambda k: k / 10)


@st.composite
def forecast_sets(draw, both_classes: bool = False):
    n = draw(st.integers(2 if both_classes else 1, 40))
    p = draw(st.lists(probabilities, min_size=n, max_size=n))
    o = draw(st.lists(st.integers(0, 1), min_size=n, max_size=n))
    if both_classes:
        i, j = draw(st.lists(st.integers(0, n - 1), min_size=2, max_size=2, unique=True))
        o[i], o[j] = 0, 1
    return np.array(p, dtype=float), np.array(o, dtype=float)


@settings(max_examples=60, deadline=None)
@given(forecast_sets())
def test_brier_score_agrees_with_scikit_learn(data):
    p, o = data
    assert brier_score(p, o) == pytest.approx(brier_score_loss(o, p), abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(forecast_sets(both_classes=True))
def test_roc_auc_agrees_with_scikit_learn(data):
    p, o = data
    assert roc_auc(p, o) == pytest.approx(roc_auc_score(o, p), abs=1e-12)


@settings(max_examples=60, deadline=None)
@given(forecast_sets(both_classes=True))
def test_roc_curve_agrees_with_scikit_learn(data):
    p, o = data
    fpr, tpr, thresholds = sk_roc_curve(o, p, drop_intermediate=False)
    curve = roc_curve(p, o)
    np.testing.assert_allclose(curve["false_alarm_rate"], fpr, atol=1e-12)
    np.testing.assert_allclose(curve["hit_rate"], tpr, atol=1e-12)
    np.testing.assert_allclose(curve["threshold"].iloc[1:], thresholds[1:], atol=0)


def test_roc_curve_of_a_backtest_sized_set_with_ties_agrees_with_scikit_learn():
    # 30,000 forecasts rounded to whole percent (as reports show them): many ties per threshold
    rng = np.random.default_rng(13)
    p = np.round(rng.beta(0.6, 2.0, 30_000), 2)
    o = (rng.random(30_000) < p).astype(float)
    fpr, tpr, thresholds = sk_roc_curve(o, p, drop_intermediate=False)
    curve = roc_curve(p, o)
    assert len(curve) == len(np.unique(p)) + 1
    np.testing.assert_allclose(curve["false_alarm_rate"], fpr, atol=1e-12)
    np.testing.assert_allclose(curve["hit_rate"], tpr, atol=1e-12)
    np.testing.assert_allclose(curve["threshold"].iloc[1:], thresholds[1:], atol=0)


@settings(max_examples=40, deadline=None)
@given(forecast_sets(both_classes=True), st.lists(probabilities, max_size=5),
       st.lists(st.integers(0, 1), max_size=5))
def test_missing_values_are_left_out_of_every_score(data, p_without_o, o_without_p):
    p, o = data
    # rows with a forecast but no outcome, and rows with an outcome but no forecast, added:
    # the scores are those of the complete rows
    extra_p = np.concatenate([p, p_without_o, np.full(len(o_without_p), np.nan)])
    extra_o = np.concatenate([o, np.full(len(p_without_o), np.nan), o_without_p])
    assert brier_score(extra_p, extra_o) == pytest.approx(brier_score(p, o), abs=1e-12)
    assert roc_auc(extra_p, extra_o) == pytest.approx(roc_auc(p, o), abs=1e-12)


def test_scores_without_outcomes_are_nan():
    assert math.isnan(brier_score([0.2, 0.4], [np.nan, np.nan]))
    assert math.isnan(roc_auc([0.2, 0.4, 0.9], [0, 0, 0]))  # one class only
    assert math.isnan(roc_auc([0.2, 0.4, 0.9], [1, 1, 1]))


@pytest.mark.parametrize(("o", "undefined"), [([0, 0, 0], "hit_rate"),
                                              ([1, 1, 1], "false_alarm_rate")])
def test_roc_rates_without_cases_to_count_are_nan_as_in_scikit_learn(o, undefined):
    # no events: the hit rate is 0/0; no non-events: the false alarm rate is 0/0
    p, o = np.array([0.1, 0.2, 0.3]), np.array(o)
    with warnings.catch_warnings():  # scikit-learn warns that the rate is undefined
        warnings.simplefilter("ignore")
        fpr, tpr, _ = sk_roc_curve(o, p, drop_intermediate=False)
    curve = roc_curve(p, o)
    sk = {"false_alarm_rate": fpr, "hit_rate": tpr}
    assert np.isnan(sk[undefined]).all()
    assert curve[undefined].isna().all()
    defined = ({"false_alarm_rate", "hit_rate"} - {undefined}).pop()
    np.testing.assert_allclose(curve[defined], sk[defined], atol=1e-12)


# ---------------------------------------------------------------------------------------------
# Brier skill score: 1 - BS / BS_ref (standard forecast verification; REFERENCES.md, V)
# ---------------------------------------------------------------------------------------------


def test_brier_skill_score_is_one_minus_the_ratio_of_brier_scores():
    o, p = BRIER_1950_EXAMPLE["o"], BRIER_1950_EXAMPLE["p"]
    ref = [0.5, 0.5, 0.5, 0.5]  # BS_ref = 0.25
    assert brier_skill_score(p, o, ref) == pytest.approx(1 - 0.0375 / 0.25, abs=1e-12)  # 0.85
    worse = [0.5, 0.5, 0.5, 1.0]  # BS_ref = (3 * 0.25 + 1) / 4 = 0.4375; BS of [0.5]*4 = 0.25
    assert brier_skill_score(ref, o, worse) == pytest.approx(1 - 0.25 / 0.4375, abs=1e-12)
    assert brier_skill_score(worse, o, ref) == pytest.approx(1 - 0.4375 / 0.25, abs=1e-12)  # < 0
    assert brier_skill_score(p, o, p) == pytest.approx(0.0, abs=1e-12)


def test_brier_skill_score_uses_only_rows_where_both_forecasts_and_the_outcome_exist():
    o = [0, 1, 1, 0, 1, np.nan]
    p = [0.1, 0.9, 0.8, 0.3, np.nan, 0.5]
    ref = [0.5, 0.5, 0.5, np.nan, 0.5, 0.5]
    # rows 0-2 only: BS = (0.01 + 0.01 + 0.04) / 3 = 0.02, BS_ref = 0.25
    assert brier_skill_score(p, o, ref) == pytest.approx(1 - 0.02 / 0.25, abs=1e-12)


def test_brier_skill_score_against_a_perfect_reference_is_nan():
    assert math.isnan(brier_skill_score([0.2, 0.7], [0, 1], [0.0, 1.0]))


# ---------------------------------------------------------------------------------------------
# 2x2 contingency scores (Wilks, Statistical Methods in the Atmospheric Sciences, ch. 8;
# definitions from memory): hits a, false alarms b, misses c, correct negatives d;
# POD = a/(a+c), FAR = b/(a+b), POFD = b/(b+d), CSI = a/(a+b+c).
# ---------------------------------------------------------------------------------------------


def test_contingency_scores_on_a_hand_built_table():
    # warned (p >= 0.5) and the level was met: 3 hits
    # warned and not met: 2 false alarms; not warned and met: 1 miss; neither: 4 correct negatives
    p = [0.9, 0.5, 0.7, 0.6, 0.55, 0.2, 0.1, 0.3, 0.49, 0.0]
    o = [1, 1, 1, 0, 0, 1, 0, 0, 0, 0]
    got = contingency(p, o, 0.5)
    assert {k: got[k] for k in ("hits", "false_alarms", "misses", "correct_negatives")} == {
        "hits": 3, "false_alarms": 2, "misses": 1, "correct_negatives": 4}
    assert got["hit_rate"] == pytest.approx(3 / 4, abs=1e-12)  # POD
    assert got["false_alarm_ratio"] == pytest.approx(2 / 5, abs=1e-12)  # FAR
    assert got["pofd"] == pytest.approx(2 / 6, abs=1e-12)  # POFD
    assert got["csi"] == pytest.approx(3 / 6, abs=1e-12)  # CSI


def test_contingency_leaves_out_missing_values():
    got = contingency([0.9, np.nan, 0.2, 0.8], [1, 1, np.nan, 0], 0.5)
    assert [got[k] for k in ("hits", "false_alarms", "misses", "correct_negatives")] == [1, 1, 0, 0]


def test_contingency_ratios_with_a_zero_denominator_are_nan():
    # no event and no warning: a = b = c = 0, d = 3
    quiet = contingency([0.1, 0.2, 0.3], [0, 0, 0], 0.5)
    assert math.isnan(quiet["hit_rate"])  # a + c = 0
    assert math.isnan(quiet["false_alarm_ratio"])  # a + b = 0
    assert math.isnan(quiet["csi"])  # a + b + c = 0
    assert quiet["pofd"] == 0.0  # b + d = 3
    # every day an event, every day warned: b + d = 0
    busy = contingency([0.6, 0.7], [1, 1], 0.5)
    assert math.isnan(busy["pofd"])
    assert (busy["hit_rate"], busy["false_alarm_ratio"], busy["csi"]) == (1.0, 0.0, 1.0)


# ---------------------------------------------------------------------------------------------
# Reliability table
# ---------------------------------------------------------------------------------------------


def test_reliability_table_bins_and_counts_on_a_hand_built_case():
    p = [0.0, 0.05, 0.15, 0.3, 0.5, 0.55, 0.9, 1.0, np.nan]
    o = [0, 0, 1, 0, 1, 1, 1, 1, 1]
    table = reliability_table(p, o, bins=5)
    np.testing.assert_allclose(table["bin_low"], [0.0, 0.2, 0.4, 0.6, 0.8], atol=1e-12)
    np.testing.assert_allclose(table["bin_high"], [0.2, 0.4, 0.6, 0.8, 1.0], atol=1e-12)
    # [0, 0.2): 0.0, 0.05, 0.15; [0.2, 0.4): 0.3; [0.4, 0.6): 0.5, 0.55; [0.6, 0.8): none;
    # [0.8, 1.0] (closed): 0.9, 1.0; the NaN forecast is left out
    assert table["n"].tolist() == [3, 1, 2, 0, 2]
    np.testing.assert_allclose(table["mean_forecast"], [0.2 / 3, 0.3, 0.525, np.nan, 0.95], atol=1e-12)
    np.testing.assert_allclose(table["observed_frequency"], [1 / 3, 0.0, 1.0, np.nan, 1.0],
                               atol=1e-12)


def test_a_forecast_on_a_bin_edge_falls_in_the_bin_that_starts_there():
    # bins [0, 0.1), [0.1, 0.2), ... [0.9, 1]: a forecast of 0.3 belongs to [0.3, 0.4), though
    # np.linspace gives that edge as 0.30000000000000004 (likewise 0.6 and 0.7)
    edges = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9]
    table = reliability_table(edges, [1] * len(edges), bins=10)
    assert table["n"].tolist() == [0, 1, 1, 1, 1, 1, 1, 1, 1, 1]
    np.testing.assert_allclose(table["mean_forecast"].iloc[1:], edges, atol=1e-12)


# ---------------------------------------------------------------------------------------------
# Lead time
# ---------------------------------------------------------------------------------------------

SEASON = np.arange("2021-11-01", "2022-04-01", dtype="datetime64[D]")
"""Consecutive issue days of a hand-built season (November to March)."""


def warned_on(*spans: tuple[str, str]) -> np.ndarray:
    """Warning flags for SEASON, True on the days of each inclusive (first, last) span."""
    out = np.zeros(len(SEASON), dtype=bool)
    for first, last in spans:
        out |= (SEASON >= np.datetime64(first)) & (SEASON <= np.datetime64(last))
    return out


EXCEED = [np.datetime64("2022-01-20"), np.datetime64("2022-02-03")]
"""Days of samples that met the level; the first is 20 January."""


@pytest.mark.parametrize(("spans", "want"), [
    # a spell that began 15 January and is still running on the 20th: 5 days ahead
    ([("2022-01-15", "2022-01-25")], 5.0),
    # a spell that ended 7 days (the horizon) before the exceedance still counts: from its start
    ([("2022-01-10", "2022-01-13")], 10.0),
    # ... one that ended 8 days before does not, and there is no warning after: NaN
    ([("2022-01-10", "2022-01-12")], math.nan),
    # a false alarm in November does not pass for a lead time of months
    ([("2021-11-05", "2021-11-09"), ("2022-01-17", "2022-01-22")], 3.0),
    # a spell that starts on the day of the exceedance: zero
    ([("2022-01-20", "2022-01-30")], 0.0),
    # a warning only after the exceedance: late by 4 days
    ([("2022-01-24", "2022-02-05")], -4.0),
    # a false alarm in November and the first warning late: the late warning counts
    ([("2021-11-05", "2021-11-09"), ("2022-01-22", "2022-01-23")], -2.0),
    # no warning at all
    ([], math.nan),
])
def test_lead_time_on_hand_built_seasons(spans, want):
    got = lead_time_days(SEASON, warned_on(*spans), EXCEED, horizon_days=7)
    if math.isnan(want):
        assert math.isnan(got)
    else:
        assert got == pytest.approx(want, abs=1e-12)


def test_lead_time_uses_the_first_exceedance_in_any_order():
    warned = warned_on(("2022-01-15", "2022-01-25"))
    assert lead_time_days(SEASON, warned, EXCEED[::-1], 7) == pytest.approx(5.0, abs=1e-12)


def test_lead_time_without_an_exceedance_is_nan():
    assert math.isnan(lead_time_days(SEASON, warned_on(("2022-01-15", "2022-01-25")), [], 7))
