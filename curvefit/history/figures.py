"""Headline figures of a run and the rule that says whether a run regressed.

A nightly job retrains a model and measures its learning curve; what matters for a
team is whether the model became less data-efficient. Each run is summarised by a few
*headline figures*, each a point estimate with a bootstrap interval and a direction:

============================  =========  ===============================================
name                          better     meaning
============================  =========  ===============================================
``test_error_at_ref``         lower      fitted test error at the series' reference size
``decay_exponent``            higher     rate at which test error falls with more data
``asymptote``                 lower      fitted irreducible error (error as n → ∞)
``samples_for_target``        lower      labelled samples needed for the target error
``effective_capacity``        (none)     effective VC dimension from the measured gap;
                                         reported, never gates
============================  =========  ===============================================

Sign of the exponent. With the power law ``e(n) = γ + α·n^β`` (Hestness et al. 2017),
``β`` is negative for a falling curve. ``decay_exponent`` is ``b = −β ≥ 0`` so that a
larger value always means "error falls faster as labels are added". A *smaller*
``decay_exponent`` is a slower decay and therefore worse: its direction is "higher".

Regression rule: a figure regressed when it is worse than the baseline's by more than
its tolerance (absolute, or relative to the baseline's value) **and** the two intervals
do not overlap. Both conditions are needed: the tolerance stops tiny but well-measured
changes from failing a build, and the interval test stops noise from doing so. This is a
statistical screen, not a guarantee.

Two safeguards keep the interval test honest. The intervals of ``test_error_at_ref``,
``asymptote`` and ``samples_for_target`` are never narrower than the measurement noise
at the nearest measured size (`measurement_interval`). And the parameters of the chosen
family (``decay_exponent``, ``asymptote``) are compared only when both runs chose the
same family; the exponent is not gated with fewer than 3 repeats per size. A figure
recorded as not gated (``better`` None) is shown but never fails a build.

This module is pure: it reads result objects and returns new ones; it performs no I/O.
"""

from __future__ import annotations

import math
import re
from dataclasses import asdict, dataclass, field
from typing import Any, Iterable, Mapping

from curvefit.core.defaults import INTERVAL
from curvefit.core.errors import InputError
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import MISSING, format_count, format_error, format_estimate, format_value
from curvefit.core.stats import clopper_pearson, t_interval

LOWER, HIGHER = "lower", "higher"
# Figures that are parameters of the chosen family: compared only within one family.
FAMILY_BOUND = ("decay_exponent", "asymptote", "samples_for_target")
# Figures that compare the run's measured curve with its baseline's (see
# `curvefit.history.efficiency`): the default gate.
EFFICIENCY = ("efficiency_ratio", "error_area")
DEFAULT_GATE = EFFICIENCY
# Below this many repeats per size the exponent is reported but never gated.
MIN_REPEATS_FOR_EXPONENT = 3

# name -> (direction, one-line label for tables)
FIGURES: dict[str, tuple[str | None, str]] = {
    "test_error_at_ref": (LOWER, "test error at reference size"),
    "decay_exponent": (HIGHER, "decay exponent"),
    "asymptote": (LOWER, "asymptote"),
    "samples_for_target": (LOWER, "samples for target error"),
    "effective_capacity": (None, "effective capacity (VC units)"),
    "efficiency_ratio": (LOWER, "labels needed vs baseline (×, geometric mean over sizes)"),
    "error_area": (LOWER, "test error difference averaged over ln n"),
}
# name -> how its values read (a kind of `curvefit.core.formatting.format_value`)
FIGURE_KINDS = {"test_error_at_ref": "error", "decay_exponent": "number",
                "asymptote": "error", "samples_for_target": "count",
                "effective_capacity": "capacity", "efficiency_ratio": "number",
                "error_area": "error"}

# Defaults chosen as common practice: one percentage point of error, a fifth of the
# exponent, a quarter of the labels. Numbers are absolute, strings "N%" relative.
DEFAULT_TOLERANCES: dict[str, "Tolerance"] = {}


@dataclass(frozen=True)
class Tolerance:
    """How much worse a figure may get before it counts: ``value`` absolute, or
    ``value`` × |baseline| when ``relative``."""

    value: float
    relative: bool = False

    def threshold(self, baseline: float) -> float:
        return self.value * abs(baseline) if self.relative else self.value

    def __str__(self) -> str:
        return f"{self.value * 100:g}%" if self.relative else f"{self.value:g}"


DEFAULT_TOLERANCES.update({
    "test_error_at_ref": Tolerance(0.01),
    "decay_exponent": Tolerance(0.20, relative=True),
    "asymptote": Tolerance(0.01),
    "samples_for_target": Tolerance(0.25, relative=True),
    "effective_capacity": Tolerance(0.25, relative=True),
    # a tenth more labels; a fifth of a percentage point of error (common practice)
    "efficiency_ratio": Tolerance(0.10),
    "error_area": Tolerance(0.002),
})


