"""Effective capacity from a measured learning curve: the calibrated gap model.

Past the knee of the curve the expected generalization gap of a learner that fits its
parameters to the data falls as ``gap(n) ≈ c·h/n``: the effective number of parameters
over the sample size (Moody 1992; the same 1/n law as the optimism of Akaike's
criterion). Here h is read in VC units: the constant ``c`` is not free but fixed by a
calibration on learners whose VC dimension is known (unregularised linear classifiers
in R^d, h = d + 1; ``scripts/bench_capacity.py``), and it depends on the measured
training error ν (a noisy problem has a larger gap at the same capacity):
``c(ν) = GAP_C0 + GAP_C1·ν``. With c fixed, each size that lies past the knee
(n ≥ ``MIN_TAU``·h) measures h on its own, so the figure does not move with the design;
sizes before the knee are left out, and when fewer than two sizes remain, or the gaps
are within their noise of zero, no figure is given: the message says which sizes would
pin it.

VC units belong to the 0-1 loss, the loss VC theory bounds. For squared error the same
1/n law is the optimism of the training error, ``gap(n) ≈ 2·σ²·p/n`` with σ² the noise
variance (Hastie, Tibshirani & Friedman, *The Elements of Statistical Learning*, 2nd ed.,
2009, sec. 7.4–7.5, the Cp statistic; docs/references.md#optimism-of-squared-error), so
the figure is an effective number of parameters p, with ``2·σ²`` read at each size as
train + test MSE (twice their mean). For any other loss there is no figure, and the
message says why in one line.
"""

from __future__ import annotations

import math
from statistics import NormalDist

import numpy as np
import pandas as pd

from curvefit.capacity.result import STAT_NOTE, CapacityEstimate, interval_text, lack_of_fit, widen_interval
from curvefit.core.curve import Curve
from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import InputError
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import (
    format_capacity,
    format_count,
    format_error,
    format_number,
    is_zero_one,
    metric_name,
)
from curvefit.core.stats import sem
from curvefit.core.validate import check_count, check_level, check_seed
from curvefit.fitting.data import before_learning

# c(ν) = GAP_C0 + GAP_C1·ν in gap(n) ≈ c(ν)·h/n, fitted to the calibration sweep of
# scripts/bench_capacity.py (logistic regression without penalty, d = 5…50, label noise
# 0–25%, n from 3h to 50h); GAP_C0 is the noise-free value, about 0.4.
GAP_C0 = 0.40
GAP_C1 = 1.6
# Spread of c around c(ν) in that sweep (standard deviation of log c): folded into every
# interval, since a learner on other data can sit anywhere in that spread.
CALIBRATION_SPREAD = 0.22
# The 1/n law holds past the knee: sizes n ≥ MIN_TAU·h are used, smaller ones left out.
MIN_TAU = 3.0
# Recommended design: n from MIN_TAU·h to MAX_TAU·h (beyond, the gap drowns in test noise).
MAX_TAU = 30.0
# Spread (standard deviation of log p) folded into the interval of the squared-error
# figure: the optimism formula is in-sample and 2·σ² is estimated, so p is approximate;
# tests/test_capacity.py checks its coverage on load_diabetes (least squares, p = 11).
OPTIMISM_SPREAD = 0.10
# A figure needs its estimate at least this many standard errors above zero.
MIN_SIGNAL = 2.0

_GAP_NOTE = ("This is the capacity the model uses on this data distribution (an effective "
             "number of parameters in VC units, calibrated on linear classifiers); it can differ "
             "from the probe's distribution-free figure.")
_OPTIMISM_NOTE = ("For squared error the gap is the optimism of the training error, about "
                  "2·σ²·p/n with σ² the noise variance (Hastie, Tibshirani & Friedman, The Elements "
                  "of Statistical Learning, 2nd ed., sec. 7.4–7.5); 2·σ² is read at each size as "
                  "training plus test MSE, and p is an effective number of parameters (the trace "
                  "of the hat matrix for a linear smoother), not a VC dimension: VC theory bounds "
                  "the 0-1 loss. Below about 3·p rows it overstates p.")


