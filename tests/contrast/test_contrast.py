"""County contrasts: planted trait effects, cross-implementation checks, excess and pairs."""

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.stats import poisson

from impactlink.contrast import ContrastWarning, county_contrast, poisson_ratio_interval
from impactlink.errors import ContrastError
from impactlink.link.target import Target


def _make(seed, *, n_counties=40, n_years=25, beta_x=1.2, gamma=0.6, extra=None):
    """County-year rows with logit p = -1 + beta_x * x + gamma * z(storage) (+ extra per county)."""
    rng = np.random.default_rng(seed)
    ids = [f"c{i:02d}" for i in range(n_counties)]
    storage = rng.gamma(4.0, 20.0, n_counties)  # days of supply: any units, standardized inside
    z = (storage - storage.mean()) / storage.std(ddof=1)
    noise = rng.standard_normal(n_counties)
    frame = pd.DataFrame(
        {
            "unit_id": np.repeat(ids, n_years),
            "county_id": np.repeat(ids, n_years),
            "region": "north",
            "year": np.tile(np.arange(2001, 2001 + n_years), n_counties),
        }
    )
    frame["time"] = pd.to_datetime(frame["year"].astype(str) + "-01-01")
    frame["season"] = 1
    x = rng.standard_normal(len(frame))
    eta = -1.0 + beta_x * x + gamma * np.repeat(z, n_years)
    if extra is not None:
        eta = eta + np.repeat(extra, n_years)
    frame["level"] = (rng.random(len(frame)) < 1 / (1 + np.exp(-eta))).astype(int)
    target = Target(name="pasture_loss", impact="pasture_loss", kind="binary",
                    grain="county_year", role="annual", frame=frame, levels=("no", "yes"))
    traits = pd.DataFrame({"county_id": ids, "storage_days": storage, "noise": noise})
    return target, x, traits


def test_planted_trait_effect_is_recovered_over_seeds():
    # truth: odds ratio exp(0.6) per SD of storage_days; noise has odds ratio 1.
    covered = noise_covered = 0
    for seed in range(5):
        target, x, traits = _make(seed)
        t = county_contrast(target, x, traits, n_boot=0, seed=seed).terms.set_index("term")
        covered += t.loc["storage_days", "or_lo"] <= np.exp(0.6) <= t.loc["storage_days", "or_hi"]
        noise_covered += t.loc["noise", "or_lo"] <= 1.0 <= t.loc["noise", "or_hi"]
        assert t.loc["storage_days", "or_lo"] > 1.0  # the effect is detected every time
    # 90 % intervals: at least 4 of 5 cover (fails by chance with probability ~8 %, but the
    # seeds are fixed, so the test is deterministic)
    assert covered >= 4 and noise_covered >= 4


def test_agrees_with_statsmodels_logit_and_scikit_learn():
    import statsmodels.api as sm
    from sklearn.linear_model import LogisticRegression

    target, x, traits = _make(7)
    res = county_contrast(target, x, traits, n_boot=0)
    t = res.terms.set_index("term")
    z = traits[["storage_days", "noise"]].to_numpy()
    z = (z - z.mean(axis=0)) / z.std(axis=0, ddof=1)
    design = np.column_stack([np.ones_like(x), x, np.repeat(z, 25, axis=0)])
    y = target.frame["level"].to_numpy()
    groups = pd.factorize(target.frame["county_id"])[0]
    # statsmodels' discrete Logit (a different code path from the GLM used inside)
    ref = sm.Logit(y, design).fit(disp=0, cov_type="cluster", cov_kwds={"groups": groups},
                                  use_t=True)
    np.testing.assert_allclose(np.log(t.loc[["storage_days", "noise"], "odds_ratio_per_sd"]),
                               ref.params[2:], rtol=1e-6)
    sd_x = np.std(x, ddof=1)
    np.testing.assert_allclose(np.log(t.loc["index", "odds_ratio_per_sd"]), ref.params[1] * sd_x,
                               rtol=1e-6)
    np.testing.assert_allclose(t["p_value"].to_numpy(), ref.pvalues[1:], rtol=1e-5)
    ci = ref.conf_int(alpha=0.10)
    np.testing.assert_allclose(np.log(t.loc[["storage_days", "noise"], ["or_lo", "or_hi"]]),
                               ci[2:], rtol=1e-6)
    # scikit-learn, unpenalised (C=inf per DESIGN.md): same maximum-likelihood point estimate;
    # lbfgs stops at its gradient tolerance, hence 1e-4
    sk = LogisticRegression(C=np.inf, tol=1e-10, max_iter=10_000).fit(design[:, 1:], y)
    np.testing.assert_allclose(sk.coef_[0, 1:], ref.params[2:], rtol=1e-4)


