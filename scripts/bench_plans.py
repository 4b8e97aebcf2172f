"""Benchmark: label-buying plans where the truth is known.

1. Slice split against brute force. A generated task with two regions of different
   difficulty (``two_region_table``: "north" is a clean linear rule, "south" another rule
   with 20% of its labels flipped) and a fixed model (a depth-6 decision tree). The plan
   measures both slices on the table in hand (``measure_slices``, 3 repeats), fits them
   and splits a budget of labels (equal label costs by default) with ``plan_slices``. Brute
   force: for every split of the budget on a grid (0%, 10%, …, 100% to north), the model
   is actually trained on the table in hand plus that many fresh rows of each region and
   scored on 20,000 fresh rows (mean over ``--brute-repeats`` draws of the fresh rows).
   The plan's split is scored the same way. Printed: the error of every grid split, the
   best one, the plan's, and how far the plan's is above the best, in percent.

2. Rounds on the corpus. Every curve of ``corpus/`` (read with ``scripts/bench_forecast``,
   imported, not copied; ``--max-curves`` spreads a subset evenly) is cut at a quarter of
   its pool as in the forecast benchmark; targets are the full curve's means at the
   measured sizes nearest 2× and 4× the cut, kept when below every fitted mean; the true
   samples needed is where the full curve first reaches the target. ``plan_rounds`` with
   ``--probability`` (0.9), a label cost of 1, a round cost of ``--round-cost`` (a tenth
   of the labels in hand by default) and at most ``--rounds`` (3) rounds. Each plan is
   replayed against the truth: the rounds are bought until the total reaches the true n
   (reached) or the rounds run out (missed); its spend is the labels plus the round costs.
   Beside it: the one-shot upper-end purchase (the upper end of ``samples_for``'s 90%
   interval, bought at once, one round cost), where that end is finite.
   With ``--replan``, each plan is also followed as docs/plans.md recommends: buy its
   first round only, re-measure (the corpus curve up to the largest measured size held),
   plan again with the rounds left, and so on.

3. A growing table. The two-region task's table (``--grow-rows``, 3,000 rows) is measured
   (5 repeats, default sizes); 30% more rows are appended and the grown table measured
   twice: with the first run as ``previous`` (its cells reused) and with ``reuse=False``
   (every cell trained). Printed: the cells each run trained and reused, their wall
   times side by side, whether the shared cells' errors are identical, and the time of
   the older rows' fingerprint on a 1,000,000-row table beside the whole-table one.

Last line: ``slice split within X% of the best brute-force split; rounds reach the target
in P% of curves at C× the one-shot upper-end cost``.

Run (about 10 minutes on the shared 2-core machine)::

    nice -n 19 .venv/bin/python scripts/bench_plans.py
    nice -n 19 .venv/bin/python scripts/bench_plans.py --max-curves 20 --skip-slices
"""

from __future__ import annotations

import argparse
import math
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "scripts"))

import bench_forecast as bf  # noqa: E402

import curvefit as cf  # noqa: E402
from curvefit.fitting.rounds import best_schedule, plan_rounds, plan_slices, replay  # noqa: E402
from curvefit.measuring.slices import measure_slices  # noqa: E402

FEATURES = [f"x{i}" for i in range(6)]


# ====================================================================== 1. slices
def two_region_table(n: int, seed: int, north_share: float = 0.5) -> pd.DataFrame:
    """Rows of the generated two-region task (region is a feature too)."""
    rng = np.random.default_rng(seed)
    region = np.where(rng.random(n) < north_share, "north", "south")
    x = rng.normal(size=(n, 6))
    north = x @ np.array([1.5, -1.0, 0.8, 0.0, 0.0, 0.0])
    south = x @ np.array([0.3, 0.0, 0.0, 1.2, -0.9, 0.6]) + 0.5 * np.sin(2 * x[:, 5])
    y = (np.where(region == "north", north, south) > 0).astype(int)
    flip = rng.random(n) < np.where(region == "north", 0.02, 0.20)
    df = pd.DataFrame(x, columns=FEATURES)
    df["region"] = region
    df["y"] = np.where(flip, 1 - y, y)
    return df


def _model():
    from sklearn.tree import DecisionTreeClassifier

    return DecisionTreeClassifier(max_depth=6, random_state=0)


def _design(df: pd.DataFrame) -> np.ndarray:
    return np.column_stack([df[FEATURES].to_numpy(), (df["region"] == "north").to_numpy(float)])


