"""Build the learning-curve corpus in corpus/: measured curves, not data.

Every curve is measured with curvefit's own runner (``cf.measure``), on

* tables that ship inside scikit-learn (``sklearn.datasets.load_*``) and inside
  statsmodels (``statsmodels.api.datasets.*``, bundled CSV files; nothing is downloaded),
* generated tasks whose true error at every measured size is known: the model is
  trained at size n on a fresh sample from the generator and scored on 50,000 fresh
  draws, and that is averaged over several independent draws (see ``GENERATORS``).

for several model types per task (linear/logistic, k-NN, decision tree, random forest,
histogram gradient boosting, RBF SVM, naive Bayes, a small MLP), at geometric sizes from
small to the whole training pool, with 5 or more repeats.

Output (all in corpus/):

* ``curves/<dataset>.csv.gz``: one row per (model, size, repeat) cell, with the columns
  ``COLUMNS`` (``true_error`` and ``true_error_sem`` are empty for real tables);
* ``index.json``: one entry per finished (dataset, model) pair (source, loader, task,
  metric, pool, sizes, repeats, test rows, seconds) and a description of every table.

The builder resumes: finished (dataset, model) pairs (in index.json) are skipped, and a
pair that was interrupted continues from its journal (``corpus/.journal/``), so it can
run in pieces. It runs one cell at a time (``n_jobs=1``, BLAS/OpenMP limited to one
thread by the runner); start it under ``nice -n 19`` on a shared machine::

    nohup nice -n 19 .venv/bin/python scripts/build_corpus.py > corpus/build.log 2>&1 &

Options: ``--only NAME[,NAME]`` (datasets), ``--models NAME[,NAME]``, ``--list`` (print
the plan and exit), ``--out DIR``, ``--add-baseline`` (add the constant predictor's error
to stored curves, re-running the runner's splits with a constant model; seconds).
Needs statsmodels (the ``corpus`` extra).
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import math
import os
import shutil
import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import curvefit as cf  # noqa: E402

FORMAT = "curvefit.corpus/1"
COLUMNS = ["dataset", "source", "model", "task", "metric", "pool", "size", "repeat",
           "train_error", "test_error", "n_test", "baseline_error", "true_error",
           "true_error_sem", "fit_seconds", "status"]
TEST_SIZE = 0.25
N_SIZES = 14                # geometric sizes from the smallest to the whole pool
SMALL_POOL = 1000           # pools below this get more repeats (cheap, steadier means)
REPEATS_SMALL, REPEATS = 10, 5
SEED = 20240601
TIMEOUT = 300.0             # seconds per fit; slower cells are recorded as failed
# generated tasks: rows measured (test + pool), and how the true error is computed
GEN_ROWS = 4000
TRUTH_DRAWS = 5             # independent training samples per size
TRUTH_TEST = 50_000         # fresh draws each trained model is scored on
SVM_MAX_POOL = 8000         # RBF SVMs are left out above this pool (fit time ~ n^2)


# ====================================================================== models
def _scaled(est):
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    return make_pipeline(StandardScaler(), est)


def classifier_factories() -> dict[str, Callable]:
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.neural_network import MLPClassifier
    from sklearn.svm import SVC
    from sklearn.tree import DecisionTreeClassifier

    return {
        "linear": lambda: _scaled(LogisticRegression(max_iter=2000)),
        "knn": lambda: _scaled(KNeighborsClassifier(n_neighbors=5)),
        "tree": lambda: DecisionTreeClassifier(),
        "forest": lambda: RandomForestClassifier(n_estimators=100, n_jobs=1),
        "boosting": lambda: HistGradientBoostingClassifier(),
        "svm": lambda: _scaled(SVC(kernel="rbf")),
        "naive_bayes": lambda: GaussianNB(),
        "mlp": lambda: _scaled(MLPClassifier(hidden_layer_sizes=(32,), max_iter=500)),
    }


def regressor_factories() -> dict[str, Callable]:
    from sklearn.ensemble import HistGradientBoostingRegressor, RandomForestRegressor
    from sklearn.linear_model import Ridge
    from sklearn.neighbors import KNeighborsRegressor
    from sklearn.neural_network import MLPRegressor
    from sklearn.svm import SVR
    from sklearn.tree import DecisionTreeRegressor

    return {
        "linear": lambda: _scaled(Ridge(alpha=1.0)),
        "knn": lambda: _scaled(KNeighborsRegressor(n_neighbors=5)),
        "tree": lambda: DecisionTreeRegressor(),
        "forest": lambda: RandomForestRegressor(n_estimators=100, n_jobs=1),
        "boosting": lambda: HistGradientBoostingRegressor(),
        "svm": lambda: _scaled(SVR(kernel="rbf")),
        "mlp": lambda: _scaled(MLPRegressor(hidden_layer_sizes=(32,), max_iter=500)),
    }


# (what the model entries mean, for the index)
MODEL_NOTES = {
    "linear": "StandardScaler + LogisticRegression (classification) / Ridge(alpha=1) (regression)",
    "knn": "StandardScaler + 5-nearest neighbours",
    "tree": "fully grown decision tree",
    "forest": "random forest, 100 trees, n_jobs=1",
    "boosting": "HistGradientBoosting (scikit-learn defaults)",
    "svm": "StandardScaler + RBF SVC / SVR (scikit-learn defaults)",
    "naive_bayes": "Gaussian naive Bayes (classification only)",
    "mlp": "StandardScaler + MLP, one hidden layer of 32, max_iter=500",
}


# ====================================================================== tables
@dataclass
class Table:
    """One data set: how to get (X, y) and what it is."""

    name: str
    source: str             # "sklearn", "statsmodels" or "generated"
    loader: str             # the loader or generator, as text
    task: str               # "classification" or "regression"
    load: Callable          # () -> (X, y) for real tables; (n, rng) -> (X, y) for generators
    note: str = ""
    formula: str = ""
    exclude_models: tuple = ()
    n_rows: int | None = None

    @property
    def generated(self) -> bool:
        return self.source == "generated"


def _standardise(y) -> np.ndarray:
    """Regression targets of real tables in units of their standard deviation, so that
    MSE reads as a fraction of the target's variance and tables are comparable."""
    y = np.asarray(y, dtype=float)
    return (y - y.mean()) / y.std()


