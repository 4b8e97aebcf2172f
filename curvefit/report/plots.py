"""Figures: learning curves, the generalization gap, the capacity probe, the trade-off,
and worst-case bounds against the measured answer.

Every function reads results that other modules computed (a `Curve`, a `CurveFit`, a
`CapacityEstimate`, a `Tradeoff`, plain numbers) and returns a matplotlib ``Figure``;
nothing here estimates anything new. Figures are drawn on their own canvas (no pyplot),
so they work without a display and leave the caller's backend alone; the one-axes
figures (learning curve, gap, probe, trade-off) also draw into a given ``ax=``, whose
figure they return. The look is our own: a short palette whose colours differ in lightness as well
as hue, and every series also has its own marker and line style, so the figures stay
readable in greyscale and for colour-blind readers.

Missing pieces are skipped, not fatal: a curve whose cells all failed, a fit that could
not reach the target, or a result object without some field still gives a figure.

Examples
--------
>>> import pandas as pd
>>> from curvefit.core.curve import Curve
>>> c = Curve.from_table(pd.DataFrame({"size": [50, 50, 100, 100, 200, 200],
...                                    "test_error": [.30, .28, .22, .24, .18, .19]}))
>>> fig = learning_curve_figure(c)
>>> len(fig.axes)
1
"""

from __future__ import annotations

import io
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

import matplotlib

# Figures are built on matplotlib.figure.Figure and saved through its own canvas, so
# nothing needs pyplot or a display, and importing this module leaves the caller's
# backend alone (a notebook's inline backend keeps working).
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from curvefit.core.defaults import INTERVAL
from curvefit.core.errors import InputError
from curvefit.core.formatting import (
    format_capacity,
    format_count,
    format_error,
    format_level,
    format_number,
    format_range,
    is_rate,
    metric_name,
    round_significant,
)
from curvefit.report.labels import (
    as_items,
    family_name,
    field,
    format_param_value,
    is_finite,
    metric_label,
    model_label,
    split_label,
)

# Our palette: ink blue, ember orange, heather violet, lagoon teal, moss olive. Ordered
# so that neighbours differ in lightness (greyscale) and in the blue/yellow axis that
# red-green colour-blind readers keep.
PALETTE = ["#1f3b57", "#d47a1e", "#7d4f9e", "#3c9a8f", "#8a8a2e"]
MARKERS = ["o", "s", "^", "D", "v"]
LINESTYLES = ["-", (0, (5, 2)), (0, (1, 1.5)), (0, (6, 2, 1, 2)), (0, (3, 1, 1, 1, 1, 1))]
TARGET_COLOUR = "#b0213c"
NEUTRAL = "#5b6570"
# The learning-curve figure's x-axis ends at this multiple of the largest measured size:
# an answer or a forecast far beyond it is marked at the edge with an arrow, so the
# measured points keep most of the width instead of becoming a sliver.
AXIS_CAP = 20.0
FIGSIZE = (8.6, 5.4)
DPI = 110

STYLE_RC = {  # our rc settings, applied while a figure is drawn
    "font.family": "DejaVu Sans",
    "font.size": 9.5,
    "axes.titlesize": 11,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.5,
    "axes.edgecolor": "#8e969e",
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.which": "major",
    "grid.color": "#e2e5e8",
    "grid.linewidth": 0.7,
    "xtick.color": "#3a444d",
    "ytick.color": "#3a444d",
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "svg.hashsalt": "curvefit",  # stable ids, so the same inputs give the same SVG
    "svg.fonttype": "path",
}


def style(i: int) -> dict:
    """Colour, marker and line style of the ``i``-th series (cycles after five)."""
    return {"color": PALETTE[i % len(PALETTE)], "marker": MARKERS[i % len(MARKERS)],
            "linestyle": LINESTYLES[i % len(LINESTYLES)]}


def _split_caption(curves: list) -> str:
    labels = list(dict.fromkeys(split_label(c) for _, c in curves))
    return "; ".join(labels)


def _axis_count(v: float) -> str:
    """Compact tick labels of a count axis (``20k``, ``1.5M``): ticks need few characters."""
    if not np.isfinite(v):
        return "–"
    r = round_significant(float(v), 3)  # first, so 999,700 reads 1M rather than 1,000k
    for low, unit, suffix in ((1e12, 1e12, "T"), (1e9, 1e9, "G"), (1e6, 1e6, "M"), (1e4, 1e3, "k")):
        if r >= low:  # SI suffixes, never e-notation
            return f"{format_number(r / unit, 3)}{suffix}"
    return f"{int(round(v)):,}"


_count_formatter = FuncFormatter(lambda v, _pos: _axis_count(v) if v > 0 else "")


def _new_axes(figsize=FIGSIZE, ax=None):
    """A new figure with one axes, or the caller's axes (``ax=``) and its figure."""
    if ax is not None:
        return ax.figure, ax
    fig = Figure(figsize=figsize, dpi=DPI, layout="constrained")
    ax = fig.add_subplot()
    return fig, ax


def _styled(fn):
    """Run a figure function under our rc settings (they are read while drawing)."""
    import functools

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        with matplotlib.rc_context(STYLE_RC):
            return fn(*args, **kwargs)

    return wrapper


