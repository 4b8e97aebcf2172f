"""Large tables: the fast (v2) table fingerprint and its compatibility with the old form.

Data: scikit-learn's bundled breast-cancer set (Wisconsin diagnostic, 569 rows) and
invented numbers for the fingerprint's properties. The old-form fingerprint is what
`legacy_table_fingerprint` computes (the form runs recorded before v2).
"""

import json
import sqlite3
import textwrap

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer

from conftest import run_cli
from curvefit.history.store import same_data
from curvefit.measuring.data import (
    is_legacy_fingerprint,
    legacy_table_fingerprint,
    load_table,
    same_fingerprint,
    table_fingerprint,
)
from curvefit.measuring.journal import journal_path


@pytest.fixture(scope="module")
def cancer():
    return load_breast_cancer(as_frame=True).frame


def _numbers(rows=200, seed=0):
    rng = np.random.default_rng(seed)
    df = pd.DataFrame(rng.normal(size=(rows, 3)) * [1.0, 1e-7, 1e9], columns=["a", "b", "c"])
    df["n"] = rng.integers(-5, 5, rows)
    df["t"] = rng.choice(["u", "v", "wé"], rows)
    df.loc[3, "a"] = np.nan
    df.loc[5, "t"] = None
    return df


def test_v2_fingerprint_same_for_csv_and_parquet(tmp_path):
    df = _numbers()
    df.to_csv(tmp_path / "t.csv", index=False)
    df.to_parquet(tmp_path / "t.parquet", index=False)
    fp = table_fingerprint(df)
    assert fp.startswith("v2:") and not is_legacy_fingerprint(fp)
    assert table_fingerprint(load_table(tmp_path / "t.csv")) == fp
    assert table_fingerprint(load_table(tmp_path / "t.parquet")) == fp


def test_v2_fingerprint_canonical_numbers_and_order():
    df = _numbers()
    fp = table_fingerprint(df)
    assert table_fingerprint(df.assign(n=df["n"].astype(float))) == fp        # 3 and 3.0 agree
    last_bit = df.assign(a=np.nextafter(df["a"].to_numpy(), np.inf))        # parsing noise
    assert table_fingerprint(last_bit) == fp
    zero = pd.DataFrame({"x": [0.0, np.nan]})
    assert table_fingerprint(zero) == table_fingerprint(pd.DataFrame({"x": [-0.0, float("nan")]}))
    assert table_fingerprint(df.iloc[::-1].reset_index(drop=True)) != fp    # row order counts
    assert table_fingerprint(df[list(df.columns[::-1])]) != fp              # column order counts
    changed = df.copy()
    changed.loc[7, "b"] *= 1.000001                                          # a 7th-digit change
    assert table_fingerprint(changed) != fp
    big = pd.DataFrame({"i": [2 ** 60, 1]})
    assert table_fingerprint(big) != table_fingerprint(pd.DataFrame({"i": [2 ** 60 + 1, 1]}))
    assert table_fingerprint(df.rename(columns={"a": "A"})) != fp


def test_same_fingerprint_across_forms():
    df = _numbers(50)
    old, new = legacy_table_fingerprint(df), table_fingerprint(df)
    other = legacy_table_fingerprint(df.iloc[1:])
    calls = []

    def legacy():
        calls.append(1)
        return old

    assert same_fingerprint(new, new, legacy=legacy) and calls == []       # no slow path
    assert same_fingerprint(old, new, legacy=legacy) and calls == [1]
    assert not same_fingerprint(other, new, legacy=legacy)
    assert not same_fingerprint(old, new) and not same_fingerprint(None, None)
    rows = [{"data_fingerprint": old, "meta": "{}"},
            {"data_fingerprint": new, "meta": json.dumps({"data": {"legacy_fingerprint": old}})},
            {"data_fingerprint": table_fingerprint(df.iloc[1:]),
             "meta": json.dumps({"data": {"legacy_fingerprint": other}})}]
    assert same_data(rows[1], rows[0]) and same_data(rows[0], rows[1])
    assert not same_data(rows[2], rows[0]) and not same_data(rows[2], rows[1])