def _sk(name: str, regression: bool = False):
    def load():
        from sklearn import datasets as d

        X, y = getattr(d, f"load_{name}")(return_X_y=True)
        return X, (_standardise(y) if regression else y)
    return load


def _sm(name: str):
    import statsmodels.api as sm

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return getattr(sm.datasets, name).load_pandas().data


def _sm_anes96():
    d = _sm("anes96")
    return d.drop(columns=["vote"]), d["vote"].astype(int).to_numpy()


def _sm_fair():
    d = _sm("fair")
    return d.drop(columns=["affairs"]), (d["affairs"] > 0).astype(int).to_numpy()


def _sm_randhie():
    d = _sm("randhie")
    return d.drop(columns=["mdvis"]), (d["mdvis"] > 0).astype(int).to_numpy()


def _sm_star98():
    d = _sm("star98")
    share = d["NABOVE"] / (d["NABOVE"] + d["NBELOW"])
    return d.drop(columns=["NABOVE", "NBELOW"]), _standardise(share)


def _sm_engel():
    d = _sm("engel")
    return d[["income"]], _standardise(d["foodexp"])


def _sm_grunfeld():
    d = _sm("grunfeld")
    return d.drop(columns=["invest"]), _standardise(np.log1p(d["invest"]))


def _sm_cancer():
    d = _sm("cancer")
    return d[["population"]], _standardise(d["cancer"])


# ---------------------------------------------------------------- generators
def _sigmoid(z):
    return 1.0 / (1.0 + np.exp(-z))


def gen_logistic_noise(n: int, rng: np.random.Generator):
    """x ~ N(0, I_8); P(y=1|x) = sigmoid(beta·x), beta = (1.5, −1, 0.75, 0.5, −0.5, 0.25,
    0, 0); then 10% of labels flipped."""
    beta = np.array([1.5, -1.0, 0.75, 0.5, -0.5, 0.25, 0.0, 0.0])
    X = rng.standard_normal((n, len(beta)))
    y = (rng.random(n) < _sigmoid(X @ beta)).astype(int)
    flip = rng.random(n) < 0.10
    return X, np.where(flip, 1 - y, y)


