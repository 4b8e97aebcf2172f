"""The per-size means, standard errors and weights a curve fit works on.

A measured ``Curve`` holds one row per (size, repeat) cell; the fit works on one mean
per size of the fitted quantity (test error, train error, or the gap test − train),
with its standard error across repeats and a least-squares weight.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from curvefit.core.curve import BASELINE_COLUMN, Curve
from curvefit.core.errors import InputError
from curvefit.core.stats import sem, theil_sen

ON_CHOICES = ("test", "train", "gap")
WEIGHT_CHOICES = ("sem", "index", "none")
# Leading sizes at which the model predicted as the constant predictor does are left out
# of the fit when at least this many sizes remain after them (the families describe
# learning; sizes before it starts only bend them into steps).
MIN_LEARNING_SIZES = 4
# A standard error below this fraction of the median one is raised to it, so a size whose
# repeats happen to agree cannot dominate the fit (common practice).
SEM_FLOOR_FRACTION = 0.2


@dataclass
class FitData:
    """The fitted quantity per measured size (internal to the fitting part)."""

    sizes: np.ndarray          # (m,) distinct sizes, ascending
    y: np.ndarray              # (m,) per-size mean of the fitted quantity (natural scale)
    sem: np.ndarray            # (m,) its standard error across repeats (NaN for one repeat)
    w: np.ndarray              # (m,) least-squares weights, mean 1
    test: np.ndarray           # (m,) per-size mean test error
    train: np.ndarray          # (m,) per-size mean train error (NaN where absent)
    w_test: np.ndarray
    w_train: np.ndarray
    cells: list                # per size: (k, 2) array of (test, train) over repeats
    sign: float                # +1, or −1 when fitting the (growing) train error
    on: str
    weights: str
    # (m,) variance a fresh data set would add to each mean (shared test and training
    # rows between repeats; see dataset_variance); zeros when it cannot be told
    data_var: np.ndarray | None = None
    # how data_var was found: "meta" (pool and test size from the run) or "assumed"
    data_source: str = "none"
    # the test error equals the constant predictor's in every cell (see constant_so_far)
    constant: bool = False
    # leading sizes left out of the fit: the model predicted as the constant predictor
    # does in every cell there (see before_learning)
    left_out: np.ndarray = field(default_factory=lambda: np.array([]))

    @property
    def m(self) -> int:
        return len(self.sizes)

    @property
    def n_max(self) -> float:
        return float(self.sizes.max()) if self.m else math.nan

    @property
    def repeats(self) -> np.ndarray:
        """Repeats measured at each size."""
        return np.array([len(c) for c in self.cells], dtype=int)


def prepare_data(curve: Curve, on: str, weights: str, leave_out: bool = True) -> FitData:
    """Per-size means, standard errors and weights of the quantity ``on``; without the
    sizes before the model learned (`before_learning`) unless ``leave_out`` is False."""
    ok = curve.ok_points()
    flat_start = before_learning(curve)
    left_out = flat_start if leave_out else np.array([])
    t = ok["test_error"].to_numpy(dtype=float)
    r = ok["train_error"].to_numpy(dtype=float)
    s = ok["size"].to_numpy(dtype=float)
    keep = np.isfinite(t) & np.isfinite(s) & ~np.isin(s, left_out)
    if on in ("train", "gap"):
        keep &= np.isfinite(r)
    t, r, s = t[keep], r[keep], s[keep]
    if not len(s):
        what = "finite test error" if on == "test" else "finite test and train error"
        raise InputError(f"the curve has no finished cells with a {what}; nothing to fit")
    sizes = np.unique(s)
    cells = [np.column_stack([t[s == v], r[s == v]]) for v in sizes]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        test = np.array([np.mean(c[:, 0]) for c in cells])
        train = np.array([np.nanmean(c[:, 1]) if np.isfinite(c[:, 1]).any() else math.nan
                          for c in cells])
        sem_test = np.array([sem(c[:, 0]) for c in cells])
        sem_train = np.array([sem(c[:, 1]) for c in cells])
        sem_gap = np.array([sem(c[:, 0] - c[:, 1]) for c in cells])
    y, y_sem = {"test": (test, sem_test), "train": (train, sem_train),
                "gap": (test - train, sem_gap)}[on]
    n_test = ok["n_test"].to_numpy(dtype=float)[keep] if "n_test" in ok else np.array([])
    # the spread of the sizes where the model learns sets the fresh-data-set variance (a
    # flat start, kept for answers, adds none: it predicted as the constant predictor)
    learns = ~np.isin(sizes, flat_start)
    repeats = np.array([len(c) for c in cells])
    data_var, source = dataset_variance(sizes[learns], y_sem[learns], test[learns],
                                        repeats[learns], on, curve.metric,
                                        split_sizes(curve.meta, n_test, sizes))
    if data_var is not None and not learns.all():
        data_var = np.concatenate([np.zeros((~learns).sum()), data_var])
    return FitData(sizes=sizes, y=y, sem=y_sem, w=least_squares_weights(sizes, y_sem, weights),
                   test=test, train=train,
                   w_test=least_squares_weights(sizes, sem_test, weights),
                   w_train=least_squares_weights(sizes, sem_train, weights),
                   cells=cells, sign=-1.0 if on == "train" else 1.0, on=on, weights=weights,
                   data_var=data_var, data_source=source,
                   constant=on == "test" and constant_so_far(curve), left_out=left_out)


def _as_constant(curve: Curve) -> tuple[np.ndarray, np.ndarray] | None:
    """(size, matches) of the finished cells with a finite test error: ``matches`` is True
    where the model's test error equals the constant predictor's on the same test rows
    (the ``baseline_error`` column, to 1e-6 relative). None without that column, when a
    cell lacks the constant predictor's error, and for a constant model by design."""
    if not curve.has_baseline or constant_by_design(curve.meta):
        return None
    ok = curve.ok_points()
    t = ok["test_error"].to_numpy(dtype=float)
    b = ok[BASELINE_COLUMN].to_numpy(dtype=float)
    keep = np.isfinite(t)
    if not keep.any() or not np.isfinite(b[keep]).all():
        return None
    return (ok["size"].to_numpy(dtype=float)[keep],
            np.isclose(t[keep], b[keep], rtol=1e-6, atol=1e-12))


