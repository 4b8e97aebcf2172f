"""Losses for learning curves: every metric is turned into a loss where larger is worse.

Built-in names:

* ``"error"`` — 0-1 error (misclassified fraction) for classifiers, mean squared
  error for regressors. For classifiers the count of test errors is kept too, so
  exact binomial intervals can be computed later.
* ``"mse"``, ``"mae"`` — mean squared / mean absolute error.
* ``"balanced_error"`` — 1 − balanced accuracy (mean per-class recall).

Any scikit-learn scorer name (``sklearn.metrics.get_scorer_names()``) is accepted too,
and so is the name of a loss whose scorer is its negation (``max_error`` for
``neg_max_error``). The scorer object, not its name, says how it becomes a loss: its
sign (``greater_is_better=False`` makes scikit-learn negate the loss) and its score
function give

* a negated loss (sign −1): the loss is ``−score``, the metric itself, named by its
  function (``neg_log_loss`` → "log loss", ``neg_max_error`` → "max error");
* a score where greater is better (sign +1; accuracy, f1, roc_auc, r2, ...): the loss
  is ``1 − score``, labelled so ("1 − ROC AUC", "1 − R²").

The metric's name, label, transform and direction are recorded in the run metadata
(``metric_info``), and every sentence names the metric by that label
(`curvefit.core.formatting.metric_name`).

`constant_loss` scores the constant predictor (the majority class of the training rows
for a classifier, their mean for a regressor) with the same metric, so every cell also
records what a model that ignores the features would get on the same test rows.
"""

from __future__ import annotations

import warnings
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from curvefit.core.errors import InputError

BUILTIN = ("error", "mse", "mae", "balanced_error")


@dataclass(frozen=True)
class Metric:
    """A loss computed from a fitted estimator on (X, y); larger is worse.

    Attributes
    ----------
    name : str
        The name the user gave (``"error"``, ``"f1_macro"``, ...).
    kind : str
        ``"zero_one"``, ``"mse"``, ``"mae"``, ``"balanced_error"`` or ``"scorer"``.
    transform : str
        How the loss relates to the underlying quantity, e.g. ``"1 - accuracy"``.
    response : str
        What the loss needs from the model: ``"predict"``, ``"predict_proba"`` or
        ``"decision_function|predict_proba"``.
    counts_errors : bool
        True for the 0-1 error, whose per-row error count is recorded.
    direction : str
        Always ``"lower is better"``: the value recorded is a loss.
    label : str
        The loss's name in sentences: ``"error"``, ``"MSE"``, ``"1 − ROC AUC"``,
        ``"max error"``.
    scorer : str
        The scikit-learn scorer behind a ``"scorer"`` metric (``"neg_max_error"`` for
        ``max_error``); "" otherwise.
    sign : int
        The scorer's sign: −1 when scikit-learn negates a loss (the loss is −score),
        +1 for a score where greater is better (the loss is 1 − score).
    """

    name: str
    kind: str
    transform: str
    response: str = "predict"
    counts_errors: bool = False
    direction: str = "lower is better"
    label: str = ""
    scorer: str = ""
    sign: int = 1

    def to_dict(self) -> dict:
        return asdict(self)

    # ------------------------------------------------------------------ loss
    def loss(self, estimator: Any, X: Any, y: np.ndarray,
             predictions: np.ndarray | None = None) -> tuple[float, int | None]:
        """Loss of ``estimator`` on ``(X, y)`` and, for the 0-1 error, the error count.

        ``predictions`` (from ``estimator.predict(X)``) may be passed in when the
        caller already has them (programs run once for train and test); metrics that
        need scores or probabilities ignore them.
        """
        y = np.asarray(y)
        if self.kind == "scorer":
            from sklearn.metrics import get_scorer

            scorer = get_scorer(self.scorer or self.name)
            if predictions is not None and self.response == "predict":
                # a program's predictions: score them without calling predict again
                score = scorer._sign * scorer._score_func(y, predictions, **scorer._kwargs)
            else:
                score = scorer(estimator, X, y)
            return score_to_loss(float(score), self.sign), None
        pred = np.asarray(estimator.predict(X) if predictions is None else predictions)
        if self.kind == "zero_one":
            pred = pred.reshape(y.shape)
            same = pred == y
            # 1 - mean(...) is exactly how scikit-learn's accuracy scorer would read
            return 1.0 - float(np.mean(same)), int(np.count_nonzero(~same))
        if self.kind == "balanced_error":
            from sklearn.metrics import balanced_accuracy_score

            return 1.0 - float(balanced_accuracy_score(y, pred)), None
        pred = pred.astype(float).reshape(y.shape)
        diff = pred - y.astype(float)
        if self.kind == "mse":
            return float(np.mean(diff ** 2)), None
        return float(np.mean(np.abs(diff))), None


