"""Threshold tuning and the firing-rate audit."""

import numpy as np
import pandas as pd
import pytest
from scipy.stats import norm

from impactlink.errors import TriggerError
from impactlink.triggers import (
    evaluate_trigger,
    firing_rate_audit,
    replay_trigger,
    tune_thresholds,
)

WEEKS = pd.date_range("2000-01-03", periods=52 * 12, freq="7D")


def _ar1(n_weeks, n_counties, seed, phi=0.9):
    """Standard-normal AR(1) series (stationary variance 1), like a weekly standardized index."""
    rng = np.random.default_rng(seed)
    e = rng.standard_normal((n_weeks, n_counties))
    x = np.empty_like(e)
    x[0] = e[0]
    for t in range(1, n_weeks):
        x[t] = phi * x[t - 1] + np.sqrt(1 - phi**2) * e[t]
    return x


def test_uniform_threshold_fires_at_phi_on_standard_normal_series():
    # iid N(0,1) weeks: the share at or below theta is Binomial(n, Phi(theta))/n; allow 4 SE.
    rng = np.random.default_rng(11)
    n = 4000
    x = rng.standard_normal((n, 8))
    for thr in (-1.5, -0.8, 0.0):
        audit = firing_rate_audit(x, thr)
        p0 = norm.cdf(thr)
        se = np.sqrt(p0 * (1 - p0) / n)
        assert np.all(np.abs(audit["below_share"] - p0) < 4 * se)
        np.testing.assert_allclose(audit["nominal_share"], p0)
        # one-week rules: the trigger's share of weeks on is the same share
        on = replay_trigger(x, threshold=thr, entry_weeks=1, exit_weeks=1)
        np.testing.assert_allclose(on.mean(axis=0), audit["below_share"])


def test_audit_flags_a_county_whose_index_is_not_standard():
    # a county whose index is skewed (e.g. many dry weeks mapped to one value) fires more often
    rng = np.random.default_rng(12)
    x = rng.standard_normal((3000, 2))
    x[:, 1] = np.where(rng.random(3000) < 0.3, -1.2, x[:, 1])
    audit = firing_rate_audit(x, -1.0, county_ids=["humid", "dry"]).set_index("county")
    assert abs(audit.loc["humid", "z_binomial"]) < 4
    assert audit.loc["dry", "share_ratio"] > 2
    pct = firing_rate_audit(rng.uniform(0, 100, (3000, 1)), 20.0, index_scale="percentile")
    assert pct["nominal_share"].iloc[0] == 0.2


def test_local_tuning_recovers_planted_thresholds():
    # impacts occur exactly when the index is at or below a county's own threshold
    x = _ar1(len(WEEKS), 12, seed=1)
    truth = np.round(np.linspace(-1.6, -0.5, 12), 1)
    lev = (x <= truth).astype(float)
    res = tune_thresholds(x, lev, weeks=WEEKS, scope="county", shrink_events=0.0,
                          entry_weeks=1, exit_weeks=1)
    np.testing.assert_allclose(res.thresholds, truth, atol=1e-9)
    assert res.cv_scores["peirce_skill"].iloc[-1] > 0.95
    uni = tune_thresholds(x, lev, weeks=WEEKS, scope="uniform", entry_weeks=1, exit_weeks=1)
    assert np.unique(uni.thresholds).size == 1
    # the honest (held-out) score of local thresholds beats one statewide threshold here
    assert res.cv_scores["peirce_skill"].iloc[-1] > uni.cv_scores["peirce_skill"].iloc[-1]


def test_grid_search_matches_brute_force_replay_and_evaluation():
    # cross-check the vectorised search against replay_trigger + evaluate_trigger per candidate
    rng = np.random.default_rng(5)
    x = _ar1(len(WEEKS), 4, seed=2)
    lev = ((x + 0.5 * rng.standard_normal(x.shape)) < -1.0).astype(float)
    lev[:30, 0] = np.nan
    cands = np.round(np.arange(-2.0, 0.01, 0.25), 10)
    res = tune_thresholds(x, lev, weeks=WEEKS, candidates=cands, scope="uniform")
    years = WEEKS.isocalendar().year.to_numpy()

    def best(mask_year=None):
        scores = []
        for c in cands:
            on = replay_trigger(x, threshold=c)
            lv = lev.copy()
            if mask_year is not None:
                lv[years == mask_year] = np.nan
            scores.append(evaluate_trigger(on, lv, weeks=WEEKS).pooled["peirce_skill"])
        return cands[int(np.nanargmax(scores))]

    assert res.thresholds[0] == best()
    folds = res.fold_thresholds.groupby("year")["threshold"].first()
    for y in (2000, 2005, 2011):
        assert folds.loc[y] == best(mask_year=y)


def test_held_out_counts_cover_every_known_week_once():
    x = _ar1(len(WEEKS), 5, seed=3)
    lev = (x < -0.9).astype(float)
    lev[100:140, 2] = np.nan
    res = tune_thresholds(x, lev, weeks=WEEKS, scope="county")
    cv = res.cv_scores.iloc[:-1]
    total = cv[["hits", "false_alarms", "misses", "correct_negatives"]].sum(axis=1)
    np.testing.assert_array_equal(total, np.isfinite(lev).sum(axis=0))


