"""Benchmark: a million-row Parquet table, measured with --jobs 2, against scikit-learn.

The table: ``--rows`` x 20 float64 features drawn from a standard normal (seed 0), and
a 0/1 target ``y = [x . w + 0.5 e > 0]`` with ``w_j = (-1)^j / (j + 1)`` and ``e`` normal
(the known rule). It is written once to Parquet in ``--folder`` and reused.

Side by side, each in its own process whose whole process tree (workers included) is
sampled with psutil every 0.05 s:

A. ``curvefit measure table.parquet --target y --model sklearn.linear_model:SGDClassifier
   --jobs 2``, 8 sizes from 1% of the training pool up to all of it, 3 repeats.
B. scikit-learn's ``learning_curve`` on the same cells (curvefit's splits passed as an
   explicit cv, the same absolute sizes, ``shuffle=False``), ``n_jobs=2`` with one BLAS
   thread per worker, the table read from the same Parquet file.

Printed: the table's in-memory bytes (features + target as float64/int64 arrays), the
peak of the summed RSS and of the summed PSS (shared pages split between the processes
that map them) of each tree, their ratios to the table bytes (target: curvefit's peak
RSS <= 3 x table bytes), the wall times and their ratio (target A/B <= 1.1), and the
overhead per cell at several table sizes (``--sizes-of-tables`` and ``--rows``).

Overhead per cell, measured as the marginal cost of cells (start-up, the run's
whole-table work and the per-repeat split cancel out): in one process that has read the
table and imported everything once, ``curvefit.measure`` runs twice on it (journal on,
in process: no assumption about how busy two workers were), with 3 repeats of small
sizes between 100 and 1,000 rows, 8 sizes and then 41; overhead per cell = (the
difference in wall - the difference in the cells' summed fit+predict seconds) / the
difference in cells, the median of 3 such pairs (the machine is shared). Beside it, the
subsample read: the time to gather one of those cells' training and test rows from the
table as a row-major array (what a cell reads). Target: overhead <= 5 ms + the read.

Run: ``nice -n 19 .venv/bin/python scripts/bench_scale.py`` (about 10 minutes here);
``--quick`` uses 200,000 rows for a first look.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

N_FEATURES = 20
SEED = 0

SKLEARN_SIDE = r"""
import json, sys, time
import numpy as np, pyarrow.parquet as pq
from joblib import parallel_config
from sklearn.linear_model import SGDClassifier
from sklearn.model_selection import learning_curve
from curvefit.measuring.splits import RandomSplit

