"""`curvefit track`: record a run in the history store and gate CI on regressions.

Three forms:

- ``curvefit track RUN --store DB --series NAME`` fits an existing run file, records
  it and compares it with the series' baseline (a run file already recorded in the
  series is refused with exit 2 unless ``--again``);
- ``curvefit track --config nightly.toml`` measures first (the TOML keys are the
  ``measure`` option names), then fits, records and compares, in one command;
- ``curvefit track --accept RUN --store DB`` accepts a recorded run as its series'
  baseline (the default baseline of later runs; a failing run becomes one only so).

The work is `curvefit.workflows.nightly.track_job`; this command merges the options into
the job, prints a short markdown summary (for CI logs) or, with ``--json``, one JSON
document (``--junit FILE`` also writes JUnit XML, one test case per figure), and exits
with the comparison's code: 0 no regression (or first run); 1 a gating figure regressed
(by default the efficiency figures, with the ratio in the message); 2 bad input, or the
run is not comparable with its baseline (data or metric changed) unless
``--allow-data-change``.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Optional

import typer

from curvefit.cli.common import QUIET_HELP, emit_json, err, out, status, warn
from curvefit.core.defaults import BOOTSTRAP, INTERVAL
from curvefit.core.errors import InputError


def _job(run, config, options: dict) -> dict:
    """The job: the file's settings (if any) with the options given on the command line."""
    from curvefit.workflows.nightly import read_job

    if (run is None) == (config is None):
        raise InputError("give either a RUN file or --config job.toml (not both)")
    job = read_job(config) if config is not None else {}
    job.update({k: v for k, v in options.items() if v is not None and v is not False})
    if not job.get("store"):
        raise InputError("no history store: pass --store history.db or set 'store' in the job file")
    if not job.get("series"):
        raise InputError("no series: pass --series NAME or set 'series' in the job file")
    return job


def _report(result, json_out: bool, quiet: bool, junit: Optional[Path] = None) -> None:
    comparison = result.comparison
    if junit is not None:
        from curvefit.core.jsonio import write_text_atomic

        write_text_atomic(junit, comparison.to_junit())
    if json_out:
        emit_json(result.to_dict())
    else:
        out.print(comparison.to_markdown(), markup=False, end="")
    if not comparison.comparable:
        # one line on stderr, as for any exit 2
        print(f"curvefit: error: run {comparison.run_id} is not comparable with baseline run "
              f"{comparison.baseline_id}: {'; '.join(comparison.reasons)}; pass "
              "--allow-data-change to compare anyway", file=sys.stderr)
    elif not quiet and not json_out:
        err.print(f"recorded run {comparison.run_id} in {shown_path(result.store)} (series {result.series}): "
                  f"{comparison.message}", markup=False, highlight=False)



def shown_path(store) -> str:
    """A store path as the user would write it: relative to the working folder when inside
    it (job files resolve paths to absolute ones), a URL or an outside path unchanged."""
    import os

    text = str(store)
    if "://" in text or not os.path.isabs(text):
        return text
    rel = os.path.relpath(text)
    return text if rel.startswith("..") else rel


def _accept(run_id: int, run, config, store, json_out: bool, quiet: bool) -> None:
    """``--accept RUN``: mark a recorded run as its series' baseline."""
    from curvefit.workflows.nightly import accept_run, read_job

    if run is not None:
        raise InputError("--accept takes a run id; give no RUN file with it")
    if store is None and config is not None:
        store = read_job(config).get("store")
    if not store:
        raise InputError("no history store: pass --store history.db with --accept")
    doc = accept_run(str(store), run_id)
    if json_out:
        emit_json(doc)
    elif not quiet:
        out.print(f"accepted run {doc['run_id']} (verdict: {doc['verdict'] or 'none'}) as the "
                  f"baseline of series {doc['series']} in {doc['store']}", markup=False)


def register(app: typer.Typer) -> None:
    @app.command("track")
    def track(
        run: Optional[Path] = typer.Argument(None, help="Run file (or curve table) to record; "
                                             "omit with --config."),
        config: Optional[Path] = typer.Option(None, "--config",
                                              help="Job file (TOML): measure, fit, record, compare."),
        store: Optional[str] = typer.Option(None, "--store", help="History store: a file (history.db) "
                                             "or postgresql://user@host/db."),
        series: Optional[str] = typer.Option(None, "--series", help="Series name, e.g. nightly."),
        baseline: Optional[str] = typer.Option(None, "--baseline",
                                               help="accepted (default), previous (last passing "
                                               "run), best, or a run id."),
        accept: Optional[int] = typer.Option(None, "--accept", metavar="RUN",
                                             help="Accept a recorded run as the series' baseline."),
        gate: Optional[str] = typer.Option(None, "--gate",
                                           help="Figures that gate: efficiency (default), all, "
                                           "or names separated by commas."),
        junit: Optional[Path] = typer.Option(None, "--junit", metavar="FILE",
                                             help="Also write the verdict as JUnit XML."),
        target_error: Optional[float] = typer.Option(None, "--target-error",
                                                     help="Target test error of the series."),
        allow_data_change: bool = typer.Option(False, "--allow-data-change",
                                               help="Compare even if the data or metric changed."),
        again: bool = typer.Option(False, "--again",
                                   help="Record the run even if this run file is already "
                                   "recorded in the series."),
        bootstrap: Optional[int] = typer.Option(None, "--bootstrap",
                                                help=f"Bootstrap replicates (default {BOOTSTRAP})."),
        interval: Optional[float] = typer.Option(None, "--interval",
                                                 help=f"Interval level (default {INTERVAL})."),
        seed: Optional[int] = typer.Option(None, "--seed", help="Seed of the measurement and bootstrap."),
        json_out: bool = typer.Option(False, "--json", help="Print JSON on stdout."),
        quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
    ):
        """Record a run in the history store, compare it with the series' baseline and
        exit 1 on a regression (2 if the data or metric changed)."""
        from curvefit.core.curve import Curve
        from curvefit.workflows.nightly import track_job

        if accept is not None:
            _accept(accept, run, config, store, json_out, quiet)
            return
        job = _job(run, config, dict(store=store, series=series, baseline=baseline,
                                     target_error=target_error, bootstrap=bootstrap,
                                     allow_data_change=allow_data_change, interval=interval,
                                     seed=seed, gate=gate, junit=junit, again=again))
        quiet = quiet or bool(job.get("quiet", False))
        json_out = json_out or bool(job.get("json", False))
        junit = job.get("junit")
        if junit is not None and not Path(junit).parent.is_dir():
            raise InputError(f"--junit {junit}: directory {Path(junit).parent} does not exist")
        curve = Curve.read(run) if run is not None else None
        # a job that measures first shows the measuring progress instead
        with status(f"fitting and comparing with the baseline of series {job['series']}",
                    quiet or curve is None):
            result = track_job(job, curve=curve, progress=not quiet)
        for note in result.warnings:
            warn(note, quiet)
        _report(result, json_out, quiet, None if junit is None else Path(junit))
        raise typer.Exit(result.exit_code)
