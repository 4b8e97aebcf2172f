"""The default `track` gate on a known regression and on seed noise.

Data: a generated table (scikit-learn's make_classification: 5,000 rows, 15 features,
5% of the labels flipped, a fixed seed); the model is scikit-learn's
LogisticRegression, scaled. A quarter of the rows is the test set (1,250 rows), sizes
60–3,000 (8 sizes), 4 repeats.

- Detection: C = 1.0 (baseline) against a crippled C = 0.0005, each trial with new seeds;
  once with the baseline's seed (a nightly job's fixed seed: the gate pairs the runs by
  repeat) and once with another seed (unpaired).
- False alarms: two seeds of the same model (C = 1.0), ``--trials`` times (unpaired: the
  harder case; the same seed gives the same numbers).

Each pair goes through the real gate: both runs are recorded in a temporary SQLite store
(no curve fit: the default gate reads the measured curves) and compared with
`Store.compare` as ``curvefit track`` does. Usage (a few minutes; run it niced):

    nice -n 19 .venv/bin/python scripts/bench_gate.py [--trials 20] [--detect 5]
"""

from __future__ import annotations

import argparse
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.datasets import make_classification
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from curvefit.history.figures import EFFICIENCY, ratio_sentence
from curvefit.history.store import Store
from curvefit.measuring import runner

SIZES = [int(round(v)) for v in np.geomspace(60, 3000, 8)]


def _model(C):
    return lambda: make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=1000))


def _curve(X, y, C, seed, repeats):
    return runner.measure(_model(C), X, y, sizes=SIZES, repeats=repeats, random_state=seed,
                          meta={"data_fingerprint": "bench"})


def _gate(folder: Path, base, cur, k: int):
    with Store(folder / f"h{k}.db") as st:
        st.record(base, None, series="s", headline=[], code_version=None)
        rid = st.record(cur, None, series="s", headline=[], code_version=None)
        return st.compare(rid)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=20, help="seed pairs for the false-alarm rate")
    ap.add_argument("--detect", type=int, default=5, help="trials of the crippled model")
    ap.add_argument("--repeats", type=int, default=4)
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    X, y = make_classification(n_samples=5000, n_features=15, n_informative=8, flip_y=0.05,
                               random_state=0)
    t0 = time.perf_counter()
    folder = Path(tempfile.mkdtemp())
    for paired in (True, False):
        caught, ratios = 0, []
        how = "same seed as the baseline (paired)" if paired else "another seed (unpaired)"
        for k in range(args.detect):
            base = _curve(X, y, 1.0, 100 + k, args.repeats)
            bad = _curve(X, y, 0.0005, 100 + k if paired else 200 + k, args.repeats)
            c = _gate(folder, base, bad, k + 50 * paired)
            caught += c.exit_code == 1
            ratios.append(c.efficiency.estimate)
            if k == 0 and paired:
                print(c.to_markdown())
            print(f"crippled, {how}, trial {k}: exit {c.exit_code}, {c.message}")
        print(f"detection, {how}: {caught}/{args.detect} crippled runs failed the gate; "
              f"ratio median {np.median(ratios):.2f}")
    passed, alarms = 0, {}
    for k in range(args.trials):
        c = _gate(folder, _curve(X, y, 1.0, 1000 + 2 * k, args.repeats),
                  _curve(X, y, 1.0, 1001 + 2 * k, args.repeats), 100 + k)
        passed += c.exit_code == 0
        for name in c.regressed:
            alarms[name] = alarms.get(name, 0) + 1
        print(f"same-model trial {k}: exit {c.exit_code}, {ratio_sentence(c.efficiency)}")
    print(f"false alarms: {args.trials - passed}/{args.trials} same-model pairs failed "
          f"({passed}/{args.trials} passed) {alarms}; gate: {', '.join(EFFICIENCY)}")
    print(f"({time.perf_counter() - t0:.0f} s)")


if __name__ == "__main__":
    main()
