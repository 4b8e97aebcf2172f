"""Tests of curvefit.capacity (probe, gap model, Φ) and `curvefit capacity` against outside facts.

Outside references used here:
- Φ check values: Vapnik, Levin & LeCun 1994, "Measuring the VC-dimension of a
  learning machine", Neural Computation 6(5), values computed independently ([C] in
  docs/references.md#phi-check-values).
- Linear threshold classifiers with a bias in R^d have VC dimension d+1 (Vapnik &
  Chervonenkis 1971; Cover 1965, IEEE Trans. Electronic Computers EC-14(3)).
- 1-nearest-neighbour memorises any labelling of distinct points (common practice),
  so its capacity exceeds any finite probe.
"""

import json
import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.linear_model import LogisticRegression
from sklearn.neighbors import KNeighborsClassifier
from sklearn.svm import LinearSVC

from conftest import run_cli
from curvefit.capacity import CapacityEstimate, effective_capacity, phi, phi_inverse, probe_capacity
from curvefit.capacity.gap_model import gap_constant, recommended_sizes
from curvefit.capacity.probe import ProbeInputs, ProbeSettings, fit_probe, probe_estimate
from curvefit.capacity.result import widen_interval
from curvefit.capacity.vc_curve import fit_vc_curve
from curvefit.core.curve import Curve
from curvefit.core.errors import InputError


# ---------------------------------------------------------------------------- Φ
@pytest.mark.parametrize("tau, expected", [(1.0, 0.722), (2.0, 0.493), (10.0, 0.194),
                                           (30.0, 0.105)])
def test_phi_check_values(tau, expected):
    # Check values of docs/references.md#phi-check-values for Φ of Vapnik, Levin & LeCun 1994.
    assert phi(tau) == pytest.approx(expected, abs=6e-4)


def test_phi_flat_continuous_and_decreasing():
    # Φ = 1 below τ = 0.5 and k = 0.14928 makes it continuous there (docs/references.md#phi).
    assert phi(np.array([0.01, 0.2, 0.49])).tolist() == [1.0, 1.0, 1.0]
    assert phi(0.5) == pytest.approx(1.0, abs=1e-4)
    t = np.geomspace(0.5, 1e4, 400)
    v = phi(t)
    assert np.all(np.diff(v) < 0)
    for x in (0.7, 3.0, 50.0):
        assert phi_inverse(phi(x)) == pytest.approx(x, rel=1e-9)


def test_fit_vc_curve_recovers_h_and_scale():
    n = np.array([3, 6, 12, 25, 50, 100, 200, 400])
    h, s = fit_vc_curve(n, phi(n / 17.0))
    assert h == pytest.approx(17.0, rel=1e-4) and s == 1.0
    h, s = fit_vc_curve(n, 0.3 * phi(n / 40.0), free_scale=True)
    assert h == pytest.approx(40.0, rel=1e-4) and s == pytest.approx(0.3, rel=1e-4)


# ---------------------------------------------------------------------------- probe
@pytest.mark.parametrize("d", [5, 10])
def test_probe_linear_svm_lands_near_d_plus_1(d):
    # VC dimension of linear threshold classifiers with a bias in R^d is d+1
    # (Vapnik & Chervonenkis 1971; Cover 1965). Weak regularisation: C = 100.
    # Over 8 seeds the estimate spread is about ±10% (docs/capacity.md); seed 0 is fixed.
    est = probe_capacity(LinearSVC(C=100.0, max_iter=20000), n_features=d, repeats=8,
                         bootstrap=150, random_state=0)
    assert est.method == "probe" and not est.above_range
    assert abs(est.vc_dim - (d + 1)) <= 0.15 * (d + 1), est.message
    assert est.low <= d + 1 <= est.high, est.message
    assert set(["n", "tau", "xi_mean", "xi_sem", "repeats"]) <= set(est.design.columns)
    assert est.message.startswith("Effective VC dimension ≈")


def test_probe_logistic_regression_on_resampled_rows():
    # Same reference (d+1 = 5 for d = 4); inputs are rows resampled from a Gaussian table.
    X = np.random.default_rng(5).standard_normal((3000, 4))
    est = probe_capacity(LogisticRegression(C=1e4, max_iter=5000), X, repeats=6,
                         bootstrap=100, random_state=1)
    assert abs(est.vc_dim - 5) <= 0.15 * 5, est.message
    assert est.low <= 5 <= est.high, est.message


