"""The analysis behind a report: fit each run, answer the target, estimate capacity.

`analyse` is the one place that calls the estimating API for a report (``fit_curve``,
``samples_for``, ``effective_capacity``, the worst-case bound, the sanity checks of
`curvefit.fitting.sanity`); the report
(`curvefit.report.html`) only renders the `ModelResult` objects it returns.
`report_runs` is the whole ``curvefit report`` job: read run files, analyse, write the page.

Examples
--------
>>> import warnings
>>> import numpy as np, pandas as pd
>>> from curvefit.core.curve import Curve
>>> n = np.repeat([100, 200, 400, 800, 1600], 3)
>>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
>>> curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": e}), meta={"label": "m"})
>>> with warnings.catch_warnings():
...     warnings.simplefilter("ignore")
...     [res] = analyse([curve], target_error=0.16, bootstrap=20)
>>> res.label, res.fit is not None, res.answer.reachable
('m', True, True)
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np
import pandas as pd

from curvefit.core.curve import Curve
from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import InputError
from curvefit.core.formatting import format_capacity, format_number, is_rate, is_zero_one
from curvefit.core.jsonio import check_output_path, jsonable, read_json
from curvefit.core.validate import check_count, check_error_target, check_level, check_seed
from curvefit.report.labels import as_items, family_name, is_finite, model_label
from curvefit.report.labels import field as field_of

# Forecasts a report shows when no target was given: multiples of the largest measured size.
FORECAST_MULTIPLES = (2, 10)
# Smallest gap ε the worst-case bound is asked for (a target at the floor asks for ε = 0).
MIN_EPS = 0.005


@dataclass(frozen=True)
class WorstCase:
    """The distribution-free sample sizes beside one model's measured answer.

    ``rows`` hold ``label``, ``n`` and ``kind`` ("bound", "rule" or "measured"; the
    measured row also ``low`` and ``high``), as `curvefit.report.plots.worst_case_figure`
    draws them.
    """

    label: str
    vc_dim: float
    method: str
    eps: float
    delta: float
    rows: list
    eps_source: str = ""
    lower_bound: bool = False


@dataclass
class ModelResult:
    """What the report shows for one run (one model): the curve and what was computed from it."""

    label: str
    curve: Curve
    fit: Any = None            # CurveFit of the test error
    answer: Any = None         # SampleEstimate for the target, when one was asked for
    capacity: Any = None       # CapacityEstimate from the measured gap
    notes: list = field(default_factory=list)   # why a piece is missing, in plain words
    source: str | None = None  # run file it came from
    forecast: pd.DataFrame | None = None        # fit.predict at FORECAST_MULTIPLES × largest size
    gap_lines: list = field(default_factory=list)  # fitted gap curves: (name, sizes, gaps)
    worst_case: WorstCase | None = None
    sanity: Any = None         # Sanity: the constant predictor beside the answer, and the flags


@dataclass
class ReportResult:
    """What `report_runs` wrote: the page, its figure files, and the analysed runs."""

    path: Path
    figures: list
    results: list
    buying: Any = None          # BuyingPlan, when the report has a "what to buy" section


@dataclass
class BuyingPlan:
    """What to buy: a plan in rounds for one model and a budget split across slices.

    Attributes
    ----------
    rounds : RoundPlan or None
        `curvefit.fitting.rounds.plan_rounds` on ``model``'s fit (the report's first model:
        the one that reaches the target with the fewest labels).
    model : str or None
        The label of the model the rounds plan is for.
    split : BudgetSplit or None
        `curvefit.fitting.rounds.plan_slices` on ``slices``; its ``fits`` are the slices'
        curves.
    slices : SliceCurves or None
        The per-slice curves (``curvefit measure ... --slice COL``).
    notes : list of str
        Why a piece is missing, or what the plans warn about.
    """

    rounds: Any = None
    model: str | None = None
    split: Any = None
    slices: Any = None
    notes: list = field(default_factory=list)

    def to_dict(self) -> dict:
        return jsonable({"rounds": self.rounds.to_dict() if self.rounds is not None else None,
                         "model": self.model,
                         "split": self.split.to_dict() if self.split is not None else None,
                         "slice_column": self.slices.column if self.slices is not None else None,
                         "notes": list(self.notes)})


def run_step(fn: Callable[[], Any], notes: list, what: str):
    """Run one API step; a failure becomes a note (``what: reason``), not a crash."""
    try:
        return fn()
    except InputError as exc:
        notes.append(f"{what}: {exc}")
    except Exception as exc:  # noqa: BLE001 - any numeric failure is reported, not fatal
        notes.append(f"{what} failed: {type(exc).__name__}: {exc}")
    return None


# --------------------------------------------------------------------------- analysis

def check_fit_settings(interval, bootstrap, random_state) -> tuple:
    """The level, bootstrap count and seed of every fit, checked once (refused here, not as
    a note in every fit)."""
    return check_level(interval), check_count(bootstrap, "bootstrap"), check_seed(random_state)


def analyse(curves: Any, *, target_error: float | None = None, bootstrap: int = BOOTSTRAP,
            random_state: int = SEED, interval: float = INTERVAL, capacity: bool = True,
            labels: Sequence[str] | None = None, sources: Sequence[str] | None = None,
            probe: Any = None) -> list[ModelResult]:
    """Fit each curve, answer the target and estimate capacity from the gap.

    Parameters
    ----------
    curves : Curve, list of Curve, or dict label -> Curve
    target_error : float, optional
        Test error to reach; the answer is ``fit.samples_for(test_error=...)``.
    bootstrap : int
        Bootstrap replicates for the fit and capacity intervals.
    random_state : int
        Seed passed to every fit, so the report is reproducible.
    interval : float
        Level of every interval.
    capacity : bool
        Also run ``effective_capacity`` on curves that have a training error.
    labels, sources : list of str, optional
        A label and a source file per curve.
    probe : CapacityEstimate, optional
        A max-deviation probe; used in place of each model's gap capacity for the
        worst-case comparison.

    Returns
    -------
    list of ModelResult
        One per curve, in the given order. A step that fails leaves its field None
        and a note saying why.
    """
    interval, bootstrap, random_state = check_fit_settings(interval, bootstrap, random_state)
    items = as_items(curves)
    check_target(target_error, [c for _, c in items])
    results = []
    for i, (label, curve) in enumerate(items):
        if not isinstance(curve, Curve):
            raise InputError(f"expected a Curve, got {type(curve).__name__}")
        label = (labels[i] if labels and i < len(labels) else None) or label \
            or model_label(curve, i)
        res = ModelResult(label=str(label), curve=curve,
                          source=sources[i] if sources and i < len(sources) else None)
        _fit_one(res, bootstrap, random_state, interval, capacity)
        results.append(res)
    if target_error is not None:
        answer_target(results, target_error, interval=interval, probe=probe)
    return results


def _fit_one(res: ModelResult, bootstrap: int, random_state, interval: float,
             capacity: bool) -> None:
    """The fit, its forecasts, and the capacity from the gap of one result."""
    from curvefit.fitting.engine import fit_curve

    curve = res.curve
    if len(curve.ok_points()) == 0:
        res.notes.append("no cell finished, so nothing could be fitted")
        return
    res.fit = run_step(lambda: fit_curve(curve, on="test", bootstrap=bootstrap,
                                         random_state=random_state), res.notes, "curve fit")
    if res.fit is not None:
        have = float(curve.sizes.max())
        res.forecast = run_step(lambda: res.fit.predict([have * k for k in FORECAST_MULTIPLES],
                                                        interval=interval),
                                res.notes, "forecast")
    check_sanity(res, interval)
    if capacity and curve.has_train:
        from curvefit.capacity import effective_capacity

        res.capacity = run_step(lambda: effective_capacity(curve, bootstrap=bootstrap,
                                                           random_state=random_state,
                                                           interval=interval),
                                res.notes, "capacity from the gap")
        res.gap_lines = gap_lines(curve, res.capacity)


def answer_target(results: Sequence[ModelResult], target_error: float, *,
                  interval: float = INTERVAL, probe: Any = None) -> None:
    """Set each result's ``answer`` for ``target_error`` and its worst-case comparison."""
    for r in results:
        if r.fit is not None:
            r.answer = run_step(lambda: r.fit.samples_for(test_error=target_error,
                                                          interval=interval),
                                r.notes, "sample size for the target")
            check_sanity(r, interval)
        r.worst_case = worst_case(r, probe if probe is not None else r.capacity,
                                  target_error, interval)


