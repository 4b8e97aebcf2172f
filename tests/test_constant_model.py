"""A model that predicts what the constant predictor does at every measured size, through
the real CLI.

scikit-learn's HistGradientBoostingClassifier needs 20 rows per leaf by default, so on
fewer than 40 training rows it cannot split and answers the class prior's favourite: on
the bundled iris table (three classes of 50) its test error equals the majority-class
predictor's in every cell. Its flat curve is no evidence that it never learns (on the
curve corpus every curve in that state fell after its cut); the forecast beyond the data
follows the packaged calibration's ``constant_slope`` and the band stays open from 0 up to
the flat forecast's upper end. A logistic regression on the same rows learns from the
start and gets none of this. Measured on to the whole pool, the boosted tree learns from
45 rows on; the sizes before are left out of its fit.
"""

import json

import pytest
from sklearn.datasets import load_iris

from curvefit.fitting.calibration import packaged_calibration
from tests.conftest import run_cli

SIZES = "10,15,20,25,30"
LONG_SIZES = "10,20,30,45,60,80,112"
LEFT_OUT = "at which the model predicted as the constant predictor does in every repeat"
NOTE = "has predicted as the constant predictor does at every measured size"


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    d = tmp_path_factory.mktemp("constant")
    X, y = load_iris(return_X_y=True, as_frame=True)  # bundled iris data (scikit-learn)
    X.assign(species=y).to_csv(d / "iris.csv", index=False)
    out = {}
    for name, model in [("boosting", "sklearn.ensemble:HistGradientBoostingClassifier"),
                        ("logistic", "sklearn.linear_model:LogisticRegression")]:
        r = run_cli("measure", d / "iris.csv", "--target", "species", "--model", model,
                    "--sizes", SIZES, "--repeats", "3", "--seed", "1", "--quiet",
                    "--out", d / f"{name}.json")
        assert r.returncode == 0, r.stderr
        out[name] = d / f"{name}.json"
    r = run_cli("measure", d / "iris.csv", "--target", "species", "--model",
                "sklearn.ensemble:HistGradientBoostingClassifier", "--sizes", LONG_SIZES,
                "--repeats", "3", "--seed", "1", "--quiet", "--out", d / "long.json")
    assert r.returncode == 0, r.stderr
    out["long"] = d / "long.json"
    return out


def _fit(run, *extra):
    r = run_cli("fit", run, "--at", "30,120", "--bootstrap", "60", "--json", *extra)
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


def test_the_constant_model_is_recognised_and_its_forecast_follows_the_calibration(runs):
    points = json.loads(runs["boosting"].read_text())["points"]
    assert all(p["test_error"] == pytest.approx(p["baseline_error"], abs=1e-12) for p in points)
    doc = _fit(runs["boosting"])
    assert any(NOTE in n for n in doc["notes"])
    at_n, at_4n = doc["at"]
    cal = packaged_calibration()
    assert cal.constant_slope < 0  # learned on the corpus: such curves went on to fall
    # F(N)·(n/N)^c beyond the largest size N = 30
    assert at_4n["estimate"] == pytest.approx(at_n["estimate"] * 4 ** cal.constant_slope, rel=1e-9)
    # open from 0 up to where the flat forecast's band ends (above the error measured at 30)
    assert at_4n["low"] == 0.0
    assert at_4n["high"] > at_n["estimate"]
    assert doc["sanity"]["no_better_than_baseline"] is True


def test_the_text_output_says_why(runs):
    r = run_cli("fit", runs["boosting"], "--bootstrap", "60")
    assert r.returncode == 0, r.stderr
    line = next(ln for ln in r.stdout.splitlines() if NOTE in ln)
    assert "shows no learning yet" in line and "open down to 0" in line


def test_need_answers_from_the_printed_forecast(runs):
    doc = _fit(runs["boosting"])
    r = run_cli("need", runs["boosting"], "--error", "0.5", "--bootstrap", "60", "--json")
    assert r.returncode == 0, r.stderr
    answer = json.loads(r.stdout)["answer"]
    # the forecast at 120 is below 50% (the calibrated fall), so 50% is reached before it,
    # past the largest measured size; nothing bounds it from above
    assert doc["at"][1]["estimate"] < 0.5
    assert answer["reachable"] and 30 < answer["n"] < 120 and answer["high"] is None


