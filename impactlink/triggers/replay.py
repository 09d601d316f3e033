"""Replay a trigger plan: index values -> weekly on/off state under entry and exit rules."""

from __future__ import annotations

import numpy as np

from impactlink.errors import TriggerError

__all__ = ["replay_trigger"]


def replay_trigger(
    index_values: np.ndarray,
    *,
    threshold: float | np.ndarray,
    entry_weeks: int = 2,
    exit_weeks: int = 4,
    exit_threshold: float | np.ndarray | None = None,
) -> np.ndarray:
    """Weekly trigger state of a threshold plan with persistence rules.

    Parameters
    ----------
    index_values : ndarray, shape (weeks, counties)
        Index value of each week and county (for a standardized index, unitless z; negative =
        dry). NaN where undefined.
    threshold : float or ndarray of shape (counties,)
        Entry threshold, in the index's units: a week "counts toward entry" when its value is at
        or below it.
    entry_weeks : int, default 2
        The trigger turns on in the week that completes ``entry_weeks`` consecutive weeks at or
        below ``threshold``.
    exit_weeks : int, default 4
        Once on, the trigger turns off in the week that completes ``exit_weeks`` consecutive
        weeks strictly above ``exit_threshold``.
    exit_threshold : float or ndarray of shape (counties,), optional
        Exit threshold (default: ``threshold``). A value above ``threshold`` gives hysteresis:
        weeks between the two thresholds neither start nor end an episode.

    Returns
    -------
    ndarray of bool, shape (weeks, counties)
        True in the weeks the trigger is on.

    Raises
    ------
    TriggerError
        If ``index_values`` is not 2-D, a threshold does not broadcast to the counties, a
        persistence rule is not a positive integer, or ``exit_threshold`` < ``threshold``.

    Notes
    -----
    Each county is a two-state machine (common practice for drought-plan triggers). With
    :math:`b_t` the run length of consecutive weeks with :math:`x \\le \\theta_{in}` and
    :math:`a_t` that of weeks with :math:`x > \\theta_{out}` (both ending at week t),

    .. math:: s_t = \\begin{cases} a_t < m_{out} & s_{t-1} = \\text{on} \\\\
                                  b_t \\ge m_{in} & s_{t-1} = \\text{off} \\end{cases}

    with :math:`s_{-1}` = off. A NaN week is neither below nor above, so it breaks both runs and
    holds the state (a gap in the record never starts or ends an episode). With
    ``entry_weeks = exit_weeks = 1`` and no hysteresis the state is exactly
    :math:`x_t \\le \\theta` on every finite week.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.array([[0.0], [-1.2], [-1.5], [-0.4], [-1.1], [0.3], [0.2]])
    >>> replay_trigger(x, threshold=-1.0, entry_weeks=2, exit_weeks=2).ravel().astype(int)
    array([0, 0, 1, 1, 1, 1, 0])
    """
    values = _check_values(index_values, "index_values")
    n_counties = values.shape[1]
    enter = _check_threshold(threshold, n_counties, "threshold")
    leave = enter if exit_threshold is None else _check_threshold(
        exit_threshold, n_counties, "exit_threshold"
    )
    if np.any(np.broadcast_to(leave, enter.shape) < enter):
        raise TriggerError(
            "exit_threshold is below threshold for at least one county; the exit threshold must "
            "be at or above the entry threshold (equal = no hysteresis). Swap them or omit "
            "exit_threshold."
        )
    entry_weeks = _check_persistence(entry_weeks, "entry_weeks")
    exit_weeks = _check_persistence(exit_weeks, "exit_weeks")
    return _replay(values, enter, leave, entry_weeks, exit_weeks)


# --------------------------------------------------------------------------- private steps
def _replay(
    values: np.ndarray,
    enter: np.ndarray,
    leave: np.ndarray,
    entry_weeks: int,
    exit_weeks: int,
) -> np.ndarray:
    """State machine over axis 0; any trailing shape (e.g. candidates x counties) broadcasts.

    The state at week t depends on the state at t-1, so the weeks are walked in a Python loop;
    every step is one numpy operation over all counties (and all candidate thresholds), so the
    loop costs O(weeks) small array operations, not O(weeks x counties) Python steps.
    """
    with np.errstate(invalid="ignore"):
        below = values <= enter
        above = values > leave
    shape = np.broadcast_shapes(below.shape, above.shape)
    below = np.broadcast_to(below, shape)
    above = np.broadcast_to(above, shape)
    on = np.zeros(shape, dtype=bool)
    run_below = np.zeros(shape[1:], dtype=np.int32)
    run_above = np.zeros(shape[1:], dtype=np.int32)
    stay = np.zeros(shape[1:], dtype=bool)
    state = np.zeros(shape[1:], dtype=bool)  # off before the record
    for t in range(shape[0]):  # in place: a few small array operations per week
        run_below += 1
        run_below *= below[t]
        run_above += 1
        run_above *= above[t]
        np.less(run_above, exit_weeks, out=stay)  # an "on" unit stays on
        np.greater_equal(run_below, entry_weeks, out=on[t])  # an "off" unit turns on
        np.copyto(on[t], stay, where=state)
        state = on[t]
    return on


def _check_values(values: np.ndarray, name: str) -> np.ndarray:
    arr = np.asarray(values)
    if arr.ndim != 2:
        raise TriggerError(
            f"{name} must be a 2-D array shaped (weeks, counties); got {arr.ndim}-D shape "
            f"{arr.shape}. Take one (index, scale) array from the IndexCube."
        )
    if not np.issubdtype(arr.dtype, np.number) or np.issubdtype(arr.dtype, np.complexfloating):
        raise TriggerError(f"{name} must hold real numbers; got dtype {arr.dtype}.")
    return arr.astype(np.float64, copy=False)


def _check_threshold(value: float | np.ndarray, n_counties: int, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=np.float64)
    if arr.ndim == 0:
        arr = np.full(n_counties, float(arr))
    if arr.shape != (n_counties,):
        raise TriggerError(
            f"{name} must be a number or an array of one value per county (shape "
            f"({n_counties},)); got shape {arr.shape}."
        )
    if not np.all(np.isfinite(arr)):
        raise TriggerError(f"{name} must be finite for every county; found NaN or inf.")
    return arr


def _check_persistence(value: int, name: str) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
        raise TriggerError(
            f"{name} must be a whole number of weeks >= 1; got {value!r}."
        )
    return int(value)
