"""Tests of curvefit.capacity.tradeoff (the trade-off) and `curvefit tradeoff`.

Outside references:
- Bundled scikit-learn datasets (digits, iris).
- Structural risk minimisation (Vapnik 1995, "The Nature of Statistical Learning
  Theory"): the best capacity grows with the sample size, here measured on digits.
- The one-standard-error rule (Breiman, Friedman, Olshen & Stone 1984, CART, §3.4.3).
"""

import json
import math
import sys
from pathlib import Path

import pandas as pd
import pytest
from sklearn.datasets import load_digits, load_iris
from sklearn.linear_model import LogisticRegression
from sklearn.tree import DecisionTreeClassifier

import curvefit as cf
from conftest import run_cli
from curvefit.capacity.tradeoff import Tradeoff, parse_vary, tradeoff
from curvefit.core.errors import InputError


def test_best_tree_depth_grows_with_n_on_digits():
    # Measured property on the bundled digits data (SRM, Vapnik 1995): with 40 labels a
    # shallow-ish tree wins, with 1000 labels a deeper one does.
    X, y = load_digits(return_X_y=True)
    tr = tradeoff(DecisionTreeClassifier(random_state=0), X, y,
                  vary={"max_depth": [2, 4, 6, 8, 12]}, sizes=[40, 1000], repeats=3)
    best = tr.best_per_size().set_index("size")
    assert best.loc[1000, "best_value"] > best.loc[40, "best_value"], best
    assert best.loc[1000, "test_mean"] < best.loc[40, "test_mean"]
    # The table is complete and train error falls with depth at the large size.
    t = tr.table
    assert len(t) == 10 and (t["n_repeats"] == 3).all()
    big = t[t["size"] == 1000].set_index("value")
    assert big.loc[12, "train_mean"] < big.loc[2, "train_mean"]
    # The complexity penalty (test − train) grows with depth at the small size.
    small = t[t["size"] == 40].set_index("value")
    assert small.loc[12, "gap_mean"] > small.loc[2, "gap_mean"]


def test_one_standard_error_set():
    # Breiman et al. 1984: every value whose mean is within one SE of the best's mean.
    table = pd.DataFrame({
        "param": "k", "value": pd.Series([1, 3, 5, 1, 3, 5], dtype=object),
        "size": [50, 50, 50, 500, 500, 500], "n_repeats": 3, "n_failed": 0,
        "train_mean": 0.0, "train_sem": 0.0,
        "test_mean": [0.30, 0.25, 0.27, 0.10, 0.12, 0.20],
        "test_sem": [0.01, 0.03, 0.01, 0.005, 0.01, 0.01]})
    best = Tradeoff(table=table, param="k", values=[1, 3, 5]).best_per_size()
    assert best["best_value"].tolist() == [3, 1]
    assert best["within_1se"].tolist() == [[3, 5], [1]]


def test_round_trip_keeps_none_values_and_capacity():
    X, y = load_iris(return_X_y=True)
    tr = cf.tradeoff(LogisticRegression(max_iter=2000), X, y, vary={"C": [0.01, 100.0]},
                     sizes=[60], repeats=2, probe=True, probe_repeats=3, probe_max_n=200)
    t = tr.table
    # Regularisation lowers the measured capacity (the probe runs the model as configured).
    cap = dict(zip(t["value"], t["capacity"]))
    assert cap[0.01] < cap[100.0]
    doc = json.loads(json.dumps(tr.to_dict(), allow_nan=False))
    back = Tradeoff.from_dict(doc)
    assert back.table["value"].tolist() == [0.01, 100.0]
    assert back.best_per_size()["best_value"].tolist() == tr.best_per_size()["best_value"].tolist()
    assert set(back.capacities) == {"0.01", "100.0"}

    t2 = Tradeoff(table=pd.DataFrame({"param": "max_depth",
                                      "value": pd.Series([2, None], dtype=object),
                                      "size": [10, 10], "n_repeats": 1, "n_failed": 0,
                                      "train_mean": 0.1, "train_sem": math.nan,
                                      "test_mean": [0.3, 0.2], "test_sem": math.nan}),
                  param="max_depth", values=[2, None])
    back2 = Tradeoff.from_dict(json.loads(json.dumps(t2.to_dict(), allow_nan=False)))
    assert back2.table["value"].tolist() == [2, None]
    assert back2.best_per_size()["best_value"].tolist() == [None]


def test_failing_setting_is_recorded():
    X, y = load_iris(return_X_y=True)
    tr = tradeoff(DecisionTreeClassifier(random_state=0), X, y,
                  vary={"max_depth": [2, -1]}, sizes=[60], repeats=2)
    row = tr.table.set_index("value").loc[-1]
    assert row["n_failed"] == 2 and math.isnan(row["test_mean"])
    assert tr.meta["failed_cells"] == 2
    assert tr.best_per_size()["best_value"].tolist() == [2]


