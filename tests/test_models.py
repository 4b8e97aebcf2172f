"""Tests for curvefit.measuring.models: specs, parameters, the command trainer, encoding."""

import os
import pickle
import shutil
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.datasets import load_iris, load_wine
from sklearn.dummy import DummyClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.neighbors import NearestCentroid
from sklearn.tree import DecisionTreeClassifier

from curvefit.core.errors import InputError
from curvefit.measuring.models import (
    CommandError,
    CommandModel,
    CommandTimeout,
    ModelSpec,
    as_model_spec,
    check_command,
    parse_params,
    resolve_model,
    with_encoding,
)

PY = sys.executable

# Nearest-centroid trainer in plain Python (no numpy): mean of each class, Euclidean
# distance; the same rule as scikit-learn's NearestCentroid (the reference below).
CENTROID = textwrap.dedent("""\
    import csv, sys
    train, test, out = sys.argv[1:4]
    sums, counts = {}, {}
    with open(train, newline="") as fh:
        rows = csv.reader(fh); header = next(rows)
        for r in rows:
            label, x = r[-1], [float(v) for v in r[:-1]]
            s = sums.setdefault(label, [0.0] * len(x))
            for i, v in enumerate(x): s[i] += v
            counts[label] = counts.get(label, 0) + 1
    cent = {k: [v / counts[k] for v in s] for k, s in sums.items()}
    with open(test, newline="") as fh, open(out, "w") as fo:
        rows = csv.reader(fh); next(rows)
        for r in rows:
            x = [float(v) for v in r]
            best = min(cent, key=lambda k: sum((a - b) ** 2 for a, b in zip(x, cent[k])))
            fo.write(best + "\\n")
    """)

# Majority-class trainer in awk: counts the last column of the training file and
# writes the most frequent label once per test row.
MAJORITY_AWK = textwrap.dedent("""\
    BEGIN { FS = "," }
    FILENAME == ARGV[1] && FNR > 1 { count[$NF]++ }
    FILENAME == ARGV[2] && FNR > 1 { n++ }
    END {
        best = ""
        for (k in count)
            if (best == "" || count[k] > count[best] || (count[k] == count[best] && k < best)) best = k
        for (i = 0; i < n; i++) print best > out
    }
    """)


@pytest.fixture
def iris_split():
    X, y = load_iris(return_X_y=True, as_frame=True)  # Fisher's iris, bundled with scikit-learn
    return train_test_split(X, y.to_numpy(), test_size=0.3, random_state=0, stratify=y)


def script(tmp_path, name, body):
    path = tmp_path / name
    path.write_text(textwrap.dedent(body))
    return path


# ---------------------------------------------------------------- parameters
def test_parse_params_values():
    got = parse_params(["C=0.5", "solver=lbfgs", "max_iter=200", "class_weight=None",
                        "fit_intercept=False", "hidden=(10, 5)", "name='a=b'", "empty="])
    assert got == {"C": 0.5, "solver": "lbfgs", "max_iter": 200, "class_weight": None,
                   "fit_intercept": False, "hidden": (10, 5), "name": "a=b", "empty": ""}
    assert parse_params([]) == {} and parse_params(None) == {}


@pytest.mark.parametrize("item", ["C", "=3", " =3", "two words=1"])
def test_parse_params_malformed(item):
    with pytest.raises(InputError, match="malformed --param .*use KEY=VALUE"):
        parse_params([item])


def test_parse_params_duplicate():
    with pytest.raises(InputError, match="given twice"):
        parse_params(["C=1", "C=2"])


# ---------------------------------------------------------------- import specs
def test_import_spec_makes_fresh_estimators():
    spec = resolve_model("sklearn.linear_model:LogisticRegression", {"C": 0.25, "max_iter": 500})
    assert spec.kind == "import" and spec.name == "LogisticRegression"
    a, b = spec.make(), spec.make()
    assert a is not b and a.C == 0.25 and a.max_iter == 500
    assert spec.describe() == {"kind": "import", "spec": "sklearn.linear_model:LogisticRegression",
                               "name": "LogisticRegression", "params": {"C": 0.25, "max_iter": 500},
                               "command": None, "timeout": None}
    # a dotted path without a colon is accepted and canonicalised
    assert resolve_model("sklearn.tree.DecisionTreeClassifier").spec == "sklearn.tree:DecisionTreeClassifier"