def test_ordinal_target_uses_level_at_least_one():
    target, x, traits = _make(3)
    frame = target.frame.copy()
    frame["level"] = frame["level"] * np.where(np.arange(len(frame)) % 2, 2, 1)  # 0, 1 or 2
    ordinal = Target(name="o", impact="o", kind="ordinal", grain="county_year", role="annual",
                     frame=frame, levels=("none", "some", "severe"))
    a = county_contrast(target, x, traits, n_boot=0).terms
    b = county_contrast(ordinal, x, traits, n_boot=0).terms
    np.testing.assert_allclose(a["odds_ratio_per_sd"], b["odds_ratio_per_sd"])


def test_poisson_interval_against_definition_and_table():
    obs = np.array([0, 1, 4, 10, 37])
    lo, hi = poisson_ratio_interval(obs, np.ones(5), ci=0.90)
    # exact (Garwood) limits: P(X >= O | lo) = P(X <= O | hi) = 0.05
    np.testing.assert_allclose(poisson.sf(obs[1:] - 1, lo[1:]), 0.05, rtol=1e-8)
    np.testing.assert_allclose(poisson.cdf(obs, hi), 0.05, rtol=1e-8)
    assert lo[0] == 0.0
    # from memory (standard tables of exact Poisson limits): O = 10, 95 %: 4.795 to 18.390;
    # O = 0, 95 % upper limit 3.689
    lo95, hi95 = poisson_ratio_interval(np.array([10, 0]), np.ones(2), ci=0.95)
    np.testing.assert_allclose([lo95[0], hi95[0], hi95[1]], [4.795, 18.390, 3.689], atol=5e-4)
    # dividing by E scales the interval
    lo2, hi2 = poisson_ratio_interval(obs, np.full(5, 2.0), ci=0.90)
    np.testing.assert_allclose(hi2, hi / 2)


def test_county_with_planted_excess_stands_out():
    extra = np.zeros(40)
    extra[5] = 2.0  # county c05 suffers far more than its index values explain
    target, x, traits = _make(11, extra=extra)
    ex = county_contrast(target, x, traits, n_boot=0).county_excess.set_index("county_id")
    assert ex.loc["c05", "ratio_lo"] > 1.0
    assert ex["events"].sum() == target.frame["level"].sum()
    # the index-only logistic fit reproduces the total: sum of fitted p = events (score
    # equation of the intercept)
    assert ex["expected_events"].sum() == pytest.approx(ex["events"].sum(), rel=1e-8)


def test_traits_improve_out_of_sample_brier_only_when_they_matter():
    target, x, traits = _make(2, gamma=1.0)
    s = county_contrast(target, x, traits, n_boot=200, seed=1).skill
    assert s["brier_change"] < 0 and s["brier_change_hi"] < 0
    target, x, traits = _make(2, gamma=0.0)
    s0 = county_contrast(target, x, traits, n_boot=200, seed=1).skill
    assert s0["brier_change_lo"] < 0 < s0["brier_change_hi"] or s0["brier_change"] > 0


