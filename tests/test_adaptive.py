"""Adaptive measurement and the cost model: stop reasons, resume after kill -9, --jobs,
--plan-only, bad goals, and the robust power law of fit seconds."""

import json
import sys

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.linear_model import LogisticRegression

import curvefit as cf
from conftest import kill_when_journaled, run_cli
from curvefit.measuring.adaptive import AdaptiveDesign, effective_cells, parse_goal
from curvefit.measuring.costs import fit_cost_model, pilot_sizes, plan_seconds

LOGREG = "sklearn.linear_model:LogisticRegression"
COMPARE = ["size", "repeat", "train_error", "test_error", "n_test", "status"]


@pytest.fixture(scope="module")
def cancer():
    return load_breast_cancer(return_X_y=True)


@pytest.fixture(scope="module")
def iris_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("data") / "iris.csv"
    load_iris(as_frame=True).frame.to_csv(path, index=False)
    return path


def _model():
    return LogisticRegression(max_iter=2000)


def _adaptive(X, y, **kw):
    kw.setdefault("sizes", [20, 40, 80, 160, 320])
    kw.setdefault("repeats", 3)
    return cf.measure(_model(), X, y, random_state=5, **kw)


# ---------------------------------------------------------------- stop reasons
def test_stops_when_the_precision_is_reached(cancer):
    curve = _adaptive(*cancer, goal="error-at:400", precision=50.0)
    record = curve.meta["adaptive"]
    assert record["stop"]["reason"] == "precision"
    assert len(record["rounds"]) == 1 and len(curve.points) == len(record["cells"]) == 12
    assert all(c["reason"] == "first pass" for c in record["cells"])
    assert record["answer"]["relative_width"] <= 50.0
    assert "stopped: the interval width" in record["summary"]


def test_stops_when_the_budget_is_spent(cancer):
    curve = _adaptive(*cancer, goal="floor", budget=1e-6)
    record = curve.meta["adaptive"]
    assert record["stop"]["reason"] == "budget"
    assert record["fit_seconds"] >= 1e-6
    assert len(curve.points) == 12          # the first pass (4 sizes x 3) always runs


def test_a_width_within_a_thousandth_of_the_precision_counts_as_reached(cancer):
    first = _adaptive(*cancer, goal="error-at:400", precision=50.0).meta["adaptive"]
    width = first["rounds"][0]["answer"]["relative_width"]
    # 0.05% over: reached after the first pass, as the same cells give the same width
    near = _adaptive(*cancer, goal="error-at:400", precision=width / 1.0005).meta["adaptive"]
    assert near["stop"]["reason"] == "precision" and len(near["rounds"]) == 1
    # 0.5% over: not reached by the first pass
    over = _adaptive(*cancer, goal="error-at:400", precision=width / 1.005).meta["adaptive"]
    assert over["rounds"][0]["answer"]["relative_width"] == pytest.approx(width)
    assert not (over["stop"]["reason"] == "precision" and len(over["rounds"]) == 1)


def test_stops_when_every_cell_is_measured(cancer):
    # four candidate sizes x 2 repeats: the first pass is the whole grid
    curve = _adaptive(*cancer, goal="samples-for-error:0.05", precision=1e-9,
                      sizes=[20, 40, 80, 160], repeats=2)
    record = curve.meta["adaptive"]
    assert record["stop"]["reason"] == "exhausted"
    assert sorted(map(tuple, curve.points[["size", "repeat"]].values.tolist())) == \
        [(s, r) for s in (20, 40, 80, 160) for r in (0, 1)]