@dataclass(frozen=True)
class Figure:
    """One headline figure of a run: estimate, interval, level and direction.

    ``better`` is ``"lower"``, ``"higher"`` or ``None`` (informational, never gates).
    ``estimate`` may be ``inf`` for ``samples_for_target`` when the fitted curve never
    reaches the target.
    """

    name: str
    estimate: float
    low: float = math.nan
    high: float = math.nan
    level: float = INTERVAL
    better: str | None = None
    note: str = ""

    @property
    def interval(self) -> Estimate:
        return Estimate(self.estimate, self.low, self.high, self.level)

    def to_dict(self) -> dict:
        return asdict(self)

    def __repr__(self) -> str:
        return (f"Figure({self.name}={self.estimate:.6g}, {self.level:.0%} interval "
                f"{self.low:.6g}–{self.high:.6g}, better={self.better})")


def make_figure(name: str, estimate: float, low: float = math.nan, high: float = math.nan,
                level: float = INTERVAL, note: str = "") -> Figure:
    """A `Figure` with the direction registered for ``name`` (None for unknown names)."""
    better = FIGURES.get(name, (None, ""))[0]
    return Figure(name, _float(estimate), _float(low), _float(high), float(level), better, note)


def _float(v: Any) -> float:
    try:
        return math.nan if v is None else float(v)
    except (TypeError, ValueError):
        return math.nan


# --------------------------------------------------------------------- figures from a fit
def headline_figures(fit: Any, *, reference_size: int, target_error: float | None = None,
                     capacity: Any = None, interval: float = INTERVAL,
                     curve: Any = None) -> list[Figure]:
    """Headline figures of one run, read from its curve fit.

    Parameters
    ----------
    fit : CurveFit
        Result of `curvefit.fitting.engine.fit_curve`; uses ``.error_at``, ``.exponent``,
        ``.asymptote`` and ``.samples_for``, each with bootstrap intervals.
    reference_size : int
        Sample size at which the test error is read off the fitted curve (fixed per
        series so that runs are compared at the same size).
    target_error : float, optional
        Test error the series aims for; gives ``samples_for_target``.
    capacity : CapacityEstimate, optional
        Effective capacity of the run (``vc_dim``, ``low``, ``high``); omitted if None.
    interval : float
        Level of every interval, e.g. 0.9.
    curve : Curve, optional
        The measured curve (default: ``fit.curve``). The interval of
        ``test_error_at_ref`` is widened to at least the measurement noise at the
        measured size nearest the reference (see `measurement_interval`): a fit that
        borrows strength across sizes can report an interval narrower than what the
        repeats at that size support, and the gate would then fire on seed noise.

    Returns
    -------
    list of Figure
        Figures that the fit can give; a family without an asymptote or exponent simply
        yields fewer figures.

    References
    ----------
    .. [1] J. Hestness et al., "Deep Learning Scaling is Predictable, Empirically",
       arXiv:1712.00409, 2017 (power law with a floor, exponent β < 0).
    .. [2] C. Cortes, L. D. Jackel, S. A. Solla, V. Vapnik, J. S. Denker, "Learning
       curves: asymptotic values and rate of convergence", NIPS 6, 1994.
    """
    figs: list[Figure] = []
    est = fit.error_at(reference_size, interval=interval)
    low, high, note = est.low, est.high, f"n={int(reference_size)}"
    curve = curve if curve is not None else getattr(fit, "curve", None)
    if curve is not None and math.isfinite(_float(est.estimate)):
        low, high, widened = _widen(est.estimate, low, high,
                                    measurement_interval(curve, reference_size, interval))
        note += f"; {widened}" if widened else ""
    figs.append(make_figure("test_error_at_ref", est.estimate, low, high, interval, note=note))
    expo = _call_optional(fit, "exponent", interval)
    if expo is not None and math.isfinite(_float(expo.estimate)):
        fig = decay_figure(expo, interval, family=getattr(fit, "best", None))
        fewest = _fewest_repeats(curve)
        if fewest is not None and fewest < MIN_REPEATS_FOR_EXPONENT:
            # measured here (same model, data and sizes, seeds 0-7): with 2 repeats the
            # bootstrap interval of the exponent misses seed-to-seed changes of 10x
            fig = Figure(fig.name, fig.estimate, fig.low, fig.high, fig.level, None,
                         f"{fig.note}; not gated: fewer than {MIN_REPEATS_FOR_EXPONENT} "
                         "repeats at some size")
        figs.append(fig)
    asym = _call_optional(fit, "asymptote", interval)
    if asym is not None and math.isfinite(_float(asym.estimate)):
        lo, hi, note = asym.low, asym.high, ""
        if curve is not None and len(curve.sizes):
            # the floor is known no better than the error at the largest measured size
            m = measurement_interval(curve, float(curve.sizes.max()), interval)
            lo, hi, note = _widen(asym.estimate, lo, hi, m)
        family = getattr(fit, "best", None)
        if family:
            note = f"family {family}; {note}" if note else f"family {family}"
        figs.append(make_figure("asymptote", asym.estimate, lo, hi, interval, note=note))
    if target_error is not None:
        sample = fit.samples_for(test_error=float(target_error), interval=interval)
        fig = samples_figure(sample, target_error, interval,
                             metric=curve.metric if curve is not None else "error")
        if curve is not None and math.isfinite(fig.estimate) and len(curve.sizes):
            fig = _widen_samples(fig, fit, curve, float(target_error), interval)
            fig = _check_below_range(fig, curve, float(target_error))
        fig = whole_counts(fig)
        family = getattr(fit, "best", None)
        if family:
            # the answer is read off the chosen family: compared only within one family
            fig = Figure(fig.name, fig.estimate, fig.low, fig.high, fig.level, fig.better,
                         f"{fig.note}; family {family}")
        figs.append(fig)
    if capacity is not None:
        vc = _float(getattr(capacity, "vc_dim", math.nan))
        if math.isfinite(vc):
            note = "lower bound (above probed range)" if getattr(capacity, "above_range", False) else ""
            figs.append(make_figure("effective_capacity", vc, getattr(capacity, "low", math.nan),
                                    getattr(capacity, "high", math.nan), interval, note=note))
    return figs