# --------------------------------------------------------------------------- curves
@dataclass(frozen=True)
class _FitLines:
    size: np.ndarray
    estimate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    best: str | None
    runner_up: str | None
    runner_up_estimate: np.ndarray | None


def fitted_from(fit: Any, smallest: float) -> float:
    """Where a fit's line starts: its first fitted size when it left out the sizes before
    the model learned (``CurveFit.sizes``), else the smallest measured size."""
    sizes = getattr(fit, "sizes", None)
    try:
        return max(smallest, float(sizes[0])) if sizes is not None and len(sizes) else smallest
    except (TypeError, ValueError):
        return smallest


def _fit_lines(fit: Any, grid: np.ndarray, interval: float) -> _FitLines | None:
    """Read the chosen family's forecast band and the runner-up's line from a fit."""
    if fit is None or not hasattr(fit, "predict"):
        return None
    import warnings

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # extrapolation warnings belong in the report text
            pred = fit.predict(grid, interval=interval)
    except Exception:  # an unusable fit still leaves the measured points to draw
        return None
    est, low, high = (pred[c].to_numpy(float) for c in ("estimate", "low", "high"))
    size = pred["size"].to_numpy(float)
    best = family_name(getattr(fit, "best", None))
    runner = family_name(getattr(fit, "runner_up", None))
    runner_est = None
    if runner and runner != best and hasattr(fit, "predict_family"):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                runner_est = np.asarray(fit.predict_family(runner, grid), float).reshape(-1)
        except Exception:  # the runner-up line is optional
            runner_est = None
    return _FitLines(size, est, low, high, best, runner, runner_est)


def _answer_of(answer: Any) -> dict | None:
    if answer is None:
        return None
    n = field(answer, "n", field(answer, "estimate"))
    horizon = field(answer, "horizon")
    return {"n": float(n) if is_finite(n) else math.nan,
            "low": float(field(answer, "low")) if is_finite(field(answer, "low")) else math.nan,
            "high": _upper_end(field(answer, "high")),
            "reachable": bool(field(answer, "reachable", is_finite(n))),
            # reached only beyond the horizon: "more than <horizon>", no number
            "beyond": bool(field(answer, "beyond_horizon", False)) and is_finite(horizon),
            "horizon": float(horizon) if is_finite(horizon) else math.nan}


def _upper_end(high: Any) -> float:
    """An interval's upper end: finite, ``inf`` when open, else NaN."""
    if is_finite(high):
        return float(high)
    try:
        return math.inf if float(high) == math.inf else math.nan
    except (TypeError, ValueError):
        return math.nan


def axis_limit(curves: Any) -> float:
    """Where the learning-curve figure's x-axis ends: `AXIS_CAP` × the largest size
    measured by any of ``curves`` (NaN when none has a successful cell).

    Examples
    --------
    >>> import pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> axis_limit(Curve.from_table(pd.DataFrame({"size": [50, 400], "test_error": [.3, .2]})))
    8000.0
    """
    tops = [float(c.sizes.max()) for _, c in as_items(curves) if len(c.ok_points())]
    return AXIS_CAP * max(tops) if tops else math.nan


def beyond_axis(answer: Any, limit: float) -> bool:
    """True when the figure marks ``answer`` at the edge of an axis that ends at ``limit``:
    its point (or, beyond the horizon, its "more than" size) lies past the axis."""
    a = _answer_of(answer)
    if a is None or not is_finite(limit):
        return False
    if a["beyond"]:
        return a["horizon"] > limit
    return a["reachable"] and is_finite(a["n"]) and a["n"] > limit