def trained_error(base: pd.DataFrame, extra_north: int, extra_south: int, test: pd.DataFrame,
                  repeats: int, seed: int) -> float:
    """Mean test error after training on ``base`` plus fresh rows of each region."""
    errors = []
    for r in range(repeats):
        fresh = two_region_table(4 * (extra_north + extra_south) + 200, seed + 1000 + r)
        rows = [base, fresh[fresh["region"] == "north"].iloc[:extra_north],
                fresh[fresh["region"] == "south"].iloc[:extra_south]]
        train = pd.concat(rows, ignore_index=True)
        model = _model().fit(_design(train), train["y"])
        errors.append(float(np.mean(model.predict(_design(test)) != test["y"].to_numpy())))
    return float(np.mean(errors))


def slice_check(n_base: int, budget: int, repeats: int, seed: int, bootstrap: int) -> dict:
    base = two_region_table(n_base, seed)
    test = two_region_table(20000, seed + 1)
    slices = measure_slices(_model(), base[FEATURES + ["region"]], base["y"].to_numpy(),
                            base["region"].to_numpy(), column="region", repeats=3,
                            random_state=seed)
    split = plan_slices(slices, budget=budget, label_costs=1.0, bootstrap=bootstrap)
    labels = split.table.set_index("slice")["labels"]
    plan_north = int(round(labels["north"]))
    plan_south = budget - plan_north
    grid = [int(round(budget * k / 10)) for k in range(11)]
    brute = {g: trained_error(base, g, budget - g, test, repeats, seed) for g in grid}
    best = min(brute, key=brute.get)
    plan_error = trained_error(base, plan_north, plan_south, test, repeats, seed)
    return {"grid": brute, "best_north": best, "best_error": brute[best],
            "plan_north": plan_north, "plan_error": plan_error,
            "predicted": split.overall_after, "within": 100 * (plan_error - brute[best]) / brute[best],
            "table": split.table}


# ====================================================================== 2. rounds
def round_cases(max_curves: int, cut: float = 0.25):
    """(curve name, cut curve, target, true n) for the corpus curves."""
    points, _ = bf.load_corpus()
    groups = list(bf.curve_groups(points))
    if max_curves and len(groups) > max_curves:
        pick = np.unique(np.linspace(0, len(groups) - 1, max_curves).round().astype(int))
        groups = [groups[i] for i in pick]
    for (dataset, model), rows in groups:
        ok = rows[(rows["status"] == "ok") & np.isfinite(rows["test_error"])]
        means = ok.groupby("size")["test_error"].mean()
        sizes = means.index.to_numpy(float)
        pool = float(rows["pool"].iloc[0])
        fitted = sizes[sizes <= cut * pool]
        if len(fitted) < bf.MIN_FIT_SIZES:
            continue
        n_fit = float(fitted.max())
        curve = bf.as_curve(rows)
        sub = cf.Curve(curve.points[curve.points["size"] <= n_fit], dict(curve.meta))
        targets = []
        for k in (2, 4):
            s = bf._nearest(sizes, k * n_fit)
            if s is None or not n_fit < s <= pool:
                continue
            target = float(means.loc[s])
            if target < float(means.loc[fitted].min()):
                targets.append((target, bf.crossing(sizes, means.to_numpy(), target)))
        if targets:
            yield f"{dataset}/{model}", sub, targets, curve


def replay_truth(totals, n_true: float, have: float, round_cost: float) -> tuple[bool, float]:
    spend, before = 0.0, have
    for total in totals:
        if before >= n_true:
            break
        spend += (total - before) + round_cost
        before = total
    return before >= n_true, spend


def replanned(full, target: float, n_true: float, have: float, round_cost: float,
              probability: float, rounds: int, bootstrap: int) -> tuple[bool, float]:
    """Buy only the first round of each plan, then re-measure (the corpus' sizes up to
    what is held) and plan again with the rounds left."""
    total, spend, left = have, 0.0, rounds
    while left > 0 and total < n_true:
        sizes = full.points["size"].to_numpy(float)
        upto = sizes[sizes <= total].max()
        now = cf.Curve(full.points[full.points["size"] <= upto], dict(full.meta))
        plan = plan_rounds(now, test_error=target, label_cost=1, round_cost=round_cost,
                           probability=probability, max_rounds=left, current_n=total,
                           bootstrap=bootstrap)
        if not plan.feasible or not plan.rounds.totals:
            break
        spend += plan.rounds.totals[0] - total + round_cost
        total, left = plan.rounds.totals[0], left - 1
    return total >= n_true, spend