@pytest.mark.parametrize("spec, params, match", [
    ("nosuchpackage.models:Thing", {},
     r"'nosuchpackage.models:Thing' is not importable: ModuleNotFoundError"),
    ("sklearn.linear_model:NoSuchModel", {}, r"is not importable: AttributeError"),
    ("LogisticRegression", {}, r"is not importable: use package.module:Name"),
    ("math:pi", {}, r"'math:pi' is not an estimator \(no fit/predict\)"),
    ("collections:OrderedDict", {}, r"is not an estimator \(no fit/predict\): calling it gave a OrderedDict"),
    ("sklearn.linear_model:LogisticRegression", {"bogus": 1}, r"does not accept these parameters \(bogus\)"),
    ("sklearn.linear_model:LogisticRegression", {"C": -1.0}, r"bad --param .*'C' parameter"),
    ("sklearn.linear_model:LogisticRegression", {"solver": "teleport"}, r"bad --param .*'solver'"),
    # something that exits when called, or returns an object without fit/predict
    ("sys:exit", {}, r"'sys:exit' failed when called: SystemExit"),
    ("builtins:SystemExit", {}, r"not an estimator \(no fit/predict\): calling it gave a SystemExit"),
    ("os:getpid", {}, r"not an estimator \(no fit/predict\): calling it gave a int"),
])
def test_import_spec_errors(spec, params, match):
    with pytest.raises(InputError, match=match):
        resolve_model(spec, params)


def test_no_model_and_both_models():
    with pytest.raises(InputError, match="no model given"):
        resolve_model(None)
    with pytest.raises(InputError, match="either --model or --command"):
        resolve_model("sklearn.linear_model:LogisticRegression",
                      command=f"{PY} t.py {{train}} {{test}} {{predictions}}")
    with pytest.raises(InputError, match="--param does not apply to --command"):
        resolve_model(None, {"C": 1}, command=f"{PY} t.py {{train}} {{test}} {{predictions}}")
    with pytest.raises(InputError, match="timeout must be > 0"):
        resolve_model("sklearn.linear_model:LogisticRegression", timeout=0)


# ---------------------------------------------------------------- file specs
MODEL_FILE = """\
    from sklearn.linear_model import LogisticRegression
    from helper_beside_it import DEFAULT_C

    def make_model(C=DEFAULT_C):
        return LogisticRegression(C=C, max_iter=300)

    def not_a_model():
        return 42
    """


@pytest.fixture
def model_file(tmp_path):
    (tmp_path / "helper_beside_it.py").write_text("DEFAULT_C = 0.75\n")
    return script(tmp_path, "my_model.py", MODEL_FILE)


def test_file_spec(model_file):
    spec = resolve_model(f"{model_file}:make_model")
    assert spec.kind == "file" and spec.make().C == 0.75  # helper imported from the file's folder
    assert resolve_model(f"{model_file}:make_model", {"C": 2.0}).make().C == 2.0
    assert spec.name == "LogisticRegression"


def test_file_spec_errors(tmp_path, model_file):
    with pytest.raises(InputError, match="model file not found"):
        resolve_model(f"{tmp_path / 'absent.py'}:make_model")
    with pytest.raises(InputError, match="is not importable: AttributeError"):
        resolve_model(f"{model_file}:nope")
    with pytest.raises(InputError, match="is not an estimator"):
        resolve_model(f"{model_file}:not_a_model")
    with pytest.raises(InputError, match="names a file but no function"):
        resolve_model(str(model_file))
    broken = script(tmp_path, "broken.py", "def make_model(:\n")
    with pytest.raises(InputError, match="is not importable: SyntaxError"):
        resolve_model(f"{broken}:make_model")
    raising = script(tmp_path, "raising.py", "raise RuntimeError('no licence server')\n")
    with pytest.raises(InputError, match="no licence server"):
        resolve_model(f"{raising}:make_model")


