"""`curvefit plan`: buy labels for a target in rounds, against buying them at once."""

from __future__ import annotations

from typing import Optional

import typer

from curvefit.cli.common import (
    OPTION_NAMES,
    QUIET_HELP,
    emit_json,
    interval_option,
    out,
    print_table,
    status,
    warn,
)
from curvefit.cli.fit import BOOTSTRAP_HELP, WEIGHTS_HELP
from curvefit.core.defaults import BOOTSTRAP, SEED
from curvefit.core.errors import InputError

STRATEGY_NAMES = {"rounds": "rounds", "one-shot": "one purchase", "upper-end": "upper end at once"}


def _strategy_row(s, money, format_count) -> list[str]:
    totals = " / ".join(format_count(t) for t in s.totals) if s.totals else "nothing"
    return [STRATEGY_NAMES[s.name], totals, money(s.expected_cost),
            f"{money(s.cost_low)}–{money(s.cost_high)}", money(s.cost_sd),
            f"{s.reach_probability:.0%}", f"{s.expected_rounds:.1f}"]


def print_plan(plan) -> None:
    """The answer it starts from, the draws of the samples needed, the rule, the comparison."""
    from curvefit.core.formatting import format_count, format_level, format_money

    if plan.answer is not None:
        out.print(plan.answer.message, markup=False)
    q = plan.to_dict()["samples_needed"]["quantiles"]
    out.print("Samples needed, as the forecast's band spreads them: "
              + ", ".join(f"{'median' if k == '0.5' else f'{float(k):.0%}'} "
                          f"{_count(v, format_count)}" for k, v in q.items())
              + f"; you have {format_count(plan.current_n)}.", markup=False)
    terms = (f"penalty {format_money(plan.penalty)} for a miss" if plan.penalty is not None
             else f"reach the target with probability {plan.probability:.0%}")
    out.print("", markup=False)
    out.print(f"Plan in at most {plan.max_rounds} round{'s' if plan.max_rounds != 1 else ''} "
              f"({format_money(plan.label_cost)} per label, {format_money(plan.round_cost)} per "
              f"round, {terms}):", markup=False)
    for line in plan.rule():
        out.print("  " + line, markup=False)
    strategies = [s for s in (plan.rounds, plan.one_shot, plan.upper_end) if s is not None]
    if not strategies:
        return
    out.print("", markup=False)
    print_table(["strategy", "labels in all, by round", "expected cost",
                 f"{format_level(plan.level)} interval", "spread (sd)", "reaches target",
                 "rounds"], [_strategy_row(s, format_money, format_count) for s in strategies],
                align="first-left")
    if plan.upper_end is None:
        out.print("upper end at once: not priced, the samples-needed interval has no upper end",
                  markup=False)
    if plan.rounds is not None:
        ratios = [f"{plan.rounds.expected_cost / s.expected_cost:.2f}× {STRATEGY_NAMES[s.name]}"
                  for s in (plan.one_shot, plan.upper_end) if s is not None and s.expected_cost > 0]
        if ratios:
            out.print("expected cost of the rounds plan: " + ", ".join(ratios), markup=False)


def _count(value: float, format_count) -> str:
    return "beyond the horizon" if value == float("inf") else format_count(value)


