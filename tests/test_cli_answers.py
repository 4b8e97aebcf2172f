"""`curvefit need` answers through the real command line: curves that dip below the target
and rise again, and answers beyond the horizon.

The curves are constructed tables shaped like the cases a new user met (a gradient-boosted
regressor whose gap dipped below 500 at 30 labels and was 1,061 at 1,620; a classifier
whose error dipped below 7% at 40 labels and was 7.5% at 1,090); the checks are the rule
itself: an answer inside the measured range agrees with every measured mean beyond it.
"""

import json
import math
import re

import numpy as np
import pandas as pd
import pytest

from conftest import run_cli
from curvefit.core.curve import Curve


def _table(sizes, means, sd, train=None, repeats=5, seed=0):
    rng = np.random.default_rng(seed)
    rows = []
    for s, m in zip(sizes, means):
        for r in range(repeats):
            row = {"size": s, "repeat": r, "test_error": m + sd * rng.standard_normal()}
            if train is not None:
                row["train_error"] = train + 0.5 * sd * rng.standard_normal()
            rows.append(row)
    return pd.DataFrame(rows)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("answers")
    # a classifier: 6.8% at 40 labels, then 7.2–8.5% up to 1,090 (the reported case)
    dip = _table([20, 40, 80, 150, 290, 560, 1090],
                 [0.12, 0.068, 0.085, 0.078, 0.072, 0.074, 0.075], 0.002, train=0.0)
    dip.to_csv(d / "dip.csv", index=False)
    # a regressor (MSE): the gap is 450 at 30 labels, then 900–1,400, 1,061 at 1,620
    gap = _table([30, 60, 120, 240, 450, 850, 1620],
                 np.array([450.0, 900, 1400, 1250, 1150, 1100, 1061]) + 2000, 20.0, train=2000.0)
    Curve.from_table(gap, meta={"metric": "mse"}).write(d / "gap.json")
    # dips below 10% at 100 labels, rises to 11% at 400 and stays below 10% from 800 on
    back = _table([50, 100, 200, 400, 800, 1600, 3200],
                  [0.2, 0.095, 0.105, 0.11, 0.095, 0.09, 0.088], 0.001)
    back.to_csv(d / "back.csv", index=False)
    # a slow power law without a floor, 2·n^−0.3: 3% needs about 1.2 million samples
    sizes = np.unique(np.geomspace(50, 2000, 8).round().astype(int))
    _table(sizes, 2 * sizes ** -0.3, 0.002).to_csv(d / "far.csv", index=False)
    return d


def _need(path, *args):
    r = run_cli("need", path, *args, "--bootstrap", "60", "--json")
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)["answer"]


def test_error_dip_below_target_is_not_the_answer(files):
    answer = _need(files / "dip.csv", "--error", "0.07")
    # the means at 80–1,090 are all above 7%: no measured size answers, and the answer
    # lies beyond the largest measured size (or is not reachable at all)
    assert answer["n"] is None or answer["n"] > 1090
    assert not answer["message"].startswith("The measured curve already reaches")
    r = run_cli("need", files / "dip.csv", "--error", "0.07", "--bootstrap", "60")
    assert r.returncode == 0, r.stderr
    first = r.stdout.splitlines()[0]
    assert not first.startswith("The measured curve") and "already enough" not in r.stdout


def test_gap_dip_below_target_is_not_the_answer(files):
    answer = _need(files / "gap.json", "--gap", "500")
    assert answer["kind"] == "gap"
    assert answer["n"] is None or answer["n"] > 1620
    assert not re.search(r"\b30 labelled samples", answer["message"])


def test_measured_answer_comes_after_the_last_rise(files):
    table = pd.read_csv(files / "back.csv")
    means = table.groupby("size")["test_error"].mean()
    answer = _need(files / "back.csv", "--error", "0.1")
    assert answer["message"].startswith("The measured curve already reaches 10.0% test error")
    n = answer["n"]
    assert 400 < n <= 800, n
    assert (means[means.index >= n] <= 0.1).all()    # every measured mean beyond it agrees
    assert answer["low"] <= n <= answer["high"]
    assert (means[means.index >= answer["high"]] <= 0.1).all()


def test_answer_beyond_the_horizon_is_more_than_n(files):
    answer = _need(files / "far.csv", "--error", "0.03")
    assert answer["beyond_horizon"] is True and answer["reachable"] is False
    assert answer["n"] is None and answer["high"] is None          # inf travels as null
    assert answer["horizon"] == pytest.approx(100 * 2000)
    assert "more than 200,000 labelled samples" in answer["message"]
    assert "cannot say how much more" in answer["message"]
    r = run_cli("need", files / "far.csv", "--error", "0.03", "--bootstrap", "60")
    assert r.returncode == 0, r.stderr
    first = r.stdout.splitlines()[0]
    assert "cannot say how much more" in first
    # no count beyond the horizon is printed as a number
    counts = [float(x.replace(",", "")) for x in
              re.findall(r"(\d[\d,]*) labelled samples", r.stdout)]
    assert counts and max(counts) <= 200_000


def test_horizon_can_be_moved_from_python(files):
    fit = __import__("curvefit").fit_curve(pd.read_csv(files / "far.csv"), bootstrap=40)
    near = fit.samples_for(test_error=0.05, horizon=10)
    far = fit.samples_for(test_error=0.05, horizon=1e4)
    assert near.beyond_horizon and near.horizon == pytest.approx(10 * fit.largest_size)
    assert not far.beyond_horizon and math.isfinite(far.n) and far.n > 10 * fit.largest_size
