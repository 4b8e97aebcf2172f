"""What buying more labels is worth: samples needed, their price, and each purchase's effect.

Pure numerics on a fitted curve (``CurveFit``); imports neither the command line nor I/O.
`plan_purchase` prices a list of purchases; `labels_needed` answers "how many labels for
this target, and what do they cost" (or, without a target, "what do these labels buy")
as one result object that the command line prints, with the sanity checks of
`curvefit.fitting.sanity` beside it.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any, Iterable

import numpy as np
import pandas as pd

from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import FitWarning, InputError
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import format_error, is_rate, vc_absent_reason
from curvefit.core.validate import check_error_target, check_level, check_positive
from curvefit.fitting.sanity import sanity_check

# Confidence of the worst-case VC bound shown beside a measured answer.
VC_DELTA = 0.1
# Purchases priced by default, as multiples of the labels in hand.
DEFAULT_MULTIPLES = (1, 4, 9)


def plan_purchase(fit, *, current_n, extra: Iterable[float], cost_per_label=None,
                  interval: float = INTERVAL) -> pd.DataFrame:
    """Expected test error after buying each amount of extra labelled samples.

    Parameters
    ----------
    fit : CurveFit
        A fit of the test error (``on="test"``).
    current_n : int
        Labelled samples you have now.
    extra : iterable of int
        Amounts of extra labels to price (each > 0).
    cost_per_label : float, optional
        Price of one label; the ``cost`` column is NaN without it.
    interval : float
        Level of the bootstrap percentile interval on the expected error.

    Returns
    -------
    pandas.DataFrame
        One row per amount, ascending: ``extra, total_n, test_error, low, high, cost,
        drop_per_1000``. ``drop_per_1000`` is the marginal fall of the expected test
        error per 1,000 extra labels from the previous row (the first row: from
        ``current_n``), so a purchase stops paying when it gets small.

    Notes
    -----
    The figures extrapolate the chosen curve family; beyond 10× the largest measured
    size they are flagged with a ``FitWarning``. Estimates are statistical, not
    guarantees.

    References
    ----------
    .. [1] R. L. Figueroa, Q. Zeng-Treitler, S. Kandula and L. H. Ngo, "Predicting
           sample size required for classification performance", BMC Medical
           Informatics and Decision Making 12:8, 2012 (the learning curve as a
           planning tool for annotation effort).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> from curvefit.fitting.engine import fit_curve
    >>> n = np.repeat([100, 200, 400, 800, 1600], 3)
    >>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
    >>> fit = fit_curve(Curve.from_table(pd.DataFrame({"size": n, "test_error": e})),
    ...                 families="power-law-floor", bootstrap=50)
    >>> plan = plan_purchase(fit, current_n=1600, extra=[1000, 5000], cost_per_label=0.5)
    >>> plan["cost"].tolist()
    [500.0, 2500.0]
    >>> bool(plan["test_error"].is_monotonic_decreasing)
    True
    """
    if getattr(fit, "on", None) != "test":
        raise InputError("plan_purchase needs a fit of the test error (fit_curve(..., on='test'))")
    try:
        current_n = float(current_n)
    except (TypeError, ValueError):
        raise InputError(f"current_n must be a number of labelled samples, got {current_n!r}") from None
    if not math.isfinite(current_n) or current_n <= 0:
        raise InputError("current_n must be a positive number of labelled samples")
    try:
        amounts = sorted({float(x) for x in np.atleast_1d(np.asarray(list(extra), dtype=float))})
    except (TypeError, ValueError):
        raise InputError("extra must be a list of label counts, e.g. [1000, 5000]") from None
    if not amounts:
        raise InputError("extra is empty; give at least one amount of labels to buy")
    if any(not math.isfinite(x) or x <= 0 for x in amounts):
        raise InputError("every extra amount must be a positive number of labels")
    if cost_per_label is not None:
        try:
            cost_per_label = float(cost_per_label)
        except (TypeError, ValueError):
            raise InputError(f"cost per label must be a number, got {cost_per_label!r}") from None
        if not math.isfinite(cost_per_label) or cost_per_label < 0:
            raise InputError("cost per label must be a finite number >= 0")

    extra_arr = np.array(amounts)
    totals = current_n + extra_arr
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitWarning)
        pred = fit.predict(np.concatenate([[current_n], totals]), interval=interval)
    for w in caught:  # pass the extrapolation caution on to the caller once
        warnings.warn(str(w.message), FitWarning, stacklevel=2)
        break
    est = pred["estimate"].to_numpy()
    now, after = est[0], est[1:]
    prev_err = np.concatenate([[now], after[:-1]])
    prev_extra = np.concatenate([[0.0], extra_arr[:-1]])
    drop = (prev_err - after) / (extra_arr - prev_extra) * 1000.0
    cost = extra_arr * cost_per_label if cost_per_label is not None else np.full(len(extra_arr), math.nan)
    return pd.DataFrame({
        "extra": extra_arr.astype(np.int64) if np.all(extra_arr == np.round(extra_arr)) else extra_arr,
        "total_n": totals.astype(np.int64) if np.all(totals == np.round(totals)) else totals,
        "test_error": after,
        "low": pred["low"].to_numpy()[1:],
        "high": pred["high"].to_numpy()[1:],
        "cost": cost,
        "drop_per_1000": drop,
    })


def labels_for_budget(budget, cost_per_label) -> int:
    """Whole labels a budget buys at a price per label.

    Examples
    --------
    >>> labels_for_budget(1000, 0.3)
    3333
    """
    try:
        budget, cost_per_label = float(budget), float(cost_per_label)
    except (TypeError, ValueError):
        raise InputError("budget and cost per label must be numbers") from None
    if not math.isfinite(budget) or budget < 0:
        raise InputError("budget must be a finite number >= 0")
    if not math.isfinite(cost_per_label) or cost_per_label <= 0:
        raise InputError("cost per label must be > 0 to turn a budget into labels")
    # a small tolerance so 1000 / 0.1 is 10,000 labels, not 9,999
    return int(math.floor(budget / cost_per_label + 1e-9))


# --------------------------------------------------------------------------- priced answer
@dataclass(frozen=True)
class Cost:
    """What the missing labels cost: ``cost`` with the interval ``cost_low``–``cost_high``."""

    extra_labels: float
    cost: float
    cost_low: float
    cost_high: float
    cost_per_label: float

    def to_dict(self) -> dict:
        return {"extra_labels": self.extra_labels, "cost": self.cost, "cost_low": self.cost_low,
                "cost_high": self.cost_high, "cost_per_label": self.cost_per_label}


@dataclass(frozen=True)
class BudgetOutcome:
    """What a budget buys: ``labels`` more, ``total_n`` in all, and the test error then."""

    budget: float
    labels: int
    total_n: float
    test_error: Estimate

    def to_dict(self) -> dict:
        return {"budget": self.budget, "labels": self.labels, "total_n": self.total_n,
                "test_error": self.test_error.to_dict()}


@dataclass(frozen=True)
class LabelNeed:
    """Labelled samples needed for a target, priced: the result of `labels_needed`.

    Attributes
    ----------
    answer : SampleEstimate or None
        Samples needed for the target, with its interval and its sentence; None when
        no target was given (then ``plan`` says what the extra labels buy).
    fit : CurveFit
        The fit the answer was read from (of the test error, or of the gap).
    current_n : float
        Labelled samples in hand.
    extra, extra_low, extra_high : float
        Labels still to buy (0 when already enough), with the interval; NaN when the
        target is not reachable.
    cost : Cost or None
        Their price, when a price per label was given and the target is reachable.
    budget : BudgetOutcome or None
        What the budget buys, when one was given.
    plan : pandas.DataFrame or None
        `plan_purchase` for the priced amounts, when a price, budget or amounts were given.
    vc : dict or None
        The worst-case VC sample size and the 10 × d rule beside the measured answer,
        when a VC dimension is known; for a loss other than the 0-1 loss only
        ``{vc_dim, applies: False, reason}`` (VC theory bounds the 0-1 loss).
    warnings : list of str
        Cautions of the fit, the answer and the extrapolations, once each.
    sanity : Sanity or None
        The constant predictor beside the answer, the imbalance hint, and answers or
        forecasts below the fitted floor (`curvefit.fitting.sanity.sanity_check`).
    """

    answer: Any
    fit: Any
    current_n: float
    extra: float = math.nan
    extra_low: float = math.nan
    extra_high: float = math.nan
    cost: Cost | None = None
    budget: BudgetOutcome | None = None
    plan: pd.DataFrame | None = None
    vc: dict | None = None
    vc_known: bool = False
    warnings: list = field(default_factory=list)
    sanity: Any = None

    @property
    def budget_covers(self) -> bool | None:
        """True when the budget buys the labels the target needs (None: nothing to compare)."""
        if self.budget is None or self.answer is None or not self.answer.reachable:
            return None
        return self.budget.labels >= self.extra

    def to_dict(self) -> dict:
        answer = self.answer
        doc: dict = {"answer": answer.to_dict() if answer is not None else None,
                     "current_n": self.current_n,
                     "fit": {"on": "gap" if answer is not None and answer.kind == "gap" else "test",
                             "best": self.fit.best}}
        if self.cost is not None:
            doc["cost"] = self.cost.to_dict()
        if self.budget is not None:
            doc["budget"] = self.budget.to_dict()
        if self.plan is not None:
            doc["plan"] = self.plan.to_dict(orient="records")
        if self.vc_known:
            doc["vc"] = self.vc
        if self.sanity is not None:
            doc["sanity"] = self.sanity.to_dict()
        doc["warnings"] = list(self.warnings)
        return doc


def vc_comparison(vc_dim: float, eps: float | None, delta: float = VC_DELTA,
                  eps_source: str = "", refused: str | None = None) -> dict:
    """Worst-case VC sample size and the 10 × d rule of thumb beside a measured answer.

    ``eps`` is the generalization gap the bound is asked for (see `vc_epsilon`); the VC
    size is None when the bound says nothing (``eps`` outside (0, 1), or ``refused``
    gives the reason).

    Examples
    --------
    >>> vc_comparison(10, 0.05)["rule_of_thumb_samples"]
    100
    """
    from curvefit import bounds

    d = int(round(vc_dim))
    row = {"vc_dim": d, "eps": eps, "eps_source": eps_source, "delta": delta,
           "vc_sample_size": None, "refused": refused,
           "rule_of_thumb_samples": int(bounds.rule_of_thumb_samples(d))}
    if refused is None and eps is not None and 0 < eps < 1:
        row["vc_sample_size"] = bounds.vc_sample_size(d, eps=eps, delta=delta).n_samples
    return row


def train_error_at(curve, n: float) -> float:
    """Measured mean training error at ``n`` labelled samples: interpolated in ln n between
    measured sizes, the largest size's value beyond them (NaN without training error)."""
    s = curve.summary()
    s = s[np.isfinite(s["train_mean"].to_numpy(float))]
    if not len(s):
        return math.nan
    sizes, train = s["size"].to_numpy(float), s["train_mean"].to_numpy(float)
    return float(np.interp(math.log(max(float(n), 1.0)), np.log(sizes), train))


