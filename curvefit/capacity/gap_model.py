"""Effective capacity from a measured learning curve: the VC-shaped gap model.

The mean generalization gap (test − train error) per size is fitted with ``s·Φ(n/h)``
(the shape of the max-deviation experiment, ``capacity.vc_curve``) and with a power law
``a·n^-b`` whose exponent tells the regime.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from curvefit.capacity.result import STAT_NOTE, CapacityEstimate, interval_text, lack_of_fit, widen_interval
from curvefit.capacity.vc_curve import fit_vc_curve, phi
from curvefit.core.curve import Curve
from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import InputError
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import format_capacity, format_number
from curvefit.core.stats import sem
from curvefit.core.validate import check_count, check_level, check_seed

_GAP_NOTE = ("This is the capacity the model uses on this data distribution; it can "
             "differ from the probe's distribution-free figure.")


def _regime(b: float) -> str:
    """Plain words for the gap exponent b (Vapnik's bounds: 1/2 agnostic, 1 realizable)."""
    if not math.isfinite(b):
        return "undetermined"
    if b < 0.35:
        return "slow (b well below 1/2: the gap shrinks slower than the agnostic rate)"
    if b < 0.75:
        return "noisy/agnostic (b near 1/2)"
    if b <= 1.3:
        return "nearly realizable (b near 1)"
    return "fast (b above 1: the gap closes faster than the realizable rate)"


def _fit_power(n: np.ndarray, g: np.ndarray, w: np.ndarray) -> tuple[float, float]:
    """Weighted least squares of g ≈ a·n^-b with a > 0, 0 ≤ b ≤ 3."""
    from scipy.optimize import least_squares

    pos = g > 0
    if pos.sum() >= 2:
        # Start from the log-log line through the positive gaps.
        slope, icpt = np.polyfit(np.log(n[pos]), np.log(g[pos]), 1)
        b0, a0 = float(np.clip(-slope, 0.01, 2.99)), float(math.exp(icpt))
    else:
        b0, a0 = 0.5, max(float(np.max(np.abs(g))), 1e-6) * math.sqrt(float(n.min()))
    sw = np.sqrt(w)
    la0 = math.log(max(a0, 1e-12))
    res = least_squares(lambda p: sw * (g - math.exp(p[0]) * n ** (-p[1])),
                        x0=[la0, b0], bounds=([-50.0, 0.0], [50.0, 3.0]), method="trf")
    return float(math.exp(res.x[0])), float(res.x[1])


def _gap_groups(curve: Curve) -> dict[int, np.ndarray]:
    """The measured gaps (test − train) per size; an InputError without train error or
    with fewer than 3 sizes."""
    if not curve.has_train:
        raise InputError("the curve has no train_error: the gap model needs train and test "
                         "errors (measure again, or add a train_error column to the table)")
    ok = curve.ok_points()
    pts = ok[ok["train_error"].notna()].copy()
    pts["gap"] = pts["test_error"] - pts["train_error"]
    groups = {int(s): g["gap"].to_numpy() for s, g in pts.groupby("size")}
    if len(groups) < 3:
        raise InputError(f"the gap model needs at least 3 sizes with train and test errors, "
                         f"found {len(groups)}; measure more sizes")
    return groups


def _sem_floor(groups: dict[int, np.ndarray]) -> float:
    """A floor on the standard errors, so a size with identical repeats cannot take all
    the weight."""
    all_sems = [sem(g) for g in groups.values() if len(g) > 1]
    gap_scale = max(float(np.max(np.abs([g.mean() for g in groups.values()]))), 1e-12)
    return max(0.25 * float(np.median(all_sems)) if all_sems else 0.0, 1e-3 * gap_scale)


def _gap_fit(groups: dict[int, np.ndarray], sem_floor: float, h_hi: float):
    sizes = np.array(sorted(groups), dtype=float)
    means = np.array([groups[int(s)].mean() for s in sizes])
    sems = np.array([sem(groups[int(s)]) for s in sizes])
    sems = np.where(np.isfinite(sems), sems, np.nanmax(sems) if np.isfinite(sems).any() else 1.0)
    w = 1.0 / np.maximum(sems, sem_floor) ** 2
    h, s = fit_vc_curve(sizes, means, w, free_scale=True, h_bounds=(0.25, h_hi))
    a, b = _fit_power(sizes, means, w)
    return h, s, a, b, means, sems


def _bootstrap(groups, sem_floor: float, h_hi: float, bootstrap: int, seed: int, level: float):
    """Percentile intervals of h and b over repeats resampled within each size:
    ``(low, high, b_low, b_high, replicates)``, NaN ends with one repeat per size."""
    rng = np.random.default_rng(np.random.SeedSequence([int(seed), 104729]))
    boot_h, boot_b = [], []
    for _ in range(bootstrap):
        rg = {k: v[rng.integers(0, len(v), len(v))] for k, v in groups.items()}
        try:
            hb, _sb, _ab, bb, _m, _s = _gap_fit(rg, sem_floor, h_hi)
        except (ValueError, np.linalg.LinAlgError):
            continue
        boot_h.append(hb)
        boot_b.append(bb)
    alpha = (1.0 - level) / 2.0
    if len(boot_h) >= 2 and not all(len(v) < 2 for v in groups.values()):
        low, high = (float(v) for v in np.quantile(boot_h, [alpha, 1 - alpha]))
        b_low, b_high = (float(v) for v in np.quantile(boot_b, [alpha, 1 - alpha]))
    else:
        low = high = b_low = b_high = math.nan
    return low, high, b_low, b_high, len(boot_h)


def effective_capacity(curve, *, bootstrap: int = BOOTSTRAP, random_state: int = SEED,
                       interval: float = INTERVAL) -> CapacityEstimate:
    """Effective capacity from a measured learning curve's generalization gap.

    The mean gap (test − train error) per size is fitted by two models with weighted
    least squares (weights 1/sem², so the many-sample sizes that carry the shape are
    not drowned by the noisy small ones):

    * VC-shaped: gap(n) = s·Φ(n/h), with the scale s and the capacity h free and
      bounded (h on a log grid, then refined by ``scipy.optimize.least_squares``);
    * power law: gap(n) = a·n^−b, whose exponent tells the regime (b near 1/2:
      noisy/agnostic; b near 1: nearly realizable).

    Intervals are percentile bootstraps over the repeats within each size.

    Parameters
    ----------
    curve : Curve
        A measured curve with train_error (at least 3 sizes, ideally ≥ 2 repeats each).
    bootstrap : int
        Bootstrap replicates.
    random_state : int
        Seed of the bootstrap.
    interval : float
        Interval level.

    Returns
    -------
    CapacityEstimate
        ``method="gap"``, with ``scale`` (s), ``exponent`` (b) and ``regime`` set.

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994 (the shape Φ).
    .. [2] C. Cortes, L. D. Jackel, S. A. Solla, V. Vapnik, J. S. Denker, "Learning
       curves: asymptotic values and rate of convergence", NIPS 6, 1994 (power-law gap).

    Examples
    --------
    >>> import pandas as pd
    >>> sizes = [4, 8, 16, 32, 64, 128, 256]
    >>> rows = [{"size": n, "repeat": r, "train_error": 0.1,
    ...          "test_error": 0.1 + 0.4 * float(phi(n / 10.0)) + 0.01 * (r - 1)}
    ...         for n in sizes for r in range(3)]
    >>> est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=20)
    >>> round(est.vc_dim, 1), round(est.scale, 2)
    (10.0, 0.4)
    """
    if not isinstance(curve, Curve):
        raise InputError("effective_capacity needs a Curve (curvefit.Curve.read(path) or "
                         "Curve.from_table(df))")
    level = check_level(interval)
    bootstrap = check_count(bootstrap, "bootstrap", minimum=0)
    seed = check_seed(random_state)
    seed = 0 if seed is None else seed
    groups = _gap_groups(curve)
    sizes = np.array(sorted(groups), dtype=float)
    sem_floor = _sem_floor(groups)
    h_hi = 100.0 * float(sizes.max())
    h, s, a, b, means, sems = _gap_fit(groups, sem_floor, h_hi)
    low, high, b_low, b_high, n_boot = _bootstrap(groups, sem_floor, h_hi, bootstrap, seed, level)
    # Widen both intervals when the curves miss the means by more than their noise.
    floored = np.maximum(sems, sem_floor)
    misfit_vc = lack_of_fit(means, floored, s * phi(sizes / h), n_params=2)
    misfit_pow = lack_of_fit(means, floored, a * sizes ** (-b), n_params=2)
    if math.isfinite(low):
        low, high = widen_interval(h, low, high, misfit_vc, bounds=(0.25, h_hi))
    if math.isfinite(b_low) and b > 0 and b_low > 0:
        b_low, b_high = widen_interval(b, b_low, b_high, misfit_pow)
    regime = _regime(b)
    # Φ is flat for n < h/2: a curve wholly in the flat part bounds h only from below.
    above = bool(h > 2.0 * sizes.max())
    notes = _gap_notes(groups, sizes, means, h, above, misfit_vc)
    if above:
        h_low = 2.0 * float(sizes.max())
        vc, low, high = h_low, h_low, math.inf
        message = (f"Capacity above the measured range: h ≥ {format_capacity(h_low)} on this "
                   f"data (the gap is still flat at n = {int(sizes.max()):,}).")
    else:
        vc = h
        message = (f"Effective capacity on this data ≈ {format_capacity(h)} VC units "
                   f"({interval_text(low, high, level)}), from the measured gap; gap exponent "
                   f"b ≈ {format_number(b, 2)}, {regime.split(' (')[0]}.")
    design = pd.DataFrame({
        "size": sizes.astype(int), "gap_mean": means,
        "gap_sem": [sem(groups[int(n)]) for n in sizes],
        "repeats": [int(len(groups[int(n)])) for n in sizes],
        "gap_fit": s * phi(sizes / h), "gap_power": a * sizes ** (-b),
    })
    extra = {"power_scale": a, "h_fit": float(h), "bootstrap": int(n_boot),
             "lack_of_fit": misfit_vc, "lack_of_fit_power": misfit_pow,
             "seed": int(seed), "metric": curve.metric}
    return CapacityEstimate(vc_dim=float(vc), low=float(low), high=float(high),
                            level=level, method="gap", above_range=above,
                            design=design, scale=float(s), exponent=Estimate(b, b_low, b_high, level),
                            regime=regime, notes=notes, message=message, extra=extra)


def _gap_notes(groups, sizes, means, h: float, above: bool, misfit: float) -> list[str]:
    """Caveats to show with the gap model's figure."""
    notes = [_GAP_NOTE]
    if math.isfinite(misfit) and misfit > 1:
        notes.append(f"s·Φ(n/h) fits the mean gaps less well than repeat noise explains "
                     f"(χ²/dof = {format_number(misfit, 2)}); the interval was widened by "
                     f"√{format_number(misfit, 2)}.")
    if all(len(v) < 2 for v in groups.values()):
        notes.append("Each size has one repeat, so there is no interval; measure with "
                     "--repeats 3 or more.")
    if above:
        notes.append("The gap had not started to fall within the measured sizes; measure "
                     "larger sizes to resolve the capacity.")
    if (means <= 0).sum() > len(means) // 2:
        notes.append("Most mean gaps are not positive; the capacity figure is poorly determined.")
    if sizes.min() > h:
        notes.append("All measured sizes exceed the fitted capacity, so h rests on the tail "
                     "of Φ; sizes near h would pin it down better.")
    notes.append(STAT_NOTE)
    return notes
