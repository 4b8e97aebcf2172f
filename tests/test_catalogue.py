"""A catalogue of bad inputs through the real command line.

Every case must end the same way: exit 2, exactly one line on stderr (no traceback),
nothing written (no journal, no run file, no report: the case's folder is unchanged),
and within `CASE_LIMIT` seconds. The cases include every example of bad input that a
hostile-user review of curvefit listed (``--jobs 0``, ``--seed -1``, ``--bootstrap 1e9``,
``bound --eps 1e-300``, ``resume = "false"`` in a job file, a run file whose meta is a
list or nested 100,000 deep, journal cells whose size is text or 1e400, an 8-row table,
...). They run concurrently (threads, each a subprocess) to keep the file fast.

The data is scikit-learn's bundled iris table, written to CSV; the valid run file is a
curve built in the test.
"""

from __future__ import annotations

import concurrent.futures
import json
import os
import shutil
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_iris

from conftest import run_cli
from curvefit.core.curve import Curve

CASE_LIMIT = 30.0  # seconds per case: nothing may hang
MODEL = "sklearn.tree:DecisionTreeClassifier"


@dataclass
class Case:
    name: str
    args: list
    files: dict = field(default_factory=dict)   # name -> text written into the case folder
    setup: Callable | None = None               # setup(folder, fixtures) for files built otherwise
    words: str = ""                             # expected in the message, lower case


def _iris(fixtures: Path) -> Path:
    data = load_iris(as_frame=True).frame.rename(columns={"target": "species"})
    path = fixtures / "iris.csv"
    data.to_csv(path, index=False)
    rows = data.iloc[[0, 1, 2, 50, 51, 52, 100, 101]]  # 8 rows, three classes
    rows.to_csv(fixtures / "rows8.csv", index=False)
    inf = data.copy()
    inf.loc[5, "petal width (cm)"] = np.inf
    inf.to_csv(fixtures / "inf.csv", index=False)
    lines = path.read_text().splitlines()
    (fixtures / "mixed.csv").write_text(
        "\n".join([lines[0]] + [ln.replace(",", "\t") for ln in lines[1:]]) + "\n")
    return path


def _run_file(fixtures: Path) -> Path:
    sizes = np.repeat([20, 40, 80, 160], 3)
    errors = 0.05 + 0.8 * sizes ** -0.5 + 0.01 * np.tile([0, 1, 2], 4)
    curve = Curve.from_table(pd.DataFrame({"size": sizes, "repeat": np.tile([0, 1, 2], 4),
                                           "test_error": errors, "train_error": errors / 3}))
    return curve.write(fixtures / "run.json")


def _measured_journal(fixtures: Path) -> Path:
    """A real journal of a small run, for the tampered-journal cases."""
    out = fixtures / "measured" / "run.json"
    out.parent.mkdir()
    proc = run_cli("measure", fixtures / "iris.csv", "--target", "species", "--model", MODEL,
                   "--sizes", "20,40", "--repeats", "1", "--out", out, "--quiet")
    assert proc.returncode == 0, proc.stderr
    return out.with_name("run.json.journal")


def _tampered_journal(change: Callable[[dict], None]):
    def setup(folder: Path, fixtures: Path) -> None:
        lines = (fixtures / "measured" / "run.json.journal").read_text().splitlines()
        cell = json.loads(lines[1])
        change(cell)
        lines[1] = json.dumps(cell)
        (folder / "run.json.journal").write_text("\n".join(lines) + "\n")
    return setup


def _set(key, value):
    return lambda cell: cell.__setitem__(key, value)


def _raw_size(text: str):
    """A journal cell whose size is written as raw JSON text (1e400 is not a Python float)."""
    def setup(folder: Path, fixtures: Path) -> None:
        lines = (fixtures / "measured" / "run.json.journal").read_text().splitlines()
        cell = json.loads(lines[1])
        lines[1] = json.dumps({**cell, "size": "@"}).replace('"@"', text)
        (folder / "run.json.journal").write_text("\n".join(lines) + "\n")
    return setup