def vc_epsilon(curve, *, test_error: float | None = None, gap: float | None = None,
               n: float | None = None) -> tuple[float | None, str, str | None]:
    """The ε to put into the VC bound for a target: ``(eps, source, refusal)``.

    The VC bound limits the generalization gap E_out − E_in, not the test error: a gap
    target is ε itself; a test-error target E leaves ε = E − training error at the size
    that reaches it (``n``, default the largest measured size). Without training error,
    or when the training error already reaches E, there is no ε and ``refusal`` says why.

    References
    ----------
    .. [1] V. N. Vapnik and A. Ya. Chervonenkis, "On the uniform convergence of relative
           frequencies of events to their probabilities", Theory Probab. Appl. 16(2), 1971.

    Examples
    --------
    >>> vc_epsilon(None, gap=0.05)
    (0.05, 'the gap target', None)
    """
    if gap is not None:
        return float(gap), "the gap target", None
    if curve is None or not curve.has_train:
        return None, "", ("the VC bound limits the gap between test and training error, "
                          "not the test error; give a gap target, or a run with train_error")
    size = float(n) if n is not None and math.isfinite(float(n)) else float(curve.sizes.max())
    train = train_error_at(curve, size)
    metric = curve.metric
    if not math.isfinite(train) or train >= float(test_error):
        return None, "", (f"the training error at {size:,.0f} samples "
                          f"({format_error(train, metric)}) already reaches the target "
                          f"{format_error(test_error, metric)}, so no gap is left for the VC bound")
    return (float(test_error) - train,
            f"target {format_error(test_error, metric)} minus the training error "
            f"{format_error(train, metric)} at {size:,.0f} samples", None)


