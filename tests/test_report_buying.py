"""The report's "What to buy" section: a plan in rounds and a budget split across slices.

The report's numbers must be those of the API (`plan_rounds`, `plan_slices`) on the same
curves and settings; the section renders them, escapes the slice names and embeds the
per-slice figure, and ``report --json`` carries both plans.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from conftest import run_cli
from curvefit.core.curve import Curve
from curvefit.fitting.rounds import plan_rounds, plan_slices
from curvefit.measuring.slices import SliceCurves, measure_slices

SLICE_NAMES = ["<i>small</i>", "large & round"]  # markup and an ampersand: escaped in the page


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A run file and a per-slice file on scikit-learn's breast_cancer data."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    import curvefit as cf

    X, y = load_breast_cancer(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    d = tmp_path_factory.mktemp("buying")
    run = d / "logistic.json"
    cf.measure(LogisticRegression(max_iter=300), X, y, sizes=[30, 60, 120, 240, 400], repeats=3,
               random_state=2, meta={"label": "logistic"}).write(run)
    # slices by tumour size (mean radius above or below its median)
    codes = np.where(X[:, 0] > np.median(X[:, 0]), SLICE_NAMES[1], SLICE_NAMES[0])
    slices = measure_slices(LogisticRegression(max_iter=300), X, y, codes, column="radius",
                            repeats=2, n_sizes=4, random_state=0)
    slices.write(d / "slices.json")
    return d, run, d / "slices.json"


def test_report_what_to_buy_section_figure_and_json(files):
    from matplotlib.image import imread

    d, run, slices = files
    target = 0.9 * float(Curve.read(run).summary()["test_mean"].min())
    out = d / "rep.html"
    r = run_cli("report", run, "--out", out, "--target-error", f"{target:.4f}",
                "--label-cost", "0.5", "--round-cost", "20", "--penalty", "2000",
                "--slices", slices, "--budget", "100", "--bootstrap", "20", "--json", "--quiet")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    buying = doc["buying"]

    # the same numbers as the API on the same curves, bootstrap and seed
    plan = plan_rounds(Curve.read(run), test_error=float(f"{target:.4f}"), label_cost=0.5,
                       round_cost=20, penalty=2000, bootstrap=20)
    assert buying["model"] == "logistic"
    assert buying["rounds"]["buy_now"] == pytest.approx(plan.buy_now)
    assert buying["rounds"]["rounds"]["expected_cost"] == pytest.approx(plan.rounds.expected_cost)
    assert buying["rounds"]["rule"] == plan.rule()
    split = plan_slices(SliceCurves.read(slices), budget=100, label_costs=0.5, bootstrap=20)
    rows = {s["slice"]: s for s in buying["split"]["slices"]}
    assert set(rows) == set(SLICE_NAMES)
    for row in split.table.itertuples():
        assert rows[row.slice]["labels"] == pytest.approx(row.labels)
        assert rows[row.slice]["low"] <= rows[row.slice]["error_after"] <= rows[row.slice]["high"]
    assert sum(s["spend"] for s in rows.values()) <= 100 + 1e-6

    # the section, its figure (written beside the page and decodable), and escaping
    page = out.read_text(encoding="utf-8")
    assert page.index('id="curves"') < page.index('id="buying"') < page.index('id="metadata"')
    section = page[page.index('id="buying"'):page.index("</section>", page.index('id="buying"'))]
    assert "What to buy" in section and "statistical estimates" in section
    assert "one purchase" in section and "Labels to buy now" in section
    assert "&lt;i&gt;small&lt;/i&gt;" in section and "large &amp; round" in section
    assert "<i>small</i>" not in page
    assert section.count("<img") == 1
    png = d / "rep_files" / "slice-curves.png"
    assert str(png) in doc["figures"] and (d / "rep_files" / "slice-curves.svg").is_file()
    image = imread(png)
    assert image.ndim == 3 and image.shape[0] > 200 and image.shape[1] > 300


@pytest.mark.parametrize("args, word", [
    (["--penalty", "100", "--label-cost", "1"], "--target-error"),
    (["--target-error", "0.05", "--penalty", "100"], "--label-cost"),
    (["--budget", "100"], "--slices"),
    (["--slices", "{slices}"], "--budget"),
    (["--slices", "{run}", "--budget", "100"], "per-slice file"),
    (["--slices", "{slices}", "--budget", "100", "--slice-costs", "a:1"], "--slice-costs"),
])
def test_report_buying_bad_input(files, args, word):
    d, run, slices = files
    args = [a.format(run=run, slices=slices) for a in args]
    r = run_cli("report", run, "--out", d / "bad.html", *args, "--quiet")
    assert r.returncode == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and word in lines[0], r.stderr
    assert "Traceback" not in r.stderr
