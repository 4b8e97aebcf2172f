"""Job files: TOML whose keys are command-line option names, read the same way everywhere.

``curvefit measure --config`` and ``curvefit track --config`` read their job files here,
so a job runs the same from any working directory: relative paths are resolved against
the file's own folder (what a nightly CI job needs).
"""

from __future__ import annotations

import shlex
import sys
import tomllib
import warnings
from pathlib import Path

from curvefit.core import defaults
from curvefit.core.errors import InputError
from curvefit.core.validate import (
    check_count,
    check_flag,
    check_jobs,
    check_positive,
    check_seed,
    check_sizes,
    parse_list,
)

# A job file is a few lines; anything larger is not one (and would be read whole).
MAX_JOB_BYTES = 2 ** 20

# Keys whose values are paths, resolved against the job file's folder.
PATH_KEYS = ("data", "test", "store", "out", "previous")


def read_toml(path: str | Path, what: str = "config file") -> dict:
    """Read a TOML job/config file; a missing or malformed file is an `InputError`.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "job.toml")
    >>> _ = open(p, "w").write('series = "nightly"\\nrepeats = 3\\n')
    >>> read_toml(p)
    {'series': 'nightly', 'repeats': 3}
    """
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{what} not found: {p}")
    try:
        if p.stat().st_size > MAX_JOB_BYTES:
            raise InputError(f"{p} is larger than {MAX_JOB_BYTES // 2 ** 20} MB; not a {what}")
        with open(p, "rb") as fh:
            return tomllib.load(fh)
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"{p} is not valid TOML: {' '.join(str(exc).split())}") from None
    except RecursionError:
        raise InputError(f"{p} is not a {what}: nested too deep") from None


def resolve_job_paths(job: dict, config_path: str | Path, source: str | None = None) -> dict:
    """Resolve a job file's relative paths against the file's own folder (in place).

    Touches the keys ``data``, ``test``, ``store``, ``out``, ``previous`` and the file part of a
    ``file.py:make_model`` model spec.

    Examples
    --------
    >>> job = resolve_job_paths({"store": "h.db", "model": "m.py:make_model"}, "/jobs/a.toml")
    >>> job["store"], job["model"]
    ('/jobs/h.db', '/jobs/m.py:make_model')
    """
    source = source or str(config_path)
    check_job_settings(job, source)
    base = Path(config_path).resolve().parent

    def resolve(text: str) -> str:
        q = Path(text).expanduser()
        return str(q if q.is_absolute() else base / q)

    for k in PATH_KEYS:
        if job.get(k) is not None:
            if not isinstance(job[k], str):
                raise InputError(f"{source}: {k!r} must be a path string, got {job[k]!r}")
            job[k] = resolve(job[k])
    model = job.get("model")
    if isinstance(model, str) and ".py:" in model:
        file_part, _, attr = model.rpartition(":")
        job["model"] = f"{resolve(file_part)}:{attr}"
    return job


# The type of each setting a job file may hold: TOML types are kept, never converted, so
# `resume = "false"` is refused rather than read as true (bool("false") is True).
TEXT_KEYS = ("data", "target", "model", "command", "test", "metric", "encode", "backend",
             "scheduler", "out", "groups", "order", "size_unit", "store", "series", "goal",
             "trainer_format", "previous")
FLAG_KEYS = ("resume", "quiet", "json", "plan_only", "allow_data_change", "again", "no_reuse")


def _text(value, key: str) -> str:
    if not isinstance(value, str):
        raise InputError(f"{key} must be text (in quotes), got {value!r}")
    return value


def _test_fraction(value) -> float:
    """Share of rows tested on: a number strictly between 0 and 1."""
    value = check_positive(value, "test_fraction")
    if not value < 1:
        raise InputError(f"--test-fraction must be strictly between 0 and 1, got {value:g}")
    return value


