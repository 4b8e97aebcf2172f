"""`curvefit fit` and `curvefit need` through the real command line."""

import json

import pytest
from test_fitting import measured_curve

from conftest import run_cli
from curvefit import bounds


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("fitcli")
    m = measured_curve("digits_knn")
    csv = d / "curve.csv"
    m.table.to_csv(csv, index=False)
    run = m.curve.write(d / "run.json")
    test_only = d / "test_only.csv"
    m.table[["size", "test_error"]].to_csv(test_only, index=False)
    broken = d / "broken.csv"
    broken.write_text("size,error\n10,0.3\n20,0.2\n")
    return {"csv": csv, "run": run, "test_only": test_only, "broken": broken, "dir": d}


def fit_text_and_json(*args, folder):
    """One `curvefit fit ARGS --out FILE` run: its text output and the JSON document that
    --json would print (the same document, test_fit_json_on_a_run_file checks)."""
    out = folder / f"fit-{len(list(folder.glob('fit-*.json')))}.json"
    r = run_cli("fit", *args, "--out", out)
    assert r.returncode == 0, r.stderr
    return r, json.loads(out.read_text())


@pytest.fixture(scope="module")
def run_fit(files, tmp_path_factory):
    """`fit RUN --bootstrap 30`, the text and the JSON, shared by the tests that read it."""
    return fit_text_and_json(files["run"], "--bootstrap", "30", folder=tmp_path_factory.mktemp("runfit"))


def test_fit_prints_ranking_and_predictions(files):
    r = run_cli("fit", files["csv"], "--bootstrap", "30")
    assert r.returncode == 0, r.stderr
    assert "ranking" in r.stdout and "chosen:" in r.stdout
    assert "(2×)" in r.stdout and "(10×)" in r.stdout
    for fam in ["power-law-floor", "last-value", "joint-train-test"]:
        assert fam in r.stdout


def test_fit_json_on_a_run_file(files):
    out = files["dir"] / "fit.json"
    r = run_cli("fit", files["run"], "--bootstrap", "30", "--json", "--out", out, "--seed", "3")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)  # stdout holds JSON only
    assert doc["format"] == "curvefit.fit/1" and doc["on"] == "test"
    assert doc["best"] == [f for f in doc["families"] if f["chosen"]][0]["family"]
    assert len(doc["predictions"]) == 2
    assert json.loads(out.read_text()) == doc  # the file holds what --json prints


