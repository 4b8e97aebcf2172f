"""The nightly gate: fit a run, record it in a history store, compare it with its baseline.

`track_run` is the whole job for a measured `Curve`; `track_job` runs it from a job file
(TOML with the ``measure`` option names plus the tracking keys), measuring first when the
job says how. Both return a `TrackResult` whose ``exit_code`` gates a CI job: 0 no
regression (or a first run), 1 a gating figure regressed, 2 the run is not comparable
with its baseline (data or metric changed) unless that was allowed.

The gate reads the whole measured curve against the baseline's
(`curvefit.history.efficiency`: the labels the new model needs to match the baseline's
error, and the error difference averaged over ``ln n``); the fitted point figures are
information. The default baseline is the series' accepted run (`accept_run`, or the
first run): a failing run never becomes a baseline by itself.

Examples
--------
>>> import os, tempfile, warnings
>>> import numpy as np, pandas as pd
>>> from curvefit.core.curve import Curve
>>> n = np.repeat([100, 200, 400, 800, 1600], 3)
>>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
>>> curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": e}))
>>> db = os.path.join(tempfile.mkdtemp(), "history.db")
>>> result = track_run(curve, store=db, series="nightly", bootstrap=20)
>>> result.comparison.verdict, result.exit_code
('first run', 0)
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from curvefit.core.defaults import BOOTSTRAP, INTERVAL, SEED
from curvefit.core.errors import InputError
from curvefit.core.validate import check_count, check_flag, check_level
from curvefit.workflows.jobs import read_toml, resolve_job_paths

# Job-file keys: the `measure` options (dashes or underscores) plus the tracking ones.
MEASURE_KEYS = {"data", "target", "model", "param", "command", "features", "test", "sizes",
                "repeats", "test_fraction", "metric", "encode", "jobs", "backend",
                "scheduler", "seed", "timeout", "resume", "out", "quiet", "json", "groups",
                "order", "size_unit"}
TRACK_KEYS = {"store", "series", "target_error", "baseline", "tolerances",
              "allow_data_change", "bootstrap", "interval", "reference_size", "families",
              "gate", "junit", "again"}


@dataclass
class TrackResult:
    """What `track_run` did: the comparison with the baseline and what it was read from.

    Attributes
    ----------
    comparison : Comparison
        The run against its baseline (``.verdict``, ``.regressed``, ``.to_markdown()``).
    store, series : str
        Where the run was recorded.
    curve : Curve
    fit : CurveFit
    capacity : CapacityEstimate or None
        Effective capacity from the gap, when the curve has train error and it succeeded.
    warnings : list of str
        Cautions raised on the way (fit, capacity, measurement), once each.
    """

    comparison: Any
    store: str
    series: str
    curve: Any = None
    fit: Any = None
    capacity: Any = None
    warnings: list = field(default_factory=list)

    @property
    def run_id(self) -> int:
        return self.comparison.run_id

    @property
    def exit_code(self) -> int:
        """0 no regression or first run, 1 a regression, 2 not comparable."""
        return self.comparison.exit_code

    def to_dict(self) -> dict:
        doc = self.comparison.to_dict()
        doc["store"] = self.store
        return doc

    def _repr_html_(self) -> str:
        """In a notebook, a tracked run shows as its comparison with the baseline."""
        return self.comparison._repr_html_()

    def plot(self, ax=None):
        """The comparison's figure (`Comparison.plot`); returns the matplotlib Axes."""
        return self.comparison.plot(ax=ax)


