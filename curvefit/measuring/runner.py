"""The learning-curve runner: train a model on growing nested subsamples, with repeats.

`measure` works in five steps, one function each:

1. `_check_settings` — every setting that is not data (repeats, seed, jobs, backend,
   time limit, journal, progress) is checked once, with the helpers of
   `curvefit.core.validate`.
2. `_prepare_inputs` — features, target, the optional test set and group/order columns
   are checked; the task, the metric and the encoding are decided from a probe model.
3. `_plan_split` — a *splitter* (`curvefit.measuring.splits`) gives, per repeat, the
   test rows and the training pool in subsample order; the subsample of size ``n`` is
   a prefix of the pool, so each size contains the smaller ones. Default sizes are
   chosen here, and a split with rows copied across it is warned about.
4. `_execute` — the cells not yet in the journal run through
   `curvefit.measuring.parallel.run_tasks` (in process, joblib/loky, or Dask); each
   finished cell is written to the journal, then reported to the progress callback.
   What one cell does is in `curvefit.measuring.cells`.
5. `_assemble_curve` — the points and the run metadata become a `Curve`.

Every cell also records ``baseline_error``, the constant predictor's loss on its test
rows (`curvefit.measuring.metrics.constant_loss`); the metadata says what that predictor
is (``baseline``) and, for classification, the share of each class (``class_shares``).

Randomness: the split of repeat ``r`` draws from ``SeedSequence(seed, spawn_key=(r,
...))``; a model whose ``random_state`` parameter is None gets a per-cell integer from
``SeedSequence(seed, spawn_key=(r, size, 2))``. Nothing depends on which worker runs a
cell, so results are the same for any ``n_jobs`` and backend.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import platform
import warnings
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import numpy as np
import pandas as pd

from curvefit.core.curve import Curve
from curvefit.core.defaults import REPEATS, SEED, TEST_FRACTION
from curvefit.core.errors import InputError
from curvefit.core.progress import progress_callback
from curvefit.core.validate import (
    check_choice,
    check_count,
    check_jobs,
    check_positive,
    check_seed,
    check_sizes,
)
from curvefit.measuring import splits as _splits
from curvefit.measuring.cells import CellData, bundle_cells, cell_seed, encoder_steps, run_cells
from curvefit.measuring.data import array_fingerprint, as_features, as_target, infer_task
from curvefit.measuring.metrics import Metric, check_response, resolve_metric

SIZE_UNITS = ("rows", "groups")
ENCODE_CHOICES = ("auto", "none")
# split kinds whose train and test rows come from one table, so copies across them matter
_ROW_SPLITS = ("random", "given_test")


# ---------------------------------------------------------------------- API
def measure(model, X, y, *, sizes: Sequence[int] | None = None, repeats: int = REPEATS,
            test_size: float | int = TEST_FRACTION, X_test=None, y_test=None, metric: str = "error",
            n_jobs: int = 1, backend: str = "local", scheduler: str | None = None,
            random_state: int | None = SEED, journal=None, resume: bool = False,
            timeout: float | None = None, encode: str = "auto", groups=None, order=None,
            size_unit: str = "rows", progress: bool | Callable = False, meta: dict | None = None,
            splitter=None, goal: str | None = None, precision: float | None = None,
            budget: float | None = None, reuse: Sequence[dict] | None = None) -> Curve:
    """Measure a learning curve: train and test error against training-set size.

    Parameters
    ----------
    model : estimator, zero-argument factory, spec string or ModelSpec
        What to train; a fresh copy is built for every cell (the caller's object is
        never fitted).
    X, y : array-like or DataFrame, array-like
        The labelled data. Without ``X_test`` each repeat splits it into test rows and
        a training pool.
    sizes : list of int, optional
        Training-set sizes (rows, or groups with ``size_unit="groups"``). Default:
        about 10 geometric steps from the smallest size that holds two rows of every
        class in every repeat (10 rows for a numeric target) to the whole pool.
    repeats : int
        Repeats; each has its own split (or pool order, with ``X_test``).
    test_size : float or int
        Fraction (rounded up) or count of rows (groups, with ``groups``) to test on.
    X_test, y_test : optional
        A separate test set used by every repeat.
    metric : str
        ``"error"`` (0-1 error / MSE), ``"mse"``, ``"mae"``, ``"balanced_error"`` or a
        scikit-learn scorer name, turned into a loss (see `curvefit.measuring.metrics`).
    n_jobs, backend, scheduler :
        Parallel cells: ``backend="local"`` (joblib/loky) or ``"dask"`` (``scheduler``
        address, or a two-worker LocalCluster when None).
    random_state : int, None or numpy Generator
        The one seed of the run. None (fresh randomness) or a Generator draws a seed,
        which the run file records, so the run can be repeated.
    journal : path, optional
        JSON-lines journal of finished cells (see `curvefit.measuring.journal`).
    resume : bool
        Skip the cells already in ``journal``.
    timeout : float, optional
        Seconds allowed per fit; slower cells are recorded as failed.
    encode : {"auto", "none"}
        One-hot encode non-numeric columns and impute gaps (auto), or pass data as is.
    groups : array-like or column name, optional
        Group ids: test and training groups are disjoint.
    order : array-like or column name, optional
        Time order: rolling-origin test windows at the end, most recent training rows.
    size_unit : {"rows", "groups"}
        What a size counts when ``groups`` is given.
    progress : bool or callable
        ``True`` shows a progress bar with ETA on stderr. A callable is called as
        ``progress(done, total, cell)``: once before any fit with ``cell=None`` (``done``
        counts cells taken from the journal), then after each finished cell with its
        result row as a dict (``size``, ``repeat``, ``test_error``, ``status`` ...).
    meta : dict, optional
        Extra metadata merged into the curve's ``meta`` (the CLI passes the data
        description and command line).
    splitter : Splitter, optional
        A custom split (see `curvefit.measuring.splits`); overrides groups/order/test_size.
    goal : str, optional
        Measure adaptively for one question (`curvefit.measuring.adaptive`):
        ``"error-at:N"``, ``"samples-for-error:E"``, ``"samples-for-gap:G"`` or
        ``"floor"``. ``sizes`` are then the candidate sizes and ``repeats`` the most
        repeats per size; cells are chosen round by round until ``precision`` or
        ``budget`` is reached or more data cannot help (``meta["adaptive"]`` says why
        each cell was chosen and why the run stopped).
    precision : float, optional
        With ``goal``: stop when the answer's interval width over its estimate is at
        most this.
    budget : float, optional
        With ``goal``: compute seconds (summed fit seconds) the run may spend.
    reuse : list of dict, optional
        Result rows of an earlier run that hold for this one (same rows, seeds and
        split; `curvefit.measuring.growing` decides which): their cells are not trained.

    Returns
    -------
    Curve
        One point per (size, repeat) measured, with run metadata; ``meta["costs"]``
        holds the learned cost model, the fit and wall seconds, and the prediction made
        after the first cells (`curvefit.measuring.costs`).

    Raises
    ------
    InputError
        Bad data, sizes, metric, model or journal, before any fit.

    References
    ----------
    .. [1] Cortes, Jackel, Solla, Vapnik, Denker, "Learning curves: asymptotic values
       and rate of convergence", NIPS 6, 1994 (train and test error against n).
    .. [2] Perlich, Provost, Simonoff, "Tree induction vs. logistic regression: a
       learning-curve analysis", JMLR 4, 2003 (nested subsamples, repeated splits).
    .. [3] Tashman, "Out-of-sample tests of forecasting accuracy: an analysis and
       review", Int. J. Forecasting 16(4), 2000 (rolling-origin evaluation).

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> curve = measure(DecisionTreeClassifier(max_depth=2), X, y, sizes=[10, 40, 100],
    ...                 repeats=2)
    >>> curve.points[["size", "repeat"]].values.tolist()
    [[10, 0], [10, 1], [40, 0], [40, 1], [100, 0], [100, 1]]
    >>> events = []
    >>> _ = measure(DecisionTreeClassifier(max_depth=2), X, y, sizes=[10, 40], repeats=1,
    ...             progress=lambda done, total, cell: events.append((done, total)))
    >>> events
    [(0, 2), (1, 2), (2, 2)]
    """
    started = _now()
    settings, spec, inputs, split, adaptive, meta_in = _setup(
        model, X, y, sizes=sizes, repeats=repeats, test_size=test_size, X_test=X_test,
        y_test=y_test, metric=metric, n_jobs=n_jobs, backend=backend, scheduler=scheduler,
        random_state=random_state, journal=journal, resume=resume, timeout=timeout, encode=encode,
        groups=groups, order=order, size_unit=size_unit, progress=progress, meta=meta,
        splitter=splitter, goal=goal, precision=precision, budget=budget)
    def make_curve(rows):  # the adaptive rounds fit what the run file will hold
        return _assemble_curve(rows, inputs, split, spec, settings, meta_in, started=started,
                               resumed=0)

    points, resumed, record = _execute(inputs, split, spec, settings, adaptive, make_curve, reuse)
    return _assemble_curve(points, inputs, split, spec, settings, {**record, **meta_in},
                           started=started, resumed=resumed)


def _setup(model, X, y, *, sizes, repeats, test_size, X_test, y_test, metric, n_jobs, backend,
           scheduler, random_state, journal, resume, timeout, encode, groups, order, size_unit,
           progress, meta, splitter, goal, precision, budget):
    """Steps 1–3 (settings, inputs, split) and the adaptive design bound to the split."""
    adaptive = _adaptive_of(goal, precision, budget)
    settings = _check_settings(repeats=repeats, random_state=random_state, n_jobs=n_jobs,
                               backend=backend, scheduler=scheduler, timeout=timeout,
                               encode=encode, size_unit=size_unit, test_size=test_size,
                               journal=journal, resume=resume, progress=progress, groups=groups,
                               order=order, splitter=splitter, X_test=X_test, y_test=y_test)
    from curvefit.measuring.models import as_model_spec

    spec = as_model_spec(model, timeout=settings.timeout)
    meta_in = dict(meta or {})
    inputs = _prepare_inputs(spec.make(), X, y, X_test, y_test, groups=groups, order=order,
                             metric=metric, encode=settings.encode, meta_in=meta_in)
    split = _plan_split(inputs, settings, splitter, sizes)
    if adaptive is not None:
        adaptive = adaptive.bind(split.sizes, settings.repeats, settings.seed, inputs.metric,
                                 int(np.median([len(p.test) for p in split.plans])))
    return settings, spec, inputs, split, adaptive, meta_in


def plan_measure(model, X, y, *, sizes: Sequence[int] | None = None, repeats: int = REPEATS,
                 test_size: float | int = TEST_FRACTION, X_test=None, y_test=None,
                 metric: str = "error", n_jobs: int = 1, backend: str = "local",
                 scheduler: str | None = None, random_state: int | None = SEED,
                 timeout: float | None = None, encode: str = "auto", groups=None, order=None,
                 size_unit: str = "rows", meta: dict | None = None, splitter=None,
                 goal: str | None = None, precision: float | None = None,
                 budget: float | None = None):
    """The cells `measure` would run with the same arguments and their predicted time,
    without measuring the curve.

    Two pilot cells (`curvefit.measuring.costs.pilot_sizes`, repeat 0) are fitted and
    timed in this process, after one untimed warm-up fit at the smallest size, to learn
    the cost model; nothing is recorded (no journal, no run file). For an adaptive run
    the plan is its first pass, and the full grid's prediction is the most it can cost.

    Returns
    -------
    MeasurePlan

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> plan = plan_measure(DecisionTreeClassifier(), X, y, sizes=[10, 40, 100], repeats=2)
    >>> plan.cells, [p["size"] for p in plan.pilot]
    ([(10, 0), (40, 0), (100, 0), (10, 1), (40, 1), (100, 1)], [10, 40])
    """
    from curvefit.measuring.costs import MeasurePlan, fit_cost_model, pilot_sizes, worker_count

    settings, spec, inputs, split, adaptive, _ = _setup(
        model, X, y, sizes=sizes, repeats=repeats, test_size=test_size, X_test=X_test,
        y_test=y_test, metric=metric, n_jobs=n_jobs, backend=backend, scheduler=scheduler,
        random_state=random_state, journal=None, resume=False, timeout=timeout, encode=encode,
        groups=groups, order=order, size_unit=size_unit, progress=False, meta=meta,
        splitter=splitter, goal=goal, precision=precision, budget=budget)
    grid = [(s, r) for r in range(settings.repeats) for s in split.sizes]
    cells = grid if adaptive is None else sorted(adaptive.first_pass(), key=lambda k: (k[1], k[0]))
    data = CellData.build(inputs.X, inputs.y, inputs.X if inputs.X_test is None else inputs.X_test,
                          inputs.y if inputs.y_test is None else inputs.y_test, settings.encode,
                          inputs.encoder_steps, inputs.task)
    pilot = [(s, 0) for s in pilot_sizes(split.sizes)]
    # an untimed warm-up fit first: a process's first fit pays for imports and caches
    run_cells(data, spec, inputs.metric, _plan_cells([(split.sizes[0], 0)], split, spec, settings))
    timed = run_cells(data, spec, inputs.metric, _plan_cells(pilot, split, spec, settings))
    cost = fit_cost_model([c["size"] for c in timed], [c["fit_seconds"] for c in timed])
    workers = worker_count(settings.n_jobs) if settings.backend == "local" else max(1, settings.n_jobs)
    return MeasurePlan.build(cells, grid, [{"size": int(c["size"]), "fit_seconds": c["fit_seconds"],
                                            "status": c["status"]} for c in timed], cost, workers,
                             adaptive.plan_text() if adaptive is not None else None)


def _adaptive_of(goal, precision, budget):
    """The adaptive design for ``goal`` (None without one), its settings checked."""
    if goal is None:
        if precision is not None or budget is not None:
            raise InputError("precision and budget belong to an adaptive run; give a goal too "
                             "(e.g. --goal error-at:20000)")
        return None
    from curvefit.measuring.adaptive import AdaptiveDesign

    return AdaptiveDesign.from_settings(goal, precision=precision, budget=budget)


# ---------------------------------------------------------------------- 1. settings
@dataclass(frozen=True)
class _Settings:
    """The run's settings other than data, checked once."""

    repeats: int
    seed: int
    n_jobs: int
    backend: str
    scheduler: str | None
    timeout: float | None
    encode: str
    size_unit: str
    test_size: float | int
    journal: Any
    resume: bool
    report: Callable | None  # progress events (done, total, cell), or None