def _deep_run(folder: Path, fixtures: Path) -> None:
    (folder / "deep.json").write_text('{"format": "curvefit.run/1", "meta": ' + "[" * 100_000
                                      + "]" * 100_000 + ', "points": []}')


def _run_with(**changes):
    def setup(folder: Path, fixtures: Path) -> None:
        doc = json.loads((fixtures / "run.json").read_text())
        for key, value in changes.items():
            if key == "cell":
                doc["points"][0].update(value)
            elif key == "duplicate":
                doc["points"].append(dict(doc["points"][0]))
            else:
                doc[key] = value
        (folder / "bad.json").write_text(json.dumps(doc))
    return setup


def _job(extra: str) -> dict:
    return {"job.toml": f'data = "{{F}}/iris.csv"\ntarget = "species"\nmodel = "{MODEL}"\n'
                        f'sizes = "20,40"\nrepeats = 1\n{extra}\n'}


def _cases() -> list[Case]:
    F = "{F}"  # the fixtures folder, filled in per case
    iris = f"{F}/iris.csv"
    run = f"{F}/run.json"
    measure = ["measure", iris, "--target", "species", "--model", MODEL, "--sizes", "20,40",
               "--repeats", "1", "--quiet"]
    return [
        # ---- measure: counts, seeds, sizes and limits (issue items 5 and 6)
        Case("jobs 0", measure + ["--jobs", "0"], words="--jobs"),
        Case("jobs -1000", measure + ["--jobs", "-1000"], words="--jobs"),
        Case("jobs 100000", measure + ["--jobs", "100000"], words="at most"),
        Case("seed -1", measure + ["--seed", "-1"], words="--seed"),
        Case("seed 2**40", measure + ["--seed", str(2 ** 40)], words="at most"),
        Case("repeats 1e6 as text", measure + ["--repeats", "1e6"], words="repeats"),
        Case("repeats 1000000", measure[:-3] + ["--repeats", "1000000"], words="at most 1,000"),
        Case("repeats 0", measure[:-3] + ["--repeats", "0"], words="at least 1"),
        Case("sizes 10:100:1e8", measure[:6] + ["--sizes", "10:100:1e8"], words="at most 10,000"),
        Case("sizes 10:100:100000000", measure[:6] + ["--sizes", "10:100:100000000"], words="at most"),
        Case("sizes 0", measure[:6] + ["--sizes", "0,20"], words="below 1"),
        Case("sizes 1.5", measure[:6] + ["--sizes", "1.5,20"], words="whole"),
        Case("sizes text", measure[:6] + ["--sizes", "ten"], words="malformed"),
        Case("sizes over pool", measure[:6] + ["--sizes", "20,100000"], words="training pool"),
        Case("test fraction 1.5", measure + ["--test-fraction", "1.5"], words="between 0 and 1"),
        Case("test fraction 0", measure + ["--test-fraction", "0"], words="test"),
        Case("timeout -1", measure + ["--timeout", "-1"], words="timeout"),
        Case("timeout 1e300", measure + ["--timeout", "1e300"], words="at most"),
        Case("unknown metric", measure + ["--metric", "nonsense"], words="metric"),
        Case("unknown encode", measure + ["--encode", "bogus"], words="encode"),
        Case("unknown backend", measure + ["--backend", "bogus"], words="backend"),
        Case("unknown target", ["measure", iris, "--target", "nope", "--model", MODEL], words="nope"),
        Case("unknown model", measure[:5] + ["no.such.module:Model"], words="no.such"),
        Case("missing data", ["measure", f"{F}/absent.csv", "--target", "y", "--model", MODEL],
             words="not found"),
        Case("data is a folder", ["measure", F, "--target", "y", "--model", MODEL], words="directory"),
        Case("empty data", ["measure", "empty.csv", "--target", "y", "--model", MODEL],
             files={"empty.csv": ""}, words="empty"),
        Case("unknown data format", ["measure", "data.xyz", "--target", "y", "--model", MODEL],
             files={"data.xyz": "a,y\n1,0\n"}, words="format"),
        Case("groups unit without groups", measure + ["--size-unit", "groups"], words="group"),
        Case("groups column absent", measure + ["--groups", "nope"], words="nope"),
        # ---- measure: data problems (issue item 9)
        Case("8-row table", ["measure", f"{F}/rows8.csv", "--target", "species", "--model", MODEL],
             words="too few rows for a learning curve"),
        Case("inf in a feature", ["measure", f"{F}/inf.csv", "--target", "species", "--model", MODEL],
             words="infinite"),
        Case("comma header over tabs", ["measure", f"{F}/mixed.csv", "--target", "species",
                                        "--model", MODEL], words="separated by commas but the rows by tabs"),
        # ---- measure --resume with a damaged journal (issue item 5)
        Case("journal size text", measure + ["--resume", "--out", "run.json"],
             setup=_tampered_journal(_set("size", "forty")), words="size"),
        Case("journal size 1e400", measure + ["--resume", "--out", "run.json"],
             setup=_raw_size("1e400"), words="size is inf"),
        Case("journal repeat -1", measure + ["--resume", "--out", "run.json"],
             setup=_tampered_journal(_set("repeat", -1)), words="repeat"),
        Case("journal error as text", measure + ["--resume", "--out", "run.json"],
             setup=_tampered_journal(_set("test_error", "low")), words="test error"),
        # ---- job files (issue items 5 and 7)
        Case("job resume = 'false'", ["measure", "--config", "job.toml"],
             files=_job('resume = "false"'), words="resume must be true or false"),
        Case("job quiet = 'no'", ["measure", "--config", "job.toml"],
             files=_job('quiet = "no"'), words="quiet must be true or false"),
        Case("job features = 7", ["measure", "--config", "job.toml"], files=_job("features = 7"),
             words="features"),
        Case("job repeats as text", ["measure", "--config", "job.toml"],
             files={"job.toml": _job("")["job.toml"].replace("repeats = 1", 'repeats = "5"')},
             words="repeats"),
        Case("job sizes = 7", ["measure", "--config", "job.toml"],
             files={"job.toml": _job("")["job.toml"].replace('sizes = "20,40"', "sizes = 7")},
             words="sizes"),
        Case("job seed 1.5", ["measure", "--config", "job.toml"], files=_job("seed = 1.5"),
             words="seed"),
        Case("job jobs = true", ["measure", "--config", "job.toml"], files=_job("jobs = true"),
             words="jobs"),
        Case("job timeout as text", ["measure", "--config", "job.toml"], files=_job('timeout = "10"'),
             words="timeout"),
        Case("job unknown key", ["measure", "--config", "job.toml"], files=_job("colour = 3"),
             words="unknown key"),
        Case("job not toml", ["measure", "--config", "job.toml"], files={"job.toml": "data = [\n"},
             words="toml"),
        Case("job missing", ["measure", "--config", "absent.toml"], words="not found"),
        Case("job nested 100000 deep", ["measure", "--config", "job.toml"],
             files={"job.toml": "a = " + "[" * 100_000 + "]" * 100_000 + "\n"}, words="nested too deep"),
        Case("track job resume text", ["track", "--config", "job.toml"],
             files={"job.toml": _job('store = "h.db"\nseries = "s"\nresume = "no"')["job.toml"]},
             words="resume"),
        # ---- run files and curve tables (issue items 5 and 9)
        Case("run meta is a list", ["fit", "bad.json"], setup=_run_with(meta=[1, 2]), words="meta"),
        Case("run meta nested 100000 deep", ["fit", "deep.json"], setup=_deep_run, words="nested"),
        Case("run cell size text", ["fit", "bad.json"], setup=_run_with(cell={"size": "abc"}),
             words="size"),
        Case("run duplicated cell", ["fit", "bad.json"], setup=_run_with(duplicate=True),
             words="narrow the intervals"),
        Case("run not json", ["fit", "bad.json"], files={"bad.json": "{not json"}, words="not valid json"),
        Case("run wrong format", ["fit", "bad.json"], files={"bad.json": '{"format": "x"}'},
             words="not a curvefit run file"),
        Case("empty curve csv", ["fit", "curve.csv"], files={"curve.csv": ""}, words="curve table"),
        Case("header-only curve csv", ["fit", "curve.csv"], files={"curve.csv": "size,test_error\n"},
             words="no rows"),
        Case("run file missing", ["fit", "absent.json"], words="not found"),
        Case("fit bootstrap 1e9", ["fit", run, "--bootstrap", "1000000000"], words="at most 100,000"),
        Case("fit bootstrap 1e9 text", ["fit", run, "--bootstrap", "1e9"], words="bootstrap"),
        Case("fit interval 1.5", ["fit", run, "--interval", "1.5"], words="between 0 and 1"),
        # ---- need and report: one check of an error target (issue item 9)
        Case("need error 2", ["need", run, "--error", "2"], words="between 0 and 1"),
        Case("need gap 1.5", ["need", run, "--gap", "1.5"], words="between 0 and 1"),
        Case("need error nan", ["need", run, "--error", "nan"], words="finite"),
        Case("need two targets", ["need", run, "--error", "0.1", "--gap", "0.1"], words="exactly one"),
        Case("need budget without cost", ["need", run, "--error", "0.1", "--budget", "100"],
             words="budget"),
        Case("report target error 2", ["report", run, "--target-error", "2"], words="between 0 and 1"),
        Case("report not html", ["report", run, "--out", "report.txt"], words="html"),
        # ---- bound (issue item 5 and 6)
        Case("bound eps 1e-300", ["bound", "samples", "--vc-dim", "3", "--eps", "1e-300"],
             words="beyond 1e+300"),
        Case("bound delta 1e-320", ["bound", "samples", "--vc-dim", "3", "--eps", "0.1", "--delta",
                                    "1e-320"], words="at least 1e-300"),
        Case("bound eps 0", ["bound", "samples", "--vc-dim", "3", "--eps", "0"], words="between 0 and 1"),
        Case("bound eps 1", ["bound", "test-samples", "--eps", "1"], words="between 0 and 1"),
        Case("bound vc-dim -1", ["bound", "samples", "--vc-dim", "-1", "--eps", "0.1"], words="vc-dim"),
        Case("bound vc-dim 1.5", ["bound", "samples", "--vc-dim", "1.5", "--eps", "0.1"], words="vc-dim"),
        Case("bound vc-dim 1e20", ["bound", "error-bar", "--n", "100", "--vc-dim", "1e20", "--growth",
                                   "sauer"], words="2**53"),
        Case("bound growth unknown", ["bound", "samples", "--vc-dim", "3", "--eps", "0.1", "--growth",
                                      "bogus"], words="growth"),
        Case("bound n 1:1e9:1e8", ["bound", "error-bar", "--n", "1:1e9:1e8", "--vc-dim", "3"],
             words="at most 10,000"),
        Case("bound n 0", ["bound", "error-bar", "--n", "0", "--vc-dim", "3"], words="--n"),
        Case("bound too many rows", ["bound", "samples", "--vc-dim", "1:1000:200", "--eps",
                                     "0.01:0.5:200"], words="rows"),
        Case("bound n-test 0", ["bound", "test-error-bar", "--n-test", "0"], words="n-test"),
        Case("bound errors over n-test", ["bound", "test-error-bar", "--n-test", "3", "--errors", "5"],
             words="errors"),
        Case("bound expected error 1.5", ["bound", "test-samples", "--eps", "0.05",
                                          "--expected-error", "1.5"], words="expected"),
        Case("bound method unknown", ["bound", "test-samples", "--eps", "0.05", "--method", "wald"],
             words="method"),
        # ---- other commands that measure
        Case("probe jobs 0", ["capacity", "--probe", iris, "--target", "species", "--model", MODEL,
                              "--jobs", "0"], words="--jobs"),
        Case("probe max-n 1e13", ["capacity", "--probe", "--n-features", "3", "--model", MODEL,
                                  "--max-n", "10000000000000"], words="at most"),
        Case("tradeoff jobs 0", ["tradeoff", iris, "--target", "species", "--model", MODEL, "--vary",
                                 "max_depth=1,2", "--sizes", "20,40", "--jobs", "0"], words="--jobs"),
        Case("tradeoff repeats 1e6", ["tradeoff", iris, "--target", "species", "--model", MODEL,
                                      "--vary", "max_depth=1,2", "--sizes", "20,40", "--repeats",
                                      "1000000"], words="at most 1,000"),
        Case("demo jobs 0", ["demo", "--jobs", "0"], words="--jobs"),
        # ---- output paths (issue item 5)
        Case("measure out .", measure + ["--out", "."], words="."),
        Case("measure out /proc", measure + ["--out", "/proc/curvefit-run.json"], words="proc"),
        Case("history plot .", ["history", "--store", "h.db", "--plot", "."], words="."),
        Case("history store missing", ["history", "--store", "absent.db"], words="absent.db"),
    ]