def gap_loss(curve: Curve) -> str | None:
    """Which gap law a curve's loss follows: ``"zero_one"`` (c(ν)·h/n, VC units),
    ``"squared"`` (the optimism 2·σ²·p/n of squared error), or None (no figure).

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [10], "test_error": [0.3]}))
    >>> gap_loss(c)
    'zero_one'
    """
    if is_zero_one(curve.metric):
        return "zero_one"
    if curve.metric == "mse" or curve.metric_info.get("scorer") == "neg_mean_squared_error":
        return "squared"
    return None


def loss_constant(loss: str, train_error, gap):
    """c in gap(n) ≈ c·h/n: the calibrated c(ν) for the 0-1 loss; for squared error
    2·σ² ≈ training + test MSE = 2·train + gap (Hastie, Tibshirani & Friedman 2009, eq. 7.21).

    Examples
    --------
    >>> loss_constant("squared", 3000.0, 400.0), round(loss_constant("zero_one", 0.25, 0.1), 2)
    (6400.0, 0.8)
    """
    if loss == "squared":
        return 2.0 * np.asarray(train_error, dtype=float) + np.asarray(gap, dtype=float)
    return gap_constant(train_error)


def gap_constant(train_error):
    """The calibrated constant c(ν) = GAP_C0 + GAP_C1·ν of gap(n) ≈ c(ν)·h/n.

    Examples
    --------
    >>> round(gap_constant(0.0), 2), round(gap_constant(0.25), 2)
    (0.4, 0.8)
    """
    nu = np.clip(np.asarray(train_error, dtype=float), 0.0, 0.5)
    out = GAP_C0 + GAP_C1 * np.nan_to_num(nu, nan=0.0)
    return float(out) if out.ndim == 0 else out


def recommended_sizes(h: float, count: int = 6, *, low: float = MIN_TAU, high: float = MAX_TAU) -> list[int]:
    """Training sizes that pin a capacity near ``h``: ``count`` sizes spread geometrically
    from ``low``·h to ``high``·h (at least 2 rows each).

    Examples
    --------
    >>> recommended_sizes(10.0, 4)
    [30, 65, 139, 300]
    """
    if not (math.isfinite(h) and h > 0):
        raise InputError(f"recommended sizes need a positive capacity, got {h!r}")
    return sorted({max(2, int(round(v))) for v in np.geomspace(low * h, high * h, int(count))})


def _size_range(h: float) -> str:
    sizes = recommended_sizes(h, 2)
    return f"n = {format_count(sizes[0])} and {format_count(sizes[-1])}"


def _gap_groups(curve: Curve) -> tuple[dict, dict]:
    """The measured gaps and training errors per size; an InputError without train error
    or with fewer than 3 sizes."""
    if not curve.has_train:
        raise InputError("the curve has no train_error: the gap model needs train and test "
                         "errors (measure again, or add a train_error column to the table)")
    ok = curve.ok_points()
    pts = ok[ok["train_error"].notna() & ok["test_error"].notna()].copy()
    pts["gap"] = pts["test_error"] - pts["train_error"]
    gaps = {int(s): g["gap"].to_numpy(float) for s, g in pts.groupby("size")}
    trains = {int(s): g["train_error"].to_numpy(float) for s, g in pts.groupby("size")}
    if len(gaps) < 3:
        raise InputError(f"the gap model needs at least 3 sizes with train and test errors, "
                         f"found {len(gaps)}; measure more sizes")
    return gaps, trains


def _sem_floor(gaps: dict) -> float:
    """A floor on the standard errors, so a size with identical repeats (standard error
    ~0) cannot take all the weight."""
    all_sems = [s for s in (sem(g) for g in gaps.values()) if math.isfinite(s)]
    scale = max(float(np.max(np.abs([g.mean() for g in gaps.values()]))), 1e-12)
    return max(0.25 * float(np.median(all_sems)) if all_sems else 0.0, 1e-3 * scale)


