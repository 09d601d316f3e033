"""Score a replayed trigger plan against an impact record, counting only exposed unit-weeks.

A unit-week counts only where the impact could have been recorded: the source covers it (the
impact grid is not NaN there) and the unit is exposed (for water-use restrictions: it has at
least one water system). A unit that can never record the impact contributes no hit, miss,
false alarm or correct negative, and none of its stage entries is judged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from impactlink.errors import TriggerError
from impactlink.schema import REGION
from impactlink.skill.scores import ContingencyScores
from impactlink.triggers.kernels import window_count
from impactlink.triggers.plan import SEASON_MONTHS
from impactlink.triggers.plan_replay import PlanReplay

__all__ = ["PlanScores", "score_plan", "unit_impacts", "match_onsets", "SCORE_COLUMNS"]

_EPISODE_COUNTS = ("onsets", "onsets_matched", "entries", "entries_judged",
                   "entries_without_impact", "flip_flops", "unit_weeks", "weeks_in_stage")
_CONTINGENCY = tuple(ContingencyScores.__dataclass_fields__)

#: Columns of ``trigger_plan_scores.csv``.
SCORE_COLUMNS = (
    ("stage", "stage_name", "by", "group") + _CONTINGENCY + _EPISODE_COUNTS
    + ("weeks_in_stage_share", "lead_weeks_median", "lead_weeks_q1", "lead_weeks_q3",
       "exit_minus_recovery_weeks_median")
)


@dataclass(frozen=True)
class PlanScores:
    """Scores of a replayed plan, per stage, overall and by season and region.

    Attributes
    ----------
    table : pandas.DataFrame
        :data:`SCORE_COLUMNS`. ``by`` is "all", "season" or "region" and ``group`` its value.
        A row for stage s scores "at stage s or higher" as the yes forecast. The weekly 2x2
        fields are those of :class:`~impactlink.skill.scores.ContingencyScores` (``hit_rate`` =
        probability of detection, ``false_alarm_ratio`` b/(a+b), ``false_alarm_rate``
        b/(b+d), ``peirce_skill_score``, ``heidke_skill_score``), over exposed, covered
        unit-weeks. Episode counts: ``onsets`` (impact onsets), ``onsets_matched`` (the stage
        was on within the window before or at the onset), ``entries`` (entries judged or
        matched), ``entries_without_impact``, ``flip_flops`` (entries within ``flip_weeks``
        of an exit of the same stage, all units).
    leads : pandas.DataFrame
        One row per matched onset: ``stage, unit, region, season, onset_week, entry_week,
        lead_weeks, exit_minus_recovery_weeks``.
    decades : pandas.DataFrame
        ``decade, stage, stage_name, weeks_share``: share of unit-weeks exactly in each stage
        (stage 0 = none) per decade.
    settings : dict
        min_level, window_weeks, flip_weeks, exposed_units.
    """

    table: pd.DataFrame
    leads: pd.DataFrame
    decades: pd.DataFrame
    settings: dict

    def to_frame(self) -> pd.DataFrame:
        return self.table.copy()


def score_plan(
    replay: PlanReplay,
    impact_level: np.ndarray,
    *,
    exposed: np.ndarray | None = None,
    min_level: int = 1,
    window_weeks: int = 8,
    flip_weeks: int = 8,
) -> PlanScores:
    """Score every stage of a replayed plan against an impact.

    Parameters
    ----------
    replay : PlanReplay
    impact_level : ndarray, shape (weeks, counties)
        Impact level of each county-week (cube county order); NaN or negative where the source
        does not cover it.
    exposed : ndarray of bool, shape (counties,) or (weeks, counties), optional
        Where the impact could be recorded at all (e.g. the county has a water system).
        Default: everywhere.
    min_level : int, default 1
        An impact week is one at or above this level.
    window_weeks : int, default 8
        Tolerance: an onset is matched when the stage was on in any week from
        ``window_weeks`` before it to the onset week.
    flip_weeks : int, default 8
        An entry within this many weeks after an exit of the same stage is a flip-flop.

    Returns
    -------
    PlanScores

    Raises
    ------
    TriggerError
        On shapes that do not match the replay.

    Notes
    -----
    Unit impacts (region or area units): the highest level among the unit's exposed covered
    counties. Matching (common practice in drought-trigger evaluation): an onset is a covered
    impact week after a covered week without impact. The lead time is the onset week minus the
    entry week of the stage episode that was on in the window. An entry is *judged* when every
    week from the entry to ``window_weeks`` after is covered and exposed; a judged entry that is
    matched to no onset brought no impact. A late entry (after the onset, while the impact goes
    on) is therefore a miss *and* an entry without impact. Exit timing: the first week off
    after the matched episode minus the first week without impact after the onset (positive =
    the plan stayed on after recovery). Weekly 2x2 scores: Wilks (2011), section 8.2.

    References
    ----------
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed., Academic
    Press, section 8.2.
    """
    impact, known = unit_impacts(replay, impact_level, exposed=exposed, min_level=min_level)
    n_t, n_u = replay.stage.shape
    month = replay.weeks.month.to_numpy()
    season_of_month = {m: s for s, ms in SEASON_MONTHS.items() for m in ms}
    season = np.array([season_of_month[m] for m in range(1, 13)], dtype=object)[month - 1]
    seasons = np.broadcast_to(season[:, None], (n_t, n_u))
    regions = np.broadcast_to(np.array(replay.unit_regions, dtype=object)[None, :], (n_t, n_u))
    # integer group codes per cell (names, codes): seasons vary by row, regions by column
    s_names, s_code = np.unique(season.astype(str), return_inverse=True)
    r_names, r_code = np.unique(np.array(replay.unit_regions, dtype=str), return_inverse=True)
    season_groups = (s_names, s_code, 0)  # a code per week
    region_groups = (r_names, r_code, 1)  # a code per unit
    rows, leads = [], []
    for s, name in enumerate(replay.plan.stage_names, start=1):
        on = replay.stage >= s
        cells = _cells(on, replay.stage == s, impact, known, window_weeks, flip_weeks)
        m = match_onsets(on, cells["onset"], window_weeks)
        cells["onsets_matched"] = m["hit"]
        matched_entry = np.zeros_like(on)
        tt, uu = np.nonzero(m["hit"])
        matched_entry[m["entry_week"][tt, uu], uu] = True
        cells["entries"] = cells["entry"] & (cells["judged"] | matched_entry)
        cells["entries_judged"] = cells["entry"] & cells["judged"]
        cells["entries_without_impact"] = cells["entries_judged"] & ~matched_entry
        lead = _leads(m, on, impact, known, tt, uu, replay, seasons, regions, s)
        leads.append(lead)
        for by, groups in (("all", None), ("season", season_groups), ("region", region_groups)):
            rows.append(_grouped(cells, lead, by, groups, s, name))
    table = pd.concat(rows, ignore_index=True)
    lead_frame = pd.concat(leads, ignore_index=True)
    return PlanScores(
        table=table[list(SCORE_COLUMNS)],
        leads=lead_frame,
        decades=_decades(replay),
        settings={"min_level": int(min_level), "window_weeks": int(window_weeks),
                  "flip_weeks": int(flip_weeks),
                  "exposed_units": int(known.any(axis=0).sum())},
    )


def unit_impacts(
    replay: PlanReplay, impact_level: np.ndarray, *, exposed=None, min_level: int = 1
) -> tuple[np.ndarray, np.ndarray]:
    """(impact, counted) boolean (weeks, units) arrays on the plan's unit grid."""
    lev = np.asarray(impact_level, dtype=np.float64)
    n_c = replay.members.shape[0]
    if lev.shape != (len(replay.weeks), n_c):
        raise TriggerError(
            f"impact_level has shape {lev.shape}; expected {(len(replay.weeks), n_c)} (weeks, "
            "counties of the cube). Build it with impact_grid(target, cube.weeks, "
            "cube.county_ids)."
        )
    covered = np.isfinite(lev) & (lev >= 0)
    if exposed is not None:
        ex = np.asarray(exposed, dtype=bool)
        if ex.shape not in ((n_c,), lev.shape):
            raise TriggerError(
                f"exposed has shape {ex.shape}; expected ({n_c},) or {lev.shape}."
            )
        covered &= np.broadcast_to(ex, lev.shape)
    hit = covered & (np.where(covered, lev, 0) >= min_level)
    mem = replay.members > 0
    n_u = mem.shape[1]
    if n_c == n_u and np.array_equal(mem, np.eye(n_c, dtype=bool)):
        return hit & covered, covered  # county units: each unit is its own county
    # any member county: a sparse product, linear in counties (a dense (weeks x counties) @
    # (counties x units) product of integers is quadratic for county-sized unit grids)
    from scipy import sparse

    M = sparse.csc_array(mem.astype(np.int64))
    counted = (M.T @ covered.T.astype(np.int64)).T > 0
    impact = (M.T @ hit.T.astype(np.int64)).T > 0
    return impact & counted, counted


