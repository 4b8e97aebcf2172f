"""Samples needed for a target: where the measured or fitted curve reaches it, in words.

Answers inside the measured range come from the measured means: the size after which
every measured mean stays at or below the target (interpolated linearly in ln n), so an
answer agrees with every measured point beyond it even when the curve dips and rises
again. The fitted curve answers only beyond the largest measured size, so a family that
disagrees with the measured points at small n cannot give an answer there; and beyond a
horizon (``HORIZON`` × the largest measured size) an answer is "more than N", never a
precise number.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from curvefit.core.estimate import Estimate
from curvefit.core.formatting import format_count, format_error, format_interval, format_quantity
from curvefit.fitting.data import FitData

# Answers are searched up to this many labelled samples.
SEARCH_LIMIT = 1e12
# Beyond this multiple of the largest measured size a prediction is an extrapolation to flag.
EXTRAPOLATION_FACTOR = 10.0
# Beyond this multiple of the largest measured size an answer is given as "more than N":
# two decades past the data no curve family is a measurement (common practice).
HORIZON = 100.0


@dataclass(frozen=True)
class Crossing:
    """Where a curve reaches the target: the point, its interval and its source.

    ``point`` is inf when the curve never reaches the target on the search grid, and the
    whole crossing lies beyond ``horizon`` when ``beyond_horizon`` is set. ``open_reason``
    says why ``high`` is unbounded ("" when it is not).
    """

    point: float
    low: float
    high: float
    source: str           # "measured" or "fitted"
    shifted: bool         # the fitted curve was moved to pass through the last measured mean
    horizon: float = math.inf
    beyond_horizon: bool = False
    open_reason: str = ""


def search_grid(d: FitData) -> np.ndarray:
    """Sizes searched beyond the data: from the largest measured size to SEARCH_LIMIT."""
    return np.geomspace(max(d.n_max, 1.0), SEARCH_LIMIT, 2400)


def find_crossing(d: FitData, target: float, grid, fitted, band, measured_band,
                  horizon: float = math.inf, widened: bool = False, level: float = 0.9,
                  shifted: bool = False) -> Crossing:
    """Where the target is reached: from the measured means when they stay at or below
    it, else from the fitted curve on ``grid``; each end of the interval likewise from
    the measured band (``measured_band``), else from the fitted ``band`` beyond the data.

    An end that the fitted band reaches only beyond ``horizon`` is open (``high``) or
    set to the horizon (``low``); ``widened`` says the band beyond the data carries more
    than the bootstrap (model error, family spread), which is then the reason for an
    open upper end; ``shifted`` that ``fitted`` and ``band`` were moved to pass through
    the last measured mean.
    """
    lo_band, hi_band = band
    mean_lo, mean_hi = measured_band
    point_meas = measured_crossing(d.sizes, d.y, target)
    if math.isfinite(point_meas):
        point, source = point_meas, "measured"
    else:
        point, source = first_crossing(fitted[None, :], grid, target)[0], "fitted"
    has_band = bool(np.all(np.isfinite(lo_band)))
    low = measured_crossing(d.sizes, mean_lo, target)
    if not math.isfinite(low) and has_band:
        low = first_crossing(lo_band[None, :], grid, target)[0]
    high = measured_crossing(d.sizes, mean_hi, target)
    measured_high = math.isfinite(high)
    if not measured_high and has_band:
        high = first_crossing(np.where(np.isfinite(hi_band), hi_band, np.inf)[None, :],
                              grid, target)[0]
    if not has_band and source == "fitted":
        low = high = math.nan
    if math.isfinite(point):
        low = low if math.isnan(low) else min(low, point)
        high = high if math.isnan(high) else max(high, point)
    beyond = math.isfinite(point) and point > horizon
    reason = ""
    if not math.isnan(high) and high > horizon:
        upto = f"up to the horizon ({format_count(horizon)} samples)"
        edge = f"the band's upper edge stays above the target {upto}"
        if source == "measured" and not np.any(mean_hi <= target):
            reason = ("within the measured sizes the intervals of the means never fall wholly "
                      f"below the target, and beyond them {edge}")
        elif widened:
            reason = (f"{edge}: beyond the data the band carries, besides the bootstrap, the "
                      "model error seen in forecast validation and on the curve corpus, and the "
                      "spread between families")
        else:
            reason = (f"more than {(1 - level) / 2:.0%} of the bootstrap curves stay above the "
                      f"target {upto}")
        high = math.inf
    if not math.isnan(low) and low > horizon:
        low = horizon
    return Crossing(float(point), float(low), float(high), source, bool(shifted),
                    float(horizon), bool(beyond), reason)


def unreachable_text(what: str, target_text: str, asym: Estimate | None, asym_text: str,
                     target: float, level: float, low: float = math.inf) -> tuple[str, list]:
    """The message and cautions when more data does not reach the target; ``low`` is
    where the lower edge of the band reaches it (finite when it does)."""
    cautions = []
    if asym is not None and math.isfinite(asym.estimate):
        message = (f"A {what} of {target_text} is not reachable by more data with this model: "
                   f"the {what} {asym_text}.")
        if math.isfinite(asym.low) and asym.low <= target:
            cautions.append(f"the {level:.0%} interval of that level reaches below the "
                            "target, so this is uncertain; larger measured sizes would settle it")
    else:
        message = (f"A {what} of {target_text} is not reachable by more data with this model: "
                   f"the fitted curve does not fall that low within {format_count(SEARCH_LIMIT)} "
                   "samples.")
    if math.isfinite(low):
        cautions.append(f"the {level:.0%} band reaches the target from about "
                        f"{format_count(low)} labelled samples (interval {format_count(low)} "
                        "to no upper limit)")
    if cautions:
        message += " Note: " + "; ".join(cautions) + "."
    return message, cautions


def horizon_text(what: str, target_text: str, c: Crossing, d: FitData, level: float) -> str:
    """The answer when the curve reaches the target only beyond the horizon."""
    start = (f"; the {level:.0%} interval starts at about {format_count(c.low)}"
             if math.isfinite(c.low) and c.low < c.horizon else "")
    return (f"A {what} of {target_text} needs more than {format_count(c.horizon)} labelled "
            f"samples ({c.horizon / d.n_max:g}× the largest measured size, {d.n_max:,.0f}); "
            f"this curve cannot say how much more{start}.")


def answer_text(d: FitData, n: float, c: Crossing, kind: str, target: float, level: float,
                metric: str, family: str, logarithmic: bool,
                info: dict | None = None, floor: str = "") -> tuple[str, list]:
    """The message and cautions of a reachable answer of ``n`` samples; ``info`` is the
    curve's ``metric_info``, whose label names the loss; ``floor`` describes the chosen
    family's level when its interval lies above the target (the averaged forecast
    reaches the target all the same)."""
    tgt = format_error(target, metric)
    reached = format_quantity(target, kind, metric, info)
    count = format_count(n)
    interval = count_interval_text(c.low, c.high, level)
    if c.source == "measured" and n <= float(d.sizes[0]):
        message = (f"The measured curve already reaches {reached} at its smallest "
                   f"measured size, {count} labelled samples (fewer were not measured).")
    elif c.source == "measured":
        j = int(np.searchsorted(d.sizes, n))
        between = (f", between the measured sizes {d.sizes[j - 1]:,.0f} and "
                   f"{d.sizes[j]:,.0f}" if 0 < j < d.m and d.sizes[j] != n else "")
        message = (f"The measured curve already reaches {reached} at about "
                   f"{count} labelled samples{between}{interval}, and stays at or below it "
                   "at every larger measured size.")
    elif kind == "test_error":
        message = f"To reach {reached} you need about {count} labelled samples{interval}."
    else:
        message = (f"To bring the generalization gap down to {tgt} you need about "
                   f"{count} labelled samples{interval}.")
    cautions = _answer_cautions(d, n, c, target, metric, family, logarithmic)
    if floor:
        cautions.insert(0, f"the averaged forecast of the families reaches the target, but "
                           f"the chosen family {family} {floor}, so this is uncertain")
    if cautions:
        message += " Note: " + "; ".join(cautions) + "."
    return message, cautions


def _answer_cautions(d: FitData, n: float, c: Crossing, target: float, metric: str,
                     family: str, logarithmic: bool) -> list:
    cautions = []
    if c.source == "fitted" and c.shifted:
        cautions.append(f"the fitted curve is already at the target at the largest "
                        f"measured size ({d.n_max:,.0f}), where the measured mean "
                        f"({format_error(float(d.y[-1]), metric)}) is not; the answer follows "
                        "the fitted shape from the measured mean and is rough")
    if n > EXTRAPOLATION_FACTOR * d.n_max:
        cautions.append(f"this is more than {EXTRAPOLATION_FACTOR:g}× the largest measured "
                        f"size ({d.n_max:,.0f}), a long extrapolation")
    if logarithmic and c.source == "fitted":
        cautions.append(f"the {family} curve falls only logarithmically, so small "
                        "changes in its fit move this answer a lot")
    if math.isinf(c.high):
        cautions.append((c.open_reason or "the band's upper edge never reaches the target")
                        + ", so the interval has no upper limit")
    return cautions


def count_interval_text(low: float, high: float, level: float) -> str:
    """`` (90% interval 2,130–4,180)`` for a sample-count interval; "" when it is unknown.

    Examples
    --------
    >>> count_interval_text(2131.0, float("inf"), 0.9)
    ' (90% interval 2,130 to no upper limit)'
    >>> count_interval_text(float("nan"), float("nan"), 0.9)
    ''
    """
    if not math.isfinite(low) and not math.isfinite(high):
        return ""
    return f" ({format_interval(low, high, level, kind='count')})"


def first_crossing(F: np.ndarray, grid: np.ndarray, target: float) -> np.ndarray:
    """Smallest n on the log grid where each row of F falls to the target (inf if never)."""
    below = F <= target
    has = below.any(axis=1)
    i = np.argmax(below, axis=1)
    out = np.full(F.shape[0], math.inf)
    for r in np.nonzero(has)[0]:
        k = i[r]
        if k == 0:
            out[r] = grid[0]
            continue
        f0, f1 = F[r, k - 1], F[r, k]
        frac = (f0 - target) / (f0 - f1) if f0 != f1 else 1.0
        frac = min(max(frac, 0.0), 1.0)
        out[r] = math.exp(math.log(grid[k - 1]) + frac * (math.log(grid[k]) - math.log(grid[k - 1])))
    return out


def measured_crossing(sizes: np.ndarray, values: np.ndarray, target: float) -> float:
    """The size after which the measured values stay at or below the target: between the
    last size above it and the next one (linear in ln n); the smallest size when none is
    above; inf when the largest size is above it.

    A curve that dips below the target and rises again is answered after its last rise,
    so the answer agrees with every measured value beyond it.

    Examples
    --------
    >>> round(measured_crossing(np.array([100.0, 400.0]), np.array([0.3, 0.1]), 0.2))
    200
    >>> sizes = np.array([30.0, 100.0, 400.0, 1600.0])
    >>> round(measured_crossing(sizes, np.array([0.3, 0.15, 0.25, 0.1]), 0.2))   # after the rise
    635
    >>> measured_crossing(sizes, np.array([0.3, 0.15, 0.1, 0.25]), 0.2)
    inf
    """
    values = np.asarray(values, dtype=float)
    above = np.nonzero(~(values <= target))[0]  # NaN counts as not below
    if not len(above):
        return float(sizes[0])
    i = int(above[-1])
    if i == len(values) - 1:
        return math.inf
    v0, v1 = float(values[i]), float(values[i + 1])
    frac = (v0 - target) / (v0 - v1) if v0 != v1 and math.isfinite(v0) else 1.0
    frac = min(max(frac, 0.0), 1.0)
    return float(math.exp(math.log(sizes[i]) + frac * (math.log(sizes[i + 1]) - math.log(sizes[i]))))
