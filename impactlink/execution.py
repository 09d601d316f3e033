"""One small execution layer for independent work (candidates x folds, bootstrap chunks).

The same call runs in-process (default), on a local process pool (``jobs > 1``) or on a Dask
cluster (``dask_address``), and returns results in task order, so the three give identical
results. Randomness must travel inside each task (a seed per task), never come from worker
state.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from contextlib import AbstractContextManager, nullcontext
from typing import Any, TypeVar

from impactlink.errors import ExecutionError

__all__ = ["map_tasks", "thread_map", "blas_threads", "ExecutionError"]

T = TypeVar("T")


def map_tasks(
    fn: Callable[[Any], T],
    tasks: Iterable[Any],
    *,
    jobs: int = 1,
    dask_address: str | None = None,
    progress: Callable[[str], None] | None = None,
    label: str = "tasks",
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

    Returns
    -------
    list
        ``[fn(t) for t in tasks]``, in order.
    """
    items: Sequence[Any] = list(tasks)
    n = len(items)
    if n == 0:
        return []
    step = max(1, n // 10)

    def tick(done: int) -> None:
        if progress is not None and (done % step == 0 or done == n):
            progress(f"{label}: {done}/{n}")

    if dask_address:
        return _run_dask(fn, items, dask_address, tick)
    if jobs > 1 and n > 1:
        from concurrent.futures import ProcessPoolExecutor

        out: list[T] = []
        with ProcessPoolExecutor(max_workers=jobs) as pool:
            for i, res in enumerate(pool.map(fn, items, chunksize=max(1, n // (4 * jobs))), 1):
                out.append(res)
                tick(i)
        return out
    out = []
    for i, t in enumerate(items, 1):
        out.append(fn(t))
        tick(i)
    return out


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


def _run_dask(fn, items, address, tick):
    try:
        from distributed import Client, LocalCluster
    except ImportError:  # pragma: no cover - depends on the optional extra
        raise ExecutionError(
            "a Dask address was given but dask.distributed is not installed; "
            "install the extra: pip install 'impactlink[dask]'"
        ) from None
    local = address == "local"
    client = _local_client(LocalCluster, Client) if local else Client(address)
    try:
        futures = client.map(fn, items, pure=False)
        results = []
        for i, fut in enumerate(futures, 1):
            try:
                results.append(fut.result())
            except Exception as exc:  # re-raised with the task position
                raise ExecutionError(f"task {i - 1} failed on the Dask cluster: {exc}") from exc
            tick(i)
        return results
    finally:
        if not local:  # the local cluster serves every call of this process
            client.close()


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
    client, cluster = _LOCAL.pop("client", None), _LOCAL.pop("cluster", None)
    if client is not None:
        client.close()
    if cluster is not None:
        cluster.close()