def before_learning(curve: Curve) -> np.ndarray:
    """The leading measured sizes at which the model predicted as the constant predictor
    does in every cell, when at least ``MIN_LEARNING_SIZES`` sizes follow them (else
    none): the curve shows learning only from the first size after them, and a fit
    through the flat start would bend every family into a step (scikit-learn's
    histogram boosting cannot split fewer than 40 rows, say).

    Examples
    --------
    >>> import pandas as pd
    >>> n = [10, 20, 40, 80, 160, 320]
    >>> c = Curve.from_table(pd.DataFrame({"size": n, "test_error": [.6, .6, .3, .2, .15, .12],
    ...                                    "baseline_error": [.6] * 6}))
    >>> before_learning(c)
    array([10., 20.])
    """
    cells = _as_constant(curve)
    if cells is None:
        return np.array([])
    size, matches = cells
    sizes = np.unique(size)
    constant = np.array([bool(matches[size == v].all()) for v in sizes])
    lead = int(np.argmin(constant)) if not constant.all() else len(sizes)
    return sizes[:lead] if 0 < lead and len(sizes) - lead >= MIN_LEARNING_SIZES else np.array([])


def constant_so_far(curve: Curve) -> bool:
    """True when, in every finished cell, the model's test error equals the constant
    predictor's on the same test rows (the ``baseline_error`` column, to 1e-6 relative):
    the model has predicted as a constant does at every measured size, so the curve
    shows no learning yet and cannot say when it will start (a boosted tree whose
    minimum leaf size exceeds what the rows allow, say). False without that column, and
    for a model that is a constant predictor by design (`constant_by_design`), whose
    flat curve is all there is.

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [20, 20, 40], "test_error": [.6, .62, .6],
    ...                                    "baseline_error": [.6, .62, .6]}))
    >>> constant_so_far(c)
    True
    """
    cells = _as_constant(curve)
    return cells is not None and bool(cells[1].all())


