"""What a cell costs: fit seconds as a power law in the training size, learned as cells finish.

The runner times every cell (``fit_seconds``: building, fitting, predicting and scoring
the model). `fit_cost_model` fits ``t = a·n^b`` to the cells finished so far, so the run
can show the predicted total and an ETA, and `plan_seconds` turns a list of cells into
a predicted wall time for ``n_jobs`` workers.

Robustness to the first cells: the first fit of a process pays for imports and warm-up,
and single timings on a shared machine vary by a factor of 2 or more. So each size
contributes the (lower) *median* of its timings, and the exponent is the Theil–Sen slope (the
median of the pairwise slopes) of ln t against ln n through those medians, which one bad
size cannot drag. With a single size the exponent is the prior `PRIOR_EXPONENT` = 1
(time proportional to rows: between the n·log n of trees and boosting and the n² of kernel
machines); the exponent is kept within `EXPONENT_RANGE`.

Before anything is timed there is no prediction. `curvefit measure` therefore starts with
two *pilot* cells — the planned sizes nearest a sixteenth and a quarter of the largest
size, repeat 0 (`pilot_sizes`) — which are real cells of the run (journaled, kept);
``--plan-only`` times the same two cells (after one untimed warm-up fit at the smallest
size) and keeps nothing.

Examples
--------
>>> cost = fit_cost_model([100, 200, 400, 800], [0.01, 0.02, 0.04, 0.08])
>>> round(cost.exponent, 3), round(float(cost.seconds(1600)[0]), 3)
(1.0, 0.16)
>>> round(plan_seconds(cost, [800, 400, 200, 100], n_jobs=2), 3)
0.08

References
----------
.. [1] H. Theil, "A rank-invariant method of linear and polynomial regression analysis",
       Indagationes Mathematicae 12, 1950; P. K. Sen, "Estimates of the regression
       coefficient based on Kendall's tau", JASA 63, 1968 (the robust slope).
.. [2] R. L. Graham, "Bounds on multiprocessing timing anomalies", SIAM J. Applied
       Mathematics 17(2), 1969 (largest-first list scheduling, within 4/3 of the best
       makespan).
"""

from __future__ import annotations

import heapq
import math
from dataclasses import asdict, dataclass
from typing import Sequence

import numpy as np

from curvefit.core.stats import theil_sen

PRIOR_EXPONENT = 1.0
EXPONENT_RANGE = (0.0, 3.0)
# per-cell wall time outside the timed fit (slicing, the constant predictor, the journal),
# as a share of the fit time, until a run has measured its own (common practice: small)
DEFAULT_WALL_FACTOR = 1.05


@dataclass(frozen=True)
class CostModel:
    """Fit seconds of one cell as ``scale · n ** exponent``, learned from ``n_cells`` cells.

    Attributes
    ----------
    scale, exponent : float
        The power law ``t = scale · n^exponent`` (seconds, n in training rows or groups).
    n_cells : int
        Timed cells it was learned from.
    n_sizes : int
        Distinct sizes among them (1: the exponent is the prior).
    """

    scale: float
    exponent: float
    n_cells: int
    n_sizes: int

    def seconds(self, sizes) -> np.ndarray:
        """Predicted fit seconds of one cell at each size."""
        n = np.atleast_1d(np.asarray(sizes, dtype=float))
        return self.scale * n ** self.exponent

    def total(self, sizes) -> float:
        """Predicted fit seconds of all the cells at ``sizes`` (one entry per cell)."""
        return float(self.seconds(sizes).sum()) if len(sizes) else 0.0

    def to_dict(self) -> dict:
        return asdict(self)


def fit_cost_model(sizes: Sequence[float], seconds: Sequence[float],
                   prior_exponent: float = PRIOR_EXPONENT) -> CostModel | None:
    """The power law ``t = a·n^b`` through timed cells (None when nothing is timed yet).

    Each size contributes the (lower) median of its timings; the exponent is the Theil–Sen
    slope of ln t against ln n through those medians, clipped to `EXPONENT_RANGE`, and
    ``ln a`` the median of ``ln t − b·ln n``. With one size the exponent is
    ``prior_exponent``.

    Examples
    --------
    >>> fit_cost_model([50, 50, 50], [0.02, 0.5, 0.03]).exponent   # one size: the prior
    1.0
    >>> m = fit_cost_model([100, 100, 400, 400, 1600], [9.0, 0.1, 0.4, 0.41, 1.6])
    >>> round(m.exponent, 2)                  # the slow first cell is outvoted
    1.0
    """
    n = np.asarray(sizes, dtype=float)
    t = np.asarray(seconds, dtype=float)
    ok = np.isfinite(n) & np.isfinite(t) & (n > 0) & (t > 0)
    n, t = n[ok], t[ok]
    if not len(n):
        return None
    levels = np.unique(n)
    medians = np.array([_lower_median(t[n == s]) for s in levels])
    x, y = np.log(levels), np.log(medians)
    if len(levels) == 1:
        b = float(prior_exponent)
    else:
        b, _ = theil_sen(x, y)
    b = float(np.clip(b, *EXPONENT_RANGE))
    a = float(np.exp(np.median(y - b * x)))
    return CostModel(scale=a, exponent=b, n_cells=int(len(n)), n_sizes=int(len(levels)))