def _widen(est: float, low: float, high: float, m: "_Measured | None") -> tuple[float, float, str]:
    """Envelope of an interval and ``est`` ± the measurement noise ``m``."""
    if m is None:
        return low, high, ""
    new_low = min(_nan_to(low, math.inf), est - (m.estimate - m.low))
    new_high = max(_nan_to(high, -math.inf), est + (m.high - m.estimate))
    widened = new_low < _nan_to(low, math.inf) or new_high > _nan_to(high, -math.inf)
    return (max(new_low, 0.0) if est >= 0 else new_low, new_high,
            f"interval widened to the measurement noise at n={int(m.note)}" if widened else "")


def _widen_samples(fig: Figure, fit: Any, curve: Any, target: float, interval: float) -> Figure:
    """Widen ``samples_for_target`` by the error-level noise carried through the curve.

    If the error near the answer is known only to ± the measurement noise there, the
    fitted curve reaches the target somewhere between where it reaches
    ``target + down`` and ``target − up``; both are read off the same fit.
    """
    m = measurement_interval(curve, min(max(fig.estimate, 1.0), float(curve.sizes.max())), interval)
    if m is None:
        return fig
    down, up = m.estimate - m.low, m.high - m.estimate
    n_low, n_high = fig.estimate, fig.estimate
    if down > 0:
        n_low = fit.samples_for(test_error=target + down, interval=interval).n
    if up > 0:
        n_high = fit.samples_for(test_error=max(target - up, 0.0), interval=interval).n
    n_low = _nan_to(n_low, fig.estimate)
    n_high = math.inf if not math.isfinite(_float(n_high)) else float(n_high)
    low = min(_nan_to(fig.low, math.inf), n_low)
    high = max(_nan_to(fig.high, -math.inf), n_high)
    note = fig.note
    if low < _nan_to(fig.low, math.inf) or high > _nan_to(fig.high, -math.inf):
        note += f"; interval widened to the measurement noise at n={int(m.note)}"
    return Figure(fig.name, fig.estimate, low, high, fig.level, fig.better, note)


def _check_below_range(fig: Figure, curve: Any, target: float) -> Figure:
    """Do not gate an answer below the smallest measured size that the data contradict.

    When the fit says the target is met below the smallest measured size but the
    measured mean error there is still above the target, the fitted curve is
    extrapolating towards tiny samples where it is not supported.
    """
    ok = curve.ok_points()
    smallest = float(curve.sizes.min())
    first = float(ok[ok["size"] == smallest]["test_error"].mean())
    if fig.estimate < smallest and first > target:
        return Figure(fig.name, fig.estimate, fig.low, fig.high, fig.level, None,
                      f"{fig.note}; not gated: the fit answers below the smallest measured "
                      f"size ({int(smallest)}) where the measured error "
                      f"{format_error(first, curve.metric)} is above the target")
    return fig


def _fewest_repeats(curve: Any) -> int | None:
    if curve is None:
        return None
    ok = curve.ok_points()
    return int(ok.groupby("size").size().min()) if not ok.empty else None


def _nan_to(v: float, default: float) -> float:
    v = _float(v)
    return default if math.isnan(v) else v


@dataclass(frozen=True)
class _Measured:
    estimate: float
    low: float
    high: float
    note: float  # the measured size used


def measurement_interval(curve: Any, size: float, interval: float = INTERVAL) -> _Measured | None:
    """How well the mean test error is known at the measured size nearest ``size``.

    Two lower limits on the uncertainty of the mean over the ``R`` repeats there, and
    the wider of the two is returned: the Student-t interval of the repeats' mean
    (``t_{R−1} · s / √R``), and, for 0-1 error, the exact Clopper–Pearson interval of
    the pooled test mistakes ``K`` out of ``N`` test rows. The pooled interval
    treats the repeats' test sets as independent, so it is a floor, not an estimate
    of all the noise (training-set variation adds to it).

    Returns None when the curve has no successful cell.

    References
    ----------
    .. [1] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits
       illustrated in the case of the binomial", Biometrika 26(4), 1934.
    .. [2] "Student" (W. S. Gosset), "The probable error of a mean", Biometrika 6(1), 1908.

    Examples
    --------
    >>> import pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> c = Curve.from_table(pd.DataFrame({"size": [100, 100], "test_error": [0.1, 0.1],
    ...                                    "n_test": [100, 100], "n_test_errors": [10, 10]}))
    >>> m = measurement_interval(c, 100, 0.95)  # 20 of 200 wrong, exact interval
    >>> round(m.low, 4), round(m.high, 4)
    (0.0622, 0.1502)
    """
    import numpy as np

    ok = curve.ok_points()
    if ok.empty:
        return None
    sizes = np.sort(ok["size"].unique()).astype(float)
    nearest = sizes[int(np.argmin(np.abs(np.log(sizes) - math.log(max(float(size), 1e-12)))))]
    g = ok[ok["size"] == nearest]
    mean = float(g["test_error"].mean())
    lo, hi = mean, mean
    if len(g) >= 2:
        t = t_interval(g["test_error"], interval)
        lo, hi = t.low, t.high
    if g["n_test_errors"].notna().all() and g["n_test"].notna().all():
        k, n = int(round(g["n_test_errors"].sum())), int(round(g["n_test"].sum()))
        if n >= 1 and 0 <= k <= n:
            low, high = clopper_pearson(k, n, interval)
            p = k / n
            # centre the exact interval on the repeats' mean (equal to k/n for equal n_test)
            lo, hi = min(lo, mean - (p - low)), max(hi, mean + (high - p))
    return _Measured(mean, lo, hi, nearest)