def test_stops_when_the_target_is_out_of_reach():
    # a linear rule with 20% of the labels flipped: no classifier beats 20% error (the
    # Bayes error of the task, common practice), so 5% is out of reach
    rng = np.random.default_rng(0)
    X = rng.standard_normal((2400, 3))
    y = (X[:, 0] + 0.5 * X[:, 1] > 0).astype(int)
    y = np.where(rng.random(2400) < 0.2, 1 - y, y)
    sizes = [10, 20, 40, 80, 160, 320, 640, 1200]
    curve = cf.measure(LogisticRegression(), X, y, sizes=sizes, repeats=4, random_state=2,
                       goal="samples-for-error:0.05", precision=0.1)
    record = curve.meta["adaptive"]
    assert record["stop"]["reason"] == "unreachable", record["summary"]
    assert record["answer"]["unreachable"] and "unreachable" in record["summary"]
    assert len(curve.points) < len(sizes) * 4


def test_gap_goal_answers_from_the_gap_curve(cancer):
    from sklearn.tree import DecisionTreeClassifier

    curve = cf.measure(DecisionTreeClassifier(max_depth=3), *cancer, sizes=[20, 40, 80, 160, 320],
                       repeats=3, random_state=5, goal="samples-for-gap:0.03", precision=0.5)
    record = curve.meta["adaptive"]
    assert record["answer"]["text"].startswith("rows for gap 0.03")
    assert record["stop"]["reason"] in ("precision", "exhausted", "saturated", "unreachable")
    # the answer is the one the engine gives for the gap of the same cells
    again = cf.fit_curve(curve, on="gap", random_state=5).samples_for(gap=0.03)
    assert again.n == pytest.approx(record["answer"]["estimate"])


def test_chosen_cells_come_with_reasons_and_stay_in_the_candidates(cancer):
    # 2.5× beyond the largest candidate size, so cells elsewhere still narrow the band; with
    # 3 repeats per size the fresh-data-set part soon dominates and no cell is worth taking
    curve = _adaptive(*cancer, goal="error-at:800", precision=1e-6, repeats=5)
    record = curve.meta["adaptive"]
    assert record["stop"]["reason"] in ("exhausted", "saturated")
    later = [c for c in record["cells"] if c["reason"] != "first pass"]
    assert later and all("predicted half-width" in c["reason"] for c in later)
    assert set(curve.points["size"]) <= {20, 40, 80, 160, 320}
    assert curve.points.groupby("size")["repeat"].max().max() < 5


# ---------------------------------------------------------------- determinism
@pytest.mark.slow  # several refits of the curve per run
def test_two_jobs_choose_the_same_cells_as_one(cancer):
    one = _adaptive(*cancer, goal="error-at:400", precision=0.25, n_jobs=1)
    two = _adaptive(*cancer, goal="error-at:400", precision=0.25, n_jobs=2)
    assert one.meta["adaptive"]["cells"] == two.meta["adaptive"]["cells"]
    pd.testing.assert_frame_equal(one.points[COMPARE], two.points[COMPARE])


@pytest.mark.slow  # several refits of the curve per run
def test_kill_9_then_resume_gives_the_uninterrupted_cells(iris_csv, tmp_path):
    model = tmp_path / "slow.py"
    model.write_text(
        "import time\n"
        "from sklearn.linear_model import LogisticRegression\n"
        "class Slow(LogisticRegression):\n"
        "    def fit(self, X, y):\n"
        "        time.sleep(0.2)\n"
        "        return super().fit(X, y)\n"
        "def make_model():\n    return Slow(max_iter=300)\n")
    args = ["measure", str(iris_csv), "--target", "target", "--model", f"{model}:make_model",
            "--sizes", "10,20,40,80,110", "--repeats", "5", "--seed", "3", "--quiet",
            "--goal", "error-at:400", "--precision", "0.0001"]
    out = tmp_path / "run.json"
    journal = tmp_path / "run.json.journal"
    # kill it after the first pass (12 cells) and before the end (the grid's 25 cells; with
    # 4 repeats the run saturates after 13)
    kill_when_journaled(args, out, journal, lines=1 + 14, timeout=240)
    assert not out.exists()
    kept = len(journal.read_text().splitlines()) - 1
    resumed = run_cli(*args, "--out", out, "--resume")
    assert resumed.returncode == 0, resumed.stderr
    from curvefit.measuring import data as cfdata
    from curvefit.measuring.models import resolve_model

    ds = cfdata.prepare(cfdata.load_table(iris_csv), "target")
    whole = cf.measure(resolve_model(f"{model}:make_model"), ds.X, ds.y, sizes=[10, 20, 40, 80, 110],
                       repeats=5, random_state=3, goal="error-at:400", precision=0.0001)
    doc = json.loads(out.read_text())
    assert doc["meta"]["adaptive"]["cells"] == whole.meta["adaptive"]["cells"]
    pd.testing.assert_frame_equal(pd.DataFrame(doc["points"])[COMPARE], whole.points[COMPARE])
    assert doc["meta"]["resumed_cells"] == kept


