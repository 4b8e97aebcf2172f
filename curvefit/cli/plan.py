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
        label_cost: float = typer.Option(..., "--label-cost", help="Price of one label."),
        round_cost: float = typer.Option(0.0, "--round-cost",
                                         help="Fixed cost of each round (set-up, retraining)."),
        penalty: Optional[float] = typer.Option(None, "--penalty",
                                                help="Cost of ending below the target after the "
                                                     "last round."),
        probability: Optional[float] = typer.Option(None, "--probability",
                                                    help="Required chance of reaching the target "
                                                         "(instead of --penalty), e.g. 0.9."),
        rounds: int = typer.Option(3, "--rounds", help="At most this many rounds (1 to 20)."),
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

        if (error is None) == (gap is None):
            raise InputError("give exactly one target: --error E (test error) or --gap G")
        if (penalty is None) == (probability is None):
            raise InputError("give exactly one of --penalty (the cost of a miss) and "
                             "--probability (the required chance of reaching the target)")
        with status(f"fitting {run} and planning the rounds", quiet):
            plan = plan_rounds(Curve.read(run), test_error=error, gap=gap, label_cost=label_cost,
                               round_cost=round_cost, penalty=penalty, probability=probability,
                               max_rounds=rounds, current_n=current, interval=interval,
                               families=families, bootstrap=bootstrap, weights=weights,
                               random_state=seed)
        if json_out:
            emit_json(plan.to_dict())
            return
        print_plan(plan)
        for note in plan.warnings:
            warn(note, quiet)