def test_fit_gap_with_chosen_families(files):
    r = run_cli("fit", files["csv"], "--on", "gap", "--families", "power-law,power-law-floor",
                "--bootstrap", "20", "--weights", "index", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["on"] == "gap"
    assert {f["family"] for f in doc["families"]} == {"power-law", "power-law-floor", "last-value"}


def test_need_answers_first_then_prices(files):
    r = run_cli("need", files["csv"], "--error", "0.015", "--label-cost", "0.4", "--budget", "500",
                "--bootstrap", "30")
    assert r.returncode == 0, r.stderr
    lines = r.stdout.splitlines()
    assert lines[0].startswith(("To reach 1.5% test error", "A test error of 1.5% is not reachable",
                                "The measured curve already reaches"))
    assert "A budget of 500 buys 1,250 labels" in r.stdout
    assert "drop per 1,000" in r.stdout


def test_need_json_with_vc_dimension(files):
    r = run_cli("need", files["csv"], "--gap", "0.02", "--vc-dim", "10", "--bootstrap", "20", "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["answer"]["kind"] == "gap" and doc["answer"]["target"] == 0.02
    # beside the measured answer: the worst-case VC size from curvefit.bounds at δ = 0.1
    assert doc["vc"]["vc_sample_size"] == bounds.vc_sample_size(10, eps=0.02, delta=0.1).n_samples
    assert doc["vc"]["rule_of_thumb_samples"] == 100


def test_need_error_target_puts_the_gap_left_into_the_vc_bound(files):
    # the VC bound limits E_out - E_in (Vapnik & Chervonenkis 1971): a test-error target E
    # goes in as eps = E - training error at the answer's size, not as E itself
    from curvefit.core.curve import Curve
    from curvefit.fitting.planning import train_error_at

    r = run_cli("need", files["csv"], "--error", "0.05", "--vc-dim", "10", "--bootstrap", "20",
                "--json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    n = doc["answer"]["n"] if doc["answer"]["reachable"] else None
    train = train_error_at(Curve.read(files["csv"]), n or Curve.read(files["csv"]).sizes.max())
    assert doc["vc"]["eps"] == pytest.approx(0.05 - train)
    assert doc["vc"]["vc_sample_size"] == bounds.vc_sample_size(10, eps=0.05 - train,
                                                                delta=0.1).n_samples
    text = run_cli("need", files["csv"], "--error", "0.05", "--vc-dim", "10", "--bootstrap", "20")
    assert "minus the training error" in text.stdout


def test_need_error_target_without_train_error_refuses_the_vc_bound(files):
    r = run_cli("need", files["test_only"], "--error", "0.05", "--vc-dim", "10", "--bootstrap",
                "20")
    assert r.returncode == 0, r.stderr
    assert "no VC bound: the VC bound limits the gap" in r.stdout


@pytest.mark.parametrize("args", [
    ["fit", "{dir}/missing.csv"],
    ["fit", "{broken}"],
    ["fit", "{csv}", "--on", "middle"],
    ["fit", "{csv}", "--families", "power-law-floor,nope"],
    ["fit", "{csv}", "--weights", "heavy"],
    ["fit", "{test_only}", "--on", "gap"],
    ["need", "{csv}"],
    ["need", "{csv}", "--error", "0.1", "--gap", "0.1"],
    ["need", "{csv}", "--error", "0.1", "--budget", "100"],
    ["need", "{test_only}", "--gap", "0.05", "--bootstrap", "5"],
    ["need", "{csv}", "--error", "0.1", "--level", "2"],
])
def test_bad_input_exits_2_with_one_line(files, args):
    args = [a.format(**{k: str(v) for k, v in files.items()}) for a in args]
    r = run_cli(*args)
    assert r.returncode == 2, (args, r.stdout, r.stderr)
    assert "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1, r.stderr


def test_fit_shows_lack_of_fit_and_need_answers_from_measured_means(tmp_path):
    from test_fitting import plateau_curve

    run = plateau_curve().write(tmp_path / "plateau.json")
    r = run_cli("fit", run, "--bootstrap", "30")
    assert r.returncode == 0, r.stderr
    assert "lack of fit" in r.stdout and "poor fit" in r.stdout
    r = run_cli("need", run, "--error", "0.3", "--bootstrap", "30")
    assert r.returncode == 0, r.stderr
    first = r.stdout.splitlines()[0]
    assert first.startswith("The measured curve already reaches 30.0% test error at about")
    assert "between the measured sizes" in first


def test_fit_at_prints_the_forecast_with_its_interval(files):
    from curvefit.core.curve import Curve
    from curvefit.core.errors import FitWarning
    from curvefit.fitting.engine import fit_curve

    r, doc = fit_text_and_json(files["run"], "--bootstrap", "30", "--at", "20000,50000",
                               folder=files["dir"])
    at = doc["at"]
    assert [row["size"] for row in at] == [20000, 50000]
    # the same numbers as the API's CurveFit.predict with the same seed
    fit = fit_curve(Curve.read(files["run"]), bootstrap=30, random_state=0)
    with pytest.warns(FitWarning, match="beyond 10×"):
        pred = fit.predict([20000, 50000])
    for row, ref in zip(at, pred.itertuples()):
        assert row["estimate"] == pytest.approx(ref.estimate) and row["low"] == pytest.approx(ref.low)
        assert row["low"] <= row["estimate"] <= row["high"]
    block = r.stdout.split("at the sizes asked for:")[1].splitlines()
    assert block[1].split()[:2] == ["size", "test"] and "90% interval" in block[1]
    assert block[2].lstrip().startswith("20,000 (") and block[3].lstrip().startswith("50,000 (")
    assert "beyond 10× the largest measured size" in r.stderr  # 50,000 is far: said on stderr


def test_need_extra_without_a_target_prints_what_the_labels_buy(files):
    from curvefit.core.curve import Curve
    from curvefit.fitting.engine import fit_curve
    from curvefit.fitting.planning import plan_purchase

    r = run_cli("need", files["run"], "--extra", "1000,5000", "--bootstrap", "30")
    assert r.returncode == 0, r.stderr
    lines = r.stdout.splitlines()
    assert lines[0].startswith("expected test error after buying more labels (you have")
    assert lines[1].split()[:4] == ["extra", "total", "test", "error"]
    assert lines[2].split()[0] == "1,000" and lines[3].split()[0] == "5,000"
    r = run_cli("need", files["run"], "--extra", "1000,5000", "--bootstrap", "30", "--json")
    doc = json.loads(r.stdout)
    assert doc["answer"] is None and "vc" not in doc
    fit = fit_curve(Curve.read(files["run"]), bootstrap=30, random_state=0)
    ref = plan_purchase(fit, current_n=fit.largest_size, extra=[1000, 5000])
    assert [row["test_error"] for row in doc["plan"]] == pytest.approx(ref["test_error"].tolist())
    assert [row["high"] for row in doc["plan"]] == pytest.approx(ref["high"].tolist())


@pytest.mark.parametrize("args", [
    ["fit", "{csv}", "--at", "0,5000"],
    ["fit", "{csv}", "--at", "many"],
    ["need", "{csv}", "--extra", "-5"],
])
def test_bad_forecast_sizes_exit_2(files, args):
    args = [a.format(**{k: str(v) for k, v in files.items()}) for a in args]
    r = run_cli(*args, "--bootstrap", "5")
    assert r.returncode == 2, (args, r.stdout, r.stderr)
    assert len(r.stderr.strip().splitlines()) == 1 and "Traceback" not in r.stderr


def test_fit_prints_how_the_forecast_was_made(files, run_fit):
    """The notes (averaged families, fresh-data variance, the learned correction) are in the
    text output, not only in --json (issue 13: say so when a learned correction is used)."""
    from curvefit.core.curve import Curve
    from curvefit.fitting.engine import fit_curve

    r, _ = run_fit
    printed = [line[len("note: "):] for line in r.stdout.splitlines() if line.startswith("note: ")]
    fit = fit_curve(Curve.read(files["run"]), bootstrap=30, random_state=0)
    assert printed == fit.notes and printed
    if fit.calibration.active:
        assert any("correction learned on" in line for line in printed)


def _ranking_follows_the_rule(rows: list[dict]) -> None:
    """Near-ties first (power-law-floor, power-law, then AICc), the other choosable families
    by forecast error, then the families that cannot be chosen (failed fits last)."""
    pref = {"power-law-floor": 0, "power-law": 1}
    choosable = [r for r in rows if r["status"] == "converged" and r["eligible"]
                 and r["family"] != "last-value"]
    head = rows[:len(choosable)]
    assert [r["family"] for r in head] == [r["family"] for r in choosable]
    tied = [r for r in head if r["tied"]]
    assert head[:len(tied)] == tied
    keys = [(pref.get(r["family"], 2), r["aicc"]) for r in tied]
    assert keys == sorted(keys)
    rest = [r["forecast_error"] for r in head[len(tied):]]
    assert rest == sorted(rest)
    tail = rows[len(choosable):]
    keys = [(r["status"] == "failed", r["forecast_error"] if r["forecast_error"] is not None
             else float("inf")) for r in tail]
    assert keys == sorted(keys)


@pytest.mark.parametrize("which", ["run", "plateau"])
def test_ranking_table_is_in_the_order_of_the_rule_that_chooses(files, run_fit, tmp_path, which):
    """Issue 16: the ranking is sorted by the rule that chooses and the runner-up is the
    second by that rule (checked through the real CLI, the JSON and the text table)."""
    from test_fitting import plateau_curve

    if which == "run":
        r, doc = run_fit
    else:
        r, doc = fit_text_and_json(plateau_curve().write(tmp_path / "plateau.json"), "--bootstrap", "30",
                                   folder=tmp_path)
    rows = doc["families"]
    assert rows[0]["chosen"] and rows[0]["family"] == doc["best"]
    assert doc["runner_up"] == rows[1]["family"]
    _ranking_follows_the_rule(rows)
    assert doc["settings"]["ranking_rule"]
    lines = r.stdout.splitlines()
    assert doc["settings"]["ranking_rule"] in lines[1]
    table = [line.split() for line in lines[3:3 + len(rows)]]
    assert [t[1] for t in table] == [row["family"] for row in rows]
    assert table[0][-1] == "chosen" and table[1][-1] == "runner-up"
    assert f"(runner-up: {doc['runner_up']})" in r.stdout
    # the last value is never chosen, and its row says so instead of a plain 'converged'
    last = next(t for t in table if t[1] == "last-value")
    assert "baseline" in last and "converged" not in last


def _pinned_curve():
    """A power law without a floor (0.8·n^−0.35) with Gaussian noise: weibull's scale and
    the floor of power-law-floor sit at or near their bounds."""
    import numpy as np
    import pandas as pd

    n = np.repeat([50, 100, 200, 400, 800, 1600, 3200, 6400], 5)
    rng = np.random.default_rng(3)
    y = np.clip(0.8 * n ** -0.35 + rng.normal(0, 0.004, len(n)), 0, None)
    return pd.DataFrame({"size": n, "repeat": np.tile(range(5), 8), "test_error": y})


@pytest.mark.parametrize("family", ["weibull", "power-law-floor", "auto"])
def test_every_parameter_lies_inside_its_own_interval(tmp_path, family):
    """Issue 16: an estimate printed with an interval lies inside it ("4.433e-12 with 90% low
    0, high 2.86e-13" must not happen); a value at a bound prints as the bound, and a
    widened interval says so."""
    csv = tmp_path / "pinned.csv"
    _pinned_curve().to_csv(csv, index=False)
    r, doc = fit_text_and_json(csv, "--families", family, "--bootstrap", "100", folder=tmp_path)
    for p in doc["parameters"]:
        assert p["low"] <= p["estimate"] <= p["high"], p
        assert p["note"] in ("", "at its bound", "widened to the estimate", "degenerate")
    for key in ("asymptote", "exponent"):
        if doc[key] and doc[key]["low"] is not None:
            assert doc[key]["low"] <= doc[key]["estimate"] <= doc[key]["high"], doc[key]
    notes = {p["note"] for p in doc["parameters"]} - {""}
    block = r.stdout.split("chosen:")[1].splitlines()[1:1 + len(doc["parameters"]) + 1]
    for note in notes:
        assert any(line.rstrip().endswith(note) for line in block), (note, block)
    if family == "power-law-floor":     # the floor of a power law without one is at 0
        floor = doc["parameters"][2]
        assert floor["estimate"] == 0.0 and floor["note"] == "at its bound"
