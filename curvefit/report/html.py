"""The HTML report: one self-contained file a practitioner reads top to bottom.

Layout, in order: the answer (how many labelled samples reach the target, or why the
target is out of reach), the learning curves, what to buy (a plan in rounds and a
budget split across slices, when given), the family ranking, capacity, the
complexity trade-off, worst-case bounds against the measured answer, cautions, and the
run metadata. Figures are embedded as base64 PNG data URIs and the CSS is inline, so
the file needs no network, no script and no font from anywhere; `write_report` also
writes each figure as PNG and SVG beside the HTML.

This module renders results it is given and computes no estimate: the results come from
`curvefit.workflows.analysis.analyse` (objects with ``label``, ``curve``, ``fit``,
``answer``, ``capacity``, ``notes``, ``source``, ``forecast``, ``gap_lines`` and
``worst_case``). A plain `Curve` is drawn without fits, and every section whose results
are absent is skipped except the curves.

Every string that can come from the user (column names, model specs, parameters,
metadata, messages) passes through `html.escape` before it reaches the page.

Examples
--------
>>> import pandas as pd
>>> from curvefit.core.curve import Curve
>>> c = Curve.from_table(pd.DataFrame({"size": [50, 50, 100, 100],
...                                    "test_error": [.3, .28, .22, .24]}),
...                      meta={"label": "<b>m</b>"})
>>> page = build_report([c])
>>> page.startswith("<!DOCTYPE html>") and "<b>m</b>" not in page
True
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import math
import os
import platform
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from curvefit.core.curve import Curve
from curvefit.core.defaults import INTERVAL
from curvefit.core.errors import InputError
from curvefit.core.formatting import (
    MISSING,
    format_capacity,
    format_count,
    format_error,
    format_interval,
    format_level,
    format_money,
    format_number,
    format_range,
    is_rate,
    is_zero_one,
    metric_name,
    quantity_name,
    vc_absent_reason,
)
from curvefit.core.jsonio import jsonable, write_text_atomic
from curvefit.report import plots
from curvefit.report.labels import as_items, family_name, is_finite, model_label
from curvefit.report.labels import field as field_of


@dataclass
class _CurveOnly:
    """A bare curve shown without fits (the fields a result has, left empty)."""

    label: str
    curve: Curve
    fit: Any = None
    answer: Any = None
    capacity: Any = None
    notes: list = field(default_factory=list)
    source: str | None = None
    forecast: Any = None
    gap_lines: list = field(default_factory=list)
    worst_case: Any = None
    sanity: Any = None


# --------------------------------------------------------------------------- cells
def esc(value: Any) -> str:
    """HTML-escape anything (quotes too), after turning it into text."""
    return html.escape("" if value is None else str(value), quote=True)


def format_cell(v: Any) -> str:
    """A table cell: numbers in the shared style, ``yes`` for True, lists joined."""
    if v is None:
        return ""
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else ""
    if isinstance(v, (int, np.integer)):
        return f"{int(v):,}"
    if isinstance(v, (float, np.floating)):
        return format_number(v)
    if isinstance(v, Mapping):
        return ", ".join(f"{k}={format_cell(x)}" for k, x in v.items())
    if isinstance(v, (list, tuple, np.ndarray)):
        return ", ".join(format_cell(x) for x in v)
    return str(v)


def _align(v: Any) -> str:
    """Text cells align left, numbers right (the default)."""
    if isinstance(v, (Mapping, list, tuple)):
        return ' class="text"'
    if isinstance(v, str):
        try:
            float(v.replace(",", "").rstrip("%"))
        except ValueError:
            return ' class="text"'
    return ""


def html_table(df: pd.DataFrame, *, columns: Sequence[str] | None = None,
               headers: Mapping[str, str] | None = None, highlight: str | None = None,
               max_rows: int = 60) -> str:
    """A plain escaped HTML table; the row whose ``highlight`` column is truthy is marked."""
    if df is None or not len(df):
        return ""
    cols = [c for c in (columns or list(df.columns)) if c in df.columns]
    headers = headers or {}
    head = "".join(f"<th>{esc(headers.get(c, c))}</th>" for c in cols)
    body = []
    for _, row in df.head(max_rows).iterrows():
        mark = ' class="chosen"' if highlight and highlight in df.columns and bool(row[highlight]) else ""
        cells = "".join(f'<td{_align(row[c])}>{esc(format_cell(row[c]))}</td>' for c in cols)
        body.append(f"<tr{mark}>{cells}</tr>")
    more = (f'<p class="small">{len(df) - max_rows} more rows not shown.</p>'
            if len(df) > max_rows else "")
    return (f'<div class="tablewrap"><table><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>{more}')


def _img(png: bytes, alt: str, caption: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{esc(alt)}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def _what(curve: Any, kind: str = "test_error") -> str:
    """What the curve's values are, in words: "test error" for the 0-1 error, "test MSE"."""
    return quantity_name(kind, curve.metric, getattr(curve, "metric_info", None))