def check_sanity(res: ModelResult, interval: float = INTERVAL) -> None:
    """Set ``res.sanity``: the constant predictor beside the answer and the forecasts, the
    imbalance hint, and answers or forecasts below the fitted floor."""
    from curvefit.fitting.sanity import sanity_check

    if not len(res.curve.ok_points()):
        return
    res.sanity = run_step(lambda: sanity_check(res.curve, res.fit, answer=res.answer,
                                               forecasts=res.forecast, interval=interval),
                          res.notes, "sanity check")


def check_target(target_error: float | None, curves: Sequence[Curve]) -> None:
    """A target error must be finite and ≥ 0, and inside (0, 1) for 0-1 error rates."""
    if target_error is None:
        return
    check_error_target(target_error, "target_error", rate=all(is_rate(c.metric) for c in curves))


def gap_lines(curve: Curve, capacity: Any) -> list:
    """The fitted gap curves of a capacity estimate, as ``(name, sizes, gaps)``.

    The estimate's own fit at the sizes it used (``design["gap_fit"]``, c(ν)·h/n), or,
    for estimates with a free scale, the VC-shaped ``s·Φ(n/h)`` on a grid over the
    measured sizes; and the power law ``a·n^-b`` where the estimate holds one.
    """
    from curvefit.capacity import phi

    if capacity is None or not len(curve.sizes):
        return []
    grid = np.geomspace(curve.sizes.min(), curve.sizes.max() * 2, 120)
    extra = field_of(capacity, "extra", None) or {}
    lines = []
    h = extra.get("h_fit", field_of(capacity, "vc_dim"))
    s = field_of(capacity, "scale")
    design = field_of(capacity, "design")
    if is_finite(h) and is_finite(s) and float(h) > 0:
        lines.append((f"VC-shaped fit s·Φ(n/h), h = {format_capacity(h)}", grid,
                      float(s) * np.asarray(phi(grid / float(h)), float)))
    elif is_finite(h) and isinstance(design, pd.DataFrame) and {"size", "gap_fit"} <= set(design):
        used = design[np.isfinite(pd.to_numeric(design["gap_fit"], errors="coerce"))]
        if len(used):
            # squared error's figure is a number of parameters (optimism 2·σ²·p/n), not VC units
            law = ("2·σ²·p/n, p" if field_of(capacity, "method") == "optimism" else "c(ν)·h/n, h")
            lines.append((f"fit {law} = {format_capacity(h)}", used["size"].to_numpy(float),
                          used["gap_fit"].to_numpy(float)))
    a, b = extra.get("power_scale"), field_of(field_of(capacity, "exponent"), "estimate")
    if is_finite(a) and is_finite(b):
        lines.append((f"power-law fit a·n^-b, b = {format_number(b, 3)}", grid,
                      float(a) * grid ** (-float(b))))
    return lines


