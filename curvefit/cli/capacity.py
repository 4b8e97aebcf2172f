"""`curvefit capacity`: effective capacity in VC units (for the 0-1 loss), or an effective
number of parameters (for squared error).

Two forms:

``curvefit capacity RUN [--with-probe PROBE.json]``
    The calibrated gap model on a run file's train and test errors (with a saved probe
    figure beside it).
``curvefit capacity --probe [DATA] --model SPEC`` (or ``--command "prog {train} {test} {predictions}"``)
    The max-deviation probe of the learner; inputs are rows resampled from DATA's
    feature columns, or standard-normal inputs with ``--n-features D`` and no DATA.
"""

from __future__ import annotations

from typing import List, Optional

import typer

from curvefit.cli.common import (
    QUIET_HELP,
    emit_json,
    interval_option,
    level_alias,
    out,
    pick_interval,
    print_table,
    status,
    warn,
)
from curvefit.core.defaults import SEED
from curvefit.core.errors import InputError
from curvefit.core.formatting import format_error, format_estimate, format_number
from curvefit.core.validate import parse_list


def _print_probe_design(est) -> None:
    out.print("design (n: half-sample size, τ = n/h, ξ: mean max deviation):", markup=False)
    rows = [[str(int(r.n)), format_number(r.tau, 3), format_number(r.xi_mean, 3),
             format_number(r.xi_sem, 3), format_number(r.xi_fit, 3), str(int(r.repeats))]
            for r in est.design.itertuples()]
    print_table(["n", "τ", "ξ", "± sem", "Φ(τ)", "repeats"], rows)


def _print_gap_design(est, metric: str) -> None:
    c = est.extra.get("gap_constant")
    optimism = est.method == "optimism"
    if c is not None and optimism:
        out.print(f"optimism of squared error: gap ≈ 2·σ²·p/n past the knee, 2·σ² ≈ "
                  f"{format_error(c, metric)} (training + test MSE at the sizes used)", markup=False)
    elif c is not None:
        out.print(f"gap model: gap ≈ c·h/n past the knee, calibrated c = {format_number(c, 3)}"
                  " at the measured training error", markup=False)
    if est.exponent is not None and est.exponent.estimate == est.exponent.estimate:
        b = est.exponent
        out.print(f"log-log slope of the gap (descriptive): b = "
                  f"{format_estimate(b.estimate, b.low, b.high, b.level)}", markup=False)

    design = est.design
    scale = max([abs(float(v)) for c in ("gap_mean", "train_mean") if c in design
                 for v in design[c] if v == v] or [1.0])

    def gap(v):
        return format_error(v, metric, scale)

    used = design["used"] if "used" in design else [True] * len(design)
    rows = [[str(int(r.size)), gap(r.gap_mean), gap(r.gap_sem), gap(getattr(r, "train_mean", None)),
             gap(r.gap_fit), "yes" if u else "no", str(int(r.repeats))]
            for r, u in zip(design.itertuples(), used)]
    fitted = "2σ²·p/n" if optimism else "c·h/n"
    print_table(["size", "gap", "± sem", "train", fitted, "used", "repeats"], rows)


def print_estimate(est, metric: str = "error") -> None:
    """The estimate in one sentence, then the design table, then the notes."""
    out.print(est.message, markup=False)
    if est.method == "probe":
        _print_probe_design(est)
    else:
        _print_gap_design(est, metric)
    for note in est.notes:
        out.print(f"note: {note}", markup=False)


