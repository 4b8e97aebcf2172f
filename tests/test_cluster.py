"""A real Dask cluster: a scheduler and two workers started as separate processes with
Dask's own command-line tools (``dask scheduler``, ``dask worker``) on loopback.

Checked against a local run of the same cells (same seed, identical points), plus: the
shared table reaches each worker once (not with every task), a worker killed mid-run
costs nothing but time (its cells run again elsewhere, the journal stays whole, a
``--resume`` of a killed run completes it), and ``capacity --probe`` and ``tradeoff``
take the same path. Skipped, with the reason, only when the cluster cannot start.
"""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_iris, load_wine
from sklearn.tree import DecisionTreeClassifier

import curvefit as cf
from tests.conftest import ROOT, run_cli

pytest.importorskip("distributed")

DASK = Path(sys.executable).with_name("dask")
COMPARE = ["size", "repeat", "train_error", "test_error", "n_test", "n_test_errors", "status",
           "message", "model_seed"]


class Cluster:
    """A scheduler and ``n`` workers, each its own process group, torn down by pid."""

    def __init__(self, folder: Path, n_workers: int = 2):
        self.folder, self.procs, self.workers = folder, [], []
        folder.mkdir(parents=True, exist_ok=True)
        # the tests folder too: pytest imports this module as "test_cluster"
        env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), str(ROOT / "tests")]),
                   OMP_NUM_THREADS="1")
        # a nanny would set MALLOC_TRIM_THRESHOLD_ (slow fits, DEVELOPERS.md): no nanny
        env.pop("MALLOC_TRIM_THRESHOLD_", None)
        self.env = env
        info = folder / "scheduler.json"
        self.procs.append(self._start([str(DASK), "scheduler", "--host", "127.0.0.1", "--port", "0",
                                       "--no-dashboard", "--scheduler-file", str(info)], "scheduler"))
        deadline = time.monotonic() + 90
        while not info.exists():
            if time.monotonic() > deadline or self.procs[0].poll() is not None:
                raise RuntimeError("the Dask scheduler did not start: " + self.log("scheduler"))
            time.sleep(0.2)
        time.sleep(0.2)
        self.address = json.loads(info.read_text())["address"]
        for i in range(n_workers):
            w = self._start([str(DASK), "worker", self.address, "--nthreads", "1", "--no-nanny",
                             "--name", f"w{i}", "--local-directory", str(folder / f"w{i}"),
                             "--host", "127.0.0.1", "--no-dashboard"], f"w{i}")
            self.procs.append(w)
            self.workers.append(w)
        from distributed import Client

        with Client(self.address, timeout="60s") as client:
            client.wait_for_workers(n_workers, timeout=120)

    def _start(self, argv, name):
        log = open(self.folder / f"{name}.log", "w")
        try:
            return subprocess.Popen(argv, stdout=log, stderr=subprocess.STDOUT, env=self.env,
                                    cwd=self.folder, start_new_session=True)
        finally:
            log.close()

    def log(self, name) -> str:
        path = self.folder / f"{name}.log"
        return path.read_text()[-2000:] if path.exists() else ""

    def close(self):
        # the workers first, then the scheduler: a worker stopped by its own SIGTERM and by the
        # scheduler's close at once could hang in Dask's close until the 20 s below ran out
        workers = [p for p in self.procs if p in self.workers]
        for group in (workers, [p for p in self.procs if p not in workers]):
            for p in group:
                if p.poll() is None:
                    p.terminate()
            for p in group:
                try:
                    p.wait(timeout=20)
                except subprocess.TimeoutExpired:
                    p.kill()
                    p.wait(timeout=20)


def start_cluster(folder: Path) -> Cluster:
    if not DASK.exists():
        pytest.skip(f"no dask command at {DASK}: install the test extra")
    try:
        return Cluster(folder)
    except Exception as exc:  # any reason the cluster cannot start on this machine
        pytest.skip(f"a Dask cluster could not start on loopback: {' '.join(str(exc).split())[:300]}")


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    c = start_cluster(tmp_path_factory.mktemp("cluster"))
    try:
        yield c
    finally:
        c.close()


def test_cluster_points_match_a_local_run(cluster):
    X, y = load_wine(return_X_y=True)  # bundled wine data (scikit-learn)
    kw = dict(sizes=[20, 60, 130], repeats=2, random_state=5)
    model = DecisionTreeClassifier(max_features=0.5)  # randomised: the cell seeds matter
    local = cf.measure(model, X, y, n_jobs=1, **kw)
    remote = cf.measure(model, X, y, n_jobs=2, backend="dask", scheduler=cluster.address, **kw)
    assert remote.meta["backend"] == "dask"
    pd.testing.assert_frame_equal(local.points[COMPARE], remote.points[COMPARE])


class Counted:
    """A payload that counts, per process, how often it was unpickled."""

    def __init__(self, values):
        self.values = values

    def __reduce__(self):
        return _rebuild, (self.values,)


