"""Sanity beside every answer: the constant predictor, class imbalance and the fitted floor.

Pure judgements on a measured `Curve` and a `CurveFit`; the command line, the workflows
and the report print what these functions return and judge nothing themselves.

* `compare_to_baseline` sets the model's measured test error beside the constant
  predictor's on the same test sets (the ``baseline_error`` column the runner records:
  the majority class of each training subsample, or its mean for a regressor). A model
  whose test-error interval is not below the constant predictor's is *no better than
  it*, and every output says so in one plain line.
* `imbalance_hint` suggests ``--metric balanced_error`` when a classification curve is
  measured with the plain error rate and the smallest class holds under
  `IMBALANCE_SHARE` of the labels: there the error rate rewards a model that always
  answers the majority class.
* `floor_note` and `forecast_floor_notes` check an answer or a forecast against the
  fitted floor (``CurveFit.asymptote``): a target or a forecast below the floor's whole
  interval is something the fitted curve itself says more labels will not deliver.
* `sanity_check` gathers them into one `Sanity` result with the lines to print and a
  JSON form.

These are statistical checks of estimates, not guarantees.

Examples
--------
>>> import numpy as np, pandas as pd
>>> from curvefit.core.curve import Curve
>>> n = np.repeat([100, 200, 400, 800], 3)
>>> curve = Curve.from_table(pd.DataFrame({
...     "size": n, "test_error": 0.07 + 0.3 * n ** -0.5 + np.tile([-0.002, 0, 0.002], 4),
...     "baseline_error": np.tile([0.059, 0.06, 0.061], 4)}))
>>> check = sanity_check(curve)
>>> check.baseline.no_better, [n.split(" (")[0] for n in check.notes]
(True, ['the model is no better than a constant predictor', 'the classes are imbalanced'])
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from curvefit.core.curve import BASELINE_COLUMN, Curve
from curvefit.core.defaults import INTERVAL
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import (
    format_count,
    format_error,
    format_estimate,
    format_interval,
    quantity_name,
)
from curvefit.core.stats import t_interval
from curvefit.core.validate import check_level

# A classification curve whose smallest class holds less than this fraction of an even
# share (1/k of the labels for k classes; 0.2 of the labels for two classes) is imbalanced
# enough that the plain error rate mostly measures the majority classes (common practice).
IMBALANCE_SHARE = 0.4


# --------------------------------------------------------------------------- the baseline
@dataclass(frozen=True)
class BaselineComparison:
    """The model's measured test error beside the constant predictor's, on the same test sets.

    Attributes
    ----------
    size : float
        The largest measured size, where the two are compared.
    model, baseline : Estimate
        Mean test error over repeats of the model and of the constant predictor there,
        each with its Student-t interval.
    no_better : bool
        True when the model's interval is not below the constant predictor's (with one
        repeat, when its mean is not below).
    sizes_no_better : tuple of float
        Every measured size where the same holds.
    per_size : pandas.DataFrame
        ``size, test_mean, baseline_mean, no_better`` at each measured size.
    predictor : str
        What the constant predictor predicts, in words.
    metric : str
        The curve's metric.
    """

    size: float
    model: Estimate
    baseline: Estimate
    no_better: bool
    sizes_no_better: tuple
    per_size: pd.DataFrame
    predictor: str
    metric: str

    @property
    def everywhere(self) -> bool:
        """True when the model is no better than the constant predictor at every size."""
        return len(self.sizes_no_better) == len(self.per_size) > 0

    def line(self) -> str:
        """The comparison as one line, e.g. "constant predictor (always the majority class):
        6.0% at 1,640 labels; the model: 6.4% (90% interval 6.1%–6.7%)"."""
        m = self.metric
        model = format_estimate(self.model.estimate, self.model.low, self.model.high,
                                self.model.level, kind="error", metric=m)
        return (f"constant predictor ({self.predictor}): {format_error(self.baseline.estimate, m)} "
                f"at {self.size:,.0f} labels; the model: {model}")

    def flag(self) -> str | None:
        """The one plain line saying the model is no better than the constant predictor."""
        if not self.no_better:
            return None
        m = self.metric
        where = ("at every measured size" if self.everywhere
                 else f"at the largest measured size ({self.size:,.0f} labels)")
        return (f"the model is no better than a constant predictor ({self.predictor}) {where}: "
                f"{format_error(self.model.estimate, m)} against "
                f"{format_error(self.baseline.estimate, m)}; answers and forecasts for it "
                "promise nothing a constant does not")

    def to_dict(self) -> dict:
        return {"predictor": self.predictor, "size": self.size, "model": self.model.to_dict(),
                "baseline": self.baseline.to_dict(), "no_better": self.no_better,
                "sizes_no_better": list(self.sizes_no_better),
                "per_size": self.per_size.to_dict(orient="records")}