def test_matched_pairs_find_same_exposure_different_impacts():
    # four counties share one index series; two with little storage had impacts, two did not
    rng = np.random.default_rng(0)
    years = np.arange(2001, 2031)
    xs = rng.standard_normal(len(years))
    ids = ["a1", "a2", "b1", "b2", "c1", "c2"]
    rows, x = [], []
    for cid in ids:
        xc = xs if cid[0] in "ab" else xs + 1.5  # c counties: wetter exposure
        p = 0.6 if cid[0] == "a" else 0.1
        lev = (rng.random(len(years)) < p).astype(int)
        rows.append(pd.DataFrame({"unit_id": cid, "county_id": cid, "region": "r",
                                  "year": years, "season": 1, "level": lev}))
        x.append(xc)
    frame = pd.concat(rows, ignore_index=True)
    frame["time"] = pd.to_datetime(frame["year"].astype(str) + "-01-01")
    target = Target(name="t", impact="t", kind="binary", grain="county_year", role="annual",
                    frame=frame, levels=("no", "yes"))
    traits = pd.DataFrame({"county_id": ids, "storage_days": [10, 12, 90, 95, 50, 55],
                           "pasture_share": [0.5, 0.4, 0.45, 0.5, 0.3, 0.6]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ContrastWarning)  # 6 clusters
        pairs = county_contrast(target, np.concatenate(x), traits, n_boot=0, n_pairs=4).pairs
    top = pairs.iloc[0]
    assert top["exposure_gap"] == 0.0
    assert top["county_a"][0] == "a" and top["county_b"][0] == "b"
    assert top["largest_trait_gap"] == "storage_days"
    assert top["gap_storage_days_sd"] < 0  # the hard-hit county has less storage
    assert not ((pairs["county_a"].str[0] == "c") ^ (pairs["county_b"].str[0] == "c")).any()


def test_warnings_for_left_out_rows_and_few_clusters():
    target, x, traits = _make(4)
    x = x.copy()
    x[:3] = np.nan
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = county_contrast(target, x, traits.iloc[1:], n_boot=0)
    messages = [str(w.message) for w in caught if issubclass(w.category, ContrastWarning)]
    assert any("3 rows without a feature value" in m for m in messages)
    assert any("22 rows of 1 county without complete traits" in m for m in messages)
    assert res.provenance["warnings"] == messages
    assert res.provenance["rows_used"] == len(x) - 25  # county c00 has no traits
    small, xs, tr = _make(4, n_counties=6)
    with pytest.warns(ContrastWarning, match="only 6 county clusters"):
        county_contrast(small, xs, tr, n_boot=0)


@pytest.mark.parametrize(
    "change, match",
    [
        ({"link": "probit"}, "link must be 'logit'"),
        ({"cluster": "region"}, "cluster must be"),
        ({"x": np.zeros(3)}, "x has shape"),
        ({"traits": pd.DataFrame({"id": ["c00"], "v": [1.0]})}, "county_id column"),
        ({"traits": pd.DataFrame({"county_id": ["c00"], "kind": ["dry"]})}, "no numeric column"),
        ({"ci": 1.5}, "ci must be"),
        ({"grain": "region_month"}, "county grain"),
    ],
)
def test_errors(change, match):
    target, x, traits = _make(0, n_counties=12)
    if "grain" in change:
        target = Target(name="p", impact="p", kind="binary", grain=change.pop("grain"),
                        role="monthly", frame=target.frame, levels=("no", "yes"))
    x = change.pop("x", x)
    traits = change.pop("traits", traits)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ContrastWarning)
        with pytest.raises(ContrastError, match=match):
            county_contrast(target, x, traits, **change)


def test_year_clusters_change_intervals_not_estimates():
    target, x, traits = _make(9)
    by_county = county_contrast(target, x, traits, n_boot=0).terms
    by_year = county_contrast(target, x, traits, n_boot=0, cluster="year").terms
    np.testing.assert_allclose(by_county["odds_ratio_per_sd"], by_year["odds_ratio_per_sd"])
    assert not np.allclose(by_county["or_lo"], by_year["or_lo"])
