"""Adaptive measurement: measure only the cells one question needs, under a precision or budget.

The user states one question (a *goal*) and a precision (interval width over the answer),
a compute budget (fit seconds), or both:

=========================  ===============================================================
``error-at:N``             the test error at N training rows (`CurveFit.error_at`)
``samples-for-error:E``    the rows needed for test error E (`CurveFit.samples_for`)
``samples-for-gap:G``      the rows needed for a generalization gap G (fitted on the gap)
``floor``                  the level the curve tends to (`CurveFit.asymptote`)
=========================  ===============================================================

How cells are chosen (`AdaptiveDesign.run`):

1. A first pass: `FIRST_SIZES` candidate sizes spread geometrically from the smallest to
   the size the question is about (the largest candidate when the question lies beyond
   the candidates, and for the samples and floor questions), `FIRST_REPEATS` repeats
   each: a forecast leans on the largest sizes, so they are measured from the start,
   and three repeats is the fewest the engine's Student-t bootstrap makes much of (two
   cells at a size count as 0.14 of one, three as 0.95; `effective_cells`).
2. Each round fits the curve with the forecasting engine (`curvefit.fitting.fit_curve`,
   the run's seed) and reads the answer and its interval. The run stops when the
   interval is narrow enough, the budget is spent, the target is out of reach with
   confidence (samples questions: even the optimistic edge of the band never reaches
   it), or no candidate cell is left or predicted to help.
3. Otherwise about `BATCH` cells are chosen greedily (a round ends once it holds
   `BATCH`), each step the one with the largest predicted
   shrinkage of the answer's squared half-width per unit of compute (optimal design for
   one function of the parameters, "c-optimality", through the delta method): the design
   curve ``e(n) = c + a·n^−p`` is fitted to the measured means with weights
   ``k_s·(z/t_{k_s−1})²/σ_s²`` (σ_s, the spread of one cell, a power law in n fitted to
   the repeats; the factor is what the engine's parametric bootstrap, which draws each
   mean with Student-t noise on k − 1 degrees of freedom, makes of k cells: two count as
   0.14, three as 0.95, five as 2.98, one as 1; `effective_cells`), so
   the parameters' variance is ``(Jᵀ W J)⁻¹`` and the answer's ``gᵀ(JᵀWJ)⁻¹g`` with ``g``
   the gradient of the answer (the error at the question's size). To it are added, as
   the engine builds its band, the model error seen in forecast validation (``drift ·
   ln(N / n_max)``, shrinking only when a larger size is measured, scaled by the
   calibration's κ), the calibration's relative model error (``τ·|F(n_max)|·ln(N /
   n_max)``, unscaled) and the fresh-data-set variance; the result is never below the
   interval of the mean measured nearest N (Student t on k − 1 degrees of freedom,
   which rewards repeats there). A greedy step may add several repeats at one size at
   once (scored per cell): with Student-t weights a second repeat alone can be worth
   less than the first, and the third much more.
4. Compute is counted in rows processed — a cell fits its training rows, then scores
   them and the test rows, so ``2·n + n_test`` — not in measured seconds: the choice must
   be the same whatever machine, ``--jobs`` or backend ran the cells, and after a resume. Measured seconds
   (the cost model of `curvefit.measuring.costs`) decide only where a budget stops the
   run: a round's cells are dropped from its end while the predicted seconds would
   exceed what is left.

Every decision is a function of the cells measured so far (their errors, not their
timings) and the seed, so a run resumed from its journal replays the same rounds and
chooses the same cells.

References
----------
.. [1] G. Elfving, "Optimum allocation in linear regression theory", Annals of
       Mathematical Statistics 23(2), 1952 (c-optimal designs: the variance of one
       linear function of the parameters).
.. [2] K. Chaloner and I. Verdinelli, "Bayesian experimental design: a review",
       Statistical Science 10(3), 1995 (choosing experiments by the expected reduction
       of the uncertainty of the quantity of interest, the value of information).
.. [3] G. A. F. Seber and C. J. Wild, "Nonlinear Regression", Wiley 1989, ch. 5
       (the delta method and locally optimal designs for nonlinear models).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np

from curvefit.core.errors import InputError
from curvefit.core.formatting import format_count, format_estimate, format_number
from curvefit.core.validate import check_positive

GOAL_KINDS = ("error-at", "samples-for-error", "samples-for-gap", "floor")
FIRST_SIZES = 4       # sizes of the first pass
FIRST_REPEATS = 3     # repeats of each first-pass size
BATCH = 4             # cells chosen per round
DESIGN_VERSION = 3    # bump when the choice or stop rule changes (older journals are refused)
# A width this close above the precision (relative) counts as within it: the engine's width
# does not fall monotonically with cells, and a near tie otherwise buys rounds for nothing
# (scripts/bench_adaptive.py, fair/linear: 0.007% over after the first pass, then 32 more
# cells before a round came in under it).
PRECISION_SLACK = 1e-3
LEVEL = 0.9


# ---------------------------------------------------------------------- the question
@dataclass(frozen=True)
class Goal:
    """One question an adaptive run answers: ``kind`` (`GOAL_KINDS`) and its ``value``."""

    kind: str
    value: float | None = None

    @property
    def text(self) -> str:
        if self.value is None:
            return self.kind
        v = int(self.value) if self.kind == "error-at" else self.value
        return f"{self.kind}:{v:g}"

    @property
    def on(self) -> str:
        """The quantity fitted: the gap for ``samples-for-gap``, else the test error."""
        return "gap" if self.kind == "samples-for-gap" else "test"


def parse_goal(text) -> Goal:
    """A goal from its text; bad text is an `InputError` naming the accepted forms.

    Examples
    --------
    >>> parse_goal("error-at:20000"), parse_goal("floor").text
    (Goal(kind='error-at', value=20000.0), 'floor')
    >>> parse_goal("samples-for-error:0.08").value
    0.08
    """
    forms = "error-at:N, samples-for-error:E, samples-for-gap:G or floor"
    if not isinstance(text, str) or not text.strip():
        raise InputError(f"goal must be one of {forms}, got {text!r}")
    kind, _, value = text.strip().partition(":")
    kind = kind.strip().lower()
    if kind not in GOAL_KINDS:
        raise InputError(f"unknown goal {text!r}; use {forms}")
    if kind == "floor":
        if value.strip():
            raise InputError(f"goal 'floor' takes no value, got {text!r}")
        return Goal("floor")
    if not value.strip():
        raise InputError(f"goal {kind} needs a value, e.g. {kind}:"
                         f"{'20000' if kind == 'error-at' else '0.05'}")
    try:
        number = float(value)
    except ValueError:
        raise InputError(f"the value of goal {kind} must be a number, got {value!r}") from None
    if not math.isfinite(number) or number <= 0:
        raise InputError(f"the value of goal {kind} must be a number > 0, got {value!r}")
    if kind == "error-at" and number != int(number):
        raise InputError(f"error-at takes a whole number of rows, got {value!r}")
    return Goal(kind, number)


@dataclass(frozen=True)
class Answer:
    """The goal's answer after one round: estimate, interval, relative width, words."""

    estimate: float
    low: float
    high: float
    width: float           # (high − low) / |estimate|; inf when open
    unreachable: bool      # samples questions: out of reach with confidence
    point: float | None    # the size the answer is about (None for the floor)
    text: str

    def to_dict(self) -> dict:
        return {"estimate": self.estimate, "low": self.low, "high": self.high,
                "relative_width": self.width, "unreachable": self.unreachable, "text": self.text}


