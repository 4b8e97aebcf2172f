"""The demo: the whole job on the bundled packhouse scenario, callable as ``cf.run_demo``.

Measures two models of different capacity (a logistic regression and a gradient-boosted
tree ensemble) on the synthetic fruit-grading table shipped with the package
(`curvefit.workflows.packhouse`), fits their learning curves, picks a target the better
model can reach, answers how many labelled samples it needs, prices a label purchase at
an invented cost, plans that purchase in rounds, measures the better model per apple
variety and splits a label budget across the varieties at invented per-variety label
costs, and writes the run files, the fits, the plans and the HTML report into one folder.
``curvefit demo`` runs it and prints the `DemoResult`.
"""

from __future__ import annotations

import math
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import FitWarning, InputError
from curvefit.core.formatting import format_level
from curvefit.core.jsonio import write_json, write_text_atomic
from curvefit.core.validate import check_jobs
from curvefit.workflows.analysis import ModelResult, analyse, answer_target, plan_buying, run_step

TARGET = "rejected"
GROUPS = "orchard"
NOT_FEATURES = ["orchard", "day"]  # ids and calendar: a model could memorise orchards by id
SIZES = [int(round(v)) for v in np.geomspace(150, 12000, 7)]
REPEATS = 5
TEST_SIZE = 0.2
COST_PER_LABEL = 0.40   # invented: what one inspected, labelled fruit costs the packhouse
EXTRA_LABELS = [2000, 5000, 10000, 20000, 40000]
# Multiples of the largest measured size whose forecast may become the target, in order.
TARGET_MULTIPLES = (3.0, 2.0, 1.5, 1.0)
TITLE = "Demo: fruit grading at a fictional packhouse"
# The plan in rounds, at invented costs: setting up a labelling round and retraining, and
# a season graded above the target.
ROUND_COST = 300.0
PENALTY = 20000.0
MAX_ROUNDS = 3
# The purchase split per apple variety. Few sizes and repeats, and the boosted trees
# with 60 iterations instead of 150, keep this step to a few seconds.
SLICE_COLUMN = "variety"
SLICE_SIZES = 5
SLICE_REPEATS = 2
SLICE_BOOTSTRAP = 100
SLICE_BUDGET = 2000.0
# Invented label prices per variety: a russet's rough skin hides blemishes, so grading
# one takes longer; Embervale is picked from steep slopes.
SLICE_COSTS = {"Ambercrest": 0.40, "Brindle Pippin": 0.40, "Coldharbour": 0.40,
               "Dunmore Russet": 1.00, "Embervale": 0.60}


def make_logistic():
    """Low capacity: a linear model on standardised inputs."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    # scaled inputs: lbfgs converges in a few dozen iterations instead of hundreds
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))


def make_boosted():
    """Higher capacity: gradient-boosted trees."""
    from sklearn.ensemble import HistGradientBoostingClassifier

    return HistGradientBoostingClassifier(max_iter=150, learning_rate=0.1)


def make_boosted_light():
    """The gradient-boosted trees with fewer iterations: the per-variety curves' model."""
    from sklearn.ensemble import HistGradientBoostingClassifier

    return HistGradientBoostingClassifier(max_iter=60, learning_rate=0.1)


def demo_models() -> list[tuple[str, str, Callable]]:
    """(file stem, label, factory) for the models the demo compares, low capacity first."""
    return [("logistic", "logistic regression", make_logistic),
            ("boosted", "gradient-boosted trees", make_boosted)]


@dataclass
class DemoResult:
    """What the demo wrote and found."""

    out_dir: Path
    report: Path
    runs: dict
    fit_file: Path
    plan_csv: Path | None
    plan_json: Path | None
    target_error: float | None
    best_label: str | None
    answer: object = None
    plan: object = None
    results: list = field(default_factory=list)
    seconds: float = math.nan
    slices_file: Path | None = None
    buying_file: Path | None = None
    buying: object = None      # BuyingPlan: the plan in rounds and the split per variety


