"""Notebook displays: a compact HTML table and a figure for each result object.

`Curve`, `CurveFit`, `SampleEstimate`, `CapacityEstimate`, `Tradeoff` and `Comparison`
each have two thin methods: ``_repr_html_`` (what Jupyter shows when the object ends a
cell) and ``plot(ax=None)`` (draws and returns the matplotlib Axes). Both call one
function here (a tracked run, `TrackResult`, shows as its `Comparison`). Like the rest
of `curvefit.report`, this module only renders what the objects hold: tables are built by
`curvefit.report.html` (`html_table`, `curve_table`, `capacity_row`), learning curves,
gaps, probes and trade-offs are drawn by `curvefit.report.plots`, and numbers read as
everywhere else (`curvefit.core.formatting`). Every user string is escaped.

Without ``ax`` a plot gets a new pyplot figure, so a notebook shows it at the end of the
cell (``curve.plot();``) as pandas' ``DataFrame.plot`` does; with ``ax`` it draws into
the caller's axes. `Curve` lives in `curvefit.core`, which may not import this part: it
reaches these functions through `curvefit.core.display`.

Examples
--------
>>> import pandas as pd
>>> from curvefit.core.curve import Curve
>>> c = Curve.from_table(pd.DataFrame({"size": [50, 50, 100, 100],
...                                    "test_error": [0.3, 0.28, 0.2, 0.22]}))
>>> "<table>" in c._repr_html_()
True
>>> c.plot().get_xscale()
'log'
"""

from __future__ import annotations

from contextlib import contextmanager
from typing import Any, Iterator

import matplotlib
import pandas as pd

from curvefit.core.defaults import INTERVAL
from curvefit.core.formatting import (
    MISSING,
    format_capacity,
    format_count,
    format_error,
    format_estimate,
    format_level,
    format_number,
    format_range,
    quantity_name,
)
from curvefit.report import plots
from curvefit.report.html import capacity_row, curve_table, esc, html_table
from curvefit.report.labels import family_name, field, is_finite, model_label

# Capacity methods whose design table plots.probe_figure draws (n and the deviation ξ).
PROBE_METHODS = ("probe",)


# --------------------------------------------------------------------------- HTML
def panel(title: str, body: str, notes: Any = ()) -> str:
    """One display: a bold title line, the table, and notes below it (all escaped but
    ``body``, which the table builders escape)."""
    lines = "".join(f'<p style="margin:0.2em 0;font-size:90%">{esc(n)}</p>' for n in notes if n)
    return (f'<div class="curvefit-display"><p style="margin:0.3em 0"><strong>{esc(title)}'
            f"</strong></p>{body}{lines}</div>")


def estimate_table(rows: list[tuple[str, str]], level: float) -> str:
    """A two-column table: what, and its estimate with the interval."""
    frame = pd.DataFrame(rows, columns=["figure", "value"])
    return html_table(frame, headers={"value": f"estimate ({format_level(level)} interval)"})


def curve_html(curve: Any, interval: float = INTERVAL) -> str:
    """`Curve`: the per-size table of the report (mean test error ± its standard error,
    one test set's exact interval, training error, gap)."""
    failed = len(curve.failed_points())
    title = (f"Learning curve: {model_label(curve)}, {len(curve.sizes)} sizes, "
             f"{len(curve.points)} cells" + (f" ({failed} failed)" if failed else ""))
    table = curve_table(curve, interval)
    return panel(title, table, [] if table else ["no successful cells"])


