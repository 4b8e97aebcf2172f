"""Tests for curvefit.measuring.data: loading tables, preparing features/target, fingerprints."""

import importlib.util
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sklearn.datasets import load_breast_cancer, load_diabetes, load_digits, load_iris, load_wine

from curvefit.core.errors import InputError
from curvefit.measuring.data import (
    MAX_INTEGER_CLASSES,
    Dataset,
    dataset_from_arrays,
    infer_task,
    load_table,
    prepare,
    table_fingerprint,
)

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "datasets_demo" / "packhouse.csv"


@pytest.fixture
def wine_mixed():
    """The UCI wine data (bundled with scikit-learn) plus a text column and a few gaps."""
    df = load_wine(as_frame=True).frame
    df["cellar"] = np.where(df["alcohol"] > 13.0, "north", "south")
    df.loc[[3, 40], "cellar"] = None
    df.loc[[5, 77, 120], "ash"] = np.nan
    return df


# ---------------------------------------------------------------- loading
def test_csv_and_parquet_give_same_table_and_fingerprint(tmp_path, wine_mixed):
    wine_mixed.to_csv(tmp_path / "w.csv", index=False)
    wine_mixed.to_parquet(tmp_path / "w.parquet")
    wine_mixed.to_csv(tmp_path / "w.tsv", sep="\t", index=False)
    a = load_table(tmp_path / "w.csv")
    b = load_table(tmp_path / "w.parquet")
    c = load_table(tmp_path / "w.tsv")  # separator sniffed
    assert a.shape == b.shape == c.shape == wine_mixed.shape
    fp = table_fingerprint(wine_mixed)
    assert table_fingerprint(a) == table_fingerprint(b) == table_fingerprint(c) == fp
    # the Dataset carries the same fingerprint whatever the file format
    assert prepare(a, "target").fingerprint == prepare(b, "target").fingerprint == fp


def test_semicolon_csv(tmp_path, wine_mixed):
    wine_mixed.to_csv(tmp_path / "w.csv", sep=";", index=False)
    assert table_fingerprint(load_table(tmp_path / "w.csv")) == table_fingerprint(wine_mixed)


# letters only: pandas reads words such as "nan", "NA" or "true" in a CSV as missing or bool
_words = st.text(alphabet="bcdkmpqsxz", min_size=1, max_size=6)
_floats = st.floats(min_value=-1e12, max_value=1e12, allow_nan=False, allow_infinity=False)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.tuples(_floats, st.integers(-10**9, 10**9), _words, st.booleans()),
                     min_size=1, max_size=30),
       gaps=st.lists(st.integers(0, 29), max_size=5))
def test_fingerprint_csv_parquet_property(tmp_path, rows, gaps):
    df = pd.DataFrame(rows, columns=["f", "i", "s", "b"])
    for g in gaps:
        if g < len(df):
            df.loc[g, "f"] = np.nan
    df.to_csv(tmp_path / "p.csv", index=False)
    df.to_parquet(tmp_path / "p.parquet")
    fp = table_fingerprint(df)
    assert table_fingerprint(load_table(tmp_path / "p.csv")) == fp
    assert table_fingerprint(load_table(tmp_path / "p.parquet")) == fp


def test_compressed_csv(tmp_path, wine_mixed):
    wine_mixed.to_csv(tmp_path / "w.csv.gz", index=False)
    assert table_fingerprint(load_table(tmp_path / "w.csv.gz")) == table_fingerprint(wine_mixed)


def test_fingerprint_changes_with_content_and_order(wine_mixed):
    fp = table_fingerprint(wine_mixed)
    changed = wine_mixed.copy()
    changed.loc[10, "alcohol"] += 0.01
    assert table_fingerprint(changed) != fp
    assert table_fingerprint(wine_mixed.iloc[::-1].reset_index(drop=True)) != fp
    assert table_fingerprint(wine_mixed[list(wine_mixed.columns[::-1])]) != fp
    renamed = wine_mixed.rename(columns={"ash": "ash2"})
    assert table_fingerprint(renamed) != fp
    # a number stored as text is different data from the number
    as_text = wine_mixed.copy()
    as_text["proline"] = as_text["proline"].astype(str)
    assert table_fingerprint(as_text) != fp
    # a whole-number float and an integer are the same value
    as_int = wine_mixed.copy()
    as_int["target"] = as_int["target"].astype("float64")
    assert table_fingerprint(as_int) == fp


def test_fingerprint_is_sha256_hex(wine_mixed):
    fp = table_fingerprint(wine_mixed)
    assert fp.startswith("v2:") and len(fp) == 67 and int(fp[3:], 16) >= 0


