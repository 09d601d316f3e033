"""Threshold tuning: grid search, uniform vs local thresholds, honest leave-one-year-out skill."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from impactlink.errors import TriggerError
from impactlink.execution import thread_map
from impactlink.triggers.kernels import year_sums
from impactlink.triggers.replay import _check_persistence, _check_values, _replay
from impactlink.triggers.scores import (
    COUNT_NAMES,
    _labels,
    _ratio,
    _score_table,
    check_levels,
    impact_arrays,
    week_indicators,
    weekly_scores,
)

__all__ = ["TuningResult", "tune_thresholds", "DEFAULT_CANDIDATES"]

Objective = Literal["peirce", "csi", "target_far"]
Scope = Literal["uniform", "county", "region"]
IndexScale = Literal["normal", "percentile", "none"]

#: Default candidate thresholds for a standardized index (z units), -2.5 to 0.0 by 0.1.
DEFAULT_CANDIDATES = np.round(np.arange(-2.5, 0.01, 0.1), 10)

#: Upper bound on the number of (week x candidate x county) cells held at once while counting.
_MAX_CELLS = 8_000_000


@dataclass(frozen=True)
class TuningResult:
    """Thresholds chosen by :func:`tune_thresholds` and their in-sample and held-out scores.

    Attributes
    ----------
    scope, objective : str
        Settings used.
    candidates : ndarray, shape (candidates,)
        Thresholds searched (index units).
    thresholds : ndarray, shape (counties,)
        Threshold chosen for each county from all years (a uniform scope repeats one value).
    scores : pandas.DataFrame
        In-sample counts and scores per county and pooled (``county`` = "all"), at the chosen
        thresholds (see :class:`~impactlink.triggers.scores.TriggerScores` for the columns).
    cv_scores : pandas.DataFrame or None
        Same columns, from held-out years only: each year scored with thresholds chosen
        without it (leave-one-year-out). None when ``cv="none"``.
    fold_thresholds : pandas.DataFrame or None
        ``year, county, threshold``: the threshold each fold chose.
    curve : pandas.DataFrame
        Pooled in-sample ``threshold, peirce_skill, csi, hit_rate, false_alarm_ratio,
        below_share`` of every candidate applied uniformly (for the report's tuning plot).
    settings : dict
        entry_weeks, exit_weeks, exit_offset, window_weeks, min_level, shrink_events,
        max_false_alarm_ratio, cv, years.
    """

    scope: str
    objective: str
    candidates: np.ndarray
    thresholds: np.ndarray
    scores: pd.DataFrame
    cv_scores: pd.DataFrame | None
    fold_thresholds: pd.DataFrame | None
    curve: pd.DataFrame
    settings: dict


def tune_thresholds(
    index_values: np.ndarray,
    impact_level: np.ndarray,
    *,
    weeks: pd.DatetimeIndex | None = None,
    candidates: np.ndarray = DEFAULT_CANDIDATES,
    objective: Objective = "peirce",
    max_false_alarm_ratio: float = 0.5,
    scope: Scope = "uniform",
    regions: np.ndarray | list | None = None,
    years: np.ndarray | None = None,
    cv: Literal["leave_one_year_out", "none"] = "leave_one_year_out",
    entry_weeks: int = 2,
    exit_weeks: int = 4,
    exit_offset: float = 0.0,
    window_weeks: int = 8,
    min_level: int = 1,
    shrink_events: float = 5.0,
    county_ids: list[str] | tuple[str, ...] | None = None,
    seed: int = 0,
    jobs: int = 1,
) -> TuningResult:
    """Choose trigger thresholds by grid search and score them on years they never saw.

    Parameters
    ----------
    index_values : ndarray, shape (weeks, counties)
        Index values (index units; NaN where undefined).
    impact_level : ndarray, shape (weeks, counties)
        Impact level per week; NaN or -1 where unknown (excluded from every count).
    weeks : pandas.DatetimeIndex, optional
        Mondays of the rows; gives the fold years (ISO year) when ``years`` is not given.
    candidates : ndarray, default -2.5 to 0.0 by 0.1
        Thresholds searched (index units), sorted ascending by this function.
    objective : {"peirce", "csi", "target_far"}
        "peirce": maximise the weekly Peirce skill score; "csi": maximise the weekly critical
        success index; "target_far": maximise the episode hit rate among thresholds whose
        false-alarm ratio is at most ``max_false_alarm_ratio`` (if none qualifies, the lowest
        false-alarm ratio).
    max_false_alarm_ratio : float, default 0.5
        Used by ``objective="target_far"``.
    scope : {"uniform", "county", "region"}
        One statewide threshold; one per county; or one per region (needs ``regions``).
    regions : array of str, shape (counties,), optional
        Region of each county. For ``scope="county"`` it sets the group each county is shrunk
        toward (default: all counties).
    years : ndarray of int, shape (weeks,), optional
        Fold label of each week (default: ISO year of ``weeks``).
    cv : {"leave_one_year_out", "none"}
        Out-of-sample evaluation; needs at least 3 years.
    entry_weeks, exit_weeks : int
        Persistence rules of :func:`replay_trigger`.
    exit_offset : float, default 0.0
        Hysteresis: each candidate's exit threshold is the candidate plus this (index units,
        >= 0).
    window_weeks, min_level : int
        Episode matching window and impact level (see :func:`evaluate_trigger`).
    shrink_events : float, default 5.0
        ``scope="county"`` only: credibility weight of the region's threshold. The county's own
        best threshold gets weight :math:`Z = E/(E + s)` (E its impact episodes in the
        training years, s = ``shrink_events``) and its region's (or, without ``regions``, the
        statewide) best threshold :math:`1 - Z`; the blend is rounded to the nearest candidate.
        A county with few events thus takes (nearly) its region's threshold; one with many
        keeps its own. 0 = no shrinkage.
    county_ids : sequence of str, optional
        Labels for the result frames.
    seed : int, default 0
        Accepted for a uniform stage signature; the grid search and leave-one-year-out folds are
        deterministic (ties go to the lowest, i.e. most conservative, threshold).
    jobs : int, default 1
        Threads for the replay and counting of every candidate (blocks of counties); the counts,
        and so every result, are the same for any ``jobs``.

    Returns
    -------
    TuningResult

    Raises
    ------
    TriggerError
        On bad shapes or options, fewer than 3 years with ``cv="leave_one_year_out"``, or no
        known impact weeks at all.

    Notes
    -----
    Every candidate is replayed at once (arrays of weeks x candidates x counties). The eight
    counts of :data:`~impactlink.triggers.scores.COUNT_NAMES` are summed per year, so a training
    set is "all years minus one" by subtraction and every fold's search is a lookup. An impact
    episode counts in the year of its onset; an activation in the year it starts. The replay
    itself runs over the whole record (the trigger state in a held-out year depends on the index
    before it, as it would in operation), but thresholds are chosen only from training-year
    impacts. Picking a maximum from many candidates flatters in-sample scores; the held-out
    ``cv_scores`` are the honest ones (Wilks 2011, section 7.4; Hastie et al. 2009, 7.10).

    The county shrinkage is a credibility-weighted blend (Buhlmann 1967),
    :math:`\\theta_c = Z\\hat\\theta_c + (1-Z)\\hat\\theta_r` with :math:`Z = E_c/(E_c+s)`;
    ``s`` plays the role of Buhlmann's ratio of within- to between-county variance and is a
    setting, not an estimate. Shrinkage trades a little bias for much less variance in counties
    with few events; the held-out scores show whether that pays off.

    References
    ----------
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed., Academic
    Press.
    Hastie, T., Tibshirani, R., & Friedman, J. (2009). The Elements of Statistical Learning,
    2nd ed., Springer. https://doi.org/10.1007/978-0-387-84858-7
    Buhlmann, H. (1967). Experience rating and credibility. ASTIN Bulletin, 4(3), 199-207.
    https://doi.org/10.1017/S0515036100008989
    """
    return _tune_scopes(
        index_values, impact_level, (scope,), weeks=weeks, candidates=candidates,
        objective=objective, max_false_alarm_ratio=max_false_alarm_ratio, regions=regions,
        years=years, cv=cv, entry_weeks=entry_weeks, exit_weeks=exit_weeks,
        exit_offset=exit_offset, window_weeks=window_weeks, min_level=min_level,
        shrink_events=shrink_events, county_ids=county_ids, jobs=jobs,
    )[0]


def _tune_scopes(
    index_values, impact_level, scopes, *, weeks=None, candidates=DEFAULT_CANDIDATES,
    objective="peirce", max_false_alarm_ratio=0.5, regions=None, years=None,
    cv="leave_one_year_out", entry_weeks=2, exit_weeks=4, exit_offset=0.0, window_weeks=8,
    min_level=1, shrink_events=5.0, county_ids=None, seed=0, jobs=1,
) -> list[TuningResult]:
    """:func:`tune_thresholds` for several scopes at once: the candidates are replayed and
    counted once (the counts do not depend on the scope), then each scope is searched."""
    values = _check_values(index_values, "index_values")
    n_weeks, n_counties = values.shape
    lev = np.asarray(impact_level)
    if lev.shape != values.shape:
        raise TriggerError(
            f"impact_level has shape {lev.shape}; expected {values.shape} (weeks, counties) like "
            "index_values."
        )
    cands = _check_candidates(candidates)
    _check_choice(objective, ("peirce", "csi", "target_far"), "objective")
    for scope in scopes:
        _check_choice(scope, ("uniform", "county", "region"), "scope")
    _check_choice(cv, ("leave_one_year_out", "none"), "cv")
    entry_weeks = _check_persistence(entry_weeks, "entry_weeks")
    exit_weeks = _check_persistence(exit_weeks, "exit_weeks")
    if not np.isfinite(exit_offset) or exit_offset < 0:
        raise TriggerError(
            f"exit_offset must be >= 0 (exit threshold at or above the entry threshold); got "
            f"{exit_offset!r}."
        )
    check_levels(min_level, window_weeks)
    if not 0.0 <= float(max_false_alarm_ratio) <= 1.0:
        raise TriggerError(
            f"max_false_alarm_ratio must be between 0 and 1; got {max_false_alarm_ratio!r}."
        )
    if not np.isfinite(shrink_events) or shrink_events < 0:
        raise TriggerError(f"shrink_events must be >= 0; got {shrink_events!r}.")
    group_codes = [_region_codes(regions, n_counties, required=scope == "region")
                   for scope in scopes]
    year_labels = _year_labels(years, weeks, n_weeks, needed=cv != "none")
    labels = _labels(county_ids, n_counties)

    impact, known = impact_arrays(lev, int(min_level))
    if not known.any():
        raise TriggerError(
            "impact_level has no known week (all NaN or -1); check the impact record's coverage."
        )
    uniq_years, year_code = np.unique(year_labels, return_inverse=True)
    if cv != "none" and len(uniq_years) < 3:
        raise TriggerError(
            f"leave-one-year-out needs at least 3 years; found {len(uniq_years)}. Use cv='none' "
            "or a longer record."
        )
    counts = _year_counts(
        values, impact, known, cands, year_code, len(uniq_years),
        entry_weeks, exit_weeks, float(exit_offset), int(window_weeks), jobs=jobs,
    )
    total = {k: v.sum(axis=0) for k, v in counts.items()}
    curve = _curve(total, cands, values)
    return [_tune_one(counts, total, curve.copy(), cands, uniq_years, labels, scope, group_of,
                      objective=objective, max_false_alarm_ratio=max_false_alarm_ratio, cv=cv,
                      entry_weeks=entry_weeks, exit_weeks=exit_weeks, exit_offset=exit_offset,
                      window_weeks=window_weeks, min_level=min_level,
                      shrink_events=shrink_events)
            for scope, group_of in zip(scopes, group_codes, strict=True)]


def _tune_one(counts, total, curve, cands, uniq_years, labels, scope, group_of, *, objective,
              max_false_alarm_ratio, cv, entry_weeks, exit_weeks, exit_offset, window_weeks,
              min_level, shrink_events) -> TuningResult:
    """The search of one scope from the year counts of every candidate."""
    n_counties = len(labels)
    choose = _Chooser(cands, objective, float(max_false_alarm_ratio), scope, group_of, shrink_events)

    k_all = choose(total)
    thresholds = cands[k_all]
    scores = _score_table(_pick(total, k_all), labels)

    cv_scores = fold_thr = None
    if cv != "none":
        held = {k: np.zeros(n_counties, dtype=np.int64) for k in COUNT_NAMES}
        rows = []
        # one iteration per held-out year (tens): each is a few array lookups over all counties
        for y, year in enumerate(uniq_years):
            train = {k: total[k] - counts[k][y] for k in COUNT_NAMES}
            k_fold = choose(train)
            got = _pick({k: counts[k][y] for k in COUNT_NAMES}, k_fold)
            for k in COUNT_NAMES:
                held[k] += got[k]
            rows.append(pd.DataFrame({"year": year, "county": labels, "threshold": cands[k_fold]}))
        cv_scores = _score_table(held, labels)
        fold_thr = pd.concat(rows, ignore_index=True)

    settings = {
        "entry_weeks": entry_weeks,
        "exit_weeks": exit_weeks,
        "exit_offset": float(exit_offset),
        "window_weeks": int(window_weeks),
        "min_level": int(min_level),
        "shrink_events": float(shrink_events),
        "max_false_alarm_ratio": float(max_false_alarm_ratio),
        "cv": cv,
        "years": [int(y) if np.issubdtype(type(y), np.integer) else y for y in uniq_years],
    }
    return TuningResult(
        scope=scope,
        objective=objective,
        candidates=cands,
        thresholds=thresholds,
        scores=scores,
        cv_scores=cv_scores,
        fold_thresholds=fold_thr,
        curve=curve,
        settings=settings,
    )


# --------------------------------------------------------------------------- private steps
def _year_counts(
    values, impact, known, cands, year_code, n_years, entry_weeks, exit_weeks, exit_offset,
    window_weeks, jobs=1,
) -> dict[str, np.ndarray]:
    """Counts per (year, candidate, county) for every name in COUNT_NAMES.

    Counties are processed in chunks only to bound memory (weeks x candidates x chunk cells);
    within a chunk everything is vectorised, and ``jobs`` threads take chunks (each writes its
    own counties, so the counts do not depend on ``jobs``).
    """
    n_weeks, n_counties = values.shape
    n_k = len(cands)
    # rows grouped by year: a stable sort of the weeks by year code, then one sum per year
    order = np.argsort(year_code, kind="stable")
    in_order = bool(np.all(order == np.arange(n_weeks)))
    starts = np.searchsorted(year_code[order], np.arange(n_years))
    lengths = np.diff(np.append(starts, n_weeks))
    out = {k: np.zeros((n_years, n_k, n_counties), dtype=np.int64) for k in COUNT_NAMES}
    chunk = max(1, _MAX_CELLS // max(1, n_weeks * n_k))

    def count(sl: slice) -> None:
        on = _replay(
            values[:, None, sl], cands[:, None], cands[:, None] + exit_offset, entry_weeks,
            exit_weeks,
        )
        ind = week_indicators(
            on, impact[:, None, sl], known[:, None, sl], window_weeks, with_lead=False
        )
        for k in COUNT_NAMES:
            v = ind[k]
            if v.shape[1] == n_k and v.strides[1] == 0:
                v = v[:, :1]  # the same for every candidate (e.g. episodes): sum it once
            v = v if in_order else v[order]
            out[k][:, :, sl] = year_sums(v, starts, lengths)

    chunks = [slice(lo, min(n_counties, lo + chunk)) for lo in range(0, n_counties, chunk)]
    thread_map(count, chunks, jobs)
    return out


class _Chooser:
    """Pick a candidate index per county from training counts ``{name: (K, C)}``."""

    def __init__(self, cands, objective, max_far, scope, group_of, shrink_events):
        self.cands = cands
        self.objective = objective
        self.max_far = max_far
        self.scope = scope
        self.group_of = group_of
        # group sums as integer sums over the counties sorted by group (every group has a
        # county: the codes come from np.unique); exact, and cheaper than a product with a
        # (counties x groups) membership matrix
        self.order = np.argsort(group_of, kind="stable")
        self.starts = np.searchsorted(group_of[self.order], np.arange(int(group_of.max()) + 1))
        self.shrink_events = shrink_events

    def __call__(self, train: dict[str, np.ndarray]) -> np.ndarray:
        n_counties = len(self.group_of)
        pooled = {k: v.sum(axis=1, keepdims=True) for k, v in train.items()}
        k_all = _best(self._score(pooled))  # (1,); all-NaN (no events) -> lowest candidate
        if self.scope == "uniform":
            return np.full(n_counties, k_all[0])
        group = {k: np.add.reduceat(v[:, self.order], self.starts, axis=1)  # (K, G)
                 for k, v in train.items()}
        k_group = _best(self._score(group), fallback=k_all[0])
        if self.scope == "region":
            return k_group[self.group_of]
        k_own = _best(self._score(train), fallback=k_group[self.group_of])
        events = train["episodes"][0].astype(float)  # the same for every candidate
        z = events / (events + self.shrink_events) if self.shrink_events > 0 else (
            np.ones(n_counties)
        )
        z = np.where(np.isfinite(z), z, 0.0)
        thr = z * self.cands[k_own] + (1.0 - z) * self.cands[k_group[self.group_of]]
        return np.abs(self.cands[:, None] - thr[None, :]).argmin(axis=0)

    def _score(self, c: dict[str, np.ndarray]) -> np.ndarray:
        if self.objective in ("peirce", "csi"):
            col = "peirce_skill_score" if self.objective == "peirce" else "critical_success_index"
            return weekly_scores(c)[col].to_numpy().reshape(c["hits"].shape)
        hit = _ratio(c["episodes_hit"], c["episodes"])
        far = _ratio(c["false_activations"], c["activations_judged"])
        far = np.where(np.isnan(far), 0.0, far)  # never judged as firing -> no false alarm
        return np.where(far <= self.max_far + 1e-12, hit, -1.0 - far)


def _best(score: np.ndarray, fallback: int | np.ndarray = 0) -> np.ndarray:
    """Argmax over axis 0 ignoring NaN (first = lowest threshold on ties); fallback if all NaN."""
    s = np.where(np.isnan(score), -np.inf, score)
    k = np.argmax(s, axis=0)
    all_nan = np.isnan(score).all(axis=0)
    return np.where(all_nan, fallback, k).astype(np.int64)


def _pick(counts: dict[str, np.ndarray], k: np.ndarray) -> dict[str, np.ndarray]:
    cols = np.arange(len(k))
    return {name: v[k, cols] for name, v in counts.items()}


def _curve(total: dict[str, np.ndarray], cands: np.ndarray, values: np.ndarray) -> pd.DataFrame:
    p = {k: v.sum(axis=1) for k, v in total.items()}
    finite = np.sort(values[np.isfinite(values)])
    below = np.searchsorted(finite, cands, side="right")
    weekly = weekly_scores(p)
    return pd.DataFrame(
        {
            "threshold": cands,
            "peirce_skill": weekly["peirce_skill_score"].to_numpy(),
            "csi": weekly["critical_success_index"].to_numpy(),
            "hit_rate": _ratio(p["episodes_hit"], p["episodes"]),
            "false_alarm_ratio": _ratio(p["false_activations"], p["activations_judged"]),
            "below_share": _ratio(below, np.full(len(cands), finite.size)),
        }
    )


def _check_candidates(candidates) -> np.ndarray:
    c = np.asarray(candidates, dtype=np.float64).ravel()
    if c.size == 0 or not np.all(np.isfinite(c)):
        raise TriggerError(
            "candidates must be a non-empty array of finite thresholds (index units); got "
            f"{c.size} values{' with NaN/inf' if c.size else ''}."
        )
    return np.unique(c)


def _check_choice(value, allowed, name):
    if value not in allowed:
        raise TriggerError(f"{name} must be one of {list(allowed)}; got {value!r}.")


def _region_codes(regions, n_counties: int, *, required: bool) -> np.ndarray:
    if regions is None:
        if required:
            raise TriggerError(
                "scope='region' needs regions (one region name per county); pass regions= or "
                "use scope='county'."
            )
        return np.zeros(n_counties, dtype=np.int64)
    r = np.asarray(regions, dtype=object)
    if r.shape != (n_counties,):
        raise TriggerError(
            f"regions must have one entry per county ({n_counties}); got shape {r.shape}."
        )
    if pd.isna(r).any():
        raise TriggerError("regions has missing entries; every county needs a region.")
    _, codes = np.unique(r.astype(str), return_inverse=True)
    return codes.astype(np.int64)


def _year_labels(years, weeks, n_weeks: int, *, needed: bool) -> np.ndarray:
    if years is not None:
        y = np.asarray(years)
        if y.shape != (n_weeks,):
            raise TriggerError(
                f"years must have one label per week ({n_weeks}); got shape {y.shape}."
            )
        return y
    if weeks is not None:
        w = pd.DatetimeIndex(weeks)
        if len(w) != n_weeks:
            raise TriggerError(
                f"weeks has {len(w)} entries but index_values has {n_weeks} rows."
            )
        return w.isocalendar().year.to_numpy(dtype=np.int64)
    if needed:
        raise TriggerError(
            "leave-one-year-out needs the year of each week: pass weeks= (the IndexCube's "
            "weeks) or years=."
        )
    return np.zeros(n_weeks, dtype=np.int64)