def fit_html(fit: Any, interval: float = INTERVAL) -> str:
    """`CurveFit`: the chosen family, the fitted error at the largest measured size, the
    asymptote and decay exponent with their intervals, and the family ranking."""
    metric = field(field(fit, "curve"), "metric", "error")
    n = field(fit, "largest_size")
    quantity = quantity_name(field(fit, "on", "test"), metric, field(field(fit, "curve"), "metric_info"))
    best, runner = family_name(fit.best), family_name(field(fit, "runner_up"))
    rows = [("chosen family", best + (f" (runner-up: {runner})" if runner else ""))]
    if is_finite(n):
        e = fit.error_at(n, interval=interval)
        rows.append((f"{quantity} at n = {format_count(n)}", _estimate(e, "error", metric)))
    asym, expo = fit.asymptote(interval=interval), fit.exponent(interval=interval)
    if asym is not None:
        rows.append(("asymptote (n → ∞)", _estimate(asym, "error", metric)))
    if expo is not None:
        rows.append(("decay exponent", _estimate(expo, "number", metric)))
    body = estimate_table(rows, interval)
    table = field(fit, "table")
    if isinstance(table, pd.DataFrame) and len(table):
        body += html_table(table, columns=["family", "params", "forecast_error", "aicc", "status",
                                           "chosen"],
                           headers={"forecast_error": "forecast error (held-out sizes)",
                                    "aicc": "AICc"}, highlight="chosen", max_rows=6)
    notes = [fit.describe_asymptote(interval=interval)] + list(field(fit, "warnings", []) or [])
    return panel(f"Curve fit on the {quantity}", body, notes)


def sample_html(sample: Any) -> str:
    """`SampleEstimate`: the samples needed with their interval, and the answer in words."""
    level = field(sample, "level", INTERVAL)
    # the loss of the curve answered ("test MSE", "15.0%"); an answer saved before the
    # metric was recorded shows its target as a plain number
    metric = field(sample, "metric")
    kind = "gap" if field(sample, "kind") == "gap" else "test_error"
    what = quantity_name(kind, metric, field(sample, "metric_info"))
    target = field(sample, "target")
    rows = [(f"target {what}", format_error(target, metric) if metric else format_number(target)),
            ("labelled samples needed", samples_text(sample))]
    # the message already words the answer's cautions
    return panel("Samples needed", estimate_table(rows, level), [field(sample, "message", "")])


def samples_text(sample: Any) -> str:
    """The samples needed as text: a count with its interval, or why there is none."""
    n, low, high = field(sample, "n"), field(sample, "low"), field(sample, "high")
    if field(sample, "beyond_horizon", False):
        return f"more than {format_count(field(sample, 'horizon'))}"
    if not field(sample, "reachable", True) or not is_finite(n):
        return ("not reachable" + (f" (interval from {format_count(low)}, no upper limit)"
                                   if is_finite(low) else ""))
    return format_estimate(n, low, high, kind="count")


def capacity_html(capacity: Any) -> str:
    """`CapacityEstimate`: the capacity row of the report (figure, interval, note)."""
    level = field(capacity, "level", INTERVAL) or INTERVAL
    row = capacity_row("this run", capacity, level)
    notes = list(field(capacity, "notes", []) or [])
    return panel("Effective capacity", html_table(pd.DataFrame([row])), notes)


def tradeoff_html(tradeoff: Any) -> str:
    """`Tradeoff`: the best value per size (lowest mean test error) and the values within
    one standard error of it."""
    metric = field(tradeoff, "metric", "error")
    quantity = quantity_name("test_error", metric, field(field(tradeoff, "meta"), "metric_info"))
    best = tradeoff.best_per_size()
    frame = pd.DataFrame({
        "size": best["size"].astype(int),
        f"best {tradeoff.param}": [MISSING if v is None else str(v) for v in best["best_value"]],
        "test": [format_error(v, metric) for v in best["test_mean"]],
        "± s.e.": [format_error(v, metric) for v in best["test_sem"]],
        "within one s.e.": [", ".join(map(str, v)) for v in best["within_1se"]],
    })
    values = ", ".join(map(str, field(tradeoff, "values", []) or []))
    return panel(f"Trade-off over {tradeoff.param} ({values})", html_table(frame),
                 [f"best: the lowest mean {quantity} at each size; within one s.e.: the values "
                  "whose mean is at most the best's plus its standard error"])


def comparison_html(comparison: Any) -> str:
    """`Comparison`: each figure of the run against its baseline, and the verdict."""
    from curvefit.history.figures import FIGURES, format_figure, one_line, worse_by_text

    metric = comparison.metric
    rows = []
    for c in comparison.changes:
        status = c.status + (" (info)" if not c.gated and c.status in ("regressed", "improved")
                             else "")
        rows.append({"figure": FIGURES.get(c.name, (None, c.name))[1],
                     "baseline": format_figure(c.baseline, metric),
                     "current": format_figure(c.current, metric),
                     "worse by": worse_by_text(c, metric) if c.baseline is not None else "",
                     "verdict": status})
    base = "" if comparison.baseline_id is None else \
        f" vs run {comparison.baseline_id} ({comparison.baseline_rule})"
    title = f"Series {one_line(comparison.series)}, run {comparison.run_id}{base}"
    return panel(title, html_table(pd.DataFrame(rows)),
                 [f"Result: {comparison.message}"] + list(comparison.reasons))