def _probe_inputs(data: str | None, target: str | None, features: str | None,
                  n_features: int | None):
    if data is None:
        if n_features is None:
            raise InputError("the probe needs inputs: give a DATA file or --n-features D "
                             "(standard-normal inputs)")
        if target or features:
            raise InputError("--target and --features need a DATA file")
        return None
    if n_features is not None:
        raise InputError("give either a DATA file or --n-features, not both")
    from curvefit.measuring import data as cfdata

    feats = None
    if features:
        feats = [f.strip() for f in features.split(",") if f.strip()]
    df = cfdata.load_used_columns(data, feats and [*feats, *([target] if target else [])])
    if target:
        ds = cfdata.prepare(df, target, feats)
        X = ds.X
    else:
        columns = [str(c) for c in df.columns]
        if feats:
            absent = [f for f in feats if f not in columns]
            if absent:
                raise InputError(f"feature column(s) {', '.join(absent)} not in {data}; "
                                 f"available columns: {', '.join(columns[:25])}")
            X = df[feats]
        else:
            X = df
    non_numeric = [str(c) for c in X.columns
                   if not (hasattr(X[c], "dtype") and X[c].dtype.kind in "biuf")]
    if non_numeric:
        hint = "" if target else " (pass --target COL to leave the label column out)"
        raise InputError(f"the probe needs numeric features; non-numeric column(s) "
                         f"{', '.join(non_numeric[:5])}{hint}")
    return X


def register(app: typer.Typer) -> None:
    @app.command("capacity")
    def capacity(
        source: Optional[str] = typer.Argument(
            None, metavar="RUN|DATA",
            help="Run file (gap model), or with --probe the data whose feature rows are resampled."),
        probe: bool = typer.Option(False, "--probe",
                                   help="Run the max-deviation probe on --model instead of reading a run."),
        model: Optional[str] = typer.Option(None, "--model",
                                            help="Model spec (package.module:Name or file.py:func)."),
        command: Optional[str] = typer.Option(
            None, "--command",
            help="Probe a trainer program instead of --model: \"prog {train} {test} {predictions}\" "
                 "(as in measure --command)."),
        timeout: Optional[float] = typer.Option(None, "--timeout",
                                                help="Seconds allowed per run of the --command trainer."),
        with_probe: Optional[str] = typer.Option(
            None, "--with-probe",
            help="A saved probe estimate (capacity --probe --out FILE) to show beside the gap figure."),
        param: Optional[List[str]] = typer.Option(None, "--param",
                                                  help="Model parameter KEY=VALUE (repeatable)."),
        target: Optional[str] = typer.Option(None, "--target",
                                             help="Label column of DATA, left out of the probe's inputs."),
        features: Optional[str] = typer.Option(None, "--features",
                                               help="Feature columns a,b,c (default: all but the target)."),
        n_features: Optional[int] = typer.Option(None, "--n-features",
                                                 help="Probe on standard-normal inputs of this dimension "
                                                      "(no DATA)."),
        sizes: Optional[str] = typer.Option(None, "--sizes",
                                            help="Fixed probe half-sizes n (list or START:STOP:COUNT) "
                                                 "instead of the adaptive design."),
        repeats: Optional[int] = typer.Option(None, "--repeats",
                                              help="Base repeats per probe design point (default 10)."),
        max_n: Optional[int] = typer.Option(None, "--max-n",
                                            help="Largest probe half-size n, 2n rows per fit (default "
                                                 "2000)."),
        bootstrap: Optional[int] = typer.Option(None, "--bootstrap",
                                                help="Bootstrap replicates (default: the estimate's own)."),
        interval: float = interval_option(),
        level: Optional[float] = level_alias(),
        jobs: int = typer.Option(1, "--jobs", help="Parallel probe cells."),
        backend: str = typer.Option("local", "--backend", help="local or dask."),
        scheduler: Optional[str] = typer.Option(None, "--scheduler", help="Dask scheduler address."),
        seed: int = typer.Option(SEED, "--seed", help="Random seed."),
        quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
        json_out: bool = typer.Option(False, "--json", help="Print the estimate as JSON only."),
        out_file: Optional[str] = typer.Option(None, "--out",
                                               help="Also save the estimate as JSON (for curvefit report "
                                                    "--capacity)."),
    ):
        """Effective capacity in VC units: from a run's gap, or by the max-deviation probe.
        For squared error the gap gives an effective number of parameters instead."""
        from curvefit.core.jsonio import check_output_path, write_json

        if out_file:  # refused before the probe: a device, FIFO, link or folder
            check_output_path(out_file, "capacity file")
        interval = pick_interval(interval, level)
        settings = {"interval": interval, "random_state": seed}
        if bootstrap is not None:
            settings["bootstrap"] = bootstrap
        if probe:
            if with_probe:
                raise InputError("--with-probe belongs to the gap model; drop it or --probe")
            est = _run_probe(source, model, command, timeout, param, target, features, n_features,
                             sizes,
                             dict(settings, n_jobs=jobs, backend=backend, scheduler=scheduler,
                                  progress=not (quiet or json_out),
                                  **{k: v for k, v in (("repeats", repeats), ("max_n", max_n))
                                     if v is not None}))
            metric = "error"
            failed = est.extra.get("failed_cells")
            if failed:  # also a note on stdout; a log reader sees it on stderr
                warn(f"{failed} of {est.extra.get('cells')} probe cells failed and were left out "
                     f"(the first: {est.extra.get('first_failure')})", quiet)
        else:
            stray = [name for name, v in (("--model", model), ("--command", command),
                                          ("--timeout", timeout), ("--param", param),
                                          ("--target", target), ("--features", features),
                                          ("--n-features", n_features), ("--sizes", sizes))
                     if v]
            if stray:
                raise InputError(f"{stray[0]} belongs to the probe; add --probe, or give only "
                                 "a run file for the gap model")
            if source is None:  # before the status line: a usage error prints one line
                raise InputError("no run file given; usage: curvefit capacity RUN, or "
                                 "curvefit capacity --probe DATA --model SPEC")
            with status(f"fitting the gap model to {source}", quiet):
                est, metric = _run_gap(source, settings, with_probe)
        if out_file:
            write_json(out_file, est.to_dict(), what="capacity file")
        if json_out:
            emit_json(est.to_dict())
        else:
            print_estimate(est, metric)
            if out_file:
                out.print(f"wrote {out_file}", markup=False)