def worst_case(res: ModelResult, capacity: Any, target_error: float,
               interval: float = INTERVAL) -> WorstCase | None:
    """The VC bound and the 10 × d rule beside the measured answer, for one model.

    The bound limits the gap between test and training error: it is asked for
    ε = target − training error at the answer's size (`curvefit.fitting.planning.vc_epsilon`)
    with probability ``interval``. None for a loss other than the 0-1 loss (the one VC
    theory bounds), without a usable capacity (a capacity whose status is not "ok" or
    "above_range" is not put into a bound), an answer, or training error.
    """
    from curvefit import bounds
    from curvefit.fitting.planning import vc_epsilon

    d = field_of(capacity, "vc_dim")
    status = field_of(capacity, "status", "ok")
    if not is_zero_one(res.curve.metric):  # VC theory bounds the 0-1 loss only
        return None
    if not is_finite(d) or float(d) <= 0 or res.answer is None or status not in ("ok", "above_range"):
        return None
    reachable = bool(field_of(res.answer, "reachable", False))
    n = field_of(res.answer, "n")
    eps, source, refused = vc_epsilon(res.curve, test_error=float(target_error),
                                      n=float(n) if reachable and is_finite(n) else None)
    if refused is not None:
        return None
    eps = max(eps, MIN_EPS)
    delta = round(1.0 - interval, 6)
    dims = int(math.ceil(float(d)))
    above = bool(field_of(capacity, "above_range", False)) or status == "above_range"
    rows = []
    try:
        rows.append({"label": f"VC bound (d{'≥' if above else '='}{format_capacity(d)}, "
                              f"ε={format_number(eps, 3)}, δ={delta:g})",
                     "n": float(bounds.vc_sample_size(dims, eps, delta).n_samples), "kind": "bound"})
    except Exception:  # noqa: BLE001 - skip a bound that cannot be computed
        pass
    rows.append({"label": "rule of thumb, 10 × d",
                 "n": float(bounds.rule_of_thumb_samples(dims)), "kind": "rule"})
    if reachable and is_finite(n):
        rows.append({"label": f"measured: {res.label}", "n": float(n),
                     "low": field_of(res.answer, "low"), "high": field_of(res.answer, "high"),
                     "kind": "measured"})
    return WorstCase(res.label, float(d), str(field_of(capacity, "method", "estimate")),
                     eps, delta, rows, eps_source=source, lower_bound=above)


