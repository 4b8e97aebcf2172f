"""`curvefit fit`: fit the curve families to a run file or a plain curve table and rank them."""

from __future__ import annotations

import math
import warnings
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
from curvefit.cli.common import print_table as _print_table
from curvefit.core.defaults import BOOTSTRAP, SEED
from curvefit.core.errors import FitWarning
from curvefit.core.formatting import (
    format_error,
    format_estimate,
    format_level,
    format_number,
    format_range,
    quantity_name,
)

ON_HELP = "Quantity to fit: test, train or gap (test − train)."
WEIGHTS_HELP = "Least-squares weights: sem (inverse variance, floored), index (by size rank) or none."
BOOTSTRAP_HELP = f"Bootstrap replicates for the intervals (default {BOOTSTRAP})."


def quantity(fit) -> str:
    """What the fit is on, in the metric's words ("test error", "test MSE", "generalization gap")."""
    return quantity_name(fit.on, fit.curve.metric, fit.curve.metric_info)


def print_table(head: list[str], rows: list[list[str]], indent: str = "  ") -> None:
    """The fit tables: first column left-aligned, the rest right-aligned, indented."""
    _print_table(head, rows, align="first-left", indent=indent)


def read_and_fit(run: str, *, on: str = "test", families: str = "auto",
                 bootstrap: int = BOOTSTRAP, weights: str = "sem", seed: int = SEED):
    """Read the curve and fit it (the API validates every setting)."""
    from curvefit.core.curve import Curve
    from curvefit.fitting.engine import fit_curve

    curve = Curve.read(run)
    return curve, fit_curve(curve, families=families, on=on, bootstrap=bootstrap,
                            weights=weights, random_state=seed)


def _print_ranking(fit) -> None:
    sizes = fit.sizes
    held = fit.n_holdout
    out.print(f"{quantity(fit)} of {len(sizes)} sizes, {sizes.min():,.0f}–{sizes.max():,.0f} "
              "labelled samples", markup=False)
    out.print(f"ranking by the rule that chooses (forecast error = mean absolute error of rolling "
              f"forecasts over the {held} largest size{'s' if held != 1 else ''}): "
              f"{fit.ranking_rule}; families that cannot be chosen come last (a 'poor fit' misses "
              "the measured points, lack of fit = reduced chi-square against their standard "
              "errors; 'implausible' goes below 0 or above the measured range beyond the data; "
              "the last value is a 'baseline' to compare with, never chosen):",
              markup=False)
    rows = []
    for rank, r in enumerate(fit.table.itertuples(), start=1):
        role = "chosen" if r.chosen else ("runner-up" if r.family == fit.runner_up else "")
        status = ("baseline" if r.family == "last-value" and r.status != "failed"
                  else r.status if r.eligible else "implausible")
        rows.append([str(rank), r.family, r.formula, format_number(r.forecast_error),
                     format_number(r.aicc, 5), format_number(r.lack_of_fit, 3), status,
                     "tie" if r.tied else "", role])
    print_table(["rank", "family", "formula", "forecast error", "AICc", "lack of fit",
                 "status", "", ""], rows)
    out.print("", markup=False)


def _print_chosen(fit, interval: float) -> None:
    out.print(f"chosen: {fit.best}   {fit.formula}"
              + (f"   (runner-up: {fit.runner_up})" if fit.runner_up else ""), markup=False)
    level = format_level(interval)
    params = fit.parameters(interval)
    prow = [[p.param, format_number(p.estimate), format_number(p.low), format_number(p.high)]
            + ([p.note] if params["note"].any() else []) for p in params.itertuples()]
    print_table(["parameter", "estimate", f"{level} low", f"{level} high"]
                + ([""] if params["note"].any() else []), prow)
    asym, expo = fit.asymptote(interval), fit.exponent(interval)
    if asym is not None and math.isfinite(asym.estimate):
        out.print(f"as n grows, the {quantity(fit)} {fit.describe_asymptote(interval)}",
                  markup=False)
    if expo is not None:
        out.print("decay exponent: " + format_estimate(expo.estimate, expo.low, expo.high, interval),
                  markup=False)


def print_forecasts(fit, table, interval: float, title: str) -> None:
    """Forecasts (``size, estimate, low, high``) as a table; sizes with their multiple of
    the largest measured size."""
    metric, n_max = fit.curve.metric, float(fit.largest_size)
    out.print(title, markup=False)
    rows = [[f"{r.size:,.0f} ({format_number(r.size / n_max, 3)}×)", format_error(r.estimate, metric),
             format_range(r.low, r.high, "error", metric)] for r in table.itertuples()]
    print_table(["size", quantity(fit), f"{format_level(interval)} interval"], rows)