# ---------------------------------------------------------------- pickling
def test_all_spec_kinds_pickle(model_file, tmp_path):
    specs = [
        resolve_model("sklearn.tree:DecisionTreeClassifier", {"max_depth": 2}),
        resolve_model(f"{model_file}:make_model", {"C": 3.0}),
        resolve_model(None, command=f"{PY} {tmp_path / 'c.py'} {{train}} {{test}} {{predictions}}",
                      timeout=5),
        as_model_spec(DecisionTreeClassifier(max_depth=4)),
    ]
    for spec in specs:
        back = pickle.loads(pickle.dumps(spec))
        assert isinstance(back, ModelSpec) and back.describe() == spec.describe()
        est = back.make()
        assert hasattr(est, "fit") and hasattr(est, "predict")
    assert pickle.loads(pickle.dumps(specs[0])).make().max_depth == 2
    assert pickle.loads(pickle.dumps(specs[2])).make().timeout == 5


def test_file_spec_reloads_in_a_fresh_process(model_file, tmp_path):
    """A worker that never saw the file loads it by path from the pickled spec."""
    blob = tmp_path / "spec.pkl"
    blob.write_bytes(pickle.dumps(resolve_model(f"{model_file}:make_model", {"C": 1.5})))
    code = ("import pickle, sys; s = pickle.load(open(sys.argv[1], 'rb')); "
            "print(type(s.make()).__name__, s.make().C)")
    run = subprocess.run([PY, "-c", code, str(blob)], capture_output=True, text=True,
                         cwd="/", timeout=120)
    assert run.returncode == 0, run.stderr
    assert run.stdout.split() == ["LogisticRegression", "1.5"]


# ---------------------------------------------------------------- Python objects
def test_user_estimator_is_never_mutated(iris_split):
    X_tr, X_te, y_tr, y_te = iris_split
    user = LogisticRegression(C=0.5, max_iter=400)
    before = user.get_params()
    spec = as_model_spec(user)
    for _ in range(2):
        est = spec.make()
        assert est is not user
        est.fit(X_tr, y_tr)
    varied = spec.with_params(C=5.0)
    assert varied.make().C == 5.0
    assert user.get_params() == before
    assert not hasattr(user, "coef_")  # never fitted
    assert spec.name == "LogisticRegression" and spec.describe()["params"]["C"] == 0.5
    user.set_params(C=99.0)  # later changes by the user do not leak into the spec
    assert spec.make().C == 0.5


def test_factory_and_class(iris_split):
    X_tr, _, y_tr, _ = iris_split
    spec = as_model_spec(lambda: DecisionTreeClassifier(max_depth=1))
    assert spec.kind == "factory" and spec.make().max_depth == 1
    assert as_model_spec(DecisionTreeClassifier).make().max_depth is None
    with pytest.raises(InputError, match="is not an estimator"):
        as_model_spec(lambda: "nope")
    with pytest.raises(InputError, match="model must be an estimator"):
        as_model_spec(42)
    with pytest.raises(InputError, match="no model given"):
        as_model_spec(None)
    # from Python, a string with the placeholders is a trainer command
    cmd = as_model_spec(f"{PY} t.py {{train}} {{test}} {{predictions}}", timeout=7)
    assert cmd.kind == "command" and cmd.make().timeout == 7


def test_described_parameters_are_plain_json():
    import json

    spec = as_model_spec(lambda C, steps, weights: LogisticRegression(C=C),
                         {"C": np.float64(0.5), "steps": (np.int64(3), 4), "weights": float("inf")})
    params = spec.describe()["params"]
    assert params == {"C": 0.5, "steps": [3, 4], "weights": "inf"}
    json.dumps(params, allow_nan=False)
    nested = as_model_spec(LogisticRegression(C=2.0)).describe()["params"]
    assert nested["C"] == 2.0 and nested["max_iter"] == 100


# ---------------------------------------------------------------- command trainer
def test_python_trainer_matches_nearest_centroid(tmp_path, iris_split):
    X_tr, X_te, y_tr, y_te = iris_split
    trainer = script(tmp_path, "centroid.py", CENTROID)
    spec = resolve_model(None, command=f"{PY} {trainer} {{train}} {{test}} {{predictions}}")
    assert spec.name == "command:centroid.py"
    model = spec.make().fit(X_tr, y_tr)
    got = model.predict(X_te)
    # scikit-learn's NearestCentroid (Euclidean) as the reference implementation
    want = NearestCentroid().fit(X_tr, y_tr).predict(X_te)
    np.testing.assert_array_equal(got, want)
    assert got.dtype.kind == "i"  # integer labels come back as integers


