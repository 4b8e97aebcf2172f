"""Effective capacity in VC units: the max-deviation probe and the VC-shaped gap model.

Two ways to put a number of VC units on a learner:

* :func:`probe_capacity` runs the max-deviation experiment of Vapnik, Levin & LeCun
  (1994) on the learner itself: random labels, the second half flipped, and the
  deviation ξ(n) between the two halves fitted by the universal curve Φ(n/h).
* :func:`effective_capacity` reads a measured learning curve and fits the
  generalization gap with a VC-shaped model ``s·Φ(n/h)`` and with a power law
  ``a·n^-b`` whose exponent tells the regime.

The numerics here import neither the command line nor any file I/O; running the
probe's cells goes through :func:`curvefit.measuring.parallel.run_tasks`.
"""

from __future__ import annotations

import math
import time
from statistics import NormalDist
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from curvefit.core.errors import InputError
from curvefit.core.estimate import Estimate

# Constants of Φ (Vapnik, Levin & LeCun 1994); k makes Φ continuous at τ = 0.5.
PHI_A = 0.16
PHI_B = 1.2
PHI_K = 0.14928

# Default largest n of the probe: 2n = 4000 training rows keeps one cell cheap.
DEFAULT_MAX_N = 2000

_PROBE_NOTE = ("The learner was probed as configured: regularisation, early stopping or "
               "a margin lower the measured capacity below the class's VC dimension.")
_GAP_NOTE = ("This is the capacity the model uses on this data distribution; it can "
             "differ from the probe's distribution-free figure.")
_STAT_NOTE = "Estimates are statistical, not guarantees."


# ---------------------------------------------------------------------------- Φ
def phi(tau):
    """Expected maximum deviation Φ(τ) of the max-deviation experiment, τ = n/h.

    ``Φ(τ) = 1`` for τ < 0.5, else
    ``a·(ln(2τ)+1)/(τ−k) · (sqrt(1 + b·(τ−k)/(ln(2τ)+1)) + 1)`` with a = 0.16,
    b = 1.2, k = 0.14928. Vectorised; returns a float for a scalar input.

    Parameters
    ----------
    tau : float or array_like
        Ratio of the half-sample size n to the capacity h (must be > 0).

    Returns
    -------
    float or numpy.ndarray
        Φ(τ), in (0, 1].

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 851–876, 1994.

    Examples
    --------
    >>> round(float(phi(1.0)), 3), round(float(phi(10.0)), 3)
    (0.722, 0.194)
    >>> phi([0.25, 0.5]).tolist()
    [1.0, 1.0]
    """
    t = np.asarray(tau, dtype=float)
    scalar = t.ndim == 0
    t = np.atleast_1d(t)
    out = np.ones_like(t)
    m = t >= 0.5
    tt = t[m]
    log_term = np.log(2.0 * tt) + 1.0
    out[m] = PHI_A * log_term / (tt - PHI_K) * (np.sqrt(1.0 + PHI_B * (tt - PHI_K) / log_term) + 1.0)
    # Rounding of k leaves Φ(0.5) a hair off 1; the deviation can never exceed 1.
    out = np.minimum(out, 1.0)
    return float(out[0]) if scalar else out


def phi_inverse(value: float) -> float:
    """The τ ≥ 0.5 with Φ(τ) = ``value`` (0 < value < 1); 0.5 for value ≥ 1.

    Φ decreases strictly for τ ≥ 0.5, so the root is unique; it is found with a
    bracketing root finder.

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994.

    Examples
    --------
    >>> round(phi_inverse(float(phi(3.0))), 6)
    3.0
    """
    v = float(value)
    if not v > 0:
        raise InputError(f"Φ takes values in (0, 1]; cannot invert {value!r}")
    if v >= float(phi(0.5)):
        return 0.5
    hi = 1.0
    while phi(hi) > v:
        hi *= 4.0
        if hi > 1e15:
            return math.inf
    from scipy.optimize import brentq

    return float(brentq(lambda t: phi(t) - v, 0.5, hi, xtol=1e-12, rtol=1e-12))


