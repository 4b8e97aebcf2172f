"""Benchmark: curvefit's runner against scikit-learn's learning_curve, side by side.

Same work for all three: the bundled digits data, LogisticRegression, 8 sizes x 5
repeats, the same train/test indices (curvefit's splits passed to learning_curve as an
explicit cv). Timed:

A. ``curvefit.measure(..., n_jobs=2)``
B. ``learning_curve`` with its defaults (n_jobs=None, BLAS threads as the library sets them)
C. ``learning_curve`` hand-tuned: ``n_jobs=2`` and one BLAS thread per worker
   (``threadpoolctl.threadpool_limits(1)``, which loky passes on to its workers)

Each is run once to warm up (worker start, imports), then ``--rounds`` times in turn;
the medians are compared. Targets: A/B <= 0.5, A/C <= 1.1. The machine may be shared:
the load average is printed beside the figures.

Run: ``.venv/bin/python scripts/bench_measure.py [--rounds 3]``
"""

from __future__ import annotations

import argparse
import os
import statistics
import time


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=3)
    args = ap.parse_args()

    import numpy as np
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import learning_curve
    from threadpoolctl import threadpool_limits

    import curvefit as cf
    from curvefit.measuring.splits import RandomSplit

    X, y = load_digits(return_X_y=True)
    repeats, seed = 5, 0
    plans = RandomSplit(0.25).split(y, repeats, seed)
    pool = min(len(p.pool) for p in plans)
    sizes = sorted({int(round(v)) for v in np.geomspace(30, pool, 8)})
    cv = [(p.pool, p.test) for p in plans]
    model = LogisticRegression(max_iter=1000)

    def run_curvefit():
        return cf.measure(model, X, y, sizes=sizes, repeats=repeats, random_state=seed, n_jobs=2)

    def run_default():
        return learning_curve(model, X, y, train_sizes=sizes, cv=cv, shuffle=False)

    def run_tuned():
        with threadpool_limits(limits=1):
            return learning_curve(model, X, y, train_sizes=sizes, cv=cv, shuffle=False, n_jobs=2)

    runs = {"curvefit measure (n_jobs=2)": run_curvefit,
            "learning_curve defaults": run_default,
            "learning_curve n_jobs=2, 1 BLAS thread": run_tuned}
    for fn in runs.values():  # warm up
        fn()
    times = {k: [] for k in runs}
    for _ in range(args.rounds):
        for name, fn in runs.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)

    # the same cells give the same test scores: check before reporting speed
    curve = run_curvefit()
    _, _, test_scores = run_default()
    mine = curve.points.pivot(index="size", columns="repeat", values="test_error").to_numpy()
    assert np.array_equal(mine, 1.0 - test_scores), "curvefit and learning_curve disagree"

    med = {k: statistics.median(v) for k, v in times.items()}
    a, b, c = med.values()
    load = os.getloadavg()
    print(f"digits {X.shape}, LogisticRegression, {len(sizes)} sizes x {repeats} repeats, "
          f"{args.rounds} rounds after warm-up; cores {os.cpu_count()}, load average "
          f"{load[0]:.1f}/{load[1]:.1f}/{load[2]:.1f}")
    for name, v in times.items():
        print(f"  {name:42s} median {statistics.median(v):6.2f} s   "
              f"(runs: {', '.join(f'{t:.2f}' for t in v)})")
    print(f"  ratio curvefit / learning_curve defaults   {a / b:5.2f}   (target <= 0.5)")
    print(f"  ratio curvefit / learning_curve hand-tuned {a / c:5.2f}   (target <= 1.1)")


if __name__ == "__main__":
    main()
