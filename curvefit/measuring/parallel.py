"""Run independent cells in parallel, locally or on a Dask cluster, one BLAS thread each.

Every task is a picklable callable plus arguments; results come back as they finish so
that callers can journal them at once. Each task runs with every native thread pool
limited to one thread (threadpoolctl, `one_thread_each`): without it, BLAS/OpenMP threads oversubscribe
the cores (measured here: ~10x slower on 2 cores) and floating-point reductions can
depend on the thread count, so results would differ between ``n_jobs`` settings.
Randomness must come in with the task's arguments (seeded per cell), never from the
worker, so the same seed gives the same numbers whatever the backend.

Local workers (loky) die with the run. At its first task each worker points its standard
streams at ``os.devnull`` (results travel through loky's own pipes, so a ``| tee`` of the
command's output ends when the command does) and starts a thread that polls
``os.getppid()``: once the process that started the run is gone (``kill -9``, a crash) the
worker kills the trainer programs it started, removes their files and exits; loky's
resource trackers follow when their last worker is gone. A SIGTERM or SIGHUP sent to a
worker (a CI runner stopping the whole process group) does the same. The run's parent
keeps the workers' temporary files in one scratch folder that it removes when the tasks
end, however they end (a worker killed by joblib's abort cannot clean up after itself).

The table goes to the workers once, not with every task: arguments that several tasks
share are saved once as memory-mapped files in that scratch folder (local workers map
the same pages), or sent to a Dask cluster once as a task of its own that returns it (the
tasks get its future; Dask copies it to the workers that need it, and computes it again
on another worker if the one holding it dies, which scattered data would not survive).
"""

from __future__ import annotations

import contextlib
import os
import shutil
import signal
import sys
import tempfile
import threading
import time
import warnings
from typing import Any, Callable, Iterable, Iterator

from curvefit.core.errors import InputError

BACKENDS = ("local", "dask")


# seconds between two looks of a worker at its parent: the longest an orphan survives
PARENT_POLL = 0.2
SCRATCH_PREFIX = "curvefit-run-"  # the run's folder for the workers' temporary files
_guarded_for: int | None = None  # the parent pid a worker of this process is tied to


_controller: tuple[int, Any] | None = None  # (modules loaded when made, ThreadpoolController)


def one_thread_each():
    """A context that limits every native thread pool (BLAS, OpenMP) to one thread.

    Finding the pools costs about 10 ms (threadpoolctl scans the loaded libraries), more
    than a small cell's fit, so the controller is kept and made again only after new
    modules were imported (a new native library comes only with one).
    """
    global _controller
    from threadpoolctl import ThreadpoolController

    if _controller is None or _controller[0] != len(sys.modules):
        controller = ThreadpoolController()
        _controller = (len(sys.modules), controller)
    return _controller[1].limit(limits=1)


def _single_threaded(fn: Callable, args: tuple, kwargs: dict, tie: tuple | None = None):
    if tie is not None:
        tie_to_parent(*tie)
    with one_thread_each():
        return fn(*args, **kwargs)


def tie_to_parent(parent_pid: int, scratch: str | None = None) -> None:
    """Make this worker process die with ``parent_pid`` (idempotent; called per task).

    Standard input, output and error go to ``os.devnull``; a daemon thread polls
    ``os.getppid()`` every `PARENT_POLL` seconds and, once the parent is gone, kills the
    trainer programs started here, removes the run's scratch folder and exits. SIGTERM
    and SIGHUP kill the trainers and exit (the parent removes the scratch folder).
    ``scratch`` becomes this process's temporary folder (`tempfile.tempdir`).
    """
    global _guarded_for
    if scratch is not None:
        tempfile.tempdir = scratch
    if _guarded_for == parent_pid:
        return
    if os.getppid() != parent_pid:
        _die_with_parent()  # the run ended before this worker got its first task
    _guarded_for = parent_pid
    _detach_standard_streams()
    for name in ("SIGTERM", "SIGHUP"):
        if hasattr(signal, name) and threading.current_thread() is threading.main_thread():
            signal.signal(getattr(signal, name), _stop_on_signal)
    threading.Thread(target=_watch_parent, args=(parent_pid,), name="curvefit-parent-watch",
                     daemon=True).start()