def _call_optional(fit: Any, method: str, interval: float):
    fn = getattr(fit, method, None)
    if fn is None:
        return None
    return fn(interval=interval)


def decay_figure(exponent: Estimate, interval: float = INTERVAL, family: str | None = None) -> Figure:
    """``decay_exponent`` from `CurveFit.exponent`.

    `CurveFit.exponent` already reports the decay rate ``b`` of ``a·n^(−b)`` (``b > 0``
    for a falling curve), which is ``−β`` in Hestness et al.'s ``α·n^β``; it is kept
    as is, so a rising curve shows up as a negative (and therefore worse) value.
    The chosen family is kept in the note (``family power-law-floor``): exponents of different
    families are different parameters, and are not gated against each other.

    Examples
    --------
    >>> decay_figure(Estimate(0.3, 0.2, 0.4)).better
    'higher'
    """
    note = f"family {family}" if family else ""
    return make_figure("decay_exponent", exponent.estimate, exponent.low, exponent.high,
                       interval, note=note)


def _family(fig: Figure) -> str | None:
    for part in fig.note.split(";"):
        part = part.strip()
        if part.startswith("family "):
            return part[len("family "):]
    return None


def samples_figure(sample_estimate: Any, target_error: float, interval: float = INTERVAL,
                   metric: str = "error") -> Figure:
    """``samples_for_target`` from a `SampleEstimate`; ``inf`` when unreachable.

    Examples
    --------
    >>> class Answer:
    ...     n, low, high, reachable = 800.0, 700.0, 950.0, True
    >>> samples_figure(Answer(), 0.05).note
    'target 5.0%'
    """
    reachable = bool(getattr(sample_estimate, "reachable", True))
    n = _float(getattr(sample_estimate, "n", math.nan))
    lo = _float(getattr(sample_estimate, "low", math.nan))
    hi = _float(getattr(sample_estimate, "high", math.nan))
    note = f"target {format_error(target_error, metric)}"
    if not reachable or not math.isfinite(n):
        # Unreachable: the need is unbounded; keep the lower end if the fit gave one.
        n, hi = math.inf, math.inf
        note += "; not reachable (the fitted curve levels off above it)"
    elif not math.isfinite(hi):
        hi = math.inf
    return whole_counts(make_figure("samples_for_target", n, lo, hi, interval, note=note))


def whole_counts(fig: Figure) -> Figure:
    """A count figure in whole samples: each finite end rounded up (n samples reach the
    target, so 70.9 means 71); infinite and missing ends are kept.

    Examples
    --------
    >>> f = whole_counts(make_figure("samples_for_target", 812.2, 70.9, math.inf))
    >>> f.estimate, f.low, f.high
    (813.0, 71.0, inf)
    """
    def up(v: float) -> float:
        return float(math.ceil(v - 1e-9)) if math.isfinite(v) else v

    return Figure(fig.name, up(fig.estimate), up(fig.low), up(fig.high), fig.level, fig.better,
                  fig.note)


BASELINE_RULES = ("accepted", "previous", "best")


def check_baseline(baseline: Any) -> str | int:
    """``"accepted"``, ``"previous"``, ``"best"`` or a run id (int); anything else is an
    `InputError`.

    ``accepted`` (the default) is the run a person last accepted (``track --accept``),
    or the series' first run; ``previous`` is the latest earlier run that passed. A run
    that failed the gate becomes a baseline only when accepted.

    Examples
    --------
    >>> check_baseline("Best"), check_baseline("12"), check_baseline("accepted")
    ('best', 12, 'accepted')
    """
    text = str(baseline).strip().lower()
    if text in BASELINE_RULES:
        return text
    try:
        rid = int(text)
    except ValueError:
        rid = 0
    if rid <= 0 or isinstance(baseline, bool):
        raise InputError(f"baseline must be 'accepted', 'previous', 'best' or a run id; got {baseline!r}")
    return rid


