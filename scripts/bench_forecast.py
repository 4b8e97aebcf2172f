"""Benchmark: how honest are curvefit's forecasts? One protocol on the stored corpus.

Corpus mode (default) — every curve in corpus/curves/ (one per data set × model):

* the curve is cut: only the sizes up to 1/4 and, separately, up to 1/10 of the pool are
  fitted (whatever sizes were measured there; at least 4, else the cut is skipped);
* (a) forecasts: the fit predicts the error at the full pool and at the measured sizes
  nearest 2×, 4× and 10× the largest fitted size (within a factor 1.3, at most the
  pool); each is scored against the mean measured there over all repeats (and, for
  generated tasks, against the true error): absolute error, and whether the 90%
  interval of ``fit.predict`` covers it (a miss is "optimistic" when the reference lies
  above the interval);
* (b) samples needed: the targets are the full curve's means at those same sizes, kept
  when they lie below every fitted mean; the true n is where the full curve first
  reaches the target (linear in ln n between sizes, as the engine interpolates). Scored:
  whether the 90% interval of ``fit.samples_for`` covers the true n, and
  |ln(n_answer / n_true)|;
* baselines, fitted to the same points: an unweighted power-law-with-floor fit
  (``families="power-law-floor", weights="none", bootstrap=0``) and the last measured
  value (the mean at the largest fitted size; it never reaches a lower target);
* what the scores can resolve (``resolution``): the true n read again with each size's
  repeats drawn again, the exact population curve of the generated tasks answering the
  same targets, and the MAE ratios with a 90% interval over data sets drawn again.

Each curve is scored on its own points only. Nothing here is tuned; a later calibration
must be fitted with `leave_one_dataset_out`, so that every data set is scored by a
calibration that never saw any of its curves.

``--simulate`` — two simulations with a known truth:

(i) error = 0.05 + 2·n^−0.5 with binomial test noise (1,000 test rows drawn afresh for
    every repeat, which the curve's metadata says: ``LAW_META``), 5 repeats, 8
    geometric sizes 50–2,000, ``--sim-datasets`` (150) data sets: coverage of the 90%
    band at 2×, 10×, 40× the largest size, of the floor's interval, and the
    samples-needed interval for the errors at 2× and 10× (true n 4,000 and 20,000);
(ii) through the real runner: logistic regression (``cf.measure``) on x ~ N(0, I_5),
    y = 1[beta·x > 0] with 10% of labels flipped (so the lowest reachable error is
    exactly 0.10); pool 2,000, 1,000 test rows, the
    same sizes and repeats, ``--runner-datasets`` (40) data sets. The true error of one
    fitted linear rule is exact (a one-dimensional integral over the bivariate normal
    of (beta·x, w·x)); the true curve at n is its mean over many fresh training samples
    of n rows, so coverage and samples-needed ratios are against the exact curve.

Everything is printed as markdown tables (ready for the README) and written to
``corpus/results/<label>-*.csv`` / ``.md``.

Run::

    .venv/bin/python scripts/bench_forecast.py                 # corpus, ~10 min on 2 cores
    .venv/bin/python scripts/bench_forecast.py --simulate      # both simulations
    .venv/bin/python scripts/bench_forecast.py --only iris,wine --bootstrap 100
    .venv/bin/python scripts/bench_forecast.py --cuts 1/4 --bootstrap 0   # point forecasts only
    .venv/bin/python scripts/bench_forecast.py --rescore --label calibrated  # tables again, no fits
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import curvefit as cf  # noqa: E402

LEVEL = 0.9
CUTS = (("1/4", 0.25), ("1/10", 0.10))
HORIZONS = (2, 4, 10)
HORIZON_TOLERANCE = 1.3     # a measured size counts as k× when within this factor of it
MIN_FIT_SIZES = 4
CURVE_COLUMNS = ["size", "repeat", "train_error", "test_error", "n_test", "status"]


# ====================================================================== corpus
def load_corpus(path: Path | str = ROOT / "corpus") -> tuple[pd.DataFrame, dict]:
    """All stored curves as one table, and the index."""
    path = Path(path)
    files = sorted((path / "curves").glob("*.csv.gz"))
    if not files:
        raise SystemExit(f"no curves in {path / 'curves'}; run scripts/build_corpus.py first")
    points = pd.concat([pd.read_csv(f) for f in files], ignore_index=True)
    index = json.loads((path / "index.json").read_text())
    return points, index


def curve_groups(points: pd.DataFrame):
    """(dataset, model) -> rows of that curve, in a stable order."""
    return points.groupby(["dataset", "model"], sort=True)


def leave_one_dataset_out(points: pd.DataFrame):
    """Yield (dataset, rows of all other data sets, rows of this one): fit any
    calibration on the first, score it on the second."""
    for name in sorted(points["dataset"].unique()):
        yield name, points[points["dataset"] != name], points[points["dataset"] == name]


def as_curve(rows: pd.DataFrame) -> "cf.Curve":
    """The stored curve as a run would give it: the metric, and the training pool and test
    rows the repeats split (so the fresh-data variance sees how much they share)."""
    meta = {"metric": str(rows["metric"].iloc[0]), "dataset": str(rows["dataset"].iloc[0]),
            "model": str(rows["model"].iloc[0]), "n_pool": int(rows["pool"].iloc[0]),
            "n_test": int(rows["n_test"].median())}
    columns = CURVE_COLUMNS + [c for c in ("baseline_error",) if c in rows]
    return cf.Curve.from_table(rows[columns].reset_index(drop=True), meta=meta)


def crossing(sizes, values, target: float) -> float:
    """First size where ``values`` reach ``target`` (linear in ln n between sizes)."""
    sizes, values = np.asarray(sizes, float), np.asarray(values, float)
    below = np.nonzero(values <= target)[0]
    if not len(below):
        return math.inf
    i = int(below[0])
    if i == 0:
        return float(sizes[0])
    v0, v1 = values[i - 1], values[i]
    frac = min(max((v0 - target) / (v0 - v1), 0.0), 1.0) if v0 != v1 else 1.0
    return float(math.exp(math.log(sizes[i - 1]) + frac * math.log(sizes[i] / sizes[i - 1])))


def _nearest(sizes: np.ndarray, n: float) -> float | None:
    s = sizes[np.argmin(np.abs(np.log(sizes / n)))]
    return float(s) if abs(math.log(s / n)) <= math.log(HORIZON_TOLERANCE) else None


def predict_at(fit, n: float, level: float = LEVEL) -> tuple[float, float, float]:
    """(estimate, low, high) of ``fit.predict`` at one size (asked as a one-row table)."""
    row = fit.predict(np.array([float(n)]), interval=level).iloc[0]
    return float(row["estimate"]), float(row["low"]), float(row["high"])


def _plain_prediction(plain, n: float) -> float:
    try:
        return float(plain.predict_family("power-law-floor", [n])[0])
    except Exception:  # the family failed: what the fit chose instead (last value)
        return predict_at(plain, n)[0]


def _side(ref: float, low: float, high: float) -> str:
    if math.isnan(low) or math.isnan(high):
        return "no interval"
    if ref > high:
        return "above"
    if ref < low:
        return "below"
    return "inside"


def cut_sizes(sizes: np.ndarray, pool: float, cuts=CUTS):
    """(cut, the measured sizes up to it) for each cut that leaves enough sizes to fit."""
    for cut, frac in cuts:
        fitted = sizes[sizes <= frac * pool]
        if len(fitted) >= MIN_FIT_SIZES:
            yield cut, fitted


def evaluate_curve(rows: pd.DataFrame, bootstrap: int = 500, seed: int = 0, cuts=CUTS):
    """Score one stored curve under the cuts (both by default); returns (forecast rows,
    samples rows)."""
    ok = rows[(rows["status"] == "ok") & np.isfinite(rows["test_error"])]
    means = ok.groupby("size")["test_error"].mean()
    sizes = means.index.to_numpy(dtype=float)
    pool = float(rows["pool"].iloc[0])
    has_truth = "true_error" in rows and rows["true_error"].notna().any()
    truth = ok.groupby("size")["true_error"].mean() if has_truth else None
    info = {"dataset": rows["dataset"].iloc[0], "model": rows["model"].iloc[0],
            "task": rows["task"].iloc[0], "source": rows["source"].iloc[0], "pool": int(pool)}
    forecasts, answers = [], []
    curve = as_curve(rows)
    for cut, fitted_sizes in cut_sizes(sizes, pool, cuts):
        n_fit = float(fitted_sizes.max())
        sub = cf.Curve(curve.points[curve.points["size"] <= n_fit], dict(curve.meta))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            choice = cf.fit_curve(sub, bootstrap=bootstrap, random_state=seed)
            plain = cf.fit_curve(sub, families="power-law-floor", weights="none", bootstrap=0)
        last = float(means.loc[n_fit])
        # ---- (a) forecasts
        points = [("pool", pool)]
        for k in HORIZONS:
            s = _nearest(sizes, k * n_fit)
            if s is not None and n_fit < s <= pool:
                points.append((f"{k}x", s))
        for horizon, s in points:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                estimate, low, high = predict_at(choice, s)
            measured = float(means.loc[s])
            row = dict(info, cut=cut, n_fit=int(n_fit), fit_sizes=len(fitted_sizes),
                       horizon=horizon, size=int(s), ratio=s / n_fit, measured=measured,
                       truth=float(truth.loc[s]) if has_truth else math.nan,
                       family=choice.best, estimate=estimate, low=low, high=high,
                       power_law_floor=_plain_prediction(plain, s), last_value=last)
            row["covered"] = low <= measured <= high
            row["side"] = _side(measured, low, high)
            if has_truth:
                row["covered_truth"] = low <= row["truth"] <= high
                row["side_truth"] = _side(row["truth"], low, high)
            forecasts.append(row)
        # ---- (b) samples needed
        references = [("measured", means)] + ([("truth", truth)] if has_truth else [])
        for ref_name, ref in references:
            for k, target, n_true in targets(ref, means, n_fit, pool):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    ans = choice.samples_for(test_error=target, interval=LEVEL)
                    base = plain.samples_for(test_error=target, interval=LEVEL)
                answers.append(dict(
                    info, cut=cut, n_fit=int(n_fit), reference=ref_name, horizon=f"{k}x",
                    target=target, n_true=n_true, n=ans.n, low=ans.low, high=ans.high,
                    covered=bool(ans.low <= n_true <= ans.high),
                    side=_side(n_true, ans.low, ans.high),
                    ln_ratio=_ln_ratio(ans.n, n_true), plf_n=base.n,
                    plf_ln_ratio=_ln_ratio(base.n, n_true)))
    return forecasts, answers


def targets(ref: pd.Series, means: pd.Series, n_fit: float, pool: float):
    """The samples-needed targets of one curve-cut: (k, target, n_true) for the reference
    curve's value at the measured size nearest k× ``n_fit`` (at most the pool), kept when
    it lies below every fitted value of the reference and of the measured ``means``, with
    the size where the reference first reaches it beyond ``n_fit``."""
    ref_sizes, ref_vals = ref.index.to_numpy(float), ref.to_numpy(float)
    sizes = means.index.to_numpy(float)
    floor_in_fit = float(np.min(ref_vals[ref_sizes <= n_fit]))
    fitted_floor = float(means[means.index <= n_fit].min())
    for k in HORIZONS:
        s = _nearest(sizes, k * n_fit)
        if s is None or not (n_fit < s <= pool):
            continue
        target = float(ref.loc[s])
        if not (target < floor_in_fit and target < fitted_floor):
            continue
        n_true = crossing(ref_sizes, ref_vals, target)
        if n_true > n_fit and math.isfinite(n_true):
            yield k, target, n_true


def _ln_ratio(n: float, n_true: float) -> float:
    if not (n > 0):
        return math.nan
    return math.log(n / n_true) if math.isfinite(n) else math.inf


def chosen_cuts(text: str):
    """The cuts named in ``--cuts`` (``1/4``, ``1/10``), in the order of ``CUTS``."""
    names = {c.strip() for c in text.split(",") if c.strip()}
    unknown = names - {name for name, _ in CUTS}
    if unknown:
        raise SystemExit(f"unknown cut {', '.join(sorted(unknown))}; known: "
                         f"{', '.join(name for name, _ in CUTS)}")
    return tuple((name, frac) for name, frac in CUTS if name in names)


# ====================================================================== summaries
def _pct(x) -> str:
    x = pd.Series(x, dtype=float).dropna()
    return f"{100 * x.mean():.0f}%" if len(x) else "–"


def _num(x, digits=3) -> str:
    if x is None or math.isnan(x):
        return "–"
    return f"{x:.{digits}g}" if math.isfinite(x) else ("∞" if x > 0 else "−∞")


def markdown(df: pd.DataFrame) -> str:
    cols = list(df.columns)
    lines = ["| " + " | ".join(map(str, cols)) + " |",
             "|" + "|".join("---" if i == 0 else "---:" for i in range(len(cols))) + "|"]
    for _, r in df.iterrows():
        lines.append("| " + " | ".join(str(r[c]) for c in cols) + " |")
    return "\n".join(lines)


def _optimistic(side: pd.Series) -> str:
    """Share of misses where the reference lies above the interval (too optimistic)."""
    miss = side[side.isin(["above", "below"])]
    return f"{(miss == 'above').sum()}/{len(miss)}" if len(miss) else "0/0"


def summarise(forecasts: pd.DataFrame, answers: pd.DataFrame,
              points: pd.DataFrame | None = None) -> dict[str, pd.DataFrame]:
    """The tables of the report (markdown-ready strings in cells); with the corpus
    ``points``, also what the scores can resolve (`resolution`)."""
    out = {}
    # -- headline per cut (and task)
    rows = []
    groups = [("all", forecasts)] + [(t, g) for t, g in forecasts.groupby("task")]
    for cut, _ in CUTS:
        for task, g in groups:
            g = g[g["cut"] == cut]
            at_pool = g[g["horizon"] == "pool"]
            if at_pool.empty:
                continue
            err = lambda col: float(np.mean(np.abs(at_pool[col] - at_pool["measured"])))  # noqa: E731
            mae, mae_plf, mae_last = err("estimate"), err("power_law_floor"), err("last_value")
            a = answers[(answers["cut"] == cut) & (answers["reference"] == "measured")]
            if task != "all":
                a = a[a["task"] == task]
            row = {"cut": cut, "task": task, "curves": len(at_pool),
                   "MAE at pool": _num(mae), "ratio to power-law-floor": _num(mae / mae_plf, 2),
                   "ratio to last value": _num(mae / mae_last, 2),
                   "coverage at pool": _pct(at_pool["covered"])}
            for k in HORIZONS:
                h = g[g["horizon"] == f"{k}x"]
                row[f"coverage {k}×"] = f"{_pct(h['covered'])} ({len(h)})"
            row["misses above"] = _optimistic(g["side"])
            row["samples-needed coverage"] = f"{_pct(a['covered'])} ({len(a)})"
            row["median abs ln ratio"] = _num(float(np.median(np.abs(a["ln_ratio"]))), 2) \
                if len(a) else "–"
            row["power-law-floor median abs ln ratio"] = _num(
                float(np.median(np.abs(a["plf_ln_ratio"]))), 2) if len(a) else "–"
            row["median n/n_true"] = _num(float(np.exp(np.median(a["ln_ratio"]))), 2) \
                if len(a) else "–"
            rows.append(row)
    out["headline"] = pd.DataFrame(rows)
    # -- absolute error by horizon
    rows = []
    for cut, _ in CUTS:
        for h in ["pool"] + [f"{k}x" for k in HORIZONS]:
            g = forecasts[(forecasts["cut"] == cut) & (forecasts["horizon"] == h)]
            if g.empty:
                continue
            err = lambda col: float(np.mean(np.abs(g[col] - g["measured"])))  # noqa: E731
            mae = err("estimate")
            rows.append({"cut": cut, "horizon": h.replace("x", "×"), "forecasts": len(g),
                         "MAE curvefit": _num(mae), "MAE power-law-floor": _num(err("power_law_floor")),
                         "MAE last value": _num(err("last_value")),
                         "ratio to power-law-floor": _num(mae / err("power_law_floor"), 2),
                         "ratio to last value": _num(mae / err("last_value"), 2),
                         "coverage": _pct(g["covered"]), "misses above": _optimistic(g["side"])})
    out["by horizon"] = pd.DataFrame(rows)
    # -- coverage per model type (both cuts together)
    rows = []
    for model, g in forecasts.groupby("model"):
        a = answers[(answers["model"] == model) & (answers["reference"] == "measured")]
        row = {"model": model, "fits (curve × cut)": g[["dataset", "cut"]].drop_duplicates().shape[0],
               "coverage at pool": _pct(g.loc[g["horizon"] == "pool", "covered"])}
        for k in HORIZONS:
            h = g[g["horizon"] == f"{k}x"]
            row[f"coverage {k}×"] = f"{_pct(h['covered'])} ({len(h)})"
        row["misses above"] = _optimistic(g["side"])
        row["samples-needed coverage"] = f"{_pct(a['covered'])} ({len(a)})"
        row["median abs ln ratio"] = _num(float(np.median(np.abs(a["ln_ratio"]))), 2) \
            if len(a) else "–"
        rows.append(row)
    out["per model"] = pd.DataFrame(rows)
    # -- generated tasks against the true error
    gen = forecasts[forecasts["source"] == "generated"]
    if not gen.empty and "covered_truth" in gen:
        rows = []
        for cut, _ in CUTS:
            g = gen[gen["cut"] == cut]
            if g.empty:
                continue
            a = answers[(answers["cut"] == cut) & (answers["reference"] == "truth")]
            row = {"cut": cut, "curves": g[["dataset", "model"]].drop_duplicates().shape[0]}
            for h in ["pool"] + [f"{k}x" for k in HORIZONS]:
                hh = g[g["horizon"] == h]
                row[f"truth covered {h.replace('x', '×')}"] = f"{_pct(hh['covered_truth'])} ({len(hh)})"
            row["misses above"] = _optimistic(g["side_truth"])
            pool_rows = g[g["horizon"] == "pool"]
            row["MAE vs truth at pool"] = _num(float(np.mean(np.abs(pool_rows["estimate"]
                                                                 - pool_rows["truth"]))))
            row["samples-needed coverage"] = f"{_pct(a['covered'])} ({len(a)})"
            row["median n/n_true"] = _num(float(np.exp(np.median(a["ln_ratio"]))), 2) \
                if len(a) else "–"
            rows.append(row)
        out["generated vs truth"] = pd.DataFrame(rows)
    if points is not None:
        out["what the scores can resolve"] = resolution(points, forecasts, answers)
    return out


# ====================================================================== resolution
def _redrawn_means(rows: pd.DataFrame, draws: int, rng: np.random.Generator) -> np.ndarray:
    """``draws`` × sizes: each size's mean test error over its repeats drawn again with
    replacement (the measured curve as another set of repeats might have given it)."""
    cells = [g.to_numpy(float) for _, g in rows.groupby("size")["test_error"]]
    return np.column_stack([c[rng.integers(0, len(c), (draws, len(c)))].mean(axis=1)
                            for c in cells])


def _median_abs(x) -> float:
    x = np.abs(np.asarray(x, float))
    return float(np.median(x)) if len(x) else math.nan


def _ratio_interval(pool_rows: pd.DataFrame, baseline: str, draws: int,
                    rng: np.random.Generator) -> str:
    """MAE ÷ a baseline's MAE at the pool, with a 90% interval over data sets drawn with
    replacement (curves of one data set share its rows, so they are drawn together)."""
    err = pool_rows.assign(ours=(pool_rows["estimate"] - pool_rows["measured"]).abs(),
                           theirs=(pool_rows[baseline] - pool_rows["measured"]).abs())
    per_set = err.groupby("dataset")[["ours", "theirs"]].sum().to_numpy()
    pick = rng.integers(0, len(per_set), (draws, len(per_set)))
    sums = per_set[pick].sum(axis=1)
    low, high = np.quantile(sums[:, 0] / sums[:, 1], [0.05, 0.95])
    point = per_set[:, 0].sum() / per_set[:, 1].sum()
    return f"{_num(point)} ({_num(low, 2)}–{_num(high, 2)})"


def resolution(points: pd.DataFrame, forecasts: pd.DataFrame, answers: pd.DataFrame,
               draws: int = 200, seed: int = 0, cuts=CUTS) -> pd.DataFrame:
    """How finely the corpus scores can tell forecasts apart: one row per measure, one
    column per cut.

    * the true n read again off the same curve with each size's repeats drawn again with
      replacement: the median (over targets) of the median |ln(n_redrawn / n_true)| is the
      noise of the reference itself;
    * on the generated tasks, the exact population curve (each size's mean true error,
      measured on a large fresh sample) answering the measured targets, and the whole
      measured curve (every size, the cut ignored) answering the true-error targets: what
      a forecast that knew either curve would score, beside curvefit's scores on the same
      targets;
    * the MAE ratios at the pool with a 90% interval over data sets drawn with replacement.
    """
    rng = np.random.default_rng(seed)
    redrawn, exact, whole = [], [], []
    for (dataset, model), rows in curve_groups(points):
        ok = rows[(rows["status"] == "ok") & np.isfinite(rows["test_error"])]
        means = ok.groupby("size")["test_error"].mean()
        sizes, pool = means.index.to_numpy(float), float(rows["pool"].iloc[0])
        again = _redrawn_means(ok, draws, rng)
        truth = (ok.groupby("size")["true_error"].mean()
                 if "true_error" in ok and ok["true_error"].notna().all() else None)
        for cut, fitted in cut_sizes(sizes, pool, cuts):
            n_fit = float(fitted.max())
            for k, target, n_true in targets(means, means, n_fit, pool):
                key = dict(dataset=dataset, model=model, cut=cut, horizon=f"{k}x")
                redrawn.append(dict(key, ln=_median_abs(
                    [_ln_ratio(crossing(sizes, m, target), n_true) for m in again])))
                if truth is not None:
                    n_exact = crossing(truth.index.to_numpy(float), truth.to_numpy(float), target)
                    exact.append(dict(key, ln=_ln_ratio(n_exact, n_true)))
            for k, target, n_true in (targets(truth, means, n_fit, pool)
                                      if truth is not None else ()):
                whole.append(dict(dataset=dataset, model=model, cut=cut, horizon=f"{k}x",
                                  ln=_ln_ratio(crossing(sizes, means.to_numpy(), target), n_true)))
    columns = ["dataset", "model", "cut", "horizon", "ln"]
    redrawn, exact, whole = (pd.DataFrame(x, columns=columns) for x in (redrawn, exact, whole))
    keys = ["dataset", "model", "horizon"]
    table = {}
    for cut, _ in cuts:
        a = answers[answers["cut"] == cut]
        measured, true = a[a["reference"] == "measured"], a[a["reference"] == "truth"]
        if measured.empty:
            continue
        gen = measured.merge(exact.loc[exact["cut"] == cut, keys + ["ln"]], on=keys)
        gen_true = true.merge(whole.loc[whole["cut"] == cut, keys + ["ln"]], on=keys)
        pool_rows = forecasts[(forecasts["cut"] == cut) & (forecasts["horizon"] == "pool")]
        median = lambda x: _num(_median_abs(x), 2)  # noqa: E731
        table[cut] = {
            "samples needed, all targets: curvefit": f"{median(measured['ln_ratio'])} "
                                                     f"({len(measured)})",
            "the true n re-read with the repeats drawn again": _num(
                float(np.median(redrawn.loc[redrawn["cut"] == cut, "ln"])), 2),
            "generated tasks, measured targets: curvefit": f"{median(gen['ln_ratio'])} ({len(gen)})",
            "the same targets answered by the exact true curve": median(gen["ln"]),
            "generated tasks, true-error targets: curvefit": f"{median(gen_true['ln_ratio'])} "
                                                            f"({len(gen_true)})",
            "the same targets answered by the whole measured curve": median(gen_true["ln"]),
            "MAE ratio to last value (90% over data sets)": _ratio_interval(
                pool_rows, "last_value", 2000, rng),
            "MAE ratio to power-law-floor (90% over data sets)": _ratio_interval(
                pool_rows, "power_law_floor", 2000, rng)}
    frame = pd.DataFrame(table)
    return frame.rename_axis("median abs ln(n / n_true), or MAE ratio").reset_index()


def rescore(args) -> str:
    """The tables again from the stored ``<label>-forecasts.csv`` and ``-samples.csv`` (no
    fitting), under the stored report's first line."""
    points, _ = load_corpus(args.corpus)
    res = Path(args.corpus) / "results"
    try:
        fc = pd.read_csv(res / f"{args.label}-forecasts.csv")
        an = pd.read_csv(res / f"{args.label}-samples.csv")
    except FileNotFoundError as exc:
        raise SystemExit(f"no stored results for --label {args.label}: {exc.filename}") from None
    md = res / f"{args.label}-corpus.md"
    old = md.read_text().splitlines() if md.is_file() else []
    head = [line for line in old[:old.index("### headline")]] if "### headline" in old else \
        [f"## Forecast benchmark on the corpus ({args.label})", ""]
    tables = summarise(fc, an, points)
    report = "\n".join(head + [f"### {name}\n\n{markdown(t)}\n" for name, t in tables.items()])
    if not args.no_write:
        md.write_text(report + "\n")
    return report


