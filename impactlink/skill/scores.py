"""Verification scores for probability forecasts of impacts, one function per score.

Every score takes the observations first, the forecast second, then keyword-only options
(``sample_weight`` everywhere). Binary scores take ``y_true`` in {0, 1} and ``y_prob`` the
forecast chance of the event; ordinal scores take ``y_true`` in 0..K-1 and ``y_prob`` of
shape (n, K). scikit-learn is used where it has the score (Brier score, log loss, ROC
area); the ranked probability score, skill scores, reliability table, calibration slope and
the 2x2 contingency scores are written here and tested against hand-worked and published
values (``tests/skill/test_scores.py``).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd

from impactlink.errors import SkillError

__all__ = [
    "brier_score",
    "brier_skill_score",
    "ranked_probability_score",
    "rps_skill_score",
    "log_loss",
    "roc_auc",
    "reliability_table",
    "calibration_slope",
    "contingency_scores",
    "ContingencyScores",
]


def _binary_inputs(y_true, y_prob, sample_weight, name):
    y = np.asarray(y_true, dtype=float).ravel()
    p = np.asarray(y_prob, dtype=float).ravel()
    if y.shape != p.shape:
        raise SkillError(
            f"{name}: inconsistent numbers of samples: y_true {y.shape[0]}, y_prob {p.shape[0]}"
        )
    if not np.isin(y, (0.0, 1.0)).all():
        raise SkillError(f"{name}: y_true must hold 0/1 outcomes; found {np.unique(y)[:5]}")
    if ((p < 0) | (p > 1)).any() or not np.isfinite(p).all():
        raise SkillError(f"{name}: y_prob must be probabilities in [0, 1]")
    w = np.ones_like(y) if sample_weight is None else np.asarray(sample_weight, float).ravel()
    if w.shape != y.shape:
        raise SkillError(f"{name}: sample_weight has {w.shape[0]} values; expected {y.shape[0]}")
    return y, p, w


def _ordinal_inputs(y_true, y_prob, sample_weight, name):
    y = np.asarray(y_true).ravel()
    P = np.asarray(y_prob, dtype=float)
    if P.ndim != 2 or P.shape[0] != y.shape[0]:
        raise SkillError(
            f"{name}: y_prob must have shape (n, K) with n = {y.shape[0]}; got {P.shape}"
        )
    K = P.shape[1]
    if np.any(y != np.round(y)) or (y < 0).any() or (y >= K).any():
        raise SkillError(f"{name}: y_true must hold integer levels 0..{K - 1}")
    if not np.allclose(P.sum(1), 1.0, atol=1e-6):
        raise SkillError(f"{name}: each row of y_prob must sum to 1")
    w = np.ones(y.shape[0]) if sample_weight is None else np.asarray(sample_weight, float).ravel()
    if w.shape != y.shape:
        raise SkillError(f"{name}: sample_weight has {w.shape[0]} values; expected {y.shape[0]}")
    return y.astype(int), P, w


# --------------------------------------------------------------------------- probability scores
def brier_score(y_true, y_prob, *, sample_weight=None) -> float:
    """Brier score of probability forecasts of a binary event. Lower is better.

    Range [0, 1]; perfect 0; a constant forecast of the base rate ``b`` scores
    ``b (1 - b)`` (the no-skill reference of :func:`brier_skill_score`).

    Notes
    -----
    :math:`BS = \\sum_i w_i (p_i - o_i)^2 / \\sum_i w_i` (Brier 1950; Wilks 2011, eq. 8.36).
    Computed by :func:`sklearn.metrics.brier_score_loss`.

    References
    ----------
    Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
    Monthly Weather Review 78(1), 1-3.
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed. Academic Press.
    """
    from sklearn.metrics import brier_score_loss

    y, p, w = _binary_inputs(y_true, y_prob, sample_weight, "brier_score")
    return float(brier_score_loss(y, p, sample_weight=w, pos_label=1.0))


def brier_skill_score(y_true, y_prob, *, reference, sample_weight=None) -> float:
    """Brier skill score against a reference forecast. Higher is better.

    Range (-inf, 1]; perfect 1; no skill (as good as the reference) 0.

    Parameters
    ----------
    reference : float or array
        The reference forecast: the climatological base rate of the training data (a
        scalar) or one reference probability per row (e.g. out-of-fold base rates).

    Notes
    -----
    :math:`BSS = 1 - BS / BS_{ref}` (Wilks 2011, eq. 8.37).
    """
    y, p, w = _binary_inputs(y_true, y_prob, sample_weight, "brier_skill_score")
    ref = np.broadcast_to(np.asarray(reference, float), y.shape)
    return _skill(brier_score(y, p, sample_weight=w), brier_score(y, ref, sample_weight=w),
                  "brier_skill_score: the reference forecast is perfect (BS_ref = 0); the "
                  "skill score is undefined")


def ranked_probability_score(y_true, y_prob, *, sample_weight=None) -> float:
    """Ranked probability score of forecasts of an ordinal outcome. Lower is better.

    Range [0, K-1]; perfect 0. For K = 2 it equals the Brier score of the upper level.

    Notes
    -----
    :math:`RPS = \\sum_{m=1}^{K} (Y_m - O_m)^2` with :math:`Y_m`, :math:`O_m` the cumulative
    forecast and observed probabilities of levels 0..m-1 (Epstein 1969; Murphy 1971;
    Wilks 2011, eq. 8.52), averaged over rows with ``sample_weight``. Not normalised by
    K - 1 (the last term is always zero).

    References
    ----------
    Epstein, E. S. (1969). A scoring system for probability forecasts of ranked categories.
    Journal of Applied Meteorology 8(6), 985-987.
    Murphy, A. H. (1971). A note on the ranked probability score. Journal of Applied
    Meteorology 10(1), 155-156.
    """
    y, P, w = _ordinal_inputs(y_true, y_prob, sample_weight, "ranked_probability_score")
    return float((w * rps_per_row(P, y)).sum() / w.sum())


def rps_per_row(P: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Ranked probability score of each row (the one home of the RPS formula).

    Parameters
    ----------
    P : ndarray, shape (n, K)
        Forecast probability of each level 0..K-1 (rows sum to 1).
    level : ndarray of int, shape (n,)
        Observed level of each row.

    Returns
    -------
    ndarray, shape (n,)
        :math:`\\sum_{m<K-1} (C_m - [y \\le m])^2` with :math:`C_m` the cumulative forecast
        probability of levels 0..m (Epstein 1969; Wilks 2011, eq. 8.52). Lower is better.

    Examples
    --------
    >>> rps_per_row(np.array([[0.2, 0.8], [0.5, 0.5]]), np.array([1, 0])).round(2).tolist()
    [0.04, 0.25]
    """
    P = np.asarray(P, dtype=float)
    K = P.shape[1]
    cum = np.cumsum(P, axis=1)[:, : K - 1]
    obs = (np.asarray(level)[:, None] <= np.arange(K - 1)[None, :]).astype(float)
    return ((cum - obs) ** 2).sum(1)