def _check_settings(*, repeats, random_state, n_jobs, backend, scheduler, timeout, encode,
                    size_unit, test_size, journal, resume, progress, groups, order, splitter,
                    X_test, y_test) -> _Settings:
    """Check the settings and the combinations that cannot work, before any data is read."""
    from curvefit.measuring.parallel import BACKENDS, check_scheduler

    repeats = check_count(repeats, "repeats", minimum=1)
    check_choice(backend, "backend", BACKENDS)
    if backend == "dask" and scheduler:  # before the journal: a dead scheduler leaves none
        check_scheduler(scheduler)
    check_choice(size_unit, "size_unit", SIZE_UNITS)
    check_choice(encode, "encode", ENCODE_CHOICES)
    if timeout is not None:
        timeout = check_positive(timeout, "timeout")
    if resume and journal is None:
        raise InputError("resume needs a journal; pass journal= (the CLI uses <out>.journal)")
    if (X_test is None) != (y_test is None):
        raise InputError("give both X_test and y_test, or neither")
    if X_test is not None and (groups is not None or order is not None):
        raise InputError("a separate test set cannot be combined with groups or order; "
                         "drop the test set or the group/order column")
    if splitter is None and size_unit == "groups":
        if groups is None:
            raise InputError("size unit 'groups' needs a group column; pass groups= (--groups COL)")
        if order is not None:
            raise InputError("--order and --size-unit groups cannot both be honoured: with "
                             "time order sizes count the most recent rows; use --size-unit rows")
    return _Settings(repeats=repeats, seed=_seed_of(random_state), n_jobs=_check_jobs(n_jobs),
                     backend=backend, scheduler=scheduler, timeout=timeout, encode=encode,
                     size_unit=size_unit, test_size=test_size, journal=journal,
                     resume=bool(resume), report=progress_callback(progress, "measuring", "cells"))


