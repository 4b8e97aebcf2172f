"""`curvefit demo [--out DIR]`: the whole job on the bundled packhouse scenario.

Measures two models of different capacity (a logistic regression and a gradient-boosted
tree ensemble) on the synthetic fruit-grading table in ``datasets_demo/``, fits their
learning curves, picks a target the better model can reach, answers how many labelled
samples it needs, prices a label purchase at an invented cost, and writes the run
files, the fits, the plan and the HTML report into DIR. `run_demo` does the work
through the public API; the command only prints.
"""

from __future__ import annotations

import json
import math
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

import numpy as np
import typer

from curvefit.cli.common import emit_json, err, out
from curvefit.core.errors import InputError

DATA_FILE = Path(__file__).resolve().parents[2] / "datasets_demo" / "packhouse.csv"
TARGET = "rejected"
GROUPS = "orchard"
NOT_FEATURES = ["orchard", "day"]  # ids and calendar: a model could memorise orchards by id
SIZES = [int(round(v)) for v in np.geomspace(150, 12000, 7)]
REPEATS = 5
COST_PER_LABEL = 0.40   # invented: what one inspected, labelled fruit costs the packhouse
EXTRA_LABELS = [2000, 5000, 10000, 20000, 40000]
BOOTSTRAP = 200


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


def choose_target(fit, largest: float) -> float | None:
    """A target the model reaches a little beyond the data: the forecast at 3× (else 2×,
    1.5×, 1×) the largest measured size, rounded up to half a percentage point; a target
    whose interval is closed is preferred over one whose upper end is open."""
    fallback = None
    for mult in (3.0, 2.0, 1.5, 1.0):
        pred = fit.predict(np.array([largest * mult]), interval=0.9)
        est = float(pred["estimate"].iloc[0]) if hasattr(pred, "iloc") else float(pred.estimate)
        if not math.isfinite(est) or est <= 0:
            continue
        target = math.ceil(est * 200 - 1e-9) / 200.0
        try:
            ans = fit.samples_for(test_error=target, interval=0.9)
        except InputError:
            continue
        if ans.reachable and math.isfinite(ans.n):
            if math.isfinite(ans.high):
                return target
            fallback = fallback if fallback is not None else target
    return fallback


def run_demo(out_dir: Path, *, n_jobs: int = 2, random_state: int = 0,
             log: Callable[[str], None] = lambda s: None) -> DemoResult:
    """Measure, fit, plan and report on the demo scenario; write everything to ``out_dir``."""
    import warnings

    from curvefit.report import html as rep
    from curvefit.measuring.data import load_table, prepare
    from curvefit.core.errors import FitWarning
    from curvefit.measuring.runner import measure

    t0 = time.perf_counter()
    if not DATA_FILE.is_file():
        raise InputError(f"the demo data is missing ({DATA_FILE}); run "
                         "python scripts/make_demo_data.py from the repository root")
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"--out {out_dir} is a file; give a folder")
    out_dir.mkdir(parents=True, exist_ok=True)

    table = load_table(DATA_FILE)
    data = prepare(table, TARGET, drop=NOT_FEATURES)
    groups = table[GROUPS].to_numpy()
    log(f"demo data: {len(table):,} rows, {len(data.feature_names)} features, "
        f"groups by {GROUPS}")

    curves, runs = {}, {}
    for stem, label, factory in demo_models():
        t = time.perf_counter()
        log(f"measuring {label} at sizes {', '.join(map(str, SIZES))} x {REPEATS} repeats ...")
        curve = measure(factory, data.X, data.y, sizes=SIZES, repeats=REPEATS,
                        test_size=0.2, groups=groups, n_jobs=n_jobs, random_state=random_state,
                        meta={"label": label, "data": {"file": DATA_FILE.name,
                                                       "fingerprint": data.fingerprint,
                                                       "target": TARGET, "groups": GROUPS,
                                                       "excluded": NOT_FEATURES}})
        path = out_dir / f"run-{stem}.json"
        curve.write(path)
        curves[label], runs[label] = curve, path
        log(f"  done in {time.perf_counter() - t:.0f} s -> {path}")

    log("fitting curve families ...")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)  # the report lists the fits' warnings
        results = rep.analyse(curves, bootstrap=BOOTSTRAP, random_state=random_state,
                              sources=[str(p) for p in runs.values()])
        by_err = sorted(results, key=lambda r: float(
            r.curve.summary()["test_mean"].iloc[-1]) if len(r.curve.ok_points()) else math.inf)
        best = next((r for r in by_err if r.fit is not None), None)
        target = None
        if best is not None:
            target = choose_target(best.fit, float(best.curve.sizes.max()))
        if target is not None:
            for r in results:
                if r.fit is not None:
                    r.answer = rep._call(lambda: r.fit.samples_for(test_error=target),
                                         r.notes, "sample size for the target")

    fit_file = out_dir / "fit.json"
    fit_doc = {"format": "curvefit.demo-fits/1", "target_error": target,
               "fits": {r.label: (r.fit.to_dict() if r.fit is not None else None)
                        for r in results},
               "answers": {r.label: (r.answer.to_dict() if hasattr(r.answer, "to_dict") else None)
                           for r in results}}
    from curvefit.core.jsonio import jsonable
    fit_file.write_text(json.dumps(jsonable(fit_doc), indent=1, allow_nan=False) + "\n",
                        encoding="utf-8")

    plan = plan_csv = plan_json = None
    note = None
    if best is not None:
        from curvefit.fitting.planning import plan_purchase

        have = int(best.curve.sizes.max())
        plan = rep._call(lambda: plan_purchase(best.fit, current_n=have, extra=EXTRA_LABELS,
                                               cost_per_label=COST_PER_LABEL),
                         best.notes, "label purchase plan")
        if plan is not None:
            plan_csv, plan_json = out_dir / "plan.csv", out_dir / "plan.json"
            plan.to_csv(plan_csv, index=False)
            plan_json.write_text(json.dumps(jsonable({
                "model": best.label, "current_n": have, "cost_per_label": COST_PER_LABEL,
                "rows": plan.to_dict(orient="records")}), indent=1, allow_nan=False) + "\n",
                encoding="utf-8")
            note = (f"Starting from the {have:,} labelled samples measured, at an invented "
                    f"cost of {COST_PER_LABEL:.2f} per label; expected test error with its "
                    f"90% interval.")

    log("writing the report ...")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        report_path = rep.write_report(
            out_dir / "report.html", results, target_error=target, purchase=plan,
            purchase_note=note, title="Demo: fruit grading at a fictional packhouse")
    return DemoResult(out_dir=out_dir, report=report_path, runs=runs, fit_file=fit_file,
                      plan_csv=plan_csv, plan_json=plan_json, target_error=target,
                      best_label=best.label if best else None,
                      answer=best.answer if best else None, plan=plan, results=results,
                      seconds=time.perf_counter() - t0)