def test_probe_one_nearest_neighbour_is_above_range():
    # 1-NN memorises every labelling of distinct points: ξ stays 1 (common practice).
    est = probe_capacity(KNeighborsClassifier(n_neighbors=1), n_features=3, repeats=3,
                         max_n=120, bootstrap=20)
    assert est.above_range
    assert est.vc_dim >= 120 and math.isinf(est.high)
    assert "h ≥" in est.message and "above the probed range" in est.message
    assert (est.design["xi_mean"] == 1.0).all()


def test_probe_on_a_small_table_never_repeats_rows():
    # 1-NN on 120 distinct rows: n is capped at 60 so every trial has 2n distinct points
    # and ξ stays 1 (memorisation, common practice); h ≥ 2·60 is all that can be said.
    X = np.random.default_rng(2).standard_normal((120, 3))
    est = probe_capacity(KNeighborsClassifier(n_neighbors=1), X, repeats=3, bootstrap=10)
    assert est.above_range and est.design["n"].max() == 60
    assert (est.design["xi_mean"] == 1.0).all()
    assert "too few rows" in est.message and any("120 rows" in n for n in est.notes)
    with pytest.raises(InputError, match="distinct rows"):
        probe_capacity(KNeighborsClassifier(n_neighbors=1), X, sizes=[10, 61])


def test_probe_regularisation_lowers_capacity_and_says_so():
    # Strong regularisation keeps the separator from following random labels.
    weak = probe_capacity(LinearSVC(C=100.0, max_iter=20000), n_features=8, repeats=4,
                          bootstrap=20)
    strong = probe_capacity(LinearSVC(C=1e-3, max_iter=20000), n_features=8, repeats=4,
                            bootstrap=20)
    assert strong.vc_dim < 0.8 * weak.vc_dim
    assert any("regularisation" in n for n in strong.notes)


def test_probe_same_numbers_for_any_n_jobs():
    model = LogisticRegression(C=100.0, max_iter=2000)
    a = probe_capacity(model, n_features=3, sizes=[2, 4, 8, 16, 32], repeats=3,
                       bootstrap=30, random_state=11, n_jobs=1)
    b = probe_capacity(model, n_features=3, sizes=[2, 4, 8, 16, 32], repeats=3,
                       bootstrap=30, random_state=11, n_jobs=2)
    assert a.vc_dim == b.vc_dim and (a.low, a.high) == (b.low, b.high)
    pd.testing.assert_frame_equal(a.design, b.design)
    assert not hasattr(model, "coef_")  # the user's estimator was never fitted


class _Flaky:
    """Fails on half-sizes above 10; a stand-in for a user model that breaks."""

    def fit(self, X, y):
        if len(X) > 20:
            raise RuntimeError("out of memory (pretend)")
        self._inner = LinearSVC(C=100.0, max_iter=20000).fit(X, y)
        return self

    def predict(self, X):
        return self._inner.predict(X)


def test_probe_failing_cells_are_recorded_not_fatal():
    est = probe_capacity(_Flaky, n_features=2, sizes=[2, 4, 8, 16, 32], repeats=3,
                         bootstrap=10)
    assert est.extra["failed_cells"] == 6
    assert est.design["n"].tolist() == [2, 4, 8]
    assert any("failed" in n for n in est.notes)


class _Broken:
    def fit(self, X, y):
        raise ValueError("cannot fit anything")

    def predict(self, X):
        return np.zeros(len(X))


def test_probe_all_cells_failing_is_an_input_error():
    with pytest.raises(InputError, match="failed on every probe cell"):
        probe_capacity(_Broken, n_features=2, sizes=[2, 4], repeats=2)


def test_probe_bad_inputs():
    with pytest.raises(InputError, match="n_features"):
        probe_capacity(LinearSVC())
    with pytest.raises(InputError, match="missing or infinite"):
        probe_capacity(LinearSVC(), np.array([[1.0, np.nan], [2.0, 3.0]]))


def test_capacity_estimate_round_trip_through_json():
    est = probe_capacity(KNeighborsClassifier(n_neighbors=1), n_features=2, repeats=2,
                         max_n=40, bootstrap=5)
    doc = json.loads(json.dumps(est.to_dict(), allow_nan=False))
    back = CapacityEstimate.from_dict(doc)
    assert back.above_range and math.isinf(back.high)
    assert back.vc_dim == est.vc_dim and back.message == est.message
    pd.testing.assert_frame_equal(back.design, est.design, check_dtype=False)