def constant_by_design(meta: dict | None) -> bool:
    """True when the run's metadata names one of scikit-learn's constant predictors
    (``sklearn.dummy``), measured on purpose as a reference.

    Examples
    --------
    >>> constant_by_design({"model": {"spec": "sklearn.dummy:DummyRegressor"}})
    True
    >>> constant_by_design({"model": {"spec": "my.models:make", "name": "DummyClassifier"}})
    True
    >>> constant_by_design({"model": {"spec": "sklearn.ensemble:HistGradientBoostingClassifier"}})
    False
    """
    model = (meta or {}).get("model")
    if not isinstance(model, dict):
        return False
    return (str(model.get("spec") or "").startswith("sklearn.dummy")
            or str(model.get("name") or "") in ("DummyClassifier", "DummyRegressor"))


# Share of the rows held out for testing when a curve does not say (the runner's default).
ASSUMED_TEST_FRACTION = 0.25
# 1/(1 − ρ) is capped here: where repeats share almost all training rows their spread no
# longer tells the training-set variance.
MAX_SHARED_FRACTION = 0.9


def split_sizes(meta: dict, n_test_points, sizes) -> dict:
    """The rows behind a curve: ``pool`` (training pool), ``n_test`` (test rows per
    repeat), ``n_rows`` (pool + test rows a repeat splits), ``fixed_test`` (one test set
    for every repeat) and ``known`` (the pool came from the run, not assumed).

    Without a pool in the run's metadata the largest measured size is taken as the whole
    pool (a curve usually runs to the data in hand); without a test size, the runner's
    default test fraction.
    """
    meta = meta or {}
    pool = meta.get("n_pool")
    known = isinstance(pool, (int, float)) and pool > 0
    pool = float(pool) if known else float(np.max(sizes))
    n_test = meta.get("n_test")
    if not (isinstance(n_test, (int, float)) and n_test > 0):
        finite = np.asarray(n_test_points, dtype=float)
        finite = finite[np.isfinite(finite) & (finite > 0)]
        n_test = float(np.median(finite)) if len(finite) else \
            pool * ASSUMED_TEST_FRACTION / (1 - ASSUMED_TEST_FRACTION)
    split = meta.get("split") if isinstance(meta.get("split"), dict) else {}
    # the runner names a separate test set "given_test" (measuring/splits.GivenTestSplit)
    fixed = split.get("kind") == "given_test" or meta.get("test_data") is not None
    return {"pool": pool, "n_test": float(n_test), "n_rows": pool + float(n_test),
            "fixed_test": bool(fixed), "known": bool(known)}