def check_buying(*, target_error=None, label_cost=None, round_cost=None, penalty=None,
                 probability=None, max_rounds=None, slices=None, budget=None, slice_costs=None,
                 slice_errors=None, interval: float = INTERVAL) -> dict | None:
    """The settings of a "what to buy" section, checked before any fitting.

    A plan in rounds is asked for by ``penalty`` or ``probability`` (and then needs
    ``target_error`` and ``label_cost``); a budget split by ``slices`` (and then needs
    ``budget`` or ``slice_errors``). Returns the checked settings, or None when neither
    is asked for.
    """
    from curvefit.fitting.rounds import check_plan_settings

    rounds = penalty is not None or probability is not None
    if slices is None and any(v is not None for v in (budget, slice_costs, slice_errors)):
        raise InputError("slices (the per-slice curves, from curvefit measure --slice) are "
                         "needed by budget, slice_costs and slice_errors")
    if not rounds and any(v is not None for v in (round_cost, max_rounds)):
        raise InputError("round_cost and max_rounds shape a plan in rounds; give penalty (the "
                         "cost of a miss) or probability (the chance of reaching the target)")
    if not rounds and slices is None:
        if label_cost is not None:
            raise InputError("label_cost prices a plan: give penalty or probability for a plan "
                             "in rounds, or slices for a split across slices")
        return None
    settings = {"slices": slices, "budget": budget, "targets": slice_errors, "rounds": None}
    if rounds:
        if target_error is None:
            raise InputError("a plan in rounds needs target_error, the test error to reach")
        if label_cost is None:
            raise InputError("a plan in rounds needs label_cost, the price of one label")
        cost, per_round, pen, prob, most, _ = check_plan_settings(
            label_cost, 0.0 if round_cost is None else round_cost, penalty, probability,
            3 if max_rounds is None else max_rounds, interval)
        settings["rounds"] = dict(label_cost=cost, round_cost=per_round, penalty=pen,
                                  probability=prob, max_rounds=most)
    if slices is not None:
        if (budget is None) == (slice_errors is None):
            raise InputError("budget (money to split) or slice_errors (a target per slice), "
                             "one of them, goes with per-slice curves")
        if slice_costs is not None and label_cost is not None and not rounds:
            # with a plan in rounds, label_cost prices the rounds and slice_costs the split
            raise InputError("give label_cost (one price) or slice_costs (per slice), not both")
        settings["label_costs"] = (slice_costs if slice_costs is not None else
                                   label_cost if label_cost is not None else 1.0)
    return settings


