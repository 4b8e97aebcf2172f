"""Buying labels in rounds: how many now, when to stop, and what it costs in expectation.

Pure numerics on a fitted curve (``CurveFit``); imports neither the command line nor I/O.

The samples a target needs, ``D``, is uncertain. Its distribution is read from the
forecast's prediction band (``CurveFit.predict``, calibrated on the curve corpus): the
band at the quantile ``u`` is one plausible true curve, and where it crosses the target
is ``D(u)``; ``u`` on an even grid of (0, 1) gives equally likely draws of ``D``.

A plan buys up to ``q_1`` labels in all, measures, stops when the target is reached
(``D ≤ q_1``), else buys up to ``q_2``, and so on for at most ``max_rounds`` rounds. Its
cost is the labels bought, a fixed cost for every round held, and a penalty when the
target is still missed after the last round; a required probability of reaching the
target replaces the penalty by a constraint. Between rounds the plan keeps the
distribution of ``D`` and only learns that ``D > q_t`` (the rounds formulation of
Mahmood et al., NeurIPS 2022); re-running the plan on the new measurement learns more.
The expected cost is minimised exactly over the draws by dynamic programming (the
optimal ``q_t`` are draws of ``D``, since the cost grows between them), and the cost's
spread comes from replaying the plan on every draw.

References
----------
.. [1] R. Mahmood, J. Lucas, D. Acuna, D. Li, J. Philion, J. M. Alvarez, Z. Yu, S. Fidler
       and M. T. Law, "How Much More Data Do I Need? Estimating Requirements for
       Downstream Tasks", CVPR 2022.
.. [2] R. Mahmood, J. Lucas, J. M. Alvarez, S. Fidler and M. T. Law, "Optimizing Data
       Collection for Machine Learning", NeurIPS 2022.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import FitWarning, InputError
from curvefit.core.formatting import format_count, format_error, format_money, is_rate, quantity_name
from curvefit.core.validate import check_count, check_error_target, check_level, check_positive

# Quantiles of the band turned into draws of the samples needed (midpoints of an even grid).
N_QUANTILES = 100
# Points of the size grid on which each band quantile is searched for the target.
GRID_POINTS = 400
MAX_ROUNDS = 20
# How each strategy is named to a reader (the terminal and the report).
STRATEGY_TITLES = {"rounds": "rounds", "one-shot": "one purchase", "upper-end": "upper end at once"}


@dataclass(frozen=True)
class Strategy:
    """One way of buying labels, replayed on every draw of the samples needed.

    Attributes
    ----------
    name : str
        ``"rounds"``, ``"one-shot"`` or ``"upper-end"``.
    totals : tuple of float
        Labelled samples held after each round (``totals[0] - current_n`` is bought now).
    expected_cost, cost_sd, cost_low, cost_high : float
        Mean, standard deviation and the interval (at ``level``) of the total cost:
        labels, round costs and the penalty for a miss.
    level : float
    reach_probability : float
        Chance the target is reached by the last round.
    expected_rounds, expected_labels : float
        Rounds held and labels bought, on average.
    """

    name: str
    totals: tuple
    expected_cost: float
    cost_sd: float
    cost_low: float
    cost_high: float
    level: float
    reach_probability: float
    expected_rounds: float
    expected_labels: float

    @property
    def title(self) -> str:
        """The strategy's name for a reader (``"one purchase"``)."""
        return STRATEGY_TITLES.get(self.name, self.name)

    def to_dict(self) -> dict:
        return {"name": self.name, "totals": list(self.totals),
                "expected_cost": self.expected_cost, "cost_sd": self.cost_sd,
                "cost_low": self.cost_low, "cost_high": self.cost_high, "level": self.level,
                "reach_probability": self.reach_probability,
                "expected_rounds": self.expected_rounds, "expected_labels": self.expected_labels}


