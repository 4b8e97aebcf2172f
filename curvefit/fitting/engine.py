"""Fit learning-curve families to a measured curve, choose one, and put intervals on it.

The engine works on per-size means over repeats (``fitting.data``):

1. every family in ``curvefit.fitting.families`` is fitted by weighted nonlinear least squares
   (``fitting.least_squares``: ``scipy.optimize.least_squares``, box bounds, analytic
   Jacobian, several starts from linearised guesses);
2. families that miss the measured points by many standard errors (reduced chi-square
   far above the best family's) are marked "poor fit" and passed over
   (``fitting.selection``);
3. the family is chosen by forecast validation: rolling origins over the largest
   sizes (a quarter, at least 3 when 4 sizes stay before them), each family fitted to
   the sizes before the origin and scored by its mean absolute forecast error; families
   within a small tolerance of the best go to power-law-floor/power-law, then to the
   lower AICc (``fitting.selection``);
4. forecasts average the families that forecast well, each weighted by the inverse of
   its mean squared rolling-origin error (``fitting.selection.family_weights``); the
   chosen family names the curve, its parameters and its asymptote;
5. the chosen and the heaviest averaged families are refitted to a parametric bootstrap
   (each size's mean redrawn with Student-t noise of its standard error, each refit
   warm-started at the full-data solution; ``fitting.bootstrap``); the prediction band
   adds in quadrature the bootstrap spread of the averaged curve, the spread between
   families, the model error from forecast validation and the variance a fresh data set
   would bring, scaled by a correction learned on the bundled curve corpus
   (``fitting.intervals``, ``fitting.calibration``), never narrower than the interval of
   the measured mean;
6. answers inside the measured range come from the measured means (the size after which
   they stay at or below the target); the averaged forecast answers only beyond the
   largest measured size, and beyond a horizon (100× the largest size) an answer is
   "more than N" (``fitting.answers``).

Estimates are statistical, not guarantees: they assume the averaged families keep
describing the curve beyond the measured sizes about as well as they forecast the
held-out sizes.

This module holds the public objects (``fit_curve``, ``CurveFit``, ``SampleEstimate``);
it is pure numerics on a ``Curve`` and imports neither the command line nor I/O.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd
from scipy.special import ndtri

from curvefit.core.curve import Curve
from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import FitWarning, InputError
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import (
    format_count,
    format_error,
    format_interval,
    format_level,
    format_number,
    format_range,
    quantity_name,
)
from curvefit.core.validate import check_choice, check_count, check_level, check_positive, check_seed
from curvefit.fitting.answers import (
    EXTRAPOLATION_FACTOR,
    HORIZON,
    answer_text,
    find_crossing,
    horizon_text,
    search_grid,
    unreachable_text,
)
from curvefit.fitting.bootstrap import bootstrap_parameters, interval_around, redrawn_means
from curvefit.fitting.calibration import Calibration, resolve_calibration
from curvefit.fitting.data import ON_CHOICES, WEIGHT_CHOICES, FitData, prepare_data
from curvefit.fitting.intervals import (
    band_parts,
    corrected_point,
    falls,
    mean_band,
    prediction_band,
)
from curvefit.fitting.least_squares import asymptote_function, exponent_function, predict_natural
from curvefit.fitting.selection import (
    MIN_VALIDATION_POINTS,
    choose,
    family_list,
    family_weights,
    fit_families,
    holdout_count,
    ranking_table,
    score_families,
)

# Practical horizon for the wording of logarithmic families: the value at this multiple
# of the largest measured size is shown beside their limit.
LOG_HORIZON = 100.0
# The band of the averaged forecast this many times the largest measured size stands for
# the curve's limit in the floor's interval (see CurveFit.asymptote).
FLOOR_HORIZON = 1000.0


# ============================================================== result objects
@dataclass(frozen=True)
class SampleEstimate:
    """Labelled samples needed to reach a target test error or generalization gap.

    Attributes
    ----------
    n : float
        Point estimate of the samples needed (``inf`` when not reachable or beyond the
        horizon): from the measured means when they stay at or below the target from
        some measured size on, else from the fitted curve beyond the largest measured
        size.
    low, high : float
        Interval of the samples needed (``high`` is ``inf`` when the band's upper edge
        does not reach the target within the horizon, the message says why; ``low`` is
        finite for an unreachable target when the band's lower edge reaches it; NaN
        without bootstrap).
    level : float
        Interval level, e.g. 0.9.
    target : float
        The target error or gap.
    kind : str
        ``"test_error"`` or ``"gap"``.
    reachable : bool
        True when the answer is a number of samples: False when the fitted curve levels
        off above the target, and when it reaches the target only beyond the horizon.
    asymptote : Estimate or None
        The level the fitted curve tends to, where the family has one.
    message : str
        The answer as one plain sentence.
    warnings : tuple of str
        Cautions attached to this answer (extrapolation, open interval).
    horizon : float
        The largest size this curve answers with a number (``HORIZON`` × the largest
        measured size by default).
    beyond_horizon : bool
        True when the fitted curve reaches the target only beyond ``horizon``: the
        answer is "more than ``horizon``; this curve cannot say how much more", and
        ``n`` is ``inf``.
    metric : str or None
        The loss of the curve the answer was read from (``"error"``, ``"mse"``, a
        scorer's name), so the target prints in its units ("a test MSE of 3,000",
        "15.0% test error"); None in answers made before it was recorded.
    metric_info : dict or None
        The curve's ``metric_info`` (its ``label`` names a scorer's loss in words).
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
    horizon: float = math.inf
    beyond_horizon: bool = False
    metric: str | None = None
    metric_info: dict | None = field(default=None, hash=False)

    def to_dict(self) -> dict:
        d = asdict(self)
        d["asymptote"] = self.asymptote.to_dict() if self.asymptote is not None else None
        d["warnings"] = list(self.warnings)
        return d

    def __repr__(self) -> str:
        return f"SampleEstimate({self.message!r})"

    def _repr_html_(self) -> str:
        """The samples needed with their interval, and the answer in words (shown by Jupyter)."""
        from curvefit.report.notebook import sample_html

        return sample_html(self)

    def plot(self, ax=None):
        """Draw the samples needed as a point with its interval on a log axis; returns the
        matplotlib Axes (``ax`` when given)."""
        from curvefit.report.notebook import plot_samples

        return plot_samples(self, ax=ax)


