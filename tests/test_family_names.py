"""Family names: every output uses the descriptive names; files with the old codes load.

The old scheme (a short code with a parameter count, such as ``pow3``) is mapped in one
place, ``curvefit.fitting.families.LEGACY_NAMES``; these checks run the real command line.
"""

import json
import re
import sqlite3

import pytest
from test_fitting import measured_curve

from conftest import run_cli
from curvefit.fitting.families import FAMILIES, LEGACY_NAMES, current_name, rename_legacy

OLD_CODE = re.compile(r"(?<![\w.\-])(?:last1|pow[234]|exp3|i?log2(?!\()|vap3|mmf4|wbl4|joint5)\b")


def assert_no_old_code(text: str, where: str) -> None:
    found = OLD_CODE.findall(text)
    assert not found, f"{where} shows old family codes {sorted(set(found))}"


def test_every_old_name_maps_to_a_registered_family():
    assert set(LEGACY_NAMES.values()) == set(FAMILIES)
    for name in FAMILIES:
        assert not re.fullmatch(r"[a-z]+\d", name), name  # no code with a parameter count
        assert current_name(name) == name


def test_rename_legacy_rewrites_names_notes_and_lists():
    doc = {"best": "pow3", "runner_up": "joint5", "table": [{"family": "wbl4"}],
           "families": ["ilog2", "log2"], "note": "family vap3; 4 repeats", "other": "pow3x"}
    assert rename_legacy(doc) == {
        "best": "power-law-floor", "runner_up": "joint-train-test",
        "table": [{"family": "weibull"}], "families": ["inverse-log", "log-decline"],
        "note": "family vapor-pressure; 4 repeats", "other": "pow3x"}


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    d = tmp_path_factory.mktemp("names")
    m = measured_curve("digits_knn")
    csv = d / "curve.csv"
    m.table.to_csv(csv, index=False)
    return {"dir": d, "csv": csv, "run": m.curve.write(d / "run.json")}


def test_old_code_on_the_command_line_is_refused_with_the_new_name(work):
    r = run_cli("fit", work["csv"], "--families", "pow3,exp3")
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert "'pow3' is now called 'power-law-floor'" in lines[0]
    assert "--families power-law-floor,exponential-floor" in lines[0]


def test_no_command_output_shows_an_old_code(work):
    d = work["dir"]
    outputs = {}
    for args in (["fit", work["csv"], "--bootstrap", "20"],
                 ["fit", work["csv"], "--bootstrap", "20", "--json"],
                 ["fit", work["csv"], "--on", "gap", "--bootstrap", "20"],
                 ["need", work["csv"], "--error", "0.02", "--bootstrap", "20"],
                 ["need", work["csv"], "--error", "0.02", "--bootstrap", "20", "--json"],
                 ["track", work["run"], "--store", d / "h.db", "--series", "s", "--bootstrap", "20"],
                 ["track", work["run"], "--store", d / "h.db", "--series", "s", "--bootstrap", "20",
                  "--json", "--again"],  # the same run file again: recorded only with --again
                 ["history", "--store", d / "h.db"],
                 ["history", "--store", d / "h.db", "--json"],
                 ["report", work["run"], "--out", d / "r.html", "--bootstrap", "20", "--json"]):
        r = run_cli(*args)
        assert r.returncode in (0, 1), (args, r.stderr)
        outputs[" ".join(map(str, args[:1] + args[-1:]))] = r.stdout + r.stderr
    outputs["report html"] = (d / "r.html").read_text(encoding="utf-8")
    for where, text in outputs.items():
        assert_no_old_code(text, where)
    # the names are really there, not merely absent codes
    assert any(name in outputs["report html"] for name in FAMILIES)


def test_history_written_with_old_codes_is_shown_with_new_names(work):
    d = work["dir"]
    db = d / "old.db"
    r = run_cli("track", work["run"], "--store", db, "--series", "s", "--bootstrap", "20")
    assert r.returncode == 0, r.stderr
    # rewrite the store as a version before the rename would have written it
    con = sqlite3.connect(db)
    for (summary,) in con.execute("SELECT summary FROM fits").fetchall():
        doc = json.loads(summary)
        reverse = {v: k for k, v in LEGACY_NAMES.items()}
        doc["best"] = reverse[doc["best"]]
        con.execute("UPDATE fits SET summary = ?", (json.dumps(doc),))
    con.execute("UPDATE headline SET note = 'family pow3' WHERE note LIKE 'family %'")
    con.execute("UPDATE headline SET note = 'family pow3' WHERE name = 'decay_exponent'")
    con.commit()
    con.close()
    assert "pow3" in db.read_bytes().decode("latin-1")
    r = run_cli("history", "--store", db, "--json")
    assert r.returncode == 0, r.stderr
    assert_no_old_code(r.stdout, "history of an old store")
    r = run_cli("track", work["run"], "--store", db, "--series", "s", "--bootstrap", "20", "--again")
    assert r.returncode in (0, 1), r.stderr
    assert_no_old_code(r.stdout + r.stderr, "track against an old store")


def test_old_run_file_and_saved_capacity_load(work, tmp_path):
    doc = json.loads(work["run"].read_text())
    doc["meta"]["note"] = "fitted with family pow3"
    old = tmp_path / "old.json"
    old.write_text(json.dumps(doc))
    from curvefit.core.curve import Curve

    assert Curve.read(old).meta["note"] == "fitted with family power-law-floor"
