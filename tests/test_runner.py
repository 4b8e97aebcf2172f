"""The runner `measure`: checked against scikit-learn's learning_curve and bundled datasets."""

import time

import numpy as np
import pandas as pd
import pytest
from scipy.stats import spearmanr
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.datasets import load_diabetes, load_digits, load_iris
from sklearn.dummy import DummyClassifier
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.model_selection import learning_curve
from sklearn.svm import SVC
from sklearn.tree import DecisionTreeClassifier

import curvefit as cf
from curvefit.core.errors import InputError
from curvefit.measuring.splits import RandomSplit

COMPARE = ["size", "repeat", "train_error", "test_error", "n_test", "n_test_errors", "status", "message"]


@pytest.fixture(scope="module")
def digits():
    return load_digits(return_X_y=True)


def test_cells_equal_sklearn_learning_curve(digits):
    # Reference library: sklearn.model_selection.learning_curve, given the same
    # train/test indices (an explicit cv iterable) and absolute train_sizes, takes
    # train[:n] for each size, as curvefit's nested prefixes do.
    X, y = digits
    X, y = X[:900], y[:900]
    sizes, repeats = [40, 120, 400], 2
    model = LogisticRegression(max_iter=300)
    curve = cf.measure(model, X, y, sizes=sizes, repeats=repeats, random_state=7)
    plans = RandomSplit(0.25).split(y, repeats, 7)
    cv = [(p.pool, p.test) for p in plans]
    _, train_scores, test_scores = learning_curve(model, X, y, train_sizes=sizes, cv=cv,
                                                  scoring="accuracy", shuffle=False)
    pts = curve.points.set_index(["size", "repeat"])
    for i, s in enumerate(sizes):
        for r in range(repeats):
            assert pts.loc[(s, r), "test_error"] == 1.0 - test_scores[i, r]
            assert pts.loc[(s, r), "train_error"] == 1.0 - train_scores[i, r]
    # the error count recovers the error exactly
    assert np.allclose(curve.points["n_test_errors"] / curve.points["n_test"], curve.points["test_error"])


def test_scorer_metric_equals_sklearn_learning_curve():
    # Same reference, with a probability scorer: the loss is -neg_log_loss.
    X, y = load_iris(return_X_y=True)
    sizes = [20, 60]
    model = LogisticRegression(max_iter=500)
    curve = cf.measure(model, X, y, sizes=sizes, repeats=2, metric="neg_log_loss", random_state=3)
    cv = [(p.pool, p.test) for p in RandomSplit(0.25).split(y, 2, 3)]
    _, tr, te = learning_curve(model, X, y, train_sizes=sizes, cv=cv, scoring="neg_log_loss",
                               shuffle=False)
    pts = curve.points.set_index(["size", "repeat"])
    for i, s in enumerate(sizes):
        for r in range(2):
            assert pts.loc[(s, r), "test_error"] == -te[i, r]
            assert pts.loc[(s, r), "train_error"] == -tr[i, r]
    assert curve.meta["metric_info"]["transform"] == "-neg_log_loss"
    assert np.isnan(curve.points["n_test_errors"]).all()


def test_digits_linear_model_curve_decreases_to_the_reported_range(digits):
    # Bundled optical digits (UCI, shipped with scikit-learn). Linear models such as
    # logistic regression reach about 3-5% test error on it with ~1,300 training
    # images (from memory: scikit-learn's digits examples report ~96-97% accuracy).
    X, y = digits
    curve = cf.measure(LogisticRegression(max_iter=300), X, y, repeats=2, random_state=0)
    s = curve.summary()
    assert len(s) >= 8
    assert spearmanr(s["size"], s["test_mean"]).statistic < -0.9
    full = s.iloc[-1]
    assert full["size"] == curve.meta["n_pool"] == 1347
    assert 0.01 <= full["test_mean"] <= 0.07
    # default floor: two rows of each of the 10 classes in every subsample
    assert s["size"].iloc[0] >= 20


def test_same_seed_same_points_for_any_n_jobs():
    X, y = load_iris(return_X_y=True)
    kw = dict(sizes=[15, 40, 100], repeats=2, random_state=11)
    a = cf.measure(DecisionTreeClassifier(), X, y, n_jobs=1, **kw)
    b = cf.measure(DecisionTreeClassifier(), X, y, n_jobs=2, **kw)
    pd.testing.assert_frame_equal(a.points[COMPARE + ["model_seed"]], b.points[COMPARE + ["model_seed"]])
    c = cf.measure(DecisionTreeClassifier(), X, y, n_jobs=1, **{**kw, "random_state": 12})
    assert not np.array_equal(a.points["test_error"], c.points["test_error"])


def test_callers_estimator_is_never_fitted():
    X, y = load_iris(return_X_y=True)
    est = LogisticRegression(max_iter=300)
    cf.measure(est, X, y, sizes=[30], repeats=1)
    assert not hasattr(est, "coef_")