def gen_nonlinear_boundary(n: int, rng: np.random.Generator):
    """x ~ U(-1, 1)^4; y = 1[x2 > 0.5·sin(3·x1)]; x3, x4 are noise; 5% of labels flipped."""
    X = rng.uniform(-1.0, 1.0, (n, 4))
    y = (X[:, 1] > 0.5 * np.sin(3.0 * X[:, 0])).astype(int)
    flip = rng.random(n) < 0.05
    return X, np.where(flip, 1 - y, y)


def gen_gaussian_classes(n: int, rng: np.random.Generator):
    """Three equally likely classes; x | k ~ N(mu_k, I_6) with mu_k = 1.5·e_k (k = 0, 1, 2)."""
    k = rng.integers(0, 3, n)
    X = rng.standard_normal((n, 6))
    X[np.arange(n), k] += 1.5
    return X, k


def gen_friedman(n: int, rng: np.random.Generator):
    """x ~ U(0, 1)^10; y = (10·sin(pi·x1·x2) + 20·(x3 − 0.5)^2 + 10·x4 + 5·x5)/5 + e,
    e ~ N(0, 0.5^2): noise variance 0.25 (the lowest reachable MSE); x6..x10 are noise."""
    X = rng.uniform(0.0, 1.0, (n, 10))
    f = (10 * np.sin(np.pi * X[:, 0] * X[:, 1]) + 20 * (X[:, 2] - 0.5) ** 2 + 10 * X[:, 3]
         + 5 * X[:, 4]) / 5.0
    return X, f + 0.5 * rng.standard_normal(n)


def gen_linear_regression(n: int, rng: np.random.Generator):
    """x ~ N(0, I_10); y = beta·x + e with beta_j = 1/j, e ~ N(0, 1): noise variance 1."""
    beta = 1.0 / np.arange(1, 11)
    X = rng.standard_normal((n, 10))
    return X, X @ beta + rng.standard_normal(n)


GENERATORS = {
    "gen_logistic_noise": (gen_logistic_noise, "classification"),
    "gen_nonlinear_boundary": (gen_nonlinear_boundary, "classification"),
    "gen_gaussian_classes": (gen_gaussian_classes, "classification"),
    "gen_friedman": (gen_friedman, "regression"),
    "gen_linear_regression": (gen_linear_regression, "regression"),
}


def tables() -> list[Table]:
    """Every table of the corpus, cheapest first (a partial build is still useful)."""
    out = [
        Table("iris", "sklearn", "sklearn.datasets.load_iris", "classification", _sk("iris")),
        Table("wine", "sklearn", "sklearn.datasets.load_wine", "classification", _sk("wine")),
        Table("engel", "statsmodels", "statsmodels.api.datasets.engel", "regression", _sm_engel,
              note="foodexp from income (1 feature); target standardised"),
        Table("grunfeld", "statsmodels", "statsmodels.api.datasets.grunfeld", "regression",
              _sm_grunfeld, note="log(1 + invest) from value, capital, firm (one-hot), year; "
              "target standardised"),
        Table("cancer", "statsmodels", "statsmodels.api.datasets.cancer", "regression",
              _sm_cancer, note="cancer deaths from population (1 feature); target standardised"),
        Table("star98", "statsmodels", "statsmodels.api.datasets.star98", "regression",
              _sm_star98, note="share NABOVE/(NABOVE+NBELOW) from the 20 school covariates; "
              "target standardised"),
        Table("diabetes", "sklearn", "sklearn.datasets.load_diabetes", "regression",
              _sk("diabetes", regression=True), note="target standardised"),
        Table("breast_cancer", "sklearn", "sklearn.datasets.load_breast_cancer",
              "classification", _sk("breast_cancer")),
        Table("anes96", "statsmodels", "statsmodels.api.datasets.anes96", "classification",
              _sm_anes96, note="vote (Dole vs Clinton) from the other 10 columns"),
        Table("digits", "sklearn", "sklearn.datasets.load_digits", "classification",
              _sk("digits")),
    ]
    for name, (fn, task) in GENERATORS.items():
        out.append(Table(name, "generated", f"scripts/build_corpus.py:{fn.__name__}", task, fn,
                         formula=" ".join((fn.__doc__ or "").split()), n_rows=GEN_ROWS))
    out += [
        Table("fair", "statsmodels", "statsmodels.api.datasets.fair", "classification", _sm_fair,
              note="any affair (affairs > 0) from the other 8 columns"),
        Table("randhie", "statsmodels", "statsmodels.api.datasets.randhie", "classification",
              _sm_randhie, note="any doctor visit (mdvis > 0) from the other 9 columns; "
              "person-level covariates repeat over a person's years"),
    ]
    return out


