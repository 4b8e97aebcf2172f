"""Benchmark: Dask with two separate worker processes against --jobs 2 locally.

A 100,000 x 20 table (standard normal features, seed 0; 0/1 target by the rule of
scripts/bench_scale.py: ``y = [x . w + 0.5 e > 0]``, ``w_j = (-1)^j / (j + 1)``), a random
forest of about a second per fit at the largest size, 6 sizes x 2 repeats. Side by side
in one run: ``curvefit.measure(..., n_jobs=2)`` (loky) and the same call with
``backend="dask"`` against a scheduler and two workers started with Dask's own commands
(``dask scheduler``, ``dask worker --nthreads 1 --no-nanny``) on loopback. Printed: both
wall times, their ratio (target dask / local <= 1.3) and whether the points are identical
(they must be).

Run: ``nice -n 19 .venv/bin/python scripts/bench_dask.py`` (a few minutes).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

COMPARE = ["size", "repeat", "train_error", "test_error", "n_test", "n_test_errors", "status", "model_seed"]


def start_cluster(folder: Path, n_workers: int = 2):
    dask = Path(sys.executable).with_name("dask")
    env = dict(os.environ, OMP_NUM_THREADS="1")
    env.pop("MALLOC_TRIM_THRESHOLD_", None)
    info = folder / "scheduler.json"
    procs = [subprocess.Popen([str(dask), "scheduler", "--host", "127.0.0.1", "--port", "0",
                               "--no-dashboard", "--scheduler-file", str(info)],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)]
    deadline = time.monotonic() + 90
    while not info.exists():
        if time.monotonic() > deadline:
            raise SystemExit("the Dask scheduler did not start")
        time.sleep(0.2)
    time.sleep(0.2)
    address = json.loads(info.read_text())["address"]
    for i in range(n_workers):
        procs.append(subprocess.Popen([str(dask), "worker", address, "--nthreads", "1", "--no-nanny",
                                       "--no-dashboard", "--host", "127.0.0.1",
                                       "--local-directory", str(folder / f"w{i}")],
                                      stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env))
    from distributed import Client

    with Client(address, timeout="60s") as client:
        client.wait_for_workers(n_workers, timeout=120)
    return address, procs


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=100_000)
    args = ap.parse_args()

    import numpy as np
    import pandas as pd
    from sklearn.ensemble import RandomForestClassifier

    import curvefit as cf

    rng = np.random.default_rng(0)
    X = rng.standard_normal((args.rows, 20))
    w = np.array([(-1) ** j / (j + 1) for j in range(20)])
    y = (X @ w + 0.5 * rng.standard_normal(args.rows) > 0).astype(int)
    pool = args.rows - int(np.ceil(0.25 * args.rows))
    sizes = sorted({int(s) for s in np.geomspace(pool / 30, pool, 6)})
    model = RandomForestClassifier(n_estimators=8, max_depth=14)
    kw = dict(sizes=sizes, repeats=2, random_state=0)
    print(f"load average {os.getloadavg()[0]:.2f}; {args.rows:,} rows x 20, sizes {sizes} x 2 repeats")

    folder = Path(tempfile.mkdtemp(prefix="curvefit-bench-dask-"))
    address, procs = start_cluster(folder)
    try:
        cf.measure(model, X[:2000], y[:2000], sizes=[200, 1000], repeats=1, n_jobs=2)  # warm-up
        cf.measure(model, X[:2000], y[:2000], sizes=[200, 1000], repeats=1, n_jobs=2,
                   backend="dask", scheduler=address)
        start = time.perf_counter()
        local = cf.measure(model, X, y, n_jobs=2, **kw)
        t_local = time.perf_counter() - start
        start = time.perf_counter()
        remote = cf.measure(model, X, y, n_jobs=2, backend="dask", scheduler=address, **kw)
        t_dask = time.perf_counter() - start
    finally:
        for p in procs:
            p.terminate()
        for p in procs:
            p.wait(timeout=30)
        shutil.rmtree(folder, ignore_errors=True)
    same = local.points[COMPARE].equals(remote.points[COMPARE])
    fits = float(pd.to_numeric(local.points["fit_seconds"]).max())
    print(f"largest fit + predict: {fits:.2f} s")
    print(f"local --jobs 2: {t_local:.1f} s; dask, 2 separate workers: {t_dask:.1f} s")
    print(f"ratio dask / local = {t_dask / t_local:.2f} (target <= 1.3); identical points: {same}")


if __name__ == "__main__":
    main()