def _target_phrase(curve: Any, target_error: float, strong: bool = True) -> str:
    """``<strong>15.0%</strong> test error`` or ``a test MSE of <strong>3,000</strong>``."""
    target, what = esc(format_error(target_error, curve.metric)), esc(_what(curve))
    target = f"<strong>{target}</strong>" if strong else target
    if is_rate(curve.metric):
        return f"{target} {what}"
    return f"a {what} of {target}"


# --------------------------------------------------------------------------- sentences
def answer_sentence(res: Any, target_error: float, interval: float = INTERVAL) -> str:
    """The plain-words answer for one model (escaped HTML)."""
    metric = res.curve.metric
    ans = res.answer
    phrase = _target_phrase(res.curve, target_error)
    if ans is None:
        why = "; ".join(res.notes) or "no fit was available"
        return f"No answer for {_target_phrase(res.curve, target_error, False)}: {esc(why)}."
    n = field_of(ans, "n")
    if bool(field_of(ans, "reachable", is_finite(n))) and is_finite(n):
        return (f"To reach {phrase} you need about "
                f"<strong>{esc(format_count(n))} labelled samples</strong>"
                f"{_answer_span(ans, interval)}.{_extrapolation(res.curve, float(n))}")
    msg = field_of(ans, "message") or ""
    if msg:
        text = esc(msg)
        if "not reachable" in text:  # the fit's own sentence says it; just emphasise it
            return text.replace("not reachable", "<strong>not reachable</strong>", 1)
        return (f"{phrase[:1].upper()}{phrase[1:]} is <strong>not reachable</strong> "
                f"by adding labels alone. {text}")
    asym = field_of(ans, "asymptote")
    a = field_of(asym, "estimate", asym)
    floor = (f" The fitted curve levels off at about {esc(format_error(a, metric))}."
             if is_finite(a) else "")
    return (f"{phrase[:1].upper()}{phrase[1:]} is <strong>not reachable</strong> "
            f"with this model by adding labels alone.{floor}")


def _answer_span(ans: Any, interval: float) -> str:
    """`` (90% interval 2,130–4,180)``; an open upper end reads "to no upper limit"."""
    lo, hi = field_of(ans, "low"), field_of(ans, "high")
    if not is_finite(lo) or not (is_finite(hi) or hi == math.inf):
        return ""
    level = field_of(ans, "level", interval) or interval
    return f" ({esc(format_interval(lo, hi, level, kind='count'))})"


def _extrapolation(curve: Curve, n: float) -> str:
    have = float(curve.sizes.max()) if len(curve.sizes) else math.nan
    if not is_finite(have):
        return ""
    if n > have:
        return (f" You measured up to {esc(format_count(have))}, so this is an "
                f"extrapolation by a factor of about {n / have:.1f}.")
    return f" That is within the sizes you measured (up to {esc(format_count(have))})."


def _forecast_sentence(res: Any, interval: float) -> str:
    metric = res.curve.metric
    pred = res.forecast
    if res.fit is None or pred is None or not len(pred):
        return f"No forecast: {esc('; '.join(res.notes) or 'no fit was available')}."
    parts = [f"about <strong>{esc(format_error(r.estimate, metric))}</strong> at "
             f"{esc(format_count(r.size))} labelled samples "
             f"({esc(format_interval(r.low, r.high, interval, 'error', metric))})"
             for r in pred.itertuples()]
    return "Forecast: " + "; ".join(parts) + "."


def order_results(results: Sequence[Any]) -> list:
    """Best model first: reachable with the fewest labels, then lowest measured error."""

    def key(r):
        n = field_of(r.answer, "n")
        reach = bool(field_of(r.answer, "reachable", False)) and is_finite(n)
        ok = r.curve.ok_points()
        last = float(ok[ok["size"] == ok["size"].max()]["test_error"].mean()) if len(ok) else math.inf
        return (0 if reach else 1, float(n) if reach else math.inf, last)

    return sorted(results, key=key)


def _purchase_view(plan: pd.DataFrame, metric: str, interval: float,
                   info: Any = None) -> pd.DataFrame:
    """The purchase plan with readable units: counts, errors, cost, drop per 1,000."""
    view = pd.DataFrame(index=plan.index)
    what = quantity_name("test_error", metric, info)
    amount = lambda v: f"{float(v):,.0f}" if is_finite(v) else MISSING  # noqa: E731 - exact amounts
    if "extra" in plan:
        view["extra labels"] = plan["extra"].map(amount)
    if "total_n" in plan:
        view["total labels"] = plan["total_n"].map(amount)
    if "test_error" in plan:
        view[f"expected {what}"] = plan["test_error"].map(lambda v: format_error(v, metric))
    if "low" in plan and "high" in plan:
        view[f"{format_level(interval)} interval"] = [
            format_range(lo, hi, "error", metric) for lo, hi in zip(plan["low"], plan["high"])]
    if "cost" in plan and plan["cost"].notna().any():
        view["cost"] = plan["cost"].map(format_money)
    if "drop_per_1000" in plan:
        drop = "error drop" if is_rate(metric) else f"{metric_name(metric, info)} drop"
        view[f"{drop} per 1,000 labels"] = plan["drop_per_1000"].map(
            lambda v: format_error(v, metric))
    known = ("extra", "total_n", "test_error", "low", "high", "cost", "drop_per_1000")
    for c in [c for c in plan.columns if c not in known]:
        view[c] = plan[c]
    return view


