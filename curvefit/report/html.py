"""The HTML report: one self-contained file a practitioner reads top to bottom.

Layout, in order: the answer (how many labelled samples reach the target, or why the
target is out of reach), the learning curves, the family ranking, capacity, the
complexity trade-off, worst-case bounds against the measured answer, cautions, and the
run metadata. Figures are embedded as base64 PNG data URIs and the CSS is inline, so
the file needs no network, no script and no font from anywhere; `write_report` also
writes each figure as PNG and SVG beside the HTML.

`analyse` is the one place that calls the estimating API (``fit_curve``,
``samples_for``, ``effective_capacity``); `build_report` only renders what it is
given, and skips every section whose results are absent except the curves.

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
from typing import Any, Iterable, Mapping, Sequence

import numpy as np
import pandas as pd

from curvefit.report import plots
from curvefit.core.curve import Curve
from curvefit.core.jsonio import jsonable
from curvefit.core.errors import InputError

INTERVAL = 0.9  # level of the forecast bands and of the answer's interval


@dataclass
class ModelResult:
    """What the report shows for one run (one model): the curve and what was fitted."""

    label: str
    curve: Curve
    fit: Any = None            # CurveFit
    answer: Any = None         # SampleEstimate for the target, when one was asked for
    capacity: Any = None       # CapacityEstimate from the measured gap
    notes: list = field(default_factory=list)   # why a piece is missing, in plain words
    source: str | None = None  # run file it came from


# --------------------------------------------------------------------------- analysis
def _call(fn, notes: list, what: str):
    """Run one API step; a failure becomes a note in the report, not a crash."""
    try:
        return fn()
    except InputError as exc:
        notes.append(f"{what}: {exc}")
    except Exception as exc:  # noqa: BLE001 - any numeric failure is reported, not fatal
        notes.append(f"{what} failed: {type(exc).__name__}: {exc}")
    return None


def analyse(curves: Any, *, target_error: float | None = None, bootstrap: int = 200,
            random_state: int = 0, interval: float = INTERVAL, capacity: bool = True,
            labels: Sequence[str] | None = None, sources: Sequence[str] | None = None
            ) -> list[ModelResult]:
    """Fit each curve, answer the target and estimate capacity from the gap.

    Parameters
    ----------
    curves : Curve, list of Curve, or dict label -> Curve
    target_error : float, optional
        Test error to reach; the answer is ``fit.samples_for(test_error=...)``.
    bootstrap : int
        Bootstrap replicates for the fit intervals.
    random_state : int
        Seed passed to every fit, so the report is reproducible.
    interval : float
        Level of the answer's interval.
    capacity : bool
        Also run ``effective_capacity`` on curves that have a training error.

    Returns
    -------
    list of ModelResult
        One per curve, in the given order. A step that fails leaves its field None
        and a note saying why.
    """
    from curvefit.fitting.engine import fit_curve

    items = plots._as_list(curves)
    results = []
    for i, (label, curve) in enumerate(items):
        if not isinstance(curve, Curve):
            raise InputError(f"expected a Curve, got {type(curve).__name__}")
        label = (labels[i] if labels and i < len(labels) else None) or label \
            or plots.model_label(curve, i)
        res = ModelResult(label=str(label), curve=curve,
                          source=sources[i] if sources and i < len(sources) else None)
        if len(curve.ok_points()) == 0:
            res.notes.append("no cell finished, so nothing could be fitted")
        else:
            res.fit = _call(lambda: fit_curve(curve, on="test", bootstrap=bootstrap,
                                              random_state=random_state),
                            res.notes, "curve fit")
        if res.fit is not None and target_error is not None:
            res.answer = _call(lambda: res.fit.samples_for(test_error=target_error,
                                                           interval=interval),
                               res.notes, "sample size for the target")
        if capacity and len(curve.ok_points()) and curve.has_train:
            from curvefit.capacity.vc_model import effective_capacity

            res.capacity = _call(lambda: effective_capacity(curve, bootstrap=bootstrap,
                                                            random_state=random_state),
                                 res.notes,
                                 "capacity from the gap")
        results.append(res)
    return results


def result_summary(res: ModelResult) -> dict:
    """Plain JSON-ready headline of one model: chosen family, answer, capacity, notes."""
    ans, cap = res.answer, res.capacity
    return jsonable({
        "label": res.label, "source": res.source,
        "best": plots._family_name(_get(res.fit, "best")),
        "answer": None if ans is None else {
            k: _get(ans, k) for k in ("n", "low", "high", "reachable", "message")},
        "capacity": None if cap is None else {
            k: _get(cap, k) for k in ("vc_dim", "low", "high", "level", "method", "above_range")},
        "notes": list(res.notes),
    })


# --------------------------------------------------------------------------- formatting
def esc(value: Any) -> str:
    """HTML-escape anything (quotes too), after turning it into text."""
    return html.escape("" if value is None else str(value), quote=True)


def _finite(v) -> bool:
    return plots._finite(v)


def _is_rate(metric: str | None) -> bool:
    return plots.metric_label(metric).endswith("(0-1)")


def fmt_error(v: Any, metric: str | None = "error") -> str:
    """An error as a percentage for 0-1 error (``0.05`` → ``5.0%``), else 3 significant digits."""
    if not _finite(v):
        return "–"
    v = float(v)
    if _is_rate(metric):
        return f"{100 * v:.2f}%" if abs(v) < 0.01 else f"{100 * v:.1f}%"
    return f"{v:.3g}"


def fmt_capacity(v: Any) -> str:
    """A VC dimension: whole units with separators from 100 up, else three digits."""
    if not _finite(v):
        return "∞" if v == math.inf else "–"
    v = float(v)
    return f"{v:,.0f}" if v >= 100 else f"{v:.3g}"


def fmt_count(v: Any) -> str:
    """A sample count rounded to three significant digits with thousands separators."""
    if not _finite(v):
        return "–"
    v = float(v)
    if v >= 1000:
        digits = int(math.floor(math.log10(v))) - 2
        v = round(v, -digits)
    return f"{int(round(v)):,}"


def _fmt_cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else ""
    if isinstance(v, (int, np.integer)):
        return f"{int(v):,}"
    if isinstance(v, (float, np.floating)):
        if not math.isfinite(float(v)):
            return "–"
        return f"{float(v):.4g}"
    if isinstance(v, Mapping):
        return ", ".join(f"{k}={_fmt_cell(x)}" for k, x in v.items())
    if isinstance(v, (list, tuple, np.ndarray)):
        return ", ".join(_fmt_cell(x) for x in v)
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
        cells = "".join(
            f'<td{_align(row[c])}>{esc(_fmt_cell(row[c]))}</td>' for c in cols)
        body.append(f"<tr{mark}>{cells}</tr>")
    more = (f'<p class="small">{len(df) - max_rows} more rows not shown.</p>'
            if len(df) > max_rows else "")
    return (f'<div class="tablewrap"><table><thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>{more}')


def _img(png: bytes, alt: str, caption: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{esc(alt)}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def _get(obj, name, default=None):
    return plots._get(obj, name, default)


# --------------------------------------------------------------------------- sentences
def answer_sentence(res: ModelResult, target_error: float, interval: float = INTERVAL) -> str:
    """The plain-words answer for one model (escaped HTML)."""
    metric = res.curve.metric
    ans = res.answer
    target = fmt_error(target_error, metric)
    what = "test error" if _is_rate(metric) else f"test {metric}"
    if ans is None:
        why = "; ".join(res.notes) or "no fit was available"
        return f"No answer for {esc(target)} {esc(what)}: {esc(why)}."
    n = _get(ans, "n")
    if bool(_get(ans, "reachable", _finite(n))) and _finite(n):
        lvl = _get(ans, "level", interval) or interval
        lo, hi = _get(ans, "low"), _get(ans, "high")
        span = (f" ({float(lvl):.0%} interval {esc(fmt_count(lo))}–{esc(fmt_count(hi))})"
                if _finite(lo) and _finite(hi) else
                (f" (upper end of the {float(lvl):.0%} interval not bounded; at least "
                 f"{esc(fmt_count(lo))})" if _finite(lo) else ""))
        have = res.curve.sizes.max() if len(res.curve.sizes) else math.nan
        extra = ""
        if _finite(have):
            if float(n) > float(have):
                extra = (f" You measured up to {esc(fmt_count(have))}, so this is an "
                         f"extrapolation by a factor of about {float(n) / float(have):.1f}.")
            else:
                extra = (f" That is within the sizes you measured (up to "
                         f"{esc(fmt_count(have))}).")
        return (f"To reach <strong>{esc(target)}</strong> {esc(what)} you need about "
                f"<strong>{esc(fmt_count(n))} labelled samples</strong>{span}.{extra}")
    msg = _get(ans, "message") or ""
    if msg:
        text = esc(msg)
        if "not reachable" in text:  # the fit's own sentence says it; just emphasise it
            return text.replace("not reachable", "<strong>not reachable</strong>", 1)
        return (f"<strong>{esc(target)}</strong> {esc(what)} is <strong>not reachable</strong> "
                f"by adding labels alone. {text}")
    asym = _get(ans, "asymptote")
    a = _get(asym, "estimate", asym)
    floor = (f" The fitted curve levels off at about {esc(fmt_error(a, metric))}."
             if _finite(a) else "")
    return (f"<strong>{esc(target)}</strong> {esc(what)} is <strong>not reachable</strong> "
            f"with this model by adding labels alone.{floor}")


def _forecast_sentence(res: ModelResult, interval: float) -> str:
    metric = res.curve.metric
    if res.fit is None:
        return f"No forecast: {esc('; '.join(res.notes) or 'no fit was available')}."
    have = float(res.curve.sizes.max())
    parts = []
    for mult in (2, 10):
        n = have * mult
        try:
            p = res.fit.predict(np.array([n]), interval=interval)
        except Exception as exc:  # noqa: BLE001 - say why instead of failing
            return f"No forecast: {esc(exc)}."
        if isinstance(p, pd.DataFrame):
            e, lo, hi = (float(p[c].iloc[0]) if c in p else math.nan
                         for c in ("estimate", "low", "high"))
        else:
            e, lo, hi = (float(_get(p, c, math.nan)) for c in ("estimate", "low", "high"))
        parts.append(f"about <strong>{esc(fmt_error(e, metric))}</strong> at "
                     f"{esc(fmt_count(n))} labelled samples ({interval:.0%} interval "
                     f"{esc(fmt_error(lo, metric))}–{esc(fmt_error(hi, metric))})")
    return "Forecast: " + "; ".join(parts) + "."


def _order(results: list[ModelResult]) -> list[ModelResult]:
    """Best model first: reachable with the fewest labels, then lowest measured error."""

    def key(r: ModelResult):
        n = _get(r.answer, "n")
        reach = bool(_get(r.answer, "reachable", False)) and _finite(n)
        summ_err = math.inf
        ok = r.curve.ok_points()
        if len(ok):
            last = ok[ok["size"] == ok["size"].max()]["test_error"].mean()
            summ_err = float(last)
        return (0 if reach else 1, float(n) if reach else math.inf, summ_err)

    return sorted(results, key=key)


def _purchase_view(plan: pd.DataFrame, metric: str, interval: float) -> pd.DataFrame:
    """The purchase plan with readable units: counts, errors as %, cost, drop per 1,000."""
    view = pd.DataFrame(index=plan.index)
    count = lambda v: f"{int(round(float(v))):,}" if _finite(v) else "–"  # noqa: E731
    if "extra" in plan:
        view["extra labels"] = plan["extra"].map(count)
    if "total_n" in plan:
        view["total labels"] = plan["total_n"].map(count)
    if "test_error" in plan:
        view["expected test error"] = plan["test_error"].map(lambda v: fmt_error(v, metric))
    if "low" in plan and "high" in plan:
        view[f"{interval:.0%} interval"] = [f"{fmt_error(lo, metric)}–{fmt_error(hi, metric)}"
                                            for lo, hi in zip(plan["low"], plan["high"])]
    if "cost" in plan and plan["cost"].notna().any():
        view["cost"] = plan["cost"].map(lambda v: f"{float(v):,.2f}" if _finite(v) else "–")
    if "drop_per_1000" in plan:
        rate = _is_rate(metric)
        view["error drop per 1,000 labels"] = plan["drop_per_1000"].map(
            lambda v: ("–" if not _finite(v) else
                       f"{100 * float(v):.2f} points" if rate else f"{float(v):.3g}"))
    extra = [c for c in plan.columns if c not in
             ("extra", "total_n", "test_error", "low", "high", "cost", "drop_per_1000")]
    for c in extra:
        view[c] = plan[c]
    return view


# --------------------------------------------------------------------------- sections
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
nav a { color:var(--accent); margin-right:14px; text-decoration:none; border-bottom:1px dotted var(--accent); }
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
footer { margin-top:36px; color:var(--muted); font-size:12px; border-top:1px solid var(--line); padding-top:8px; }
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


def _meta_block(res: ModelResult) -> str:
    meta = dict(res.curve.meta or {})
    keys = [k for k in _META_FIRST if k in meta] + sorted(k for k in meta if k not in _META_FIRST)
    rows = [("run file", res.source)] if res.source else []
    ok, failed = len(res.curve.ok_points()), len(res.curve.failed_points())
    sizes = res.curve.points["size"].unique()
    rows.append(("cells", f"{ok} finished, {failed} failed, {len(sizes)} sizes "
                          f"({fmt_count(sizes.min()) if len(sizes) else '–'}–"
                          f"{fmt_count(sizes.max()) if len(sizes) else '–'})"))
    rows += [(k, _meta_value(meta[k])) for k in keys]
    items = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in rows)
    return f"<h3>{esc(res.label)}</h3><dl class=\"meta\">{items}</dl>"


def _curve_table(res: ModelResult) -> str:
    curve = res.curve
    if not len(curve.ok_points()):
        return ""
    s = curve.summary(INTERVAL)
    metric = curve.metric
    rows = pd.DataFrame({
        "size": s["size"].astype(int),
        "repeats": s["n_repeats"].astype(int),
        "failed": s["n_failed"].astype(int),
        "test": [fmt_error(v, metric) for v in s["test_mean"]],
        "± s.e.": [fmt_error(v, metric) for v in s["test_sem"]],
        "test-set interval": [f"{fmt_error(lo, metric)}–{fmt_error(hi, metric)}"
                              if _finite(lo) else "–"
                              for lo, hi in zip(s["test_low"], s["test_high"])],
        "train": [fmt_error(v, metric) for v in s["train_mean"]],
        "gap": [fmt_error(v, metric) for v in s["gap_mean"]],
    })
    heads = {"test-set interval": f"one test set, exact {INTERVAL:.0%}"}
    return html_table(rows, headers=heads)


def _ranking_block(res: ModelResult) -> str:
    fit = res.fit
    out = [f"<h3>{esc(res.label)}</h3>"]
    if fit is None:
        out.append(f'<p class="note">No fit: {esc("; ".join(res.notes) or "not available")}</p>')
        return "".join(out)
    table = _get(fit, "table")
    if isinstance(table, pd.DataFrame) and len(table):
        out.append(html_table(table, columns=["family", "params", "forecast_error", "aicc",
                                              "status", "chosen"],
                              headers={"forecast_error": "forecast error (held-out sizes)",
                                       "aicc": "AICc"},
                              highlight="chosen"))
    best, runner = plots._family_name(_get(fit, "best")), plots._family_name(_get(fit, "runner_up"))
    if best:
        out.append(f"<p>Chosen family: <strong>{esc(best)}</strong>"
                   + (f"; runner-up: {esc(runner)}" if runner else "") + ".</p>")
    for w in _get(fit, "warnings", None) or []:
        out.append(f'<p class="note warn">{esc(w)}</p>')
    return "".join(out)


def _capacity_rows(results: list[ModelResult], probe: Any) -> pd.DataFrame:
    rows = []
    for r in results:
        c = r.capacity
        if c is None:
            continue
        rows.append(_capacity_row(r.label, c))
    if probe is not None:
        rows.append(_capacity_row("probe (max-deviation experiment)", probe))
    return pd.DataFrame(rows)


def _capacity_row(label: str, c: Any) -> dict:
    lvl = _get(c, "level", INTERVAL) or INTERVAL
    d, lo, hi = _get(c, "vc_dim"), _get(c, "low"), _get(c, "high")
    above = bool(_get(c, "above_range", False))
    return {"model": label, "method": _get(c, "method", ""),
            "effective VC dimension": (("≥ " if above else "") + fmt_capacity(d)) if _finite(d) else "–",
            f"{float(lvl):.0%} interval": (f"{fmt_capacity(lo)}–{fmt_capacity(hi)}"
                                            if _finite(lo) and (_finite(hi) or hi == math.inf)
                                            else "–"),
            "note": _get(c, "message", "") or ("above the probed range: a lower bound" if above else "")}


def _gap_lines(res: ModelResult) -> list:
    """The fitted gap curves (VC-shaped s·Φ(n/h) and power law a·n^-b) of a capacity
    estimate, evaluated on a grid from its own fitted parameters."""
    from curvefit.capacity.vc_model import phi

    c = res.capacity
    if c is None or not len(res.curve.sizes):
        return []
    sizes = res.curve.sizes
    grid = np.geomspace(sizes.min(), sizes.max() * 2, 120)
    extra = _get(c, "extra", None) or {}
    lines = []
    h = extra.get("h_fit", _get(c, "vc_dim"))
    s = _get(c, "scale")
    if _finite(h) and _finite(s) and float(h) > 0:
        lines.append((f"VC-shaped fit s·Φ(n/h), h = {fmt_capacity(h)}", grid,
                      float(s) * np.asarray(phi(grid / float(h)), float)))
    a, b = extra.get("power_scale"), _get(_get(c, "exponent"), "estimate")
    if _finite(a) and _finite(b):
        lines.append((f"power-law fit a·n^-b, b = {float(b):.2f}", grid,
                      float(a) * grid ** (-float(b))))
    return lines


def _worst_case(results: list[ModelResult], probe: Any, target_error: float | None,
                interval: float) -> tuple[list, str] | None:
    """Rows for the worst-case figure, for the first (best) model with a capacity."""
    if target_error is None:
        return None
    try:
        from curvefit import bounds
    except ImportError:
        return None
    for r in results:
        cap = probe if probe is not None else r.capacity
        d = _get(cap, "vc_dim")
        if not _finite(d) or float(d) <= 0 or r.answer is None:
            continue
        asym = _get(_get(r.answer, "asymptote"), "estimate", _get(r.answer, "asymptote"))
        floor = float(asym) if _finite(asym) else 0.0
        eps = max(float(target_error) - max(floor, 0.0), 0.005)
        delta = round(1.0 - interval, 6)
        rows = []
        try:
            rows.append({"label": f"VC bound (d={fmt_capacity(d)}, ε={eps:.3g}, δ={delta:g})",
                         "n": float(bounds.vc_sample_size(int(math.ceil(float(d))), eps, delta)),
                         "kind": "bound"})
        except Exception:  # noqa: BLE001 - skip a bound that cannot be computed
            pass
        rule = getattr(bounds, "rule_of_thumb_samples", None)
        rows.append({"label": "rule of thumb, 10 × d",
                     "n": float(rule(int(math.ceil(float(d))))) if callable(rule) else 10.0 * float(d),
                     "kind": "rule"})
        n = _get(r.answer, "n")
        if bool(_get(r.answer, "reachable", False)) and _finite(n):
            rows.append({"label": f"measured: {r.label}", "n": float(n),
                         "low": _get(r.answer, "low"), "high": _get(r.answer, "high"),
                         "kind": "measured"})
        text = (f"For <strong>{esc(r.label)}</strong> with effective capacity d ≈ "
                f"{esc(fmt_capacity(d))} ({esc(_get(cap, 'method', 'estimate'))}): the VC "
                f"bound asks for the gap between training and test error to be at most "
                f"ε = {esc(f'{eps:.3g}')} (the target minus the fitted floor) with "
                f"probability {1 - delta:.0%}. It holds for every distribution, so it is "
                f"usually one to two orders of magnitude above what a real problem needs; "
                f"the rule of thumb (common practice) and the measured answer are the "
                f"numbers to plan with.")
        return rows, text
    return None


# --------------------------------------------------------------------------- build
def _as_results(obj: Any) -> list[ModelResult]:
    if isinstance(obj, ModelResult):
        return [obj]
    out = []
    for i, (label, item) in enumerate(plots._as_list(obj)):
        if isinstance(item, ModelResult):
            out.append(item)
        elif isinstance(item, Curve):
            out.append(ModelResult(label=str(label or plots.model_label(item, i)), curve=item))
        else:
            raise InputError(f"cannot report on a {type(item).__name__}; give Curve or ModelResult")
    return out


def _versions() -> dict:
    import matplotlib
    import scipy
    import sklearn

    from curvefit import __version__

    return {"curvefit": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "scikit-learn": sklearn.__version__,
            "pandas": pd.__version__, "matplotlib": matplotlib.__version__}


def build_report(results: Any, *, target_error: float | None = None, probe: Any = None,
                 tradeoff: Any = None, purchase: pd.DataFrame | None = None,
                 purchase_note: str | None = None, title: str = "Learning-curve report",
                 interval: float = INTERVAL, figure_dir: str | os.PathLike | None = None,
                 created: str | None = None) -> str:
    """Render the report as one self-contained HTML string.

    Parameters
    ----------
    results : ModelResult, Curve, or a list/dict of them
        One entry per model. Plain curves are drawn without fits.
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
        Level quoted for forecasts.
    figure_dir : path, optional
        When given, each figure is also written there as PNG and SVG.
    created : str, optional
        Timestamp to print (default: now, UTC).

    Returns
    -------
    str
        The HTML document.
    """
    res = _order(_as_results(results))
    if not res:
        raise InputError("nothing to report: give at least one run")
    created = created or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S UTC")
    figs: list[tuple[str, Any]] = []

    def figure(stem: str, fig, alt: str, caption: str) -> str:
        png = plots.figure_bytes(fig, "png")
        if figure_dir is not None:
            plots.save_figure(fig, Path(figure_dir) / stem)
        figs.append((stem, fig))
        return _img(png, alt, caption)

    sections: list[tuple[str, str, str]] = []  # (anchor, heading, body)

    # --- the answer
    body = []
    if target_error is not None:
        body.append(f'<p class="lead"><span class="model">{esc(res[0].label)}</span>: '
                    f"{answer_sentence(res[0], target_error, interval)}</p>")
        if len(res) > 1:
            body.append("<ul>" + "".join(
                f'<li><span class="model">{esc(r.label)}</span>: '
                f"{answer_sentence(r, target_error, interval)}</li>" for r in res[1:]) + "</ul>")
    else:
        body.append('<p class="lead">No target was given, so here is what more labels are '
                    "expected to buy.</p><ul>" + "".join(
                        f'<li><span class="model">{esc(r.label)}</span>: '
                        f"{_forecast_sentence(r, interval)}</li>" for r in res) + "</ul>"
                    '<p class="small">Give a target (<code>--target-error</code>) for a '
                    "sample size with an interval.</p>")
    if purchase is not None and len(purchase):
        body.append(f"<h3>Buying more labels ({esc(res[0].label)})</h3>")
        if purchase_note:
            body.append(f"<p>{esc(purchase_note)}</p>")
        body.append(html_table(_purchase_view(purchase, res[0].curve.metric, interval)))
    shown = []
    for r in res:
        for w in _get(r.answer, "warnings", None) or ():
            if w not in shown:
                shown.append(w)
                body.append(f'<p class="note warn">{esc(r.label)}: {esc(w)}</p>')
    failed = sum(len(r.curve.failed_points()) for r in res)
    if failed:
        body.append(f'<p class="note warn">{failed} cell(s) failed and were left out of the '
                    "fits; their messages are in the run files.</p>")
    sections.append(("answer", "The answer", f'<div class="answer">{"".join(body)}</div>'))

    # --- curves
    curves = {r.label: r.curve for r in res}
    fig = plots.learning_curve_figure(
        curves, {r.label: r.fit for r in res}, target_error=target_error,
        answers={r.label: r.answer for r in res}, interval=interval)
    body = [figure("learning-curve", fig, "learning curves: error against labelled samples",
                   f"Filled markers: mean test error over repeats (thick bar ± one standard "
                   f"error); thin capped bars: exact {INTERVAL:.0%} interval of one repeat's "
                   f"test set; hollow markers: training error. Lines: the chosen family "
                   f"(solid, shaded {interval:.0%} band) and the runner-up (dashed), "
                   f"extrapolated.")]
    for r in res:
        body.append(f"<h3>{esc(r.label)}</h3>"
                    f'<p class="note">Split: {esc(plots.split_label(r.curve))}.</p>'
                    f"{_curve_table(r)}")
        for n in r.notes:
            body.append(f'<p class="note">{esc(n)}</p>')
    sections.append(("curves", "Learning curves", "".join(body)))

    # --- family ranking
    if any(r.fit is not None for r in res):
        body = ["<p>Each family was fitted to the measured test error; the one with the "
                "smallest error when forecasting the largest sizes from the smaller ones is "
                "chosen (marked).</p>"]
        body += [_ranking_block(r) for r in res]
        sections.append(("ranking", "Curve families", "".join(body)))

    # --- capacity
    cap_rows = _capacity_rows(res, probe)
    if len(cap_rows) or any(r.curve.has_train for r in res if len(r.curve.ok_points())):
        body = []
        if any(r.curve.has_train for r in res if len(r.curve.ok_points())):
            fig = plots.gap_figure(curves, {r.label: _gap_lines(r) for r in res})
            body.append(figure("gap", fig, "generalization gap against labelled samples",
                               "Test minus training error per size (± one standard error), "
                               "with the fitted gap curves where available."))
        if len(cap_rows):
            body.append(html_table(cap_rows))
            body.append('<p class="small">Effective capacity is the VC dimension of a learner '
                        "that would show the same gap; it is an estimate, and a learner whose "
                        "capacity exceeds the probed range gets only a lower bound.</p>")
        if probe is not None:
            fig = plots.probe_figure(probe)
            body.append(figure("probe", fig, "capacity probe: max deviation against n",
                               "Max-deviation experiment (Vapnik, Levin and LeCun 1994): "
                               "measured ξ(n) with the fitted Φ(n/h) and the interval of h."))
        seen = []
        for r in res:  # notes shared by every model are shown once
            for n in _get(r.capacity, "notes", None) or []:
                if n not in seen:
                    seen.append(n)
        body += [f'<p class="note">{esc(n)}</p>' for n in seen]
        sections.append(("capacity", "Capacity", "".join(body)))

    # --- trade-off
    if tradeoff is not None:
        fig = plots.tradeoff_figure(tradeoff)
        body = [figure("tradeoff", fig, "train and test error against model complexity",
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
        sections.append(("tradeoff", "Complexity trade-off", "".join(body)))

    # --- worst case
    wc = _worst_case(res, probe, target_error, interval)
    if wc:
        rows, text = wc
        have = max((float(r.curve.sizes.max()) for r in res if len(r.curve.sizes)), default=None)
        fig = plots.worst_case_figure(rows, measured_max=have)
        body = [f"<p>{text}</p>",
                figure("worst-case", fig, "worst-case sample sizes against the measured answer",
                       "Sample sizes on a log scale: the distribution-free VC bound, the "
                       "10 × d rule of thumb, and the answer read from the learning curve "
                       "(with its interval).")]
        sections.append(("worst-case", "Worst case against measured", "".join(body)))

    # --- cautions
    body = ['<ul class="caution">' + "".join(f"<li>{esc(c)}</li>" for c in CAUTIONS) + "</ul>"]
    for r in res:
        ans = r.answer
        have = r.curve.sizes.max() if len(r.curve.sizes) else math.nan
        n = _get(ans, "n")
        if ans is not None and _finite(n) and _finite(have) and float(n) > 10 * float(have):
            body.append(f'<p class="note warn">{esc(r.label)}: the answer is more than ten '
                        "times the largest size measured; measure larger sizes before "
                        "buying labels on it.</p>")
    sections.append(("cautions", "Cautions", "".join(body)))

    # --- metadata
    body = [_meta_block(r) for r in res]
    versions = _versions()
    body.append("<h3>This report</h3><dl class=\"meta\">"
                + f"<dt>created</dt><dd>{esc(created)}</dd>"
                + "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in versions.items())
                + "</dl>")
    sections.append(("metadata", "Run metadata", "".join(body)))

    nav = "".join(f'<a href="#{a}">{esc(h)}</a>' for a, h, _ in sections)
    models = ", ".join(r.label for r in res)
    content = "".join(f'<section id="{a}"><h2>{esc(h)}</h2>{b}</section>'
                      for a, h, b in sections)
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{esc(title)}</title><style>{CSS}</style></head><body><main>"
            f"<header><h1>{esc(title)}</h1><div class=\"sub\">{len(res)} model(s): "
            f"{esc(models)} · created {esc(created)} · curvefit {esc(versions['curvefit'])}"
            f"</div><nav>{nav}</nav></header>{content}"
            "<footer>Made by curvefit. Statistical estimates from measured learning curves, "
            "not guarantees.</footer></main></body></html>\n")


def figure_dir_for(path: str | os.PathLike) -> Path:
    """Where `write_report` puts the PNG/SVG files: ``report.html`` → ``report_files/``."""
    path = Path(path)
    return path.with_name(path.stem + "_files")


def write_report(path: str | os.PathLike, results: Any, **kwargs) -> Path:
    """Write `build_report` to ``path`` (atomically) and its figures to ``<stem>_files/``.

    Returns the path of the HTML file.
    """
    path = Path(path)
    if path.exists() and path.is_dir():
        raise InputError(f"{path} is a directory; give a file name such as {path / 'report.html'}")
    if not path.parent.exists():
        raise InputError(f"folder {path.parent} does not exist; create it or choose another --out")
    kwargs.setdefault("figure_dir", figure_dir_for(path))
    page = build_report(results, **kwargs)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(page, encoding="utf-8")
    os.replace(tmp, path)
    return path
