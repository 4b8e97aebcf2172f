"""`curvefit measure`: train a model on growing subsamples and write a run file.

Options may also come from ``--config job.toml``, whose keys are the long option names
(``target = "label"``, ``sizes = "50:5000:10"`` or a list, ``param = {C = 1.0}`` or a
list of ``"K=V"``, ``data = "table.csv"``); options on the command line win.
"""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from curvefit.cli.common import QUIET_HELP, emit_json, out, print_table, warn
from curvefit.core import defaults
from curvefit.core.errors import InputError
from curvefit.core.formatting import MISSING, format_error, metric_name
from curvefit.workflows.jobs import MEASURE_DEFAULTS, measure_from_settings, read_toml, resolve_job_paths


def _read_config(path: str) -> dict:
    p = Path(path)
    doc = read_toml(p, "config file")
    conf = {}
    for key, value in doc.items():
        name = str(key).replace("-", "_")
        if name not in MEASURE_DEFAULTS:
            raise InputError(f"unknown key {key!r} in config {path}; keys are the long option "
                             f"names of curvefit measure, e.g. target, model, sizes")
        conf[name] = value
    return resolve_job_paths(conf, p)


def _summary_rows(curve) -> list[dict]:
    s = curve.summary()
    keep = ["size", "n_repeats", "n_failed", "test_mean", "test_sem", "train_mean",
            "gap_mean", "n_test", "test_low", "test_high", "baseline_mean"]
    return s[keep].to_dict(orient="records")


def _print_summary(curve, path: Path, sanity) -> None:
    rows = _summary_rows(curve)
    metric = curve.metric
    unit = curve.meta.get("size_unit", "rows")
    name = metric_name(metric, curve.metric_info)
    out.print(f"learning curve: {curve.meta['model'].get('name', 'model')}, metric {name} "
              f"(lower is better), split {curve.meta['split']['kind']}, "
              f"{curve.meta['repeats']} repeats, test set {curve.meta['n_test']} rows",
              markup=False)
    head = [f"size ({unit})", "test mean", "± sem", "train mean", "gap", "constant", "failed"]
    table = []
    # a loss's exact-fit noise (1e-26 on a scale of 1e4) prints as 0
    scale = max([abs(r["test_mean"]) for r in rows if r["test_mean"] == r["test_mean"]] or [1.0])
    for r in rows:
        def f(v):
            return format_error(v, metric, scale)
        table.append([str(r["size"]), f(r["test_mean"]), f(r["test_sem"]), f(r["train_mean"]),
                      f(r["gap_mean"]), f(r["baseline_mean"]), str(r["n_failed"])])
    failed_sizes = set(curve.failed_points()["size"]) - {r["size"] for r in rows}
    for s in sorted(failed_sizes):
        table.append([str(s)] + [MISSING] * 5 + ["all"])
    print_table(head, table)
    if any(r["baseline_mean"] == r["baseline_mean"] for r in rows):
        predictor = curve.meta.get("baseline", "a constant")
        out.print(f"constant: the error of always predicting {predictor}, on the same test sets",
                  markup=False)
    for line in sanity.notes:
        out.print(line, markup=False)
    n_failed = len(curve.failed_points())
    out.print(f"wrote {path} ({len(curve.points)} cells, {n_failed} failed)", markup=False)


def _print_plan(plan) -> None:
    from curvefit.core.formatting import format_count, format_number
    from curvefit.core.progress import clock

    sizes = sorted({s for s, _ in plan.cells})
    per = {s: sum(1 for t, _ in plan.cells if t == s) for s in sizes}
    out.print(f"plan: {len(plan.cells)} cells at {len(sizes)} sizes ("
              + ", ".join(f"{format_count(s)}×{per[s]}" for s in sizes) + ")", markup=False)
    timed = ", ".join(f"{format_count(p['size'])} rows {format_number(p['fit_seconds'], 3)} s"
                      for p in plan.pilot)
    out.print(f"timed {len(plan.pilot)} pilot fits after a warm-up fit, not recorded: {timed}",
              markup=False)
    if plan.cost_model is None:
        out.print("no prediction: the pilot fits failed", markup=False)
        return
    cost = plan.cost_model
    out.print(f"cost model: {format_number(cost.scale, 3)}·n^{format_number(cost.exponent, 3)} "
              "seconds per fit", markup=False)
    out.print(f"predicted: {format_number(plan.fit_seconds, 3)} fit-seconds, "
              f"{clock(plan.wall_seconds)} wall on {plan.workers} worker(s)", markup=False)
    if plan.adaptive:
        out.print(f"{plan.adaptive}; the full grid ({plan.grid_cells} cells) would take "
                  f"{format_number(plan.grid_fit_seconds, 3)} fit-seconds, "
                  f"{clock(plan.grid_wall_seconds)} wall", markup=False)


