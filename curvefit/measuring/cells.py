"""One cell of a learning curve: fit a fresh model on one subsample, score it, time it.

A cell is a plain dict (``size``, ``repeat``, ``model_seed``, ``timeout``, the training
and test row indices, and for group/order splits the row and group counts). `run_cell`
turns it into a result row of the curve and never raises for a failing model: an
exception, a non-finite loss or a time-out is recorded as ``status="failed"`` with a
one-line ``message``. Each row also holds ``baseline_error``: the constant predictor's
loss on the same test rows (`curvefit.measuring.metrics.constant_loss`), whatever the
model did. Tasks carry several cells (`bundle_cells`) so that per-task costs
are paid less often.

Time limits: for trainer programs the per-fit ``timeout`` kills the program (its own
subprocess limit). For Python models the fit runs under a ``SIGALRM`` timer when the cell
runs in a process's main thread (in-process and loky workers), which interrupts
pure-Python code but not a long call inside compiled code; any cell whose fit took
longer than ``timeout`` is recorded as failed after the fact as well (the only check on
Dask workers, whose tasks run in threads).
"""

from __future__ import annotations

import math
import signal
import threading
import time
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from curvefit.measuring.metrics import Metric, constant_loss


@dataclass(frozen=True, eq=False)
class CellData:
    """Everything a cell needs besides its indices. Shared by every task of a run: its
    large numeric arrays reach local workers as one memory-mapped file and Dask workers
    as the result of one task that returns it (`curvefit.measuring.parallel`)."""

    X: Any
    y: np.ndarray
    X_test: Any
    y_test: np.ndarray
    encode: str
    # unfitted encoding steps decided once in the parent: () when nothing is needed,
    # None when each cell must ask `with_encoding` itself
    encoder_steps: tuple | None = None
    # "classification" or "regression": what the constant predictor predicts
    task: str = "classification"
    # the column names (a pandas Index, made once) when `build` stored DataFrames of one
    # numeric dtype as row-major arrays: a cell then gathers its rows from the array and
    # wraps them in a DataFrame
    columns: pd.Index | None = None

    @classmethod
    def build(cls, X, y, X_test, y_test, encode: str, encoder_steps: tuple | None,
              task: str) -> "CellData":
        """The run's cell data. Tables whose columns share one numeric dtype (with the
        default row index) are kept as one row-major array: a cell's subsample is then a
        gather of whole rows (not a gather per column) and reaches the model as a
        DataFrame over that array, with the same names, dtypes and values as before,
        which scikit-learn converts to an array without a copy."""
        rows = _row_major(X)
        test_rows = rows if X_test is X else _row_major(X_test)
        if rows is None or test_rows is None:
            return cls(X, y, X_test, y_test, encode, encoder_steps, task)
        return cls(rows, y, test_rows, y_test, encode, encoder_steps, task,
                   columns=pd.Index(X.columns))

    def frame(self):
        """The training table as the model sees it (a DataFrame when it was one)."""
        if self.columns is None:
            return self.X
        return pd.DataFrame(self.X, columns=self.columns, copy=False)

    def take(self, table, idx):
        """Rows ``idx`` of ``table`` (``X`` or ``X_test``), as a DataFrame when it was one."""
        if self.columns is None:
            return _take(table, idx)
        return pd.DataFrame(table[idx], columns=self.columns, index=pd.Index(idx), copy=False)


def _row_major(table) -> np.ndarray | None:
    """A DataFrame of one numeric dtype with the index 0..n-1 as a (rows x columns)
    C-ordered array (one copy, filled column by column); None for any other table."""
    if not isinstance(table, pd.DataFrame) or table.shape[1] == 0:
        return None
    dtypes = set(table.dtypes)
    dtype = next(iter(dtypes))
    if len(dtypes) != 1 or not isinstance(dtype, np.dtype) or dtype.kind not in "iuf":
        return None
    if not table.index.equals(pd.RangeIndex(len(table))):
        return None
    out = np.empty(table.shape, dtype=dtype)
    for j in range(table.shape[1]):
        out[:, j] = table.iloc[:, j].to_numpy()
    return out


def encoder_steps(wrapped, probe) -> tuple | None:
    """What `with_encoding` did to the probe, as steps a cell can copy (None: unknown)."""
    if wrapped is probe:
        return ()
    steps = getattr(wrapped, "steps", None)
    if isinstance(steps, list) and steps and steps[-1][1] is probe:
        return tuple((name, step) for name, step in steps[:-1]) + ((steps[-1][0], None),)
    return None


def _encoded(est, data: CellData):
    """The cell's fresh estimator wrapped in the run's encoding steps (fresh copies)."""
    if data.encoder_steps is None:
        from curvefit.measuring.models import with_encoding

        return with_encoding(est, data.frame(), data.encode)[0]
    if not data.encoder_steps:
        return est
    from sklearn.base import clone
    from sklearn.pipeline import Pipeline

    steps = [(name, clone(step)) for name, step in data.encoder_steps[:-1]]
    return Pipeline(steps + [(data.encoder_steps[-1][0], est)])


def cell_seed(random_state: int, repeat: int, size: int) -> int:
    """The integer seed of a cell's model, from the run's seed, the repeat and the size.

    Examples
    --------
    >>> cell_seed(0, 1, 50) == cell_seed(0, 1, 50) != cell_seed(0, 1, 51)
    True
    """
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


def _take(X, idx):
    return X.iloc[idx] if isinstance(X, pd.DataFrame) else X[idx]


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


class _FitTimeout(Exception):
    """Raised inside a fit by the alarm timer."""


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


def run_cell(data: CellData, spec, metric: Metric, cell: dict) -> dict:
    """Fit and score one (size, repeat) cell; never raises for a failing model."""
    cell = dict(cell)
    train_idx, test_idx = cell.pop("train_idx"), cell.pop("test_idx")
    timeout = cell.pop("timeout")
    result = dict(cell, train_error=math.nan, test_error=math.nan, n_test=len(test_idx),
                  n_test_errors=math.nan, fit_seconds=math.nan, status="ok", message="")
    X_tr, y_tr = data.take(data.X, train_idx), data.y[train_idx]
    X_te, y_te = data.take(data.X_test, test_idx), data.y_test[test_idx]
    # outside the timed fit: the constant predictor sees the same rows, not the features
    result["baseline_error"] = constant_loss(metric, y_tr, y_te, data.task)
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
    except (Exception, SystemExit) as exc:  # a failing user model is recorded, not fatal
        text = " ".join(str(exc).split())[:500]
        result.update(status="failed", fit_seconds=time.perf_counter() - start,
                      message=f"{type(exc).__name__}: {text}" if text else type(exc).__name__)
    return result


def run_cells(data: CellData, spec, metric: Metric, cells: list[dict]) -> list[dict]:
    """Several small cells in one task (one dispatch, one copy of the data)."""
    return [run_cell(data, spec, metric, c) for c in cells]


def bundle_cells(cells: list[dict], one_each: bool) -> list[list[dict]]:
    """Group cells, largest first, so each task trains about as many rows as the largest
    cell: per-task costs (dispatch, data copy, thread limits) are paid less often,
    and the small cells still come last to fill the gaps between workers.

    Examples
    --------
    >>> cells = [{"train_idx": range(n)} for n in (100, 60, 40, 30)]
    >>> [len(b) for b in bundle_cells(cells, one_each=False)]
    [1, 2, 1]
    """
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
