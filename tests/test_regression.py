"""Regression and scorer metrics through the real command line: every screen names the
metric, prints its values as plain numbers (never e-notation), and leaves out the
VC-based sections with the reason, while --json keeps the raw numbers.

Data: scikit-learn's bundled diabetes table (load_diabetes, a numeric target) and breast
cancer table (load_breast_cancer, for roc_auc); scorer signs from sklearn.metrics.get_scorer.
"""

import html
import json
import re

import pytest
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.metrics import get_scorer

from conftest import run_cli

# "1.2e+03", "4.4e-12", "1E5": a digit, e or E, optional sign, a digit
E_NOTATION = re.compile(r"\d[eE][+-]?\d")
VC_REASON = "No VC comparison: VC theory bounds the 0-1 loss (misclassification)"


def _ok(proc):
    assert proc.returncode == 0, proc.stderr
    return proc


def _no_e_notation(text: str) -> None:
    text = re.sub(r"\b[0-9a-f]{16,}\b", "", text)  # data fingerprints are hex digests
    found = E_NOTATION.findall(text)
    assert not found, f"e-notation in {found}: {text[:2000]}"


def _page_text(path) -> str:
    """The report's visible text: images, styles and tags dropped."""
    page = path.read_text(encoding="utf-8")
    page = re.sub(r"<img[^>]*>|<style.*?</style>|<script.*?</script>", " ", page, flags=re.S)
    text = html.unescape(re.sub(r"<[^>]+>", "", page))
    return re.sub(r"\s+", " ", text)


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """Three measured runs: Ridge on diabetes (MSE), least squares on diabetes with
    --metric max_error, logistic regression on breast cancer with --metric roc_auc."""
    d = tmp_path_factory.mktemp("regression")
    load_diabetes(as_frame=True).frame.to_csv(d / "diabetes.csv", index=False)
    load_breast_cancer(as_frame=True).frame.to_csv(d / "cancer.csv", index=False)
    common = ["--sizes", "20:331:7", "--repeats", "5", "--seed", "3"]
    printed = {}
    for name, args in [
        ("mse", ["diabetes.csv", "--model", "sklearn.linear_model:Ridge", *common]),
        ("max", ["diabetes.csv", "--model", "sklearn.linear_model:LinearRegression",
                 "--metric", "max_error", *common]),
        ("auc", ["cancer.csv", "--model", "sklearn.linear_model:LogisticRegression",
                 "--param", "max_iter=3000", "--metric", "roc_auc", "--sizes", "20:400:6",
                 "--repeats", "3"]),
    ]:
        printed[name] = _ok(run_cli("measure", *args, "--target", "target", "--out",
                                    f"{name}.json", cwd=d)).stdout
    return d, printed


def test_measure_names_the_metric_in_plain_numbers(runs):
    d, printed = runs
    assert "metric MSE (lower is better)" in printed["mse"]
    assert "metric max error (lower is better)" in printed["max"]
    assert "metric 1 − ROC AUC (lower is better)" in printed["auc"]
    _no_e_notation(printed["mse"])
    assert "%" not in printed["mse"]  # MSE is in the target's squared units, not a rate
    meta = json.loads((d / "max.json").read_text())["meta"]
    # the sign comes from scikit-learn's scorer object: max_error is a negated loss
    assert meta["metric_info"]["sign"] == get_scorer("neg_max_error")._sign == -1
    assert meta["metric_info"]["label"] == "max error"