def _fit_h(sizes, means, trains, weights, used, loss: str = "zero_one") -> float:
    """Weighted least squares of means ≈ c·h/n over the used sizes (linear in h)."""
    x = loss_constant(loss, trains, means) / sizes
    wx = (weights * x)[used]
    den = float(np.sum(wx * x[used]))
    return float(np.sum(wx * means[used]) / den) if den > 0 else math.nan


def _past_the_knee(sizes, means, trains, weights, loss: str = "zero_one",
                   allowed: np.ndarray | None = None) -> tuple[float, np.ndarray]:
    """h and the sizes used: start from all ``allowed`` sizes (default all), keep
    n ≥ MIN_TAU·h, refit until stable."""
    allowed = np.ones(len(sizes), dtype=bool) if allowed is None else np.asarray(allowed, bool)
    used = allowed.copy()
    h = _fit_h(sizes, means, trains, weights, used, loss)
    for _ in range(20):
        if not (math.isfinite(h) and h > 0):
            break
        new = allowed & (sizes >= MIN_TAU * h)
        if np.array_equal(new, used):
            break
        used = new
        if used.sum() < 2:  # the gap has not reached its 1/n part: no size pins h
            break
        h = _fit_h(sizes, means, trains, weights, used, loss)
    return h, used


def _fit_power(n: np.ndarray, g: np.ndarray, w: np.ndarray) -> float:
    """Exponent b of the weighted log-log line through the positive gaps (descriptive)."""
    pos = (g > 0) & np.isfinite(g)
    if pos.sum() < 2:
        return math.nan
    slope, _ = np.polyfit(np.log(n[pos]), np.log(g[pos]), 1, w=np.sqrt(w[pos]))
    return float(-slope)


def _bootstrap(gaps, trains, sizes, used, floor, bootstrap: int, seed: int, loss: str = "zero_one",
               learned: np.ndarray | None = None):
    """h and b over repeats resampled within each size, with the used sizes held fixed (b
    over the ``learned`` sizes, default all)."""
    learned = np.ones(len(sizes), bool) if learned is None else learned
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), 104729]))
    hs, bs = [], []
    for _ in range(bootstrap):
        m, t, w = [], [], []
        for n in sizes:
            k = rng.integers(0, len(gaps[int(n)]), len(gaps[int(n)]))
            g, v = gaps[int(n)][k], trains[int(n)][k]
            m.append(g.mean())
            t.append(v.mean())
            s = sem(g)
            w.append(1.0 / max(s if math.isfinite(s) else 0.0, floor) ** 2)
        m, t, w = np.array(m), np.array(t), np.array(w)
        hs.append(_fit_h(sizes, m, t, w, used, loss))
        bs.append(_fit_power(sizes[learned], m[learned], w[learned]))
    return np.array(hs, float), np.array(bs, float)


