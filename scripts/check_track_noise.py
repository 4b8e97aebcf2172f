"""How often does the `track` gate fire on noise, and does it catch a weaker model?

False alarms: the same model on the same data measured with different seeds (so only
the train/test splits change); every ordered pair of runs is compared with the default
tolerances. Detection: the same comparison against weaker variants of the model
(much stronger regularisation; two features instead of thirty).

Data: scikit-learn's bundled breast-cancer set. Usage:

    .venv/bin/python scripts/check_track_noise.py [--repeats 3] [--seeds 6] [--bootstrap 200]

Prints counts; the machine's load changes only the run time, not the counts.
"""

from __future__ import annotations

import argparse
import itertools
import time
import warnings

from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from curvefit.fitting.engine import fit_curve
from curvefit.history import figures as tracking
from curvefit.measuring import runner

SIZES = [25, 41, 67, 110, 182, 300]
TOLERANCES = {"test_error_at_ref": 0.01, "samples_for_target": "25%"}


def _model(C=1.0):
    return lambda: make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=500))


def _figures(make, X, y, seed, repeats, bootstrap):
    curve = runner.measure(make, X, y, sizes=SIZES, repeats=repeats, random_state=seed)
    fit = fit_curve(curve, bootstrap=bootstrap, random_state=seed)
    figs = tracking.headline_figures(fit, reference_size=SIZES[-1], target_error=0.05)
    return {f.name: f for f in figs}


def _alarms(base_runs, cur_runs, tol, same=False):
    pairs = [(a, b) for a, b in itertools.product(range(len(base_runs)), range(len(cur_runs)))
             if not (same and a == b)]
    flagged, per = 0, {}
    for a, b in pairs:
        reg = [n for n, f in cur_runs[b].items()
               if tracking.compare_figure(f, base_runs[a].get(n), tol.get(n)).status == "regressed"]
        flagged += bool(reg)
        for n in reg:
            per[n] = per.get(n, 0) + 1
    return flagged, len(pairs), per


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--seeds", type=int, default=6)
    ap.add_argument("--bootstrap", type=int, default=200)
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    X, y = load_breast_cancer(return_X_y=True)
    tol = tracking.resolve_tolerances(TOLERANCES)
    t0 = time.perf_counter()
    base = [_figures(_model(), X, y, s, args.repeats, args.bootstrap) for s in range(args.seeds)]
    flagged, n, per = _alarms(base, base, tol, same=True)
    print(f"false alarms, same model, {args.seeds} seeds, {args.repeats} repeats: "
          f"{flagged}/{n} ordered pairs flagged {per}")
    variants = {"C=1e-3": (_model(1e-3), X), "2 features": (_model(), X[:, :2])}
    for name, (make, Xv) in variants.items():
        cur = [_figures(make, Xv, y, 100 + s, args.repeats, args.bootstrap)
               for s in range(min(4, args.seeds))]
        flagged, n, per = _alarms(base[:4], cur, tol)
        print(f"detection, {name}: {flagged}/{n} pairs flagged {per}")
    print(f"({time.perf_counter() - t0:.0f} s)")


if __name__ == "__main__":
    main()