@dataclass(frozen=True)
class RoundPlan:
    """A label-buying plan in rounds: the result of `plan_rounds`.

    Attributes
    ----------
    target, kind : float, str
        The target and ``"test_error"`` or ``"gap"``.
    current_n : float
        Labelled samples in hand.
    label_cost, round_cost : float
        Price of one label; fixed cost of each round (labelling set-up, retraining).
    penalty, probability : float or None
        Cost of ending below the target, or the required chance of reaching it.
    max_rounds : int
    rounds, one_shot : Strategy
        The best plan in at most ``max_rounds`` rounds, and in one round.
    upper_end : Strategy or None
        Buying the upper end of the samples-needed interval at once (None when that end
        is open).
    draws : numpy.ndarray
        The equally likely draws of the total samples needed (``inf``: beyond the horizon).
    answer : SampleEstimate
        ``CurveFit.samples_for`` for the same target, for reference.
    feasible : bool
        False when no purchase within the horizon reaches ``probability``.
    warnings : list of str
    """

    target: float
    kind: str
    metric: str
    current_n: float
    label_cost: float
    round_cost: float
    penalty: float | None
    probability: float | None
    max_rounds: int
    level: float
    rounds: Strategy | None
    one_shot: Strategy | None
    upper_end: Strategy | None
    draws: np.ndarray
    answer: object
    horizon: float
    feasible: bool = True
    warnings: list = field(default_factory=list)

    @property
    def buy_now(self) -> float:
        """Labels to buy in the first round (0 when the labels in hand suffice)."""
        if self.rounds is None or not self.rounds.totals:
            return 0.0
        return max(self.rounds.totals[0] - self.current_n, 0.0)

    @property
    def already_reached(self) -> float:
        """Chance that the labels in hand already reach the target."""
        return float(np.mean(self.draws <= self.current_n))

    def rule(self) -> list[str]:
        """The decision rule, one sentence per round."""
        if not self.feasible:
            return [f"No purchase within the horizon ({format_count(self.horizon)} labels in all) "
                    f"reaches the target with probability {self.probability:.0%}; lower the "
                    "probability or state a penalty instead."]
        plan = self.rounds
        if plan is None or not plan.totals:
            if self.penalty is not None and self.already_reached < 0.5:
                return [f"Buy nothing: a miss's penalty of {format_money(self.penalty)} costs less "
                        "than any purchase in rounds is expected to (the labels in hand reach the "
                        f"target with probability {self.already_reached:.0%})."]
            return ["Buy nothing: the labels in hand are the cheapest choice "
                    f"(they reach the target with probability {self.already_reached:.0%})."]
        lines, before = [], self.current_n
        what = format_error(self.target, self.metric)
        for t, total in enumerate(plan.totals, start=1):
            buy = total - before
            head = "Now" if t == 1 else f"Round {t}: if still above {what}"
            reach = float(np.mean(self.draws <= total))
            lines.append(f"{head}, buy {format_count(buy)} labels ({format_count(total)} in all), "
                         f"measure again; stop when the {self._quantity()} is at or below {what} "
                         f"(reached by then with probability {reach:.0%}).")
            before = total
        lines.append("After the last round, stop: " + (
            f"a miss costs the penalty of {format_money(self.penalty)}." if self.penalty is not None
            else f"the plan reaches the target with probability {plan.reach_probability:.0%}."))
        return lines

    def cost_ratios(self) -> dict:
        """Expected cost of the rounds plan over each alternative's (``name -> ratio``)."""
        if self.rounds is None:
            return {}
        return {s.name: self.rounds.expected_cost / s.expected_cost
                for s in (self.one_shot, self.upper_end) if s is not None and s.expected_cost > 0}

    def _quantity(self) -> str:
        if self.kind == "gap":
            return "gap"
        return quantity_name("test_error", self.metric, getattr(self.answer, "metric_info", None))

    def to_dict(self) -> dict:
        quantiles = {f"{q:g}": _quantile(self.draws, q) for q in (0.05, 0.25, 0.5, 0.75, 0.95)}
        return {
            "target": self.target, "kind": self.kind, "current_n": self.current_n,
            "label_cost": self.label_cost, "round_cost": self.round_cost,
            "penalty": self.penalty, "probability": self.probability,
            "max_rounds": self.max_rounds, "level": self.level, "feasible": self.feasible,
            "buy_now": self.buy_now, "rule": self.rule(),
            "rounds": self.rounds.to_dict() if self.rounds else None,
            "one_shot": self.one_shot.to_dict() if self.one_shot else None,
            "upper_end": self.upper_end.to_dict() if self.upper_end else None,
            "samples_needed": {"quantiles": quantiles, "n_draws": int(len(self.draws)),
                               "beyond_horizon": float(np.mean(~np.isfinite(self.draws))),
                               "already_reached": self.already_reached,
                               "horizon": self.horizon},
            "answer": self.answer.to_dict() if self.answer is not None else None,
            "warnings": list(self.warnings),
        }