class _State:
    """Everything a CurveFit needs besides its public fields (internal, not frozen)."""

    def __init__(self, data: FitData, fits, boots, settings, calibration: Calibration,
                 measured: FitData | None = None):
        self.data = data
        # every measured size, also those left out of the fit (answers read the measured
        # curve there)
        self.measured = data if measured is None else measured
        self.fits = fits
        self.boots = boots        # family -> (B, p) replicates, for the averaged families
        self.boot = None if boots is None else boots.get(settings["best"])  # the chosen one's
        self.settings = settings
        self.calibration = calibration
        self.companions: dict[str, "CurveFit"] = {}


@dataclass(frozen=True, eq=False)
class CurveFit:
    """A fitted learning curve: the family ranking, the chosen family and its intervals.

    Attributes
    ----------
    best : str
        Name of the chosen family.
    runner_up : str or None
        The second family of the ranking (``table``'s second row, unless that fit failed).
    on : str
        The fitted quantity: ``"test"``, ``"train"`` or ``"gap"`` (test − train).
    table : pandas.DataFrame
        One row per family: ``family, n_params, params, forecast_error, aicc, status,
        chosen, tied, eligible, message, lack_of_fit``; ranked by the rule that chooses
        (``ranking_rule``), the chosen family first, then the families that cannot be
        chosen. ``status`` is
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
    def predict(self, n, interval: float = INTERVAL) -> pd.DataFrame:
        """Predicted error at one or more sample sizes: the averaged forecast of the
        families that forecast well (``family_weights``) and its prediction band.

        The band holds the bootstrap spread, the spread between the families, the model
        error seen in forecast validation (growing beyond the largest measured size) and
        the variance a fresh data set would bring; ``notes`` say how it was made.

        Parameters
        ----------
        n : float or array-like
            Sample size(s) (> 0).
        interval : float
            Level of the prediction band.

        Returns
        -------
        pandas.DataFrame
            One row per size: ``size, estimate, low, high`` (also for a single size;
            :meth:`error_at` gives one size as an ``Estimate``).

        Examples
        --------
        >>> import numpy as np, pandas as pd
        >>> n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
        >>> table = pd.DataFrame({"size": n, "test_error": 0.05 + 2.0 * n ** -0.6
        ...                       + np.tile([-0.002, 0.0, 0.002], 6)})
        >>> fit = fit_curve(table, families="power-law-floor", bootstrap=50)
        >>> fit.predict([1600, 3200]).columns.tolist()
        ['size', 'estimate', 'low', 'high']
        """
        level = check_level(interval)
        sizes = self._checked_sizes(n)
        low, high = self._predict_interval(sizes, level)
        return pd.DataFrame({"size": sizes, "estimate": self._predict_point(sizes),
                             "low": low, "high": high})

    def error_at(self, n, interval: float = INTERVAL) -> Estimate:
        """Predicted error at one sample size, with its interval (as :meth:`predict`).

        Parameters
        ----------
        n : float
            One sample size (> 0); use :meth:`predict` for several.
        interval : float
            Level of the prediction band.

        Returns
        -------
        Estimate

        Examples
        --------
        >>> import numpy as np, pandas as pd
        >>> n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
        >>> table = pd.DataFrame({"size": n, "test_error": 0.05 + 2.0 * n ** -0.6
        ...                       + np.tile([-0.002, 0.0, 0.002], 6)})
        >>> e = fit_curve(table, families="power-law-floor", bootstrap=50).error_at(3200)
        >>> e.low <= e.estimate <= e.high, e.level
        (True, 0.9)
        """
        if np.ndim(n) != 0:
            raise InputError("error_at takes one sample size; use predict for several")
        level = check_level(interval)
        sizes = self._checked_sizes(n)
        low, high = self._predict_interval(sizes, level)
        return Estimate(float(self._predict_point(sizes)[0]), float(low[0]), float(high[0]), level)

    def band_parts(self, n, interval: float = INTERVAL) -> pd.DataFrame:
        """What the prediction band at ``n`` is made of, each part as a standard deviation
        before the calibration: ``size, estimate, bootstrap_low, bootstrap_high`` (the
        averaged curve's bootstrap spread below and above), ``families`` (spread between
        the averaged families), ``model_error`` (from forecast validation, growing with
        ln n beyond the data), ``data_set`` (what a fresh data set would add),
        ``level_distance`` (|F(N)|·ln(n/N): the forecast's level at the largest size N
        times the distance beyond it) and ``noise_floor`` (the measured mean's interval
        nearby, over z). The band is z·√(κ²·(bootstrap² + families² + model_error²) +
        data_set² + (τ·level_distance)²) on each side, κ the calibration's
        ``model_error_scale`` and τ its ``relative_error``, and never narrower than
        z·noise_floor.

        Examples
        --------
        >>> import numpy as np, pandas as pd
        >>> n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
        >>> table = pd.DataFrame({"size": n, "test_error": 0.05 + 2.0 * n ** -0.6
        ...                       + np.tile([-0.002, 0.0, 0.002], 6)})
        >>> parts = fit_curve(table, bootstrap=50).band_parts([1600, 16000])
        >>> bool(parts["model_error"].iloc[0] == 0.0)    # no extrapolation at the data
        True
        """
        level = check_level(interval)
        sizes = self._checked_sizes(n)
        s = self._state
        parts = band_parts(sizes, level, s.data, s.fits, s.boots)
        return pd.DataFrame({"size": sizes, **parts})

    def predict_family(self, name: str, n) -> np.ndarray:
        """Point predictions of any family that did not fail (e.g. to draw the runner-up)."""
        fit = self._state.fits.get(name)
        if fit is None or fit.theta is None:
            raise InputError(f"family {name!r} has no fit here; fitted: "
                             f"{', '.join(k for k, v in self._state.fits.items() if v.theta is not None)}")
        sizes = np.atleast_1d(np.asarray(n, dtype=float))
        return predict_natural(fit.family, fit.theta, sizes, self.on, self._state.data.sign)

    def parameters(self, interval: float = INTERVAL) -> pd.DataFrame:
        """Parameters of the chosen family with bootstrap percentile intervals.

        Returns a table ``param, estimate, low, high, note``. The estimate always lies
        inside its interval: values within rounding of one of the family's bounds are
        set to that bound, and where the refits' percentiles leave the estimate out (a
        parameter pinned at a bound, a skewed bootstrap) the interval is widened to
        reach it. ``note`` says "at its bound" (the estimate sits on a bound of the
        family), "widened to the estimate", "degenerate" (low = high: the refits did not
        move it) or "".

        Examples
        --------
        >>> import numpy as np, pandas as pd
        >>> n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
        >>> table = pd.DataFrame({"size": n, "test_error": 0.05 + 2.0 * n ** -0.6
        ...                       + np.tile([-0.002, 0.0, 0.002], 6)})
        >>> p = fit_curve(table, families="power-law-floor", bootstrap=50).parameters()
        >>> bool(((p["low"] <= p["estimate"]) & (p["estimate"] <= p["high"])).all())
        True
        """
        level = check_level(interval)
        fit = self._state.fits[self.best]
        boot = self._state.boot
        d = self._state.data
        lower, upper = fit.family.bounds(signed=(d.sign < 0 or bool(np.nanmin(d.y) < 0))
                                         and not fit.family.joint) if d.m else ((), ())
        tol = 1e-9 * max(1.0, float(np.nanmax(np.abs(d.y)))) if d.m else 0.0
        rows = []
        for j, name in enumerate(fit.family.params):
            bounds = [b for b in (lower[j], upper[j]) if math.isfinite(b)] if d.m else []

            def snap(v, bounds=bounds):
                near = [b for b in bounds if math.isfinite(v) and abs(v - b) <= tol]
                return float(near[0]) if near else float(v)

            est = snap(float(fit.theta[j]))
            vals = None if boot is None else np.array([snap(v) for v in boot[:, j]])
            lo, hi, widened = interval_around(vals, level, est)
            note = ("at its bound" if est in bounds else "widened to the estimate" if widened
                    else "degenerate" if math.isfinite(lo) and lo == hi else "")
            rows.append({"param": name, "estimate": est, "low": lo, "high": hi, "note": note})
        return pd.DataFrame(rows, columns=["param", "estimate", "low", "high", "note"])

    def asymptote(self, interval: float = INTERVAL) -> Estimate | None:
        """The error the chosen family tends to as n → ∞, or None if it has none.

        The estimate is the chosen family's limit. Its interval is the family's bootstrap
        interval joined with the prediction band of the averaged forecast at
        ``FLOOR_HORIZON`` × the largest measured size: the family's interval alone holds
        only if that family is right, and a floor that a few sizes barely pin down may
        lie anywhere the averaged families and their model error allow (on a known law
        with floor 0.05 the family's interval alone covered it in 65% of 40 simulated data
        sets, joined 95%; through the runner, a Bayes error of 0.10, 48% and 100% of 40,
        92% of 100). A
        falling test error's limit lies below its error at every size, so the interval
        ends at the band's upper edge at the largest measured size (a rising training
        error's limit lies above it). The limit of a generalization gap is 0 by
        definition and keeps the family's interval.

        Values within rounding of 0 (a floor pinned at its bound) are returned as exactly
        0. For a family whose ``approach`` is ``"logarithmic"`` this is a limit reached
        only as ln n → ∞, not a level seen at practical sizes; see ``approach``.
        """
        est = self._derived(asymptote_function(self._state.fits[self.best].family, self.on,
                                               self._state.data.sign), interval)
        if est is None:
            return None
        low, high = est.low, est.high
        if self.on != "gap" and self._state.data.m and math.isfinite(low):
            at = self._state.data.n_max * np.array([FLOOR_HORIZON, 1.0])
            with np.errstate(all="ignore"):
                band_lo, band_hi = self._predict_interval(at, est.level)
            far_lo, far_hi, near_lo, near_hi = map(float, (band_lo[0], band_hi[0], band_lo[1],
                                                           band_hi[1]))
            if math.isfinite(far_lo) and math.isfinite(far_hi):
                low, high = min(low, far_lo), max(high, far_hi)
            # a falling curve's limit lies below its error at every size, a rising training
            # error's above it: the band at the largest measured size bounds the interval
            if self.on == "test" and falls(self._state.data) and math.isfinite(near_hi):
                high = min(high, max(near_hi, est.estimate))
            elif self.on == "train" and math.isfinite(near_lo):
                low = max(low, min(near_lo, est.estimate))
        scale = max(1.0, float(np.nanmax(np.abs(self._state.data.y)))) if self._state.data.m else 1.0

        def snap(v):
            return 0.0 if math.isfinite(v) and abs(v) < 1e-9 * scale else v

        return Estimate(snap(est.estimate), snap(low), snap(high), est.level)

    @property
    def approach(self) -> str:
        """How the chosen family nears its asymptote: "power" or "logarithmic"."""
        return self._state.fits[self.best].family.approach

    def describe_asymptote(self, interval: float = INTERVAL) -> str:
        """The asymptote in plain words, e.g. "levels off at about 13.7% (90% interval
        13.1%–14.2%)"; "" when the family has none.

        A floor at its lower bound reads "levels off at 0% (the fitted floor is at its
        lower bound)"; a limit fixed by the family's form reads "tends to 0% (fixed by the
        family; 90% interval …)", the interval from the averaged forecast far out (see
        :meth:`asymptote`); a logarithmic family's limit is stated as approached only as
        ln n → ∞, beside its value at ``LOG_HORIZON`` × the largest measured size.
        """
        asym = self.asymptote(interval)
        if asym is None or not math.isfinite(asym.estimate):
            return ""
        metric = self.curve.metric
        value = format_error(asym.estimate, metric)
        band = (f" ({format_interval(asym.low, asym.high, asym.level, kind='error', metric=metric)})"
                if math.isfinite(asym.low) else "")
        if self.approach == "logarithmic":
            horizon = LOG_HORIZON * self._state.data.n_max
            at = float(self._predict_point(np.array([horizon]))[0])
            return (f"falls only logarithmically (as 1/ln n): about {format_error(at, metric)} "
                    f"at {LOG_HORIZON:g}× the largest measured size ({format_count(horizon)}); "
                    f"its limit {value}{band} is approached only as ln n → ∞")
        if self._state.fits[self.best].family.levels == ():  # no level parameter
            wider = math.isfinite(asym.low) and asym.high > asym.low
            return f"tends to {value} (fixed by the family{'; ' + band[2:-1] if wider else ''})"
        if asym.estimate == 0.0 and (not math.isfinite(asym.high) or asym.high == 0.0):
            return f"levels off at {format_error(0.0, metric)} (the fitted floor is at its lower bound)"
        return f"levels off at about {value}{band}"

    def exponent(self, interval: float = INTERVAL) -> Estimate | None:
        """The power-law decay exponent of the chosen family, or None if it has none."""
        return self._derived(exponent_function(self._state.fits[self.best].family, self.on), interval)

    # ------------------------------------------------------------ answers
    def samples_for(self, test_error: float | None = None, gap: float | None = None,
                    interval: float = INTERVAL, horizon: float = HORIZON) -> SampleEstimate:
        """Labelled samples needed to reach a test error or a generalization gap.

        Exactly one of ``test_error`` and ``gap`` is given. When this fit is of another
        quantity, the needed one (test error, or the gap test − train) is fitted
        internally with the same settings and cached.

        Parameters
        ----------
        test_error, gap : float
            The target.
        interval : float
            Level of the interval on ``n``.
        horizon : float
            Answers beyond this multiple of the largest measured size are given as
            "more than N; this curve cannot say how much more" (default 100).

        Returns
        -------
        SampleEstimate

        References
        ----------
        .. [1] C. Cortes et al., "Learning curves: asymptotic values and rate of
               convergence", NIPS 6, 1994 (the gap shrinking with n; the asymptote as
               the floor more data cannot go below).

        Examples
        --------
        >>> import numpy as np, pandas as pd
        >>> n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
        >>> table = pd.DataFrame({"size": n, "test_error": 0.05 + 2.0 * n ** -0.6
        ...                       + np.tile([-0.002, 0.0, 0.002], 6)})
        >>> fit = fit_curve(table, families="power-law-floor", bootstrap=50)
        >>> fit.samples_for(test_error=0.03).reachable   # below the floor of 5%
        False
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
        level = check_level(interval)
        factor = check_positive(horizon, "horizon")
        if factor < 1:
            raise InputError(f"horizon must be at least 1 (a multiple of the largest measured "
                             f"size), got {horizon!r}")
        fit = self._companion("test" if kind == "test_error" else "gap")
        return fit._solve(target, kind, level, factor)

    def to_dict(self, interval: float = INTERVAL) -> dict:
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
            "notes": self.notes,
            "family_weights": self.family_weights,
            "calibration": self._state.calibration.to_dict(),
            "sizes": self._state.data.sizes.tolist(),
            "left_out_sizes": self._state.data.left_out.tolist(),
            "settings": dict(self._state.settings, n_bootstrap_ok=self.n_bootstrap_ok),
        }

    # ------------------------------------------------------------ how the forecast is made
    @property
    def ranking_rule(self) -> str:
        """The rule the ranking in ``table`` follows (the one that chose ``best``), in words."""
        return self._state.settings["ranking_rule"]

    @property
    def family_weights(self) -> dict:
        """Shares of the averaged forecast by family (they sum to 1)."""
        return {k: ff.weight for k, ff in self._state.fits.items() if ff.weight > 0}

    @property
    def calibration(self) -> Calibration:
        """The correction the bands use (``fitting.calibration``)."""
        return self._state.calibration

    @property
    def constant_so_far(self) -> bool:
        """True when the model's test error equals the constant predictor's in every
        measured cell (``fitting.data.constant_so_far``): no learning seen yet, so the
        forecast beyond the data follows the calibration's ``constant_slope``."""
        return bool(self._state.data.constant)

    @property
    def notes(self) -> list:
        """How the forecast and its intervals were made, in plain sentences (not cautions:
        those are in ``warnings``)."""
        s, d = self._state, self._state.data
        out = []
        weights = sorted(self.family_weights.items(), key=lambda kv: -kv[1])
        if len(weights) > 1:
            out.append("the forecast averages " + ", ".join(f"{k} ({v:.0%})" for k, v in weights)
                       + ", weighted by their forecast errors on held-out sizes")
        if d.data_source == "meta":
            out.append("intervals include the variance a fresh data set would bring, from the "
                       "run's split of its rows")
        elif d.data_source == "assumed":
            out.append("intervals include the variance a fresh data set would bring, taking the "
                       "largest measured size as the whole training pool (the curve does not "
                       "say)")
        if s.calibration.active:
            out.append(s.calibration.describe())
        if len(d.left_out):
            sizes = d.left_out
            which = (f"the smallest size ({sizes[0]:,.0f})" if len(sizes) == 1 else
                     f"the {len(sizes)} smallest sizes ({sizes[0]:,.0f}–{sizes[-1]:,.0f})")
            out.append(f"{which}, at which the model predicted as the constant predictor "
                       "does in every repeat, are left out of the fit: the curve is fitted "
                       f"from {d.sizes[0]:,.0f}, where learning shows")
        if d.constant:
            how = (f"beyond them the forecast follows the corpus curves that were in that "
                   f"state, F(N)·(n/N)^{s.calibration.constant_slope:+.2f}, not this curve"
                   if s.calibration.constant_slope != 0.0 else
                   "beyond them its flat forecast is no evidence that it never will")
            out.append("the model has predicted as the constant predictor does at every "
                       "measured size: its curve shows no learning yet and cannot say when "
                       f"it starts; {how}; the band is open down to 0")
        elif d.m >= 2 and self.on != "train" and not falls(d) and bool(np.nanmin(d.y) >= 0):
            out.append("the measured curve has not fallen beyond its noise, so beyond the "
                       "largest measured size its band is open down to 0")
        return out

    # ------------------------------------------------------------ the data fitted
    @property
    def sizes(self) -> np.ndarray:
        """The measured sizes the fit used, ascending."""
        return self._state.data.sizes.copy()

    @property
    def means(self) -> np.ndarray:
        """Per-size mean of the fitted quantity (test error, train error or gap)."""
        return self._state.data.y.copy()

    @property
    def standard_errors(self) -> np.ndarray:
        """Per-size standard error of those means across repeats (NaN with one repeat)."""
        return self._state.data.sem.copy()

    @property
    def repeats(self) -> np.ndarray:
        """Repeats measured at each size."""
        return self._state.data.repeats

    @property
    def weights(self) -> np.ndarray:
        """Least-squares weight of each size (mean 1), as set by ``weights=``."""
        return self._state.data.w.copy()

    @property
    def largest_size(self) -> float:
        """The largest measured size (the labels the curve's user has now, by default)."""
        return self._state.data.n_max

    @property
    def n_holdout(self) -> int:
        """Largest sizes held out for forecast validation."""
        return int(self._state.settings["holdout"])

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
        tail = (f", asymptote {format_error(asym.estimate, self.curve.metric)}"
                if asym is not None and math.isfinite(asym.estimate) else "")
        return (f"CurveFit(on={self.on!r}, best={self.best!r}, runner_up={self.runner_up!r}, "
                f"{span}{tail}, {len(self.warnings)} warnings)")

    def _repr_html_(self) -> str:
        """The chosen family, the fitted error at the largest size, the asymptote and decay
        exponent with their intervals, and the family ranking (shown by Jupyter)."""
        from curvefit.report.notebook import fit_html

        return fit_html(self)

    def plot(self, ax=None):
        """Draw the measured curve with the chosen family, its band and the runner-up;
        returns the matplotlib Axes (``ax`` when given)."""
        from curvefit.report.notebook import plot_fit

        return plot_fit(self, ax=ax)

    # ------------------------------------------------------------ internals
    def _checked_sizes(self, n) -> np.ndarray:
        """Sizes to predict at as an array; a caution when one is far beyond the data."""
        sizes = np.atleast_1d(np.asarray(n, dtype=float))
        if not np.all(np.isfinite(sizes)) or np.any(sizes <= 0):
            raise InputError("sample sizes to predict at must be finite and > 0")
        far = sizes > EXTRAPOLATION_FACTOR * self._state.data.n_max
        if far.any():
            warnings.warn(f"predicting at {sizes[far].max():,.0f} samples, beyond "
                          f"{EXTRAPOLATION_FACTOR:g}× the largest measured size "
                          f"({self._state.data.n_max:,.0f}); read with care", FitWarning,
                          stacklevel=3)
        d = self._state.data
        early = sizes < d.sizes[0] if len(d.left_out) and d.m else np.zeros(len(sizes), bool)
        if early.any():
            warnings.warn(f"predicting at {sizes[early].min():,.0f} samples, before the first "
                          f"fitted size ({d.sizes[0]:,.0f}): below it the model predicted as "
                          "the constant predictor does, and the fit describes the curve from "
                          f"{d.sizes[0]:,.0f} on", FitWarning, stacklevel=3)
        return sizes

    def _predict_point(self, sizes):
        s = self._state
        return corrected_point(sizes, s.data, s.fits, s.calibration)

    def _predict_interval(self, sizes, level):
        s = self._state
        return prediction_band(sizes, level, s.data, s.fits, s.boots, s.calibration)

    def _derived(self, fn, interval):
        if fn is None:
            return None
        level = check_level(interval)
        fit = self._state.fits[self.best]
        est = float(fn(fit.theta))
        vals = None
        if self._state.boot is not None:
            vals = np.array([fn(t) if np.all(np.isfinite(t)) else math.nan for t in self._state.boot])
        lo, hi, _ = interval_around(vals, level, est)
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
                weights=s["weights"], random_state=s["random_state"],
                calibration=self._state.calibration)
        return self._state.companions[on]

    def _solve(self, target: float, kind: str, level: float, factor: float) -> SampleEstimate:
        """Samples needed for ``target``: from the measured means where they stay at or
        below the target from some measured size on, from the fitted curve beyond the
        largest size only, and as "more than N" beyond the horizon.

        The measured answer interpolates the per-size means linearly in ln n; its
        interval comes from the Student-t intervals of those means. The fitted answer
        is searched on n ≥ the largest measured size, never below it, so a fitted curve
        that disagrees with the measured points at small n cannot give an answer there.
        """
        d, measured = self._state.data, self._state.measured
        grid = search_grid(d)
        horizon = factor * d.n_max
        with np.errstate(all="ignore"):
            fitted = self._predict_point(grid)
            lo_band, hi_band = self._predict_interval(grid, level)
            shift = float(d.y[-1] - fitted[0])
            shifted = bool(fitted[0] <= target < d.y[-1])
            if shifted:
                # the fitted curve is already at the target where the measured mean is not:
                # the answer follows the fitted shape from the measured mean, so it agrees
                # with the measurement at the largest size
                fitted, lo_band, hi_band = fitted + shift, lo_band + shift, hi_band + shift
            c = find_crossing(measured, target, grid, fitted, (lo_band, hi_band),
                              mean_band(measured, level),
                              horizon=horizon, widened=self._widened(target - shift * shifted,
                                                                     horizon, level),
                              level=level, shifted=shifted)
        asym = self.asymptote(level)
        # the chosen family's floor interval lies wholly above the target
        above_floor = asym is not None and math.isfinite(asym.low) and asym.low > target
        # the answer follows the forecast that predict prints: where the averaged,
        # corrected forecast reaches the target within the horizon, it is answered (with a
        # caution when the chosen family's floor lies above it), not called unreachable
        reachable = c.source == "measured" or (
            math.isfinite(c.point) and (not above_floor or c.point <= horizon))
        metric = self.curve.metric
        what = quantity_name(kind, metric, self.curve.metric_info)
        beyond = reachable and c.source == "fitted" and c.beyond_horizon
        if (not reachable and not math.isfinite(c.point) and asym is not None
                and math.isfinite(asym.estimate) and asym.estimate < target
                and not (math.isfinite(asym.low) and asym.low > target)):
            # the fitted curve levels off below the target but crosses it only beyond the
            # search limit: far beyond the horizon, not "not reachable"
            reachable, beyond = True, True
        if not reachable:
            n, high = math.inf, math.inf
            low = c.low if math.isfinite(c.low) and c.low < horizon else math.inf
            message, cautions = unreachable_text(what, format_error(target, metric), asym,
                                                 self.describe_asymptote(level), target, level,
                                                 low)
        elif beyond:
            n, low, high, reachable = math.inf, c.low, math.inf, False
            message, cautions = horizon_text(what, format_error(target, metric), c, d, level), []
        else:
            n = float(math.ceil(c.point))
            if c.source == "measured":
                n = max(n, float(measured.sizes[0]))  # fewer were not measured
            low, high = c.low, c.high
            # the chosen family alone levels off above the target: said beside the answer
            below_family = (asym is not None and math.isfinite(asym.estimate)
                            and asym.estimate > target)
            floor = (self.describe_asymptote(level)
                     if c.source == "fitted" and below_family else "")
            message, cautions = answer_text(measured, n, c, kind, target, level, metric, self.best,
                                            self.approach == "logarithmic",
                                            info=self.curve.metric_info, floor=floor)
        return SampleEstimate(n=n, low=float(low), high=float(high), level=level, target=target,
                              kind=kind, reachable=bool(reachable), asymptote=asym,
                              message=message, warnings=tuple(cautions), horizon=float(horizon),
                              beyond_horizon=bool(beyond), metric=metric,
                              metric_info=dict(self.curve.metric_info))

    def _widened(self, target: float, horizon: float, level: float) -> bool:
        """Whether the band's upper edge at the horizon is above ``target`` only because of
        the parts besides the bootstrap (family spread, model error, a fresh data set)."""
        s = self._state
        at = np.array([horizon])
        parts = band_parts(at, level, s.data, s.fits, s.boots)
        z = float(ndtri((1 + level) / 2))
        kappa = s.calibration.model_error_scale
        boot_only = corrected_point(at, s.data, s.fits, s.calibration)[0] \
            + z * kappa * parts["bootstrap_high"][0]
        return not (boot_only > target)