path, sizes, repeats, seed = sys.argv[1], json.loads(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
start = time.perf_counter()
t = pq.read_table(path)
names = [c for c in t.column_names if c != "y"]
X = np.column_stack([t.column(c).to_numpy() for c in names])
y = t.column("y").to_numpy()
del t
plans = RandomSplit(test_size=0.25, stratify=True).split(y, repeats, seed)
cv = [(p.pool, p.test) for p in plans]
with parallel_config(backend="loky", inner_max_num_threads=1):
    learning_curve(SGDClassifier(random_state=0), X, y, train_sizes=sizes, cv=cv, n_jobs=2,
                   shuffle=False, scoring="accuracy")
print(json.dumps({"wall": time.perf_counter() - start}))
"""


def make_table(path: Path, rows: int) -> None:
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(SEED)
    X = rng.standard_normal((rows, N_FEATURES))
    w = np.array([(-1) ** j / (j + 1) for j in range(N_FEATURES)])
    y = (X @ w + 0.5 * rng.standard_normal(rows) > 0).astype(np.int64)
    cols = {f"x{j}": X[:, j] for j in range(N_FEATURES)}
    cols["y"] = y
    tmp = path.with_suffix(".tmp")
    pq.write_table(pa.table(cols), tmp)
    os.replace(tmp, path)


def table_bytes(rows: int) -> int:
    return rows * (N_FEATURES + 1) * 8


class TreeSampler:
    """Peak summed RSS and PSS of a process and all its descendants."""

    def __init__(self, pid: int, every: float = 0.05):
        import psutil

        self.root = psutil.Process(pid)
        self.every, self.peak_rss, self.peak_pss, self.peak_procs = every, 0, 0, 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        import psutil

        while not self._stop.is_set():
            try:
                procs = [self.root, *self.root.children(recursive=True)]
            except psutil.Error:
                return
            rss = pss = 0
            for p in procs:
                try:
                    info = p.memory_full_info()
                except psutil.Error:
                    continue
                rss += info.rss
                pss += getattr(info, "pss", info.rss)
            self.peak_rss, self.peak_pss = max(self.peak_rss, rss), max(self.peak_pss, pss)
            self.peak_procs = max(self.peak_procs, len(procs))
            time.sleep(self.every)

    def stop(self) -> None:
        self._stop.set()
        self._thread.join()


def watched(argv: list[str], env: dict) -> tuple[float, TreeSampler, str]:
    start = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    sampler = TreeSampler(proc.pid)
    out, err = proc.communicate()
    wall = time.perf_counter() - start
    sampler.stop()
    if proc.returncode != 0:
        raise SystemExit(f"{argv[:4]} failed:\n{err[-3000:]}")
    return wall, sampler, out


def sizes_for(rows: int) -> list[int]:
    import numpy as np

    pool = rows - int(np.ceil(0.25 * rows))
    return sorted({int(round(s)) for s in np.geomspace(pool / 100, pool, 8)})


def run_curvefit(path: Path, rows: int, repeats: int, folder: Path, env: dict) -> dict:
    sizes = sizes_for(rows)
    out = folder / f"run-{rows}.json"
    for p in (out, Path(f"{out}.journal")):
        p.unlink(missing_ok=True)
    argv = [sys.executable, "-m", "curvefit.cli.main", "measure", str(path), "--target", "y",
            "--model", "sklearn.linear_model:SGDClassifier", "--sizes", ",".join(map(str, sizes)),
            "--repeats", str(repeats), "--seed", str(SEED), "--jobs", "2", "--out", str(out), "--quiet"]
    wall, sampler, _ = watched(argv, env)
    points = json.loads(out.read_text())["points"]
    fits = sum(float(p["fit_seconds"]) for p in points)
    return {"rows": rows, "sizes": sizes, "wall": wall, "rss": sampler.peak_rss, "pss": sampler.peak_pss,
            "procs": sampler.peak_procs, "cells": len(points), "fit_seconds": fits,
            "failed": sum(p["status"] != "ok" for p in points)}


MARGINAL_SIZES = ([100, 139, 193, 268, 373, 518, 720, 1000],
                  sorted({int(round(s)) for s in 10 ** (2 + 0.025 * np.arange(41))}))
MARGINAL_REPEATS = 3


MARGINAL_SIDE = r"""
import json, sys, tempfile, time
from pathlib import Path
import numpy as np
from curvefit.measuring.data import load_table, prepare
from curvefit.measuring.models import resolve_model
from curvefit.measuring.runner import measure
from curvefit.measuring.splits import RandomSplit

path, few, many, repeats, trials = sys.argv[1], *map(json.loads, sys.argv[2:6])
ds = prepare(load_table(path), "y")
spec = resolve_model("sklearn.linear_model:SGDClassifier", {})
folder = Path(tempfile.mkdtemp())
measure(spec, ds.X, ds.y, sizes=few[:2], repeats=1, random_state=0)  # warm-up: imports, caches
pairs, walls = [], []
for trial in range(trials):
    runs = []
    for sizes in (few, many):
        start = time.perf_counter()
        curve = measure(spec, ds.X, ds.y, sizes=sizes, repeats=repeats, random_state=0,
                        journal=folder / f"j{trial}-{len(sizes)}")
        runs.append((time.perf_counter() - start, float(curve.points["fit_seconds"].sum()),
                     len(curve.points)))
    (w0, f0, c0), (w1, f1, c1) = runs
    pairs.append(((w1 - w0) - (f1 - f0)) / (c1 - c0))
    walls.append((w0, w1))
X = np.ascontiguousarray(ds.X.to_numpy())
spent, cells = 0.0, 0
for plan in RandomSplit(test_size=0.25, stratify=True).split(ds.y, repeats, 0):
    for size in many:
        train = plan.train_indices(size)
        start = time.perf_counter()
        _ = (X[train], ds.y[train], X[plan.test], ds.y[plan.test])
        spent += time.perf_counter() - start
        cells += 1
print(json.dumps({"pairs": pairs, "walls": walls, "cells": c1 - c0, "read": spent / cells}))
"""


def marginal_overhead(path: Path, rows: int, env: dict, trials: int = 3) -> dict:
    """Overhead per cell: the median over ``trials`` of two in-process runs that differ
    only in their number of sizes; and the read of one cell's rows."""
    import statistics

    _, _, out = watched([sys.executable, "-c", MARGINAL_SIDE, str(path), *map(json.dumps, MARGINAL_SIZES),
                         str(MARGINAL_REPEATS), str(trials)], env)
    res = json.loads(out.strip().splitlines()[-1])
    return {"rows": rows, "cells": res["cells"], "overhead": statistics.median(res["pairs"]),
            "pairs": res["pairs"], "read": res["read"]}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--sizes-of-tables", default="10000,100000",
                    help="Smaller tables for the overhead per cell (besides --rows).")
    ap.add_argument("--folder", default=None,
                    help="Where the Parquet tables are kept (default: a temp folder).")
    ap.add_argument("--quick", action="store_true", help="200,000 rows and one smaller table.")
    args = ap.parse_args()
    if args.quick:
        args.rows, args.sizes_of_tables = 200_000, "20000"
    folder = Path(args.folder or tempfile.mkdtemp(prefix="curvefit-bench-scale-"))
    folder.mkdir(parents=True, exist_ok=True)
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    print(f"load average {os.getloadavg()[0]:.2f}; tables in {folder}")

    tables = sorted({int(s) for s in args.sizes_of_tables.split(",") if s} | {args.rows})
    results, marginal = [], []
    for rows in tables:
        path = folder / f"scale-{rows}.parquet"
        if not path.exists():
            make_table(path, rows)
        results.append(run_curvefit(path, rows, args.repeats, folder, env))
        marginal.append(marginal_overhead(path, rows, env))
    big = results[-1]
    path = folder / f"scale-{args.rows}.parquet"
    sk_wall, sk, _ = watched([sys.executable, "-c", SKLEARN_SIDE, str(path), json.dumps(big["sizes"]),
                              str(args.repeats), str(SEED)], env)

    tb = table_bytes(args.rows)
    mb = 1 / 2**20
    print(f"\n{args.rows:,} x {N_FEATURES} table: {tb * mb:.0f} MB in memory "
          "(float64 features, int64 target)")
    print(f"sizes {big['sizes']} x {args.repeats} repeats = {big['cells']} cells ({big['failed']} failed)")
    print(f"{'':28}{'peak RSS MB':>12}{'/table':>8}{'peak PSS MB':>13}{'/table':>8}{'procs':>7}{'wall s':>9}")
    for name, rss, pss, procs, wall in (("curvefit measure --jobs 2", big["rss"], big["pss"], big["procs"],
                                         big["wall"]),
                                        ("learning_curve n_jobs=2", sk.peak_rss, sk.peak_pss, sk.peak_procs,
                                         sk_wall)):
        print(f"{name:28}{rss * mb:12.0f}{rss / tb:8.2f}{pss * mb:13.0f}{pss / tb:8.2f}{procs:7d}{wall:9.1f}")
    print(f"curvefit peak RSS / table bytes = {big['rss'] / tb:.2f} (target <= 3)")
    print(f"wall ratio curvefit / learning_curve = {big['wall'] / sk_wall:.2f} (target <= 1.1)")
    print(f"\noverhead per cell, marginal: (extra wall - extra fit+predict seconds) / extra cells, "
          f"{len(MARGINAL_SIZES[0])} vs {len(MARGINAL_SIZES[1])} sizes of 100..1,000 rows x "
          f"{MARGINAL_REPEATS} repeats, in process,\nmedian of 3 pairs (the pairs in brackets); "
          "read = gathering one cell's train and test rows; target <= 5 ms + read")
    print(f"{'rows':>10}{'extra cells':>13}{'overhead/cell ms':>18}{'read/cell ms':>14}"
          f"{'beyond read ms':>16}   pairs ms")
    for m in marginal:
        beyond = (m["overhead"] - m["read"]) * 1000
        pairs = ", ".join(f"{p * 1000:.1f}" for p in m["pairs"])
        print(f"{m['rows']:>10,}{m['cells']:>13}{m['overhead'] * 1000:18.1f}{m['read'] * 1000:14.1f}"
              f"{beyond:16.1f}   [{pairs}]")
    print("\nthe full runs per table size: the old whole-run figure (2 x wall - fit+predict) / cells")
    print("(start-up and whole-table work charged to the cells) and the tree's peak RSS")
    print(f"{'rows':>10}{'cells':>7}{'wall s':>9}{'fit+predict s':>15}{'whole-run/cell ms':>19}"
          f"{'peak RSS MB':>13}")
    for r in results:
        over = (2 * r["wall"] - r["fit_seconds"]) / r["cells"]
        print(f"{r['rows']:>10,}{r['cells']:>7}{r['wall']:9.1f}{r['fit_seconds']:15.1f}{over * 1000:19.0f}"
              f"{r['rss'] * mb:13.0f}")
    small, big = results[0], results[-1]
    if big["rows"] > small["rows"]:
        grown = (big["rss"] - small["rss"]) / (table_bytes(big["rows"]) - table_bytes(small["rows"]))
        print(f"peak RSS grows by {grown:.2f} x the table's bytes from {small['rows']:,} "
              f"to {big['rows']:,} rows")


if __name__ == "__main__":
    main()