def _quantile(draws: np.ndarray, q: float) -> float:
    """The q-quantile of the draws (``inf`` allowed), as the lower order statistic."""
    s = np.sort(draws)
    return float(s[min(int(math.ceil(q * len(s))) - 1, len(s) - 1)]) if len(s) else math.nan


# ----------------------------------------------------------------------- the draws of D
def needed_draws(fit, target: float, *, start: float, horizon: float,
                 n_quantiles: int = N_QUANTILES) -> np.ndarray:
    """Equally likely draws of the samples needed for ``target``, from the band quantiles.

    For ``u`` at the midpoints of an even grid of (0, 1), the band's ``u``-quantile
    curve (``fit.predict`` at the level ``|2u − 1|``) is searched on a geometric grid
    from ``start`` to ``horizon``; the draw is the size after which that curve stays at
    or below the target (linear in ln n between grid points), ``start`` when it is
    already there, ``inf`` when it does not get there by ``horizon``. Higher quantiles
    are more pessimistic curves, so the draws rise with ``u``.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.fitting.engine import fit_curve
    >>> n = np.repeat([100, 200, 400, 800, 1600], 3)
    >>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
    >>> fit = fit_curve(pd.DataFrame({"size": n, "test_error": e}), bootstrap=50)
    >>> d = needed_draws(fit, 0.16, start=1600, horizon=160000, n_quantiles=20)
    >>> len(d), bool(np.all(np.diff(d[np.isfinite(d)]) >= 0))
    (20, True)
    """
    grid = np.geomspace(start, max(horizon, start * 1.0001), GRID_POINTS)
    u = (np.arange(n_quantiles) + 0.5) / n_quantiles
    curves = np.empty((n_quantiles, len(grid)))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        centre = fit.predict(grid, interval=0.5)["estimate"].to_numpy(float)
        for k, q in enumerate(u):
            level = abs(2 * q - 1)
            if level < 1e-9:
                curves[k] = centre
                continue
            band = fit.predict(grid, interval=level)
            curves[k] = band["high" if q > 0.5 else "low"].to_numpy(float)
    curves = np.maximum.accumulate(curves, axis=0)  # a higher quantile is never lower
    return np.array([_crossing(grid, row, target) for row in curves])


def _crossing(grid: np.ndarray, values: np.ndarray, target: float) -> float:
    above = np.nonzero(~(values <= target))[0]
    if not len(above):
        return float(grid[0])
    i = int(above[-1])
    if i == len(grid) - 1:
        return math.inf
    v0, v1 = values[i], values[i + 1]
    frac = min(max((v0 - target) / (v0 - v1), 0.0), 1.0) if v0 != v1 else 1.0
    return float(math.ceil(math.exp(math.log(grid[i]) + frac * math.log(grid[i + 1] / grid[i]))))


