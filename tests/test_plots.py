"""Figures: they draw what the results hold, with units, and survive awkward inputs."""

from __future__ import annotations

import io
import math
import warnings
import xml.etree.ElementTree as ET

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.linear_model import LogisticRegression

import curvefit as cf
from curvefit.capacity import CapacityEstimate, phi
from curvefit.core.curve import Curve
from curvefit.core.errors import FitWarning
from curvefit.report import plots


class FailsWhenSmall(ClassifierMixin, BaseEstimator):
    """A user model that raises below 100 training rows (a failing cell, not a crash)."""

    def fit(self, X, y):
        if len(X) < 100:
            raise ValueError("refuses to train on fewer than 100 rows")
        self.inner_ = LogisticRegression(max_iter=300).fit(X, y)
        self.classes_ = self.inner_.classes_
        return self

    def predict(self, X):
        return self.inner_.predict(X)


@pytest.fixture(scope="module")
def measured():
    """Two real curves on scikit-learn's breast_cancer data, one with failed cells."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeClassifier

    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    sizes = [30, 60, 120, 240, 400]
    tree = cf.measure(DecisionTreeClassifier(max_depth=4), X, y, sizes=sizes, repeats=3,
                      random_state=1, meta={"label": "tree"})
    flaky = cf.measure(FailsWhenSmall(), X, y, sizes=sizes, repeats=3, random_state=1,
                       meta={"label": "flaky"})
    return {"tree": tree, "flaky": flaky}


@pytest.fixture(scope="module")
def fitted(measured):
    return {k: cf.fit_curve(c, bootstrap=20, random_state=0) for k, c in measured.items()}


def _png_ok(fig) -> np.ndarray:
    png = plots.figure_bytes(fig, "png")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    pixels = mpimg.imread(io.BytesIO(png), format="png")
    assert pixels[..., :3].std() > 0.05  # something is drawn
    svg = plots.figure_bytes(fig, "svg")
    ET.fromstring(svg)  # well-formed XML
    return pixels


def test_learning_curve_draws_means_fits_target_and_answer(measured, fitted):
    tree = measured["tree"]
    fit = fitted["tree"]
    target = float(tree.summary()["test_mean"].min()) * 0.8
    answer = fit.samples_for(test_error=target)
    fig = plots.learning_curve_figure({"tree": tree}, {"tree": fit}, target_error=target,
                                      answers={"tree": answer})
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    assert ax.get_xlabel().startswith("labelled samples")
    assert ax.get_ylabel() == "test error (0-1)"
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert "tree: test" in labels and "tree: train" in labels
    assert any(lab.startswith(f"tree: fit, {fit.best}") for lab in labels)
    # the fitted line is the fit's own prediction on the drawn grid
    line = next(ln for ln in ax.get_lines() if ln.get_label() == f"tree: fit, {fit.best}")
    x, y = line.get_xdata(), line.get_ydata()
    assert x.max() > tree.sizes.max()  # extrapolated
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)  # the grid runs past 10x on purpose
        np.testing.assert_allclose(y, fit.predict(x)["estimate"].to_numpy(), rtol=1e-9)
    # measured means are the curve's per-size means
    pts = next(c for c in ax.containers if c.get_label() == "tree: test")
    np.testing.assert_allclose(pts.lines[0].get_ydata(), tree.summary()["test_mean"])
    # target line
    assert any(np.allclose(ln.get_ydata(), target) and len(ln.get_ydata()) == 2
               for ln in ax.get_lines())
    if answer.reachable:  # an answer past the axis's end is marked at the edge
        assert ax.get_xlim()[1] >= min(answer.n, plots.axis_limit(tree))
    # the constant predictor's error on the same test sets, per size
    const = next(ln for ln in ax.get_lines() if ln.get_label() == "tree: constant predictor")
    np.testing.assert_allclose(const.get_ydata(), tree.summary()["baseline_mean"])
    _png_ok(fig)


def test_learning_curve_with_failed_cells_and_two_models(measured, fitted):
    flaky = measured["flaky"]
    assert len(flaky.failed_points()) > 0  # sizes 30 and 60 failed in every repeat
    fig = plots.learning_curve_figure(measured, fitted)
    ax = fig.axes[0]
    pts = {c.get_label(): c for c in ax.containers}
    np.testing.assert_array_equal(pts["flaky: test"].lines[0].get_xdata(), flaky.sizes)
    # two models: different colours and different markers (readable in greyscale)
    a, b = pts["tree: test"].lines[0], pts["flaky: test"].lines[0]
    assert a.get_marker() != b.get_marker() and a.get_color() != b.get_color()
    _png_ok(fig)


def test_learning_curve_single_model_without_fit():
    c = Curve.from_table(pd.DataFrame({"size": [20, 40, 80], "test_error": [.3, .2, .15]}),
                         meta={"metric": "mse", "label": "only"})
    fig = plots.learning_curve_figure(c)
    assert fig.axes[0].get_ylabel() == "test MSE"  # the metric's name when not 0-1 error
    _png_ok(fig)


def test_a_long_model_name_keeps_the_legend_inside_the_figure(measured):
    """One model whose label is long: the legend takes fewer columns rather than spill
    past the figure's edges (cut off in the PNG)."""
    points = measured["tree"].points
    for label, columns in (("tree", 3), ("HistGradientBoostingClassifier(max_leaf_nodes=8)", 1)):
        curve = Curve(points, dict(measured["tree"].meta, label=label))
        fig = plots.learning_curve_figure(curve, cf.fit_curve(curve, bootstrap=20))
        fig.canvas.draw()
        legend = fig.legends[0]
        box = legend.get_window_extent()
        assert 0 <= box.x0 and box.x1 <= fig.bbox.width
        assert legend._ncols == columns
        _png_ok(fig)