@_styled
def learning_curve_figure(curves: Any, fits: Any = None, *, target_error: float | None = None,
                          answers: Any = None, interval: float = INTERVAL,
                          show_train: bool = True, title: str | None = None, ax: Any = None) -> Figure:
    """Train and test error against training-set size, with fits extrapolated to a target.

    Parameters
    ----------
    curves : Curve, list of Curve, or dict label -> Curve
        One or several measured curves (one per model).
    fits : CurveFit or None, or a list/dict matching ``curves``
        The fitted families. The chosen family is drawn as a solid line with a shaded
        ``interval`` band, the runner-up as a thinner dashed line.
    target_error : float, optional
        Drawn as a horizontal line.
    answers : SampleEstimate or None, list/dict matching ``curves``
        The labelled samples needed for the target; marked on the target line with its
        interval.
    interval : float
        Level of the forecast band (read from ``fit.predict``) and of the exact
        test-set interval drawn at each measured size.
    show_train : bool
        Also draw the training error (hollow markers, dotted).

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    At each size the filled marker is the mean test error over repeats, the thick bar
    one standard error of that mean across repeats, and the thin capped bar the exact
    (Clopper–Pearson) interval of a single repeat's finite test set. A thin dashed line
    without markers is the constant predictor's error on the same test sets, where the
    run recorded it. The x-axis ends at `AXIS_CAP` × the largest measured size
    (`axis_limit`); an answer beyond it is marked at the right edge with an arrow and its
    size, and the fitted lines stop there.
    """
    items = as_items(curves)
    fig, ax = _new_axes(ax=ax)
    metric, info = None, None
    limit = axis_limit(curves)
    span = [math.inf, 0.0, limit]  # smallest and largest size drawn, and where the axis must end
    any_data = False
    for i, (label, curve) in enumerate(items):
        label = label or model_label(curve, i)
        if metric is None:
            metric, info = getattr(curve, "metric", None), getattr(curve, "metric_info", None)
        st = style(i)
        summ = curve.summary(interval) if len(curve.ok_points()) else pd.DataFrame()
        if not len(summ):
            continue
        any_data = True
        _draw_measured(ax, summ, st, label, show_train, span)
        a = _answer_of(_matching(answers, label, i))
        fit = _matching(fits, label, i)
        if fit is not None:
            _draw_fit(ax, fit, summ, a, st, label, interval, span)
        if a and target_error is not None and (a["beyond"] or (a["reachable"] and is_finite(a["n"]))):
            _draw_answer(ax, a, target_error, st, i, span)
    if target_error is not None:
        ax.axhline(target_error, color=TARGET_COLOUR, linewidth=1.0, linestyle=(0, (4, 2, 1, 2)),
                   zorder=2)
        # at the left end, below the line: the curves sit above the target there
        ax.annotate(f"target {format_error(target_error, metric)}", (0.0, target_error),
                    xycoords=("axes fraction", "data"), xytext=(4, -11),
                    textcoords="offset points", ha="left", fontsize=8.5, color=TARGET_COLOUR)
    if not any_data:
        ax.text(0.5, 0.5, "no successful cells to draw", transform=ax.transAxes,
                ha="center", va="center", color=NEUTRAL)
    else:
        ax.set_xscale("log")
        ax.set_xlim(span[0] / 1.25, min(span[1], limit) * 1.25)
        ax.xaxis.set_major_formatter(_count_formatter)
        ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _p: ""))
    ax.set_xlabel(f"labelled samples (training-set size, log scale) · {_split_caption(items)}")
    ax.set_ylabel(metric_label(metric, info=info))
    _value_axis(ax, metric)
    ax.set_title(title or "Learning curve")
    _legend_outside(ax)
    return fig


def _matching(items: Any, label: str, i: int):
    """The entry of ``items`` (a dict by label, a list by position, or one item) for a curve."""
    if isinstance(items, Mapping):
        return items.get(label)
    listed = [v for _, v in as_items(items)]
    return listed[i] if i < len(listed) else None


def _draw_measured(ax, summ: pd.DataFrame, st: dict, label: str, show_train: bool,
                   span: list) -> None:
    """Mean test error (± one s.e.), the exact test-set interval, and the training error."""
    x = summ["size"].to_numpy(float)
    span[0], span[1] = min(span[0], x.min()), max(span[1], x.max())
    y = summ["test_mean"].to_numpy(float)
    sem = summ["test_sem"].to_numpy(float)
    lo, hi = summ["test_low"].to_numpy(float), summ["test_high"].to_numpy(float)
    exact = np.isfinite(lo) & np.isfinite(hi)
    if exact.any():
        ax.errorbar(x[exact], y[exact],
                    yerr=[np.clip(y - lo, 0, None)[exact], np.clip(hi - y, 0, None)[exact]],
                    fmt="none", ecolor=st["color"], elinewidth=0.8, capsize=2.5,
                    alpha=0.75, zorder=3)
    ax.errorbar(x, y, yerr=np.where(np.isfinite(sem), sem, 0.0), fmt=st["marker"],
                color=st["color"], ms=5.5, elinewidth=2.6, capsize=0, zorder=4,
                label=f"{label}: test")
    if show_train and summ["train_mean"].notna().any():
        ax.plot(x, summ["train_mean"].to_numpy(float), marker=st["marker"], ms=5, mfc="white",
                mec=st["color"], color=st["color"], linestyle=(0, (1, 1.5)), linewidth=1.1,
                label=f"{label}: train", zorder=4)
    base = summ["baseline_mean"].to_numpy(float) if "baseline_mean" in summ else np.array([])
    if np.isfinite(base).any():
        ax.plot(x, base, color=st["color"], linestyle=(0, (2, 3)), linewidth=1.0, alpha=0.8,
                label=f"{label}: constant predictor", zorder=3)


def _draw_fit(ax, fit: Any, summ: pd.DataFrame, a: dict | None, st: dict, label: str,
              interval: float, span: list, runner_up: bool = True, line: Any = "-",
              reach: float = 4.0) -> None:
    """The chosen family with its band and the runner-up, extrapolated to show the answer
    (or to ``reach`` × the largest size without one)."""
    top = float(summ["size"].max())  # this model's own largest size, not the running max
    right = top * reach
    if a and is_finite(a["high"]):
        right = max(right, a["high"] * 1.3)
    elif a and is_finite(a["n"]):
        right = max(right, a["n"] * 1.5)
    elif a and a["beyond"]:
        right = a["horizon"]
    if is_finite(span[2]):
        right = min(right, span[2])  # never past the axis: far answers are marked at its edge
    lines = _fit_lines(fit, np.geomspace(fitted_from(fit, float(summ["size"].min())), right, 160),
                       interval)
    if lines is None:
        return
    span[1] = max(span[1], right)
    name = lines.best or "fit"
    band = np.isfinite(lines.low) & np.isfinite(lines.high)
    if band.any():
        ax.fill_between(lines.size, lines.low, lines.high, where=band, color=st["color"],
                        alpha=0.14, linewidth=0, zorder=1,
                        label=f"{label}: {format_level(interval)} band ({name})")
    ax.plot(lines.size, lines.estimate, color=st["color"], linewidth=1.8, linestyle=line,
            zorder=2, label=f"{label}: fit, {name}")
    if runner_up and lines.runner_up_estimate is not None:
        ax.plot(lines.size, lines.runner_up_estimate, color=st["color"], linewidth=1.1,
                linestyle=(0, (5, 2)), alpha=0.9, zorder=2,
                label=f"{label}: runner-up, {lines.runner_up}")


