"""Tests of the Curve container: run-file round trip, plain tables, per-size summary."""

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from curvefit.core.curve import RUN_FORMAT, Curve
from curvefit.core.errors import InputError


def _curve():
    rows = []
    for size in (20, 40, 80):
        for rep in range(3):
            err = 0.5 * size ** -0.3 + 0.01 * rep
            rows.append({"size": size, "repeat": rep, "train_error": err / 3,
                         "test_error": err, "n_test": 200,
                         "n_test_errors": round(err * 200), "fit_seconds": 0.01,
                         "status": "ok", "message": ""})
    rows.append({"size": 80, "repeat": 3, "train_error": None, "test_error": None,
                 "n_test": 200, "n_test_errors": None, "fit_seconds": 0.0,
                 "status": "failed", "message": "ValueError: boom"})
    return Curve(pd.DataFrame(rows), {"metric": "error", "seed": 0})


def test_round_trip_keeps_points_and_meta(tmp_path):
    c = _curve()
    path = c.write(tmp_path / "run.json")
    doc = json.loads(path.read_text())
    assert list(doc)[0] == "format" and doc["format"] == RUN_FORMAT
    back = Curve.read(path)
    pd.testing.assert_frame_equal(back.points, c.points)
    assert back.meta == c.meta


def test_failed_cells_are_kept_but_not_summarised():
    c = _curve()
    assert len(c.failed_points()) == 1
    s = c.summary()
    row = s.set_index("size").loc[80]
    assert row["n_repeats"] == 3 and row["n_failed"] == 1


def test_summary_statistics_match_pandas_and_scipy():
    c = _curve()
    s = c.summary(interval=0.95).set_index("size")
    g = c.ok_points()[c.ok_points()["size"] == 40]["test_error"]
    assert s.loc[40, "test_mean"] == pytest.approx(g.mean())
    # Reference library: scipy.stats.sem is the standard error with ddof=1.
    assert s.loc[40, "test_sem"] == pytest.approx(stats.sem(g))
    # Exact interval at the mean error count equals scipy's Clopper-Pearson interval.
    k = int(round(c.ok_points()[c.ok_points()["size"] == 40]["n_test_errors"].mean()))
    ci = stats.binomtest(k, 200).proportion_ci(confidence_level=0.95, method="exact")
    assert s.loc[40, "test_low"] == pytest.approx(ci.low)
    assert s.loc[40, "test_high"] == pytest.approx(ci.high)
    # Hoeffding (1963) two-sided half-width sqrt(ln(2/delta) / (2 L)).
    assert s.loc[40, "test_hoeffding"] == pytest.approx(math.sqrt(math.log(2 / 0.05) / 400))


def test_from_table_fills_repeat_and_status(tmp_path):
    p = tmp_path / "curve.csv"
    p.write_text("size,test_error\n100,0.3\n100,0.31\n200,0.25\n200,\n")
    c = Curve.from_table(p)
    assert c.points["repeat"].tolist() == [0, 1, 0, 1]
    assert c.points["status"].tolist() == ["ok", "ok", "ok", "failed"]
    assert c.sizes.tolist() == [100, 200]
    assert not c.has_train


@pytest.mark.parametrize("content, match", [
    ("size,err\n1,2\n", "needs the columns"),
    ("size,test_error\nabc,0.1\n", "non-numeric"),
    ("size,test_error\n0,0.1\n", "size <= 0"),
])
def test_bad_tables_raise_input_error(tmp_path, content, match):
    p = tmp_path / "c.csv"
    p.write_text(content)
    with pytest.raises(InputError, match=match):
        Curve.from_table(p)


def test_foreign_json_is_rejected(tmp_path):
    p = tmp_path / "x.json"
    p.write_text(json.dumps({"format": "something/1", "points": []}))
    with pytest.raises(InputError, match="not a curvefit run file"):
        Curve.read(p)
    p.write_text("{not json")
    with pytest.raises(InputError, match="not valid JSON"):
        Curve.read(p)
    with pytest.raises(InputError, match="not found"):
        Curve.read(tmp_path / "missing.json")


def test_numpy_values_in_meta_serialise(tmp_path):
    c = Curve(_curve().points, {"sizes": np.array([20, 40]), "x": np.float64("nan")})
    back = Curve.read(c.write(tmp_path / "r.json"))
    assert back.meta == {"sizes": [20, 40], "x": None}


def test_error_of_a_regressor_is_reported_as_mse():
    # The runner resolves metric "error" to mean squared error for regressors.
    pts = _curve().points
    reg = Curve(pts, {"metric": "error", "metric_info": {"name": "error", "kind": "mse"}})
    clf = Curve(pts, {"metric": "error", "metric_info": {"name": "error", "kind": "zero_one"}})
    assert reg.metric == "mse" and clf.metric == "error"


def test_older_run_files_without_the_constant_predictor_still_load(tmp_path):
    doc = _curve().to_dict()
    assert all("baseline_error" not in p for p in doc["points"])  # as written before it existed
    path = tmp_path / "old.json"
    path.write_text(json.dumps(doc))
    old = Curve.read(path)
    assert not old.has_baseline
    assert old.summary()["baseline_mean"].isna().all()


def test_constant_predictor_column_round_trips_and_is_summarised(tmp_path):
    c = _curve()
    points = c.points.copy()
    points["baseline_error"] = [0.4, 0.42, 0.44] * 3 + [0.4]
    c2 = Curve(points, c.meta)
    assert list(c2.points.columns[:10]) == list(c.points.columns) + ["baseline_error"]
    back = Curve.read(c2.write(tmp_path / "run.json"))
    assert back.has_baseline and json.loads((tmp_path / "run.json").read_text())["format"] == RUN_FORMAT
    s = back.summary()
    # per-size mean and standard error over the successful repeats (numpy as the reference)
    np.testing.assert_allclose(s["baseline_mean"], [0.42] * 3)
    np.testing.assert_allclose(s["baseline_sem"], [np.std([0.4, 0.42, 0.44], ddof=1) / math.sqrt(3)] * 3)