def answer_of(goal: Goal, fit, metric: str, largest: float) -> Answer:
    """Read the goal's answer from a `CurveFit`."""
    if goal.kind == "error-at":
        e = fit.error_at(goal.value, interval=LEVEL)
        return Answer(e.estimate, e.low, e.high, _relative(e.estimate, e.low, e.high), False,
                      goal.value, f"error at {format_count(goal.value)}: "
                      + format_estimate(e.estimate, e.low, e.high, LEVEL, "error", metric))
    if goal.kind == "floor":
        a = fit.asymptote(interval=LEVEL)
        if a is None:
            return Answer(math.nan, math.nan, math.nan, math.inf, False, None,
                          "floor: the chosen curve has no floor")
        return Answer(a.estimate, a.low, a.high, _relative(a.estimate, a.low, a.high), False, None,
                      "floor: " + format_estimate(a.estimate, a.low, a.high, LEVEL, "error", metric))
    target = {"test_error": goal.value} if goal.kind == "samples-for-error" else {"gap": goal.value}
    s = fit.samples_for(**target, interval=LEVEL)
    n = s.n if math.isfinite(s.n) and s.n > 0 else math.nan
    width = (s.high - s.low) / n if math.isfinite(n) else math.inf
    unreachable = (not s.reachable) and not math.isfinite(s.low)
    point = n if math.isfinite(n) else s.horizon if math.isfinite(s.horizon) else 100 * largest
    what = ("rows for " + ("error " if goal.kind == "samples-for-error" else "gap ")
            + format_number(goal.value))
    text = (f"{what}: unreachable" if unreachable else
            f"{what}: " + format_estimate(s.n, s.low, s.high, LEVEL, "count", metric))
    return Answer(s.n, s.low, s.high, width if math.isfinite(width) else math.inf, unreachable,
                  float(point), text)