def _check_need(test_error, gap, cost_per_label, budget, current_n, extra, vc_dim, interval,
                metric=None):
    """Validate the settings of `labels_needed` (one message per problem); the target, or
    None when only purchases are priced."""
    if test_error is not None and gap is not None:
        raise InputError("give exactly one target: test_error=E or gap=G")
    if test_error is None and gap is None and extra is None and budget is None:
        raise InputError("give a target (test_error=E or gap=G), or extra amounts of labels to price")
    check_level(interval)
    if cost_per_label is not None:
        check_positive(cost_per_label, "cost_per_label", allow_zero=True)
    if budget is not None:
        if cost_per_label is None or float(cost_per_label) == 0:
            raise InputError("budget needs a positive cost_per_label to turn money into labels")
        check_positive(budget, "budget", allow_zero=True)
    if current_n is not None:
        check_positive(current_n, "current_n")
    if vc_dim is not None:
        check_positive(vc_dim, "vc_dim", allow_zero=True)
    if extra is not None and any(not math.isfinite(float(x)) or float(x) <= 0 for x in extra):
        raise InputError("extra amounts must be positive numbers of labels")
    if test_error is None and gap is None:
        return None
    name, target = ("test_error", test_error) if test_error is not None else ("gap", gap)
    return check_error_target(target, name, rate=is_rate(metric))