def _draw_answer(ax, a: dict, target_error: float, st: dict, i: int, span: list) -> None:
    """The samples needed, marked on the target line with its interval; an answer past
    the axis's end is marked at the edge with an arrow pointing on."""
    limit = span[2] if is_finite(span[2]) else math.inf
    n = a["horizon"] if a["beyond"] else a["n"]
    text = f"n > {format_count(n)}" if a["beyond"] else f"n ≈ {format_count(n)}"
    low = a["low"] if is_finite(a["low"]) else math.nan
    high = min(a["high"], limit)  # an open upper end runs to the axis's end
    if a["beyond"] and not is_finite(high):
        high = limit
    if is_finite(low) and low < limit and is_finite(high):
        ax.plot([low, high], [target_error, target_error], color=st["color"],
                linewidth=4.5, alpha=0.45, solid_capstyle="butt", zorder=5)
    if n > limit:
        ax.annotate(f"{text} →", (limit, target_error), xytext=(-4, 9 + 11 * i),
                    textcoords="offset points", ha="right", fontsize=8.5, color=st["color"],
                    fontweight="bold")
        ax.annotate("", (limit * 1.2, target_error), xytext=(limit / 1.6, target_error),
                    arrowprops={"arrowstyle": "-|>", "color": st["color"], "lw": 1.6}, zorder=6)
        span[1] = max(span[1], limit)
        return
    ax.plot([n], [target_error], marker=st["marker"], ms=9, mfc=st["color"],
            mec="white", mew=1.2, linestyle="none", zorder=6)
    ax.annotate(text, (n, target_error), xytext=(0, 9 + 11 * i),
                textcoords="offset points", ha="center", fontsize=8.5,
                color=st["color"], fontweight="bold")
    span[1] = max(span[1], high if is_finite(high) else n)


_KIND_ORDER = ["test", "train", "constant", "measured", "fit", "runner-up", "VC", "power", "band"]


