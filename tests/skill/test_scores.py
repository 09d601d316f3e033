"""Verification scores: published values, scikit-learn cross-checks, hand-worked cases."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from impactlink.skill import scores as S

REF = Path(__file__).resolve().parents[1] / "reference"


# ------------------------------------------------------------------ published: Finley (1884)
def test_finley_tornado_forecasts_reproduce_textbook_scores():
    # Finley's tornado forecasts, 2x2 table a=28, b=72, c=23, d=2680 (n = 2803), as tabulated
    # in Wilks (2011), Statistical Methods in the Atmospheric Sciences, 3rd ed., section 8.2
    # (Table 8.1 there; from memory). Textbook values are printed to 2-3 decimals, so each
    # is checked to half a unit of its last printed decimal.
    ref = pd.read_csv(REF / "skill_finley_tornado.csv")
    got = S.ContingencyScores.from_counts(28, 72, 23, 2680)
    for row in ref.itertuples():
        assert getattr(got, row.score) == pytest.approx(row.value, abs=0.5 * 10.0 ** -row.decimals), row.score


def test_finley_never_tornado_forecast_scores_higher_proportion_correct():
    # the famous point of the example (Wilks 2011, section 8.2; from memory): always
    # forecasting "no tornado" scores PC = 0.982 > 0.966, while its Peirce score is 0.
    never = S.ContingencyScores.from_counts(0, 0, 51, 2752)
    assert never.proportion_correct == pytest.approx(0.982, abs=5e-4)
    assert never.peirce_skill_score == 0.0


def test_contingency_from_arrays_equals_from_counts():
    y = np.r_[np.ones(51), np.zeros(2752)]
    f = np.r_[np.ones(28), np.zeros(23), np.ones(72), np.zeros(2680)]
    a = S.contingency_scores(y, f)
    b = S.ContingencyScores.from_counts(28, 72, 23, 2680)
    assert a == b
    # the same table as four weighted rows
    c = S.contingency_scores([1, 0, 1, 0], [1, 1, 0, 0], sample_weight=[28, 72, 23, 2680])
    assert c == b


# ------------------------------------------------------------------ scikit-learn cross-checks
@pytest.fixture
def binary():
    rng = np.random.default_rng(0)
    p = rng.random(500)
    y = (rng.random(500) < p).astype(int)
    w = rng.integers(1, 5, 500).astype(float)
    return y, p, w


def test_brier_and_auc_agree_with_sklearn(binary):
    from sklearn.metrics import brier_score_loss, roc_auc_score

    y, p, w = binary
    assert S.brier_score(y, p, sample_weight=w) == pytest.approx(
        brier_score_loss(y, p, sample_weight=w), rel=1e-12)
    assert S.roc_auc(y, p, sample_weight=w) == pytest.approx(
        roc_auc_score(y, p, sample_weight=w), rel=1e-12)
    # by hand: the mean squared error of the forecast
    assert S.brier_score(y, p, sample_weight=w) == pytest.approx(
        np.average((p - y) ** 2, weights=w), rel=1e-12)


def test_brier_hand_case_and_skill_against_base_rate():
    # y = (1, 0, 0, 0); forecast 0.5 everywhere: BS = (0.25 * 4) / 4 = 0.25.
    # base rate 0.25: BS_ref = (0.75^2 + 3 * 0.25^2) / 4 = 0.1875, BSS = 1 - 0.25/0.1875 = -1/3
    y = [1, 0, 0, 0]
    assert S.brier_score(y, [0.5] * 4) == pytest.approx(0.25)
    assert S.brier_skill_score(y, [0.5] * 4, reference=0.25) == pytest.approx(-1 / 3)
    assert S.brier_skill_score(y, [1, 0, 0, 0], reference=0.25) == 1.0


def test_rps_hand_case_and_binary_equals_brier(binary):
    # 3 levels, observed level 1, forecast (0.2, 0.5, 0.3): cumulative forecast (0.2, 0.7),
    # cumulative observation (0, 1): RPS = 0.04 + 0.09 = 0.13
    assert S.ranked_probability_score([1], [[0.2, 0.5, 0.3]]) == pytest.approx(0.13)
    y, p, w = binary
    P = np.column_stack([1 - p, p])
    assert S.ranked_probability_score(y, P, sample_weight=w) == pytest.approx(
        S.brier_score(y, p, sample_weight=w), rel=1e-12)
    clim = np.array([0.6, 0.4])
    assert S.rps_skill_score(y, P, reference=clim, sample_weight=w) == pytest.approx(
        S.brier_skill_score(y, p, reference=0.4, sample_weight=w), rel=1e-12)


def test_log_loss_hand_case_and_sklearn(binary):
    from sklearn.metrics import log_loss

    assert S.log_loss([1, 0], [0.5, 0.5]) == pytest.approx(np.log(2))
    assert S.log_loss([2], [[0.25, 0.25, 0.5]]) == pytest.approx(np.log(2))
    y, p, w = binary
    assert S.log_loss(y, p, sample_weight=w) == pytest.approx(
        log_loss(y, np.clip(p, 1e-15, 1 - 1e-15), sample_weight=w), rel=1e-9)


def test_reliability_table_matches_sklearn_calibration_curve(binary):
    from sklearn.calibration import calibration_curve

    y, p, _ = binary
    tab = S.reliability_table(y, p, n_bins=10)
    prob_true, prob_pred = calibration_curve(y, p, n_bins=10, strategy="uniform")
    np.testing.assert_allclose(tab["observed_frequency"], prob_true, rtol=1e-12)
    np.testing.assert_allclose(tab["mean_forecast"], prob_pred, rtol=1e-12)
    assert tab["n"].sum() == len(y)


def test_calibration_slope_is_one_for_calibrated_and_below_one_for_overconfident():
    # statsmodels GLM on logit(p) is the reference for the slope itself
    import statsmodels.api as sm

    rng = np.random.default_rng(3)
    lp = rng.normal(scale=1.5, size=20000)
    p = 1 / (1 + np.exp(-lp))
    y = (rng.random(lp.size) < p).astype(int)
    s = S.calibration_slope(y, p)
    assert s == pytest.approx(1.0, abs=0.06)  # sampling s.e. about 0.02 at n = 20000
    over = 1 / (1 + np.exp(-2 * lp))  # twice as extreme as the truth: slope about 1/2
    s2 = S.calibration_slope(y, over)
    assert s2 == pytest.approx(0.5, abs=0.04)
    ref = sm.GLM(y, sm.add_constant(2 * lp), family=sm.families.Binomial()).fit()
    assert s2 == pytest.approx(ref.params[1], rel=1e-6)


@pytest.mark.parametrize("fn", [S.brier_score, S.roc_auc, S.log_loss, S.calibration_slope])
def test_binary_scores_are_invariant_to_row_order(fn, binary):
    # property over the family: a permutation of rows changes no score
    y, p, w = binary
    perm = np.random.default_rng(1).permutation(len(y))
    assert fn(y, p, sample_weight=w) == pytest.approx(fn(y[perm], p[perm], sample_weight=w[perm]))


def test_score_errors_name_the_problem():
    with pytest.raises(ValueError, match="inconsistent numbers of samples"):
        S.brier_score([0, 1], [0.5])
    with pytest.raises(ValueError, match="0/1 outcomes"):
        S.roc_auc([0, 2], [0.1, 0.2])
    with pytest.raises(ValueError, match=r"probabilities in \[0, 1\]"):
        S.log_loss([0, 1], [0.1, 1.2])
    with pytest.raises(ValueError, match="sum to 1"):
        S.ranked_probability_score([0], [[0.5, 0.6]])
    with pytest.raises(ValueError, match="integer levels 0..1"):
        S.rps_skill_score([2], [[0.5, 0.5]], reference=[0.5, 0.5])
    with pytest.raises(ValueError, match="reference forecast is perfect"):
        S.brier_skill_score([0, 0], [0.1, 0.1], reference=0.0)
    with pytest.raises(ValueError, match="n_bins must be >= 1"):
        S.reliability_table([0, 1], [0.1, 0.9], n_bins=0)
    with pytest.raises(ValueError, match="yes/no"):
        S.contingency_scores([0, 1], [0.3, 1])
    with pytest.raises(ValueError, match="counts must be >= 0"):
        S.ContingencyScores.from_counts(1, -1, 0, 0)
