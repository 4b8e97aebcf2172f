"""The averaged forecast, its prediction band, and the Student-t intervals of the measured means.

The forecast averages the families that forecast well (weights from
``selection.family_weights``); the last value takes part beyond the data by pulling the
forecast towards the level at the largest size. Its band adds, on each side and in
quadrature: the bootstrap spread of the averaged curve (all averaged families refitted to
the same redrawn means), the spread between the families, the model error seen in
forecast validation growing with ln(n / largest size), the variance a fresh data set
would bring (``data.dataset_variance``), and a model error relative to the forecast's
level at the largest size, growing with ln(n / largest size). The first three are scaled
by the corpus calibration's κ, the last is its τ (``fitting.calibration``). A curve that
has not fallen beyond its noise gets a band open down to 0 beyond the data; no band is
narrower than the interval of the mean measured nearby.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy.special import ndtri

from curvefit.core.stats import t_quantile
from curvefit.fitting.bootstrap import quantile_levels
from curvefit.fitting.calibration import NO_CALIBRATION, Calibration
from curvefit.fitting.data import FitData, noise_scale
from curvefit.fitting.least_squares import predict_natural

# Whether prediction intervals are floored at the Student-t interval of the measured mean.
NOISE_FLOOR = True
# A curve whose fall from the smallest to the largest size is below this many standard
# errors has not started to fall for sure: it cannot say whether (or when) it will, so its
# band beyond the data is open down to 0 (on the corpus such curves, boosted trees still
# predicting a constant, fell by 5–10 standard errors after the fitted sizes).
FLAT_Z = 2.0


def averaged_point(sizes, data: FitData, fits: dict) -> np.ndarray:
    """The averaged forecast at ``sizes``: the weighted families, and beyond the largest
    size the last value's share pulling it towards the level there."""
    sizes = np.asarray(sizes, dtype=float)
    weights = {k: ff.weight for k, ff in fits.items() if ff.weight > 0}
    curves = {k: predict_natural(fits[k].family, fits[k].theta, sizes, data.on, data.sign)
              for k in weights}
    at_max = {k: predict_natural(fits[k].family, fits[k].theta, np.array([data.n_max]),
                                 data.on, data.sign)[0] for k in weights}
    return _combine(curves, at_max, weights, fits, sizes, data.n_max)


# A forecast below this fraction of its value at the largest size counts as this fraction
# in the log-space correction (a family that reaches 0 would otherwise give ln 0).
LOG_FLOOR = 1e-3


def corrected_point(sizes, data: FitData, fits: dict,
                    calibration: Calibration = NO_CALIBRATION, constant: bool = True) -> np.ndarray:
    """The averaged forecast with the calibration's correction of its change beyond the
    largest measured size N: ``drop_scale`` on the change, then for a test error above 0
    at N, F(N)·(F(n)/F(N))^drop_power·(n/N)^tail_slope; for a model that has predicted
    as a constant does at every measured size (``data.constant``, with ``constant``),
    F(N)·(n/N)^constant_slope instead."""
    sizes = np.asarray(sizes, dtype=float)
    est = averaged_point(sizes, data, fits)
    if constant and data.constant and calibration.constant_slope != 0.0 and data.on == "test":
        at_max = averaged_point(np.array([data.n_max]), data, fits)[0]
        if math.isfinite(at_max) and at_max > 0:
            fall = (np.maximum(sizes, data.n_max) / data.n_max) ** calibration.constant_slope
            return np.where(sizes > data.n_max, at_max * fall, est)
    logs = calibration.drop_power != 1.0 or calibration.tail_slope != 0.0
    if (calibration.drop_scale == 1.0 and not logs) or not data.m:
        return est
    at_max = averaged_point(np.array([data.n_max]), data, fits)[0]
    beyond = sizes > data.n_max
    est = np.where(beyond, at_max + calibration.drop_scale * (est - at_max), est)
    if logs and data.on == "test" and math.isfinite(at_max) and at_max > 0:
        with np.errstate(all="ignore"):
            ratio = np.maximum(est / at_max, LOG_FLOOR)
            log_change = (calibration.drop_power * np.log(ratio)
                          + calibration.tail_slope * np.log(np.maximum(sizes, data.n_max) / data.n_max))
            est = np.where(beyond & np.isfinite(est), at_max * np.exp(log_change), est)
    return est


def _combine(curves: dict, at_max: dict, weights: dict, fits: dict, sizes, n_max: float):
    """Weighted average of family curves ((G,) or (B, G)); the last value shrinks the
    change beyond ``n_max`` by its weight."""
    others = {k: w for k, w in weights.items() if not fits[k].family.baseline}
    base = [k for k in weights if fits[k].family.baseline]
    if not others:
        return curves[base[0]]
    total = sum(others.values())
    F = sum((w / total) * curves[k] for k, w in others.items())
    F_max = sum((w / total) * np.asarray(at_max[k]) for k, w in others.items())
    w_last = sum(weights[k] for k in base)
    if w_last == 0:
        return F
    F_max = F_max[..., None] if np.ndim(F_max) else F_max
    return np.where(sizes > n_max, F - w_last * (F - F_max), F)


