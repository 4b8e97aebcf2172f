"""Sanity beside every answer: the constant predictor, class imbalance and the fitted floor.

The first tests call `curvefit.fitting.sanity` on small tables; the rest run the real
command line on an imbalanced table (6% positives, weak features) where a logistic
regression is no better than always predicting the majority class.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
import pytest

from conftest import run_cli
from curvefit.core.curve import Curve
from curvefit.fitting.engine import fit_curve
from curvefit.fitting.sanity import (
    IMBALANCE_SHARE,
    compare_to_baseline,
    floor_note,
    forecast_floor_notes,
    imbalance_hint,
    sanity_check,
)

LOGREG = "sklearn.linear_model:LogisticRegression"
SIZES = [100, 200, 400, 800, 1600]


def _table(test, baseline, repeats=3, **meta):
    """A curve table: per-size test error and constant-predictor error, with ±0.002 noise."""
    n = np.repeat(SIZES, repeats)
    noise = np.tile(np.linspace(-0.002, 0.002, repeats), len(SIZES)) if repeats > 1 else 0.0
    return Curve.from_table(pd.DataFrame({"size": n, "test_error": test(n) + noise,
                                          "baseline_error": baseline + noise / 2}), meta=meta)


# --------------------------------------------------------------------------- API
def test_a_model_below_the_constant_predictor_is_not_flagged():
    curve = _table(lambda n: 0.02 + 0.5 * n ** -0.5, 0.30)
    check = compare_to_baseline(curve)
    assert not check.no_better and check.sizes_no_better == ()
    assert check.size == 1600 and check.baseline.estimate == pytest.approx(0.30)
    assert check.flag() is None
    assert check.line().startswith("constant predictor (always the majority class): 30.0% at 1,600")
    assert check.per_size["baseline_mean"].tolist() == pytest.approx([0.30] * 5)


def test_a_model_no_better_than_the_constant_predictor_is_flagged_in_one_line():
    curve = _table(lambda n: 0.07 + 0.3 * n ** -0.5, 0.06)
    check = sanity_check(curve)
    assert check.no_better is True and check.baseline.everywhere
    flag = check.notes[0]
    assert "\n" not in flag
    assert flag.startswith("the model is no better than a constant predictor (always the majority "
                           "class) at every measured size")
    doc = check.to_dict()
    assert doc["no_better_than_baseline"] is True and doc["notes"] == check.notes
    json.dumps(doc)  # JSON-ready


def test_overlapping_intervals_count_as_no_better_and_one_repeat_compares_means():
    # the model's interval reaches the constant predictor's: not shown to be better
    near = _table(lambda n: 0.0595 + 0 * n, 0.06)
    assert compare_to_baseline(near).no_better
    # one repeat: no interval, so the means decide
    better = _table(lambda n: 0.05 + 0 * n, 0.06, repeats=1)
    assert not compare_to_baseline(better).no_better
    worse = _table(lambda n: 0.061 + 0 * n, 0.06, repeats=1)
    assert compare_to_baseline(worse).no_better


def test_without_the_column_there_is_nothing_to_compare():
    n = np.repeat(SIZES, 2)
    curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": 0.1 + n * 0}))
    assert compare_to_baseline(curve) is None
    check = sanity_check(curve)
    assert check.baseline is None and check.no_better is None and check.lines() == []


def test_imbalance_hint_only_for_the_plain_error_rate_of_imbalanced_classes():
    shares = {"0": 0.94, "1": 0.06}
    hint = imbalance_hint(_table(lambda n: 0.05 + 0 * n, 0.06, class_shares=shares))
    assert hint.endswith("measure with --metric balanced_error")
    edge = {"0": 1 - IMBALANCE_SHARE / 2, "1": IMBALANCE_SHARE / 2}   # 20% of two classes
    assert imbalance_hint(_table(lambda n: 0.05 + 0 * n, 0.2, class_shares=edge)) is None
    # ten nearly even classes (scikit-learn's digits: the smallest holds 9.7%) are balanced
    digits = {str(k): (0.097 if k == 0 else 0.903 / 9) for k in range(10)}
    assert imbalance_hint(_table(lambda n: 0.05 + 0 * n, 0.9, class_shares=digits)) is None
    digits["0"], digits["1"] = 0.02, 0.177
    assert imbalance_hint(_table(lambda n: 0.05 + 0 * n, 0.9, class_shares=digits)) is not None
    assert imbalance_hint(_table(lambda n: 0.3 + 0 * n, 0.5, class_shares=shares,
                                 metric="balanced_error")) is None
    assert imbalance_hint(_table(lambda n: 5 + 0 * n, 9.0, task="regression", metric="mse")) is None
    # an older run without class shares: the constant predictor's 0-1 error bounds the minority
    assert imbalance_hint(_table(lambda n: 0.05 + 0 * n, 0.06)) is not None


def test_answers_and_forecasts_below_the_floor_interval_are_named():
    curve = _table(lambda n: 0.10 + 3 * n ** -0.5, 0.4)
    fit = fit_curve(curve, families="power-law-floor", bootstrap=60, random_state=0)
    asym = fit.asymptote()
    assert 0.02 < asym.low < 0.10 < asym.high < 0.2       # the true floor is 0.10
    assert floor_note(fit, 0.02, "the target").startswith("the target (2.0%) lies below the fitted "
                                                         "floor's 90% interval")
    assert floor_note(fit, asym.high, "the target") is None
    forecasts = pd.DataFrame({"size": [3200.0, 1e6], "estimate": [0.15, 0.02]})
    [note] = forecast_floor_notes(fit, forecasts)
    assert note.startswith("the forecast at 1,000,000 labels (2.0%) lies below")
    assert forecast_floor_notes(fit, fit.predict([3200, 16000])) == []  # the fit's own forecasts

    class Answer:  # a reachable answer that promises a target below the floor
        reachable, kind, target = True, "test_error", 0.02

    check = sanity_check(curve, fit, answer=Answer(), forecasts=forecasts)
    assert len(check.floor) == 2 and check.floor[0].startswith("the target test error (2.0%)")


# --------------------------------------------------------------------------- real CLI
@pytest.fixture(scope="module")
def imbalanced(tmp_path_factory):
    """scikit-learn's make_classification with 6% positives and weak features, measured
    once with the plain error rate and once with the balanced error."""
    from sklearn.datasets import make_classification

    d = tmp_path_factory.mktemp("imbalanced")
    X, y = make_classification(n_samples=1500, n_features=20, n_informative=2, n_redundant=0,
                               class_sep=0.3, flip_y=0.0, weights=[0.94], random_state=0)
    frame = pd.DataFrame(X, columns=[f"x{i}" for i in range(X.shape[1])])
    frame["label"] = y
    frame.to_csv(d / "table.csv", index=False)
    runs = {}
    for name, extra in [("error", []), ("balanced", ["--metric", "balanced_error"])]:
        r = run_cli("measure", d / "table.csv", "--target", "label", "--model", LOGREG,
                    "--out", d / f"{name}.json", "--quiet", *extra)
        assert r.returncode == 0, r.stderr
        runs[name] = (d / f"{name}.json", r.stdout)
    return {"dir": d, "positives": float(y.mean()), "runs": runs}


def _no_better(text: str) -> list[str]:
    return [ln for ln in text.splitlines() if ln.startswith("the model is no better than a constant")]


def test_measure_shows_the_constant_predictor_and_flags_the_model(imbalanced):
    run, stdout = imbalanced["runs"]["error"]
    lines = stdout.splitlines()
    assert lines[1].split()[-2:] == ["constant", "failed"]
    # make_classification put 90 of 1,500 rows in the minority class (6.0%): the constant
    # predictor's error on the stratified test sets is that share
    # (the table prints 0-1 errors as percentages with one decimal)
    constants = [float(ln.split()[-2].rstrip("%")) / 100 for ln in lines[2:12]]
    assert constants == pytest.approx([imbalanced["positives"]] * 10, abs=0.002)
    assert len(_no_better(stdout)) == 1
    assert "measure with --metric balanced_error" in stdout
    points = json.loads(run.read_text())["points"]
    assert all(0.05 < p["baseline_error"] < 0.07 for p in points)


def test_measure_json_carries_the_constant_predictor(imbalanced, tmp_path):
    r = run_cli("measure", imbalanced["dir"] / "table.csv", "--target", "label", "--model", LOGREG,
                "--sizes", "100,400,1125", "--repeats", "3", "--out", tmp_path / "r.json", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert [round(row["baseline_mean"], 2) for row in doc["summary"]] == [0.06] * 3
    assert doc["sanity"]["no_better_than_baseline"] is True
    assert doc["sanity"]["imbalance_hint"].endswith("--metric balanced_error")


def test_fit_and_need_say_it_beside_every_answer(imbalanced, tmp_path):
    run, _ = imbalanced["runs"]["error"]
    # --out writes the document --json prints (tests/test_cli_fit.py): one fit for both
    r = run_cli("fit", run, "--bootstrap", "40", "--out", tmp_path / "fit.json")
    assert r.returncode == 0, r.stderr
    assert re.search(r"^constant predictor \(always the majority class\): 6\.\d% at 1,125 labels",
                     r.stdout, re.M)
    assert len(_no_better(r.stdout)) == 1 and "--metric balanced_error" in r.stdout
    r = run_cli("need", run, "--error", "0.055", "--bootstrap", "40")
    assert r.returncode == 0, r.stderr
    lines = r.stdout.splitlines()
    at = next(i for i, ln in enumerate(lines) if ln.startswith("constant predictor"))
    assert at <= 2 and lines[at + 1].startswith("the model is no better")  # right under the answer
    r = run_cli("need", run, "--error", "0.055", "--bootstrap", "40", "--json")
    sanity = json.loads(r.stdout)["sanity"]
    assert sanity["no_better_than_baseline"] is True
    assert sanity["baseline"]["baseline"]["estimate"] == pytest.approx(imbalanced["positives"], abs=0.002)
    fit = json.loads((tmp_path / "fit.json").read_text())
    assert fit["sanity"]["baseline"]["sizes_no_better"][-1] == 1125


def test_balanced_error_takes_the_hint_away(imbalanced):
    run, stdout = imbalanced["runs"]["balanced"]
    assert "--metric balanced_error" not in stdout
    # a constant predictor's balanced error is exactly 0.5 (one class recalled, the other not)
    assert {p["baseline_error"] for p in json.loads(run.read_text())["points"]} == {0.5}


def test_report_json_and_page_carry_the_check(imbalanced, tmp_path):
    run, _ = imbalanced["runs"]["error"]
    page = tmp_path / "report.html"
    r = run_cli("report", run, "--out", page, "--target-error", "0.055", "--bootstrap", "40",
                "--json", "--quiet")
    assert r.returncode == 0, r.stderr
    [model] = json.loads(r.stdout)["models"]
    assert model["sanity"]["no_better_than_baseline"] is True
    text = page.read_text()
    assert "the model is no better than a constant predictor" in text
    assert "constant predictor</th>" in text  # the column of the curve table
