"""A grown table: `curvefit measure GROWN --previous OLD` reuses the older cells.

The table is scikit-learn's breast-cancer data (569 rows), shuffled once; the first
438 rows are the table first measured, all 569 the table after 30% more labels were
bought. The model is a file-defined decision tree that appends one line to a log per
fit, so a test counts the trainings a run did.
"""

import json

import numpy as np
import pandas as pd
import pytest

from conftest import kill_when_journaled, run_cli
from curvefit.core.curve import Curve
from curvefit.core.errors import InputError
from curvefit.measuring.growing import GrowingSplit, grown_sizes, measure_grown
from curvefit.measuring.runner import measure
from curvefit.measuring.splits import GroupSplit, RandomSplit

MODEL_FILE = '''
import os
import time

from sklearn.tree import DecisionTreeClassifier


class CountedTree(DecisionTreeClassifier):
    def fit(self, X, y, *args, **kwargs):
        with open(os.environ["FIT_LOG"], "a") as fh:
            fh.write(f"{len(y)}\\n")
        time.sleep(float(os.environ.get("FIT_PAUSE", "0")))
        return super().fit(X, y, *args, **kwargs)


def make_model():
    return CountedTree(max_depth=3)
'''
POINT_COLUMNS = ["size", "repeat", "train_error", "test_error", "baseline_error", "n_test"]