def _relative(estimate: float, low: float, high: float) -> float:
    if not all(math.isfinite(v) for v in (estimate, low, high)) or estimate == 0:
        return math.inf
    return (high - low) / abs(estimate)


# ---------------------------------------------------------------------- the design
@dataclass(frozen=True)
class AdaptiveDesign:
    """Settings of an adaptive run, then (after `bind`) its candidate cells.

    Create it with `from_settings` (checks everything once); the runner binds the
    candidate sizes, the most repeats per size, the seed and the metric, and calls
    `run` with its `curvefit.measuring.runner.CellRunner`.
    """

    goal: Goal
    precision: float | None = None
    budget: float | None = None
    sizes: tuple = ()
    repeats: int = 0
    seed: int = 0
    n_test: int = 0
    metric: object = field(default=None, repr=False)

    @classmethod
    def from_settings(cls, goal, precision=None, budget=None) -> "AdaptiveDesign":
        """Check a goal text and its stopping rules.

        Examples
        --------
        >>> AdaptiveDesign.from_settings("floor", precision=0.2).goal.kind
        'floor'
        """
        parsed = goal if isinstance(goal, Goal) else parse_goal(goal)
        if precision is None and budget is None:
            raise InputError("an adaptive run needs a precision or a budget (or both), e.g. "
                             "--precision 0.1 or --budget 600")
        if precision is not None:
            precision = check_positive(precision, "precision")
        if budget is not None:
            budget = check_positive(budget, "budget")
        return cls(parsed, precision, budget)

    def bind(self, sizes, repeats: int, seed: int, metric, n_test: int) -> "AdaptiveDesign":
        return replace(self, sizes=tuple(int(s) for s in sizes), repeats=int(repeats), seed=int(seed),
                       metric=metric, n_test=int(n_test))

    def cost(self, size: float) -> float:
        """What a cell costs in the choice, in rows processed: the training rows twice
        (fitted, then scored) and the test rows once (scored)."""
        return 2.0 * size + self.n_test

    def identity(self) -> dict:
        """What a resumed run must share (precision and budget only decide where it stops)."""
        return {"goal": self.goal.text, "design": DESIGN_VERSION, "first_sizes": FIRST_SIZES,
                "first_repeats": FIRST_REPEATS, "batch": BATCH}

    def plan_text(self) -> str:
        """How the run goes on after its first pass, in words (for ``--plan-only``)."""
        stops = []
        if self.precision is not None:
            stops.append(f"the interval is within {self.precision:.1%} of the answer")
        if self.budget is not None:
            stops.append(f"{self.budget:g} fit-seconds are spent")
        stops.append("more data cannot help")
        return (f"then rounds of about {BATCH} cells chosen for {self.goal.text} until "
                + ", ".join(stops[:-1]) + f" or {stops[-1]}")

    # ------------------------------------------------------------ the rounds
    def first_pass(self) -> list[tuple[int, int]]:
        """The first cells: `FIRST_SIZES` sizes up to the question's size (or the largest
        candidate), `FIRST_REPEATS` repeats each."""
        sizes = np.array(self.sizes, dtype=float)
        about = self.goal.value if self.goal.kind == "error-at" else sizes[-1]
        top = max(min(about, sizes[-1]), sizes[0])
        within = sizes[sizes <= top * 1.0001]
        if len(within) < FIRST_SIZES:
            within = sizes[:FIRST_SIZES]
        picks = np.unique(np.round(np.linspace(0, len(within) - 1, min(FIRST_SIZES, len(within)))))
        chosen = [int(within[int(i)]) for i in picks]
        reps = min(FIRST_REPEATS, self.repeats)
        return [(s, r) for s in chosen for r in range(reps)]

    def run(self, cells) -> tuple[list[tuple[int, int]], dict]:
        """Measure round by round through ``cells`` (the runner's `CellRunner`); return the
        chosen cells in (repeat, size) order and the record for the run's metadata."""
        chosen: list[tuple[int, int]] = []
        reasons: dict[tuple[int, int], str] = {}
        rounds: list[dict] = []
        first = self.first_pass()
        for key in first:
            reasons[key] = "first pass"
        # the count runs against the most the run may measure; `finish` closes it
        most = len(self.sizes) * self.repeats
        cells.plan, cells.total = first, most
        cells.note = {"goal": self.goal.text}
        cells.run(first)
        chosen += first
        refit_seconds = 0.0
        stop = None
        while stop is None:
            t0 = time.perf_counter()
            fit, answer = self._fit(cells, chosen)
            refit_seconds += time.perf_counter() - t0
            spent = sum(_seconds(cells.done[k]) for k in chosen)
            entry = {"round": len(rounds) + 1, "cells": len(chosen), "fit_seconds": round(spent, 3),
                     "answer": answer.to_dict() if answer is not None else None}
            rounds.append(entry)
            if answer is not None:
                cells.note = {"goal": self.goal.text, "answer": answer.text}
            stop = self._stop(answer, spent, chosen)
            if stop is not None:
                break
            batch = self._choose(fit, answer, cells, chosen)
            if not batch:
                stop = ("saturated", "no remaining cell is predicted to narrow the interval")
                break
            batch, trimmed = self._afford(batch, cells, spent)
            if not batch:
                stop = ("budget", f"the next cell would exceed the budget ({format_number(spent, 3)} "
                        f"of {self.budget:g} fit-seconds spent; {trimmed})")
                break
            entry["chosen"] = [{"size": s, "repeat": r, "reason": why} for (s, r), why in batch]
            keys = [k for k, _ in batch]
            reasons.update(dict(batch))
            cells.plan = keys
            cells.run(keys)
            chosen += keys
        cells.finish()
        spent = sum(_seconds(cells.done[k]) for k in chosen)
        last = rounds[-1]["answer"] if rounds else None
        summary = self._summary(stop, last, len(chosen), spent)
        record = {"goal": self.goal.text, "precision": self.precision, "budget": self.budget,
                  "design": self.identity(), "candidate_sizes": list(self.sizes),
                  "max_repeats": self.repeats, "fixed_grid_cells": len(self.sizes) * self.repeats,
                  "cells": [{"size": s, "repeat": r, "reason": reasons[(s, r)]}
                            for s, r in chosen],
                  "rounds": rounds, "stop": {"reason": stop[0], "text": stop[1]},
                  "answer": last, "fit_seconds": round(spent, 3),
                  "refit_seconds": round(refit_seconds, 3), "summary": summary}
        keys = sorted(chosen, key=lambda k: (k[1], k[0]))
        return keys, {"adaptive": record}

    def _fit(self, cells, chosen):
        """Fit the curve of the chosen cells; (None, None) while it cannot be fitted."""
        from curvefit.fitting.engine import fit_curve

        # the run's own metadata (pool, test rows, split): the fit `curvefit fit` would make
        curve = cells.make_curve([cells.done[k] for k in sorted(chosen, key=lambda k: (k[1], k[0]))])
        try:
            import warnings

            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                # the engine's defaults: the answer at the stop is the one `curvefit fit` gives
                fit = fit_curve(curve, on=self.goal.on, random_state=self.seed)
                return fit, answer_of(self.goal, fit, self.metric.name, float(self.sizes[-1]))
        except InputError:
            return None, None

    def _stop(self, answer: Answer | None, spent: float, chosen) -> tuple[str, str] | None:
        if answer is not None and answer.unreachable:
            return ("unreachable", "the target is out of reach with confidence: even the "
                    "optimistic edge of the band does not reach it within the horizon")
        if (answer is not None and self.precision is not None
                and answer.width <= self.precision * (1 + PRECISION_SLACK)):
            return ("precision", f"the interval width is {answer.width:.1%} of the answer, "
                    f"within the precision {self.precision:.1%}")
        if self.budget is not None and spent >= self.budget:
            return ("budget", f"the compute budget is spent ({format_number(spent, 3)} of "
                    f"{self.budget:g} fit-seconds)")
        if len(chosen) >= len(self.sizes) * self.repeats:
            return ("exhausted", "every candidate size has all its repeats: the pool and the "
                    "repeats are used up")
        return None

    def _afford(self, batch, cells, spent: float):
        """Drop cells from the end of the round while the predicted seconds exceed the budget."""
        if self.budget is None:
            return batch, ""
        cost = cells.cost_model()
        if cost is None:
            return batch, ""
        left = self.budget - spent
        kept = list(batch)
        while kept and cost.total([s for (s, _), _ in kept]) > left:
            kept.pop()
        dropped = len(batch) - len(kept)
        return kept, (f"{dropped} chosen cell(s) predicted to need "
                      f"{format_number(cost.total([s for (s, _), _ in batch]), 3)} s" if dropped else "")

    def _choose(self, fit, answer, cells, chosen) -> list[tuple[tuple[int, int], str]]:
        """About `BATCH` cells, greedily, each step (one or more repeats at one size) with
        the largest predicted shrinkage of the answer's squared half-width per cell's
        compute, and the reason in words."""
        counts = {s: 0 for s in self.sizes}
        for s, _ in chosen:
            counts[s] += 1
        if fit is None or answer is None:
            return self._spread(counts)
        model = _DesignModel.build(fit, answer, self.goal, [cells.done[k] for k in chosen],
                                   np.array(self.sizes, dtype=float))
        if model is None:
            return self._spread(counts)
        picked: list[tuple[tuple[int, int], str]] = []
        k = np.array([counts[s] for s in self.sizes], dtype=float)
        while len(picked) < BATCH:
            now = model.half_width2(k)
            best, best_score, best_after = None, 0.0, now
            for i, s in enumerate(self.sizes):
                # one or more repeats at once: a second repeat alone may add little (the
                # engine's bootstrap draws a size's mean with Student-t noise on k − 1
                # degrees of freedom), the third and fourth then much
                for step in range(1, self.repeats - int(k[i]) + 1):
                    k[i] += step
                    after = model.half_width2(k)
                    k[i] -= step
                    score = (now - after) / (step * self.cost(s))
                    if score > best_score * (1 + 1e-9) and now - after > 1e-12 * now:
                        best, best_score, best_after = (i, step), score, after
            if best is None:
                break
            i, step = best
            s = int(self.sizes[i])
            why = (f"predicted half-width {format_number(math.sqrt(now), 4)} → "
                   f"{format_number(math.sqrt(best_after), 4)} for {format_count(s)} rows"
                   + (f" ({step} repeats)" if step > 1 else ""))
            for _ in range(step):
                picked.append(((s, int(k[i])), why))
                k[i] += 1
        return picked

    def _spread(self, counts) -> list[tuple[tuple[int, int], str]]:
        """While the curve cannot be fitted: unmeasured sizes farthest (in ln n) from the
        measured ones."""
        measured = [s for s, c in counts.items() if c]
        free = [s for s, c in counts.items() if c == 0]
        picked = []
        for _ in range(min(BATCH, len(free))):
            far = max(free, key=lambda s: (min(abs(math.log(s / m)) for m in measured) if measured
                                           else 0.0, -s))
            free.remove(far)
            measured.append(far)
            picked.append(((far, 0), "the curve cannot be fitted yet: the size farthest from "
                                     "those measured"))
        return picked

    def _summary(self, stop, answer: dict | None, n_cells: int, spent: float) -> str:
        said = answer["text"] if answer else "no answer (the curve could not be fitted)"
        return (f"adaptive {self.goal.text}: {said}; stopped: {stop[1]}; {n_cells} cells, "
                f"{format_number(spent, 3)} fit-seconds (the full grid has "
                f"{len(self.sizes) * self.repeats} cells)")


