"""rank_candidates: recovery of planted signals, baselines, persistence, honesty checks."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from impactlink.link.target import Target
from impactlink.skill import TABLE_COLUMNS, SkillWarning, rank_candidates

from . import synth


def _rank(tgt, feats, **kw):
    kw.setdefault("n_boot", 100)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SkillWarning)
        return rank_candidates(tgt, feats, synth.candidates(), **kw)


def _best(res, model="index"):
    t = res.table[res.table["model"] == model]
    return t.sort_values("rpss", ascending=False).iloc[0]


def _in_top_set(res, cand, model="index"):
    t = res.table[res.table["model"] == model]
    row = t[(t["index"] == cand[0]) & (t["scale_weeks"] == cand[1]) & (t["lag_weeks"] == cand[2])]
    return bool(row["indistinguishable_from_best"].iloc[0]) or int(row["rank"].iloc[0]) == 1


# ------------------------------------------------------------------ recovery of a planted signal
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_recovers_planted_candidate_binary(seed):
    # impacts drawn from a logistic model of SPI-13 at lag 1 (synth.planted_target): the
    # planted candidate must rank first or be indistinguishable from first, for every seed
    tgt, feats = synth.planted_target(seed, kind="binary", planted=("spi", 13, 1))
    res = _rank(tgt, feats, pairs=False, challenger=False, seed=seed)
    assert _in_top_set(res, ("spi", 13, 1))
    assert bool(_best(res)["beats_climatology"])


@pytest.mark.parametrize("seed", [0, 1])
def test_recovers_planted_candidate_ordinal(seed):
    tgt, feats = synth.planted_target(seed, kind="ordinal", planted=("soil", 26, 4))
    res = _rank(tgt, feats, pairs=False, challenger=False, seed=seed)
    assert _in_top_set(res, ("soil", 26, 4))
    b = _best(res)
    assert b["rpss"] > 0.1 and b["rpss_lo"] > 0


def test_episode_world_onset_recovers_index_and_state_prefers_persistence_at_lag_1():
    # episodes started by a hazard on SPEI-13 at lag 1 and lasting ~10 weeks
    # (synth.episode_targets). Onset target: the planted index and scale rank first or
    # indistinguishable. State target: at lag 1 persistence (level known a week earlier)
    # outranks the index alone, and the persistence table says so.
    state, f_state, onset, f_onset = synth.episode_targets(0)
    r_on = _rank(onset, f_onset, pairs=False, challenger=False)
    assert _in_top_set(r_on, ("spei", 13, 1))
    r_st = _rank(state, f_state, pairs=False, challenger=False)
    t = r_st.table
    pers1 = t[(t["model"] == "persistence") & (t["lag_weeks"] == 1)]["rpss"].iloc[0]
    idx1 = t[(t["model"] == "index") & (t["lag_weeks"] == 1)]["rpss"].max()
    assert pers1 > idx1
    p = r_st.persistence.set_index("lag_weeks")
    assert not p.loc[1, "index_alone_beats_persistence"]
    assert p.loc[1, "gain_lo"] <= p.loc[1, "gain"] <= p.loc[1, "gain_hi"]
    assert "sentence" not in p.columns  # words belong to the report
    # index-only rows never "beat persistence" at lag 1
    only = t[(t["model"] == "index") & (t["lag_weeks"] == 1)]
    assert not only["beats_persistence"].any()


# ------------------------------------------------------------------ honesty and structure
def test_null_world_nothing_beats_climatology_and_nested_is_not_above_naive():
    # impacts independent of every candidate: the naive best is inflated by selection;
    # the nested estimate must not exceed it, and the best must not be declared better
    # than climatology with confidence in most candidates
    tgt, feats = synth.planted_target(3, kind="binary", slope=0.0)
    res = _rank(tgt, feats, pairs=False, challenger=False)
    s = res.summary.iloc[0]
    assert s["nested_rpss"] <= s["naive_rpss"] + 1e-12
    assert s["naive_rpss"] < 0.01
    share = res.table[res.table["model"] == "index"]["beats_climatology"].mean()
    assert share < 0.25


def test_table_has_the_contract_columns_and_baselines():
    tgt, feats = synth.planted_target(0)
    res = _rank(tgt, feats, n_boot=50)
    t = res.table
    assert list(t.columns) == TABLE_COLUMNS
    assert {"climatology", "seasonal", "index", "index_pair", "boosted"} <= set(t["model"])
    clim = t[t["model"] == "climatology"].iloc[0]
    assert clim["bss"] == pytest.approx(0.0, abs=1e-12)
    assert clim["rpss"] == pytest.approx(0.0, abs=1e-12)
    # binary target: RPS is the Brier score, RPSS the BSS
    np.testing.assert_allclose(t["rps"], t["brier"], rtol=1e-10)
    np.testing.assert_allclose(t["rpss"], t["bss"], rtol=1e-10, atol=1e-12)
    # intervals bracket the point estimates
    cand = t[t["model"] == "index"]
    assert (cand["bss_lo"] <= cand["bss"]).all() and (cand["bss"] <= cand["bss_hi"]).all()
    assert (cand["events"] == int((tgt.frame["level"] >= 1).sum())).all()
    assert set(res.predictions.columns) >= {"p_event_best", "p_event_climatology",
                                            "p_event_seasonal"}
    assert res.reliability["n"].sum() == len(tgt.frame)
    assert set(res.local["level"]) == {"region", "unit"}
    assert res.local.groupby("level")["events"].sum().nunique() == 1
    s = res.summary.iloc[0]
    assert "sentence" not in res.summary.columns  # words belong to the report
    # the challenger and pair rows are compared with the best single candidate, paired
    boosted = t[t["model"] == "boosted"]["rpss"].iloc[0]
    assert s["boosted_gain"] == pytest.approx(boosted - s["naive_rpss"])
    assert s["boosted_gain_lo"] <= s["boosted_gain"] <= s["boosted_gain_hi"]
    assert s["best_pair_gain_lo"] <= s["best_pair_gain"] <= s["best_pair_gain_hi"]


def test_scores_in_table_match_scores_module_on_predictions():
    # the histogram engine's pooled out-of-fold Brier score and ROC area equal the scores
    # module (scikit-learn) applied to the row-level out-of-fold predictions
    from impactlink.skill import scores as S

    tgt, feats = synth.planted_target(1)
    res = _rank(tgt, feats, n_boot=0, pairs=False, challenger=False)
    p = res.predictions
    best = _best(res)
    assert best["brier"] == pytest.approx(S.brier_score(p["event"], p["p_event_best"]), rel=1e-9)
    # the ROC area orders rows by the held-out linear predictor (cut-points excluded: they
    # shift from fold to fold and bias pooled leave-one-out areas down; Airola et al. 2011)
    from sklearn.metrics import roc_auc_score

    assert best["roc_auc"] == pytest.approx(roc_auc_score(p["event"], p["eta_best"]), rel=1e-9)
    clim = res.table[res.table["model"] == "climatology"].iloc[0]
    assert clim["brier"] == pytest.approx(
        S.brier_score(p["event"], p["p_event_climatology"]), rel=1e-9)


def test_deterministic_and_same_result_in_a_process_pool():
    tgt, feats = synth.planted_target(2)
    # jobs=2: the (index, lag) groups are read, binned and fitted in two worker
    # processes (pairs included)
    a = _rank(tgt, feats, n_boot=30, pairs=True, challenger=False, seed=5)
    b = _rank(tgt, feats, n_boot=30, pairs=True, challenger=False, seed=5, jobs=2)
    pd.testing.assert_frame_equal(a.table, b.table)
    # the leading candidates' row losses are also computed on two threads
    pd.testing.assert_frame_equal(a.local, b.local)
    pd.testing.assert_frame_equal(a.predictions, b.predictions)


@pytest.mark.parametrize("cv", ["blocked_k_fold", "leave_one_region_out"])
def test_other_fold_schemes_run_and_recover(cv):
    tgt, feats = synth.planted_target(0)
    res = _rank(tgt, feats, cv=cv, k_folds=4, pairs=False, challenger=False, n_boot=50)
    assert _in_top_set(res, ("spi", 13, 1))
    assert res.provenance["n_folds"] == (4 if cv == "blocked_k_fold" else 2)


def test_dropped_rows_warn_with_count():
    tgt, feats = synth.planted_target(0)

    def holes(i, s, lg):
        x = feats(i, s, lg)
        if s == 26:
            x = x.copy()
            x[:10] = np.nan
        return x

    with pytest.warns(SkillWarning, match="10 of .* rows dropped"):
        rank_candidates(tgt, holes, synth.candidates()[:4] + [("spi", 26, 1)], n_boot=0,
                        pairs=False, challenger=False)


def test_a_gap_gives_the_same_table_in_process_and_in_a_pool():
    # in-process the gap (a long lag's spin-up) is met first, stops every group, and the rows
    # every candidate can score are found before the histograms are built again; a pool's
    # tasks cannot stop one another, so there the common rows are found first
    tgt, feats = synth.planted_target(1)
    calls = []

    def holes(i, s, lg):
        calls.append((i, s, lg))
        x = feats(i, s, lg)
        if lg == max(c[2] for c in synth.candidates()):
            x = x.copy()
            x[:25] = np.nan
        return x

    cands = synth.candidates()
    with pytest.warns(SkillWarning, match="25 of .* rows dropped"):
        a = rank_candidates(tgt, holes, cands, n_boot=20, pairs=True, challenger=False)
    # in one thread the longest-lag group comes first: one read of it before the pass that
    # finds the common rows, not one read of every candidate
    first_pass = calls[: calls.index(cands[0])]
    assert len(first_pass) <= len({c[1] for c in cands})
    with pytest.warns(SkillWarning, match="25 of .* rows dropped"):
        b = rank_candidates(tgt, holes, cands, n_boot=20, pairs=True, challenger=False, jobs=2)
    pd.testing.assert_frame_equal(a.table, b.table)


def test_rank_errors_name_the_problem():
    tgt, feats = synth.planted_target(0)
    with pytest.raises(ValueError, match="candidates is empty"):
        rank_candidates(tgt, feats, [])
    with pytest.raises(ValueError, match=r"cv='by_week' is not one of"):
        rank_candidates(tgt, feats, synth.candidates(), cv="by_week")
    with pytest.raises(ValueError, match=r"returned shape \(3,\); expected"):
        rank_candidates(tgt, lambda i, s, lg: np.zeros(3), synth.candidates())
    bad = Target(name="t", impact="t", kind="binary", grain="county_week", role="state",
                 frame=pd.DataFrame({"level": [0, 1]}), levels=("a", "b"))
    with pytest.raises(ValueError, match=r"frame lacks columns \['unit_id', 'year'\]"):
        rank_candidates(bad, feats, synth.candidates())
    with pytest.raises(ValueError, match="ci=1.5 must lie strictly between 0 and 1"):
        rank_candidates(tgt, feats, synth.candidates(), ci=1.5)


def test_missing_levels_in_a_nullable_column_are_dropped_with_a_warning():
    # an impact unknown in some rows (outside a source's coverage) arrives as <NA>
    tgt, feats = synth.planted_target(0)
    fr = tgt.frame.copy()
    fr["level"] = fr["level"].astype("Int64")
    fr.loc[:4, "level"] = pd.NA
    t2 = Target(name=tgt.name, impact=tgt.impact, kind=tgt.kind, grain=tgt.grain,
                role=tgt.role, frame=fr, levels=tgt.levels)
    with pytest.warns(SkillWarning, match="5 of .* rows dropped"):
        res = rank_candidates(t2, feats, synth.candidates()[:3], n_boot=0, pairs=False,
                              challenger=False)
    assert res.provenance["rows_scored"] == len(fr) - 5