def predictor_words(curve: Curve) -> str:
    """What the constant predictor of a curve predicts, in a few words.

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [10], "test_error": [0.3]}))
    >>> predictor_words(c)
    'always the majority class'
    """
    meta = curve.meta or {}
    task = meta.get("task") or (meta.get("data") or {}).get("task")
    if task == "regression" or (task is None and curve.metric in ("mse", "mae")):
        return "always the mean of the training labels"
    return "always the majority class"


def compare_to_baseline(curve: Curve, interval: float = INTERVAL) -> BaselineComparison | None:
    """The model against the constant predictor at each measured size; None when the curve
    holds no constant-predictor error (measured before it was recorded, or a plain table
    without a ``baseline_error`` column).

    Parameters
    ----------
    curve : Curve
    interval : float
        Level of the Student-t intervals of both means.

    Returns
    -------
    BaselineComparison or None

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [50, 50, 50], "test_error": [.02, .03, .025],
    ...                                    "baseline_error": [.06, .06, .061]}))
    >>> compare_to_baseline(c).no_better
    False
    """
    level = check_level(interval)
    if not curve.has_baseline:
        return None
    ok = curve.ok_points()
    ok = ok[np.isfinite(ok[BASELINE_COLUMN])]
    rows = []
    last = None
    for size, g in ok.groupby("size"):
        model = t_interval(g["test_error"], level)
        base = t_interval(g[BASELINE_COLUMN], level)
        rows.append({"size": int(size), "test_mean": model.estimate,
                     "baseline_mean": base.estimate, "no_better": _no_better(model, base)})
        last = (float(size), model, base)
    table = pd.DataFrame(rows, columns=["size", "test_mean", "baseline_mean", "no_better"])
    size, model, base = last
    flagged = tuple(float(s) for s in table.loc[table["no_better"], "size"])
    return BaselineComparison(size=size, model=model, baseline=base,
                              no_better=bool(table["no_better"].iloc[-1]), sizes_no_better=flagged,
                              per_size=table, predictor=predictor_words(curve), metric=curve.metric)


def _no_better(model: Estimate, base: Estimate) -> bool:
    """The model's interval is not below the constant predictor's (means with one repeat)."""
    if math.isfinite(model.high) and math.isfinite(base.low):
        return not model.high < base.low
    return not model.estimate < base.estimate


# --------------------------------------------------------------------------- imbalance
def minority_share(curve: Curve) -> float | None:
    """Share of the smallest class among the labels, for a classification curve.

    From the run's ``class_shares``; for older runs measured with the 0-1 error, the
    constant predictor's error (one minus the majority share) bounds it from above.
    None when neither is known.
    """
    shares = (curve.meta or {}).get("class_shares")
    if isinstance(shares, dict) and shares:
        return float(min(shares.values()))
    if curve.metric == "error" and curve.has_baseline:
        return float(curve.summary()["baseline_mean"].dropna().iloc[-1])
    return None


def imbalance_hint(curve: Curve) -> str | None:
    """One line suggesting ``--metric balanced_error`` for imbalanced classes measured with
    the plain error rate; None otherwise.

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [10], "test_error": [0.3]}),
    ...                      meta={"task": "classification", "class_shares": {"0": .94, "1": .06}})
    >>> imbalance_hint(c).startswith("the classes are imbalanced")
    True
    """
    if curve.metric != "error" or predictor_words(curve) != "always the majority class":
        return None
    share = minority_share(curve)
    shares = (curve.meta or {}).get("class_shares")
    n_classes = len(shares) if isinstance(shares, dict) and shares else 2
    if share is None or not share < IMBALANCE_SHARE / n_classes:
        return None
    return (f"the classes are imbalanced (the smallest holds {format_error(share)} of the labels), "
            "so the plain error rate mostly rewards predicting the majority class; measure "
            "with --metric balanced_error")


# --------------------------------------------------------------------------- the floor
def floor_note(fit: Any, value: float, what: str, interval: float = INTERVAL) -> str | None:
    """A line when ``value`` lies below the whole interval of the fit's floor.

    ``what`` names the value ("the target", "the forecast at 20,000 labels"). None when the
    fit has no floor, the floor has no interval, or the value is within or above it.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.fitting.engine import fit_curve
    >>> n = np.repeat([100, 200, 400, 800, 1600], 3)
    >>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
    >>> fit = fit_curve(pd.DataFrame({"size": n, "test_error": e}),
    ...                 families="power-law-floor", bootstrap=50)
    >>> floor_note(fit, 0.02, "the target").startswith("the target (2.0%) lies below")
    True
    >>> floor_note(fit, 0.2, "the target") is None
    True
    """
    asym = fit.asymptote(check_level(interval))
    if asym is None or not math.isfinite(asym.low) or not math.isfinite(value) or value >= asym.low:
        return None
    metric = fit.curve.metric
    return (f"{what} ({format_error(value, metric)}) lies below the fitted floor's "
            f"{format_interval(asym.low, asym.high, asym.level, 'error', metric)}: the fitted "
            "curve levels off above it, so do not count on reaching it")