@_styled
def slice_curves_figure(curves: Any, fits: Any = None, split: Any = None, *,
                        interval: float = INTERVAL, column: str | None = None,
                        title: str | None = None, ax: Any = None) -> Figure:
    """Each slice's learning curve, its fitted family with a band, and what a purchase buys.

    Parameters
    ----------
    curves : dict value -> Curve
        Per-slice curves (`curvefit.measuring.slices.SliceCurves.curves`); their sizes
        count that slice's training rows.
    fits : dict value -> CurveFit, optional
        Each slice's fit; the chosen family is drawn in the slice's own line style with
        its ``interval`` band.
    split : pandas.DataFrame, optional
        A budget split's table (``slice, rows_now, labels, error_after, low, high``):
        the error expected after the purchase is marked at ``rows_now + labels`` with
        its interval.
    interval : float
    column : str, optional
        The slices' column, named on the x-axis.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    items = [(str(k), c) for k, c in as_items(curves)]
    fits = {str(k): f for k, f in fits.items()} if isinstance(fits, Mapping) else {}
    rows = ({str(r["slice"]): r for _, r in split.iterrows()}
            if isinstance(split, pd.DataFrame) else {})
    fig, ax = _new_axes(ax=ax)
    span = [math.inf, 0.0, axis_limit(dict(items))]
    metric, info, handles = None, None, []
    for i, (label, curve) in enumerate(items):
        summ = curve.summary(interval) if len(curve.ok_points()) else pd.DataFrame()
        if not len(summ):
            continue
        metric, info = getattr(curve, "metric", None), getattr(curve, "metric_info", None)
        st = style(i)
        # the constant predictor's lines would crowd five slices: the slices' table has it
        _draw_measured(ax, summ.drop(columns=["baseline_mean"], errors="ignore"), st, label,
                       False, span)
        fit = fits.get(label)
        if fit is not None:
            _draw_fit(ax, fit, summ, None, st, label, interval, span, runner_up=False,
                      line=st["linestyle"], reach=1.6)
        text = label + (f" ({family_name(getattr(fit, 'best', None))})" if fit is not None else "")
        row = rows.get(label)
        if row is not None and is_finite(row["labels"]) and float(row["labels"]) > 0:
            at = float(row["rows_now"]) + float(row["labels"])
            y, lo, hi = (float(row[k]) for k in ("error_after", "low", "high"))
            ax.errorbar([at], [y], yerr=[[max(y - lo, 0.0)], [max(hi - y, 0.0)]],
                        fmt=st["marker"], ms=10, mfc=st["color"], mec="black", mew=1.0,
                        color=st["color"], elinewidth=1.4, capsize=4, zorder=6)
            span[1] = max(span[1], at)
            text += f", buys {format_count(row['labels'])}"
        handles.append(Line2D([], [], color=st["color"], marker=st["marker"],
                              linestyle=st["linestyle"], linewidth=1.8, label=text))
    if not handles:
        ax.text(0.5, 0.5, "no slice curve to draw", transform=ax.transAxes,
                ha="center", va="center", color=NEUTRAL)
    else:
        ax.set_xscale("log")
        ax.set_xlim(span[0] / 1.25, span[1] * 1.25)
        ax.xaxis.set_major_formatter(_count_formatter)
        ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _p: ""))
        handles += [Patch(color=NEUTRAL, alpha=0.2, label=f"{format_level(interval)} band"),
                    Line2D([], [], marker="o", ms=9, mfc=NEUTRAL, mec="black", linestyle="none",
                           label="after the purchase, with its interval")]
        fig.legend(handles=handles, loc="outside lower center", ncols=2, handlelength=2.6,
                   columnspacing=1.6)
    what = f"{column} slice" if column else "slice"
    ax.set_xlabel(f"labelled rows of that {what} (training, log scale); the other slices "
                  "stay whole")
    ax.set_ylabel(metric_label(metric, info=info) + " on that slice's test rows")
    _value_axis(ax, metric)
    ax.set_title(title or "Per-slice learning curves")
    return fig


def _value_axis(ax, metric) -> None:
    """Ticks of a loss in its own units as plain numbers (10,000 rather than 1e4)."""
    if not is_rate(metric):
        ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _p: format_number(v)))


def _legend_outside(ax) -> None:
    """Legend below the axes: one column per model, measured entries before fitted ones.

    Entries are labelled ``"<model>: <kind>"``; a label without ``": "`` stands alone.
    """
    from matplotlib.patches import Rectangle

    handles, labels = ax.get_legend_handles_labels()
    if not handles:
        return
    groups: dict[str, list] = {}
    loose = []
    for h, lab in zip(handles, labels):
        if ": " in lab:
            g, kind = lab.split(": ", 1)
            rank = next((r for r, k in enumerate(_KIND_ORDER) if kind.startswith(k)),
                        len(_KIND_ORDER))
            groups.setdefault(g, []).append((rank, h, lab))
        else:
            loose.append((h, lab))
    cols = [sorted(v, key=lambda t: t[0]) for v in groups.values()]
    if len(cols) <= 1:
        entries = [(h, lab) for col in cols for _, h, lab in col] + loose
        ncols = _legend_columns(ax.figure, [lab for _, lab in entries], most=3)
    else:
        depth = max(len(c) for c in cols)
        blank = Rectangle((0, 0), 0, 0, visible=False)
        entries = []
        for col in cols:  # column-major fill: pad each model's column to the same depth
            entries += [(h, lab) for _, h, lab in col] + [(blank, "")] * (depth - len(col))
        for h, lab in loose:
            entries.append((h, lab))
        ncols = len(cols)
    hs, ls = zip(*entries)
    ax.figure.legend(hs, ls, loc="outside lower center", ncols=ncols, handlelength=2.6,
                     columnspacing=1.6)


def _legend_columns(fig: Figure, labels: list, most: int) -> int:
    """At most ``most`` legend columns, fewer when the longest label would push the legend
    past the figure's width (a long model name)."""
    import matplotlib as mpl
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath

    font = FontProperties(size=mpl.rcParams["legend.fontsize"])
    size = font.get_size_in_points()
    text = max((TextPath((0, 0), lab, prop=font).get_extents().width for lab in labels),
               default=0.0)
    column = text + (2.6 + 0.8 + 1.6) * size       # handle, its gap, the column spacing
    fits = int(0.95 * fig.get_figwidth() * 72 // column) if column > 0 else most
    return max(1, min(most, len(labels), fits))


# --------------------------------------------------------------------------- gap
@_styled
def gap_figure(curves: Any, lines: Any = None, *, title: str | None = None, ax: Any = None) -> Figure:
    """Generalization gap (test − train) against size, with fitted gap curves.

    Parameters
    ----------
    curves : Curve, list or dict of Curve
    lines : dict label -> list of (name, size_array, gap_array), or a list matching
        ``curves``. Typically the VC-shaped fit ``s·Φ(n/h)`` and a power-law fit, as
        read from a capacity estimate.

    Returns
    -------
    matplotlib.figure.Figure
    """
    items = as_items(curves)
    line_items = None if isinstance(lines, Mapping) else [v for _, v in as_items(lines)]
    fig, ax = _new_axes(ax=ax)
    any_data = False
    xs = []
    for i, (label, curve) in enumerate(items):
        label = label or model_label(curve, i)
        st = style(i)
        if not len(curve.ok_points()) or not curve.has_train:
            continue
        summ = curve.summary()
        summ = summ[np.isfinite(summ["gap_mean"])]
        if not len(summ):
            continue
        any_data = True
        x = summ["size"].to_numpy(float)
        xs.extend([x.min(), x.max()])
        sem = np.nan_to_num(summ["gap_sem"].to_numpy(float))
        ax.errorbar(x, summ["gap_mean"].to_numpy(float), yerr=sem, fmt=st["marker"], color=st["color"],
                    ms=5.5, elinewidth=2.2, capsize=0, zorder=4, label=f"{label}: measured gap")
        these = (lines.get(label) if isinstance(lines, Mapping)
                 else (line_items[i] if line_items and i < len(line_items) else None)) or []
        for j, (name, sx, sy) in enumerate(these):
            sx = np.asarray(sx, float)
            sy = np.asarray(sy, float)
            if not len(sx) or not np.isfinite(sy).any():
                continue
            xs.extend([np.nanmin(sx), np.nanmax(sx)])
            ax.plot(sx, sy, color=st["color"], linewidth=1.7 if j == 0 else 1.1,
                    linestyle=LINESTYLES[j % len(LINESTYLES)], zorder=3,
                    label=f"{label}: {name}")
    if any_data:
        ax.set_xscale("log")
        ax.set_xlim(min(xs) / 1.25, max(xs) * 1.25)
        ax.xaxis.set_major_formatter(_count_formatter)
        ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _p: ""))
        ax.axhline(0.0, color=NEUTRAL, linewidth=0.8)
    else:
        ax.text(0.5, 0.5, "no training error measured: no gap to draw", transform=ax.transAxes,
                ha="center", va="center", color=NEUTRAL)
    metric = getattr(items[0][1], "metric", None) if items else None
    ax.set_xlabel(f"labelled samples (training-set size, log scale) · {_split_caption(items)}")
    info = getattr(items[0][1], "metric_info", None) if items else None
    unit = "(0-1)" if is_rate(metric) else f"({metric_name(metric, info)})"
    ax.set_ylabel(f"generalization gap, test − train {unit}")
    _value_axis(ax, metric)
    ax.set_title(title or "Generalization gap")
    _legend_outside(ax)
    return fig