def test_npz_loading(tmp_path):
    digits = load_digits()  # UCI optical digits, bundled with scikit-learn
    X, y = digits.data, digits.target
    names = np.array([f"px{i}" for i in range(X.shape[1])])
    weight = np.linspace(0, 1, len(y))
    np.savez(tmp_path / "d.npz", X=X, y=y, feature_names=names, weight=weight,
             other=np.zeros(3))
    df = load_table(tmp_path / "d.npz")
    assert list(df.columns[:3]) == ["px0", "px1", "px2"]
    assert "y" in df.columns and "weight" in df.columns and "other" not in df.columns
    np.testing.assert_array_equal(df[names].to_numpy(), X)
    ds = prepare(df, "y", drop=("weight",))
    assert ds.task == "classification" and len(ds.classes) == 10
    assert ds.feature_names == names.tolist()
    np.testing.assert_array_equal(ds.y, y)

    np.savez(tmp_path / "plain.npz", X=X[:50, :3], y=y[:50])
    assert list(load_table(tmp_path / "plain.npz").columns) == ["x0", "x1", "x2", "y"]


@pytest.mark.parametrize("make, match", [
    (lambda p: None, "data file not found"),
    (lambda p: p.mkdir(), "is a directory"),
    (lambda p: p.write_text("a,b\n1,2\n"), "unknown data format"),
])
def test_load_errors_path(tmp_path, make, match):
    path = tmp_path / ("dir" if "directory" in match else "t.xlsx")
    make(path)
    with pytest.raises(InputError, match=match):
        load_table(path)


def test_load_errors_content(tmp_path):
    (tmp_path / "empty.csv").write_text("")
    with pytest.raises(InputError, match="is empty"):
        load_table(tmp_path / "empty.csv")
    (tmp_path / "header.csv").write_text("a,b,y\n")
    with pytest.raises(InputError, match="no data rows"):
        load_table(tmp_path / "header.csv")
    (tmp_path / "bad.parquet").write_bytes(b"this is not parquet at all")
    with pytest.raises(InputError, match="cannot read .*bad.parquet as PARQUET"):
        load_table(tmp_path / "bad.parquet")
    np.savez(tmp_path / "nox.npz", features=np.zeros((3, 2)), y=np.zeros(3))
    with pytest.raises(InputError, match="needs arrays 'X' and 'y'"):
        load_table(tmp_path / "nox.npz")
    np.savez(tmp_path / "short.npz", X=np.zeros((3, 2)), y=np.zeros(2))
    with pytest.raises(InputError, match="one value per row"):
        load_table(tmp_path / "short.npz")
    (tmp_path / "dup.csv").write_text("a,a,y\n1,2,0\n")
    # pandas renames duplicate CSV headers (a, a.1), so check the frame-level guard
    with pytest.raises(InputError, match="duplicate column names"):
        prepare(pd.DataFrame([[1, 2, 0]], columns=["a", "a", "y"]), "y")


def test_errors_are_one_line(tmp_path):
    (tmp_path / "bad.parquet").write_bytes(b"\x00" * 64)
    with pytest.raises(InputError) as info:
        load_table(tmp_path / "bad.parquet")
    assert "\n" not in str(info.value)


# ---------------------------------------------------------------- prepare
def test_prepare_errors(wine_mixed):
    with pytest.raises(InputError,
                       match=r"target column 'label' not in the table; available columns: alcohol"):
        prepare(wine_mixed, "label")
    with pytest.raises(InputError, match=r"feature columns nope, zilch not in the table"):
        prepare(wine_mixed, "target", ["alcohol", "nope", "zilch"])
    with pytest.raises(InputError, match="also listed as a feature"):
        prepare(wine_mixed, "target", ["alcohol", "target"])
    gappy = wine_mixed.copy()
    gappy.loc[[2, 9, 11], "target"] = np.nan
    with pytest.raises(InputError, match=r"has 3 missing values \(first at row index 2, 9, 11\)"):
        prepare(gappy, "target")
    one = wine_mixed[wine_mixed["target"] == 1]
    with pytest.raises(InputError, match=r"single class \(1\)"):
        prepare(one, "target")
    with pytest.raises(InputError, match="no feature columns left"):
        prepare(wine_mixed[["alcohol", "target"]], "target", drop=("alcohol",))
    with pytest.raises(InputError, match="no rows"):
        prepare(wine_mixed.iloc[:0], "target")


def test_prepare_features_and_flags(wine_mixed):
    ds = prepare(wine_mixed, "target", drop=("proline", "not_a_column"))
    assert isinstance(ds, Dataset)
    assert "proline" not in ds.feature_names and "target" not in ds.feature_names
    assert ds.categorical == ["cellar"] and ds.has_missing
    assert ds.X["alcohol"].dtype == wine_mixed["alcohol"].dtype  # original dtypes kept
    np.testing.assert_array_equal(ds.classes, [0, 1, 2])
    assert ds.describe()["class_counts"] == {"0": 59, "1": 71, "2": 48}  # UCI wine class sizes
    chosen = prepare(wine_mixed, "target", ["alcohol", "ash", "proline"], drop=("proline",))
    assert chosen.feature_names == ["alcohol", "ash"]
    assert chosen.categorical == [] and chosen.has_missing
    clean = prepare(load_iris(as_frame=True).frame, "target")
    assert not clean.has_missing and clean.categorical == []