def effective_capacity(curve, *, bootstrap: int = BOOTSTRAP, random_state: int = SEED,
                       interval: float = INTERVAL, probe=None) -> CapacityEstimate:
    """Effective capacity from a measured learning curve's generalization gap.

    Past the knee of the curve the mean gap (test − train error) falls as
    ``gap(n) ≈ c(ν)·h/n``, h being the effective number of parameters (Moody 1992).
    The constant c(ν) = 0.40 + 1.6·ν is fixed by calibration on unregularised linear
    classifiers (VC dimension d + 1) and depends only on the measured training error
    ν, so h is read in VC units and the one unknown is h: a weighted least-squares
    line through the origin of the mean gaps against c(ν)/n (weights 1/sem²), over the
    sizes with n ≥ 3h (sizes before the knee are left out, iteratively).

    The figure is withheld (``status="not_identifiable"``, ``vc_dim`` NaN) when the
    gaps are within two standard errors of zero, and given only as a lower bound
    (``status="above_range"``) when fewer than two sizes lie past the knee; in both
    cases the message names the sizes that would pin it (n from 3h to 30h).

    The interval combines a percentile bootstrap over the repeats within each size
    (widened by √(χ²/dof) when the 1/n law misses the means by more than their
    noise) with the spread of c in the calibration, on the log scale. The regime
    (realizable or noisy) is named only when the training error clearly separates it
    from the gap.

    Parameters
    ----------
    curve : Curve
        A measured curve with train_error (at least 3 sizes, ideally ≥ 3 repeats each)
        in misclassification error (the calibration's loss).
    bootstrap : int
        Bootstrap replicates.
    random_state : int
        Seed of the bootstrap.
    interval : float
        Interval level.
    probe : CapacityEstimate, optional
        A probe result of the same learner; its distribution-free figure is shown
        beside the gap figure (``extra["probe"]`` and a note).

    Returns
    -------
    CapacityEstimate
        ``method="gap"``; ``extra["gap_constant"]`` = c(ν) at the sizes used (``scale``
        is None: the model has no free scale), ``exponent`` the descriptive log-log slope
        b of the gap, ``regime`` and ``status`` set; ``design["gap_fit"]`` is c(ν)·h/n
        at the sizes used.

    References
    ----------
    .. [1] J. E. Moody, "The effective number of parameters: an analysis of
       generalization and regularization in nonlinear learning systems", NIPS 4, 1992.
    .. [2] H. Akaike, "A new look at the statistical model identification", IEEE Trans.
       Automatic Control 19(6), 1974 (the optimism of the training loss is k/n).
    .. [3] V. Vapnik, "Statistical Learning Theory", Wiley, 1998 (VC dimension d + 1 of
       linear classifiers in R^d).

    Examples
    --------
    >>> import pandas as pd
    >>> rows = [{"size": n, "repeat": r, "train_error": 0.0,
    ...          "test_error": 0.4 * 20 / n * (1 + 0.05 * (r - 1))}
    ...         for n in [60, 120, 240, 480, 960] for r in range(3)]
    >>> est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=50)
    >>> round(est.vc_dim, 1), est.status
    (20.0, 'ok')
    """
    if not isinstance(curve, Curve):
        raise InputError("effective_capacity needs a Curve (curvefit.Curve.read(path) or "
                         "Curve.from_table(df))")
    level = check_level(interval)
    bootstrap = check_count(bootstrap, "bootstrap", minimum=0)
    seed = check_seed(random_state)
    seed = 0 if seed is None else seed
    gaps, trains = _gap_groups(curve)
    loss = gap_loss(curve)
    sizes = np.array(sorted(gaps), dtype=float)
    means = np.array([gaps[int(n)].mean() for n in sizes])
    sems = np.array([sem(gaps[int(n)]) for n in sizes])
    nus = np.array([trains[int(n)].mean() for n in sizes])
    reps = [len(gaps[int(n)]) for n in sizes]
    floor = _sem_floor(gaps)
    floored = np.maximum(np.where(np.isfinite(sems), sems, 0.0), floor)
    weights = 1.0 / floored ** 2
    if loss is None:
        return _no_figure(curve, sizes, means, sems, nus, reps, level, seed, probe)
    # sizes at which the model predicted as the constant predictor does carry no gap of
    # the fitted class: left out like sizes before the knee (fitting.data.before_learning)
    flat = np.isin(sizes, before_learning(curve))
    h, used = _past_the_knee(sizes, means, nus, weights, loss, allowed=~flat)
    b = _fit_power(sizes[~flat], means[~flat], weights[~flat])
    if all(len(v) < 2 for v in gaps.values()):
        return _silent(curve, sizes, means, sems, nus, reps, used, h, math.nan, b, level, seed, True,
                       probe, loss)
    if used.sum() < 2:
        return _before_the_knee(curve, sizes, means, sems, nus, reps, used, h, level, seed, probe,
                                loss)
    x = loss_constant(loss, nus, means) / sizes
    information = float(np.sum((weights * x * x)[used]))
    se_h = 1.0 / math.sqrt(information) if information > 0 else math.inf
    misfit = lack_of_fit(means[used], floored[used], (x * h)[used], n_params=1)
    if math.isfinite(misfit) and misfit > 1:
        se_h *= math.sqrt(misfit)
    signal = h / se_h if math.isfinite(h) and se_h > 0 else math.nan
    if not (math.isfinite(signal) and signal >= MIN_SIGNAL):
        return _silent(curve, sizes, means, sems, nus, reps, used, h, se_h, b, level, seed, False,
                       probe, loss)
    boot_h, boot_b = _bootstrap(gaps, trains, sizes, used, floor, bootstrap, seed, loss, ~flat)
    spread = CALIBRATION_SPREAD if loss == "zero_one" else OPTIMISM_SPREAD
    low, high, b_low, b_high = _intervals(h, boot_h, boot_b, level, misfit, spread)
    regime = _regime(means, sems, nus, trains, sizes, used) if loss == "zero_one" else ""
    c_used = float(np.mean(loss_constant(loss, nus[used], means[used])))
    notes = _gap_notes(curve, sizes, used, misfit, regime, probe, loss, flat)
    if loss == "squared":
        message = (f"Effective number of parameters on this data ≈ {format_capacity(h)} "
                   f"({interval_text(low, high, level)}), from the optimism of squared error "
                   f"(gap ≈ 2·σ²·p/n) at {int(used.sum())} sizes past the knee.")
    else:
        message = (f"Effective capacity on this data ≈ {format_capacity(h)} VC units "
                   f"({interval_text(low, high, level)}), from the measured gap at "
                   f"{int(used.sum())} sizes past the knee; "
                   + (f"{regime}." if regime else "regime (realizable or noisy) not determined."))
    design = _design(sizes, means, sems, nus, reps, used, x * h)
    extra = _extra(curve, h, se_h, used, sizes, boot_h, misfit, seed, probe)
    extra["gap_constant"] = c_used
    return CapacityEstimate(vc_dim=float(h), low=float(low), high=float(high), level=level,
                            method=_method(loss), above_range=False, design=design, scale=None,
                            exponent=Estimate(b, b_low, b_high, level), regime=regime,
                            notes=notes, message=message, extra=extra, status="ok")


