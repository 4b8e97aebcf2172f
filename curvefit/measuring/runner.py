"""The learning-curve runner: train a model on growing nested subsamples, with repeats.

Design
------
* A *splitter* (`curvefit.measuring.splits`) gives, per repeat, the test rows and the training
  pool in subsample order; the subsample of size ``n`` is a prefix of the pool, so each
  size contains the smaller ones. Default: a seeded train/test split per repeat,
  stratified by class, and a stratified ordering of the pool.
* Each (size, repeat) cell builds a fresh model (`ModelSpec.make`, wrapped for
  encoding), fits it on the subsample, and records the loss on the subsample (train
  error) and on the repeat's test set, the test size and error count (0-1 error), the
  fit time, and ``status``/``message``. A model that raises or runs out of time is
  recorded as failed; the run goes on.
* Randomness: the split of repeat ``r`` draws from ``SeedSequence(seed, spawn_key=(r,
  ...))``; a model whose ``random_state`` parameter is None gets a per-cell integer
  from ``SeedSequence(seed, spawn_key=(r, size, 2))``. Nothing depends on which worker
  runs a cell, so results are the same for any ``n_jobs`` and backend.
* Cells run through `curvefit.measuring.parallel.run_tasks` (in process, joblib/loky, or Dask)
  and each finished cell is written to the journal before it is reported.
* Time limits: for trainer programs the per-fit ``timeout`` kills the program. For
  Python models the fit runs under a ``SIGALRM`` timer when the cell runs in a
  process's main thread (in-process and loky workers), which interrupts pure-Python
  code but not a long call inside compiled code; any cell whose fit took longer than
  ``timeout`` is recorded as failed after the fact as well (the only check on Dask
  workers, whose tasks run in threads).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import platform
import signal
import sys
import threading
import time
import warnings
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd

from curvefit.core.curve import Curve
from curvefit.core.errors import InputError
from curvefit.measuring.metrics import Metric, check_response, resolve_metric
from curvefit.measuring import splits as _splits

SIZE_UNITS = ("rows", "groups")


class _FitTimeout(Exception):
    """Raised inside a fit by the alarm timer."""


@dataclass(frozen=True, eq=False)
class _Data:
    """Everything a cell needs besides its indices; pickled once per task (numpy
    arrays above 1 MB are memory-mapped by joblib instead of copied)."""

    X: Any
    y: np.ndarray
    X_test: Any
    y_test: np.ndarray
    encode: str
    # unfitted encoding steps decided once in the parent: () when nothing is needed,
    # None when each cell must ask `with_encoding` itself
    encoder_steps: tuple | None = None


def _encoded(est, data: _Data):
    """The cell's fresh estimator wrapped in the run's encoding steps (fresh copies)."""
    if data.encoder_steps is None:
        from curvefit.measuring.models import with_encoding

        return with_encoding(est, data.X, data.encode)[0]
    if not data.encoder_steps:
        return est
    from sklearn.base import clone
    from sklearn.pipeline import Pipeline

    steps = [(name, clone(step)) for name, step in data.encoder_steps[:-1]]
    return Pipeline(steps + [(data.encoder_steps[-1][0], est)])


def _encoder_steps(wrapped, probe) -> tuple | None:
    """What `with_encoding` did to the probe, as steps a cell can copy (None: unknown)."""
    if wrapped is probe:
        return ()
    steps = getattr(wrapped, "steps", None)
    if isinstance(steps, list) and steps and steps[-1][1] is probe:
        return tuple((name, step) for name, step in steps[:-1]) + ((steps[-1][0], None),)
    return None


def _take(X, idx):
    return X.iloc[idx] if isinstance(X, pd.DataFrame) else X[idx]


def _cell_seed(random_state: int, repeat: int, size: int) -> int:
    return int(np.random.SeedSequence(int(random_state), spawn_key=(repeat, size, 2)).generate_state(1)[0])


def _seed_model(est, seed: int) -> None:
    """Give every unset ``random_state`` parameter (nested ones too) the cell's seed."""
    if not hasattr(est, "get_params"):
        return
    try:
        params = est.get_params(deep=True)
    except Exception:  # an odd estimator: leave it as it is
        return
    unset = {k: seed for k, v in params.items()
             if (k == "random_state" or k.endswith("__random_state")) and v is None}
    if unset:
        try:
            est.set_params(**unset)
        except (ValueError, TypeError):
            pass


