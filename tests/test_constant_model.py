"""A model that predicts what the constant predictor does at every measured size, through
the real CLI.

scikit-learn's HistGradientBoostingClassifier needs 20 rows per leaf by default, so on
fewer than 40 training rows it cannot split and answers the class prior's favourite: on
the bundled iris table (three classes of 50) its test error equals the majority-class
predictor's in every cell. Its flat curve is no evidence that it never learns (on the
curve corpus every curve in that state fell after its cut); the forecast beyond the data
follows the packaged calibration's ``constant_slope`` and the band stays open from 0 up to
the flat forecast's upper end. A logistic regression on the same rows learns from the
start and gets none of this.
"""

import json

import pytest
from sklearn.datasets import load_iris

from curvefit.fitting.calibration import packaged_calibration
from tests.conftest import run_cli

SIZES = "10,15,20,25,30"
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
