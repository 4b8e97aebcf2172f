"""Label-buying plans: rounds (curvefit plan) and per-slice budget splits (measure --slice)."""

from __future__ import annotations

import itertools
import json
import math

import numpy as np
import pandas as pd
import pytest

from curvefit.fitting.rounds import best_schedule, replay
from tests.conftest import run_cli


# ---------------------------------------------------------------- the optimisation itself
def _expected(totals, draws, current, c, k, penalty):
    return replay("x", totals, draws, current_n=current, label_cost=c, round_cost=k,
                  penalty=penalty, level=0.9).expected_cost


def test_schedule_is_the_cheapest_of_every_schedule():
    # reference: exhaustive enumeration of every increasing schedule over the draws
    # (docs/references.md#rounds-plan)
    rng = np.random.default_rng(1)
    draws = np.round(np.exp(rng.normal(7, 0.6, 12)))
    for k, penalty, rounds in [(0, 5000, 3), (300, 5000, 2), (50, 800, 3), (2000, 1e5, 3)]:
        got = best_schedule(draws, current_n=500, label_cost=1, round_cost=k, penalty=penalty,
                            max_rounds=rounds)
        cand = sorted(set(draws[draws > 500]))
        best = _expected((), draws, 500, 1, k, penalty)
        for r in range(1, rounds + 1):
            for combo in itertools.combinations(cand, r):
                best = min(best, _expected(combo, draws, 500, 1, k, penalty))
        assert _expected(got, draws, 500, 1, k, penalty) == pytest.approx(best, rel=1e-9)


def test_one_purchase_stops_where_the_density_times_the_penalty_is_the_label_cost():
    # one purchase q against a need D with a lump-sum penalty P: d/dq [c·q + P·P(D > q)] = 0
    # at P·f(q) = c on the falling side of the density f; reference: scipy's log-normal
    # density and brentq for the root (docs/references.md#rounds-plan)
    from scipy import optimize, stats

    dist = stats.lognorm(s=0.5, scale=math.exp(8))
    draws = dist.ppf((np.arange(2000) + 0.5) / 2000)
    mode = math.exp(8 - 0.25)
    for c, penalty in [(1.0, 20000.0), (1.0, 50000.0), (2.0, 100000.0)]:
        (q,) = best_schedule(draws, current_n=100, label_cost=c, round_cost=0, penalty=penalty,
                             max_rounds=1)
        root = optimize.brentq(lambda x: penalty * dist.pdf(x) - c, mode, 1e6)
        assert q == pytest.approx(root, rel=0.03)


def test_more_rounds_never_cost_more_and_a_dear_round_means_one():
    draws = np.exp(np.random.default_rng(2).normal(8, 0.7, 200))
    costs = [_expected(best_schedule(draws, current_n=1000, label_cost=1, round_cost=200,
                                     penalty=30000, max_rounds=r), draws, 1000, 1, 200, 30000)
             for r in (1, 2, 3, 5)]
    assert all(a >= b - 1e-9 for a, b in zip(costs, costs[1:]))
    assert costs[-1] < costs[0]
    dear = best_schedule(draws, current_n=1000, label_cost=1, round_cost=1e7, penalty=1e9,
                         max_rounds=4)
    assert len(dear) == 1


def test_required_probability_is_met_exactly_on_the_draws():
    draws = np.arange(1, 101) * 100.0
    totals = best_schedule(draws, current_n=50, label_cost=1, round_cost=100, probability=0.9,
                           max_rounds=3)
    s = replay("rounds", totals, draws, current_n=50, label_cost=1, round_cost=100,
               penalty=None, level=0.9)
    assert s.reach_probability >= 0.9 and totals[-1] == 9000.0
    assert best_schedule(np.r_[draws[:50], [math.inf] * 50], current_n=50, label_cost=1,
                         round_cost=0, probability=0.9) is None


# ---------------------------------------------------------------- through the command line
def _law_table(seed: int) -> pd.DataFrame:
    """The law 0.05 + 2·n^−0.5 with binomial test noise (1,000 test rows), 8 sizes × 5 repeats."""
    rng = np.random.default_rng(seed)
    sizes = np.repeat(np.geomspace(50, 2000, 8).round(), 5)
    truth = 0.05 + 2 * sizes ** -0.5
    return pd.DataFrame({"size": sizes, "repeat": np.tile(range(5), 8),
                         "test_error": rng.binomial(1000, truth) / 1000})


@pytest.fixture(scope="module")
def curve_table(tmp_path_factory):
    """A curve of the law of `_law_table`."""
    path = tmp_path_factory.mktemp("plan") / "curve.csv"
    _law_table(3).to_csv(path, index=False)
    return path