def match_onsets(on: np.ndarray, onset: np.ndarray, window_weeks: int) -> dict[str, np.ndarray]:
    """Match impact onsets to stage episodes within a tolerance window (axis 0 = weeks).

    Returns ``hit`` (onset with the stage on in weeks t-window..t) and ``entry_week`` (row of
    the entry of that episode; -1 where not matched).

    Examples
    --------
    >>> on = np.array([0, 1, 1, 1, 0, 0, 0, 0, 1], bool)[:, None]
    >>> onset = np.array([0, 0, 0, 1, 0, 0, 0, 1, 0], bool)[:, None]
    >>> m = match_onsets(on, onset, 2)
    >>> m["hit"].ravel().nonzero()[0].tolist(), int(m["entry_week"][3, 0])
    ([3], 1)
    """
    t = np.arange(on.shape[0]).reshape((-1,) + (1,) * (on.ndim - 1))
    prev = np.zeros_like(on)
    prev[1:] = on[:-1]
    start = on & ~prev
    last_on = np.maximum.accumulate(np.where(on, t, -1), axis=0)
    last_start = np.maximum.accumulate(np.where(start, t, -1), axis=0)
    hit = onset & (last_on >= 0) & (t - last_on <= window_weeks)
    entry = np.take_along_axis(last_start, np.clip(last_on, 0, None), axis=0)
    return {"hit": hit, "entry_week": np.where(hit, entry, -1)}