def check_job_settings(job: dict, source: str | None = None) -> dict:
    """Check the type and range of every setting of a job file, before anything runs.

    The same checks as the command line's (`curvefit.core.validate`): counts are whole
    numbers within their limits, yes/no settings are TOML booleans, names and paths are
    text, ``features`` is text or a list of text, ``sizes`` a list or range. Keys other
    than these pass (their readers check them). Messages start with ``source``, the
    file's name, when given.

    Examples
    --------
    >>> check_job_settings({"repeats": 3, "resume": True}, "job.toml")
    {'repeats': 3, 'resume': True}
    >>> check_job_settings({"resume": "false"}, "job.toml")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: job.toml: resume must be true or false (without quotes), got 'false'
    """
    def where(exc: InputError) -> InputError:
        return InputError(f"{source}: {exc}" if source else str(exc))

    for key, value in job.items():
        try:
            if key in TEXT_KEYS:
                _text(value, key)
            elif key in FLAG_KEYS:
                check_flag(value, key)
            elif key == "features":
                if not (isinstance(value, str) or (isinstance(value, list) and value
                                                   and all(isinstance(v, str) for v in value))):
                    raise InputError(f"features must be text (a,b,c) or a list of column names, "
                                     f"got {value!r}")
            elif key == "sizes":
                _sizes(value)
            elif key == "repeats":
                check_count(value, "repeats", minimum=1)
            elif key == "jobs":
                check_jobs(value, "jobs")
            elif key == "seed":
                check_seed(value, "seed")
            elif key == "test_fraction":
                _test_fraction(value)
            elif key in ("timeout", "budget", "precision"):
                check_positive(value, key)
        except InputError as exc:
            if not source or str(exc).startswith(f"{source}:"):
                raise
            raise where(exc) from None
    return job


# built-in values of the measuring options a job file (or the command line) may set
MEASURE_DEFAULTS = {
    "data": None, "target": None, "model": None, "param": None, "command": None,
    "features": None, "test": None, "sizes": None, "repeats": defaults.REPEATS,
    "test_fraction": defaults.TEST_FRACTION, "metric": "error", "encode": "auto", "jobs": 1,
    "backend": "local", "scheduler": None, "seed": defaults.SEED, "timeout": None,
    "resume": False, "out": "run.json", "quiet": False,
    "json": False, "groups": None, "order": None, "size_unit": "rows",
    # adaptive measurement (curvefit.measuring.adaptive) and the plan of a run
    "goal": None, "precision": None, "budget": None, "plan_only": False,
    "trainer_format": "csv",  # the files a --command trainer reads
    # a grown table: the run of the table before it grew (curvefit.measuring.growing)
    "previous": None, "no_reuse": False,
}


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
    """Sizes from text (``50,100,200`` or ``START:STOP:COUNT``) or a list of whole numbers."""
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        return check_sizes(value)
    if not isinstance(value, str):
        raise InputError(f"sizes must be text such as \"50,100,200\" or \"50:5000:12\", or a list "
                         f"of whole numbers, got {value!r}")
    return check_sizes(parse_list(value, float, name="size", integer_range=True))


def _used_columns(opts: dict, features) -> list | None:
    """The columns a run reads when its features are named: those, the target and the
    group/order columns (the fingerprint then covers these); None (all) otherwise."""
    if not features:
        return None
    if isinstance(features, str):
        features = [f.strip() for f in features.split(",") if f.strip()]
    return [*features, str(opts["target"])] + [str(opts[o]) for o in ("groups", "order") if opts[o]]