def register(app: typer.Typer) -> None:
    @app.command("demo")
    def demo_cmd(
        out_dir: Path = typer.Option(Path("curvefit-demo"), "--out", "-o",
                                     help="Folder for the run files, fits, plan and report."),
        jobs: int = typer.Option(2, "--jobs", "-j", help="Parallel fits."),
        seed: int = typer.Option(0, "--seed", help="The one seed of the demo."),
        json_out: bool = typer.Option(False, "--json", help="Print a JSON summary on stdout."),
        quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress on stderr."),
    ):
        """Run the whole job on the bundled demo scenario and write the report."""
        from curvefit.report import html as rep

        if jobs < 1:
            raise InputError(f"--jobs must be >= 1, got {jobs}")
        log = (lambda s: None) if quiet else (lambda s: err.print(s, markup=False))
        res = run_demo(out_dir, n_jobs=jobs, random_state=seed, log=log)
        if json_out:
            emit_json({"report": str(res.report), "target_error": res.target_error,
                       "best": res.best_label, "seconds": res.seconds,
                       "runs": {k: str(v) for k, v in res.runs.items()},
                       "fit": str(res.fit_file),
                       "plan": str(res.plan_csv) if res.plan_csv else None,
                       "models": [rep.result_summary(r) for r in res.results]})
            return
        out.print("[bold]curvefit demo[/bold]: fruit grading at a fictional packhouse "
                  "(synthetic data)")
        for r in res.results:
            s = r.curve.summary()
            last = s.iloc[-1] if len(s) else None
            best = getattr(r.fit, "best", None) or "no fit"
            measured = (f"{100 * last['test_mean']:.1f}% test error at "
                        f"{int(last['size']):,} labels" if last is not None else "no data")
            out.print(f"  {r.label}: {measured}; curve family {best}", markup=False)
        if res.target_error is not None:
            out.print(f"target: {100 * res.target_error:.1f}% test error")
            for r in res.results:
                if r.answer is not None:
                    out.print(f"  {r.label}: {r.answer.message}", markup=False)
        if res.plan is not None and len(res.plan):
            row = res.plan.iloc[min(1, len(res.plan) - 1)]
            out.print(f"buying {int(row['extra']):,} more labels ({res.best_label}) costs "
                      f"{row['cost']:,.0f} and is expected to give "
                      f"{100 * row['test_error']:.1f}% test error "
                      f"(90% interval {100 * row['low']:.1f}–{100 * row['high']:.1f}%)",
                      markup=False)
        out.print(f"files in {res.out_dir}: run files, fit.json, plan.csv/plan.json, "
                  f"report ({res.seconds:.0f} s)", markup=False)
        out.print(str(res.report), markup=False)