# ----------------------------------------------------------------------- the optimisation
def best_schedule(draws, *, current_n: float, label_cost: float, round_cost: float,
                  penalty: float | None = None, probability: float | None = None,
                  max_rounds: int = 3) -> tuple | None:
    """The totals ``(q_1, …, q_T)`` (T ≤ ``max_rounds``) of least expected cost.

    Expected cost = Σ_t P(D > q_{t−1}) · (label_cost · (q_t − q_{t−1}) + round_cost)
    + penalty · P(D > q_T), with ``q_0 = current_n``; with ``probability`` instead of a
    penalty, P(D > q_T) ≤ 1 − probability is required. Solved exactly by dynamic
    programming over the draws (the cost rises between them). Returns ``()`` when
    buying nothing is best, None when the probability cannot be met.

    Examples
    --------
    >>> best_schedule([100, 200, 300, 400], current_n=50, label_cost=1, round_cost=0,
    ...               penalty=1e6, max_rounds=1)
    (400.0,)
    >>> best_schedule([100, 200, 300, 400], current_n=50, label_cost=1, round_cost=0,
    ...               penalty=1e6, max_rounds=4)
    (100.0, 200.0, 300.0, 400.0)
    """
    d = np.asarray(draws, dtype=float)
    cand = np.unique(d[np.isfinite(d) & (d > current_n)])
    states = np.concatenate([[float(current_n)], cand])
    survive = np.array([np.mean(d > s) for s in states])   # P(D > state)
    if probability is not None:
        final = np.where(survive <= 1 - probability + 1e-12, 0.0, math.inf)
    else:
        final = penalty * survive
    m = len(states)
    value = final.copy()
    choice = [np.full(m, -1)]
    for _ in range(max_rounds):
        nxt, pick = final.copy(), np.full(m, -1)
        for i in range(m - 1):
            j = np.arange(i + 1, m)
            cost = survive[i] * (label_cost * (states[j] - states[i]) + round_cost) + value[j]
            k = int(np.argmin(cost))
            if math.isfinite(cost[k]) and not cost[k] >= nxt[i] - 1e-9 * max(1.0, abs(cost[k])):
                nxt[i], pick[i] = cost[k], int(j[k])
        value = nxt
        choice.append(pick)
    if not math.isfinite(value[0]):
        return None
    totals, i = [], 0
    for pick in reversed(choice[1:]):
        if pick[i] < 0:
            break
        i = int(pick[i])
        totals.append(float(states[i]))
    return tuple(totals)


def replay(name: str, totals, draws, *, current_n: float, label_cost: float, round_cost: float,
           penalty: float | None, level: float) -> Strategy:
    """Replay a schedule on every draw: the cost's mean, spread and interval.

    Examples
    --------
    >>> s = replay("one-shot", (400.0,), [100, 200, 300, 500], current_n=50, label_cost=1,
    ...            round_cost=10, penalty=1000, level=0.9)
    >>> s.expected_cost, s.reach_probability
    (610.0, 0.75)
    """
    d = np.asarray(draws, dtype=float)
    cost = np.zeros(len(d))
    rounds = np.zeros(len(d))
    labels = np.zeros(len(d))
    before = np.full(len(d), float(current_n))
    active = d > current_n
    for total in totals:
        buy = total - before
        cost += active * (label_cost * buy + round_cost)
        labels += active * buy
        rounds += active
        before = np.where(active, total, before)
        active = active & (d > total)
    if penalty is not None:
        cost += active * penalty
    lo, hi = np.quantile(cost, [(1 - level) / 2, (1 + level) / 2])
    return Strategy(name=name, totals=tuple(float(t) for t in totals),
                    expected_cost=float(cost.mean()), cost_sd=float(cost.std()),
                    cost_low=float(lo), cost_high=float(hi), level=level,
                    reach_probability=float(1 - active.mean()),
                    expected_rounds=float(rounds.mean()), expected_labels=float(labels.mean()))


