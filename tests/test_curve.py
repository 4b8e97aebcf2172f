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


# ---------------------------------------------------------------- damaged and hostile files
def _nested(depth: int):
    value: list = []
    for _ in range(depth):
        value = [value]
    return value


def _run_doc(**changes):
    doc = _curve().to_dict()
    doc.update(changes)
    return doc


@pytest.mark.parametrize("doc, words", [
    (_run_doc(meta=[1, 2]), "'meta' must be an object"),
    (_run_doc(meta={"a": _nested(70)}), "nested more than 64"),
    (_run_doc(points={"size": 10}), "'points' must be a list"),
    (_run_doc(points=[{"size": "10", "repeat": 0, "test_error": 0.2}]), "size must be a whole"),
    (_run_doc(points=[{"size": 10.5, "repeat": 0, "test_error": 0.2}]), "size must be a whole"),
    (_run_doc(points=[{"size": 10, "repeat": True, "test_error": 0.2}]), "repeat must be a whole"),
    (_run_doc(points=[{"size": 10, "repeat": 0, "test_error": "0.2"}]), "test error must be a finite"),
    (_run_doc(points=[{"size": 10, "repeat": 0, "test_error": 0.2}, 7]), "cell 2 is not an object"),
])
def test_damaged_run_files_are_refused_with_one_line(tmp_path, doc, words):
    path = tmp_path / "run.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(InputError, match=words) as info:
        Curve.read(path)
    assert "\n" not in str(info.value)


def test_run_file_nested_100000_deep_and_cells_of_1e400(tmp_path):
    deep = tmp_path / "deep.json"
    deep.write_text('{"format": "curvefit.run/1", "meta": ' + "[" * 100_000 + "]" * 100_000
                    + ', "points": []}')
    with pytest.raises(InputError, match="nested too deep"):
        Curve.read(deep)
    huge = tmp_path / "huge.json"
    huge.write_text('{"format": "curvefit.run/1", "meta": {}, "points": '
                    '[{"size": 1e400, "repeat": 0, "test_error": 0.1}]}')
    with pytest.raises(InputError, match="size must be a whole number"):
        Curve.read(huge)


def test_duplicated_cells_are_refused_because_they_would_narrow_intervals(tmp_path):
    path = tmp_path / "dup.csv"
    path.write_text("size,repeat,test_error\n10,0,0.3\n10,0,0.3\n20,0,0.2\n20,1,0.25\n")
    with pytest.raises(InputError, match="size 10, repeat 0 appears 2 times"):
        Curve.read(path)
    doc = _curve().to_dict()
    doc["points"].append(dict(doc["points"][0]))
    run = tmp_path / "dup.json"
    run.write_text(json.dumps(doc))
    with pytest.raises(InputError, match="narrow the intervals"):
        Curve.read(run)
    # without a repeat column, repeated sizes are repeats, as before
    assert len(Curve.from_table(pd.DataFrame({"size": [10, 10], "test_error": [0.3, 0.2]})).points) == 2


@pytest.mark.parametrize("text, words", [("", "cannot read curve table"),
                                         ("size,test_error\n", "has no rows")])
def test_empty_curve_tables_are_refused(tmp_path, text, words):
    path = tmp_path / "curve.csv"
    path.write_text(text)
    with pytest.raises(InputError, match=words):
        Curve.read(path)