# --------------------------------------------------------------------------- private steps
def _cells(on, in_stage, impact, known, window_weeks, flip_weeks) -> dict[str, np.ndarray]:
    prev_on = np.zeros_like(on)
    prev_on[1:] = on[:-1]
    nimp = known & ~impact
    prev_nimp = np.zeros_like(nimp)
    prev_nimp[1:] = nimp[:-1]
    entry = on & ~prev_on
    exit_ = ~on & prev_on
    recent_exit = window_count(exit_, back=flip_weeks, ahead=0) > 0
    n = on.shape[0]
    judged = (window_count(known, back=0, ahead=window_weeks) == window_weeks + 1) & (
        (np.arange(n) + window_weeks < n)[:, None]
    )
    return {
        "hits": on & impact, "false_alarms": on & nimp, "misses": ~on & impact,
        "correct_negatives": ~on & nimp, "onset": impact & prev_nimp, "onsets": impact & prev_nimp,
        "entry": entry, "judged": judged, "flip_flops": entry & recent_exit,
        "unit_weeks": np.ones_like(on), "weeks_in_stage": in_stage,
    }


def _first_at_or_after(mask: np.ndarray) -> np.ndarray:
    """Row of the first True at or after each row (n where none), along axis 0."""
    n = mask.shape[0]
    t = np.arange(n)[:, None]
    idx = np.where(mask, t, n)
    return np.minimum.accumulate(idx[::-1], axis=0)[::-1]