# --------------------------------------------------------------------- tolerances
def parse_tolerance(name: str, value: Any) -> Tolerance:
    """A number is absolute; a string ``"20%"`` is relative; ``{"relative": 0.2}`` or
    ``{"absolute": 0.01}`` are spelled out.

    Examples
    --------
    >>> parse_tolerance("asymptote", 0.02)
    Tolerance(value=0.02, relative=False)
    >>> parse_tolerance("samples_for_target", "30%")
    Tolerance(value=0.3, relative=True)
    """
    if isinstance(value, Tolerance):
        return value
    bad = InputError(f"tolerance for {name!r} must be a number (absolute), a string like "
                     f"'20%' (relative) or {{relative = 0.2}}; got {value!r}")
    if isinstance(value, bool):
        raise bad
    if isinstance(value, (int, float)):
        v, rel = float(value), False
    elif isinstance(value, str):
        s = value.strip()
        try:
            v, rel = (float(s[:-1]) / 100.0, True) if s.endswith("%") else (float(s), False)
        except ValueError:
            raise bad from None
    elif isinstance(value, Mapping) and len(value) == 1 and set(value) <= {"relative", "absolute"}:
        key = next(iter(value))
        try:
            v, rel = float(value[key]), key == "relative"
        except (TypeError, ValueError):
            raise bad from None
    else:
        raise bad
    if not math.isfinite(v) or v < 0:
        raise InputError(f"tolerance for {name!r} must be finite and >= 0; got {value!r}")
    return Tolerance(v, rel)


def resolve_tolerances(*layers: Mapping[str, Any] | None) -> dict[str, Tolerance]:
    """Defaults overridden by each layer in turn (series config, then the caller)."""
    tol = dict(DEFAULT_TOLERANCES)
    for layer in layers:
        for name, value in (layer or {}).items():
            if name not in FIGURES:
                raise InputError(f"unknown figure {name!r} in tolerances; "
                                 f"known: {', '.join(FIGURES)}")
            tol[name] = parse_tolerance(name, value)
    return tol


def tolerances_to_config(tol: Mapping[str, Any] | None) -> dict[str, Any]:
    """Tolerances as plain JSON values (numbers absolute, "N%" relative)."""
    outd: dict[str, Any] = {}
    for name, value in (tol or {}).items():
        t = parse_tolerance(name, value)
        outd[name] = f"{t.value * 100:g}%" if t.relative else t.value
    return outd


def check_gate(gate: Any) -> tuple[str, ...]:
    """The figures that gate: a list of names, ``"efficiency"`` (the default:
    `EFFICIENCY`) or ``"all"`` (every figure with a direction).

    Examples
    --------
    >>> check_gate("efficiency")
    ('efficiency_ratio', 'error_area')
    >>> check_gate(["test_error_at_ref"])
    ('test_error_at_ref',)
    """
    if gate is None or gate == "efficiency":
        return DEFAULT_GATE
    if gate == "all":
        return tuple(n for n, (better, _) in FIGURES.items() if better is not None)
    names = [gate] if isinstance(gate, str) else list(gate) if isinstance(gate, (list, tuple)) else None
    if names is None:
        raise InputError(f"gate must be 'efficiency', 'all' or a list of figure names; got {gate!r}")
    names = [str(n).strip() for n in names for n in str(n).split(",") if str(n).strip()]
    unknown = [n for n in names if n not in FIGURES]
    if unknown or not names:
        raise InputError(f"unknown figure {', '.join(unknown) or '(none)'} in the gate; known: "
                         f"{', '.join(FIGURES)}, or 'efficiency' / 'all'")
    return tuple(dict.fromkeys(names))


def null_figure(name: str, level: float = INTERVAL) -> Figure:
    """The "no change" value of a comparative figure, as the baseline side of a comparison."""
    from curvefit.history.efficiency import NULL_VALUE

    v = NULL_VALUE[name]
    return make_figure(name, v, v, v, level, note="no change")


def efficiency_figures(eff: Any, baseline_id: int | None = None) -> list[Figure]:
    """``efficiency_ratio`` and ``error_area`` from a `curvefit.history.efficiency.Efficiency`.

    Examples
    --------
    >>> from curvefit.history.efficiency import Efficiency
    >>> figs = efficiency_figures(Efficiency(1.9, 1.5, 2.4, 0.01, 0.005, 0.02, 0.9), 3)
    >>> figs[0].note
    'vs run 3'
    """
    note = f"vs run {baseline_id}" if baseline_id is not None else ""
    if getattr(eff, "paired", False):
        note += "; paired by repeat (same splits)"
    extra = f"; {eff.clipped} size(s) beyond the measured range, clipped" if eff.clipped else ""
    if getattr(eff, "lower_bound", False):
        extra = f"; {LOWER_BOUND}"
    elif getattr(eff, "upper_bound", False):
        extra = f"; {UPPER_BOUND}"
    worse = getattr(eff, "holm_worse", [])
    holm = f"; worse at n={', '.join(str(n) for n in worse)} (Holm)" if worse else ""
    return [make_figure("efficiency_ratio", eff.ratio, eff.ratio_low, eff.ratio_high, eff.level,
                        note=note + extra),
            make_figure("error_area", eff.area, eff.area_low, eff.area_high, eff.level,
                        note=note + holm)]


LOWER_BOUND = "lower bound: the run never reached the baseline's errors within its sizes"
UPPER_BOUND = "upper bound: the run beat every baseline error at its smallest size"


