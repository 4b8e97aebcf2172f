"""Measuring a grown table: after labels are bought, reuse the cells that still hold.

A table grows in *rounds*: round 1 is the table first measured, and each later round
appends the rows bought since, at the end. `measure_grown` measures the grown table with
a split that does not move when rows are appended (`GrowingSplit`):

* every repeat's test rows are drawn from round 1's rows only, exactly as a plain run on
  that table draws them, and stay frozen in later rounds. A fixed test set is what keeps
  the old and the new cells comparable (common practice when a model is re-evaluated
  after new training data arrive); every row added later goes to the training pool;
* every repeat's pool order is round 1's pool order (the plain run's), followed by round
  2's rows in a permutation seeded by (seed, repeat, round) (stratified by class, like
  the first part), then round 3's, and so on.

So a subsample of a size the previous run measured holds the same rows in the grown
table, trains a model with the same seed, and is tested on the same rows: its cell is
the previous run's cell, and only the new, larger sizes (and the previous run's failed
cells) are trained. The previous run is recognised by its settings (model, seed,
repeats, metric, test fraction, split, encoding, task) and by a fingerprint of the
older rows: `curvefit.measuring.data.leading_rows_fingerprint` of the rows the last
round had (a run measured before rounds were recorded is checked with its whole-table
fingerprint on the same number of leading rows instead).

A grouped split grows too (sizes counting rows): round 1's test groups stay the test
groups, and a later row of a group that any repeat tests on is refused, since it would
leak into training; rows of new groups, or of groups no repeat tests on, join the pool.
Splits that cannot grow this way are refused: a time-ordered split tests on the latest
rows, which appended rows replace; sizes counted in groups would change when an older
group gains rows; a separate test set is not identified by the run file.

References
----------
.. [1] R. Mahmood, J. Lucas, D. Acuna, D. Li, J. Philion, J. M. Alvarez, Z. Yu, S. Fidler,
       M. T. Law, "How Much More Data Do I Need? Estimating Requirements for Downstream
       Tasks", CVPR 2022 (collecting labels in rounds, re-measuring between them).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from curvefit.core.curve import Curve
from curvefit.core.errors import InputError
from curvefit.measuring.splits import GroupSplit, RandomSplit, RepeatSplit, stratified_order

# Spawn-key offset of the new rows' permutation of round k (k + offset; the splitters'
# own streams are 0 and 1).
_ROUND_STREAM = 1000
# settings a grown run must share with the run it grows
_SAME_SETTINGS = ("seed", "repeats", "metric", "encode", "task")


@dataclass
class GrowingSplit:
    """Round 1's split of the leading rows, each later round's rows appended to the pools.

    Parameters
    ----------
    base : RandomSplit or GroupSplit
        The split of round 1's rows (a plain run's splitter; a GroupSplit of round 1's
        group ids, sizes counting rows).
    rounds : list of int
        Rows of the table at each round, increasing; the last is the grown table's.
    groups : array-like, optional
        With a GroupSplit: the group id of every row of the grown table. A later row
        whose group any repeat tests on is refused (it would leak into training).

    Examples
    --------
    >>> y = np.array([0, 1] * 10)
    >>> first = RandomSplit(test_size=0.25).split(y[:12], 2, random_state=0)
    >>> grown = GrowingSplit(RandomSplit(test_size=0.25), [12, 20]).split(y, 2, random_state=0)
    >>> [(g.test.tolist() == f.test.tolist(), g.pool[:9].tolist() == f.pool.tolist(),
    ...   sorted(g.pool[9:].tolist())) for f, g in zip(first, grown)][0]
    (True, True, [12, 13, 14, 15, 16, 17, 18, 19])
    """

    base: RandomSplit | GroupSplit
    rounds: list
    groups: object = None
    size_unit: str = field(default="rows", init=False)

    @property
    def kind(self) -> str:
        return self.base.kind

    def split(self, y, repeats: int, random_state: int) -> list[RepeatSplit]:
        y = np.asarray(y)
        if len(y) != self.rounds[-1]:
            raise InputError(f"the grown table has {len(y)} rows, its rounds say {self.rounds[-1]}")
        out = []
        plans = self.base.split(y[:self.rounds[0]], repeats, random_state)
        codes = None if self.groups is None else self._group_codes(plans)
        for plan in plans:
            parts = [plan.pool]
            for k in range(1, len(self.rounds)):
                new = np.arange(self.rounds[k - 1], self.rounds[k])
                rng = np.random.default_rng(np.random.SeedSequence(
                    int(random_state), spawn_key=(plan.repeat, _ROUND_STREAM + k)))
                order = stratified_order(y[new], rng) if self.base.stratify else rng.permutation(len(new))
                parts.append(new[order])
            pool = np.concatenate(parts)
            out.append(RepeatSplit(plan.repeat, plan.test, pool, None,
                                   None if codes is None else codes[pool],
                                   None if codes is None else codes[plan.test]))
        return out

    def _group_codes(self, plans) -> np.ndarray:
        """One code per group over the grown table; refuses later rows of a test group."""
        values = self.groups if isinstance(self.groups, pd.Series) else pd.Series(list(self.groups))
        values = values.reset_index(drop=True)
        if len(values) != self.rounds[-1]:
            raise InputError(f"the group column has {len(values)} values for {self.rounds[-1]} rows")
        codes = pd.factorize(values)[0]
        tested = np.unique(np.concatenate([codes[p.test] for p in plans]))
        leaking = np.isin(codes[self.rounds[0]:], tested)
        if leaking.any():
            example = values.iloc[self.rounds[0] + int(np.argmax(leaking))]
            raise InputError(f"{int(leaking.sum()):,} new rows belong to groups that the first "
                             f"round's split tests on (e.g. {example!r}); they would leak into "
                             "training, so a grouped table can grow only by new groups or groups "
                             "no repeat tests on; measure the grown table afresh")
        return codes

    def describe(self) -> dict:
        return {**self.base.describe(), "rounds": [int(n) for n in self.rounds]}


def grown_sizes(old_sizes, new_pool: int) -> list[int]:
    """The previous sizes, then their geometric grid continued up to the grown pool.

    The step is the median ratio of consecutive previous sizes (2 for a single size); the
    grown pool is always the last size, and a step closer to it than half a step is
    dropped.

    Examples
    --------
    >>> grown_sizes([20, 40, 80], 300)
    [20, 40, 80, 160, 300]
    >>> grown_sizes([20, 40, 80], 100)
    [20, 40, 80, 100]
    """
    old = sorted({int(s) for s in old_sizes})
    step = float(np.median([b / a for a, b in zip(old, old[1:])])) if len(old) > 1 else 2.0
    step = max(step, 1.05)
    new, size = [], old[-1] * step
    while size * math.sqrt(step) < new_pool:
        new.append(int(round(size)))
        size *= step
    return sorted(set(old) | {s for s in new if old[-1] < s < new_pool} | {int(new_pool)})


def table_rounds(previous: Curve) -> list[dict]:
    """The rounds a run file records; a run measured before rounds were recorded is its
    own round 1 (without a rows fingerprint)."""
    rounds = previous.meta.get("rounds")
    if isinstance(rounds, list) and rounds:
        return [dict(r) for r in rounds]
    data = previous.meta.get("data") or {}
    n_rows = data.get("n_rows")
    if not isinstance(n_rows, int) or n_rows < 1:
        raise InputError("the previous run file does not say how many rows its table had; "
                         "measure the grown table afresh (without --previous)")
    return [{"round": 1, "rows": n_rows, "new_rows": n_rows, "pool": previous.meta.get("n_pool"),
             "fingerprint": None, "table_fingerprint": data.get("fingerprint")}]


def previous_settings(path) -> dict:
    """The measuring options a grown run takes from the run file at ``path`` unless given
    (keys of the command line's options: repeats, seed, test_fraction, metric, encode)."""
    meta = Curve.read(path).meta
    found = {"repeats": meta.get("repeats"), "seed": meta.get("seed"),
             "test_fraction": meta.get("test_size"), "metric": meta.get("metric"),
             "encode": meta.get("encode")}
    return {k: v for k, v in found.items() if v is not None}


def growth_summary(curve: Curve) -> str:
    """One line on a grown run: its round, the rows added and the cells reused and trained.

    Examples
    --------
    >>> c = Curve(pd.DataFrame({"size": [10, 20], "repeat": [0, 0], "test_error": [.3, .2]}),
    ...           {"rounds": [{"rows": 100}, {"rows": 130, "new_rows": 30}],
    ...            "reused_cells": [[10, 0]]})
    >>> growth_summary(c)
    'round 2 of the table: 30 new rows (130 in all); 1 cell reused from the previous run, 1 trained'
    """
    rounds, reused = curve.meta.get("rounds") or [], curve.meta.get("reused_cells") or []
    last = rounds[-1]
    n_reused, n_trained = len(reused), len(curve.points) - len(reused)
    return (f"round {len(rounds)} of the table: {last.get('new_rows', 0):,} new rows "
            f"({last['rows']:,} in all); {n_reused} cell{'s' if n_reused != 1 else ''} reused from "
            f"the previous run, {n_trained} trained")


def _frame_of(X, y) -> pd.DataFrame:
    """Features and target as one frame, for the rows fingerprint of a table from Python."""
    frame = X.reset_index(drop=True) if isinstance(X, pd.DataFrame) else pd.DataFrame(np.asarray(X))
    frame = frame.copy()
    frame.columns = [str(c) for c in frame.columns]
    frame["\0target"] = np.asarray(y)
    return frame


def check_older_rows(rounds: list[dict], table: pd.DataFrame, *, X=None, y=None) -> str:
    """Check that the grown table starts with the rows the last round measured; return the
    grown table's rows fingerprint. ``table`` is the table file as loaded (None for data
    from Python: ``X`` and ``y`` are fingerprinted)."""
    from curvefit.measuring import data
    from curvefit.measuring.data import array_fingerprint, leading_rows_fingerprint, table_fingerprint

    frame = table if table is not None else _frame_of(X, y)
    last, n_rows = rounds[-1], len(frame)
    old = int(last["rows"])
    if n_rows < old:
        raise InputError(f"the grown table has {n_rows:,} rows, fewer than the {old:,} rows the "
                         "previous run measured; append new rows at the end, never remove rows")
    if n_rows == old:
        raise InputError(f"the table has the same {old:,} rows as the previous run; there is "
                         "nothing new to measure (append the bought rows at the end)")
    if last.get("fingerprint"):
        same = leading_rows_fingerprint(frame, old) == last["fingerprint"]
    elif table is not None:
        same = table_fingerprint(table.iloc[:old]) == last.get("table_fingerprint")
        # run files written before the table fingerprint changed form record the older form
        legacy = getattr(data, "legacy_table_fingerprint", None)
        if not same and legacy is not None:
            same = legacy(table.iloc[:old]) == last.get("table_fingerprint")
    else:
        same = array_fingerprint(_head(X, old), np.asarray(y)[:old]) == last.get("table_fingerprint")
    if not same:
        raise InputError(f"the first {old:,} rows of the grown table differ from the rows the "
                         "previous run measured (a row was changed, removed or moved); new rows "
                         "must be appended at the end")
    return leading_rows_fingerprint(frame, n_rows)


def _head(X, n: int):
    return X.iloc[:n] if isinstance(X, pd.DataFrame) else np.asarray(X)[:n]


def _check_same_run(previous: Curve, spec, settings: dict, split_description: dict) -> None:
    """One line naming what differs between the previous run and this one."""
    meta = previous.meta

    def plain(d):
        return {k: v for k, v in (d or {}).items() if k != "timeout"}

    if plain(meta.get("model")) != plain(spec.describe()):
        theirs = (meta.get("model") or {}).get("spec") or (meta.get("model") or {}).get("name")
        raise InputError(f"the previous run measured another model ({theirs}, parameters "
                         f"{(meta.get('model') or {}).get('params')}); a grown run must use the "
                         "same model and parameters")
    for key in _SAME_SETTINGS:
        if meta.get(key) != settings[key]:
            name = "--" + key.replace("_", "-")
            raise InputError(f"the previous run used {key} {meta.get(key)!r}, this one "
                             f"{settings[key]!r}; a grown run keeps the previous run's {key}"
                             + (f" (drop {name} or set it to {meta.get(key)!r})"
                                if key in ("seed", "repeats", "metric", "encode") else ""))
    old_split = {k: v for k, v in (meta.get("split") or {}).items() if k != "rounds"}
    new_split = {k: v for k, v in split_description.items() if k != "rounds"}
    if old_split != new_split:
        keys = sorted(k for k in set(old_split) | set(new_split) if old_split.get(k) != new_split.get(k))
        raise InputError(f"the previous run split its data otherwise (differs in: {', '.join(keys)}); "
                         "a grown run keeps the previous run's split and --test-fraction")


def _check_same_columns(old: dict, meta: dict, features) -> None:
    """The same target and feature columns as the previous run (the rows fingerprint
    covers the whole table, not which columns the model reads)."""
    names = meta.get("features")
    if names is None and isinstance(features, pd.DataFrame):
        names = [str(c) for c in features.columns]
    for what, before, now in (("target", old.get("target"), meta.get("target")),
                              ("features", old.get("features"), names)):
        if before is not None and now is not None and before != now:
            raise InputError(f"the previous run used the {what} {_listed(before)}, this one "
                             f"{_listed(now)}; a grown run reads the same columns")
    n_before = (old.get("data") or {}).get("n_features")
    if n_before is not None and n_before != int(np.shape(features)[1]):
        raise InputError(f"the previous run had {n_before} features, this one "
                         f"{int(np.shape(features)[1])}; a grown run reads the same columns")


def _listed(value) -> str:
    return ", ".join(map(str, value[:8])) + (" ..." if len(value) > 8 else "") \
        if isinstance(value, list) else repr(value)


def _task_of(probe, y) -> str:
    from sklearn.base import is_classifier, is_regressor

    from curvefit.measuring.data import infer_task

    if is_classifier(probe):
        return "classification"
    return "regression" if is_regressor(probe) else infer_task(y)


def reusable_cells(previous: Curve, sizes, repeats: int) -> list[dict]:
    """The previous run's finished cells at the grown run's sizes (failed cells are rerun)."""
    points = previous.points
    keep = ((points["status"] == "ok") & points["size"].isin([int(s) for s in sizes])
            & (points["repeat"] < repeats))
    rows = points[keep].astype(object).where(points[keep].notna(), None)
    return [{k: v for k, v in row.items() if v is not None} for row in rows.to_dict(orient="records")]


def measure_grown(model, X, y, previous: Curve, *, reuse: bool = True, table=None, sizes=None,
                  repeats=None, random_state=None, metric=None, test_size=None, encode=None,
                  X_test=None, y_test=None, groups=None, order=None, size_unit: str = "rows",
                  goal=None, meta: dict | None = None, **options) -> Curve:
    """Measure a grown table, reusing the cells of ``previous`` that still hold.

    Parameters
    ----------
    model, X, y
        As for `curvefit.measuring.runner.measure`; ``X`` and ``y`` are the grown table
        (the previous run's rows first, the new rows appended).
    previous : Curve
        The run of the table before it grew (a plain run, or an earlier grown run).
    reuse : bool
        False trains every cell anew with the same round structure (what reuse must
        equal, for the cells both hold).
    table : DataFrame, optional
        The table file as loaded (the CLI passes it), fingerprinted instead of ``X, y``.
    sizes : list of int, optional
        Default: the previous sizes and their geometric grid continued to the grown pool
        (`grown_sizes`).
    repeats, random_state, metric, test_size, encode :
        Default to the previous run's; a different value is refused.
    **options
        Passed to `measure` (n_jobs, backend, scheduler, journal, resume, timeout, progress).

    Returns
    -------
    Curve
        ``meta["rounds"]``: per round its rows, new rows, training pool and rows
        fingerprint; ``meta["reused_cells"]``: the (size, repeat) cells copied.

    Examples
    --------
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> from curvefit.measuring.runner import measure
    >>> X, y = load_iris(return_X_y=True)
    >>> order = np.random.default_rng(0).permutation(len(y))
    >>> X, y = X[order], y[order]
    >>> old = measure(DecisionTreeClassifier(), X[:110], y[:110], sizes=[20, 40], repeats=2)
    >>> new = measure_grown(DecisionTreeClassifier(), X, y, old)
    >>> new.meta["sizes"], len(new.meta["reused_cells"]), [r["rows"] for r in new.meta["rounds"]]
    ([20, 40, 80, 122], 4, [110, 150])
    """
    from curvefit.measuring.metrics import resolve_metric
    from curvefit.measuring.models import as_model_spec, with_encoding
    from curvefit.measuring.runner import measure

    _refuse_unsupported(X_test=X_test, order=order, size_unit=size_unit, goal=goal)
    old = previous.meta
    rounds = table_rounds(previous)
    # the features as the runner sees them (a group column named in X is not one)
    features = X.drop(columns=[groups]) if isinstance(groups, str) and isinstance(X, pd.DataFrame) else X
    _check_same_columns(old, meta or {}, features)  # first: the fingerprint covers those columns
    fingerprint = check_older_rows(rounds, table, X=features, y=y)
    repeats = old.get("repeats") if repeats is None else repeats
    random_state = old.get("seed") if random_state is None else random_state
    metric = old.get("metric") if metric is None else metric
    test_size = old.get("test_size") if test_size is None else test_size
    encode = old.get("encode", "auto") if encode is None else encode
    if not isinstance(test_size, (int, float)):
        raise InputError("the previous run has no test fraction (it used a separate test set); "
                         "measure the grown table afresh")
    spec = as_model_spec(model, timeout=options.get("timeout"))
    probe = spec.make()
    n_rows = len(y)
    task = _task_of(probe, y)
    splitter = _growing_splitter(X, groups, test_size, task == "classification",
                                 [int(r["rows"]) for r in rounds] + [n_rows])
    plans = splitter.split(np.asarray(y), int(repeats), int(random_state))
    _check_same_run(previous, spec, {"seed": random_state, "repeats": repeats, "encode": encode,
                                     "metric": resolve_metric(metric, task).name, "task": task},
                    splitter.describe())
    if reuse and old.get("encoding") is not None:
        now = with_encoding(probe, features, encode)[1]
        if now != old["encoding"]:
            raise InputError(f"the new rows change how the features are encoded (before: "
                             f"{old['encoding']}; now: {now}), so the older cells no longer hold; "
                             "measure with --no-reuse")
    pool = min(p.n_units for p in plans)
    if sizes is None:
        sizes = grown_sizes(old.get("sizes") or previous.sizes, pool)
    cells = reusable_cells(previous, sizes, int(repeats)) if reuse else []
    record = {"rounds": _rounds_record(rounds, table if table is not None else _frame_of(features, y),
                                       pool, fingerprint),
              "reused_cells": [[int(c["size"]), int(c["repeat"])] for c in cells]}
    return measure(spec, X, y, sizes=sizes, repeats=repeats, test_size=test_size, metric=metric,
                   random_state=random_state, encode=encode, splitter=splitter, reuse=cells,
                   groups=groups, meta={**(meta or {}), **record}, **options)


def _refuse_unsupported(*, X_test, order, size_unit, goal) -> None:
    """One line for each kind of run that cannot grow (see the module docstring)."""
    if X_test is not None:
        raise InputError("a grown run cannot use a separate test set (--test): the run file "
                         "does not identify it; measure the grown table afresh")
    if order is not None:
        raise InputError("a time-ordered split (--order) tests on the latest rows, which the new "
                         "rows replace; measure the grown table afresh (without --previous)")
    if size_unit != "rows":
        raise InputError("sizes counted in groups cannot grow (new rows of an older group would "
                         "change the older sizes); use --size-unit rows, or measure afresh")
    if goal is not None:
        raise InputError("--goal (adaptive measurement) does not combine with --previous")


def _rounds_record(rounds: list[dict], frame: pd.DataFrame, pool: int, fingerprint: str) -> list[dict]:
    """The rounds so far and the new one; a plain previous run's round 1 gets its rows
    fingerprint now (its run file holds only the whole-table one)."""
    from curvefit.measuring.data import leading_rows_fingerprint

    rounds = [dict(r) for r in rounds]
    if rounds[0].get("fingerprint") is None:
        rounds[0]["fingerprint"] = leading_rows_fingerprint(frame, int(rounds[0]["rows"]))
        rounds[0].pop("table_fingerprint", None)
    n_rows = len(frame)
    return rounds + [{"round": len(rounds) + 1, "rows": n_rows,
                      "new_rows": n_rows - int(rounds[-1]["rows"]), "pool": pool,
                      "fingerprint": fingerprint}]


def _growing_splitter(X, groups, test_size, stratify: bool, rounds: list) -> GrowingSplit:
    """The grown table's split: round 1's split as a plain run draws it (a group split
    when ``groups`` is given: values, or a column of ``X``), later rows appended."""
    if groups is None:
        return GrowingSplit(RandomSplit(test_size=test_size, stratify=stratify), rounds)
    if isinstance(groups, str):
        if not isinstance(X, pd.DataFrame) or groups not in X.columns:
            raise InputError(f"group column {groups!r} not found among the features")
        values = X[groups].reset_index(drop=True)
    elif isinstance(groups, pd.Series):
        values = groups.reset_index(drop=True)
    else:  # as the runner reads group values given from Python
        values = pd.Series(np.asarray(groups, dtype=object))
    base = GroupSplit(values.iloc[:rounds[0]], test_size=test_size, size_unit="rows", stratify=stratify)
    return GrowingSplit(base, rounds, groups=values)