CSS = """
:root { --ink:#1d2731; --muted:#5b6570; --line:#d9dee3; --accent:#1f3b57; --warm:#d47a1e;
        --paper:#fbfaf7; --panel:#ffffff; --good:#245c3b; --bad:#9b2232; }
* { box-sizing:border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font:15px/1.5 "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
main { max-width:1060px; margin:0 auto; padding:24px 28px 48px; }
header { border-bottom:3px solid var(--accent); padding-bottom:10px; margin-bottom:18px; }
h1 { font-size:26px; margin:0 0 4px; letter-spacing:.2px; }
h2 { font-size:19px; margin:34px 0 10px; padding-bottom:4px; border-bottom:1px solid var(--line); }
h3 { font-size:16px; margin:20px 0 6px; }
p { margin:6px 0 10px; }
.sub { color:var(--muted); font-size:13px; }
nav { font-size:13px; margin:8px 0 0; }
nav a { color:var(--accent); margin-right:14px; text-decoration:none;
        border-bottom:1px dotted var(--accent); }
.answer { background:var(--panel); border:1px solid var(--line); border-left:6px solid var(--warm);
          padding:14px 18px; margin:8px 0 14px; }
.answer p.lead { font-size:18px; margin:4px 0 8px; }
.answer .model { font-weight:bold; color:var(--accent); }
.answer ul { margin:6px 0 4px 0; padding-left:20px; }
.answer li { margin:4px 0; }
figure { margin:10px 0 18px; background:var(--panel); border:1px solid var(--line); padding:10px; }
figure img { display:block; max-width:100%; height:auto; margin:0 auto; }
figcaption { color:var(--muted); font-size:13px; margin-top:6px; }
.tablewrap { overflow-x:auto; margin:6px 0 14px; }
table { border-collapse:collapse; font-size:13px; background:var(--panel); }
th, td { border:1px solid var(--line); padding:4px 9px; text-align:right; vertical-align:top; }
th { background:#eef1f4; font-weight:bold; }
td:first-child, th:first-child, td.text { text-align:left; }
tr.chosen td { background:#fdf1e3; font-weight:bold; }
.note { border-left:4px solid var(--muted); background:#f1f2f3; padding:6px 12px; margin:8px 0;
        font-size:14px; }
.warn { border-left-color:var(--warm); background:#fcf3e8; }
.small { font-size:12px; color:var(--muted); }
dl.meta { display:grid; grid-template-columns:max-content 1fr; gap:3px 16px; font-size:13px;
          background:var(--panel); border:1px solid var(--line); padding:10px 14px; margin:6px 0 16px; }
dl.meta dt { font-weight:bold; color:var(--muted); }
dl.meta dd { margin:0; overflow-wrap:anywhere; font-family:"DejaVu Sans Mono", monospace; font-size:12px; }
ul.caution li { margin:4px 0; }
footer { margin-top:36px; color:var(--muted); font-size:12px; border-top:1px solid var(--line);
         padding-top:8px; }
"""

CAUTIONS = [
    "These are statistical estimates from the learning curve you measured, not guarantees: "
    "the intervals describe the fit's uncertainty at the stated level, and extrapolating "
    "far beyond the largest size measured widens them for good reason.",
    "They assume the new labels are drawn the same way as the measured ones "
    "(i.i.d. sampling from the same population) and that the model configuration "
    "(features, hyper-parameters, preprocessing) stays fixed.",
    "A shift in the population, the labelling process or the model invalidates the forecast; "
    "re-measure the curve after such a change.",
    "For medical, safety-critical or regulated use, follow your field's validation rules "
    "and your regulator's requirements; this report does not replace them.",
]

_META_FIRST = ["model", "model_spec", "params", "data", "data_fingerprint", "fingerprint",
               "target", "n_rows", "sizes", "repeats", "seed", "random_state", "metric",
               "split", "split_kind", "test_size", "test_fraction", "groups", "versions",
               "started", "finished", "created"]


def _meta_value(v: Any) -> str:
    if isinstance(v, (dict, list, tuple)):
        text = json.dumps(jsonable(v), ensure_ascii=False, sort_keys=False, default=str)
    else:
        text = str(v)
    return text if len(text) <= 1500 else text[:1500] + " …"


def _meta_block(res: Any) -> str:
    meta = dict(res.curve.meta or {})
    keys = [k for k in _META_FIRST if k in meta] + sorted(k for k in meta if k not in _META_FIRST)
    rows = [("run file", res.source)] if res.source else []
    ok, failed = len(res.curve.ok_points()), len(res.curve.failed_points())
    sizes = res.curve.points["size"].unique()
    span = format_range(sizes.min(), sizes.max(), "count") if len(sizes) else MISSING
    rows.append(("cells", f"{ok} finished, {failed} failed, {len(sizes)} sizes ({span})"))
    rows += [(k, _meta_value(meta[k])) for k in keys]
    items = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in rows)
    return f"<h3>{esc(res.label)}</h3><dl class=\"meta\">{items}</dl>"


