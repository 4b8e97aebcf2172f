"""Parallel execution gives the same results whatever the number of workers."""

import numpy as np
import pytest

from curvefit.core.errors import InputError
from curvefit.measuring.parallel import run_tasks


def _cell(seed):
    from threadpoolctl import threadpool_info

    rng = np.random.default_rng(seed)
    a = rng.normal(size=(60, 60))
    # One BLAS thread per task is what makes the reduction order (and the result) fixed.
    threads = {i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"}
    return seed, float(np.linalg.det(a @ a.T)), threads


def test_local_results_identical_for_one_and_two_jobs():
    tasks = [(_cell, (s,), {}) for s in range(6)]
    one = sorted(run_tasks(tasks, n_jobs=1))
    two = sorted(run_tasks(tasks, n_jobs=2))
    assert [r[:2] for r in one] == [r[:2] for r in two]
    assert all(r[2] <= {1} for r in one + two)


def test_unknown_backend_is_input_error():
    with pytest.raises(InputError, match="unknown backend"):
        list(run_tasks([(_cell, (0,), {})], backend="spark"))


def _what_arrived(arr, frame, i):
    import numpy as np

    block = frame.to_numpy()
    return i, isinstance(arr, np.memmap), not arr.flags.writeable, float(arr[i].sum()), float(block[i].sum())


def test_a_shared_large_table_reaches_local_workers_as_a_memory_map():
    import pandas as pd

    arr = np.random.default_rng(0).standard_normal((40_000, 8))  # 2.5 MB: above the 1 MB line
    frame = pd.DataFrame(arr.copy(), columns=[f"x{j}" for j in range(8)])
    for given in (arr, np.asfortranarray(arr)):  # row- and column-major
        out = sorted(run_tasks([(_what_arrived, (given, frame, i), {}) for i in range(4)], n_jobs=2))
        assert [r[1:3] for r in out] == [(True, True)] * 4  # a read-only map, not a pickled copy
        assert [r[3] for r in out] == [float(arr[i].sum()) for i in range(4)]
        assert [r[4] for r in out] == [float(arr[i].sum()) for i in range(4)]


def test_large_table_same_points_for_one_and_two_jobs():
    import pandas as pd
    from sklearn.linear_model import SGDClassifier

    import curvefit as cf

    rng = np.random.default_rng(3)
    X = rng.standard_normal((30_000, 6))  # 1.4 MB, shared through the scratch folder
    y = (X[:, 0] - X[:, 1] + 0.5 * rng.standard_normal(30_000) > 0).astype(int)
    cols = ["size", "repeat", "train_error", "test_error", "n_test_errors", "status", "model_seed"]
    kw = dict(sizes=[500, 4000, 20000], repeats=2, random_state=1)
    for data in (X, pd.DataFrame(X, columns=[f"f{j}" for j in range(6)])):
        one = cf.measure(SGDClassifier(), data, y, n_jobs=1, **kw)
        two = cf.measure(SGDClassifier(), data, y, n_jobs=2, **kw)
        pd.testing.assert_frame_equal(one.points[cols], two.points[cols])