# ---------------------------------------------------------------------------- result
@dataclass(frozen=True)
class CapacityEstimate:
    """An effective capacity in VC units with its interval and the data behind it.

    Attributes
    ----------
    vc_dim : float
        Point estimate of h; a lower bound when ``above_range`` is True.
    low, high : float
        Interval at ``level`` (``high`` is inf when only a lower bound is known).
    level : float
        Interval level, e.g. 0.9.
    method : str
        ``"probe"`` (max-deviation experiment) or ``"gap"`` (VC-shaped gap model).
    above_range : bool
        True when the capacity exceeds what the design could resolve.
    design : pandas.DataFrame
        Probe: ``n, tau, xi_mean, xi_sem, repeats, xi_fit``; gap model:
        ``size, gap_mean, gap_sem, repeats, gap_fit, gap_power``.
    scale : float or None
        The gap model's scale s (None for the probe).
    exponent : Estimate or None
        The gap power-law exponent b with its interval (gap model only).
    regime : str
        Plain words for b (gap model), else "".
    notes : list of str
        Caveats to show with the figure.
    message : str
        One sentence answer.
    """

    vc_dim: float
    low: float
    high: float
    level: float
    method: str
    above_range: bool
    design: pd.DataFrame = field(repr=False)
    scale: float | None = None
    exponent: Estimate | None = None
    regime: str = ""
    notes: list = field(default_factory=list)
    message: str = ""
    extra: dict = field(default_factory=dict, repr=False)

    def to_dict(self) -> dict:
        """Plain JSON-ready dict (inf and NaN become None)."""
        design = self.design.astype(object).where(self.design.notna(), None)
        return _clean({
            "format": "curvefit.capacity.vc_model/1",
            "vc_dim": self.vc_dim, "low": self.low, "high": self.high, "level": self.level,
            "method": self.method, "above_range": bool(self.above_range),
            "scale": self.scale,
            "exponent": self.exponent.to_dict() if self.exponent is not None else None,
            "regime": self.regime, "notes": list(self.notes), "message": self.message,
            "design": design.to_dict(orient="records"), "extra": self.extra,
        })

    @classmethod
    def from_dict(cls, d: dict) -> "CapacityEstimate":
        """Rebuild from :meth:`to_dict` output (None in low/high → NaN/inf)."""
        if not isinstance(d, dict) or "vc_dim" not in d or "method" not in d:
            raise InputError("not a saved capacity estimate (needs 'vc_dim' and 'method')")

        def num(v, default=math.nan):
            return default if v is None else float(v)

        exp = d.get("exponent")
        exponent = None
        if isinstance(exp, dict):
            exponent = Estimate(num(exp.get("estimate")), num(exp.get("low")),
                                num(exp.get("high")), num(exp.get("level"), 0.9))
        above = bool(d.get("above_range", False))
        return cls(
            vc_dim=num(d["vc_dim"]), low=num(d.get("low")),
            high=num(d.get("high"), math.inf if above else math.nan),
            level=num(d.get("level"), 0.9), method=str(d["method"]), above_range=above,
            design=pd.DataFrame(d.get("design") or []),
            scale=None if d.get("scale") is None else float(d["scale"]),
            exponent=exponent, regime=str(d.get("regime") or ""),
            notes=list(d.get("notes") or []), message=str(d.get("message") or ""),
            extra=dict(d.get("extra") or {}),
        )

    @property
    def interval(self) -> Estimate:
        """The estimate as an :class:`~curvefit.core.estimate.Estimate`."""
        return Estimate(self.vc_dim, self.low, self.high, self.level)


def _clean(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_clean(v) for v in obj.tolist()]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        return f if math.isfinite(f) else None
    return obj


# ---------------------------------------------------------------------------- fitting
def _profile_grid(n: np.ndarray, lo: float, hi: float, count: int = 240) -> np.ndarray:
    return np.geomspace(lo, hi, count)


def fit_vc_curve(n, values, weights=None, *, free_scale: bool = False,
                 h_bounds: tuple[float, float] | None = None) -> tuple[float, float]:
    """Least-squares fit of ``values ≈ s·Φ(n/h)``; returns ``(h, s)``.

    With ``free_scale=False`` s is fixed at 1 (the probe); with ``free_scale=True``
    s is solved in closed form for each h (a linear least-squares problem), h is
    located on a log-spaced grid (Φ's flat part makes the objective multimodal) and
    both are refined with bounded ``scipy.optimize.least_squares`` in (log h, s).

    Parameters
    ----------
    n : array_like
        Sizes (half-sample sizes for the probe, training sizes for the gap).
    values : array_like
        Measured ξ (probe) or gap values, one per observation.
    weights : array_like, optional
        Non-negative weights of the squared residuals (default all 1).
    free_scale : bool
        Fit the scale s too.
    h_bounds : (float, float), optional
        Search range for h (default 0.25 … 4·max n).

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994.

    Examples
    --------
    >>> n = np.array([5, 10, 20, 40, 80, 160])
    >>> h, s = fit_vc_curve(n, phi(n / 12.0))
    >>> round(h, 3), s
    (12.0, 1.0)
    """
    from scipy.optimize import least_squares

    n = np.asarray(n, dtype=float)
    y = np.asarray(values, dtype=float)
    w = np.ones_like(y) if weights is None else np.asarray(weights, dtype=float)
    if len(n) == 0:
        raise InputError("no measurements to fit the capacity curve to")
    lo, hi = h_bounds or (0.25, 4.0 * float(n.max()))
    grid = _profile_grid(n, lo, hi)
    P = phi(n[None, :] / grid[:, None])                     # (grid, obs)
    if free_scale:
        s_grid = np.maximum((P * (w * y)).sum(1) / np.maximum((P * P * w).sum(1), 1e-300), 1e-12)
    else:
        s_grid = np.ones(len(grid))
    sse = ((y[None, :] - s_grid[:, None] * P) ** 2 * w).sum(1)
    i = int(np.argmin(sse))
    h0, s0 = float(grid[i]), float(s_grid[i])
    sw = np.sqrt(w)
    lb_h, ub_h = math.log(lo), math.log(hi)
    x0_h = min(max(math.log(h0), lb_h + 1e-9), ub_h - 1e-9)
    try:
        if free_scale:
            s_hi = max(10.0 * s0, 10.0 * float(np.nanmax(np.abs(y))) if len(y) else 1.0, 1e-6)
            res = least_squares(lambda p: sw * (y - p[1] * phi(n / math.exp(p[0]))),
                                x0=[x0_h, min(max(s0, 1e-12), s_hi * 0.999)],
                                bounds=([lb_h, 1e-12], [ub_h, s_hi]), method="trf",
                                x_scale=[1.0, max(s0, 1e-3)])
            cand = (math.exp(res.x[0]), float(res.x[1]))
        else:
            res = least_squares(lambda p: sw * (y - phi(n / math.exp(p[0]))),
                                x0=[x0_h], bounds=([lb_h], [ub_h]), method="trf")
            cand = (math.exp(res.x[0]), 1.0)
        cand_sse = float(np.sum(w * (y - cand[1] * phi(n / cand[0])) ** 2))
    except (ValueError, FloatingPointError):
        cand_sse = math.inf
    # Keep the refined point only if it did improve (the grid point is a safe fallback).
    if cand_sse <= float(sse[i]):
        return cand
    return h0, s0