# --------------------------------------------------------------------------- probe
def _design_columns(design: pd.DataFrame) -> tuple[str | None, str | None, str | None]:
    cols = {c.lower(): c for c in design.columns}
    x = next((cols[c] for c in ("n", "half_size", "size", "n_points") if c in cols), None)
    y = next((cols[c] for c in ("xi", "xi_mean", "deviation", "mean_deviation") if c in cols), None)
    e = next((cols[c] for c in ("xi_sem", "sem", "deviation_sem") if c in cols), None)
    return x, y, e


@_styled
def probe_figure(capacity: Any, *, title: str | None = None, ax: Any = None) -> Figure:
    """Max-deviation probe: measured ξ(n) with the fitted Φ(n/h) and h's interval.

    Parameters
    ----------
    capacity : CapacityEstimate
        From ``probe_capacity``; its ``design`` table holds n and the mean deviation ξ.

    Returns
    -------
    matplotlib.figure.Figure

    References
    ----------
    .. [1] V. Vapnik, E. Levin, Y. LeCun, "Measuring the VC-dimension of a learning
       machine", Neural Computation 6(5), 1994.
    """
    from curvefit.capacity import phi

    fig, ax = _new_axes(ax=ax)
    design = field(capacity, "design")
    h = field(capacity, "vc_dim")
    st = style(0)
    drawn = False
    if isinstance(design, pd.DataFrame) and len(design):
        xc, yc, ec = _design_columns(design)
        if xc and yc:
            d = design[np.isfinite(pd.to_numeric(design[yc], errors="coerce"))]
            x = d[xc].to_numpy(float)
            y = d[yc].to_numpy(float)
            yerr = np.nan_to_num(d[ec].to_numpy(float)) if ec else None
            ax.errorbar(x, y, yerr=yerr, fmt=st["marker"], color=st["color"], ms=5.5,
                        elinewidth=2.0, capsize=0, zorder=4, label="measured ξ(n)")
            drawn = len(x) > 0
            if drawn and is_finite(h) and float(h) > 0:
                grid = np.geomspace(max(x.min() / 1.5, 1e-9), x.max() * 1.5, 200)
                ax.plot(grid, phi(grid / float(h)), color=PALETTE[1], linewidth=1.8,
                        label=f"Φ(n/h), h = {format_capacity(h)}")
                lo, hi = field(capacity, "low"), field(capacity, "high")
                if is_finite(lo) and is_finite(hi) and float(lo) > 0:
                    level = field(capacity, "level", INTERVAL) or INTERVAL
                    ax.fill_between(grid, phi(grid / float(lo)), phi(grid / float(hi)),
                                    color=PALETTE[1], alpha=0.16, linewidth=0,
                                    label=f"{format_level(level)} interval of h: "
                                          f"{format_range(lo, hi, 'capacity')}")
            if drawn:
                ax.set_xscale("log")
                ax.xaxis.set_major_formatter(_count_formatter)
                ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _p: ""))
    if not drawn:
        ax.text(0.5, 0.5, "no probe measurements to draw", transform=ax.transAxes,
                ha="center", va="center", color=NEUTRAL)
    ax.set_xlabel("n, points in each half of the probe sample (log scale)")
    ax.set_ylabel("max deviation ξ(n) (0-1)")
    ax.set_title(title or "Capacity probe")
    _legend_outside(ax)
    return fig