# ---------------------------------------------------------------------------- gap model
def _gaussian_linear_curve(d, noise, seed, repeats=5, sizes=None, n_test=3000):
    """Train/test 0-1 errors of logistic regression without a penalty on Gaussian inputs
    whose labels are a linear threshold flipped with probability ``noise``."""
    rng = np.random.default_rng(seed)
    w = rng.standard_normal(d)
    if sizes is None:
        sizes = recommended_sizes(d + 1.0)
    Xt = rng.standard_normal((n_test, d))
    yt = np.where(rng.random(n_test) < noise, 1 - (Xt @ w > 0), Xt @ w > 0).astype(int)
    rows = []
    for n in sizes:
        for r in range(repeats):
            X = rng.standard_normal((n, d))
            y = np.where(rng.random(n) < noise, 1 - (X @ w > 0), X @ w > 0).astype(int)
            if len(np.unique(y)) < 2:
                y[0] = 1 - y[0]
            m = LogisticRegression(C=1e6, max_iter=5000).fit(X, y)
            rows.append({"size": int(n), "repeat": r,
                         "train_error": float(np.mean(m.predict(X) != y)),
                         "test_error": float(np.mean(m.predict(Xt) != yt))})
    return Curve.from_table(pd.DataFrame(rows))


def _planted_curve(h, sizes, train_error=0.0, repeats=4, noise=0.002, seed=0):
    """Gaps that follow the calibrated law c(ν)·h/n exactly, plus Gaussian noise."""
    rng = np.random.default_rng(seed)
    rows = [{"size": n, "repeat": r, "train_error": train_error,
             "test_error": train_error + gap_constant(train_error) * h / n + rng.normal(0, noise)}
            for n in sizes for r in range(repeats)]
    return Curve.from_table(pd.DataFrame(rows))


def test_gap_model_linear_classifiers_land_near_d_plus_1():
    # Reference: VC dimension d+1 of linear threshold classifiers (Vapnik & Chervonenkis
    # 1971; Cover 1965), measured at the sizes the tool recommends for d + 1.
    results = []
    for d, noise in ((5, 0.0), (5, 0.2), (15, 0.0), (15, 0.2)):
        est = effective_capacity(_gaussian_linear_curve(d, noise, seed=10 * d + int(100 * noise)),
                                 bootstrap=100)
        assert est.method == "gap" and est.status == "ok" and est.extra["gap_constant"] > 0
        results.append((d, noise, est.vc_dim / (d + 1), est.low <= d + 1 <= est.high))
    assert all(0.6 <= r[2] <= 1.5 for r in results), results
    assert sum(r[3] for r in results) >= 3, results


def test_gap_model_does_not_follow_the_design():
    # The old free-scale fit put h at the first size: ten times the sizes gave ten times h.
    small = effective_capacity(_planted_curve(20.0, [60, 120, 240, 480]), bootstrap=50)
    large = effective_capacity(_planted_curve(20.0, [150, 300, 600, 1200], noise=0.0005),
                               bootstrap=50)
    assert small.vc_dim == pytest.approx(20.0, rel=0.1)
    assert large.vc_dim == pytest.approx(20.0, rel=0.1)


def test_gap_model_is_stable_when_the_smallest_or_largest_size_is_dropped():
    curve = _gaussian_linear_curve(10, 0.1, seed=5)
    full = effective_capacity(curve, bootstrap=100)
    assert full.status == "ok"
    sizes = sorted(curve.points["size"].unique())
    for drop in (sizes[0], sizes[-1]):
        pts = curve.points[curve.points["size"] != drop]
        part = effective_capacity(Curve.from_table(pts), bootstrap=100)
        assert full.low <= part.vc_dim <= full.high, (drop, part.vc_dim, full.low, full.high)


def test_gap_model_leaves_out_sizes_before_the_knee():
    # Sizes below 3h sit before the knee: the gap saturates there and is left out.
    rows = _planted_curve(20.0, [80, 160, 320, 640]).points.to_dict("records")
    rows += [{"size": n, "repeat": r, "train_error": 0.0, "test_error": 0.45}
             for n in (10, 20, 40) for r in range(4)]
    est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=50)
    assert est.vc_dim == pytest.approx(20.0, rel=0.1)
    assert est.design.loc[est.design["size"] < 60, "used"].eq(False).all()
    assert any("left out" in n for n in est.notes)


