"""End-to-end tests of `curvefit track` and `curvefit history` through the real CLI.

Data: scikit-learn's bundled breast-cancer set (Wisconsin diagnostic, 569 rows) written
to CSV; the model is scikit-learn's LogisticRegression, scaled in a pipeline file.
"""

import json
import shutil
import sqlite3
import textwrap

import pytest
from sklearn.datasets import load_breast_cancer

from conftest import run_cli

MODEL_FILE = textwrap.dedent("""
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    def make_model(C=1.0):
        return make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=500))
""")


def _job(tmp_path, name, *, C=1.0, data="cancer.csv", extra=""):
    text = textwrap.dedent(f"""
        data = "{data}"
        target = "target"
        model = "model.py:make_model"
        param = {{C = {C}}}
        sizes = [25, 50, 100, 200]
        repeats = 3
        seed = 3
        store = "history.db"
        series = "cancer"
        target_error = 0.08
        bootstrap = 25
        out = "{name}.json"
        tolerances = {{test_error_at_ref = 0.01, samples_for_target = "25%"}}
    """) + extra
    path = tmp_path / f"{name}.toml"
    path.write_text(text)
    return path


@pytest.fixture(scope="module")
def nightly(tmp_path_factory):
    """Four nightly jobs on one store: good, good again with another seed, crippled, and
    crippled again compared with the previous run (which must be the last passing one)."""
    tmp = tmp_path_factory.mktemp("nightly")
    frame = load_breast_cancer(as_frame=True).frame
    frame.to_csv(tmp / "cancer.csv", index=False)
    (tmp / "model.py").write_text(MODEL_FILE)
    results = {}
    for name, C, seed, extra in [("first", 1.0, 3, ""), ("again", 1.0, 4, ""),
                                 ("crippled", 1e-4, 3, ""),
                                 ("crippled2", 1e-4, 5, 'baseline = "previous"\n')]:
        results[name] = run_cli("track", "--config", _job(tmp, name, C=C, extra=extra), "--json",
                                "--seed", seed, "--junit", tmp / f"{name}.xml", cwd=tmp)
    return tmp, results


def test_first_and_repeated_run_pass(nightly):
    tmp, res = nightly
    first, again = res["first"], res["again"]
    assert first.returncode == 0, first.stderr
    doc = json.loads(first.stdout)
    assert doc["verdict"] == "first run" and doc["baseline_id"] is None
    names = {f["name"] for f in doc["figures"]}
    assert {"test_error_at_ref", "samples_for_target"} <= names
    assert again.returncode == 0, again.stderr
    doc = json.loads(again.stdout)
    assert doc["baseline_id"] == 1 and doc["run_id"] == 2 and doc["regressed"] == []
    assert doc["comparable"] is True  # another seed re-splits the same data
    changed = [f for f in doc["figures"] if f["current"] and f["baseline"]
               and f["current"]["estimate"] != f["baseline"]["estimate"]]
    assert changed  # the numbers moved with the seed, yet nothing was flagged
    assert (tmp / "first.json").is_file()


def test_crippled_model_regresses(nightly):
    tmp, res = nightly
    bad = res["crippled"]
    assert bad.returncode == 1, bad.stderr
    doc = json.loads(bad.stdout)
    # the default baseline is the accepted one: the series' first run
    assert doc["verdict"] == "regressed" and doc["baseline_id"] == 1
    assert doc["regressed"] and set(doc["regressed"]) <= {"efficiency_ratio", "error_area"}
    ratio = next(f for f in doc["figures"] if f["name"] == "efficiency_ratio")
    assert ratio["current"]["estimate"] > 1.1 and ratio["gated"]
    assert "needs" in doc["message"] and "× the baseline's labels" in doc["message"]
    row = next(f for f in doc["figures"] if f["name"] == "test_error_at_ref")
    assert not row["gated"]  # the point figures are information


def test_second_bad_run_after_a_failure_also_fails(nightly):
    _, res = nightly
    bad = res["crippled2"]
    assert bad.returncode == 1, bad.stderr
    doc = json.loads(bad.stdout)
    # "previous" is the last run that passed (2), never the failing run 3
    assert doc["baseline_rule"] == "previous" and doc["baseline_id"] == 2
    assert doc["verdict"] == "regressed"