def _lower_median(values: np.ndarray) -> float:
    """The median, or the smaller middle value of an even count (two timings: the faster,
    since a slow one is usually a warm-up or a busy machine)."""
    v = np.sort(values)
    return float(v[(len(v) - 1) // 2])


def plan_seconds(cost: CostModel, sizes: Sequence[float], n_jobs: int = 1) -> float:
    """Predicted wall seconds of the cells at ``sizes`` on ``n_jobs`` workers: the
    largest-first list schedule of their predicted fit seconds (Graham 1969).

    Examples
    --------
    >>> cost = CostModel(scale=1.0, exponent=1.0, n_cells=2, n_sizes=2)
    >>> plan_seconds(cost, [3, 3, 2, 2, 2], n_jobs=2)
    7.0
    """
    if not len(sizes):
        return 0.0
    workers = max(1, int(n_jobs))
    times = sorted(cost.seconds(sizes).tolist(), reverse=True)
    if workers == 1:
        return float(sum(times))
    loads = [0.0] * workers
    heapq.heapify(loads)
    for t in times:
        heapq.heappush(loads, heapq.heappop(loads) + t)
    return float(max(loads))


def pilot_sizes(sizes: Sequence[int]) -> list[int]:
    """The planned sizes timed first: those nearest (in ln n) a sixteenth and a quarter
    of the largest size, distinct (a single size when the plan has one).

    Examples
    --------
    >>> pilot_sizes([10, 25, 60, 150, 400, 1000])
    [60, 400]
    >>> pilot_sizes([100])
    [100]
    """
    sizes = sorted({int(s) for s in sizes})
    largest = sizes[-1]
    picked = []
    for share in (1 / 16, 1 / 4):
        goal = math.log(largest * share)
        best = min(sizes, key=lambda s: (abs(math.log(s) - goal), s))
        if best not in picked:
            picked.append(best)
    return sorted(picked)


def worker_count(n_jobs: int) -> int:
    """Workers that actually run at once: ``n_jobs`` (joblib's negative counts resolved),
    at most the machine's cores."""
    import os

    cores = os.cpu_count() or 1
    if n_jobs < 0:
        return max(1, cores + 1 + n_jobs)
    return max(1, min(int(n_jobs), cores))


class Eta:
    """Remaining wall time of a run, from the cost model and the pace seen so far.

    The pace is wall seconds per fit-second of the cells finished in this session
    (it holds the parallel speed-up and the overheads outside the fits); until two cells
    have finished it is ``DEFAULT_WALL_FACTOR / workers``.
    """

    def __init__(self, workers: int):
        import time

        self.workers = max(1, int(workers))
        self._clock = time.monotonic
        self._start = self._clock()
        self._fit_seconds = 0.0
        self._cells = 0

    def finished(self, fit_seconds: float) -> None:
        """Count one cell finished in this session."""
        if math.isfinite(fit_seconds) and fit_seconds > 0:
            self._fit_seconds += float(fit_seconds)
        self._cells += 1

    @property
    def elapsed(self) -> float:
        return self._clock() - self._start

    def pace(self) -> float:
        if self._cells >= 2 and self._fit_seconds > 0:
            return self.elapsed / self._fit_seconds
        return DEFAULT_WALL_FACTOR / self.workers

    def remaining(self, cost: CostModel | None, sizes: Sequence[float]) -> float | None:
        """Predicted wall seconds for the cells at ``sizes`` (None without a cost model)."""
        if cost is None:
            return None
        if not len(sizes):
            return 0.0
        scheduled = plan_seconds(cost, sizes, self.workers)  # a lower bound for big cells
        return max(cost.total(sizes) * self.pace(), scheduled * min(1.0, self.pace() * self.workers))


@dataclass(frozen=True)
class MeasurePlan:
    """What `curvefit.measuring.runner.plan_measure` found: the cells a run starts with and
    their predicted time, from two timed pilot cells.

    Attributes
    ----------
    cells : list of (size, repeat)
        The planned cells (an adaptive run's first pass).
    grid_cells : int
        Cells of the full grid (sizes × repeats): what an adaptive run measures at most.
    pilot : list of dict
        The timed pilot cells (``size``, ``fit_seconds``, ``status``); not recorded.
    cost_model : CostModel or None
        Fit seconds against n, learned from the pilot.
    fit_seconds, wall_seconds : float
        Predicted compute and wall time of ``cells`` (NaN when the pilot failed).
    grid_fit_seconds, grid_wall_seconds : float
        The same for the full grid.
    workers : int
        Parallel workers assumed.
    adaptive : str or None
        How an adaptive run goes on after ``cells``.
    """

    cells: list
    grid_cells: int
    pilot: list
    cost_model: CostModel | None
    fit_seconds: float
    wall_seconds: float
    grid_fit_seconds: float
    grid_wall_seconds: float
    workers: int
    adaptive: str | None = None

    @classmethod
    def build(cls, cells, grid, pilot, cost: CostModel | None, workers: int,
              adaptive: str | None = None) -> "MeasurePlan":
        def predict(keys):
            if cost is None:
                return math.nan, math.nan
            sizes = [s for s, _ in keys]
            return cost.total(sizes), plan_seconds(cost, sizes, workers) * DEFAULT_WALL_FACTOR

        fit_s, wall_s = predict(cells)
        grid_fit, grid_wall = predict(grid)
        return cls(cells=list(cells), grid_cells=len(grid), pilot=list(pilot), cost_model=cost,
                   fit_seconds=fit_s, wall_seconds=wall_s, grid_fit_seconds=grid_fit,
                   grid_wall_seconds=grid_wall, workers=int(workers), adaptive=adaptive)

    def to_dict(self) -> dict:
        d = asdict(self)
        d["cells"] = [{"size": int(s), "repeat": int(r)} for s, r in self.cells]
        d["cost_model"] = self.cost_model.to_dict() if self.cost_model is not None else None
        return d