def test_api_bad_input():
    X, y = load_iris(return_X_y=True)
    with pytest.raises(InputError, match="one parameter"):
        tradeoff(DecisionTreeClassifier(), X, y, vary={"a": [1, 2], "b": [1, 2]}, sizes=[30])
    with pytest.raises(InputError, match="at least two"):
        tradeoff(DecisionTreeClassifier(), X, y, vary={"max_depth": [1]}, sizes=[30])
    assert parse_vary("max_depth=1,None") == {"max_depth": [1, None]}
    with pytest.raises(InputError):
        parse_vary("max_depth=1,,2")


@pytest.fixture(scope="module")
def iris_csv(tmp_path_factory):
    d = load_iris(as_frame=True)
    path = tmp_path_factory.mktemp("data") / "iris.csv"
    d.frame.to_csv(path, index=False)
    return path


def test_cli_text_and_json(iris_csv, tmp_path):
    args = ["tradeoff", iris_csv, "--target", "target", "--model",
            "sklearn.neighbors:KNeighborsClassifier", "--vary", "n_neighbors=1,5,25",
            "--sizes", "30,100", "--repeats", "2", "--quiet"]
    p = run_cli(*args, "--out", tmp_path / "trade.json")
    assert p.returncode == 0, p.stderr
    assert "best setting per size" in p.stdout and "n_neighbors" in p.stdout
    saved = Tradeoff.from_dict(json.loads((tmp_path / "trade.json").read_text()))
    assert saved.param == "n_neighbors" and saved.table["value"].tolist() == [1, 1, 5, 5, 25, 25]
    p = run_cli(*args, "--json")
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert doc["param"] == "n_neighbors" and len(doc["table"]) == 6
    assert [b["size"] for b in doc["best_per_size"]] == [30, 100]


def test_cli_failed_fits_exit_3(iris_csv):
    # k = 60 neighbours cannot be found among 30 training rows: those fits fail.
    p = run_cli("tradeoff", iris_csv, "--target", "target", "--model",
                "sklearn.neighbors:KNeighborsClassifier", "--vary", "n_neighbors=1,60",
                "--sizes", "30,100", "--repeats", "2", "--quiet")
    assert p.returncode == 3, p.stderr
    assert "2 fit(s) failed" in p.stderr
    assert "best setting per size" in p.stdout


def test_cli_invalid_value_fails_before_work(iris_csv):
    p = run_cli("tradeoff", iris_csv, "--target", "target", "--model",
                "sklearn.tree:DecisionTreeClassifier", "--vary", "max_depth=2,-1",
                "--sizes", "40")
    assert p.returncode == 2 and "max_depth" in p.stderr and "Traceback" not in p.stderr


@pytest.mark.parametrize("extra, needle", [
    (["--vary", "max_depth"], "--vary"),
    (["--vary", "max_depth=1,2", "--target", "nope"], "nope"),
    (["--vary", "max_depth=1,2", "--sizes", "0,10"], "sizes"),
    ([], "--vary"),
])
def test_cli_bad_input_is_one_line_exit_2(iris_csv, extra, needle):
    args = ["tradeoff", iris_csv, "--model", "sklearn.tree:DecisionTreeClassifier"]
    if "--target" not in extra:
        args += ["--target", "target"]
    if "--sizes" not in extra:
        args += ["--sizes", "40"]
    p = run_cli(*args, *extra)
    assert p.returncode == 2, (p.returncode, p.stderr)
    lines = [ln for ln in p.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in p.stderr, p.stderr
    assert needle in lines[0]


TRAINER = Path(__file__).resolve().parents[1] / "examples" / "trainer.py"


def test_cli_varies_a_parameter_of_a_command_line_trainer(iris_csv):
    # The trainer is examples/trainer.py, run as a program; {value} carries k.
    cmd = f"{sys.executable} {TRAINER} --model knn --k {{value}} {{train}} {{test}} {{predictions}}"
    p = run_cli("tradeoff", iris_csv, "--target", "target", "--command", cmd, "--vary", "k=1,25",
                "--sizes", "30,90", "--repeats", "2", "--timeout", "60", "--json")
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert doc["param"] == "k" and [r["value"] for r in doc["table"]] == [1, 1, 25, 25]
    assert all(r["n_failed"] == 0 and r["test_mean"] < 0.5 for r in doc["table"])
    # 1-NN memorises its training rows (common practice): zero training error.
    assert all(r["train_mean"] == 0 for r in doc["table"] if r["value"] == 1)


def test_cli_command_without_value_placeholder_is_one_line_exit_2(iris_csv):
    cmd = f"{sys.executable} {TRAINER} --model knn {{train}} {{test}} {{predictions}}"
    p = run_cli("tradeoff", iris_csv, "--target", "target", "--command", cmd, "--vary", "k=1,5",
                "--sizes", "30")
    assert p.returncode == 2 and "{value}" in p.stderr and "Traceback" not in p.stderr
    assert len([ln for ln in p.stderr.splitlines() if ln.strip()]) == 1