def choose_target(fit, largest: float) -> float | None:
    """A target the model reaches a little beyond the data.

    The forecast at 3× (else 2×, 1.5×, 1×) the largest measured size, rounded up to half
    a percentage point; a target whose interval is closed and whose answer carries no
    caution is preferred over one whose upper end is open (a caution: the fitted curve
    already at the target where the measured mean is not, say).
    """
    fallback = None
    for mult in TARGET_MULTIPLES:
        est = fit.error_at(largest * mult, interval=INTERVAL).estimate
        if not math.isfinite(est) or est <= 0:
            continue
        target = math.ceil(est * 200 - 1e-9) / 200.0
        try:
            ans = fit.samples_for(test_error=target, interval=INTERVAL)
        except InputError:
            continue
        if ans.reachable and math.isfinite(ans.n):
            if math.isfinite(ans.high) and not ans.warnings:
                return target
            fallback = fallback if fallback is not None else target
    return fallback


def _measure_models(out_dir: Path, n_jobs: int, random_state: int, log) -> tuple[dict, dict]:
    """Measure each demo model on the packhouse table; write one run file per model."""
    from curvefit.measuring.data import load_table, prepare
    from curvefit.measuring.runner import measure
    from curvefit.workflows.packhouse import demo_table_path

    path = demo_table_path()
    table = load_table(path)
    data = prepare(table, TARGET, drop=NOT_FEATURES)
    groups = table[GROUPS].to_numpy()
    log(f"demo data: {len(table):,} rows, {len(data.feature_names)} features, "
        f"groups by {GROUPS}")
    meta_data = {"file": path.name, "fingerprint": data.fingerprint, "target": TARGET,
                 "groups": GROUPS, "excluded": NOT_FEATURES}
    curves, runs = {}, {}
    for stem, label, factory in demo_models():
        t = time.perf_counter()
        log(f"measuring {label} at sizes {', '.join(map(str, SIZES))} x {REPEATS} repeats ...")
        curve = measure(factory, data.X, data.y, sizes=SIZES, repeats=REPEATS,
                        test_size=TEST_SIZE, groups=groups, n_jobs=n_jobs,
                        random_state=random_state, meta={"label": label, "data": meta_data})
        runs[label] = curve.write(out_dir / f"run-{stem}.json")
        curves[label] = curve
        log(f"  done in {time.perf_counter() - t:.0f} s -> {runs[label]}")
    return curves, runs


def _best(results: list[ModelResult]) -> ModelResult | None:
    """The fitted model with the lowest measured test error at its largest size."""
    def last_error(r):
        return float(r.curve.summary()["test_mean"].iloc[-1]) if len(r.curve.ok_points()) else math.inf

    return next((r for r in sorted(results, key=last_error) if r.fit is not None), None)


def _measure_varieties(best: ModelResult, out_dir: Path, n_jobs: int, random_state: int, log):
    """The better model's curve per apple variety (the others whole); slices-variety.json."""
    from curvefit.measuring.data import load_table, prepare
    from curvefit.measuring.slices import measure_slices
    from curvefit.workflows.packhouse import demo_table_path

    table = load_table(demo_table_path())
    data = prepare(table, TARGET, drop=NOT_FEATURES)
    factory = {"gradient-boosted trees": make_boosted_light}.get(
        best.label, next((f for _, label, f in demo_models() if label == best.label), make_boosted_light))
    t = time.perf_counter()
    log(f"measuring {best.label} per {SLICE_COLUMN} ({SLICE_SIZES} sizes x {SLICE_REPEATS} "
        "repeats per variety) ...")
    slices = measure_slices(factory, data.X, data.y, table[SLICE_COLUMN].astype(str).to_numpy(),
                            column=SLICE_COLUMN, repeats=SLICE_REPEATS, test_size=TEST_SIZE,
                            n_jobs=n_jobs, random_state=random_state, n_sizes=SLICE_SIZES)
    path = out_dir / f"slices-{SLICE_COLUMN}.json"
    slices.write(path)
    log(f"  done in {time.perf_counter() - t:.0f} s -> {path}")
    return slices, path


def _plan_buying(results: list[ModelResult], best: ModelResult, target: float | None,
                 out_dir: Path, n_jobs: int, random_state: int, bootstrap: int, log):
    """The plan in rounds for the target and the budget split per variety; buying-plan.json."""
    slices, slices_file = _measure_varieties(best, out_dir, n_jobs, random_state, log)
    rounds = ({} if target is None else
              dict(target_error=target, label_cost=COST_PER_LABEL, round_cost=ROUND_COST,
                   penalty=PENALTY, max_rounds=MAX_ROUNDS))
    log("planning what to buy ...")
    buying = plan_buying(results, slices=slices, budget=SLICE_BUDGET, slice_costs=SLICE_COSTS,
                         bootstrap=min(bootstrap, SLICE_BOOTSTRAP), random_state=random_state,
                         **rounds)
    buying_file = write_json(out_dir / "buying-plan.json", buying.to_dict(), what="buying plan")
    return buying, slices_file, buying_file