def test_awk_trainer_any_language(tmp_path):
    awk = shutil.which("awk")
    if awk is None:
        pytest.skip("awk is not installed")
    prog = script(tmp_path, "majority.awk", MAJORITY_AWK)
    X, y = load_wine(return_X_y=True)  # UCI wine: class 1 is the largest (71 of 178)
    model = CommandModel(f"{awk} -v out={{predictions}} -f {prog} {{train}} {{test}}")
    got = model.fit(X, y).predict(X[:25])
    want = DummyClassifier(strategy="most_frequent").fit(X, y).predict(X[:25])
    np.testing.assert_array_equal(got, want)
    assert set(got) == {1}


def test_text_labels_and_header(tmp_path):
    prog = script(tmp_path, "echo_first.py", """\
        import csv, sys
        train, test, out = sys.argv[1:4]
        n = sum(1 for _ in open(test)) - 1
        with open(out, "w") as fo:
            fo.write("prediction\\n")  # a header line is allowed
            for i in range(n):
                fo.write(("benign" if i % 2 else "malignant") + "\\n")
        """)
    X = pd.DataFrame({"a": [1.0, 2.0, 3.0], "b": ["u", "v", "w"]})
    y = np.array(["benign", "malignant", "benign"], dtype=object)
    got = CommandModel(f"{PY} {prog} {{train}} {{test}} {{predictions}}").fit(X, y).predict(X)
    assert got.tolist() == ["malignant", "benign", "malignant"]


def test_trainer_sees_documented_files(tmp_path):
    prog = script(tmp_path, "inspect.py", """\
        import sys, shutil
        train, test, out = sys.argv[1:4]
        shutil.copy(train, sys.argv[4]); shutil.copy(test, sys.argv[5])
        n = sum(1 for _ in open(test)) - 1
        open(out, "w").write("0.5\\n" * n)
        """)
    X = pd.DataFrame({"size mm": [1.5, np.nan], "kind": ["a,b", "c"]})
    model = CommandModel(f"{PY} {prog} {{train}} {{test}} {{predictions}} "
                         f"{tmp_path / 'seen_train.csv'} {tmp_path / 'seen_test.csv'}")
    got = model.fit(X, np.array([0.1, 0.2])).predict(X)
    assert got.tolist() == [0.5, 0.5]
    train = pd.read_csv(tmp_path / "seen_train.csv")
    assert list(train.columns) == ["size mm", "kind", "target"]
    assert train["kind"].tolist() == ["a,b", "c"] and np.isnan(train["size mm"][1])
    assert list(pd.read_csv(tmp_path / "seen_test.csv").columns) == ["size mm", "kind"]


def test_predict_many_runs_once(tmp_path, iris_split):
    X_tr, X_te, y_tr, _ = iris_split
    counter = tmp_path / "runs.txt"
    prog = script(tmp_path, "counting.py", CENTROID + f"open({str(counter)!r}, 'a').write('x')\n")
    model = CommandModel(f"{PY} {prog} {{train}} {{test}} {{predictions}}").fit(X_tr, y_tr)
    p_train, p_test = model.predict_many([X_tr, X_te])
    assert counter.read_text() == "x"
    assert len(p_train) == len(X_tr) and len(p_test) == len(X_te)
    np.testing.assert_array_equal(p_test, model.predict(X_te))
    np.testing.assert_array_equal(p_train, model.predict(X_tr))


def test_nonzero_exit_reports_last_stderr_line(tmp_path):
    prog = script(tmp_path, "fails.py", """\
        import sys
        print("loading data", file=sys.stderr)
        print("ValueError: the solver diverged", file=sys.stderr)
        sys.exit(4)
        """)
    model = CommandModel(f"{PY} {prog} {{train}} {{test}} {{predictions}}").fit([[0.0], [1.0]], [0, 1])
    with pytest.raises(CommandError, match=r"exited with code 4: ValueError: the solver diverged$"):
        model.predict([[0.5]])