def _intervals(h, boot_h, boot_b, level, misfit, spread: float = CALIBRATION_SPREAD):
    """The interval of h (bootstrap, widened by the misfit, combined with the calibration
    ``spread`` on the log scale) and of b."""
    alpha = (1.0 - level) / 2.0
    z = NormalDist().inv_cdf(1.0 - alpha)
    ok_h = boot_h[np.isfinite(boot_h) & (boot_h > 0)]
    if len(ok_h) >= 2:
        low, high = (float(v) for v in np.quantile(ok_h, [alpha, 1.0 - alpha]))
        low, high = widen_interval(h, min(low, h), max(high, h), misfit)
    else:
        low = high = h
    down = math.log(h / low) if low > 0 else math.inf
    up = math.log(high / h) if math.isfinite(high) else math.inf
    cal = z * spread
    low = h * math.exp(-math.hypot(down, cal)) if math.isfinite(down) else 0.0
    high = h * math.exp(math.hypot(up, cal)) if math.isfinite(up) else math.inf
    ok_b = boot_b[np.isfinite(boot_b)]
    b_low, b_high = ((float(v) for v in np.quantile(ok_b, [alpha, 1.0 - alpha]))
                     if len(ok_b) >= 2 else (math.nan, math.nan))
    return low, high, b_low, b_high


def _regime(means, sems, nus, trains, sizes, used) -> str:
    """Realizable when the training error is clearly below the gap at every used size,
    noisy when it is clearly above it; "" when the data do not separate the two."""
    realizable = noisy = True
    for i in np.flatnonzero(used):
        t = trains[int(sizes[i])]
        t_sem = sem(t) if len(t) > 1 else math.nan
        t_sem = t_sem if math.isfinite(t_sem) else 0.0
        g_sem = sems[i] if math.isfinite(sems[i]) else 0.0
        realizable &= bool(nus[i] + 2 * t_sem < 0.25 * max(means[i] - 2 * g_sem, 0.0)
                           or (nus[i] == 0.0 and t_sem == 0.0 and len(t) > 1))
        noisy &= bool(nus[i] - 2 * t_sem > 2.0 * (means[i] + 2 * g_sem))
    if realizable:
        return "nearly realizable (training error about 0 at the sizes used)"
    if noisy:
        return (f"noisy (training error about {format_error(float(np.mean(nus[used])))}, "
                "well above the gap)")
    return ""


