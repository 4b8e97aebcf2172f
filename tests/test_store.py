"""Tests of the history store (curvefit/store.py) and the comparison rule (tracking.py)."""

import itertools
import json
import math
import sqlite3
import subprocess
import sys
import textwrap
import time

import numpy as np
import pandas as pd
import pytest

from conftest import ROOT, run_cli
from curvefit.core.curve import Curve
from curvefit.core.errors import InputError
from curvefit.core.estimate import Estimate
from curvefit.history import figures as tracking
from curvefit.history.figures import Tolerance, compare_figure, make_figure
from curvefit.history.store import APPLICATION_ID, SCHEMA_VERSION, Store

_MEASURED = itertools.count()


def _curve(fingerprint="abc123", metric="error", shift=0.0, sizes=(50, 100, 200), repeats=2):
    """A measured curve; each call is a new measurement (its own start stamp in the meta)."""
    rows = []
    for s in sizes:
        for r in range(repeats):
            rows.append({"size": s, "repeat": r, "train_error": 0.02,
                         "test_error": 0.5 / math.sqrt(s) + shift + 0.001 * r,
                         "n_test": 100, "n_test_errors": 5, "fit_seconds": 0.01,
                         "status": "ok", "message": ""})
    return Curve.from_table(pd.DataFrame(rows), meta={
        "data_fingerprint": fingerprint, "metric": metric,
        "model": {"spec": "sklearn.linear_model:LogisticRegression", "params": {"C": 1.0}},
        "started": f"2026-12-01T00:00:{next(_MEASURED):02d}"})


def _figs(err=0.05, half=0.002, expo=0.5, samples=400.0):
    return [make_figure("test_error_at_ref", err, err - half, err + half),
            make_figure("decay_exponent", expo, expo - 0.05, expo + 0.05),
            make_figure("samples_for_target", samples, samples * 0.9, samples * 1.1)]


def made_store(address):
    """A store with one run in series ``setup`` (a store is created by its first write)."""
    with Store(address) as s:
        s.record(_curve(), None, series="setup", headline=_figs(), code_version=None)


@pytest.fixture
def store(tmp_path):
    s = Store(tmp_path / "history.db")
    yield s
    s.close()


# ----------------------------------------------------------------------------- basics
def test_record_and_read_back(store):
    c = _curve()
    rid = store.record(c, None, series="nightly", headline=_figs(), target_error=0.04)
    runs = store.runs("nightly")
    assert runs["run_id"].tolist() == [rid]
    assert runs.loc[0, "n_points"] == len(c.points)
    assert runs.loc[0, "test_error_at_ref"] == pytest.approx(0.05)
    assert runs.loc[0, "test_error_at_ref_low"] == pytest.approx(0.048)
    assert runs.loc[0, "data_fingerprint"] == "abc123"
    back = store.curve(rid)
    pd.testing.assert_frame_equal(back.points, c.points, check_dtype=False)
    assert back.meta["metric"] == "error"
    assert back.meta["tracking"]["reference_size"] == 200  # largest size of the first run
    cfg = store.series_config("nightly")
    assert cfg["reference_size"] == 200 and cfg["target_error"] == 0.04
    h = store.headline(rid)
    assert h["decay_exponent"].better == "higher"
    assert h["test_error_at_ref"].better == "lower"


def test_pragmas_and_text_only_columns(store, tmp_path):
    store.record(_curve(), None, series="s", headline=_figs())
    con = sqlite3.connect(tmp_path / "history.db")
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert con.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert con.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
    # JSON text, never blobs: nothing in the store could be unpickled
    assert con.execute("SELECT typeof(meta) FROM runs").fetchone()[0] == "text"
    assert con.execute("SELECT typeof(config) FROM series").fetchone()[0] == "text"
    n_blobs = con.execute("SELECT count(*) FROM runs WHERE typeof(meta) = 'blob' OR "
                          "typeof(model) = 'blob'").fetchone()[0]
    assert n_blobs == 0
    assert json.loads(con.execute("SELECT model FROM runs").fetchone()[0])["params"] == {"C": 1.0}
    con.close()