def test_junit_has_one_case_per_figure(nightly):
    import xml.etree.ElementTree as ET

    tmp, res = nightly
    doc = json.loads(res["crippled"].stdout)
    root = ET.parse(tmp / "crippled.xml").getroot()
    cases = root.findall("./testsuite/testcase")
    assert [c.get("name") for c in cases] == [f["name"] for f in doc["figures"]]
    failed = [c.get("name") for c in cases if c.find("failure") is not None]
    assert failed == doc["regressed"]
    assert root.find("testsuite").get("failures") == str(len(failed))
    ok = ET.parse(tmp / "again.xml").getroot()
    assert ok.find("testsuite").get("failures") == "0"


def test_accept_makes_a_run_the_baseline(nightly, tmp_path):
    tmp, _ = nightly
    db = tmp_path / "h.db"
    shutil.copy(tmp / "history.db", db)
    res = run_cli("track", "--accept", "3", "--store", db, "--json")
    assert res.returncode == 0, res.stderr
    assert json.loads(res.stdout)["verdict"] == "regressed"
    res = run_cli("track", tmp / "crippled2.json", "--store", db, "--series", "cancer",
                  "--bootstrap", "20", "--json", "--quiet")
    # the run file is already in the series (run 4): refused with one line
    assert res.returncode == 2 and res.stdout == "", res.stderr
    assert res.stderr.count("\n") == 1 and "already recorded as run 4" in res.stderr
    res = run_cli("track", tmp / "crippled2.json", "--store", db, "--series", "cancer",
                  "--bootstrap", "20", "--json", "--quiet", "--again")
    assert res.returncode == 0, res.stderr  # same model as the accepted run 3
    assert json.loads(res.stdout)["baseline_id"] == 3
    res = run_cli("track", "--accept", "99", "--store", db)
    assert res.returncode == 2 and "run 99 not found" in res.stderr


def test_markdown_summary_names_regressed_figures(nightly):
    tmp, _ = nightly
    # re-record the crippled run file against the best run: markdown for CI logs
    res = run_cli("track", tmp / "crippled.json", "--store", tmp / "history.db",
                  "--series", "cancer", "--baseline", "best", "--bootstrap", "25", "--again", cwd=tmp)
    assert res.returncode == 1, res.stderr
    assert "**Result: REGRESSED**" in res.stdout and "test_error_at_ref" in res.stdout
    assert "| figure | baseline | current |" in res.stdout