UNPICKLED = [0]


def _rebuild(values):
    UNPICKLED[0] += 1
    return Counted(values)


def _use(payload, i):
    time.sleep(0.05)
    return i, os.getpid(), UNPICKLED[0], float(payload.values.sum())


def test_shared_table_reaches_each_worker_once(cluster):
    from curvefit.measuring.parallel import run_tasks

    payload = Counted(np.arange(200_000, dtype=float))
    tasks = [(_use, (payload, i), {}) for i in range(16)]
    out = sorted(run_tasks(tasks, n_jobs=2, backend="dask", scheduler=cluster.address))
    assert [r[0] for r in out] == list(range(16))
    assert {r[3] for r in out} == {float(payload.values.sum())}
    # sent with every task, the copy would be unpickled 16 times in all (8 per worker);
    # scattered, a worker unpickles it once, or twice where Dask's broadcast reaches it
    # as a replica of another worker's copy: the count does not grow with the tasks
    per_worker = {}
    for _, pid, count, _ in out:
        per_worker[pid] = max(per_worker.get(pid, 0), count)
    assert max(per_worker.values()) <= 2, out
    assert sum(per_worker.values()) <= 4, out
    assert len({r[1] for r in out}) >= 1


def test_probe_on_the_cluster_matches_local(cluster):
    from sklearn.linear_model import LogisticRegression

    from curvefit.capacity import probe_capacity

    kw = dict(n_features=3, repeats=2, max_n=60, bootstrap=20, random_state=3)
    local = probe_capacity(LogisticRegression(C=100.0), **kw)
    remote = probe_capacity(LogisticRegression(C=100.0), n_jobs=2, backend="dask",
                            scheduler=cluster.address, **kw)
    pd.testing.assert_frame_equal(local.design, remote.design)
    assert local.vc_dim == remote.vc_dim


def test_tradeoff_on_the_cluster_matches_local(cluster):
    from curvefit.capacity.tradeoff import tradeoff

    X, y = load_iris(return_X_y=True)  # bundled iris data (scikit-learn)
    kw = dict(vary={"max_depth": [1, 3]}, sizes=[40, 100], repeats=2, random_state=2)
    local = tradeoff(DecisionTreeClassifier(), X, y, **kw)
    remote = tradeoff(DecisionTreeClassifier(), X, y, n_jobs=2, backend="dask",
                      scheduler=cluster.address, **kw)
    assert json.dumps(_without_timing(local.to_dict()), sort_keys=True, default=str) == \
        json.dumps(_without_timing(remote.to_dict()), sort_keys=True, default=str)


def _without_timing(obj):
    """A result's dict without its clock-dependent or backend fields."""
    drop = {"fit_seconds", "wall_seconds", "costs", "started", "backend", "versions", "scheduler",
            "n_jobs", "jobs", "workers", "cost_model", "prediction", "elapsed"}
    if isinstance(obj, dict):
        return {k: _without_timing(v) for k, v in obj.items() if k not in drop}
    if isinstance(obj, list):
        return [_without_timing(v) for v in obj]
    return obj


SLOW_MODEL = '''
import time
from sklearn.tree import DecisionTreeClassifier


class SlowTree(DecisionTreeClassifier):
    def fit(self, X, y, **kw):
        time.sleep(0.4)
        return super().fit(X, y, **kw)
'''


def _journal_cells(path: Path) -> list[dict]:
    lines = path.read_text().splitlines()
    rows = [json.loads(line) for line in lines]  # every line whole JSON
    return rows[1:]


def _wait_for_cells(path: Path, n: int, proc, limit: float = 120) -> None:
    deadline = time.monotonic() + limit
    while time.monotonic() < deadline:
        if path.exists() and len(path.read_text().splitlines()) > n:
            return
        assert proc.poll() is None, proc.communicate()
        time.sleep(0.1)
    raise AssertionError(f"fewer than {n} cells journaled after {limit} s")


def _finish(proc, cluster: Cluster, journal: Path, limit: float = 300) -> str:
    """The run's stderr once it ends; if it does not end within ``limit`` seconds, fail with
    what the run, the journal and the cluster's processes said (a hang is otherwise mute)."""
    try:
        return proc.communicate(timeout=limit)[1]
    except subprocess.TimeoutExpired:
        proc.kill()
        _, err = proc.communicate()
        alive = [p.poll() is None for p in cluster.workers]
        cells = len(journal.read_text().splitlines()) - 1 if journal.exists() else 0
        logs = "\n".join(f"--- {name}\n{cluster.log(name)}" for name in ("scheduler", "w0", "w1"))
        raise AssertionError(f"the run did not end in {limit:.0f} s; workers alive {alive}, "
                             f"{cells} cells journaled; its stderr:\n{err[-3000:]}\n{logs}") from None


