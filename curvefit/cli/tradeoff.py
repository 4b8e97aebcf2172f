"""`curvefit tradeoff`: train/test error against a complexity parameter at several sizes."""

from __future__ import annotations

import math
from typing import List, Optional

import typer

from curvefit.cli.common import QUIET_HELP, emit_json, out, print_table, warn
from curvefit.core.defaults import SEED
from curvefit.core.errors import InputError
from curvefit.core.formatting import format_capacity, format_error, metric_name, quantity_name
from curvefit.core.validate import parse_list


def print_tradeoff(tr) -> None:
    """The measured table, then the best setting per size."""
    from curvefit.capacity.tradeoff import value_label as _label

    def _f(v):
        return format_error(v, tr.metric)

    t = tr.table
    probe = "capacity" in t.columns
    info = tr.meta.get("metric_info")
    out.print(f"trade-off over {tr.param} (metric {metric_name(tr.metric, info)}, lower is better; "
              f"{tr.meta.get('repeats', '?')} repeats per cell):", markup=False)
    head = [tr.param, "size", "train", "± sem", "test", "± sem", "failed"]
    if probe:
        head.append("VC dim (probe)")
    rows = []
    for r in t.itertuples():
        row = [_label(r.value), str(int(r.size)), _f(r.train_mean), _f(r.train_sem),
               _f(r.test_mean), _f(r.test_sem), str(int(r.n_failed))]
        if probe:
            cap = r.capacity
            row.append(("≥ " if r.capacity_above_range else "≈ ") + format_capacity(cap)
                       if cap is not None and math.isfinite(cap) else format_capacity(None))
        rows.append(row)
    print_table(head, rows)
    out.print(f"best setting per size (lowest mean {quantity_name('test_error', tr.metric, info)}; "
              "values within one standard "
              "error of it):", markup=False)
    best = tr.best_per_size()
    print_table(["size", f"best {tr.param}", "test", "± sem", "within 1 se"],
           [[str(int(b.size)), _label(b.best_value), _f(b.test_mean), _f(b.test_sem),
             ", ".join(_label(v) for v in b.within_1se) or "–"] for b in best.itertuples()])


def register(app: typer.Typer) -> None:
    @app.command("tradeoff")
    def tradeoff_cmd(
        data: str = typer.Argument(..., metavar="DATA", help="Data table (CSV, TSV, Parquet, NPZ)."),
        target: Optional[str] = typer.Option(None, "--target", help="Label column."),
        model: Optional[str] = typer.Option(None, "--model",
                                            help="Model spec (package.module:Name or file.py:func)."),
        command: Optional[str] = typer.Option(
            None, "--command",
            help="A trainer program instead of --model: \"prog --opt {value} {train} {test} "
                 "{predictions}\"; each --vary value replaces {value}."),
        param: Optional[List[str]] = typer.Option(None, "--param",
                                                  help="Fixed model parameter KEY=VALUE (repeatable)."),
        vary: Optional[str] = typer.Option(None, "--vary",
                                           help="The complexity parameter and its values: PARAM=V1,V2,..."),
        features: Optional[str] = typer.Option(None, "--features",
                                               help="Feature columns a,b,c (default: all but the target)."),
        sizes: Optional[str] = typer.Option(None, "--sizes", help="Sample sizes (list or START:STOP:COUNT)."),
        repeats: int = typer.Option(3, "--repeats", help="Repeats per (value, size)."),
        test_fraction: float = typer.Option(0.25, "--test-fraction",
                                            help="Share of rows held out per repeat."),
        metric: str = typer.Option("error", "--metric", help="Loss to measure (lower is better)."),
        probe: bool = typer.Option(False, "--probe",
                                   help="Also probe each setting's effective VC dimension."),
        timeout: Optional[float] = typer.Option(None, "--timeout", help="Seconds allowed per fit."),
        jobs: int = typer.Option(1, "--jobs", help="Parallel cells."),
        backend: str = typer.Option("local", "--backend", help="local or dask."),
        scheduler: Optional[str] = typer.Option(None, "--scheduler", help="Dask scheduler address."),
        seed: int = typer.Option(SEED, "--seed", help="Random seed."),
        quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
        json_out: bool = typer.Option(False, "--json", help="Print the result as JSON only."),
        out_file: Optional[str] = typer.Option(None, "--out",
                                               help="Also save the result as JSON (for curvefit report "
                                                    "--tradeoff)."),
    ):
        """Train and test error against a complexity parameter; the best setting per size."""
        from curvefit.capacity.tradeoff import parse_vary, setting_spec, tradeoff
        from curvefit.core.jsonio import check_output_path, write_json
        from curvefit.measuring import data as cfdata
        from curvefit.measuring.models import parse_params, resolve_model

        if out_file:  # refused before any training: a device, FIFO, link or folder
            check_output_path(out_file, "trade-off file")
        if not target:
            raise InputError("no target column given; pass --target COL")
        if not model and not command:
            raise InputError("no model given; pass --model SPEC (e.g. sklearn.tree:DecisionTreeClassifier) "
                             "or --command \"prog --opt {value} {train} {test} {predictions}\"")
        if not vary:
            raise InputError("nothing to vary; pass --vary PARAM=V1,V2,... (e.g. max_depth=1,2,4,8)")
        if not sizes:
            raise InputError("no sizes given; pass --sizes, e.g. 50,200,800 or 50:1000:4")
        if repeats < 1:
            raise InputError(f"--repeats must be at least 1, got {repeats}")
        if not 0 < test_fraction < 1:
            raise InputError(f"--test-fraction must be strictly between 0 and 1, got {test_fraction:g}")
        varied = parse_vary(vary)
        fixed = parse_params(param or [])
        name = next(iter(varied))
        if name in fixed:
            raise InputError(f"{name} is both fixed with --param and varied with --vary; drop one")
        size_list = parse_list(sizes, float, name="size", integer_range=True)
        if any(s < 1 or float(s) != int(s) for s in size_list):
            raise InputError("sizes must be whole numbers >= 1 (training rows)")
        spec = resolve_model(model, fixed, command=command, timeout=timeout)
        # Fail on a parameter or value the model does not take before any work starts.
        for value in varied[name]:
            setting_spec(spec, name, value)
        feats = [f.strip() for f in features.split(",") if f.strip()] if features else None
        df = cfdata.load_used_columns(data, feats and [*feats, target])
        ds = cfdata.prepare(df, target, feats)
        tr = tradeoff(spec, ds.X, ds.y, vary=varied, sizes=[int(s) for s in size_list],
                      repeats=repeats, random_state=seed, n_jobs=jobs, backend=backend,
                      scheduler=scheduler, test_size=test_fraction, metric=metric,
                      probe=probe, timeout=timeout,
                      progress=not (quiet or json_out))
        if out_file:
            write_json(out_file, tr.to_dict(), what="trade-off file")
        if json_out:
            emit_json(tr.to_dict())
        else:
            print_tradeoff(tr)
            if out_file:
                out.print(f"wrote {out_file}", markup=False)
        if tr.meta.get("failed_cells"):
            warn(f"{tr.meta['failed_cells']} fit(s) failed and were left out "
                 "(recorded in the table's failed column)", quiet)
            raise typer.Exit(3)
