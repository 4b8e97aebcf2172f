"""Benchmark: extrapolate from the small end of a measured curve to the whole training pool.

For each bundled scikit-learn dataset (digits, breast cancer, wine) × model (linear,
k-NN, boosted trees, random forest) the learning curve is measured with
``curvefit.measure`` (12 geometric sizes up to the whole pool, 5 repeats, 25% test).
Only the sizes ≤ 25% of the pool are fitted; the fit then predicts the error at the
whole pool, which was measured. Printed: the mean absolute error of curvefit's choice
(default settings), of an unweighted power-law-floor fit and of last-value (the last fitted value), the
two ratios, and how often curvefit's 90% interval covers the measured error.

Targets: ratio to power-law-floor ≤ 0.6, ratio to last-value ≤ 0.4, coverage 80–97%.

``--repeats K`` fits only the first K repeats of each size (e.g. 3, as in the demo), and
the bootstrap intervals are also measured, side by side in the same run, with the plain
bootstrap (repeats resampled within sizes): at the full pool and at the largest fitted
size, where the reference is the mean over all 5 repeats.

Run: ``.venv/bin/python scripts/bench_extrapolation.py [--jobs N] [--cache DIR] [--repeats K]``
(``--cache`` keeps the measured run files, so a second run only refits.)
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import curvefit as cf  # noqa: E402
from curvefit.core.curve import Curve  # noqa: E402
from curvefit.core.defaults import BOOTSTRAP  # noqa: E402
from curvefit.core.errors import FitWarning  # noqa: E402
from curvefit.fitting import bootstrap as fit_bootstrap  # noqa: E402
from curvefit.fitting import intervals as fit_intervals

FIT_FRACTION = 0.25


def models():
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return {
        "linear": lambda: make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)),
        "knn": lambda: make_pipeline(StandardScaler(), KNeighborsClassifier()),
        "boosted": lambda: HistGradientBoostingClassifier(max_iter=60, random_state=0),
        "forest": lambda: RandomForestClassifier(n_estimators=60, random_state=0),
    }


def datasets():
    from sklearn import datasets as d

    return {"digits": d.load_digits, "breast_cancer": d.load_breast_cancer, "wine": d.load_wine}


def measure_case(name, loader, model_name, factory, jobs, cache: Path | None) -> Curve:
    path = cache / f"{name}-{model_name}.json" if cache else None
    if path is not None and path.is_file():
        return Curve.read(path)
    X, y = loader(return_X_y=True)
    pool = len(y) - math.ceil(0.25 * len(y))
    start = max(10, 3 * len(np.unique(y)))
    sizes = sorted({int(round(s)) for s in np.geomspace(start, pool, 12)})
    curve = cf.measure(factory, X, y, sizes=sizes, repeats=5, test_size=0.25, n_jobs=jobs,
                       random_state=0)
    if path is not None:
        curve.write(path)
    return curve


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--cache", type=Path, default=None)
    ap.add_argument("--bootstrap", type=int, default=BOOTSTRAP)
    ap.add_argument("--repeats", type=int, default=5, help="repeats per size used in the fit")
    args = ap.parse_args()
    if args.cache:
        args.cache.mkdir(parents=True, exist_ok=True)
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    rows = []
    t_start = time.perf_counter()
    for dname, loader in datasets().items():
        for mname, factory in models().items():
            t0 = time.perf_counter()
            curve = measure_case(dname, loader, mname, factory, args.jobs, args.cache)
            ok = curve.ok_points()
            pool = float(ok["size"].max())
            measured = float(ok.loc[ok["size"] == pool, "test_error"].mean())
            small = curve.points[(curve.points["size"] <= FIT_FRACTION * pool)
                                 & (curve.points["repeat"] < args.repeats)]
            sub = Curve(small, dict(curve.meta))
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", FitWarning)
                choice = cf.fit_curve(sub, bootstrap=args.bootstrap, random_state=0)
                pred = choice.error_at(pool)
                n_fit = choice.largest_size
                full_at_fit = float(ok.loc[ok["size"] == n_fit, "test_error"].mean())
                at_fit = choice.error_at(n_fit)
                # the plain bootstrap without the noise floor, for comparison
                fit_bootstrap.BOOTSTRAP_KIND, fit_intervals.NOISE_FLOOR = "resample", False
                try:
                    plain_boot = cf.fit_curve(sub, bootstrap=args.bootstrap, random_state=0)
                    pp, pf = plain_boot.error_at(pool), plain_boot.error_at(n_fit)
                finally:
                    fit_bootstrap.BOOTSTRAP_KIND, fit_intervals.NOISE_FLOOR = "student", True
                plain = cf.fit_curve(sub, families="power-law-floor", weights="none", bootstrap=0)
                floor_law = float(plain.predict_family("power-law-floor", [pool])[0]) \
                    if plain.best == "power-law-floor" or "power-law-floor" in set(
                        plain.table.loc[plain.table["status"] != "failed", "family"]) \
                    else float(plain.error_at(pool).estimate)
            last_value = float(sub.ok_points().groupby("size")["test_error"].mean().iloc[-1])
            rows.append({
                "dataset": dname, "model": mname, "pool": int(pool),
                "fit_sizes": int(sub.ok_points()["size"].nunique()), "measured": measured,
                "family": choice.best, "choice": pred.estimate, "low": pred.low, "high": pred.high,
                "covered": pred.low <= measured <= pred.high, "power-law-floor": floor_law,
                "last-value": last_value,
                "covered_in_range": at_fit.low <= full_at_fit <= at_fit.high,
                "plain_covered": pp.low <= measured <= pp.high,
                "plain_covered_in_range": pf.low <= full_at_fit <= pf.high,
                "width": pred.high - pred.low, "plain_width": pp.high - pp.low,
                "seconds": time.perf_counter() - t0})
            r = rows[-1]
            print(f"{dname:14s} {mname:8s} pool {r['pool']:5d} fit on {r['fit_sizes']:2d} sizes | "
                  f"measured {measured:.4f} | {r['family']:6s} {r['choice']:.4f} "
                  f"[{r['low']:.4f}, {r['high']:.4f}] {'covers' if r['covered'] else 'MISSES'} | "
                  f"power-law-floor {floor_law:.4f} | last-value {last_value:.4f} | {r['seconds']:.0f} s",
                  flush=True)
    err = lambda key: np.mean([abs(r[key] - r["measured"]) for r in rows])  # noqa: E731
    mae_choice, mae_pow3, mae_last1 = err("choice"), err("power-law-floor"), err("last-value")
    coverage = np.mean([r["covered"] for r in rows])
    print()
    print("| dataset | model | pool | measured | choice (family) | 90% interval | power-law-floor "
          "| last-value |")
    print("|---|---|---:|---:|---:|---|---:|---:|")
    for r in rows:
        print(f"| {r['dataset']} | {r['model']} | {r['pool']} | {r['measured']:.4f} | "
              f"{r['choice']:.4f} ({r['family']}) | {r['low']:.4f}–{r['high']:.4f}"
              f"{'' if r['covered'] else ' (misses)'} | {r['power-law-floor']:.4f} | {r['last-value']:.4f} |")
    print()
    print(f"cases: {len(rows)}; mean absolute error at the full pool: curvefit {mae_choice:.4f}, "
          f"unweighted power-law-floor {mae_pow3:.4f}, last-value {mae_last1:.4f}")
    print(f"ratio to power-law-floor: {mae_choice / mae_pow3:.2f} (target ≤ 0.6); ratio to last-value: "
          f"{mae_choice / mae_last1:.2f} (target ≤ 0.4); coverage of 90% intervals: "
          f"{coverage:.0%} (target 80–97%)")
    med = lambda key, rs: np.median([abs(r[key] - r["measured"]) for r in rs])  # noqa: E731
    print(f"median absolute error: curvefit {med('choice', rows):.4f}, "
          f"power-law-floor {med('power-law-floor', rows):.4f}, "
          f"last-value {med('last-value', rows):.4f}")
    # boosted trees with default leaf sizes barely learn in the small end of these pools, so
    # their curves change regime after the fitted range; shown apart, not hidden
    rest = [r for r in rows if r["model"] != "boosted"]
    if rest:
        e = lambda key: np.mean([abs(r[key] - r["measured"]) for r in rest])  # noqa: E731
        print(f"without the boosted-tree cases ({len(rest)} cases): curvefit {e('choice'):.4f}, "
              f"power-law-floor {e('power-law-floor'):.4f}, last-value {e('last-value'):.4f}; "
              f"ratios {e('choice') / e('power-law-floor'):.2f} "
              f"and {e('choice') / e('last-value'):.2f}; "
              f"coverage {np.mean([r['covered'] for r in rest]):.0%}")
    cov = lambda key: np.mean([r[key] for r in rows])  # noqa: E731
    print(f"bootstrap, fitted on {args.repeats} repeats per size: coverage at the full pool "
          f"Student-t parametric with the noise floor {cov('covered'):.0%} vs plain resampling "
          f"{cov('plain_covered'):.0%}; "
          f"at the largest fitted size (against the 5-repeat mean) {cov('covered_in_range'):.0%} vs "
          f"{cov('plain_covered_in_range'):.0%}; median width at the pool "
          f"{np.median([r['width'] for r in rows]):.4f} vs {np.median([r['plain_width'] for r in rows]):.4f}")
    print(f"total {time.perf_counter() - t_start:.0f} s")


if __name__ == "__main__":
    main()