def test_need_speaks_the_metric_and_leaves_out_the_vc_comparison(runs):
    d, _ = runs
    text = _ok(run_cli("need", "mse.json", "--error", "3000", "--label-cost", "0.001",
                       "--vc-dim", "10", "--bootstrap", "100", cwd=d)).stdout
    assert "a test MSE of 3,000" in text and "test error" not in text
    assert "expected test MSE after buying more labels" in text
    assert "at 0.0010 per label" in text and "0.00 per label" not in text
    assert VC_REASON in text and "this curve measures MSE" in text
    assert "rule of thumb" not in text and "worst case" not in text
    _no_e_notation(text)
    doc = json.loads(_ok(run_cli("need", "mse.json", "--error", "3000", "--label-cost", "0.001",
                                 "--vc-dim", "10", "--bootstrap", "100", "--json", cwd=d)).stdout)
    assert doc["answer"]["target"] == 3000.0  # raw numbers in JSON
    assert doc["vc"]["applies"] is False and "0-1 loss" in doc["vc"]["reason"]
    assert all(isinstance(r["test_error"], float) for r in doc["plan"])


def test_other_scorers_are_labelled_and_have_no_vc_sections(runs):
    d, _ = runs
    auc = _ok(run_cli("need", "auc.json", "--error", "0.01", "--vc-dim", "31",
                      "--bootstrap", "100", cwd=d)).stdout
    assert "1 − ROC AUC" in auc and "this curve measures 1 − ROC AUC" in auc
    _no_e_notation(auc)
    big = _ok(run_cli("need", "max.json", "--error", "100", "--bootstrap", "100", cwd=d)).stdout
    assert "test max error" in big and "test error" not in big
    _no_e_notation(big)


def test_capacity_gives_parameters_for_squared_error_and_nothing_for_other_losses(runs):
    d, _ = runs
    # --out writes the document --json prints (one run for the text and the JSON)
    text = _ok(run_cli("capacity", "mse.json", "--bootstrap", "100", "--out", "cap-mse.json",
                       cwd=d)).stdout
    assert "VC units" not in text and "2·σ²·p/n" in text
    assert "Hastie, Tibshirani & Friedman" in text
    _no_e_notation(text)
    doc = json.loads((d / "cap-mse.json").read_text())
    assert doc["method"] == "optimism"
    other = _ok(run_cli("capacity", "max.json", "--bootstrap", "100", cwd=d)).stdout
    assert other.startswith("No capacity figure for max error") and "0-1 loss" in other


def test_report_speaks_the_metric_without_vc_sections(runs):
    d, _ = runs
    _ok(run_cli("report", "mse.json", "--target-error", "3000", "--bootstrap", "100",
                "--out", "mse.html", "--quiet", cwd=d))
    text = _page_text(d / "mse.html")
    assert "a test MSE of 3,000" in text
    assert VC_REASON in text and "VC bound (d" not in text
    assert "effective VC dimension" not in text and "optimism of squared error" in text
    _no_e_notation(text)
    assert not (d / "mse_files" / "worst-case.png").exists()


def test_a_plain_curve_table_names_its_loss_in_a_metric_column(runs):
    # the points of the measured diabetes run, as a table measured elsewhere
    import pandas as pd

    d, _ = runs
    points = pd.DataFrame(json.loads((d / "mse.json").read_text())["points"])
    table = points[["size", "repeat", "test_error", "train_error"]].assign(metric="mse")
    table.to_csv(d / "plain.csv", index=False)
    text = _ok(run_cli("need", "plain.csv", "--error", "3000", "--bootstrap", "100", cwd=d)).stdout
    assert "a test MSE of 3,000" in text
    _no_e_notation(text)
    table.assign(metric=["mse", "mae"] * (len(table) // 2) + ["mse"] * (len(table) % 2)).to_csv(
        d / "mixed.csv", index=False)
    # without the column, values above 1 cannot be 0-1 rates: a loss in its own units
    table.drop(columns="metric").to_csv(d / "bare.csv", index=False)
    bare = _ok(run_cli("need", "bare.csv", "--error", "3000", "--bootstrap", "100", cwd=d)).stdout
    assert "a test loss of 3,000" in bare and not re.search(r"\d%", bare.replace("90%", ""))
    bad = run_cli("need", "mixed.csv", "--error", "3000", cwd=d)
    assert bad.returncode == 2 and "one loss name" in bad.stderr and "Traceback" not in bad.stderr