def _seed_of(random_state) -> int:
    """The run's one integer seed: the one given, or one drawn (from None or a Generator)
    and recorded in the run file, so that any run can be repeated."""
    seed = check_seed(random_state)
    if isinstance(seed, int):
        return seed
    return int(np.random.default_rng(seed).integers(2 ** 32))


def _check_jobs(n_jobs) -> int:
    """joblib's convention: a count of workers, or -1 for every core (-2 all but one ...)."""
    return check_jobs(n_jobs)


# ---------------------------------------------------------------------- 2. inputs
@dataclass(frozen=True, eq=False)
class _Inputs:
    """The data as the cells see it, and what was decided about it."""

    X: Any
    y: np.ndarray
    X_test: Any          # None without a separate test set
    y_test: Any
    groups: pd.Series | None
    order: pd.Series | None
    task: str
    metric: Metric
    encoding: str        # one line for the run metadata
    encoder_steps: tuple | None
    fingerprint: str

    @property
    def classification(self) -> bool:
        return self.task == "classification"


def _prepare_inputs(probe, X, y, X_test, y_test, *, groups, order, metric, encode,
                    meta_in: dict) -> _Inputs:
    """Check the data against each other and against the model ``probe``."""
    data_meta = meta_in.get("data") if isinstance(meta_in.get("data"), dict) else {}
    X = as_features(X)
    group_values = order_values = None
    if groups is not None:
        group_values, X = _column(X, groups, "group", data_meta.get("target"))
    if order is not None:
        order_values, X = _column(X, order, "order", data_meta.get("target"))
    y = as_target(y, len(X))
    for what, values in (("groups", group_values), ("order", order_values)):
        if values is not None and len(values) != len(X):
            raise InputError(f"{what} has {len(values)} values for {len(X)} rows")
    if X_test is not None:
        X_test, y_test = _check_test_set(X, X_test, y_test)
    task = _task_of(probe, y)
    y = _check_target(y, task)
    the_metric = resolve_metric(metric, task)
    check_response(the_metric, probe)
    wrapped, encoding = _encoding_of(probe, X, encode)
    return _Inputs(X=X, y=y, X_test=X_test, y_test=y_test, groups=group_values,
                   order=order_values, task=task, metric=the_metric, encoding=encoding,
                   # decided once here: asking per cell costs a scan of the whole table each time
                   encoder_steps=encoder_steps(wrapped, probe),
                   fingerprint=data_meta.get("fingerprint") or array_fingerprint(X, y))


