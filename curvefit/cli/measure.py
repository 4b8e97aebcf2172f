"""`curvefit measure`: train a model on growing subsamples and write a run file.

Options may also come from ``--config job.toml``, whose keys are the long option names
(``target = "label"``, ``sizes = "50:5000:10"`` or a list, ``param = {C = 1.0}`` or a
list of ``"K=V"``, ``data = "table.csv"``); options on the command line win.
"""

from __future__ import annotations

import shlex
import sys
import warnings
from pathlib import Path
from typing import List, Optional

import typer

from curvefit.cli.common import emit_json, out, parse_list, print_table, read_toml, resolve_job_paths, warn
from curvefit.core import defaults
from curvefit.core.errors import InputError

# built-in values of the options a config file may set
DEFAULTS = {
    "data": None, "target": None, "model": None, "param": None, "command": None,
    "features": None, "test": None, "sizes": None, "repeats": defaults.REPEATS,
    "test_fraction": defaults.TEST_FRACTION, "metric": "error", "encode": "auto", "jobs": 1,
    "backend": "local", "scheduler": None, "seed": defaults.SEED, "timeout": None,
    "resume": False, "out": "run.json", "quiet": False,
    "json": False, "groups": None, "order": None, "size_unit": "rows",
}


def _read_config(path: str) -> dict:
    p = Path(path)
    doc = read_toml(p, "config file")
    conf = {}
    for key, value in doc.items():
        name = str(key).replace("-", "_")
        if name not in DEFAULTS:
            raise InputError(f"unknown key {key!r} in config {path}; keys are the long option "
                             f"names of curvefit measure, e.g. target, model, sizes")
        conf[name] = value
    return resolve_job_paths(conf, p)


def _params(config_value, cli_items) -> dict:
    from curvefit.measuring.models import parse_params

    params = {}
    if isinstance(config_value, dict):
        params.update(config_value)
    elif isinstance(config_value, (list, tuple)):
        params.update(parse_params([str(v) for v in config_value]))
    elif isinstance(config_value, str):
        params.update(parse_params([config_value]))
    elif config_value is not None:
        raise InputError("config key 'param' must be a table {K = V} or a list of \"K=V\"")
    params.update(parse_params(cli_items or []))
    return params


def _sizes(value) -> list[int] | None:
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        value = ",".join(str(v) for v in value)
    sizes = parse_list(str(value), float, name="size", integer_range=True)
    bad = [s for s in sizes if float(s) != int(s) or s < 1]
    if bad:
        raise InputError(f"size {bad[0]:g} is not a whole number >= 1; sizes count training rows")
    return [int(s) for s in sizes]


def _summary_rows(curve) -> list[dict]:
    s = curve.summary()
    keep = ["size", "n_repeats", "n_failed", "test_mean", "test_sem", "train_mean",
            "gap_mean", "n_test", "test_low", "test_high"]
    return s[keep].to_dict(orient="records")


def _print_summary(curve, path: Path) -> None:
    rows = _summary_rows(curve)
    metric = curve.metric
    unit = curve.meta.get("size_unit", "rows")
    out.print(f"learning curve: {curve.meta['model'].get('name', 'model')}, metric {metric} "
              f"(lower is better), split {curve.meta['split']['kind']}, "
              f"{curve.meta['repeats']} repeats, test set {curve.meta['n_test']} rows",
              markup=False)
    head = [f"size ({unit})", "test mean", "± sem", "train mean", "gap", "failed"]
    table = []
    for r in rows:
        def f(v):
            return "-" if v is None or v != v else f"{v:.4f}"
        table.append([str(r["size"]), f(r["test_mean"]), f(r["test_sem"]), f(r["train_mean"]),
                      f(r["gap_mean"]), str(r["n_failed"])])
    failed_sizes = set(curve.failed_points()["size"]) - {r["size"] for r in rows}
    for s in sorted(failed_sizes):
        table.append([str(s), "-", "-", "-", "-", "all"])
    print_table(head, table)
    n_failed = len(curve.failed_points())
    out.print(f"wrote {path} ({len(curve.points)} cells, {n_failed} failed)", markup=False)