def _run_probe(source, model, command, timeout, param, target, features, n_features, sizes,
               settings: dict):
    """The max-deviation probe of ``model`` (or a trainer ``command``) on DATA's feature rows
    or on normal inputs."""
    from curvefit.capacity import probe_capacity
    from curvefit.measuring.models import parse_params, resolve_model

    if not model and not command:
        raise InputError("the probe needs a model: pass --model SPEC (e.g. sklearn.svm:LinearSVC) "
                         "or --command \"prog {train} {test} {predictions}\"")
    if timeout is not None and not command:
        raise InputError("--timeout applies to a --command trainer; drop it or give --command")
    spec = resolve_model(model, parse_params(param or []), command=command, timeout=timeout)
    X = _probe_inputs(source, target, features, n_features)
    size_list = None
    if sizes is not None:
        size_list = parse_list(sizes, float, name="size", integer_range=True)
        if any(s < 1 or float(s) != int(s) for s in size_list):
            raise InputError("probe sizes must be whole numbers >= 1 (half-sizes n)")
        size_list = [int(s) for s in size_list]
    return probe_capacity(spec, X, n_features=n_features, sizes=size_list, **settings)


def _run_gap(source, settings: dict, with_probe: str | None = None):
    """The calibrated gap model on a run file (with a saved probe beside it); returns the
    estimate and the metric."""
    from curvefit.capacity import CapacityEstimate, effective_capacity
    from curvefit.core.curve import Curve
    from curvefit.core.jsonio import read_json

    probe = None
    if with_probe:
        probe = CapacityEstimate.from_dict(read_json(with_probe, what="probe file"))
        if probe.method != "probe":
            raise InputError(f"{with_probe} holds a {probe.method} estimate, not a probe; save one "
                             "with curvefit capacity --probe ... --out FILE")
    curve = Curve.read(source)
    return effective_capacity(curve, probe=probe, **settings), curve.metric