_trackers_started = False


def _start_trackers_quietly() -> None:
    """Start loky's and multiprocessing's resource trackers with their standard streams
    on ``os.devnull``: they outlive a killed run for a moment, and their only output is
    a warning about the semaphores that killed workers left for them to remove."""
    global _trackers_started
    if _trackers_started:
        return
    from multiprocessing import resource_tracker as mp_tracker

    from joblib.externals.loky.backend import resource_tracker as loky_tracker

    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(Exception):
            stream.flush()
    saved = [os.dup(1), os.dup(2)]
    null = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(null, 1)
        os.dup2(null, 2)
        loky_tracker.ensure_running()
        mp_tracker.ensure_running()
        _trackers_started = True
    finally:
        os.dup2(saved[0], 1)
        os.dup2(saved[1], 2)
        for fd in (*saved, null):
            os.close(fd)


def _detach_standard_streams() -> None:
    """Stop holding the parent's terminal, pipe or log file open."""
    for stream in (sys.stdout, sys.stderr):
        with contextlib.suppress(Exception):
            stream.flush()
    null = os.open(os.devnull, os.O_RDWR)
    try:
        for fd in (0, 1, 2):
            os.dup2(null, fd)
    finally:
        os.close(null)


def _watch_parent(parent_pid: int) -> None:
    while os.getppid() == parent_pid:
        time.sleep(PARENT_POLL)
    _die_with_parent()


def _stop_on_signal(signum, frame) -> None:
    """SIGTERM/SIGHUP in a worker: its trainers go; the parent, if alive, removes the rest."""
    _die_with_parent(128 + signum, remove_scratch=False)


def _die_with_parent(code: int = 1, remove_scratch: bool = True) -> None:
    """Kill this process's trainer programs, remove the run's scratch folder, exit now."""
    models = sys.modules.get("curvefit.measuring.models")
    with contextlib.suppress(Exception):
        if models is not None:
            models.stop_trainers()
    scratch = tempfile.tempdir
    if remove_scratch and scratch and os.path.basename(scratch).startswith(SCRATCH_PREFIX):
        shutil.rmtree(scratch, ignore_errors=True)
    os._exit(code)


def check_scheduler(address: str, timeout: float = 10.0) -> None:
    """Fail early, with one line, when nothing listens at a ``tcp://host:port`` Dask
    scheduler address (other transports are left to the client).

    Called before a run opens its journal, so a dead scheduler leaves no file behind.

    Examples
    --------
    >>> check_scheduler("tcp://127.0.0.1:1")
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: cannot connect to the Dask scheduler at tcp://127.0.0.1:1: ...
    """
    import socket
    from urllib.parse import urlsplit

    text = str(address).strip()
    scheme, sep, rest = text.partition("://")
    if sep and scheme != "tcp":
        return
    try:
        parts = urlsplit("tcp://" + (rest if sep else text))
        host, port = parts.hostname, parts.port
    except ValueError as exc:
        raise InputError(f"bad Dask scheduler address {address!r} ({exc}); "
                         "use tcp://host:port") from None
    if not host or port is None:
        raise InputError(f"bad Dask scheduler address {address!r}; use tcp://host:port")
    try:
        socket.create_connection((host, port), timeout=timeout).close()
    except OSError as exc:
        reason = exc.strerror or str(exc) or type(exc).__name__
        raise InputError(f"cannot connect to the Dask scheduler at {address}: {reason}") from None


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
            _start_trackers_quietly()  # the cluster's processes use multiprocessing's tracker
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
    from joblib import Parallel, delayed

    if backend == "local":
        _start_trackers_quietly()
        try:
            scratch = tempfile.mkdtemp(prefix=SCRATCH_PREFIX)
        except OSError as exc:
            raise InputError(f"cannot create a temporary folder in {tempfile.gettempdir()}: "
                             f"{exc.strerror or exc}; free space there or set TMPDIR") from None
        tie = (os.getpid(), scratch)
        try:
            tasks = _file_backed(tasks, scratch)
        except OSError as exc:
            shutil.rmtree(scratch, ignore_errors=True)
            raise InputError(f"cannot write the table for the workers in {scratch}: "
                             f"{exc.strerror or exc}; free space there or set TMPDIR") from None
        calls = (delayed(_single_threaded)(fn, args, kwargs, tie) for fn, args, kwargs in tasks)
        try:
            par = Parallel(n_jobs=n_jobs, return_as="generator_unordered", backend="loky")
            yield from par(calls)  # an exception or close() here makes joblib kill the workers
        finally:
            shutil.rmtree(scratch, ignore_errors=True)
        return
    with dask_client(scheduler, n_workers=n_jobs if n_jobs > 0 else 2) as client:
        yield from run_on_client(client, tasks)


