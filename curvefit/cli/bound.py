"""`curvefit bound`: closed-form worst-case calculators (VC bound, Hoeffding, exact binomial).

Four subcommands: ``samples`` (training-set size from the VC bound), ``error-bar`` (the
VC error bar at given sizes), ``test-error-bar`` (Hoeffding half-width and exact
interval of a test-set estimate) and ``test-samples`` (test-set size for a target
error bar). Any numeric option takes a list ``a,b,c`` or a geometric range
``start:stop:count``; several values print one table row per combination.
"""

from __future__ import annotations

import itertools
import math
from typing import Optional

import typer

from curvefit.cli.common import emit_json, out, print_table
from curvefit.core.errors import InputError
from curvefit.core.formatting import format_number
from curvefit.core.validate import UPPER_LIMITS, check_probability, parse_list

WORST_CASE_NOTE = ("Worst-case bounds: they hold for every data distribution and are "
                   "typically far larger than what is needed in practice.")

bound_app = typer.Typer(
    help="Closed-form worst-case calculators: VC bound, Hoeffding, exact binomial. "
         "These are worst-case bounds, typically far larger than needed in practice.",
    no_args_is_help=True,
    context_settings={"help_option_names": ["-h", "--help"]},
)

JSON_HELP = "Print JSON on stdout: one object, or a list of objects for several rows."


# ---------------------------------------------------------------- parsing helpers
def _floats(text: str, option: str, example: str = "0.05") -> list[float]:
    """Probabilities (eps, delta) in [1e-300, 1), from a list or a geometric range."""
    values = parse_list(text, float, name=option)
    bad = [v for v in values if not 0.0 < v < 1.0]
    if bad:
        raise InputError(f"{option} must lie strictly between 0 and 1, got {bad[0]:g}; "
                         f"e.g. {option} {example}")
    return [check_probability(v, option) for v in values]


def _combinations(*lists: list) -> list[tuple]:
    """Every combination of the option values, at most the list limit of rows."""
    top, why = UPPER_LIMITS["values"]
    count = math.prod(len(v) for v in lists)
    if count > top:
        raise InputError(f"the option lists make {count:,} rows; at most {top:,} ({why}); "
                         "give shorter lists")
    return list(itertools.product(*lists))


def _vacuous(bar: float) -> bool:
    """An error bar of 1 or more says nothing: error rates lie in [0, 1] anyway."""
    return not bar < 1.0


def _bar(bar: float) -> str:
    return _num(bar) + (" (vacuous)" if _vacuous(bar) else "")


def _ints(text: str, option: str, minimum: int = 0) -> list[int]:
    """Whole numbers >= minimum from a list or a geometric range; else a one-line error."""
    values = parse_list(text, float, name=option, integer_range=True)
    for v in values:
        if float(v) != math.floor(float(v)) or v < minimum:
            what = "a non-negative whole number" if minimum == 0 else f"a whole number >= {minimum}"
            raise InputError(f"{option} must be {what}, got {float(v):g}")
    return [int(v) for v in values]


# ---------------------------------------------------------------- printing helpers
def _num(value, digits: int = 4) -> str:
    """A table cell: exact whole numbers with separators (bounds are exact), else core's style."""
    if isinstance(value, int) and not isinstance(value, bool):
        return f"{value:,}"
    return format_number(value, digits)


def _print_table(title: str, headers: list[str], rows: list[list[str]], notes: list[str]) -> None:
    """Plain aligned text, every column right-aligned, then the notes."""
    out.print(title, markup=False)
    print_table(headers, rows)
    for note in notes:
        out.print(note, markup=False)


def _emit_rows(rows: list[dict]) -> None:
    emit_json(rows[0] if len(rows) == 1 else rows)