def ratio_sentence(f: Figure) -> str:
    """The ratio in words, e.g. "needs 1.9× the labels (90% interval 1.5–2.4×)".

    Examples
    --------
    >>> ratio_sentence(make_figure("efficiency_ratio", 1.9, 1.5, 2.4, 0.9))
    "needs 1.9× the baseline's labels (90% interval 1.5–2.4×)"
    >>> ratio_sentence(make_figure("efficiency_ratio", 3.5, 3.5, 3.5, 0.9, note=LOWER_BOUND))
    "needs more than 3.5× the baseline's labels (it never reached the baseline's errors within its sizes)"
    """
    if LOWER_BOUND in f.note:
        return (f"needs more than {f.estimate:.2g}× the baseline's labels (it never reached "
                "the baseline's errors within its sizes)")
    if UPPER_BOUND in f.note:
        return (f"needs less than {f.estimate:.2g}× the baseline's labels (it beat every "
                "baseline error at its smallest size)")
    return (f"needs {f.estimate:.2g}× the baseline's labels ({f.level:.0%} interval "
            f"{f.low:.2g}–{f.high:.2g}×)")


# --------------------------------------------------------------------- comparison
@dataclass(frozen=True)
class FigureChange:
    """One figure compared with the baseline's.

    ``worse_by`` is positive when the current run is worse (in the figure's direction);
    ``status`` is ``"regressed"``, ``"improved"``, ``"same"`` (within tolerance or
    overlapping intervals), ``"info"`` (no direction, or exponents of two different
    fitted families) or ``"missing"`` (absent on one side).
    """

    name: str
    current: Figure | None
    baseline: Figure | None
    better: str | None
    worse_by: float
    tolerance: Tolerance | None
    overlap: bool
    status: str
    gated: bool = True

    def to_dict(self) -> dict:
        return {"name": self.name, "gated": self.gated,
                "current": self.current.to_dict() if self.current else None,
                "baseline": self.baseline.to_dict() if self.baseline else None,
                "better": self.better, "worse_by": self.worse_by,
                "tolerance": str(self.tolerance) if self.tolerance else None,
                "overlap": self.overlap, "status": self.status}


def compare_figure(current: Figure | None, baseline: Figure | None,
                   tolerance: Tolerance | None) -> FigureChange:
    """Apply the regression rule to one figure (see the module docstring).

    Examples
    --------
    >>> a = make_figure("test_error_at_ref", 0.10, 0.09, 0.11)
    >>> b = make_figure("test_error_at_ref", 0.15, 0.14, 0.16)
    >>> compare_figure(b, a, Tolerance(0.01)).status
    'regressed'
    >>> compare_figure(a, b, Tolerance(0.01)).status
    'improved'
    """
    ref = current or baseline
    name = ref.name if ref else "?"
    better = ref.better if ref else None
    if current is not None and baseline is not None and current.better != baseline.better:
        better = None  # one side was recorded as not gated
    if current is None or baseline is None or _nan(current.estimate) or _nan(baseline.estimate):
        return FigureChange(name, current, baseline, better, math.nan, tolerance, True, "missing")
    overlap = current.interval.overlaps(baseline.interval)
    if name in FAMILY_BOUND and _family(current) != _family(baseline):
        # another family was chosen: its exponent (or its floor, fixed at 0 by some
        # families) is another parameter, so report only
        better = None
    if better is None:
        diff = current.estimate - baseline.estimate
        return FigureChange(name, current, baseline, None, diff, tolerance, overlap, "info")
    if current.estimate == baseline.estimate:
        worse_by = 0.0  # also covers inf == inf (both unreachable)
    elif better == LOWER:
        worse_by = current.estimate - baseline.estimate
    else:
        worse_by = baseline.estimate - current.estimate
    threshold = tolerance.threshold(baseline.estimate) if tolerance else 0.0
    if _nan(threshold):
        threshold = math.inf  # relative tolerance of an unbounded baseline: nothing exceeds it
    if not overlap and worse_by > threshold:
        status = "regressed"
    elif not overlap and -worse_by > threshold:
        status = "improved"
    else:
        status = "same"
    return FigureChange(name, current, baseline, better, worse_by, tolerance, overlap, status)


def _nan(v: float) -> bool:
    return isinstance(v, float) and math.isnan(v)


