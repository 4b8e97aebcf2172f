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
from curvefit.core.formatting import MISSING, format_error
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
    out.print(f"learning curve: {curve.meta['model'].get('name', 'model')}, metric {metric} "
              f"(lower is better), split {curve.meta['split']['kind']}, "
              f"{curve.meta['repeats']} repeats, test set {curve.meta['n_test']} rows",
              markup=False)
    head = [f"size ({unit})", "test mean", "± sem", "train mean", "gap", "constant", "failed"]
    table = []
    for r in rows:
        def f(v):
            return format_error(v, metric)
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


def run_measure(opts: dict) -> int:
    """Do the work of the command from merged options; return the exit code."""
    from curvefit.core.errors import FitWarning
    from curvefit.fitting.sanity import sanity_check
    from curvefit.measuring.journal import journal_path
    from curvefit.measuring.splits import LeakWarning

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
                   "summary": _summary_rows(curve), "sanity": sanity.to_dict()})
    else:
        _print_summary(curve, out_path, sanity)
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
                 "size_unit": size_unit}
        conf = _read_config(config) if config else {}
        opts = {}
        for key, default in MEASURE_DEFAULTS.items():
            if key == "param":
                continue
            value = given[key]
            opts[key] = value if value is not None else conf.get(key, default)
        opts["param"] = given["param"]
        opts["param_config"] = conf.get("param")
        code = run_measure(opts)
        raise typer.Exit(code)
