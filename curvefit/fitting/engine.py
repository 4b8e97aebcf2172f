"""Fit learning-curve families to a measured curve, choose one, and put intervals on it.

The engine works on per-size means over repeats:

1. every family in ``curvefit.fitting.families`` is fitted by weighted nonlinear least squares
   (``scipy.optimize.least_squares``, box bounds, analytic Jacobian, several starts
   from linearised guesses);
2. families that miss the measured points by many standard errors (reduced chi-square
   far above the best family's) are marked "poor fit" and passed over;
3. the family is chosen by forecast validation: rolling origins over the largest
   sizes (a quarter, at least 3 when 4 sizes stay before them), each family fitted to
   the sizes before the origin and scored by its mean absolute forecast error; families
   within a small tolerance of the best go to power-law-floor/power-law, then to the lower AICc;
4. the chosen family is refitted to a parametric bootstrap (each size's mean redrawn
   with Student-t noise of its standard error, each refit warm-started at the
   full-data solution) and percentile intervals are read off for parameters,
   predictions and derived quantities; prediction bands are never narrower than the
   Student-t interval of the measured mean;
5. answers inside the measured range come from the measured means; the fitted curve
   answers only beyond the largest measured size.

Estimates are statistical, not guarantees: they assume the chosen family keeps
describing the curve beyond the measured sizes.

This module is pure numerics on a ``Curve``; it imports neither the command line nor I/O.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass, field
from typing import Any, Iterable

import numpy as np
import pandas as pd
from scipy.optimize import least_squares
from scipy.special import ndtri

from curvefit.core.curve import Curve
from curvefit.core.errors import FitWarning, InputError
from curvefit.fitting.families import FAMILIES, LEGACY_NAMES, Family, current_name, get_family
from curvefit.core.estimate import Estimate

ON_CHOICES = ("test", "train", "gap")
WEIGHT_CHOICES = ("sem", "index", "none")
# A standard error below this fraction of the median one is raised to it, so a size whose
# repeats happen to agree cannot dominate the fit (common practice).
SEM_FLOOR_FRACTION = 0.2
# Column-scaled Jacobian condition number above which a fit counts as poorly determined.
MAX_CONDITION = 1e7
# Answers are searched up to this many labelled samples.
SEARCH_LIMIT = 1e12
# Beyond this multiple of the largest measured size a prediction is an extrapolation to flag.
EXTRAPOLATION_FACTOR = 10.0
# Lack of fit: a family whose reduced chi-square against the per-size standard errors
# exceeds both this floor and LACK_OF_FIT_RATIO × the best family's does not describe the
# measured points and is not chosen while another family does (common practice: a
# reduced chi-square far above 1 rejects the model; the ratio allows for standard errors
# that are themselves rough with 2–5 repeats).
LACK_OF_FIT_FLOOR = 4.0
LACK_OF_FIT_RATIO = 4.0
# Errors smaller than this print as 0 (below any test set's resolution).
ZERO_PRINT = 5e-7
# Practical horizon for the wording of logarithmic families: the value at this multiple
# of the largest measured size is shown beside their limit.
LOG_HORIZON = 100.0
_ERROR_METRICS = {"error", "zero_one", "0-1", "misclassification", "error_rate"}


# ============================================================== result objects
@dataclass(frozen=True)
class SampleEstimate:
    """Labelled samples needed to reach a target test error or generalization gap.

    Attributes
    ----------
    n : float
        Point estimate of the samples needed (``inf`` when not reachable): from the
        measured means when the target lies within the measured range, else from the
        fitted curve beyond the largest measured size.
    low, high : float
        Bootstrap percentile interval (``high`` is ``inf`` when some bootstrap curves
        never reach the target; NaN without bootstrap).
    level : float
        Interval level, e.g. 0.9.
    target : float
        The target error or gap.
    kind : str
        ``"test_error"`` or ``"gap"``.
    reachable : bool
        False when the fitted curve levels off above the target.
    asymptote : Estimate or None
        The level the fitted curve tends to, where the family has one.
    message : str
        The answer as one plain sentence.
    warnings : tuple of str
        Cautions attached to this answer (extrapolation, open interval).
    """

    n: float
    low: float
    high: float
    level: float
    target: float
    kind: str
    reachable: bool
    asymptote: Estimate | None
    message: str
    warnings: tuple = ()

    def to_dict(self) -> dict:
        d = asdict(self)
        d["asymptote"] = self.asymptote.to_dict() if self.asymptote is not None else None
        d["warnings"] = list(self.warnings)
        return d

    def __repr__(self) -> str:
        return f"SampleEstimate({self.message!r})"


@dataclass
class _FamilyFit:
    """Fit of one family (internal)."""

    family: Family
    theta: np.ndarray | None
    status: str
    message: str = ""
    forecast_error: float = math.nan
    aicc: float = math.nan
    drift: float = 0.0        # model error per unit of ln n beyond the data, from validation
    eligible: bool = True     # False when the extrapolation is impossible (e.g. below zero)
    tied: bool = False        # forecasts about as well as the chosen family
    lack_of_fit: float = math.nan  # reduced chi-square against the per-size standard errors


class _State:
    """Everything a CurveFit needs besides its public fields (internal, not frozen)."""

    def __init__(self, data, fits, boot, settings):
        self.data = data
        self.fits = fits
        self.boot = boot          # (B, p) parameter replicates of the chosen family
        self.settings = settings
        self.companions: dict[str, "CurveFit"] = {}


@dataclass(frozen=True, eq=False)
class CurveFit:
    """A fitted learning curve: the family ranking, the chosen family and its intervals.

    Attributes
    ----------
    best : str
        Name of the chosen family.
    runner_up : str or None
        The next family in the ranking.
    on : str
        The fitted quantity: ``"test"``, ``"train"`` or ``"gap"`` (test − train).
    table : pandas.DataFrame
        One row per family: ``family, n_params, params, forecast_error, aicc, status,
        chosen, message, lack_of_fit``; ranked, the chosen family first. ``status`` is
        "converged", "poorly determined", "poor fit" (misses the measured points:
        ``lack_of_fit``, the reduced chi-square against the per-size standard errors,
        is far above the best family's) or "failed".
    warnings : list of str
        Cautions about this fit (few sizes, a curve that does not fall, wide intervals).
    curve : Curve
        The measured curve that was fitted.

    Notes
    -----
    With ``on="train"`` the single-curve families are fitted to the negated train error
    (train error grows with ``n``), so their raw parameters describe ``−train_error``;
    predictions, asymptotes and answers are on the natural scale.
    """

    best: str
    runner_up: str | None
    on: str
    table: pd.DataFrame
    warnings: list
    curve: Curve
    _state: _State = field(repr=False)

    # ------------------------------------------------------------ predictions
    def predict(self, n, interval: float = 0.9):
        """Predicted error of the chosen family at ``n`` labelled samples.

        Parameters
        ----------
        n : float or array-like
            Sample size(s) (> 0).
        interval : float
            Level of the bootstrap percentile interval.

        Returns
        -------
        Estimate for a scalar ``n``; a DataFrame with columns ``size, estimate, low,
        high`` for array-like ``n``.
        """
        level = _check_level(interval)
        scalar = np.ndim(n) == 0
        sizes = np.atleast_1d(np.asarray(n, dtype=float))
        if not np.all(np.isfinite(sizes)) or np.any(sizes <= 0):
            raise InputError("sample sizes to predict at must be finite and > 0")
        far = sizes > EXTRAPOLATION_FACTOR * self._state.data.n_max
        if far.any():
            warnings.warn(f"predicting at {sizes[far].max():,.0f} samples, beyond "
                          f"{EXTRAPOLATION_FACTOR:g}× the largest measured size "
                          f"({self._state.data.n_max:,.0f}); read with care", FitWarning,
                          stacklevel=2)
        est = self._predict_point(sizes)
        low, high = self._predict_interval(sizes, level)
        if scalar:
            return Estimate(float(est[0]), float(low[0]), float(high[0]), level)
        return pd.DataFrame({"size": sizes, "estimate": est, "low": low, "high": high})

    def predict_family(self, name: str, n) -> np.ndarray:
        """Point predictions of any family that did not fail (e.g. to draw the runner-up)."""
        fit = self._state.fits.get(name)
        if fit is None or fit.theta is None:
            raise InputError(f"family {name!r} has no fit here; fitted: "
                             f"{', '.join(k for k, v in self._state.fits.items() if v.theta is not None)}")
        sizes = np.atleast_1d(np.asarray(n, dtype=float))
        return _predict(fit.family, fit.theta, sizes, self.on, self._state.data.sign)

    def parameters(self, interval: float = 0.9) -> pd.DataFrame:
        """Parameters of the chosen family with bootstrap percentile intervals."""
        level = _check_level(interval)
        fit = self._state.fits[self.best]
        boot = self._state.boot
        rows = []
        for j, name in enumerate(fit.family.params):
            lo, hi = _percentiles(boot[:, j] if boot is not None else None, level)
            rows.append({"param": name, "estimate": float(fit.theta[j]), "low": lo, "high": hi})
        return pd.DataFrame(rows, columns=["param", "estimate", "low", "high"])

    def asymptote(self, interval: float = 0.9) -> Estimate | None:
        """The error the chosen family tends to as n → ∞, or None if it has none.

        Values within rounding of 0 (a floor pinned at its bound) are returned as exactly
        0. For a family whose ``approach`` is ``"logarithmic"`` this is a limit reached
        only as ln n → ∞, not a level seen at practical sizes; see ``approach``.
        """
        est = self._derived(_asymptote_fn(self._state.fits[self.best].family, self.on,
                                          self._state.data.sign), interval)
        if est is None:
            return None
        scale = max(1.0, float(np.nanmax(np.abs(self._state.data.y)))) if self._state.data.m else 1.0

        def snap(v):
            return 0.0 if math.isfinite(v) and abs(v) < 1e-9 * scale else v

        return Estimate(snap(est.estimate), snap(est.low), snap(est.high), est.level)

    @property
    def approach(self) -> str:
        """How the chosen family nears its asymptote: "power" or "logarithmic"."""
        return self._state.fits[self.best].family.approach

    def describe_asymptote(self, interval: float = 0.9) -> str:
        """The asymptote in plain words, e.g. "levels off at about 13.7% (90% interval
        13.1%–14.2%)"; "" when the family has none.

        A floor at its lower bound reads "levels off at 0% (the fitted floor is at its
        lower bound)"; a logarithmic family's limit is stated as approached only as
        ln n → ∞, beside its value at ``LOG_HORIZON`` × the largest measured size.
        """
        asym = self.asymptote(interval)
        if asym is None or not math.isfinite(asym.estimate):
            return ""
        metric = self.curve.metric
        fmt = lambda v: _fmt_error(v, metric)  # noqa: E731
        fixed = self._state.fits[self.best].family.levels == ()  # no level parameter
        if fixed:
            core = f"tends to {fmt(asym.estimate)} (fixed by the family)"
        elif asym.estimate == 0.0 and (not math.isfinite(asym.high) or asym.high == 0.0):
            core = f"levels off at {fmt(0.0)} (the fitted floor is at its lower bound)"
        else:
            ai = (f" ({asym.level:.0%} interval {fmt(asym.low)}–{fmt(asym.high)})"
                  if math.isfinite(asym.low) and not fixed else "")
            core = f"levels off at about {fmt(asym.estimate)}{ai}"
        if self.approach == "logarithmic":
            horizon = LOG_HORIZON * self._state.data.n_max
            at = float(self._predict_point(np.array([horizon]))[0])
            core = (f"falls only logarithmically (as 1/ln n): about {fmt(at)} at "
                    f"{LOG_HORIZON:g}× the largest measured size ({_fmt_count(horizon)}); its limit "
                    f"{fmt(asym.estimate)}" + (f" ({asym.level:.0%} interval {fmt(asym.low)}–"
                                               f"{fmt(asym.high)})" if math.isfinite(asym.low) else "")
                    + " is approached only as ln n → ∞")
        return core

    def exponent(self, interval: float = 0.9) -> Estimate | None:
        """The power-law decay exponent of the chosen family, or None if it has none."""
        return self._derived(_exponent_fn(self._state.fits[self.best].family, self.on), interval)

    # ------------------------------------------------------------ answers
    def samples_for(self, test_error: float | None = None, gap: float | None = None,
                    interval: float = 0.9) -> SampleEstimate:
        """Labelled samples needed to reach a test error or a generalization gap.

        Exactly one of ``test_error`` and ``gap`` is given. When this fit is of another
        quantity, the needed one (test error, or the gap test − train) is fitted
        internally with the same settings and cached.

        Parameters
        ----------
        test_error, gap : float
            The target.
        interval : float
            Level of the bootstrap percentile interval on ``n``.

        Returns
        -------
        SampleEstimate

        References
        ----------
        .. [1] C. Cortes et al., "Learning curves: asymptotic values and rate of
               convergence", NIPS 6, 1994 (the gap shrinking with n; the asymptote as
               the floor more data cannot go below).
        """
        if (test_error is None) == (gap is None):
            raise InputError("give exactly one target: test_error=E or gap=G")
        kind, target = ("test_error", test_error) if test_error is not None else ("gap", gap)
        try:
            target = float(target)
        except (TypeError, ValueError):
            raise InputError(f"target {kind} must be a number, got {target!r}") from None
        if not math.isfinite(target):
            raise InputError(f"target {kind} must be finite")
        level = _check_level(interval)
        fit = self._companion("test" if kind == "test_error" else "gap")
        return fit._solve(target, kind, level)

    def to_dict(self, interval: float = 0.9) -> dict:
        """A JSON-ready summary: ranking, chosen parameters, asymptote, predictions."""
        n_max = self._state.data.n_max
        preds = self.predict(np.array([2 * n_max, 10 * n_max]), interval) \
            if self._state.data.m else pd.DataFrame()
        asym, expo = self.asymptote(interval), self.exponent(interval)
        table = self.table.copy()
        return {
            "format": "curvefit.fit/1",
            "on": self.on, "best": self.best, "runner_up": self.runner_up,
            "formula": self._state.fits[self.best].family.formula,
            "families": table.to_dict(orient="records"),
            "parameters": self.parameters(interval).to_dict(orient="records"),
            "asymptote": asym.to_dict() if asym else None,
            "exponent": expo.to_dict() if expo else None,
            "predictions": preds.to_dict(orient="records"),
            "warnings": list(self.warnings),
            "sizes": self._state.data.sizes.tolist(),
            "settings": dict(self._state.settings, n_bootstrap_ok=self.n_bootstrap_ok),
        }

    @property
    def sizes(self) -> np.ndarray:
        """The measured sizes the fit used, ascending."""
        return self._state.data.sizes.copy()

    @property
    def largest_size(self) -> float:
        """The largest measured size (the labels the curve's user has now, by default)."""
        return self._state.data.n_max

    @property
    def formula(self) -> str:
        """Formula of the chosen family."""
        return self._state.fits[self.best].family.formula

    @property
    def n_bootstrap_ok(self) -> int:
        """Bootstrap replicates whose refit succeeded."""
        boot = self._state.boot
        return 0 if boot is None else int(np.all(np.isfinite(boot), axis=1).sum())

    def __repr__(self) -> str:
        d = self._state.data
        span = f"{d.m} sizes {d.sizes.min():,.0f}–{d.n_max:,.0f}" if d.m else "no sizes"
        asym = self.asymptote()
        tail = f", asymptote {asym.estimate:.4g}" if asym is not None and math.isfinite(asym.estimate) else ""
        return (f"CurveFit(on={self.on!r}, best={self.best!r}, runner_up={self.runner_up!r}, "
                f"{span}{tail}, {len(self.warnings)} warnings)")

    # ------------------------------------------------------------ internals
    def _predict_point(self, sizes):
        fit = self._state.fits[self.best]
        return _predict(fit.family, fit.theta, sizes, self.on, self._state.data.sign)

    def _boot_predictions(self, sizes) -> np.ndarray | None:
        boot = self._state.boot
        if boot is None or not len(boot):
            return None
        fam = self._state.fits[self.best].family
        theta = boot.T[:, :, None]            # (p, B, 1) broadcasts against sizes (G,)
        with np.errstate(all="ignore"):
            return _predict(fam, theta, sizes, self.on, self._state.data.sign)

    def _predict_interval(self, sizes, level):
        """Percentile band of the bootstrap curves, widened beyond the data by the model
        error seen in forecast validation (``drift`` per unit of ln n, as a normal
        deviate at the interval's level)."""
        sizes = np.asarray(sizes, dtype=float)
        nan = np.full(len(sizes), math.nan)
        P = self._boot_predictions(sizes)
        if P is None:
            return nan, nan
        ok = np.all(np.isfinite(self._state.boot), axis=1)
        if ok.sum() < 2:
            return nan, nan
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            lo, hi = np.nanquantile(P[ok], _quantiles(level), axis=0)
        est = self._predict_point(sizes)
        drift = self._state.fits[self.best].drift
        if drift > 0 and math.isfinite(drift):
            z = float(ndtri((1 + level) / 2))
            extra = z * drift * np.maximum(np.log(sizes / self._state.data.n_max), 0.0)
            lo = est - np.sqrt(np.maximum(est - lo, 0.0) ** 2 + extra ** 2)
            hi = est + np.sqrt(np.maximum(hi - est, 0.0) ** 2 + extra ** 2)
        if ENVELOPE_TIES:
            # beyond the data the interval also spans the families that forecast as well
            beyond = sizes > self._state.data.n_max
            for name, ff in self._state.fits.items():
                if ff.tied and name != self.best and ff.theta is not None and beyond.any():
                    f = _predict(ff.family, ff.theta, sizes, self.on, self._state.data.sign)
                    ok_f = beyond & np.isfinite(f)
                    lo = np.where(ok_f, np.minimum(lo, f), lo)
                    hi = np.where(ok_f, np.maximum(hi, f), hi)
        if NOISE_FLOOR:
            # never narrower than the Student-t interval of the measured mean nearby
            half = _noise_half_width(self._state.data, sizes, level)
            lo = np.minimum(lo, est - half)
            hi = np.maximum(hi, est + half)
        if self.on != "train" and bool(np.nanmin(self._state.data.y) >= 0):
            lo = np.maximum(lo, 0.0)  # an error or a gap measured >= 0 stays >= 0
        return lo, hi

    def _derived(self, fn, interval):
        if fn is None:
            return None
        level = _check_level(interval)
        fit = self._state.fits[self.best]
        est = float(fn(fit.theta))
        vals = None
        if self._state.boot is not None:
            vals = np.array([fn(t) if np.all(np.isfinite(t)) else math.nan for t in self._state.boot])
        lo, hi = _percentiles(vals, level)
        return Estimate(est, lo, hi, level)

    def _companion(self, on: str) -> "CurveFit":
        if on == self.on:
            return self
        if on not in self._state.companions:
            if on in ("gap", "train") and not self.curve.has_train:
                raise InputError("a gap target needs train error in the curve; measure it "
                                 "(curvefit measure records it) or give --error instead")
            s = self._state.settings
            self._state.companions[on] = fit_curve(
                self.curve, families=s["families"], on=on, bootstrap=s["bootstrap"],
                weights=s["weights"], random_state=s["random_state"])
        return self._state.companions[on]

    def _solve(self, target: float, kind: str, level: float) -> SampleEstimate:
        """Samples needed for ``target``: from the measured means where the target lies
        within the measured range, from the fitted curve beyond the largest size only.

        The measured answer interpolates the per-size means linearly in ln n; its
        interval comes from the Student-t intervals of those means. The fitted answer
        is searched on n ≥ the largest measured size, never below it, so a fitted curve
        that disagrees with the measured points at small n cannot give an answer there.
        """
        d = self._state.data
        grid = np.geomspace(max(d.n_max, 1.0), SEARCH_LIMIT, 2400)
        with np.errstate(all="ignore"):
            fitted = self._predict_point(grid)
            point_fit = _first_crossing(fitted[None, :], grid, target)[0]
            lo_band, hi_band = self._predict_interval(grid, level)
        mean_lo, mean_hi = _mean_band(d, level)
        point_meas = _measured_crossing(d.sizes, d.y, target)
        low = high = math.nan
        if math.isfinite(point_meas):
            point, source = point_meas, "measured"
        else:
            point, source = point_fit, "fitted"
        # each edge of the interval: where the measured band reaches the target, else
        # where the fitted band does beyond the largest size
        low = _measured_crossing(d.sizes, mean_lo, target)
        if not math.isfinite(low) and np.all(np.isfinite(lo_band)):
            low = _first_crossing(lo_band[None, :], grid, target)[0]
        high = _measured_crossing(d.sizes, mean_hi, target)
        if not math.isfinite(high) and np.all(np.isfinite(lo_band)):
            high = _first_crossing(np.where(np.isfinite(hi_band), hi_band, np.inf)[None, :],
                                   grid, target)[0]
        if not np.all(np.isfinite(lo_band)) and source == "fitted":
            low = high = math.nan
        if math.isfinite(point):
            if not math.isnan(low):
                low = min(low, point)
            if not math.isnan(high):
                high = max(high, point)
        asym = self.asymptote(level)
        reachable = source == "measured" or (
            math.isfinite(point) and not (asym is not None and math.isfinite(asym.low)
                                          and asym.low > target))
        metric = self.curve.metric
        what = "test error" if kind == "test_error" else "generalization gap"
        tgt = _fmt_error(target, metric)
        cautions = []
        if not reachable:
            n = math.inf
            low = high = math.inf
            if asym is not None and math.isfinite(asym.estimate):
                message = (f"A {what} of {tgt} is not reachable by more data with this model: "
                           f"the {what} {self.describe_asymptote(level)}.")
                if math.isfinite(asym.low) and asym.low <= target:
                    cautions.append(f"the {level:.0%} interval of that level reaches below the "
                                    "target, so this is uncertain; larger measured sizes would settle it")
                    message += " Note: " + cautions[-1] + "."
            else:
                message = (f"A {what} of {tgt} is not reachable by more data with this model: "
                           f"the fitted curve does not fall that low within {SEARCH_LIMIT:.0e} samples.")
        else:
            n = float(math.ceil(point))
            interval_text = _fmt_interval(low, high, level)
            smallest = float(d.sizes[0])
            if source == "measured" and n <= smallest:
                n = smallest
                message = (f"The measured curve already reaches {tgt} {what} at its smallest "
                           f"measured size, {_fmt_count(n)} labelled samples (fewer were not "
                           f"measured).")
            elif source == "measured":
                j = int(np.searchsorted(d.sizes, n))
                between = (f", between the measured sizes {d.sizes[j - 1]:,.0f} and "
                           f"{d.sizes[j]:,.0f}" if 0 < j < d.m and d.sizes[j] != n else "")
                message = (f"The measured curve already reaches {tgt} {what} at about "
                           f"{_fmt_count(n)} labelled samples{between}{interval_text}.")
            elif kind == "test_error":
                message = (f"To reach {tgt} test error you need about {_fmt_count(n)} "
                           f"labelled samples{interval_text}.")
            else:
                message = (f"To bring the generalization gap down to {tgt} you need about "
                           f"{_fmt_count(n)} labelled samples{interval_text}.")
            if source == "fitted" and float(fitted[0]) <= target:
                cautions.append(f"the fitted curve is already at the target at the largest "
                                f"measured size ({d.n_max:,.0f}), where the measured mean "
                                f"({_fmt_error(float(d.y[-1]), metric)}) is not; the answer is rough")
            if n > EXTRAPOLATION_FACTOR * d.n_max:
                cautions.append(f"this is more than {EXTRAPOLATION_FACTOR:g}× the largest measured "
                                f"size ({d.n_max:,.0f}), a long extrapolation")
            if self.approach == "logarithmic" and source == "fitted":
                cautions.append(f"the {self.best} curve falls only logarithmically, so small "
                                "changes in its fit move this answer a lot")
            if math.isinf(high) and source == "measured":
                cautions.append("within the measured sizes the intervals of the means never "
                                "fall wholly below the target, so the interval has no upper limit")
            elif math.isinf(high):
                cautions.append("some bootstrap curves never reach the target, so the "
                                "interval has no upper limit")
            if cautions:
                message += " Note: " + "; ".join(cautions) + "."
        return SampleEstimate(n=n, low=float(low), high=float(high), level=level, target=target,
                              kind=kind, reachable=bool(reachable), asymptote=asym,
                              message=message, warnings=tuple(cautions))


def _mean_band(d: "_Data", level: float):
    """Student-t interval of each measured per-size mean (the mean itself without repeats).

    References
    ----------
    .. [1] W. S. Gosset ("Student"), "The probable error of a mean", Biometrika 6(1), 1908.
    """
    from scipy.stats import t as student_t

    k = np.array([np.isfinite(c[:, 0] if d.on == "test" else
                              (c[:, 0] - c[:, 1]) if d.on == "gap" else c[:, 1]).sum()
                  for c in d.cells], dtype=float)
    half = np.zeros(d.m)
    ok = (k >= 2) & np.isfinite(d.sem)
    half[ok] = student_t.ppf((1 + level) / 2, k[ok] - 1) * d.sem[ok]
    return d.y - half, d.y + half


def _noise_half_width(d: "_Data", sizes, level: float) -> np.ndarray:
    """Half-width of the Student-t interval of the measured mean, interpolated in ln n
    between measured sizes and held constant beyond them (0 without repeats).

    A prediction cannot be known better than the mean measured at that size: with 2–5
    repeats the fitted curve's bootstrap band alone is too narrow where the family does
    not describe the points exactly.

    References
    ----------
    .. [1] "Student", "The probable error of a mean", Biometrika 6(1), 1908.
    """
    from scipy.stats import t as student_t

    scale = _noise_scale(d)
    sizes = np.asarray(sizes, dtype=float)
    if scale is None or not d.m:
        return np.zeros(len(sizes))
    k = np.array([len(c) for c in d.cells], dtype=float)
    q = np.where(k >= 2, student_t.ppf((1 + level) / 2, np.maximum(k - 1, 1)),
                 float(ndtri((1 + level) / 2)))
    half = q * scale
    return np.interp(np.log(sizes), np.log(d.sizes), half)


def _measured_crossing(sizes: np.ndarray, values: np.ndarray, target: float) -> float:
    """Smallest size where the measured values reach the target, interpolating linearly
    in ln n between the last size above it and the first at or below it; inf if none."""
    below = np.nonzero(np.asarray(values) <= target)[0]
    if not len(below):
        return math.inf
    i = int(below[0])
    if i == 0:
        return float(sizes[0])
    v0, v1 = float(values[i - 1]), float(values[i])
    frac = (v0 - target) / (v0 - v1) if v0 != v1 else 1.0
    frac = min(max(frac, 0.0), 1.0)
    return float(math.exp(math.log(sizes[i - 1]) + frac * (math.log(sizes[i]) - math.log(sizes[i - 1]))))


# ============================================================== data preparation
@dataclass
class _Data:
    sizes: np.ndarray          # (m,) distinct sizes, ascending
    y: np.ndarray              # (m,) per-size mean of the fitted quantity (natural scale)
    sem: np.ndarray            # (m,) its standard error across repeats (NaN for one repeat)
    w: np.ndarray              # (m,) least-squares weights, mean 1
    test: np.ndarray           # (m,) per-size mean test error
    train: np.ndarray          # (m,) per-size mean train error (NaN where absent)
    w_test: np.ndarray
    w_train: np.ndarray
    cells: list                # per size: (k, 2) array of (test, train) over repeats
    sign: float                # +1, or −1 when fitting the (growing) train error
    on: str
    weights: str

    @property
    def m(self) -> int:
        return len(self.sizes)

    @property
    def n_max(self) -> float:
        return float(self.sizes.max()) if self.m else math.nan


def _prepare(curve: Curve, on: str, weights: str) -> _Data:
    ok = curve.ok_points()
    t = ok["test_error"].to_numpy(dtype=float)
    r = ok["train_error"].to_numpy(dtype=float)
    s = ok["size"].to_numpy(dtype=float)
    keep = np.isfinite(t) & np.isfinite(s)
    if on in ("train", "gap"):
        keep &= np.isfinite(r)
    t, r, s = t[keep], r[keep], s[keep]
    if not len(s):
        what = "finite test error" if on == "test" else "finite test and train error"
        raise InputError(f"the curve has no finished cells with a {what}; nothing to fit")
    sizes = np.unique(s)
    cells = [np.column_stack([t[s == v], r[s == v]]) for v in sizes]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        test = np.array([np.mean(c[:, 0]) for c in cells])
        train = np.array([np.nanmean(c[:, 1]) if np.isfinite(c[:, 1]).any() else math.nan
                          for c in cells])
        sem_test = np.array([_sem(c[:, 0]) for c in cells])
        sem_train = np.array([_sem(c[:, 1]) for c in cells])
        sem_gap = np.array([_sem(c[:, 0] - c[:, 1]) for c in cells])
    y, sem = {"test": (test, sem_test), "train": (train, sem_train),
              "gap": (test - train, sem_gap)}[on]
    w = _weights(sizes, sem, weights)
    return _Data(sizes=sizes, y=y, sem=sem, w=w, test=test, train=train,
                 w_test=_weights(sizes, sem_test, weights),
                 w_train=_weights(sizes, sem_train, weights),
                 cells=cells, sign=-1.0 if on == "train" else 1.0, on=on, weights=weights)


def _sem(v: np.ndarray) -> float:
    v = v[np.isfinite(v)]
    return float(np.std(v, ddof=1) / math.sqrt(len(v))) if len(v) > 1 else math.nan


def _weights(sizes: np.ndarray, sem: np.ndarray, kind: str) -> np.ndarray:
    """Least-squares weights normalised to mean 1.

    ``"sem"``: inverse variance of the per-size mean, each standard error raised to at
    least ``SEM_FLOOR_FRACTION`` × the median one (sizes without repeats get the median);
    ``"index"``: proportional to the size's rank, larger sizes weighted more, as in
    Figueroa et al. 2012; ``"none"``: equal.
    """
    m = len(sizes)
    if kind == "none" or m == 0:
        w = np.ones(m)
    elif kind == "index":
        w = np.arange(1, m + 1, dtype=float)
    else:
        good = np.isfinite(sem) & (sem > 0)
        if not good.any():
            w = np.ones(m)
        else:
            med = float(np.median(sem[good]))
            s = np.where(np.isfinite(sem), sem, med)
            s = np.maximum(s, SEM_FLOOR_FRACTION * med)
            w = 1.0 / s ** 2
    return w / w.mean() if m else w


# ============================================================== least squares
class _Target:
    """Residuals r(θ) = √w·(f(n; θ) − z) of one family on one data set.

    ``z`` may be one curve (shape (m,)) or a batch of bootstrap curves (shape (B, m));
    ``theta`` may be one vector (p,) or a batch (B, p).
    """

    def __init__(self, fam: Family, n, z, w, z_train=None, w_train=None):
        self.fam = fam
        self.n = np.asarray(n, dtype=float)
        z = np.asarray(z, dtype=float)
        sw = np.sqrt(np.asarray(w, dtype=float))
        if fam.joint:
            zt = np.asarray(z_train, dtype=float)
            mask = np.all(np.isfinite(np.atleast_2d(zt)), axis=0)
            self.n_train = self.n[mask]
            z = np.concatenate([z, zt[..., mask]], axis=-1)
            sw = np.concatenate([sw, np.sqrt(np.asarray(w_train, dtype=float))[mask]])
        self.z, self.sw = z, sw

    @property
    def size(self) -> int:
        return self.z.shape[-1]

    def model(self, theta):
        theta = np.asarray(theta, dtype=float)
        t = theta.T[:, :, None] if theta.ndim == 2 else theta
        with np.errstate(all="ignore"):
            f = self.fam.func(self.n, t)
            if self.fam.joint:
                f = np.concatenate([f, self.fam.train_func(self.n_train, t)], axis=-1)
        return f

    def _raw_jac(self, theta):
        theta = np.asarray(theta, dtype=float)
        t = theta.T[:, :, None] if theta.ndim == 2 else theta
        with np.errstate(all="ignore"):
            J = self.fam.jac(self.n, t)
            if self.fam.joint:
                Jr = self.fam.train_jac(self.n_train, t)
                if theta.ndim == 2:
                    B = theta.shape[0]
                    J = np.broadcast_to(J, (B,) + J.shape[-2:])
                    Jr = np.broadcast_to(Jr, (B,) + Jr.shape[-2:])
                J = np.concatenate([J, Jr], axis=-2)
        if theta.ndim == 2 and J.ndim == 2:
            J = np.broadcast_to(J, (theta.shape[0],) + J.shape)
        return J

    def residuals(self, theta):
        r = self.sw * (self.model(theta) - self.z)
        return np.where(np.isfinite(r), r, 1e6)

    def jacobian(self, theta):
        J = self.sw[:, None] * self._raw_jac(theta)
        return np.where(np.isfinite(J), J, 0.0)


def _batch_lm(tgt: _Target, theta0: np.ndarray, lo, hi, iters: int = 40):
    """Projected Levenberg–Marquardt on a batch of problems at once.

    Each row of ``theta0`` (B, p) starts one problem; ``tgt.z`` is one curve shared by
    all rows or one curve per row. Returns (theta, cost, settled) where ``settled``
    marks rows whose last steps no longer reduced the cost.

    References
    ----------
    .. [1] D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear
           parameters", J. SIAM 11(2), 1963.
    """
    th = np.array(theta0, dtype=float)
    th = np.clip(th, lo, hi)
    B, p = th.shape

    def cost_of(theta):
        with np.errstate(all="ignore"):
            r = tgt.sw * (tgt.model(theta) - tgt.z)
            c = 0.5 * np.sum(r * r, axis=-1)
        c = np.where(np.isfinite(c), c, np.inf)
        return np.broadcast_to(r, (B, r.shape[-1])), np.broadcast_to(c, (B,)).copy()

    r, cost = cost_of(th)
    lam = np.full(B, 1e-3)
    last_gain = np.full(B, np.inf)
    eye = np.eye(p)
    for _ in range(iters):
        with np.errstate(all="ignore"):
            J = tgt.sw[:, None] * tgt._raw_jac(th)
            J = np.where(np.isfinite(J), J, 0.0)
            rr = np.where(np.isfinite(r), r, 0.0)
            g = np.einsum("bmp,bm->bp", J, rr)
            H = np.einsum("bmp,bmq->bpq", J, J)
            D = np.einsum("bpp->bp", H) + 1e-12
            A = H + (lam[:, None] * D)[:, :, None] * eye
            try:
                step = -np.linalg.solve(A, g[:, :, None])[:, :, 0]
            except np.linalg.LinAlgError:
                step = -np.linalg.lstsq(A[0], g[0], rcond=None)[0][None, :].repeat(B, 0)
        step = np.where(np.isfinite(step), step, 0.0)
        trial = np.clip(th + step, lo, hi)
        r_new, c_new = cost_of(trial)
        better = c_new < cost
        gain = np.where(better, (cost - c_new) / np.maximum(cost, 1e-300), 0.0)
        th = np.where(better[:, None], trial, th)
        r = np.where(better[:, None], r_new, r)
        last_gain = np.where(better, gain, np.minimum(last_gain, 1.0) * 0.5)
        cost = np.where(better, c_new, cost)
        lam = np.clip(np.where(better, lam / 3.0, lam * 4.0), 1e-12, 1e12)
    settled = (last_gain < 1e-6) | (lam >= 1e11)
    return th, cost, settled


def _solve_ls(tgt: _Target, starts, lo, hi, max_nfev=100):
    """Best least-squares solution over several starts.

    All starts are first improved together by a few batched Levenberg–Marquardt steps;
    the best is then polished by ``scipy.optimize.least_squares`` (trust-region
    reflective, box bounds, analytic Jacobian). Returns the OptimizeResult or None.
    """
    x0s = []
    for x0 in starts:
        x0 = np.asarray(x0, dtype=float)
        if x0.shape == lo.shape and np.all(np.isfinite(x0)):
            x0s.append(np.clip(x0, lo, hi))
    if not x0s:
        return None
    X0 = np.array(x0s)
    if len(X0) > 1:
        th, cost, _ = _batch_lm(tgt, X0, lo, hi, iters=15)
        order = np.argsort(cost)
        candidates = [th[i] for i in order[:2] if np.isfinite(cost[i])] or [X0[0]]
    else:
        candidates = [X0[0]]
    best = None
    for x0 in candidates:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                res = least_squares(tgt.residuals, x0,
                                    jac=tgt.jacobian if tgt.fam.jac is not None else "2-point",
                                    bounds=(lo, hi), method="trf", x_scale="jac",
                                    max_nfev=max_nfev)
        except (ValueError, np.linalg.LinAlgError, FloatingPointError):
            continue
        if not np.all(np.isfinite(res.x)) or not math.isfinite(res.cost):
            continue
        if best is None or res.cost < best.cost:
            best = res
    return best


def _fit_family(fam: Family, n, y, w, data: _Data, idx=None, starts_extra=(),
                warm_only: bool = False) -> _FamilyFit:
    """Fit one family to sizes ``n`` (a subset ``idx`` of the data, or all).

    ``warm_only`` skips the linearised guesses and starts from ``starts_extra`` alone.
    """
    sel = slice(None) if idx is None else idx
    if fam.baseline:
        return _FamilyFit(fam, np.array([float(y[-1])]), "converged")
    p = fam.n_params
    n_res = len(n) * (2 if fam.joint else 1)
    if fam.joint:
        z_train = data.train[sel]
        n_res = len(n) + int(np.isfinite(z_train).sum())
    if n_res < p or len(n) < 2:
        return _FamilyFit(fam, None, "failed", f"needs at least {p} fitted points")
    signed = data.sign < 0 or bool(np.nanmin(y) < 0)
    lo, hi = fam.bounds(signed=signed and not fam.joint)
    if fam.joint:
        z_test, wt, wr = data.test[sel], data.w_test[sel], data.w_train[sel]
        tgt = _Target(fam, n, z_test, wt / wt.mean(), z_train, wr / np.nanmean(wr))
        try:
            starts = fam.guesses(n, z_test, z_train, wt, wr)
        except Exception:  # a guess that cannot be formed falls back to the generic start
            starts = []
    else:
        z = data.sign * y
        tgt = _Target(fam, n, z, w / w.mean())
        try:
            with np.errstate(all="ignore"):
                starts = fam.guesses(n, z, w)
        except Exception:
            starts = []
    starts = list(starts_extra) if warm_only and len(starts_extra) else list(starts) + list(starts_extra)
    if not starts:
        starts = [np.clip(np.ones(p), lo, hi)]
    res = _solve_ls(tgt, starts, lo, hi)
    if res is None:
        return _FamilyFit(fam, None, "failed", "least squares did not converge from any start")
    status, message = "converged", ""
    if not res.success:
        status, message = "poorly determined", "iteration limit reached"
    elif tgt.size <= p:
        status, message = "poorly determined", "no spare points: as many parameters as points"
    else:
        J = tgt.jacobian(res.x)
        norms = np.linalg.norm(J, axis=0)
        if np.any(norms == 0):
            status, message = "poorly determined", "a parameter has no effect on the fit"
        else:
            sv = np.linalg.svd(J / norms, compute_uv=False)
            if sv[-1] <= 0 or sv[0] / sv[-1] > MAX_CONDITION:
                status, message = "poorly determined", "parameters are not separately identifiable"
    return _FamilyFit(fam, res.x, status, message)


def _predict(fam: Family, theta, n, on: str, sign: float):
    """Prediction of a fitted family on the natural scale of the fitted quantity."""
    n = np.asarray(n, dtype=float)
    theta = np.asarray(theta, dtype=float)
    with np.errstate(all="ignore"):
        if fam.joint:
            if on == "test":
                return fam.func(n, theta)
            if on == "train":
                return fam.train_func(n, theta)
            return fam.func(n, theta) - fam.train_func(n, theta)
        return sign * fam.func(n, theta)


def _asymptote_fn(fam: Family, on: str, sign: float):
    if fam.joint:
        return (lambda t: 0.0) if on == "gap" else fam.asymptote
    if fam.asymptote is None:
        return None
    return lambda t: sign * fam.asymptote(t)


def _exponent_fn(fam: Family, on: str):
    if fam.joint:
        if on == "train":
            return fam.extra["train_exponent"]
        if on == "gap":
            return lambda t: float(min(t[2], t[4]))
    return fam.exponent


def _aicc(rss: float, m: int, k: int) -> float:
    """Small-sample corrected AIC of a least-squares fit with k parameters (incl. σ²).

    References
    ----------
    .. [1] C. M. Hurvich and C.-L. Tsai, "Regression and time series model selection
           in small samples", Biometrika 76(2), 1989.
    """
    if m - k - 1 <= 0:
        return math.inf
    return m * math.log(max(rss / m, 1e-300)) + 2 * k + 2 * k * (k + 1) / (m - k - 1)


def _holdout_count(m: int) -> int:
    """Largest sizes held out for forecast validation: a quarter, at least one, and at
    least three while ``MIN_VALIDATION_POINTS`` sizes stay before the first of them.

    With 7 or 8 sizes a quarter is 2 origins, the last scored on a single size: too few
    to rank 11 families on, so 3 are held out (common practice: more validation origins
    give a steadier forecast score; measured on scripts/bench_extrapolation.py, where the
    choices did not change with 5 repeats and the error fell slightly with 3).
    """
    if m < 3:
        return 0
    return max(1, math.ceil(m / 4), min(3, m - MIN_VALIDATION_POINTS))


# ============================================================== the API
def fit_curve(curve, *, families="auto", on: str = "test", bootstrap: int = 500,
              weights: str = "sem", random_state=0, holdout: int | None = None) -> CurveFit:
    """Fit learning-curve families to a measured curve and choose one.

    Parameters
    ----------
    curve : Curve or pandas.DataFrame
        The measured curve (a table needs ``size`` and ``test_error``).
    families : "auto", str or list of str
        Families to try: ``"auto"`` (all registered; ``joint-train-test`` only when the curve has
        train error), a comma-separated string or a list of names. ``last-value`` is always
        fitted as the baseline.
    on : {"test", "train", "gap"}
        The quantity fitted: test error, train error, or the gap test − train.
    bootstrap : int
        Bootstrap replicates for intervals (0 disables intervals).
    weights : {"sem", "index", "none"}
        Least-squares weights: inverse variance of the per-size mean with a floor,
        rank of the size (Figueroa et al. 2012), or equal.
    random_state : int or None
        Seed of the bootstrap; the same seed gives the same numbers.
    holdout : int, optional
        Number of largest sizes held out for forecast validation (default: a quarter).

    Returns
    -------
    CurveFit

    References
    ----------
    .. [1] T. Viering and M. Loog, "The Shape of Learning Curves: A Review", IEEE TPAMI
           45(6), 2023 (families; last-value as the baseline).
    .. [2] R. L. Figueroa, Q. Zeng-Treitler, S. Kandula and L. H. Ngo, "Predicting
           sample size required for classification performance", BMC Medical
           Informatics and Decision Making 12:8, 2012 (weighted nonlinear least squares
           of an inverse power law).
    .. [3] B. Efron and R. Tibshirani, "An Introduction to the Bootstrap", Chapman &
           Hall, 1993 (percentile intervals).
    .. [4] C. M. Hurvich and C.-L. Tsai, Biometrika 76(2), 1989 (AICc).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
    >>> noise = np.tile([-0.002, 0.0, 0.002], 6)
    >>> curve = Curve.from_table(pd.DataFrame({"size": n,
    ...                          "test_error": 0.05 + 2.0 * n ** -0.6 + noise}))
    >>> fit = fit_curve(curve, families="power-law-floor", bootstrap=50)
    >>> fit.best
    'power-law-floor'
    >>> round(fit.asymptote().estimate, 2)
    0.05
    """
    if isinstance(curve, pd.DataFrame):
        curve = Curve.from_table(curve)
    if not isinstance(curve, Curve):
        raise InputError(f"fit_curve needs a Curve or a DataFrame, got {type(curve).__name__}")
    if on not in ON_CHOICES:
        raise InputError(f"on must be one of {', '.join(ON_CHOICES)} (got {on!r})")
    if weights not in WEIGHT_CHOICES:
        raise InputError(f"weights must be one of {', '.join(WEIGHT_CHOICES)} (got {weights!r})")
    try:
        bootstrap = int(bootstrap)
    except (TypeError, ValueError):
        raise InputError(f"bootstrap must be a whole number, got {bootstrap!r}") from None
    if bootstrap < 0:
        raise InputError("bootstrap must be >= 0 replicates")
    if on in ("train", "gap") and not curve.has_train:
        raise InputError(f"fitting on={on!r} needs train_error in the curve; "
                         "fit the test error instead (on='test')")
    names = _family_list(families, curve.has_train)
    data = _prepare(curve, on, weights)
    notes: list[str] = []

    # ---- full fits
    fits: dict[str, _FamilyFit] = {}
    for name in names:
        fam = FAMILIES[name]
        try:
            fits[name] = _fit_family(fam, data.sizes, data.y, data.w, data)
        except Exception as exc:  # a family that breaks is reported, never fatal
            fits[name] = _FamilyFit(fam, None, "failed", f"{type(exc).__name__}: {exc}")

    # ---- forecast validation and AICc
    m = data.m
    h = _holdout_count(m) if holdout is None else max(0, min(int(holdout), m - 1))
    cut = m - h
    for name, ff in fits.items():
        if ff.theta is not None:
            pred = _predict(ff.family, ff.theta, data.sizes, on, data.sign)
            rss = float(np.sum(data.w * (pred - data.y) ** 2))
            ff.aicc = _aicc(rss, m, ff.family.n_params + 1) if np.isfinite(rss) else math.nan
        if h and ff.status != "failed":
            _forecast(ff, data, on, range(cut, m),
                      drift_from=m - (h if holdout is not None else min(h, max(1, math.ceil(m / 4)))))

    for ff in fits.values():
        if not _plausible(ff, data, on):
            ff.eligible = False
            ff.message = ((ff.message + "; " if ff.message else "")
                          + "not chosen: extrapolates below zero or above the measured range")
    lof = _lack_of_fit(fits, data, on)
    best, order = _choose(fits, data, cut)
    flat = m >= 1 and float(np.ptp(data.y)) <= 1e-12 * max(1.0, float(np.max(np.abs(data.y))))
    if flat and m >= 2:
        # an exactly constant curve carries no shape; any family would fit rounding noise
        best, order = "last-value", ["last-value"] + [k for k in order if k != "last-value"]
        notes.append(f"the {on} curve is flat at {data.y[-1]:.4g}; the last value is used")
    chosen = fits[best]
    if lof is not None and chosen.status == "poor fit" and not flat:
        notes.append(f"no curve family describes the measured points within their standard "
                     f"errors (best reduced chi-square {lof[0]:.3g}); {best} is the best "
                     "forecaster, read its answers as rough")

    # ---- bootstrap the chosen family
    rng = np.random.default_rng(random_state)
    boot = _bootstrap(chosen, data, bootstrap, rng) if bootstrap > 0 else None

    # ---- honest warnings
    if m < 4:
        notes.append(f"only {m} distinct size{'s' if m != 1 else ''} measured; at least 4 are "
                     "needed to choose a family by forecast, so the choice is weak")
    if m >= 2 and on != "train":
        rho = _spearman(data.sizes, data.y)
        if not (rho < 0 and data.y[-1] < data.y[0]):
            label = {"test": "test error", "gap": "gap"}[on]
            notes.append(f"the {label} does not decrease with size (first {data.y[0]:.4g}, "
                         f"last {data.y[-1]:.4g}); extrapolations are unreliable")
    if chosen.family.baseline and m >= 2 and not flat:
        notes.append("no curve family could be fitted; the last measured value is used")
    elif chosen.status == "poorly determined":
        notes.append(f"the chosen family {best} is poorly determined ({chosen.message})")
    if bootstrap > 0 and boot is not None:
        ok = int(np.all(np.isfinite(boot), axis=1).sum())
        if ok < 0.9 * bootstrap:
            notes.append(f"only {ok} of {bootstrap} bootstrap refits succeeded; intervals are rough")
    if bootstrap > 0 and all(len(c) < 2 for c in data.cells) and not chosen.family.baseline \
            and m <= chosen.family.n_params:
        notes.append("no repeats and no spare sizes: intervals cannot be estimated")

    table = _table(fits, best, order)
    settings = {"families": families if isinstance(families, str) else list(families),
                "bootstrap": bootstrap, "weights": weights, "random_state": random_state,
                "holdout": h}
    result = CurveFit(best=best, runner_up=order[1] if len(order) > 1 else None, on=on,
                      table=table, warnings=notes, curve=curve,
                      _state=_State(data, fits, boot, settings))
    if bootstrap > 0 and m:
        for k in (2, 10):
            e = result.predict(k * data.n_max)
            if math.isfinite(e.low) and (e.high - e.low) > abs(e.estimate):
                notes.append(f"the {e.level:.0%} interval at {k}× the largest size "
                             f"({e.low:.4g}–{e.high:.4g}) is wider than the estimate "
                             f"({e.estimate:.4g})")
                break
    return result


def _family_list(families, has_train: bool) -> list[str]:
    if families is None or (isinstance(families, str) and families.strip().lower() == "auto"):
        names = [n for n, f in FAMILIES.items() if has_train or not f.joint]
    else:
        if isinstance(families, str):
            names = [s.strip() for s in families.split(",") if s.strip()]
        else:
            names = [str(s).strip() for s in families]
        if not names:
            raise InputError("empty family list; give names like power-law-floor,exponential-floor or 'auto'")
        renamed = [n for n in names if n in LEGACY_NAMES]
        if renamed:
            raise InputError("; ".join(f"family {n!r} is now called {LEGACY_NAMES[n]!r}"
                                       for n in renamed)
                             + f"; use --families {','.join(current_name(n) for n in names)}")
        unknown = [n for n in names if n not in FAMILIES]
        if unknown:
            raise InputError(f"unknown curve famil{'y' if len(unknown) == 1 else 'ies'} "
                             f"{', '.join(unknown)}; known: {', '.join(FAMILIES)}")
        for n in names:
            if FAMILIES[n].joint and not has_train:
                raise InputError(f"family {n} fits train and test error together, but the "
                                 "curve has no train_error; leave it out")
    if "last-value" not in names:
        names.append("last-value")
    return list(dict.fromkeys(names))


def _forecast(ff: _FamilyFit, data: _Data, on: str, origins, drift_from: int = 0) -> None:
    """Rolling-origin forecast validation of one family.

    For each origin c, the family is fitted to the c smallest sizes and forecasts the
    rest; the forecast error is the mean absolute error, averaged over origins. The
    squared errors in excess of the held-out means' own noise, per unit of squared
    log-distance from the origin, give ``drift``: the model error that later widens
    intervals beyond the measured sizes. Only origins ``c >= drift_from`` feed ``drift``:
    an origin fitted on a few sizes forecasts worse than the full fit will, so using it
    would overstate the full fit's model error.
    """
    errs, rates = [], []
    warm = [ff.theta]
    for k, c in enumerate(origins):
        idx = np.arange(c)
        try:
            # the first origin also tries the linearised guesses; later ones start warm
            sub = _fit_family(ff.family, data.sizes[idx], data.y[idx], data.w[idx], data, idx,
                              starts_extra=warm, warm_only=k > 0)
        except Exception:  # one origin that cannot be fitted leaves the others
            continue
        if sub.theta is None:
            continue
        warm = [sub.theta, ff.theta]
        fc = _predict(ff.family, sub.theta, data.sizes[c:], on, data.sign)
        e = np.abs(fc - data.y[c:])
        if not np.all(np.isfinite(e)):
            continue
        errs.append(float(np.mean(e)))
        dist = np.log(data.sizes[c:] / data.sizes[c - 1])
        noise = np.nan_to_num(data.sem[c:], nan=0.0)
        if c >= drift_from:
            rates.extend(np.maximum(e ** 2 - noise ** 2, 0.0) / dist ** 2)
    if errs:
        ff.forecast_error = float(np.mean(errs))
        ff.drift = float(np.sqrt(np.mean(rates))) if rates else 0.0


def _noise_scale(data: "_Data"):
    """Per-size standard errors for judging residuals, floored as for the weights
    (sizes without repeats get the median); None when no size has repeats."""
    sem = data.sem
    good = np.isfinite(sem) & (sem > 0)
    if not good.any():
        return None
    med = float(np.median(sem[good]))
    return np.maximum(np.where(np.isfinite(sem), sem, med), SEM_FLOOR_FRACTION * med)


def _lack_of_fit(fits: dict, data: "_Data", on: str):
    """Mark families that miss the measured points by many standard errors as "poor fit".

    Each fitted family gets its reduced chi-square χ²/(m − p) with the per-size standard
    errors of the means. A converged family whose value exceeds both
    ``LACK_OF_FIT_FLOOR`` and ``LACK_OF_FIT_RATIO`` × the smallest value among the
    fitted families gets status "poor fit", so the choice passes it over while another
    family describes the points. Returns (best value, limit), or None without repeats
    (no noise scale to judge against).

    References
    ----------
    .. [1] P. R. Bevington and D. K. Robinson, "Data Reduction and Error Analysis for
           the Physical Sciences", 3rd ed., McGraw-Hill, 2003, ch. 11 (reduced
           chi-square as a test of a fitted model against the measurement errors).
    """
    scale = _noise_scale(data)
    if scale is None:
        return None
    for ff in fits.values():
        # the joint family's test (or train) curve uses 3 of its 5 parameters
        p = 3 if ff.family.joint and on != "gap" else ff.family.n_params
        if ff.theta is None or ff.family.baseline or data.m - p <= 0:
            continue
        pred = _predict(ff.family, ff.theta, data.sizes, on, data.sign)
        z = (pred - data.y) / scale
        if np.all(np.isfinite(z)):
            ff.lack_of_fit = float(np.sum(z ** 2) / (data.m - p))
    values = [ff.lack_of_fit for ff in fits.values() if math.isfinite(ff.lack_of_fit)]
    if not values:
        return None
    best = min(values)
    limit = max(LACK_OF_FIT_FLOOR, LACK_OF_FIT_RATIO * best)
    for ff in fits.values():
        if ff.status == "converged" and math.isfinite(ff.lack_of_fit) and ff.lack_of_fit > limit:
            ff.status = "poor fit"
            ff.message = ((ff.message + "; " if ff.message else "")
                          + f"misses the measured points (reduced chi-square "
                            f"{ff.lack_of_fit:.3g}, limit {limit:.3g})")
    return best, limit


def _plausible(ff: _FamilyFit, data: _Data, on: str) -> bool:
    """False when the extrapolated curve goes where the quantity cannot: below 0 for an
    error measured >= 0, or above the worst measured value for a test error or gap."""
    if ff.theta is None or ff.family.baseline:
        return True
    far = data.n_max * np.array([1.0, 2.0, 10.0, 100.0, 1e4])
    pred = _predict(ff.family, ff.theta, far, on, data.sign)
    if not np.all(np.isfinite(pred)):
        return False
    nonneg = bool(np.nanmin(data.y) >= 0)
    scale = max(1.0, float(np.nanmax(np.abs(data.y))))
    if nonneg and on != "train" and np.any(pred < -1e-9 * scale):
        return False
    # a fitted error that climbs past the worst measured value is not a learning curve
    if on != "train" and np.any(pred[1:] > float(np.nanmax(data.y)) + 1e-9 * scale):
        return False
    return True


# With fewer points than this before the first held-out size, forecast validation cannot
# compare 3- and 4-parameter families, and the 3-parameter power law is the strong default
# (Viering & Loog 2023).
MIN_VALIDATION_POINTS = 4
DEFAULT_PREFERENCE = ("power-law-floor", "power-law", "joint-train-test")
# Relative margin of forecast error within which families count as tied (tuned on the
# bundled-dataset extrapolation benchmark, scripts/bench_extrapolation.py).
NEAR_TIE = 0.5
# Bootstrap of the chosen family: "student" (parametric, Student-t noise of each mean;
# the default) or "resample" (repeats resampled within each size, the plain bootstrap,
# too narrow with 2–5 repeats; kept to measure the difference).
BOOTSTRAP_KIND = "student"
# Whether prediction intervals are floored at the Student-t interval of the measured mean.
NOISE_FLOOR = True
# Whether intervals beyond the data also span the near-tied families' predictions.
ENVELOPE_TIES = True


def _preference(name: str) -> int:
    return DEFAULT_PREFERENCE.index(name) if name in DEFAULT_PREFERENCE[:2] else 2


def _choose(fits: dict, data: _Data, cut: int):
    """Chosen family and the ranking: forecast error first, AICc among near-ties."""
    real = {k: v for k, v in fits.items()
            if not v.family.baseline and v.theta is not None and v.eligible}
    pool = {k: v for k, v in real.items() if v.status == "converged" and math.isfinite(v.forecast_error)}
    if not pool:
        pool = {k: v for k, v in real.items() if math.isfinite(v.forecast_error)}
    if cut < MIN_VALIDATION_POINTS:
        preferred = [k for k in DEFAULT_PREFERENCE if k in real and real[k].status == "converged"]
        if preferred:
            rest = sorted((k for k in real if k not in preferred),
                          key=lambda k: (_finite_or_inf(real[k].forecast_error),
                                         _finite_or_inf(real[k].aicc)))
            return preferred[0], preferred + rest
    if pool:
        best_fe = min(v.forecast_error for v in pool.values())
        held = data.sem[cut:]
        held = held[np.isfinite(held)]
        # forecast errors from a few held-out sizes are noisy: within NEAR_TIE of the best
        # (or of the held-out means' noise) families are tied; among ties the simple power
        # laws come first (a strong default, Viering & Loog 2023), then AICc decides
        tol = max(NEAR_TIE * best_fe, 0.25 * float(np.median(held)) if len(held) else 0.0)
        near = [k for k, v in pool.items() if v.forecast_error <= best_fe + tol]
        near.sort(key=lambda k: (_preference(k), _finite_or_inf(pool[k].aicc), pool[k].forecast_error))
        for k in near:
            pool[k].tied = True
        rest = sorted((k for k in pool if k not in near), key=lambda k: pool[k].forecast_error)
        order = near + rest
    else:
        cands = {k: v for k, v in real.items() if v.status == "converged"} or real
        order = sorted(cands, key=lambda k: _finite_or_inf(cands[k].aicc))
    if not order:
        base = [k for k, v in fits.items() if v.family.baseline]
        return base[0], base[:1]
    return order[0], order


def _finite_or_inf(x: float) -> float:
    return x if (x is not None and math.isfinite(x)) else math.inf


def _table(fits: dict, best: str, order: list) -> pd.DataFrame:
    ranked = list(order) + sorted(
        (k for k in fits if k not in order),
        key=lambda k: (fits[k].status == "failed", _finite_or_inf(fits[k].forecast_error)))
    rows = []
    for k in ranked:
        ff = fits[k]
        rows.append({
            "family": k, "formula": ff.family.formula, "n_params": ff.family.n_params,
            "params": ({p: float(v) for p, v in zip(ff.family.params, ff.theta)}
                       if ff.theta is not None else {}),
            "forecast_error": float(ff.forecast_error), "aicc": float(ff.aicc),
            "status": ff.status, "chosen": k == best, "message": ff.message,
            "lack_of_fit": float(ff.lack_of_fit),
        })
    return pd.DataFrame(rows, columns=["family", "n_params", "params", "forecast_error", "aicc",
                                       "status", "chosen", "message", "lack_of_fit", "formula"])


def _bootstrap(chosen: _FamilyFit, data: _Data, B: int, rng: np.random.Generator):
    """Parameter replicates of the chosen family from a parametric bootstrap of the means.

    Each size's mean is redrawn as mean + s·t, t from Student's t with k − 1 degrees of
    freedom (k repeats at that size) and s its standard error, floored at
    ``SEM_FLOOR_FRACTION`` × the median one as for the weights. Resampling 2–5 repeats
    within a size (the plain bootstrap) shrinks the variance by (k − 1)/k and ignores
    that s itself is estimated from k − 1 degrees of freedom; with 3 repeats its 90%
    intervals of a single mean are about half as wide as Student's. Sizes with a single
    repeat get a normal perturbation with the pooled standard error (or, with no
    repeats at all, the residual scale of the fit).

    References
    ----------
    .. [1] B. Efron and R. Tibshirani, "An Introduction to the Bootstrap", Chapman &
           Hall, 1993, ch. 6 and 9 (parametric bootstrap; the plain bootstrap's
           (n − 1)/n variance bias in small samples).
    .. [2] "Student", "The probable error of a mean", Biometrika 6(1), 1908.
    """
    m = data.m
    T = np.empty((B, m))
    R = np.empty((B, m))
    sems = np.array([_sem(c[:, 0]) for c in data.cells])
    if data.on != "test":
        sems = data.sem
    pooled = float(np.nanmedian(sems)) if np.isfinite(sems).any() else math.nan
    fam, on, sign = chosen.family, data.on, data.sign
    if not math.isfinite(pooled):
        pred = _predict(fam, chosen.theta, data.sizes, on, sign)
        dof = m - fam.n_params
        pooled = float(np.sqrt(np.sum((pred - data.y) ** 2) / dof)) if dof > 0 else 0.0
    floor = SEM_FLOOR_FRACTION * pooled if math.isfinite(pooled) else 0.0
    gap_noise = np.zeros((B, m))

    def draw(k, sem):
        # Student-t draws, clipped far out in the tails so one replicate cannot derail a refit
        return sem * np.clip(rng.standard_t(k - 1, size=B), -20.0, 20.0)

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
                st, sr = _sem(c[:, 0]), _sem(c[:, 1])
                kr = int(np.isfinite(c[:, 1]).sum())
                T[:, j] = np.mean(c[:, 0]) + draw(k, max(st, floor) if math.isfinite(st) else floor)
                R[:, j] = (np.nanmean(c[:, 1]) + draw(max(kr, 2), max(sr, floor))
                           if math.isfinite(sr) else np.nanmean(c[:, 1]) + 0.0 * T[:, j])
                if on == "gap":
                    sg = _sem(c[:, 0] - c[:, 1])
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
    out = np.full((B, fam.n_params), math.nan)
    if fam.baseline:
        out[:, 0] = Y[:, -1]
        return out
    lo, hi = fam.bounds(signed=(data.sign < 0 or bool(np.nanmin(data.y) < 0)) and not fam.joint)
    start = np.clip(chosen.theta, lo, hi)
    if fam.joint:
        wt, wr = data.w_test, data.w_train
        tgt = _Target(fam, data.sizes, T, wt / wt.mean(), R, wr / np.nanmean(wr))
    else:
        tgt = _Target(fam, data.sizes, sign * Y, data.w / data.w.mean())
    ok_rows = np.all(np.isfinite(tgt.z), axis=1)
    tgt.z = np.where(np.isfinite(tgt.z), tgt.z, 0.0)
    th, cost, settled = _batch_lm(tgt, np.repeat(start[None, :], B, axis=0), lo, hi, iters=40)
    # the few replicates the batched steps did not settle are finished by least_squares
    for b in np.nonzero(~settled & ok_rows)[0][: max(10, B // 5)]:
        one = _Target.__new__(_Target)
        one.fam, one.n, one.sw, one.z = fam, tgt.n, tgt.sw, tgt.z[b]
        if fam.joint:
            one.n_train = tgt.n_train
        res = _solve_ls(one, [th[b]], lo, hi, max_nfev=60)
        if res is not None and res.cost <= cost[b]:
            th[b], cost[b] = res.x, res.cost
    good = ok_rows & np.isfinite(cost) & np.all(np.isfinite(th), axis=1)
    out[good] = th[good]
    return out


# ============================================================== small helpers
def _check_level(level) -> float:
    try:
        level = float(level)
    except (TypeError, ValueError):
        raise InputError(f"interval level must be a number between 0 and 1, got {level!r}") from None
    if not 0 < level < 1:
        raise InputError(f"interval level must be between 0 and 1 (e.g. 0.9), got {level}")
    return level


def _quantiles(level: float):
    return [(1 - level) / 2, (1 + level) / 2]


def _percentiles(values, level: float):
    if values is None:
        return math.nan, math.nan
    v = np.asarray(values, dtype=float)
    v = v[~np.isnan(v)]
    if len(v) < 2:
        return math.nan, math.nan
    lo, hi = np.quantile(v, _quantiles(level))
    return float(lo), float(hi)


def _first_crossing(F: np.ndarray, grid: np.ndarray, target: float) -> np.ndarray:
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


def _spearman(x: np.ndarray, y: np.ndarray) -> float:
    rx = pd.Series(x).rank().to_numpy()
    ry = pd.Series(y).rank().to_numpy()
    if np.std(rx) == 0 or np.std(ry) == 0:
        return 0.0
    return float(np.corrcoef(rx, ry)[0, 1])


def _sig(x: float, digits: int = 3) -> float:
    if x == 0 or not math.isfinite(x):
        return x
    return round(x, -int(math.floor(math.log10(abs(x)))) + digits - 1)


def _fmt_count(n: float) -> str:
    """3 significant figures with thousands separators: 12,400."""
    if not math.isfinite(n):
        return "unbounded"
    if n >= 1e9:
        return f"{n:.3g}"
    return f"{_sig(n):,.0f}"


def _fmt_interval(low: float, high: float, level: float) -> str:
    if not math.isfinite(low) and not math.isfinite(high):
        return ""
    if math.isinf(high):
        return f" ({level:.0%} interval {_fmt_count(low)} to no upper limit)"
    return f" ({level:.0%} interval {_fmt_count(low)}–{_fmt_count(high)})"


def _fmt_error(e: float, metric: str = "error") -> str:
    """An error as a percentage for 0–1 error, else as a plain number."""
    if not math.isfinite(e):
        return str(e)
    if abs(e) < ZERO_PRINT:
        return "0%" if metric in _ERROR_METRICS else "0"
    if metric in _ERROR_METRICS:
        pct = 100.0 * e
        return f"{pct:.1f}%" if abs(pct) >= 0.995 else f"{pct:.2g}%"
    return f"{e:.4g}"


def format_error(e: float, metric: str = "error") -> str:
    """Public form of the error formatter used in messages (for the command line)."""
    return _fmt_error(e, metric)


def format_count(n: float) -> str:
    """Public form of the sample-count formatter used in messages."""
    return _fmt_count(n)