@pytest.mark.slow  # several refits of the curve per run
def test_a_trainer_program_chooses_the_same_cells_with_two_jobs(iris_csv, tmp_path):
    # a nearest-centroid trainer run as a program (one process per cell)
    prog = tmp_path / "centroid.py"
    prog.write_text(
        "import sys\n"
        "import numpy as np, pandas as pd\n"
        "train, test, pred = sys.argv[1:4]\n"
        "a = pd.read_csv(train); b = pd.read_csv(test)\n"
        "X = a.drop(columns=['target']).to_numpy(); y = a['target'].to_numpy()\n"
        "labels = np.unique(y); c = np.array([X[y == k].mean(axis=0) for k in labels])\n"
        "T = b[[k for k in a.columns if k != 'target']].to_numpy()\n"
        "d = ((T[:, None, :] - c[None]) ** 2).sum(axis=2)\n"
        "open(pred, 'w').write(''.join(f'{labels[i]}\\n' for i in d.argmin(axis=1)))\n")
    runs = []
    for jobs in ("1", "2"):
        out = tmp_path / f"run{jobs}.json"
        r = run_cli("measure", iris_csv, "--target", "target", "--command",
                    f"{sys.executable} {prog} {{train}} {{test}} {{predictions}}",
                    "--sizes", "10,20,40,80,110", "--repeats", "3", "--goal", "error-at:110",
                    "--precision", "0.0001", "--jobs", jobs, "--out", out, "--quiet")
        assert r.returncode == 0, r.stderr
        runs.append(json.loads(out.read_text()))
    assert runs[0]["meta"]["adaptive"]["cells"] == runs[1]["meta"]["adaptive"]["cells"]
    assert len(runs[0]["meta"]["adaptive"]["rounds"]) >= 2
    pd.testing.assert_frame_equal(pd.DataFrame(runs[0]["points"])[COMPARE],
                                  pd.DataFrame(runs[1]["points"])[COMPARE])


