"""The complexity trade-off: train and test error against a complexity parameter.

For each value of one complexity parameter (tree depth, k of k-NN, polynomial degree,
regularisation strength) and each sample size, :func:`tradeoff` measures train and
test error with repeats through :func:`curvefit.measuring.runner.measure` (one measuring code
path for the whole project), and reports the best value per size with the set of
values within one standard error of it. With ``probe=True`` each value is also placed
on a VC axis by the max-deviation probe (:mod:`curvefit.capacity.probe`).
"""

from __future__ import annotations

import ast
import contextlib
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from curvefit.capacity.probe import ProbeSettings, probe_inputs, run_probe
from curvefit.core.defaults import SEED
from curvefit.core.errors import InputError
from curvefit.core.jsonio import jsonable
from curvefit.core.progress import Progress, progress_callback

TABLE_COLUMNS = ["param", "value", "size", "n_repeats", "n_failed", "train_mean", "train_sem",
                 "test_mean", "test_sem", "gap_mean"]
CAPACITY_COLUMNS = ["capacity", "capacity_low", "capacity_high", "capacity_above_range"]
# Bootstrap replicates of each setting's probe: a lighter interval, as every value is probed.
PROBE_BOOTSTRAP = 100
# In a trainer command, the varied value takes the place of this placeholder.
VALUE_PLACEHOLDER = "{value}"


def value_label(value: Any) -> str:
    """A parameter value as text (``None`` for None), the key of ``Tradeoff.capacities``.

    Examples
    --------
    >>> value_label(None), value_label(4), value_label("rbf")
    ('None', '4', 'rbf')
    """
    return "None" if value is None else str(value)


def setting_spec(base, param: str, value):
    """The model of one setting: ``base`` with ``param`` set to ``value``; for a trainer
    command, the command with ``{value}`` replaced by the value's text.

    Examples
    --------
    >>> from curvefit.measuring.models import as_model_spec
    >>> cmd = as_model_spec("python3 train.py --depth {value} {train} {test} {predictions}")
    >>> setting_spec(cmd, "depth", 4).command
    'python3 train.py --depth 4 {train} {test} {predictions}'
    """
    from curvefit.measuring.models import resolve_model

    if base.kind == "command":
        if VALUE_PLACEHOLDER not in base.command:
            raise InputError(f"the trainer command has no {VALUE_PLACEHOLDER} placeholder for the "
                             f"varied {param}; e.g. \"python train.py --{param} {VALUE_PLACEHOLDER} "
                             "{train} {test} {predictions}\"")
        return resolve_model(None, command=base.command.replace(VALUE_PLACEHOLDER, value_label(value)),
                             timeout=base.timeout)
    return base.with_params(**{param: value})


def parse_vary(text: str) -> dict[str, list]:
    """Parse ``"PARAM=V1,V2,..."``; values are Python literals when possible.

    Examples
    --------
    >>> parse_vary("max_depth=1,2,None")
    {'max_depth': [1, 2, None]}
    >>> parse_vary("kernel=linear,rbf")
    {'kernel': ['linear', 'rbf']}
    """
    if text is None or "=" not in str(text):
        raise InputError(f"malformed --vary {text!r}; use PARAM=V1,V2,..., e.g. max_depth=1,2,4,8")
    name, _, rest = str(text).partition("=")
    name = name.strip()
    if not name.isidentifier():
        raise InputError(f"--vary parameter name {name!r} is not a valid name; use PARAM=V1,V2,...")
    pieces = [p.strip() for p in rest.split(",")]
    if not pieces or any(p == "" for p in pieces):
        raise InputError(f"--vary {text!r} has an empty value; list values like {name}=1,2,4")
    values = []
    for p in pieces:
        try:
            values.append(ast.literal_eval(p))
        except (ValueError, SyntaxError):
            values.append(p)
    return {name: values}


