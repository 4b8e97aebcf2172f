"""`curvefit demo [--out DIR]`: the whole job on the bundled packhouse scenario.

The work is `curvefit.workflows.demo.run_demo` (``cf.run_demo``); this command prints
what it found and where it wrote the run files, the fits, the plans and the report.
"""

from __future__ import annotations

from pathlib import Path

import typer

from curvefit.cli.common import emit_json, err, out
from curvefit.core.defaults import INTERVAL, SEED
from curvefit.core.formatting import format_error, format_interval


def _print_models(res) -> None:
    for r in res.results:
        s = r.curve.summary()
        measured = "no data"
        if len(s):
            last = s.iloc[-1]
            measured = (f"{format_error(last['test_mean'], r.curve.metric)} test error at "
                        f"{int(last['size']):,} labels")
        best = getattr(r.fit, "best", None) or "no fit"
        out.print(f"  {r.label}: {measured}; curve family {best}", markup=False)


def _print_target(res) -> None:
    if res.target_error is None:
        return
    out.print(f"target: {format_error(res.target_error)} test error", markup=False)
    for r in res.results:
        if r.answer is not None:
            out.print(f"  {r.label}: {r.answer.message}", markup=False)


def _print_plan(res) -> None:
    from curvefit.core.formatting import format_money

    if res.plan is None or not len(res.plan):
        return
    row = res.plan.iloc[min(1, len(res.plan) - 1)]
    out.print(f"buying {int(row['extra']):,} more labels ({res.best_label}) costs "
              f"{format_money(row['cost'])} and is expected to give "
              f"{format_error(row['test_error'])} test error "
              f"({format_interval(row['low'], row['high'], INTERVAL, 'error')})", markup=False)


def _print_buying(res) -> None:
    """The plan in rounds in one line, the split per variety in one line."""
    from curvefit.core.formatting import format_count, format_money

    buying = res.buying
    if buying is None:
        return
    plan = buying.rounds
    if plan is not None and plan.rounds is not None:
        ratios = ", ".join(f"{r:.2f}× {s.title}" for r, s in
                           ((plan.cost_ratios().get(k), v) for k, v in
                            (("one-shot", plan.one_shot), ("upper-end", plan.upper_end)))
                           if r is not None)
        cost = (f"expected cost {format_money(plan.rounds.expected_cost)}"
                + (f" ({ratios})" if ratios else ""))
        if not plan.rounds.totals:   # buying nothing is the cheapest choice: say so and why
            what = plan.rule()[0].rstrip(".")
            out.print(f"in rounds ({buying.model}): {what[0].lower()}{what[1:]}; {cost}",
                      markup=False)
        else:
            out.print(f"in rounds ({buying.model}): buy {format_count(plan.buy_now)} labels now, "
                      f"at most {plan.max_rounds} rounds; {cost}", markup=False)
    split = buying.split
    if split is not None:
        column = buying.slices.column
        parts = ", ".join(f"{r.slice} {format_count(r.labels)}" for r in split.table.itertuples()
                          if r.labels > 0)
        after = split.overall_after
        out.print(f"per {column}, {format_money(split.budget)} buys: {parts or 'nothing'}; "
                  f"overall error {format_error(split.overall_now.estimate)} -> "
                  f"{format_error(after.estimate)} "
                  f"({format_interval(after.low, after.high, after.level, 'error')})",
                  markup=False)


def register(app: typer.Typer) -> None:
    @app.command("demo")
    def demo_cmd(
        out_dir: Path = typer.Option(Path("curvefit-demo"), "--out", "-o",
                                     help="Folder for the run files, fits, plan and report."),
        jobs: int = typer.Option(2, "--jobs", "-j", help="Parallel fits."),
        seed: int = typer.Option(SEED, "--seed", help="The one seed of the demo."),
        json_out: bool = typer.Option(False, "--json", help="Print a JSON summary on stdout."),
        quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress on stderr."),
    ):
        """Run the whole job on the bundled demo scenario and write the report."""
        from curvefit.workflows.analysis import result_summary
        from curvefit.workflows.demo import run_demo

        log = None if quiet else (lambda s: err.print(s, markup=False))
        res = run_demo(out_dir, n_jobs=jobs, random_state=seed, log=log)
        if json_out:
            emit_json({"report": str(res.report), "target_error": res.target_error,
                       "best": res.best_label, "seconds": res.seconds,
                       "runs": {k: str(v) for k, v in res.runs.items()},
                       "fit": str(res.fit_file),
                       "plan": str(res.plan_csv) if res.plan_csv else None,
                       "slices": str(res.slices_file) if res.slices_file else None,
                       "buying": str(res.buying_file) if res.buying_file else None,
                       "models": [result_summary(r) for r in res.results]})
            return
        out.print("[bold]curvefit demo[/bold]: fruit grading at a fictional packhouse "
                  "(synthetic data)")
        _print_models(res)
        _print_target(res)
        _print_plan(res)
        _print_buying(res)
        out.print(f"files in {res.out_dir}: run files, fit.json, plan.csv/plan.json, "
                  f"slices-variety.json, buying-plan.json, report ({res.seconds:.0f} s)",
                  markup=False)
        out.print(str(res.report), markup=False)