def register(app: typer.Typer) -> None:
    @app.command("plan")
    def plan_command(
        run: str = typer.Argument(..., metavar="RUN", help="Run file (JSON) or a curve table (CSV)."),
        error: Optional[float] = typer.Option(None, "--error", help="Target test error E."),
        gap: Optional[float] = typer.Option(None, "--gap", help="Target generalization gap G."),
        label_cost: Optional[float] = typer.Option(None, "--label-cost", help="Price of one label."),
        round_cost: float = typer.Option(0.0, "--round-cost",
                                         help="Fixed cost of each round (set-up, retraining)."),
        penalty: Optional[float] = typer.Option(None, "--penalty",
                                                help="Cost of ending below the target after the "
                                                     "last round."),
        probability: Optional[float] = typer.Option(None, "--probability",
                                                    help="Required chance of reaching the target "
                                                         "(instead of --penalty), e.g. 0.9."),
        rounds: int = typer.Option(3, "--rounds", help="At most this many rounds (1 to 20)."),
        budget: Optional[float] = typer.Option(None, "--budget",
                                               help="With a per-slice file: money to split "
                                                    "across the slices."),
        slice_costs: Optional[str] = typer.Option(None, "--slice-costs",
                                                  help="With a per-slice file: label cost per "
                                                       "slice, VALUE=COST,VALUE=COST."),
        slice_errors: Optional[str] = typer.Option(None, "--slice-errors",
                                                   help="With a per-slice file: target error per "
                                                        "slice, VALUE=E,VALUE=E (instead of "
                                                        "--budget)."),
        current: Optional[int] = typer.Option(None, "--current",
                                              help="Labelled samples you have now (default: the "
                                                   "largest measured size)."),
        families: str = typer.Option("auto", "--families", help="Families to try, a,b,c (default: all)."),
        bootstrap: int = typer.Option(BOOTSTRAP, "--bootstrap", help=BOOTSTRAP_HELP),
        weights: str = typer.Option("sem", "--weights", help=WEIGHTS_HELP),
        interval: float = interval_option("Level of the interval on the total cost."),
        seed: int = typer.Option(SEED, "--seed", help="Random seed of the bootstrap."),
        quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
        json_out: bool = typer.Option(False, "--json", help="Print the plan as JSON only."),
    ):
        """Buy labels for a target in rounds: how many now, when to buy more, and the
        expected cost against one purchase and against the interval's upper end."""
        from curvefit.core.curve import Curve
        from curvefit.fitting.rounds import plan_rounds

        # the API's parameter names in its messages read as this command's options
        OPTION_NAMES.update(label_cost="--label-cost", round_cost="--round-cost",
                            penalty="--penalty", probability="--probability",
                            max_rounds="--rounds")

        from curvefit.measuring.slices import SliceCurves, is_slices_file

        if is_slices_file(run):
            split = plan_slice_budget(SliceCurves.read(run), budget, label_cost, slice_costs,
                                      slice_errors, interval=interval, families=families,
                                      bootstrap=bootstrap, weights=weights, seed=seed,
                                      quiet=quiet)
            if json_out:
                emit_json(split.to_dict())
            else:
                print_split(split)
            for note in split.notes:
                warn(note, quiet)
            return
        if budget is not None or slice_costs is not None or slice_errors is not None:
            raise InputError("--budget, --slice-costs and --slice-errors need a per-slice file "
                             "(curvefit measure ... --slice COL)")
        if label_cost is None:
            raise InputError("give --label-cost, the price of one label")
        if (error is None) == (gap is None):
            raise InputError("give exactly one target: --error E (test error) or --gap G")
        if (penalty is None) == (probability is None):
            raise InputError("give exactly one of --penalty (the cost of a miss) and "
                             "--probability (the required chance of reaching the target)")
        curve = Curve.read(run)
        with status(f"fitting {run} and planning the rounds", quiet):
            plan = plan_rounds(curve, test_error=error, gap=gap, label_cost=label_cost,
                               round_cost=round_cost, penalty=penalty, probability=probability,
                               max_rounds=rounds, current_n=current, interval=interval,
                               families=families, bootstrap=bootstrap, weights=weights,
                               random_state=seed)
        grown = curve.meta.get("rounds")  # a grown table (measure --previous): its rounds so far
        if json_out:
            emit_json({**plan.to_dict(), "table_rounds": grown} if grown else plan.to_dict())
            return
        if grown:
            out.print(table_rounds_line(grown), markup=False)
        print_plan(plan)
        for note in plan.warnings:
            warn(note, quiet)


def table_rounds_line(rounds: list) -> str:
    """The labels of each round a grown run records, in one line."""
    from curvefit.core.formatting import format_count

    parts = [f"{r.get('round', k + 1)}: {'+' if k else ''}{format_count(r['new_rows'])}"
             for k, r in enumerate(rounds)]
    last = rounds[-1]
    return (f"Labels per round of the table so far: {', '.join(parts)} ({format_count(last['rows'])} "
            f"rows in all, {format_count(last['pool'])} in the training pool).")