def test_timeout_kills_the_trainer(tmp_path):
    pid_file = tmp_path / "pid"
    prog = script(tmp_path, "slow.py", f"""\
        import os, time
        open({str(pid_file)!r}, "w").write(str(os.getpid()))
        time.sleep(60)
        """)
    model = CommandModel(f"{PY} {prog} {{train}} {{test}} {{predictions}}", timeout=1.0)
    model.fit([[0.0], [1.0]], [0, 1])
    with pytest.raises(CommandTimeout, match="timed out after 1 s"):
        model.predict([[0.5]])
    pid = int(pid_file.read_text())
    with pytest.raises(ProcessLookupError):
        os.kill(pid, 0)  # the trainer is gone, not left running


@pytest.mark.parametrize("body, match", [
    ("open(sys.argv[3], 'w').write('1\\n' * 5)", r"wrote 5 predictions for 3 test rows"),
    ("open(sys.argv[3], 'w').write('')", r"wrote 0 predictions for 3 test rows"),
    ("pass", r"wrote no predictions file"),
])
def test_bad_predictions(tmp_path, body, match):
    prog = script(tmp_path, "bad.py", f"import sys\n{body}\n")
    model = CommandModel(f"{PY} {prog} {{train}} {{test}} {{predictions}}").fit([[0.0], [1.0]], [0, 1])
    with pytest.raises(CommandError, match=match):
        model.predict([[0.1], [0.2], [0.3]])


@pytest.mark.parametrize("command, match", [
    ("train.py {train} {test}", r"missing the placeholder \{predictions\}"),
    ("train.py {train}", r"missing the placeholders \{test\}, \{predictions\}"),
    ("no-such-trainer-xyz {train} {test} {predictions}",
     r"'no-such-trainer-xyz' in --command not found on PATH"),
    ("python3 'unclosed {train} {test} {predictions}", r"cannot split --command"),
    ("", r"--command is empty"),
])
def test_command_errors(command, match):
    with pytest.raises(InputError, match=match):
        resolve_model(None, command=command)


def test_command_model_is_a_scikit_learn_estimator(tmp_path):
    cmd = f"{PY} t.py {{train}} {{test}} {{predictions}}"
    model = CommandModel(cmd, timeout=3)
    assert model.get_params() == {"command": cmd, "timeout": 3, "file_format": "csv"}
    copy = clone(model)
    assert copy is not model and copy.get_params() == model.get_params()
    assert check_command(cmd)[-3:] == ["{train}", "{test}", "{predictions}"]


# ---------------------------------------------------------------- encoding
@pytest.fixture
def mixed_frame():
    X, y = load_wine(return_X_y=True, as_frame=True)
    X = X[["alcohol", "malic_acid", "color_intensity", "proline"]].copy()
    X["region"] = np.where(X["proline"] > 760, "upper", "lower")
    X.loc[[1, 8, 50], "region"] = None
    X.loc[[4, 20, 99, 150], "malic_acid"] = np.nan
    return X, y.to_numpy()


def test_encode_auto_on_categoricals_and_gaps(mixed_frame):
    X, y = mixed_frame
    base = DecisionTreeClassifier(max_depth=3, random_state=0)
    est, how = with_encoding(base, X)
    assert type(est).__name__ == "Pipeline" and est.steps[-1][1] is base
    assert "one-hot encoding of 1 categorical column (region)" in how
    assert "most-frequent imputation for region" in how
    assert "median imputation with missing-value indicators for 1 numeric column (malic_acid)" in how
    est.fit(X, y)
    assert (est.predict(X) == y).mean() > 0.8
    Z = est[:-1].transform(X)
    assert Z.shape == (len(X), 2 + 1 + 1 + 3) and not np.isnan(Z).any()
    # median imputation: the filled value is the column's median (numpy as reference)
    assert Z[4, 2] == pytest.approx(np.nanmedian(X["malic_acid"]))
    # an unseen category at predict time is ignored, not an error
    novel = X.iloc[:3].copy()
    novel["region"] = "coastal"
    assert len(est.predict(novel)) == 3