# ============================================================== the API
def fit_curve(curve, *, families="auto", on: str = "test", bootstrap: int = BOOTSTRAP,
              weights: str = "sem", random_state=SEED, n_holdout: int | None = None,
              holdout: int | None = None, calibration="auto") -> CurveFit:
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
    n_holdout : int, optional
        Number of largest sizes held out for forecast validation (default: a quarter,
        at least 3 while 4 sizes stay before them). ``holdout`` is its former name,
        still accepted with a DeprecationWarning.
    calibration : "auto", "none" or Calibration
        Correction of the bands beyond the data: ``"auto"`` uses the one learned on the
        bundled curve corpus (``fitting.calibration``), ``"none"`` none.

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
    curve = _as_curve(curve)
    check_choice(on, "on", ON_CHOICES)
    check_choice(weights, "weights", WEIGHT_CHOICES)
    bootstrap = check_count(bootstrap, "bootstrap", minimum=0)
    random_state = check_seed(random_state)
    n_holdout = _holdout_setting(n_holdout, holdout)
    if on in ("train", "gap") and not curve.has_train:
        raise InputError(f"fitting on={on!r} needs train_error in the curve; "
                         "fit the test error instead (on='test')")
    names = family_list(families, curve.has_train)
    data = prepare_data(curve, on, weights)
    fits = fit_families(names, data)
    m = data.m
    held = holdout_count(m) if n_holdout is None else min(n_holdout, m - 1)
    # drift is read from the origins a default hold-out would use (see selection.forecast)
    drift_from = m - (held if n_holdout is not None else min(held, max(1, math.ceil(m / 4))))
    lof = score_families(fits, data, held, drift_from)
    best, order, flat, notes, rule = _choose_family(fits, data, m - held, lof, curve.metric)
    family_weights(fits, best)
    boots = _bootstrap(fits, best, data, bootstrap, np.random.default_rng(random_state))
    boot = None if boots is None else boots[best]
    notes += _fit_warnings(data, fits[best], best, boot, bootstrap, flat, curve.metric)
    settings = {"families": families if isinstance(families, str) else list(families),
                "bootstrap": bootstrap, "weights": weights, "random_state": random_state,
                "holdout": held, "best": best, "ranking_rule": rule}
    table = ranking_table(fits, best, order)
    # the runner-up is the second family of the ranking (a failed fit is no runner-up)
    second = [k for k in table["family"][1:] if fits[k].theta is not None][:1]
    result = CurveFit(best=best, runner_up=second[0] if second else None, on=on,
                      table=table, warnings=notes, curve=curve,
                      _state=_State(data, fits, boots, settings, resolve_calibration(calibration),
                                    prepare_data(curve, on, weights, leave_out=False)
                                    if len(data.left_out) else None))
    if bootstrap > 0 and m:
        notes += _wide_interval_warning(result)
    return result


