"""Losses checked against scikit-learn's metric functions (the reference library)."""

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_diabetes, load_iris
from sklearn.linear_model import LinearRegression, LogisticRegression
from sklearn.metrics import (
    balanced_accuracy_score,
    f1_score,
    log_loss,
    mean_absolute_error,
    mean_squared_error,
    r2_score,
    roc_auc_score,
)
from sklearn.svm import SVC

from curvefit.core.errors import InputError
from curvefit.measuring.metrics import check_response, resolve_metric


@pytest.fixture(scope="module")
def iris_fit():
    X, y = load_iris(return_X_y=True)
    return LogisticRegression(max_iter=500).fit(X, y), X, y


def test_zero_one_error_and_count_match_accuracy(iris_fit):
    est, X, y = iris_fit
    loss, k = resolve_metric("error", "classification").loss(est, X, y)
    pred = est.predict(X)
    assert loss == 1.0 - np.mean(pred == y)  # scikit-learn's accuracy, complemented
    assert k == int((pred != y).sum())


def test_balanced_error_matches_sklearn(iris_fit):
    est, X, y = iris_fit
    loss, k = resolve_metric("balanced_error", "classification").loss(est, X, y)
    assert loss == pytest.approx(1 - balanced_accuracy_score(y, est.predict(X)), abs=1e-15)
    assert k is None


def test_regression_losses_match_sklearn():
    X, y = load_diabetes(return_X_y=True)
    est = LinearRegression().fit(X, y)
    pred = est.predict(X)

    def loss(name):
        return resolve_metric(name, "regression").loss(est, X, y)[0]

    assert loss("error") == pytest.approx(mean_squared_error(y, pred), rel=1e-12)
    assert loss("mae") == pytest.approx(mean_absolute_error(y, pred), rel=1e-12)
    # r2 scorer: loss is 1 - r2 (fraction of variance unexplained)
    assert loss("r2") == pytest.approx(1 - r2_score(y, pred), rel=1e-12)


def test_scorers_become_losses(iris_fit):
    est, X, y = iris_fit
    f1 = resolve_metric("f1_macro", "classification")
    assert f1.transform == "1 - f1_macro"
    assert f1.loss(est, X, y)[0] == pytest.approx(1 - f1_score(y, est.predict(X), average="macro"), abs=1e-12)
    ll = resolve_metric("neg_log_loss", "classification")
    assert ll.response == "predict_proba"
    assert ll.loss(est, X, y)[0] == pytest.approx(log_loss(y, est.predict_proba(X)), rel=1e-12)


def test_roc_auc_binary():
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    # scaled features: lbfgs converges in about 20 iterations instead of 2,500 (seconds)
    est = make_pipeline(StandardScaler(), LogisticRegression()).fit(X, y)
    m = resolve_metric("roc_auc", "classification")
    assert m.loss(est, X, y)[0] == pytest.approx(1 - roc_auc_score(y, est.decision_function(X)), abs=1e-12)


def test_precomputed_predictions_give_the_same_loss(iris_fit):
    est, X, y = iris_fit
    for name in ("error", "balanced_error", "f1_macro", "accuracy"):
        m = resolve_metric(name, "classification")
        assert m.loss(est, X, y, est.predict(X))[0] == pytest.approx(m.loss(est, X, y)[0], abs=1e-15)


def test_unknown_metric_and_wrong_task():
    with pytest.raises(InputError, match="unknown metric"):
        resolve_metric("accuracy_typo", "classification")
    with pytest.raises(InputError, match="classification"):
        resolve_metric("balanced_error", "regression")


def test_probability_metric_needs_predict_proba():
    m = resolve_metric("neg_log_loss", "classification")
    with pytest.raises(InputError, match="predict_proba"):
        check_response(m, SVC())
    check_response(m, SVC(probability=True))
    # roc_auc takes decision_function or predict_proba
    check_response(resolve_metric("roc_auc", "classification"), SVC())


