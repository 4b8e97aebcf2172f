"""Small statistics every part uses: standard errors, Student-t and exact binomial intervals.

One implementation each, so the report, the terminal and the history store agree.

References
----------
.. [1] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits
       illustrated in the case of the binomial", Biometrika 26(4), 1934.
.. [2] W. S. Gosset ("Student"), "The probable error of a mean", Biometrika 6(1), 1908.
"""

from __future__ import annotations

import math

import numpy as np

from curvefit.core.estimate import Estimate
from curvefit.core.validate import check_level


def sem(values) -> float:
    """Standard error of the mean (sample standard deviation with n − 1, over √n).

    NaNs are dropped; fewer than two values give NaN.

    Examples
    --------
    >>> round(sem([1.0, 2.0, 3.0, 4.0]), 6)
    0.645497
    >>> sem([0.3])
    nan
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size < 2:
        return math.nan
    return float(np.std(v, ddof=1) / math.sqrt(v.size))


def theil_sen(x, y) -> tuple[float, float]:
    """``(slope, intercept)`` of the Theil–Sen line: the median of the pairwise slopes,
    and the median of y − slope·x. Robust to a few wild points (up to about 29% of
    them), where least squares follows them.

    Examples
    --------
    >>> theil_sen([1, 2, 3, 4, 5], [2, 4, 6, 8, 100])
    (2.0, 0.0)

    References
    ----------
    .. [1] P. K. Sen, "Estimates of the regression coefficient based on Kendall's tau",
           JASA 63(324), 1968.
    """
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    i, j = np.triu_indices(len(x), k=1)
    keep = x[j] != x[i]
    if not keep.any():
        return 0.0, float(np.median(y)) if len(y) else math.nan
    slope = float(np.median((y[j] - y[i])[keep] / (x[j] - x[i])[keep]))
    return slope, float(np.median(y - slope * x))


def t_quantile(level: float, dof: float) -> float:
    """Two-sided Student-t multiplier for ``level`` with ``dof`` degrees of freedom."""
    level = check_level(level)
    if not dof or dof < 1:
        return math.nan
    from scipy import stats  # scipy loads slowly: only when a quantile is needed

    return float(stats.t.ppf(0.5 + level / 2.0, dof))


def t_interval(values, level: float = 0.9) -> Estimate:
    """Mean of ``values`` with its Student-t interval (NaN ends with fewer than two values).

    Examples
    --------
    >>> e = t_interval([0.10, 0.12, 0.11], 0.9)
    >>> round(e.estimate, 4), round(e.low, 4), round(e.high, 4)
    (0.11, 0.0931, 0.1269)
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return Estimate(math.nan, math.nan, math.nan, check_level(level))
    mean = float(v.mean())
    half = t_quantile(level, v.size - 1) * sem(v)
    return Estimate(mean, mean - half, mean + half, check_level(level))


def binomial_limits(errors, n_test, alpha):
    """Clopper–Pearson limits for arrays, without validation: ``(low, high)`` arrays.

    ``low = B⁻¹(α/2; k, n − k + 1)`` (0 when k = 0), ``high = B⁻¹(1 − α/2; k + 1, n − k)``
    (1 when k = n), with B⁻¹ the inverse regularised incomplete beta function; ``k`` may be
    a non-integer expected count. The one implementation behind every exact interval.
    """
    from scipy import special

    k, n, a = np.broadcast_arrays(np.asarray(errors, dtype=float), np.asarray(n_test, dtype=float),
                                  np.asarray(alpha, dtype=float))
    with np.errstate(invalid="ignore", divide="ignore"):
        low = np.where(k > 0, special.betaincinv(np.where(k > 0, k, 1.0), n - k + 1, a / 2), 0.0)
        high = np.where(k < n, special.betaincinv(k + 1, np.where(k < n, n - k, 1.0), 1 - a / 2), 1.0)
    return low, high


def clopper_pearson(errors, n_test, level: float = 0.9):
    """Exact (Clopper–Pearson) interval of an error rate from ``errors`` out of ``n_test``.

    Works on scalars and arrays; returns ``(low, high)`` of the same shape.

    Examples
    --------
    >>> low, high = clopper_pearson(0, 100, 0.95)   # Clopper & Pearson 1934: (0, 0.0362)
    >>> float(low), round(float(high), 4)
    (0.0, 0.0362)
    """
    low, high = binomial_limits(errors, n_test, 1.0 - check_level(level))
    if low.ndim == 0:
        return float(low), float(high)
    return low, high


def hoeffding_half_width(n_test, level: float = 0.9):
    """Two-sided Hoeffding half-width ``sqrt(ln(2/δ) / (2n))`` with δ = 1 − level.

    References: W. Hoeffding, "Probability inequalities for sums of bounded random
    variables", JASA 58(301), 1963.

    Examples
    --------
    >>> round(hoeffding_half_width(1000, 0.95), 5)
    0.04295
    """
    return hoeffding_width(n_test, 1.0 - check_level(level))


def hoeffding_width(n_test, delta):
    """The Hoeffding half-width for a failure probability ``delta`` (arrays broadcast,
    no validation): the one implementation behind every Hoeffding figure."""
    return np.sqrt(np.log(2.0 / np.asarray(delta, dtype=float))
                   / (2.0 * np.asarray(n_test, dtype=float)))