def test_learning_curve_all_failed_and_unreachable(measured, fitted):
    pts = measured["tree"].points.copy()
    pts["status"] = "failed"
    pts["test_error"] = np.nan
    dead = Curve(pts, {"label": "dead"})
    fig = plots.learning_curve_figure(dead)
    assert "no successful cells" in " ".join(t.get_text() for t in fig.axes[0].texts)
    _png_ok(fig)
    # an answer marked unreachable (as fit.samples_for gives below a fitted floor): the
    # figure draws the fit and the target but marks no n
    from curvefit.fitting.engine import SampleEstimate

    fit = fitted["tree"]
    unreachable = SampleEstimate(n=math.inf, low=math.nan, high=math.nan, level=0.9,
                                 target=1e-6, kind="test_error", reachable=False,
                                 asymptote=None, message="not reachable")
    fig = plots.learning_curve_figure(measured["tree"], fit, target_error=1e-6,
                                      answers=unreachable)
    assert not any(t.get_text().startswith("n ≈") for t in fig.axes[0].texts)
    _png_ok(fig)


@pytest.mark.parametrize("answer, mark", [
    # reachable, but 1,250,000× the largest size: marked at the edge, not drawn there
    ({"n": 5e8, "low": 2e5, "high": math.inf, "reachable": True}, "n ≈ 500,000,000 →"),
    # reached only beyond the horizon: "more than" the horizon, at the edge
    ({"n": math.inf, "low": 9e3, "high": math.inf, "reachable": False, "beyond_horizon": True,
      "horizon": 40000.0}, "n > 40,000 →"),
])
def test_far_answers_keep_the_measured_range_readable(measured, fitted, answer, mark):
    tree = measured["tree"]
    target = float(tree.summary()["test_mean"].min()) * 0.5
    fig = plots.learning_curve_figure({"tree": tree}, {"tree": fitted["tree"]}, target_error=target,
                                      answers={"tree": answer})
    ax = fig.axes[0]
    low, high = ax.get_xlim()
    top = float(tree.sizes.max())
    assert plots.axis_limit(tree) == plots.AXIS_CAP * top
    assert high <= 30 * top  # not stretched to the answer
    # the measured sizes keep more than a third of the log-scaled width
    assert (np.log(top) - np.log(low)) / (np.log(high) - np.log(low)) > 1 / 3
    texts = [t.get_text() for t in ax.texts]
    assert mark in texts
    arrow = next(t for t in ax.texts if t.get_text() == "" and t.arrow_patch is not None)
    assert arrow.xy[0] > plots.axis_limit(tree)  # points on, past the edge
    # no fitted line runs past the axis either
    assert all(np.max(ln.get_xdata()) <= plots.axis_limit(tree) * 1.0001 for ln in ax.get_lines()
               if len(ln.get_xdata()) > 2)
    assert plots.beyond_axis(answer, plots.axis_limit(tree))
    _png_ok(fig)


