"""Bootstrap of the chosen family: parameter replicates and their percentile intervals."""

from __future__ import annotations

import math
import warnings

import numpy as np

from curvefit.core.stats import sem
from curvefit.fitting.data import SEM_FLOOR_FRACTION, FitData
from curvefit.fitting.least_squares import FamilyFit, Target, batch_lm, predict_natural, solve_least_squares

# Bootstrap of the chosen family: "student" (parametric, Student-t noise of each mean;
# the default) or "resample" (repeats resampled within each size, the plain bootstrap,
# too narrow with 2–5 repeats; kept to measure the difference).
BOOTSTRAP_KIND = "student"


def bootstrap_parameters(chosen: FamilyFit, data: FitData, B: int, rng: np.random.Generator,
                         draws=None):
    """Parameter replicates of the chosen family from a parametric bootstrap of the means.

    Each size's mean is redrawn as mean + s·t, t from Student's t with k − 1 degrees of
    freedom (k repeats at that size) and s its standard error, floored at
    ``SEM_FLOOR_FRACTION`` × the median one as for the weights. Resampling 2–5 repeats
    within a size (the plain bootstrap) shrinks the variance by (k − 1)/k and ignores
    that s itself is estimated from k − 1 degrees of freedom; with 3 repeats its 90%
    intervals of a single mean are about half as wide as Student's. Sizes with a single
    repeat get a normal perturbation with the pooled standard error (or, with no
    repeats at all, the residual scale of the fit). ``draws`` are redrawn means from
    :func:`redrawn_means` to share between families (the averaged forecast refits every
    family it averages on the same draws); by default they are drawn here.

    References
    ----------
    .. [1] B. Efron and R. Tibshirani, "An Introduction to the Bootstrap", Chapman &
           Hall, 1993, ch. 6 and 9 (parametric bootstrap; the plain bootstrap's
           (n − 1)/n variance bias in small samples).
    .. [2] "Student", "The probable error of a mean", Biometrika 6(1), 1908.
    """
    fam = chosen.family
    T, R, Y = redrawn_means(chosen, data, B, rng) if draws is None else draws
    out = np.full((B, fam.n_params), math.nan)
    if fam.baseline:
        out[:, 0] = Y[:, -1]
        return out
    lo, hi = fam.bounds(signed=(data.sign < 0 or bool(np.nanmin(data.y) < 0)) and not fam.joint)
    start = np.clip(chosen.theta, lo, hi)
    if fam.joint:
        wt, wr = data.w_test, data.w_train
        tgt = Target(fam, data.sizes, T, wt / wt.mean(), R, wr / np.nanmean(wr))
    else:
        tgt = Target(fam, data.sizes, data.sign * Y, data.w / data.w.mean())
    ok_rows = np.all(np.isfinite(tgt.z), axis=1)
    tgt.z = np.where(np.isfinite(tgt.z), tgt.z, 0.0)
    th, cost, settled = batch_lm(tgt, np.repeat(start[None, :], B, axis=0), lo, hi, iters=40)
    # the few replicates the batched steps did not settle are finished by least_squares
    for b in np.nonzero(~settled & ok_rows)[0][: max(10, B // 5)]:
        res = solve_least_squares(tgt.row(b), [th[b]], lo, hi, max_nfev=60)
        if res is not None and res.cost <= cost[b]:
            th[b], cost[b] = res.x, res.cost
    good = ok_rows & np.isfinite(cost) & np.all(np.isfinite(th), axis=1)
    out[good] = th[good]
    return out


def redrawn_means(chosen: FamilyFit, data: FitData, B: int, rng: np.random.Generator):
    """``(T, R, Y)``: B redrawn per-size means of test error, train error and the fitted
    quantity, each (B, m); ``chosen`` gives the residual scale when no size has repeats."""
    m = data.m
    T = np.empty((B, m))
    R = np.empty((B, m))
    sems = np.array([sem(c[:, 0]) for c in data.cells])
    if data.on != "test":
        sems = data.sem
    pooled = float(np.nanmedian(sems)) if np.isfinite(sems).any() else math.nan
    fam, on, sign = chosen.family, data.on, data.sign
    if not math.isfinite(pooled):
        pred = predict_natural(fam, chosen.theta, data.sizes, on, sign)
        dof = m - fam.n_params
        pooled = float(np.sqrt(np.sum((pred - data.y) ** 2) / dof)) if dof > 0 else 0.0
    floor = SEM_FLOOR_FRACTION * pooled if math.isfinite(pooled) else 0.0
    gap_noise = np.zeros((B, m))

    def draw(k, scale):
        # Student-t draws, clipped far out in the tails so one replicate cannot derail a refit
        return scale * np.clip(rng.standard_t(k - 1, size=B), -20.0, 20.0)

    for j, c in enumerate(data.cells):
        k = len(c)
        if k >= 2 and BOOTSTRAP_KIND == "resample":
            # the plain bootstrap, kept for comparison (scripts/bench_extrapolation.py)
            idx = rng.integers(0, k, size=(B, k))
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                T[:, j] = c[idx, 0].mean(axis=1)
                R[:, j] = np.nanmean(c[idx, 1], axis=1)
                gap_noise[:, j] = (c[idx, 0] - c[idx, 1]).mean(axis=1) - data.y[j] \
                    if on == "gap" else 0.0
        elif k >= 2:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                st, sr = sem(c[:, 0]), sem(c[:, 1])
                kr = int(np.isfinite(c[:, 1]).sum())
                T[:, j] = np.mean(c[:, 0]) + draw(k, max(st, floor) if math.isfinite(st) else floor)
                R[:, j] = (np.nanmean(c[:, 1]) + draw(max(kr, 2), max(sr, floor))
                           if math.isfinite(sr) else np.nanmean(c[:, 1]) + 0.0 * T[:, j])
                if on == "gap":
                    sg = sem(c[:, 0] - c[:, 1])
                    gap_noise[:, j] = draw(k, max(sg, floor)) if math.isfinite(sg) else 0.0
        else:
            noise = rng.normal(0.0, pooled, size=B) if pooled > 0 else np.zeros(B)
            T[:, j] = c[0, 0] + (noise if on == "test" else 0.0)
            R[:, j] = c[0, 1] - (noise if on != "test" else 0.0)
            if on == "gap":
                gap_noise[:, j] = noise
    if on == "gap":
        # the gap's own standard error carries the correlation of test and train
        Y = data.y[None, :] + gap_noise
    else:
        Y = {"test": T, "train": R}[on]
    return T, R, Y


def quantile_levels(level: float):
    """The lower and upper quantile levels of a two-sided interval at ``level``."""
    return [(1 - level) / 2, (1 + level) / 2]


def percentile_interval(values, level: float):
    """Percentile interval of the finite replicates (NaN ends with fewer than two).

    Examples
    --------
    >>> percentile_interval(np.arange(101.0), 0.5)
    (25.0, 75.0)
    """
    if values is None:
        return math.nan, math.nan
    v = np.asarray(values, dtype=float)
    v = v[~np.isnan(v)]
    if len(v) < 2:
        return math.nan, math.nan
    lo, hi = np.quantile(v, quantile_levels(level))
    return float(lo), float(hi)


def interval_around(values, level: float, estimate: float):
    """``(low, high, widened)``: the percentile interval of the replicates, widened to
    reach ``estimate`` when the estimate lies outside it (``widened`` is then True).

    A parameter pinned near a bound of its family, or a skewed bootstrap distribution,
    can leave the full-data estimate outside the percentiles of its refits; an interval
    printed beside an estimate must contain it, and widening only raises its coverage.

    Examples
    --------
    >>> interval_around(np.zeros(50), 0.9, 4.4e-12)
    (0.0, 4.4e-12, True)
    >>> interval_around(np.arange(101.0), 0.5, 50.0)
    (25.0, 75.0, False)
    """
    lo, hi = percentile_interval(values, level)
    if not (math.isfinite(lo) and math.isfinite(hi) and math.isfinite(estimate)):
        return lo, hi, False
    widened = estimate < lo or estimate > hi
    return min(lo, estimate), max(hi, estimate), bool(widened)
