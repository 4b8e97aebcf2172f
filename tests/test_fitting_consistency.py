"""Samples needed answered from the same forecast that ``predict`` prints.

The curve is a stored corpus curve (corpus/curves/fair.csv.gz: Gaussian naive Bayes on
statsmodels' ``fair`` table, measured by curvefit's runner; see corpus/README.md), cut at
1/4 of its pool as scripts/bench_forecast.py cuts it. Its chosen family levels off at
about 30.1%, while the full curve went on to 29.5% at the pool (4× the fitted sizes) and
the averaged forecast keeps falling.
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import pandas as pd
import pytest

import curvefit as cf

CURVE = Path(__file__).resolve().parents[1] / "corpus" / "curves" / "fair.csv.gz"


@pytest.fixture(scope="module")
def cut_curve():
    rows = pd.read_csv(CURVE)
    rows = rows[(rows["model"] == "naive_bayes") & (rows["status"] == "ok")]
    means = rows.groupby("size")["test_error"].mean()
    pool = float(rows["pool"].iloc[0])
    sizes = means.index.to_numpy(float)
    n_fit = float(sizes[sizes <= pool / 4].max())
    table = rows.loc[rows["size"] <= n_fit, ["size", "repeat", "train_error", "test_error", "n_test"]]
    curve = cf.Curve.from_table(table.reset_index(drop=True),
                                meta={"metric": "error", "n_pool": int(pool),
                                      "n_test": int(rows["n_test"].median())})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = cf.fit_curve(curve, bootstrap=100, random_state=0)
    return fit, float(means.loc[pool])


def test_a_target_the_averaged_forecast_reaches_is_answered(cut_curve):
    fit, at_pool = cut_curve
    asym = fit.asymptote()
    # the full curve fell below the chosen family's floor estimate by the pool; a target
    # below that floor, which the forecast that predict prints reaches within 100×, is
    # answered
    assert asym is not None and at_pool < asym.estimate
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        far = fit.predict([100 * fit.largest_size])["estimate"].iloc[0]
    assert far < asym.estimate
    target = 0.5 * (far + asym.estimate)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = fit.samples_for(test_error=target)
    assert s.reachable and math.isfinite(s.n) and fit.largest_size < s.n <= 100 * fit.largest_size
    assert s.low <= s.n <= s.high
    # the answer is where the printed forecast reaches the target
    assert fit.predict([s.n])["estimate"].iloc[0] <= target + 1e-9
    assert fit.predict([0.97 * s.n])["estimate"].iloc[0] > target
    assert f"the chosen family {fit.best} levels off at about" in s.message


def test_a_target_below_the_floor_that_the_forecast_misses_stays_unreachable(cut_curve):
    fit, _ = cut_curve
    asym = fit.asymptote()
    s = fit.samples_for(test_error=0.5 * asym.low)
    assert not s.reachable and math.isinf(s.n)
    assert "not reachable by more data with this model" in s.message