def curve_table(curve: Any, interval: float = INTERVAL) -> str:
    """The per-size table of a measured curve (in the report and in notebooks)."""
    if not len(curve.ok_points()):
        return ""
    s = curve.summary(interval)
    metric = curve.metric
    scale = float(s["test_mean"].abs().max()) if len(s) else None

    def err(values):
        return [format_error(v, metric, scale) for v in values]

    rows = pd.DataFrame({
        "size": s["size"].astype(int),
        "repeats": s["n_repeats"].astype(int),
        "failed": s["n_failed"].astype(int),
        "test": err(s["test_mean"]),
        "± s.e.": err(s["test_sem"]),
        "test-set interval": [format_range(lo, hi, "error", metric) if is_finite(lo) else MISSING
                              for lo, hi in zip(s["test_low"], s["test_high"])],
        "train": err(s["train_mean"]),
        "gap": err(s["gap_mean"]),
    })
    if s["baseline_mean"].notna().any():
        rows["constant predictor"] = err(s["baseline_mean"])
    heads = {"test-set interval": f"one test set, exact {format_level(interval)}"}
    return html_table(rows, headers=heads)


def _ranking_block(res: Any) -> str:
    fit = res.fit
    out = [f"<h3>{esc(res.label)}</h3>"]
    if fit is None:
        out.append(f'<p class="note">No fit: {esc("; ".join(res.notes) or "not available")}</p>')
        return "".join(out)
    table = field_of(fit, "table")
    if isinstance(table, pd.DataFrame) and len(table):
        out.append(html_table(table, columns=["family", "params", "forecast_error", "aicc",
                                              "status", "chosen"],
                              headers={"forecast_error": "forecast error (held-out sizes)",
                                       "aicc": "AICc"},
                              highlight="chosen"))
    best, runner = family_name(field_of(fit, "best")), family_name(field_of(fit, "runner_up"))
    if best:
        out.append(f"<p>Chosen family: <strong>{esc(best)}</strong>"
                   + (f"; runner-up: {esc(runner)}" if runner else "") + ".</p>")
    for w in field_of(fit, "warnings", None) or []:
        out.append(f'<p class="note warn">{esc(w)}</p>')
    return "".join(out)


def _capacity_rows(results: Sequence[Any], probe: Any, interval: float) -> pd.DataFrame:
    rows = [capacity_row(r.label, r.capacity, interval) for r in results if r.capacity is not None]
    if probe is not None:
        rows.append(capacity_row("probe (max-deviation experiment)", probe, interval))
    return pd.DataFrame(rows)


# What each capacity method's figure is, for the capacity table.
CAPACITY_METHODS = {"gap": "gap model (VC units)", "probe": "probe (VC dimension)",
                    "optimism": "optimism of squared error (parameters)",
                    "none": "none for this loss"}


def capacity_row(label: str, c: Any, interval: float) -> dict:
    """One row of the capacity table (in the report and in notebooks)."""
    lvl = field_of(c, "level", interval) or interval
    d, lo, hi = field_of(c, "vc_dim"), field_of(c, "low"), field_of(c, "high")
    above = bool(field_of(c, "above_range", False))
    method = field_of(c, "method", "")
    return {"model": label, "method": CAPACITY_METHODS.get(method, method),
            "effective capacity": (("≥ " if above else "") + format_capacity(d))
            if is_finite(d) else MISSING,
            f"{format_level(lvl)} interval": (format_range(lo, hi, "capacity")
                                              if is_finite(lo) and (is_finite(hi) or hi == math.inf)
                                              else MISSING),
            "note": field_of(c, "message", "") or ("above the probed range: a lower bound"
                                                  if above else "")}


def _worst_case_text(wc: Any) -> str:
    which = ("the max-deviation probe's VC dimension (distribution-free)" if wc.method == "probe"
             else "the effective capacity from the measured gap (calibrated in VC units; "
                  "not the class's VC dimension)")
    bound = "at least " if getattr(wc, "lower_bound", False) else ""
    source = getattr(wc, "eps_source", "") or "the target minus the training error"
    return (f"For <strong>{esc(wc.label)}</strong> the bound uses {esc(which)}, d ≈ {bound}"
            f"{esc(format_capacity(wc.vc_dim))}. The VC bound limits the gap between test and "
            f"training error: it is asked for ε = {esc(format_number(wc.eps, 3))} "
            f"({esc(source)}) with probability {format_level(1 - wc.delta)}. It holds for "
            f"every distribution, so it is usually one to two orders of magnitude above what a "
            f"real problem needs; the rule of thumb (common practice) and the measured answer "
            f"are the numbers to plan with.")


# --------------------------------------------------------------------------- sections
@dataclass
class _Page:
    """What the sections share: the ordered results, the settings, the figures drawn."""

    results: list
    target_error: float | None
    interval: float
    figure_dir: Path | None
    figures: list = field(default_factory=list)

    def figure(self, stem: str, fig, alt: str, caption: str) -> str:
        """Embed a figure (and write it as PNG and SVG when there is a figure folder)."""
        png = plots.figure_bytes(fig, "png")
        if self.figure_dir is not None:
            plots.save_figure(fig, self.figure_dir / stem)
        self.figures.append(stem)
        return _img(png, alt, caption)