def run_corpus(args) -> str:
    points, index = load_corpus(args.corpus)
    if args.only:
        points = points[points["dataset"].isin(args.only.split(","))]
    groups = list(curve_groups(points))
    if args.limit:
        groups = groups[:args.limit]
    print(f"corpus: {len(groups)} curves from {points['dataset'].nunique()} data sets; "
          f"bootstrap {args.bootstrap}; load average {os.getloadavg()[0]:.1f}", flush=True)
    forecasts, answers = [], []
    start = time.perf_counter()
    for i, ((dataset, model), rows) in enumerate(groups, 1):
        f, a = evaluate_curve(rows, bootstrap=args.bootstrap, seed=args.seed,
                              cuts=chosen_cuts(args.cuts))
        forecasts += f
        answers += a
        if args.verbose:
            print(f"[{i}/{len(groups)}] {dataset} {model}: {len(f)} forecasts, {len(a)} targets "
                  f"({time.perf_counter() - start:.0f} s)", flush=True)
    fc, an = pd.DataFrame(forecasts), pd.DataFrame(answers)
    if fc.empty:
        raise SystemExit("no curve had enough sizes below the cuts")
    if an.empty:
        an = pd.DataFrame(columns=["cut", "reference", "task", "model", "covered", "ln_ratio",
                                   "plf_ln_ratio"])
    tables = summarise(fc, an, points)
    seconds = time.perf_counter() - start
    text = [f"## Forecast benchmark on the corpus ({args.label})", "",
            f"{len(groups)} curves, {points['dataset'].nunique()} data sets; fitted up to 1/4 and "
            f"1/10 of the pool; 90% intervals; bootstrap {args.bootstrap}; {seconds / 60:.1f} min.",
            "Coverage columns show the share covered and (in brackets) the number of forecasts; "
            "'misses above' counts the misses where the measured error lies above the interval "
            "(the forecast was too optimistic).", ""]
    for name, table in tables.items():
        text += [f"### {name}", "", markdown(table), ""]
    report = "\n".join(text)
    if not args.no_write:
        res = Path(args.corpus) / "results"
        res.mkdir(parents=True, exist_ok=True)
        fc.to_csv(res / f"{args.label}-forecasts.csv", index=False, float_format="%.6g")
        an.to_csv(res / f"{args.label}-samples.csv", index=False, float_format="%.6g")
        (res / f"{args.label}-corpus.md").write_text(report + "\n")
    return report