@dataclass(frozen=True)
class Tradeoff:
    """Measured train/test error per (complexity value, size).

    Attributes
    ----------
    table : pandas.DataFrame
        One row per (value, size): ``param, value, size, n_repeats, n_failed,
        train_mean, train_sem, test_mean, test_sem, gap_mean`` (mean test − train over
        repeats, the complexity penalty) and, with the probe,
        ``capacity, capacity_low, capacity_high, capacity_above_range``.
    param : str
        The parameter that was varied.
    values : list
        Its values, in the order given.
    metric : str
        The loss measured (lower is better).
    capacities : dict
        ``value label -> CapacityEstimate.to_dict()`` when probed.
    meta : dict
        Model, sizes, repeats, seed.
    """

    table: pd.DataFrame = field(repr=False)
    param: str
    values: list
    metric: str = "error"
    capacities: dict = field(default_factory=dict, repr=False)
    meta: dict = field(default_factory=dict, repr=False)

    def best_per_size(self) -> pd.DataFrame:
        """The best value per size and the values within one standard error of it.

        The best value has the lowest mean test error; the set ``within_1se`` holds
        every value whose mean test error is at most the best mean plus the best's
        standard error (the one-standard-error rule, Breiman, Friedman, Olshen & Stone
        1984, "Classification and Regression Trees", section 3.4.3).

        Returns
        -------
        pandas.DataFrame
            ``size, best_value, test_mean, test_sem, within_1se`` (a list of values
            in the given order).
        """
        rows = []
        for size, g in self.table.groupby("size", sort=True):
            g = g[np.isfinite(g["test_mean"].astype(float))]
            if not len(g):
                rows.append({"size": int(size), "best_value": None, "test_mean": math.nan,
                             "test_sem": math.nan, "within_1se": []})
                continue
            i = g["test_mean"].astype(float).to_numpy().argmin()
            best = g.iloc[i]
            sem = float(best["test_sem"]) if np.isfinite(best["test_sem"]) else 0.0
            limit = float(best["test_mean"]) + sem
            within = [v for v, m in zip(g["value"], g["test_mean"]) if float(m) <= limit + 1e-12]
            rows.append({"size": int(size), "best_value": best["value"],
                         "test_mean": float(best["test_mean"]),
                         "test_sem": float(best["test_sem"]), "within_1se": within})
        out = pd.DataFrame(rows, columns=["size", "best_value", "test_mean", "test_sem",
                                          "within_1se"])
        out["best_value"] = pd.Series([r["best_value"] for r in rows], dtype=object,
                                      index=out.index)
        return out

    def _repr_html_(self) -> str:
        """The best value per size and the values within one standard error, as a table
        (shown by Jupyter)."""
        from curvefit.report.notebook import tradeoff_html

        return tradeoff_html(self)

    def plot(self, ax=None):
        """Draw train and test error against the parameter, one line per size; returns
        the matplotlib Axes (``ax`` when given)."""
        from curvefit.report.notebook import plot_tradeoff

        return plot_tradeoff(self, ax=ax)

    def to_dict(self) -> dict:
        t = self.table.astype(object).where(self.table.notna(), None)
        best = self.best_per_size()
        best = best.astype(object).where(best.notna(), None)
        return jsonable({"format": "curvefit.tradeoff/1", "param": self.param,
                          "values": list(self.values), "metric": self.metric,
                          "table": t.to_dict(orient="records"),
                          "best_per_size": best.to_dict(orient="records"),
                          "capacities": self.capacities, "meta": self.meta})

    @classmethod
    def from_dict(cls, d: dict) -> "Tradeoff":
        if not isinstance(d, dict) or "table" not in d or "param" not in d:
            raise InputError("not a saved trade-off (needs 'param' and 'table')")
        table = pd.DataFrame(d["table"] or [])
        for col in ("train_mean", "train_sem", "test_mean", "test_sem", "gap_mean", "capacity",
                    "capacity_low", "capacity_high"):
            if col in table:
                table[col] = pd.to_numeric(table[col], errors="coerce").astype(float)
        if "value" in table:
            table["value"] = pd.Series([r.get("value") for r in d["table"]], dtype=object,
                                       index=table.index)
        return cls(table=table, param=str(d["param"]), values=list(d.get("values") or []),
                   metric=str(d.get("metric") or "error"),
                   capacities=dict(d.get("capacities") or {}), meta=dict(d.get("meta") or {}))