@pytest.mark.slow
def test_worker_killed_mid_run_then_resume(tmp_path):
    X, y = load_wine(return_X_y=True, as_frame=True)  # bundled wine data (scikit-learn)
    table = tmp_path / "wine.csv"
    X.assign(target=y).to_csv(table, index=False)
    model = tmp_path / "slow.py"
    model.write_text(SLOW_MODEL)
    common = [table, "--target", "target", "--model", f"{model}:SlowTree", "--sizes", "20,40,60,90,130",
              "--repeats", "3", "--seed", "4", "--quiet"]
    local = run_cli("measure", *common, "--out", tmp_path / "local.json", timeout=300)
    assert local.returncode == 0, local.stderr
    expected = pd.DataFrame(json.loads((tmp_path / "local.json").read_text())["points"])[COMPARE]

    c = start_cluster(tmp_path / "killed")
    try:
        argv = [sys.executable, "-m", "curvefit.cli.main", "measure", *map(str, common),
                "--backend", "dask", "--scheduler", c.address]
        # 1. a worker killed mid-run: its cells run again on the other one
        out = tmp_path / "a.json"
        proc = subprocess.Popen([*argv, "--out", str(out)], stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True)
        _wait_for_cells(Path(f"{out}.journal"), 2, proc)
        os.kill(c.workers[0].pid, signal.SIGKILL)
        err = _finish(proc, c, Path(f"{out}.journal"))
        assert proc.returncode == 0, err
        got = pd.DataFrame(json.loads(out.read_text())["points"])[COMPARE]
        pd.testing.assert_frame_equal(expected, got)
        # 2. the run itself killed mid-run (one worker left): the journal stays whole and
        #    --resume completes it with the same points
        out = tmp_path / "b.json"
        proc = subprocess.Popen([*argv, "--out", str(out)], stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True)
        _wait_for_cells(Path(f"{out}.journal"), 3, proc)
        proc.kill()
        proc.wait(timeout=60)
        assert not out.exists()
        held = _journal_cells(Path(f"{out}.journal"))
        assert 3 <= len(held) < len(expected)
        r = run_cli("measure", *common, "--backend", "dask", "--scheduler", c.address,
                    "--out", out, "--resume", timeout=300)
        assert r.returncode == 0, r.stderr
        got = pd.DataFrame(json.loads(out.read_text())["points"])[COMPARE]
        pd.testing.assert_frame_equal(expected, got)
    finally:
        c.close()


def _nap(seconds):
    time.sleep(seconds)
    return seconds


@pytest.mark.slow
def test_a_cluster_left_without_workers_ends_the_run(tmp_path, monkeypatch):
    """Dask keeps tasks waiting while no worker is left; the run ends with one line."""
    from distributed import Client

    from curvefit.core.errors import InputError
    from curvefit.measuring import parallel

    monkeypatch.setattr(parallel, "NO_WORKER_GRACE", 3.0)
    c = Cluster(tmp_path / "one", n_workers=1)
    try:
        with Client(c.address, timeout="30s") as client:
            results = parallel.run_on_client(client, [(_nap, (0.5,), {}) for _ in range(6)])
            t0 = time.monotonic()
            with pytest.raises(InputError, match="has had no worker for 3 s; start workers"):
                for i, _ in enumerate(results):
                    if i == 0:
                        os.kill(c.workers[0].pid, signal.SIGKILL)
            assert time.monotonic() - t0 < 60
    finally:
        c.close()


@pytest.mark.slow
def test_shared_arguments_survive_the_death_of_the_worker_holding_them(tmp_path):
    """A shared argument is the result of a task (`parallel._share`), not scattered data:
    when the only worker holding it dies, the scheduler computes it again on the other.
    Scattered data would be lost for good (Dask: "caused the cluster to lose scattered
    data, which can't be recovered"), and the tasks needing it would wait for ever, as a
    worker killed during the broadcast once left a run here."""
    from distributed import Client

    from curvefit.measuring.parallel import _share

    c = start_cluster(tmp_path / "held")
    try:
        with Client(c.address, timeout="60s") as client:
            payload = np.arange(50_000, dtype=float)
            [held] = _share(client, [payload])
            held.result(timeout=60)
            holders = set(client.who_has([held])[held.key])
            assert len(holders) == 1
            names = {info["name"]: address
                     for address, info in client.scheduler_info()["workers"].items()}
            victim = next(w for i, w in enumerate(c.workers) if names.get(f"w{i}") in holders)
            os.kill(victim.pid, signal.SIGKILL)
            victim.wait(timeout=30)
            deadline = time.monotonic() + 60
            while set(client.scheduler_info()["workers"]) & holders:
                assert time.monotonic() < deadline, "the scheduler never noticed the dead worker"
                time.sleep(0.2)
            again = client.submit(np.sum, held, pure=False).result(timeout=60)
            assert again == payload.sum()
    finally:
        c.close()