# ====================================================================== simulations
def sim_law(n):
    return 0.05 + 2.0 * np.asarray(n, dtype=float) ** -0.5


SIM_SIZES = sorted({int(round(s)) for s in np.geomspace(50, 2000, 8)})
SIM_REPEATS = 5
SIM_TEST = 1000
SIM_FAR = (2, 10, 40)
SIM_TARGETS = (2, 10)
# What simulation (i) draws, said the way a run says it: every repeat's test rows are
# fresh draws from an unlimited population and its training set carries no variance of
# its own, so repeats share no rows: a pool far beyond the sizes. A curve without this
# is read as repeats re-splitting one table whose pool is the largest size (what a
# table from elsewhere usually is), and its band would count the binomial test noise as
# shared by all repeats, which here it is not.
LAW_META = {"n_pool": 10 ** 12, "n_test": SIM_TEST}


def _score_fit(fit, truth_at, floor: float, n_max: float) -> dict:
    row = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for k in SIM_FAR:
            _, low, high = predict_at(fit, k * n_max)
            t = truth_at(k * n_max)
            row[f"cov_{k}x"] = low <= t <= high
            row[f"side_{k}x"] = _side(t, low, high)
        asym = fit.asymptote(LEVEL)
        row["cov_floor"] = bool(asym is not None and asym.low <= floor <= asym.high)
        for k in SIM_TARGETS:
            target = truth_at(k * n_max)
            ans = fit.samples_for(test_error=target, interval=LEVEL)
            row[f"need_cov_{k}x"] = bool(ans.low <= k * n_max <= ans.high)
            row[f"need_ratio_{k}x"] = ans.n / (k * n_max) if ans.n > 0 else math.nan
    return row


