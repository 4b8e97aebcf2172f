"""`curvefit need`: labelled samples needed to reach a test error or a gap, and its price."""

from __future__ import annotations

import math
from typing import Optional

import typer

from curvefit.cli.common import (
    QUIET_HELP,
    emit_json,
    interval_option,
    level_alias,
    out,
    pick_interval,
    status,
    warn,
)
from curvefit.cli.fit import BOOTSTRAP_HELP, WEIGHTS_HELP, print_sanity, print_table
from curvefit.core.defaults import BOOTSTRAP, SEED
from curvefit.core.errors import InputError
from curvefit.core.formatting import (
    format_count,
    format_error,
    format_interval,
    format_level,
    format_number,
    format_range,
    quantity_name,
)
from curvefit.core.validate import parse_list


def _print_answer(need, interval: float) -> None:
    """The answer's sentence, then the fitted family it came from."""
    used = need.fit
    if need.answer is None:
        return
    out.print(need.answer.message, markup=False)
    detail = f"Fitted family: {used.best} ({used.formula})"
    if used.runner_up:
        detail += f", runner-up {used.runner_up}"
    asym = need.answer.asymptote
    if asym is not None and math.isfinite(asym.estimate):
        detail += f"; it {used.describe_asymptote(interval)}"
    out.print(detail + ".", markup=False)


def _print_price(need, interval: float) -> None:
    """What is still missing, its cost, and what the budget buys."""
    from curvefit.core.formatting import format_money as money

    have, metric = need.current_n, need.fit.curve.metric
    what = quantity_name("test_error", metric, need.fit.curve.metric_info)
    if need.answer is not None and need.answer.reachable:
        out.print(f"You have {have:,.0f} labelled samples; that is about "
                  f"{format_count(need.extra)} more." if need.extra > 0 else
                  f"You have {have:,.0f} labelled samples, already enough.", markup=False)
        if need.cost is not None:
            c = need.cost
            span = (f" ({format_level(interval)} interval {money(c.cost_low)}–{money(c.cost_high)})"
                    if math.isfinite(c.cost_low) and math.isfinite(c.cost_high) else "")
            out.print(f"Buying them costs about {money(c.cost)} at {money(c.cost_per_label)} "
                      f"per label{span}.", markup=False)
    b = need.budget
    if b is not None:
        e = b.test_error
        out.print(f"A budget of {money(b.budget)} buys {format_count(b.labels)} labels "
                  f"({b.total_n:,.0f} in total); the expected {what} then is "
                  f"{format_error(e.estimate, metric)} "
                  f"({format_interval(e.low, e.high, interval, 'error', metric)}).", markup=False)
        if need.budget_covers is not None:
            out.print("The budget covers the target." if need.budget_covers else
                      f"The budget falls short of the target by about "
                      f"{format_count(need.extra - b.labels)} labels.", markup=False)


def _print_plan(need, interval: float) -> None:
    from curvefit.core.formatting import format_money

    metric = need.fit.curve.metric
    what = quantity_name("test_error", metric, need.fit.curve.metric_info)
    if need.answer is not None:
        out.print("", markup=False)
    out.print(f"expected {what} after buying more labels (you have {need.current_n:,.0f}):",
              markup=False)
    rows = [[f"{r.extra:,.0f}", f"{r.total_n:,.0f}", format_error(r.test_error, metric),
             format_range(r.low, r.high, "error", metric), format_money(r.cost),
             format_error(r.drop_per_1000, metric)]
            for r in need.plan.itertuples()]
    print_table(["extra", "total", what, f"{format_level(interval)} interval", "cost",
                 "drop per 1,000"], rows)