def _seconds(cell: dict) -> float:
    try:
        v = float(cell.get("fit_seconds"))
    except (TypeError, ValueError):
        return 0.0
    return v if v == v and v > 0 else 0.0


# ---------------------------------------------------------------------- the delta method
@dataclass(frozen=True)
class _DesignModel:
    """The predicted squared half-width of the answer as a function of the repeats per size."""

    sizes: np.ndarray        # candidate sizes
    jac: np.ndarray          # Jacobian rows of c + a·n^−p at the candidates
    grad: np.ndarray         # gradient of the answer
    sd: np.ndarray           # spread of one cell at each candidate
    z2: float
    kappa2: float
    drift: float
    relative: float          # τ·|F| at the largest size: the relative model error per ln n
    point: float | None
    data2: float
    level: float

    @classmethod
    def build(cls, fit, answer: Answer, goal: Goal, rows: list[dict], sizes: np.ndarray):
        from scipy.special import ndtri

        n, y = _cell_values(rows, goal.on)
        if len(np.unique(n)) < 3:
            return None
        levels = np.unique(n)
        means = np.array([y[n == s].mean() for s in levels])
        counts = np.array([(n == s).sum() for s in levels], dtype=float)
        sd_at = _spread_model(n, y)
        theta = _fit_design_curve(levels, means, counts / sd_at(levels) ** 2)
        point = answer.point
        jac = _jacobian(sizes, theta)
        grad = np.array([1.0, 0.0, 0.0]) if point is None else _jacobian(np.array([point]), theta)[0]
        drift, data2, relative = 0.0, 0.0, 0.0
        if point is not None:
            import warnings

            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # far beyond the data: known, it is the question
                parts = fit.band_parts([point], interval=LEVEL).iloc[0]
            n_max = float(levels[-1])
            if point > n_max and parts["model_error"] > 0:
                drift = float(parts["model_error"]) / math.log(point / n_max)
            if point > n_max:
                relative = (fit.calibration.relative_error * float(parts["level_distance"])
                            / math.log(point / n_max))
            data2 = float(parts["data_set"]) ** 2 if np.isfinite(parts["data_set"]) else 0.0
        return cls(sizes=sizes, jac=jac, grad=grad, sd=sd_at(sizes),
                   z2=float(ndtri((1 + LEVEL) / 2)) ** 2,
                   kappa2=float(fit.calibration.model_error_scale) ** 2, drift=drift,
                   relative=relative, point=point,
                   data2=data2, level=LEVEL)

    def half_width2(self, k: np.ndarray) -> float:
        """Predicted squared half-width of the answer with ``k[i]`` cells at ``sizes[i]``."""
        w = effective_cells(k, self.level) / self.sd ** 2
        info = (self.jac * w[:, None]).T @ self.jac
        info += np.eye(3) * 1e-10 * max(np.trace(info), 1e-300)
        try:
            param = float(self.grad @ np.linalg.solve(info, self.grad))
        except np.linalg.LinAlgError:
            param = math.inf
        measured = self.sizes[k > 0]
        model = relative = 0.0
        if self.point is not None and len(measured):
            distance = max(math.log(self.point / measured.max()), 0.0)
            model = (self.drift * distance) ** 2
            relative = (self.relative * distance) ** 2
        total = self.z2 * (self.kappa2 * (max(param, 0.0) + model) + relative + self.data2)
        if self.point is None or not len(measured):
            return total
        from curvefit.core.stats import t_quantile

        i = int(np.argmin(np.abs(np.log(self.sizes / self.point)) + np.where(k > 0, 0.0, np.inf)))
        near = (t_quantile(self.level, max(k[i] - 1, 1)) * self.sd[i] / math.sqrt(k[i])) ** 2
        return max(total, near)