def test_encode_none_and_nothing_to_do(mixed_frame):
    X, y = mixed_frame
    base = LogisticRegression()
    with pytest.raises(InputError,
                       match=r"non-numeric feature columns region with --encode none; use --encode auto"):
        with_encoding(base, X, "none")
    numeric = X.drop(columns="region")
    est, how = with_encoding(base, numeric, "none")
    assert est is base and how.startswith("none")
    clean = numeric.fillna(0.0)
    est, how = with_encoding(base, clean, "auto")
    assert est is base and how == "none needed"
    with pytest.raises(InputError, match="unknown --encode 'onehot'; use auto or none"):
        with_encoding(base, X, "onehot")
    cmd = CommandModel(f"{PY} t.py {{train}} {{test}} {{predictions}}")
    est, how = with_encoding(cmd, X, "auto")
    assert est is cmd and "raw columns" in how


def test_encode_auto_on_arrays():
    X = np.array([[1.0, np.nan], [2.0, 3.0], [3.0, 4.0], [4.0, 5.0]])
    est, how = with_encoding(LogisticRegression(), X)
    assert "numeric column (x1)" in how
    est.fit(X, [0, 0, 1, 1])
    assert est.predict(X).shape == (4,)


# ---------------------------------------------------------------- through the real CLI
def _cli_bad(args, match):
    from conftest import run_cli

    r = run_cli("measure", *args)
    lines = [ln for ln in r.stderr.splitlines() if ln.strip()]
    assert r.returncode == 2, (r.returncode, r.stderr)
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    assert match in lines[0], lines[0]


@pytest.fixture(scope="module")
def wine_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("wine") / "wine.csv"
    load_wine(as_frame=True).frame.to_csv(path, index=False)
    return path


def test_cli_bad_model_inputs(wine_csv, tmp_path):
    base = [wine_csv, "--target", "target", "--out", tmp_path / "run.json"]
    _cli_bad(base + ["--model", f"{tmp_path / 'absent.py'}:make_model"], "model file not found")
    _cli_bad(base + ["--model", "sklearn.linear_model:LogisticRegression", "--features", "alcohol,nope"],
             "feature column nope not in the table")
    # a spec that exits must not pass for success (exit 0, no run file)
    _cli_bad(base + ["--model", "sys:exit"], "model spec 'sys:exit' failed when called: SystemExit")
    assert not (tmp_path / "run.json").exists() and not (tmp_path / "run.json.journal").exists()


def test_a_factory_that_exits_is_refused(tmp_path):
    path = script(tmp_path, "quits.py", "import sys\ndef make_model():\n    sys.exit(0)\n")
    with pytest.raises(InputError, match=r"failed when called: SystemExit: 0"):
        resolve_model(f"{path}:make_model")
    with pytest.raises(InputError, match=r"not importable: SystemExit: 3"):
        resolve_model(f"{script(tmp_path, 'at_import.py', 'raise SystemExit(3)')}:make_model")


def test_a_model_that_exits_in_fit_is_a_failed_cell(iris_split):
    from curvefit.measuring.runner import measure

    class Quitter(LogisticRegression):
        def fit(self, X, y):
            raise SystemExit(0)

    X_tr, _, y_tr, _ = iris_split
    curve = measure(Quitter(), X_tr, y_tr, sizes=[30], repeats=1)
    assert curve.points["status"].tolist() == ["failed"]
    assert curve.points["message"].tolist() == ["SystemExit: 0"]


def test_cli_file_spec_in_parallel_workers(wine_csv, tmp_path, model_file):
    """loky workers rebuild a file.py spec by path; results equal a one-process run."""
    import json

    from conftest import run_cli
    from curvefit.measuring.data import load_table, prepare
    from curvefit.measuring.runner import measure

    out = tmp_path / "run.json"
    r = run_cli("measure", wine_csv, "--target", "target", "--model", f"{model_file}:make_model",
                "--param", "C=0.5", "--sizes", "30,90", "--repeats", "2", "--jobs", "2",
                "--seed", "0", "--out", out, "--quiet")
    assert r.returncode == 0, r.stderr
    doc = json.loads(out.read_text())
    assert doc["meta"]["model"]["kind"] == "file" and doc["meta"]["model"]["params"] == {"C": 0.5}
    cols = ["size", "repeat", "train_error", "test_error", "status"]
    parallel = pd.DataFrame(doc["points"])[cols].sort_values(["size", "repeat"]).reset_index(drop=True)
    ds = prepare(load_table(wine_csv), "target")
    local = measure(resolve_model(f"{model_file}:make_model", {"C": 0.5}), ds.X, ds.y,
                    sizes=[30, 90], repeats=2, n_jobs=1, random_state=0)
    local = local.points[cols].sort_values(["size", "repeat"]).reset_index(drop=True)
    assert (parallel["status"] == "ok").all()
    pd.testing.assert_frame_equal(parallel, local)