def predictions(fit, interval: float):
    """The fit's forecasts at 2× and 10× the largest measured size."""
    n_max = float(fit.largest_size)
    return fit.predict([2 * n_max, 10 * n_max], interval=interval)


def print_sanity(sanity) -> None:
    """The constant predictor beside the answer, then each flag, one line each."""
    for line in sanity.lines():
        out.print(line, markup=False)


def print_notes(fit) -> None:
    """How the forecast and its band were made (the averaged families, the fresh-data
    variance, a learned correction), one line each."""
    for note in fit.notes:
        out.print(f"note: {note}", markup=False)


def print_fit(fit, interval: float, at=None, sanity=None) -> None:
    """Ranking, the chosen family's parameters, predictions at 2× and 10× (and at the
    sizes asked for), how they were made, then the sanity lines."""
    _print_ranking(fit)
    _print_chosen(fit, interval)
    print_forecasts(fit, predictions(fit, interval), interval, "predictions:")
    if at is not None:
        print_forecasts(fit, at, interval, "at the sizes asked for:")
    print_notes(fit)
    if sanity is not None:
        print_sanity(sanity)


def register(app: typer.Typer) -> None:
    @app.command("fit")
    def fit_command(
        run: str = typer.Argument(..., metavar="RUN",
                                  help="Run file (JSON) or a curve table (CSV with size, "
                                       "test_error[, train_error, repeat])."),
        on: str = typer.Option("test", "--on", help=ON_HELP),
        families: str = typer.Option("auto", "--families", help="Families to try, a,b,c (default: all)."),
        bootstrap: int = typer.Option(BOOTSTRAP, "--bootstrap", help=BOOTSTRAP_HELP),
        weights: str = typer.Option("sem", "--weights", help=WEIGHTS_HELP),
        interval: float = interval_option(),
        level: Optional[float] = level_alias(),
        seed: int = typer.Option(SEED, "--seed", help="Random seed of the bootstrap."),
        at: Optional[str] = typer.Option(None, "--at",
                                         help="Sizes to forecast at, a,b,c or START:STOP:COUNT "
                                              "(e.g. 20000,50000)."),
        out_file: Optional[str] = typer.Option(None, "--out",
                                               help="Also write the fit as JSON to this file."),
        quiet: bool = typer.Option(False, "--quiet", help=QUIET_HELP),
        json_out: bool = typer.Option(False, "--json", help="Print the fit as JSON only."),
    ):
        """Fit the curve families, rank them and predict at 2× and 10× the largest size
        (and at --at sizes), beside the constant predictor's error."""
        import pandas as pd

        from curvefit.core.jsonio import check_output_path, write_json
        from curvefit.core.validate import check_level, check_positive, parse_list
        from curvefit.fitting.sanity import sanity_check

        if out_file:  # refused before the fit: a device, FIFO, link or folder
            check_output_path(out_file, "fit file")
        interval = check_level(pick_interval(interval, level))
        sizes = parse_list(at, float, name="--at size") if at is not None else None
        for n in sizes if sizes is not None else []:  # refused before the fit, in one line
            check_positive(n, "--at size")
        with warnings.catch_warnings(), status(f"fitting the curve families to {run} "
                                               f"({bootstrap} bootstrap replicates)", quiet):
            # the 10× prediction is asked for on purpose; its caution is in the fit's warnings
            warnings.simplefilter("ignore", FitWarning)
            curve, fit = read_and_fit(run, on=on, families=families, bootstrap=bootstrap,
                                      weights=weights, seed=seed)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", FitWarning)
            at_table = fit.predict(sizes, interval=interval) if sizes is not None else None
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FitWarning)
            forecasts = predictions(fit, interval)
            if at_table is not None:
                forecasts = pd.concat([forecasts, at_table], ignore_index=True)
            sanity = sanity_check(curve, fit, forecasts=forecasts, interval=interval)
            doc = fit.to_dict(interval)
            if at_table is not None:
                doc["at"] = at_table.to_dict(orient="records")
            doc["sanity"] = sanity.to_dict()
            if out_file:
                write_json(out_file, doc, what="fit file")
            if json_out:
                emit_json(doc)
                return
            print_fit(fit, interval, at=at_table, sanity=sanity)
        notes = list(fit.warnings) + [str(w.message) for w in caught]
        for w in dict.fromkeys(notes):
            warn(w, quiet)
