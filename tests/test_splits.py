"""Splits: stratified random, groups, time order; checked against scikit-learn's
GroupShuffleSplit and TimeSeriesSplit, a hypothesis property, and a measured leak."""

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.datasets import load_breast_cancer
from sklearn.model_selection import GroupShuffleSplit, TimeSeriesSplit
from sklearn.neighbors import KNeighborsClassifier

import curvefit as cf
from curvefit.core.errors import InputError
from curvefit.measuring.splits import (
    GroupSplit,
    LeakWarning,
    OrderSplit,
    RandomSplit,
    default_floor,
    stratified_order,
)


def test_stratified_order_keeps_every_prefix_proportional():
    rng = np.random.default_rng(1)
    labels = np.repeat([0, 1, 2], [70, 25, 5])
    order = stratified_order(labels, rng)
    assert sorted(order) == list(range(100))
    seen = labels[order]
    for n in range(1, 101):
        for cls, m in [(0, 70), (1, 25), (2, 5)]:
            assert abs(np.sum(seen[:n] == cls) - n * m / 100) <= 1.0 + 1e-9


def test_random_split_sizes_strata_and_nesting():
    y = np.repeat([0, 1], [90, 30])
    plans = RandomSplit(0.25).split(y, 3, 0)
    for p in plans:
        # ceil(0.25 * 120) = 30 test rows, as scikit-learn's ShuffleSplit rounds
        assert len(p.test) == 30 and len(np.intersect1d(p.test, p.pool)) == 0
        assert len(p.test) + len(p.pool) == 120
        assert np.sum(y[p.test] == 1) == 8 or np.sum(y[p.test] == 1) == 7
        small, large = p.train_indices(10), p.train_indices(60)
        assert set(small) <= set(large)
    assert not np.array_equal(plans[0].test, plans[1].test)


def test_default_floor_puts_every_class_in_every_subsample():
    # imbalanced: keep 12 malignant of breast_cancer's 212 (bundled with scikit-learn)
    X, y = load_breast_cancer(return_X_y=True)
    keep = np.concatenate([np.flatnonzero(y == 0)[:12], np.flatnonzero(y == 1)])
    y = y[keep]
    plans = RandomSplit(0.25).split(y, 5, 3)
    floor = default_floor(plans, y, classification=True)
    for p in plans:
        sub = y[p.train_indices(floor)]
        assert np.sum(sub == 0) >= 2 and np.sum(sub == 1) >= 2
    curve = cf.measure(KNeighborsClassifier(1), X[keep], y, repeats=2, metric="balanced_error")
    assert curve.points["size"].min() == default_floor(RandomSplit(0.25).split(y, 2, 0), y, True)
    assert curve.meta["metric_info"]["transform"] == "1 - balanced accuracy"


def test_groups_match_group_shuffle_split_when_unstratified():
    # Reference library: sklearn.model_selection.GroupShuffleSplit. Same seed, same
    # test fraction: the held-out rows and the training rows coincide.
    rng = np.random.default_rng(0)
    groups = rng.integers(0, 23, size=300)
    y = rng.normal(size=300)
    plans = GroupSplit(groups, test_size=0.3, stratify=False).split(y, 4, 42)
    ref = GroupShuffleSplit(n_splits=4, test_size=0.3, random_state=42).split(np.zeros((300, 1)), y, groups)
    for p, (train, test) in zip(plans, ref):
        assert np.array_equal(p.test, test)
        assert np.array_equal(np.sort(p.pool), train)


def test_stratified_groups_keep_group_count_and_class_shares():
    # documented difference from GroupShuffleSplit: the same number of test groups
    # (ceil(0.25 * 40) = 10), drawn per majority class rather than uniformly
    groups = np.repeat(np.arange(40), 5)
    y = np.repeat(np.r_[np.zeros(30, int), np.ones(10, int)], 5)
    for p in GroupSplit(groups, test_size=0.25).split(y, 3, 0):
        test_groups = np.unique(groups[p.test])
        assert len(test_groups) == 10
        assert np.sum(y[test_groups * 5] == 1) in (2, 3)  # 10 * 10/40 = 2.5


@settings(max_examples=40, deadline=None)
@given(n_rows=st.integers(20, 150), n_groups=st.integers(2, 25), seed=st.integers(0, 10_000),
       unit=st.sampled_from(["rows", "groups"]), n_classes=st.integers(2, 3))
def test_no_group_on_both_sides(n_rows, n_groups, seed, unit, n_classes):
    rng = np.random.default_rng(seed)
    groups = rng.integers(0, n_groups, size=n_rows)
    if len(np.unique(groups)) < 2:
        return
    y = rng.integers(0, n_classes, size=n_rows)
    for p in GroupSplit(groups, test_size=0.3, size_unit=unit).split(y, 3, seed):
        test_groups = set(groups[p.test])
        for size in range(1, p.n_units + 1):
            assert not test_groups & set(groups[p.train_indices(size)])