# ---------------------------------------------------------------- subcommands
@bound_app.command("samples")
def samples(
    vc_dim: str = typer.Option(..., "--vc-dim", help="VC dimension d (list or range allowed)."),
    eps: str = typer.Option(..., "--eps", help="Tolerance on the generalization gap, in (0, 1)."),
    delta: str = typer.Option("0.05", "--delta", help="Failure probability, in (0, 1)."),
    growth: str = typer.Option("polynomial", "--growth",
                               help="Growth-function bound: polynomial ((2N)^d + 1) or sauer."),
    trace: bool = typer.Option(False, "--trace", help="Also show the fixed-point iterates."),
    start: float = typer.Option(1000.0, "--start", help="Start of the fixed-point iteration."),
    json_out: bool = typer.Option(False, "--json", help=JSON_HELP),
):
    """Worst-case training-set size from the VC bound, beside the 10 x d rule of thumb."""
    from curvefit import bounds

    combos = _combinations(_ints(vc_dim, "--vc-dim"), _floats(eps, "--eps"), _floats(delta, "--delta"))
    rows = []
    for d, e, dl in combos:
        r = bounds.vc_sample_size(d, e, dl, growth=growth, trace=True, start=start)
        row = {"vc_dim": d, "eps": e, "delta": dl, "growth": growth,
               "n_samples": r.n_samples, "root": r.root,
               "rule_of_thumb": bounds.rule_of_thumb_samples(d),
               "pac_realizable": bounds.pac_sample_size(d, e, dl)}
        if trace:
            row["iterates"] = list(r.iterates)
        rows.append(row)
    if json_out:
        _emit_rows(rows)
        return
    headers = ["vc_dim", "eps", "delta", "worst case (VC)", "realizable (PAC)",
               "rule of thumb 10 x d", "worst / thumb"]
    table = [[_num(r["vc_dim"]), _num(r["eps"]), _num(r["delta"]), _num(r["n_samples"]),
              _num(r["pac_realizable"]), _num(r["rule_of_thumb"]),
              f"{r['n_samples'] / r['rule_of_thumb']:,.0f}x" if r["rule_of_thumb"] else "-"]
             for r in rows]
    notes = []
    if trace:
        for r in rows:
            steps = " -> ".join(f"{v:,.1f}" for v in r["iterates"])
            notes.append(f"fixed-point iterates (d={r['vc_dim']}, eps={_num(r['eps'])}, "
                         f"delta={_num(r['delta'])}): {steps}; exact root {r['root']:,.1f}")
    notes += [f"Training samples for generalization gap <= eps with probability 1 - delta "
              f"({growth} growth bound; PAC assumes zero training error).",
              WORST_CASE_NOTE + " The 10 x d rule of thumb (common practice) is often enough."]
    _print_table("Training samples needed (worst case)", headers, table, notes)


@bound_app.command("error-bar")
def error_bar(
    n: str = typer.Option(..., "--n", help="Training-set size N (list or range allowed)."),
    vc_dim: str = typer.Option(..., "--vc-dim", help="VC dimension d (list or range allowed)."),
    delta: str = typer.Option("0.05", "--delta", help="Failure probability, in (0, 1)."),
    growth: str = typer.Option("polynomial", "--growth",
                               help="Growth-function bound: polynomial ((2N)^d + 1) or sauer."),
    json_out: bool = typer.Option(False, "--json", help=JSON_HELP),
):
    """VC error bar sqrt((8/N) ln(4 m_H(2N)/delta)) on the generalization gap."""
    from curvefit import bounds

    rows = []
    for size, d, dl in _combinations(_ints(n, "--n", minimum=1), _ints(vc_dim, "--vc-dim"),
                                     _floats(delta, "--delta")):
        bar = bounds.vc_error_bar(size, d, dl, growth=growth)
        rows.append({"n": size, "vc_dim": d, "delta": dl, "growth": growth,
                     "error_bar": bar, "vacuous": _vacuous(bar)})
    if json_out:
        _emit_rows(rows)
        return
    table = [[_num(r["n"]), _num(r["vc_dim"]), _num(r["delta"]), _bar(r["error_bar"])]
             for r in rows]
    notes = [f"With probability 1 - delta, test error <= training error + error bar "
             f"({growth} growth bound); a bar above 1 says nothing.",
             WORST_CASE_NOTE]
    _print_table("VC error bar on the generalization gap (worst case)",
                 ["n", "vc_dim", "delta", "error bar"], table, notes)