# ---------------------------------------------------------------------------- models
def _as_spec(model):
    """Turn the user's model into something picklable with a fresh-estimator maker."""
    if model is None:
        raise InputError("no model given; pass an estimator, a factory or a model spec")
    try:
        from curvefit.measuring.models import as_model_spec  # written alongside; optional here
    except ImportError:
        return model
    try:
        return as_model_spec(model)
    except InputError:
        raise
    except Exception:  # noqa: BLE001 - an object the spec layer does not know: use as is
        return model


def make_estimator(spec):
    """A fresh, unfitted estimator from an estimator, a factory or a model spec."""
    if hasattr(spec, "make") and not hasattr(spec, "fit"):
        return spec.make()
    if hasattr(spec, "fit"):
        from sklearn.base import clone

        try:
            return clone(spec)
        except (TypeError, RuntimeError):
            import copy

            return copy.deepcopy(spec)
    if callable(spec):
        est = spec()
        if not hasattr(est, "fit"):
            raise InputError("the model factory did not return an object with a fit() method")
        return est
    raise InputError(f"cannot use {type(spec).__name__} as a model: it has no fit() method "
                     "and is not a factory")


# ---------------------------------------------------------------------------- probe
def _probe_cell(spec, pool, n_features: int, n: int, seed: tuple, key: tuple) -> dict:
    """One max-deviation trial: 2n inputs, random labels, second half flipped.

    Returns ξ = |ν1 − ν2|, the difference of the error rates of the trained model on
    the two halves measured against the original labels.
    """
    rng = np.random.default_rng(np.random.SeedSequence(list(seed)))
    t0 = time.perf_counter()
    if pool is None:
        X = rng.standard_normal((2 * n, n_features))
    else:
        # Without replacement while the pool allows: a row in both halves cannot be memorised.
        # Without replacement: a row in both halves could not be memorised (n ≤ rows/2 is enforced).
        X = pool[rng.choice(len(pool), size=2 * n, replace=2 * n > len(pool))]
    y = rng.integers(0, 2, size=2 * n)
    target = y.copy()
    target[n:] = 1 - target[n:]
    while np.all(target == target[0]):     # learners need both classes to train
        y = rng.integers(0, 2, size=2 * n)
        target = y.copy()
        target[n:] = 1 - target[n:]
    try:
        est = make_estimator(spec)
        est.fit(X, target)
        pred = np.asarray(est.predict(X)).ravel()
        if pred.shape[0] != 2 * n:
            raise ValueError(f"predict returned {pred.shape[0]} values for {2 * n} rows")
        pred = np.rint(pred.astype(float)).astype(int)
        nu1 = float(np.mean(pred[:n] != y[:n]))
        nu2 = float(np.mean(pred[n:] != y[n:]))
        xi, status, msg = abs(nu1 - nu2), "ok", ""
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - a failing user model is recorded, not fatal
        xi, status, msg = math.nan, "failed", f"{type(exc).__name__}: {exc}"[:300]
    return {"key": key, "n": n, "xi": xi, "status": status, "message": msg,
            "seconds": time.perf_counter() - t0}


def _probe_pool(X, n_features):
    if X is None:
        if n_features is None:
            raise InputError("the probe needs inputs: pass X (rows are resampled) or "
                             "n_features (standard-normal inputs)")
        try:
            d = int(n_features)
        except (TypeError, ValueError):
            raise InputError(f"n_features must be a positive integer, got {n_features!r}") from None
        if d < 1 or d != n_features:
            raise InputError(f"n_features must be a positive integer, got {n_features!r}")
        return None, d
    if hasattr(X, "select_dtypes"):
        non_numeric = [c for c in X.columns if not pd.api.types.is_numeric_dtype(X[c])]
        if non_numeric:
            raise InputError("the probe needs numeric features; non-numeric column(s): "
                             f"{', '.join(map(str, non_numeric[:5]))} (encode them or drop them)")
        X = X.to_numpy(dtype=float)
    try:
        pool = np.asarray(X, dtype=float)
    except (TypeError, ValueError):
        raise InputError("the probe needs numeric features (could not convert X to numbers)") from None
    if pool.ndim == 1:
        pool = pool[:, None]
    if pool.ndim != 2 or pool.shape[0] < 2 or pool.shape[1] < 1:
        raise InputError(f"X must be a 2-D table with at least 2 rows, got shape {pool.shape}")
    if not np.all(np.isfinite(pool)):
        raise InputError("X has missing or infinite values; impute or drop them before probing")
    if n_features is not None and int(n_features) != pool.shape[1]:
        raise InputError(f"n_features={n_features} does not match X's {pool.shape[1]} columns; "
                         "pass one or the other")
    return pool, pool.shape[1]


