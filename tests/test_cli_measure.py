"""`curvefit measure` through the real command line: outputs, exit codes, bad input, kill -9."""

import json
import signal
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_iris

from conftest import ROOT, default_signals, kill_when_journaled, run_cli

LOGREG = "sklearn.linear_model:LogisticRegression"
COMPARE = ["size", "repeat", "train_error", "test_error", "n_test", "n_test_errors", "status", "message"]


@pytest.fixture(scope="module")
def iris_csv(tmp_path_factory):
    d = tmp_path_factory.mktemp("data")
    frame = load_iris(as_frame=True).frame
    frame["colour"] = np.where(frame["sepal length (cm)"] > 5.8, "dark", "light")
    frame["plot"] = np.arange(len(frame)) % 15  # 15 groups of 10 rows
    frame["day"] = np.arange(len(frame))[::-1]
    path = d / "iris.csv"
    frame.to_csv(path, index=False)
    return path


def test_measure_writes_run_file_and_summary(iris_csv, tmp_path):
    out = tmp_path / "run.json"
    r = run_cli("measure", iris_csv, "--target", "target", "--model", LOGREG, "--param", "max_iter=300",
                "--sizes", "20,60,110", "--repeats", "2", "--out", out, "--quiet")
    assert r.returncode == 0, r.stderr
    assert "test mean" in r.stdout and f"wrote {out}" in r.stdout
    doc = json.loads(out.read_text())
    assert list(doc)[0] == "format" and doc["format"] == "curvefit.run/1"
    assert len(doc["points"]) == 6
    meta = doc["meta"]
    assert meta["encoding"].startswith("one-hot encoding of 1 categorical column (colour)")
    assert meta["command_line"].startswith("curvefit measure")
    assert meta["data"]["fingerprint"] and meta["target"] == "target"
    assert (tmp_path / "run.json.journal").exists()