def _amounts(extra, have: float, budget_labels: int | None, missing: float | None) -> list[int]:
    """Purchases to price: the given amounts, else 1×, 4× and 9× the labels in hand plus
    what the budget buys and what the target needs."""
    if extra is not None:
        amounts = {float(x) for x in extra}
    else:
        amounts = {have * k for k in DEFAULT_MULTIPLES}
        if budget_labels:
            amounts.add(budget_labels)
        if missing and math.isfinite(missing) and missing > 0:
            amounts.add(missing)
    return sorted({int(round(a)) for a in amounts if a > 0})


def labels_needed(curve, *, test_error=None, gap=None, current_n=None, cost_per_label=None,
                  budget=None, extra=None, vc_dim=None, interval: float = INTERVAL,
                  families="auto", bootstrap: int = BOOTSTRAP, weights: str = "sem",
                  random_state=SEED) -> LabelNeed:
    """Labelled samples needed for a target test error or gap, and what buying them costs.

    Fits the test error (and, for a gap target, the gap) with `fit_curve`, answers with
    `CurveFit.samples_for`, and prices the answer, a budget and a list of purchases.
    Without a target it only says what ``extra`` labels (or a budget) buy: the expected
    test error after each purchase, with its interval. The sanity checks
    (`curvefit.fitting.sanity.sanity_check`) go beside either.

    Parameters
    ----------
    curve : Curve
    test_error, gap : float
        The target; at most one is given, and none only with ``extra`` or ``budget``.
        A gap target needs train error in the curve.
    current_n : float, optional
        Labelled samples in hand (default: the largest measured size).
    cost_per_label : float, optional
        Price of one label; prices the answer and the purchase plan.
    budget : float, optional
        Money to spend on labels (needs a positive ``cost_per_label``).
    extra : list of float, optional
        Purchase amounts to price (default with a price or budget: 1×, 4× and 9× the
        labels in hand, what the budget buys and what the target needs).
    vc_dim : float, optional
        A known VC dimension (default: ``curve.meta["vc_dim"]``), to show the
        worst-case bound beside the measured answer.
    interval : float
        Level of every interval.
    families, bootstrap, weights, random_state
        Passed to `fit_curve`.

    Returns
    -------
    LabelNeed

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> n = np.repeat([100, 200, 400, 800, 1600], 3)
    >>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
    >>> curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": e}))
    >>> need = labels_needed(curve, test_error=0.16, cost_per_label=0.5, bootstrap=50,
    ...                      families="power-law-floor")
    >>> need.answer.reachable, need.cost.cost == need.extra * 0.5
    (True, True)
    >>> buys = labels_needed(curve, extra=[1000, 5000], bootstrap=50, families="power-law-floor")
    >>> buys.answer is None, buys.plan["extra"].tolist()
    (True, [1000, 5000])
    """
    from curvefit.fitting.engine import fit_curve

    target = _check_need(test_error, gap, cost_per_label, budget, current_n, extra, vc_dim,
                         interval, metric=getattr(curve, "metric", None))
    if gap is not None and not curve.has_train:
        raise InputError("a gap target needs train error in the curve; give test_error instead")
    settings = dict(families=families, bootstrap=bootstrap, weights=weights,
                    random_state=random_state)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitWarning)
        fit = fit_curve(curve, on="test", **settings)
        used = fit if gap is None else fit_curve(curve, on="gap", **settings)
        answer = (used.samples_for(test_error=test_error, gap=gap, interval=interval)
                  if target is not None else None)
        have = float(current_n) if current_n is not None else fit.largest_size
        need = _price(fit, answer, have, cost_per_label, budget, extra, interval)
        dims = vc_dim if vc_dim is not None else curve.meta.get("vc_dim")
        vc = None
        absent = vc_absent_reason(curve.metric, curve.metric_info)
        if dims is not None and target is not None and absent is not None:
            vc = {"vc_dim": dims, "applies": False, "reason": absent}
        elif dims is not None and target is not None:
            at = answer.n if answer is not None and answer.reachable else None
            eps, source, refused = vc_epsilon(curve, test_error=test_error, gap=gap, n=at)
            try:
                vc = vc_comparison(float(dims), eps, eps_source=source, refused=refused)
            except (TypeError, ValueError):
                vc = None
        sanity = sanity_check(curve, fit, answer=answer, answer_fit=used,
                              forecasts=_forecasts(need), interval=interval)
    notes = [str(w.message) for w in caught if issubclass(w.category, FitWarning)]
    answer_notes = list(answer.warnings) if answer is not None else []
    notes = list(dict.fromkeys(list(used.warnings) + answer_notes + notes))
    return LabelNeed(answer=answer, fit=used, current_n=have, vc=vc,
                     vc_known=dims is not None and target is not None, warnings=notes,
                     sanity=sanity, **need)