def _leads(m, on, impact, known, tt, uu, replay, seasons, regions, s) -> pd.DataFrame:
    n = on.shape[0]
    entry = m["entry_week"][tt, uu]
    off_after = _first_at_or_after(~on)
    recovered = _first_at_or_after(known & ~impact)
    exit_week = off_after[np.minimum(entry, n - 1), uu]
    rec_week = recovered[tt, uu]
    ok = (exit_week < n) & (rec_week < n)
    return pd.DataFrame({
        "stage": s, "unit": np.array(replay.unit_ids, dtype=object)[uu],
        REGION: regions[tt, uu], "season": seasons[tt, uu],
        "onset_week": replay.weeks[tt], "entry_week": replay.weeks[entry],
        "lead_weeks": (tt - entry).astype(np.int64),
        "exit_minus_recovery_weeks": np.where(ok, exit_week - rec_week, np.nan),
    })


def _grouped(cells, lead, by, grouping, s, name) -> pd.DataFrame:
    names = ("hits", "false_alarms", "misses", "correct_negatives") + _EPISODE_COUNTS
    counts: dict[str, np.ndarray]
    if grouping is None:
        groups = np.array(["all"])
        counts = {c: np.array([cells[c].sum()], dtype=np.float64) for c in names}
    else:  # codes along one axis: integer sums along the other, then per group (exact)
        groups, codes, axis = grouping
        counts = {c: np.bincount(codes, weights=cells[c].sum(axis=1 - axis),
                                 minlength=len(groups)) for c in names}
    frame = ContingencyScores.frame_from_counts(
        counts["hits"], counts["false_alarms"], counts["misses"], counts["correct_negatives"]
    )
    for c in _EPISODE_COUNTS:
        frame[c] = counts[c].astype(np.int64)
    frame["weeks_in_stage_share"] = counts["weeks_in_stage"] / np.maximum(counts["unit_weeks"], 1)
    key = pd.Series(["all"] * len(lead) if grouping is None else
                    lead["season" if by == "season" else REGION].astype(str).to_numpy())
    g = lead.assign(_g=key.to_numpy()).groupby("_g")
    stats = pd.DataFrame({
        "lead_weeks_median": g["lead_weeks"].median(),
        "lead_weeks_q1": g["lead_weeks"].quantile(0.25),
        "lead_weeks_q3": g["lead_weeks"].quantile(0.75),
        "exit_minus_recovery_weeks_median": g["exit_minus_recovery_weeks"].median(),
    }).reindex(groups)
    for c in stats.columns:
        frame[c] = stats[c].to_numpy(dtype=float)
    frame.insert(0, "group", groups)
    frame.insert(0, "by", by)
    frame.insert(0, "stage_name", name)
    frame.insert(0, "stage", s)
    return frame


def _decades(replay: PlanReplay) -> pd.DataFrame:
    decade = (replay.weeks.year.to_numpy() // 10) * 10
    n_s = len(replay.plan.stages) + 1
    uniq, code = np.unique(decade, return_inverse=True)
    cnt = np.zeros((len(uniq), n_s))
    np.add.at(cnt, (np.repeat(code, replay.stage.shape[1]), replay.stage.ravel()), 1)
    share = cnt / cnt.sum(axis=1, keepdims=True)
    names = ("",) + replay.plan.stage_names
    return pd.DataFrame({
        "decade": np.repeat(uniq, n_s), "stage": np.tile(np.arange(n_s), len(uniq)),
        "stage_name": np.tile(np.array(names, dtype=object), len(uniq)),
        "weeks_share": share.ravel(),
    })

