"""Result objects name the loss they hold: a regression's answers, fits, trade-offs and
plans say "test MSE" in their notebook displays, reprs and rules, with the numbers in
the metric's units, never "test error" (which is the 0-1 error's name).

Data: scikit-learn's bundled diabetes table (load_diabetes, a numeric target: the
runner measures mean squared error) and iris (load_iris, a 0-1 error for contrast).
"""

import html
import math
import re

import pytest
from sklearn.datasets import load_diabetes, load_iris
from sklearn.linear_model import Ridge
from sklearn.tree import DecisionTreeClassifier

import curvefit as cf
from curvefit.fitting.engine import SampleEstimate
from curvefit.fitting.rounds import plan_rounds

# the keys an answer's JSON had before the metric was recorded
OLD_ANSWER_KEYS = {"n", "low", "high", "level", "target", "kind", "reachable", "asymptote",
                   "message", "warnings", "horizon", "beyond_horizon"}


def _text(markup: str) -> str:
    """The visible text of an HTML display, whitespace folded."""
    return re.sub(r"\s+", " ", html.unescape(re.sub(r"<[^>]+>", " ", markup)))


@pytest.fixture(scope="module")
def diabetes_fit():
    X, y = load_diabetes(return_X_y=True)
    curve = cf.measure(Ridge(), X, y, sizes=[20, 40, 80, 160, 320], repeats=3, random_state=3)
    return curve, cf.fit_curve(curve, bootstrap=40, random_state=0)


def test_every_regression_display_says_test_mse_never_test_error(diabetes_fit):
    curve, fit = diabetes_fit
    assert curve.metric == "mse"
    answer = fit.samples_for(test_error=3000)
    gap = fit.samples_for(gap=500)
    X, y = load_diabetes(return_X_y=True)
    trade = cf.tradeoff(Ridge(), X, y, vary={"alpha": [0.1, 10.0]}, sizes=[40, 160], repeats=2)
    plan = plan_rounds(curve, test_error=3500, label_cost=1.0, penalty=10_000.0, fit=fit)
    capacity = cf.effective_capacity(curve)
    shown = {
        "curve": _text(curve._repr_html_()) + repr(curve), "fit": _text(fit._repr_html_()) + repr(fit),
        "answer": _text(answer._repr_html_()) + repr(answer),
        "gap answer": _text(gap._repr_html_()) + repr(gap),
        "trade-off": _text(trade._repr_html_()) + repr(trade),
        "capacity": _text(capacity._repr_html_()) + repr(capacity),
        "plan": " ".join(plan.rule()),
    }
    for name, text in shown.items():
        assert "test error" not in text, (name, text)
        assert not re.search(r"\d[eE][+-]?\d", text), (name, text)   # never e-notation
    assert "target test MSE 3,000" in shown["answer"]          # the metric's units, separators
    assert "target generalization gap 500" in shown["gap answer"]
    assert "Curve fit on the test MSE" in shown["fit"]
    assert "lowest mean test MSE at each size" in shown["trade-off"]
    assert "stop when the test MSE is at or below 3,500" in shown["plan"]


def test_the_answer_carries_its_metric_and_its_json_only_gains_keys(diabetes_fit):
    curve, fit = diabetes_fit
    answer = fit.samples_for(test_error=3000)
    assert answer.metric == "mse" and answer.metric_info["label"] == "MSE"
    d = answer.to_dict()
    assert OLD_ANSWER_KEYS < set(d) and set(d) - OLD_ANSWER_KEYS == {"metric", "metric_info"}
    assert d["target"] == 3000 and d["metric"] == "mse"
    # an answer saved before the metric was recorded still displays (as a plain number)
    old = {k: v for k, v in d.items() if k in OLD_ANSWER_KEYS}
    old["asymptote"] = None
    assert "target test error 3,000" in _text(SampleEstimate(**old)._repr_html_())
    hash(answer)  # the metric's mapping does not make the frozen answer unhashable


def test_a_zero_one_error_target_prints_as_a_percentage():
    X, y = load_iris(return_X_y=True)
    curve = cf.measure(DecisionTreeClassifier(max_depth=2, random_state=0), X, y,
                       sizes=[20, 40, 60, 90], repeats=3, random_state=0)
    answer = cf.fit_curve(curve, bootstrap=20).samples_for(test_error=0.1)
    assert answer.metric == "error" and math.isclose(answer.target, 0.1)
    assert "target test error 10.0%" in _text(answer._repr_html_())