def test_gap_model_is_silent_when_the_gaps_are_noise():
    rng = np.random.default_rng(1)
    rows = [{"size": n, "repeat": r, "train_error": 0.2, "test_error": 0.2 + rng.normal(0, 0.01)}
            for n in (2000, 4000, 8000) for r in range(4)]
    est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=20)
    assert est.status == "not_identifiable" and math.isnan(est.vc_dim)
    assert "No capacity figure" in est.message and "measure between n =" in est.message


def test_gap_model_above_range_names_the_sizes_to_measure():
    # A memorising learner (train error 0, gap flat) before the knee at every size.
    rows = [{"size": n, "repeat": r, "train_error": 0.0, "test_error": 0.4 + 0.01 * r}
            for n in (20, 40, 80, 160) for r in range(3)]
    est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=20)
    assert est.status == "above_range" and est.above_range and math.isinf(est.high)
    assert "measure between n =" in est.message


def test_gap_model_regime_only_where_the_data_support_it():
    sizes = [100, 200, 400, 800]
    realizable = effective_capacity(_planted_curve(20.0, sizes, 0.0), bootstrap=20)
    assert realizable.regime.startswith("nearly realizable")
    noisy = effective_capacity(_planted_curve(10.0, sizes, 0.3), bootstrap=20)
    assert noisy.regime.startswith("noisy")
    # A training error of the size of the gap separates neither.
    unclear = effective_capacity(_planted_curve(20.0, sizes, 0.04), bootstrap=20)
    assert unclear.regime == "" and "not determined" in unclear.message


def test_gap_model_single_repeat_has_no_figure():
    rows = [{"size": n, "train_error": 0.0, "test_error": 0.4 * 20 / n} for n in [60, 120, 240, 480]]
    est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=20)
    assert est.status == "no_interval" and math.isnan(est.vc_dim)
    assert "--repeats 3" in est.message


def test_gap_model_shows_the_probe_beside_it():
    probe = CapacityEstimate(vc_dim=21.0, low=17.0, high=26.0, level=0.9, method="probe",
                             above_range=False, design=pd.DataFrame())
    est = effective_capacity(_planted_curve(20.0, [80, 160, 320, 640]), bootstrap=20, probe=probe)
    assert est.extra["probe"]["vc_dim"] == 21.0
    assert any("max-deviation probe gives ≈ 21" in n for n in est.notes)


_values = st.sampled_from([0.0, 0.1, 1 / 3, 0.5, 1.0, 0.3 + 1e-17, 0.3])


@settings(max_examples=60, deadline=None)
@given(sizes=st.lists(st.integers(2, 5000), min_size=3, max_size=6, unique=True),
       repeats=st.integers(1, 4), data=st.data())
def test_gap_model_never_crashes_on_identical_or_degenerate_repeats(sizes, repeats, data):
    rows = [{"size": n, "repeat": r, "train_error": data.draw(_values), "test_error": data.draw(_values)}
            for n in sizes for r in range(repeats)]
    est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=5)
    assert est.status in {"ok", "above_range", "not_identifiable", "no_interval"}
    assert est.message
    json.dumps(est.to_dict(), allow_nan=False)


@settings(max_examples=60, deadline=None)
@given(ns=st.lists(st.integers(1, 3000), min_size=1, max_size=6, unique=True),
       repeats=st.integers(1, 4), data=st.data())
def test_probe_statistics_never_crash(ns, repeats, data):
    # Identical repeats give a standard error of ~1e-17; once that overflowed the widening.
    xi = st.sampled_from([0.0, 1e-17, 0.2, 0.2 + 1e-17, 0.5, 1.0])
    rows = [{"n": n, "xi": data.draw(xi), "status": "ok", "seconds": 0.0}
            for n in ns for _ in range(repeats)]
    df = pd.DataFrame(rows)
    max_n = max(ns)
    h = fit_probe(df, max_n)
    est = probe_estimate(df, h, max_n, False, ProbeInputs(None, 3),
                         ProbeSettings(repeats=repeats, bootstrap=5))
    assert est.status in {"ok", "above_range", "no_interval"}
    assert est.low <= est.vc_dim <= est.high or math.isnan(est.low)


