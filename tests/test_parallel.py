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