def effective_cells(k, level: float = LEVEL) -> np.ndarray:
    """What k cells at one size are worth in the engine's band, in cells of known spread.

    The engine's parametric bootstrap (`curvefit.fitting.bootstrap`) draws a size's mean
    with Student-t noise on k − 1 degrees of freedom, whose quantile at the band's level
    is t/z times the normal one, so k cells count as k·(z/t)²; one cell counts as one.

    Examples
    --------
    >>> effective_cells([0, 1, 2, 3, 5]).round(2).tolist()    # a 90% band
    [0.0, 1.0, 0.14, 0.95, 2.98]
    """
    k = np.atleast_1d(np.asarray(k, dtype=float))
    return k * np.array([_share(int(m), float(level)) for m in k])


@lru_cache(maxsize=256)
def _share(m: int, level: float) -> float:
    from scipy.special import ndtri

    from curvefit.core.stats import t_quantile

    return (float(ndtri((1 + level) / 2)) / t_quantile(level, m - 1)) ** 2 if m >= 2 else 1.0


def _cell_values(rows: list[dict], on: str) -> tuple[np.ndarray, np.ndarray]:
    ok = [r for r in rows if r.get("status") == "ok"]
    n = np.array([float(r["size"]) for r in ok])
    test = np.array([float(r["test_error"]) for r in ok])
    if on == "gap":
        test = test - np.array([float(r["train_error"]) for r in ok])
    good = np.isfinite(test)
    return n[good], test[good]