def simulate_law(n_datasets: int, bootstrap: int, seed: int) -> pd.DataFrame:
    """Simulation (i): a known law, binomial test noise only."""
    rng = np.random.default_rng(seed)
    rows = []
    n_max = float(max(SIM_SIZES))
    for d in range(n_datasets):
        sizes = np.repeat(SIM_SIZES, SIM_REPEATS)
        errors = rng.binomial(SIM_TEST, sim_law(sizes)) / SIM_TEST
        curve = cf.Curve.from_table(pd.DataFrame({
            "size": sizes, "repeat": np.tile(np.arange(SIM_REPEATS), len(SIM_SIZES)),
            "test_error": errors, "n_test": SIM_TEST}), meta=LAW_META)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fit = cf.fit_curve(curve, bootstrap=bootstrap, random_state=d)
        rows.append(dict(simulation="law", dataset=d, family=fit.best,
                         **_score_fit(fit, lambda n: float(sim_law(n)), 0.05, n_max)))
    return pd.DataFrame(rows)


# -- (ii) logistic regression with label noise, exact true error
BETA = np.array([1.5, -1.0, 0.75, 0.5, -0.5])
FLIP = 0.10
# midpoint rule on [-10, 10]; u = 0, where the clean label jumps, is a cell edge
_DU = 20.0 / 8000
_U = -10.0 + _DU * (np.arange(8000) + 0.5)
_PHI_DU = np.exp(-0.5 * _U ** 2) / math.sqrt(2 * math.pi) * _DU