def _answer_section(page: _Page, purchase: pd.DataFrame | None, purchase_note: str | None) -> str:
    res, target = page.results, page.target_error
    body = []
    if target is not None:
        body.append(f'<p class="lead"><span class="model">{esc(res[0].label)}</span>: '
                    f"{answer_sentence(res[0], target, page.interval)}</p>")
        if len(res) > 1:
            body.append("<ul>" + "".join(
                f'<li><span class="model">{esc(r.label)}</span>: '
                f"{answer_sentence(r, target, page.interval)}</li>" for r in res[1:]) + "</ul>")
    else:
        body.append('<p class="lead">No target was given, so here is what more labels are '
                    "expected to buy.</p><ul>" + "".join(
                        f'<li><span class="model">{esc(r.label)}</span>: '
                        f"{_forecast_sentence(r, page.interval)}</li>" for r in res) + "</ul>"
                    '<p class="small">Give a target (<code>--target-error</code>) for a '
                    "sample size with an interval.</p>")
    body += _sanity_lines(res)
    if purchase is not None and len(purchase):
        body.append(f"<h3>Buying more labels ({esc(res[0].label)})</h3>")
        if purchase_note:
            body.append(f"<p>{esc(purchase_note)}</p>")
        body.append(html_table(_purchase_view(purchase, res[0].curve.metric, page.interval,
                                              res[0].curve.metric_info)))
    shown = []
    for r in res:
        for w in field_of(r.answer, "warnings", None) or ():
            if w not in shown:
                shown.append(w)
                body.append(f'<p class="note warn">{esc(r.label)}: {esc(w)}</p>')
    failed = sum(len(r.curve.failed_points()) for r in res)
    if failed:
        body.append(f'<p class="note warn">{failed} cell(s) failed and were left out of the '
                    "fits; their messages are in the run files.</p>")
    return f'<div class="answer">{"".join(body)}</div>'


def _sanity_lines(res: Sequence[Any]) -> list[str]:
    """Each model's constant-predictor comparison, then its flags (a warning each)."""
    body = []
    for r in res:
        check = r.sanity if hasattr(r, "sanity") else None
        if check is None:
            continue
        if check.baseline is not None:
            body.append(f'<p class="note">{esc(r.label)}: {esc(check.baseline.line())}.</p>')
        body += [f'<p class="note warn">{esc(r.label)}: {esc(n)}.</p>' for n in check.notes]
    return body


def _far_answers(res: Sequence[Any]) -> str:
    """A sentence for the answers the learning-curve figure marks at its axis's edge."""
    limit = plots.axis_limit({r.label: r.curve for r in res})
    far = [r for r in res if plots.beyond_axis(r.answer, limit)]
    if not far:
        return ""
    names = ", ".join(str(r.label) for r in far)  # plain text: the caption is escaped once
    return (f" The axis ends at {format_count(limit)} labelled samples "
            f"({plots.AXIS_CAP:g}× the largest size measured), so the measured points stay "
            f"readable; the answer for {names} lies beyond it and is marked at the edge with "
            "an arrow.")


def _curves_section(page: _Page) -> str:
    res, level = page.results, format_level(page.interval)
    fig = plots.learning_curve_figure(
        {r.label: r.curve for r in res}, {r.label: r.fit for r in res},
        target_error=page.target_error, answers={r.label: r.answer for r in res},
        interval=page.interval)
    constant = (" Thin dashed line without markers: the constant predictor's error on the "
                "same test sets." if any(r.curve.has_baseline for r in res) else "")
    far = _far_answers(res) if page.target_error is not None else ""
    curve = res[0].curve
    what, name = _what(curve), metric_name(curve.metric, curve.metric_info)
    bars = (f"; thin capped bars: exact {level} interval of one repeat's test set"
            if is_zero_one(curve.metric) else "")
    body = [page.figure("learning-curve", fig, "learning curves: error against labelled samples",
                        f"Filled markers: mean {what} over repeats (thick bar ± one standard "
                        f"error){bars}; hollow markers: training {name}. Lines: the chosen family "
                        f"(solid, shaded {level} band) and the runner-up (dashed), "
                        f"extrapolated.{constant}{far}")]
    for r in res:
        body.append(f"<h3>{esc(r.label)}</h3>"
                    f'<p class="note">Split: {esc(plots.split_label(r.curve))}.</p>'
                    f"{curve_table(r.curve, page.interval)}")
        body += [f'<p class="note">{esc(n)}</p>' for n in r.notes]
    return "".join(body)


def _ranking_section(page: _Page) -> str | None:
    if not any(r.fit is not None for r in page.results):
        return None
    what = esc(_what(page.results[0].curve))
    body = [f"<p>Each family was fitted to the measured {what}; the one with the "
            "smallest error when forecasting the largest sizes from the smaller ones is "
            "chosen (marked).</p>"]
    return "".join(body + [_ranking_block(r) for r in page.results])