def _write_fits(path: Path, target: float | None, results: list[ModelResult]) -> Path:
    doc = {"format": "curvefit.demo-fits/1", "target_error": target,
           "fits": {r.label: (r.fit.to_dict() if r.fit is not None else None) for r in results},
           "answers": {r.label: (r.answer.to_dict() if hasattr(r.answer, "to_dict") else None)
                       for r in results},
           "sanity": {r.label: (r.sanity.to_dict() if r.sanity is not None else None)
                      for r in results}}
    return write_json(path, doc, what="fit file")


def _plan(best: ModelResult, out_dir: Path):
    """Price the label purchases for the best model; write plan.csv and plan.json."""
    from curvefit.core.formatting import format_money
    from curvefit.fitting.planning import plan_purchase

    have = int(best.curve.sizes.max())
    plan = run_step(lambda: plan_purchase(best.fit, current_n=have, extra=EXTRA_LABELS,
                                          cost_per_label=COST_PER_LABEL),
                    best.notes, "label purchase plan")
    if plan is None:
        return None, None, None, None
    plan_csv = write_text_atomic(out_dir / "plan.csv", plan.to_csv(index=False), what="plan")
    plan_json = write_json(out_dir / "plan.json", {
        "model": best.label, "current_n": have, "cost_per_label": COST_PER_LABEL,
        "rows": plan.to_dict(orient="records")}, what="plan")
    note = (f"Starting from the {have:,} labelled samples measured, at an invented cost of "
            f"{format_money(COST_PER_LABEL)} per label; expected test error with its "
            f"{format_level(INTERVAL)} interval.")
    return plan, plan_csv, plan_json, note


def run_demo(out_dir: str | Path = "curvefit-demo", *, n_jobs: int = 2,
             random_state: int = SEED, bootstrap: int = BOOTSTRAP,
             log: Callable[[str], None] | None = None) -> DemoResult:
    """Measure, fit, plan and report on the demo scenario; write everything to ``out_dir``.

    Parameters
    ----------
    out_dir : path
        Folder for the run files, ``fit.json``, ``plan.csv``/``plan.json``, the
        per-variety curves ``slices-variety.json``, ``buying-plan.json`` (the plan in
        rounds and the budget split) and ``report.html`` (created if absent).
    n_jobs : int
        Parallel fits while measuring.
    random_state : int
        The one seed of the demo.
    bootstrap : int
        Bootstrap replicates of the fits.
    log : callable, optional
        Receives one line of progress text at a time.

    Returns
    -------
    DemoResult
    """
    from curvefit.report.html import write_report

    log = log or (lambda s: None)
    n_jobs = check_jobs(n_jobs)
    t0 = time.perf_counter()
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"{out_dir} is a file; give a folder for the demo's files")
    out_dir.mkdir(parents=True, exist_ok=True)
    curves, runs = _measure_models(out_dir, n_jobs, random_state, log)

    log("fitting curve families ...")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)  # the report lists the fits' warnings
        results = analyse(curves, bootstrap=bootstrap, random_state=random_state,
                          sources=[str(p) for p in runs.values()])
        best = _best(results)
        target = choose_target(best.fit, float(best.curve.sizes.max())) if best else None
        if target is not None:
            answer_target(results, target)
        fit_file = _write_fits(out_dir / "fit.json", target, results)
        plan, plan_csv, plan_json, note = _plan(best, out_dir) if best else (None,) * 4
        buying, slices_file, buying_file = (
            _plan_buying(results, best, target, out_dir, n_jobs, random_state, bootstrap, log)
            if best else (None,) * 3)
        log("writing the report ...")
        report = write_report(out_dir / "report.html", results, target_error=target,
                              purchase=plan, purchase_note=note, title=TITLE, buying=buying)
    return DemoResult(out_dir=out_dir, report=report, runs=runs, fit_file=fit_file,
                      plan_csv=plan_csv, plan_json=plan_json, target_error=target,
                      best_label=best.label if best else None,
                      answer=best.answer if best else None, plan=plan, results=results,
                      seconds=time.perf_counter() - t0, slices_file=slices_file,
                      buying_file=buying_file, buying=buying)
