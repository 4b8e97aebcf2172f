"""`curvefit need`: labelled samples needed to reach a test error or a gap, and its price."""

from __future__ import annotations

import math
import warnings
from typing import Optional

import typer

from curvefit.cli.common import emit_json, out, parse_list, warn
from curvefit.cli.fit import WEIGHTS_HELP, fit_from_options, print_table
from curvefit.core.errors import FitWarning, InputError


def _money(v: float) -> str:
    if v is None or not math.isfinite(v):
        return "-"
    return f"{v:,.0f}" if abs(v) >= 100 else f"{v:,.2f}"


def _vc_comparison(vc_dim: float, target: float) -> dict | None:
    """Worst-case VC sample size and the 10×d rule beside the measured answer."""
    from curvefit import bounds

    d = int(round(vc_dim))
    row = {"vc_dim": d, "eps": target, "delta": 0.1,
           "vc_sample_size": None, "rule_of_thumb_samples": int(bounds.rule_of_thumb_samples(d))}
    if 0 < target < 1:
        row["vc_sample_size"] = int(bounds.vc_sample_size(d, eps=target, delta=0.1))
    return row


def register(app: typer.Typer) -> None:
    @app.command("need")
    def need_command(
        run: str = typer.Argument(..., metavar="RUN", help="Run file (JSON) or a curve table (CSV)."),
        error: Optional[float] = typer.Option(None, "--error", help="Target test error E."),
        gap: Optional[float] = typer.Option(None, "--gap", help="Target generalization gap G (test − train)."),
        label_cost: Optional[float] = typer.Option(None, "--label-cost", help="Price of one label."),
        budget: Optional[float] = typer.Option(None, "--budget", help="Money to spend on labels (needs --label-cost)."),
        current: Optional[int] = typer.Option(None, "--current", help="Labelled samples you have now (default: the largest measured size)."),
        extra: Optional[str] = typer.Option(None, "--extra", help="Purchase amounts to price, a,b,c or START:STOP:COUNT."),
        vc_dim: Optional[float] = typer.Option(None, "--vc-dim", help="A known VC dimension, to show the worst-case bound beside the answer."),
        families: str = typer.Option("auto", "--families", help="Families to try, a,b,c (default: all)."),
        bootstrap: int = typer.Option(500, "--bootstrap", help="Bootstrap replicates for the intervals."),
        weights: str = typer.Option("sem", "--weights", help=WEIGHTS_HELP),
        level: float = typer.Option(0.9, "--level", help="Interval level."),
        seed: int = typer.Option(0, "--seed", help="Random seed of the bootstrap."),
        quiet: bool = typer.Option(False, "--quiet", help="No warnings on stderr."),
        json_out: bool = typer.Option(False, "--json", help="Print the answer as JSON only."),
    ):
        """Labelled samples needed for a target test error (--error) or gap (--gap), priced."""
        from curvefit.fitting.engine import format_count, format_error
        from curvefit.fitting.planning import labels_for_budget, plan_purchase

        if (error is None) == (gap is None):
            raise InputError("give exactly one target: --error E (test error) or --gap G")
        target = error if error is not None else gap
        if not math.isfinite(target) or target < 0:
            raise InputError(f"the target must be a finite number >= 0, got {target:g}")
        if not 0 < level < 1:
            raise InputError(f"--level must be between 0 and 1, got {level:g}")
        if label_cost is not None and (not math.isfinite(label_cost) or label_cost < 0):
            raise InputError(f"--label-cost must be a number >= 0, got {label_cost:g}")
        if budget is not None:
            if label_cost is None or label_cost == 0:
                raise InputError("--budget needs a positive --label-cost to turn money into labels")
            if not math.isfinite(budget) or budget < 0:
                raise InputError(f"--budget must be a number >= 0, got {budget:g}")
        if current is not None and current <= 0:
            raise InputError(f"--current must be a positive number of labels, got {current}")
        if vc_dim is not None and (not math.isfinite(vc_dim) or vc_dim < 0):
            raise InputError(f"--vc-dim must be a number >= 0, got {vc_dim:g}")
        extras = None
        if extra is not None:
            extras = parse_list(extra, float, name="extra amount", integer_range=True)
            if any(x <= 0 for x in extras):
                raise InputError("--extra amounts must be positive numbers of labels")

        caught: list[str] = []
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always", FitWarning)
            curve, fit = fit_from_options(run, "test", families, bootstrap, weights, seed)
            if gap is not None and not curve.has_train:
                raise InputError("a --gap target needs train error in the curve; give --error instead")
            answer = fit.samples_for(test_error=error, gap=gap, interval=level)
            have = float(current) if current is not None else fit.largest_size
            metric = curve.metric

            doc: dict = {"answer": answer.to_dict(), "current_n": have,
                         "fit": {"on": "test" if error is not None else "gap",
                                 "best": (fit if error is not None else fit._companion("gap")).best}}
            lines: list[str] = []
            n_extra = None
            if answer.reachable:
                n_extra = max(answer.n - have, 0.0)
                lo_extra = max(answer.low - have, 0.0) if math.isfinite(answer.low) else math.nan
                hi_extra = max(answer.high - have, 0.0) if not math.isnan(answer.high) else math.nan
                lines.append(f"You have {have:,.0f} labelled samples; that is about "
                             f"{format_count(n_extra)} more." if n_extra > 0 else
                             f"You have {have:,.0f} labelled samples, already enough.")
                if label_cost is not None:
                    price = n_extra * label_cost
                    doc["cost"] = {"extra_labels": n_extra, "cost": price,
                                   "cost_low": lo_extra * label_cost, "cost_high": hi_extra * label_cost,
                                   "cost_per_label": label_cost}
                    rng_text = (f" ({level:.0%} interval {_money(lo_extra * label_cost)}–"
                                f"{_money(hi_extra * label_cost)})"
                                if math.isfinite(lo_extra) and math.isfinite(hi_extra) else "")
                    lines.append(f"Buying them costs about {_money(price)} at {_money(label_cost)} "
                                 f"per label{rng_text}.")
            if budget is not None:
                bought = labels_for_budget(budget, label_cost)
                after = fit.predict(have + bought, interval=level) if bought > 0 else fit.predict(have, interval=level)
                doc["budget"] = {"budget": budget, "labels": bought, "total_n": have + bought,
                                 "test_error": after.to_dict()}
                lines.append(f"A budget of {_money(budget)} buys {format_count(bought)} labels "
                             f"({have + bought:,.0f} in total); the expected test error then "
                             f"is {format_error(after.estimate, metric)} ({level:.0%} interval "
                             f"{format_error(after.low, metric)}–{format_error(after.high, metric)}).")
                if answer.reachable and n_extra is not None:
                    lines.append("The budget covers the target." if bought >= n_extra else
                                 f"The budget falls short of the target by about "
                                 f"{format_count(n_extra - bought)} labels.")
            plan = None
            if extras is not None or label_cost is not None or budget is not None:
                amounts = set(extras) if extras is not None else {have * k for k in (1, 4, 9)}
                if extras is None and budget is not None and labels_for_budget(budget, label_cost) > 0:
                    amounts.add(labels_for_budget(budget, label_cost))
                if extras is None and n_extra and math.isfinite(n_extra) and n_extra > 0 \
                        and error is not None:
                    amounts.add(n_extra)
                amounts = sorted({int(round(a)) for a in amounts if a > 0})
                plan = plan_purchase(fit, current_n=have, extra=amounts,
                                     cost_per_label=label_cost, interval=level)
                doc["plan"] = plan.to_dict(orient="records")
            dims = vc_dim if vc_dim is not None else curve.meta.get("vc_dim")
            vc = None
            if dims is not None:
                try:
                    vc = _vc_comparison(float(dims), target)
                except (TypeError, ValueError):
                    vc = None
                doc["vc"] = vc
        caught = list(dict.fromkeys(str(w.message) for w in rec if issubclass(w.category, FitWarning)))
        used = fit if error is not None else fit._companion("gap")
        notes = list(dict.fromkeys(list(used.warnings) + list(answer.warnings) + caught))
        doc["warnings"] = notes

        if json_out:
            emit_json(doc)
            return
        out.print(answer.message, markup=False)
        asym = answer.asymptote
        detail = f"Fitted family: {used.best} ({used.formula})"
        if used.runner_up:
            detail += f", runner-up {used.runner_up}"
        if asym is not None and math.isfinite(asym.estimate):
            detail += f"; it {used.describe_asymptote(level)}"
        out.print(detail + ".", markup=False)
        for line in lines:
            out.print(line, markup=False)
        if plan is not None:
            out.print("", markup=False)
            out.print("expected test error after buying more labels:", markup=False)
            rows = [[f"{r.extra:,.0f}", f"{r.total_n:,.0f}", format_error(r.test_error, metric),
                     f"{format_error(r.low, metric)}–{format_error(r.high, metric)}",
                     _money(r.cost), format_error(r.drop_per_1000, metric)]
                    for r in plan.itertuples()]
            print_table(["extra", "total", "test error", f"{level:.0%} interval", "cost",
                         "drop per 1,000"], rows)
        if vc is not None:
            out.print("", markup=False)
            worst = (f"{vc['vc_sample_size']:,} samples (VC bound, ε = {target:g}, δ = 0.1)"
                     if vc["vc_sample_size"] is not None else "not defined for this target")
            out.print(f"Beside it, for VC dimension {vc['vc_dim']}: worst case {worst}; rule of "
                      f"thumb 10 × d_vc = {vc['rule_of_thumb_samples']:,} samples. The measured answer "
                      "above is what this learner did on this data.", markup=False)
        for note in notes:
            warn(note, quiet)