def test_foreign_keys_declared(store):
    store.record(_curve(), None, series="s", headline=_figs())
    con = sqlite3.connect(store.path)
    refs = {t: {r[2] for r in con.execute(f"PRAGMA foreign_key_list({t})")}
            for t in ("runs", "points", "fits", "headline")}
    con.close()
    assert refs == {"runs": {"series"}, "points": {"runs"}, "fits": {"runs"}, "headline": {"runs"}}


def test_record_with_a_fit_stores_the_figures_of_history_figures(store):
    # the documented one-call form Store.record(curve, fit, series=...) keeps working;
    # its figures are those of history.figures.headline_figures at the reference size
    from curvefit.fitting import fit_curve

    curve = _curve(sizes=(50, 100, 200, 400, 800), repeats=3)
    fit = fit_curve(curve, bootstrap=20)
    rid = store.record(curve, fit, series="s", target_error=0.03)
    ref = store.series_config("s")["reference_size"]
    want = tracking.headline_figures(fit, reference_size=ref, target_error=0.03, curve=curve)
    got = store.headline(rid)
    assert {f.name for f in want} == set(got)
    for f in want:
        assert got[f.name].estimate == pytest.approx(f.estimate)


def test_reference_size_is_fixed_per_series(store):
    store.record(_curve(sizes=(50, 100)), None, series="s", headline=_figs())
    store.record(_curve(sizes=(50, 100, 400)), None, series="s", headline=_figs())
    assert store.series_config("s")["reference_size"] == 100
    with pytest.raises(InputError, match="reference size"):
        store.record(_curve(), None, series="s", headline=_figs(), reference_size=400)