def _predict_both(est, X_train, X_test):
    """Predictions on train and test; a trainer program runs once for both."""
    final = est
    transform = None
    if hasattr(est, "steps") and not hasattr(est, "predict_many"):
        final, transform = est.steps[-1][1], est[:-1]
    if hasattr(final, "predict_many"):
        a, b = (X_train, X_test) if transform is None else (transform.transform(X_train),
                                                           transform.transform(X_test))
        p_train, p_test = final.predict_many([a, b])
        return np.asarray(p_train), np.asarray(p_test)
    return None, None


class _Alarm:
    """Raise `_FitTimeout` after ``seconds`` (main thread only; otherwise a no-op)."""

    def __init__(self, seconds: float | None):
        self.seconds = seconds
        self.active = (seconds is not None and hasattr(signal, "setitimer")
                       and threading.current_thread() is threading.main_thread())

    def __enter__(self):
        if self.active:
            def _ring(signum, frame):
                raise _FitTimeout()
            self.previous = signal.signal(signal.SIGALRM, _ring)
            signal.setitimer(signal.ITIMER_REAL, float(self.seconds))
        return self

    def __exit__(self, *exc):
        if self.active:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, self.previous)
        return False


def _run_cell(data: _Data, spec, metric: Metric, cell: dict) -> dict:
    """Fit and score one (size, repeat) cell; never raises for a failing model."""
    train_idx, test_idx = cell.pop("train_idx"), cell.pop("test_idx")
    timeout = cell.pop("timeout")
    result = dict(cell, train_error=math.nan, test_error=math.nan, n_test=len(test_idx),
                  n_test_errors=math.nan, fit_seconds=math.nan, status="ok", message="")
    X_tr, y_tr = _take(data.X, train_idx), data.y[train_idx]
    X_te, y_te = _take(data.X_test, test_idx), data.y_test[test_idx]
    start = time.perf_counter()
    try:
        with warnings.catch_warnings():
            # convergence chatter from thousands of small fits would drown the progress bar
            warnings.simplefilter("ignore")
            est = spec.make()
            _seed_model(est, cell["model_seed"])
            est = _encoded(est, data)
            with _Alarm(timeout):
                est.fit(X_tr, y_tr)
                p_train, p_test = _predict_both(est, X_tr, X_te)
                train_loss, _ = metric.loss(est, X_tr, y_tr, p_train)
                test_loss, n_err = metric.loss(est, X_te, y_te, p_test)
        elapsed = time.perf_counter() - start
        result.update(train_error=train_loss, test_error=test_loss, fit_seconds=elapsed)
        if n_err is not None:
            result["n_test_errors"] = n_err
        if timeout is not None and elapsed > timeout:
            result.update(status="failed", message=f"fit took {elapsed:.1f} s, over the "
                          f"{timeout:g} s time limit")
        elif not (math.isfinite(train_loss) and math.isfinite(test_loss)):
            result.update(status="failed", message="the loss is not finite")
    except _FitTimeout:
        result.update(status="failed", fit_seconds=time.perf_counter() - start,
                      message=f"fit stopped after the {timeout:g} s time limit")
    except Exception as exc:  # a failing user model is recorded, not fatal
        text = " ".join(str(exc).split())[:500]
        result.update(status="failed", fit_seconds=time.perf_counter() - start,
                      message=f"{type(exc).__name__}: {text}" if text else type(exc).__name__)
    return result


def _run_cells(data: _Data, spec, metric: Metric, cells: list[dict]) -> list[dict]:
    """Several small cells in one task (one dispatch, one copy of the data)."""
    return [_run_cell(data, spec, metric, dict(c)) for c in cells]


def _bundles(cells: list[dict], one_each: bool) -> list[list[dict]]:
    """Group cells, largest first, so each task trains about as many rows as the largest
    cell: per-task costs (dispatch, data copy, thread limits) are paid less often,
    and the small cells still come last to fill the gaps between workers."""
    if one_each or not cells:
        return [[c] for c in cells]
    budget = max(len(c["train_idx"]) for c in cells)
    out, current, total = [], [], 0
    for c in cells:
        if current and total + len(c["train_idx"]) > budget:
            out.append(current)
            current, total = [], 0
        current.append(c)
        total += len(c["train_idx"])
    if current:
        out.append(current)
    return out


# ---------------------------------------------------------------------- helpers
def _fingerprint(X, y) -> str:
    """SHA-256 of the features and target as given (for arrays from Python)."""
    h = hashlib.sha256(b"curvefit.arrays/1\n")
    if isinstance(X, pd.DataFrame):
        h.update(repr([str(c) for c in X.columns]).encode())
        h.update(pd.util.hash_pandas_object(X, index=False).to_numpy().tobytes())
    else:
        arr = np.ascontiguousarray(X)
        h.update(f"{arr.dtype.str} {arr.shape}".encode())
        h.update(arr.tobytes() if arr.dtype != object else repr(arr.tolist()).encode())
    yy = np.asarray(y)
    h.update(yy.tobytes() if yy.dtype != object else repr(yy.tolist()).encode())
    return h.hexdigest()


