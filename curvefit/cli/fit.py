"""`curvefit fit`: fit the curve families to a run file or a plain curve table and rank them."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Optional

import typer

from curvefit.cli.common import emit_json, out, warn
from curvefit.cli.common import print_table as _print_table
from curvefit.core.errors import InputError

ON_HELP = "Quantity to fit: test, train or gap (test − train)."
WEIGHTS_HELP = "Least-squares weights: sem (inverse variance, floored), index (by size rank) or none."


def print_table(head: list[str], rows: list[list[str]], indent: str = "  ") -> None:
    """The fit tables: first column left-aligned, the rest right-aligned, indented."""
    _print_table(head, rows, align="first-left", indent=indent)


def number(v, digits: int = 4) -> str:
    """A float in a table cell ('-' when missing)."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return f"{v:.{digits}g}"


def fit_from_options(run: str, on: str, families: str, bootstrap: int, weights: str, seed: int):
    """Read the curve and fit it; shared by `fit` and `need`."""
    from curvefit.core.curve import Curve
    from curvefit.fitting.engine import ON_CHOICES, WEIGHT_CHOICES, fit_curve

    if on not in ON_CHOICES:
        raise InputError(f"--on must be one of {', '.join(ON_CHOICES)}, got {on!r}")
    if weights not in WEIGHT_CHOICES:
        raise InputError(f"--weights must be one of {', '.join(WEIGHT_CHOICES)}, got {weights!r}")
    if bootstrap < 0:
        raise InputError(f"--bootstrap must be >= 0, got {bootstrap}")
    curve = Curve.read(run)
    return curve, fit_curve(curve, families=families, on=on, bootstrap=bootstrap,
                            weights=weights, random_state=seed)


def print_fit(fit, level: float) -> None:
    """Ranking, the chosen family's parameters, and predictions at 2× and 10×."""
    from curvefit.fitting.engine import format_count, format_error

    metric = fit.curve.metric
    sizes = fit.sizes
    quantity = {"test": "test error", "train": "train error", "gap": "generalization gap"}[fit.on]
    held = fit.to_dict(level)["settings"]["holdout"]
    out.print(f"{quantity} of {len(sizes)} sizes, {sizes.min():,.0f}–{sizes.max():,.0f} "
              "labelled samples", markup=False)
    out.print(f"ranking (rolling forecast error over the {held} largest size{'s' if held != 1 else ''}; "
              "near-ties go to power-law-floor/power-law, then to the lower AICc; a 'poor fit' misses the "
              "measured points, lack of fit = reduced chi-square against their standard errors):",
              markup=False)
    rows = []
    for rank, r in enumerate(fit.table.itertuples(), start=1):
        role = "chosen" if r.chosen else ("runner-up" if r.family == fit.runner_up else "")
        rows.append([str(rank), r.family, r.formula, number(r.forecast_error),
                     number(r.aicc, 5), number(r.lack_of_fit, 3), r.status, role])
    print_table(["rank", "family", "formula", "forecast error", "AICc", "lack of fit",
                 "status", ""], rows)
    out.print("", markup=False)
    out.print(f"chosen: {fit.best}   {fit.formula}"
              + (f"   (runner-up: {fit.runner_up})" if fit.runner_up else ""), markup=False)
    params = fit.parameters(level)
    prow = [[p.param, number(p.estimate), number(p.low), number(p.high)] for p in params.itertuples()]
    print_table(["parameter", "estimate", f"{level:.0%} low", f"{level:.0%} high"], prow)
    asym, expo = fit.asymptote(level), fit.exponent(level)
    if asym is not None and math.isfinite(asym.estimate):
        out.print(f"as n grows, the {quantity} {fit.describe_asymptote(level)}", markup=False)
    if expo is not None:
        out.print(f"decay exponent: {expo.estimate:.3g} ({level:.0%} interval "
                  f"{expo.low:.3g}–{expo.high:.3g})", markup=False)
    out.print("predictions:", markup=False)
    n_max = float(sizes.max())
    pred = fit.predict([2 * n_max, 10 * n_max], interval=level)
    prow = [[f"{r.size:,.0f} ({k}×)", format_error(r.estimate, metric),
             f"{format_error(r.low, metric)}–{format_error(r.high, metric)}"]
            for k, r in zip((2, 10), pred.itertuples())]
    print_table(["size", quantity, f"{level:.0%} interval"], prow)


def register(app: typer.Typer) -> None:
    @app.command("fit")
    def fit_command(
        run: str = typer.Argument(..., metavar="RUN",
                                  help="Run file (JSON) or a curve table (CSV with size, test_error[, train_error, repeat])."),
        on: str = typer.Option("test", "--on", help=ON_HELP),
        families: str = typer.Option("auto", "--families", help="Families to try, a,b,c (default: all)."),
        bootstrap: int = typer.Option(500, "--bootstrap", help="Bootstrap replicates for the intervals."),
        weights: str = typer.Option("sem", "--weights", help=WEIGHTS_HELP),
        level: float = typer.Option(0.9, "--level", help="Interval level."),
        seed: int = typer.Option(0, "--seed", help="Random seed of the bootstrap."),
        out_file: Optional[str] = typer.Option(None, "--out", help="Also write the fit as JSON to this file."),
        quiet: bool = typer.Option(False, "--quiet", help="No warnings on stderr."),
        json_out: bool = typer.Option(False, "--json", help="Print the fit as JSON only."),
    ):
        """Fit the curve families, rank them and predict at 2× and 10× the largest size."""
        import warnings as _warnings

        from curvefit.core.errors import FitWarning

        if not 0 < level < 1:
            raise InputError(f"--level must be between 0 and 1, got {level:g}")
        with _warnings.catch_warnings():
            # the 10× prediction is asked for on purpose; its caution is in the fit's warnings
            _warnings.simplefilter("ignore", FitWarning)
            _, fit = fit_from_options(run, on, families, bootstrap, weights, seed)
            doc = fit.to_dict(level)
            if out_file:
                path = Path(out_file)
                try:
                    path.write_text(json.dumps(_json_ready(doc), indent=1) + "\n", encoding="utf-8")
                except OSError as exc:
                    raise InputError(f"cannot write {path}: {exc.strerror or exc}") from None
            if json_out:
                emit_json(doc)
                return
            print_fit(fit, level)
        for w in fit.warnings:
            warn(w, quiet)


def _json_ready(doc):
    from curvefit.core.jsonio import jsonable
    return jsonable(doc)