# objects of these types are never worth sharing (small, and often interned)
_PLAIN = (int, float, complex, bool, str, bytes, type(None))


def _shared_arguments(tasks: list[tuple[Callable, tuple, dict]]) -> list:
    """The non-scalar positional arguments that two or more tasks hold (the same object):
    the table, the model spec, the metric."""
    seen: dict[int, Any] = {}
    shared: dict[int, Any] = {}
    for _, args, _ in tasks:
        for a in args:
            if isinstance(a, _PLAIN):
                continue
            if id(a) in seen:
                shared[id(a)] = a
            seen[id(a)] = a
    return list(shared.values())


def _dask_call(fn: Callable, kwargs: dict, *args):
    return _single_threaded(fn, args, kwargs)


SHARE_BYTES = 1 << 20  # arrays from this size up are shared with local workers through a file


def _file_backed(tasks: list[tuple[Callable, tuple, dict]], folder: str) -> list:
    """The tasks with their shared large numeric arrays (or arrays inside a shared
    DataFrame or dataclass, such as the cells' table) saved once in ``folder`` and
    replaced by read-only memory maps of that file.

    joblib sends a memory-mapped array to loky workers as its file name, so every task
    carries a few hundred bytes instead of the table, and the workers map the same
    pages: no copy of the table per task or per worker, and no hashing of it per task
    (joblib's own automatic memory mapping hashes each large array at each dispatch).
    """
    memo: dict[int, Any] = {}
    swap = {id(a): _mapped(a, folder, memo) for a in _shared_arguments(tasks)}
    return [(fn, tuple(swap.get(id(a), a) for a in args), kwargs) for fn, args, kwargs in tasks]


