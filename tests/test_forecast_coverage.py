"""Coverage of forecast intervals on simulated curves with a known truth.

Fast versions of the two simulations of scripts/bench_forecast.py --simulate (the full
ones run 150 and 40 data sets there). Each check states what the intervals covered
before the averaged forecast and the fresh-data-set variance (the issue's measurements,
150 / 40 data sets) and what they cover now; the bands asserted are ones a 90% interval
meets with room for the few data sets here and the old code did not (too narrow first,
then too wide for the known law).
"""

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import ndtr

import curvefit as cf

LEVEL = 0.9
SIZES = sorted({int(round(s)) for s in np.geomspace(50, 2000, 8)})
REPEATS = 5
N_TEST = 1000


# Every repeat of simulation (i) draws its test rows afresh from an unlimited population
# (and its training set adds no variance): said as a run says it, a pool far beyond the
# sizes, so the repeats share no rows (scripts/bench_forecast.py: LAW_META).
INDEPENDENT_DRAWS = {"n_pool": 10 ** 12, "n_test": N_TEST}


def law(n):
    # the known law of simulation (i): 0.05 + 2·n^−0.5 (a power law with a floor)
    return 0.05 + 2.0 * np.asarray(n, dtype=float) ** -0.5


def _fit(curve, seed, bootstrap=80):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return cf.fit_curve(curve, bootstrap=bootstrap, random_state=seed)


def _covers(low, high, value):
    return bool(low <= value <= high)


@pytest.fixture(scope="module")
def law_runs():
    """Simulation (i), 30 data sets: binomial test noise on 1,000 rows, 5 repeats."""
    rng = np.random.default_rng(2024)
    n_max = float(max(SIZES))
    rows = []
    for d in range(30):
        sizes = np.repeat(SIZES, REPEATS)
        errors = rng.binomial(N_TEST, law(sizes)) / N_TEST
        curve = cf.Curve.from_table(pd.DataFrame({
            "size": sizes, "repeat": np.tile(np.arange(REPEATS), len(SIZES)),
            "test_error": errors, "n_test": N_TEST}), meta=INDEPENDENT_DRAWS)
        fit = _fit(curve, d, bootstrap=40)
        far = np.array([2, 10, 40]) * n_max
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")    # 40× is flagged as a long extrapolation
            band = fit.predict(far, interval=LEVEL)
        need = fit.samples_for(test_error=float(law(10 * n_max)), interval=LEVEL)
        row = {f"cov_{k}x": _covers(lo, hi, law(k * n_max))
               for k, lo, hi in zip((2, 10, 40), band["low"], band["high"])}
        row.update({f"above_{k}x": bool(law(k * n_max) > hi)
                    for k, hi in zip((2, 10, 40), band["high"])})
        row.update(need_cov=_covers(need.low, need.high, 10 * n_max), ratio=need.n / (10 * n_max))
        rows.append(row)
    return pd.DataFrame(rows)


def test_law_bands_cover_the_true_curve(law_runs):
    # before: 90% at 2×, 70% at 10× and 40× on these 30 data sets (77% in all; 15 of the
    # 21 misses too optimistic; the issue measured 86/79/81% on 150). Then the averaged
    # forecast, the model error and the fresh-data variance: 100/97/93% (97% in all), too
    # wide, with the model error floored point by point and the binomial noise counted
    # as shared; now 93/90/87% (90% in all; 3 of the 9 misses too optimistic)
    cover = law_runs[["cov_2x", "cov_10x", "cov_40x"]].to_numpy()
    misses_above = law_runs[["above_2x", "above_10x", "above_40x"]].to_numpy().sum()
    assert 0.85 <= cover.mean() <= 0.95, (cover.mean(axis=0), misses_above)
    assert misses_above <= max(1, 0.75 * (~cover).sum())   # misses no longer one-sided


def test_law_samples_needed_cover_the_true_size(law_runs):
    # before: the interval of the samples needed for the error at 10× covered the true n
    # (20,000) in 70% of these data sets; now in ≥ 85% (90%). The point answer stays within a
    # factor 2 of it in the median (0.82 now, 0.73 before: the flat end of the curve
    # makes it sensitive; the interval is what carries the uncertainty)
    assert law_runs["need_cov"].mean() >= 0.85, law_runs["need_cov"].mean()
    assert 0.5 <= float(np.nanmedian(law_runs["ratio"])) <= 2.0


# -- (ii) logistic regression through the real runner, exact true error
BETA = np.array([1.5, -1.0, 0.75, 0.5, -0.5])
FLIP = 0.10
_DU = 20.0 / 4000
_U = -10.0 + _DU * (np.arange(4000) + 0.5)
_PHI_DU = np.exp(-0.5 * _U ** 2) / math.sqrt(2 * math.pi) * _DU


def _generate(n, rng):
    X = rng.standard_normal((n, len(BETA)))
    u = X @ BETA / np.linalg.norm(BETA)
    y = (rng.random(n) < np.where(u > 0, 1 - FLIP, FLIP)).astype(int)
    return X, y