def _estimate(e: Any, kind: str, metric: str) -> str:
    return format_estimate(field(e, "estimate"), field(e, "low"), field(e, "high"), kind=kind,
                           metric=metric)


# --------------------------------------------------------------------------- figures
@contextmanager
def styled() -> Iterator[None]:
    """Our figure style (`curvefit.report.plots.STYLE_RC`) while drawing."""
    with matplotlib.rc_context(plots.STYLE_RC):
        yield


def new_axes(ax: Any = None) -> Any:
    """``ax``, or the axes of a new pyplot figure in our size and style."""
    if ax is not None:
        return ax
    import matplotlib.pyplot as plt

    # the figure first, outside our rc context: its creation may load the notebook's
    # backend, which switches interactive mode on, and leaving the context would undo that
    fig = plt.figure(figsize=plots.FIGSIZE, dpi=plots.DPI, layout="constrained")
    with styled():
        return fig.add_subplot()


def plot_curve(curve: Any, ax: Any = None, interval: float = INTERVAL) -> Any:
    """`Curve.plot`: `curvefit.report.plots.learning_curve_figure` of the curve."""
    ax = new_axes(ax)
    plots.learning_curve_figure(curve, interval=interval, ax=ax)
    return ax


def plot_fit(fit: Any, ax: Any = None, interval: float = INTERVAL) -> Any:
    """`CurveFit.plot`: the measured curve with the chosen family, its band and the
    runner-up (`curvefit.report.plots.learning_curve_figure`); a fit of the gap is drawn
    over the measured gaps (`curvefit.report.plots.gap_figure`)."""
    ax = new_axes(ax)
    curve = fit.curve
    if field(fit, "on", "test") == "gap" and len(curve.sizes):
        import numpy as np

        grid = np.geomspace(plots.fitted_from(fit, float(curve.sizes.min())),
                            float(curve.sizes.max()) * 4, 120)
        line = (f"fit, {family_name(fit.best)}", grid, fit.predict(grid, interval=interval)["estimate"])
        plots.gap_figure(curve, {model_label(curve, 0): [line]}, ax=ax)
        return ax
    plots.learning_curve_figure(curve, fit, interval=interval, ax=ax)
    return ax


def plot_tradeoff(tradeoff: Any, ax: Any = None) -> Any:
    """`Tradeoff.plot`: `curvefit.report.plots.tradeoff_figure`."""
    ax = new_axes(ax)
    plots.tradeoff_figure(tradeoff, ax=ax)
    return ax


def plot_capacity(capacity: Any, ax: Any = None) -> Any:
    """`CapacityEstimate.plot`: the probe's ξ(n) with Φ(n/h)
    (`curvefit.report.plots.probe_figure`), or for the gap model its mean gaps with the
    fitted c(ν)·h/n at the sizes used."""
    ax = new_axes(ax)
    if field(capacity, "method") in PROBE_METHODS:
        plots.probe_figure(capacity, ax=ax)
        return ax
    with styled():
        design = field(capacity, "design")
        st = plots.style(0)
        cols = {"size", "gap_mean", "gap_sem"}
        if isinstance(design, pd.DataFrame) and cols <= set(design.columns) and len(design):
            d = design.sort_values("size")
            ax.errorbar(d["size"], d["gap_mean"], yerr=d["gap_sem"].fillna(0.0), fmt=st["marker"],
                        color=st["color"], ms=5.5, elinewidth=2.0, capsize=0, label="mean gap ± s.e.")
            if "gap_fit" in d.columns and d["gap_fit"].notna().any():
                used = d[d["gap_fit"].notna()]
                ax.plot(used["size"], used["gap_fit"], color=plots.PALETTE[1], linewidth=1.8,
                        label=f"fitted c(ν)·h/n, h = {_capacity_text(capacity)}")
            ax.set_xscale("log")
            ax.legend(loc="best")
        else:
            _empty(ax, "no gap measurements to draw")
        ax.set_xlabel("labelled samples (log scale)")
        ax.set_ylabel("generalization gap (test − train)")
        ax.set_title(f"Effective capacity from the gap: {_capacity_text(capacity)}")
    return ax