def tradeoff(model, X, y, *, vary: dict, sizes, repeats: int = 3, random_state: int = SEED,
             n_jobs: int = 1, backend: str = "local", scheduler: str | None = None,
             test_size: float = 0.25, metric: str = "error", probe: bool = False,
             probe_repeats: int = 6, probe_max_n: int = 1000, timeout: float | None = None,
             progress=False) -> Tradeoff:
    """Train and test error against one complexity parameter at several sample sizes.

    Every value is measured with the same seed, hence on the same splits and
    subsamples (common random numbers), so differences between values are not
    split noise.

    Parameters
    ----------
    model : estimator, factory, spec string or ModelSpec
        The base model; the varied parameter is set on fresh copies. A trainer command
        (``"prog --depth {value} {train} {test} {predictions}"``) gets each value in
        place of ``{value}``.
    X, y : array-like or DataFrame, array-like
        Labelled data.
    vary : dict
        Exactly one ``{"param": [values...]}``.
    sizes : list of int
        Training sizes.
    repeats : int
        Repeats (splits) per size.
    random_state : int
        The one seed.
    n_jobs, backend, scheduler, test_size, metric, timeout
        Passed to :func:`curvefit.measuring.runner.measure`.
    probe : bool
        Also probe each setting's effective VC dimension (numeric features only).
    probe_repeats, probe_max_n
        Probe budget per setting.
    progress : bool or callable
        ``True`` shows progress on stderr (`curvefit.core.progress.Progress`: a bar on a
        terminal, plain lines in a log). A callable is called as ``progress(done, total,
        item)`` with the cells of every setting in one count (``item``: the setting's
        ``value`` and ``part``, ``"measure"`` or ``"probe"``); the cells of a part not
        started yet are counted as many as the same part of the setting before.

    Returns
    -------
    Tradeoff

    References
    ----------
    .. [1] V. Vapnik, "The Nature of Statistical Learning Theory", Springer, 1995
       (structural risk minimisation: the best capacity grows with the sample size).
    .. [2] L. Breiman, J. Friedman, R. Olshen, C. Stone, "Classification and Regression
       Trees", Wadsworth, 1984 (the one-standard-error rule).

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> t = tradeoff(DecisionTreeClassifier(random_state=0), X, y,
    ...              vary={"max_depth": [1, 3]}, sizes=[30, 90], repeats=2)
    >>> t.table[["value", "size"]].values.tolist()
    [[1, 30], [1, 90], [3, 30], [3, 90]]
    """
    from curvefit.measuring.models import as_model_spec
    from curvefit.measuring.runner import measure

    param, values, labels = _checked_vary(vary)
    if sizes is None or len(list(sizes)) == 0:
        raise InputError("give the sample sizes to compare at, e.g. sizes=[50, 200, 800]")
    sizes = [int(s) for s in sizes]
    base = as_model_spec(model, timeout=timeout)  # the one conversion; every setting is a copy of it
    specs = [setting_spec(base, param, value) for value in values]  # bad values fail before work
    report = progress_callback(progress, "trade-off", "cells")
    tally = _Tally(report, len(values), probe)
    inputs = settings = None
    if probe:
        # Check the probe's inputs and budget before any measuring, so bad ones fail at once.
        inputs = probe_inputs(X.to_numpy(dtype=float) if hasattr(X, "columns") and _all_numeric(X)
                              else X, None)
        settings = ProbeSettings(repeats=probe_repeats, max_n=probe_max_n,
                                 bootstrap=PROBE_BOOTSTRAP, random_state=random_state,
                                 n_jobs=n_jobs, backend=backend, scheduler=scheduler)
    rows, capacities, failed_total, resolved = [], {}, 0, {}
    # a bar is wiped however the work ends
    with report if isinstance(report, Progress) else contextlib.nullcontext():
        for value, label, spec in zip(values, labels, specs):
            curve = measure(spec, X, y, sizes=sizes, repeats=repeats, test_size=test_size,
                            metric=metric, n_jobs=n_jobs, backend=backend, scheduler=scheduler,
                            random_state=random_state, timeout=timeout,
                            progress=tally.part(value, f"{param}={label}", "measure"))
            failed_total += len(curve.failed_points())
            # the loss the runner resolved ("error" on a numeric target is MSE) and its label
            resolved = {"metric": curve.metric, "metric_info": curve.metric_info}
            value_rows = _size_rows(param, value, curve, sizes)
            if probe:
                est = run_probe(spec, inputs, settings,
                                progress=tally.part(value, f"{param}={label}", "probe"))
                capacities[label] = est.to_dict()
                for row in value_rows:
                    row.update({"capacity": est.vc_dim, "capacity_low": est.low,
                                "capacity_high": est.high, "capacity_above_range": est.above_range})
            rows += value_rows
    cols = TABLE_COLUMNS + (CAPACITY_COLUMNS if probe else [])
    table = pd.DataFrame(rows, columns=cols)
    # Object dtype keeps ints as ints and None as None (pandas would make them floats/NaN).
    table["value"] = pd.Series([r["value"] for r in rows], dtype=object, index=table.index)
    table["param"] = pd.Series([r["param"] for r in rows], dtype=object, index=table.index)
    meta = {"model": base.describe() if hasattr(base, "describe") else repr(base),
            "sizes": sizes, "repeats": int(repeats), "seed": int(random_state),
            "test_size": test_size, "failed_cells": int(failed_total),
            "metric_info": resolved.get("metric_info", {})}
    return Tradeoff(table=table, param=str(param), values=values,
                    metric=str(resolved.get("metric", metric)),
                    capacities=capacities, meta=meta)