@dataclass(frozen=True)
class Comparison:
    """A run compared with its baseline.

    Attributes
    ----------
    series : str
    run_id : int
    baseline_id : int or None
        None when the series has no earlier run to compare with.
    baseline_rule : str
        ``"previous"``, ``"best"`` or ``"run"`` (an explicit id).
    comparable : bool
        False when the data fingerprint or metric differ from the baseline's and the
        change was not allowed.
    reasons : list of str
        Why the runs differ in data or metric (also filled when the change was allowed).
    changes : list of FigureChange
    """

    series: str
    run_id: int
    baseline_id: int | None
    baseline_rule: str
    comparable: bool
    reasons: list[str] = field(default_factory=list)
    changes: list[FigureChange] = field(default_factory=list)
    data_change_allowed: bool = False
    metric: str = "error"

    def __repr__(self) -> str:
        base = "no baseline" if self.baseline_id is None else \
            f"vs run {self.baseline_id} ({self.baseline_rule})"
        detail = f": {', '.join(self.regressed)}" if self.regressed else ""
        return (f"Comparison(series={self.series!r}, run {self.run_id} {base}, "
                f"{self.verdict}{detail})")

    @property
    def regressed(self) -> list[str]:
        """Names of the figures that regressed (empty when not comparable)."""
        if not self.comparable:
            return []
        return [c.name for c in self.changes if c.status == "regressed" and c.gated]

    @property
    def worse_info(self) -> list[str]:
        """Figures worse than the baseline's that do not gate (information)."""
        return [c.name for c in self.changes if c.status == "regressed" and not c.gated]

    @property
    def efficiency(self) -> Figure | None:
        """The run's ``efficiency_ratio`` against its baseline, when computed."""
        return next((c.current for c in self.changes if c.name == "efficiency_ratio"
                     and c.current is not None), None)

    @property
    def message(self) -> str:
        """One line: the verdict, and the efficiency ratio when there is one."""
        eff = self.efficiency
        text = self.verdict if self.baseline_id is not None else "first run"
        if self.regressed:
            text = f"REGRESSED ({', '.join(self.regressed)})"
        return f"{text}: {ratio_sentence(eff)}" if eff is not None else text

    @property
    def improved(self) -> list[str]:
        if not self.comparable:
            return []
        return [c.name for c in self.changes if c.status == "improved"]

    @property
    def exit_code(self) -> int:
        """CI gate: 2 not comparable, 1 a regression, 0 otherwise."""
        if not self.comparable:
            return 2
        return 1 if self.regressed else 0

    @property
    def verdict(self) -> str:
        if not self.comparable:
            return "not comparable"
        if self.baseline_id is None:
            return "first run"
        return "regressed" if self.regressed else "ok"

    def to_dict(self) -> dict:
        return {"series": self.series, "run_id": self.run_id,
                "baseline_id": self.baseline_id, "baseline_rule": self.baseline_rule,
                "comparable": self.comparable, "data_change_allowed": self.data_change_allowed,
                "reasons": list(self.reasons), "verdict": self.verdict,
                "regressed": self.regressed, "improved": self.improved,
                "worse_not_gated": self.worse_info, "message": self.message,
                "metric": self.metric, "figures": [c.to_dict() for c in self.changes]}

    def to_markdown(self) -> str:
        """A short markdown summary for CI logs (the series name on one line, in a code
        span that no character of it can end)."""
        head = f"### curvefit track: series {markdown_code(self.series)}, run {self.run_id}"
        if self.baseline_id is None:
            lines = [head, "", "First run of the series: recorded as the baseline; nothing to compare.", ""]
            lines += _figure_table([(c.name, c.current, None, None) for c in self.changes],
                                   self.metric)
            return "\n".join(lines) + "\n"
        lines = [f"{head} vs run {self.baseline_id} ({self.baseline_rule})", ""]
        for r in self.reasons:
            lines.append(f"- {'allowed: ' if self.data_change_allowed else ''}{r}")
        if self.reasons:
            lines.append("")
        lines += _figure_table([(c.name, c.current, c.baseline, c) for c in self.changes],
                               self.metric)
        lines.append("")
        if not self.comparable:
            lines.append("**Result: not comparable** (data or metric changed; "
                         "pass --allow-data-change to compare anyway)")
        elif self.regressed:
            lines.append(f"**Result: REGRESSED** — {', '.join(self.regressed)}")
        else:
            better = f" (improved: {', '.join(self.improved)})" if self.improved else ""
            lines.append(f"**Result: no regression**{better}")
        if self.efficiency is not None:
            lines.append(f"\nThe run {ratio_sentence(self.efficiency)}; a statistical screen, "
                         "not a guarantee.")
        if self.worse_info:
            lines.append(f"\nWorse but not gating (information): {', '.join(self.worse_info)}")
        return "\n".join(lines) + "\n"


    def _repr_html_(self) -> str:
        """Each figure against the baseline's, and the verdict, as a table (shown by Jupyter)."""
        from curvefit.report.notebook import comparison_html

        return comparison_html(self)

    def plot(self, ax=None):
        """Draw the efficiency ratio with its interval against no change and the
        tolerance; returns the matplotlib Axes (``ax`` when given)."""
        from curvefit.report.notebook import plot_comparison

        return plot_comparison(self, ax=ax)

    def to_junit(self) -> str:
        """JUnit XML: one test case per figure, a failure for each gating regression,
        ``skipped`` for figures that do not gate (information)."""
        from xml.etree import ElementTree as ET

        suite = ET.Element("testsuite", name=f"curvefit track {self.series}",
                           tests=str(len(self.changes)))
        failures = skipped = 0
        for c in self.changes:
            case = ET.SubElement(suite, "testcase", classname=f"curvefit.track.{self.series}",
                                 name=c.name)
            detail = (f"{FIGURES.get(c.name, (None, c.name))[1]}: baseline "
                      f"{format_figure(c.baseline, self.metric)}, current "
                      f"{format_figure(c.current, self.metric)}; {c.status}")
            if not self.comparable:
                ET.SubElement(case, "error", message="not comparable").text = "; ".join(self.reasons)
                failures += 1
            elif c.status == "regressed" and c.gated:
                text = ratio_sentence(c.current) if c.name == "efficiency_ratio" else detail
                ET.SubElement(case, "failure", message=text).text = detail
                failures += 1
            elif not c.gated or c.better is None or c.status in ("info", "missing"):
                ET.SubElement(case, "skipped", message=f"information only; {c.status}")
                skipped += 1
            ET.SubElement(case, "system-out").text = detail
        suite.set("failures", str(failures))
        suite.set("skipped", str(skipped))
        suites = ET.Element("testsuites", name="curvefit track")
        suites.append(suite)
        return ET.tostring(suites, encoding="unicode", xml_declaration=True) + "\n"