def run_slice_measure(opts: dict, column: str) -> int:
    """`curvefit measure DATA ... --slice COL`: one curve per slice, written as one file."""
    from curvefit.core.formatting import format_error, quantity_name
    from curvefit.core.jsonio import check_output_path
    from curvefit.measuring.slices import measure_slices_of_table

    unsupported = [f"--{k.replace('_', '-')}" for k in ("command", "test", "groups", "order", "goal",
                                                         "plan_only", "sizes", "previous")
                   if opts.get(k)]
    if unsupported:
        raise InputError(f"--slice does not combine with {', '.join(unsupported)}; per-slice "
                         "curves choose their own sizes and split")
    if not opts.get("data") or not opts.get("target"):
        raise InputError("usage: curvefit measure DATA --target COL --model SPEC --slice COL")
    features = opts.get("features")
    if isinstance(features, str):
        features = [f.strip() for f in features.split(",") if f.strip()]
    path = opts.get("out") or "slices.json"
    check_output_path(path, "per-slice file")
    # the runner's progress lines say what is being measured; each slice's cells are
    # journaled in <out>.journals/ (--resume continues an interrupted run)
    result = measure_slices_of_table(
        opts["data"], target=opts["target"], column=column, model=opts["model"],
        params=opts.get("param"), features=features, repeats=opts["repeats"],
        test_size=opts["test_fraction"], metric=opts["metric"], n_jobs=opts["jobs"],
        random_state=opts["seed"], progress=not opts["quiet"],
        journal_dir=f"{path}.journals", resume=bool(opts.get("resume")))
    result.write(path)
    if opts["json"]:
        emit_json(dict(result.to_dict(), written=str(path)))
        return 0
    rows = []
    for value in result.rows:
        curve = result.curves.get(value)
        if curve is None:
            rows.append([str(value), f"{result.rows[value]:,}", f"{result.shares[value]:.0%}",
                         "–", "–", "too few rows"])
            continue
        s = curve.summary()
        first, last = s.iloc[0], s.iloc[-1]
        rows.append([str(value), f"{result.rows[value]:,}", f"{result.shares[value]:.0%}",
                     f"{format_error(first['test_mean'], curve.metric)} at {int(first['size']):,}",
                     f"{format_error(last['test_mean'], curve.metric)} at {int(last['size']):,}",
                     "measured"])
    measured = next(iter(result.curves.values()), None)
    quantity = (quantity_name("test_error", measured.metric, measured.metric_info)
                if measured is not None else "test error")
    out.print(f"per-slice curves of {column} (each slice's training rows grow, the others stay "
              f"whole; {quantity} on that slice's test rows):", markup=False)
    print_table([column, "rows", "share", "smallest size", "all its rows", "status"], rows,
                align="first-left")
    for reason in result.skipped.values():
        warn(reason)
    out.print(f"wrote {path} ({len(result.curves)} slice curves)", markup=False)
    return 0


def parse_pairs(text: str | None, option: str) -> dict | None:
    """``a=1,b=2`` as ``{"a": 1.0, "b": 2.0}``."""
    if text is None:
        return None
    pairs = {}
    for item in str(text).split(","):
        key, sep, value = item.partition("=")
        try:
            number = float(value)
        except ValueError:
            number = None
        if not sep or not key.strip() or number is None:
            raise InputError(f"{option} takes VALUE=NUMBER pairs separated by commas, got {item!r}")
        pairs[key.strip()] = number
    return pairs


def plan_slice_budget(slices, budget, label_cost, slice_costs, slice_errors, *, interval,
                      families, bootstrap, weights, seed, quiet):
    from curvefit.fitting.rounds import plan_slices

    costs = parse_pairs(slice_costs, "--slice-costs")
    targets = parse_pairs(slice_errors, "--slice-errors")
    if costs is not None and label_cost is not None:
        raise InputError("give --label-cost (one price) or --slice-costs (per slice), not both")
    if (budget is None) == (targets is None):
        raise InputError("with a per-slice file give --budget B (money to split) or "
                         "--slice-errors (a target per slice)")
    with status("fitting every slice's curve and splitting the budget", quiet):
        return plan_slices(slices, budget=budget, targets=targets,
                           label_costs=costs if costs is not None else
                           (label_cost if label_cost is not None else 1.0),
                           interval=interval, families=families, bootstrap=bootstrap,
                           weights=weights, random_state=seed)


def print_split(split) -> None:
    """The split per slice, then the overall error now and after, with intervals."""
    from curvefit.core.formatting import (
        format_count,
        format_error,
        format_interval,
        format_level,
        format_money,
        format_range,
        quantity_name,
    )

    fitted = next(iter(split.fits.values()), None)
    metric = fitted.curve.metric if fitted is not None else "error"
    quantity = quantity_name("test_error", metric, fitted.curve.metric_info if fitted is not None else None)
    short = "error" if metric == "error" else quantity.removeprefix("test ")
    if split.targets:
        out.print("Labels to buy per slice for its target (each slice's curve answers for its "
                  f"own; {format_money(split.budget)} in all):", markup=False)
    else:
        out.print(f"Labels to buy per slice for a budget of {format_money(split.budget)} (the "
                  f"fall of the overall {short} per unit of money is equalised across the slices "
                  "that get labels):", markup=False)
    def exact(v) -> str:  # labels to buy are whole and exact, not rounded to 3 figures
        return f"{int(round(v)):,}" if v == v and abs(v) != float("inf") else format_count(v)

    rows = [[str(r.slice), f"{r.share:.0%}", exact(r.rows_now), format_money(r.label_cost),
             exact(r.labels), format_money(r.spend), format_error(r.error_now, metric),
             format_error(r.error_after, metric), format_range(r.low, r.high, "error", metric)]
            for r in split.table.itertuples()]
    print_table(["slice", "share", "rows now", "label cost", "buy", "spend", f"{short} now",
                 f"{short} after", f"{format_level(split.level)} interval"], rows, align="first-left")
    for name, e in (("now", split.overall_now), ("after", split.overall_after)):
        out.print(f"overall {'error' if metric == 'error' else quantity} {name}: "
                  f"{format_error(e.estimate, metric)} "
                  f"({format_interval(e.low, e.high, e.level, kind='error', metric=metric)})",
                  markup=False)