def measure_from_settings(opts: dict, *, progress: bool | None = None,
                          legacy_fingerprint: bool = False):
    """Load, validate and measure what a job's settings (or merged options) describe.

    The one place that turns settings into a `Curve`: ``curvefit measure`` and the
    nightly track (`curvefit.workflows.nightly.track_job`) both call it. Keys are those
    of `MEASURE_DEFAULTS`. Writes the run file when ``opts["out"]`` is set
    (the journal goes beside it). Returns ``(curve, out_path or None, caught warnings)``;
    with ``plan_only`` the first item is the run's `MeasurePlan` and nothing is written.
    ``legacy_fingerprint`` also records the table's old-form fingerprint (slow; the
    nightly track asks for it when its store holds runs recorded in that form).
    """
    # data problems are reported before scikit-learn is even imported (it is slow to load)
    from curvefit.measuring import data as cfdata
    from curvefit.measuring.journal import journal_identity, journal_path

    # every setting is checked before the data is read and before any journal is opened
    check_job_settings({k: v for k, v in opts.items() if v is not None and k != "jobs"})
    repeats = check_count(opts["repeats"], "repeats", minimum=1)
    jobs = check_jobs(opts["jobs"])
    seed = check_seed(opts["seed"], "seed")
    test_fraction = _test_fraction(opts["test_fraction"])
    if not opts["data"]:
        raise InputError("no data file given; usage: curvefit measure DATA --target COL --model SPEC")
    if not opts["target"]:
        raise InputError("no target column given; pass --target COL")
    if opts["encode"] not in ("auto", "none"):
        raise InputError(f"unknown --encode {opts['encode']!r}; use auto or none")
    features = opts["features"]
    if isinstance(features, (list, tuple)):
        features = [str(f) for f in features]
    df = cfdata.load_used_columns(opts["data"], _used_columns(opts, features))
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
                         command=opts["command"], timeout=opts["timeout"],
                         trainer_format=opts["trainer_format"])
    X_test = y_test = None
    if opts["test"]:
        tdf = cfdata.load_used_columns(opts["test"], ds.feature_names + [ds.target])
        missing = [c for c in ds.feature_names + [ds.target] if c not in tdf.columns]
        if missing:
            raise InputError(f"the test file {opts['test']} lacks the columns "
                             f"{', '.join(missing[:10])}; it needs the same features and target")
        tds = cfdata.prepare(tdf, ds.target, ds.feature_names, task=ds.task)
        X_test, y_test = tds.X, tds.y
    out_path = Path(opts["out"]) if opts.get("out") else None
    if out_path is not None:  # before any work: never a device, FIFO, link or folder
        from curvefit.core.jsonio import check_output_path

        check_output_path(out_path, "run file", new_folder=True)
        check_output_path(journal_path(out_path), "journal", new_folder=True)
    data_meta = ds.describe()
    if opts["resume"] and out_path is not None:
        # a journal started before the v2 fingerprint resumes under the fingerprint it holds
        recorded = (journal_identity(journal_path(out_path)) or {}).get("data")
        if cfdata.same_fingerprint(recorded, ds.fingerprint,
                                   legacy=lambda: cfdata.legacy_table_fingerprint(df)):
            data_meta["fingerprint"] = recorded
    if legacy_fingerprint:
        data_meta["legacy_fingerprint"] = cfdata.legacy_table_fingerprint(df)
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
    common = dict(sizes=_sizes(opts["sizes"]), repeats=repeats,
                  test_size=test_fraction, X_test=X_test, y_test=y_test, metric=str(opts["metric"]),
                  n_jobs=jobs, backend=str(opts["backend"]), scheduler=opts["scheduler"],
                  random_state=seed, timeout=opts["timeout"], encode=str(opts["encode"]),
                  groups=special.get("groups"), order=special.get("order"),
                  size_unit=str(opts["size_unit"]), meta=meta, goal=opts.get("goal"),
                  precision=opts.get("precision"), budget=opts.get("budget"))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if opts.get("plan_only"):
            if opts.get("previous"):
                raise InputError("--plan-only does not combine with --previous")
            from curvefit.measuring.runner import plan_measure

            # times two pilot cells, writes nothing
            return plan_measure(spec, ds.X, ds.y, **common), None, caught
        if opts.get("no_reuse") and not opts.get("previous"):
            raise InputError("--no-reuse belongs to a grown run; give --previous RUN too")
        run = dict(journal=journal_path(out_path) if out_path else None,
                   resume=bool(opts["resume"]) and out_path is not None, progress=progress)
        if opts.get("previous"):  # a grown table: reuse the cells of the run before it grew
            from curvefit.core.curve import Curve
            from curvefit.measuring.growing import measure_grown

            curve = measure_grown(spec, ds.X, ds.y, Curve.read(opts["previous"]), table=df,
                                  reuse=not opts.get("no_reuse"), **run, **common)
        else:
            curve = measure(spec, ds.X, ds.y, **run, **common)
    if out_path is not None:
        out_path.parent.mkdir(parents=True, exist_ok=True)
        curve.write(out_path)
    return curve, out_path, caught
