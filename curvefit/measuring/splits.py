"""How a learning curve splits its data: one pluggable piece per kind of split.

A *splitter* turns the labels (and, for some kinds, group ids or an ordering) into one
`RepeatSplit` per repeat: the test rows, and the training pool in subsample order, so
that the subsample of size ``n`` is a prefix of the pool and every size contains the
smaller ones (nested subsamples). Four kinds exist:

* `RandomSplit` — a seeded train/test split per repeat, stratified by class for
  classification; the pool is ordered by a stratified permutation, so every prefix has
  each class in (almost exactly) its pool proportion.
* `GivenTestSplit` — a separate test set is used for every repeat; only the order of
  the training pool changes between repeats.
* `GroupSplit` — test and training pool are disjoint in groups (patients, sites,
  suppliers); sizes count rows or whole groups; stratified by each group's majority
  class where every class has at least two groups.
* `OrderSplit` — time-ordered data: each repeat holds out a window at the end of the
  order (rolling origin: repeat ``r`` moves the window ``r * step`` rows back), and the
  training subsample of size ``n`` is the ``n`` most recent rows before the window.
  Optionally rows whose group appears in the window are kept out of the pool.

To add a kind, write a class with ``kind``, ``size_unit``, ``split(y, repeats,
random_state)`` and ``describe()``, and pass it to ``measure(splitter=...)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Protocol, Sequence

import numpy as np

from curvefit.core.errors import InputError

# Rows of each class every default subsample contains at least (common practice:
# two rows let every class be seen and most models fit).
MIN_PER_CLASS = 2
# Smallest default subsample for a numeric target (common practice).
MIN_ROWS_REGRESSION = 10
# Share of test rows with an identical copy among the training rows above which the
# measure warns (common practice: a few coincidences are normal in any table).
LEAK_FRACTION = 0.05


class LeakWarning(UserWarning):
    """Identical feature rows on both sides of a split: a leak when they are copies of one
    entity (then split by it with ``groups``), harmless when distinct entities merely
    share coarse feature values."""


@dataclass(frozen=True, eq=False)
class RepeatSplit:
    """The rows of one repeat.

    Attributes
    ----------
    repeat : int
    test : ndarray
        Test row indices (into the test source: the data itself or the given test set).
    pool : ndarray
        Training pool row indices in subsample order; see `train_indices`.
    unit_ends : ndarray or None
        For sizes counted in groups: ``unit_ends[k]`` is the number of pool rows in the
        first ``k + 1`` groups of the pool. None when sizes count rows.
    pool_groups, test_groups : ndarray or None
        Group code of each pool / test row (group splits only).
    """

    repeat: int
    test: np.ndarray
    pool: np.ndarray
    unit_ends: np.ndarray | None = None
    pool_groups: np.ndarray | None = None
    test_groups: np.ndarray | None = None

    @property
    def n_units(self) -> int:
        """The largest size this repeat allows (rows, or groups)."""
        return len(self.pool) if self.unit_ends is None else len(self.unit_ends)

    def train_indices(self, size: int) -> np.ndarray:
        """Row indices of the subsample of ``size`` units (a prefix of the pool)."""
        if size > self.n_units:
            raise InputError(f"size {size} is larger than the training pool "
                             f"({self.n_units}); lower the largest size")
        if self.unit_ends is None:
            return self.pool[:size]
        return self.pool[:int(self.unit_ends[size - 1])]

    def cell_counts(self, size: int) -> dict:
        """Rows and groups on each side for the subsample of ``size`` (extra point columns)."""
        idx_len = len(self.train_indices(size))
        counts = {"n_train_rows": idx_len}
        if self.pool_groups is not None:
            counts["n_train_groups"] = int(len(np.unique(self.pool_groups[:idx_len])))
            counts["n_test_groups"] = int(len(np.unique(self.test_groups)))
        return counts


class Splitter(Protocol):
    """What the runner needs from a split."""

    kind: str
    size_unit: str

    def split(self, y: np.ndarray, repeats: int, random_state: int) -> list[RepeatSplit]:
        ...

    def describe(self) -> dict:
        ...


# ---------------------------------------------------------------------- helpers
def _repeat_rng(random_state: int, repeat: int, stream: int = 0) -> np.random.Generator:
    """A generator that depends only on (seed, repeat, stream), never on the run's shape."""
    return np.random.default_rng(np.random.SeedSequence(int(random_state), spawn_key=(repeat, stream)))


