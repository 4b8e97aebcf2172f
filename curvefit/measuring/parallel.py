"""Run independent cells in parallel, locally or on a Dask cluster, one BLAS thread each.

Every task is a picklable callable plus arguments; results come back as they finish so
that callers can journal them at once. Each task runs under
``threadpoolctl.threadpool_limits(1)``: without it, BLAS/OpenMP threads oversubscribe
the cores (measured here: ~10x slower on 2 cores) and floating-point reductions can
depend on the thread count, so results would differ between ``n_jobs`` settings.
Randomness must come in with the task's arguments (seeded per cell), never from the
worker, so the same seed gives the same numbers whatever the backend.
"""

from __future__ import annotations

import contextlib
import os
from typing import Any, Callable, Iterable, Iterator

from curvefit.core.errors import InputError

BACKENDS = ("local", "dask")


def _single_threaded(fn: Callable, args: tuple, kwargs: dict):
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1):
        return fn(*args, **kwargs)


@contextlib.contextmanager
def dask_client(scheduler: str | None = None, n_workers: int = 2):
    """A ``distributed.Client``: connect to ``scheduler`` or start a LocalCluster.

    The LocalCluster uses one process per worker with one thread each. Its nanny
    would set ``MALLOC_TRIM_THRESHOLD_`` in the workers, which made tree-boosting fits
    about 3x slower on this machine, so that setting is switched off; starting a
    cluster also leaves ``OMP_NUM_THREADS=1`` in the parent's environment, which is
    undone on exit. Scripts that start a cluster need an ``if __name__ == "__main__"``
    guard.
    """
    try:
        import dask
        from distributed import Client, LocalCluster
    except ImportError:
        raise InputError("the dask backend needs the 'dask' extra: "
                         "pip install 'curvefit[dask]'") from None
    saved = {k: os.environ.get(k) for k in ("OMP_NUM_THREADS", "MKL_NUM_THREADS",
                                             "OPENBLAS_NUM_THREADS")}
    cluster = None
    try:
        if scheduler:
            try:
                client = Client(scheduler, timeout="20s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise InputError(f"cannot connect to the Dask scheduler at {scheduler}: {exc}") from None
        else:
            with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}):
                cluster = LocalCluster(n_workers=max(1, n_workers), threads_per_worker=1,
                                       processes=True, dashboard_address=None)
                client = Client(cluster)
        try:
            yield client
        finally:
            client.close()
    finally:
        if cluster is not None:
            cluster.close()
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def run_tasks(tasks: Iterable[tuple[Callable, tuple, dict]], *, n_jobs: int = 1,
              backend: str = "local", scheduler: str | None = None) -> Iterator[Any]:
    """Run ``fn(*args, **kwargs)`` for each task; yield results in completion order.

    ``n_jobs=1`` with the local backend runs in this process (no pickling, easy to
    debug). Results carry whatever the task returns; callers that need the order
    should put a key in the result.
    """
    if backend not in BACKENDS:
        raise InputError(f"unknown backend {backend!r}; use one of: {', '.join(BACKENDS)}")
    tasks = list(tasks)
    if not tasks:
        return
    if backend == "local" and n_jobs == 1:
        for fn, args, kwargs in tasks:
            yield _single_threaded(fn, args, kwargs)
        return
    from joblib import Parallel, delayed, parallel_backend

    calls = (delayed(_single_threaded)(fn, args, kwargs) for fn, args, kwargs in tasks)
    if backend == "local":
        par = Parallel(n_jobs=n_jobs, return_as="generator_unordered", backend="loky")
        yield from par(calls)
        return
    with dask_client(scheduler, n_workers=n_jobs if n_jobs > 0 else 2):
        with parallel_backend("dask"):
            par = Parallel(n_jobs=-1, return_as="generator_unordered")
            yield from par(calls)