def test_old_journal_resumes_through_the_cli(tmp_path, cancer):
    """A journal whose header holds the old fingerprint form is resumed, not refused."""
    cancer.to_csv(tmp_path / "c.csv", index=False)
    args = ["measure", "c.csv", "--target", "target", "--model",
            "sklearn.tree:DecisionTreeClassifier", "--sizes", "40,80,160", "--repeats", "2",
            "--seed", "5", "--out", "run.json", "--quiet"]
    first = run_cli(*args, cwd=tmp_path)
    assert first.returncode == 0, first.stderr
    before = json.loads((tmp_path / "run.json").read_text())
    journal = journal_path(tmp_path / "run.json")
    lines = journal.read_text().splitlines()
    header = json.loads(lines[0])
    old = legacy_table_fingerprint(load_table(tmp_path / "c.csv"))
    assert header["run"]["data"] == before["meta"]["data"]["fingerprint"] != old
    header["run"]["data"] = old                      # as the previous version wrote it
    journal.write_text("\n".join([json.dumps(header, sort_keys=True)] + lines[1:4]) + "\n")
    (tmp_path / "run.json").unlink()
    again = run_cli(*args, "--resume", cwd=tmp_path)
    assert again.returncode == 0, again.stderr
    after = json.loads((tmp_path / "run.json").read_text())
    assert after["meta"]["resumed_cells"] == 3
    assert after["meta"]["data"]["fingerprint"] == old
    key = ["size", "repeat", "test_error", "train_error"]
    assert [[p[k] for k in key] for p in after["points"]] == [[p[k] for k in key] for p in before["points"]]


def test_old_store_fingerprint_is_not_a_data_change(tmp_path, cancer):
    """A nightly track on an unchanged table whose baseline run holds the old fingerprint."""
    cancer.to_csv(tmp_path / "c.csv", index=False)
    (tmp_path / "job.toml").write_text(textwrap.dedent("""
        data = "c.csv"
        target = "target"
        model = "sklearn.tree:DecisionTreeClassifier"
        sizes = [40, 80, 160]
        repeats = 2
        seed = 1
        store = "h.db"
        series = "s"
        bootstrap = 20
    """))
    first = run_cli("track", "--config", "job.toml", "--json", cwd=tmp_path)
    assert first.returncode in (0, 1), first.stderr
    old = legacy_table_fingerprint(load_table(tmp_path / "c.csv"))
    with sqlite3.connect(tmp_path / "h.db") as con:  # run 1 as the previous version stored it
        meta = json.loads(con.execute("SELECT meta FROM runs WHERE id = 1").fetchone()[0])
        meta["data"]["fingerprint"] = old
        con.execute("UPDATE runs SET data_fingerprint = ?, meta = ? WHERE id = 1",
                    (old, json.dumps(meta)))
    second = run_cli("track", "--config", "job.toml", "--json", cwd=tmp_path)
    assert second.returncode in (0, 1), second.stderr
    doc = json.loads(second.stdout)
    assert doc["comparable"] is True and not doc.get("reasons"), doc.get("reasons")
    with sqlite3.connect(tmp_path / "h.db") as con:
        fps = [r[0] for r in con.execute("SELECT data_fingerprint FROM runs ORDER BY id")]
    assert fps[0] == old and fps[1].startswith("v2:")