def test_json_summary_only_on_stdout_and_config_file(iris_csv, tmp_path):
    cfg = tmp_path / "job.toml"
    cfg.write_text(f'target = "target"\nmodel = "{LOGREG}"\nparam = {{max_iter = 300}}\n'
                   'sizes = [20, 110]\nrepeats = 3\nseed = 5\n')
    out = tmp_path / "r.json"
    # --repeats on the command line overrides the config's 3
    r = run_cli("measure", iris_csv, "--config", cfg, "--repeats", "1", "--out", out, "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["n_cells"] == 2 and doc["repeats"] == 1 and doc["sizes"] == [20, 110]
    assert json.loads(out.read_text())["meta"]["seed"] == 5


def test_separate_test_file(iris_csv, tmp_path):
    frame = pd.read_csv(iris_csv)
    frame.iloc[::3].to_csv(tmp_path / "test.csv", index=False)
    frame.drop(index=frame.index[::3]).to_csv(tmp_path / "train.csv", index=False)
    r = run_cli("measure", tmp_path / "train.csv", "--target", "target", "--model", LOGREG,
                "--param", "max_iter=300", "--test", tmp_path / "test.csv", "--sizes", "30,100",
                "--repeats", "2", "--out", tmp_path / "run.json", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads((tmp_path / "run.json").read_text())
    assert doc["meta"]["split"]["kind"] == "given_test"
    assert {p["n_test"] for p in doc["points"]} == {50}


def test_failed_cells_give_exit_code_3(iris_csv, tmp_path):
    model = tmp_path / "picky.py"
    model.write_text(
        "from sklearn.linear_model import LogisticRegression\n"
        "class Picky(LogisticRegression):\n"
        "    def fit(self, X, y):\n"
        "        if len(y) < 50:\n"
        "            raise ValueError('needs 50 rows')\n"
        "        return super().fit(X, y)\n"
        "def make_model():\n    return Picky(max_iter=300)\n")
    r = run_cli("measure", iris_csv, "--target", "target", "--model", f"{model}:make_model",
                "--sizes", "20,100", "--repeats", "2", "--out", tmp_path / "run.json", "--quiet")
    assert r.returncode == 3, r.stderr
    doc = json.loads((tmp_path / "run.json").read_text())
    failed = [p for p in doc["points"] if p["status"] == "failed"]
    assert len(failed) == 2 and all("needs 50 rows" in p["message"] for p in failed)


def test_command_trainer(iris_csv, tmp_path):
    # a program in a subprocess: predicts the most common training label
    prog = tmp_path / "majority.py"
    prog.write_text(
        "import csv, sys, collections\n"
        "train, test, pred = sys.argv[1:4]\n"
        "rows = list(csv.DictReader(open(train)))\n"
        "label = collections.Counter(r['target'] for r in rows).most_common(1)[0][0]\n"
        "n = sum(1 for _ in open(test)) - 1\n"
        "open(pred, 'w').write((label + '\\n') * n)\n")
    r = run_cli("measure", iris_csv, "--target", "target", "--command",
                f"{sys.executable} {prog} {{train}} {{test}} {{predictions}}",
                "--sizes", "30,90", "--repeats", "1", "--out", tmp_path / "run.json", "--json")
    assert r.returncode == 0, r.stderr
    rows = json.loads(r.stdout)["summary"]
    # majority vote on balanced iris: about 2/3 wrong
    assert all(0.5 < row["test_mean"] < 0.8 for row in rows)


# ---------------------------------------------------------------- bad input, one per case
def _journal_case(iris_csv, d, corrupt):
    """A finished small run whose journal is then damaged (corrupt) or replayed with
    another seed (foreign)."""
    out = d / "run.json"
    assert _small_run(iris_csv, out).returncode == 0
    if corrupt:
        j = d / "run.json.journal"
        lines = j.read_text().splitlines()
        j.write_text(lines[0] + "\n{garbage\n" + lines[1] + "\n")
    base = [iris_csv, "--target", "target", "--model", LOGREG, "--param", "max_iter=300",
            "--sizes", "20,60", "--repeats", "1", "--out", out, "--resume"]
    return base if corrupt else base + ["--seed", "9"]


def _cases(iris_csv, d):
    """name -> (arguments after 'measure', text the one stderr line must contain)."""
    def f(name, text):
        p = d / name
        p.write_text(text) if isinstance(text, str) else p.write_bytes(text)
        return p
    m = ["--model", LOGREG]
    t = [iris_csv, "--target", "target"]
    return {
        "missing_file": ([d / "nope.csv", "--target", "y", *m], "not found"),
        "unreadable_file": ([f("broken.parquet", b"this is not parquet"), "--target", "y", *m],
                            "cannot read"),
        "unknown_format": ([f("table.xyz", "a,b\n1,2\n"), "--target", "b", *m], "unknown data format"),
        "target_absent_lists_columns": ([iris_csv, "--target", "species", *m], "petal length (cm)"),
        "nan_in_target": ([f("nan.csv", "a,y\n1,0\n2,1\n3,\n4,1\n"), "--target", "y", *m], "missing value"),
        "single_class": ([f("one.csv", "a,y\n" + "".join(f"{i},x\n" for i in range(20))),
                          "--target", "y", *m],
                         "single class"),
        "too_few_rows_for_smallest_size": ([*t, *m, "--sizes", "140"], "too few rows"),
        "size_larger_than_pool": ([*t, *m, "--sizes", "20,500"], "larger than the training pool"),
        "unknown_metric": ([*t, *m, "--metric", "speed"], "unknown metric"),
        "spec_not_importable": ([*t, "--model", "sklearn.nothing_here:Model"], "not importable"),
        "spec_not_an_estimator": ([*t, "--model", "math:pi"], "not an estimator"),
        "malformed_param": ([*t, *m, "--param", "C"], "KEY=VALUE"),
        "command_missing_placeholder": ([*t, "--command", f"{sys.executable} x.py {{train}} {{test}}"],
                                        "{predictions}"),
        "non_numeric_with_encode_none": ([*t, *m, "--encode", "none"], "non-numeric"),
        "probability_metric_without_predict_proba": ([*t, "--model", "sklearn.svm:SVC", "--metric",
                                                      "neg_log_loss"], "needs predict_proba"),
        "group_column_absent": ([*t, *m, "--groups", "site"], "--groups column 'site' not in the table"),
        "group_column_is_target": ([*t, *m, "--groups", "target"], "is the target"),
        "group_column_has_missing": ([f("gap.csv", "a,g,y\n" + "".join(
            f"{i},{'' if i == 3 else i % 4},{i % 2}\n" for i in range(40))),
            "--target", "y", *m, "--groups", "g"],
            "missing values"),
        "too_few_groups": ([*t, *m, "--groups", "plot", "--size-unit", "groups", "--sizes", "12"],
                           "too few groups"),
        "order_column_absent": ([*t, *m, "--order", "when"], "--order column 'when' not in the table"),
        "order_with_groups_not_both_honoured": ([f("og.csv", "a,g,day,y\n" + "".join(
            f"{i},{i % 3},{i},{i % 2}\n" for i in range(60))), "--target", "y", *m, "--groups", "g",
            "--order", "day"], "cannot both be honoured"),
        "order_with_size_unit_groups": ([*t, *m, "--groups", "plot", "--order", "day",
                                         "--size-unit", "groups"],
                                        "cannot both be honoured"),
    }


@pytest.fixture(scope="module")
def bad_results(iris_csv, tmp_path_factory):
    """Run every bad-input case through the real CLI, several processes at a time."""
    from concurrent.futures import ThreadPoolExecutor

    d = tmp_path_factory.mktemp("bad")
    cases = _cases(iris_csv, d)
    with ThreadPoolExecutor(4) as pool:
        journals = {k: pool.submit(_journal_case, iris_csv, d / k, k == "corrupt_journal_on_resume")
                    for k in ("corrupt_journal_on_resume", "foreign_journal_on_resume")}
        for k in journals:
            (d / k).mkdir()
        for k, fut in journals.items():
            cases[k] = (fut.result(), "corrupt" if k.startswith("corrupt") else "different run")
        futures = {k: pool.submit(run_cli, "measure", *args, cwd=d) for k, (args, _) in cases.items()}
        return {k: (fut.result(), cases[k][1]) for k, fut in futures.items()}


BAD_CASES = ["missing_file", "unreadable_file", "unknown_format", "target_absent_lists_columns",
             "nan_in_target", "single_class", "too_few_rows_for_smallest_size", "size_larger_than_pool",
             "unknown_metric", "spec_not_importable", "spec_not_an_estimator", "malformed_param",
             "command_missing_placeholder", "non_numeric_with_encode_none",
             "probability_metric_without_predict_proba", "corrupt_journal_on_resume",
             "foreign_journal_on_resume", "group_column_absent", "group_column_is_target",
             "group_column_has_missing", "too_few_groups", "order_column_absent",
             "order_with_groups_not_both_honoured", "order_with_size_unit_groups"]


@pytest.mark.parametrize("case", BAD_CASES)
def test_bad_input(bad_results, case):
    r, match = bad_results[case]
    lines = [line for line in r.stderr.splitlines() if line.strip()]
    assert r.returncode == 2, (r.returncode, r.stderr)
    assert len(lines) == 1, r.stderr
    assert "Traceback" not in r.stderr
    assert match.lower() in lines[0].lower(), lines[0]


def _small_run(iris_csv, out, *extra):
    return run_cli("measure", iris_csv, "--target", "target", "--model", LOGREG, "--param", "max_iter=300",
                   "--sizes", "20,60", "--repeats", "1", "--out", out, "--quiet", *extra)


# ---------------------------------------------------------------- crash and resume
def test_kill_9_then_resume_gives_the_uninterrupted_points(iris_csv, tmp_path, monkeypatch):
    model = tmp_path / "slow.py"
    model.write_text(
        "import os, time\n"
        "from sklearn.linear_model import LogisticRegression\n"
        "class Slow(LogisticRegression):\n"
        "    def fit(self, X, y):\n"
        "        time.sleep(float(os.environ.get('SLOW_FIT', '0.25')))\n"
        "        return super().fit(X, y)\n"
        "def make_model():\n    return Slow(max_iter=300)\n")
    args = ["measure", str(iris_csv), "--target", "target", "--model", f"{model}:make_model",
            "--sizes", "20,50,110", "--repeats", "3", "--seed", "3", "--quiet"]
    out = tmp_path / "run.json"
    journal = tmp_path / "run.json.journal"
    kill_when_journaled(args, out, journal, lines=4)  # header + 3 cells
    assert not out.exists()
    kept = len(journal.read_text().splitlines()) - 1
    assert 3 <= kept < 9
    resumed = run_cli(*args, "--out", out, "--resume")
    assert resumed.returncode == 0, resumed.stderr
    # the uninterrupted run, in process (same data preparation as the command); the pause
    # only let the kill land mid-run, it changes no number
    monkeypatch.setenv("SLOW_FIT", "0")
    import curvefit as cf
    from curvefit.measuring import data as cfdata
    from curvefit.measuring.models import resolve_model

    ds = cfdata.prepare(cfdata.load_table(iris_csv), "target")
    whole = cf.measure(resolve_model(f"{model}:make_model"), ds.X, ds.y, sizes=[20, 50, 110],
                       repeats=3, random_state=3)
    a = pd.DataFrame(json.loads(out.read_text())["points"])
    b = whole.points
    assert len(a) == 9
    pd.testing.assert_frame_equal(a[COMPARE], b[COMPARE])
    assert json.loads(out.read_text())["meta"]["resumed_cells"] == kept


def test_ctrl_c_exits_130_with_journal_intact(iris_csv, tmp_path):
    model = tmp_path / "slow.py"
    hold = tmp_path / "hold"  # once it exists, every fit waits: the run cannot end before Ctrl-C
    model.write_text(
        "import os, time\n"
        "from sklearn.linear_model import LogisticRegression\n"
        "class Slow(LogisticRegression):\n"
        "    def fit(self, X, y):\n"
        "        time.sleep(0.25)\n"
        f"        while os.path.exists({str(hold)!r}):\n"
        "            time.sleep(0.05)\n"
        "        return super().fit(X, y)\n"
        "def make_model():\n    return Slow(max_iter=300)\n")
    out = tmp_path / "run.json"
    journal = tmp_path / "run.json.journal"
    proc = subprocess.Popen([sys.executable, "-m", "curvefit.cli.main", "measure", str(iris_csv), "--target",
                             "target", "--model", f"{model}:make_model", "--sizes", "20,50,110",
                             "--repeats", "3", "--quiet", "--out", str(out)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT,
                            preexec_fn=default_signals)
    deadline = time.time() + 120
    while time.time() < deadline and not (journal.exists() and len(journal.read_text().splitlines()) >= 3):
        time.sleep(0.05)
    hold.touch()
    proc.send_signal(signal.SIGINT)
    _, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 130, stderr
    assert "Traceback" not in stderr and "--resume" in stderr
    for line in journal.read_text().splitlines():
        json.loads(line)


def test_config_paths_are_relative_to_the_config_file(iris_csv, tmp_path):
    # A nightly job runs from any working directory: data/out resolve against the file.
    job = tmp_path / "job"
    job.mkdir()
    (job / "iris.csv").write_bytes(iris_csv.read_bytes())
    (job / "job.toml").write_text(f'data = "iris.csv"\ntarget = "target"\nmodel = "{LOGREG}"\n'
                                  'param = {max_iter = 300}\nsizes = [20, 110]\nrepeats = 1\n'
                                  'out = "r.json"\n')
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    r = run_cli("measure", "--config", job / "job.toml", "--quiet", cwd=elsewhere)
    assert r.returncode == 0, r.stderr
    assert (job / "r.json").is_file() and not list(elsewhere.iterdir())