def _capacity_section(page: _Page, probe: Any) -> str | None:
    res = page.results
    rows = _capacity_rows(res, probe, page.interval)
    has_gap = any(r.curve.has_train for r in res if len(r.curve.ok_points()))
    if not len(rows) and not has_gap:
        return None
    body = []
    if has_gap:
        fig = plots.gap_figure({r.label: r.curve for r in res}, {r.label: r.gap_lines for r in res})
        body.append(page.figure("gap", fig, "generalization gap against labelled samples",
                                "Test minus training error per size (± one standard error), "
                                "with the fitted gap curves where available."))
    if len(rows):
        body.append(html_table(rows))
    methods = {field_of(c, "method", "") for c in [r.capacity for r in res] + [probe] if c is not None}
    if methods & {"gap", "probe"}:
        body.append('<p class="small">Effective capacity in VC units is the VC dimension of a '
                    "learner that would show the same gap; it is an estimate, and a learner whose "
                    "capacity exceeds the probed range gets only a lower bound.</p>")
    if probe is not None:
        fig = plots.probe_figure(probe)
        body.append(page.figure("probe", fig, "capacity probe: max deviation against n",
                                "Max-deviation experiment (Vapnik, Levin and LeCun 1994): "
                                "measured ξ(n) with the fitted Φ(n/h) and the interval of h."))
    notes = dict.fromkeys(n for r in res for n in (field_of(r.capacity, "notes", None) or []))
    body += [f'<p class="note">{esc(n)}</p>' for n in notes]  # shared notes shown once
    return "".join(body)


def _tradeoff_section(page: _Page, tradeoff: Any) -> str | None:
    if tradeoff is None:
        return None
    fig = plots.tradeoff_figure(tradeoff)
    body = [page.figure("tradeoff", fig, "train and test error against model complexity",
                        "One line per training-set size; the star marks the best setting "
                        "at that size.")]
    best = None
    if hasattr(tradeoff, "best_per_size"):
        try:
            best = tradeoff.best_per_size()
        except Exception:  # noqa: BLE001 - the table is optional
            best = None
    if isinstance(best, pd.DataFrame) and len(best):
        param = getattr(tradeoff, "param", None) or "value"
        best = best.rename(columns={
            "best_value": f"best {param}", "test_mean": "test error",
            "test_sem": "± s.e.", "within_1se": "within one s.e."})
        body.append(html_table(best))
    return "".join(body)


def _worst_case_section(page: _Page) -> str | None:
    if page.target_error is None:
        return None
    others = [r.curve for r in page.results if not is_zero_one(r.curve.metric)]
    if others and len(others) == len(page.results):  # no model measured with the 0-1 loss
        why = vc_absent_reason(others[0].metric, others[0].metric_info)
        return f"<p>{esc(why[:1].upper() + why[1:])}.</p>"
    wc = next((r.worst_case for r in page.results if r.worst_case is not None), None)
    if wc is None:
        return None
    have = max((float(r.curve.sizes.max()) for r in page.results if len(r.curve.sizes)),
               default=None)
    fig = plots.worst_case_figure(wc.rows, measured_max=have)
    return "".join([f"<p>{_worst_case_text(wc)}</p>",
                    page.figure("worst-case", fig,
                                "worst-case sample sizes against the measured answer",
                                "Sample sizes on a log scale: the distribution-free VC bound, "
                                "the 10 × d rule of thumb, and the answer read from the "
                                "learning curve (with its interval).")])


BUYING_CAUTION = ("These are statistical estimates read from the fitted learning curves and "
                  "their intervals at the stated level, not guarantees. They hold while new "
                  "labels come from the same population and the model stays the same; "
                  "re-measure after each round and plan again.")


def _buying_section(page: _Page, buying: Any) -> str | None:
    """What to buy: the plan in rounds and the split across slices, as they were handed in."""
    if buying is None:
        return None
    body = [f'<p class="note">{esc(BUYING_CAUTION)}</p>']
    if getattr(buying, "rounds", None) is not None:
        body.append(_rounds_block(buying.rounds, buying.model))
    if getattr(buying, "split", None) is not None:
        body.append(_split_block(page, buying.split, buying.slices))
    body += [f'<p class="note warn">{esc(n)}</p>' for n in dict.fromkeys(buying.notes)]
    return "".join(body)


