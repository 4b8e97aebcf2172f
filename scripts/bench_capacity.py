"""Calibration sweep of the gap model: linear classifiers in R^d (VC dimension d + 1).

For each dimension d and label-noise rate, inputs are standard normal in R^d, labels
are the sign of a random linear function, a share of them flipped at random. The
learner is logistic regression without a penalty (it fits a linear classifier with a
bias, VC dimension d + 1). The curve is measured twice, as a user would:

1. a pilot at ``--pilot-sizes`` (a geometric range), whose gap figure gives h0;
2. the sizes the tool recommends for h0 (``recommended_sizes``: 3·h0 to 30·h0),

and the second estimate is compared with d + 1: within ±35%, and covered by its
interval. A markdown table (d, noise, truth, estimate, interval, covered) is printed.
Run it under ``nice -n 19`` on a shared machine; ``--quick`` is a small grid.

    .venv/bin/python scripts/bench_capacity.py --quick
    .venv/bin/python scripts/bench_capacity.py --dims 5,10,20,35,50 --noise 0,0.1,0.25
"""

from __future__ import annotations

import argparse
import math
import time
import warnings

import numpy as np

import curvefit as cf
from curvefit.capacity.gap_model import recommended_sizes
from curvefit.core.formatting import format_capacity, format_range


def linear_task(d: int, noise: float, n_pool: int, n_test: int, seed: int):
    rng = np.random.default_rng(seed)
    w = rng.standard_normal(d)
    b = 0.3 * rng.standard_normal()

    def draw(n):
        X = rng.standard_normal((n, d))
        y = (X @ w + b > 0).astype(int)
        flip = rng.random(n) < noise
        return X, np.where(flip, 1 - y, y)

    X, y = draw(n_pool)
    Xt, yt = draw(n_test)
    return X, y, Xt, yt


def one_case(d: int, noise: float, args, seed: int) -> dict:
    from sklearn.linear_model import LogisticRegression

    model = LogisticRegression(C=1e6, max_iter=5000)
    truth = d + 1
    pilot = sorted({int(v) for v in np.geomspace(args.pilot_low, args.pilot_high, args.pilot_count)})
    n_pool = max(int(args.max_tau * 2 * truth * 1.2), max(pilot)) + 10
    X, y, Xt, yt = linear_task(d, noise, n_pool, args.test_rows, seed)
    t0 = time.perf_counter()
    curve = cf.measure(model, X, y, X_test=Xt, y_test=yt, sizes=pilot, repeats=args.repeats,
                       random_state=seed)
    est0 = cf.effective_capacity(curve, bootstrap=args.bootstrap, random_state=seed)
    h0 = est0.vc_dim if math.isfinite(est0.vc_dim) else float(truth)
    sizes = [s for s in recommended_sizes(h0, args.count) if s <= len(X)]
    curve = cf.measure(model, X, y, X_test=Xt, y_test=yt, sizes=sizes, repeats=args.repeats,
                       random_state=seed + 1)
    est = cf.effective_capacity(curve, bootstrap=args.bootstrap, random_state=seed)
    ok = math.isfinite(est.vc_dim) and est.status == "ok"
    return {"d": d, "noise": noise, "truth": truth, "pilot": est0.vc_dim, "pilot_status": est0.status,
            "sizes": f"{sizes[0]}–{sizes[-1]}", "estimate": est.vc_dim, "low": est.low,
            "high": est.high, "status": est.status,
            "within": ok and abs(est.vc_dim / truth - 1) <= 0.35,
            "covered": ok and est.low <= truth <= est.high, "regime": est.regime.split(" (")[0],
            "seconds": time.perf_counter() - t0}


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--dims", default="5,10,20,35,50")
    p.add_argument("--noise", default="0,0.1,0.25")
    p.add_argument("--seeds", type=int, default=1, help="Data sets per (d, noise).")
    p.add_argument("--repeats", type=int, default=5)
    p.add_argument("--count", type=int, default=6, help="Recommended sizes measured.")
    p.add_argument("--test-rows", type=int, default=5000)
    p.add_argument("--bootstrap", type=int, default=300)
    p.add_argument("--pilot-low", type=int, default=20)
    p.add_argument("--pilot-high", type=int, default=2000)
    p.add_argument("--pilot-count", type=int, default=8)
    p.add_argument("--max-tau", type=float, default=30.0)
    p.add_argument("--quick", action="store_true", help="d = 5, 20; noise 0, 0.25; 3 repeats.")
    args = p.parse_args()
    if args.quick:
        args.dims, args.noise, args.repeats, args.bootstrap = "5,20", "0,0.25", 3, 100
    warnings.filterwarnings("ignore")
    dims = [int(v) for v in args.dims.split(",")]
    noises = [float(v) for v in args.noise.split(",")]
    rows = []
    print("| d | noise | truth d+1 | pilot | sizes | estimate | 90% interval | within ±35% | covered "
          "| regime | s |")
    print("|---|---|---|---|---|---|---|---|---|---|---|")
    for d in dims:
        for noise in noises:
            for k in range(args.seeds):
                r = one_case(d, noise, args, seed=1000 * d + int(100 * noise) + 7 * k)
                rows.append(r)
                print(f"| {d} | {noise:.0%} | {r['truth']} | {format_capacity(r['pilot'])} "
                      f"| {r['sizes']} | {format_capacity(r['estimate'])} "
                      f"| {format_range(r['low'], r['high'], 'capacity')} "
                      f"| {'yes' if r['within'] else 'no'} | {'yes' if r['covered'] else 'no'} "
                      f"| {r['regime'] or '–'} | {r['seconds']:.0f} |", flush=True)
    within = np.mean([r["within"] for r in rows])
    covered = np.mean([r["covered"] for r in rows])
    ratio = [r["estimate"] / r["truth"] for r in rows if math.isfinite(r["estimate"])]
    print(f"\n{len(rows)} cases: within ±35% of d+1 in {within:.0%} (target 100%), interval covers "
          f"d+1 in {covered:.0%} (target ≥ 80%); estimate/truth median "
          f"{np.median(ratio):.2f}, range {min(ratio):.2f}–{max(ratio):.2f}.")


if __name__ == "__main__":
    main()