def _allocate(counts: np.ndarray, total: int, rng: np.random.Generator) -> np.ndarray:
    """Split ``total`` across strata in proportion to ``counts`` (largest remainder).

    Each stratum with at least two members gets at least one and keeps at least one.
    """
    counts = np.asarray(counts, dtype=np.int64)
    quota = total * counts / counts.sum()
    alloc = np.floor(quota).astype(np.int64)
    rest = total - alloc.sum()
    if rest > 0:
        # random tie-break so no class is favoured by its position
        order = np.lexsort((rng.random(len(counts)), -(quota - alloc)))
        alloc[order[:rest]] += 1
    low = np.where(counts >= 2, 1, 0)
    high = np.maximum(counts - 1, 0)
    alloc = np.clip(alloc, low, high)
    # restore the total after clipping, moving one unit at a time
    while alloc.sum() > total and (alloc > low).any():
        i = int(np.argmax(np.where(alloc > low, alloc - quota, -np.inf)))
        alloc[i] -= 1
    while alloc.sum() < total and (alloc < high).any():
        i = int(np.argmax(np.where(alloc < high, quota - alloc, -np.inf)))
        alloc[i] += 1
    return alloc


def stratified_order(labels: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """A permutation of ``range(len(labels))`` in which every prefix is near-proportional.

    Within each class the members are shuffled; member ``i`` of a class of ``m`` gets
    the key ``(i + u) / m`` with one uniform offset ``u`` per class, and the keys are
    sorted. Any prefix of length ``n`` then holds ``n * m / M`` members of the class,
    up to one, which is what lets the smallest subsample contain every class.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> order = stratified_order(np.array([0] * 6 + [1] * 3), rng)
    >>> sorted(order.tolist()) == list(range(9))
    True
    """
    labels = np.asarray(labels)
    keys = np.empty(len(labels))
    for cls in np.unique(labels):
        members = np.flatnonzero(labels == cls)
        members = members[rng.permutation(len(members))]
        keys[members] = (np.arange(len(members)) + rng.random()) / len(members)
    return np.lexsort((rng.random(len(labels)), keys))


def _stratified_test(labels: np.ndarray, n_test: int, rng: np.random.Generator) -> np.ndarray:
    """Boolean mask of ``n_test`` test members, stratified by ``labels``."""
    classes, inverse, counts = np.unique(labels, return_inverse=True, return_counts=True)
    alloc = _allocate(counts, n_test, rng)
    mask = np.zeros(len(labels), dtype=bool)
    for k in range(len(classes)):
        members = np.flatnonzero(inverse == k)
        mask[members[rng.permutation(len(members))[:alloc[k]]]] = True
    return mask


def _first_full_prefix(labels_in_order: np.ndarray, classes: np.ndarray, per_class: int) -> int:
    """Shortest prefix holding ``per_class`` of every class that the sequence has."""
    need = 0
    for cls in classes:
        pos = np.flatnonzero(labels_in_order == cls)
        if len(pos) == 0:
            continue
        need = max(need, int(pos[min(per_class, len(pos)) - 1]) + 1)
    return need


def _n_test(test_size: float | int, n: int, what: str) -> int:
    if isinstance(test_size, (int, np.integer)) and not isinstance(test_size, bool) and test_size >= 1:
        k = int(test_size)
    elif 0 < float(test_size) < 1:
        # same rounding as scikit-learn's ShuffleSplit: ceil for the test side
        k = int(math.ceil(float(test_size) * n))
    else:
        raise InputError(f"test size {test_size!r} must be a fraction in (0, 1) or a count >= 1")
    if k >= n:
        raise InputError(f"the test split takes {k} of {n} {what}, leaving none to train on; "
                         "lower --test-fraction or add data")
    return k


# ---------------------------------------------------------------------- splitters
@dataclass
class RandomSplit:
    """Per repeat, a seeded (stratified, for classes) train/test split of the rows.

    Parameters
    ----------
    test_size : float or int
        Fraction of rows (rounded up, as scikit-learn does) or a count.
    stratify : bool
        Keep class proportions in the test set and in every subsample.
    """

    test_size: float | int = 0.25
    stratify: bool = True
    kind: str = field(default="random", init=False)
    size_unit: str = field(default="rows", init=False)

    def split(self, y, repeats, random_state):
        y = np.asarray(y)
        n = len(y)
        n_test = _n_test(self.test_size, n, "rows")
        out = []
        for r in range(repeats):
            rng = _repeat_rng(random_state, r)
            if self.stratify:
                test_mask = _stratified_test(y, n_test, rng)
            else:
                test_mask = np.zeros(n, dtype=bool)
                test_mask[rng.permutation(n)[:n_test]] = True
            pool = np.flatnonzero(~test_mask)
            order = stratified_order(y[pool], rng) if self.stratify else rng.permutation(len(pool))
            out.append(RepeatSplit(r, np.flatnonzero(test_mask), pool[order]))
        return out

    def describe(self):
        return {"kind": self.kind, "test_size": self.test_size, "stratify": self.stratify,
                "size_unit": self.size_unit}


@dataclass
class GivenTestSplit:
    """A fixed, separate test set; each repeat reorders the whole training table."""

    n_test: int
    stratify: bool = True
    kind: str = field(default="given_test", init=False)
    size_unit: str = field(default="rows", init=False)

    def split(self, y, repeats, random_state):
        y = np.asarray(y)
        test = np.arange(self.n_test)
        out = []
        for r in range(repeats):
            rng = _repeat_rng(random_state, r)
            order = stratified_order(y, rng) if self.stratify else rng.permutation(len(y))
            out.append(RepeatSplit(r, test, order))
        return out

    def describe(self):
        return {"kind": self.kind, "n_test": self.n_test, "stratify": self.stratify,
                "size_unit": self.size_unit}


def _group_codes(groups: Sequence, n: int, what: str = "group") -> tuple[np.ndarray, np.ndarray]:
    import pandas as pd

    g = groups.reset_index(drop=True) if isinstance(groups, pd.Series) else pd.Series(list(groups))
    if len(g) != n:
        raise InputError(f"the {what} column has {len(g)} values for {n} rows")
    if g.isna().any():
        raise InputError(f"the {what} column has {int(g.isna().sum())} missing values; "
                         f"fill them or drop those rows")
    values = g.to_numpy()
    try:
        # ids sorted as they compare (numbers numerically), as GroupShuffleSplit does
        uniques, codes = np.unique(values, return_inverse=True)
    except TypeError:  # mixed types: compare as text
        uniques, codes = np.unique(g.astype(str).to_numpy(), return_inverse=True)
    return codes.astype(np.int64).reshape(-1), uniques


@dataclass
class GroupSplit:
    """Test set and training pool disjoint in groups.

    With ``stratify=False`` (or a numeric target, or a majority class held by fewer
    than two groups) the test groups of repeat ``r`` are exactly those of
    scikit-learn's ``GroupShuffleSplit(n_splits, test_size, random_state=seed)``
    split ``r``; the training groups follow that permutation. With stratification the
    test groups are drawn per majority class (same count, our own seeding).

    Parameters
    ----------
    groups : array-like
        One group id per row.
    test_size : float or int
        Fraction (rounded up) or count of *groups* held out.
    size_unit : {"rows", "groups"}
        What a size counts. With rows, the subsample of ``n`` takes whole groups in
        pool order and the first rows of the next one.
    """

    groups: Sequence
    test_size: float | int = 0.25
    size_unit: str = "rows"
    stratify: bool = True
    kind: str = field(default="groups", init=False)

    def __post_init__(self):
        if self.size_unit not in ("rows", "groups"):
            raise InputError(f"unknown size unit {self.size_unit!r}; use rows or groups")

    def _group_labels(self, codes, y, n_groups):
        """Majority class of each group (ties: the smallest class)."""
        classes, yc = np.unique(y, return_inverse=True)
        table = np.zeros((n_groups, len(classes)), dtype=np.int64)
        np.add.at(table, (codes, yc), 1)
        return table.argmax(axis=1)

    def split(self, y, repeats, random_state):
        y = np.asarray(y)
        codes, uniques = _group_codes(self.groups, len(y))
        n_groups = len(uniques)
        if n_groups < 2:
            raise InputError("the group column has a single group; a grouped split needs "
                             "at least two (one to test on, one to train on)")
        n_test = _n_test(self.test_size, n_groups, "groups")
        labels = self._group_labels(codes, y, n_groups) if self.stratify else None
        stratified = False
        if labels is not None and len(np.unique(labels)) > 1:
            counts = np.bincount(labels)
            # "where possible": every majority class needs a group on each side
            stratified = bool((counts[counts > 0] >= 2).all())
        self._stratified_used = bool(stratified)
        legacy = np.random.RandomState(int(random_state))
        rows_of = [np.flatnonzero(codes == g) for g in range(n_groups)]
        out = []
        for r in range(repeats):
            rng = _repeat_rng(random_state, r)
            if stratified:
                test_mask = _stratified_test(labels, n_test, rng)
                test_g = np.flatnonzero(test_mask)
                train_g = np.flatnonzero(~test_mask)
                train_g = train_g[stratified_order(labels[train_g], rng)]
            else:
                # the permutation GroupShuffleSplit draws for split r
                perm = legacy.permutation(n_groups)
                test_g, train_g = np.sort(perm[:n_test]), perm[n_test:]
            test = np.flatnonzero(np.isin(codes, test_g))
            within = _repeat_rng(random_state, r, stream=1)
            parts = [rows_of[g][within.permutation(len(rows_of[g]))] for g in train_g]
            pool = np.concatenate(parts) if parts else np.array([], dtype=np.int64)
            ends = np.cumsum([len(p) for p in parts]) if self.size_unit == "groups" else None
            out.append(RepeatSplit(r, test, pool, ends, codes[pool], codes[test]))
        return out

    def describe(self):
        return {"kind": self.kind, "test_size": self.test_size, "size_unit": self.size_unit,
                "stratify": bool(getattr(self, "_stratified_used", self.stratify))}


@dataclass
class OrderSplit:
    """Rolling-origin split for time-ordered rows.

    Repeat ``r`` (``r = 0`` is the most recent) tests on the ``L`` rows ending
    ``r * step`` rows before the last one, ``L = ceil(test_size * n)``; the training
    pool is every earlier row, most recent first, so the subsample of size ``n`` is the
    ``n`` most recent rows before the window. The default ``step`` is ``ceil(L /
    repeats)`` (overlapping windows that keep most history in every repeat); with
    ``step = L`` the windows are those of scikit-learn's ``TimeSeriesSplit(n_splits=
    repeats, test_size=L)`` and the subsample of ``n`` equals its training set with
    ``max_train_size=n``.

    With ``groups``, rows of the pool whose group also appears in the test window are
    left out, so time order and groups are both honoured.
    """

    order: Sequence
    test_size: float | int = 0.25
    step: int | None = None
    groups: Sequence | None = None
    kind: str = field(default="order", init=False)
    size_unit: str = field(default="rows", init=False)

    def split(self, y, repeats, random_state):
        import pandas as pd

        n = len(y)
        order = pd.Series(self.order)
        if len(order) != n:
            raise InputError(f"the order column has {len(order)} values for {n} rows")
        if order.isna().any():
            raise InputError(f"the order column has {int(order.isna().sum())} missing values; "
                             "fill them or drop those rows")
        # stable sort: rows with equal order keep their table order
        ranked = order.reset_index(drop=True).sort_values(kind="mergesort").index.to_numpy()
        window = _n_test(self.test_size, n, "rows")
        step = int(self.step) if self.step else max(1, math.ceil(window / max(repeats, 1)))
        codes = None
        if self.groups is not None:
            codes, _ = _group_codes(self.groups, n)
        self._step = step
        out = []
        for r in range(repeats):
            end = n - r * step
            start = end - window
            if start < 1:
                raise InputError(f"repeat {r + 1} would need its test window to start before "
                                 f"the first row ({repeats} repeats of a {window}-row window "
                                 f"moved {step} rows each); use fewer repeats or a smaller "
                                 "--test-fraction")
            test = np.sort(ranked[start:end])
            pool = ranked[:start][::-1]
            if codes is not None:
                pool = pool[~np.isin(codes[pool], np.unique(codes[test]))]
                if len(pool) == 0:
                    raise InputError("--order and --groups cannot both be honoured: every row "
                                     f"before repeat {r + 1}'s test window belongs to a group "
                                     "that is also in the window; drop --groups or --order")
            out.append(RepeatSplit(r, test, pool, None,
                                   None if codes is None else codes[pool],
                                   None if codes is None else codes[test]))
        return out

    def describe(self):
        d = {"kind": self.kind, "test_size": self.test_size, "size_unit": self.size_unit,
             "step": getattr(self, "_step", self.step), "training": "most recent rows before the window"}
        if self.groups is not None:
            d["groups"] = "pool rows of groups in the test window left out"
        return d


# ---------------------------------------------------------------------- sizes and checks
def default_floor(plans: list[RepeatSplit], y: np.ndarray, classification: bool,
                  per_class: int = MIN_PER_CLASS) -> int:
    """Smallest size whose subsample has ``per_class`` rows of every class, in every repeat.

    Classes absent from a repeat's pool are not asked for. For a numeric target the
    floor is ``MIN_ROWS_REGRESSION`` rows (or the whole pool when smaller).
    """
    y = np.asarray(y)
    if not classification:
        return max(1, min(MIN_ROWS_REGRESSION, min(p.n_units for p in plans)))
    classes = np.unique(y)
    floor = 1
    for p in plans:
        rows = _first_full_prefix(y[p.pool], classes, per_class)
        if p.unit_ends is None:
            floor = max(floor, rows)
        else:
            floor = max(floor, int(np.searchsorted(p.unit_ends, rows)) + 1)
    return floor


def default_sizes(floor: int, largest: int, count: int = 10) -> list[int]:
    """About ``count`` geometric steps from ``floor`` to ``largest``, rounded, distinct.

    Examples
    --------
    >>> default_sizes(20, 1000, 5)
    [20, 53, 141, 376, 1000]
    """
    if largest <= floor:
        return [int(largest)]
    return sorted({int(round(v)) for v in np.geomspace(floor, largest, count)})


def _row_hashes(X) -> np.ndarray:
    import pandas as pd

    frame = X if isinstance(X, pd.DataFrame) else pd.DataFrame(np.asarray(X))
    return pd.util.hash_pandas_object(frame, index=False).to_numpy()


def shared_rows_message(fraction: float, X) -> str:
    """The warning about test rows with an identical copy among the training rows.

    It says what was seen (the share, and how many distinct feature rows the table
    has) and when it matters, without presuming a leak: copies of one entity (a person,
    machine or site measured twice) make the test error optimistic and call for a
    group split, while distinct entities that give the same coarse answers (survey
    scales, a few categories) are harmless.

    Examples
    --------
    >>> X = np.array([[1, 0], [1, 0], [0, 1], [1, 1]])
    >>> print(shared_rows_message(0.33, X))  # doctest: +NORMALIZE_WHITESPACE
    33% of the test rows have an identical copy among the training rows (the 2 features
    take 3 distinct combinations over 4 rows). If a copy is the same entity measured twice
    (a person, machine or site), the test error is optimistic: split by the column that
    names the entity with --groups. If distinct entities share coarse feature values,
    the copies are harmless.
    """
    n_rows, n_features = int(np.shape(X)[0]), int(np.shape(X)[1]) if np.ndim(X) > 1 else 1
    n_distinct = len(np.unique(_row_hashes(X))) if n_rows else 0
    share = f"{fraction:.0%}" if fraction >= 0.1 else f"{fraction:.1%}"
    what = "features take" if n_features != 1 else "feature takes"
    kinds = "combinations" if n_features != 1 else "values"
    return (f"{share} of the test rows have an identical copy among the training rows "
            f"(the {n_features} {what} {n_distinct:,} distinct {kinds} over {n_rows:,} rows). "
            "If a copy is the same entity measured twice (a person, machine or site), the "
            "test error is optimistic: split by the column that names the entity with "
            "--groups. If distinct entities share coarse feature values, the copies are "
            "harmless.")


def shared_duplicate_fraction(X, test: np.ndarray, pool: np.ndarray) -> float:
    """Fraction of test rows whose feature values appear identically in the training pool.

    A random split of a table with near-copies of rows (repeated measurements of one
    patient, one machine) puts copies on both sides, and the test error then rewards
    memorising; this is the cheap exact-duplicate version of that check.

    Examples
    --------
    >>> X = np.array([[1, 2], [1, 2], [3, 4], [5, 6]])
    >>> shared_duplicate_fraction(X, np.array([0, 2]), np.array([1, 3]))
    0.5
    """
    hashes = _row_hashes(X)
    if len(test) == 0:
        return 0.0
    return float(np.isin(hashes[test], hashes[pool]).mean())