def _column(X, ref, what: str, target_name: str | None):
    """A group/order column given as values or as the name of a column of X."""
    if isinstance(ref, str):
        if target_name is not None and ref == target_name:
            raise InputError(f"the {what} column {ref!r} is the target; pick another column")
        if not isinstance(X, pd.DataFrame) or ref not in X.columns:
            cols = ", ".join(map(str, X.columns)) if isinstance(X, pd.DataFrame) else "none (X is an array)"
            raise InputError(f"{what} column {ref!r} not found; columns: {cols}")
        return X[ref].reset_index(drop=True), X.drop(columns=[ref])
    return pd.Series(np.asarray(ref, dtype=object) if not isinstance(ref, pd.Series) else ref.to_numpy()), X


def _check_test_set(X, X_test, y_test):
    """The separate test set, with the training data's columns."""
    X_test = as_features(X_test, "X_test")
    y_test = as_target(y_test, len(X_test), "y_test")
    if isinstance(X, pd.DataFrame) and isinstance(X_test, pd.DataFrame):
        if list(X.columns) != list(X_test.columns):
            missing = [c for c in X.columns if c not in X_test.columns]
            raise InputError("the test set's columns differ from the training table's"
                             + (f" (missing: {', '.join(map(str, missing))})" if missing else ""))
    elif np.shape(X_test)[1] != np.shape(X)[1]:
        raise InputError(f"the test set has {np.shape(X_test)[1]} feature columns, the "
                         f"training data {np.shape(X)[1]}")
    return X_test, y_test


