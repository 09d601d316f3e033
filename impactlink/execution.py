"""One small execution layer for independent work (candidates x folds, bootstrap chunks).

The same call runs in-process (default), on a local process pool (``jobs > 1``) or on a Dask
cluster (``dask_address``), and returns results in task order, so the three give identical
results. Randomness must travel inside each task (a seed per task), never come from worker
state.
"""

from __future__ import annotations

import functools
from collections import OrderedDict
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import AbstractContextManager, contextmanager, nullcontext
from typing import Any, TypeVar

from impactlink.errors import ExecutionError

__all__ = ["map_tasks", "thread_map", "blas_threads", "dask_session", "ExecutionError"]

T = TypeVar("T")


def map_tasks(
    fn: Callable[..., T],
    tasks: Iterable[Any],
    *,
    jobs: int = 1,
    dask_address: str | None = None,
    progress: Callable[[str], None] | None = None,
    label: str = "tasks",
    shared: tuple = (),
) -> list[T]:
    """Apply ``fn`` to every task and return the results in task order.

    Parameters
    ----------
    fn : callable
        A module-level function (it must pickle for process pools and Dask).
    tasks : iterable
        Arguments, one per call.
    jobs : int, default 1
        1 runs in this process; more uses a local process pool of that size.
    dask_address : str, optional
        Address of a running Dask scheduler (``"tcp://host:8786"``), or ``"local"`` to start a
        local cluster for this call. Takes precedence over ``jobs``.
    progress : callable, optional
        Receives one line of text per ~10 % of tasks done.
    label : str
        Name of the work, for progress lines.
    shared : tuple, optional
        Objects every task reads (an index cube, a target's rows): ``fn(task, *shared)`` is
        called instead of ``fn(task)``, and each object travels to a worker once, not once
        per task: a process pool's workers receive them when they start (inherited, not
        pickled, where processes fork); on Dask each is scattered to every worker
        (``Client.scatter(broadcast=True)``) and remembered by identity while the client
        lives, so an object shared by several calls (the cube, by every target) is sent once.

    Returns
    -------
    list
        ``[fn(t, *shared) for t in tasks]``, in order.
    """
    items: Sequence[Any] = list(tasks)
    n = len(items)
    if n == 0:
        return []
    step = max(1, n // 10)

    def tick(done: int) -> None:
        if progress is not None and (done % step == 0 or done == n):
            progress(f"{label}: {done}/{n}")

    shared = tuple(shared)
    if dask_address:
        return _run_dask(fn, items, dask_address, tick, shared)
    if jobs > 1 and n > 1:
        from concurrent.futures import ProcessPoolExecutor

        out: list[T] = []
        call = functools.partial(_call_shared, fn)
        with ProcessPoolExecutor(max_workers=jobs, initializer=_set_shared,
                                 initargs=shared) as pool:
            for i, res in enumerate(pool.map(call, items, chunksize=max(1, n // (4 * jobs))),
                                    1):
                out.append(res)
                tick(i)
        return out
    out = []
    for i, t in enumerate(items, 1):
        out.append(fn(t, *shared))
        tick(i)
    return out


_SHARED: dict[str, Any] = {}  # a worker's shared objects and whether its malloc is set


def _set_shared(*shared: Any) -> None:
    """A pool worker starts: keep its shared objects; keep freed blocks for reuse."""
    _SHARED["objects"] = shared
    _worker_memory()


def _call_shared(fn: Callable[..., T], task: Any) -> T:
    return fn(task, *_SHARED["objects"])


def _call_with(fn: Callable[..., T], task: Any, *shared: Any) -> T:
    """Dask task: ``fn(task, *shared)`` (Dask resolves the scattered objects' futures)."""
    _worker_memory()
    return fn(task, *shared)


def _worker_memory() -> None:
    """Once per worker process: freed blocks stay for the next task
    (:func:`impactlink._malloc.reuse_freed_blocks`), so its temporary arrays do not fault
    their pages in again, task after task."""
    if not _SHARED.get("memory"):
        from impactlink._malloc import reuse_freed_blocks

        reuse_freed_blocks()
        _SHARED["memory"] = True


def thread_map(fn: Callable[[Any], T], items: Sequence[Any], threads: int) -> list[T]:
    """``[fn(i) for i in items]`` on ``threads`` threads of this process (in order).

    For numpy work on arrays the process already holds (no pickling): numpy's arithmetic
    releases the GIL, so two threads use two cores on it; ``take`` and ``bincount`` hold it.
    """
    if threads <= 1 or len(items) < 2:
        return [fn(i) for i in items]
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=threads) as pool:
        return list(pool.map(fn, items))


_BLAS: dict[str, Any] = {}


def blas_threads(limit: int | None) -> AbstractContextManager[Any]:
    """Context limiting BLAS to ``limit`` threads (``None``: no change).

    Around :func:`thread_map`: each thread's matrix products run on one BLAS thread instead
    of every thread starting BLAS's own pool on the same cores (threadpoolctl, a
    scikit-learn dependency). OpenBLAS may round a product differently on one thread than on
    two (it splits the work differently), so code whose numbers must not depend on ``jobs``
    holds BLAS at one thread for every ``jobs``, 1 included.
    """
    if limit is None:
        return nullcontext()
    if "controller" not in _BLAS:
        from threadpoolctl import ThreadpoolController

        _BLAS["controller"] = ThreadpoolController()
    return _BLAS["controller"].limit(limits=int(limit), user_api="blas")


def _distributed() -> Any:
    """The ``distributed`` package, or the one-line error that says how to install it."""
    try:
        import distributed
    except ImportError:  # pragma: no cover - depends on the optional extra
        raise ExecutionError(
            "a Dask address was given but dask.distributed is not installed; "
            "install the extra: pip install 'impactlink[dask]'"
        ) from None
    return distributed


def _run_dask(fn, items, address, tick, shared=()):
    dd = _distributed()
    Client, LocalCluster = dd.Client, dd.LocalCluster
    local = address == "local"
    own = not local and address not in _CLIENTS  # no session: a client for this call only
    if local:
        client = _local_client(LocalCluster, Client)
    elif own:
        client = _CLIENTS[address] = Client(address)
    else:
        client = _CLIENTS[address]
    try:
        if shared:
            futures = client.map(_call_with, [fn] * len(items), items,
                                 *[[f] * len(items) for f in _scattered(address, shared)],
                                 pure=False)
        else:
            futures = client.map(fn, items, pure=False)
        results = []
        for i, fut in enumerate(futures, 1):
            try:
                results.append(fut.result())
            except Exception as exc:  # re-raised with the task position
                raise ExecutionError(
                    f"task {i - 1} failed on the Dask cluster: {exc}") from exc
            tick(i)
        return results
    finally:
        if own:
            _close_client(address)


_CLIENTS: dict[str, Any] = {}  # scheduler address -> the client of an open session
_MEMOS: dict[str, OrderedDict] = {}  # address -> id(object) -> (object, its future)
_SCATTER_KEPT = 8  # scattered objects remembered per client (least recently used dropped)


@contextmanager
def dask_session(address: str | None) -> Iterator[None]:
    """Keep one client of the scheduler at ``address`` for every :func:`map_tasks` call in
    the block, so the objects they share (``shared=``) are scattered once, not per call.

    A no-op for ``None`` and ``"local"`` (the process's local cluster already persists).
    Without a session each call opens and closes its own client.
    """
    if not address or address == "local" or address in _CLIENTS:
        yield
        return
    _CLIENTS[address] = _distributed().Client(address)
    try:
        yield
    finally:
        _close_client(address)


def _close_client(address: str) -> None:
    _MEMOS.pop(address, None)
    client = _CLIENTS.pop(address, None)
    if client is not None:
        client.close()


def _scattered(address: str, shared: tuple) -> list[Any]:
    """Futures of ``shared`` on every worker of the address's client: each object scattered
    once, found again by identity (the memo keeps the object, so its id is not reused)."""
    client = _LOCAL["client"] if address == "local" else _CLIENTS[address]
    memo = _MEMOS.setdefault(address, OrderedDict())
    out = []
    for obj in shared:
        hit = memo.get(id(obj))
        if hit is None or hit[0] is not obj:
            hit = (obj, client.scatter(obj, broadcast=True, hash=False))
            memo[id(obj)] = hit
            while len(memo) > _SCATTER_KEPT:
                memo.popitem(last=False)
        memo.move_to_end(id(obj))
        out.append(hit[1])
    return out


_LOCAL: dict[str, Any] = {}


def _local_client(local_cluster: Any, client_cls: Any) -> Any:
    """One local cluster per process for ``dask_address="local"``: started at the first call
    (a run maps several grids; starting two worker processes costs seconds each time) and
    closed when the process exits."""
    if "client" not in _LOCAL:
        import atexit

        # dashboard on a random loopback port so parallel runs do not collide (DESIGN.md)
        cluster = local_cluster(n_workers=2, threads_per_worker=1, processes=True,
                                dashboard_address="127.0.0.1:0")
        _LOCAL.update(cluster=cluster, client=client_cls(cluster))
        atexit.register(close_local_cluster)
    return _LOCAL["client"]


def close_local_cluster() -> None:
    """Close the process's local cluster, if one was started."""
    _MEMOS.pop("local", None)
    client, cluster = _LOCAL.pop("client", None), _LOCAL.pop("cluster", None)
    if client is not None:
        client.close()
    if cluster is not None:
        cluster.close()