def rps_skill_score(y_true, y_prob, *, reference, sample_weight=None) -> float:
    """Ranked probability skill score against a reference forecast. Higher is better.

    Range (-inf, 1]; perfect 1; no skill 0.

    Parameters
    ----------
    reference : array, shape (K,) or (n, K)
        Reference level probabilities (climatology of the training data).

    Notes
    -----
    :math:`RPSS = 1 - RPS / RPS_{ref}` (Wilks 2011, eq. 8.53).
    """
    y, P, w = _ordinal_inputs(y_true, y_prob, sample_weight, "rps_skill_score")
    ref = np.broadcast_to(np.asarray(reference, float), P.shape)
    return _skill(ranked_probability_score(y, P, sample_weight=w),
                  ranked_probability_score(y, ref, sample_weight=w),
                  "rps_skill_score: the reference forecast is perfect (RPS_ref = 0)")


def _skill(score: float, score_ref: float, perfect_reference: str) -> float:
    """Skill score ``1 - score / score_ref`` of a score whose perfect value is 0 (the form of
    Wilks 2011, eqs. 8.37 and 8.53); ``perfect_reference`` is the error message when
    ``score_ref`` is 0."""
    if score_ref == 0:
        raise SkillError(perfect_reference)
    return 1.0 - score / score_ref