def _task_of(est, y) -> str:
    from sklearn.base import is_classifier, is_regressor

    if is_classifier(est):
        return "classification"
    if is_regressor(est):
        return "regression"
    return infer_task(y)


def _check_target(y: np.ndarray, task: str) -> np.ndarray:
    """At least two classes to classify; numbers to regress on."""
    if task == "classification":
        classes = np.unique(y.astype(str)) if y.dtype == object else np.unique(y)
        if len(classes) < 2:
            raise InputError(f"the target has a single class ({classes[0]!r}); classification "
                             "needs at least two classes")
        return y
    try:
        return y.astype(float)
    except (TypeError, ValueError):
        raise InputError("the target is not numeric but the model is a regressor; use a "
                         "classifier or a numeric target") from None


def _encoding_of(probe, X, encode: str):
    """The probe wrapped for the data's categorical columns and gaps, and one line saying how."""
    from curvefit.measuring.models import with_encoding

    if isinstance(X, np.ndarray) and X.dtype.kind in "biuf" and not np.isnan(X).any():
        # plain numbers without gaps: nothing to encode (what with_encoding would say)
        return probe, "none needed"
    return with_encoding(probe, X, encode)


# ---------------------------------------------------------------------- 3. split
@dataclass(frozen=True, eq=False)
class _SplitPlan:
    """How every repeat splits the data, and the sizes measured."""

    splitter: Any
    plans: list
    sizes: list[int]
    unit: str
    description: dict
    duplicate_test_fraction: float | None


def _plan_split(inputs: _Inputs, settings: _Settings, splitter, sizes) -> _SplitPlan:
    """Split every repeat, choose or check the sizes, and warn about a leaky split."""
    if splitter is None:
        splitter = _default_splitter(inputs, settings)
    plans = splitter.split(inputs.y, settings.repeats, settings.seed)
    unit = getattr(splitter, "size_unit", "rows")
    if sizes is None:
        sizes = _default_sizes(plans, inputs, unit)
    sizes = _check_sizes(sizes, plans, unit)
    leak = _duplicate_test_fraction(inputs, splitter, plans)
    if leak is not None and leak > _splits.LEAK_FRACTION:
        warnings.warn(_splits.shared_rows_message(leak, inputs.X), _splits.LeakWarning,
                      stacklevel=3)  # the caller of measure
    return _SplitPlan(splitter=splitter, plans=plans, sizes=sizes, unit=unit,
                      description=splitter.describe(), duplicate_test_fraction=leak)


def _default_splitter(inputs: _Inputs, settings: _Settings):
    """Time order first, then groups, then a given test set, else a random split."""
    test_size, stratify = settings.test_size, inputs.classification
    if inputs.order is not None:
        return _splits.OrderSplit(inputs.order, test_size=test_size, groups=inputs.groups)
    if inputs.groups is not None:
        return _splits.GroupSplit(inputs.groups, test_size=test_size, size_unit=settings.size_unit,
                                  stratify=stratify)
    if inputs.X_test is not None:
        return _splits.GivenTestSplit(len(inputs.X_test), stratify=stratify)
    return _splits.RandomSplit(test_size=test_size, stratify=stratify)


