"""Effective VC dimension of a learner by the max-deviation experiment (the probe).

Each cell trains the learner on 2n inputs with random labels, the second half flipped,
and measures the deviation ξ(n) between the error rates on the two halves; h is fitted
by ξ(n) ≈ Φ(n/h) (``capacity.vc_curve``). Cells run through
:func:`curvefit.measuring.parallel.run_tasks`, each with its own seed, so the numbers do
not depend on ``n_jobs`` or the backend.
"""

from __future__ import annotations

import contextlib
import math
import time
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np
import pandas as pd

from curvefit.capacity.result import STAT_NOTE, CapacityEstimate, interval_text, lack_of_fit, widen_interval
from curvefit.capacity.vc_curve import fit_vc_curve, phi, phi_inverse
from curvefit.core.defaults import INTERVAL, SEED
from curvefit.core.errors import InputError
from curvefit.core.formatting import format_capacity, format_number
from curvefit.core.progress import Progress, progress_callback
from curvefit.core.stats import sem
from curvefit.core.validate import check_count, check_jobs, check_level, check_seed

# Default largest n of the probe: 2n = 4000 training rows keeps one cell cheap.
DEFAULT_MAX_N = 2000
# Bootstrap replicates of the probe's interval: fewer than a curve fit's, since every
# replicate refits Φ to all probe cells.
PROBE_BOOTSTRAP = 200
# τ = n/h of the first design round, around the starting guess of h.
ROUND1_TAUS = (0.5, 1.0, 2.0, 4.0, 8.0, 15.0, 30.0)
# The second round spreads this many n over the same τ range around the first estimate.
ROUND2_POINTS = 9

_PROBE_NOTE = ("The learner was probed as configured: regularisation, early stopping or "
               "a margin lower the measured capacity below the class's VC dimension.")


@dataclass(frozen=True)
class ProbeInputs:
    """What the probe trains on: rows to resample (``pool``), or standard-normal inputs
    with ``n_features`` columns when ``pool`` is None."""

    pool: np.ndarray | None
    n_features: int


@dataclass(frozen=True)
class ProbeSettings:
    """The probe's budget and randomness, checked once when made.

    Examples
    --------
    >>> ProbeSettings(repeats=4).max_n
    2000
    """

    repeats: int = 10
    max_n: int = DEFAULT_MAX_N
    bootstrap: int = PROBE_BOOTSTRAP
    interval: float = INTERVAL
    random_state: int | None = SEED
    n_jobs: int = 1
    backend: str = "local"
    scheduler: str | None = None

    def __post_init__(self):
        seed = check_seed(self.random_state)
        for name, value in [("interval", check_level(self.interval)),
                            ("repeats", check_count(self.repeats, "repeats", minimum=1)),
                            ("max_n", check_count(self.max_n, "max_n", minimum=2)),
                            ("bootstrap", check_count(self.bootstrap, "bootstrap", minimum=0)),
                            ("n_jobs", check_jobs(self.n_jobs)),
                            ("random_state", 0 if seed is None else seed)]:
            object.__setattr__(self, name, value)


def probe_capacity(model, X=None, *, n_features: int | None = None, sizes=None,
                   repeats: int = 10, n_jobs: int = 1, backend: str = "local",
                   scheduler: str | None = None, random_state: int = SEED,
                   max_n: int = DEFAULT_MAX_N, bootstrap: int = PROBE_BOOTSTRAP,
                   interval: float = INTERVAL, progress=False) -> CapacityEstimate:
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
        Bootstrap replicates for the interval (``PROBE_BOOTSTRAP`` by default).
    interval : float
        Interval level.
    progress : bool or callable
        ``True`` shows progress on stderr (`curvefit.core.progress.Progress`: a bar on a
        terminal, plain lines in a log). A callable is called as ``progress(done, total,
        cell)`` after each finished cell (``cell``: a dict with ``n``, ``round``,
        ``xi``, ``status``), and once before each round with ``cell=None``. ``total``
        counts the cells run and planned; before the second round is planned it holds
        an estimate of that round's cells (``repeats`` per design point).

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
    from curvefit.measuring.models import as_model_spec

    settings = ProbeSettings(repeats=repeats, max_n=max_n, bootstrap=bootstrap,
                             interval=interval, random_state=random_state, n_jobs=n_jobs,
                             backend=backend, scheduler=scheduler)
    inputs = probe_inputs(X, n_features)
    return run_probe(as_model_spec(model), inputs, settings, sizes=sizes, progress=progress)


