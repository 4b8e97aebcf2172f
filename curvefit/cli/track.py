"""`curvefit track`: record a run in the history store and gate CI on regressions.

Two forms:

- ``curvefit track RUN --store DB --series NAME`` fits an existing run file, records
  it and compares it with the series' baseline;
- ``curvefit track --config nightly.toml`` measures first (the TOML keys are the
  ``measure`` option names), then fits, records and compares, in one command.

Output is a short markdown summary (for CI logs) or, with ``--json``, one JSON document.
Exit codes: 0 no regression (or first run); 1 a headline figure regressed; 2 bad input,
or the run is not comparable with its baseline (data or metric changed) unless
``--allow-data-change``.
"""

from __future__ import annotations

import math
import sys
import warnings
from pathlib import Path
from typing import Any, Optional

import typer

from curvefit.cli.common import emit_json, err, out, read_toml, resolve_job_paths, warn
from curvefit.core.errors import InputError

# Job-file keys: the `measure` options (dashes or underscores) plus the tracking ones.
MEASURE_KEYS = {"data", "target", "model", "param", "command", "features", "test", "sizes",
                "repeats", "test_fraction", "metric", "encode", "jobs", "backend",
                "scheduler", "seed", "timeout", "resume", "out", "quiet", "json", "groups",
                "order", "size_unit"}
TRACK_KEYS = {"store", "series", "target_error", "baseline", "tolerances",
              "allow_data_change", "bootstrap", "interval", "reference_size", "families"}
DEFAULT_BOOTSTRAP = 300


# --------------------------------------------------------------------------- job file
def read_job(path: str | Path) -> dict:
    """Read a job file: keys normalised to underscores, paths resolved against its folder.

    A numeric ``target`` is taken as the target error (``target_error``); a string
    ``target`` names the label column, as with ``measure --target``.
    """
    p = Path(path)
    raw = read_toml(p, "job file")
    job: dict[str, Any] = {}
    for key, value in raw.items():
        k = key.replace("-", "_")
        if k == "target" and isinstance(value, (int, float)) and not isinstance(value, bool):
            k = "target_error"
        if k not in MEASURE_KEYS | TRACK_KEYS:
            known = ", ".join(sorted(MEASURE_KEYS | TRACK_KEYS))
            raise InputError(f"{p}: unknown key {key!r}; known keys: {known}")
        job[k] = value
    resolve_job_paths(job, p)
    return job


def _int(job: dict, key: str, default: int | None, minimum: int = 0) -> int | None:
    v = job.get(key, default)
    if v is None:
        return None
    if isinstance(v, bool) or not isinstance(v, int) or v < minimum:
        raise InputError(f"{key!r} must be a whole number >= {minimum}, got {v!r}")
    return v


def measure_job(job: dict, *, quiet: bool = False):
    """Measure the learning curve a job file describes (the `measure` step of `track`).

    Same meaning of the keys as ``curvefit measure`` (the same code does the work); when
    ``out`` is set the run file is written there with its journal beside it, so
    ``resume = true`` continues an interrupted nightly run.
    """
    from curvefit.cli.measure import DEFAULTS, measure_from_options

    for key in ("data", "target"):
        if not job.get(key):
            raise InputError(f"the job file needs {key!r} to measure (or give a RUN file "
                             "instead of --config)")
    if not job.get("model") and not job.get("command"):
        raise InputError("the job file needs 'model' (e.g. \"sklearn.linear_model:LogisticRegression\")")
    if not isinstance(job["target"], str):
        raise InputError(f"'target' must name the label column, got {job['target']!r}")
    opts = {k: job.get(k, default) for k, default in DEFAULTS.items()}
    opts.update(param=None, param_config=job.get("param"), out=job.get("out"),
                quiet=quiet, json=False)
    curve, _path, caught = measure_from_options(opts, progress=not quiet and sys.stderr.isatty())
    _relay(caught, quiet)
    return curve


def _relay(caught, quiet: bool) -> None:
    seen = set()
    for w in caught:
        msg = str(w.message).splitlines()[0]
        if msg not in seen:
            seen.add(msg)
            warn(msg, quiet)


# --------------------------------------------------------------------------- the pipeline
def track_curve(curve, *, store: str, series: str, baseline: str = "previous",
                target_error: float | None = None, tolerances: dict | None = None,
                allow_data_change: bool = False, bootstrap: int = DEFAULT_BOOTSTRAP,
                interval: float = 0.9, seed: int = 0, reference_size: int | None = None,
                families: Any = "auto", quiet: bool = False):
    """Fit ``curve``, record it in ``store`` under ``series`` and compare with the baseline.

    Returns the `Comparison`. Effective capacity is added when the curve has train
    error and the estimate succeeds; otherwise it is skipped with a warning.
    """
    from curvefit.fitting.engine import fit_curve
    from curvefit.history.store import Store
    from curvefit.history.figures import check_baseline

    if not 0 < interval < 1:
        raise InputError(f"interval must lie strictly between 0 and 1, got {interval}")
    if bootstrap < 0:
        raise InputError(f"bootstrap must be >= 0, got {bootstrap}")
    rule = check_baseline(baseline)
    with Store(store) as st:  # open first: a bad store or baseline fails before the slow fit
        if isinstance(rule, int):
            st.headline(rule)  # the named baseline run must exist
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            fit = fit_curve(curve, families=families, bootstrap=bootstrap, random_state=seed)
            capacity = None
            if curve.has_train:
                try:
                    from curvefit.capacity.vc_model import effective_capacity

                    capacity = effective_capacity(curve, bootstrap=bootstrap,
                                                  random_state=seed, interval=interval)
                except (InputError, ValueError, RuntimeError, ArithmeticError) as exc:
                    warn(f"effective capacity skipped: {str(exc).splitlines()[0]}", quiet)
            run_id = st.record(curve, fit, series=series, target_error=target_error,
                               tolerances=tolerances, reference_size=reference_size,
                               capacity=capacity, interval=interval)
        _relay(caught, quiet)
        return st.compare(run_id, baseline, allow_data_change=allow_data_change)