def _mapped(obj, folder: str, memo: dict):
    import dataclasses

    import numpy as np

    if id(obj) in memo:
        return memo[id(obj)][1]
    out = obj
    path = os.path.join(folder, f"shared-{len(memo)}.npy")
    if isinstance(obj, np.ndarray) and not isinstance(obj, np.memmap):
        if obj.dtype.kind in "biuf" and obj.nbytes >= SHARE_BYTES:
            # always row-major, copied in slices (a column-major array needs no second copy;
            # joblib rebuilds views of column-major maps wrongly in the workers)
            mm = np.lib.format.open_memmap(path, mode="w+", dtype=obj.dtype, shape=obj.shape)
            step = max(1, (16 << 20) // max(1, obj[:1].nbytes))
            for start in range(0, len(obj), step):
                mm[start:start + step] = obj[start:start + step]
            mm.flush()
            del mm
            out = np.load(path, mmap_mode="r")
    elif type(obj).__name__ == "DataFrame" and type(obj).__module__.startswith("pandas"):
        dtypes = set(obj.dtypes)
        if len(dtypes) == 1 and next(iter(dtypes)).kind in "biuf" and obj.shape[1] > 0 \
                and obj.shape[0] * obj.shape[1] * next(iter(dtypes)).itemsize >= SHARE_BYTES:
            import pandas as pd

            # column after column, one column per row of the file: no second copy in
            # memory, and the file's array is the (columns x rows) block pandas keeps
            mm = np.lib.format.open_memmap(path, mode="w+", dtype=next(iter(dtypes)),
                                           shape=obj.shape[::-1])
            for j in range(obj.shape[1]):
                mm[j] = obj.iloc[:, j].to_numpy()
            mm.flush()
            del mm
            out = pd.DataFrame(np.load(path, mmap_mode="r").T, columns=obj.columns, index=obj.index,
                               copy=False)
    elif dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        changed = {f.name: _mapped(getattr(obj, f.name), folder, memo)
                   for f in dataclasses.fields(obj) if f.init}
        if any(changed[k] is not getattr(obj, k) for k in changed):
            out = dataclasses.replace(obj, **changed)
    memo[id(obj)] = (obj, out)  # the object too: its id stays its own while the memo lives
    return out


def _hold(obj):
    """The object itself: a task whose result is an argument several tasks share."""
    return obj


def _share(client, objects: list) -> list:
    """One future per object, each the result of a task that returns it (`_hold`).

    Not ``client.scatter``: scattered data lives only on workers, so a worker that dies
    while the broadcast is still copying it loses it for good and the tasks wait for ever
    (seen in a test that kills a worker mid-run); a task's input stays with the scheduler,
    which runs it again elsewhere.
    """
    with _large_graphs_expected():
        return [client.submit(_hold, obj, pure=False) for obj in objects]


@contextlib.contextmanager
def _large_graphs_expected():
    """Dask's "Sending large graph" warning silenced: the table goes to the scheduler once
    (in `_share`, or in the task when only one task uses it), on purpose."""
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*large graph")
        yield


def run_on_client(client, tasks: list[tuple[Callable, tuple, dict]]) -> Iterator[Any]:
    """Run the tasks on a ``distributed.Client``; yield results in completion order.

    Every argument that two or more tasks share (the same object: the table, the model
    spec) is sent once as the result of a task of its own (`_share`), and the tasks
    receive its future, so a task carries only its own cells. When a worker dies,
    the scheduler runs its tasks again on the others (Dask's
    ``distributed.scheduler.allowed-failures``, 3 by default, bounds how often); a task
    that still fails ends the run with one line, and a journaled run continues with
    ``--resume``. A cluster left without any worker would keep the tasks waiting for
    ever: after `NO_WORKER_GRACE` seconds with none the run ends with one line too.
    Closing the generator (Ctrl-C) cancels the tasks not yet finished.
    """
    from distributed.scheduler import KilledWorker

    shared = _shared_arguments(tasks)
    futures_of: dict[int, Any] = {}
    if shared:
        held = _share(client, shared)
        futures_of = {id(obj): fut for obj, fut in zip(shared, held)}
    with _large_graphs_expected():
        futures = [client.submit(_dask_call, fn, kwargs,
                                 *(futures_of.get(id(a), a) for a in args), pure=False)
                   for fn, args, kwargs in tasks]
    try:
        for fut in _finished(client, futures):
            try:
                yield fut.result()
            except KilledWorker as exc:
                raise InputError(f"Dask workers died while running a task ({exc}); the "
                                 "finished cells are in the journal: run again with --resume") from None
    finally:
        client.cancel(futures + list(futures_of.values()))


NO_WORKER_GRACE = 60.0  # seconds a cluster may stay without workers before the run ends
_POLL = 2.0             # seconds between two looks at the cluster while nothing finishes


def _finished(client, futures: list, grace: float | None = None) -> Iterator[Any]:
    """The futures in completion order; raise InputError once the scheduler has listed no
    worker for ``grace`` seconds (default `NO_WORKER_GRACE`) while some are unfinished."""
    from distributed import as_completed

    grace = NO_WORKER_GRACE if grace is None else grace
    pending = as_completed(futures)
    alone_since = None
    looked = time.monotonic()
    while not pending.is_empty():
        if pending.has_ready():
            alone_since = None
            yield next(pending)
            continue
        time.sleep(0.02)  # what as_completed's own iterator does, with room to look around
        if time.monotonic() - looked < min(_POLL, grace / 4):
            continue
        looked = time.monotonic()
        if client.scheduler_info().get("workers"):
            alone_since = None
        elif alone_since is None:
            alone_since = looked
        elif looked - alone_since > grace:
            raise InputError(f"the Dask cluster at {client.scheduler.address} has had no worker "
                             f"for {grace:.0f} s; start workers and run again with --resume (the "
                             "finished cells are in the journal)")
