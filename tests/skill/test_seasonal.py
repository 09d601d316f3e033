"""Seasonal terms in the histogram fast path (``rank_candidates(..., seasonal=True)``)."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from impactlink.link.target import Target
from impactlink.skill import SkillWarning, rank_candidates
from impactlink.skill import _engine as E

from . import synth


# ------------------------------------------------------------------ season classes (hand cases)
def test_weekly_season_classes_hand_case():
    # four-week classes: weeks 1-4 -> midpoint 2.5, 5-8 -> 6.5, 49-52 (and week 53) -> 50.5
    sc = E.season_classes(np.array([1, 4, 5, 8, 49, 52, 53]), weekly=True)
    np.testing.assert_array_equal(sc.code, [0, 0, 1, 1, 2, 2, 2])
    np.testing.assert_allclose(sc.midpoint, [2.5, 6.5, 50.5])
    ang = 2 * np.pi * np.array([2.5, 6.5, 50.5]) / 52.1775  # 365.2425 / 7 weeks per year
    np.testing.assert_allclose(sc.harmonics, np.column_stack([np.sin(ang), np.cos(ang)]),
                               rtol=1e-14)
    assert sc.period == 52.1775


def test_monthly_season_classes_are_the_months_exactly():
    # monthly seasons are their own class: the midpoint harmonics are the exact ones
    m = np.array([3, 1, 12, 3, 7])
    sc = E.season_classes(m, weekly=False)
    ang = 2 * np.pi * m / 12
    np.testing.assert_allclose(sc.harmonics[sc.code],
                               np.column_stack([np.sin(ang), np.cos(ang)]), atol=1e-15)


# ------------------------------------------------------------------ one fold against statsmodels
def _seasonal_data(seed):
    rng = np.random.default_rng(seed)
    n, n_years = 20000, 10
    years = rng.integers(0, n_years, n)
    x = np.round(rng.normal(size=n) * 2) / 2  # 0.5 steps: each value alone in its bin
    s = rng.integers(1, 53, n)
    ang = 2 * np.pi * s / E.WEEKLY_PERIOD
    eta = -1.0 - 1.3 * x + 1.2 * np.sin(ang) - 0.8 * np.cos(ang)
    y = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(int)
    layout = E.make_layout(np.arange(n_years), np.arange(n_years), n_years, 2, k_inner=0,
                           n_boot=0, seed=0)
    return years, x, s, y, layout


@pytest.mark.parametrize("seed", [0, 1])
def test_seasonal_fold_fit_matches_glm_binomial(seed):
    import statsmodels.api as sm

    years, x, s, y, layout = _seasonal_data(seed)
    sc = E.season_classes(s, weekly=True)
    hm = sc.harmonics[sc.code]  # the rows' class-midpoint harmonics, as rank_candidates
    b = E.bin_codes(x, 200) * sc.n_classes + sc.code
    h = E.build_hist(years, y, [x, hm[:, 0], hm[:, 1]], b, np.zeros(x.size, int),
                     n_blocks=layout.n_blocks, n_bins_total=200 * sc.n_classes, n_cells=1,
                     n_levels=2)
    coef, conv = E.fit_chunk([h], layout, use_cells=False, jobs_subset="main", prior=0.0,
                             ridge=0.0, max_iter=100, tol=1e-10)
    assert conv.all()
    for f in (0, 6):
        m = years != f
        got = np.r_[-coef[0, f, 0], coef[0, f, 1:]]  # K = 2: intercept = -theta_0
        # reference 1: statsmodels GLM Binomial on the unbinned training rows with the same
        # class-midpoint harmonic columns. Every histogram row holds one index value and one
        # season class, so both maximise the same likelihood: agreement to solver precision
        # (observed ~1e-15 relative).
        X_mid = sm.add_constant(np.column_stack([x, hm])[m])
        ref = sm.GLM(y[m], X_mid, family=sm.families.Binomial()).fit(tol=1e-12)
        np.testing.assert_allclose(got, ref.params, rtol=1e-8)
        # reference 2: exact per-row harmonics sin/cos(2 pi week / 52.1775). The midpoint
        # step keeps sin(2 delta)/(4 sin(delta/2)) = 99.1% of the sinusoid (delta = 2 pi /
        # 52.18), so the harmonic coefficients shift by ~1% (observed 0.1-1.5% over four
        # seeds) and the index slope by less (observed 0.2-0.5%). Tolerances: 3% for the
        # harmonics, 1% for the slope, and every shift below one standard error of the
        # exact fit (observed at most 0.61 SE), i.e. smaller than the sampling noise.
        ang = 2 * np.pi * s[m] / E.WEEKLY_PERIOD
        X_ex = sm.add_constant(np.column_stack([x[m], np.sin(ang), np.cos(ang)]))
        ex = sm.GLM(y[m], X_ex, family=sm.families.Binomial()).fit(tol=1e-12)
        np.testing.assert_allclose(got[1], ex.params[1], rtol=0.01)
        np.testing.assert_allclose(got[2:], ex.params[2:], rtol=0.03)
        assert np.all(np.abs(got - ex.params) < ex.bse)


# ------------------------------------------------------------------ planted signal
def _seasonal_target(seed, *, planted=("spi", 13, 1), slope=-1.6, amp=1.5):
    """Binary impacts from the planted candidate plus a strong annual cycle (peak week 30)."""
    arrays, n_weeks, spin = synth.world(seed)
    fr, week_pos, county = synth._frame(n_weeks, spin, 12)
    feats = synth.features_for(arrays, week_pos, county)
    z = feats(*planted)
    s = fr["season"].to_numpy()
    eta = -1.5 + slope * z + amp * np.cos(2 * np.pi * (s - 30) / 52.1775)
    rng = np.random.default_rng(seed + 300)
    fr["level"] = (rng.random(z.size) < 1 / (1 + np.exp(-eta))).astype(int)
    tgt = Target(name="synthetic:seasonal", impact="synthetic", kind="binary",
                 grain="county_week", role="annual", frame=fr, levels=("none", "impact"))
    return tgt, feats


def _rank(tgt, feats, **kw):
    kw.setdefault("n_boot", 100)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SkillWarning)
        return rank_candidates(tgt, feats, synth.candidates(), **kw)


def _row(res, cand, model="index"):
    t = res.table
    sel = ((t["model"] == model) & (t["index"] == cand[0]) & (t["scale_weeks"] == cand[1])
           & (t["lag_weeks"] == cand[2]))
    return t[sel].iloc[0]


@pytest.mark.parametrize("seed", [0, 1])
def test_planted_candidate_with_seasonal_cycle(seed):
    # impacts = logistic(SPI-13 at lag 1 + a strong annual cycle): with seasonal terms the
    # planted candidate still ranks first or indistinguishable from first, and its skill
    # rises because the model now also explains the cycle
    tgt, feats = _seasonal_target(seed)
    plain = _rank(tgt, feats, pairs=False, challenger=False, seed=seed)
    seas = _rank(tgt, feats, pairs=False, challenger=False, seed=seed, seasonal=True)
    r0, r1 = _row(plain, ("spi", 13, 1)), _row(seas, ("spi", 13, 1))
    assert int(r1["rank"]) == 1 or bool(r1["indistinguishable_from_best"])
    assert r1["rpss"] > r0["rpss"] + 0.05
    assert bool(r1["beats_seasonal"])
    assert seas.provenance["seasonal_terms"] is True
    assert seas.provenance["season_classes"] == 13
    assert plain.provenance["seasonal_terms"] is False


def test_pairs_and_challenger_ignore_the_season():
    # index_pair and boosted models see the index only: their rows are the same with and
    # without seasonal terms (the best single candidate, which the challenger uses, is the
    # planted one in both runs)
    tgt, feats = _seasonal_target(0)
    plain = _rank(tgt, feats, n_boot=20)
    seas = _rank(tgt, feats, n_boot=20, seasonal=True)
    for model in ("index_pair", "boosted"):
        a = plain.table[plain.table["model"] == model].reset_index(drop=True)
        b = seas.table[seas.table["model"] == model].reset_index(drop=True)
        assert len(a) > 0
        pd.testing.assert_series_equal(a["rpss"], b["rpss"])


def test_seasonal_terms_with_persistence_and_row_predictions():
    # the index-plus-persistence variant and the row-level predictions run on the seasonal
    # histograms: every out-of-fold chance is a probability and the table is complete
    state, f_state, _, _ = synth.episode_targets(0)
    res = _rank(state, f_state, pairs=False, challenger=False, n_boot=20, seasonal=True)
    ip = res.table[res.table["model"] == "index_persistence"]
    assert len(ip) == len(synth.candidates())
    assert np.isfinite(ip["rpss"]).all()
    p = res.predictions["p_event_best"].to_numpy()
    assert p.size == len(state.frame) and np.all((p > 0) & (p < 1))


# ------------------------------------------------------------------ constant season
def test_constant_season_is_identical_to_no_seasonal_terms():
    # an annual (county-year) target has one season value: seasonal=True changes nothing
    rng = np.random.default_rng(5)
    n_units, n_years = 15, 30
    unit = np.tile(np.arange(n_units), n_years)
    year = np.repeat(2001 + np.arange(n_years), n_units)
    values = {c: rng.normal(size=unit.size) for c in synth.candidates()}
    p = 1 / (1 + np.exp(-(-1.0 - 1.5 * values[("spei", 26, 4)])))
    fr = pd.DataFrame({
        "unit_id": [f"c{u:02d}" for u in unit], "county_id": [f"c{u:02d}" for u in unit],
        "region": np.where(unit < 7, "north", "south"),
        "time": pd.to_datetime([f"{y}-01-01" for y in year]), "year": year, "season": 1,
        "level": (rng.random(unit.size) < p).astype(int),
    })
    tgt = Target(name="synthetic:yield", impact="synthetic", kind="binary",
                 grain="county_year", role="annual", frame=fr, levels=("none", "loss"))

    def feats(index, scale, lag):
        return values[(index, scale, lag)]

    a = _rank(tgt, feats, n_boot=50)
    b = _rank(tgt, feats, n_boot=50, seasonal=True)
    pd.testing.assert_frame_equal(a.table, b.table)
    pd.testing.assert_frame_equal(a.summary, b.summary)
    pd.testing.assert_frame_equal(a.predictions, b.predictions)
    assert b.provenance["seasonal"] is True and b.provenance["seasonal_terms"] is False


# ------------------------------------------------------------------ errors
def test_bad_seasonal_option_message():
    tgt, feats = synth.planted_target(0)
    with pytest.raises(ValueError, match="seasonal='yes' must be True or False"):
        rank_candidates(tgt, feats, synth.candidates(), seasonal="yes")