# ----------------------------------------------------------------------- the API
def check_plan_settings(label_cost, round_cost, penalty, probability, max_rounds, interval):
    """The settings of a plan in rounds, checked (one check for `plan_rounds` and the report)."""
    label_cost = check_positive(label_cost, "label_cost")
    round_cost = check_positive(round_cost, "round_cost", allow_zero=True)
    if (penalty is None) == (probability is None):
        raise InputError("give exactly one of penalty (the cost of ending below the target) "
                         "and probability (the required chance of reaching it)")
    if penalty is not None:
        penalty = check_positive(penalty, "penalty", allow_zero=True)
    if probability is not None:
        probability = check_level(probability, "probability")
    max_rounds = check_count(max_rounds, "max_rounds", minimum=1, maximum=MAX_ROUNDS)
    return label_cost, round_cost, penalty, probability, max_rounds, check_level(interval)


def plan_rounds(curve, *, test_error=None, gap=None, label_cost, round_cost=0.0, penalty=None,
                probability=None, max_rounds: int = 3, current_n=None,
                interval: float = INTERVAL, horizon: float = 100.0, families="auto",
                bootstrap: int = BOOTSTRAP, weights: str = "sem", random_state=SEED,
                fit=None) -> RoundPlan:
    """Plan the purchase of labels for a target in at most ``max_rounds`` rounds.

    Parameters
    ----------
    curve : Curve
        The measured curve (ignored for the fit when ``fit`` is given).
    test_error, gap : float
        The target (exactly one; a gap target needs train error in the curve).
    label_cost : float
        Price of one label (> 0).
    round_cost : float
        Fixed cost of each round held (setting up labelling, retraining, measuring).
    penalty, probability : float
        Exactly one: the cost of ending below the target after the last round, or the
        required chance of reaching it.
    max_rounds : int
        At most this many rounds (1 to 20).
    current_n : float, optional
        Labelled samples in hand (default: the largest measured size).
    interval : float
        Level of the interval on the total cost.
    horizon : float
        Multiple of the largest measured size beyond which the curve answers nothing.
    families, bootstrap, weights, random_state
        Passed to `fit_curve`.
    fit : CurveFit, optional
        A fit of the target's quantity to use instead of fitting ``curve``.

    Returns
    -------
    RoundPlan

    References
    ----------
    .. [1] R. Mahmood et al., "Optimizing Data Collection for Machine Learning",
           NeurIPS 2022 (rounds, a cost per round, a penalty for missing the target).
    .. [2] R. Mahmood et al., "How Much More Data Do I Need?", CVPR 2022.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> n = np.repeat([100, 200, 400, 800, 1600], 3)
    >>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
    >>> curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": e}))
    >>> plan = plan_rounds(curve, test_error=0.16, label_cost=1, round_cost=500,
    ...                    penalty=50000, bootstrap=50)
    >>> plan.rounds.expected_cost <= plan.one_shot.expected_cost
    True
    """
    from curvefit.fitting.engine import fit_curve

    label_cost, round_cost, penalty, probability, max_rounds, level = check_plan_settings(
        label_cost, round_cost, penalty, probability, max_rounds, interval)
    if (test_error is None) == (gap is None):
        raise InputError("give exactly one target: test_error=E or gap=G")
    kind, target = ("test_error", test_error) if test_error is not None else ("gap", gap)
    metric = getattr(curve, "metric", "error") if fit is None else fit.curve.metric
    target = check_error_target(target, kind, rate=is_rate(metric))
    factor = check_positive(horizon, "horizon")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitWarning)
        if fit is None:
            if kind == "gap" and not curve.has_train:
                raise InputError("a gap target needs train error in the curve; give test_error instead")
            fit = fit_curve(curve, on="test" if kind == "test_error" else "gap", families=families,
                            bootstrap=bootstrap, weights=weights, random_state=random_state)
        have = float(current_n) if current_n is not None else fit.largest_size
        if current_n is not None:
            check_positive(current_n, "current_n")
        answer = fit.samples_for(test_error=test_error, gap=gap, interval=level, horizon=factor)
        top = factor * fit.largest_size
        draws = needed_draws(fit, target, start=min(have, fit.largest_size), horizon=top)
    draws = np.where(draws <= have, have, draws)
    costs = dict(current_n=have, label_cost=label_cost, round_cost=round_cost)
    notes = list(dict.fromkeys(list(fit.warnings) + list(answer.warnings)
                               + [str(w.message) for w in caught
                                  if issubclass(w.category, FitWarning)]))
    strategies = {}
    for name, rounds in (("rounds", max_rounds), ("one-shot", 1)):
        totals = best_schedule(draws, penalty=penalty, probability=probability,
                               max_rounds=rounds, **costs)
        strategies[name] = (None if totals is None else
                            replay(name, totals, draws, penalty=penalty, level=level, **costs))
    upper = None
    if math.isfinite(answer.high) and answer.high > have:
        upper = replay("upper-end", (float(math.ceil(answer.high)),), draws, penalty=penalty,
                       level=level, **costs)
    beyond = float(np.mean(~np.isfinite(draws)))
    if beyond > 0:
        notes.append(f"in {beyond:.0%} of the draws the curve does not reach the target within "
                     f"{format_count(top)} labels (the horizon)")
    return RoundPlan(target=target, kind=kind, metric=metric, current_n=have,
                     label_cost=label_cost, round_cost=round_cost, penalty=penalty,
                     probability=probability, max_rounds=max_rounds, level=level,
                     rounds=strategies["rounds"], one_shot=strategies["one-shot"],
                     upper_end=upper, draws=draws, answer=answer, horizon=top,
                     feasible=strategies["rounds"] is not None, warnings=notes)