def _print_costs(curve) -> None:
    from curvefit.core.formatting import format_number
    from curvefit.core.progress import clock

    costs = curve.meta.get("costs") or {}
    if "fit_seconds" not in costs:
        return
    line = (f"compute: {format_number(costs['fit_seconds'], 3)} fit-seconds, "
            f"{clock(costs['wall_seconds'])} wall")
    pred = costs.get("prediction")
    if pred:
        line += (f"; predicted {clock(pred['wall_seconds'])} for the {pred['cells']} cells after the "
                 f"first {pred['after_cells']}, took {clock(pred['actual_wall_seconds'])}")
    out.print(line, markup=False)


def run_measure(opts: dict) -> int:
    """Do the work of the command from merged options; return the exit code."""
    from curvefit.core.errors import FitWarning
    from curvefit.fitting.sanity import sanity_check
    from curvefit.measuring.journal import journal_path
    from curvefit.measuring.splits import LeakWarning

    if opts.get("plan_only"):
        plan, _, _ = measure_from_settings(opts)
        if opts["json"]:
            emit_json({"plan": plan.to_dict()})
        else:
            _print_plan(plan)
        return 0
    if not opts.get("out"):
        raise InputError("--out must name the run file to write")
    curve, out_path, caught = measure_from_settings(opts)
    for w in caught:
        if issubclass(w.category, (LeakWarning, FitWarning)):
            warn(str(w.message), bool(opts["quiet"]))
    n_failed = len(curve.failed_points())
    sanity = sanity_check(curve)
    if opts["json"]:
        emit_json({"run_file": str(out_path), "journal": str(journal_path(out_path)),
                   "n_cells": len(curve.points), "n_failed": n_failed,
                   "metric": curve.meta["metric_info"], "split": curve.meta["split"],
                   "sizes": curve.meta["sizes"], "repeats": curve.meta["repeats"],
                   "summary": _summary_rows(curve), "sanity": sanity.to_dict(),
                   "costs": curve.meta.get("costs"), "adaptive": curve.meta.get("adaptive"),
                   "rounds": curve.meta.get("rounds"), "reused_cells": curve.meta.get("reused_cells")})
    else:
        _print_summary(curve, out_path, sanity)
        if curve.meta.get("rounds"):
            from curvefit.measuring.growing import growth_summary

            out.print(growth_summary(curve), markup=False)
        if curve.meta.get("adaptive"):
            # the fixed grid's prediction and times are in meta.costs and the progress lines
            _print_costs(curve)
            out.print(curve.meta["adaptive"]["summary"], markup=False)
    if n_failed:
        first = curve.failed_points().iloc[0]
        warn(f"{n_failed} cell(s) failed (first: size {first['size']}, repeat {first['repeat']}: "
             f"{first['message']}); they are recorded in the run file", bool(opts["quiet"]))
        return 3
    return 0