class _Fragile(BaseEstimator, ClassifierMixin):
    """Fails on small subsamples, sleeps when asked: a misbehaving user model."""

    def __init__(self, fail_below=0, sleep=0.0):
        self.fail_below = fail_below
        self.sleep = sleep

    def fit(self, X, y):
        if len(y) < self.fail_below:
            raise RuntimeError("not enough rows for this model")
        if self.sleep:
            time.sleep(self.sleep)
        self.inner_ = DummyClassifier().fit(X, y)
        self.classes_ = self.inner_.classes_
        return self

    def predict(self, X):
        return self.inner_.predict(X)


def test_failing_fit_is_recorded_and_the_run_goes_on():
    X, y = load_iris(return_X_y=True)
    curve = cf.measure(_Fragile(fail_below=30), X, y, sizes=[10, 50], repeats=2)
    failed = curve.failed_points()
    assert set(failed["size"]) == {10} and len(failed) == 2
    assert failed["message"].str.contains("RuntimeError: not enough rows").all()
    assert (curve.points.query("size == 50")["status"] == "ok").all()


def test_timeout_stops_a_slow_python_fit():
    X, y = load_iris(return_X_y=True)
    start = time.perf_counter()
    curve = cf.measure(_Fragile(sleep=5.0), X, y, sizes=[20], repeats=1, timeout=0.3)
    assert time.perf_counter() - start < 4.0
    row = curve.points.iloc[0]
    assert row["status"] == "failed" and "time limit" in row["message"]


def test_given_test_set_is_used_by_every_repeat():
    X, y = load_iris(return_X_y=True)
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    tr, te = idx[:100], idx[100:]
    curve = cf.measure(LogisticRegression(max_iter=300), X[tr], y[tr], X_test=X[te], y_test=y[te],
                       sizes=[30, 100], repeats=2)
    assert (curve.points["n_test"] == 50).all()
    assert curve.meta["split"]["kind"] == "given_test"
    full = curve.points.query("size == 100")["test_error"].to_numpy()
    assert full[0] == full[1]  # same data, same test set: the full-size cells agree


def test_regression_default_metric_is_mse():
    X, y = load_diabetes(return_X_y=True)
    curve = cf.measure(Ridge(alpha=0.1), X, y, sizes=[30, 300], repeats=2)
    assert curve.meta["task"] == "regression"
    assert curve.meta["metric_info"]["transform"] == "mean squared error"
    assert (curve.points["test_error"] > 1000).all()  # MSE in squared target units


def test_metadata_records_the_run():
    X, y = load_iris(return_X_y=True)
    curve = cf.measure(LogisticRegression(max_iter=300), X, y, sizes=[30], repeats=1, random_state=4)
    m = curve.meta
    for key in ("model", "encoding", "data", "task", "sizes", "repeats", "seed", "metric",
                "metric_direction", "n_test", "n_pool", "split", "versions", "started", "finished"):
        assert key in m
    assert m["seed"] == 4 and m["versions"]["sklearn"] and len(m["data"]["fingerprint"]) == 64


@pytest.mark.parametrize("kwargs, match", [
    (dict(metric="nope"), "unknown metric"),
    (dict(sizes=[10, 1000]), "larger than the training pool"),
    (dict(sizes=[500]), "too few rows"),
    (dict(metric="neg_log_loss", model=SVC()), "needs predict_proba"),
    (dict(repeats=0), "repeats"),
])
def test_bad_input_raises_before_any_fit(kwargs, match):
    X, y = load_iris(return_X_y=True)
    model = kwargs.pop("model", LogisticRegression())
    with pytest.raises(InputError, match=match):
        cf.measure(model, X, y, **kwargs)


def test_single_class_and_nan_target():
    X = np.arange(20.0).reshape(10, 2)
    with pytest.raises(InputError, match="single class"):
        cf.measure(LogisticRegression(), X, np.zeros(10, dtype=int))
    y = np.array([0, 1] * 5, dtype=float)
    y[3] = np.nan
    with pytest.raises(InputError, match="missing"):
        cf.measure(LogisticRegression(), X, y)


def test_group_and_order_columns_by_name_are_not_features():
    X, y = load_iris(return_X_y=True, as_frame=True)
    X = X.assign(site=np.arange(len(y)) % 12, day=np.arange(len(y)))
    grouped = cf.measure(LogisticRegression(max_iter=300), X, y, groups="site", sizes=[40], repeats=1)
    assert grouped.meta["split"]["kind"] == "groups"
    assert "site" not in grouped.meta["data"]["features"] and "day" in grouped.meta["data"]["features"]
    ordered = cf.measure(LogisticRegression(max_iter=300), X.drop(columns="site"), y, order="day",
                         sizes=[40], repeats=2, metric="balanced_error")
    assert ordered.meta["split"]["kind"] == "order"
    assert "day" not in ordered.meta["data"]["features"]


