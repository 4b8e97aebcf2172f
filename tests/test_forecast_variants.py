"""scripts/calibrate_forecasts.py --variants on one stored corpus curve (fast).

The full run (corpus/results/variants-corpus.md) scores other ways of forming the point
forecast; here its pieces are checked against the engine on k-NN for scikit-learn's wine
(corpus/curves/wine.csv.gz, measured by curvefit's runner).
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def calibrate():
    sys.path.insert(0, str(ROOT / "scripts"))
    spec = importlib.util.spec_from_file_location("_variants_calibrate",
                                                  ROOT / "scripts" / "calibrate_forecasts.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def records(calibrate):
    points, _ = calibrate.bench.load_corpus(ROOT / "corpus")
    rows = points[(points["dataset"] == "wine") & (points["model"] == "knn")]
    return calibrate.record_families(rows)


def test_recomputed_weights_give_the_engines_averaged_forecast(calibrate, records):
    assert records
    mean_sq = lambda o: float(np.mean([np.mean(e ** 2) for e in o]))  # noqa: E731
    for rec in records:
        weights = calibrate._weights_from(rec, mean_sq)
        shipped = {k: f["weight"] for k, f in rec["families"].items() if f["weight"] > 0}
        assert weights.keys() == shipped.keys()
        assert np.allclose(list(weights.values()), [shipped[k] for k in weights])
        assert np.allclose(calibrate._combine(rec, weights), rec["averaged"], rtol=1e-9)


def test_weighted_median_and_the_tail_correction(calibrate, records):
    rec = records[0]
    curves = np.array([f["curve"] for f in rec["families"].values() if f["weight"] > 0])
    median = calibrate._weighted_median(rec)
    assert np.all(median >= curves.min(axis=0) - 1e-12) and np.all(median <= curves.max(axis=0) + 1e-12)
    c = rec["averaged"]
    assert np.allclose(calibrate._tail(rec, c, 1.0, 0.0), c)
    # below 1 the drop beyond the largest fitted size shrinks, and nothing moves before it
    shrunk = calibrate._tail(rec, c, 0.5, 0.0)
    inside = rec["at"] <= rec["n_fit"]
    assert np.allclose(shrunk[inside], c[inside])
    i = int(np.argmax(rec["at"]))
    top = c[int(np.argmin(np.abs(rec["at"] - rec["n_fit"])))]
    assert abs(shrunk[i] - top) <= abs(c[i] - top) + 1e-12