def rounds_check(max_curves: int, probability: float, rounds: int, round_share: float,
                 bootstrap: int, replan: bool = False) -> pd.DataFrame:
    rows = []
    for name, sub, targets, full in round_cases(max_curves):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fit = cf.fit_curve(sub, bootstrap=bootstrap)
            for target, n_true in targets:
                have = fit.largest_size
                k = round_share * have
                plan = plan_rounds(sub, test_error=target, label_cost=1, round_cost=k,
                                   probability=probability, max_rounds=rounds, fit=fit)
                row = {"curve": name, "target": target, "n_true": n_true, "have": have,
                       "feasible": plan.feasible}
                if plan.feasible:
                    reached, spend = replay_truth(plan.rounds.totals, n_true, have, k)
                    row.update(reached=reached, spend=spend, expected=plan.rounds.expected_cost,
                               stated=plan.rounds.reach_probability,
                               cost_covered=plan.rounds.cost_low <= spend <= plan.rounds.cost_high)
                    if replan:
                        rr, sr = replanned(full, target, n_true, have, k, probability, rounds,
                                           bootstrap)
                        row.update(replan_reached=rr, replan_spend=sr)
                    one = plan.one_shot.totals
                    r1, s1 = replay_truth(one, n_true, have, k)
                    row.update(one_shot_reached=r1, one_shot_spend=s1)
                # the same draws with a penalty (20× the labels in hand) instead of a probability
                pen = 20.0 * have
                totals = best_schedule(plan.draws, current_n=have, label_cost=1, round_cost=k,
                                       penalty=pen, max_rounds=rounds)
                stated = replay("rounds", totals, plan.draws, current_n=have, label_cost=1,
                                round_cost=k, penalty=pen, level=0.9)
                rp, sp = replay_truth(totals, n_true, have, k)
                row.update(penalty_reached=rp, penalty_spend=sp + (0 if rp else pen),
                           penalty_stated=stated.reach_probability,
                           penalty_expected=stated.expected_cost)
                high = plan.answer.high
                if math.isfinite(high):
                    ru, su = replay_truth((max(high, have),), n_true, have, k)
                    row.update(upper_reached=ru, upper_spend=su)
                rows.append(row)
    return pd.DataFrame(rows)