def _design(sizes, means, sems, nus, repeats, used, fitted) -> pd.DataFrame:
    return pd.DataFrame({
        "size": sizes.astype(int), "gap_mean": means, "gap_sem": sems, "train_mean": nus,
        "repeats": np.asarray(repeats, dtype=int), "used": used.astype(bool),
        "gap_fit": np.where(used, fitted, np.nan),
    })


def _extra(curve, h, se_h, used, sizes, boot_h, misfit, seed, probe) -> dict:
    extra = {"h_fit": float(h), "h_se": float(se_h), "sizes_used": [int(n) for n in sizes[used]],
             "bootstrap": int(np.isfinite(boot_h).sum()) if boot_h is not None else 0,
             "lack_of_fit": misfit, "seed": int(seed), "metric": curve.metric,
             "calibration": {"c0": GAP_C0, "c1": GAP_C1, "spread": CALIBRATION_SPREAD,
                             "min_tau": MIN_TAU}}
    if probe is not None:
        extra["probe"] = {"vc_dim": probe.vc_dim, "low": probe.low, "high": probe.high,
                          "level": probe.level, "above_range": bool(probe.above_range)}
    return extra


def _probe_note(probe) -> str:
    figure = ("≥ " if probe.above_range else "≈ ") + format_capacity(probe.vc_dim)
    return (f"The max-deviation probe gives {figure} ({interval_text(probe.low, probe.high, probe.level)}),"
            " a distribution-free figure for the same learner.")


def _gap_notes(curve, sizes, used, misfit, regime, probe, loss: str = "zero_one",
               flat: np.ndarray | None = None) -> list[str]:
    """Caveats to show with the gap model's figure."""
    notes = [_GAP_NOTE if loss == "zero_one" else _OPTIMISM_NOTE]
    if probe is not None:
        notes.append(_probe_note(probe))
    flat = np.zeros(len(sizes), bool) if flat is None else flat
    if flat.any():
        notes.append("Sizes at which the model predicted as the constant predictor does in "
                     "every repeat were left out: "
                     f"{', '.join(format_count(n) for n in sizes[flat])}.")
    left_out = [int(n) for n in sizes[~used & ~flat]]
    if left_out:
        notes.append(f"Sizes before the knee (n < {format_number(MIN_TAU, 2)}·{_symbol(loss)}) were "
                     "left out: "
                     f"{', '.join(format_count(n) for n in left_out)}.")
    if math.isfinite(misfit) and misfit > 1:
        notes.append(f"c·h/n fits the mean gaps less well than repeat noise explains "
                     f"(χ²/dof = {format_number(misfit, 2)}); the interval was widened by "
                     f"√{format_number(misfit, 2)}.")
    if not regime and loss == "zero_one":
        notes.append("The training error does not separate a realizable from a noisy problem at "
                     "these sizes, so no regime is named.")
    notes.append(STAT_NOTE)
    return notes