def plot_samples(sample: Any, ax: Any = None) -> Any:
    """`SampleEstimate.plot`: the samples needed as a point with its interval on a log
    axis (an open upper end runs to the edge with an arrow)."""
    ax = new_axes(ax)
    with styled():
        n, low, high = field(sample, "n"), field(sample, "low"), field(sample, "high")
        st = plots.style(0)
        ends = [v for v in (n, low, high) if is_finite(v) and v > 0]
        if not ends:
            _empty(ax, samples_text(sample))
        else:
            left, right = min(ends) / 2, max(ends) * 2
            lo = low if is_finite(low) and low > 0 else left
            hi = high if is_finite(high) else right
            ax.plot([lo, hi], [0, 0], color=st["color"], linewidth=6, alpha=0.35,
                    solid_capstyle="butt",
                    label=f"{format_level(field(sample, 'level', INTERVAL))} interval")
            if not is_finite(high):
                ax.annotate("", (right, 0), xytext=(right / 1.5, 0),
                            arrowprops={"arrowstyle": "-|>", "color": st["color"], "lw": 1.6})
            if is_finite(n):
                ax.plot([n], [0], marker=st["marker"], ms=9, color=st["color"], linestyle="none",
                        label=f"estimate {format_count(n)}")
            ax.set_xscale("log")
            ax.set_xlim(left, right)
            ax.legend(loc="upper left")
        ax.set_yticks([])
        ax.set_ylim(-1, 1)
        ax.set_xlabel("labelled samples needed (log scale)")
        ax.set_title(f"Samples needed: {samples_text(sample)}")
    return ax


def plot_comparison(comparison: Any, ax: Any = None) -> Any:
    """`Comparison.plot`: the labels the run needs relative to its baseline (the gate's
    efficiency ratio) with its interval, against no change (1) and the tolerance."""
    ax = new_axes(ax)
    with styled():
        change = next((c for c in comparison.changes if c.name == "efficiency_ratio"
                       and c.current is not None), None)
        st = plots.style(0)
        if change is None:
            _empty(ax, "no efficiency ratio: " + ("first run of the series"
                                                 if comparison.baseline_id is None
                                                 else "the curves could not be compared"))
        else:
            f = change.current
            lo = f.low if is_finite(f.low) else f.estimate
            hi = f.high if is_finite(f.high) else f.estimate
            ax.errorbar([f.estimate], [0], xerr=[[f.estimate - lo], [hi - f.estimate]],
                        fmt=st["marker"], color=st["color"], ms=9, elinewidth=3, capsize=4,
                        label=f"this run: {format_number(f.estimate, 3)}× "
                              f"({format_level(f.level)} interval {format_range(lo, hi)})")
            ax.axvline(1.0, color=plots.NEUTRAL, linewidth=1.0, label="no change (1×)")
            if change.tolerance is not None and not change.tolerance.relative:
                edge = 1.0 + change.tolerance.value
                ax.axvline(edge, color=plots.TARGET_COLOUR, linestyle=(0, (4, 2)), linewidth=1.0,
                           label=f"tolerance ({format_number(edge, 3)}×)")
            ax.set_yticks([])
            ax.set_ylim(-1, 1)
            ax.legend(loc="upper left")
        ax.set_xlabel("labels needed relative to the baseline (×)")
        ax.set_title(f"Run {comparison.run_id}: {comparison.verdict}")
    return ax


def _capacity_text(capacity: Any) -> str:
    d = field(capacity, "vc_dim")
    above = "≥ " if field(capacity, "above_range", False) else ""
    return above + format_capacity(d) if is_finite(d) else MISSING


def _empty(ax: Any, text: str) -> None:
    ax.text(0.5, 0.5, text, transform=ax.transAxes, ha="center", va="center",
            color=plots.NEUTRAL)


__all__ = ["curve_html", "fit_html", "sample_html", "capacity_html", "tradeoff_html",
           "comparison_html", "plot_curve", "plot_fit", "plot_samples", "plot_capacity",
           "plot_tradeoff", "plot_comparison"]