def score_to_loss(score: float, sign: int) -> float:
    """The loss behind a scorer's value: ``−score`` for a negated loss (``sign`` −1),
    ``1 − score`` for a score where greater is better (``sign`` +1).

    >>> score_to_loss(-3.5, -1), score_to_loss(0.75, 1)
    (3.5, 0.25)
    """
    return -score if sign < 0 else 1.0 - score


# How scikit-learn's score functions are named in sentences (the rest: the function's
# name without "_score", in words).
SCORE_NAMES = {
    "accuracy_score": "accuracy", "balanced_accuracy_score": "balanced accuracy",
    "roc_auc_score": "ROC AUC", "average_precision_score": "average precision",
    "r2_score": "R²", "f1_score": "F1", "explained_variance_score": "explained variance",
    "matthews_corrcoef": "Matthews correlation", "log_loss": "log loss",
    "brier_score_loss": "Brier score", "mean_squared_error": "MSE",
    "root_mean_squared_error": "RMSE", "mean_absolute_error": "MAE",
    "mean_absolute_percentage_error": "mean absolute percentage error",
    "top_k_accuracy_score": "top-k accuracy",
}


def scorer_label(scorer: Any) -> str:
    """The loss a scikit-learn scorer object stands for, in words: the loss itself when the
    scorer negates it, ``1 − score`` for a score where greater is better.

    Examples
    --------
    >>> from sklearn.metrics import get_scorer
    >>> scorer_label(get_scorer("roc_auc")), scorer_label(get_scorer("neg_max_error"))
    ('1 − ROC AUC', 'max error')
    >>> scorer_label(get_scorer("f1_macro")), scorer_label(get_scorer("neg_log_loss"))
    ('1 − F1 (macro)', 'log loss')
    """
    func = getattr(scorer, "_score_func", None)
    func_name = getattr(func, "__name__", "") or "score"
    base = SCORE_NAMES.get(func_name, func_name.removesuffix("_score").replace("_", " "))
    kwargs = getattr(scorer, "_kwargs", {}) or {}
    detail = [str(kwargs[k]) for k in ("multi_class", "average")
              if kwargs.get(k) not in (None, "binary")]
    if detail:
        base += f" ({', '.join(detail)})"
    return base if getattr(scorer, "_sign", 1) < 0 else f"1 − {base}"


def constant_loss(metric: Metric, y_train, y_test, task: str) -> float:
    """The loss of the constant predictor on ``y_test``, trained on ``y_train`` alone.

    A classifier always predicts the majority class of ``y_train`` (scikit-learn's
    ``DummyClassifier(strategy="prior")``: the majority class as its label, the class
    shares as its probabilities); a regressor always predicts the mean of ``y_train``.
    It is scored with ``metric`` exactly as the model is, so the two read side by side.
    NaN when the metric cannot score a constant (for example a class of ``y_test``
    that ``y_train`` lacks, under log loss).

    Parameters
    ----------
    metric : Metric
    y_train, y_test : array-like
        Targets of the training subsample and of the test rows.
    task : str
        ``"classification"`` or ``"regression"``.

    Returns
    -------
    float

    References
    ----------
    .. [1] Pedregosa et al., "Scikit-learn: Machine Learning in Python", JMLR 12, 2011
       (``DummyClassifier``/``DummyRegressor``: the baselines any model should beat).

    Examples
    --------
    >>> m = resolve_metric("error", "classification")
    >>> round(constant_loss(m, [0, 0, 0, 1], [0, 1, 0, 0, 0], "classification"), 6)  # always 0
    0.2
    >>> constant_loss(resolve_metric("mae", "regression"), [1.0, 3.0], [2.0, 4.0], "regression")
    1.0
    """
    from sklearn.dummy import DummyClassifier, DummyRegressor

    y_train, y_test = np.asarray(y_train), np.asarray(y_test)
    if len(y_train) == 0 or len(y_test) == 0:
        return float("nan")
    dummy = (DummyClassifier(strategy="prior") if task == "classification"
             else DummyRegressor(strategy="mean"))
    try:
        with warnings.catch_warnings():
            # a constant is an odd prediction for some scorers; their notes say nothing new
            warnings.simplefilter("ignore")
            # the features play no part, so one column of zeros stands in for them
            dummy.fit(np.zeros((len(y_train), 1)), y_train)
            value, _ = metric.loss(dummy, np.zeros((len(y_test), 1)), y_test)
    except (ValueError, TypeError):
        return float("nan")
    return float(value)