def _versions() -> dict:
    import scipy
    import sklearn

    import curvefit

    return {"python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "sklearn": sklearn.__version__,
            "pandas": pd.__version__, "curvefit": curvefit.__version__}


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def _as_features(X, what: str = "X"):
    if isinstance(X, pd.DataFrame):
        return X.reset_index(drop=True)
    if hasattr(X, "toarray") or hasattr(X, "tocsr"):
        raise InputError(f"{what} is a sparse matrix; pass a dense array or a DataFrame")
    arr = np.asarray(X)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2:
        raise InputError(f"{what} must be 2-D (rows x features), got shape {arr.shape}")
    return arr


def _as_target(y, n: int, what: str = "y") -> np.ndarray:
    arr = np.asarray(y)
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1 or len(arr) != n:
        raise InputError(f"{what} must be 1-D with one value per row ({n} rows, got shape {arr.shape})")
    missing = pd.isna(pd.Series(arr)).to_numpy()
    if missing.any():
        raise InputError(f"{what} has {int(missing.sum())} missing values (first at row "
                         f"{int(np.flatnonzero(missing)[0])}); drop or fill those rows")
    return arr


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


def _task_of(est, y) -> str:
    from sklearn.base import is_classifier, is_regressor

    from curvefit.measuring.data import infer_task

    if is_classifier(est):
        return "classification"
    if is_regressor(est):
        return "regression"
    return infer_task(y)


def _check_sizes(sizes, plans, unit: str) -> list[int]:
    try:
        sizes = sorted({int(s) for s in sizes})
    except (TypeError, ValueError):
        raise InputError(f"sizes must be whole numbers, got {sizes!r}") from None
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


class _Progress:
    """A rich progress bar with ETA on stderr, or nothing."""

    def __init__(self, enabled: bool, total: int, done: int):
        self.bar = None
        if enabled and total:
            from rich.console import Console
            from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                                       TimeElapsedColumn, TimeRemainingColumn)

            self.bar = Progress(TextColumn("measuring"), BarColumn(), MofNCompleteColumn(),
                                TextColumn("cells"), TimeElapsedColumn(), TextColumn("eta"),
                                TimeRemainingColumn(), console=Console(stderr=True),
                                transient=True)
            self.bar.start()
            self.task = self.bar.add_task("cells", total=total, completed=done)

    def advance(self):
        if self.bar is not None:
            self.bar.advance(self.task)

    def close(self):
        if self.bar is not None:
            self.bar.stop()


