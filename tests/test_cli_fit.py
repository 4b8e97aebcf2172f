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
    assert json.loads(out.read_text())["best"] == doc["best"]


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

    r = run_cli("fit", files["run"], "--bootstrap", "30", "--at", "20000,50000", "--json")
    assert r.returncode == 0, r.stderr
    at = json.loads(r.stdout)["at"]
    assert [row["size"] for row in at] == [20000, 50000]
    # the same numbers as the API's CurveFit.predict with the same seed
    fit = fit_curve(Curve.read(files["run"]), bootstrap=30, random_state=0)
    with pytest.warns(FitWarning, match="beyond 10×"):
        pred = fit.predict([20000, 50000])
    for row, ref in zip(at, pred.itertuples()):
        assert row["estimate"] == pytest.approx(ref.estimate) and row["low"] == pytest.approx(ref.low)
        assert row["low"] <= row["estimate"] <= row["high"]
    r = run_cli("fit", files["run"], "--bootstrap", "30", "--at", "20000,50000")
    assert r.returncode == 0, r.stderr
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