@settings(max_examples=200, deadline=None)
@given(est=st.floats(0.25, 1e6), lo=st.floats(1e-3, 1.0), hi=st.floats(1.0, 1e3),
       ratio=st.one_of(st.floats(0, 1e308), st.just(math.inf), st.just(math.nan)))
def test_widen_interval_never_overflows(est, lo, hi, ratio):
    low, high = widen_interval(est, est * lo, est * hi, ratio, bounds=(0.25, 4e6))
    assert low <= high


def test_gap_model_needs_train_error():
    c = Curve.from_table(pd.DataFrame({"size": [10, 20, 40], "test_error": [0.3, 0.2, 0.1]}))
    with pytest.raises(InputError, match="train_error"):
        effective_capacity(c)


# ---------------------------------------------------------------------------- CLI
def _one_line_error(proc):
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    lines = [ln for ln in proc.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, proc.stderr
    assert "Traceback" not in proc.stderr
    return lines[0]


def test_cli_gap_model_text_and_json(tmp_path):
    curve = _gaussian_linear_curve(4, 0.1, seed=2, repeats=4)
    run = curve.write(tmp_path / "run.json")
    p = run_cli("capacity", run, "--bootstrap", "40", "--out", tmp_path / "cap.json")
    assert p.returncode == 0, p.stderr
    saved = CapacityEstimate.from_dict(json.loads((tmp_path / "cap.json").read_text()))
    assert saved.method == "gap" and saved.message == p.stdout.splitlines()[0]
    first = p.stdout.splitlines()[0]
    assert first.startswith("Effective capacity on this data ≈") and "90% interval" in first
    assert "size" in p.stdout and "c·h/n" in p.stdout
    p = run_cli("capacity", run, "--bootstrap", "40", "--json")
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert doc["method"] == "gap" and doc["status"] == "ok" and doc["extra"]["gap_constant"] > 0
    assert CapacityEstimate.from_dict(doc).vc_dim == pytest.approx(doc["vc_dim"])


def test_cli_probe_on_normal_inputs_and_on_data(tmp_path):
    p = run_cli("capacity", "--probe", "--n-features", "3", "--model", "sklearn.svm:LinearSVC",
                "--param", "C=100", "--param", "max_iter=20000", "--repeats", "4",
                "--bootstrap", "40", "--json")
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert doc["method"] == "probe" and 2.5 < doc["vc_dim"] < 6
    table = pd.DataFrame(np.random.default_rng(0).standard_normal((400, 2)), columns=["a", "b"])
    table["label"] = (table["a"] > 0).astype(int)
    table.to_csv(tmp_path / "t.csv", index=False)
    p = run_cli("capacity", "--probe", tmp_path / "t.csv", "--target", "label", "--model",
                "sklearn.neighbors:KNeighborsClassifier", "--param", "n_neighbors=1",
                "--max-n", "60", "--repeats", "2", "--quiet")
    assert p.returncode == 0, p.stderr
    assert p.stdout.startswith("Capacity above the probed range: h ≥")
    assert "repeats" in p.stdout.splitlines()[2]


@pytest.mark.parametrize("args, needle", [
    (["capacity"], "no run file"),
    (["capacity", "--probe", "--n-features", "3"], "--model"),
    (["capacity", "--probe", "--model", "sklearn.svm:LinearSVC"], "--n-features"),
    (["capacity", "x.json", "--model", "sklearn.svm:LinearSVC"], "--probe"),
    (["capacity", "--probe", "--n-features", "2", "--model", "sklearn.svm:LinearSVC",
      "--level", "1.5"], "--level"),
])
def test_cli_bad_input_is_one_line_exit_2(args, needle):
    line = _one_line_error(run_cli(*args))
    assert needle in line


def test_cli_bad_files_exit_2(tmp_path):
    no_train = tmp_path / "curve.csv"
    pd.DataFrame({"size": [10, 20, 40], "test_error": [0.3, 0.2, 0.1]}).to_csv(no_train, index=False)
    assert "train_error" in _one_line_error(run_cli("capacity", no_train))
    text = tmp_path / "text.csv"
    pd.DataFrame({"a": [1.0, 2.0, 3.0], "colour": ["r", "g", "b"]}).to_csv(text, index=False)
    line = _one_line_error(run_cli("capacity", "--probe", text, "--model", "sklearn.svm:LinearSVC"))
    assert "colour" in line


def test_widened_interval_stays_inside_the_searched_range():
    # A lack-of-fit widening must not invent capacities outside the range h was searched in.
    low, high = widen_interval(10.0, 5.0, 40.0, ratio=25.0, bounds=(0.25, 400.0))
    assert low >= 0.25 and high == float("inf")
    low, high = widen_interval(10.0, 8.0, 12.0, ratio=4.0, bounds=(0.25, 400.0))
    assert low == pytest.approx(6.4) and high == pytest.approx(14.4)


TRAINER = Path(__file__).resolve().parents[1] / "examples" / "trainer.py"


def test_cli_probes_a_command_line_trainer(tmp_path):
    # examples/trainer.py --model linear is a linear threshold rule with a bias: its
    # class has VC dimension d + 1 = 3 in R^2 (Cover 1965); least squares is not an
    # error minimiser, so the check is loose.
    cmd = f"{sys.executable} {TRAINER} --model linear {{train}} {{test}} {{predictions}}"
    p = run_cli("capacity", "--probe", "--n-features", "2", "--command", cmd, "--timeout", "60",
                "--repeats", "3", "--max-n", "80", "--bootstrap", "30", "--json",
                "--out", tmp_path / "probe.json")
    assert p.returncode == 0, p.stderr
    doc = json.loads(p.stdout)
    assert doc["method"] == "probe" and doc["status"] == "ok" and 1.0 < doc["vc_dim"] < 8.0
    assert doc["extra"]["failed_cells"] == 0
    # The saved probe is shown beside the gap figure of a run.
    run = _planted_curve(20.0, [80, 160, 320, 640]).write(tmp_path / "run.json")
    p = run_cli("capacity", run, "--with-probe", tmp_path / "probe.json", "--bootstrap", "20")
    assert p.returncode == 0, p.stderr
    assert "max-deviation probe gives" in p.stdout


def test_cli_probe_command_bad_input_exit_2():
    line = _one_line_error(run_cli("capacity", "--probe", "--n-features", "2", "--command",
                                   f"{sys.executable} {TRAINER} {{train}} {{test}}"))
    assert "{predictions}" in line
    line = _one_line_error(run_cli("capacity", "--probe", "--n-features", "2", "--model",
                                   "sklearn.svm:LinearSVC", "--timeout", "5"))
    assert "--timeout" in line


def test_squared_error_gap_gives_least_squares_parameter_count_at_its_rate():
    # docs/references.md#optimism-of-squared-error: for least squares the gap is about
    # 2·σ²·p/n; on load_diabetes (shipped with scikit-learn) linear regression has
    # p = 10 features + the intercept = 11. The 90% interval must cover 11 at about its
    # rate: at least 15 of 20 differently seeded curves (P(X ≤ 14 | n=20, 0.9) ≈ 0.011).
    from sklearn.datasets import load_diabetes
    from sklearn.linear_model import LinearRegression

    import curvefit as cf

    X, y = load_diabetes(return_X_y=True)
    covered, figures = 0, []
    for seed in range(20):
        curve = cf.measure(LinearRegression(), X, y, repeats=5, random_state=seed)
        est = effective_capacity(curve, random_state=seed, bootstrap=100)
        assert est.method == "optimism" and est.status == "ok"
        assert est.message.startswith("Effective number of parameters")
        covered += est.low <= 11 <= est.high
        figures.append(est.vc_dim)
    assert covered >= 15, (covered, figures)
    assert 8 < float(np.median(figures)) < 14


def test_other_regression_losses_get_no_capacity_figure_and_say_why():
    rows = [{"size": n, "repeat": r, "train_error": 30.0, "test_error": 30.0 + 400 / n + r}
            for n in [50, 100, 200, 400] for r in range(3)]
    curve = Curve.from_table(pd.DataFrame(rows))
    curve = Curve(curve.points, {"metric": "mae", "metric_info": {"name": "mae", "label": "MAE"}})
    est = effective_capacity(curve, bootstrap=20)
    assert est.status == "not_applicable" and est.method == "none" and math.isnan(est.vc_dim)
    assert est.message.startswith("No capacity figure for MAE") and "0-1 loss" in est.message