# ---------------------------------------------------------------------- API
def measure(model, X, y, *, sizes: Sequence[int] | None = None, repeats: int = 5,
            test_size: float | int = 0.25, X_test=None, y_test=None, metric: str = "error",
            n_jobs: int = 1, backend: str = "local", scheduler: str | None = None,
            random_state: int = 0, journal=None, resume: bool = False,
            timeout: float | None = None, encode: str = "auto", groups=None, order=None,
            size_unit: str = "rows", progress: bool = False, meta: dict | None = None,
            splitter=None) -> Curve:
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
    random_state : int
        The one seed of the run.
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
    progress : bool
        Show a progress bar with ETA on stderr.
    meta : dict, optional
        Extra metadata merged into the curve's ``meta`` (the CLI passes the data
        description and command line).
    splitter : Splitter, optional
        A custom split (see `curvefit.measuring.splits`); overrides groups/order/test_size.

    Returns
    -------
    Curve
        One point per (size, repeat), with run metadata.

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
    """
    from curvefit.measuring.journal import Journal
    from curvefit.measuring.models import as_model_spec, with_encoding
    from curvefit.measuring.parallel import BACKENDS, run_tasks

    started = _now()
    try:
        repeats = int(repeats)
    except (TypeError, ValueError):
        raise InputError(f"repeats must be a whole number, got {repeats!r}") from None
    if repeats < 1:
        raise InputError(f"repeats must be at least 1, got {repeats}")
    if backend not in BACKENDS:
        raise InputError(f"unknown backend {backend!r}; use one of: {', '.join(BACKENDS)}")
    if size_unit not in SIZE_UNITS:
        raise InputError(f"unknown size unit {size_unit!r}; use rows or groups")
    if size_unit == "groups" and groups is None and splitter is None:
        raise InputError("size unit 'groups' needs a group column; pass groups= (--groups COL)")
    if timeout is not None:
        try:
            timeout = float(timeout)
        except (TypeError, ValueError):
            raise InputError(f"timeout {timeout!r} is not a number of seconds") from None
        if not (timeout > 0 and math.isfinite(timeout)):
            raise InputError(f"timeout must be a positive number of seconds, got {timeout}")
    if resume and journal is None:
        raise InputError("resume needs a journal; pass journal= (the CLI uses <out>.journal)")

    spec = as_model_spec(model, timeout=timeout)
    probe = spec.make()
    meta_in = dict(meta or {})
    target_name = (meta_in.get("data") or {}).get("target") if isinstance(meta_in.get("data"), dict) else None

    X = _as_features(X)
    group_values = order_values = None
    if groups is not None:
        group_values, X = _column(X, groups, "group", target_name)
    if order is not None:
        order_values, X = _column(X, order, "order", target_name)
    n = len(X)
    y = _as_target(y, n)
    if group_values is not None and len(group_values) != n:
        raise InputError(f"groups has {len(group_values)} values for {n} rows")
    if order_values is not None and len(order_values) != n:
        raise InputError(f"order has {len(order_values)} values for {n} rows")

    if (X_test is None) != (y_test is None):
        raise InputError("give both X_test and y_test, or neither")
    if X_test is not None:
        if groups is not None or order is not None:
            raise InputError("a separate test set cannot be combined with groups or order; "
                             "drop the test set or the group/order column")
        X_test = _as_features(X_test, "X_test")
        y_test = _as_target(y_test, len(X_test), "y_test")
        if isinstance(X, pd.DataFrame) and isinstance(X_test, pd.DataFrame):
            if list(X.columns) != list(X_test.columns):
                missing = [c for c in X.columns if c not in X_test.columns]
                raise InputError("the test set's columns differ from the training table's"
                                 + (f" (missing: {', '.join(map(str, missing))})" if missing else ""))
        elif np.shape(X_test)[1] != np.shape(X)[1]:
            raise InputError(f"the test set has {np.shape(X_test)[1]} feature columns, the "
                             f"training data {np.shape(X)[1]}")

    task = _task_of(probe, y)
    classification = task == "classification"
    if classification:
        classes = np.unique(y.astype(str)) if y.dtype == object else np.unique(y)
        if len(classes) < 2:
            raise InputError(f"the target has a single class ({classes[0]!r}); classification "
                             "needs at least two classes")
    else:
        try:
            y = y.astype(float)
        except (TypeError, ValueError):
            raise InputError("the target is not numeric but the model is a regressor; use a "
                             "classifier or a numeric target") from None
    the_metric = resolve_metric(metric, task)
    check_response(the_metric, probe)
    if isinstance(X, np.ndarray) and X.dtype.kind in "biuf" and not np.isnan(X).any():
        if encode not in ("auto", "none"):
            raise InputError(f"unknown encode {encode!r}; use auto or none")
        # plain numbers without gaps: nothing to encode (what with_encoding would say)
        wrapped, encode_description = probe, "none needed"
    else:
        wrapped, encode_description = with_encoding(probe, X, encode)
    # decided once here: asking per cell costs a scan of the whole table each time
    encoder_steps = _encoder_steps(wrapped, probe)

    # ------------------------------------------------------------ the split
    if splitter is None:
        if order is not None:
            if size_unit == "groups":
                raise InputError("--order and --size-unit groups cannot both be honoured: with "
                                 "time order sizes count the most recent rows; use --size-unit rows")
            splitter = _splits.OrderSplit(order_values, test_size=test_size, groups=group_values)
        elif groups is not None:
            splitter = _splits.GroupSplit(group_values, test_size=test_size, size_unit=size_unit,
                                          stratify=classification)
        elif X_test is not None:
            splitter = _splits.GivenTestSplit(len(X_test), stratify=classification)
        else:
            splitter = _splits.RandomSplit(test_size=test_size, stratify=classification)
    plans = splitter.split(y, repeats, random_state)
    unit = getattr(splitter, "size_unit", "rows")
    if sizes is None:
        floor = _splits.default_floor(plans, y, classification)
        largest = min(p.n_units for p in plans)
        if floor > largest:
            raise InputError(f"too few {unit}: a subsample with two rows of every class needs "
                             f"{floor} {unit} but the training pool has {largest}; add data "
                             "or use a smaller test fraction")
        sizes = _splits.default_sizes(floor, largest)
    sizes = _check_sizes(sizes, plans, unit)

    leak = None
    if splitter.kind in ("random", "given_test"):
        test_source = X if X_test is None else X_test
        p0 = plans[0]
        if X_test is None:
            leak = _splits.shared_duplicate_fraction(X, p0.test, p0.pool)
        else:
            both = pd.concat([pd.DataFrame(np.asarray(test_source)), pd.DataFrame(np.asarray(X))],
                             ignore_index=True) if not isinstance(X, pd.DataFrame) else \
                pd.concat([test_source, X], ignore_index=True)
            leak = _splits.shared_duplicate_fraction(both, np.arange(len(X_test)),
                                                     len(X_test) + p0.pool)
        if leak > _splits.LEAK_FRACTION:
            warnings.warn(f"{leak:.1%} of the test rows have an identical copy in the training "
                          "pool; if rows repeat per patient, machine or site, the curve is "
                          "optimistic: split by that column with --groups", _splits.LeakWarning,
                          stacklevel=2)

    # ------------------------------------------------------------ identity and journal
    split_desc = splitter.describe()
    fingerprint = (meta_in.get("data") or {}).get("fingerprint") if isinstance(meta_in.get("data"), dict) else None
    fingerprint = fingerprint or _fingerprint(X, y)
    identity = {"data": fingerprint, "model": spec.describe(), "sizes": sizes,
                "repeats": repeats, "seed": int(random_state), "metric": the_metric.name,
                "split": split_desc, "encode": encode, "timeout": timeout}
    if X_test is not None:
        identity["test_data"] = _fingerprint(X_test, y_test)

    data = _Data(X, y, X if X_test is None else X_test, y if y_test is None else y_test, encode,
                 encoder_steps)
    wanted = [(s, r) for r in range(repeats) for s in sizes]
    done: dict[tuple[int, int], dict] = {}
    jr = None
    if journal is not None:
        jr, previous = Journal.open(journal, identity, resume=resume)
        wanted_set = set(wanted)
        for c in previous:
            key = (int(c["size"]), int(c["repeat"]))
            if key in wanted_set:
                done[key] = c
    try:
        # largest fits first: the slowest cells do not end up alone at the end
        todo = sorted((k for k in wanted if k not in done), key=lambda k: (-k[0], k[1]))
        cells = []
        for size, r in todo:
            plan = plans[r]
            cell = {"size": size, "repeat": r, "model_seed": _cell_seed(random_state, r, size),
                    # a trainer program is timed out by its own subprocess limit
                    "timeout": None if spec.kind == "command" else timeout,
                    "train_idx": plan.train_indices(size), "test_idx": plan.test}
            if splitter.kind not in ("random", "given_test"):
                cell.update(plan.cell_counts(size))
            cells.append(cell)
        in_process = backend == "local" and n_jobs == 1
        tasks = [(_run_cells, (data, spec, the_metric, bundle), {})
                 for bundle in _bundles(cells, one_each=in_process)]
        bar = _Progress(progress, len(wanted), len(done))
        try:
            for results in run_tasks(tasks, n_jobs=n_jobs, backend=backend, scheduler=scheduler):
                for result in results:
                    if jr is not None:
                        jr.append(result)
                    done[(int(result["size"]), int(result["repeat"]))] = result
                    bar.advance()
        finally:
            bar.close()
    finally:
        if jr is not None:
            jr.close()

    points = pd.DataFrame([done[k] for k in wanted])
    pools = [p.n_units for p in plans]
    meta_out = {
        "model": spec.describe(), "encode": encode, "encoding": encode_description,
        "data": {"fingerprint": fingerprint, "n_rows": n, "task": task,
                 "n_features": int(np.shape(X)[1]),
                 "features": [str(c) for c in X.columns] if isinstance(X, pd.DataFrame) else None},
        "task": task, "sizes": sizes, "size_unit": unit, "repeats": repeats,
        "seed": int(random_state), "metric": the_metric.name,
        "metric_info": the_metric.to_dict(), "metric_direction": the_metric.direction,
        "test_size": test_size if X_test is None else None,
        "n_test": int(np.median([len(p.test) for p in plans])),
        "n_pool": int(min(pools)), "split": split_desc, "timeout": timeout,
        "model_seeding": "unset random_state parameters get a per-cell seed",
        "duplicate_test_fraction": leak, "n_jobs": n_jobs, "backend": backend,
        "versions": _versions(), "started": started, "finished": _now(),
        "resumed_cells": len(wanted) - len(todo),
    }
    for key, value in meta_in.items():
        if key == "data" and isinstance(value, dict):
            meta_out["data"] = {**meta_out["data"], **value}
        else:
            meta_out[key] = value
    meta_out.setdefault("target", meta_out["data"].get("target"))
    meta_out.setdefault("features", meta_out["data"].get("features"))
    return Curve(points, meta_out)