def test_plan_prints_the_rule_and_the_comparison(curve_table):
    r = run_cli("plan", curve_table, "--error", "0.07", "--label-cost", "1", "--round-cost",
                "500", "--penalty", "100000", "--bootstrap", "100", "--quiet")
    assert r.returncode == 0, r.stderr
    assert "Now, buy" in r.stdout and "After the last round, stop" in r.stdout
    for name in ("rounds", "one purchase", "upper end at once"):
        assert name in r.stdout
    assert "expected cost of the rounds plan:" in r.stdout


def test_plan_json_carries_everything(curve_table):
    r = run_cli("plan", curve_table, "--error", "0.07", "--label-cost", "1", "--probability",
                "0.8", "--rounds", "2", "--bootstrap", "100", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert {"buy_now", "rule", "rounds", "one_shot", "upper_end", "samples_needed",
            "answer", "warnings"} <= set(doc)
    assert doc["rounds"]["reach_probability"] >= 0.8
    assert len(doc["rounds"]["totals"]) <= 2
    assert doc["rounds"]["expected_cost"] <= doc["one_shot"]["expected_cost"] + 1e-9
    assert doc["buy_now"] == doc["rounds"]["totals"][0] - doc["current_n"]


@pytest.mark.parametrize("args", [
    ["--label-cost", "1", "--penalty", "10"],                                  # no target
    ["--error", "0.07", "--gap", "0.01", "--label-cost", "1", "--penalty", "10"],
    ["--error", "0.07", "--label-cost", "1"],                                  # no penalty
    ["--error", "0.07", "--label-cost", "1", "--penalty", "10", "--probability", "0.9"],
    ["--error", "0.07", "--label-cost", "-1", "--penalty", "10"],
    ["--error", "0.07", "--label-cost", "1", "--probability", "1.5"],
    ["--error", "0.07", "--label-cost", "1", "--penalty", "10", "--rounds", "0"],
    ["--error", "0.07", "--label-cost", "1", "--penalty", "10", "--round-cost", "-5"],
    ["--error", "7", "--label-cost", "1", "--penalty", "10"],                  # not a rate
    ["--gap", "0.01", "--label-cost", "1", "--penalty", "10"],                # no train error
])
def test_plan_bad_input_is_one_line_and_exit_2(curve_table, args):
    r = run_cli("plan", curve_table, *args, "--bootstrap", "20")
    assert r.returncode == 2, (args, r.stdout, r.stderr)
    lines = [ln for ln in r.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr


# ---------------------------------------------------------------- per-slice curves
def _bench_plans():
    """scripts/bench_plans.py as a module (its generated two-region task)."""
    import importlib.util
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    sys.path.insert(0, str(root / "scripts"))
    spec = importlib.util.spec_from_file_location("bench_plans", root / "scripts" / "bench_plans.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def sliced(tmp_path_factory):
    """A two-region table plus a rare third region, measured with --slice region."""
    folder = tmp_path_factory.mktemp("slices")
    table = _bench_plans().two_region_table(1600, 0)
    rare = table.iloc[:12].copy()
    rare["region"] = "islands"
    path = folder / "regions.csv"
    pd.concat([table, rare], ignore_index=True).to_csv(path, index=False)
    out = folder / "slices.json"
    r = run_cli("measure", path, "--target", "y", "--model", "sklearn.tree:DecisionTreeClassifier",
                "--param", "max_depth=6", "--param", "random_state=0", "--slice", "region",
                "--repeats", "3", "--out", out, "--quiet")
    return path, out, r


def test_measure_slice_writes_one_curve_per_slice_and_names_the_rare_one(sliced):
    _, out, r = sliced
    assert r.returncode == 0, r.stderr
    assert "north" in r.stdout and "south" in r.stdout and "too few rows" in r.stdout
    assert "islands has only 12 rows" in r.stderr
    doc = json.loads(out.read_text())
    assert doc["format"] == "curvefit.slices/1"
    by = {s["value"]: s for s in doc["slices"]}
    assert by["islands"]["curve"] is None and by["islands"]["skipped"]
    north = by["north"]["curve"]
    sizes = sorted({p["size"] for p in north["points"]})
    # the sizes count north's training rows only: up to its 75% share of its rows
    assert sizes[-1] == round(0.75 * by["north"]["rows"]) or sizes[-1] == by["north"]["rows"] - round(
        0.25 * by["north"]["rows"])


def test_measure_slice_gives_the_same_points_with_two_workers_and_after_a_resume(sliced):
    table, out, _ = sliced
    again = out.parent / "again.json"
    args = ["measure", table, "--target", "y", "--model", "sklearn.tree:DecisionTreeClassifier",
            "--param", "max_depth=6", "--param", "random_state=0", "--slice", "region",
            "--repeats", "3", "--quiet"]
    first = run_cli(*args, "--out", again, "--jobs", "2")   # other workers, the same cells
    assert first.returncode == 0, first.stderr
    assert (out.parent / "again.json.journals").is_dir()
    resumed = run_cli(*args, "--out", again, "--resume")
    assert resumed.returncode == 0, resumed.stderr

    def errors(path):
        doc = json.loads(path.read_text())
        return {s["value"]: sorted((p["size"], p["repeat"], p["test_error"])
                                   for p in s["curve"]["points"])
                for s in doc["slices"] if s["curve"]}

    assert errors(again) == errors(out)


def test_slice_curves_hold_the_other_slices_whole():
    # each slice's test rows are its own, and its pool starts with every other slice's rows
    from curvefit.measuring.slices import SliceSplit

    codes = np.array(["a"] * 40 + ["b"] * 60)
    plan = SliceSplit(codes, "a", 0.25).split(None, 2, 5)
    for p in plan:
        assert set(codes[p.test]) == {"a"} and len(p.test) == 10
        assert set(codes[p.pool[:45]]) == {"b"} and set(codes[p.pool[45:]]) == {"a"}
    other = SliceSplit(codes, "b", 0.25).split(None, 2, 5)
    # the same split of the rows whichever slice grows
    assert set(plan[0].test) | set(other[0].test) == set(np.concatenate([plan[0].test, other[0].test]))
    assert not set(plan[0].test) & set(other[0].pool[:0])


def _split(out, *args):
    r = run_cli("plan", out, "--bootstrap", "100", "--json", *args)
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    return doc, {s["slice"]: s for s in doc["slices"]}


def test_plan_splits_a_budget_by_equal_marginal_gains(sliced):
    _, out, _ = sliced
    doc, rows = _split(out, "--budget", "1500", "--label-cost", "1")
    assert set(rows) == {"north", "south"}
    assert sum(s["spend"] for s in rows.values()) == pytest.approx(1500, rel=1e-6)
    gains = [s["gain_per_money"] for s in rows.values() if s["labels"] > 0]
    if len(gains) == 2:  # both get labels: their last steps gain about equally
        assert max(gains) <= 2 * min(gains) + 1e-12
    after = doc["overall_after"]
    assert after["low"] <= after["estimate"] <= after["high"] <= doc["overall_now"]["high"]
    assert any("islands" in n for n in doc["notes"])
    # labels of south ten times dearer: north's share can only grow
    _, dear = _split(out, "--budget", "1500", "--slice-costs", "north=1,south=10")
    assert dear["north"]["labels"] >= rows["north"]["labels"]
    text = run_cli("plan", out, "--slice-errors", "north=0.12,south=0.4", "--slice-costs",
                   "north=1,south=3", "--bootstrap", "100", "--quiet")
    assert text.returncode == 0, text.stderr
    assert "overall error after" in text.stdout


def test_greedy_split_matches_a_direct_minimisation():
    # reference: scipy's bounded scalar minimiser on the same fitted curves
    # (docs/references.md#slice-acquisition)
    from scipy.optimize import minimize_scalar

    from curvefit.fitting.engine import fit_curve
    from curvefit.fitting.rounds import split_budget

    n = np.repeat([50, 100, 200, 400, 800], 3)
    noise = np.tile([-0.002, 0.0, 0.002], 5)
    fits = {"a": fit_curve(pd.DataFrame({"size": n, "test_error": 0.05 + 2 * n ** -0.5 + noise}),
                           bootstrap=30, families="power-law-floor"),
            "b": fit_curve(pd.DataFrame({"size": n, "test_error": 0.1 + 0.8 * n ** -0.4 + noise}),
                           bootstrap=30, families="power-law-floor")}
    shares, costs, budget = {"a": 0.3, "b": 0.7}, {"a": 2.0, "b": 1.0}, 3000.0

    def overall(money_a):
        ea = fits["a"].predict([800 + money_a / costs["a"]])["estimate"].iloc[0]
        eb = fits["b"].predict([800 + (budget - money_a) / costs["b"]])["estimate"].iloc[0]
        return shares["a"] * ea + shares["b"] * eb

    best = minimize_scalar(overall, bounds=(0, budget), method="bounded", options={"xatol": 1})
    split = split_budget(fits, shares=shares, current={"a": 800, "b": 800}, label_costs=costs,
                         budget=budget, steps=1000).table.set_index("slice")
    assert split.loc["a", "spend"] == pytest.approx(best.x, abs=0.02 * budget)
    assert overall(split.loc["a", "spend"]) <= best.fun + 1e-6


@pytest.mark.parametrize("args", [
    ["plan", "{out}"],                                                     # no budget or targets
    ["plan", "{out}", "--budget", "100", "--slice-errors", "north=0.1"],
    ["plan", "{out}", "--budget", "100", "--slice-costs", "north=1"],     # south has no cost
    ["plan", "{out}", "--budget", "100", "--slice-costs", "north"],
    ["plan", "{out}", "--budget", "-3"],
    ["plan", "{out}", "--slice-errors", "mars=0.1"],
    ["measure", "{table}", "--target", "y", "--model", "sklearn.tree:DecisionTreeClassifier",
     "--slice", "nope"],
    ["measure", "{table}", "--target", "y", "--model", "sklearn.tree:DecisionTreeClassifier",
     "--slice", "region", "--sizes", "10,20"],
])
def test_slice_bad_input_is_one_line_and_exit_2(sliced, args):
    table, out, _ = sliced
    r = run_cli(*[a.format(out=out, table=table) for a in args], "--bootstrap", "20") \
        if args[0] == "plan" else run_cli(*[a.format(out=out, table=table) for a in args])
    assert r.returncode == 2, (args, r.stdout, r.stderr)
    lines = [ln for ln in r.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr


@pytest.fixture(scope="module")
def train_curve(tmp_path_factory):
    """The law of `_law_table` with a training error 0.05 − n^−0.5 beside it."""
    table = _law_table(4)
    table["train_error"] = np.clip(0.05 - table["size"] ** -0.5, 0, 1)
    path = tmp_path_factory.mktemp("plan-gap") / "curve.csv"
    table.to_csv(path, index=False)
    return path


def test_plan_edge_cases_say_what_they_mean(train_curve):
    # a target the labels in hand already reach: buy nothing
    r = run_cli("plan", train_curve, "--error", "0.5", "--label-cost", "1", "--penalty", "1000",
                "--bootstrap", "50", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["buy_now"] == 0 and doc["rule"][0].startswith("Buy nothing")
    # a gap target, from the fitted gap
    r = run_cli("plan", train_curve, "--gap", "0.05", "--label-cost", "1", "--probability", "0.8",
                "--bootstrap", "50", "--json")
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["kind"] == "gap"
    # below the floor of 5%: no purchase reaches it with the probability asked
    r = run_cli("plan", train_curve, "--error", "0.02", "--label-cost", "1", "--probability",
                "0.9", "--bootstrap", "50")
    assert r.returncode == 0, r.stderr
    assert "No purchase within the horizon" in r.stdout


def test_a_budget_split_buys_whole_labels_and_speaks_the_metric(capsys):
    """Whole labels within the budget (the money left goes one label at a time), and a
    regression split is printed as MSE, not as an error rate."""
    from curvefit.cli.plan import print_split
    from curvefit.core.curve import Curve
    from curvefit.fitting.engine import fit_curve
    from curvefit.fitting.rounds import split_budget

    n = np.repeat([50, 100, 200, 400], 3)
    noise = np.tile([-20.0, 0.0, 20.0], 4)
    fits = {}
    for name, scale in (("a", 9000.0), ("b", 600.0)):
        frame = pd.DataFrame({"size": n, "repeat": np.tile([0, 1, 2], 4),
                              "test_error": 2500 + scale * n ** -0.5 + noise})
        fits[name] = fit_curve(Curve(frame, meta={"metric": "mse"}), bootstrap=30)
    costs = {"a": 1.5, "b": 1.0}
    split = split_budget(fits, shares={"a": 0.5, "b": 0.5}, current={"a": 400, "b": 400},
                         label_costs=costs, budget=301)
    table = split.table.set_index("slice")
    assert all(float(v).is_integer() for v in table["labels"])
    spent = sum(table.loc[k, "labels"] * costs[k] for k in costs)
    assert spent <= 301 and 301 - spent < max(costs.values())
    print_split(split)
    text = capsys.readouterr().out
    assert "overall test MSE after" in text and "MSE now" in text
    assert "%" not in text.replace("50%", "").replace("90%", "")  # shares and the level only


def test_a_small_penalty_says_that_buying_nothing_is_cheaper_than_any_purchase():
    """The law 0.05 + 2·n^−0.5 needs about 16,000 labels for 0.066 (a known answer); at a
    label cost of 1 a miss's penalty of 500 is the cheaper choice, and the rule says why."""
    import curvefit as cf

    curve = cf.Curve.from_table(_law_table(3))
    plan = cf.plan_rounds(curve, test_error=0.066, label_cost=1.0, penalty=500.0, bootstrap=50)
    assert plan.buy_now == 0
    assert plan.rule()[0].startswith("Buy nothing: a miss's penalty of 500 costs less")