def test_gap_figure_with_capacity_lines(measured):
    tree = measured["tree"]
    grid = np.geomspace(30, 800, 50)
    vc = 0.3 * phi(grid / 25.0)  # a VC-shaped gap curve s·Φ(n/h) as a capacity fit draws it
    fig = plots.gap_figure({"tree": tree}, {"tree": [("VC-shaped fit", grid, vc)]})
    ax = fig.axes[0]
    line = next(ln for ln in ax.get_lines() if ln.get_label() == "tree: VC-shaped fit")
    np.testing.assert_allclose(line.get_ydata(), vc)
    assert ax.get_xscale() == "log" and "gap" in ax.get_ylabel()
    pts = next(c for c in ax.containers if c.get_label() == "tree: measured gap")
    np.testing.assert_allclose(pts.lines[0].get_ydata(), tree.summary()["gap_mean"])
    _png_ok(fig)
    # no training error at all: a message, not an error
    bare = Curve.from_table(pd.DataFrame({"size": [20, 40], "test_error": [.3, .2]}))
    _png_ok(plots.gap_figure(bare))


def test_probe_figure_draws_phi_and_interval():
    n = np.array([5, 10, 20, 40, 80, 160], float)
    h = 20.0
    design = pd.DataFrame({"n": n, "tau": n / h, "xi_mean": phi(n / h) + 0.01,
                           "xi_sem": np.full(n.size, 0.01), "repeats": 6})
    cap = CapacityEstimate(vc_dim=h, low=15.0, high=26.0, level=0.9, method="probe",
                           above_range=False, design=design)
    fig = plots.probe_figure(cap)
    ax = fig.axes[0]
    line = next(ln for ln in ax.get_lines() if ln.get_label().startswith("Φ(n/h)"))
    x, y = line.get_xdata(), line.get_ydata()
    # Φ(1) ≈ 0.722 and Φ(2) ≈ 0.493 (docs/references.md#phi-check-values, computed
    # independently from the formula of Vapnik, Levin & LeCun 1994)
    assert np.interp(h * 1.0, x, y) == pytest.approx(0.722, abs=0.01)
    assert np.interp(h * 2.0, x, y) == pytest.approx(0.493, abs=0.01)
    assert len(ax.collections) >= 2  # error bars and the band of h's interval
    _png_ok(fig)
    empty = CapacityEstimate(vc_dim=math.nan, low=math.nan, high=math.nan, level=0.9,
                             method="probe", above_range=False, design=pd.DataFrame())
    _png_ok(plots.probe_figure(empty))