# ---------------------------------------------------------------- the command line
def test_plan_only_trains_nothing_it_keeps(iris_csv, tmp_path):
    r = run_cli("measure", iris_csv, "--target", "target", "--model", LOGREG, "--sizes",
                "10,20,40,80,110", "--repeats", "3", "--plan-only", "--out", "run.json", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert r.stdout.startswith("plan: 15 cells at 5 sizes")
    assert "timed 2 pilot fits after a warm-up fit, not recorded" in r.stdout and "predicted:" in r.stdout
    assert list(tmp_path.iterdir()) == []          # no run file, no journal
    r = run_cli("measure", iris_csv, "--target", "target", "--model", LOGREG, "--plan-only",
                "--goal", "floor", "--budget", "60", "--json", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    plan = json.loads(r.stdout)["plan"]
    assert len(plan["cells"]) == 12 and plan["grid_cells"] == 50 and "rounds of about 4" in plan["adaptive"]
    assert list(tmp_path.iterdir()) == []


def test_a_run_prints_its_eta_and_the_adaptive_summary(iris_csv, tmp_path):
    r = run_cli("measure", iris_csv, "--target", "target", "--model", LOGREG, "--sizes",
                "10,20,40,80,110", "--repeats", "2", "--goal", "error-at:110", "--precision", "100",
                "--out", "run.json", cwd=tmp_path, env={"CURVEFIT_PROGRESS": "0"})
    assert r.returncode == 0, r.stderr
    assert "eta" in r.stderr and "fit-seconds" in r.stderr
    assert "compute:" in r.stdout
    last = r.stdout.strip().splitlines()[-1]
    assert last.startswith("adaptive error-at:110: error at 110") and "stopped:" in last


@pytest.mark.parametrize("extra, match", [
    (["--goal", "nonsense"], "unknown goal"),
    (["--goal", "error-at:abc", "--precision", "0.1"], "must be a number"),
    (["--goal", "error-at:12.5", "--precision", "0.1"], "whole number"),
    (["--goal", "floor:3", "--precision", "0.1"], "takes no value"),
    (["--goal", "samples-for-error", "--precision", "0.1"], "needs a value"),
    (["--goal", "floor"], "needs a precision or a budget"),
    (["--goal", "floor", "--budget", "-5"], "budget"),
    (["--precision", "0.1"], "give a goal too"),
])
def test_bad_goal_is_one_line_exit_2(iris_csv, tmp_path, extra, match):
    r = run_cli("measure", iris_csv, "--target", "target", "--model", LOGREG, "--out",
                tmp_path / "run.json", *extra)
    lines = r.stderr.strip().splitlines()
    assert r.returncode == 2, (r.returncode, r.stderr)
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert match in lines[0], lines[0]
    assert not (tmp_path / "run.json.journal").exists()


# ---------------------------------------------------------------- the cost model
def test_cost_model_slope_is_theil_sen_through_the_size_medians():
    rng = np.random.default_rng(1)
    sizes = np.repeat([50, 100, 200, 400, 800, 1600], 3)
    seconds = 2e-5 * sizes ** 1.4 * rng.lognormal(0, 0.1, len(sizes))
    seconds[0] = 3.0                                # a slow first cell (imports, warm-up)
    cost = fit_cost_model(sizes, seconds)
    levels = np.unique(sizes)
    medians = [np.sort(seconds[sizes == s])[(np.sum(sizes == s) - 1) // 2] for s in levels]
    # scipy's Theil–Sen estimator on the same medians (docs: scipy.stats.theilslopes)
    slope = stats.theilslopes(np.log(medians), np.log(levels)).slope
    assert cost.exponent == pytest.approx(slope, rel=1e-12)
    assert cost.exponent == pytest.approx(1.4, abs=0.1)
    assert plan_seconds(cost, [1600] * 4, n_jobs=2) == pytest.approx(2 * cost.seconds(1600)[0])


def test_cells_count_as_the_engines_student_t_bootstrap_sees_them():
    # k cells draw their mean with Student-t noise on k - 1 degrees of freedom: worth
    # k·(z/t)² cells of known spread (quantiles from scipy.stats)
    z = stats.norm.ppf(0.95)
    expected = [0.0, 1.0] + [k * (z / stats.t.ppf(0.95, k - 1)) ** 2 for k in (2, 3, 4, 5)]
    np.testing.assert_allclose(effective_cells([0, 1, 2, 3, 4, 5], 0.9), expected, rtol=1e-9)
    two, one, three = effective_cells([2, 1, 3])
    assert two < 0.2 * one and three > 6 * two  # a second repeat alone adds little, the third much


def test_pilot_sizes_and_goal_parsing():
    assert pilot_sizes([10, 20, 40, 80, 160, 320, 640]) == [40, 160]
    assert parse_goal("samples-for-gap:0.02").on == "gap"
    assert AdaptiveDesign.from_settings("error-at:20000", budget=600).identity()["goal"] == "error-at:20000"