def resolve_metric(name: str, task: str) -> Metric:
    """Turn a metric name into a `Metric` for a ``"classification"`` or ``"regression"`` task.

    Parameters
    ----------
    name : str
        ``"error"``, ``"mse"``, ``"mae"``, ``"balanced_error"``, a scikit-learn
        scorer name, or a loss whose scorer is its negation (``max_error``).
    task : str
        ``"classification"`` or ``"regression"``.

    Returns
    -------
    Metric

    Raises
    ------
    InputError
        Unknown name, or a metric that does not fit the task.

    References
    ----------
    .. [1] Pedregosa et al., "Scikit-learn: Machine Learning in Python", JMLR 12,
       2011 (the scorer conventions: greater is better, ``neg_*`` for errors).
    .. [2] Brodersen, Ong, Stephan, Buhmann, "The balanced accuracy and its posterior
       distribution", ICPR 2010 (balanced accuracy = mean per-class recall).

    Examples
    --------
    >>> resolve_metric("error", "classification").transform
    '1 - accuracy (0-1 error)'
    >>> resolve_metric("neg_log_loss", "classification").transform
    '-neg_log_loss'
    >>> resolve_metric("f1_macro", "classification").transform
    '1 - f1_macro'
    >>> m = resolve_metric("max_error", "regression")
    >>> m.label, m.sign, m.scorer
    ('max error', -1, 'neg_max_error')
    """
    name = str(name).strip()
    classification = task == "classification"
    if name == "error":
        if classification:
            return Metric("error", "zero_one", "1 - accuracy (0-1 error)", counts_errors=True,
                          label="error")
        return Metric("error", "mse", "mean squared error", label="MSE")
    if name in ("mse", "mae"):
        label = "mean squared error" if name == "mse" else "mean absolute error"
        return Metric(name, name, label, label=name.upper())
    if name == "balanced_error":
        if not classification:
            raise InputError("metric 'balanced_error' needs a classification target; "
                             "use --metric mse or mae for a numeric target")
        return Metric(name, "balanced_error", "1 - balanced accuracy", label="balanced error")
    from sklearn.metrics import get_scorer, get_scorer_names

    names = set(get_scorer_names())
    scorer_name = name if name in names else f"neg_{name}"
    if scorer_name not in names:
        known = ", ".join(BUILTIN)
        raise InputError(f"unknown metric {name!r}; use one of {known} or a scikit-learn "
                         "scorer name such as f1_macro, roc_auc, neg_log_loss, max_error")
    scorer = get_scorer(scorer_name)
    response = getattr(scorer, "_response_method", "predict")
    if isinstance(response, (tuple, list)):
        response = "|".join(response)
    sign = -1 if getattr(scorer, "_sign", 1) < 0 else 1
    transform = f"-{scorer_name}" if sign < 0 else f"1 - {name}"
    return Metric(name, "scorer", transform, response=str(response), label=scorer_label(scorer),
                  scorer=scorer_name, sign=sign)


def check_response(metric: Metric, estimator: Any) -> None:
    """Raise `InputError` before any fit when the model cannot give what the metric needs.

    Examples
    --------
    >>> from sklearn.svm import SVC
    >>> m = resolve_metric("neg_log_loss", "classification")
    >>> check_response(m, SVC(probability=True))
    """
    needed = metric.response.split("|")
    if any(hasattr(estimator, method) for method in needed):
        return
    label = " or ".join(needed)
    raise InputError(f"metric {metric.name!r} needs {label} but the model "
                     f"{type(estimator).__name__} has none; pick a metric based on "
                     "predictions (error, balanced_error, f1_macro) or a model that has it")