def register(app: typer.Typer) -> None:
    @app.command("measure")
    def measure_cmd(
        data: Optional[str] = typer.Argument(None, help="Data table: CSV, TSV, Parquet or NPZ."),
        target: Optional[str] = typer.Option(None, "--target", help="Target column."),
        model: Optional[str] = typer.Option(None, "--model",
                                            help="package.module:Name or path/to/file.py:make_model."),
        param: Optional[List[str]] = typer.Option(None, "--param",
                                                  help="Model parameter KEY=VALUE (repeatable)."),
        command: Optional[str] = typer.Option(None, "--command",
                                              help='Trainer program: "prog {train} {test} {predictions}".'),
        trainer_format: Optional[str] = typer.Option(
            None, "--trainer-format", help="Files a --command trainer reads: csv, parquet or npz."),
        features: Optional[str] = typer.Option(None, "--features",
                                               help="Feature columns a,b,c (default: all others)."),
        test: Optional[str] = typer.Option(None, "--test", help="Separate test table used by every repeat."),
        sizes: Optional[str] = typer.Option(None, "--sizes", help="Sizes 50,100,200 or START:STOP:COUNT."),
        repeats: Optional[int] = typer.Option(None, "--repeats",
                                              help=f"Repeats per size (default {defaults.REPEATS})."),
        test_fraction: Optional[float] = typer.Option(
            None, "--test-fraction",
            help=f"Test share of rows (groups) (default {defaults.TEST_FRACTION:g})."),
        metric: Optional[str] = typer.Option(
            None, "--metric", help="error, mse, mae, balanced_error or a scikit-learn scorer."),
        encode: Optional[str] = typer.Option(None, "--encode", help="auto (one-hot, impute) or none."),
        jobs: Optional[int] = typer.Option(None, "--jobs", help="Parallel fits (default 1)."),
        backend: Optional[str] = typer.Option(None, "--backend", help="local or dask."),
        scheduler: Optional[str] = typer.Option(None, "--scheduler", help="Dask scheduler address."),
        seed: Optional[int] = typer.Option(None, "--seed", help=f"Random seed (default {defaults.SEED})."),
        timeout: Optional[float] = typer.Option(None, "--timeout", help="Seconds allowed per fit."),
        resume: Optional[bool] = typer.Option(None, "--resume", help="Skip cells already in <out>.journal."),
        out_file: Optional[str] = typer.Option(None, "--out", help="Run file to write (default run.json)."),
        groups: Optional[str] = typer.Option(None, "--groups",
                                             help="Group column: test and train groups disjoint."),
        order: Optional[str] = typer.Option(None, "--order",
                                            help="Time-order column: test on the latest rows."),
        size_unit: Optional[str] = typer.Option(None, "--size-unit", help="Sizes count rows or groups."),
        goal: Optional[str] = typer.Option(
            None, "--goal", help="Measure adaptively for one question: error-at:N, "
            "samples-for-error:E, samples-for-gap:G or floor."),
        precision: Optional[float] = typer.Option(
            None, "--precision",
            help="With --goal: stop when the interval width over the answer is at most this."),
        budget: Optional[float] = typer.Option(
            None, "--budget", help="With --goal: compute seconds (summed fit seconds) to spend at most."),
        plan_only: Optional[bool] = typer.Option(
            None, "--plan-only", help="Print the planned cells and the predicted time (a warm-up "
            "and two pilot fits are timed); write nothing."),
        slice_col: Optional[str] = typer.Option(
            None, "--slice", help="Measure one curve per value of this column (that slice's "
            "training rows grow, the others stay whole); writes a per-slice file."),
        previous: Optional[str] = typer.Option(
            None, "--previous", help="Run file of this table before rows were appended: its "
            "finished cells are reused, only the new sizes are measured."),
        no_reuse: Optional[bool] = typer.Option(
            None, "--no-reuse", help="With --previous: the same rounds and split, every cell "
            "trained anew."),
        config: Optional[str] = typer.Option(None, "--config", help="TOML file with option values."),
        quiet: Optional[bool] = typer.Option(None, "--quiet", help=QUIET_HELP),
        as_json: Optional[bool] = typer.Option(None, "--json", help="Print a JSON summary only."),
    ):
        """Train a model on growing subsamples; record train/test error per size and repeat."""
        given = {"data": data, "target": target, "model": model, "param": param or None,
                 "command": command, "features": features, "test": test, "sizes": sizes,
                 "repeats": repeats, "test_fraction": test_fraction, "metric": metric,
                 "encode": encode, "jobs": jobs, "backend": backend, "scheduler": scheduler,
                 "seed": seed, "timeout": timeout, "resume": resume, "out": out_file,
                 "quiet": quiet, "json": as_json, "groups": groups, "order": order,
                 "size_unit": size_unit, "goal": goal, "precision": precision, "budget": budget,
                 "plan_only": plan_only, "trainer_format": trainer_format,
                 "previous": previous, "no_reuse": no_reuse}
        conf = _read_config(config) if config else {}
        earlier = {}  # a grown run keeps the previous run's settings unless given
        if given["previous"] or conf.get("previous"):
            from curvefit.measuring.growing import previous_settings

            earlier = previous_settings(given["previous"] or conf["previous"])
        opts = {}
        for key, default in MEASURE_DEFAULTS.items():
            if key == "param":
                continue
            value = given[key]
            opts[key] = value if value is not None else conf.get(key, earlier.get(key, default))
        opts["param"] = given["param"]
        opts["param_config"] = conf.get("param")
        if slice_col is not None:  # per-slice curves: curvefit/cli/plan.py
            from curvefit.cli.plan import run_slice_measure

            raise typer.Exit(run_slice_measure(opts, slice_col))
        code = run_measure(opts)
        raise typer.Exit(code)