@bound_app.command("test-error-bar")
def test_error_bar(
    n_test: str = typer.Option(..., "--n-test", help="Test-set size L (list or range allowed)."),
    delta: str = typer.Option("0.05", "--delta", help="Failure probability, in (0, 1)."),
    errors: Optional[str] = typer.Option(None, "--errors",
                                         help="Mistakes on the test set, for the exact interval."),
    json_out: bool = typer.Option(False, "--json", help=JSON_HELP),
):
    """Error bar of a test-set estimate: Hoeffding half-width and, with --errors, the exact interval."""
    from curvefit import bounds

    counts = _ints(errors, "--errors") if errors is not None else [None]
    rows = []
    for size, dl, k in _combinations(_ints(n_test, "--n-test", minimum=1),
                                     _floats(delta, "--delta"), counts):
        if k is not None and not 0 <= k <= size:
            raise InputError(f"--errors must lie between 0 and --n-test, got {k} errors "
                             f"of {size}")
        bar = bounds.test_error_bar(size, dl)
        row = {"n_test": size, "delta": dl, "error_bar": bar, "vacuous": _vacuous(bar)}
        if k is not None:
            ci = bounds.test_error_bar(size, dl, method="exact", errors=k)
            row.update({"errors": k, "test_error": k / size, "low": ci.low, "high": ci.high})
        rows.append(row)
    if json_out:
        _emit_rows(rows)
        return
    if errors is None:
        headers = ["n_test", "delta", "Hoeffding +/-"]
        table = [[_num(r["n_test"]), _num(r["delta"]), _bar(r["error_bar"])] for r in rows]
    else:
        headers = ["n_test", "delta", "errors", "test error", "exact low", "exact high",
                   "Hoeffding +/-"]
        table = [[_num(r["n_test"]), _num(r["delta"]), _num(r["errors"]), _num(r["test_error"]),
                  _num(r["low"]), _num(r["high"]), _bar(r["error_bar"])] for r in rows]
    notes = ["Interval for the true error of one model fixed before the test set was seen, "
             "at confidence 1 - delta (exact: Clopper-Pearson from the error count).",
             "The Hoeffding half-width is a worst-case bound over all error rates, typically "
             "far larger than needed in practice when the error is small."]
    if any(r["vacuous"] for r in rows):
        notes.append("vacuous: a half-width of 1 or more says nothing (an error rate lies in "
                     "[0, 1]); fewer than ln(2/delta)/2 test points cannot bound the error.")
    _print_table("Test-set error bar", headers, table, notes)


@bound_app.command("test-samples")
def test_samples(
    eps: str = typer.Option(..., "--eps", help="Target half-width of the error bar, in (0, 1)."),
    delta: str = typer.Option("0.05", "--delta", help="Failure probability, in (0, 1)."),
    expected_error: Optional[str] = typer.Option(
        None, "--expected-error", help="Expected test error p, for the exact binomial size."),
    relative_error: float = typer.Option(
        0.2, "--relative-error", help="Relative error for the Guyon et al. 1998 rule (with p)."),
    method: Optional[str] = typer.Option(
        None, "--method", help="hoeffding or exact; the default is exact when "
                               "--expected-error is given, else hoeffding."),
    json_out: bool = typer.Option(False, "--json", help=JSON_HELP),
):
    """Test-set size for an error bar of half-width eps at confidence 1 - delta."""
    from curvefit import bounds

    if method is not None and method not in bounds.TEST_METHODS:
        raise InputError(f"--method must be hoeffding or exact, got {method!r}")
    ps = (parse_list(expected_error, float, name="--expected-error")
          if expected_error is not None else [None])
    chosen = method or ("exact" if expected_error is not None else "hoeffding")
    rows = []
    for e, dl, p in _combinations(_floats(eps, "--eps"), _floats(delta, "--delta"), ps):
        if p is not None and not 0.0 <= p <= 1.0:
            raise InputError(f"--expected-error must lie between 0 and 1, got {p:g}")
        hoeff = bounds.test_sample_size(e, dl, method="hoeffding")
        exact = (bounds.test_sample_size(e, dl, method="exact", p=p)
                 if (p is not None or chosen == "exact") else None)
        relative = (bounds.relative_error_test_size(p, relative_error, dl)
                    if p is not None and 0.0 < p < 1.0 else None)
        rows.append({"eps": e, "delta": dl, "expected_error": p, "method": chosen,
                     "n_samples": exact if chosen == "exact" else hoeff,
                     "n_samples_hoeffding": hoeff, "n_samples_exact": exact,
                     "relative_error": relative_error if p is not None else None,
                     "n_samples_relative": relative})
    if json_out:
        _emit_rows(rows)
        return
    headers = ["eps", "delta", "expected error", "Hoeffding", "exact binomial",
               f"relative {relative_error:g} (Guyon)"]
    table = [[_num(r["eps"]), _num(r["delta"]),
              _num(r["expected_error"]) if r["expected_error"] is not None else "any",
              _num(r["n_samples_hoeffding"]), _num(r["n_samples_exact"]),
              _num(r["n_samples_relative"])] for r in rows]
    notes = ["Test points so the measured error is within eps of the true error with "
             "probability 1 - delta; exact: Clopper-Pearson at the expected error "
             "(0.5 when none is given).",
             f"relative: |measured - true| <= {relative_error:g} x true, normal approximation "
             "(about 100/p points at 95%, Guyon et al. 1998).",
             "Hoeffding is a worst-case bound over all error rates, typically far larger than "
             "needed in practice."]
    _print_table("Test points needed", headers, table, notes)


def register(app: typer.Typer) -> None:
    app.add_typer(bound_app, name="bound",
                  short_help="Worst-case calculators: VC bound, Hoeffding, exact binomial.")