def test_task_rule():
    iris = load_iris(as_frame=True).frame
    assert prepare(iris, "target").task == "classification"
    diabetes = load_diabetes(as_frame=True).frame  # continuous disease-progression target
    assert prepare(diabetes, "target").task == "regression"
    cancer = load_breast_cancer(as_frame=True).frame
    cancer["diagnosis"] = np.where(cancer["target"] == 1, "benign", "malignant")
    ds = prepare(cancer.drop(columns="target"), "diagnosis")
    assert ds.task == "classification" and ds.classes.tolist() == ["benign", "malignant"]
    # whole-number floats with few values are labels, and become integers
    floats = iris.assign(target=iris["target"].astype(float))
    ds = prepare(floats, "target")
    assert ds.task == "classification" and ds.y.dtype.kind == "i"
    many = np.arange(MAX_INTEGER_CLASSES + 1)
    assert infer_task(many) == "regression" and infer_task(many[:-1]) == "classification"
    assert infer_task(np.array([True, False])) == "classification"
    assert prepare(iris, "target", task="regression").task == "regression"
    with pytest.raises(InputError, match="unknown task"):
        prepare(iris, "target", task="ranking")


def test_dataset_from_arrays():
    X, y = load_iris(return_X_y=True)
    ds = dataset_from_arrays(X, y)
    assert ds.feature_names == ["x0", "x1", "x2", "x3"] and ds.n_rows == 150
    assert ds.fingerprint == dataset_from_arrays(X.copy(), y.copy()).fingerprint
    with pytest.raises(InputError, match="one value per row"):
        dataset_from_arrays(X, y[:-1])


# ---------------------------------------------------------------- demo data
def test_demo_data_matches_its_description():
    df = load_table(DEMO)
    ds = prepare(df, "rejected", drop=("orchard", "day"))
    assert ds.n_rows == 20_000 and ds.task == "classification"
    assert ds.classes.tolist() == [0, 1]
    assert 0.3 < ds.y.mean() < 0.55
    assert ds.categorical == ["variety"]
    gaps = ds.X.isna().mean()
    assert 0.01 < gaps["blemish_pct"] < 0.08 and 0.01 < gaps["starch_index"] < 0.08
    assert (gaps.drop(["blemish_pct", "starch_index"]) == 0).all()
    assert 200 <= df["orchard"].nunique() <= 400
    assert df["day"].is_monotonic_increasing
    assert DEMO.stat().st_size < 2_000_000


def test_demo_generator_reproduces_committed_file():
    spec = importlib.util.spec_from_file_location("make_demo_data", ROOT / "scripts" / "make_demo_data.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    fresh = mod.make_packhouse()
    assert table_fingerprint(fresh) == table_fingerprint(load_table(DEMO))


def test_packaged_demo_table_is_the_committed_file():
    import gzip

    from curvefit.workflows.packhouse import demo_table_path, load_demo_table

    shipped = demo_table_path()
    assert shipped.is_file() and shipped.parent == ROOT / "curvefit" / "workflows"
    # the same bytes, hence the same rows, as datasets_demo/packhouse.csv
    assert gzip.decompress(shipped.read_bytes()) == DEMO.read_bytes()
    pd.testing.assert_frame_equal(load_demo_table(), load_table(DEMO))
    # and the generator's gzip step makes exactly the shipped file (no time stamp inside)
    spec = importlib.util.spec_from_file_location("make_demo_data", ROOT / "scripts" / "make_demo_data.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    assert mod.gzip_bytes(DEMO.read_bytes()) == shipped.read_bytes()


# ---------------------------------------------------------------- refused up front
@pytest.mark.parametrize("name, text, words", [
    ("mixed.csv", "a,b,y\n1\t2\t0\n3\t4\t1\n5\t6\t0\n", "separated by commas but the rows by tabs"),
    ("mixed.tsv", "a\tb\ty\n1,2,0\n3,4,1\n", "separated by tabs but the rows by commas"),
])
def test_a_header_and_rows_with_different_delimiters_are_named(tmp_path, name, text, words):
    path = tmp_path / name
    path.write_text(text)
    with pytest.raises(InputError, match=words):
        load_table(path)


def test_one_column_and_semicolon_tables_still_load(tmp_path):
    (tmp_path / "one.csv").write_text("y\n0\n1\n")
    assert load_table(tmp_path / "one.csv").shape == (2, 1)
    (tmp_path / "semi.csv").write_text("a;b;y\n1,5;2;0\n3,5;4;1\n")  # decimal commas
    assert load_table(tmp_path / "semi.csv").shape == (2, 3)


def test_infinite_features_are_refused_before_any_fit():
    from curvefit.measuring.data import as_features

    table = pd.DataFrame({"a": [1.0, 2.0, 3.0, 4.0], "b": [0.0, np.inf, -np.inf, 1.0],
                          "c": ["u", "v", "u", "v"], "y": [0, 1, 0, 1]})
    with pytest.raises(InputError, match="feature column 'b' has 2 infinite values .first at row index 1"):
        prepare(table, "y")
    with pytest.raises(InputError, match="X: feature column 1 has 1 infinite value"):
        as_features(np.array([[1.0, 2.0], [3.0, np.inf]]))
    # gaps stay allowed: they are imputed
    assert prepare(table.assign(b=[0.0, np.nan, 2.0, 1.0]), "y").has_missing
