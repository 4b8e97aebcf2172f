"""The universal curve Φ of the max-deviation experiment, its inverse, and the fit of s·Φ(n/h).

The probe fits the measured deviation ξ(n) ≈ Φ(n/h). (The gap model no longer fits
s·Φ(n/h): with the scale free, Φ's knee landed at the first measured size whatever the
learner; it uses the calibrated 1/n law of ``capacity.gap_model`` instead.)
"""

from __future__ import annotations

import math

import numpy as np

from curvefit.core.errors import InputError

# Constants of Φ (Vapnik, Levin & LeCun 1994); k makes Φ continuous at τ = 0.5.
PHI_A = 0.16
PHI_B = 1.2
PHI_K = 0.14928
# Points of the log-spaced grid that locates h before refining (Φ's flat part makes the
# least-squares objective multimodal in h).
H_GRID_POINTS = 240


def phi(tau):
    """Expected maximum deviation Φ(τ) of the max-deviation experiment, τ = n/h.

    ``Φ(τ) = 1`` for τ < 0.5, else
    ``a·(ln(2τ)+1)/(τ−k) · (sqrt(1 + b·(τ−k)/(ln(2τ)+1)) + 1)`` with a = 0.16,
    b = 1.2, k = 0.14928. Vectorised; returns a float for a scalar input.

    Parameters
    ----------
    tau : float or array_like
        Ratio of the half-sample size n to the capacity h (must be > 0).

    Returns
    -------
    float or numpy.ndarray
        Φ(τ), in (0, 1].

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 851–876, 1994.

    Examples
    --------
    >>> round(float(phi(1.0)), 3), round(float(phi(10.0)), 3)
    (0.722, 0.194)
    >>> phi([0.25, 0.5]).tolist()
    [1.0, 1.0]
    """
    t = np.asarray(tau, dtype=float)
    scalar = t.ndim == 0
    t = np.atleast_1d(t)
    out = np.ones_like(t)
    m = t >= 0.5
    tt = t[m]
    log_term = np.log(2.0 * tt) + 1.0
    out[m] = PHI_A * log_term / (tt - PHI_K) * (np.sqrt(1.0 + PHI_B * (tt - PHI_K) / log_term) + 1.0)
    # Rounding of k leaves Φ(0.5) a hair off 1; the deviation can never exceed 1.
    out = np.minimum(out, 1.0)
    return float(out[0]) if scalar else out


def phi_inverse(value: float) -> float:
    """The τ ≥ 0.5 with Φ(τ) = ``value`` (0 < value < 1); 0.5 for value ≥ 1.

    Φ decreases strictly for τ ≥ 0.5, so the root is unique; it is found with a
    bracketing root finder.

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994.

    Examples
    --------
    >>> round(phi_inverse(float(phi(3.0))), 6)
    3.0
    """
    v = float(value)
    if not v > 0:
        raise InputError(f"Φ takes values in (0, 1]; cannot invert {value!r}")
    if v >= float(phi(0.5)):
        return 0.5
    hi = 1.0
    while phi(hi) > v:
        hi *= 4.0
        if hi > 1e15:
            return math.inf
    from scipy.optimize import brentq

    return float(brentq(lambda t: phi(t) - v, 0.5, hi, xtol=1e-12, rtol=1e-12))



def fit_vc_curve(n, values, weights=None, *, free_scale: bool = False,
                 h_bounds: tuple[float, float] | None = None) -> tuple[float, float]:
    """Least-squares fit of ``values ≈ s·Φ(n/h)``; returns ``(h, s)``.

    With ``free_scale=False`` s is fixed at 1 (the probe); with ``free_scale=True``
    s is solved in closed form for each h (a linear least-squares problem), h is
    located on a log-spaced grid (Φ's flat part makes the objective multimodal) and
    both are refined with bounded ``scipy.optimize.least_squares`` in (log h, s).

    Parameters
    ----------
    n : array_like
        Sizes (half-sample sizes for the probe, training sizes for the gap).
    values : array_like
        Measured ξ (probe) or gap values, one per observation.
    weights : array_like, optional
        Non-negative weights of the squared residuals (default all 1).
    free_scale : bool
        Fit the scale s too.
    h_bounds : (float, float), optional
        Search range for h (default 0.25 … 4·max n).

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994.

    Examples
    --------
    >>> n = np.array([5, 10, 20, 40, 80, 160])
    >>> h, s = fit_vc_curve(n, phi(n / 12.0))
    >>> round(h, 3), s
    (12.0, 1.0)
    """
    from scipy.optimize import least_squares

    n = np.asarray(n, dtype=float)
    y = np.asarray(values, dtype=float)
    w = np.ones_like(y) if weights is None else np.asarray(weights, dtype=float)
    if len(n) == 0:
        raise InputError("no measurements to fit the capacity curve to")
    lo, hi = h_bounds or (0.25, 4.0 * float(n.max()))
    grid = np.geomspace(lo, hi, H_GRID_POINTS)
    P = phi(n[None, :] / grid[:, None])                     # (grid, obs)
    if free_scale:
        s_grid = np.maximum((P * (w * y)).sum(1) / np.maximum((P * P * w).sum(1), 1e-300), 1e-12)
    else:
        s_grid = np.ones(len(grid))
    sse = ((y[None, :] - s_grid[:, None] * P) ** 2 * w).sum(1)
    i = int(np.argmin(sse))
    h0, s0 = float(grid[i]), float(s_grid[i])
    sw = np.sqrt(w)
    lb_h, ub_h = math.log(lo), math.log(hi)
    x0_h = min(max(math.log(h0), lb_h + 1e-9), ub_h - 1e-9)
    try:
        if free_scale:
            s_hi = max(10.0 * s0, 10.0 * float(np.nanmax(np.abs(y))) if len(y) else 1.0, 1e-6)
            res = least_squares(lambda p: sw * (y - p[1] * phi(n / math.exp(p[0]))),
                                x0=[x0_h, min(max(s0, 1e-12), s_hi * 0.999)],
                                bounds=([lb_h, 1e-12], [ub_h, s_hi]), method="trf",
                                x_scale=[1.0, max(s0, 1e-3)])
            cand = (math.exp(res.x[0]), float(res.x[1]))
        else:
            res = least_squares(lambda p: sw * (y - phi(n / math.exp(p[0]))),
                                x0=[x0_h], bounds=([lb_h], [ub_h]), method="trf")
            cand = (math.exp(res.x[0]), 1.0)
        cand_sse = float(np.sum(w * (y - cand[1] * phi(n / cand[0])) ** 2))
    except (ValueError, FloatingPointError):
        cand_sse = math.inf
    # Keep the refined point only if it did improve (the grid point is a safe fallback).
    if cand_sse <= float(sse[i]):
        return cand
    return h0, s0