def _snapshot(folder: Path) -> dict:
    return {str(p.relative_to(folder)): (p.stat().st_size, p.stat().st_mtime_ns)
            for p in sorted(folder.rglob("*"))}


def _prepare(case: Case, folder: Path, fixtures: Path) -> list[str]:
    folder.mkdir()
    for name, text in case.files.items():
        (folder / name).write_text(text.replace("{F}", str(fixtures)))
    if case.setup is not None:
        case.setup(folder, fixtures)
    return [str(a).replace("{F}", str(fixtures)) for a in case.args]


def _run_case(case: Case, folder: Path, fixtures: Path) -> tuple[Case, list[str]]:
    """Run one case; the list of what went wrong (empty when the case behaved)."""
    args = _prepare(case, folder, fixtures)
    before = _snapshot(folder)
    started = time.monotonic()
    try:
        proc = run_cli(*args, cwd=folder, timeout=CASE_LIMIT + 30)
    except Exception as exc:  # the subprocess timeout: a hang
        return case, [f"did not finish: {exc}"]
    took = time.monotonic() - started
    problems = []
    lines = proc.stderr.strip().splitlines()
    if proc.returncode != 2:
        problems.append(f"exit {proc.returncode}")
    if len(lines) != 1:
        problems.append(f"{len(lines)} stderr lines")
    if "Traceback" in proc.stderr:
        problems.append("a traceback")
    if lines and case.words and case.words.lower() not in proc.stderr.lower():
        problems.append(f"message lacks {case.words!r}")
    if took > CASE_LIMIT:
        problems.append(f"took {took:.0f} s")
    after = _snapshot(folder)
    if after != before:
        problems.append(f"files changed: {sorted(set(after) ^ set(before)) or 'contents'}")
    if problems:
        problems.append(f"stderr: {proc.stderr.strip()[-300:]!r}")
    return case, problems