def _replicates(sizes, data: FitData, fits: dict, boots: dict):
    """(B, G) averaged curves of the bootstrap replicates (families without replicates
    left out, the others' weights renormalised), or None."""
    weights = {k: fits[k].weight for k in boots if fits[k].weight > 0}
    if not weights:
        return None
    curves, at_max = {}, {}
    for k in weights:
        theta = boots[k].T[:, :, None]      # (p, B, 1) broadcasts against sizes (G,)
        with np.errstate(all="ignore"):
            curves[k] = np.broadcast_to(
                predict_natural(fits[k].family, theta, sizes, data.on, data.sign),
                (boots[k].shape[0], len(sizes)))
            at_max[k] = np.broadcast_to(
                predict_natural(fits[k].family, theta, np.array([data.n_max]), data.on,
                                data.sign), (boots[k].shape[0], 1))[:, 0]
    return _combine(curves, at_max, weights, fits, sizes, data.n_max)


def band_parts(sizes, level: float, data: FitData, fits: dict, boots: dict | None) -> dict:
    """The parts of the band at ``sizes`` as standard deviations (each an array):
    ``estimate``, ``bootstrap_low`` / ``bootstrap_high`` (the averaged curve's bootstrap
    spread below and above), ``families`` (spread between the averaged families),
    ``model_error`` (from forecast validation, growing with ln n beyond the data),
    ``data_set`` (what a fresh data set would add), ``level_distance`` (|F(N)|·ln(n/N),
    the forecast's level at the largest size N times the distance beyond it: the unit of
    the calibration's relative model error τ) and ``noise_floor`` (the half-width of the
    measured mean's interval nearby over z: no band is narrower). Bootstrap parts are
    NaN without replicates."""
    sizes = np.asarray(sizes, dtype=float)
    est = averaged_point(sizes, data, fits)
    z = float(ndtri((1 + level) / 2))
    nan = np.full(len(sizes), math.nan)
    boot_lo, boot_hi = nan, nan
    M = _replicates(sizes, data, fits, boots) if boots else None
    if M is not None:
        ok = np.all(np.isfinite(M), axis=1)
        if ok.sum() >= 2:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                q_lo, q_hi = np.quantile(M[ok], quantile_levels(level), axis=0)
                mid = np.median(M[ok], axis=0)
            boot_lo, boot_hi = np.maximum(mid - q_lo, 0.0) / z, np.maximum(q_hi - mid, 0.0) / z
    weights = {k: ff.weight for k, ff in fits.items() if ff.weight > 0}
    spread = np.zeros(len(sizes))
    for k, w in weights.items():
        ff = fits[k]
        if ff.family.baseline:
            own = averaged_point(np.minimum(sizes, data.n_max), data, fits)
        else:
            own = predict_natural(ff.family, ff.theta, sizes, data.on, data.sign)
        spread += w * (own - est) ** 2
    drift = math.sqrt(sum(w * (fits[k].drift if math.isfinite(fits[k].drift) else 0.0) ** 2
                          for k, w in weights.items()))
    distance = np.maximum(np.log(sizes / data.n_max), 0.0)
    at_max = abs(float(averaged_point(np.array([data.n_max]), data, fits)[0]))
    level_distance = (at_max if math.isfinite(at_max) else 0.0) * distance
    return {"estimate": est, "bootstrap_low": boot_lo, "bootstrap_high": boot_hi,
            "families": np.sqrt(spread), "model_error": drift * distance,
            "data_set": np.sqrt(data_variance_at(data, sizes)),
            "level_distance": level_distance,
            "noise_floor": noise_half_width(data, sizes, level) / z}