def test_constant_loss_is_the_dummy_models_loss():
    # reference: scikit-learn's DummyClassifier / DummyRegressor scored with sklearn.metrics
    from sklearn.dummy import DummyClassifier, DummyRegressor

    from curvefit.measuring.metrics import constant_loss

    X, y = load_breast_cancer(return_X_y=True)
    tr, te = slice(0, 400), slice(400, None)
    majority = DummyClassifier(strategy="most_frequent").fit(X[tr], y[tr])
    for name, expected in [
        ("error", 1 - np.mean(majority.predict(X[te]) == y[te])),
        ("balanced_error", 1 - balanced_accuracy_score(y[te], majority.predict(X[te]))),
        ("neg_log_loss", log_loss(y[te], DummyClassifier(strategy="prior").fit(X[tr], y[tr])
                                  .predict_proba(X[te]))),
    ]:
        got = constant_loss(resolve_metric(name, "classification"), y[tr], y[te], "classification")
        assert got == pytest.approx(expected, abs=1e-12), name
    # a constant scores 0.5 balanced error whatever the class shares (one recall 1, the rest 0)
    assert constant_loss(resolve_metric("balanced_error", "classification"), y[tr], y[te],
                         "classification") == pytest.approx(0.5)
    Xd, yd = load_diabetes(return_X_y=True)
    mean = DummyRegressor(strategy="mean").fit(Xd[:300], yd[:300]).predict(Xd[300:])
    for name, fn in [("mse", mean_squared_error), ("mae", mean_absolute_error)]:
        got = constant_loss(resolve_metric(name, "regression"), yd[:300], yd[300:], "regression")
        assert got == pytest.approx(fn(yd[300:], mean), rel=1e-12), name


def test_constant_loss_is_nan_when_the_metric_cannot_score_a_constant():
    from curvefit.measuring.metrics import constant_loss

    # log loss with a test class the training rows lack: scikit-learn refuses the labels
    m = resolve_metric("neg_log_loss", "classification")
    assert np.isnan(constant_loss(m, [0, 0, 1], [0, 2, 1], "classification"))
    assert np.isnan(constant_loss(m, [], [0, 1], "classification"))


def test_sign_and_label_come_from_the_scorer_object():
    # reference: scikit-learn's scorers; get_scorer(name)._sign is -1 exactly when the
    # scorer was made with greater_is_better=False (a negated loss)
    from sklearn.metrics import get_scorer, max_error

    X, y = load_diabetes(return_X_y=True)
    est = LinearRegression().fit(X, y)
    pred = est.predict(X)
    for name in ("max_error", "neg_max_error"):
        m = resolve_metric(name, "regression")
        assert (m.sign, m.label, m.scorer) == (get_scorer("neg_max_error")._sign, "max error",
                                               "neg_max_error")
        # the max error itself, not 1 - score
        assert m.loss(est, X, y)[0] == pytest.approx(max_error(y, pred), rel=1e-12)
        assert m.loss(est, X, y, pred)[0] == pytest.approx(max_error(y, pred), rel=1e-12)
    r2 = resolve_metric("r2", "regression")
    assert (r2.sign, r2.label) == (get_scorer("r2")._sign, "1 − R²")
    auc = resolve_metric("roc_auc", "classification")
    assert (auc.sign, auc.label, auc.direction) == (1, "1 − ROC AUC", "lower is better")
    assert resolve_metric("neg_log_loss", "classification").label == "log loss"
    assert resolve_metric("error", "regression").label == "MSE"
    assert resolve_metric("error", "classification").label == "error"


def test_every_scorer_turns_into_a_loss_by_its_sign():
    # reference: every scorer scikit-learn ships; a negated loss becomes the loss itself,
    # a greater-is-better score becomes 1 - score, whatever its name says
    from sklearn.metrics import get_scorer, get_scorer_names

    for name in get_scorer_names():
        m = resolve_metric(name, "classification")
        sign = get_scorer(name)._sign
        assert m.sign == sign, name
        assert m.label.startswith("1 − ") == (sign > 0), name