def _exact_error(w, b):
    """Exact 0-1 error of the rule 1[w·x + b > 0] on the generator: with u = β·x/|β| and
    w·x = |w|(ρu + √(1 − ρ²)z), P(rule says 1 | u) = Φ((|w|ρu + b)/(|w|√(1 − ρ²)))."""
    wn = float(np.linalg.norm(w))
    rho = float(w @ (BETA / np.linalg.norm(BETA))) / wn
    p1 = ndtr((wn * rho * _U + b) / (wn * math.sqrt(max(1 - rho ** 2, 1e-24))))
    q = np.where(_U > 0, 1 - FLIP, FLIP)
    return float(np.sum(_PHI_DU * (p1 * (1 - q) + (1 - p1) * q)))


def _true_curve(n, draws, rng):
    from sklearn.linear_model import LogisticRegression

    errs = []
    for _ in range(draws):
        X, y = _generate(int(n), rng)
        m = LogisticRegression(max_iter=1000).fit(X, y)
        errs.append(_exact_error(m.coef_[0], m.intercept_[0]))
    return float(np.mean(errs))


@pytest.fixture(scope="module")
def runner_runs():
    """Simulation (ii), 8 data sets: logistic regression measured by cf.measure on
    x ~ N(0, I₅), y = 1[β·x > 0] with 10% of labels flipped; pool 2,000, 1,000 test rows."""
    from sklearn.linear_model import LogisticRegression

    n_max = float(max(SIZES))
    rng = np.random.default_rng(7)
    truth = _true_curve(2 * n_max, 20, rng)
    rows = []
    for d in range(8):
        X, y = _generate(int(n_max) + N_TEST, rng)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            curve = cf.measure(LogisticRegression(max_iter=1000), X, y, sizes=SIZES,
                               repeats=REPEATS, test_size=N_TEST, random_state=d, n_jobs=1)
        fit = _fit(curve, d)
        e = fit.error_at(2 * n_max, interval=LEVEL)
        rows.append({"cov_2x": _covers(e.low, e.high, truth), "estimate": e.estimate,
                     "low": e.low, "high": e.high, "truth": truth})
    return pd.DataFrame(rows)


def test_runner_bands_cover_the_true_error(runner_runs):
    # before: 3 of these 8 data sets (65% of 40 in the benchmark; the spread across data
    # sets was 1.25–1.87× the reported standard error); the band now carries the variance
    # a fresh data set brings: 7 of 8
    assert runner_runs["cov_2x"].sum() >= 7, runner_runs
    # the true error at 2× lies near 0.11 (scripts/bench_forecast.py --simulate: 0.1098
    # from 100 training samples per size); the check above used 20
    assert runner_runs["truth"].iloc[0] == pytest.approx(0.1098, abs=0.003)


def test_a_separate_test_set_counts_as_shared_by_every_repeat():
    from curvefit.fitting.data import dataset_variance, split_sizes
    from curvefit.measuring.splits import GivenTestSplit, RandomSplit

    # the engine reads the split as the runner describes it: with one given test set
    # every repeat scores the same rows, so all of its binomial noise is shared (τ = 1;
    # docs/references.md#fresh-data-variance); the name once differed ("given"), and such runs
    # were read as re-drawing their test rows
    sizes = np.array([100.0, 300.0])
    given = split_sizes({"n_pool": 300, "n_test": 100,
                         "split": GivenTestSplit(n_test=100).describe()}, [], sizes)
    drawn = split_sizes({"n_pool": 300, "n_test": 100,
                         "split": RandomSplit(test_size=100).describe()}, [], sizes)
    assert given["fixed_test"] and not drawn["fixed_test"]
    args = (sizes, np.array([0.01, 0.01]), np.array([0.2, 0.1]), np.array([5, 5]), "test", "error")
    v_given, _ = dataset_variance(*args, given)
    v_drawn, _ = dataset_variance(*args, drawn)
    # the whole binomial variance e(1 − e)/n_test of the largest size is shared
    assert v_given[-1] >= 0.1 * 0.9 / 100 - 1e-12
    assert np.all(v_given > v_drawn)


def test_wild_smallest_sizes_do_not_steer_the_fresh_data_variance():
    from scipy.stats import theilslopes

    from curvefit.core.stats import theil_sen
    from curvefit.fitting.data import dataset_variance

    # the spread across 5 repeats of a least-squares regression's MSE on scikit-learn's
    # diabetes table (curvefit measure, LinearRegression, 5 repeats): at 10 and 15 rows
    # the model is barely determined and the spread is 50–200× the rest
    sizes = np.array([10, 15, 22, 32, 47, 70, 103, 152, 224, 331], dtype=float)
    sd = np.array([53706, 19988, 1316, 916, 427, 413, 421, 324, 288, 282], dtype=float)
    x, y = np.log(sizes), np.log(sd ** 2)
    ref = theilslopes(y, x, method="joint")         # reference library
    assert theil_sen(x, y) == pytest.approx((ref.slope, ref.intercept))
    rows = {"pool": 331.0, "n_test": 111.0, "n_rows": 442.0, "fixed_test": False, "known": True}
    v, _ = dataset_variance(sizes, sd / math.sqrt(5), np.full(10, 3000.0), np.full(10, 5),
                            "test", "mse", rows)
    # the shared part at the largest size follows the spread measured there (282), not a
    # least-squares line pulled down by the first two sizes (which gave 104 there)
    rho = 331 / 442
    implied = math.sqrt(v[-1] * (1 - rho) / rho)
    assert 150 < implied < 400