# ----------------------------------------------------------------------- a budget across slices
@dataclass(frozen=True)
class BudgetSplit:
    """A label budget split across slices: the result of `split_budget`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per slice: ``slice, share, rows_now, label_cost, labels, spend,
        error_now, error_after, low, high, gain_per_money`` (``gain_per_money``: the fall
        of the overall error per unit of money of the last step given to that slice;
        the greedy split equalises it across the slices that get labels).
    overall_now, overall_after : Estimate
        The overall error (the slices' errors weighted by their shares), now and after
        the purchase, with intervals (slices taken as independent).
    budget : float
    targets : dict or None
        Per-slice targets, when the split reaches targets instead of spending a budget.
    notes : list of str
    fits : dict
        ``slice -> CurveFit`` the split was read from (not written by `to_dict`).
    """

    table: object
    overall_now: object
    overall_after: object
    budget: float
    level: float
    targets: dict | None = None
    notes: list = field(default_factory=list)
    fits: dict = field(default_factory=dict, repr=False, compare=False)

    def to_dict(self) -> dict:
        return {"format": "curvefit.split/1", "budget": self.budget, "level": self.level,
                "targets": self.targets, "slices": self.table.to_dict(orient="records"),
                "overall_now": self.overall_now.to_dict(),
                "overall_after": self.overall_after.to_dict(), "notes": list(self.notes)}


def _overall(rows, level: float):
    """The share-weighted error with an interval from the slices' bands (independent)."""
    from scipy.special import ndtri

    from curvefit.core.estimate import Estimate

    z = float(ndtri((1 + level) / 2))
    est = sum(w * e for w, e, _, _ in rows)
    var = sum((w * (hi - lo) / (2 * z)) ** 2 for w, _, lo, hi in rows)
    half = z * math.sqrt(var)
    return Estimate(float(est), float(est - half), float(est + half), level)