def log_loss(y_true, y_prob, *, sample_weight=None) -> float:
    """Mean negative log-likelihood (ignorance, in nats) of the observed outcome. Lower is better.

    Range [0, inf); perfect 0. ``y_prob`` is the event chance (binary) or (n, K) level
    probabilities (ordinal). Probabilities are clipped to [1e-15, 1 - 1e-15].

    Notes
    -----
    :math:`LL = -\\sum_i w_i \\log p_i(o_i) / \\sum_i w_i` (Good 1952). Computed by
    :func:`sklearn.metrics.log_loss`.

    References
    ----------
    Good, I. J. (1952). Rational decisions. Journal of the Royal Statistical Society B 14(1),
    107-114.
    """
    from sklearn.metrics import log_loss as _sk

    P = np.asarray(y_prob, float)
    if P.ndim == 1:
        y, p, w = _binary_inputs(y_true, P, sample_weight, "log_loss")
        P = np.column_stack([1 - p, p])
        y = y.astype(int)
    else:
        y, P, w = _ordinal_inputs(y_true, P, sample_weight, "log_loss")
    P = np.clip(P, 1e-15, 1 - 1e-15)
    P = P / P.sum(1, keepdims=True)
    return float(_sk(y, P, sample_weight=w, labels=np.arange(P.shape[1])))


def roc_auc(y_true, y_prob, *, sample_weight=None) -> float:
    """Area under the ROC curve (discrimination). Higher is better.

    Range [0, 1]; perfect 1; no skill 0.5. Undefined (NaN) when only one outcome occurs.

    Notes
    -----
    The probability that a randomly chosen event row has a higher forecast than a
    randomly chosen non-event row, ties counting one half (Mason & Graham 2002). Computed
    by :func:`sklearn.metrics.roc_auc_score`.

    References
    ----------
    Mason, S. J., Graham, N. E. (2002). Areas beneath the relative operating characteristics
    (ROC) and relative operating levels (ROL) curves. Quarterly Journal of the Royal
    Meteorological Society 128(584), 2145-2166.
    """
    from sklearn.metrics import roc_auc_score

    y, p, w = _binary_inputs(y_true, y_prob, sample_weight, "roc_auc")
    pos = w[y == 1].sum()
    neg = w[y == 0].sum()
    if pos == 0 or neg == 0:
        return float("nan")
    return float(roc_auc_score(y, p, sample_weight=w))


def reliability_table(y_true, y_prob, *, n_bins: int = 10, sample_weight=None) -> pd.DataFrame:
    """Binned reliability (calibration) table of event forecasts.

    Returns one row per non-empty bin of equal width on [0, 1]: ``bin``, ``p_lo``, ``p_hi``,
    ``mean_forecast``, ``observed_frequency``, ``n`` (weight in the bin), ``events``.
    A perfectly reliable forecast has ``observed_frequency == mean_forecast`` in every
    bin (Wilks 2011, section 8.4.4). Bins follow :func:`sklearn.calibration.calibration_curve`
    with ``strategy="uniform"`` (a forecast of exactly 1 goes in the top bin).
    """
    y, p, w = _binary_inputs(y_true, y_prob, sample_weight, "reliability_table")
    if int(n_bins) < 1:
        raise SkillError(f"reliability_table: n_bins must be >= 1; got {n_bins}")
    edges = np.linspace(0.0, 1.0, int(n_bins) + 1)
    b = np.clip(np.searchsorted(edges[1:-1], p, side="right"), 0, n_bins - 1)
    n = np.bincount(b, weights=w, minlength=n_bins)
    fp = np.bincount(b, weights=w * p, minlength=n_bins)
    ev = np.bincount(b, weights=w * y, minlength=n_bins)
    keep = n > 0
    idx = np.flatnonzero(keep)
    return pd.DataFrame({
        "bin": idx,
        "p_lo": edges[idx],
        "p_hi": edges[idx + 1],
        "mean_forecast": fp[keep] / n[keep],
        "observed_frequency": ev[keep] / n[keep],
        "n": n[keep],
        "events": ev[keep],
    })