def _default_sizes(plans, inputs: _Inputs, unit: str) -> list[int]:
    floor = _splits.default_floor(plans, inputs.y, inputs.classification)
    largest = min(p.n_units for p in plans)
    if floor > largest:
        raise InputError(f"too few {unit}: a subsample with two rows of every class needs "
                         f"{floor} {unit} but the training pool has {largest}; add data "
                         "or use a smaller test fraction")
    if largest < 2 * floor:  # not even one doubling: a "curve" of one or two sizes
        n_test = len(plans[0].test)
        raise InputError(f"too few {unit} for a learning curve: sizes would run only from {floor} "
                         f"to {largest}; a curve needs a training pool of at least {2 * floor} "
                         f"{unit} besides the {n_test} test rows; add data, or give --sizes")
    return _splits.default_sizes(floor, largest)


def _check_sizes(sizes, plans, unit: str) -> list[int]:
    sizes = check_sizes(sizes, "sizes", unit)
    if not sizes:
        raise InputError("no sizes given; pass e.g. sizes=[50, 100, 200]")
    if sizes[0] < 1:
        raise InputError(f"size {sizes[0]} is below 1; sizes count training {unit}")
    pool = min(p.n_units for p in plans)
    if sizes[0] > pool:
        raise InputError(f"too few {unit}: the smallest size {sizes[0]} needs more than the "
                         f"{pool} {unit} left for training after the test split; add data, "
                         "use smaller sizes or a smaller test fraction")
    if sizes[-1] > pool:
        raise InputError(f"size {sizes[-1]} is larger than the training pool ({pool} {unit} "
                         f"after the test split); lower the largest size to at most {pool}")
    return sizes


def _duplicate_test_fraction(inputs: _Inputs, splitter, plans) -> float | None:
    """Share of the first repeat's test rows with an identical copy in its pool (None for
    group and order splits, whose sides are apart by construction)."""
    if splitter.kind not in _ROW_SPLITS:
        return None
    first = plans[0]
    if inputs.X_test is None:
        return _splits.shared_duplicate_fraction(inputs.X, first.test, first.pool)
    X, X_test = inputs.X, inputs.X_test
    if isinstance(X, pd.DataFrame):
        both = pd.concat([X_test, X], ignore_index=True)
    else:
        both = pd.concat([pd.DataFrame(np.asarray(X_test)), pd.DataFrame(np.asarray(X))],
                         ignore_index=True)
    return _splits.shared_duplicate_fraction(both, np.arange(len(X_test)), len(X_test) + first.pool)


# ---------------------------------------------------------------------- 4. execution
def _execute(inputs: _Inputs, split: _SplitPlan, spec, settings: _Settings,
             adaptive=None, make_curve=None, reuse=None) -> tuple[list[dict], int, dict]:
    """Run the cells the journal does not hold; return every point in (repeat, size) order,
    how many came from the journal, and what the run recorded about its costs (and, when
    adaptive, its decisions)."""
    from curvefit.measuring.costs import pilot_sizes
    from curvefit.measuring.journal import Journal

    journal, previous = None, []
    if settings.journal is not None:
        journal, previous = Journal.open(settings.journal,
                                         _identity(inputs, split, spec, settings, adaptive),
                                         resume=settings.resume)
    try:
        with _reporting(settings.report) as report:
            cells = CellRunner(inputs, split, spec, settings, journal, report, previous)
            cells.make_curve = make_curve
            # cells of an earlier run that still hold (curvefit.measuring.growing)
            cells.done.update({(int(c["size"]), int(c["repeat"])): c for c in reuse or ()})
            if adaptive is None:
                wanted = [(s, r) for r in range(settings.repeats) for s in split.sizes]
                cells.keep_only(wanted)
                cells.total, cells.plan = len(wanted), wanted
                report(len(cells.done), len(wanted), None)
                # two cheap cells first: their times give the predicted total of the rest
                cells.run([(s, 0) for s in pilot_sizes(split.sizes)], predict=True)
                cells.run(wanted)
                record = {}
            else:
                wanted, record = adaptive.run(cells)
    finally:
        if journal is not None:
            journal.close()
    return [cells.done[k] for k in wanted], cells.resumed(wanted), {**cells.cost_record(), **record}