def _rounds_block(plan: Any, model: str | None) -> str:
    metric = plan.metric
    terms = (f"a miss after the last round costs {format_money(plan.penalty)}"
             if plan.penalty is not None
             else f"the target must be reached with probability {format_level(plan.probability)}")
    head = (f"<h3>In rounds{f' ({esc(model)})' if model else ''}</h3>"
            f"<p>To reach {esc(format_error(plan.target, metric))} "
            f"{esc(quantity_name(plan.kind, metric))} from the "
            f"{esc(format_count(plan.current_n))} labelled samples in hand: at most "
            f"{plan.max_rounds} round{'s' if plan.max_rounds != 1 else ''}, "
            f"{esc(format_money(plan.label_cost))} per label, "
            f"{esc(format_money(plan.round_cost))} per round, and {esc(terms)}."
            + (f" <strong>Labels to buy now: {esc(format_count(plan.buy_now))}</strong>."
               if plan.feasible else "") + "</p>")
    rule = "<ul>" + "".join(f"<li>{esc(line)}</li>" for line in plan.rule()) + "</ul>"
    level = format_level(plan.level)
    rows = []
    for s in (plan.rounds, plan.one_shot, plan.upper_end):
        if s is None:
            continue
        rows.append({"strategy": s.title,
                     "labels in all, by round": (" / ".join(format_count(t) for t in s.totals)
                                                 or "nothing"),
                     "expected cost": format_money(s.expected_cost),
                     f"{level} interval of the cost": (f"{format_money(s.cost_low)}–"
                                                          f"{format_money(s.cost_high)}"),
                     "spread (sd)": format_money(s.cost_sd),
                     "reaches the target": f"{s.reach_probability:.0%}",
                     "rounds held": f"{s.expected_rounds:.1f}"})
    table = html_table(pd.DataFrame(rows)) if rows else ""
    ratios = plan.cost_ratios()
    names = {"one-shot": plan.one_shot, "upper-end": plan.upper_end}
    compare = ("<p>Expected cost of the plan in rounds: " + ", ".join(
        f"{r:.2f}× {esc(names[k].title)}" for k, r in ratios.items()) + ".</p>") if ratios else ""
    if plan.upper_end is None:
        compare += ('<p class="small">The upper end at once is not priced: the interval of the '
                    "samples needed has no upper end.</p>")
    q = plan.to_dict()["samples_needed"]["quantiles"]
    spread = ('<p class="small">Samples needed in all, as the forecast\'s band spreads them: '
              + esc(", ".join(f"{float(k):.0%} quantile {format_count(v)}" for k, v in q.items()))
              + ". Each strategy is replayed on these draws for its expected cost, spread and "
              "chance of reaching the target.</p>")
    return head + rule + table + compare + spread


def _split_block(page: _Page, split: Any, slices: Any) -> str:
    column = getattr(slices, "column", None) or "slice"
    curves = getattr(slices, "curves", {}) or {}
    first = next(iter(curves.values()), None)
    metric = getattr(first, "metric", "error")
    level = format_level(split.level)
    if split.targets:
        lead = (f"Labels to buy per {esc(column)} for its own target "
                f"({esc(format_money(split.budget))} in all).")
    else:
        lead = (f"A budget of {esc(format_money(split.budget))} split across the values of "
                f"{esc(column)}: each part of it goes where the fitted curve falls most per "
                "unit of money, so the last labels bought in each slice that gets any buy the "
                "same fall of the overall error.")
    body = [f"<h3>Per slice ({esc(column)})</h3><p>{lead}</p>"]
    if curves:
        fig = plots.slice_curves_figure(curves, split.fits, split.table, interval=split.level,
                                        column=column)
        body.append(page.figure(
            "slice-curves", fig, f"learning curves per {column} with the purchase marked",
            f"One curve per {column}: that slice's training rows grow while the other slices "
            f"keep all of theirs; the error is measured on that slice's test rows. Markers: "
            f"mean over repeats (thick bar ± one standard error, thin capped bar: exact {level} "
            f"interval of one repeat's test set); lines: the chosen family with its shaded "
            f"{level} band, in the slice's own line style; large outlined marker: the error "
            f"expected after the purchase, with its {level} interval."))
    t = split.table
    view = pd.DataFrame({
        column: [str(v) for v in t["slice"]],
        "share": [f"{v:.0%}" for v in t["share"]],
        "rows now": [format_count(v) for v in t["rows_now"]],
        "label cost": [format_money(v) for v in t["label_cost"]],
        "buy": [format_count(v) if is_finite(v) else MISSING for v in t["labels"]],
        "spend": [format_money(v) for v in t["spend"]],
        "error now": [format_error(v, metric) for v in t["error_now"]],
        "error after": [format_error(v, metric) for v in t["error_after"]],
        f"{level} interval": [format_range(lo, hi, "error", metric)
                              for lo, hi in zip(t["low"], t["high"])],
    })
    body.append(html_table(view))
    for name, e in (("now", split.overall_now), ("after the purchase", split.overall_after)):
        body.append(f"<p>Overall error {name}: <strong>{esc(format_error(e.estimate, metric))}"
                    f"</strong> ({esc(format_interval(e.low, e.high, e.level, 'error', metric))}; "
                    "the slices weighted by their shares of the rows).</p>")
    return "".join(body)


def _cautions_section(page: _Page) -> str:
    body = ['<ul class="caution">' + "".join(f"<li>{esc(c)}</li>" for c in CAUTIONS) + "</ul>"]
    for r in page.results:
        n = field_of(r.answer, "n")
        have = float(r.curve.sizes.max()) if len(r.curve.sizes) else math.nan
        if r.answer is not None and is_finite(n) and is_finite(have) and float(n) > 10 * have:
            body.append(f'<p class="note warn">{esc(r.label)}: the answer is more than ten '
                        "times the largest size measured; measure larger sizes before "
                        "buying labels on it.</p>")
    return "".join(body)


def _metadata_section(page: _Page, created: str, versions: dict) -> str:
    body = [_meta_block(r) for r in page.results]
    body.append("<h3>This report</h3><dl class=\"meta\">"
                + f"<dt>created</dt><dd>{esc(created)}</dd>"
                + "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in versions.items())
                + "</dl>")
    return "".join(body)


