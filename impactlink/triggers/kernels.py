"""Array kernels shared by the trigger modules: the stage walk, column percentiles, year sums,
running counts over weeks.

Each kernel is exact (integer counts, order statistics and numpy's own interpolation), so a
faster form gives the same numbers as the plain one. The stage walk and the column percentiles
split their independent columns into blocks that :func:`impactlink.execution.thread_map` runs
on ``jobs`` threads (numpy's arithmetic releases the GIL; the walk's Python steps do not, so
its threads overlap only partly); each block writes its own columns, so results never depend
on ``jobs``.
"""

from __future__ import annotations

import numpy as np

from impactlink.execution import thread_map

__all__ = ["walk_stages", "stage_walk", "col_percentiles", "ColumnPercentiles", "year_sums",
           "column_blocks", "trailing_sum", "window_count"]

#: Fewest columns worth a thread of their own in the week loops (below it the Python overhead
#: of every step, run under the GIL, outweighs the arithmetic).
_MIN_BLOCK = 512


def column_blocks(n: int, jobs: int, min_block: int | None = None) -> list[slice]:
    """``jobs`` (or fewer) contiguous slices covering 0..n, none smaller than ``min_block``
    (default :data:`_MIN_BLOCK`) unless there is only one."""
    min_block = _MIN_BLOCK if min_block is None else min_block
    k = max(1, min(int(jobs), n // max(1, min_block)))
    edges = np.linspace(0, n, k + 1).round().astype(np.int64)
    return [slice(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]


def walk_stages(
    entry_ready: np.ndarray, exit_cond: np.ndarray, exit_weeks: np.ndarray,
    min_weeks: np.ndarray, *, jobs: int = 1,
) -> np.ndarray:
    """The stage walk: (stages, weeks, ...) entry readiness and exit conditions -> (weeks, ...)
    stage (int8).

    Per unit (every trailing cell independently): the unit moves up to the highest stage whose
    entry is ready, if higher than its stage; otherwise it moves down one stage when the exit
    condition of its stage has held in ``exit_weeks`` consecutive weeks since the week it
    entered the stage and it has been in the stage ``min_weeks`` weeks. ``jobs`` threads walk
    blocks of the trailing cells (identical results for any ``jobs``).
    """
    n_s = entry_ready.shape[0]
    return stage_walk([entry_ready[s] for s in range(n_s)],
                      [exit_cond[s] for s in range(n_s)], exit_weeks, min_weeks, jobs=jobs)


def stage_walk(ready: list, exit_cond: list, exit_weeks, min_weeks, *, jobs: int = 1) -> np.ndarray:
    """:func:`walk_stages` from per-stage (weeks, ...) arrays that broadcast to one shape.

    The per-stage arrays are folded before the loop into the highest ready stage (int8) and the
    exit conditions as bits (bit s = stage s, bit 0 = no stage, never set), so each week costs a
    dozen operations on small integer arrays, whatever the number of stages.
    """
    n_s = len(ready)
    shape = np.broadcast_shapes(*(np.shape(r) for r in ready), *(np.shape(x) for x in exit_cond))
    n_t, rest = shape[0], shape[1:]
    m = int(np.prod(rest, dtype=np.int64))
    hi = np.zeros(shape, dtype=np.uint8)
    buf = np.empty(shape, dtype=np.uint8)
    for s in range(n_s):  # the highest ready stage, as a max over stages
        np.multiply(_as_u8(ready[s]), np.uint8(s + 1), out=buf)
        np.maximum(hi, buf, out=hi)
    bits = _bits_dtype(n_s)
    if bits is not None:
        code = np.zeros(shape, dtype=bits)
        wide = buf if bits == np.uint8 else np.empty(shape, dtype=bits)
        for s in range(n_s):  # bits are distinct, so adding them sets them
            np.multiply(_as_u8(exit_cond[s]), bits(1 << (s + 1)), out=wide)
            np.add(code, wide, out=code)
    else:  # more stages than bits: the exit condition of each stage, stage 0 never met
        code = np.zeros((n_s + 1,) + shape, dtype=bool)
        for s in range(n_s):
            code[s + 1] = exit_cond[s]
    del buf
    hi2 = hi.reshape(n_t, m)
    code2 = code.reshape(code.shape[:-len(rest)] + (m,)) if rest else code.reshape(
        code.shape + (1,))
    # a table entry per state (state 0 = no stage can never step down)
    big = np.iinfo(np.int32).max
    ew = np.append(big, np.asarray(exit_weeks, dtype=np.int64)).clip(0, big).astype(np.int32)
    mw = np.append(0, np.asarray(min_weeks, dtype=np.int64)).clip(0, big).astype(np.int32)
    out = np.zeros((n_t, m), dtype=np.uint8)

    def block(sl: slice) -> None:
        _walk(hi2[:, sl], code2[..., sl], ew, mw, out[:, sl], bits is not None)

    thread_map(block, column_blocks(m, jobs), jobs)
    return out.view(np.int8).reshape(shape)


def _as_u8(x) -> np.ndarray:
    """A boolean array as 0/1 uint8 (a view, no copy)."""
    return np.asarray(x, dtype=bool).view(np.uint8)


def _bits_dtype(n_s: int):
    for dt, n in ((np.uint8, 7), (np.uint16, 15), (np.uint32, 31)):
        if n_s <= n:
            return dt
    return None


def _walk(hi, code, ew, mw, out, packed: bool) -> None:
    """The week loop on one block of columns (writes ``out``, (weeks, cells) uint8).

    ``run`` counts the weeks since the entry week that met the stage's exit condition in a row
    (the exit run capped at the weeks in the stage), ``since`` the weeks since the entry week;
    the stage's exit weeks and minimum weeks are looked up only for the cells that changed
    stage (a few per week).
    """
    n_t, m = hi.shape
    state = np.zeros(m, dtype=np.uint8)
    new = np.zeros(m, dtype=np.uint8)
    run = np.zeros(m, dtype=np.int32)
    since = np.zeros(m, dtype=np.int32)  # 0 before any change, as for an entry at week 0
    need_run = np.full(m, ew[0], dtype=np.int32)  # state 0 never steps down
    need_since = np.full(m, mw[0], dtype=np.int32)
    ex = np.zeros(m, dtype=code.dtype)
    down = np.zeros(m, dtype=bool)
    tmp = np.zeros(m, dtype=bool)
    cols = np.arange(m)
    for t in range(n_t):
        if packed:
            np.right_shift(code[t], state, out=ex)
            np.bitwise_and(ex, 1, out=ex)
        else:
            ex = code[state, t, cols]
        run += 1
        run *= ex
        np.greater_equal(run, need_run, out=down)
        np.greater_equal(since, need_since, out=tmp)
        down &= tmp
        np.subtract(state, down, out=new, casting="unsafe")
        np.greater(hi[t], state, out=tmp)
        np.copyto(new, hi[t], where=tmp)
        np.not_equal(new, state, out=tmp)  # changed: the stage was entered this week
        since += 1
        if tmp.any():
            moved = np.flatnonzero(tmp)
            since[moved] = 1
            run[moved] = 0
            to = new[moved]
            need_run[moved] = ew[to]
            need_since[moved] = mw[to]
        out[t] = new
        state, new = new, state


def col_percentiles(x: np.ndarray, q, *, jobs: int = 1) -> np.ndarray:
    """``np.nanpercentile(x, q, axis=0)`` for a (rows, columns) array, shape (len(q), columns).

    The same numbers, computed faster: ``np.nanpercentile`` walks the columns one by one in
    Python (``apply_along_axis``) whenever an axis is given; here (:class:`ColumnPercentiles`)
    each column is sorted once (NaN last) and the columns with the same number of non-NaN values
    go through one vectorised ``np.percentile`` of that part, which is what ``nanpercentile``
    does to each column (linear interpolation, Hyndman & Fan 1996 type 7). An all-NaN column
    gives NaN. ``jobs`` threads take blocks of columns.
    """
    x = np.asarray(x, dtype=np.float64)
    q = np.atleast_1d(np.asarray(q, dtype=np.float64))
    out = np.full((len(q), x.shape[1]), np.nan)

    def block(sl: slice) -> None:
        out[:, sl] = ColumnPercentiles(x[:, sl])(q)

    thread_map(block, column_blocks(x.shape[1], jobs, min_block=64), jobs)
    return out


class ColumnPercentiles:
    """Percentiles of every column of a (rows, columns) array, NaN ignored, for many calls:
    the columns are sorted once. ``cp(q)`` equals ``np.nanpercentile(x, q, axis=0)``."""

    def __init__(self, x: np.ndarray) -> None:
        self.sorted = np.sort(np.asarray(x, dtype=np.float64), axis=0)  # NaN last
        n = (~np.isnan(self.sorted)).sum(axis=0)  # nanpercentile keeps +-inf
        self.groups = [(int(k), np.flatnonzero(n == k)) for k in np.unique(n) if k > 0]
        self._cache: dict[float, np.ndarray] = {}

    def __call__(self, q) -> np.ndarray:
        q = np.atleast_1d(np.asarray(q, dtype=np.float64))
        cache = self._cache
        if cache and all(float(v) in cache for v in q):
            return np.stack([cache[float(v)] for v in q])
        out = np.full((len(q), self.sorted.shape[1]), np.nan)
        with np.errstate(invalid="ignore"):  # inf - inf between two infinite order statistics
            for k, cols in self.groups:
                part = self.sorted[:k] if len(cols) == self.sorted.shape[1] else (
                    self.sorted[:k, cols])
                out[:, cols] = np.percentile(part, q, axis=0).reshape(len(q), -1)
        return out

    def prepare(self, q) -> None:
        """Compute the percentiles ``q`` in one pass and keep them for later calls (numpy
        computes each percentile on its own, so the values are the same either way)."""
        q = np.unique(np.asarray(q, dtype=np.float64))
        rows = self(q)
        self._cache = {float(v): rows[i] for i, v in enumerate(q)}


def year_sums(x: np.ndarray, starts: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Sums of a boolean array over consecutive row segments (rows ``starts[i]`` onward,
    ``lengths[i]`` rows each, covering all rows in order) as int64, shape (segments, ...).

    The sums are accumulated in the smallest unsigned type that holds the longest segment (a
    year of weeks fits in uint8), which is exact and avoids casting every cell to int64.
    """
    longest = int(lengths.max()) if len(lengths) else 0
    acc = np.uint8 if longest <= 255 else np.uint16 if longest <= 65535 else np.int64
    x = np.asarray(x)
    if x.dtype == bool:
        x = x.view(np.uint8)  # 0/1 bytes, any strides
    return np.add.reduceat(x, starts, axis=0, dtype=acc).astype(np.int64)


def trailing_sum(x: np.ndarray, length: int) -> np.ndarray:
    """Count of True in the ``length`` rows ending at each row (rows before the first count as
    False), along axis 0.

    Built from sums over windows of 1, 2, 4, ... rows (each the sum of two shifted halves) and
    the binary digits of ``length``: O(log length) whole-array additions, no loop over rows
    (numpy's cumsum along axis 0 is slow on wide rows, and a row loop holds the GIL). The
    counts are exact, in the smallest unsigned type that holds ``length``.
    """
    x = np.asarray(x)
    n = x.shape[0]
    length = max(0, min(int(length), n))
    dt = np.uint8 if length <= 255 else np.uint16 if length <= 65535 else np.int64
    out = np.zeros(x.shape, dtype=dt)
    power = x.astype(dt)  # sums over windows of `span` rows
    span, offset = 1, 0  # rows already covered by `out`, counted back from each row
    while span <= length:
        if length & span:
            np.add(out[offset:], power[:n - offset], out=out[offset:])
            offset += span
        if span * 2 <= length:
            np.add(power[span:], power[:-span].copy(), out=power[span:])  # 2 * span rows
        span *= 2
    return out


def window_count(x: np.ndarray, *, back: int, ahead: int) -> np.ndarray:
    """Count of True in rows t-back .. t+ahead (clipped to the rows) for every row t."""
    x = np.asarray(x)
    n = x.shape[0]
    if ahead > 0:  # rows after the record count as False: pad, then read each window's end
        x = np.concatenate([x, np.zeros((ahead,) + x.shape[1:], dtype=x.dtype)])
    return trailing_sum(x, back + ahead + 1)[ahead:ahead + n]