def test_history_lists_runs_and_plots(nightly):
    tmp, _ = nightly
    res = run_cli("history", "--store", tmp / "history.db", "--json")
    assert res.returncode == 0, res.stderr
    doc = json.loads(res.stdout)
    runs = doc["series"][0]["runs"]
    assert [r["run_id"] for r in runs][:4] == [1, 2, 3, 4]
    assert runs[2]["figures"]["efficiency_ratio"]["note"].startswith("vs run 1")
    # the crippled run (C=1e-4) shows its parameters and another model fingerprint
    assert runs[0]["model_label"] == "StandardScaler+LogisticRegression(C=1.0)"
    assert runs[2]["model_label"] == "StandardScaler+LogisticRegression(C=0.0001)"
    prints = [r["model_fingerprint"] for r in runs[:4]]
    assert prints[0] == prints[1] != prints[2] == prints[3] and len(prints[0]) == 8
    assert runs[2]["figures"]["test_error_at_ref"]["estimate"] > \
        runs[0]["figures"]["test_error_at_ref"]["estimate"]
    res = run_cli("history", "--store", tmp / "history.db", "--series", "cancer",
                  "--plot", tmp / "trend.png")
    assert res.returncode == 0, res.stderr
    assert "series cancer" in res.stdout and "error@ref" in res.stdout
    assert "(C=0.0001)" in res.stdout and prints[2] in res.stdout and prints[0] in res.stdout
    assert (tmp / "trend.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_data_change_not_comparable_unless_allowed(nightly, tmp_path):
    tmp, _ = nightly
    # a real data change: the same table without its last 60 rows
    lines = (tmp / "cancer.csv").read_text().splitlines()
    (tmp / "fewer.csv").write_text("\n".join(lines[:-60]) + "\n")
    db = tmp_path / "h.db"
    run = tmp / "first.json"
    assert run_cli("track", run, "--store", db, "--series", "s", "--bootstrap", "20",
                   "--quiet").returncode == 0
    job = _job(tmp, "changed", data="fewer.csv")
    res = run_cli("track", "--config", job, "--store", db, "--series", "s", "--quiet", cwd=tmp)
    assert res.returncode == 2, res.stderr
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "not comparable" in lines[0] and "Traceback" not in res.stderr
    assert "data fingerprint differs" in lines[0]
    res = run_cli("track", tmp / "changed.json", "--store", db, "--series", "s",
                  "--baseline", "1", "--allow-data-change", "--bootstrap", "20", "--json", "--quiet",
                  "--again")  # the job recorded changed.json as run 2 already
    assert res.returncode in (0, 1), res.stderr
    doc = json.loads(res.stdout)
    assert doc["comparable"] is True and doc["data_change_allowed"] is True
    con = sqlite3.connect(db)
    assert con.execute("SELECT count(*) FROM runs").fetchone()[0] == 3  # all recorded
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()


@pytest.mark.parametrize("args, words", [
    ((), "either a RUN file or --config"),
    (("RUN",), "no history store"),
    (("RUN", "--store", "DB"), "no series"),
    (("RUN", "--store", "DB", "--series", "s", "--baseline", "yesterday"), "baseline must be"),
    (("RUN", "--store", "DB", "--series", "s", "--target-error", "-1"), "--target-error"),
    (("missing.json", "--store", "DB", "--series", "s"), "run file not found"),
    (("--config", "BADKEY"), "unknown key"),
    (("--config", "BADTOML"), "not valid TOML"),
    (("--config", "BADTOL"), "tolerance"),
    (("RUN", "--store", "TEXTDB", "--series", "s"), "not a curvefit history store"),
])
def test_bad_input_exit_2(nightly, tmp_path, args, words):
    tmp, _ = nightly
    (tmp_path / "badkey.toml").write_text('store = "h.db"\nseries = "s"\nlearning_rate = 3\n')
    (tmp_path / "badtoml.toml").write_text('store = "h.db\n')
    (tmp_path / "badtol.toml").write_text('data = "x.csv"\ntarget = "y"\nmodel = "m:M"\n'
                                          'store = "h.db"\nseries = "s"\n'
                                          'tolerances = {test_error_at_ref = "lots"}\n')
    (tmp_path / "text.db").write_text("not a database\n")
    subst = {"RUN": tmp / "first.json", "DB": tmp_path / "new.db",
             "BADKEY": tmp_path / "badkey.toml", "BADTOML": tmp_path / "badtoml.toml",
             "BADTOL": tmp_path / "badtol.toml", "TEXTDB": tmp_path / "text.db"}
    res = run_cli("track", *[subst.get(a, a) for a in args], "--quiet", cwd=tmp_path)
    assert res.returncode == 2, (res.stdout, res.stderr)
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1, res.stderr
    assert words in lines[0] and "Traceback" not in res.stderr


def test_history_bad_input_exit_2(tmp_path):
    for args, words in [(("--store", tmp_path / "none.db"), "not found"),
                        (("--store", tmp_path / "h.db", "--series", "x"), "not found")]:
        if "--series" in args:
            # an empty but valid store: the series is unknown
            run_cli("history", "--store", tmp_path / "plain.db")  # (does not create)
            from test_store import made_store
            made_store(tmp_path / "h.db")
        res = run_cli("history", *args)
        assert res.returncode == 2, res.stderr
        lines = res.stderr.strip().splitlines()
        assert len(lines) == 1 and words in lines[0] and "Traceback" not in res.stderr
    assert not (tmp_path / "plain.db").exists()