def plan_buying(results: Sequence[ModelResult], *, target_error: float | None = None,
                label_cost: float | None = None, round_cost: float | None = None,
                penalty: float | None = None, probability: float | None = None,
                max_rounds: int | None = None, slices: Any = None, budget: float | None = None,
                slice_costs: dict | None = None, slice_errors: dict | None = None,
                interval: float = INTERVAL, bootstrap: int = BOOTSTRAP,
                random_state: int = SEED) -> BuyingPlan | None:
    """What to buy: a plan in rounds for the first model, and a budget split across slices.

    Parameters
    ----------
    results : list of ModelResult
        From `analyse`; the plan in rounds is made on the fit of the model that reaches
        ``target_error`` with the fewest labels (the report's first model).
    target_error, label_cost, round_cost, penalty, probability, max_rounds
        As for `curvefit.fitting.rounds.plan_rounds` (``penalty`` or ``probability``
        asks for the plan; ``round_cost`` 0 and ``max_rounds`` 3 by default).
    slices : SliceCurves or path, optional
        Per-slice curves (or their file); with ``budget`` (money to split) or ``slice_errors``
        (``slice -> target``), `curvefit.fitting.rounds.plan_slices` splits the purchase.
    slice_costs : dict, optional
        ``slice -> price of one label`` in the split (else ``label_cost``, else 1 per
        label); beside a plan in rounds, ``label_cost`` prices the rounds only.
    interval, bootstrap, random_state
        Level of every interval; bootstrap replicates and seed of the slices' fits.

    Returns
    -------
    BuyingPlan or None
        None when neither a plan in rounds nor a split was asked for. A step that fails
        leaves its field None and a note saying why.

    References
    ----------
    .. [1] R. Mahmood et al., "Optimizing Data Collection for Machine Learning",
           NeurIPS 2022 (rounds).
    .. [2] K. H. Tae and S. E. Whang, "Slice Tuner", SIGMOD 2021 (per-slice acquisition).
    """
    from curvefit.fitting.rounds import plan_rounds, plan_slices
    from curvefit.measuring.slices import SliceCurves
    from curvefit.report.html import order_results

    if isinstance(slices, (str, os.PathLike)):
        slices = SliceCurves.read(slices)
    settings = check_buying(target_error=target_error, label_cost=label_cost,
                            round_cost=round_cost, penalty=penalty, probability=probability,
                            max_rounds=max_rounds, slices=slices, budget=budget,
                            slice_costs=slice_costs, slice_errors=slice_errors, interval=interval)
    if settings is None:
        return None
    plan = BuyingPlan(slices=slices)
    if slices is not None:
        plan.split = plan_slices(slices, budget=budget, targets=slice_errors,
                                 label_costs=settings["label_costs"], interval=interval,
                                 bootstrap=bootstrap, random_state=random_state)
        plan.notes += [f"split: {n}" for n in plan.split.notes]
    if settings["rounds"] is not None:
        best = next((r for r in order_results(list(results)) if r.fit is not None), None)
        if best is None:
            plan.notes.append("plan in rounds: no model has a fitted curve")
        else:
            plan.model = best.label
            plan.rounds = run_step(lambda: plan_rounds(best.curve, test_error=target_error,
                                                       fit=best.fit, interval=interval,
                                                       **settings["rounds"]),
                                   plan.notes, "plan in rounds")
            if plan.rounds is not None:
                plan.notes += [f"plan in rounds: {n}" for n in plan.rounds.warnings]
    return plan


def result_summary(res: ModelResult) -> dict:
    """Plain JSON-ready headline of one model: chosen family, answer, capacity, the
    constant predictor and the sanity flags, notes."""
    ans, cap = res.answer, res.capacity
    return jsonable({
        "label": res.label, "source": res.source,
        "best": family_name(field_of(res.fit, "best")),
        "answer": None if ans is None else {
            k: field_of(ans, k) for k in ("n", "low", "high", "reachable", "beyond_horizon",
                                          "message")},
        "capacity": None if cap is None else {
            k: field_of(cap, k) for k in ("vc_dim", "low", "high", "level", "method", "above_range")},
        "sanity": res.sanity.to_dict() if res.sanity is not None else None,
        "notes": list(res.notes),
    })


# --------------------------------------------------------------------------- report job
def run_labels(curves: Sequence[Curve], paths: Sequence[Any]) -> list[str]:
    """Model labels for runs; two runs of the same model get their file name added.

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [10], "test_error": [0.3]}), meta={"label": "m"})
    >>> run_labels([c, c, c], ["a/x.json", "b/y.json", "c/y.json"])
    ['m (x)', 'm (y)', 'm (y) #2']
    """
    models = [model_label(c, i) for i, c in enumerate(curves)]
    labels = [f"{lab} ({Path(paths[i]).stem})" if models.count(lab) > 1 else lab
              for i, lab in enumerate(models)]
    seen: dict[str, int] = {}
    for i, lab in enumerate(labels):  # same model and same file stem: number them
        seen[lab] = seen.get(lab, 0) + 1
        if seen[lab] > 1:
            labels[i] = f"{lab} #{seen[lab]}"
    return labels


