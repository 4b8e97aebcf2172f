"""`curvefit report RUN [RUN ...]`: fit each run and write the self-contained HTML report.

The work is `curvefit.workflows.analysis.report_runs`; this command prints the report's
path, or with ``--json`` the path, the figure files and each model's headline.
"""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from curvefit.cli.common import emit_json, err, interval_option, out
from curvefit.core.defaults import BOOTSTRAP, SEED


def register(app: typer.Typer) -> None:
    @app.command("report")
    def report_cmd(
        runs: List[Path] = typer.Argument(..., help="Run files (curvefit measure --out) or "
                                                    "curve tables (CSV); one per model."),
        out_path: Path = typer.Option(Path("report.html"), "--out", "-o",
                                      help="HTML file to write; figures go to <name>_files/."),
        target_error: Optional[float] = typer.Option(
            None, "--target-error", help="Test error to reach in the metric's units (0.05 for 5% "
                                         "error; 3000 for a test MSE of 3,000); the report "
                                         "opens with the labelled samples needed."),
        capacity: Optional[Path] = typer.Option(
            None, "--capacity", help="Saved probe result (curvefit capacity --probe ... --out)."),
        tradeoff: Optional[Path] = typer.Option(
            None, "--tradeoff", help="Saved trade-off result (curvefit tradeoff ... --out)."),
        title: str = typer.Option("Learning-curve report", "--title", help="Report title."),
        bootstrap: int = typer.Option(BOOTSTRAP, "--bootstrap",
                                      help="Bootstrap replicates for the fit intervals."),
        interval: float = interval_option(),
        seed: int = typer.Option(SEED, "--seed", help="Seed of the bootstrap (same seed, same report)."),
        json_out: bool = typer.Option(False, "--json", help="Print a JSON summary on stdout."),
        quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress on stderr."),
    ):
        """Self-contained HTML report with figures (PNG/SVG also written)."""
        from curvefit.workflows.analysis import report_runs, result_summary

        done = report_runs(runs, out_path, target_error=target_error, capacity=capacity,
                           tradeoff=tradeoff, title=title, bootstrap=bootstrap,
                           random_state=seed, interval=interval,
                           progress=None if quiet else (lambda m: err.print(m, markup=False)))
        if json_out:
            emit_json({"report": str(done.path), "figures": done.figures,
                       "models": [result_summary(r) for r in done.results]})
        else:
            out.print(str(done.path), markup=False)