def factories_for(table: Table) -> dict[str, Callable]:
    models = classifier_factories() if table.task == "classification" else regressor_factories()
    return {k: v for k, v in models.items() if k not in table.exclude_models}


# ====================================================================== sizes
def plan_sizes(pool: int, y, task: str) -> list[int]:
    """N_SIZES geometric sizes from the smallest sensible one to the whole pool."""
    if task == "classification":
        start = max(10, 3 * len(np.unique(y)))
    else:
        start = 10
    sizes = sorted({int(round(s)) for s in np.geomspace(start, pool, N_SIZES)})
    sizes[-1] = pool
    return sizes


def pool_of(n_rows: int) -> int:
    return n_rows - math.ceil(TEST_SIZE * n_rows)


# ====================================================================== storage
class Store:
    """corpus/curves/<dataset>.csv.gz plus corpus/index.json, written atomically."""

    def __init__(self, out: Path):
        self.out = out
        self.curves = out / "curves"
        self.journals = out / ".journal"
        self.index_path = out / "index.json"
        self.curves.mkdir(parents=True, exist_ok=True)
        self.index = self._read_index()

    def _read_index(self) -> dict:
        if self.index_path.is_file():
            return json.loads(self.index_path.read_text())
        return {"format": FORMAT, "columns": COLUMNS, "tables": {}, "pairs": {},
                "models": MODEL_NOTES, "settings": {}}

    def done(self, dataset: str, model: str) -> bool:
        return f"{dataset}/{model}" in self.index["pairs"] and self.path(dataset).is_file()

    def path(self, dataset: str) -> Path:
        return self.curves / f"{dataset}.csv.gz"

    def add(self, dataset: str, model: str, rows: pd.DataFrame, entry: dict, table: dict) -> None:
        path = self.path(dataset)
        if path.is_file():
            old = pd.read_csv(path)
            old = old[old["model"] != model]
            rows = pd.concat([old, rows], ignore_index=True)
        rows = rows[COLUMNS]
        tmp = path.with_suffix(".tmp")
        rows.to_csv(tmp, index=False, float_format="%.6g", compression="gzip")
        os.replace(tmp, path)
        self.index["tables"][dataset] = table
        self.index["pairs"][f"{dataset}/{model}"] = entry
        self.index["settings"] = settings()
        self._write_index()

    def _write_index(self) -> None:
        tmp = self.index_path.with_suffix(".tmp")
        tmp.write_text(json.dumps(self.index, indent=1, sort_keys=True) + "\n")
        os.replace(tmp, self.index_path)


def settings() -> dict:
    return {"test_size": TEST_SIZE, "n_sizes": N_SIZES, "repeats": REPEATS,
            "repeats_small_pool": REPEATS_SMALL, "small_pool": SMALL_POOL, "seed": SEED,
            "timeout": TIMEOUT, "generated_rows": GEN_ROWS, "truth_draws": TRUTH_DRAWS,
            "truth_test_rows": TRUTH_TEST, "svm_max_pool": SVM_MAX_POOL}


# ====================================================================== measuring
def _seed(*parts) -> int:
    """A stable integer seed from the corpus seed and names/numbers."""
    import zlib

    key = "/".join(map(str, parts)).encode()
    return int(np.random.SeedSequence([SEED, zlib.crc32(key)]).generate_state(1)[0])


def _curve_rows(curve, table: Table, model: str, pool: int) -> pd.DataFrame:
    p = curve.points
    return pd.DataFrame({
        "dataset": table.name, "source": table.source, "model": model, "task": table.task,
        "metric": curve.metric, "pool": pool, "size": p["size"], "repeat": p["repeat"],
        "train_error": p["train_error"], "test_error": p["test_error"], "n_test": p["n_test"],
        "baseline_error": p["baseline_error"], "true_error": math.nan, "true_error_sem": math.nan,
        "fit_seconds": p["fit_seconds"].round(4), "status": p["status"]})


