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
    # density and brentq for the root
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
@pytest.fixture(scope="module")
def curve_table(tmp_path_factory):
    """A curve of the law 0.05 + 2·n^−0.5 with binomial test noise (1,000 test rows)."""
    rng = np.random.default_rng(3)
    sizes = np.repeat(np.geomspace(50, 2000, 8).round(), 5)
    truth = 0.05 + 2 * sizes ** -0.5
    table = pd.DataFrame({"size": sizes, "repeat": np.tile(range(5), 8),
                          "test_error": rng.binomial(1000, truth) / 1000})
    path = tmp_path_factory.mktemp("plan") / "curve.csv"
    table.to_csv(path, index=False)
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