class _Tally:
    """The cells of a trade-off in one count: each setting's measuring and probe cells.

    Each part (a setting's measurement, its probe) reports its own ``(done, total)``;
    a part not started yet counts as many cells as the last part of its kind, so the
    total is an estimate until the last setting starts and the count reaches its end
    only when the last part ends.
    """

    def __init__(self, report, n_settings: int, probe: bool):
        self.report = report
        self.kinds = ("measure", "probe") if probe else ("measure",)
        self.expected = n_settings * len(self.kinds)
        self.parts: list[list[int]] = []          # [done, total] of each part started
        self.latest: dict[str, int] = {}          # the last total seen per kind

    def part(self, value, setting: str, kind: str):
        """The progress callable of one part (``None`` when nothing is reported)."""
        if self.report is None:
            return None
        counts = [0, 0]
        self.parts.append(counts)

        def update(done: int, total: int, item=None) -> None:
            counts[0], counts[1] = done, total
            self.latest[kind] = total
            self._emit({"value": value, "part": kind},
                       setting + (", capacity probe" if kind == "probe" else ""))
        return update

    def _emit(self, item: dict, note: str) -> None:
        done = sum(c[0] for c in self.parts)
        total = sum(c[1] for c in self.parts)
        # the parts not started yet: each setting left has one part of every kind
        left = self.expected - len(self.parts)
        total += sum(self.latest.get(self.kinds[(len(self.parts) + i) % len(self.kinds)], 0)
                     for i in range(left))
        self.report(done, max(total, done), item, extra=note)


def _checked_vary(vary) -> tuple[str, list, list[str]]:
    """``(param, values, labels)`` of ``vary={"param": [v1, v2, ...]}``, checked."""
    if not isinstance(vary, dict) or len(vary) != 1:
        raise InputError("vary one parameter at a time: vary={'max_depth': [1, 2, 4]}")
    (param, values), = vary.items()
    values = list(values) if isinstance(values, (list, tuple, np.ndarray)) else [values]
    if len(values) < 2:
        raise InputError(f"give at least two values of {param} to compare")
    labels = [value_label(v) for v in values]
    if len(set(labels)) != len(labels):
        raise InputError(f"a value of {param} is listed twice; list each once")
    return param, values, labels


def _size_rows(param: str, value, curve, sizes: list[int]) -> list[dict]:
    """One table row per size for one value: means and standard errors over repeats."""
    by_size = {int(r.size): r for r in curve.summary().itertuples()}
    failed = curve.failed_points()
    rows = []
    for size in sizes:
        r = by_size.get(size)
        n_failed = int((failed["size"] == size).sum())
        if r is None:
            rows.append({"param": param, "value": value, "size": size, "n_repeats": 0,
                         "n_failed": n_failed, "train_mean": math.nan, "train_sem": math.nan,
                         "test_mean": math.nan, "test_sem": math.nan, "gap_mean": math.nan})
            continue
        rows.append({"param": param, "value": value, "size": size,
                     "n_repeats": int(r.n_repeats), "n_failed": n_failed,
                     "train_mean": float(r.train_mean), "train_sem": float(r.train_sem),
                     "test_mean": float(r.test_mean), "test_sem": float(r.test_sem),
                     "gap_mean": float(r.gap_mean)})
    return rows


def _all_numeric(X) -> bool:
    return all(pd.api.types.is_numeric_dtype(X[c]) for c in X.columns)