def _silent(curve, sizes, means, sems, nus, reps, used, h, se_h, b, level, seed, single, probe,
            loss: str = "zero_one"):
    """No figure: one repeat per size, or gaps within their noise of zero."""
    design = _design(sizes, means, sems, nus, reps, used,
                     loss_constant(loss, nus, means) / sizes * (h if math.isfinite(h) else math.nan))
    notes = ([_GAP_NOTE if loss == "zero_one" else _OPTIMISM_NOTE]
             + ([_probe_note(probe)] if probe is not None else []))
    if single:
        status = "no_interval"
        message = ("No capacity figure: each size has one repeat, so the gap's noise is unknown; "
                   "measure with --repeats 3 or more.")
    else:
        status = "not_identifiable"
        h_up = max(h if math.isfinite(h) else 0.0, 0.0) + MIN_SIGNAL * se_h
        h_up = h_up if math.isfinite(h_up) else float(sizes.max())
        message = (f"No capacity figure: the measured gaps are within their noise of zero "
                   f"({_symbol(loss)} < {format_capacity(h_up)} at most), so these sizes cannot pin "
                   "it; measure "
                   f"between {_size_range(max(h_up / 10.0, 1.0 / MIN_TAU))}"
                   f" or use more repeats and test rows.")
    notes.append(STAT_NOTE)
    extra = _extra(curve, h, se_h, used, sizes, None, math.nan, seed, probe)
    return CapacityEstimate(vc_dim=math.nan, low=math.nan, high=math.nan, level=level,
                            method=_method(loss), above_range=False, design=design, scale=None,
                            exponent=Estimate(b, math.nan, math.nan, level), regime="",
                            notes=notes, message=message, extra=extra, status=status)


def _before_the_knee(curve, sizes, means, sems, nus, reps, used, h, level, seed, probe,
                     loss: str = "zero_one"):
    """Fewer than two sizes past the knee (n ≥ 3h): only a lower bound, and the sizes to
    measure."""
    h_low = float(sizes[-2]) / MIN_TAU
    h_guess = max(h if math.isfinite(h) else 0.0, h_low)
    what = "Capacity" if loss == "zero_one" else "Effective number of parameters"
    message = (f"{what} above what these sizes resolve: {_symbol(loss)} ≥ {format_capacity(h_low)} "
               "on this data "
               f"(the gap has not reached its 1/n part by n = {format_count(sizes.max())}); measure "
               f"between {_size_range(h_guess)} to pin it.")
    design = _design(sizes, means, sems, nus, reps, used, np.full(len(sizes), np.nan))
    notes = ([_GAP_NOTE if loss == "zero_one" else _OPTIMISM_NOTE]
             + ([_probe_note(probe)] if probe is not None else []) + [STAT_NOTE])
    extra = _extra(curve, h, math.nan, used, sizes, None, math.nan, seed, probe)
    return CapacityEstimate(vc_dim=h_low, low=h_low, high=math.inf, level=level, method=_method(loss),
                            above_range=True, design=design, scale=None, exponent=None, regime="",
                            notes=notes, message=message, extra=extra, status="above_range")


def _method(loss: str) -> str:
    """``"gap"`` for the VC-unit gap model, ``"optimism"`` for squared error's parameters
    (``"none"``, with status ``"not_applicable"``, for any other loss)."""
    return "gap" if loss == "zero_one" else "optimism"


def _symbol(loss: str) -> str:
    """h for a capacity in VC units, p for an effective number of parameters."""
    return "h" if loss == "zero_one" else "p"


def _no_figure(curve, sizes, means, sems, nus, reps, level, seed, probe):
    """No figure for a loss that neither VC theory nor the optimism formula covers."""
    name = metric_name(curve.metric, curve.metric_info)
    message = (f"No capacity figure for {name}: capacity from the gap is given in VC units for "
               "the 0-1 loss (the loss VC theory bounds) and as an effective number of parameters "
               "for squared error (its optimism, 2·σ²·p/n); neither applies to this loss.")
    design = _design(sizes, means, sems, nus, reps, np.zeros(len(sizes), dtype=bool),
                     np.full(len(sizes), np.nan))
    extra = _extra(curve, math.nan, math.nan, np.zeros(len(sizes), dtype=bool), sizes, None,
                   math.nan, seed, probe)
    return CapacityEstimate(vc_dim=math.nan, low=math.nan, high=math.inf, level=level, method="none",
                            above_range=False, design=design, scale=None, exponent=None, regime="",
                            notes=[STAT_NOTE], message=message, extra=extra,
                            status="not_applicable")