class CellRunner:
    """Runs cells of one measurement in batches: each finished cell is journaled, counted
    and reported (with the ETA from `curvefit.measuring.costs`).

    ``done`` maps (size, repeat) to the result rows held so far, the journal's included;
    ``make_curve(rows)`` turns result rows into the `Curve` the run would write.
    The adaptive mode (`curvefit.measuring.adaptive`) calls `run` once per round and
    sets ``total`` and ``note`` (its current answer) for the progress lines.
    """

    def __init__(self, inputs: _Inputs, split: _SplitPlan, spec, settings: _Settings, journal,
                 report, previous: list[dict]):
        from curvefit.measuring.costs import Eta, worker_count

        self.inputs, self.split, self.spec, self.settings = inputs, split, spec, settings
        self.journal, self.report = journal, report
        self.done: dict[tuple[int, int], dict] = {(int(c["size"]), int(c["repeat"])): c
                                                  for c in previous}
        self._from_journal = set(self.done)
        self.total = len(self.done)
        self.note: dict = {}
        self.plan: list = []      # the cells the ETA counts until they are done
        self.eta = Eta(worker_count(settings.n_jobs) if settings.backend == "local"
                       else max(1, settings.n_jobs))
        self.prediction: dict = {}
        self._data = CellData.build(inputs.X, inputs.y, inputs.X if inputs.X_test is None else inputs.X_test,
                                    inputs.y if inputs.y_test is None else inputs.y_test, settings.encode,
                                    inputs.encoder_steps, inputs.task)

    def keep_only(self, keys) -> None:
        """Forget journal cells that are not among ``keys`` (a plan changed since)."""
        keys = set(keys)
        self.done = {k: v for k, v in self.done.items() if k in keys}

    def resumed(self, keys) -> int:
        return sum(1 for k in keys if k in self._from_journal)

    @property
    def fit_seconds(self) -> float:
        """Fit seconds of the cells held (the compute a budget counts)."""
        return float(sum(_seconds(c) for c in self.done.values()))

    def cost_model(self):
        from curvefit.measuring.costs import fit_cost_model

        ok = [c for c in self.done.values() if c.get("status") == "ok"]
        return fit_cost_model([c["size"] for c in ok], [_seconds(c) for c in ok])

    def run(self, keys, predict: bool = False) -> None:
        """Run the cells among ``keys`` that are not held yet, largest first. With
        ``predict``, the predicted wall time of the rest of ``plan`` is recorded after
        these cells and shown in the last progress line."""
        todo = sorted({k for k in keys if k not in self.done}, key=lambda k: (-k[0], k[1]))
        self.total = max(self.total, len(self.done) + len(todo))
        in_process = self.settings.backend == "local" and self.settings.n_jobs == 1
        tasks = [(run_cells, (self._data, self.spec, self.inputs.metric, bundle), {})
                 for bundle in bundle_cells(_plan_cells(todo, self.split, self.spec, self.settings),
                                            one_each=in_process)]
        left = len(todo)
        from curvefit.measuring.parallel import run_tasks

        for results in (run_tasks(tasks, n_jobs=self.settings.n_jobs, backend=self.settings.backend,
                                  scheduler=self.settings.scheduler) if tasks else ()):
            if self.journal is not None:  # a task's cells: one fsync for them all
                self.journal.append_many(results)
            for result in results:
                self.done[(int(result["size"]), int(result["repeat"]))] = result
                self.eta.finished(_seconds(result))
                left -= 1
                if left == 0 and predict:
                    self._predict()
                self.report(len(self.done), self.total, dict(result), extra=self._extra())
        if predict and not self.prediction:
            self._predict()

    def finish(self) -> None:
        """Report the run as complete (an adaptive run stops before its most cells)."""
        self.total = len(self.done)
        self.report(len(self.done), self.total, None, extra=self._extra())

    def remaining_sizes(self) -> list[int]:
        """Sizes of the planned cells not held yet."""
        return [s for s, r in self.plan if (s, r) not in self.done]

    def _predict(self) -> None:
        from curvefit.measuring.costs import DEFAULT_WALL_FACTOR, plan_seconds

        cost = self.cost_model()
        rest = self.remaining_sizes()
        if cost is None:
            return
        self.prediction = {
            "after_cells": len(self.done), "cells": len(rest),
            "fit_seconds": round(cost.total(rest), 3),
            "wall_seconds": round(plan_seconds(cost, rest, self.eta.workers) * DEFAULT_WALL_FACTOR, 3),
            "at": self.eta.elapsed}

    def _extra(self) -> dict:
        from curvefit.core.formatting import format_number
        from curvefit.core.progress import clock

        extra = {"fit-seconds": format_number(self.fit_seconds, 3),
                 "eta": self.eta.remaining(self.cost_model(), self.remaining_sizes())}
        if self.prediction and len(self.done) == self.prediction["after_cells"]:
            extra["predicted"] = f"{clock(self.prediction['wall_seconds'])} for the other " \
                                 f"{self.prediction['cells']} cells"
        extra.update(self.note)
        return extra

    def cost_record(self) -> dict:
        """The run's costs for its metadata: the learned cost model, fit seconds, wall
        seconds of this session and the prediction made after the first cells."""
        cost = self.cost_model()
        record = {"cost_model": cost.to_dict() if cost is not None else None,
                  "fit_seconds": round(self.fit_seconds, 3),
                  "wall_seconds": round(self.eta.elapsed, 3), "workers": self.eta.workers}
        if self.prediction:
            pred = dict(self.prediction)
            pred["actual_wall_seconds"] = round(self.eta.elapsed - pred.pop("at"), 3)
            record["prediction"] = pred
        return {"costs": record}