pytestmark = pytest.mark.slow  # about 90 command lines; minutes on a loaded 2-core machine


@pytest.fixture(scope="module")
def fixtures(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("catalogue-fixtures")
    _iris(folder)
    _run_file(folder)
    _measured_journal(folder)
    return folder


@pytest.fixture(scope="module")
def outcomes(fixtures, tmp_path_factory) -> dict:
    cases = _cases()
    root = tmp_path_factory.mktemp("catalogue")
    fixture_state = _snapshot(fixtures)
    with concurrent.futures.ThreadPoolExecutor(max_workers=min(4, os.cpu_count() or 2)) as pool:
        futures = [pool.submit(_run_case, case, root / f"case{i:03d}", fixtures)
                   for i, case in enumerate(cases)]
        results = {case.name: problems for case, problems in (f.result() for f in futures)}
    assert _snapshot(fixtures) == fixture_state, "a case wrote into the shared fixtures"
    shutil.rmtree(root, ignore_errors=True)
    return results


def test_catalogue_has_at_least_60_cases_with_distinct_names():
    names = [c.name for c in _cases()]
    assert len(names) >= 60 and len(set(names)) == len(names)


@pytest.mark.parametrize("name", [c.name for c in _cases()])
def test_bad_input_is_refused_with_one_line_and_nothing_written(outcomes, name):
    assert outcomes[name] == [], f"{name}: {'; '.join(outcomes[name])}"