# --------------------------------------------------------------------------- trade-off
@_styled
def tradeoff_figure(tradeoff: Any, *, title: str | None = None, ax: Any = None) -> Figure:
    """Train and test error against a complexity parameter, one line per sample size.

    Parameters
    ----------
    tradeoff : Tradeoff, or a DataFrame with columns
        ``param, value, size, train_mean, test_mean[, test_sem]``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    table = tradeoff if isinstance(tradeoff, pd.DataFrame) else field(tradeoff, "table")
    fig, ax = _new_axes(ax=ax)
    if not isinstance(table, pd.DataFrame) or not len(table):
        ax.text(0.5, 0.5, "no trade-off measurements to draw", transform=ax.transAxes,
                ha="center", va="center", color=NEUTRAL)
        ax.set_title(title or "Complexity trade-off")
        return fig
    t = table.copy()
    param = str(t["param"].iloc[0]) if "param" in t else "complexity"
    numeric = pd.to_numeric(t["value"], errors="coerce")
    categorical = numeric.isna().any()
    if categorical:
        names = t["value"].map(format_param_value)
        order = list(dict.fromkeys(names))
        t["_x"] = names.map({v: k for k, v in enumerate(order)})
    else:
        t["_x"] = numeric
    positive = (not categorical) and (t["_x"] > 0).all()
    spread = (t["_x"].max() / t["_x"].min()) if positive and t["_x"].min() > 0 else 1
    for i, (size, g) in enumerate(t.groupby("size", sort=True)):
        st = style(i)
        g = g.sort_values("_x")
        yerr = np.nan_to_num(g["test_sem"].to_numpy(float)) if "test_sem" in g else None
        ax.errorbar(g["_x"], g["test_mean"], yerr=yerr, marker=st["marker"], color=st["color"],
                    ms=5.5, linestyle=st["linestyle"], linewidth=1.6, elinewidth=1.6,
                    capsize=0, label=f"n = {format_count(size)}: test", zorder=4)
        if "train_mean" in g and g["train_mean"].notna().any():
            ax.plot(g["_x"], g["train_mean"], marker=st["marker"], ms=4.5, mfc="white",
                    mec=st["color"], color=st["color"], linestyle=(0, (1, 1.5)), linewidth=1.0,
                    label=f"n = {format_count(size)}: train", zorder=3)
        ok = g[np.isfinite(g["test_mean"])]
        if len(ok):
            b = ok.loc[ok["test_mean"].idxmin()]
            ax.plot([b["_x"]], [b["test_mean"]], marker="*", ms=15, mfc=st["color"],
                    mec="black", mew=0.7, linestyle="none", zorder=6)
    ax.plot([], [], marker="*", ms=12, mfc="white", mec="black", linestyle="none",
            label="best setting at that size")
    if categorical:
        ax.set_xticks(range(len(order)), order)
    elif positive and spread >= 20:
        ax.set_xscale("log")
    metric = field(tradeoff, "metric", None) if not isinstance(tradeoff, pd.DataFrame) else None
    ax.set_xlabel(f"{param} (model complexity{', log scale' if ax.get_xscale() == 'log' else ''})")
    ax.set_ylabel(metric_label(metric, "train / test"))
    _value_axis(ax, metric)
    ax.set_title(title or f"Complexity trade-off: {param}")
    _legend_outside(ax)
    return fig


# --------------------------------------------------------------------------- worst case
@_styled
def worst_case_figure(rows: Sequence[Mapping], *, title: str | None = None,
                      measured_max: float | None = None) -> Figure:
    """Sample sizes side by side on a log axis: worst-case bound, rule of thumb, measured.

    Parameters
    ----------
    rows : sequence of dict
        Each with ``label`` and ``n`` and optionally ``low``, ``high`` (an interval),
        ``kind`` ("bound", "rule" or "measured") and ``note`` (drawn after the bar).
    measured_max : float, optional
        Largest size actually measured, drawn as a vertical reference line.

    Returns
    -------
    matplotlib.figure.Figure
    """
    rows = [r for r in rows if is_finite(r.get("n")) and float(r["n"]) > 0]
    height = 1.4 + 0.55 * max(len(rows), 1)
    fig, ax = _new_axes(figsize=(FIGSIZE[0], height))
    if not rows:
        ax.text(0.5, 0.5, "no sample sizes to compare", transform=ax.transAxes,
                ha="center", va="center", color=NEUTRAL)
        ax.set_title(title or "Worst case against measured")
        return fig
    kind_style = {"bound": (PALETTE[0], "//"), "rule": (PALETTE[4], ".."),
                  "measured": (PALETTE[1], "")}
    ys = np.arange(len(rows))[::-1]
    vals = []
    for y, r in zip(ys, rows):
        colour, hatch = kind_style.get(r.get("kind", "bound"), (NEUTRAL, ""))
        n = float(r["n"])
        vals.append(n)
        ax.barh(y, n, left=0, height=0.58, color=colour, alpha=0.85, hatch=hatch,
                edgecolor="white", linewidth=0.5, zorder=3)
        lo, hi = r.get("low"), r.get("high")
        if is_finite(lo) and is_finite(hi) and float(lo) > 0:
            ax.errorbar([n], [y], xerr=[[n - float(lo)], [float(hi) - n]], fmt="none",
                        ecolor="black", elinewidth=1.0, capsize=3, zorder=4)
            vals.append(float(hi))
        ax.text(max(n, float(hi) if is_finite(hi) else n) * 1.15, y,
                f"{format_count(n)}" + (f"  {r['note']}" if r.get("note") else ""),
                va="center", fontsize=8.5, color="#1d2329")
    ax.set_yticks(ys, [str(r["label"]) for r in rows])
    ax.set_xscale("log")
    ax.set_xlim(min(vals) / 3, max(vals) * 12)
    ax.xaxis.set_major_formatter(_count_formatter)
    ax.grid(axis="y", visible=False)
    if measured_max:
        ax.axvline(float(measured_max), color=NEUTRAL, linestyle=(0, (2, 2)), linewidth=0.9)
        ax.set_ylim(-0.6, ys.max() + 0.95)
        ax.text(float(measured_max), ys.max() + 0.5, " largest size measured", fontsize=8,
                color=NEUTRAL, va="bottom")
    ax.set_xlabel("labelled samples (log scale)")
    ax.set_title(title or "Worst case against measured")
    return fig


# --------------------------------------------------------------------------- history
def _trend_names(doc: Mapping) -> list[str]:
    """Figure names in a history document: the registered ones first, in their order."""
    from curvefit.history.figures import FIGURES

    names: list[str] = []
    for s in doc["series"]:
        for r in s["runs"]:
            names += [n for n in r["figures"] if n not in names]
    return [n for n in FIGURES if n in names] + [n for n in names if n not in FIGURES]


def _trend_panel(ax, doc: Mapping, name: str) -> None:
    """One headline figure over the runs: estimate and interval per run, one line per series."""
    from curvefit.history.figures import FIGURES

    skipped = 0
    for i, s in enumerate(doc["series"]):
        xs, ys, lo, hi = [], [], [], []
        for r in s["runs"]:
            f = r["figures"].get(name)
            if not f or f["estimate"] is None:
                skipped += bool(f and f.get("unbounded"))
                continue
            xs.append(r["run_id"])
            ys.append(f["estimate"])
            lo.append(f["low"] if isinstance(f["low"], float) else f["estimate"])
            hi.append(f["high"] if isinstance(f["high"], float) else f["estimate"])
        if not xs:
            continue
        st = style(i)
        yerr = [[max(0.0, y - low) for y, low in zip(ys, lo)],
                [max(0.0, h - y) for y, h in zip(ys, hi)]]
        ax.errorbar(xs, ys, yerr=yerr, color=st["color"], marker=st["marker"],
                    linestyle=st["linestyle"], linewidth=1.2, markersize=4.5,
                    capsize=3, elinewidth=0.9, label=s["name"])
    direction, label = FIGURES.get(name, (None, name))
    hint = {"lower": " — lower is better", "higher": " — higher is better"}.get(direction, "")
    extra = f" ({skipped} unreachable not drawn)" if skipped else ""
    ax.set_title(f"{label}{hint}{extra}", fontsize=9.5)
    if len(doc["series"]) > 1:
        ax.legend(loc="best")


@_styled
def trend_figure(doc: Mapping) -> Figure:
    """One panel per headline figure: estimate and interval for each run, per series.

    Parameters
    ----------
    doc : dict
        A history document (`curvefit.history.listing.history_document`). Only the
        recorded figures are drawn; unreachable targets (``inf``) are left out of the
        panel and counted in its title.

    Returns
    -------
    matplotlib.figure.Figure
    """
    names = _trend_names(doc)
    if not names:
        raise InputError("no headline figures recorded yet; nothing to plot "
                         "(record a run with: curvefit track RUN --store DB --series NAME)")
    fig = Figure(figsize=(7.6, 2.3 * len(names) + 0.4), dpi=DPI, layout="constrained")
    axes = fig.subplots(len(names), 1, sharex=True, squeeze=False)[:, 0]
    for ax, name in zip(axes, names):
        _trend_panel(ax, doc, name)
    axes[-1].set_xlabel("run id (in order of recording)")
    axes[-1].xaxis.get_major_locator().set_params(integer=True)
    return fig


# --------------------------------------------------------------------------- output
def figure_bytes(fig: Figure, fmt: str = "png") -> bytes:
    """Render a figure to PNG or SVG bytes (SVG without a timestamp, so it is stable)."""
    buf = io.BytesIO()
    meta = {"Date": None} if fmt == "svg" else {"Software": None}
    with matplotlib.rc_context(STYLE_RC):
        fig.savefig(buf, format=fmt, dpi=DPI if fmt == "png" else None, metadata=meta,
                    facecolor="white")
    return buf.getvalue()


def save_figure(fig: Figure, stem: str | os.PathLike, formats: Iterable[str] = ("png", "svg")) -> dict:
    """Write ``stem.png`` and ``stem.svg``; returns ``{format: Path}``."""
    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    paths = {}
    for fmt in formats:
        p = stem.with_name(stem.name + "." + fmt)
        p.write_bytes(figure_bytes(fig, fmt))
        paths[fmt] = p
    return paths