def answer_floor_note(fit: Any, answer: Any, interval: float = INTERVAL) -> str | None:
    """A line when a reachable answer promises a target below the fit's floor interval.

    ``fit`` is the fit the answer was read from (of the test error, or of the gap).
    """
    if answer is None or not getattr(answer, "reachable", False):
        return None
    curve = fit.curve
    what = "the target " + quantity_name(getattr(answer, "kind", "test_error"), curve.metric,
                                         curve.metric_info)
    return floor_note(fit, float(answer.target), what, interval)


def forecast_floor_notes(fit: Any, forecasts: pd.DataFrame | None,
                         interval: float = INTERVAL) -> list[str]:
    """Lines for forecasts (``size, estimate[, low, high]``) whose estimate lies below the
    fit's floor interval; one line for all of them."""
    if forecasts is None or not len(forecasts):
        return []
    asym = fit.asymptote(check_level(interval))
    if asym is None or not math.isfinite(asym.low):
        return []
    est = forecasts["estimate"].to_numpy(float)
    below = forecasts.loc[np.isfinite(est) & (est < asym.low), "size"]
    if not len(below):
        return []
    sizes = ", ".join(format_count(s) for s in below)
    note = floor_note(fit, float(forecasts.loc[below.index[0], "estimate"]),
                      f"the forecast at {sizes} labels", interval)
    return [note] if note else []


# --------------------------------------------------------------------------- together
@dataclass(frozen=True)
class Sanity:
    """The checks beside one answer: the constant predictor, imbalance and the floor.

    Attributes
    ----------
    baseline : BaselineComparison or None
        None when the curve holds no constant-predictor error.
    imbalance : str or None
        The ``--metric balanced_error`` hint, when it applies.
    floor : tuple of str
        Answers or forecasts below the fitted floor's interval.
    """

    baseline: BaselineComparison | None = None
    imbalance: str | None = None
    floor: tuple = ()

    @property
    def no_better(self) -> bool | None:
        """True when the model is no better than the constant predictor (None: unknown)."""
        return None if self.baseline is None else self.baseline.no_better

    @property
    def notes(self) -> list[str]:
        """The flags to print, one line each: no better than a constant, imbalance, floor."""
        flag = self.baseline.flag() if self.baseline is not None else None
        return [n for n in (flag, self.imbalance, *self.floor) if n]

    def lines(self) -> list[str]:
        """The baseline comparison (when known) followed by the flags."""
        return ([self.baseline.line()] if self.baseline is not None else []) + self.notes

    def to_dict(self) -> dict:
        return {"baseline": self.baseline.to_dict() if self.baseline is not None else None,
                "no_better_than_baseline": self.no_better, "imbalance_hint": self.imbalance,
                "floor_notes": list(self.floor), "notes": self.notes}


def sanity_check(curve: Curve, fit: Any = None, *, answer: Any = None, answer_fit: Any = None,
                 forecasts: pd.DataFrame | None = None, interval: float = INTERVAL) -> Sanity:
    """Every check beside an answer or a forecast of ``curve``.

    Parameters
    ----------
    curve : Curve
    fit : CurveFit, optional
        The fit the forecasts (and by default the answer) came from; needed for the
        floor checks.
    answer : SampleEstimate, optional
        Checked against the floor of ``answer_fit`` (default ``fit``).
    answer_fit : CurveFit, optional
        The fit the answer was read from when it is not ``fit`` (a gap target).
    forecasts : pandas.DataFrame, optional
        ``size, estimate, low, high`` rows (``CurveFit.predict``), checked likewise.
    interval : float
        Level of every interval.

    Returns
    -------
    Sanity
    """
    level = check_level(interval)
    floor: list[str] = []
    answer_fit = answer_fit if answer_fit is not None else fit
    if answer_fit is not None:
        note = answer_floor_note(answer_fit, answer, level)
        floor += [note] if note else []
    if fit is not None:
        floor += forecast_floor_notes(fit, forecasts, level)
    return Sanity(baseline=compare_to_baseline(curve, level), imbalance=imbalance_hint(curve),
                  floor=tuple(dict.fromkeys(floor)))


__all__ = ["IMBALANCE_SHARE", "BaselineComparison", "Sanity", "answer_floor_note",
           "compare_to_baseline", "floor_note", "forecast_floor_notes", "imbalance_hint",
           "minority_share", "predictor_words", "sanity_check"]