# Nearest centroid with numpy, reading Parquet or NPZ files; it also notes where it ran
# (its folder, that folder's mode and files) in a log outside that folder.
CENTROID_BINARY = """\
    import json, os, stat, sys
    import numpy as np
    train, test, out, log = sys.argv[1:5]
    if train.endswith(".npz"):
        a, b = np.load(train), np.load(test)
        X, y, T = a["X"], a["y"], b["X"]
        names = [list(a["feature_names"]), list(b["feature_names"])]
    else:
        import pandas as pd
        a, b = pd.read_parquet(train), pd.read_parquet(test)
        X, y, T = a.drop(columns="target").to_numpy(), a["target"].to_numpy(), b.to_numpy()
        names = [list(a.columns[:-1]), list(b.columns)]
    classes = np.unique(y)
    centres = np.array([X[y == c].mean(axis=0) for c in classes])
    pred = classes[((T[:, None, :] - centres[None]) ** 2).sum(axis=2).argmin(axis=1)]
    open(out, "w").write("".join(f"{p}\\n" for p in pred))
    folder = os.path.dirname(train)
    with open(log, "w") as f:
        json.dump({"folder": folder, "mode": stat.S_IMODE(os.stat(folder).st_mode),
                   "files": sorted(os.listdir(folder)), "names": names}, f)
    """


@pytest.mark.parametrize("fmt", ["parquet", "npz"])
def test_binary_trainer_files_in_a_private_folder(tmp_path, iris_split, fmt):
    import json

    X_tr, X_te, y_tr, y_te = iris_split
    trainer = script(tmp_path, "centroid_bin.py", CENTROID_BINARY)
    log = tmp_path / "where.json"
    spec = resolve_model(None, command=f"{PY} {trainer} {{train}} {{test}} {{predictions}} {log}",
                         trainer_format=fmt)
    assert spec.describe()["trainer_format"] == fmt
    got = spec.make().fit(X_tr, y_tr).predict(X_te)
    # scikit-learn's NearestCentroid (Euclidean) as the reference implementation
    np.testing.assert_array_equal(got, NearestCentroid().fit(X_tr, y_tr).predict(X_te))
    seen = json.loads(log.read_text())
    assert seen["mode"] == 0o700  # private to the user running curvefit
    # the two data files, besides the program's own output and its captured streams
    assert seen["files"] == ["predictions.txt", "stderr.txt", "stdout.txt", f"test.{fmt}", f"train.{fmt}"]
    assert seen["names"] == [list(X_tr.columns)] * 2
    assert not os.path.exists(seen["folder"])  # removed after the run


def test_trainer_format_through_the_command_line(tmp_path, wine_csv):
    from tests.conftest import run_cli

    trainer = script(tmp_path, "centroid_bin.py", CENTROID_BINARY)
    cmd = f"{PY} {trainer} {{train}} {{test}} {{predictions}} {tmp_path / 'where.json'}"
    common = ["measure", wine_csv, "--target", "target", "--sizes", "40,120", "--repeats", "1", "--quiet"]
    r = run_cli(*common, "--command", cmd, "--trainer-format", "parquet", "--out", tmp_path / "p.json")
    assert r.returncode == 0, r.stderr
    import json

    run = json.loads((tmp_path / "p.json").read_text())
    assert run["meta"]["model"]["trainer_format"] == "parquet"
    assert all(p["status"] == "ok" for p in run["points"])
    bad = run_cli(*common, "--command", cmd, "--trainer-format", "xlsx", "--out", tmp_path / "b.json")
    assert bad.returncode == 2 and bad.stderr.strip().splitlines() == [
        "curvefit: error: trainer format must be one of csv, parquet, npz, got 'xlsx'"]
    bad = run_cli(*common, "--model", "sklearn.tree:DecisionTreeClassifier", "--trainer-format", "npz",
                  "--out", tmp_path / "b.json")
    assert bad.returncode == 2 and bad.stderr.strip().splitlines() == [
        "curvefit: error: --trainer-format applies to --command only"]