def test_code_version_recorded_inside_git_checkout(tmp_path, monkeypatch):
    head = subprocess.run(["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True,
                          text=True).stdout.strip()
    monkeypatch.chdir(ROOT)
    with Store(tmp_path / "h.db") as s:
        rid = s.record(_curve(), None, series="s", headline=_figs())
        assert s.runs("s").loc[0, "code_version"] == head
        monkeypatch.chdir(tmp_path)  # not a git checkout
        s.record(_curve(), None, series="s", headline=_figs())
        assert pd.isna(s.runs("s").loc[1, "code_version"])
        assert rid == 1


def test_unknown_series_and_run(store):
    store.record(_curve(), None, series="a", headline=_figs())
    with pytest.raises(InputError, match="series 'b' not found"):
        store.runs("b")
    with pytest.raises(InputError, match="run 42 not found"):
        store.compare(42)


# ----------------------------------------------------------------------------- comparison
def test_regression_rule_needs_tolerance_and_separated_intervals():
    # common practice: a change counts only if larger than the tolerance AND outside noise
    base = make_figure("test_error_at_ref", 0.100, 0.095, 0.105)
    small = make_figure("test_error_at_ref", 0.108, 0.1055, 0.1105)  # separate, within 0.01
    noisy = make_figure("test_error_at_ref", 0.130, 0.090, 0.170)    # beyond 0.01, overlapping
    clear = make_figure("test_error_at_ref", 0.130, 0.125, 0.135)
    tol = Tolerance(0.01)
    assert compare_figure(small, base, tol).status == "same"
    assert compare_figure(noisy, base, tol).status == "same"
    assert compare_figure(clear, base, tol).status == "regressed"
    assert compare_figure(clear, base, tol).worse_by == pytest.approx(0.03)
    assert compare_figure(base, clear, tol).status == "improved"


def test_exponent_direction_slower_decay_is_worse():
    fast = make_figure("decay_exponent", 0.50, 0.45, 0.55)
    slow = make_figure("decay_exponent", 0.20, 0.15, 0.25)
    assert compare_figure(slow, fast, Tolerance(0.2, relative=True)).status == "regressed"
    assert compare_figure(fast, slow, Tolerance(0.2, relative=True)).status == "improved"
    # CurveFit.exponent is b in a*n^(-b), i.e. -beta of Hestness et al. 2017: kept as is
    f = tracking.decay_figure(Estimate(0.35, 0.30, 0.40))
    assert (f.estimate, f.low, f.high) == pytest.approx((0.35, 0.30, 0.40))
    assert f.better == "higher"


def test_unreachable_target_is_a_regression_when_baseline_was_reachable():
    class Unreachable:
        n, low, high, reachable, message = math.nan, 5000.0, math.nan, False, "above asymptote"

    cur = tracking.samples_figure(Unreachable(), 0.01)
    assert math.isinf(cur.estimate) and cur.better == "lower"
    base = make_figure("samples_for_target", 800, 700, 900)
    assert compare_figure(cur, base, Tolerance(0.25, relative=True)).status == "regressed"
    assert compare_figure(cur, cur, Tolerance(0.25, relative=True)).status == "same"


def test_relative_and_parsed_tolerances():
    assert tracking.parse_tolerance("x", "20%") == Tolerance(0.2, True)
    assert tracking.parse_tolerance("x", {"relative": 0.1}) == Tolerance(0.1, True)
    assert tracking.parse_tolerance("x", 0.02) == Tolerance(0.02, False)
    for bad in ("lots", -1, True, {"sideways": 1}):
        with pytest.raises(InputError):
            tracking.parse_tolerance("x", bad)
    with pytest.raises(InputError, match="unknown figure"):
        tracking.resolve_tolerances({"accuracy": 0.1})


def test_compare_previous_best_and_explicit(store):
    r1 = store.record(_curve(), None, series="s", headline=_figs(err=0.05))
    first = store.compare(r1)
    assert first.baseline_id is None and first.exit_code == 0 and first.verdict == "first run"
    r2 = store.record(_curve(), None, series="s", headline=_figs(err=0.04))   # improved
    r3 = store.record(_curve(), None, series="s", headline=_figs(err=0.047))  # worse than r2 only
    c = store.compare(r3, "previous")
    assert c.baseline_id == r2 and c.regressed == [] and c.exit_code == 0  # 0.007 < 0.01
    c = store.compare(r3, "previous", tolerances={"test_error_at_ref": 0.001}, gate="all")
    assert c.regressed == ["test_error_at_ref"] and c.exit_code == 1
    assert store.compare(r3, "best").baseline_id == r2
    assert store.compare(r3, r1).baseline_id == r1
    assert store.compare(r3, str(r1)).improved == []  # 0.047 vs 0.05: within tolerance
    r4 = store.record(_curve(), None, series="s", headline=_figs(err=0.09, samples=2000))
    c = store.compare(r4, "best", gate="all")
    assert c.baseline_id == r2
    assert set(c.regressed) == {"test_error_at_ref", "samples_for_target"}
    md = c.to_markdown()
    assert "REGRESSED" in md and "samples_for_target" in md
    d = c.to_dict()
    assert d["verdict"] == "regressed" and d["baseline_id"] == r2
    json.dumps(d, allow_nan=True)
    with pytest.raises(InputError, match="baseline must be"):
        store.compare(r4, "yesterday")
    with pytest.raises(InputError, match="its own baseline"):
        store.compare(r4, r4)


def test_series_tolerances_are_used(store):
    store.record(_curve(), None, series="s", headline=_figs(err=0.05),
                 tolerances={"test_error_at_ref": 0.001})
    r2 = store.record(_curve(), None, series="s", headline=_figs(err=0.06))
    assert store.series_config("s")["tolerances"] == {"test_error_at_ref": 0.001}
    assert store.compare(r2, gate="all").regressed == ["test_error_at_ref"]
    assert store.compare(r2, tolerances={"test_error_at_ref": "50%"}, gate="all").regressed == []


def test_data_or_metric_change_is_not_comparable(store):
    store.record(_curve(fingerprint="aaa"), None, series="s", headline=_figs(err=0.05))
    r2 = store.record(_curve(fingerprint="bbb"), None, series="s", headline=_figs(err=0.09))
    c = store.compare(r2)
    assert not c.comparable and c.exit_code == 2 and c.regressed == []
    assert "data fingerprint differs" in c.reasons[0]
    c = store.compare(r2, allow_data_change=True, gate="all")
    assert c.comparable and c.regressed == ["test_error_at_ref"] and c.data_change_allowed
    r3 = store.record(_curve(fingerprint="bbb", metric="log_loss"), None, series="s",
                      headline=_figs(err=0.09))
    c = store.compare(r3, "previous")
    assert not c.comparable and "metric differs" in c.reasons[0]


# ----------------------------------------------------------------------------- migration
V1_DDL = """
CREATE TABLE series (id INTEGER PRIMARY KEY, name TEXT NOT NULL UNIQUE,
    config TEXT NOT NULL DEFAULT '{}', created TEXT NOT NULL);
CREATE TABLE runs (id INTEGER PRIMARY KEY,
    series_id INTEGER NOT NULL REFERENCES series(id) ON DELETE CASCADE,
    created TEXT NOT NULL, meta TEXT NOT NULL DEFAULT '{}', data_fingerprint TEXT,
    model TEXT, metric TEXT);
CREATE TABLE points (run_id INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
    size INTEGER NOT NULL, repeat INTEGER NOT NULL, train_error REAL, test_error REAL,
    n_test REAL, n_test_errors REAL, fit_seconds REAL, status TEXT NOT NULL,
    message TEXT NOT NULL DEFAULT '', PRIMARY KEY (run_id, size, repeat));
CREATE TABLE fits (run_id INTEGER PRIMARY KEY REFERENCES runs(id) ON DELETE CASCADE,
    summary TEXT NOT NULL);
CREATE TABLE headline (run_id INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
    name TEXT NOT NULL, estimate REAL, low REAL, high REAL, level REAL,
    PRIMARY KEY (run_id, name));
"""


def test_migration_from_v1_keeps_data(tmp_path):
    path = tmp_path / "old.db"
    con = sqlite3.connect(path)
    con.executescript(V1_DDL)
    con.execute("INSERT INTO series (id, name, config, created) VALUES (1, 'old', ?, '2026-01-01')",
                (json.dumps({"reference_size": 200}),))
    con.execute("INSERT INTO runs (id, series_id, created, meta, data_fingerprint, model, metric)"
                " VALUES (1, 1, '2026-01-01', ?, 'fp1', 'm:M', 'error')",
                (json.dumps({"metric": "error", "data_fingerprint": "fp1"}),))
    for s, e in [(50, 0.2), (200, 0.1)]:
        con.execute("INSERT INTO points (run_id, size, repeat, test_error, status)"
                    " VALUES (1, ?, 0, ?, 'ok')", (s, e))
    con.execute("INSERT INTO fits VALUES (1, ?)", (json.dumps({"best": "power-law-floor"}),))
    con.execute("INSERT INTO headline VALUES (1, 'test_error_at_ref', 0.1, 0.09, 0.11, 0.9)")
    con.execute("INSERT INTO headline VALUES (1, 'decay_exponent', 0.4, 0.3, 0.5, 0.9)")
    con.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    con.execute("PRAGMA user_version = 1")
    con.commit()
    con.close()

    with Store(path) as s:
        assert s.schema_version == SCHEMA_VERSION == 4
        runs = s.runs("old")
        assert runs["run_id"].tolist() == [1]
        assert runs.loc[0, "n_points"] == 2 and pd.isna(runs.loc[0, "code_version"])
        assert runs.loc[0, "test_error_at_ref"] == pytest.approx(0.1)
        h = s.headline(1)
        assert h["decay_exponent"].better == "higher"      # filled by the migration
        assert h["test_error_at_ref"].better == "lower"
        assert s.fit_summary(1) == {"best": "power-law-floor"}
        assert s.curve(1).points["test_error"].tolist() == [0.2, 0.1]
        r2 = s.record(_curve(fingerprint="fp1"), None, series="old",
                      headline=[make_figure("test_error_at_ref", 0.2, 0.19, 0.21)])
        assert s.compare(r2, gate="all").regressed == ["test_error_at_ref"]
        assert s.verdict(1) is None and s.accepted_run("old") is None
    con = sqlite3.connect(path)
    cols = {r[1] for r in con.execute("PRAGMA table_info(runs)")}
    assert {"code_version", "verdict", "baseline_id", "run_digest"} <= cols
    assert con.execute("SELECT count(*) FROM accepted").fetchone()[0] == 0
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()


def test_newer_schema_is_refused(tmp_path):
    path = tmp_path / "new.db"
    made_store(path)
    con = sqlite3.connect(path)
    con.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    con.close()
    with pytest.raises(InputError, match="newer"):
        Store(path)


# ----------------------------------------------------------------------------- not a store
def _foreign_sqlite(path):
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE customers (id INTEGER, name TEXT)")
    con.commit()
    con.close()


def _corrupt_sqlite(path):
    made_store(path)
    data = bytearray(path.read_bytes())
    # keep the 16-byte header, destroy the rest of the first page (schema)
    data[16:4096] = np.random.default_rng(0).integers(0, 256, 4096 - 16, dtype=np.uint8).tobytes()
    path.write_bytes(bytes(data))
    for side in ("-wal", "-shm"):
        p = path.with_name(path.name + side)
        if p.exists():
            p.unlink()


@pytest.mark.parametrize("kind", ["random", "text", "foreign", "corrupt"])
def test_not_a_store_is_input_error(tmp_path, kind):
    path = tmp_path / "x.db"
    if kind == "random":
        path.write_bytes(np.random.default_rng(1).integers(0, 256, 5000, dtype=np.uint8).tobytes())
    elif kind == "text":
        path.write_text("size,test_error\n10,0.3\n")
    elif kind == "foreign":
        _foreign_sqlite(path)
    else:
        _corrupt_sqlite(path)
    before = path.read_bytes()
    with pytest.raises(InputError):
        Store(path)
    if kind != "corrupt":
        assert path.read_bytes() == before  # refused without touching the file


@pytest.mark.parametrize("kind", ["random", "foreign", "corrupt"])
def test_not_a_store_cli_exit_2(tmp_path, kind):
    path = tmp_path / "x.db"
    {"random": lambda p: p.write_bytes(b"\x00\xff" * 3000), "foreign": _foreign_sqlite,
     "corrupt": _corrupt_sqlite}[kind](path)
    res = run_cli("history", "--store", path)
    assert res.returncode == 2, res.stderr
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in res.stderr
    assert str(path) in lines[0]
    assert res.stdout == ""


# ----------------------------------------------------------------------------- concurrency
WRITER = textwrap.dedent("""
    import sys, time, math
    from pathlib import Path
    import pandas as pd
    from curvefit.core.curve import Curve
    from curvefit.history.store import Store
    from curvefit.history.figures import make_figure
    path, tag, n, go = sys.argv[1], sys.argv[2], int(sys.argv[3]), Path(sys.argv[4])
    while not go.exists():
        time.sleep(0.005)
    for i in range(n):
        # a fresh connection each time, as separate nightly jobs would have
        with Store(path) as s:
            rows = [{"size": sz, "repeat": r, "test_error": 1 / sz + r * 1e-3}
                    for sz in (10, 20, 40, 80) for r in range(3)]
            c = Curve.from_table(pd.DataFrame(rows), meta={"data_fingerprint": "same",
                                                           "started": f"{tag}-{i}"})
            s.record(c, None, series=tag if i % 2 else "shared", code_version=None,
                     headline=[make_figure("test_error_at_ref", 0.1 + i, 0.0, 1.0)])
    print("done", tag)
""")


def run_writers(address, tmp_path, n_procs=12, n=6):
    """Start ``n_procs`` real processes that wait at a start line, then each record ``n``
    runs into ``address`` through a fresh connection per run; returns when all exit."""
    go = tmp_path / "go"
    procs = [subprocess.Popen([sys.executable, "-c", WRITER, str(address), f"w{k}", str(n), str(go)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
             for k in range(n_procs)]
    time.sleep(2.0)  # let them import and wait at the start line, so they race on creation too
    go.touch()
    outs = [p.communicate(timeout=300) for p in procs]
    for p, (o, e) in zip(procs, outs):
        assert p.returncode == 0, e


def check_writers(s, n_procs=12, n=6):
    """Nothing lost: every run, point and figure of `run_writers` is in the store."""
    runs = pd.concat([s.runs(name) for name in s.series_names()])
    assert len(runs) == n_procs * n
    assert runs["n_points"].tolist() == [12] * (n_procs * n)
    assert sorted(s.series_names()) == sorted([f"w{k}" for k in range(n_procs)] + ["shared"])
    assert len(s.runs("shared")) == n_procs * (n // 2)
    assert runs["test_error_at_ref"].notna().all()


def test_twelve_processes_record_concurrently(tmp_path):
    path = tmp_path / "shared.db"
    run_writers(path, tmp_path)
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert con.execute("SELECT count(*) FROM points").fetchone()[0] == 12 * 6 * 12
    assert con.execute("PRAGMA foreign_key_check").fetchall() == []
    con.close()
    with Store(path) as s:
        check_writers(s)


# ----------------------------------------------------------------------------- noise floor
def test_measurement_interval_matches_scipy_exact_and_t():
    from scipy import stats

    rows = [{"size": 200, "repeat": r, "test_error": e, "n_test": 50, "n_test_errors": e * 50}
            for r, e in enumerate([0.04, 0.06, 0.02])]
    c = Curve.from_table(pd.DataFrame(rows))
    m = tracking.measurement_interval(c, 180, 0.9)  # nearest measured size is 200
    assert m.note == 200 and m.estimate == pytest.approx(0.04)
    # reference: scipy's exact (Clopper-Pearson 1934) interval of 6 errors in 150 rows
    ci = stats.binomtest(6, 150).proportion_ci(confidence_level=0.9, method="exact")
    # reference: Student t interval of the three repeats' mean
    half_t = stats.t.ppf(0.95, 2) * np.std([0.04, 0.06, 0.02], ddof=1) / math.sqrt(3)
    assert m.low == pytest.approx(min(ci.low, 0.04 - half_t))
    assert m.high == pytest.approx(max(ci.high, 0.04 + half_t))


def test_headline_interval_widened_to_measurement_noise():
    rows = [{"size": s, "repeat": r, "test_error": e, "n_test": 100, "n_test_errors": e * 100}
            for s, es in [(100, (0.10, 0.14)), (400, (0.05, 0.07))] for r, e in enumerate(es)]
    c = Curve.from_table(pd.DataFrame(rows))

    class TightFit:  # a fit whose own intervals are far too narrow
        curve = c

        def error_at(self, n, interval=0.9):
            return Estimate(0.06, 0.0599, 0.0601, interval)

        def exponent(self, interval=0.9):
            return None

        def asymptote(self, interval=0.9):
            return Estimate(0.03, 0.0299, 0.0301, interval)

    figs = {f.name: f for f in tracking.headline_figures(TightFit(), reference_size=400)}
    m = tracking.measurement_interval(c, 400, 0.9)
    e = figs["test_error_at_ref"]
    assert e.low == pytest.approx(max(0.0, 0.06 - (m.estimate - m.low)))  # errors are >= 0
    assert e.high == pytest.approx(0.06 + (m.high - m.estimate))
    assert "widened" in e.note
    assert figs["asymptote"].high > 0.0301 and "decay_exponent" not in figs


def test_exponents_of_different_families_are_not_gated():
    a = tracking.decay_figure(Estimate(0.5, 0.45, 0.55), family="power-law-floor")
    b = tracking.decay_figure(Estimate(0.1, 0.05, 0.15), family="morgan-mercer-flodin")
    c = tracking.decay_figure(Estimate(0.1, 0.05, 0.15), family="power-law-floor")
    tol = Tolerance(0.2, relative=True)
    assert compare_figure(b, a, tol).status == "info"
    assert compare_figure(c, a, tol).status == "regressed"
    # power-law fixes its floor at 0: comparing it with power-law-floor's fitted floor says nothing
    fixed = make_figure("asymptote", 0.0, 0.0, 0.0, note="family power-law")
    free = make_figure("asymptote", 0.09, 0.08, 0.10, note="family power-law-floor")
    assert compare_figure(free, fixed, Tolerance(0.01)).status == "info"
    free0 = make_figure("asymptote", 0.0, 0.0, 0.01, note="family power-law-floor")
    assert compare_figure(free, free0, Tolerance(0.01)).status == "regressed"


def test_exponent_not_gated_with_two_repeats():
    def fit_on(repeats):
        rows = [{"size": s, "repeat": r, "test_error": 1 / s} for s in (10, 20, 40) for r in range(repeats)]

        class Fit:
            best, curve = "power-law-floor", Curve.from_table(pd.DataFrame(rows))

            def error_at(self, n, interval=0.9):
                return Estimate(0.1, 0.09, 0.11, interval)

            def exponent(self, interval=0.9):
                return Estimate(0.5, 0.45, 0.55, interval)

            def asymptote(self, interval=0.9):
                return None
        return Fit()

    two = {f.name: f for f in tracking.headline_figures(fit_on(2), reference_size=40)}
    three = {f.name: f for f in tracking.headline_figures(fit_on(3), reference_size=40)}
    assert two["decay_exponent"].better is None and "not gated" in two["decay_exponent"].note
    assert three["decay_exponent"].better == "higher"
    slow = tracking.decay_figure(Estimate(0.1, 0.05, 0.15), family="power-law-floor")
    assert compare_figure(slow, two["decay_exponent"], Tolerance(0.2, True)).status == "info"
    assert compare_figure(slow, three["decay_exponent"], Tolerance(0.2, True)).status == "regressed"


def test_samples_answer_below_measured_range_is_not_gated():
    class Answer:
        n, low, high, reachable, message = 1.0, 1.0, 1.0, True, ""

    rows = [{"size": s, "repeat": 0, "test_error": e} for s, e in [(25, 0.37), (300, 0.19)]]
    c = Curve.from_table(pd.DataFrame(rows))

    class Fit:  # answers every target at one labelled sample, below the measured sizes
        curve = c

        def error_at(self, n, interval=0.9):
            return Estimate(0.19, 0.18, 0.2, interval)

        def samples_for(self, test_error=None, gap=None, interval=0.9):
            return Answer()

    def samples(target):
        figs = tracking.headline_figures(Fit(), reference_size=300, target_error=target)
        return next(f for f in figs if f.name == "samples_for_target")

    fig = samples(0.05)
    assert fig.better is None and "not gated" in fig.note
    assert samples(0.5).better == "lower"  # the data agree: already below 0.5 at the smallest size


def test_store_addresses(tmp_path):
    made_store(f"sqlite:///{tmp_path / 'u.db'}")
    with Store(f"sqlite:///{tmp_path / 'u.db'}") as s:
        assert s.path == tmp_path / "u.db" and s.schema_version == SCHEMA_VERSION
    for bad, words in [("mysql://host/db", "unsupported store address"),
                       (tmp_path / "no" / "such" / "dir.db", "does not exist"),
                       (tmp_path, "is a directory")]:
        with pytest.raises(InputError, match=words):
            Store(bad)
    with pytest.raises(InputError, match="not found"):
        Store(tmp_path / "absent.db", create=False)
    assert not (tmp_path / "absent.db").exists()


# ----------------------------------------------------------------------------- opening, duplicates
def test_reading_a_missing_store_creates_nothing(tmp_path):
    import curvefit as cf

    path = tmp_path / "history.db"
    with pytest.raises(InputError, match="history store not found") as err:
        cf.Store(path).runs("nightly")  # the README line, on a path with no store yet
    assert "\n" not in str(err.value)
    assert not path.exists() and list(tmp_path.iterdir()) == []
    res = run_cli("history", "--store", path)
    assert res.returncode == 2 and len(res.stderr.strip().splitlines()) == 1
    assert not path.exists()
    with Store(path) as s:  # the first write creates it
        s.record(_curve(), None, series="s", headline=_figs(), code_version=None)
    assert path.exists()


def test_a_store_this_process_cannot_write_is_opened_read_only(tmp_path, monkeypatch):
    import os

    path = tmp_path / "history.db"
    made_store(path)
    before = path.read_bytes()
    # as for a file on a read-only share (root ignores file modes, so the check is faked)
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: mode != os.W_OK)
    with Store(path) as s:
        assert s.runs("setup")["run_id"].tolist() == [1] and s.schema_version == SCHEMA_VERSION
        with pytest.raises(InputError, match="history store") as err:
            s.record(_curve(), None, series="setup", headline=_figs())
        assert "\n" not in str(err.value)
    assert path.read_bytes() == before


def test_same_run_is_refused_unless_again(store):
    c = _curve()
    r1 = store.record(c, None, series="s", headline=_figs())
    assert store.recorded_as(c, "s") == r1 and store.recorded_as(_curve(), "s") is None
    with pytest.raises(InputError, match=f"already recorded as run {r1} of series 's'"):
        store.record(Curve(c.points.copy(), dict(c.meta)), None, series="s", headline=_figs())
    assert len(store.runs("s")) == 1  # nothing half-written
    r2 = store.record(c, None, series="s", headline=_figs(), again=True)
    store.record(c, None, series="other", headline=_figs())  # another series is another record
    assert r2 == r1 + 1 and len(store.runs("s")) == 2


def test_whole_counts_and_unreachable_in_plain_words():
    class Answer:
        n, low, high, reachable = 812.2, 70.9, math.inf, True

    f = tracking.samples_figure(Answer(), 0.05)
    assert (f.estimate, f.low, f.high) == (813.0, 71.0, math.inf)
    assert tracking.format_figure(f) == "813 (71 to no upper limit)"

    class Unreachable:
        n, low, high, reachable = math.nan, 5000.4, math.nan, False

    gone = tracking.samples_figure(Unreachable(), 0.05)
    assert tracking.format_figure(gone) == "not reachable (interval from 5,000, no upper limit)"
    base = make_figure("samples_for_target", 4000, 3000, math.inf)
    change = compare_figure(gone, base, Tolerance(0.25, relative=True))
    assert change.status == "same"  # the baseline's own interval was open-ended
    table = tracking.Comparison("s", 2, 1, "accepted", True, [], [change]).to_markdown()
    row = next(line for line in table.splitlines() if line.startswith("| samples"))
    assert "∞" not in row and "no longer reachable" in row and "intervals overlap" in row


def test_series_name_with_newline_and_pipe_keeps_markdown_whole(store):
    name = "night|ly\n| injected | row |\n`code`"
    r1 = store.record(_curve(), None, series=name, headline=_figs(err=0.05))
    r2 = store.record(_curve(), None, series=name, headline=_figs(err=0.09))
    md = store.compare(r2, gate="all").to_markdown()
    lines = md.splitlines()
    assert lines[0].startswith("### curvefit track: series ")
    assert lines[0].endswith(f"run {r2} vs run {r1} (accepted)")
    assert "injected" in lines[0] and not any(line.startswith("| injected") for line in lines)
    rows = [line for line in lines if line.startswith("| ")]
    assert all(line.count(" | ") == rows[0].count(" | ") for line in rows)
    assert "\\n" in lines[0] and "``" in lines[0]


# ----------------------------------------------------------------------------- first records race
FIRST_RECORD = textwrap.dedent("""
    import sys, time
    from pathlib import Path
    import numpy as np, pandas as pd
    from curvefit.core.curve import Curve
    from curvefit.workflows.nightly import track_run
    address, top, go = sys.argv[1], int(sys.argv[2]), Path(sys.argv[3])
    n = np.repeat([s for s in (10, 20, 40, 80, 160) if s <= top], 3)
    e = 0.1 + 1 / np.sqrt(n) + np.tile([-0.003, 0.0, 0.003], len(n) // 3)
    curve = Curve.from_table(pd.DataFrame({"size": n, "test_error": e}),
                             meta={"data_fingerprint": "same", "started": sys.argv[4]})
    while not go.exists():
        time.sleep(0.005)
    track_run(curve, store=address, series="new", bootstrap=10)
    print("done")
""")


def race_first_records(address, tmp_path, tops=(80, 160, 80, 160, 80, 160)):
    """Processes that record at once into a new series, with largest sizes 80 and 160
    (each would fix its own reference size if it read the series outside the write)."""
    go = tmp_path / "go-first"
    procs = [subprocess.Popen([sys.executable, "-c", FIRST_RECORD, str(address), str(top), str(go),
                               f"p{k}"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                              cwd=ROOT) for k, top in enumerate(tops)]
    time.sleep(3.0)  # imports done: they wait at the start line
    go.touch()
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err


def check_one_reference_size(s, n_runs=6):
    """Every run of the raced series was recorded, and read, at the series' one size."""
    ref = s.series_config("new")["reference_size"]
    runs = s.runs("new")
    assert len(runs) == n_runs and ref in (80, 160)
    for rid in runs["run_id"]:
        assert s.curve(int(rid)).meta["tracking"]["reference_size"] == ref
        assert s.headline(int(rid))["test_error_at_ref"].note.startswith(f"n={ref}")


def test_simultaneous_first_records_share_one_reference_size(tmp_path):
    path = tmp_path / "race.db"
    race_first_records(path, tmp_path)
    with Store(path) as s:
        check_one_reference_size(s)


def test_tracking_an_all_failed_run_leaves_no_store(tmp_path):
    rows = [{"size": s, "repeat": r, "test_error": math.nan, "status": "failed", "message": "boom"}
            for s in (50, 100) for r in range(2)]
    Curve.from_table(pd.DataFrame(rows)).write(tmp_path / "failed.json")
    res = run_cli("track", tmp_path / "failed.json", "--store", tmp_path / "h.db", "--series", "s")
    assert res.returncode == 2 and "no successful cell" in res.stderr, res.stderr
    assert len(res.stderr.strip().splitlines()) == 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["failed.json"]
