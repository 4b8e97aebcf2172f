"""Benchmark of the max-deviation probe: wall time and relative error against known VC dimensions.

References for the known values:
- linear threshold classifiers with a bias in R^d: VC dimension d+1 (Vapnik &
  Chervonenkis 1971; Cover 1965);
- a linear threshold on all monomials of degree <= 2 of d inputs (the constant
  included as the bias): VC dimension C(d+2, 2), the same fact in feature space
  (points in general position there);
- 1-nearest-neighbour memorises distinct points (common practice): above any range.

Everything is run side by side in one process so that ratios (n_jobs=2 against
n_jobs=1) are comparable on a shared machine; the load average is printed with the
figures.

Run: .venv/bin/python scripts/bench_probe.py [--quick] [--seeds N]
(The gap model's calibration sweep is scripts/bench_capacity.py.)
"""

from __future__ import annotations

import argparse
import math
import os
import time


def cases(quick: bool):
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import PolynomialFeatures, StandardScaler
    from sklearn.svm import LinearSVC

    def svm():
        return LinearSVC(C=100.0, max_iter=20000)

    out = [(f"LinearSVC(C=100), d={d}", svm(), d, d + 1) for d in (5, 10, 20)]
    d = 5
    poly = make_pipeline(PolynomialFeatures(2, include_bias=False), StandardScaler(), svm())
    out.append((f"degree-2 polynomial LinearSVC, d={d}", poly, d, math.comb(d + 2, 2)))
    if not quick:
        out.append(("1-nearest-neighbour, d=5", KNeighborsClassifier(n_neighbors=1), 5, math.inf))
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="skip the 1-NN case and the n_jobs ratio")
    ap.add_argument("--seeds", type=int, default=1, help="seeds per case (spread of the estimate)")
    args = ap.parse_args()

    from curvefit.capacity import probe_capacity

    print(f"load average before: {', '.join(f'{x:.1f}' for x in os.getloadavg())} "
          f"on {os.cpu_count()} cores (shared machine: wall times vary with load)")
    head = (f"{'learner':40s} {'true h':>7s} {'h est':>8s} {'90% interval':>16s} {'rel err':>8s} "
            f"{'cover':>5s} {'cells':>6s} {'wall s':>7s}")
    print(head)
    for name, model, d, true_h in cases(args.quick):
        for seed in range(args.seeds):
            t0 = time.perf_counter()
            est = probe_capacity(model, n_features=d, repeats=10, random_state=seed,
                                 max_n=2000 if math.isfinite(true_h) else 400, bootstrap=200)
            wall = time.perf_counter() - t0
            if est.above_range:
                shown, rel, cover = f"≥{est.vc_dim:.0f}", "-", "-"
                interval = "above range"
            else:
                shown = f"{est.vc_dim:.2f}"
                rel = f"{(est.vc_dim - true_h) / true_h:+.1%}" if math.isfinite(true_h) else "-"
                cover = "yes" if est.low <= true_h <= est.high else "no"
                interval = f"{est.low:.2f}–{est.high:.2f}"
            print(f"{name:40s} {true_h:7.0f} {shown:>8s} {interval:>16s} {rel:>8s} {cover:>5s} "
                  f"{est.extra['cells']:6d} {wall:7.1f}", flush=True)
    if not args.quick:
        from sklearn.svm import LinearSVC

        model = LinearSVC(C=100.0, max_iter=20000)
        times = {}
        for jobs in (1, 2):
            t0 = time.perf_counter()
            est = probe_capacity(model, n_features=20, repeats=10, random_state=0, n_jobs=jobs,
                                 bootstrap=200)
            times[jobs] = (time.perf_counter() - t0, est.vc_dim)
        print(f"d=20 with n_jobs=1: {times[1][0]:.1f} s, n_jobs=2: {times[2][0]:.1f} s, "
              f"ratio {times[1][0] / times[2][0]:.2f}; same estimate: {times[1][1] == times[2][1]}")
    print(f"load average after: {', '.join(f'{x:.1f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