def _seconds(cell: dict) -> float:
    value = cell.get("fit_seconds")
    try:
        value = float(value)
    except (TypeError, ValueError):
        return 0.0
    return value if value == value and value > 0 else 0.0


def _identity(inputs: _Inputs, split: _SplitPlan, spec, settings: _Settings, adaptive=None) -> dict:
    """What a journal must match to be resumed: same data, model, cells, seed and split
    (and, for an adaptive run, the same question and design; not its precision or budget,
    which only decide where it stops)."""
    identity = {"data": inputs.fingerprint, "model": spec.describe(), "sizes": split.sizes,
                "repeats": settings.repeats, "seed": settings.seed, "metric": inputs.metric.name,
                "split": split.description, "encode": settings.encode, "timeout": settings.timeout}
    if adaptive is not None:
        identity["adaptive"] = adaptive.identity()
    if inputs.X_test is not None:
        identity["test_data"] = array_fingerprint(inputs.X_test, inputs.y_test)
    return identity


def _plan_cells(todo, split: _SplitPlan, spec, settings: _Settings) -> list[dict]:
    """One cell per (size, repeat) to run: its rows, its model seed and its time limit."""
    # a trainer program is timed out by its own subprocess limit
    timeout = None if spec.kind == "command" else settings.timeout
    cells = []
    for size, r in todo:
        plan = split.plans[r]
        cell = {"size": size, "repeat": r, "model_seed": cell_seed(settings.seed, r, size),
                "timeout": timeout, "train_idx": plan.train_indices(size), "test_idx": plan.test}
        if split.splitter.kind not in _ROW_SPLITS:
            cell.update(plan.cell_counts(size))
        cells.append(cell)
    return cells


@contextlib.contextmanager
def _reporting(report):
    """The progress callback for the duration of the run (a bar is removed at the end)."""
    if report is None:
        yield lambda done, total, cell, extra=None: None
    elif hasattr(report, "__enter__") and hasattr(report, "__exit__"):
        with report:
            yield report
    else:
        yield report


# ---------------------------------------------------------------------- 5. the curve
def _assemble_curve(points: list[dict], inputs: _Inputs, split: _SplitPlan, spec,
                    settings: _Settings, meta_in: dict, *, started: str, resumed: int) -> Curve:
    """The points with the run's metadata; the caller's ``meta`` wins over what is computed."""
    X = inputs.X
    meta = {
        "model": spec.describe(), "encode": settings.encode, "encoding": inputs.encoding,
        "data": {"fingerprint": inputs.fingerprint, "n_rows": len(X), "task": inputs.task,
                 "n_features": int(np.shape(X)[1]),
                 "features": [str(c) for c in X.columns] if isinstance(X, pd.DataFrame) else None},
        "task": inputs.task, "sizes": split.sizes, "size_unit": split.unit,
        "repeats": settings.repeats, "seed": settings.seed, "metric": inputs.metric.name,
        "metric_info": inputs.metric.to_dict(), "metric_direction": inputs.metric.direction,
        "test_size": settings.test_size if inputs.X_test is None else None,
        "n_test": int(np.median([len(p.test) for p in split.plans])),
        "n_pool": int(min(p.n_units for p in split.plans)), "split": split.description,
        "timeout": settings.timeout,
        "baseline": ("the majority class of each training subsample" if inputs.classification
                     else "the mean target of each training subsample"),
        "model_seeding": "unset random_state parameters get a per-cell seed",
        "duplicate_test_fraction": split.duplicate_test_fraction, "n_jobs": settings.n_jobs,
        "backend": settings.backend, "versions": _versions(), "started": started,
        "finished": _now(), "resumed_cells": resumed,
    }
    for key, value in meta_in.items():
        if key == "data" and isinstance(value, dict):
            meta["data"] = {**meta["data"], **value}
        else:
            meta[key] = value
    if inputs.classification:
        meta["class_shares"] = class_shares(inputs.y)
    meta.setdefault("target", meta["data"].get("target"))
    meta.setdefault("features", meta["data"].get("features"))
    return Curve(pd.DataFrame(points), meta)


def class_shares(y) -> dict:
    """Share of each class among the labels, largest first (keys as text, for JSON).

    Examples
    --------
    >>> class_shares(np.array(["a", "b", "b", "b"]))
    {'b': 0.75, 'a': 0.25}
    """
    values, counts = np.unique(np.asarray(y).astype(str), return_counts=True)
    order = np.argsort(-counts, kind="stable")
    return {str(values[i]): float(counts[i] / counts.sum()) for i in order}


def _versions() -> dict:
    import scipy
    import sklearn

    import curvefit

    return {"python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "sklearn": sklearn.__version__,
            "pandas": pd.__version__, "curvefit": curvefit.__version__}


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