def test_region_scope_and_shrinkage_of_a_county_without_events():
    x = _ar1(len(WEEKS), 6, seed=4)
    truth = np.array([-1.5, -1.5, -1.5, -0.6, -0.6, -0.6])
    lev = (x <= truth).astype(float)
    lev[:, 2] = 0.0  # county 2 never had an impact: it should borrow region a's threshold
    regions = ["a", "a", "a", "b", "b", "b"]
    reg = tune_thresholds(x, lev, weeks=WEEKS, scope="region", regions=regions, cv="none")
    assert reg.thresholds[0] == reg.thresholds[1] == reg.thresholds[2]
    assert reg.thresholds[3] == reg.thresholds[4] == reg.thresholds[5]
    assert reg.cv_scores is None
    loc = tune_thresholds(x, lev, weeks=WEEKS, scope="county", regions=regions, cv="none")
    # zero events -> credibility weight 0 -> exactly the region's threshold
    assert loc.scores["episodes"].iloc[2] == 0
    assert loc.thresholds[2] == reg.thresholds[2]
    # without shrinkage the county has no evidence and falls back to the region as well
    raw = tune_thresholds(x, lev, weeks=WEEKS, scope="county", regions=regions, cv="none",
                          shrink_events=0.0)
    assert raw.thresholds[2] == reg.thresholds[2]


def test_target_far_objective_respects_the_bound():
    x = _ar1(len(WEEKS), 5, seed=6)
    lev = (x < -1.2).astype(float)
    res = tune_thresholds(x, lev, weeks=WEEKS, objective="target_far",
                          max_false_alarm_ratio=0.3, cv="none")
    assert res.scores["false_alarm_ratio"].iloc[-1] <= 0.3


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"impact_level": np.zeros((10, 2))}, "impact_level has shape"),
        ({"objective": "accuracy"}, "objective must be one of"),
        ({"scope": "state"}, "scope must be one of"),
        ({"scope": "region"}, "needs regions"),
        ({"regions": ["a"]}, "one entry per county"),
        ({"candidates": []}, "candidates must be a non-empty"),
        ({"weeks": None}, "needs the year of each week"),
        ({"weeks": WEEKS[:104]}, "at least 3 years"),
        ({"max_false_alarm_ratio": 1.5}, "between 0 and 1"),
        ({"impact_level": np.full((len(WEEKS), 2), np.nan)}, "no known week"),
    ],
)
def test_errors(kwargs, match):
    n = len(kwargs["weeks"]) if kwargs.get("weeks") is not None else len(WEEKS)
    x = np.zeros((n, 2))
    lev = kwargs.pop("impact_level", np.zeros((n, 2)))
    kwargs.setdefault("weeks", WEEKS[:n])
    with pytest.raises(TriggerError, match=match):
        tune_thresholds(x, lev, **kwargs)


def test_firing_audit_errors():
    with pytest.raises(TriggerError, match="index_scale must be one of"):
        firing_rate_audit(np.zeros((5, 2)), -1.0, index_scale="gamma")
    with pytest.raises(TriggerError, match="threshold must be a finite number"):
        firing_rate_audit(np.zeros((5, 2)), [1.0, 2.0, 3.0])


def test_held_out_skill_exposes_selection_on_noise():
    # impacts unrelated to the index: tuning per county still finds an in-sample "signal";
    # the leave-one-year-out score does not (common practice: Wilks 2011, cross-validation)
    x = _ar1(len(WEEKS), 10, seed=22)
    lev = (_ar1(len(WEEKS), 10, seed=23) < -1.0).astype(float)
    res = tune_thresholds(x, lev, weeks=WEEKS, scope="county", shrink_events=0.0)
    in_sample = res.scores["peirce_skill"].iloc[-1]
    held_out = res.cv_scores["peirce_skill"].iloc[-1]
    assert in_sample > 0.05
    assert held_out < in_sample - 0.05
    assert abs(held_out) < 0.05


def test_in_sample_counts_equal_a_replay_with_hysteresis():
    # the vectorised counts at the chosen thresholds equal replay_trigger + evaluate_trigger
    x = _ar1(len(WEEKS), 6, seed=8)
    lev = (x < -1.1).astype(float)
    lev[200:260, 1] = np.nan
    res = tune_thresholds(x, lev, weeks=WEEKS, scope="county", exit_offset=0.4, entry_weeks=3,
                          exit_weeks=2, window_weeks=6, cv="none")
    on = replay_trigger(x, threshold=res.thresholds, exit_threshold=res.thresholds + 0.4,
                        entry_weeks=3, exit_weeks=2)
    ref = evaluate_trigger(on, lev, weeks=WEEKS, window_weeks=6).table
    cols = ["hits", "false_alarms", "misses", "correct_negatives", "episodes", "episodes_hit",
            "activations_judged", "false_activations", "peirce_skill", "hit_rate"]
    pd.testing.assert_frame_equal(res.scores[cols], ref[cols])
    with pytest.raises(TriggerError, match="exit_offset must be >= 0"):
        tune_thresholds(x, lev, weeks=WEEKS, exit_offset=-0.1)