def _spread_model(n: np.ndarray, y: np.ndarray):
    """σ(n), the spread of one cell: a power law in n through the sizes with repeats
    (pooled when fewer than two such sizes), never below a small share of the level."""
    levels = np.unique(n)
    sds = np.array([np.std(y[n == s], ddof=1) if (n == s).sum() >= 2 else np.nan for s in levels])
    seen = np.isfinite(sds) & (sds > 0)
    tiny = 1e-3 * max(float(np.mean(np.abs(y))), 1e-6)
    if seen.sum() >= 2:
        slope, level = np.polyfit(np.log(levels[seen]), np.log(sds[seen]), 1)
        slope = float(np.clip(slope, -1.5, 0.5))
        level = float(np.median(np.log(sds[seen]) - slope * np.log(levels[seen])))
        return lambda m: np.maximum(np.exp(level + slope * np.log(np.asarray(m, dtype=float))), tiny)
    pooled = float(np.nanmedian(sds[seen])) if seen.any() else 0.1 * max(float(np.mean(np.abs(y))), 1e-3)
    return lambda m: np.full(np.shape(np.atleast_1d(m)), max(pooled, tiny))


def _fit_design_curve(sizes: np.ndarray, means: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """θ = (c, a, p) of ``c + a·n^−p`` by weighted least squares (a fixed p = 0.5 fallback)."""
    from scipy.optimize import least_squares

    lo_c = min(0.0, 2 * float(means.min()))
    hi_c = float(means.min())
    sw = np.sqrt(weights / weights.max())

    def resid(t):
        return sw * (t[0] + t[1] * sizes ** -t[2] - means)

    c0 = min(max(0.5 * hi_c, lo_c), hi_c)
    a0 = max(float(means[0] - c0), 1e-6) * sizes[0] ** 0.5
    try:
        res = least_squares(resid, [c0, a0, 0.5], x_scale="jac", max_nfev=200,
                            bounds=([lo_c - 1e-12, 0.0, 0.05], [hi_c + 1e-12, np.inf, 2.0]))
        theta = res.x
    except (ValueError, np.linalg.LinAlgError):
        theta = np.array([c0, a0, 0.5])
    if not np.all(np.isfinite(theta)) or theta[1] <= 0:
        theta = np.array([c0, a0, 0.5])
    return np.asarray(theta, dtype=float)


def _jacobian(n: np.ndarray, theta: np.ndarray) -> np.ndarray:
    c, a, p = theta
    power = n ** -p
    return np.column_stack([np.ones_like(n), power, -a * power * np.log(n)])
