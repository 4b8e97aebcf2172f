"""The Dask backend: a real two-worker LocalCluster gives the local run's points."""

import pandas as pd
import pytest
from sklearn.datasets import load_wine
from sklearn.ensemble import RandomForestClassifier

import curvefit as cf

pytest.importorskip("distributed")

COMPARE = ["size", "repeat", "train_error", "test_error", "n_test", "n_test_errors", "status",
           "message", "model_seed"]


def test_local_cluster_matches_local_run():
    # bundled wine data; a randomised model, so the per-cell seeding is exercised too
    X, y = load_wine(return_X_y=True)
    kw = dict(sizes=[20, 60, 130], repeats=2, random_state=5)
    model = RandomForestClassifier(n_estimators=10)
    local = cf.measure(model, X, y, n_jobs=1, **kw)
    dask = cf.measure(model, X, y, n_jobs=2, backend="dask", **kw)
    assert dask.meta["backend"] == "dask"
    pd.testing.assert_frame_equal(local.points[COMPARE], dask.points[COMPARE])