def _versions() -> dict:
    import matplotlib
    import scipy
    import sklearn

    from curvefit import __version__

    return {"curvefit": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "scikit-learn": sklearn.__version__,
            "pandas": pd.__version__, "matplotlib": matplotlib.__version__}


def _as_results(obj: Any) -> list:
    """Results as given; a plain `Curve` becomes a result without fits."""
    out = []
    for i, (label, item) in enumerate(as_items(obj)):
        if isinstance(item, Curve):
            out.append(_CurveOnly(label=str(label or model_label(item, i)), curve=item))
        elif hasattr(item, "curve") and hasattr(item, "label"):
            out.append(item)
        else:
            raise InputError(f"cannot report on a {type(item).__name__}; give Curve or ModelResult")
    return out


def _html_page(title: str, sections: list, labels: list, created: str, version: str) -> str:
    nav = "".join(f'<a href="#{a}">{esc(h)}</a>' for a, h, _ in sections)
    content = "".join(f'<section id="{a}"><h2>{esc(h)}</h2>{b}</section>' for a, h, b in sections)
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{esc(title)}</title><style>{CSS}</style></head><body><main>"
            f"<header><h1>{esc(title)}</h1><div class=\"sub\">{len(labels)} model(s): "
            f"{esc(', '.join(labels))} · created {esc(created)} · curvefit {esc(version)}"
            f"</div><nav>{nav}</nav></header>{content}"
            "<footer>Made by curvefit. Statistical estimates from measured learning curves, "
            "not guarantees.</footer></main></body></html>\n")


# --------------------------------------------------------------------------- build
def build_report(results: Any, *, target_error: float | None = None, probe: Any = None,
                 tradeoff: Any = None, purchase: pd.DataFrame | None = None,
                 purchase_note: str | None = None, title: str = "Learning-curve report",
                 interval: float = INTERVAL, figure_dir: str | os.PathLike | None = None,
                 created: str | None = None, buying: Any = None) -> str:
    """Render the report as one self-contained HTML string.

    Parameters
    ----------
    results : ModelResult, Curve, or a list/dict of them
        One entry per model (`curvefit.workflows.analysis.analyse`). Plain curves are
        drawn without fits.
    target_error : float, optional
        The target the answers refer to (drawn on the learning curve).
    probe : CapacityEstimate, optional
        A max-deviation probe result; adds its figure to the capacity section.
    tradeoff : Tradeoff, optional
        Adds the trade-off section.
    purchase : DataFrame, optional
        A label-purchase plan (``plan_purchase``), shown under the answer.
    title : str
    interval : float
        Level the results were computed at, quoted in the text.
    figure_dir : path, optional
        When given, each figure is also written there as PNG and SVG.
    created : str, optional
        Timestamp to print (default: now, UTC).
    buying : BuyingPlan, optional
        A plan in rounds and a split across slices
        (`curvefit.workflows.analysis.plan_buying`): adds the "What to buy" section.

    Returns
    -------
    str
        The HTML document.
    """
    res = order_results(_as_results(results))
    if not res:
        raise InputError("nothing to report: give at least one run")
    created = created or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
    page = _Page(res, target_error, interval, Path(figure_dir) if figure_dir is not None else None)
    versions = _versions()
    sections = [("answer", "The answer", _answer_section(page, purchase, purchase_note)),
                ("curves", "Learning curves", _curves_section(page)),
                ("buying", "What to buy", _buying_section(page, buying)),
                ("ranking", "Curve families", _ranking_section(page)),
                ("capacity", "Capacity", _capacity_section(page, probe)),
                ("tradeoff", "Complexity trade-off", _tradeoff_section(page, tradeoff)),
                ("worst-case", "Worst case against measured", _worst_case_section(page)),
                ("cautions", "Cautions", _cautions_section(page)),
                ("metadata", "Run metadata", _metadata_section(page, created, versions))]
    return _html_page(title, [s for s in sections if s[2] is not None], [r.label for r in res],
                      created, versions["curvefit"])


def figure_dir_for(path: str | os.PathLike) -> Path:
    """Where `write_report` puts the PNG/SVG files: ``report.html`` → ``report_files/``."""
    path = Path(path)
    return path.with_name(path.stem + "_files")


def write_report(path: str | os.PathLike, results: Any, **kwargs) -> Path:
    """Write `build_report` to ``path`` (atomically) and its figures to ``<stem>_files/``.

    Returns the path of the HTML file. The figures are drawn into a temporary folder
    that replaces ``<stem>_files/`` only when all of them are written, so a failure (a
    full disk) leaves the old folder or none, never part of a new one.
    """
    from curvefit.core.jsonio import check_output_path, folder_replaced_whole

    path = check_output_path(path, "report")
    if "figure_dir" in kwargs:  # the caller's own folder
        return write_text_atomic(path, build_report(results, **kwargs), what="report")
    with folder_replaced_whole(figure_dir_for(path), "report's figure folder") as figures:
        text = build_report(results, figure_dir=figures, **kwargs)
    return write_text_atomic(path, text, what="report")