def _figure_table(rows: Iterable[tuple[str, Figure | None, Figure | None, FigureChange | None]],
                  metric: str = "error") -> list[str]:
    rows = list(rows)
    with_base = any(b is not None for _, _, b, _ in rows)
    if with_base:
        lines = ["| figure | baseline | current | worse by | tolerance | verdict |",
                 "|---|---|---|---|---|---|"]
    else:
        lines = ["| figure | current |", "|---|---|"]
    for name, cur, base, change in rows:
        label = f"{FIGURES.get(name, (None, name))[1]}{_table_note(name, cur, base, change)}"
        if with_base:
            worse = worse_by_text(change, metric) if change else ""
            tol = change.tolerance if change and change.tolerance and change.better else ""
            status = change.status if change else ""
            if status == "same" and math.isinf(_float(change.worse_by)):
                status = "not separable (intervals overlap)"
            if change and not change.gated and status in ("regressed", "improved"):
                status += " (info)"
            lines.append(f"| {label} | {format_figure(base, metric)} | "
                         f"{format_figure(cur, metric)} | {worse} | {tol} | {status} |")
        else:
            lines.append(f"| {label} | {format_figure(cur, metric)} |")
    return lines


def _table_note(name: str, cur: Figure | None, base: Figure | None,
                change: FigureChange | None) -> str:
    """`` (note)`` after a figure's label: its family, size or target, and "not gated"."""
    note = (cur or base).note if (cur or base) else ""
    if name in FAMILY_BOUND and change and change.current and change.baseline \
            and _family(change.current) != _family(change.baseline):
        note = f"{_family(change.baseline)} → {_family(change.current)}"
    elif name in FAMILY_BOUND and name != "samples_for_target":
        note = _family(cur or base) or ""
    else:
        note = note.split(";")[0] if name in ("test_error_at_ref", "samples_for_target") else ""
    if any("not gated" in f.note for f in (cur, base) if f is not None):
        note = f"{note}; not gated" if note else "not gated"
    return f" ({note})" if note else ""


def one_line(text: Any) -> str:
    r"""``text`` on one line: newlines, tabs and other control characters shown as escapes.

    Examples
    --------
    >>> one_line("nightly\nmain"), one_line("ok")
    ('nightly\\nmain', 'ok')
    """
    return "".join(ch if ch.isprintable() else ch.encode("unicode_escape").decode("ascii")
                   for ch in str(text))


def markdown_code(text: Any) -> str:
    """``text`` as a markdown code span on one line; the fence is longer than any run of
    backticks inside (CommonMark code spans), so a name cannot end it or start a table.

    Examples
    --------
    >>> markdown_code("nightly"), markdown_code("a`b|c")
    ('`nightly`', '`` a`b|c ``')
    """
    body = one_line(text)
    longest = max((len(m) for m in re.findall(r"`+", body)), default=0)
    fence = "`" * (longest + 1)
    pad = " " if longest or body.startswith(" ") or body.endswith(" ") else ""
    return f"{fence}{pad}{body}{pad}{fence}"


def figure_kind(name: str) -> str:
    """How a figure's values read: ``error``, ``count``, ``capacity`` or ``number``."""
    return FIGURE_KINDS.get(name, "number")


def format_figure(f: Figure | None, metric: str = "error") -> str:
    """A figure as ``estimate (low–high)`` in its own units; ``–`` when absent.

    Examples
    --------
    >>> format_figure(make_figure("test_error_at_ref", 0.081, 0.079, 0.083))
    '8.1% (7.9%–8.3%)'
    >>> format_figure(make_figure("samples_for_target", 2871, 2130, float("inf")))
    '2,870 (2,130 to no upper limit)'
    """
    if f is None:
        return MISSING
    if figure_kind(f.name) == "count" and math.isinf(_float(f.estimate)):
        # an unreachable target: say so, with the lower end of the interval if finite
        low = _float(f.low)
        return (f"not reachable (interval from {format_count(low)}, no upper limit)"
                if math.isfinite(low) else "not reachable")
    return format_estimate(f.estimate, f.low, f.high, kind=figure_kind(f.name), metric=metric)


def worse_by_text(change: "FigureChange", metric: str = "error") -> str:
    """How much worse a figure got, in words when a side is unbounded (never "∞").

    Examples
    --------
    >>> base = make_figure("samples_for_target", 800, 700, 900)
    >>> gone = make_figure("samples_for_target", math.inf, 5000, math.inf)
    >>> worse_by_text(compare_figure(gone, base, Tolerance(0.25, True)))
    'no longer reachable'
    >>> worse_by_text(compare_figure(base, gone, Tolerance(0.25, True)))
    'reachable now'
    """
    cur = _float(change.current.estimate) if change.current else math.nan
    base = _float(change.baseline.estimate) if change.baseline else math.nan
    if math.isinf(cur) or math.isinf(base):
        if math.isinf(cur) and math.isinf(base):
            return "unreachable in both"
        if math.isinf(cur):
            return "no longer reachable"
        return "reachable now"
    return format_value(change.worse_by, figure_kind(change.name), metric)