def _forecasts(need: dict) -> pd.DataFrame | None:
    """The test-error forecasts of a priced answer (plan rows and the budget's outcome) as
    ``size, estimate`` rows, for the floor check."""
    rows = []
    if need.get("plan") is not None:
        rows += [{"size": float(r.total_n), "estimate": float(r.test_error)}
                 for r in need["plan"].itertuples()]
    if need.get("budget") is not None:
        b = need["budget"]
        rows.append({"size": float(b.total_n), "estimate": float(b.test_error.estimate)})
    return pd.DataFrame(rows, columns=["size", "estimate"]) if rows else None


def _price(fit, answer, have: float, cost_per_label, budget, extra, interval: float) -> dict:
    """The labels still to buy, their cost, the budget's outcome and the purchase plan."""
    out: dict = {}
    missing = None
    if answer is not None and answer.reachable:
        missing = max(answer.n - have, 0.0)
        out["extra"] = missing
        out["extra_low"] = max(answer.low - have, 0.0) if math.isfinite(answer.low) else math.nan
        out["extra_high"] = max(answer.high - have, 0.0) if not math.isnan(answer.high) else math.nan
        if cost_per_label is not None:
            c = float(cost_per_label)
            out["cost"] = Cost(missing, missing * c, out["extra_low"] * c, out["extra_high"] * c, c)
    bought = None
    if budget is not None:
        bought = labels_for_budget(budget, cost_per_label)
        out["budget"] = BudgetOutcome(float(budget), bought, have + bought,
                                      fit.error_at(have + bought, interval=interval))
    if extra is not None or cost_per_label is not None or budget is not None:
        needed = missing if answer is not None and answer.kind == "test_error" else None
        amounts = _amounts(extra, have, bought, needed)
        out["plan"] = plan_purchase(fit, current_n=have, extra=amounts,
                                    cost_per_label=cost_per_label, interval=interval)
    return out