def true_errors(table: Table, model: str, factory, sizes: list[int], pool: int,
                journal_dir: Path) -> pd.DataFrame:
    """True error at each size for a generated task, explicitly: for each of TRUTH_DRAWS
    independent draws, a fresh training sample of ``pool`` rows and a fresh test sample
    of TRUTH_TEST rows come from the generator; the model is trained (with the runner,
    one repeat) at every size on a prefix of the training sample and scored on the
    TRUTH_TEST rows. The true error at n is the mean over draws (with its standard
    error), i.e. the expected error of a model trained on n fresh rows."""
    per_draw = []
    for k in range(TRUTH_DRAWS):
        rng = np.random.default_rng(_seed(table.name, "truth", k))
        X, y = table.load(pool, rng)
        X_big, y_big = table.load(TRUTH_TEST, rng)
        curve = cf.measure(factory, X, y, X_test=X_big, y_test=y_big, sizes=sizes, repeats=1,
                           random_state=_seed(table.name, model, "truth", k), n_jobs=1,
                           timeout=TIMEOUT, journal=journal_dir / f"truth{k}.jsonl",
                           resume=True)
        ok = curve.ok_points()
        per_draw.append(ok.set_index("size")["test_error"].rename(k))
    frame = pd.concat(per_draw, axis=1)
    return pd.DataFrame({"size": frame.index, "true_error": frame.mean(axis=1).to_numpy(),
                         "true_error_sem": (frame.std(axis=1, ddof=1)
                                            / np.sqrt(frame.notna().sum(axis=1))).to_numpy()})


def _pair_data(table: Table):
    """The rows a pair is measured on (a generated task draws them from its own seed)."""
    if table.generated:
        rng = np.random.default_rng(_seed(table.name, "data"))
        return table.load(table.n_rows, rng)
    return table.load()


def add_baseline(table: Table, models: list[str], store: Store) -> int:
    """Add the constant predictor's error (``baseline_error``) to the stored curves of
    ``table``: the runner is run again on the same seeds, hence on the same splits, with
    a constant model (scikit-learn's DummyClassifier / DummyRegressor, instant), and the
    column the runner records beside every cell is copied over; the stored test rows
    are checked to match. Curves measured before the runner recorded that column get it
    without measuring their model again. Returns the number of cells updated."""
    from sklearn.dummy import DummyClassifier, DummyRegressor

    path = store.path(table.name)
    stored = pd.read_csv(path)
    X, y = _pair_data(table)
    pool = pool_of(len(y))
    sizes = plan_sizes(pool, y, table.task)
    repeats = REPEATS_SMALL if pool < SMALL_POOL else REPEATS
    constant = DummyRegressor if table.task == "regression" else DummyClassifier
    parts = []
    for model in models:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            curve = cf.measure(constant, X, y, sizes=sizes, repeats=repeats, test_size=TEST_SIZE,
                               random_state=_seed(table.name, model), n_jobs=1)
        parts.append(curve.points[["size", "repeat", "n_test", "baseline_error"]]
                     .assign(model=model))
    new = pd.concat(parts, ignore_index=True)
    merged = stored.drop(columns=["baseline_error"], errors="ignore").merge(
        new, on=["model", "size", "repeat"], how="left", suffixes=("", "_constant"), validate="1:1")
    known = merged["n_test_constant"].notna()
    if not (merged.loc[known, "n_test"] == merged.loc[known, "n_test_constant"]).all():
        raise RuntimeError(f"{table.name}: the constant model's test rows differ from the stored ones")
    merged = merged.drop(columns=["n_test_constant"])
    tmp = path.with_suffix(".tmp")
    merged[COLUMNS].to_csv(tmp, index=False, float_format="%.6g", compression="gzip")
    os.replace(tmp, path)
    store.index["columns"] = COLUMNS
    store._write_index()
    return int(known.sum())


