"""The HTML report: order of sections, self-containment, escaping, and the CLI."""

from __future__ import annotations

import base64
import json
import math
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import curvefit as cf
from conftest import run_cli
from curvefit.core.curve import Curve
from curvefit.core.formatting import format_count
from curvefit.report import html as report
from curvefit.workflows import analysis

# Every element and attribute the report is allowed to contain; anything else in the DOM
# must have come from user strings that escaped escaping.
TAGS = {"html", "head", "meta", "title", "style", "body", "main", "header", "h1", "h2", "h3",
        "div", "nav", "a", "section", "p", "strong", "span", "ul", "li", "figure", "img",
        "figcaption", "table", "thead", "tbody", "tr", "th", "td", "dl", "dt", "dd", "code",
        "footer"}
ATTRS = {"lang", "charset", "name", "content", "href", "id", "class", "src", "alt"}


class Dom(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_startendtag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def parse(page: str) -> Dom:
    d = Dom()
    d.feed(page)
    d.close()
    return d


@pytest.fixture(scope="module")
def curves():
    """Real curves on scikit-learn's breast_cancer data for two models."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.tree import DecisionTreeClassifier

    X, y = load_breast_cancer(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    sizes = [30, 60, 120, 240, 400]
    return {
        "logistic": cf.measure(LogisticRegression(max_iter=300), X, y, sizes=sizes, repeats=3,
                               random_state=2, meta={"label": "logistic"}),
        "tree": cf.measure(DecisionTreeClassifier(max_depth=3), X, y, sizes=sizes, repeats=3,
                           random_state=2, meta={"label": "tree"}),
    }


@pytest.fixture(scope="module")
def analysed(curves):
    target = 0.5 * float(curves["logistic"].summary()["test_mean"].min())
    return target, analysis.analyse(curves, target_error=target, bootstrap=20)


def test_sections_in_order_and_answer_first(analysed):
    target, results = analysed
    from curvefit.capacity.tradeoff import Tradeoff

    table = pd.DataFrame({"param": "max_depth", "value": [1, 2, 3, 1, 2, 3],
                          "size": [100] * 3 + [300] * 3,
                          "train_mean": [.1, .05, .01, .1, .06, .03],
                          "test_mean": [.12, .09, .11, .11, .07, .08],
                          "test_sem": [.01] * 6, "n_repeats": 3, "n_failed": 0,
                          "train_sem": [.01] * 6})
    trade = Tradeoff(table=table, param="max_depth", values=[1, 2, 3])
    page = report.build_report(results, target_error=target, tradeoff=trade)
    ids = [a.get("id") for t, a in parse(page).tags if t == "section"]
    assert ids == ["answer", "curves", "ranking", "capacity", "tradeoff", "worst-case",
                   "cautions", "metadata"]
    answer = page[page.index('id="answer"'):page.index('id="curves"')]
    best = report.order_results(results)[0]
    assert best.answer is not None
    if best.answer.reachable:
        assert f"{format_count(best.answer.n)} labelled samples" in answer
        assert format_count(best.answer.low) in answer
    else:
        assert "not reachable" in answer
    cautions = page[page.index('id="cautions"'):page.index('id="metadata"')]
    for word in ("statistical estimates", "i.i.d.", "model configuration", "regulator"):
        assert word in cautions


def test_only_present_sections_are_rendered(curves):
    page = report.build_report([curves["tree"]])  # a bare curve: no fit, no capacity
    ids = [a.get("id") for t, a in parse(page).tags if t == "section"]
    assert ids == ["answer", "curves", "capacity", "cautions", "metadata"]
    one = Curve.from_table(pd.DataFrame({"size": [10, 20], "test_error": [.4, .3]}))
    ids = [a.get("id") for t, a in parse(report.build_report(one)).tags if t == "section"]
    assert ids == ["answer", "curves", "cautions", "metadata"]


def test_self_contained_page(analysed):
    target, results = analysed
    page = report.build_report(results, target_error=target)
    dom = parse(page)
    assert {t for t, _ in dom.tags} <= TAGS
    assert "script" not in {t for t, _ in dom.tags}
    imgs = [a["src"] for t, a in dom.tags if t == "img"]
    assert len(imgs) >= 3  # curves, gap, worst case
    for src in imgs:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1])[:4] == b"\x89PNG"
    for t, a in dom.tags:
        if "href" in a:
            assert a["href"].startswith("#")
    assert "http://" not in page and "https://" not in page and "url(" not in page
    assert "@import" not in page and "@font-face" not in page


def test_user_strings_are_escaped(curves):
    evil = '<script>alert("x")</script>'
    quote = '"><img src=x onerror=alert(1)>'
    c = curves["tree"]
    meta = dict(c.meta, label=evil, model={"spec": quote, "name": evil},
                features=[evil, quote, "a'b\"c"], target=evil)
    bad = Curve(c.points.assign(message=evil), meta)
    res = analysis.analyse({evil: bad}, target_error=0.01, bootstrap=5)
    page = report.build_report(res, target_error=0.01, title=quote)
    dom = parse(page)
    assert {t for t, _ in dom.tags} <= TAGS
    assert all(set(a) <= ATTRS for _, a in dom.tags)
    assert not any("onerror" in (v or "") for _, a in dom.tags for v in a.values()
                   if _ != "img" or not (v or "").startswith("data:"))
    text = "".join(dom.text)
    assert evil in text and quote in text  # shown as text, not markup


def test_numbers_read_as_in_the_terminal(curves):
    # one style (curvefit.core.formatting) for the report and the terminal: 0.004 is 0.40%
    from types import SimpleNamespace

    page = report.build_report([curves["tree"]], target_error=0.004)
    assert "No answer for 0.40% test error" in page
    answer = SimpleNamespace(n=12_437.0, low=9_870.4, high=math.inf, level=0.9, reachable=True)
    res = SimpleNamespace(label="m", curve=curves["tree"], answer=answer, notes=[])
    text = report.answer_sentence(res, 0.05)
    assert "<strong>5.0%</strong> test error" in text and "12,400 labelled samples" in text
    assert "90% interval 9,870 to no upper limit" in text


def test_write_report_puts_figures_beside(tmp_path, analysed):
    target, results = analysed
    path = report.write_report(tmp_path / "r.html", results, target_error=target)
    files = sorted(p.name for p in (tmp_path / "r_files").iterdir())
    assert "learning-curve.png" in files and "learning-curve.svg" in files
    assert "gap.png" in files
    assert path.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


# --------------------------------------------------------------------------- CLI
@pytest.fixture(scope="module")
def run_file(tmp_path_factory, curves):
    d = tmp_path_factory.mktemp("runs")
    curves["logistic"].write(d / "logistic.json")
    curves["tree"].write(d / "tree.json")
    return d


def test_cli_report_two_runs_probe_tradeoff_and_json(run_file):
    from curvefit.capacity import CapacityEstimate, phi

    n = np.array([5, 10, 20, 40, 80], float)
    cap = CapacityEstimate(vc_dim=20.0, low=15.0, high=26.0, level=0.9, method="probe",
                           above_range=False,
                           design=pd.DataFrame({"n": n, "xi_mean": phi(n / 20), "xi_sem": .01}))
    (run_file / "probe.json").write_text(json.dumps(cap.to_dict()))
    from curvefit.capacity.tradeoff import Tradeoff

    table = pd.DataFrame({"param": "max_depth", "value": [2, None, 2, None],
                          "size": [100, 100, 300, 300], "train_mean": [.1, 0, .1, .02],
                          "test_mean": [.12, .15, .1, .11], "test_sem": .01, "n_repeats": 3,
                          "n_failed": 0, "train_sem": .01})
    trade = Tradeoff(table=table, param="max_depth", values=[2, None])
    (run_file / "trade.json").write_text(json.dumps(trade.to_dict()))
    out = run_file / "rep.html"
    r = run_cli("report", run_file / "logistic.json", run_file / "tree.json", "--out", out,
                "--target-error", "0.03", "--capacity", run_file / "probe.json",
                "--tradeoff", run_file / "trade.json", "--bootstrap", "10", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)  # stdout holds only the JSON document
    assert doc["report"] == str(out)
    assert [m["label"] for m in doc["models"]] == ["logistic", "tree"]
    files = {Path(p).name for p in doc["figures"]}
    assert {"learning-curve.png", "learning-curve.svg", "gap.png", "probe.png",
            "tradeoff.png"} <= files
    page = out.read_text(encoding="utf-8")
    assert "3.0%" in page and "max-deviation" in page


@pytest.mark.parametrize("args, word", [
    (["missing.json"], "not found"),
    (["{run}", "--target-error", "1.5"], "between 0 and 1"),
    (["{run}", "--out", "report.txt"], ".html"),
    (["{run}", "--out", "no/such/dir/r.html"], "does not exist"),
    (["{run}", "--capacity", "{bad}"], "not valid JSON"),
    (["{run}", "--capacity", "{run}"], "capacity"),
    (["{bad}"], "not a curvefit run file"),
])
def test_cli_report_bad_input(run_file, args, word, tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    args = [a.format(run=run_file / "tree.json", bad=bad) for a in args]
    r = run_cli("report", *args, "--quiet", cwd=tmp_path)
    assert r.returncode == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and word in lines[0], r.stderr
    assert "Traceback" not in r.stderr


def test_cli_run_with_script_in_names_and_spec(tmp_path):
    """A real run whose column names and model spec carry markup and quotes."""
    from sklearn.datasets import load_breast_cancer

    X, y = load_breast_cancer(return_X_y=True)
    cols = ['<script>alert("c")</script>', "quote\"d'col", "plain"]
    df = pd.DataFrame(X[:, :3], columns=cols)
    df["y<b>"] = y
    df.to_csv(tmp_path / "data.csv", index=False)
    model_dir = tmp_path / 'm<script>x"y'
    model_dir.mkdir()
    (model_dir / "make.py").write_text(
        "from sklearn.linear_model import LogisticRegression\n"
        "def make_model():\n    return LogisticRegression(max_iter=200)\n")
    spec = f"{model_dir / 'make.py'}:make_model"
    r = run_cli("measure", tmp_path / "data.csv", "--target", "y<b>", "--model", spec,
                "--sizes", "40,80,160,320", "--repeats", "2", "--out", tmp_path / "run.json",
                "--quiet")
    assert r.returncode == 0, r.stderr
    out = tmp_path / "r.html"
    r = run_cli("report", tmp_path / "run.json", "--out", out, "--bootstrap", "5",
                "--target-error", "0.1", "--quiet")
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == str(out)  # the human output is the report's path
    page = out.read_text(encoding="utf-8")
    dom = parse(page)
    assert {t for t, _ in dom.tags} <= TAGS
    assert all(set(a) <= ATTRS for _, a in dom.tags)
    text = "".join(dom.text)
    assert json.dumps(cols[0])[1:-1] in text      # the column name, as text (JSON-quoted)
    assert 'm<script>x"y' in text                 # the model spec, as text


def test_cli_report_keeps_the_measured_range_readable_for_a_far_answer(tmp_path):
    # a pure power law 0.3·n^-0.15 (shape from common practice) measured up to 1,600: the
    # target 5.5% lies near 80,000 labels, 50× the data, beyond the figure's 20× axis
    n = np.repeat([100, 200, 400, 800, 1600], 3)
    table = tmp_path / "curve.csv"
    pd.DataFrame({"size": n, "test_error": 0.3 * n ** -0.15 + np.tile([-0.001, 0, 0.001], 5)}) \
        .to_csv(table, index=False)
    page = tmp_path / "far.html"
    r = run_cli("report", table, "--target-error", "0.055", "--out", page, "--bootstrap", "40",
                "--json", "--quiet")
    assert r.returncode == 0, r.stderr
    [model] = json.loads(r.stdout)["models"]
    answer = model["answer"]
    assert answer["beyond_horizon"] or answer["n"] > 20 * 1600
    text = page.read_text()
    assert ("The axis ends at 32,000 labelled samples (20× the largest size measured), so the "
            "measured points stay readable; the answer for model 1 lies beyond it") in text
    assert (tmp_path / "far_files" / "learning-curve.png").stat().st_size > 0