def _report(comparison, json_out: bool, store: str) -> None:
    if json_out:
        doc = comparison.to_dict()
        doc["store"] = store
        emit_json(doc)
    else:
        out.print(comparison.to_markdown(), markup=False, end="")
    if not comparison.comparable:
        # one line on stderr, as for any exit 2
        print(f"curvefit: error: run {comparison.run_id} is not comparable with baseline run "
              f"{comparison.baseline_id}: {'; '.join(comparison.reasons)}; pass "
              "--allow-data-change to compare anyway", file=sys.stderr)


def register(app: typer.Typer) -> None:
    @app.command("track")
    def track(
        run: Optional[Path] = typer.Argument(None, help="Run file (or curve table) to record; "
                                             "omit with --config."),
        config: Optional[Path] = typer.Option(None, "--config",
                                              help="Job file (TOML): measure, fit, record, compare."),
        store: Optional[str] = typer.Option(None, "--store", help="History store file (history.db)."),
        series: Optional[str] = typer.Option(None, "--series", help="Series name, e.g. nightly."),
        baseline: Optional[str] = typer.Option(None, "--baseline",
                                               help="previous (default), best, or a run id."),
        target_error: Optional[float] = typer.Option(None, "--target-error",
                                                     help="Target test error of the series."),
        allow_data_change: bool = typer.Option(False, "--allow-data-change",
                                               help="Compare even if the data or metric changed."),
        bootstrap: Optional[int] = typer.Option(None, "--bootstrap",
                                                help=f"Bootstrap replicates (default {DEFAULT_BOOTSTRAP})."),
        interval: Optional[float] = typer.Option(None, "--interval", help="Interval level (default 0.9)."),
        seed: Optional[int] = typer.Option(None, "--seed", help="Seed of the measurement and bootstrap."),
        json_out: bool = typer.Option(False, "--json", help="Print JSON on stdout."),
        quiet: bool = typer.Option(False, "--quiet", help="No warnings or progress."),
    ):
        """Record a run in the history store, compare it with the series' baseline and
        exit 1 on a regression (2 if the data or metric changed)."""
        from curvefit.core.curve import Curve

        if (run is None) == (config is None):
            raise InputError("give either a RUN file or --config job.toml (not both)")
        job = read_job(config) if config is not None else {}
        quiet = quiet or bool(job.get("quiet", False))
        json_out = json_out or bool(job.get("json", False))
        if seed is not None:
            job["seed"] = seed
        if run is not None:
            curve = Curve.read(run)
        else:
            curve = None  # measured after the tracking settings are checked
        store_path = store or job.get("store")
        series_name = series or job.get("series")
        if not store_path:
            raise InputError("no history store: pass --store history.db or set 'store' in the job file")
        if not series_name or not isinstance(series_name, str):
            raise InputError("no series: pass --series NAME or set 'series' in the job file")
        te = target_error if target_error is not None else job.get("target_error")
        if te is not None and (isinstance(te, bool) or not isinstance(te, (int, float))
                               or not math.isfinite(te) or te < 0):
            raise InputError(f"target error must be a number >= 0, got {te!r}")
        tolerances = job.get("tolerances")
        if tolerances is not None and not isinstance(tolerances, dict):
            raise InputError("'tolerances' must be a table, e.g. tolerances = {test_error_at_ref = 0.01}")
        if tolerances is not None:
            from curvefit.history.figures import resolve_tolerances

            resolve_tolerances(tolerances)
        from curvefit.history.figures import check_baseline

        base = check_baseline(baseline or job.get("baseline", "previous"))
        allow = allow_data_change or bool(job.get("allow_data_change", False))
        boots = bootstrap if bootstrap is not None else _int(job, "bootstrap", DEFAULT_BOOTSTRAP)
        level = interval if interval is not None else float(job.get("interval", 0.9))
        ref = _int(job, "reference_size", None, 1)
        if curve is None:
            from curvefit.history.store import Store

            if Path(store_path).exists():
                Store(store_path, create=False).close()  # refuse a bad store before measuring
            elif not Path(store_path).parent.is_dir():
                raise InputError(f"cannot create history store {store_path}: its directory does not exist")
            curve = measure_job(job, quiet=quiet)
            failed = len(curve.failed_points())
            if failed:
                warn(f"{failed} of {len(curve.points)} fits failed (recorded in the run)", quiet)
        comparison = track_curve(curve, store=store_path, series=series_name, baseline=base,
                                 target_error=te, tolerances=tolerances,
                                 allow_data_change=allow, bootstrap=boots, interval=level,
                                 seed=int(job.get("seed", 0)), reference_size=ref,
                                 families=job.get("families", "auto"), quiet=quiet)
        _report(comparison, json_out, store_path)
        if not quiet and not json_out and comparison.comparable:
            err.print(f"recorded run {comparison.run_id} in {store_path} (series {series_name})",
                      markup=False, highlight=False)
        raise typer.Exit(comparison.exit_code)
