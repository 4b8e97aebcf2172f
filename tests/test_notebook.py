"""Notebook displays: `_repr_html_` and `.plot(ax=None)` of the result objects, and the
example notebook executed in a real Jupyter kernel (nbclient).

The renderers are in curvefit/report/notebook.py; `Curve` reaches them through
curvefit/core/display.py. Curves here are small generated ones, or measured with
scikit-learn's LogisticRegression on scikit-learn's bundled breast-cancer table.
"""

import base64
import html
import json
import math
import time
from pathlib import Path

import matplotlib
import numpy as np
import pandas as pd
import pytest

from conftest import ROOT
from curvefit.capacity.result import CapacityEstimate
from curvefit.capacity.tradeoff import Tradeoff
from curvefit.core.curve import Curve
from curvefit.history.figures import Comparison, Tolerance, compare_figure, make_figure
from curvefit.report import notebook

matplotlib.use("Agg")  # this test process draws without a display

NOTEBOOK = ROOT / "examples" / "notebook.ipynb"
PNG = b"\x89PNG\r\n\x1a\n"


def _curve(meta=None):
    n = np.repeat([50, 100, 200, 400, 800], 3)
    e = 0.08 + 2.0 * n ** -0.5 + np.tile([-0.004, 0.0, 0.004], 5)
    return Curve.from_table(pd.DataFrame({"size": n, "test_error": e, "train_error": e * 0.5,
                                          "n_test": 500, "n_test_errors": np.round(e * 500)}),
                            meta=meta or {})


def _cells(page: str) -> list[str]:
    """The text of every table cell of an HTML fragment, unescaped."""
    import re

    return [html.unescape(c) for c in re.findall(r"<t[dh](?:\s[^>]*)?>(.*?)</t[dh]>", page)]


# ----------------------------------------------------------------------------- tables
def test_curve_table_shows_each_size_with_its_estimate_and_interval():
    curve = _curve()
    page = curve._repr_html_()
    cells = _cells(page)
    summ = curve.summary()
    assert page.count("<tr") == 1 + len(summ)  # header and one row per size
    for _, row in summ.iterrows():
        assert f"{int(row['size']):,}" in cells
        assert f"{100 * row['test_mean']:.1f}%" in cells
    assert any("–" in c and "%" in c for c in cells)  # the exact test-set interval


def test_user_strings_are_escaped_everywhere():
    bad = '<script>alert("x")</script>'
    curve = _curve({"model": {"name": bad, "spec": bad}})
    comp = Comparison(bad, 2, 1, "accepted", True, [],
                      [compare_figure(make_figure("test_error_at_ref", 0.2, 0.19, 0.21),
                                      make_figure("test_error_at_ref", 0.1, 0.09, 0.11),
                                      Tolerance(0.01))])
    for page in (curve._repr_html_(), comp._repr_html_()):
        assert "<script>" not in page and "&lt;script&gt;" in page


def test_comparison_table_reads_like_the_markdown():
    base = make_figure("samples_for_target", 800, 700, 900)
    gone = make_figure("samples_for_target", math.inf, 5000, math.inf)
    comp = Comparison("nightly", 2, 1, "accepted", True, [],
                      [compare_figure(gone, base, Tolerance(0.25, relative=True))])
    cells = _cells(comp._repr_html_())
    assert "not reachable (interval from 5,000, no upper limit)" in cells
    assert "no longer reachable" in cells and "regressed" in cells
    assert "∞" not in comp._repr_html_()


def test_capacity_and_tradeoff_tables():
    cap = CapacityEstimate(12.3, 9.1, 17.0, 0.9, "gap", False, pd.DataFrame(),
                           message="about 12 VC units")
    cells = _cells(cap._repr_html_())
    assert "12.3" in cells and "9.1–17" in cells and "about 12 VC units" in cells
    table = pd.DataFrame({"param": "max_depth", "value": pd.Series([1, 3, 1, 3], dtype=object),
                          "size": [100, 100, 400, 400], "n_repeats": 3, "n_failed": 0,
                          "train_mean": [0.3, 0.1, 0.3, 0.15], "train_sem": 0.01,
                          "test_mean": [0.32, 0.25, 0.31, 0.2], "test_sem": [0.01, 0.03, 0.01, 0.01],
                          "gap_mean": 0.02})
    trade = Tradeoff(table, "max_depth", [1, 3])
    cells = _cells(trade._repr_html_())
    best = trade.best_per_size()
    assert [c for c in cells if c in ("100", "400")] == ["100", "400"]
    assert str(best.loc[1, "best_value"]) == "3" and "20.0%" in cells


def test_fit_and_answer_tables():
    from curvefit.fitting import fit_curve

    fit = fit_curve(_curve(), bootstrap=30)
    cells = _cells(notebook.fit_html(fit))
    e = fit.error_at(800)
    assert f"{100 * e.estimate:.1f}% ({100 * e.low:.1f}%–{100 * e.high:.1f}%)" in cells
    answer = fit.samples_for(test_error=0.12)
    page = notebook.sample_html(answer)
    assert html.escape(answer.message, quote=True) in page
    assert notebook.samples_text(answer) in _cells(page)