def measure_from_options(opts: dict, *, progress: bool | None = None):
    """Load, validate and measure what merged options (or a job file) describe.

    The one place that turns option values into a `Curve`: used by ``curvefit measure``
    and by ``curvefit track --config``. Writes the run file when ``opts["out"]`` is set
    (the journal goes beside it). Returns ``(curve, out_path or None, caught warnings)``.
    """
    # data problems are reported before scikit-learn is even imported (it is slow to load)
    from curvefit.measuring import data as cfdata
    from curvefit.measuring.journal import journal_path

    if not opts["data"]:
        raise InputError("no data file given; usage: curvefit measure DATA --target COL --model SPEC")
    if not opts["target"]:
        raise InputError("no target column given; pass --target COL")
    if opts["encode"] not in ("auto", "none"):
        raise InputError(f"unknown --encode {opts['encode']!r}; use auto or none")
    df = cfdata.load_table(opts["data"])
    features = opts["features"]
    if isinstance(features, (list, tuple)):
        features = [str(f) for f in features]
    columns = [str(c) for c in df.columns]
    special = {}
    for option in ("groups", "order"):
        col = opts[option]
        if col is None:
            continue
        col = str(col)
        if col == str(opts["target"]):
            raise InputError(f"the --{option} column {col!r} is the target; pick another column")
        if col not in columns:
            raise InputError(f"--{option} column {col!r} not in the table; available columns: "
                             f"{', '.join(columns[:25])}")
        if df[col].isna().any():
            raise InputError(f"the --{option} column {col!r} has {int(df[col].isna().sum())} missing "
                             "values; fill them or drop those rows")
        special[option] = df[col].reset_index(drop=True)
    ds = cfdata.prepare(df, opts["target"], features, drop=tuple(str(opts[o]) for o in special))
    from curvefit.measuring.models import resolve_model
    from curvefit.measuring.runner import measure

    spec = resolve_model(opts["model"], _params(opts.get("param_config"), opts["param"]),
                         command=opts["command"], timeout=opts["timeout"])
    X_test = y_test = None
    if opts["test"]:
        tdf = cfdata.load_table(opts["test"])
        missing = [c for c in ds.feature_names + [ds.target] if c not in tdf.columns]
        if missing:
            raise InputError(f"the test file {opts['test']} lacks the columns "
                             f"{', '.join(missing[:10])}; it needs the same features and target")
        tds = cfdata.prepare(tdf, ds.target, ds.feature_names, task=ds.task)
        X_test, y_test = tds.X, tds.y
    try:
        repeats = int(opts["repeats"])
        jobs = int(opts["jobs"])
        seed = int(opts["seed"])
        test_fraction = float(opts["test_fraction"])
    except (TypeError, ValueError) as exc:
        raise InputError(f"a numeric option is not a number: {exc}") from None
    if not 0 < test_fraction < 1:
        raise InputError(f"--test-fraction must be strictly between 0 and 1, got {test_fraction:g}")
    out_path = Path(opts["out"]) if opts.get("out") else None
    data_meta = ds.describe()
    data_meta["path"] = str(opts["data"])
    if opts["test"]:
        data_meta["test_path"] = str(opts["test"])
    meta = {"data": data_meta, "target": ds.target, "features": ds.feature_names,
            "command_line": "curvefit " + " ".join(shlex.quote(str(a)) for a in sys.argv[1:])}
    if opts["groups"]:
        meta["groups_column"] = str(opts["groups"])
    if opts["order"]:
        meta["order_column"] = str(opts["order"])
    if progress is None:
        progress = not (bool(opts.get("quiet")) or bool(opts.get("json")))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        curve = measure(
            spec, ds.X, ds.y, sizes=_sizes(opts["sizes"]), repeats=repeats,
            test_size=test_fraction, X_test=X_test, y_test=y_test, metric=str(opts["metric"]),
            n_jobs=jobs, backend=str(opts["backend"]), scheduler=opts["scheduler"],
            random_state=seed, journal=journal_path(out_path) if out_path else None,
            resume=bool(opts["resume"]) and out_path is not None,
            timeout=opts["timeout"], encode=str(opts["encode"]),
            groups=special.get("groups"), order=special.get("order"),
            size_unit=str(opts["size_unit"]), progress=progress, meta=meta)
    if out_path is not None:
        out_path.parent.mkdir(parents=True, exist_ok=True)
        curve.write(out_path)
    return curve, out_path, caught


def run_measure(opts: dict) -> int:
    """Do the work of the command from merged options; return the exit code."""
    from curvefit.core.errors import FitWarning
    from curvefit.measuring.journal import journal_path
    from curvefit.measuring.splits import LeakWarning

    if not opts.get("out"):
        raise InputError("--out must name the run file to write")
    curve, out_path, caught = measure_from_options(opts)
    for w in caught:
        if issubclass(w.category, (LeakWarning, FitWarning)):
            warn(str(w.message), bool(opts["quiet"]))
    n_failed = len(curve.failed_points())
    if opts["json"]:
        emit_json({"run_file": str(out_path), "journal": str(journal_path(out_path)),
                   "n_cells": len(curve.points), "n_failed": n_failed,
                   "metric": curve.meta["metric_info"], "split": curve.meta["split"],
                   "sizes": curve.meta["sizes"], "repeats": curve.meta["repeats"],
                   "summary": _summary_rows(curve)})
    else:
        _print_summary(curve, out_path)
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
        quiet: Optional[bool] = typer.Option(None, "--quiet", help="No progress bar or warnings."),
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
        for key, default in DEFAULTS.items():
            if key == "param":
                continue
            value = given[key]
            opts[key] = value if value is not None else conf.get(key, default)
        opts["param"] = given["param"]
        opts["param_config"] = conf.get("param")
        code = run_measure(opts)
        raise typer.Exit(code)