# At most this many families are refitted to the bootstrap draws for the averaged band
# (the chosen one and the heaviest others); the rest keep their share of the forecast.
MAX_BOOTSTRAPPED = 4


def _bootstrap(fits: dict, best: str, data: FitData, B: int, rng) -> dict | None:
    """Bootstrap replicates of the chosen family and the heaviest averaged ones, all
    refitted to the same redrawn means."""
    if B <= 0:
        return None
    heavy = sorted((k for k, ff in fits.items() if ff.weight > 0 and k != best),
                   key=lambda k: -fits[k].weight)[:MAX_BOOTSTRAPPED - 1]
    draws = redrawn_means(fits[best], data, B, rng)
    return {k: bootstrap_parameters(fits[k], data, B, rng, draws) for k in [best] + heavy}


def _as_curve(curve) -> Curve:
    if isinstance(curve, pd.DataFrame):
        return Curve.from_table(curve)
    if not isinstance(curve, Curve):
        raise InputError(f"fit_curve needs a Curve or a DataFrame, got {type(curve).__name__}")
    return curve


def _holdout_setting(n_holdout, holdout) -> int | None:
    """The validated hold-out count; ``holdout`` is the former name of ``n_holdout``."""
    if holdout is not None:
        if n_holdout is not None:
            raise InputError("give n_holdout only (holdout is its former name)")
        warnings.warn("fit_curve(holdout=...) is now called n_holdout", DeprecationWarning,
                      stacklevel=3)
        n_holdout = holdout
    return None if n_holdout is None else check_count(n_holdout, "n_holdout", minimum=0)