def test_tradeoff_figure_marks_best_per_size():
    # train/test error against tree depth from scikit-learn's validation_curve (reference)
    from sklearn.datasets import load_digits
    from sklearn.model_selection import validation_curve
    from sklearn.tree import DecisionTreeClassifier

    X, y = load_digits(return_X_y=True)
    depths = [1, 2, 4, 8, 16]
    rows = []
    for size in (300, 1200):
        tr, te = validation_curve(DecisionTreeClassifier(random_state=0), X[:size], y[:size],
                                  param_name="max_depth", param_range=depths, cv=3)
        for d, a, b in zip(depths, tr, te):
            rows.append({"param": "max_depth", "value": d, "size": size,
                         "train_mean": 1 - a.mean(), "test_mean": 1 - b.mean(),
                         "test_sem": b.std(ddof=1) / math.sqrt(len(b))})
    table = pd.DataFrame(rows)
    fig = plots.tradeoff_figure(table)
    ax = fig.axes[0]
    assert ax.get_xlabel().startswith("max_depth")
    stars = [ln for ln in ax.get_lines() if ln.get_marker() == "*" and len(ln.get_xdata())]
    assert len(stars) == 2
    for star, (size, g) in zip(stars, table.groupby("size")):
        assert star.get_xdata()[0] == g.loc[g["test_mean"].idxmin(), "value"]
    _png_ok(fig)
    # categorical values (None is a valid max_depth) and an empty table
    table["value"] = table["value"].astype(object)
    table.loc[table["value"] == 16, "value"] = None
    _png_ok(plots.tradeoff_figure(table))
    _png_ok(plots.tradeoff_figure(pd.DataFrame()))


def test_worst_case_figure_bars_are_the_given_sizes():
    from curvefit import bounds

    # d=4, eps=delta=0.1 -> 38,997.2 (docs/references.md#vc-sample-size-check-values)
    vc = bounds.vc_sample_size(4, 0.1, 0.1).n_samples
    assert vc == pytest.approx(38998, abs=1)
    rows = [{"label": "VC bound", "n": vc, "kind": "bound"},
            {"label": "rule of thumb", "n": bounds.rule_of_thumb_samples(4), "kind": "rule"},
            {"label": "measured", "n": 900, "low": 700, "high": 1300, "kind": "measured"}]
    fig = plots.worst_case_figure(rows, measured_max=400)
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    widths = sorted(p.get_width() for p in ax.patches)
    assert widths == sorted([vc, 40, 900])
    _png_ok(fig)
    _png_ok(plots.worst_case_figure([]))


def test_save_figure_writes_png_and_svg(tmp_path, measured):
    paths = plots.save_figure(plots.learning_curve_figure(measured["tree"]), tmp_path / "lc")
    assert paths["png"].stat().st_size > 1000 and paths["svg"].stat().st_size > 1000
    # the same inputs give the same SVG (no timestamp, fixed ids)
    again = plots.figure_bytes(plots.learning_curve_figure(measured["tree"]), "svg")
    assert again == paths["svg"].read_bytes()


def test_split_kind_is_named_on_the_figure_and_in_the_report():
    # Issue 8: figures and the report say which split a curve used.
    import pandas as pd

    from curvefit.core.curve import Curve
    from curvefit.report import html as report
    from curvefit.report import plots
    from curvefit.workflows import analysis

    pts = pd.DataFrame({"size": [20, 20, 40, 40, 80, 80], "repeat": [0, 1] * 3,
                        "train_error": [0.1] * 6,
                        "test_error": [0.4, 0.42, 0.3, 0.31, 0.25, 0.26]})
    grouped = Curve(pts, {"split": {"kind": "groups"}, "groups_column": "site"})
    ordered = Curve(pts, {"split": {"kind": "order"}, "order_column": "day"})
    assert plots.split_label(grouped) == "grouped split by site"
    assert plots.split_label(ordered) == "time-ordered split by day"
    fig = plots.learning_curve_figure({"a": grouped, "b": ordered})
    assert "grouped split by site; time-ordered split by day" in fig.axes[0].get_xlabel()
    html = report.build_report(analysis.analyse({"a": grouped}, bootstrap=20))
    assert "Split: grouped split by site." in html