def dataset_variance(sizes, sems, test_means, repeats, on: str, metric: str, rows: dict):
    """Variance a fresh data set would add to each per-size mean, and its source.

    Repeats re-split one table, so their spread misses what they share: with a test set
    drawn afresh per repeat from N rows, two repeats share a fraction τ = n_test/N of
    their test rows and ρ = n/N of their training rows of size n (one fixed test set:
    τ = 1, ρ = n/pool). With s² the spread across repeats (a power law in n fitted through
    the sizes), V_test = e(1 − e)/n_test the
    binomial variance of one test set's error rate (0 for other losses) and
    V_train = (s² − (1 − τ)·V_test)/(1 − ρ) the training-set part, the shared part is
    ρ·V_train + τ·V_test: what a fresh data set would move and the standard error
    across repeats cannot see.

    Examples
    --------
    >>> rows = {"pool": 300.0, "n_test": 100.0, "n_rows": 400.0, "fixed_test": False,
    ...         "known": True}
    >>> v, source = dataset_variance(np.array([100.0, 300.0]), np.array([0.01, 0.01]),
    ...                              np.array([0.2, 0.1]), np.array([5, 5]), "test",
    ...                              "error", rows)
    >>> source, np.round(v, 6).tolist()     # here the shared test rows dominate
    ('meta', [0.0004, 0.000225])

    References
    ----------
    .. [1] C. Nadeau and Y. Bengio, "Inference for the generalization error", Machine
           Learning 52, 2003 (the variance that resampling one data set misses, from
           the overlap of training and test sets).
    """
    sizes = np.asarray(sizes, dtype=float)
    k = np.asarray(repeats, dtype=float)
    spread = np.where(np.isfinite(sems) & (k >= 2), np.asarray(sems, dtype=float) ** 2 * k, 0.0)
    seen = spread > 0
    if seen.sum() >= 3:
        # one size's spread from 3–5 repeats is rough (±70%); a power law in n through all
        # sizes smooths it before 1/(1 − ρ) magnifies it, a robust (Theil–Sen) line in
        # log space so that the wild spread of the smallest sizes, where a model can barely
        # be fitted, does not lift it at the sizes that matter
        slope, level = theil_sen(np.log(sizes[seen]), np.log(spread[seen]))
        spread = np.exp(level + slope * np.log(sizes))
    n_rows = rows["n_rows"]
    if rows["fixed_test"]:
        tau, rho = 1.0, np.minimum(sizes / rows["pool"], 1.0)
    else:
        tau, rho = rows["n_test"] / n_rows, np.minimum(sizes / n_rows, 1.0)
    rho = np.minimum(rho, MAX_SHARED_FRACTION)
    v_test = np.zeros(len(sizes))
    if on != "train" and metric in ("error", "zero_one", "balanced_error"):
        e = np.clip(np.asarray(test_means, dtype=float), 0.0, 1.0)
        v_test = e * (1 - e) / rows["n_test"]
    v_train = np.maximum(spread - (1 - tau) * v_test, 0.0) / (1 - rho)
    shared = rho * v_train + tau * v_test
    return np.where(np.isfinite(shared), shared, 0.0), ("meta" if rows["known"] else "assumed")


def least_squares_weights(sizes: np.ndarray, sems: np.ndarray, kind: str) -> np.ndarray:
    """Least-squares weights normalised to mean 1.

    ``"sem"``: inverse variance of the per-size mean, each standard error raised to at
    least ``SEM_FLOOR_FRACTION`` × the median one (sizes without repeats get the median);
    ``"index"``: proportional to the size's rank, larger sizes weighted more, as in
    Figueroa et al. 2012; ``"none"``: equal.

    Examples
    --------
    >>> least_squares_weights(np.array([10.0, 20.0, 40.0]), np.full(3, np.nan), "index").tolist()
    [0.5, 1.0, 1.5]
    """
    m = len(sizes)
    if kind == "none" or m == 0:
        w = np.ones(m)
    elif kind == "index":
        w = np.arange(1, m + 1, dtype=float)
    else:
        s = noise_scale(sems)
        w = np.ones(m) if s is None else 1.0 / s ** 2
    return w / w.mean() if m else w


def noise_scale(sems: np.ndarray) -> np.ndarray | None:
    """Per-size standard errors for weights and residuals, floored at
    ``SEM_FLOOR_FRACTION`` × the median one (sizes without repeats get the median);
    None when no size has repeats.

    Examples
    --------
    >>> noise_scale(np.array([0.01, np.nan, 0.001])).tolist()
    [0.01, 0.0055, 0.0011]
    """
    good = np.isfinite(sems) & (sems > 0)
    if not good.any():
        return None
    med = float(np.median(sems[good]))
    return np.maximum(np.where(np.isfinite(sems), sems, med), SEM_FLOOR_FRACTION * med)
