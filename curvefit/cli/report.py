"""`curvefit report RUN [RUN ...]`: fit each run and write the self-contained HTML report.

The work is `curvefit.workflows.analysis.report_runs`; this command prints the report's
path, or with ``--json`` the path, the figure files, each model's headline and the
"what to buy" plans (``buying``: the plan in rounds and the split across slices).
"""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from curvefit.cli.common import OPTION_NAMES, emit_json, err, interval_option, out
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
        label_cost: Optional[float] = typer.Option(
            None, "--label-cost", help="Price of one label: with --penalty or --probability, a "
                                       "plan in rounds for --target-error (as curvefit plan); "
                                       "with --slices, the one price of every slice."),
        round_cost: Optional[float] = typer.Option(
            None, "--round-cost", help="Fixed cost of each round (default 0)."),
        penalty: Optional[float] = typer.Option(
            None, "--penalty", help="Cost of ending below the target after the last round."),
        probability: Optional[float] = typer.Option(
            None, "--probability", help="Required chance of reaching the target (instead of "
                                        "--penalty), e.g. 0.9."),
        rounds: Optional[int] = typer.Option(None, "--rounds",
                                             help="At most this many rounds (default 3)."),
        slices: Optional[Path] = typer.Option(
            None, "--slices", help="Per-slice curves (curvefit measure ... --slice COL --out): "
                                   "their figure and a split of --budget or --slice-errors."),
        budget: Optional[float] = typer.Option(None, "--budget",
                                               help="With --slices: money to split across them."),
        slice_costs: Optional[str] = typer.Option(
            None, "--slice-costs", help="With --slices: label cost per slice, VALUE=COST,..."),
        slice_errors: Optional[str] = typer.Option(
            None, "--slice-errors", help="With --slices: target error per slice, VALUE=E,... "
                                         "(instead of --budget)."),
        title: str = typer.Option("Learning-curve report", "--title", help="Report title."),
        bootstrap: int = typer.Option(BOOTSTRAP, "--bootstrap",
                                      help="Bootstrap replicates for the fit intervals."),
        interval: float = interval_option(),
        seed: int = typer.Option(SEED, "--seed", help="Seed of the bootstrap (same seed, same report)."),
        json_out: bool = typer.Option(False, "--json", help="Print a JSON summary on stdout."),
        quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress on stderr."),
    ):
        """Self-contained HTML report with figures (PNG/SVG also written); with the options
        of curvefit plan, a "what to buy" section."""
        from curvefit.cli.plan import parse_pairs
        from curvefit.workflows.analysis import report_runs, result_summary

        # the API's parameter names in its messages read as this command's options
        OPTION_NAMES.update(label_cost="--label-cost", round_cost="--round-cost",
                            penalty="--penalty", probability="--probability",
                            max_rounds="--rounds", slice_costs="--slice-costs",
                            slice_errors="--slice-errors", slices="--slices")
        buying = dict(label_cost=label_cost, round_cost=round_cost, penalty=penalty,
                      probability=probability, max_rounds=rounds, slices=slices, budget=budget,
                      slice_costs=parse_pairs(slice_costs, "--slice-costs"),
                      slice_errors=parse_pairs(slice_errors, "--slice-errors"))
        done = report_runs(runs, out_path, target_error=target_error, capacity=capacity,
                           tradeoff=tradeoff, title=title, bootstrap=bootstrap,
                           random_state=seed, interval=interval,
                           progress=None if quiet else (lambda m: err.print(m, markup=False)),
                           buying=buying)
        if json_out:
            emit_json({"report": str(done.path), "figures": done.figures,
                       "models": [result_summary(r) for r in done.results],
                       "buying": done.buying.to_dict() if done.buying is not None else None})
        else:
            out.print(str(done.path), markup=False)
