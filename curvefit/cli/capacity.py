"""`curvefit capacity`: effective capacity in VC units.

Two forms:

``curvefit capacity RUN``
    The VC-shaped gap model fitted to a run file's train and test errors.
``curvefit capacity --probe [DATA] --model SPEC``
    The max-deviation probe of the learner; inputs are rows resampled from DATA's
    feature columns, or standard-normal inputs with ``--n-features D`` and no DATA.
"""

from __future__ import annotations

import math
from typing import List, Optional

import typer

from curvefit.cli.common import emit_json, err, out, parse_list, print_table
from curvefit.core.errors import InputError


def _fmt(v, digits: int = 3) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return f"{v:.{digits}f}" if isinstance(v, float) else str(v)


def print_estimate(est) -> None:
    """The estimate in one sentence, then the design table, then the notes."""
    out.print(est.message, markup=False)
    d = est.design
    if est.method == "probe":
        out.print("design (n: half-sample size, τ = n/h, ξ: mean max deviation):", markup=False)
        rows = [[str(int(r.n)), _fmt(r.tau, 2), _fmt(r.xi_mean), _fmt(r.xi_sem),
                 _fmt(r.xi_fit), str(int(r.repeats))] for r in d.itertuples()]
        print_table(["n", "τ", "ξ", "± sem", "Φ(τ)", "repeats"], rows)
    else:
        if est.exponent is not None:
            b = est.exponent
            out.print(f"gap power law: b = {b.estimate:.3f} ({b.level:.0%} interval "
                      f"{_fmt(b.low)}–{_fmt(b.high)}): {est.regime}; VC-shaped scale "
                      f"s = {_fmt(est.scale)}", markup=False)
        rows = [[str(int(r.size)), _fmt(r.gap_mean, 4), _fmt(r.gap_sem, 4), _fmt(r.gap_fit, 4),
                 _fmt(r.gap_power, 4), str(int(r.repeats))] for r in d.itertuples()]
        print_table(["size", "gap", "± sem", "s·Φ(n/h)", "a·n^-b", "repeats"], rows)
    for note in est.notes:
        out.print(f"note: {note}", markup=False)


def save_json(path: str, doc: dict) -> None:
    """Write a result document as JSON (inf/NaN as null); a bad path is an input error."""
    import json
    from pathlib import Path

    from curvefit.core.jsonio import jsonable
    p = Path(path)
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(json.dumps(jsonable(doc), indent=1, allow_nan=False) + "\n", encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write {path}: {exc.strerror or exc}") from None


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

    df = cfdata.load_table(data)
    feats = None
    if features:
        feats = [f.strip() for f in features.split(",") if f.strip()]
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
        model: Optional[str] = typer.Option(None, "--model", help="Model spec (package.module:Name or file.py:func)."),
        param: Optional[List[str]] = typer.Option(None, "--param", help="Model parameter KEY=VALUE (repeatable)."),
        target: Optional[str] = typer.Option(None, "--target", help="Label column of DATA, left out of the probe's inputs."),
        features: Optional[str] = typer.Option(None, "--features", help="Feature columns a,b,c (default: all but the target)."),
        n_features: Optional[int] = typer.Option(None, "--n-features", help="Probe on standard-normal inputs of this dimension (no DATA)."),
        sizes: Optional[str] = typer.Option(None, "--sizes", help="Fixed probe half-sizes n (list or START:STOP:COUNT) instead of the adaptive design."),
        repeats: int = typer.Option(10, "--repeats", help="Base repeats per probe design point."),
        max_n: int = typer.Option(2000, "--max-n", help="Largest probe half-size n (2n rows per fit)."),
        bootstrap: Optional[int] = typer.Option(None, "--bootstrap", help="Bootstrap replicates (default 500 for the gap model, 200 for the probe)."),
        level: float = typer.Option(0.9, "--level", help="Interval level."),
        jobs: int = typer.Option(1, "--jobs", help="Parallel probe cells."),
        backend: str = typer.Option("local", "--backend", help="local or dask."),
        scheduler: Optional[str] = typer.Option(None, "--scheduler", help="Dask scheduler address."),
        seed: int = typer.Option(0, "--seed", help="Random seed."),
        quiet: bool = typer.Option(False, "--quiet", help="No progress on stderr."),
        json_out: bool = typer.Option(False, "--json", help="Print the estimate as JSON only."),
        out_file: Optional[str] = typer.Option(None, "--out", help="Also save the estimate as JSON (for curvefit report --capacity)."),
    ):
        """Effective capacity in VC units: from a run's gap, or by the max-deviation probe."""
        from curvefit.capacity import vc_model as cap

        if not 0 < level < 1:
            raise InputError(f"--level must be between 0 and 1, got {level:g}")
        if bootstrap is not None and bootstrap < 0:
            raise InputError(f"--bootstrap must be >= 0, got {bootstrap}")
        if probe:
            if not model:
                raise InputError("the probe needs a model: pass --model SPEC "
                                 "(e.g. sklearn.svm:LinearSVC)")
            if repeats < 1:
                raise InputError(f"--repeats must be at least 1, got {repeats}")
            if max_n < 2:
                raise InputError(f"--max-n must be at least 2, got {max_n}")
            if n_features is not None and n_features < 1:
                raise InputError(f"--n-features must be a positive integer, got {n_features}")
            from curvefit.measuring.models import parse_params, resolve_model

            spec = resolve_model(model, parse_params(param or []))
            X = _probe_inputs(source, target, features, n_features)
            size_list = None
            if sizes is not None:
                size_list = parse_list(sizes, float, name="size", integer_range=True)
                if any(s < 1 or float(s) != int(s) for s in size_list):
                    raise InputError("probe sizes must be whole numbers >= 1 (half-sizes n)")
                size_list = [int(s) for s in size_list]
            show = not (quiet or json_out)
            est = cap.probe_capacity(
                spec, X, n_features=n_features, sizes=size_list, repeats=repeats,
                n_jobs=jobs, backend=backend, scheduler=scheduler, random_state=seed,
                max_n=max_n, bootstrap=200 if bootstrap is None else bootstrap,
                interval=level, progress=(lambda m: err.print(m, markup=False)) if show else None)
        else:
            stray = [name for name, v in (("--model", model), ("--param", param),
                                          ("--target", target), ("--features", features),
                                          ("--n-features", n_features), ("--sizes", sizes))
                     if v]
            if stray:
                raise InputError(f"{stray[0]} belongs to the probe; add --probe, or give only "
                                 "a run file for the gap model")
            if source is None:
                raise InputError("no run file given; usage: curvefit capacity RUN, or "
                                 "curvefit capacity --probe DATA --model SPEC")
            from curvefit.core.curve import Curve

            curve = Curve.read(source)
            est = cap.effective_capacity(curve, bootstrap=500 if bootstrap is None else bootstrap,
                                         random_state=seed, interval=level)
        if out_file:
            save_json(out_file, est.to_dict())
        if json_out:
            emit_json(est.to_dict())
        else:
            print_estimate(est)
            if out_file:
                out.print(f"wrote {out_file}", markup=False)
