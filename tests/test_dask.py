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


def test_dead_scheduler_is_one_line_and_leaves_no_journal(tmp_path):
    import time

    from tests.conftest import run_cli

    X, y = load_wine(return_X_y=True, as_frame=True)  # bundled wine data
    table = tmp_path / "wine.csv"
    X.assign(target=y).to_csv(table, index=False)
    out = tmp_path / "run.json"
    start = time.monotonic()
    r = run_cli("measure", table, "--target", "target", "--model", "sklearn.tree:DecisionTreeClassifier",
                "--sizes", "20,60", "--repeats", "1", "--backend", "dask",
                "--scheduler", "tcp://127.0.0.1:1", "--out", out, "--quiet", timeout=120)
    lines = [line for line in r.stderr.splitlines() if line.strip()]
    assert r.returncode == 2 and "Traceback" not in r.stderr, r.stderr
    assert lines == ["curvefit: error: cannot connect to the Dask scheduler at tcp://127.0.0.1:1: "
                     "Connection refused"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["wine.csv"]  # no journal, no run file
    assert time.monotonic() - start < 60  # refused at once, not after the client's retries