def measure_pair(table: Table, model: str, factory, store: Store) -> dict:
    t0 = time.perf_counter()
    X, y = _pair_data(table)
    n_rows = len(y)
    pool = pool_of(n_rows)
    sizes = plan_sizes(pool, y, table.task)
    repeats = REPEATS_SMALL if pool < SMALL_POOL else REPEATS
    jdir = store.journals / f"{table.name}-{model}"
    jdir.mkdir(parents=True, exist_ok=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # duplicate-row and convergence warnings
        curve = cf.measure(factory, X, y, sizes=sizes, repeats=repeats, test_size=TEST_SIZE,
                           random_state=_seed(table.name, model), n_jobs=1, timeout=TIMEOUT,
                           journal=jdir / "curve.jsonl", resume=True)
        rows = _curve_rows(curve, table, model, pool)
        if table.generated:
            truth = true_errors(table, model, factory, sizes, pool, jdir)
            rows = rows.drop(columns=["true_error", "true_error_sem"]).merge(truth, on="size",
                                                                              how="left")
    seconds = time.perf_counter() - t0
    entry = {"dataset": table.name, "model": model, "source": table.source,
             "loader": table.loader, "task": table.task, "metric": curve.metric,
             "n_rows": n_rows, "pool": pool, "n_test": int(curve.meta["n_test"]),
             "sizes": sizes, "repeats": repeats,
             "failed_cells": int((curve.points["status"] != "ok").sum()),
             "seconds": round(seconds, 1),
             "finished": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")}
    if table.generated:
        entry["truth"] = {"draws": TRUTH_DRAWS, "test_rows": TRUTH_TEST}
    info = {"source": table.source, "loader": table.loader, "task": table.task,
            "n_rows": n_rows, "n_features": int(np.shape(X)[1]), "pool": pool,
            "note": table.note, "formula": table.formula}
    store.add(table.name, model, rows, entry, info)
    shutil.rmtree(jdir, ignore_errors=True)
    return entry


# ====================================================================== main
def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=ROOT / "corpus")
    ap.add_argument("--only", default="", help="comma-separated dataset names")
    ap.add_argument("--models", default="", help="comma-separated model names")
    ap.add_argument("--list", action="store_true", help="print the plan and exit")
    ap.add_argument("--add-baseline", action="store_true",
                    help="add the constant predictor's error to the stored curves and exit")
    args = ap.parse_args(argv)
    only = {s for s in args.only.split(",") if s}
    wanted_models = {s for s in args.models.split(",") if s}
    store = Store(args.out)
    plan = []
    for table in tables():
        if only and table.name not in only:
            continue
        for model, factory in factories_for(table).items():
            if wanted_models and model not in wanted_models:
                continue
            plan.append((table, model, factory))
    if args.add_baseline:
        for table in tables():
            done = [m for t, m, _ in plan if t.name == table.name and store.done(t.name, m)]
            if done:
                print(f"{table.name}: {add_baseline(table, done, store)} cells", flush=True)
        return 0
    if args.list:
        for table, model, _ in plan:
            print(f"{table.name:24s} {model:12s} {'done' if store.done(table.name, model) else 'todo'}")
        return 0
    todo = [(t, m, f) for t, m, f in plan if not store.done(t.name, m)]
    print(f"corpus: {len(plan)} (dataset, model) pairs planned, {len(plan) - len(todo)} done, "
          f"{len(todo)} to measure; load average {os.getloadavg()[0]:.1f}", flush=True)
    start = time.perf_counter()
    for i, (table, model, factory) in enumerate(todo, 1):
        if model == "svm" and table.n_rows is None:
            X, y = table.load()
            if pool_of(len(y)) > SVM_MAX_POOL:
                print(f"[{i}/{len(todo)}] {table.name} {model}: skipped (pool above "
                      f"{SVM_MAX_POOL})", flush=True)
                continue
        try:
            entry = measure_pair(table, model, factory, store)
        except Exception as exc:  # one broken pair must not stop the build
            print(f"[{i}/{len(todo)}] {table.name} {model}: FAILED {type(exc).__name__}: {exc}",
                  flush=True)
            continue
        elapsed = time.perf_counter() - start
        print(f"[{i}/{len(todo)}] {table.name:22s} {model:12s} pool {entry['pool']:6d} "
              f"{len(entry['sizes']):2d} sizes x {entry['repeats']:2d} repeats "
              f"{entry['failed_cells']} failed  {entry['seconds']:7.1f} s  "
              f"(total {elapsed / 60:6.1f} min)", flush=True)
    print(f"corpus: finished in {(time.perf_counter() - start) / 60:.1f} min", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