def split_budget(fits: dict, *, shares: dict, current: dict, label_costs, budget=None,
                 targets: dict | None = None, interval: float = INTERVAL,
                 steps: int = 400) -> BudgetSplit:
    """Split a label budget across slices, or price per-slice targets.

    With ``budget``, the money goes in ``steps`` equal parts, each to the slice whose
    fitted curve falls most per unit of money there (its share × the fall of its error
    over the labels that part buys); for falling, convex curves this greedy rule is the
    optimum, where the marginal gains per unit of money are equal across the slices that
    get labels. With ``targets`` (``slice -> target error``), each slice buys what its
    curve needs for its target (`CurveFit.samples_for`).

    Parameters
    ----------
    fits : dict
        ``slice -> CurveFit`` of that slice's test error against its training rows.
    shares : dict
        ``slice -> weight`` in the overall error (e.g. its share of the rows).
    current : dict
        ``slice -> training rows in hand``.
    label_costs : float or dict
        Price of one label, the same for all or per slice.
    budget : float, optional
    targets : dict, optional
    interval : float

    Returns
    -------
    BudgetSplit

    References
    ----------
    .. [1] K. H. Tae and S. E. Whang, "Slice Tuner", SIGMOD 2021 (acquisition per slice
           from per-slice learning curves).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.fitting.engine import fit_curve
    >>> n = np.repeat([50, 100, 200, 400], 3)
    >>> noise = np.tile([-0.002, 0.0, 0.002], 4)
    >>> steep = fit_curve(pd.DataFrame({"size": n, "test_error": 0.05 + 3 * n ** -0.5 + noise}),
    ...                   bootstrap=30)
    >>> flat = fit_curve(pd.DataFrame({"size": n, "test_error": 0.2 + 0.1 * n ** -0.5 + noise}),
    ...                  bootstrap=30)
    >>> s = split_budget({"a": steep, "b": flat}, shares={"a": 0.5, "b": 0.5},
    ...                  current={"a": 400, "b": 400}, label_costs=1, budget=2000)
    >>> s.table.set_index("slice")["labels"]["a"] > s.table.set_index("slice")["labels"]["b"]
    True
    """
    import pandas as pd

    level = check_level(interval)
    names = list(fits)
    if not names:
        raise InputError("no slice has a curve to split a budget over")
    costs = {k: check_positive(label_costs.get(k) if isinstance(label_costs, dict) else label_costs,
                               f"label cost of slice {k}") for k in names}
    if (budget is None) == (targets is None):
        raise InputError("give exactly one of budget (money to split) and targets (per slice)")
    steps = check_count(steps, "steps", minimum=1, maximum=100_000)
    notes: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitWarning)
        if budget is not None:
            budget = check_positive(budget, "budget")
            labels = _whole_labels(_greedy(fits, shares, current, costs, budget, steps), costs, budget)
        else:
            labels = {}
            for k in names:
                t = targets.get(k)
                if t is None:
                    labels[k] = 0.0
                    continue
                ans = fits[k].samples_for(test_error=t, interval=level)
                labels[k] = float(max(math.ceil(ans.n - current[k] - 1e-9), 0)) if ans.reachable else math.nan
                if not ans.reachable:
                    notes.append(f"slice {k}: {ans.message}")
        rows, now_rows, after_rows = [], [], []
        for k in names:
            fit, have = fits[k], float(current[k])
            buy = labels[k]
            e_now = fit.error_at(have, interval=level)
            after = fit.error_at(have + (buy if math.isfinite(buy) else 0.0), interval=level)
            now_rows.append((shares[k], e_now.estimate, e_now.low, e_now.high))
            after_rows.append((shares[k], after.estimate, after.low, after.high))
            step_labels = (budget / steps) / costs[k] if budget is not None else max(have, 1.0) / 10
            nxt = fit.error_at(have + (buy if math.isfinite(buy) else 0.0) + step_labels,
                               interval=level).estimate
            rows.append({"slice": _plain_value(k), "share": shares[k], "rows_now": have,
                         "label_cost": costs[k], "labels": buy, "spend": buy * costs[k],
                         "error_now": e_now.estimate, "error_after": after.estimate,
                         "low": after.low, "high": after.high,
                         "gain_per_money": shares[k] * (after.estimate - nxt)
                         / (step_labels * costs[k])})
    notes += list(dict.fromkeys(str(w.message) for w in caught if issubclass(w.category, FitWarning)))
    spent = float(np.nansum([r["spend"] for r in rows]))
    return BudgetSplit(table=pd.DataFrame(rows), overall_now=_overall(now_rows, level),
                       overall_after=_overall(after_rows, level),
                       budget=float(budget) if budget is not None else spent, level=level,
                       targets=None if targets is None else {str(k): v for k, v in targets.items()},
                       notes=notes, fits=dict(fits))