def test_only_the_used_columns_are_read(tmp_path, cancer):
    """With --features, a column the run does not use is never decoded: here its bytes are
    not UTF-8, so reading it fails, and the run still succeeds on the other columns."""
    small = cancer[["mean radius", "mean texture", "worst area", "target"]].head(300)
    text = small.to_csv(index=False).encode()
    lines = text.splitlines()
    bad = [lines[0] + b",notes"] + [ln + (b",\xff\xfe" if i % 2 else b",ok")
                                    for i, ln in enumerate(lines[1:])]
    (tmp_path / "t.csv").write_bytes(b"\n".join(bad) + b"\n")
    args = ["measure", "t.csv", "--target", "target", "--model", "sklearn.tree:DecisionTreeClassifier",
            "--sizes", "40,80", "--repeats", "1", "--quiet", "--json"]
    res = run_cli(*args, "--features", "worst area,mean radius", "--out", "run.json", cwd=tmp_path)
    assert res.returncode == 0, res.stderr
    meta = json.loads((tmp_path / "run.json").read_text())["meta"]
    used = load_table(tmp_path / "t.csv", columns=["target", "mean radius", "worst area"])
    assert list(used.columns) == ["mean radius", "worst area", "target"]  # the file's order
    assert meta["data"]["fingerprint"] == table_fingerprint(used)
    everything = run_cli(*args, "--out", "all.json", cwd=tmp_path)         # all columns: read fails
    assert everything.returncode == 2 and "cannot read" in everything.stderr
    assert len(everything.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("command", [
    ["measure", "--slice", "grade", "--repeats", "1", "--out", "slices.json"],
    ["capacity", "--probe", "--max-n", "40", "--repeats", "1", "--bootstrap", "10"],
    ["tradeoff", "--vary", "max_depth=1,3", "--sizes", "40,80", "--repeats", "1"],
], ids=["measure-slice", "capacity-probe", "tradeoff"])
def test_other_commands_read_only_the_used_columns(tmp_path, cancer, command):
    """Per-slice curves, the capacity probe and the trade-off read, like measure, only the
    named features, the target (and the slice column): an unreadable unused column is
    never decoded."""
    small = cancer[["mean radius", "worst area", "target"]].head(240).assign(
        grade=np.tile(["a", "b"], 120))
    lines = small.to_csv(index=False).encode().splitlines()
    bad = [lines[0] + b",notes"] + [ln + (b",\xff\xfe" if i % 2 else b",ok")
                                    for i, ln in enumerate(lines[1:])]
    (tmp_path / "t.csv").write_bytes(b"\n".join(bad) + b"\n")
    name, *options = command
    lead = 1 if name == "capacity" else 0  # capacity --probe DATA ...
    res = run_cli(name, *options[:lead], "t.csv", "--target", "target",
                  "--model", "sklearn.tree:DecisionTreeClassifier", "--features", "worst area,mean radius",
                  *options[lead:], "--quiet", cwd=tmp_path)
    assert res.returncode in (0, 3), res.stderr


def test_parquet_columns_read_one_by_one(tmp_path):
    df = _numbers(100)
    df.index = pd.RangeIndex(100, 200)
    df.to_parquet(tmp_path / "t.parquet")
    whole = load_table(tmp_path / "t.parquet")
    pd.testing.assert_frame_equal(whole, pd.read_parquet(tmp_path / "t.parquet"))
    part = load_table(tmp_path / "t.parquet", columns=["t", "a"])
    pd.testing.assert_frame_equal(part, pd.read_parquet(tmp_path / "t.parquet")[["a", "t"]])


def test_row_major_cells_give_the_same_points(cancer):
    """A numeric table kept as one row-major array: the model sees the same rows (same
    names, index and values) and the cell the same numbers as from the DataFrame."""
    from curvefit.measuring.cells import CellData, run_cell
    from curvefit.measuring.metrics import resolve_metric
    from curvefit.measuring.models import resolve_model

    X, y = cancer.drop(columns="target"), cancer["target"].to_numpy()
    packed = CellData.build(X, y, X, y, "auto", (), "classification")
    plain = CellData(X, y, X, y, "auto", (), "classification")
    assert list(packed.columns) == list(X.columns) and packed.X.flags.c_contiguous
    idx = np.array([5, 1, 400, 7])
    pd.testing.assert_frame_equal(packed.take(packed.X, idx), X.iloc[idx])
    spec = resolve_model("sklearn.linear_model:LogisticRegression", {"max_iter": 50})
    metric = resolve_metric("error", "classification")
    cell = {"size": 120, "repeat": 0, "model_seed": 3, "timeout": None,
            "train_idx": np.arange(0, 240, 2), "test_idx": np.arange(300, 569)}
    keys = ["train_error", "test_error", "baseline_error", "n_test_errors"]
    a, b = run_cell(packed, spec, metric, cell), run_cell(plain, spec, metric, cell)
    assert [a[k] for k in keys] == [b[k] for k in keys]
    mixed = X.assign(flag=np.arange(len(X)) % 2)          # two dtypes: left as a DataFrame
    assert CellData.build(mixed, y, mixed, y, "auto", (), "classification").columns is None