def test_a_model_that_learns_gets_none_of_it(runs):
    doc = _fit(runs["logistic"])
    assert not any(NOTE in n for n in doc["notes"])
    assert doc["sanity"]["no_better_than_baseline"] is False


def test_the_sizes_before_learning_are_left_out_of_the_fit(runs):
    points = json.loads(runs["long"].read_text())["points"]
    same = {p["size"] for p in points
            if p["test_error"] == pytest.approx(p["baseline_error"], abs=1e-12)}
    differ = {p["size"] for p in points} - same
    assert same == {10, 20, 30} and min(differ) == 45     # no split below 40 rows
    doc = _fit(runs["long"])
    assert doc["left_out_sizes"] == [10, 20, 30] and doc["sizes"][0] == 45
    assert not any(NOTE in n for n in doc["notes"])
    note = next(n for n in doc["notes"] if LEFT_OUT in n)
    assert "the 3 smallest sizes (10–30)" in note and "fitted from 45" in note
    # the iris classes are told apart well once the tree can split: the forecast at the
    # largest size lies near the measured mean, not on a step from the majority class
    at_largest = _fit(runs["long"], "--at", "112")["at"][0]
    largest = [p["test_error"] for p in points if p["size"] == 112]
    assert max(largest) < 0.2 and at_largest["low"] <= min(largest) <= at_largest["high"]
    # before the first fitted size the fit says it does not describe the curve
    r = run_cli("fit", runs["long"], "--at", "20", "--bootstrap", "0")
    assert r.returncode == 0, r.stderr
    assert "before the first fitted size (45)" in r.stderr


def test_too_few_sizes_after_the_flat_start_keep_it(tmp_path):
    """Three learning sizes are too few to fit without the flat start: it stays in."""
    import numpy as np
    import pandas as pd

    from curvefit.core.curve import Curve
    from curvefit.fitting.data import MIN_LEARNING_SIZES, before_learning

    sizes = [10, 20, 40, 80, 160, 320]
    error = [0.6, 0.6, 0.3, 0.2, 0.15, 0.12]
    for flat, expected in ((2, [10.0, 20.0]), (3, [])):
        table = pd.DataFrame({"size": sizes, "test_error": [0.6] * flat + error[flat:],
                              "baseline_error": 0.6})
        assert len(sizes) - flat >= MIN_LEARNING_SIZES or expected == []
        assert before_learning(Curve.from_table(table)).tolist() == expected
    # a constant model by design keeps every size
    meta = {"model": {"spec": "sklearn.dummy:DummyClassifier"}}
    table = pd.DataFrame({"size": sizes, "test_error": [0.6] * 2 + error[2:], "baseline_error": 0.6})
    assert not len(before_learning(Curve.from_table(table, meta=meta)))
    assert np.isin(20, before_learning(Curve.from_table(table)))


def test_answers_inside_the_measured_range_still_read_every_measured_size(runs):
    """The left-out sizes are measured all the same: a target between the constant
    predictor's error and the learned one is reached between the last flat size and the
    first learned one, and one above the constant predictor's at the smallest size."""
    r = run_cli("need", runs["long"], "--error", "0.3", "--bootstrap", "40", "--json")
    assert r.returncode == 0, r.stderr
    answer = json.loads(r.stdout)["answer"]
    assert 30 < answer["n"] < 45 and "between the measured sizes 30 and 45" in answer["message"]
    r = run_cli("need", runs["long"], "--error", "0.9", "--bootstrap", "40", "--json")
    answer = json.loads(r.stdout)["answer"]
    assert answer["n"] == 10 and "smallest measured size, 10 labelled" in answer["message"]


def test_the_gap_model_leaves_the_flat_start_out_too(runs):
    """The capacity from the gap is read where the model learns: the sizes at which it
    predicted as the constant predictor does (gap about 0 by construction) neither pin h
    nor count as "before the knee"."""
    r = run_cli("capacity", runs["long"], "--bootstrap", "60", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    used = {row["size"]: row["used"] for row in doc["design"]}
    assert not any(used[n] for n in (10, 20, 30))
    assert any(n.startswith("Sizes at which the model predicted as the constant predictor does "
                            "in every repeat were left out: 10, 20, 30.") for n in doc["notes"])
    assert not any("before the knee" in n and "10" in n for n in doc["notes"])