def prediction_band(sizes, level: float, data: FitData, fits: dict, boots: dict | None,
                    calibration: Calibration = NO_CALIBRATION):
    """``(low, high)`` arrays: the prediction band of the averaged forecast at ``sizes``.

    On each side: z·√(κ²·(bootstrap² + families² + model_error²) + data_set²
    + (τ·level_distance)²) around the averaged forecast corrected by the calibration
    (parts as in :func:`band_parts`, κ the calibration's ``model_error_scale``, τ its
    ``relative_error``, z the normal quantile of the level); NaN ends without
    bootstrap. Then the band is opened down to 0 beyond the data for a curve that has not
    fallen (``FLAT_Z``) or whose model has predicted as a constant does at every measured
    size (whose band also reaches the flat forecast's upper end), floored at the interval
    of the measured mean nearby, and clipped at 0 for errors.

    References
    ----------
    .. [1] C. Nadeau and Y. Bengio, "Inference for the generalization error", Machine
           Learning 52, 2003 (the variance a fresh data set adds).
    .. [2] R. Mahmood, J. Lucas, D. Acuna, D. Li, J. Philion, J. M. Alvarez, Z. Yu,
           S. Fidler and M. T. Law, "How Much More Data Do I Need? Estimating
           Requirements for Downstream Tasks", CVPR 2022 (correcting forecasts with
           what earlier tasks showed).
    """
    sizes = np.asarray(sizes, dtype=float)
    parts = band_parts(sizes, level, data, fits, boots)
    est = corrected_point(sizes, data, fits, calibration)
    if not np.all(np.isfinite(parts["bootstrap_low"])):
        nan = np.full(len(sizes), math.nan)
        return nan, nan
    z = float(ndtri((1 + level) / 2))
    k2 = calibration.model_error_scale ** 2
    common = parts["families"] ** 2 + parts["model_error"] ** 2
    data2 = parts["data_set"] ** 2 + (calibration.relative_error * parts["level_distance"]) ** 2
    lo = est - z * np.sqrt(k2 * (parts["bootstrap_low"] ** 2 + common) + data2)
    hi = est + z * np.sqrt(k2 * (parts["bootstrap_high"] ** 2 + common) + data2)
    if data.constant:
        # no learning seen yet: up to the flat forecast's upper end as well
        flat = corrected_point(sizes, data, fits, calibration, constant=False)
        hi = np.maximum(hi, flat + (hi - est))
    nonneg = data.on != "train" and bool(np.nanmin(data.y) >= 0)
    if nonneg and (data.constant or not falls(data)):
        lo = np.where(sizes > data.n_max, np.minimum(lo, 0.0), lo)
    if NOISE_FLOOR:
        # never narrower than the interval of the measured mean nearby
        half = z * parts["noise_floor"]
        lo = np.minimum(lo, est - half)
        hi = np.maximum(hi, est + half)
    if nonneg:
        lo = np.maximum(lo, 0.0)  # an error or a gap measured >= 0 stays >= 0
    return lo, hi


def falls(data: FitData) -> bool:
    """Whether the curve falls from its smallest to its largest size by at least
    ``FLAT_Z`` standard errors, or from any other smaller size by a margin corrected for
    the extra comparisons (one-sided 2.5% split over them, Bonferroni), so one very noisy
    smallest size does not hide a clear fall after it. Always True for train error,
    which rises.

    Examples
    --------
    A fall hidden by a noisy first size (a least-squares regression's MSE):

    >>> from types import SimpleNamespace
    >>> d = SimpleNamespace(on="test", m=5, y=np.array([44850, 6624, 3697, 3174, 3065]),
    ...                     sem=np.array([24020, 589, 191, 188, 129]))
    >>> falls(d)
    True
    >>> falls(SimpleNamespace(on="test", m=3, y=np.array([0.30, 0.29, 0.30]),
    ...                       sem=np.array([0.01, 0.01, 0.01])))
    False
    """
    if data.on == "train" or data.m < 2:
        return True
    scale = noise_scale(data.sem)
    y = np.asarray(data.y, dtype=float)
    if scale is None:
        return bool(y[0] - y[-1] > 0)
    z = (y[:-1] - y[-1]) / np.hypot(scale[:-1], scale[-1])
    if z[0] >= FLAT_Z:
        return True
    return bool(np.max(z) >= ndtri(1.0 - 0.025 / max(len(z), 1)))


def data_variance_at(data: FitData, sizes) -> np.ndarray:
    """The fresh-data-set variance (``FitData.data_var``) interpolated in ln n between
    measured sizes and held constant beyond them."""
    sizes = np.asarray(sizes, dtype=float)
    if data.data_var is None or not data.m:
        return np.zeros(len(sizes))
    return np.interp(np.log(sizes), np.log(data.sizes), data.data_var)


def mean_band(d: FitData, level: float):
    """Interval of each measured per-size mean: its Student-t interval widened, in
    quadrature, by the variance a fresh data set would bring (the mean itself without
    repeats or that variance).

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
    if d.data_var is not None:
        half = np.sqrt(half ** 2 + float(ndtri((1 + level) / 2)) ** 2 * d.data_var)
    return d.y - half, d.y + half


def noise_half_width(d: FitData, sizes, level: float) -> np.ndarray:
    """Half-width of the interval of the measured mean (Student-t, widened by the
    fresh-data-set variance), interpolated in ln n between measured sizes and held
    constant beyond them (0 without repeats).

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
        return np.sqrt(data_variance_at(d, sizes)) * float(ndtri((1 + level) / 2))
    z = float(ndtri((1 + level) / 2))
    q = np.array([t_quantile(level, k - 1) if k >= 2 else z for k in d.repeats], dtype=float)
    student = np.interp(np.log(sizes), np.log(d.sizes), q * scale)
    return np.sqrt(student ** 2 + z ** 2 * data_variance_at(d, sizes))