def _choose_family(fits: dict, data: FitData, cut: int, lof, metric: str):
    """``(best, order, flat, notes, rule)``: the chosen family, the ranking, whether the
    curve is flat, the notes the choice needs, and the ranking rule in words."""
    best, order, rule = choose(fits, data, cut)
    notes: list[str] = []
    flat = data.m >= 1 and float(np.ptp(data.y)) <= 1e-12 * max(1.0, float(np.max(np.abs(data.y))))
    if flat and data.m >= 2:
        # an exactly constant curve carries no shape; any family would fit rounding noise
        best, order = "last-value", ["last-value"] + [k for k in order if k != "last-value"]
        rule = "the curve is flat, so the last value comes first, then the families as ranked"
        notes.append(f"the {data.on} curve is flat at {format_error(data.y[-1], metric)}; "
                     "the last value is used")
    if lof is not None and fits[best].status == "poor fit" and not flat:
        notes.append(f"no curve family describes the measured points within their standard "
                     f"errors (best reduced chi-square {format_number(lof[0], 3)}); {best} is "
                     "the best forecaster, read its answers as rough")
    return best, order, flat, notes, rule


def _fit_warnings(data: FitData, chosen, best: str, boot, bootstrap: int, flat: bool,
                  metric: str) -> list[str]:
    """Honest cautions about a fit: few sizes, a curve that does not fall, a weak choice,
    failed bootstrap refits."""
    m, on, notes = data.m, data.on, []
    if m < MIN_VALIDATION_POINTS:
        notes.append(f"only {m} distinct size{'s' if m != 1 else ''} measured; at least "
                     f"{MIN_VALIDATION_POINTS} are needed to choose a family by forecast, so "
                     "the choice is weak")
    if m >= 2 and on != "train":
        rho = _spearman(data.sizes, data.y)
        if not (rho < 0 and data.y[-1] < data.y[0]):
            label = {"test": "test error", "gap": "gap"}[on]
            notes.append(f"the {label} does not decrease with size (first "
                         f"{format_error(data.y[0], metric)}, last {format_error(data.y[-1], metric)}); "
                         "extrapolations are unreliable")
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
    return notes


def _wide_interval_warning(fit: CurveFit) -> list[str]:
    """A note when the interval at 2× or 10× the largest size is wider than the estimate."""
    metric = fit.curve.metric
    for k in (2, 10):
        e = fit.error_at(k * fit.largest_size)
        if math.isfinite(e.low) and (e.high - e.low) > abs(e.estimate):
            return [f"the {format_level(e.level)} interval at {k}× the largest size "
                    f"({format_range(e.low, e.high, 'error', metric)}) is wider than the "
                    f"estimate ({format_error(e.estimate, metric)})"]
    return []


def _spearman(x: np.ndarray, y: np.ndarray) -> float:
    rx = pd.Series(x).rank().to_numpy()
    ry = pd.Series(y).rank().to_numpy()
    if np.std(rx) == 0 or np.std(ry) == 0:
        return 0.0
    return float(np.corrcoef(rx, ry)[0, 1])