def run_probe(spec, inputs: ProbeInputs, settings: ProbeSettings, *, sizes=None,
              progress=False) -> CapacityEstimate:
    """The probe of :func:`probe_capacity` for a model already turned into a ``ModelSpec``
    (``curvefit.measuring.models.as_model_spec``) and checked inputs and settings;
    ``progress`` as there."""
    max_n, capped_by_rows = settings.max_n, False
    if inputs.pool is not None and 2 * max_n > len(inputs.pool):
        # More rows than the data holds would repeat points and cap ξ below 1 for any learner.
        max_n, capped_by_rows = max(1, len(inputs.pool) // 2), True
    report = progress_callback(progress, "probing", "cells")
    cells = _ProbeCells(spec, inputs, settings, report)
    # a bar is wiped however the probe ends
    with report if isinstance(report, Progress) else contextlib.nullcontext():
        if sizes is not None:
            ns = _fixed_sizes(sizes, inputs)
            max_n = max(ns)
            df = cells.run({n: settings.repeats for n in ns})
            h = fit_probe(df, max_n)
        else:
            df, h = _adaptive_design(cells, inputs.n_features, settings.repeats, max_n)
    return probe_estimate(df, h, max_n, capped_by_rows, inputs, settings)


class _ProbeCells:
    """Runs design rounds of probe cells, keeps every finished cell and reports each one
    to ``report`` (``(done, total, cell, extra=...)`` events, or None)."""

    def __init__(self, spec, inputs: ProbeInputs, settings: ProbeSettings, report=None):
        self.spec, self.inputs, self.settings = spec, inputs, settings
        self.report = report or (lambda done, total, cell, extra=None: None)
        self.done: list[dict] = []
        self.round = 0
        self.note: dict = {}  # shown after the count: the round, the estimate so far

    def run(self, design: dict[int, int], later: int = 0) -> pd.DataFrame:
        """Run ``repeats`` cells per half-size n of ``design``; all cells so far as a table.
        ``later``: cells expected in rounds not planned yet (counted in the progress total)."""
        from curvefit.measuring.parallel import run_tasks

        self.round += 1
        s, seed, rnd = self.settings, self.settings.random_state, self.round
        tasks = [(_probe_cell, (self.spec, self.inputs.pool, self.inputs.n_features, n,
                               (seed, rnd, n, r), (rnd, n, r)), {})
                 for n, k in sorted(design.items()) for r in range(k)]
        total = len(self.done) + len(tasks) + later
        self.report(len(self.done), total, None, extra=self.note)
        finished = []
        for result in run_tasks(tasks, n_jobs=s.n_jobs, backend=s.backend, scheduler=s.scheduler):
            finished.append(result)
            self.report(len(self.done) + len(finished), total,
                        {k: result[k] for k in ("n", "xi", "status")} | {"round": rnd},
                        extra=self.note)
        # Completion order differs between backends; sort by key for identical numbers.
        self.done.extend(sorted(finished, key=lambda r: r["key"]))
        df = pd.DataFrame(self.done)
        if not (df["status"] == "ok").any():
            first = df.loc[df["status"] != "ok", "message"].iloc[0]
            raise InputError(f"the model failed on every probe cell: {first}")
        return df


def _fixed_sizes(sizes, inputs: ProbeInputs) -> list[int]:
    ns = sorted({int(s) for s in sizes})
    if not ns or ns[0] < 1:
        raise InputError("probe sizes must be positive integers (half-sizes n)")
    if inputs.pool is not None and 2 * ns[-1] > len(inputs.pool):
        raise InputError(f"probe size n = {ns[-1]} needs {2 * ns[-1]} distinct rows but the "
                         f"data has {len(inputs.pool)}; use sizes up to {len(inputs.pool) // 2}")
    return ns


def _adaptive_design(cells: _ProbeCells, d: int, repeats: int, max_n: int):
    """Two rounds: n spread over τ around a guess of h (widened while ξ stays high), then
    refined around the first estimate with repeats where ξ is noisiest. ``(cells, h)``."""
    r1 = max(3, repeats // 3)
    second = repeats * ROUND2_POINTS  # about the second round's cells, for the progress total
    h_guess = float(d + 1)
    cells.note = {"round": "1 of 2"}
    df = cells.run({n: r1 for n in _design_sizes(h_guess, ROUND1_TAUS, max_n)}, later=second)
    h = fit_probe(df, max_n)
    # Widen while ξ is still high at the largest n tried (the fit is not inside the design).
    while int(df["n"].max()) < max_n and h > df["n"].max() / 2.0:
        h_guess = max(h, h_guess * 8.0)
        new = {n: r1 for n in _design_sizes(h_guess, ROUND1_TAUS, max_n) if n > df["n"].max()}
        if not new:
            break
        df = cells.run(new, later=second)
        h = fit_probe(df, max_n)
    cells.note = {"round": "2 of 2", "h so far": f"≈ {format_capacity(h)}"}
    ns2 = _design_sizes(h, np.geomspace(0.5, 30.0, ROUND2_POINTS), max_n)
    df = cells.run(dict(zip(ns2, _allocate(df, ns2, repeats))))
    h = fit_probe(df, max_n)
    return df, h


def _allocate(df: pd.DataFrame, ns: list[int], repeats: int) -> list[int]:
    """Repeats per n in proportion to the spread of ξ seen so far (Neyman-style, Shao,
    Cherkassky & Li 2000), capped so that one noisy point cannot take the whole budget."""
    ok = df[df["status"] == "ok"]
    spread = ok.groupby("n")["xi"].std(ddof=1).fillna(0.0)
    known_n = spread.index.to_numpy(dtype=float)
    sd = np.interp(np.log(ns), np.log(known_n), spread.to_numpy()) if len(known_n) else np.ones(len(ns))
    sd = np.maximum(sd, 0.02)
    budget = repeats * len(ns)
    alloc = np.clip(np.round(budget * sd / sd.sum()), 2, 3 * repeats).astype(int)
    return [int(k) for k in alloc]


def _design_sizes(h: float, taus, max_n: int) -> list[int]:
    return sorted({int(min(max(1, round(h * t)), max_n)) for t in taus})


def fit_probe(df: pd.DataFrame, max_n: int) -> float:
    """h of ξ(n) ≈ Φ(n/h) over the finished cells (``n, xi, status``), searched in 0.25…4·max_n."""
    ok = df[df["status"] == "ok"]
    h, _ = fit_vc_curve(ok["n"].to_numpy(), ok["xi"].to_numpy(), h_bounds=(0.25, 4.0 * max_n))
    return h


def probe_estimate(df: pd.DataFrame, h: float, max_n: int, capped_by_rows: bool,
                   inputs: ProbeInputs, settings: ProbeSettings) -> CapacityEstimate:
    """The estimate from the finished cells (a table with ``n, xi, status, seconds``):
    interval, lower bound above the range, notes, and a ``status`` for every outcome
    (identical repeats or a degenerate design give a status, never an exception)."""
    ok = df[df["status"] == "ok"]
    n_failed = int((df["status"] != "ok").sum())
    groups = {int(n): g["xi"].to_numpy() for n, g in ok.groupby("n")}
    ns = sorted(groups)
    n_top, level = ns[-1], settings.interval
    low, high = _bootstrap_h(groups, settings.random_state, settings.bootstrap, max_n, level)
    if all(len(v) < 2 for v in groups.values()):
        low = high = math.nan   # one repeat per n: resampling cannot show the noise
    elif math.isfinite(low):
        low, high = min(low, h), max(high, h)  # the optimiser's tolerance can leave h a hair outside
    above = h >= n_top
    # The bootstrap sees repeat noise only; widen it when Φ misses the means by more.
    xi_means = np.array([groups[n].mean() for n in ns])
    xi_sems = np.array([sem(groups[n]) for n in ns])
    misfit = lack_of_fit(xi_means, xi_sems, phi(np.array(ns, float) / h), n_params=1)
    if not above and math.isfinite(low):
        low, high = widen_interval(h, low, high, misfit, bounds=(0.25, 4.0 * max_n))
    status = "above_range" if above else ("ok" if math.isfinite(low) else "no_interval")
    notes = _probe_notes(inputs, capped_by_rows, max_n, n_failed,
                         misfit if not above else math.nan)
    top = groups[n_top]
    if above:
        h_low = _lower_bound(top, n_top, level)
        vc, low, high = h_low, h_low, math.inf
        message = (f"Capacity above the probed range: h ≥ {format_capacity(h_low)} "
                   f"(ξ stayed at {format_number(np.mean(top), 3)} up to n = {n_top:,}); "
                   + ("the data has too few rows to resolve it." if capped_by_rows and n_top >= max_n
                      else "probe larger n (max_n) to resolve it."))
    else:
        vc = h
        message = (f"Effective VC dimension ≈ {format_capacity(h)} "
                   f"({interval_text(low, high, level)}), by the max-deviation probe.")
    design = pd.DataFrame([{"n": n, "tau": n / h if h > 0 else math.nan,
                            "xi_mean": float(np.mean(groups[n])), "xi_sem": sem(groups[n]),
                            "repeats": int(len(groups[n])), "xi_fit": float(phi(n / h))}
                           for n in ns],
                          columns=["n", "tau", "xi_mean", "xi_sem", "repeats", "xi_fit"])
    extra = {"n_features": inputs.n_features,
             "inputs": "normal" if inputs.pool is None else "resampled",
             "max_n": max_n, "seed": settings.random_state, "bootstrap": settings.bootstrap,
             "cells": int(len(df)), "failed_cells": n_failed,
             "first_failure": str(df.loc[df["status"] != "ok", "message"].iloc[0]) if n_failed else None,
             "fit_seconds": float(df["seconds"].sum()), "h_fit": float(h), "lack_of_fit": misfit}
    return CapacityEstimate(vc_dim=float(vc), low=float(low), high=float(high), level=level,
                            method="probe", above_range=bool(above), design=design, notes=notes,
                            message=message, extra=extra, status=status)


def _bootstrap_h(groups: dict, seed: int, bootstrap: int, max_n: int, level: float):
    """Percentile interval of h over repeats resampled within each n (NaN without replicates)."""
    rng = np.random.default_rng(np.random.SeedSequence([seed, 7919]))
    boot = []
    for _ in range(bootstrap):
        n_all, xi_all = [], []
        for n in sorted(groups):
            v = groups[n]
            n_all.append(np.full(len(v), n))
            xi_all.append(v[rng.integers(0, len(v), len(v))])
        hb, _ = fit_vc_curve(np.concatenate(n_all), np.concatenate(xi_all),
                             h_bounds=(0.25, 4.0 * max_n))
        boot.append(hb)
    if not boot:
        return math.nan, math.nan
    alpha = (1.0 - level) / 2.0
    low, high = (float(v) for v in np.quantile(boot, [alpha, 1.0 - alpha]))
    return low, high


def _lower_bound(top: np.ndarray, n_top: int, level: float) -> float:
    """The smallest h consistent with a lower confidence bound of ξ at the largest n."""
    sem_top = sem(top) if len(top) > 1 else 0.0
    xi_lcb = float(np.mean(top)) - NormalDist().inv_cdf(level) * sem_top
    tau_max = phi_inverse(xi_lcb) if xi_lcb > 0 else math.inf
    return n_top / tau_max if math.isfinite(tau_max) else 0.0


def _probe_notes(inputs: ProbeInputs, capped_by_rows: bool, max_n: int, n_failed: int,
                 misfit: float) -> list[str]:
    """Caveats to show with the probe's figure (``misfit`` NaN when not to mention it)."""
    notes = [_PROBE_NOTE]
    pool, d = inputs.pool, inputs.n_features
    if pool is None:
        notes.append(f"Inputs were standard normal in {d} dimensions.")
    else:
        notes.append(f"Inputs were rows resampled from the given data ({len(pool):,} rows, "
                     f"{d} columns).")
        if capped_by_rows:
            notes.append(f"The data has {len(pool):,} rows, so the probe stopped at n = {max_n:,} "
                         "(2n distinct rows per trial).")
    if n_failed:
        notes.append(f"{n_failed} probe cell(s) failed and were left out.")
    if math.isfinite(misfit) and misfit > 1:
        notes.append(f"Φ fits the measured ξ less well than repeat noise explains "
                     f"(χ²/dof = {format_number(misfit, 2)}); the interval was widened by "
                     f"√{format_number(misfit, 2)}.")
    notes.append(STAT_NOTE)
    return notes


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
        est = spec.make()
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


def probe_inputs(X, n_features) -> ProbeInputs:
    """The probe's inputs, checked: rows of ``X`` to resample, or the dimension of
    standard-normal inputs."""
    if X is None:
        if n_features is None:
            raise InputError("the probe needs inputs: pass X (rows are resampled) or "
                             "n_features (standard-normal inputs)")
        return ProbeInputs(None, check_count(n_features, "n_features", minimum=1))
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
    return ProbeInputs(pool, pool.shape[1])