def read_probe(path: str | os.PathLike):
    """A saved probe result (``curvefit capacity --probe ... --out``)."""
    from curvefit.capacity import CapacityEstimate

    doc = read_json(path, "saved capacity")
    if isinstance(doc, dict) and "vc_dim" not in doc and isinstance(doc.get("capacity"), dict):
        doc = doc["capacity"]  # tolerate a wrapper object around the estimate
    return CapacityEstimate.from_dict(doc)


def read_tradeoff(path: str | os.PathLike):
    """A saved trade-off result (``curvefit tradeoff ... --out``)."""
    from curvefit.capacity.tradeoff import Tradeoff

    doc = read_json(path, "saved trade-off")
    if isinstance(doc, dict) and "table" not in doc and isinstance(doc.get("tradeoff"), dict):
        doc = doc["tradeoff"]
    try:
        return Tradeoff.from_dict(doc)
    except InputError:
        raise
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{path} is not a saved trade-off ({type(exc).__name__}: {exc})") from None


def check_report_path(out: str | os.PathLike) -> Path:
    """The report's file: an ``.html`` name in an existing folder."""
    out = Path(out)
    if out.suffix.lower() not in (".html", ".htm"):
        raise InputError(f"the report must be an .html file, got {out}")
    if not out.parent.exists():
        raise InputError(f"folder {out.parent} does not exist; create it or choose another file")
    return check_output_path(out, "report")


def report_runs(runs: Sequence[str | os.PathLike], out: str | os.PathLike = "report.html", *,
                target_error: float | None = None, capacity: str | os.PathLike | None = None,
                tradeoff: str | os.PathLike | None = None, title: str = "Learning-curve report",
                bootstrap: int = BOOTSTRAP, random_state: int = SEED,
                interval: float = INTERVAL,
                progress: Callable[[str], None] | None = None,
                buying: dict | None = None) -> ReportResult:
    """Read run files, analyse them and write the self-contained HTML report.

    Parameters
    ----------
    runs : list of path
        Run files or curve tables, one per model.
    out : path
        The ``.html`` file; figures go to ``<stem>_files/`` beside it.
    target_error : float, optional
        The report opens with the labelled samples needed for it.
    capacity, tradeoff : path, optional
        A saved probe result and a saved trade-off result to include.
    title : str
    bootstrap, random_state, interval
        Settings of every fit (same seed, same report).
    progress : callable, optional
        Receives one line of progress text.
    buying : dict, optional
        The keyword arguments of `plan_buying` for a "what to buy" section; its
        ``slices`` may be the path of a per-slice file.

    Returns
    -------
    ReportResult
    """
    from curvefit.report.html import figure_dir_for, write_report

    out = check_report_path(out)
    curves = [Curve.read(p) for p in runs]
    check_target(target_error, curves)
    probe = read_probe(capacity) if capacity else None
    trade = read_tradeoff(tradeoff) if tradeoff else None
    check_fit_settings(interval, bootstrap, random_state)  # before the first progress line
    buying = dict(buying or {})
    if isinstance(buying.get("slices"), (str, os.PathLike)):
        from curvefit.measuring.slices import SliceCurves

        buying["slices"] = SliceCurves.read(buying["slices"])
    wanted = check_buying(target_error=target_error, interval=interval, **buying)
    if progress is not None:
        progress(f"fitting {len(curves)} run(s) ...")
    results = analyse(curves, target_error=target_error, bootstrap=bootstrap,
                      random_state=random_state, interval=interval,
                      labels=run_labels(curves, runs), sources=[str(p) for p in runs],
                      probe=probe)
    plan = None
    if wanted is not None:
        if progress is not None:
            progress("planning what to buy ...")
        plan = plan_buying(results, target_error=target_error, interval=interval,
                           bootstrap=bootstrap, random_state=random_state, **buying)
    path = write_report(out, results, target_error=target_error, probe=probe, tradeoff=trade,
                        title=title, interval=interval, buying=plan)
    figures = sorted(str(p) for p in figure_dir_for(path).glob("*"))
    return ReportResult(path, figures, results, plan)