def test_progress_callback_sees_every_cell_and_the_resumed_ones(tmp_path):
    X, y = load_iris(return_X_y=True)
    events = []
    kw = dict(sizes=[20, 60], repeats=2, journal=tmp_path / "run.json.journal")
    curve = cf.measure(DecisionTreeClassifier(), X, y, progress=lambda *e: events.append(e), **kw)
    assert events[0] == (0, 4, None)
    assert [e[0] for e in events] == [0, 1, 2, 3, 4] and {e[1] for e in events} == {4}
    assert sorted((c["size"], c["repeat"]) for _, _, c in events[1:]) == \
        sorted(zip(curve.points["size"], curve.points["repeat"]))
    again = []
    cf.measure(DecisionTreeClassifier(), X, y, resume=True, progress=lambda *e: again.append(e), **kw)
    assert again == [(4, 4, None)]  # everything came from the journal


def test_progress_true_runs_without_a_terminal():
    X, y = load_iris(return_X_y=True)
    curve = cf.measure(DecisionTreeClassifier(), X, y, sizes=[20], repeats=1, progress=True)
    assert len(curve.points) == 1


def test_seed_none_or_generator_is_drawn_and_recorded():
    X, y = load_iris(return_X_y=True)
    kw = dict(sizes=[20, 60], repeats=2)
    drawn = cf.measure(DecisionTreeClassifier(), X, y, random_state=None, **kw)
    seed = drawn.meta["seed"]
    assert isinstance(seed, int) and seed >= 0
    again = cf.measure(DecisionTreeClassifier(), X, y, random_state=seed, **kw)
    pd.testing.assert_frame_equal(drawn.points[COMPARE], again.points[COMPARE])
    from_generator = cf.measure(DecisionTreeClassifier(), X, y,
                                random_state=np.random.default_rng(5), **kw)
    assert from_generator.meta["seed"] == int(np.random.default_rng(5).integers(2 ** 32))


def test_defaults_come_from_the_shared_core():
    import inspect

    from curvefit.core import defaults

    params = inspect.signature(cf.measure).parameters
    assert params["repeats"].default == defaults.REPEATS
    assert params["test_size"].default == defaults.TEST_FRACTION
    assert params["random_state"].default == defaults.SEED


@pytest.mark.parametrize("kwargs, match", [
    (dict(repeats=2.5), "repeats must be a whole number"),
    (dict(random_state=-1), "random_state"),
    (dict(n_jobs=0), "n_jobs"),
    (dict(timeout=0), "timeout"),
    (dict(backend="cloud"), "backend"),
    (dict(size_unit="groups"), "group column"),
    (dict(progress="loud"), "progress"),
    (dict(resume=True), "journal"),
    (dict(X_test=np.zeros((3, 4))), "both X_test and y_test"),
])
def test_settings_are_checked_before_any_fit(kwargs, match):
    X, y = load_iris(return_X_y=True)
    with pytest.raises(InputError, match=match):
        cf.measure(_Fragile(sleep=60), X, y, sizes=[20], repeats=kwargs.pop("repeats", 1), **kwargs)


def test_every_cell_records_the_constant_predictors_error():
    # scikit-learn's breast_cancer data (212 malignant, 357 benign): with a separate test set
    # the majority class of every training subsample is "benign" (1), so the constant
    # predictor's error is the test set's share of malignant rows in every cell
    from sklearn.datasets import load_breast_cancer

    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(1)
    idx = rng.permutation(len(y))
    tr, te = idx[:400], idx[400:]
    curve = cf.measure(LogisticRegression(max_iter=2000), X[tr], y[tr], X_test=X[te], y_test=y[te],
                       sizes=[40, 120, 400], repeats=2, random_state=0)
    expected = float(np.mean(y[te] != 1))
    np.testing.assert_allclose(curve.points["baseline_error"], expected, rtol=0, atol=1e-15)
    summary = curve.summary()
    np.testing.assert_allclose(summary["baseline_mean"], expected, atol=1e-15)
    assert curve.meta["baseline"] == "the majority class of each training subsample"
    shares = curve.meta["class_shares"]
    assert list(shares) == ["1", "0"] and shares["0"] == pytest.approx(np.mean(y[tr] == 0))


def test_regressor_cells_record_the_mean_predictors_mse():
    # the constant regressor predicts the training subsample's mean (scikit-learn's DummyRegressor)
    from sklearn.dummy import DummyRegressor

    X, y = load_diabetes(return_X_y=True)
    curve = cf.measure(Ridge(alpha=0.1), X[:300], y[:300], X_test=X[300:], y_test=y[300:],
                       sizes=[300], repeats=1)
    mean = DummyRegressor().fit(X[:300], y[:300]).predict(X[300:])
    assert curve.points["baseline_error"].iloc[0] == pytest.approx(np.mean((mean - y[300:]) ** 2))
    assert "class_shares" not in curve.meta
    assert curve.meta["baseline"] == "the mean target of each training subsample"