def _design_sizes(h: float, taus, max_n: int) -> list[int]:
    return sorted({int(min(max(1, round(h * t)), max_n)) for t in taus})


def _run_probe_cells(spec, pool, d, cells, n_jobs, backend, scheduler):
    from curvefit.measuring.parallel import run_tasks

    tasks = [(_probe_cell, (spec, pool, d, n, seed, key), {}) for key, n, seed in cells]
    results = list(run_tasks(tasks, n_jobs=n_jobs, backend=backend, scheduler=scheduler))
    # Completion order differs between backends; sort by key for identical numbers.
    return sorted(results, key=lambda r: r["key"])


def _fit_probe(df: pd.DataFrame, max_n: int) -> float:
    ok = df[df["status"] == "ok"]
    h, _ = fit_vc_curve(ok["n"].to_numpy(), ok["xi"].to_numpy(), h_bounds=(0.25, 4.0 * max_n))
    return h


def probe_capacity(model, X=None, *, n_features: int | None = None, sizes=None,
                   repeats: int = 10, n_jobs: int = 1, backend: str = "local",
                   scheduler: str | None = None, random_state: int = 0,
                   max_n: int = DEFAULT_MAX_N, bootstrap: int = 200,
                   interval: float = 0.9, progress=None) -> CapacityEstimate:
    """Effective VC dimension of a learner by the max-deviation experiment.

    For each half-size n of the design, 2n inputs are drawn (rows resampled from
    ``X``, or standard normal with ``n_features`` columns), given random 0/1 labels,
    the labels of the second half are flipped, the learner is trained on all 2n and
    ξ(n) = |ν1 − ν2| is measured, ν1 and ν2 being its error rates on the two halves
    against the original labels. h is the least-squares fit of ξ(n_i) ≈ Φ(n_i/h)
    (bounded search in log h); the interval is a percentile bootstrap over the
    repeats within each n.

    Design: unless ``sizes`` is given, a first round spreads n over τ = n/h from 0.5
    to 30 around a starting guess (d + 1, the linear classifier's value), widening
    while ξ stays high; a second round is refined around the first estimate, with
    repeats allocated in proportion to the spread of ξ seen there (non-uniform
    designs cut the variance, Shao, Cherkassky & Li 2000). When ξ stays near 1 up to
    ``max_n`` the learner's capacity exceeds the probed range: ``above_range`` is
    True and ``vc_dim`` is only a lower bound.

    Parameters
    ----------
    model : estimator, factory or ModelSpec
        Classifier with ``fit(X, y)`` / ``predict(X)`` for 0/1 labels; probed as
        configured (never mutated: a fresh copy is trained in every cell).
    X : array_like, optional
        Input rows to resample from (numeric). Give ``X`` or ``n_features``.
    n_features : int, optional
        Dimension of standard-normal inputs when ``X`` is not given.
    sizes : list of int, optional
        Fixed half-sizes n (one round, ``repeats`` each) instead of the adaptive design.
    repeats : int
        Base repeats per design point (round 1 uses about a third).
    n_jobs, backend, scheduler
        Passed to :func:`curvefit.measuring.parallel.run_tasks`; results do not depend on them.
    random_state : int
        Seed; every cell gets its own seed derived from it and the cell's place.
    max_n : int
        Largest half-size n to train on (2n rows per fit).
    bootstrap : int
        Bootstrap replicates for the interval.
    interval : float
        Interval level.
    progress : callable, optional
        Called with one line of text after each round.

    Returns
    -------
    CapacityEstimate
        ``method="probe"``; ``design`` has one row per n.

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 851–876, 1994.
    .. [2] X. Shao, V. Cherkassky, W. Li, "Measuring the VC-dimension using optimized
       experimental design", Neural Computation 12(8), 1969–1986, 2000.

    Examples
    --------
    >>> from sklearn.svm import LinearSVC
    >>> est = probe_capacity(LinearSVC(C=100.0, max_iter=20000), n_features=3,
    ...                      repeats=4, bootstrap=50)
    >>> 2.5 < est.vc_dim < 6.0
    True
    """
    if not 0 < interval < 1:
        raise InputError(f"interval level must be between 0 and 1, got {interval}")
    if int(repeats) < 1:
        raise InputError(f"repeats must be at least 1, got {repeats}")
    if int(max_n) < 2:
        raise InputError(f"max_n must be at least 2, got {max_n}")
    repeats, max_n = int(repeats), int(max_n)
    pool, d = _probe_pool(X, n_features)
    capped_by_rows = False
    if pool is not None and 2 * max_n > len(pool):
        # More rows than the data holds would repeat points and cap ξ below 1 for any learner.
        max_n, capped_by_rows = max(1, len(pool) // 2), True
    spec = _as_spec(model)
    seed = int(random_state) if random_state is not None else 0
    say = progress or (lambda _msg: None)
    cells_done: list[dict] = []
    counter = {"round": 0}

    def run(design: dict[int, int]) -> pd.DataFrame:
        counter["round"] += 1
        rnd = counter["round"]
        cells = [((rnd, n, r), n, (seed, rnd, n, r)) for n, k in sorted(design.items())
                 for r in range(k)]
        res = _run_probe_cells(spec, pool, d, cells, n_jobs, backend, scheduler)
        cells_done.extend(res)
        df = pd.DataFrame(cells_done)
        if not (df["status"] == "ok").any():
            first = df.loc[df["status"] != "ok", "message"].iloc[0]
            raise InputError(f"the model failed on every probe cell: {first}")
        return df

    if sizes is not None:
        ns = sorted({int(s) for s in sizes})
        if not ns or ns[0] < 1:
            raise InputError("probe sizes must be positive integers (half-sizes n)")
        if pool is not None and 2 * ns[-1] > len(pool):
            raise InputError(f"probe size n = {ns[-1]} needs {2 * ns[-1]} distinct rows but the "
                             f"data has {len(pool)}; use sizes up to {len(pool) // 2}")
        max_n = max(ns)
        df = run({n: repeats for n in ns})
        h = _fit_probe(df, max_n)
    else:
        taus1 = [0.5, 1.0, 2.0, 4.0, 8.0, 15.0, 30.0]
        r1 = max(3, repeats // 3)
        h_guess = float(d + 1)
        df = run({n: r1 for n in _design_sizes(h_guess, taus1, max_n)})
        h = _fit_probe(df, max_n)
        # Widen while ξ is still high at the largest n tried (the fit is not inside the design).
        while int(df["n"].max()) < max_n and h > df["n"].max() / 2.0:
            h_guess = max(h, h_guess * 8.0)
            new = {n: r1 for n in _design_sizes(h_guess, taus1, max_n) if n > df["n"].max()}
            if not new:
                break
            df = run(new)
            h = _fit_probe(df, max_n)
        say(f"probe round 1: {len(df)} cells, h ≈ {h:.3g}")
        # Round 2: refined around the first estimate, repeats where ξ is noisiest.
        taus2 = np.geomspace(0.5, 30.0, 9)
        ns2 = _design_sizes(h, taus2, max_n)
        ok = df[df["status"] == "ok"]
        spread = ok.groupby("n")["xi"].std(ddof=1).fillna(0.0)
        known_n = spread.index.to_numpy(dtype=float)
        sd = np.interp(np.log(ns2), np.log(known_n), spread.to_numpy()) if len(known_n) else np.ones(len(ns2))
        sd = np.maximum(sd, 0.02)
        budget = repeats * len(ns2)
        # Neyman-style allocation, capped so that one noisy point cannot take the whole budget.
        alloc = np.clip(np.round(budget * sd / sd.sum()), 2, 3 * repeats).astype(int)
        df = run({n: int(k) for n, k in zip(ns2, alloc)})
        h = _fit_probe(df, max_n)
        say(f"probe round 2: {len(df)} cells, h ≈ {h:.3g}")

    ok = df[df["status"] == "ok"]
    n_failed = int((df["status"] != "ok").sum())
    groups = {int(n): g["xi"].to_numpy() for n, g in ok.groupby("n")}
    ns_sorted = sorted(groups)
    n_top = ns_sorted[-1]

    # Bootstrap over repeats within each n.
    rng = np.random.default_rng(np.random.SeedSequence([seed, 7919]))
    boot = []
    for _ in range(int(bootstrap)):
        n_all, xi_all = [], []
        for n in ns_sorted:
            v = groups[n]
            n_all.append(np.full(len(v), n))
            xi_all.append(v[rng.integers(0, len(v), len(v))])
        hb, _ = fit_vc_curve(np.concatenate(n_all), np.concatenate(xi_all),
                             h_bounds=(0.25, 4.0 * max_n))
        boot.append(hb)
    alpha = (1.0 - interval) / 2.0
    if boot:
        low, high = (float(v) for v in np.quantile(boot, [alpha, 1.0 - alpha]))
    else:
        low = high = math.nan

    top = groups[n_top]
    above = h >= n_top
    # The bootstrap sees repeat noise only; widen it when Φ misses the means by more.
    xi_means = np.array([groups[n].mean() for n in ns_sorted])
    xi_sems = np.array([groups[n].std(ddof=1) / math.sqrt(len(groups[n])) if len(groups[n]) > 1
                        else math.nan for n in ns_sorted])
    misfit = lack_of_fit(xi_means, xi_sems, phi(np.array(ns_sorted, float) / h), n_params=1)
    if not above and math.isfinite(low):
        low, high = _widen(h, low, high, misfit, bounds=(0.25, 4.0 * max_n))
    notes = [_PROBE_NOTE]
    if pool is None:
        notes.append(f"Inputs were standard normal in {d} dimensions.")
    else:
        notes.append(f"Inputs were rows resampled from the given data ({len(pool)} rows, "
                     f"{d} columns).")
        if capped_by_rows:
            notes.append(f"The data has {len(pool)} rows, so the probe stopped at n = {max_n} "
                         "(2n distinct rows per trial).")
    if n_failed:
        notes.append(f"{n_failed} probe cell(s) failed and were left out.")
    if not above and math.isfinite(misfit) and misfit > 1:
        notes.append(f"Φ fits the measured ξ less well than repeat noise explains "
                     f"(χ²/dof = {misfit:.2g}); the interval was widened by √{misfit:.2g}.")
    if above:
        # Lower bound: the smallest h consistent with a lower confidence bound of ξ at the top n.
        sem_top = float(np.std(top, ddof=1) / math.sqrt(len(top))) if len(top) > 1 else 0.0
        xi_lcb = float(np.mean(top)) - NormalDist().inv_cdf(interval) * sem_top
        tau_max = phi_inverse(xi_lcb) if xi_lcb > 0 else math.inf
        h_low = n_top / tau_max if math.isfinite(tau_max) else 0.0
        vc, low, high = h_low, h_low, math.inf
        message = (f"Capacity above the probed range: h ≥ {_fmt(h_low)} "
                   f"(ξ stayed at {np.mean(top):.2f} up to n = {n_top}); "
                   + ("the data has too few rows to resolve it." if capped_by_rows and n_top >= max_n
                      else "probe larger n (max_n) to resolve it."))
    else:
        vc = h
        message = (f"Effective VC dimension ≈ {_fmt(h)} ({_interval_text(interval, low, high)}), "
                   "by the max-deviation probe.")
    notes.append(_STAT_NOTE)

    rows = []
    for n in ns_sorted:
        v = groups[n]
        rows.append({"n": n, "tau": n / h if h > 0 else math.nan,
                     "xi_mean": float(np.mean(v)),
                     "xi_sem": float(np.std(v, ddof=1) / math.sqrt(len(v))) if len(v) > 1 else math.nan,
                     "repeats": int(len(v)), "xi_fit": float(phi(n / h))})
    design = pd.DataFrame(rows, columns=["n", "tau", "xi_mean", "xi_sem", "repeats", "xi_fit"])
    extra = {"n_features": d, "inputs": "normal" if pool is None else "resampled",
             "max_n": max_n, "seed": seed, "bootstrap": int(bootstrap), "cells": int(len(df)),
             "failed_cells": n_failed, "fit_seconds": float(df["seconds"].sum()),
             "h_fit": float(h), "lack_of_fit": misfit}
    return CapacityEstimate(vc_dim=float(vc), low=float(low), high=float(high),
                            level=float(interval), method="probe", above_range=bool(above),
                            design=design, notes=notes, message=message, extra=extra)


def lack_of_fit(means, sems, fitted, n_params: int = 1) -> float:
    """Reduced chi-square χ²/dof of per-point means against a fitted curve.

    Points with a zero or undefined standard error (e.g. ξ = 1 in every repeat) are
    left out; NaN when fewer than ``n_params + 1`` points remain.

    References
    ----------
    .. [1] R. T. Birge, "The calculation of errors by the method of least squares",
       Physical Review 40, 207–227, 1932 (the ratio used to scale errors when the
       scatter exceeds the stated uncertainties).

    Examples
    --------
    >>> lack_of_fit([1.0, 2.0, 3.0], [0.5, 0.5, 0.5], [1.0, 2.0, 4.0])
    2.0
    """
    m = np.asarray(means, float)
    e = np.asarray(sems, float)
    f = np.asarray(fitted, float)
    keep = np.isfinite(e) & (e > 0) & np.isfinite(m) & np.isfinite(f)
    dof = int(keep.sum()) - n_params
    if dof < 1:
        return math.nan
    return float(np.sum(((m[keep] - f[keep]) / e[keep]) ** 2) / dof)


def _widen(estimate: float, low: float, high: float, ratio: float,
           bounds: tuple[float, float] | None = None) -> tuple[float, float]:
    """Scale the interval's half-widths on the log scale by sqrt(ratio) when ratio > 1.

    With ``bounds`` (the range h was searched in) the result is clipped to it, and an
    upper end that reaches the top of the range becomes infinite: the data cannot
    bound h from above there, and a figure beyond the search range would be invented.
    """
    if math.isfinite(ratio) and ratio > 1 and estimate > 0 and low > 0 and high > 0:
        f = math.sqrt(ratio)
        low, high = estimate * (low / estimate) ** f, estimate * (high / estimate) ** f
    if bounds is not None and math.isfinite(low) and math.isfinite(high):
        low = max(low, bounds[0])
        high = math.inf if high >= bounds[1] * (1 - 1e-9) else high
    return low, high


def _interval_text(level: float, low: float, high: float) -> str:
    if math.isfinite(low) and high == math.inf:
        return f"{level:.0%} interval {_fmt(low)} to no upper limit"
    if not (math.isfinite(low) and math.isfinite(high)):
        return "no interval"
    return f"{level:.0%} interval {_fmt(low)}–{_fmt(high)}"


def _fmt(x: float) -> str:
    if x is None or not math.isfinite(x):
        return "∞" if x == math.inf else "n/a"
    if x >= 100:
        return f"{x:.0f}"
    return f"{x:.3g}" if x < 10 else f"{x:.1f}"


# ---------------------------------------------------------------------------- gap model
def _regime(b: float) -> str:
    """Plain words for the gap exponent b (Vapnik's bounds: 1/2 agnostic, 1 realizable)."""
    if not math.isfinite(b):
        return "undetermined"
    if b < 0.35:
        return "slow (b well below 1/2: the gap shrinks slower than the agnostic rate)"
    if b < 0.75:
        return "noisy/agnostic (b near 1/2)"
    if b <= 1.3:
        return "nearly realizable (b near 1)"
    return "fast (b above 1: the gap closes faster than the realizable rate)"


def _fit_power(n: np.ndarray, g: np.ndarray, w: np.ndarray) -> tuple[float, float]:
    """Weighted least squares of g ≈ a·n^-b with a > 0, 0 ≤ b ≤ 3."""
    from scipy.optimize import least_squares

    pos = g > 0
    if pos.sum() >= 2:
        # Start from the log-log line through the positive gaps.
        slope, icpt = np.polyfit(np.log(n[pos]), np.log(g[pos]), 1)
        b0, a0 = float(np.clip(-slope, 0.01, 2.99)), float(math.exp(icpt))
    else:
        b0, a0 = 0.5, max(float(np.max(np.abs(g))), 1e-6) * math.sqrt(float(n.min()))
    sw = np.sqrt(w)
    la0 = math.log(max(a0, 1e-12))
    res = least_squares(lambda p: sw * (g - math.exp(p[0]) * n ** (-p[1])),
                        x0=[la0, b0], bounds=([-50.0, 0.0], [50.0, 3.0]), method="trf")
    return float(math.exp(res.x[0])), float(res.x[1])


def _gap_table(points: pd.DataFrame) -> dict[int, np.ndarray]:
    return {int(s): g["gap"].to_numpy() for s, g in points.groupby("size")}


def _gap_fit(groups: dict[int, np.ndarray], sem_floor: float, h_hi: float):
    sizes = np.array(sorted(groups), dtype=float)
    means = np.array([groups[int(s)].mean() for s in sizes])
    sems = np.array([groups[int(s)].std(ddof=1) / math.sqrt(len(groups[int(s)]))
                     if len(groups[int(s)]) > 1 else np.nan for s in sizes])
    sems = np.where(np.isfinite(sems), sems, np.nanmax(sems) if np.isfinite(sems).any() else 1.0)
    w = 1.0 / np.maximum(sems, sem_floor) ** 2
    h, s = fit_vc_curve(sizes, means, w, free_scale=True, h_bounds=(0.25, h_hi))
    a, b = _fit_power(sizes, means, w)
    return h, s, a, b, means, sems


def effective_capacity(curve, *, bootstrap: int = 500, random_state: int = 0,
                       interval: float = 0.9) -> CapacityEstimate:
    """Effective capacity from a measured learning curve's generalization gap.

    The mean gap (test − train error) per size is fitted by two models with weighted
    least squares (weights 1/sem², so the many-sample sizes that carry the shape are
    not drowned by the noisy small ones):

    * VC-shaped: gap(n) = s·Φ(n/h), with the scale s and the capacity h free and
      bounded (h on a log grid, then refined by ``scipy.optimize.least_squares``);
    * power law: gap(n) = a·n^−b, whose exponent tells the regime (b near 1/2:
      noisy/agnostic; b near 1: nearly realizable).

    Intervals are percentile bootstraps over the repeats within each size.

    Parameters
    ----------
    curve : Curve
        A measured curve with train_error (at least 3 sizes, ideally ≥ 2 repeats each).
    bootstrap : int
        Bootstrap replicates.
    random_state : int
        Seed of the bootstrap.
    interval : float
        Interval level.

    Returns
    -------
    CapacityEstimate
        ``method="gap"``, with ``scale`` (s), ``exponent`` (b) and ``regime`` set.

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994 (the shape Φ).
    .. [2] C. Cortes, L. D. Jackel, S. A. Solla, V. Vapnik, J. S. Denker, "Learning
       curves: asymptotic values and rate of convergence", NIPS 6, 1994 (power-law gap).

    Examples
    --------
    >>> import pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> sizes = [4, 8, 16, 32, 64, 128, 256]
    >>> rows = [{"size": n, "repeat": r, "train_error": 0.1,
    ...          "test_error": 0.1 + 0.4 * float(phi(n / 10.0)) + 0.01 * (r - 1)}
    ...         for n in sizes for r in range(3)]
    >>> est = effective_capacity(Curve.from_table(pd.DataFrame(rows)), bootstrap=20)
    >>> round(est.vc_dim, 1), round(est.scale, 2)
    (10.0, 0.4)
    """
    from curvefit.core.curve import Curve

    if not isinstance(curve, Curve):
        raise InputError("effective_capacity needs a Curve (curvefit.Curve.read(path) or "
                         "Curve.from_table(df))")
    if not 0 < interval < 1:
        raise InputError(f"interval level must be between 0 and 1, got {interval}")
    ok = curve.ok_points()
    if not curve.has_train:
        raise InputError("the curve has no train_error: the gap model needs train and test "
                         "errors (measure again, or add a train_error column to the table)")
    pts = ok[ok["train_error"].notna()].copy()
    pts["gap"] = pts["test_error"] - pts["train_error"]
    groups = _gap_table(pts)
    if len(groups) < 3:
        raise InputError(f"the gap model needs at least 3 sizes with train and test errors, "
                         f"found {len(groups)}; measure more sizes")
    sizes = np.array(sorted(groups), dtype=float)
    all_sems = [g.std(ddof=1) / math.sqrt(len(g)) for g in groups.values() if len(g) > 1]
    gap_scale = max(float(np.max(np.abs([g.mean() for g in groups.values()]))), 1e-12)
    # A floor on the sem keeps a size with identical repeats from taking all the weight.
    sem_floor = max(0.25 * float(np.median(all_sems)) if all_sems else 0.0, 1e-3 * gap_scale)
    h_hi = 100.0 * float(sizes.max())
    h, s, a, b, means, sems = _gap_fit(groups, sem_floor, h_hi)

    rng = np.random.default_rng(np.random.SeedSequence([int(random_state), 104729]))
    boot_h, boot_b = [], []
    for _ in range(int(bootstrap)):
        rg = {k: v[rng.integers(0, len(v), len(v))] for k, v in groups.items()}
        try:
            hb, _sb, _ab, bb, _m, _s = _gap_fit(rg, sem_floor, h_hi)
        except (ValueError, np.linalg.LinAlgError):
            continue
        boot_h.append(hb)
        boot_b.append(bb)
    alpha = (1.0 - interval) / 2.0
    single = all(len(v) < 2 for v in groups.values())
    if len(boot_h) >= 2 and not single:
        low, high = (float(v) for v in np.quantile(boot_h, [alpha, 1 - alpha]))
        b_low, b_high = (float(v) for v in np.quantile(boot_b, [alpha, 1 - alpha]))
    else:
        low = high = b_low = b_high = math.nan
    # Widen both intervals when the curves miss the means by more than their noise.
    floored = np.maximum(sems, sem_floor)
    misfit_vc = lack_of_fit(means, floored, s * phi(sizes / h), n_params=2)
    misfit_pow = lack_of_fit(means, floored, a * sizes ** (-b), n_params=2)
    if math.isfinite(low):
        low, high = _widen(h, low, high, misfit_vc, bounds=(0.25, h_hi))
    if math.isfinite(b_low) and b > 0 and b_low > 0:
        b_low, b_high = _widen(b, b_low, b_high, misfit_pow)
    exponent = Estimate(b, b_low, b_high, interval)
    regime = _regime(b)

    notes = [_GAP_NOTE]
    if single:
        notes.append("Each size has one repeat, so there is no interval; measure with "
                     "--repeats 3 or more.")
    above = False
    if h > 2.0 * sizes.max():
        # Φ is flat for n < h/2: the whole curve sits in the flat part and h is only bounded below.
        above = True
        notes.append("The gap had not started to fall within the measured sizes; measure "
                     "larger sizes to resolve the capacity.")
    if (means <= 0).sum() > len(means) // 2:
        notes.append("Most mean gaps are not positive; the capacity figure is poorly determined.")
    if sizes.min() > h:
        notes.append("All measured sizes exceed the fitted capacity, so h rests on the tail "
                     "of Φ; sizes near h would pin it down better.")
    notes.append(_STAT_NOTE)
    if above:
        h_low = 2.0 * float(sizes.max())
        vc, low, high = h_low, h_low, math.inf
        message = (f"Capacity above the measured range: h ≥ {_fmt(h_low)} on this data "
                   f"(the gap is still flat at n = {int(sizes.max())}).")
    else:
        vc = h
        message = (f"Effective capacity on this data ≈ {_fmt(h)} VC units "
                   f"({_interval_text(interval, low, high)}), from the measured gap; gap exponent "
                   f"b ≈ {b:.2f}, {regime.split(' (')[0]}.")
    design = pd.DataFrame({
        "size": sizes.astype(int), "gap_mean": means,
        "gap_sem": [float(groups[int(n)].std(ddof=1) / math.sqrt(len(groups[int(n)])))
                    if len(groups[int(n)]) > 1 else math.nan for n in sizes],
        "repeats": [int(len(groups[int(n)])) for n in sizes],
        "gap_fit": s * phi(sizes / h), "gap_power": a * sizes ** (-b),
    })
    if math.isfinite(misfit_vc) and misfit_vc > 1:
        notes.insert(1, f"s·Φ(n/h) fits the mean gaps less well than repeat noise explains "
                        f"(χ²/dof = {misfit_vc:.2g}); the interval was widened by √{misfit_vc:.2g}.")
    extra = {"power_scale": a, "h_fit": float(h), "bootstrap": int(len(boot_h)),
             "lack_of_fit": misfit_vc, "lack_of_fit_power": misfit_pow,
             "seed": int(random_state), "metric": curve.metric}
    return CapacityEstimate(vc_dim=float(vc), low=float(low), high=float(high),
                            level=float(interval), method="gap", above_range=above,
                            design=design, scale=float(s), exponent=exponent, regime=regime,
                            notes=notes, message=message, extra=extra)