def test_grouped_measure_records_split_and_counts():
    rng = np.random.default_rng(0)
    groups = np.repeat(np.arange(30), 6)
    X = rng.normal(size=(180, 3))
    y = (X[:, 0] > 0).astype(int)
    curve = cf.measure(KNeighborsClassifier(3), X, y, groups=groups, size_unit="groups",
                       sizes=[5, 20], repeats=2)
    pts = curve.points
    assert curve.meta["split"]["kind"] == "groups" and curve.meta["size_unit"] == "groups"
    assert (pts["n_train_groups"] == pts["size"]).all()
    assert (pts["n_train_rows"] == 6 * pts["size"]).all() and (pts["n_test_groups"] == 8).all()


def test_order_matches_time_series_split_with_step_equal_to_window():
    # Reference library: sklearn.model_selection.TimeSeriesSplit(n_splits, test_size).
    # With step = window the test windows coincide, and the subsample of n rows is
    # the training set of TimeSeriesSplit(..., max_train_size=n).
    n, window, repeats = 200, 30, 3
    when = np.random.default_rng(2).permutation(n)  # time order of the rows
    y = np.zeros(n)
    plans = OrderSplit(when, test_size=window, step=window).split(y, repeats, 0)
    rank = np.argsort(when, kind="stable")  # row index of the k-th oldest row
    for size in (10, 50, 110):
        tss = TimeSeriesSplit(n_splits=repeats, test_size=window, max_train_size=size)
        for fold, (train, test) in enumerate(tss.split(np.zeros((n, 1)))):
            p = plans[repeats - 1 - fold]
            assert np.array_equal(p.test, np.sort(rank[test]))
            assert np.array_equal(np.sort(p.train_indices(size)), np.sort(rank[train]))


def test_order_default_step_is_a_rolling_origin():
    n = 100
    plans = OrderSplit(np.arange(n), test_size=0.2).split(np.zeros(n), 5, 0)
    step = math.ceil(20 / 5)
    for r, p in enumerate(plans):
        assert p.test.max() == n - 1 - r * step and len(p.test) == 20
        assert p.pool[0] == p.test.min() - 1  # most recent row first
    with pytest.raises(InputError, match="before the first row"):
        OrderSplit(np.arange(n), test_size=0.5, step=20).split(np.zeros(n), 5, 0)


def test_order_with_groups_leaves_window_groups_out():
    n = 120
    groups = np.arange(n) % 10
    groups[100:] = 99  # the last 20 rows: a new group only
    groups[95:100] = 3
    plans = OrderSplit(np.arange(n), test_size=30, groups=groups).split(np.zeros(n), 1, 0)
    p = plans[0]
    assert not set(groups[p.test]) & set(groups[p.pool])


def test_exact_duplicates_across_a_random_split_warn():
    rng = np.random.default_rng(0)
    base = rng.normal(size=(40, 3))
    X = np.repeat(base, 3, axis=0)
    y = np.repeat(rng.integers(0, 2, 40), 3)
    with pytest.warns(LeakWarning, match="identical copy"):
        cf.measure(KNeighborsClassifier(1), X, y, sizes=[30], repeats=1)
    with warnings.catch_warnings():
        warnings.simplefilter("error", LeakWarning)
        cf.measure(KNeighborsClassifier(1), X, y, groups=np.repeat(np.arange(40), 3), sizes=[30], repeats=1)


def _near_duplicate_groups(n_groups, rng, per_group=8):
    """Each group: one centre, rows a tiny jitter of it, one label weakly tied to the centre."""
    centres = rng.normal(size=(n_groups, 4))
    labels = (centres[:, 0] + 1.5 * rng.normal(size=n_groups) > 0).astype(int)
    X = np.repeat(centres, per_group, axis=0) + 0.01 * rng.normal(size=(n_groups * per_group, 4))
    return X, np.repeat(labels, per_group), np.repeat(np.arange(n_groups), per_group)


def test_leak_demonstration_random_split_is_far_below_grouped():
    # Measured check (synthetic, invented for this test): rows of a group are near
    # duplicates, so a random split lets 1-NN find a copy of every test row.
    rng = np.random.default_rng(7)
    X, y, g = _near_duplicate_groups(100, rng)
    model = KNeighborsClassifier(1)
    random = cf.measure(model, X, y, sizes=[100, 600], repeats=3).summary()
    grouped = cf.measure(model, X, y, groups=g, sizes=[100, 600], repeats=3).summary()
    Xf, yf, _ = _near_duplicate_groups(300, rng)  # fresh groups, never seen
    fresh = 1 - model.fit(X, y).score(Xf, yf)
    r_full, g_full = random["test_mean"].iloc[-1], grouped["test_mean"].iloc[-1]
    assert r_full < 0.03
    assert g_full > 0.2
    assert abs(g_full - fresh) < 0.12