# ====================================================================== 3. growing table
def growing_check(n_rows: int, seed: int) -> dict:
    """Measure a table, grow it by 30%, measure it with and without reuse."""
    from curvefit.measuring.data import leading_rows_fingerprint, table_fingerprint
    from curvefit.measuring.growing import measure_grown

    grown = two_region_table(int(n_rows * 1.3), seed + 7)
    X, y = _design(grown), grown["y"].to_numpy()
    old = cf.measure(_model(), X[:n_rows], y[:n_rows], repeats=5, random_state=seed)
    out = {}
    for name, reuse in (("reuse", True), ("fresh", False)):
        t0 = time.perf_counter()
        curve = measure_grown(_model(), X, y, old, reuse=reuse)
        reused = len(curve.meta["reused_cells"])
        out[name] = {"curve": curve, "cells": len(curve.points), "reused": reused,
                     "trained": len(curve.points) - reused, "wall": time.perf_counter() - t0}
    cols = ["size", "repeat", "train_error", "test_error"]
    a, b = out["reuse"]["curve"].points[cols], out["fresh"]["curve"].points[cols]
    shared = a.merge(old.points[["size", "repeat"]], on=["size", "repeat"])
    out["shared"] = len(shared)
    out["equal"] = bool(a.equals(b)) and len(shared) == len(old.points)
    big = pd.DataFrame(np.random.default_rng(seed).normal(size=(1_000_000, 10)))
    big["label"] = np.where(big[0] > 0, "yes", "no")
    t0 = time.perf_counter()
    leading_rows_fingerprint(big, 1_000_000)
    out["fp_rows"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    table_fingerprint(big)
    out["fp_table"] = time.perf_counter() - t0
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--base-rows", type=int, default=1600)
    ap.add_argument("--budget", type=int, default=1500)
    ap.add_argument("--brute-repeats", type=int, default=5)
    ap.add_argument("--max-curves", type=int, default=40)
    ap.add_argument("--probability", type=float, default=0.9)
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--round-cost", type=float, default=0.1,
                    help="round cost as a share of the labels in hand")
    ap.add_argument("--bootstrap", type=int, default=200)
    ap.add_argument("--skip-slices", action="store_true")
    ap.add_argument("--replan", action="store_true",
                    help="also re-measure and re-plan after every round (slower)")
    ap.add_argument("--skip-rounds", action="store_true")
    ap.add_argument("--grow-rows", type=int, default=3000,
                    help="rows of the table before it grows by 30%%")
    ap.add_argument("--skip-growing", action="store_true")
    args = ap.parse_args(argv)
    within = math.nan
    if not args.skip_slices:
        t0 = time.time()
        s = slice_check(args.base_rows, args.budget, args.brute_repeats, args.seed, args.bootstrap)
        print("## slice split vs brute force (two regions, depth-6 tree, "
              f"{args.base_rows} rows in hand, budget {args.budget} labels)\n")
        print(s["table"].to_string(index=False))
        print("\n| labels to north | measured error |\n|---:|---:|")
        for g, e in s["grid"].items():
            print(f"| {g} | {e:.4f} |")
        print(f"\nbest brute-force split: {s['best_north']} to north, error {s['best_error']:.4f}; "
              f"plan: {s['plan_north']} to north, error {s['plan_error']:.4f} (predicted "
              f"{s['predicted'].estimate:.4f}, 90% interval {s['predicted'].low:.4f}–"
              f"{s['predicted'].high:.4f}); {time.time() - t0:.0f} s\n")
        within = s["within"]
    reach = ratio = math.nan
    if not args.skip_rounds:
        t0 = time.time()
        r = rounds_check(args.max_curves, args.probability, args.rounds, args.round_cost,
                         args.bootstrap, replan=args.replan)
        f = r[r["feasible"]]
        both = f.dropna(subset=["upper_spend"])
        reach = 100 * f["reached"].mean()
        ratio = both["spend"].mean() / both["upper_spend"].mean() if len(both) else math.nan
        print(f"## rounds on the corpus ({r['curve'].nunique()} curves, {len(r)} targets, "
              f"cut at 1/4 of the pool, probability {args.probability:g}, at most "
              f"{args.rounds} rounds; {time.time() - t0:.0f} s)\n")
        print("| plan | targets | reached | stated | mean spend (labels in hand = 1) |")
        print("|---|---:|---:|---:|---:|")
        rel = f["spend"] / f["have"]
        print(f"| rounds | {len(f)} | {reach:.0f}% | {100 * f['stated'].mean():.0f}% | "
              f"{rel.mean():.2f} |")
        print(f"| one purchase (same probability) | {len(f)} | "
              f"{100 * f['one_shot_reached'].mean():.0f}% | {100 * f['stated'].mean():.0f}% | "
              f"{(f['one_shot_spend'] / f['have']).mean():.2f} |")
        print(f"| upper end of the 90% interval at once | {len(both)} | "
              f"{100 * both['upper_reached'].mean():.0f}% | – | "
              f"{(both['upper_spend'] / both['have']).mean():.2f} |")
        if "replan_reached" in f:
            print(f"| rounds, re-measured and re-planned after each round | {len(f)} | "
                  f"{100 * f['replan_reached'].mean():.0f}% | {100 * f['stated'].mean():.0f}% | "
                  f"{(f['replan_spend'] / f['have']).mean():.2f} |")
        pen = r
        print(f"| rounds, penalty 20× the labels in hand | {len(pen)} | "
              f"{100 * pen['penalty_reached'].mean():.0f}% | {100 * pen['penalty_stated'].mean():.0f}% | "
              f"{(pen['penalty_spend'] / pen['have']).mean():.2f} (expected "
              f"{(pen['penalty_expected'] / pen['have']).mean():.2f}, penalties included) |")
        print(f"\nthe rounds plan's 90% interval of its cost covers the spend replayed against the "
              f"truth in {100 * f['cost_covered'].mean():.0f}% of {len(f)} targets")
        print(f"\ninfeasible (probability not reachable within the horizon): {int((~r['feasible']).sum())}; "
              f"rounds / upper-end spend on the {len(both)} targets with a finite upper end: "
              f"{ratio:.2f}\n")
    if not args.skip_growing:
        g = growing_check(args.grow_rows, args.seed)
        print(f"## growing table ({args.grow_rows:,} rows, then 30% more; depth-6 tree, 5 repeats)\n")
        print("| run of the grown table | cells | trained | reused | wall seconds |")
        print("|---|---:|---:|---:|---:|")
        for name, row in (("with the previous run (reuse)", g["reuse"]),
                          ("fresh (--no-reuse)", g["fresh"])):
            print(f"| {name} | {row['cells']} | {row['trained']} | {row['reused']} | "
                  f"{row['wall']:.1f} |")
        print(f"\ngrowing table: 30% more rows re-measured {g['reuse']['trained']} of "
              f"{g['reuse']['cells']} cells ({g['reuse']['reused']} reused), "
              f"{g['fresh']['wall'] / g['reuse']['wall']:.1f}× faster than a fresh run; the "
              f"{g['shared']} shared cells' errors {'are identical' if g['equal'] else 'DIFFER'}")
        print(f"older rows' fingerprint of a 1,000,000-row table: {g['fp_rows']:.2f} s (whole-table "
              f"fingerprint {g['fp_table']:.2f} s)\n")
    print(f"slice split within {within:.1f}% of the best brute-force split; rounds reach the "
          f"target in {reach:.0f}% of curves at {ratio:.2f}× the one-shot upper-end cost")
    return 0


if __name__ == "__main__":
    sys.exit(main())