# ----------------------------------------------------------------------------- figures
def test_plot_draws_into_a_given_axes_and_returns_it():
    from matplotlib.figure import Figure

    curve = _curve()
    ax = Figure().add_subplot()
    assert curve.plot(ax=ax) is ax
    # the drawn means are the curve's (learning_curve_figure draws them as error bars)
    summ = curve.summary()
    drawn = [line.get_ydata() for line in ax.lines if len(line.get_ydata()) == len(summ)]
    assert any(np.allclose(y, summ["test_mean"]) for y in drawn)
    assert ax.get_xscale() == "log"


def test_a_fit_of_the_gap_is_drawn_over_the_measured_gaps():
    from matplotlib.figure import Figure

    from curvefit.fitting import fit_curve

    n = np.repeat([50, 100, 200, 400, 800], 3)
    e = 0.08 + 2.0 * n ** -0.5 + np.tile([-0.004, 0.0, 0.004], 5)
    curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": e,
                                           "train_error": e - 1.5 * n ** -0.6}))
    fit = fit_curve(curve, on="gap", bootstrap=20)
    ax = Figure().add_subplot()
    notebook.plot_fit(fit, ax=ax)
    line = next(ln for ln in ax.lines if "fit," in ln.get_label())
    x, y = line.get_data()
    assert np.allclose(y, fit.predict(x)["estimate"])  # the fit's own forecast of the gap
    assert "gap" in ax.get_ylabel()


def test_plot_without_axes_makes_a_pyplot_figure():
    import matplotlib.pyplot as plt

    before = set(plt.get_fignums())
    ax = _curve().plot()
    assert ax.figure.number not in before and ax.figure.number in plt.get_fignums()
    plt.close(ax.figure)


def test_every_plot_returns_axes_even_without_data():
    from matplotlib.figure import Figure

    comp = Comparison("s", 1, None, "accepted", True)
    cap = CapacityEstimate(math.nan, math.nan, math.nan, 0.9, "gap", False, pd.DataFrame(),
                           status="not_identifiable")
    for draw in (comp.plot, cap.plot):
        ax = Figure().add_subplot()
        assert draw(ax=ax) is ax and ax.texts  # a message on the axes, not an exception


# ----------------------------------------------------------------------------- the notebook
@pytest.mark.slow
def test_example_notebook_runs_and_shows_tables_and_images(tmp_path):
    nbformat = pytest.importorskip("nbformat", reason="nbformat comes with the test extra")
    nbclient = pytest.importorskip("nbclient", reason="nbclient comes with the test extra")
    pytest.importorskip("ipykernel", reason="ipykernel comes with the test extra")
    nb = nbformat.read(NOTEBOOK, as_version=4)
    start = time.monotonic()
    nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                            resources={"metadata": {"path": str(tmp_path)}}).execute()
    seconds = time.monotonic() - start
    outputs = {c.metadata["tags"][0]: c.outputs for c in nb.cells
               if c.cell_type == "code" and c.metadata.get("tags")}
    tables = [t for t in outputs if t.endswith("-table")]
    plots = [t for t in outputs if t.endswith("-plot")]
    assert {"curve", "fit", "answer", "capacity", "tradeoff", "comparison"} == \
        {t.rsplit("-", 1)[0] for t in tables} == {t.rsplit("-", 1)[0] for t in plots}
    for tag in tables:
        pages = [o["data"]["text/html"] for o in outputs[tag] if "text/html" in o.get("data", {})]
        assert pages and "<table" in pages[0] and "curvefit-display" in pages[0], tag
    for tag in plots:
        images = [base64.b64decode(o["data"]["image/png"]) for o in outputs[tag]
                  if "image/png" in o.get("data", {})]
        assert len(images) == 1 and images[0].startswith(PNG) and len(images[0]) > 10_000, tag
    errors = [o for c in nb.cells for o in c.get("outputs", []) if o.get("output_type") == "error"]
    assert not errors
    # kept light: well under a minute even on a loaded machine (about 30 s at load 10)
    assert seconds < 120, seconds


def test_example_notebook_is_stored_without_outputs():
    doc = json.loads(Path(NOTEBOOK).read_text(encoding="utf-8"))
    assert all(not c.get("outputs") for c in doc["cells"] if c["cell_type"] == "code")


def test_a_tracked_run_shows_its_comparison(tmp_path):
    from matplotlib.figure import Figure

    from curvefit.workflows.nightly import track_run

    result = track_run(_curve({"started": "a"}), store=str(tmp_path / "h.db"), series="s",
                       bootstrap=10)
    page = result._repr_html_()
    assert page == result.comparison._repr_html_() and "Result: first run" in page
    ax = Figure().add_subplot()
    assert result.plot(ax=ax) is ax and "first run" in ax.texts[0].get_text()
