"""Scores of a trigger against impact records: weekly contingency table, episodes, lead time."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from impactlink.errors import TriggerError
from impactlink.skill.scores import ContingencyScores
from impactlink.triggers.kernels import window_count

__all__ = ["TriggerScores", "evaluate_trigger"]

#: Per-week indicator arrays summed into counts; the order is the layout of count arrays.
COUNT_NAMES = (
    "hits",  # weekly: on and impact
    "false_alarms",  # weekly: on and no impact
    "misses",  # weekly: off and impact
    "correct_negatives",  # weekly: off and no impact
    "episodes",  # impact onsets with a known previous week
    "episodes_hit",  # ... with the trigger on within the window before or at onset
    "activations_judged",  # trigger onsets whose window could be judged
    "false_activations",  # ... with no impact in the window
)


# --------------------------------------------------------------------------- evaluation
@dataclass(frozen=True)
class TriggerScores:
    """Scores of one trigger replay, per county and pooled.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per county (``county``: position or id) and a last row ``"all"`` (pooled
        counts). Columns: the counts in ``COUNT_NAMES``, ``known_weeks``, ``weeks_on_share``,
        ``activations`` (all trigger onsets), ``hit_rate`` (episodes hit / episodes),
        ``false_alarm_ratio`` (false activations / judged activations), ``peirce_skill`` and
        ``csi`` (weekly table), ``lead_weeks_median``, ``lead_weeks_q1``, ``lead_weeks_q3``.
    window_weeks, min_level : int
        Settings the scores were computed with.
    """

    table: pd.DataFrame
    window_weeks: int
    min_level: int

    @property
    def pooled(self) -> pd.Series:
        """The pooled ("all") row."""
        return self.table.iloc[-1]

    def to_frame(self) -> pd.DataFrame:
        return self.table.copy()


def evaluate_trigger(
    on: np.ndarray,
    impact_level: np.ndarray,
    *,
    weeks: pd.DatetimeIndex,
    min_level: int = 1,
    window_weeks: int = 8,
    county_ids: list[str] | tuple[str, ...] | None = None,
) -> TriggerScores:
    """Score a trigger's weekly state against impact levels.

    Parameters
    ----------
    on : ndarray of bool, shape (weeks, counties)
        Trigger state (from :func:`replay_trigger`).
    impact_level : ndarray, shape (weeks, counties)
        Impact level 0..K of each week; NaN (float) or -1 (integer) where unknown (outside the
        record's coverage). Unknown weeks are excluded, never counted as "no impact".
    weeks : pandas.DatetimeIndex
        Monday of each row (used to check the shape and label the result).
    min_level : int, default 1
        An impact week is one with level >= ``min_level``.
    window_weeks : int, default 8
        Window for matching trigger onsets to impact onsets, in weeks.
    county_ids : sequence of str, optional
        Labels of the columns (default: positions 0..n-1).

    Returns
    -------
    TriggerScores

    Raises
    ------
    TriggerError
        On mismatched shapes, a non-boolean ``on``, or bad ``min_level``/``window_weeks``.

    Notes
    -----
    Weekly table (known weeks only): hits a = on & impact, false alarms b = on & no impact,
    misses c, correct negatives d; Peirce skill score a/(a+c) - b/(b+d) (hit rate minus false
    alarm *rate*; Peirce 1884) and CSI a/(a+b+c) (Wilks 2011, section 8.2), both from
    :class:`~impactlink.skill.scores.ContingencyScores`. The ``hit_rate`` and
    ``false_alarm_ratio`` columns of this table are episode shares (below), not the weekly
    ratios of the same names in ``ContingencyScores``.

    Episodes (common practice in drought-trigger audits): an impact onset is a known impact week
    whose previous week is known and without impact. It is *hit* when the trigger is on in any
    week from ``window_weeks`` before the onset to the onset itself; its lead time is the onset
    week minus the first week of the trigger activation that was on in that window (0 = the
    trigger came on the week the impact began; the activation may have started earlier than
    the window). A trigger activation (off -> on) is a *true alarm* when an impact week occurs
    from its first week to ``window_weeks`` after; a *false alarm* when none occurs and every
    week of that span is known; otherwise it cannot be judged and is left out. Hit rate =
    episodes hit / episodes; false-alarm ratio = false activations / judged activations.

    References
    ----------
    Peirce, C. S. (1884). The numerical measure of the success of predictions. Science, 4(93),
    453-454. https://doi.org/10.1126/science.ns-4.93.453.b
    Wilks, D. S. (2011). Statistical Methods in the Atmospheric Sciences, 3rd ed., Academic
    Press.
    """
    on_arr, impact, known = _check_pair(on, impact_level, weeks, min_level, window_weeks)
    ind = week_indicators(on_arr, impact, known, window_weeks)
    counts = {name: ind[name].sum(axis=0) for name in COUNT_NAMES}
    labels = _labels(county_ids, on_arr.shape[1])
    table = _score_table(counts, labels)
    table["known_weeks"] = np.append(known.sum(axis=0), known.sum())
    n_on = on_arr.sum(axis=0)
    table["weeks_on_share"] = np.append(n_on / on_arr.shape[0], n_on.sum() / on_arr.size)
    acts = ind["activations"].sum(axis=0)
    table["activations"] = np.append(acts, acts.sum())
    leads = ind["lead_weeks"]
    for col, q in [("lead_weeks_median", 50), ("lead_weeks_q1", 25), ("lead_weeks_q3", 75)]:
        table[col] = np.append(_nanpercentile_cols(leads, q), _nanpercentile_all(leads, q))
    return TriggerScores(table=table, window_weeks=int(window_weeks), min_level=int(min_level))


# --------------------------------------------------------------------------- private steps
def week_indicators(
    on: np.ndarray,
    impact: np.ndarray,
    known: np.ndarray,
    window_weeks: int,
    *,
    with_lead: bool = True,
) -> dict[str, np.ndarray]:
    """Per-week indicators of every count in ``COUNT_NAMES`` (+ activations, lead_weeks).

    Works over axis 0 for any trailing shape; ``impact``/``known`` broadcast against ``on``
    (e.g. (weeks, 1, counties) against (weeks, candidates, counties)).
    """
    shape = np.broadcast_shapes(on.shape, impact.shape, known.shape)
    on = np.broadcast_to(on, shape)
    imp_known = impact & known
    nimp_known = ~impact & known
    off = ~on
    out = {
        "hits": on & imp_known,
        "false_alarms": on & nimp_known,
        "misses": off & imp_known,
        "correct_negatives": off & nimp_known,
    }
    prev_nimp = np.zeros_like(nimp_known)
    prev_nimp[1:] = nimp_known[:-1]
    onset = np.broadcast_to(imp_known & prev_nimp, shape)
    out["episodes"] = onset
    on_recent = _window_any(on, back=window_weeks, ahead=0)
    hit = onset & on_recent
    out["episodes_hit"] = hit

    start = on.copy()
    start[1:] &= off[:-1]  # on this week, off the week before (off before the record)
    out["activations"] = start
    imp_ahead = np.broadcast_to(_window_any(imp_known, back=0, ahead=window_weeks), shape)
    all_known_ahead = np.broadcast_to(_window_all(known, ahead=window_weeks), shape)
    true_alarm = start & imp_ahead
    false_alarm = start & ~imp_ahead & all_known_ahead
    out["activations_judged"] = true_alarm | false_alarm
    out["false_activations"] = false_alarm
    if not with_lead:
        return out

    t = np.arange(shape[0]).reshape((-1,) + (1,) * (len(shape) - 1))
    last_on = np.maximum.accumulate(np.where(on, t, -1), axis=0)
    last_start = np.maximum.accumulate(np.where(start, t, -1), axis=0)
    start_of_last_on = np.take_along_axis(last_start, np.clip(last_on, 0, None), axis=0)
    out["lead_weeks"] = np.where(hit, t - start_of_last_on, np.nan)
    return out


def _window_any(x: np.ndarray, *, back: int, ahead: int) -> np.ndarray:
    """True where x is True anywhere in weeks t-back .. t+ahead (clipped to the grid)."""
    return window_count(x, back=back, ahead=ahead) > 0


def _window_all(x: np.ndarray, *, ahead: int) -> np.ndarray:
    """True where x holds in every week t .. t+ahead and that span fits in the grid."""
    n = x.shape[0]
    count = window_count(x, back=0, ahead=ahead)
    fits = (np.arange(n) + ahead < n).reshape((-1,) + (1,) * (x.ndim - 1))
    return (count == ahead + 1) & fits


def _score_table(counts: dict[str, np.ndarray], labels: list[str]) -> pd.DataFrame:
    """Counts per county (+ pooled row) -> scores."""
    table = pd.DataFrame({"county": labels + ["all"]})
    for name in COUNT_NAMES:
        c = np.asarray(counts[name], dtype=np.int64)
        table[name] = np.append(c, c.sum())
    add_scores(table)
    return table


def add_scores(table: pd.DataFrame, prefix: str = "") -> None:
    """Add hit_rate, false_alarm_ratio, peirce_skill, csi from count columns (in place)."""
    g = {n: table[prefix + n].to_numpy(dtype=float) for n in COUNT_NAMES}
    table[prefix + "hit_rate"] = _ratio(g["episodes_hit"], g["episodes"])
    table[prefix + "false_alarm_ratio"] = _ratio(g["false_activations"], g["activations_judged"])
    weekly = weekly_scores(g)
    table[prefix + "peirce_skill"] = weekly["peirce_skill_score"].to_numpy()
    table[prefix + "csi"] = weekly["critical_success_index"].to_numpy()


def weekly_scores(counts: dict[str, np.ndarray]) -> pd.DataFrame:
    """2x2 scores of weekly counts (``hits``, ``false_alarms``, ``misses``,
    ``correct_negatives`` arrays of any one shape), via the one home of 2x2 scores,
    :class:`impactlink.skill.scores.ContingencyScores`; rows are the flattened cells."""
    return ContingencyScores.frame_from_counts(
        counts["hits"], counts["false_alarms"], counts["misses"], counts["correct_negatives"]
    )


def impact_arrays(impact_level: np.ndarray, min_level: int) -> tuple[np.ndarray, np.ndarray]:
    """(impact, known) boolean arrays from levels with NaN or negative = unknown."""
    lev = np.asarray(impact_level, dtype=np.float64)
    known = np.isfinite(lev) & (lev >= 0)
    impact = known & (np.where(known, lev, 0) >= min_level)
    return impact, known


def _check_pair(on, impact_level, weeks, min_level, window_weeks):
    on_arr = np.asarray(on)
    if on_arr.ndim != 2:
        raise TriggerError(
            f"on must be a 2-D boolean array shaped (weeks, counties); got shape {on_arr.shape}."
        )
    if on_arr.dtype != bool:
        raise TriggerError(
            f"on must be boolean (the output of replay_trigger); got dtype {on_arr.dtype}."
        )
    lev = np.asarray(impact_level)
    if lev.shape != on_arr.shape:
        raise TriggerError(
            f"impact_level has shape {lev.shape} but on has shape {on_arr.shape}; both must be "
            "(weeks, counties) on the same grid."
        )
    if weeks is None or len(weeks) != on_arr.shape[0]:
        n = None if weeks is None else len(weeks)
        raise TriggerError(
            f"weeks has {n} entries but the arrays have {on_arr.shape[0]} rows; pass the "
            "IndexCube's weeks."
        )
    check_levels(min_level, window_weeks)
    impact, known = impact_arrays(lev, int(min_level))
    return on_arr, impact, known


def check_levels(min_level: int, window_weeks: int) -> None:
    if isinstance(min_level, bool) or not isinstance(min_level, (int, np.integer)) or min_level < 1:
        raise TriggerError(f"min_level must be an integer >= 1; got {min_level!r}.")
    if (
        isinstance(window_weeks, bool)
        or not isinstance(window_weeks, (int, np.integer))
        or window_weeks < 0
    ):
        raise TriggerError(f"window_weeks must be an integer >= 0; got {window_weeks!r}.")


def _labels(county_ids, n: int) -> list[str]:
    if county_ids is None:
        return [str(i) for i in range(n)]
    labels = [str(c) for c in county_ids]
    if len(labels) != n:
        raise TriggerError(f"county_ids has {len(labels)} entries; the arrays have {n} counties.")
    return labels


def _nanpercentile_cols(x: np.ndarray, q: float) -> np.ndarray:
    out = np.full(x.shape[1], np.nan)
    has = np.isfinite(x).any(axis=0)
    if has.any():
        out[has] = np.nanpercentile(x[:, has], q, axis=0)
    return out


def _nanpercentile_all(x: np.ndarray, q: float) -> float:
    v = x[np.isfinite(x)]
    return float(np.percentile(v, q)) if v.size else np.nan


def _as_float(*arrays):
    return [np.asarray(a, dtype=np.float64) for a in arrays]


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    num = np.asarray(num, dtype=np.float64)
    den = np.asarray(den, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)