# --------------------------------------------------------------------------- job file
def read_job(path: str | Path) -> dict:
    """Read a job file: keys normalised to underscores, paths resolved against its folder.

    A numeric ``target`` is taken as the target error (``target_error``); a string
    ``target`` names the label column, as with ``measure --target``.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "nightly.toml")
    >>> _ = open(p, "w").write('store = "h.db"\\nseries = "s"\\ntarget-error = 0.1\\n')
    >>> job = read_job(p)
    >>> job["target_error"], os.path.isabs(job["store"])
    (0.1, True)
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


def tracking_settings(job: Mapping[str, Any]) -> dict:
    """The keyword arguments of `track_run` that a job sets, checked (nothing is run).

    Examples
    --------
    >>> tracking_settings({"store": "h.db", "series": "s", "bootstrap": 50})["bootstrap"]
    50
    """
    from curvefit.history.figures import check_baseline, check_gate, resolve_tolerances

    store, series = job.get("store"), job.get("series")
    if not store:
        raise InputError("no history store: give store (e.g. history.db) or set 'store' in "
                         "the job file")
    if not series or not isinstance(series, str):
        raise InputError("no series: give series (e.g. nightly) or set 'series' in the job file")
    target = job.get("target_error")
    if target is not None and (isinstance(target, bool) or not isinstance(target, (int, float))
                               or not math.isfinite(target) or target < 0):
        raise InputError(f"target_error must be a number >= 0, got {target!r}")
    tolerances = job.get("tolerances")
    if tolerances is not None:
        if not isinstance(tolerances, Mapping):
            raise InputError("'tolerances' must be a table, e.g. "
                             "tolerances = {test_error_at_ref = 0.01}")
        resolve_tolerances(tolerances)
    reference = job.get("reference_size")
    return {"store": str(store), "series": series,
            "baseline": check_baseline(job.get("baseline", "accepted")),
            "gate": check_gate(job.get("gate")),
            "target_error": target, "tolerances": tolerances,
            "allow_data_change": check_flag(job.get("allow_data_change", False), "allow_data_change"),
            "bootstrap": check_count(job.get("bootstrap", BOOTSTRAP), "bootstrap"),
            "interval": check_level(job.get("interval", INTERVAL)),
            "random_state": check_count(job.get("seed", SEED), "seed"),
            "reference_size": None if reference is None else check_count(reference, "reference_size", 1),
            "families": job.get("families", "auto"),
            "again": check_flag(job.get("again", False), "again")}


def check_store_path(path: str) -> None:
    """Refuse a store that cannot be opened or created, before a long measurement."""
    from curvefit.history.store import Store, is_postgres_address

    if is_postgres_address(path):
        Store(path).close()  # connects: fails fast when the server is unreachable
    elif Path(path).exists():
        Store(path, create=False).close()
    elif not Path(path).parent.is_dir():
        raise InputError(f"cannot create history store {path}: its directory does not exist")


def track_job(job: Mapping[str, Any], *, curve=None, progress: bool = False) -> TrackResult:
    """Run a job: measure (unless ``curve`` is given), then fit, record and compare.

    Parameters
    ----------
    job : dict
        Settings as `read_job` returns them (command-line overrides merged in).
    curve : Curve, optional
        An already measured curve; the job's measurement keys are then not used.
    progress : bool
        Show the measuring progress bar (terminals only).

    Returns
    -------
    TrackResult
        Warnings raised while measuring (e.g. a possible leak) are in ``warnings``.
    """
    settings = tracking_settings(job)
    notes: list[str] = []
    if curve is None:
        check_store_path(settings["store"])
        curve, messages = measure_job(
            job, progress=progress,
            legacy_fingerprint=holds_old_fingerprints(settings["store"], settings["series"]))
        notes.extend(messages)
        failed = len(curve.failed_points())
        if failed:
            notes.append(f"{failed} of {len(curve.points)} fits failed (recorded in the run)")
    result = track_run(curve, **settings)
    result.warnings[:0] = notes
    return result


def holds_old_fingerprints(store: str, series: str) -> bool:
    """Whether runs of ``series`` hold a data fingerprint of the old (untagged) form; a new
    run then records that form too, so the comparison can tell whether the data changed."""
    from curvefit.history.store import Store
    from curvefit.measuring.data import is_legacy_fingerprint

    with Store(store) as st:
        if not st.path_exists() or series not in st.series_names():
            return False
        return any(is_legacy_fingerprint(fp) for fp in st.runs(series)["data_fingerprint"])


def measure_job(job: Mapping[str, Any], *, progress: bool = False, legacy_fingerprint: bool = False):
    """Measure the learning curve a job file describes (the ``measure`` step of a track).

    Same meaning of the keys as ``curvefit measure`` (`measure_from_settings` does the
    work); when ``out`` is set the run file is written there with its journal beside it,
    so ``resume = true`` continues an interrupted nightly run.

    Returns
    -------
    (Curve, list of str)
        The curve and the distinct first lines of the warnings raised while measuring.
    """
    from curvefit.workflows.jobs import MEASURE_DEFAULTS, measure_from_settings

    for key in ("data", "target"):
        if not job.get(key):
            raise InputError(f"the job file needs {key!r} to measure (or give a RUN file "
                             "instead of --config)")
    if not job.get("model") and not job.get("command"):
        raise InputError("the job file needs 'model' (e.g. \"sklearn.linear_model:LogisticRegression\")")
    if not isinstance(job["target"], str):
        raise InputError(f"'target' must name the label column, got {job['target']!r}")
    opts = {k: job.get(k, default) for k, default in MEASURE_DEFAULTS.items()}
    opts.update(param=None, param_config=job.get("param"), out=job.get("out"),
                quiet=not progress, json=False)
    curve, _path, caught = measure_from_settings(opts, progress=progress,
                                                 legacy_fingerprint=legacy_fingerprint)
    return curve, list(dict.fromkeys(str(w.message).splitlines()[0] for w in caught))


# --------------------------------------------------------------------------- the pipeline
def track_run(curve, *, store: str, series: str, baseline: str | int = "accepted",
              target_error: float | None = None, tolerances: Mapping | None = None,
              allow_data_change: bool = False, bootstrap: int = BOOTSTRAP,
              interval: float = INTERVAL, random_state: int = SEED,
              reference_size: int | None = None, families: Any = "auto",
              gate: Any = None, again: bool = False) -> TrackResult:
    """Fit ``curve``, record it in ``store`` under ``series`` and compare with the baseline.

    Parameters
    ----------
    curve : Curve
    store : str or path
        The history store: a file (created if absent) or ``postgresql://user@host/db``.
    series : str
        The series the run belongs to.
    baseline : "accepted", "previous", "best" or int
        What the run is compared with: the series' accepted run (default), the latest
        run that passed, the best passing run, or a run id.
    target_error : float, optional
        The series' target test error (gives the ``samples_for_target`` figure).
    tolerances : dict, optional
        Per-figure tolerances (numbers absolute, ``"N%"`` relative).
    allow_data_change : bool
        Compare even when the data or the metric changed.
    bootstrap, interval, random_state, families
        Settings of the fit (and of the capacity estimate).
    reference_size : int, optional
        Size at which errors are read (fixed by the series' first run).
    gate : list of str, "efficiency" or "all", optional
        The figures that can fail the run (default: the efficiency figures).
    again : bool
        Record the run even if this very run (same points and metadata, e.g. the same
        run file) is already recorded in the series; by default that is an `InputError`.

    Returns
    -------
    TrackResult
        Effective capacity is added when the curve has train error and the estimate
        succeeds; otherwise it is skipped with a warning.
    """
    from curvefit.history.figures import EFFICIENCY, check_baseline, check_gate, headline_figures
    from curvefit.history.store import Store, already_recorded

    interval = check_level(interval)
    bootstrap = check_count(bootstrap, "bootstrap")
    rule = check_baseline(baseline)
    gate = check_gate(gate)
    settings = dict(target_error=target_error, reference_size=reference_size, tolerances=tolerances)
    # open and check first: a bad store, baseline or settings, or a run file recorded
    # before, fails before the slow fit; a store file is created only when recording
    with Store(store) as st:
        if isinstance(rule, int):
            st.headline(rule)  # the named baseline run must exist
        st.series_settings(series, curve, **settings)
        if not again:
            same = st.recorded_as(curve, series)
            if same is not None:
                raise InputError(already_recorded(series, same))
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            fit, capacity, notes = _fit_and_capacity(curve, families, bootstrap, random_state,
                                                     interval)
            # the series' reference size is fixed in a write transaction before the figures
            # are read at it: runs recording into a new series at once share one size
            config = st.settle_series(series, curve, **settings)
            figures = headline_figures(fit, reference_size=config["reference_size"],
                                       target_error=config.get("target_error"),
                                       capacity=capacity, interval=interval)
            run_id = st.record(curve, fit.to_dict(), series=series, headline=figures,
                               interval=interval, again=again, **settings)
        comparison = st.compare(run_id, rule, allow_data_change=allow_data_change, gate=gate,
                                random_state=random_state)
        st.record_verdict(comparison, [c.current for c in comparison.changes
                                       if c.name in EFFICIENCY and c.current is not None])
    notes += [str(w.message).splitlines()[0] for w in caught]
    return TrackResult(comparison, str(store), series, curve, fit, capacity,
                       list(dict.fromkeys(notes)))


def accept_run(store: str, run_id: int, note: str = "") -> dict:
    """Accept a recorded run as its series' baseline (``curvefit track --accept RUN``).

    Returns
    -------
    dict
        ``run_id``, ``series``, the run's recorded ``verdict`` and the ``store``.
    """
    from curvefit.history.store import Store

    with Store(store, create=False) as st:
        rid = st.accept(run_id, note)
        series = st.series_of(rid)
        return {"run_id": rid, "series": series, "verdict": st.verdict(rid), "store": str(st.path)}


def _fit_and_capacity(curve, families, bootstrap: int, random_state, interval: float):
    """The curve fit and, when the curve has train error, the effective capacity."""
    from curvefit.fitting.engine import fit_curve

    fit = fit_curve(curve, families=families, bootstrap=bootstrap, random_state=random_state)
    capacity, notes = None, []
    if curve.has_train:
        from curvefit.capacity import effective_capacity

        try:
            capacity = effective_capacity(curve, bootstrap=bootstrap, random_state=random_state,
                                          interval=interval)
        except (InputError, ValueError, RuntimeError, ArithmeticError) as exc:
            notes.append(f"effective capacity skipped: {str(exc).splitlines()[0]}")
    return fit, capacity, notes