def calibration_slope(y_true, y_prob, *, sample_weight=None) -> float:
    """Calibration slope: the slope of a logistic regression of outcome on logit(forecast).

    Range (-inf, inf); perfect 1; below 1 means forecasts are too extreme (over-fitted),
    above 1 too timid; 0 means no discrimination.

    Notes
    -----
    Fits :math:`\\mathrm{logit}\\,P(o=1) = a + b\\,\\mathrm{logit}(p)` and returns :math:`b`
    (Cox 1958; Van Calster et al. 2016). Forecasts are clipped to [1e-6, 1 - 1e-6].

    References
    ----------
    Cox, D. R. (1958). Two further applications of a model for binary regression.
    Biometrika 45(3/4), 562-565.
    Van Calster, B. et al. (2016). A calibration hierarchy for risk models was defined: from
    utopia to empirical data. Journal of Clinical Epidemiology 74, 167-176.
    """
    from impactlink.models.batch import fit_logistic_batch

    y, p, w = _binary_inputs(y_true, y_prob, sample_weight, "calibration_slope")
    lp = np.log(np.clip(p, 1e-6, 1 - 1e-6) / (1 - np.clip(p, 1e-6, 1 - 1e-6)))
    if np.ptp(lp[w > 0]) == 0 or w[y == 1].sum() == 0 or w[y == 0].sum() == 0:
        return float("nan")
    X = np.column_stack([np.ones_like(lp), lp])[None]
    fit = fit_logistic_batch(X, y[None], w[None], ridge=0.0, max_iter=100)
    return float(fit.coef[0, 1])