@pytest.fixture(scope="module")
def tables(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer

    folder = tmp_path_factory.mktemp("growing")
    frame = load_breast_cancer(as_frame=True).frame.sample(frac=1, random_state=0)
    frame = frame.reset_index(drop=True)
    n_old = int(round(len(frame) / 1.3))
    frame.iloc[:n_old].to_csv(folder / "old.csv", index=False)
    frame.to_csv(folder / "grown.csv", index=False)
    (folder / "counted.py").write_text(MODEL_FILE)
    # the first run in this process, through the code the command runs (a process less)
    from curvefit.workflows.jobs import MEASURE_DEFAULTS, measure_from_settings

    opts = dict(MEASURE_DEFAULTS, data=str(folder / "old.csv"), target="target",
                model=f"{folder / 'counted.py'}:make_model", repeats=2, sizes="40,100,200",
                out=str(folder / "old.json"), quiet=True)
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("FIT_LOG", str(folder / "old.fits"))
        measure_from_settings(opts)
    return folder, frame, n_old


def _measure(folder, data, out, *extra, pause=0.0):
    log = folder / f"{out}.fits"
    log.unlink(missing_ok=True)
    r = run_cli("measure", folder / data, "--target", "target", "--model",
                f"{folder / 'counted.py'}:make_model", "--repeats", "2", "--out", folder / out,
                *extra, cwd=folder, env={"FIT_LOG": str(log), "FIT_PAUSE": str(pause),
                                         "CURVEFIT_PROGRESS": "off"})
    fits = len(log.read_text().splitlines()) if log.exists() else 0
    return {"code": r.returncode, "stdout": r.stdout, "stderr": r.stderr, "fits": fits}


def _points(path) -> pd.DataFrame:
    return Curve.read(path).points[POINT_COLUMNS].sort_values(["size", "repeat"]).reset_index(drop=True)


def test_grown_run_trains_only_new_cells_and_equals_a_fresh_run(tables):
    folder, frame, n_old = tables
    grown = _measure(folder, "grown.csv", "grown.json", "--previous", folder / "old.json")
    assert grown["code"] == 0, grown["stderr"]
    fresh = _measure(folder, "grown.csv", "fresh.json", "--previous", folder / "old.json",
                     "--no-reuse", "--json")
    assert fresh["code"] == 0, fresh["stderr"]
    meta = Curve.read(folder / "grown.json").meta
    pool = meta["rounds"][-1]["pool"]
    # the old sizes, then the grid continued to the grown pool
    assert meta["sizes"][:3] == [40, 100, 200] and meta["sizes"][-1] == pool
    new_cells = 2 * (len(meta["sizes"]) - 3)
    assert grown["fits"] == new_cells and fresh["fits"] == 2 * len(meta["sizes"])
    assert sorted(map(tuple, meta["reused_cells"])) == [(s, r) for s in (40, 100, 200) for r in (0, 1)]
    assert f"6 cells reused from the previous run, {new_cells} trained" in grown["stdout"]
    assert [(r["round"], r["rows"], r["new_rows"]) for r in meta["rounds"]] == \
        [(1, n_old, n_old), (2, len(frame), len(frame) - n_old)]
    # reuse equals recomputation, and the older cells are the previous run's
    pd.testing.assert_frame_equal(_points(folder / "grown.json"), _points(folder / "fresh.json"))
    pd.testing.assert_frame_equal(_points(folder / "old.json"), _points(folder / "grown.json").iloc[:6])
    doc = json.loads(fresh["stdout"])
    assert doc["reused_cells"] == [] and [r["rows"] for r in doc["rounds"]] == [n_old, len(frame)]
    # curvefit plan shows the rounds so far
    r = run_cli("plan", folder / "grown.json", "--error", "0.04", "--label-cost", "1",
                "--probability", "0.8", "--bootstrap", "20", "--json")
    assert r.returncode == 0, r.stderr
    assert [t["new_rows"] for t in json.loads(r.stdout)["table_rounds"]] == [n_old, len(frame) - n_old]


@pytest.mark.parametrize("change, expected", [
    (["--seed", "3"], "the previous run used seed 0, this one 3"),
    (["--model", "sklearn.linear_model:LogisticRegression"], "another model"),
    (["--data", "short.csv"], "the grown table has 400 rows, fewer than the 438 rows"),
    (["--data", "changed.csv"], "the first 438 rows of the grown table differ from the rows"),
])
def test_changed_rows_fewer_rows_and_other_settings_are_refused(tables, change, expected, capsys):
    """The command line in this process (no process start-up per case): exit 2, one line."""
    import signal

    from curvefit.cli.main import main

    folder, frame, n_old = tables
    frame.iloc[:400].to_csv(folder / "short.csv", index=False)
    changed = frame.copy()
    changed.iloc[3, 0] += 1.0
    changed.to_csv(folder / "changed.csv", index=False)
    args = {"--data": "grown.csv", "--model": f"{folder / 'counted.py'}:make_model"}
    args.update(dict(zip(change[::2], change[1::2])))
    data = str(folder / args.pop("--data"))
    argv = ["measure", data, "--target", "target", "--previous", str(folder / "old.json"),
            "--out", str(folder / "refused.json"), *[x for kv in args.items() for x in kv]]
    handlers = {s: signal.getsignal(s) for s in (signal.SIGTERM, signal.SIGHUP)}
    try:
        with pytest.raises(SystemExit) as stop:
            main(argv)
    finally:  # the command installs its own SIGTERM/SIGHUP handlers
        for sig, handler in handlers.items():
            signal.signal(sig, handler)
    err = capsys.readouterr().err
    assert stop.value.code == 2 and err.count("\n") == 1 and expected in err, err
    assert not (folder / "refused.json").exists()


def test_killed_grown_run_resumes(tables):
    folder, frame, n_old = tables
    args = ["measure", folder / "grown.csv", "--target", "target", "--model",
            f"{folder / 'counted.py'}:make_model", "--repeats", "2", "--previous",
            folder / "old.json", "--sizes", "40,100,200,300,459"]
    out = folder / "killed.json"
    with pytest.MonkeyPatch.context() as mp:  # the killed process inherits them
        mp.setenv("FIT_LOG", str(folder / "killed.fits"))
        mp.setenv("FIT_PAUSE", "0.5")
        kill_when_journaled(args, out, folder / "killed.json.journal", lines=2)
    journaled = len((folder / "killed.json.journal").read_text().splitlines()) - 1
    assert 1 <= journaled < 4
    done = _measure(folder, "grown.csv", "killed.json", "--previous", folder / "old.json",
                    "--sizes", "40,100,200,300,459", "--resume")
    assert done["code"] == 0, done["stderr"]
    assert done["fits"] == 4 - journaled
    meta = Curve.read(out).meta
    assert meta["resumed_cells"] == journaled and len(meta["reused_cells"]) == 6


# ---------------------------------------------------------------------- the API, fast
def _iris():
    from sklearn.datasets import load_iris

    X, y = load_iris(return_X_y=True)
    order = np.random.default_rng(1).permutation(len(y))
    return X[order], y[order]


def test_round_one_of_a_growing_split_is_the_plain_split():
    _, y = _iris()
    plain = RandomSplit(0.25).split(y[:100], 3, random_state=7)
    grown = GrowingSplit(RandomSplit(0.25), [100, 120, 150]).split(y, 3, random_state=7)
    for p, g in zip(plain, grown):
        assert np.array_equal(p.test, g.test) and np.array_equal(p.pool, g.pool[:len(p.pool)])
        assert sorted(g.pool[len(p.pool):len(p.pool) + 20]) == list(range(100, 120))
        assert sorted(g.pool[len(p.pool) + 20:]) == list(range(120, 150))
    assert not np.array_equal(grown[0].pool[-30:], grown[1].pool[-30:])  # seeded per repeat


def test_third_round_and_refusals():
    from sklearn.tree import DecisionTreeClassifier

    X, y = _iris()
    old = measure(DecisionTreeClassifier(random_state=0), X[:90], y[:90], sizes=[20, 40], repeats=2)
    second = measure_grown(DecisionTreeClassifier(random_state=0), X[:120], y[:120], old)
    third = measure_grown(DecisionTreeClassifier(random_state=0), X, y, second)
    assert [r["rows"] for r in third.meta["rounds"]] == [90, 120, 150]
    assert len(third.meta["reused_cells"]) == len(second.points)
    fresh = measure_grown(DecisionTreeClassifier(random_state=0), X, y, second, reuse=False)
    cols = ["size", "repeat", "train_error", "test_error"]
    assert third.points[cols].equals(fresh.points[cols])
    # a failed cell of the previous run is trained again, not copied
    points = second.points.copy()
    points.loc[0, "status"] = "failed"
    again = measure_grown(DecisionTreeClassifier(random_state=0), X, y, Curve(points, second.meta))
    assert len(again.meta["reused_cells"]) == len(second.points) - 1
    assert [int(points.loc[0, "size"]), int(points.loc[0, "repeat"])] not in again.meta["reused_cells"]
    assert again.points[cols].equals(third.points[cols])
    model = DecisionTreeClassifier(random_state=0)
    with pytest.raises(InputError, match="fewer than the 120 rows"):
        measure_grown(model, X[:100], y[:100], second)
    with pytest.raises(InputError, match="seed"):
        measure_grown(model, X, y, second, random_state=5)
    with pytest.raises(InputError, match="had 4 features, this one 3"):
        measure_grown(model, X[:, :3], y, second)
    with pytest.raises(InputError, match="another model"):
        measure_grown(DecisionTreeClassifier(max_depth=2), X, y, second)
    moved = np.r_[X[1:2], X[0:1], X[2:]]
    with pytest.raises(InputError, match="differ from the rows"):
        measure_grown(model, moved, y, second)
    with pytest.raises(InputError, match="time-ordered"):
        measure_grown(model, X, y, second, order=np.arange(len(y)))
    with pytest.raises(InputError, match="groups"):
        measure_grown(model, X, y, second, size_unit="groups")


def test_grouped_table_grows_by_new_groups_only():
    from sklearn.datasets import load_breast_cancer
    from sklearn.tree import DecisionTreeClassifier

    X, y = load_breast_cancer(return_X_y=True)
    groups = np.arange(len(y)) // 4  # four rows per group; the appended rows are new groups
    old = measure(DecisionTreeClassifier(max_depth=3, random_state=0), X[:440], y[:440],
                  groups=groups[:440], sizes=[40, 100], repeats=2)
    grown = measure_grown(DecisionTreeClassifier(max_depth=3, random_state=0), X, y, old, groups=groups)
    fresh = measure_grown(DecisionTreeClassifier(max_depth=3, random_state=0), X, y, old,
                          groups=groups, reuse=False)
    cols = ["size", "repeat", "train_error", "test_error", "n_train_groups", "n_test_groups"]
    assert len(grown.meta["reused_cells"]) == 4 and grown.points[cols].equals(fresh.points[cols])
    assert grown.meta["split"]["kind"] == "groups"
    leaky = groups.copy()
    tested = GroupSplit(groups[:440]).split(y[:440], 2, random_state=0)[1].test[0]
    leaky[440:] = groups[tested]  # every new row in a group that repeat 1 tests on
    with pytest.raises(InputError, match="new rows belong to groups that the first round's split tests on"):
        measure_grown(DecisionTreeClassifier(max_depth=3), X, y, old, groups=leaky)


def test_grown_sizes_continue_the_grid():
    assert grown_sizes([10, 20, 40, 80], 100) == [10, 20, 40, 80, 100]
    assert grown_sizes([10, 20, 40, 80], 700) == [10, 20, 40, 80, 160, 320, 700]