def _q(u):
    """P(y = 1 | beta·x/|beta| = u): the clean label is 1[u > 0], FLIP of labels flipped."""
    return np.where(np.asarray(u) > 0, 1 - FLIP, FLIP)


def generate_logistic(n: int, rng: np.random.Generator):
    X = rng.standard_normal((n, len(BETA)))
    y = (rng.random(n) < _q(X @ BETA / np.linalg.norm(BETA))).astype(int)
    return X, y


def exact_error(W: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Exact 0-1 error of the rules 1[w·x + b > 0] (rows of W) on the generator.

    With u = beta·x/|beta| ~ N(0, 1) and w·x = |w|(rho·u + sqrt(1 − rho²)·z), z ~ N(0, 1)
    independent of u: P(rule says 1 | u) = Phi((|w|·rho·u + b)/(|w|·sqrt(1 − rho²))), and
    error = ∫ phi(u) [P1(u)(1 − q(u)) + (1 − P1(u)) q(u)] du, integrated on a fine grid
    (for y = 1[u > 0] flipped with probability 0.1 this is 0.1 + 0.8·P(rule ≠ 1[u > 0])).
    """
    from scipy.special import ndtr

    W = np.atleast_2d(W)
    b = np.atleast_1d(b).astype(float)
    wn = np.linalg.norm(W, axis=1)
    rho = W @ (BETA / np.linalg.norm(BETA)) / wn
    s = np.sqrt(np.maximum(1 - rho ** 2, 1e-24))
    p1 = ndtr((wn[:, None] * rho[:, None] * _U[None, :] + b[:, None]) / (wn * s)[:, None])
    q = _q(_U)[None, :]
    return np.sum(_PHI_DU * (p1 * (1 - q) + (1 - p1) * q), axis=1)


def bayes_error() -> float:
    q = _q(_U)
    return float(np.sum(_PHI_DU * np.minimum(q, 1 - q)))


def logistic_truth(sizes, draws: int, seed: int) -> dict[float, float]:
    """The true curve: mean exact error of LogisticRegression trained on n fresh rows."""
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(seed)
    out = {}
    for n in sizes:
        W, b = [], []
        for _ in range(draws):
            X, y = generate_logistic(int(n), rng)
            m = LogisticRegression(max_iter=1000).fit(X, y)
            W.append(m.coef_[0])
            b.append(m.intercept_[0])
        out[float(n)] = float(np.mean(exact_error(np.array(W), np.array(b))))
    return out


def simulate_runner(n_datasets: int, bootstrap: int, seed: int, truth_draws: int) -> pd.DataFrame:
    """Simulation (ii): the real runner on generated data with an exact true curve."""
    from sklearn.linear_model import LogisticRegression

    n_max = float(max(SIM_SIZES))
    wanted = [k * n_max for k in SIM_FAR] + [k * n_max for k in SIM_TARGETS]
    t0 = time.perf_counter()
    truth = logistic_truth(sorted(set(wanted)), truth_draws, seed + 1)
    print(f"  true curve from {truth_draws} training samples per size "
          f"({time.perf_counter() - t0:.0f} s): "
          + ", ".join(f"{int(n)}: {e:.4f}" for n, e in truth.items())
          + f"; Bayes error {bayes_error():.4f}", flush=True)
    rows = []
    rng = np.random.default_rng(seed)
    for d in range(n_datasets):
        X, y = generate_logistic(int(n_max) + SIM_TEST, rng)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            curve = cf.measure(LogisticRegression(max_iter=1000), X, y, sizes=SIM_SIZES,
                               repeats=SIM_REPEATS, test_size=SIM_TEST, random_state=d,
                               n_jobs=1)
            fit = cf.fit_curve(curve, bootstrap=bootstrap, random_state=d)
        rows.append(dict(simulation="runner", dataset=d, family=fit.best,
                         **_score_fit(fit, lambda n: truth[float(n)], bayes_error(), n_max)))
    return pd.DataFrame(rows)


def summarise_simulation(df: pd.DataFrame) -> pd.DataFrame:
    rows = []
    for name, g in df.groupby("simulation", sort=False):
        row = {"simulation": {"law": "(i) 0.05 + 2·n^−0.5, binomial noise",
                              "runner": "(ii) runner, logistic + 10% label noise"}[name],
               "data sets": len(g)}
        for k in SIM_FAR:
            row[f"band covers {k}×"] = _pct(g[f"cov_{k}x"])
        row["misses above"] = _optimistic(pd.concat([g[f"side_{k}x"] for k in SIM_FAR]))
        row["floor covered"] = _pct(g["cov_floor"])
        for k in SIM_TARGETS:
            row[f"samples-needed covered ({k}×)"] = _pct(g[f"need_cov_{k}x"])
            r = g[f"need_ratio_{k}x"].to_numpy(float)
            row[f"median n/n_true ({k}×)"] = _num(float(np.nanmedian(r)), 2)
        rows.append(row)
    return pd.DataFrame(rows)


def run_simulation(args) -> str:
    start = time.perf_counter()
    print(f"simulation (i): {args.sim_datasets} data sets", flush=True)
    law = simulate_law(args.sim_datasets, args.bootstrap, args.seed)
    print(f"simulation (ii): {args.runner_datasets} data sets through cf.measure", flush=True)
    runner = simulate_runner(args.runner_datasets, args.bootstrap, args.seed, args.truth_draws)
    df = pd.concat([law, runner], ignore_index=True)
    seconds = time.perf_counter() - start
    report = "\n".join([
        f"## Simulations ({args.label})", "",
        f"Sizes {', '.join(map(str, SIM_SIZES))}; {SIM_REPEATS} repeats; {SIM_TEST} test rows; "
        f"90% intervals; bootstrap {args.bootstrap}; {seconds / 60:.1f} min. 'n/n_true' below 1 "
        "means the answer asks for too few samples.", "",
        markdown(summarise_simulation(df)), ""])
    if not args.no_write:
        res = Path(args.corpus) / "results"
        res.mkdir(parents=True, exist_ok=True)
        df.to_csv(res / f"{args.label}-simulation.csv", index=False, float_format="%.6g")
        (res / f"{args.label}-simulation.md").write_text(report + "\n")
    return report


# ====================================================================== main
def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--corpus", type=Path, default=ROOT / "corpus")
    ap.add_argument("--label", default="baseline", help="name of the result files")
    ap.add_argument("--bootstrap", type=int, default=500)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--only", default="", help="comma-separated data sets")
    ap.add_argument("--limit", type=int, default=0, help="score only the first N curves")
    ap.add_argument("--cuts", default="1/4,1/10", help="the cuts to score, e.g. 1/4 alone")
    ap.add_argument("--simulate", action="store_true", help="run the two simulations instead")
    ap.add_argument("--sim-datasets", type=int, default=150)
    ap.add_argument("--runner-datasets", type=int, default=40)
    ap.add_argument("--truth-draws", type=int, default=100)
    ap.add_argument("--rescore", action="store_true",
                    help="summarise the stored results of --label again, without fitting")
    ap.add_argument("--no-write", action="store_true", help="print only")
    ap.add_argument("--verbose", action="store_true")
    args = ap.parse_args(argv)
    report = (run_simulation(args) if args.simulate else rescore(args) if args.rescore
              else run_corpus(args))
    print()
    print(report)
    return 0


if __name__ == "__main__":
    sys.exit(main())