# --------------------------------------------------------------------------- 2x2 table
@dataclass(frozen=True)
class ContingencyScores:
    """Scores of a yes/no forecast from its 2x2 contingency table (the one home of 2x2 scores).

    Attributes (Wilks 2011, section 8.2; Jolliffe & Stephenson 2012, chapter 3)
    ----------
    hits, false_alarms, misses, correct_negatives : float
        a, b, c, d of the table.
    proportion_correct : (a + d) / n. Higher is better; perfect 1.
    hit_rate : a / (a + c). Synonym: probability of detection (POD). Higher is better; perfect 1.
    false_alarm_ratio : b / (a + b), the share of "yes" forecasts that were wrong. Lower is
        better; perfect 0. Not the false alarm rate.
    false_alarm_rate : b / (b + d), the share of non-events forecast "yes". Synonym:
        probability of false detection (POFD). Lower is better; perfect 0.
    bias : (a + b) / (a + c), forecast yeses per observed yes; unbiased 1.
    critical_success_index : a / (a + b + c). Synonym: threat score. Higher is better; perfect 1.
    heidke_skill_score : proportion correct beyond chance; no skill 0, perfect 1.
    peirce_skill_score : hit rate - false alarm RATE (b / (b + d)); synonyms: Hanssen-Kuipers
        discriminant, true skill statistic. No skill 0, perfect 1.
    gilbert_skill_score : threat score beyond chance (equitable threat score); no skill 0.

    :meth:`frame_from_counts` computes the same fields for arrays of counts (NaN where a
    denominator is 0, including empty tables).

    References
    ----------
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed., section 8.2.
    Jolliffe, I. T., Stephenson, D. B. (2012). Forecast Verification, 2nd ed. Wiley.
    Peirce, C. S. (1884). The numerical measure of the success of predictions. Science 4(93),
    453-454.
    """

    hits: float
    false_alarms: float
    misses: float
    correct_negatives: float
    proportion_correct: float
    hit_rate: float
    false_alarm_ratio: float
    false_alarm_rate: float
    bias: float
    critical_success_index: float
    heidke_skill_score: float
    peirce_skill_score: float
    gilbert_skill_score: float

    @classmethod
    def from_counts(cls, hits, false_alarms, misses, correct_negatives) -> ContingencyScores:
        """Scores of one table; raises :class:`SkillError` for negative counts or n = 0."""
        a, b, c, d = (float(v) for v in (hits, false_alarms, misses, correct_negatives))
        if min(a, b, c, d) < 0:
            raise SkillError("contingency_scores: counts must be >= 0")
        if a + b + c + d == 0:
            raise SkillError("contingency_scores: the table is empty (n = 0)")
        return cls(**{k: float(v) for k, v in cls._formulas(a, b, c, d).items()})

    @classmethod
    def frame_from_counts(cls, hits, false_alarms, misses, correct_negatives) -> pd.DataFrame:
        """Every field for arrays of counts (broadcast together), one row per table.

        Returns a frame whose columns are the field names, in order; a score whose
        denominator is 0 (an empty table, no events, no "yes" forecasts) is NaN.

        Examples
        --------
        >>> f = ContingencyScores.frame_from_counts([28, 0], [72, 0], [23, 51], [2680, 2752])
        >>> f["peirce_skill_score"].round(3).tolist()
        [0.523, 0.0]
        """
        arrs = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in
                                     (hits, false_alarms, misses, correct_negatives)))
        a, b, c, d = (x.ravel() for x in arrs)
        if (np.minimum(np.minimum(a, b), np.minimum(c, d)) < 0).any():
            raise SkillError("contingency_scores: counts must be >= 0")
        return pd.DataFrame(cls._formulas(a, b, c, d))

    @staticmethod
    def _formulas(a, b, c, d) -> dict:
        """Wilks (2011) eqs. 8.16 (Heidke), 8.18 (Peirce), 8.20 (Gilbert); NaN on 0/0."""
        a, b, c, d = (np.asarray(v, dtype=np.float64) for v in (a, b, c, d))
        n = a + b + c + d

        def div(x, y):
            with np.errstate(invalid="ignore", divide="ignore"):
                return np.where(y != 0, x / np.where(y != 0, y, 1.0), np.nan)

        a_random = div((a + b) * (a + c), n)
        return {
            "hits": a, "false_alarms": b, "misses": c, "correct_negatives": d,
            "proportion_correct": div(a + d, n),
            "hit_rate": div(a, a + c),
            "false_alarm_ratio": div(b, a + b),
            "false_alarm_rate": div(b, b + d),
            "bias": div(a + b, a + c),
            "critical_success_index": div(a, a + b + c),
            "heidke_skill_score": div(2 * (a * d - b * c), (a + c) * (c + d) + (a + b) * (b + d)),
            "peirce_skill_score": div(a * d - b * c, (a + c) * (b + d)),
            "gilbert_skill_score": div(a - a_random, a + b + c - a_random),
        }

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame([asdict(self)])


def contingency_scores(y_true, y_forecast, *, sample_weight=None) -> ContingencyScores:
    """Categorical scores of yes/no forecasts (hit rate, false alarms, Peirce, Heidke, ...).

    Parameters
    ----------
    y_true, y_forecast : array of {0, 1}
        Observed and forecast event.
    sample_weight : array, optional
        Weight (count) of each row.

    Returns
    -------
    ContingencyScores
        See the class for every score's range, no-skill and perfect value.

    Notes
    -----
    Heidke: :math:`2(ad - bc)/[(a+c)(c+d) + (a+b)(b+d)]` (Wilks 2011, eq. 8.16); Peirce:
    :math:`(ad - bc)/[(a+c)(b+d)]` (eq. 8.18); Gilbert: :math:`(a - a_r)/(a + b + c - a_r)`,
    :math:`a_r = (a+b)(a+c)/n` (eq. 8.20).
    """
    y, f, w = _binary_inputs(y_true, y_forecast, sample_weight, "contingency_scores")
    if not np.isin(f, (0.0, 1.0)).all():
        raise SkillError("contingency_scores: y_forecast must hold 0/1 (yes/no) forecasts")
    a = w[(y == 1) & (f == 1)].sum()
    b = w[(y == 0) & (f == 1)].sum()
    c = w[(y == 1) & (f == 0)].sum()
    d = w[(y == 0) & (f == 0)].sum()
    return ContingencyScores.from_counts(a, b, c, d)