def _plain_value(value):
    return value.item() if hasattr(value, "item") else value


def _whole_labels(labels: dict, costs: dict, budget: float) -> dict:
    """Whole labels within the budget: each slice's share rounded down, then the money left
    to the slices with the largest fractions, one label each while it lasts."""
    whole = {k: float(math.floor(v + 1e-9)) for k, v in labels.items()}
    left = budget - sum(whole[k] * costs[k] for k in whole)
    for k in sorted(labels, key=lambda k: whole[k] - labels[k]):
        if labels[k] - whole[k] > 1e-9 and costs[k] <= left + 1e-9:
            whole[k] += 1.0
            left -= costs[k]
    return whole


def _greedy(fits, shares, current, costs, budget: float, steps: int) -> dict:
    """Labels per slice: each equal part of the budget to the largest fall per money."""
    step = budget / steps
    curves = {}
    for k, fit in fits.items():
        extra = np.arange(steps + 1) * step / costs[k]
        curves[k] = shares[k] * fit.predict(float(current[k]) + np.maximum(extra, 1e-9))[
            "estimate"].to_numpy(float)
    index = dict.fromkeys(fits, 0)
    for _ in range(steps):
        gains = {k: curves[k][i] - curves[k][i + 1] for k, i in index.items()}
        best = max(gains, key=lambda k: gains[k])
        if not gains[best] > 0:
            break
        index[best] += 1
    return {k: i * step / costs[k] for k, i in index.items()}


def plan_slices(slices, *, budget=None, targets: dict | None = None, label_costs=1.0,
                interval: float = INTERVAL, families="auto", bootstrap: int = BOOTSTRAP,
                weights: str = "sem", random_state=SEED) -> BudgetSplit:
    """Fit every measured slice's curve and split a budget (or price per-slice targets).

    ``slices`` is a `curvefit.measuring.slices.SliceCurves`; the slices in hand are each
    slice's training rows (its largest measured size), their weights its share of the
    rows among the measured slices. Rare slices that were not measured are named in
    the notes.
    """
    from curvefit.fitting.engine import fit_curve

    if not slices.curves:
        raise InputError("no slice was measured (all too rare); nothing to split")
    if budget is not None:
        check_positive(budget, "budget")
    check_level(interval)
    if targets is not None:
        unknown = [k for k in targets if k not in slices.curves]
        if unknown:
            raise InputError(f"no measured slice {unknown[0]!r}; measured: "
                             + ", ".join(str(k) for k in slices.curves))
    if isinstance(label_costs, dict):
        unknown = [k for k in label_costs if k not in slices.rows]
        if unknown:
            raise InputError(f"no slice {unknown[0]!r}; slices: " + ", ".join(map(str, slices.rows)))
        missing = [k for k in slices.curves if k not in label_costs]
        if missing:
            raise InputError(f"no label cost for slice {missing[0]!r}; give one per slice")
    total = sum(slices.shares[k] for k in slices.curves)
    shares = {k: slices.shares[k] / total for k in slices.curves}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        fits = {k: fit_curve(c, families=families, bootstrap=bootstrap, weights=weights,
                             random_state=random_state) for k, c in slices.curves.items()}
    current = {k: float(fits[k].largest_size) for k in fits}
    split = split_budget(fits, shares=shares, current=current, label_costs=label_costs,
                         budget=budget, targets=targets, interval=interval)
    notes = [f"not measured: {reason}" for reason in slices.skipped.values()]
    if notes:
        notes.append("the overall error covers the measured slices only, weighted by their rows")
    return BudgetSplit(table=split.table, overall_now=split.overall_now,
                       overall_after=split.overall_after, budget=split.budget, level=split.level,
                       targets=split.targets, notes=notes + split.notes, fits=split.fits)