def _print_vc(vc: dict) -> None:
    out.print("", markup=False)
    if not vc.get("applies", True):
        out.print(vc["reason"][:1].upper() + vc["reason"][1:] + ".", markup=False)
        return
    if vc.get("refused"):
        worst = f"no VC bound: {vc['refused']}"
    elif vc["vc_sample_size"] is not None:
        worst = (f"{vc['vc_sample_size']:,} samples (VC bound on the gap, ε = "
                 f"{format_number(vc['eps'], 3)}: "
                 f"{vc['eps_source']}; δ = {vc['delta']:g})")
    else:
        worst = "not defined for this target"
    out.print(f"Beside it, for VC dimension {vc['vc_dim']}: worst case {worst}; rule of "
              f"thumb 10 × d_vc = {vc['rule_of_thumb_samples']:,} samples. The measured answer "
              "above is what this learner did on this data.", markup=False)


def print_need(need, interval: float) -> None:
    """The answer first, the constant predictor and the flags beside it, then its price,
    the purchase plan and the worst case."""
    _print_answer(need, interval)
    if need.sanity is not None and need.answer is not None:
        print_sanity(need.sanity)
    _print_price(need, interval)
    if need.plan is not None:
        _print_plan(need, interval)
    if need.sanity is not None and need.answer is None:
        print_sanity(need.sanity)
    if need.vc is not None:
        _print_vc(need.vc)


def register(app: typer.Typer) -> None:
    @app.command("need")
    def need_command(
        run: str = typer.Argument(..., metavar="RUN", help="Run file (JSON) or a curve table (CSV)."),
        error: Optional[float] = typer.Option(None, "--error",
                                              help="Target test error E, in the metric's units "
                                                   "(0.05 for 5% error; 3000 for a test MSE of "
                                                   "3,000)."),
        gap: Optional[float] = typer.Option(None, "--gap",
                                            help="Target generalization gap G (test − train)."),
        label_cost: Optional[float] = typer.Option(None, "--label-cost", help="Price of one label."),
        budget: Optional[float] = typer.Option(None, "--budget",
                                               help="Money to spend on labels (needs --label-cost)."),
        current: Optional[int] = typer.Option(None, "--current",
                                              help="Labelled samples you have now (default: the largest "
                                                   "measured size)."),
        extra: Optional[str] = typer.Option(None, "--extra",
                                            help="Purchase amounts to price, a,b,c or START:STOP:COUNT; "
                                                 "without a target, what they buy."),
        vc_dim: Optional[float] = typer.Option(None, "--vc-dim",
                                               help="A known VC dimension, to show the worst-case bound "
                                                    "beside the answer."),
        families: str = typer.Option("auto", "--families", help="Families to try, a,b,c (default: all)."),
        bootstrap: int = typer.Option(BOOTSTRAP, "--bootstrap", help=BOOTSTRAP_HELP),
        weights: str = typer.Option("sem", "--weights", help=WEIGHTS_HELP),
        interval: float = interval_option(),
        level: Optional[float] = level_alias(),
        seed: int = typer.Option(SEED, "--seed", help="Random seed of the bootstrap."),
        quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
        json_out: bool = typer.Option(False, "--json", help="Print the answer as JSON only."),
    ):
        """Labelled samples needed for a target test error (--error) or gap (--gap), priced;
        without a target, what --extra labels buy."""
        from curvefit.core.curve import Curve
        from curvefit.fitting.planning import labels_needed

        if error is not None and gap is not None:
            raise InputError("give exactly one target: --error E (test error) or --gap G")
        if error is None and gap is None and extra is None:
            raise InputError("give a target, --error E (test error) or --gap G, or --extra "
                             "amounts to see what they buy")
        interval = pick_interval(interval, level)
        extras = (parse_list(extra, float, name="extra amount", integer_range=True)
                  if extra is not None else None)
        curve = Curve.read(run)  # a bad run file is one line, before any status line
        with status(f"fitting the curve families to {run} ({bootstrap} bootstrap replicates) "
                    "and solving for the answer", quiet):
            need = labels_needed(curve, test_error=error, gap=gap, current_n=current,
                                 cost_per_label=label_cost, budget=budget, extra=extras,
                                 vc_dim=vc_dim, interval=interval, families=families,
                                 bootstrap=bootstrap, weights=weights, random_state=seed)
        if json_out:
            emit_json(need.to_dict())
            return
        print_need(need, interval)
        for note in need.warnings:
            warn(note, quiet)
