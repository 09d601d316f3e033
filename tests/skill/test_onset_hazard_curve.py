"""Issue 7: the onset (discrete-time hazard) model's curve recovers a planted hazard.

Episodes are started by a known weekly hazard h(z) = 1 / (1 + exp(-(-3.4 - 1.8 z))) on
SPEI-13 at lag 1 and persist ~10 weeks (synth.episode_targets). A discrete-time hazard model
fitted on the county-weeks at risk (Singer & Willett 1993; Allison 1982: a logistic
regression on person-period rows) must put the true hazard inside its 90 % interval.
"""

from __future__ import annotations

import numpy as np

from impactlink.models import fit_impact_model, impact_curves

from . import synth


def test_onset_hazard_interval_covers_the_planted_hazard():
    grid = np.linspace(-2.0, 1.0, 13)
    covered = []
    for seed in range(4):
        _state, _f_state, onset, f_onset = synth.episode_targets(seed)
        x = f_onset("spei", 13, 1)
        model = fit_impact_model(onset, x,
                                 meta={"index": "spei", "scale_weeks": 13, "lag_weeks": 1})
        assert model.ok, model.reason
        # the planted slope lies inside the 90 % interval of the fitted slope
        b, se = model.params["x"], float(np.sqrt(model.cov.loc["x", "x"]))
        assert abs(b - (-1.8)) <= 1.645 * se, (seed, b, se)
        cur = impact_curves(model, grid=grid, ci=0.90)
        truth = 1.0 / (1.0 + np.exp(-(-3.4 - 1.8 * cur["x"].to_numpy())))
        covered.append((cur["prob_lo"].to_numpy() <= truth) & (truth <= cur["prob_hi"].to_numpy()))
        # the fitted hazard rises as the index falls (dry = negative)
        assert cur["prob"].iloc[0] > cur["prob"].iloc[-1]
    # pointwise 90 % intervals; neighbouring grid points are strongly correlated, so the
    # pooled coverage over 4 seeds x 13 points is asked to reach 0.75, not exactly 0.90
    assert np.mean(covered) >= 0.75, np.mean(covered)


def test_at_risk_rows_only():
    # the onset target holds only weeks not already in an episode: its event rate is the
    # weekly hazard, far below the share of weeks in an episode
    state, _fs, onset, _fo = synth.episode_targets(0)
    assert onset.frame["level"].mean() < state.frame["level"].mean()
