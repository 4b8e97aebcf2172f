"""`curvefit bound ...` through the real command line."""

import json
import math

import pytest
from scipy import stats

from conftest import run_cli


def _json(proc):
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)  # stdout holds nothing but the JSON document


def test_samples_single_value_json_and_text():
    # Worked example of the VC sample-complexity bound (docs/references.md
    # #vc-sample-size-worked-example): d_vc = 3, eps = delta = 0.1 -> exact root 29,299.4;
    # first fixed-point step from N = 1,000 about 21,000. Rule of thumb 10 x d_vc
    # (docs/references.md#rule-of-thumb).
    row = _json(run_cli("bound", "samples", "--vc-dim", "3", "--eps", "0.1", "--delta", "0.1",
                        "--trace", "--json"))
    assert row["n_samples"] == 29300
    assert row["root"] == pytest.approx(29299.4, abs=0.05)
    assert row["rule_of_thumb"] == 30
    assert row["iterates"][0] == 1000
    assert row["iterates"][1] == pytest.approx(21000, rel=0.02)
    assert {"vc_dim", "eps", "delta"} <= row.keys()


def test_samples_list_makes_a_table():
    # docs/references.md#vc-sample-size-check-values: d = 4, 5 at eps = delta = 0.1
    # -> 38,997.2 and 48,915.1.
    text = run_cli("bound", "samples", "--vc-dim", "3,4,5", "--eps", "0.1", "--delta", "0.1")
    assert text.returncode == 0, text.stderr
    rows = [ln.split() for ln in text.stdout.splitlines() if ln.split()[:1] in (["3"], ["4"], ["5"])]
    assert [r[3] for r in rows] == ["29,300", "38,998", "48,916"]
    assert [r[5] for r in rows] == ["30", "40", "50"]  # 10 x d rule of thumb beside it
    assert "worst-case" in text.stdout.lower() and "rule of thumb" in text.stdout.lower()
    assert text.stderr == ""


def test_error_bar_values():
    # Worked example (docs/references.md#vc-error-bar): d_vc = 1, delta = 0.1 -> 0.848 at N = 100,
    # 0.301 at N = 1,000.
    rows = _json(run_cli("bound", "error-bar", "--n", "100,1000", "--vc-dim", "1",
                         "--delta", "0.1", "--json"))
    assert [r["n"] for r in rows] == [100, 1000]
    assert rows[0]["error_bar"] == pytest.approx(0.848, abs=5e-4)
    assert rows[1]["error_bar"] == pytest.approx(0.301, abs=5e-4)
    text = run_cli("bound", "error-bar", "--n", "100:10000:3", "--vc-dim", "1", "--delta", "0.1")
    assert text.returncode == 0, text.stderr
    firsts = [ln.split()[0] for ln in text.stdout.splitlines() if ln.strip()]
    assert {"100", "1,000", "10,000"} <= set(firsts)  # one row per size of the range
    assert "0.8482" in text.stdout and "worst-case" in text.stdout.lower()


def test_test_error_bar_hoeffding_and_exact():
    # Hoeffding 1963, computed: L = 1,000, delta = 0.05 -> 0.04295. Exact interval against
    # the reference library scipy.stats.binomtest(...).proportion_ci(method="exact").
    row = _json(run_cli("bound", "test-error-bar", "--n-test", "1000", "--delta", "0.05",
                        "--errors", "20", "--json"))
    assert row["error_bar"] == pytest.approx(0.04295, abs=5e-6)
    ref = stats.binomtest(20, 1000).proportion_ci(method="exact")
    assert row["low"] == pytest.approx(ref.low) and row["high"] == pytest.approx(ref.high)
    assert row["test_error"] == pytest.approx(0.02)
    text = run_cli("bound", "test-error-bar", "--n-test", "100,1000")
    assert text.returncode == 0 and "0.04295" in text.stdout
    assert "worst-case" in text.stdout.lower()


def test_test_samples_hoeffding_exact_and_relative():
    # Hoeffding 1963, computed: ceil(ln(40) / (2 * 0.05^2)) = 738. Guyon et al. 1998 (IEEE
    # TPAMI 20(1)) abstract: about 10,000 test points at a 1% error for 20% relative error.
    text = run_cli("bound", "test-samples", "--eps", "0.05")
    assert text.returncode == 0 and "738" in text.stdout and "worst-case" in text.stdout.lower()
    rows = _json(run_cli("bound", "test-samples", "--eps", "0.01", "--delta", "0.05",
                         "--expected-error", "0,0.01", "--json"))
    # Clopper-Pearson at zero errors: ceil(ln(0.025)/ln(0.99)) (derived closed form)
    assert rows[0]["n_samples"] == math.ceil(math.log(0.025) / math.log(0.99))
    assert rows[0]["n_samples_relative"] is None
    assert rows[1]["method"] == "exact"
    assert rows[1]["n_samples"] < rows[1]["n_samples_hoeffding"] == 18445
    assert rows[1]["n_samples_relative"] == pytest.approx(10_000, rel=0.06)


@pytest.mark.parametrize("args", [
    ["samples", "--vc-dim", "3", "--eps", "0", "--delta", "0.1"],
    ["samples", "--vc-dim", "3", "--eps", "0.1", "--delta", "1"],
    ["samples", "--vc-dim", "-2", "--eps", "0.1"],
    ["samples", "--vc-dim", "2.5", "--eps", "0.1"],
    ["error-bar", "--n", "0", "--vc-dim", "1"],
    ["test-error-bar", "--n-test", "100", "--errors", "101"],
    ["test-samples", "--eps", "abc"],
])
def test_bad_input_is_one_line_and_exit_2(args):
    proc = run_cli("bound", *args)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert "Traceback" not in proc.stderr
    assert proc.stdout == ""


def test_vacuous_bars_are_marked_in_text_and_json():
    # one test point at delta 0.05: sqrt(ln 40 / 2) = 1.358 (docs/references.md#hoeffding-test-set)
    text = run_cli("bound", "test-error-bar", "--n-test", "1,100")
    assert text.returncode == 0, text.stderr
    assert "1.358 (vacuous)" in text.stdout and "0.1358 (vacuous)" not in text.stdout
    rows = _json(run_cli("bound", "test-error-bar", "--n-test", "1,100", "--json"))
    assert [r["vacuous"] for r in rows] == [True, False]


def test_huge_vc_dimension_with_sauer_finishes():
    # The issue: Sauer growth with a huge --vc-dim ran out of memory.
    row = _json(run_cli("bound", "samples", "--vc-dim", "1000000000000", "--eps", "0.1",
                        "--growth", "sauer", "--json"))
    assert row["n_samples"] > 10 ** 15
    bar = _json(run_cli("bound", "error-bar", "--n", "100", "--vc-dim", "1000000000000",
                        "--growth", "sauer", "--json"))
    assert bar["vacuous"] is True
