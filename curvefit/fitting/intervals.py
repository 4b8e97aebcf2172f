"""Prediction bands of a fitted curve and the Student-t intervals of the measured means.

A band is the percentile band of the bootstrap curves, widened beyond the data by the
model error seen in forecast validation, spanning the near-tied families there, and
never narrower than the Student-t interval of the mean measured nearby.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy.special import ndtri

from curvefit.core.stats import t_quantile
from curvefit.fitting.bootstrap import quantile_levels
from curvefit.fitting.data import FitData, noise_scale
from curvefit.fitting.least_squares import FamilyFit, predict_natural

# Whether prediction intervals are floored at the Student-t interval of the measured mean.
NOISE_FLOOR = True
# Whether intervals beyond the data also span the near-tied families' predictions.
ENVELOPE_TIES = True


def bootstrap_curves(chosen: FamilyFit, boot, sizes, data: FitData) -> np.ndarray | None:
    """(B, len(sizes)) predictions of the bootstrap parameter replicates, or None."""
    if boot is None or not len(boot):
        return None
    theta = boot.T[:, :, None]            # (p, B, 1) broadcasts against sizes (G,)
    with np.errstate(all="ignore"):
        return predict_natural(chosen.family, theta, sizes, data.on, data.sign)


def prediction_band(sizes, level: float, data: FitData, fits: dict, best: str, boot):
    """``(low, high)`` arrays: the prediction band of the chosen family at ``sizes``.

    The percentile band of the bootstrap curves is widened beyond the data by the model
    error seen in forecast validation (``drift`` per unit of ln n, as a normal deviate at
    the interval's level); NaN ends without bootstrap.
    """
    sizes = np.asarray(sizes, dtype=float)
    nan = np.full(len(sizes), math.nan)
    chosen = fits[best]
    P = bootstrap_curves(chosen, boot, sizes, data)
    if P is None:
        return nan, nan
    ok = np.all(np.isfinite(boot), axis=1)
    if ok.sum() < 2:
        return nan, nan
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        lo, hi = np.nanquantile(P[ok], quantile_levels(level), axis=0)
    est = predict_natural(chosen.family, chosen.theta, sizes, data.on, data.sign)
    drift = chosen.drift
    if drift > 0 and math.isfinite(drift):
        z = float(ndtri((1 + level) / 2))
        extra = z * drift * np.maximum(np.log(sizes / data.n_max), 0.0)
        lo = est - np.sqrt(np.maximum(est - lo, 0.0) ** 2 + extra ** 2)
        hi = est + np.sqrt(np.maximum(hi - est, 0.0) ** 2 + extra ** 2)
    if ENVELOPE_TIES:
        lo, hi = _span_tied_families(lo, hi, sizes, data, fits, best)
    if NOISE_FLOOR:
        # never narrower than the Student-t interval of the measured mean nearby
        half = noise_half_width(data, sizes, level)
        lo = np.minimum(lo, est - half)
        hi = np.maximum(hi, est + half)
    if data.on != "train" and bool(np.nanmin(data.y) >= 0):
        lo = np.maximum(lo, 0.0)  # an error or a gap measured >= 0 stays >= 0
    return lo, hi


def _span_tied_families(lo, hi, sizes, data: FitData, fits: dict, best: str):
    """Beyond the data the band also spans the families that forecast as well."""
    beyond = sizes > data.n_max
    for name, ff in fits.items():
        if ff.tied and name != best and ff.theta is not None and beyond.any():
            f = predict_natural(ff.family, ff.theta, sizes, data.on, data.sign)
            ok_f = beyond & np.isfinite(f)
            lo = np.where(ok_f, np.minimum(lo, f), lo)
            hi = np.where(ok_f, np.maximum(hi, f), hi)
    return lo, hi


def mean_band(d: FitData, level: float):
    """Student-t interval of each measured per-size mean (the mean itself without repeats).

    References
    ----------
    .. [1] W. S. Gosset ("Student"), "The probable error of a mean", Biometrika 6(1), 1908.
    """
    k = np.array([np.isfinite(c[:, 0] if d.on == "test" else
                              (c[:, 0] - c[:, 1]) if d.on == "gap" else c[:, 1]).sum()
                  for c in d.cells], dtype=float)
    half = np.zeros(d.m)
    ok = (k >= 2) & np.isfinite(d.sem)
    half[ok] = np.array([t_quantile(level, dof) for dof in k[ok] - 1]) * d.sem[ok]
    return d.y - half, d.y + half


def noise_half_width(d: FitData, sizes, level: float) -> np.ndarray:
    """Half-width of the Student-t interval of the measured mean, interpolated in ln n
    between measured sizes and held constant beyond them (0 without repeats).

    A prediction cannot be known better than the mean measured at that size: with 2–5
    repeats the fitted curve's bootstrap band alone is too narrow where the family does
    not describe the points exactly.

    References
    ----------
    .. [1] "Student", "The probable error of a mean", Biometrika 6(1), 1908.
    """
    scale = noise_scale(d.sem)
    sizes = np.asarray(sizes, dtype=float)
    if scale is None or not d.m:
        return np.zeros(len(sizes))
    z = float(ndtri((1 + level) / 2))
    q = np.array([t_quantile(level, k - 1) if k >= 2 else z for k in d.repeats], dtype=float)
    return np.interp(np.log(sizes), np.log(d.sizes), q * scale)
