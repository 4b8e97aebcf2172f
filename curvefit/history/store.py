"""The history store: measured runs of named series in one SQLite file or a PostgreSQL database.

A *series* is one thing tracked over time (a nightly model on a fixed data set). Each
recorded *run* keeps its metadata (as JSON text), data fingerprint, model spec, metric,
the code version (``git rev-parse HEAD`` when recorded inside a git checkout), its
points, the summary of its curve fit and its headline figures (see `curvefit.history.figures`).

Storage choices, and why:

- SQLite from the standard library, WAL journal, a busy timeout and ``BEGIN
  IMMEDIATE`` write transactions, so several processes can record at once without
  losing or corrupting anything.
- The schema is versioned with ``PRAGMA user_version`` and upgraded by forward
  migrations; a new store is built by running every migration from version 0, so the
  upgrade path is exercised on every new file.
- The file is marked with ``PRAGMA application_id``; a file that is not a curvefit store
  (another SQLite database, random bytes, text) is refused with `InputError`.
- Only parameterised queries, and only JSON text columns: nothing is ever unpickled.
- A team store on PostgreSQL (``postgresql://user@host/db``, `curvefit.history.postgres`)
  has the same tables, the same migrations and the same methods; only the connection,
  the write transaction and the schema version's place differ.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import os
import sqlite3
import subprocess
import time
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterator, Mapping, Sequence

import pandas as pd

from curvefit.core.curve import POINT_COLUMNS, Curve
from curvefit.core.defaults import INTERVAL
from curvefit.core.errors import InputError
from curvefit.core.jsonio import jsonable
from curvefit.core.legacy import rename_legacy
from curvefit.core.validate import check_count, check_positive
from curvefit.history import figures as tracking
from curvefit.measuring.data import is_legacy_fingerprint, same_fingerprint

# "cfhs" (curvefit history store) as a 32-bit integer: marks the file as ours.
APPLICATION_ID = 0x63666873
SQLITE_HEADER = b"SQLite format 3\x00"
BUSY_TIMEOUT_MS = 60_000

# Forward migrations: MIGRATIONS[k] takes the schema from version k to k+1.
_V1 = """
CREATE TABLE series (
    id INTEGER PRIMARY KEY,
    name TEXT NOT NULL UNIQUE,
    config TEXT NOT NULL DEFAULT '{}',
    created TEXT NOT NULL
);
CREATE TABLE runs (
    id INTEGER PRIMARY KEY,
    series_id INTEGER NOT NULL REFERENCES series(id) ON DELETE CASCADE,
    created TEXT NOT NULL,
    meta TEXT NOT NULL DEFAULT '{}',
    data_fingerprint TEXT,
    model TEXT,
    metric TEXT
);
CREATE TABLE points (
    run_id INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
    size INTEGER NOT NULL,
    repeat INTEGER NOT NULL,
    train_error REAL,
    test_error REAL,
    n_test REAL,
    n_test_errors REAL,
    fit_seconds REAL,
    status TEXT NOT NULL,
    message TEXT NOT NULL DEFAULT '',
    PRIMARY KEY (run_id, size, repeat)
);
CREATE TABLE fits (
    run_id INTEGER PRIMARY KEY REFERENCES runs(id) ON DELETE CASCADE,
    summary TEXT NOT NULL
);
CREATE TABLE headline (
    run_id INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
    name TEXT NOT NULL,
    estimate REAL,
    low REAL,
    high REAL,
    level REAL,
    PRIMARY KEY (run_id, name)
);
"""


def _migrate_1_to_2(con: Any) -> None:
    """v2: code version per run, direction and note per figure, extra point columns."""
    con.execute("ALTER TABLE runs ADD COLUMN code_version TEXT")
    con.execute("ALTER TABLE headline ADD COLUMN better TEXT")
    con.execute("ALTER TABLE headline ADD COLUMN note TEXT NOT NULL DEFAULT ''")
    con.execute("ALTER TABLE points ADD COLUMN extra TEXT")
    con.execute("CREATE INDEX runs_by_series ON runs(series_id, id)")
    # v1 rows had no direction: fill it from the names the figures are known by.
    for name, (better, _) in tracking.FIGURES.items():
        con.execute("UPDATE headline SET better = ? WHERE name = ?", (better, name))


def _migrate_2_to_3(con: Any) -> None:
    """v3: each run's gate verdict and baseline; the runs a person accepted as baselines."""
    con.execute("ALTER TABLE runs ADD COLUMN verdict TEXT")
    con.execute("ALTER TABLE runs ADD COLUMN baseline_id INTEGER")
    con.execute("CREATE TABLE accepted (id INTEGER PRIMARY KEY,"
                " series_id INTEGER NOT NULL REFERENCES series(id) ON DELETE CASCADE,"
                " run_id INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,"
                " created TEXT NOT NULL, note TEXT NOT NULL DEFAULT '')")


def _create_v1(con: Any) -> None:
    # Statement by statement: executescript would commit the open write transaction.
    for statement in _V1.split(";"):
        if statement.strip():
            con.execute(statement)


def _migrate_3_to_4(con: Any) -> None:
    """v4: a digest of each recorded run's content, so the same run file is not recorded
    twice in a series by mistake (runs recorded before v4 have none and are not checked)."""
    con.execute("ALTER TABLE runs ADD COLUMN run_digest TEXT")
    con.execute("CREATE INDEX runs_by_digest ON runs(series_id, run_digest)")


MIGRATIONS = [_create_v1, _migrate_1_to_2, _migrate_2_to_3, _migrate_3_to_4]
# Verdicts of runs that may serve as the "previous" baseline (NULL: recorded before v3).
PASSING = ("ok", "first run")
SCHEMA_VERSION = len(MIGRATIONS)


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def git_head(cwd: str | os.PathLike | None = None) -> str | None:
    """``git rev-parse HEAD`` of the checkout containing ``cwd``; None outside one."""
    try:
        res = subprocess.run(["git", "rev-parse", "HEAD"], cwd=cwd, capture_output=True,
                             text=True, timeout=10)
    except (OSError, subprocess.SubprocessError):
        return None
    sha = res.stdout.strip()
    return sha if res.returncode == 0 and sha else None


def _json(obj: Any) -> str:
    return json.dumps(jsonable(obj), allow_nan=False, sort_keys=True)


def _model_text(model: Any) -> str | None:
    if model is None:
        return None
    return model if isinstance(model, str) else _json(model)


class Store:
    """A history store in one SQLite file.

    Parameters
    ----------
    path : str or path-like
        File path, or ``sqlite:///path``. A missing file is created (with its schema)
        by the first write, never by opening or reading: reading a store that does not
        exist is an `InputError`. A file this process may not write is opened read-only.
    create : bool
        When False, a missing file is an `InputError` at once instead of a store that a
        first write would create.

    Raises
    ------
    InputError
        The file is not a curvefit store (random bytes, a text file, a foreign SQLite
        database), is corrupt, or was written by a newer curvefit.

    Examples
    --------
    >>> import tempfile, os, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> from curvefit.history.figures import make_figure
    >>> d = tempfile.mkdtemp()
    >>> s = Store(os.path.join(d, "history.db"))
    >>> c = Curve.from_table(pd.DataFrame({"size": [50, 100], "test_error": [0.2, 0.1]}))
    >>> rid = s.record(c, None, series="demo",
    ...                headline=[make_figure("test_error_at_ref", 0.1, 0.09, 0.11)])
    >>> s.runs("demo")["test_error_at_ref"].tolist()
    [0.1]
    >>> s.close()
    """

    # what a failed statement raises, and the subset meaning a broken constraint
    DATABASE_ERRORS: tuple = (sqlite3.DatabaseError,)
    ROW_ORDER = "rowid"  # the order rows were inserted in
    LOCK_ROW = ""  # SQLite's BEGIN IMMEDIATE already holds the write lock
    INTEGRITY_ERRORS: tuple = (sqlite3.IntegrityError,)

    def __new__(cls, path: str | os.PathLike = "", *args, **kwargs):
        if cls is Store and is_postgres_address(path):
            from curvefit.history.postgres import PostgresStore

            return super().__new__(PostgresStore)
        return super().__new__(cls)

    def __init__(self, path: str | os.PathLike, *, create: bool = True):
        text = str(path)
        if text.startswith("sqlite:///"):
            text = text[len("sqlite:///"):]
        elif "://" in text:
            raise InputError(f"unsupported store address {text!r}; give a file path, sqlite:///PATH "
                             "or postgresql://USER@HOST/DB")
        self.path = Path(text)
        self._con: Any = None
        # A missing file is created by the first write, never by reading: opening a store
        # to list its runs must not leave an empty file behind.
        if self._check_file(create):
            self._connect()

    def _connect(self) -> None:
        """Open the file (created with its schema when absent): WAL, foreign keys, migrations.

        A file this process may not write is opened read-only; it must then be current."""
        writable = not self.path.exists() or (os.access(self.path, os.W_OK)
                                              and os.access(self.path.parent, os.W_OK))
        try:
            target = self.path if writable else f"{self.path.resolve().as_uri()}?mode=ro"
            con = sqlite3.connect(target, timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                                  uri=not writable)
        except sqlite3.Error as exc:
            raise InputError(f"cannot open history store {self.path}: {exc}") from None
        self._con = con
        try:
            con.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
            self._check_identity()
            con.execute("PRAGMA foreign_keys = ON")
            if not writable:
                if self.schema_version != SCHEMA_VERSION:
                    raise InputError(f"history store {self.path} has schema v{self.schema_version} "
                                     "and is read-only here; record a run with write access once "
                                     "to upgrade it")
                return
            mode = self._enable_wal()
            if str(mode).lower() != "wal":
                raise InputError(f"history store {self.path}: cannot switch to WAL mode "
                                 f"(got {mode}); use a local file system")
            con.execute("PRAGMA synchronous = NORMAL")
            self._upgrade()
        except sqlite3.DatabaseError as exc:
            self._discard()
            raise InputError(f"{self.path} is not a usable curvefit history store ({exc})") from None
        except InputError:
            self._discard()
            raise

    def _discard(self) -> None:
        if self._con is not None:
            self._con.close()
        self._con = None

    def _ready(self, write: bool) -> Any:
        """The open connection; a store not created yet is created by a write and is an
        `InputError` for a read."""
        if self._con is None:
            # another process may have created it since this store was opened
            if not self._check_file(True) and not write:
                raise InputError(f"history store not found: {self.path} (nothing recorded yet; "
                                 "curvefit track creates it)")
            self._connect()
        return self._con

    # ------------------------------------------------------------------ opening
    def _check_file(self, create: bool) -> bool:
        """Refuse what cannot be a store; True when the file exists."""
        p = self.path
        if p.is_dir():
            raise InputError(f"history store {p} is a directory; give a file path such as {p / 'history.db'}")
        if not p.exists():
            if not create:
                raise InputError(f"history store not found: {p}")
            if not p.parent.is_dir():
                raise InputError(f"cannot create history store {p}: directory {p.parent} does not exist")
            return False
        try:
            with open(p, "rb") as fh:
                head = fh.read(len(SQLITE_HEADER))
        except OSError as exc:
            raise InputError(f"cannot read history store {p}: {exc.strerror}") from None
        if head and head != SQLITE_HEADER:
            raise InputError(f"{p} is not a curvefit history store (not an SQLite file); "
                             "give the right file or a new path")
        return True

    def _enable_wal(self) -> str:
        """Switch to WAL, retrying while another process holds the lock.

        The first switch of a new file needs an exclusive lock and SQLite may report
        "database is locked" at once instead of waiting for the busy timeout.
        """
        deadline = time.monotonic() + BUSY_TIMEOUT_MS / 1000
        pause = 0.02
        while True:
            try:
                mode = str(self._con.execute("PRAGMA journal_mode = WAL").fetchone()[0])
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) and "busy" not in str(exc):
                    raise
                mode = "locked"
            if mode.lower() == "wal" or time.monotonic() > deadline:
                return mode
            time.sleep(pause)
            pause = min(pause * 2, 0.5)

    def _check_identity(self) -> None:
        con = self._con
        # one read snapshot: read one by one, a store that another process creates at this
        # moment could show its tables but not yet its mark, and pass for a foreign file
        con.execute("BEGIN")
        try:
            n_objects = con.execute("SELECT count(*) FROM sqlite_master").fetchone()[0]
            app_id = con.execute("PRAGMA application_id").fetchone()[0]
        finally:
            con.execute("COMMIT")
        if app_id != APPLICATION_ID and (n_objects or app_id):
            raise InputError(f"{self.path} is an SQLite database but not a curvefit history "
                             "store; give another path for the store")
        version = con.execute("PRAGMA user_version").fetchone()[0]
        if version > SCHEMA_VERSION:
            raise InputError(f"{self.path} has store schema v{version}, newer than this "
                             f"curvefit understands (v{SCHEMA_VERSION}); upgrade curvefit")

    def _upgrade(self) -> None:
        con = self._con
        if con.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION:
            return
        with self._transaction() as tx:
            # Re-read under the write lock: another process may have upgraded meanwhile.
            version = con.execute("PRAGMA user_version").fetchone()[0]
            for step in range(version, SCHEMA_VERSION):
                MIGRATIONS[step](tx)
            con.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            con.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")

    @contextmanager
    def _transaction(self) -> Iterator["Transaction"]:
        """One write transaction (``BEGIN IMMEDIATE``): committed at the end of the
        block, rolled back on any error."""
        con = self._ready(write=True)
        con.execute("BEGIN IMMEDIATE")
        try:
            yield Transaction(con.execute, con.executemany)
            con.execute("COMMIT")
        except BaseException:
            if con.in_transaction:
                con.execute("ROLLBACK")
            raise

    @property
    def schema_version(self) -> int:
        return int(self._ready(write=False).execute("PRAGMA user_version").fetchone()[0])

    def close(self) -> None:
        self._discard()

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({str(self.path)!r})"

    # ------------------------------------------------------------------ helpers
    def _query(self, sql: str, params: Sequence[Any] = ()) -> list[tuple]:
        con = self._ready(write=False)
        try:
            cur = con.execute(sql, params)
            return cur.fetchall()
        except sqlite3.DatabaseError as exc:
            raise InputError(f"history store {self.path}: {exc}") from None

    def series_names(self) -> list[str]:
        """Names of the stored series, in order of creation."""
        return [r[0] for r in self._query("SELECT name FROM series ORDER BY id")]

    def series_config(self, series: str) -> dict | None:
        """The stored config of ``series`` (reference size, target, tolerances), or None."""
        if not self.path_exists():
            return None  # nothing recorded yet: no series has a config
        rows = self._query("SELECT config FROM series WHERE name = ?", (series,))
        return json.loads(rows[0][0]) if rows else None

    def path_exists(self) -> bool:
        """True when the store exists (a SQLite file is created by its first write)."""
        return self._con is not None or self.path.exists()

    # ------------------------------------------------------------------ writing
    def series_settings(self, series: str, curve: Curve, *, target_error: float | None = None,
                        reference_size: int | None = None,
                        tolerances: Mapping[str, Any] | None = None) -> dict:
        """The settings a run of ``series`` would be recorded with, checked; nothing written.

        The first run fixes the reference size (default: its largest measured size) so
        all runs are read at the same size; a target or tolerances given here replace
        the stored ones. Runs recorded at the same time into a new series can each see no
        reference size here: `settle_series` fixes it in a write transaction, and
        `record` re-reads it inside its own.

        Returns
        -------
        dict
            ``reference_size``, and ``target_error`` and ``tolerances`` when set.
        """
        return series_settings(self.series_config(series), series, curve, target_error=target_error,
                               reference_size=reference_size, tolerances=tolerances)

    def settle_series(self, series: str, curve: Curve, *, target_error: float | None = None,
                      reference_size: int | None = None,
                      tolerances: Mapping[str, Any] | None = None) -> dict:
        """Fix a new series' settings (its reference size above all) before figures are
        computed, in one write transaction, and return the settings to compute them with.

        The stored config is read and, when the series does not exist yet, written in the
        same transaction, so runs recording into a new series at the same time all get
        the reference size of the first one to arrive (SQLite ``BEGIN IMMEDIATE``; on
        PostgreSQL the series row is locked ``FOR UPDATE``). An existing series is not
        changed here; `record` applies a new target or tolerances with its run.
        """
        series_settings(self.series_config(series), series, curve, target_error=target_error,
                        reference_size=reference_size, tolerances=tolerances)  # fail before writing
        def settings(stored: dict | None) -> dict:
            return series_settings(stored, series, curve, target_error=target_error,
                                   reference_size=reference_size, tolerances=tolerances)

        try:
            with self._transaction() as tx:
                _, config, stored = self._settle(tx, series, settings, _now())
        except self.DATABASE_ERRORS as exc:
            raise InputError(f"history store {self.path}: {first_line(exc)}") from None
        return config

    def _settle(self, tx: "Transaction", series: str, settings, now: str) -> tuple[int, dict, dict]:
        """Inside a write transaction: create the series if absent, then read its stored
        config under the lock and check the run's settings against it.

        Returns (series id, the settings for this run, the stored config). The insert comes
        first so that two new writers meet at the series row: on PostgreSQL the second
        waits for the first to commit, then reads its config (``FOR UPDATE``, READ
        COMMITTED); SQLite's ``BEGIN IMMEDIATE`` lets one writer in at a time anyway.
        """
        tx.execute("INSERT INTO series (name, config, created) VALUES (?, ?, ?)"
                   " ON CONFLICT (name) DO NOTHING", (series, _json(settings(None)), now))
        sid, text = tx.execute("SELECT id, config FROM series WHERE name = ?" + self.LOCK_ROW,
                               (series,))[0]
        stored = json.loads(text)
        return int(sid), settings(stored), stored

    def recorded_as(self, curve: Curve, series: str) -> int | None:
        """The run id under which this very run (same points and metadata) is already
        recorded in ``series``, or None."""
        if not self.path_exists():
            return None
        rows = self._query("SELECT r.id FROM runs r JOIN series s ON s.id = r.series_id"
                           " WHERE s.name = ? AND r.run_digest = ? ORDER BY r.id LIMIT 1",
                           (series, run_digest(curve)))
        return int(rows[0][0]) if rows else None

    def record(self, curve: Curve, fit: Any = None, *, series: str,
               headline: Sequence[tracking.Figure] | None = None,
               target_error: float | None = None, reference_size: int | None = None,
               tolerances: Mapping[str, Any] | None = None, capacity: Any = None,
               interval: float = INTERVAL, code_version: str | None | bool = True,
               created: str | None = None, again: bool = False) -> int:
        """Record one run of ``series`` and return its run id.

        The store writes what it is given. Without ``headline``, the figures of ``fit``
        are taken from `curvefit.history.figures.headline_figures` at the series'
        reference size (what `curvefit.workflows.nightly.track_run` also does).

        Parameters
        ----------
        curve : Curve
            The measured curve (points and meta are stored).
        fit : dict or CurveFit, optional
            Its fit summary (``fit.to_dict()``), stored as JSON.
        series : str
            Series name; created on first use.
        headline : list of Figure, optional
            The run's headline figures (default: computed from ``fit`` as above).
        target_error, reference_size, tolerances
            Series settings (see `series_settings`).
        capacity : CapacityEstimate, optional
            Effective capacity, recorded as a figure when ``headline`` is not given.
        interval : float
            Level of the headline intervals (kept in the run's metadata).
        code_version : str, None or True
            Code version to store; True looks it up with ``git rev-parse HEAD``.
        created : str, optional
            ISO timestamp; defaults to now (UTC).
        again : bool
            Record the run even when the same run (same points and metadata) is already
            recorded in the series; by default that is an `InputError`.

        Notes
        -----
        The series' settings are read, checked and written inside the run's write
        transaction, so runs recording into a new series at once all use one reference
        size. Figures handed in as ``headline`` must have been computed at that size
        (`settle_series` gives it before the fit); the one-call form computes them inside.
        """
        self.series_settings(series, curve, target_error=target_error,
                             reference_size=reference_size, tolerances=tolerances)  # fail early

        def settings(stored: dict | None) -> dict:
            return series_settings(stored, series, curve, target_error=target_error,
                                   reference_size=reference_size, tolerances=tolerances)

        def figures(config: dict) -> list:
            if headline is not None:
                return list(headline)
            # the documented one-call form: the figures come from history.figures, the
            # module that defines them; the store itself only writes what it is handed
            return [] if fit is None or isinstance(fit, dict) else tracking.headline_figures(
                fit, reference_size=config["reference_size"],
                target_error=config.get("target_error"), capacity=capacity,
                interval=interval, curve=curve)

        version = git_head() if code_version is True else (code_version or None)
        run = {"meta": dict(curve.meta), "code_version": version, "points": _point_rows(curve.points),
               "fit_summary": None if fit is None else _json(fit), "interval": interval,
               "created": created or _now(), "digest": run_digest(curve), "again": bool(again)}
        try:
            return self._write_run(series, run, settings, figures)
        except self.INTEGRITY_ERRORS as exc:
            raise InputError(f"cannot record the run: {first_line(exc)} (duplicate size/repeat "
                             "cells or figure names?)") from None
        except self.DATABASE_ERRORS as exc:
            raise InputError(f"history store {self.path}: {first_line(exc)}; nothing of this "
                             "run was recorded") from None

    def _write_run(self, series: str, run: dict, settings, figures) -> int:
        """Insert one run in one transaction: the series' config read, checked and written,
        the run row, points, fit and figures."""
        now = run["created"]
        with self._transaction() as con:
            sid, config, stored = self._settle(con, series, settings, now)
            if config != stored:  # a new target or tolerances
                con.execute("UPDATE series SET config = ? WHERE id = ?", (_json(config), sid))
            if not run["again"]:
                same = con.execute("SELECT id FROM runs WHERE series_id = ? AND run_digest = ?"
                                   " ORDER BY id LIMIT 1", (sid, run["digest"]))
                if same:
                    raise InputError(already_recorded(series, int(same[0][0])))
            headline = figures(config)
            meta = dict(run["meta"])
            meta["tracking"] = {"reference_size": config["reference_size"],
                                "target_error": config.get("target_error"),
                                "interval": run["interval"]}
            run_id = int(con.execute(
                "INSERT INTO runs (series_id, created, meta, data_fingerprint, model, metric,"
                " code_version, run_digest) VALUES (?, ?, ?, ?, ?, ?, ?, ?) RETURNING id",
                (sid, now, _json(meta), _fingerprint(meta), _model_text(meta.get("model")),
                 str(meta.get("metric", "error")), run["code_version"], run["digest"]))[0][0])
            con.executemany(
                "INSERT INTO points (run_id, size, repeat, train_error, test_error, n_test,"
                " n_test_errors, fit_seconds, status, message, extra)"
                " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                [(run_id, *r) for r in run["points"]])
            if run["fit_summary"] is not None:
                con.execute("INSERT INTO fits (run_id, summary) VALUES (?, ?)",
                            (run_id, run["fit_summary"]))
            con.executemany(
                "INSERT INTO headline (run_id, name, estimate, low, high, level, better, note)"
                " VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                [(run_id, f.name, _num(f.estimate, keep_inf=True), _num(f.low, keep_inf=True),
                  _num(f.high, keep_inf=True), float(f.level), f.better, f.note or "")
                 for f in headline])
        return run_id

    # ------------------------------------------------------------------ reading
    def runs(self, series: str | None = None) -> pd.DataFrame:
        """One row per run (oldest first) with its headline figures.

        Columns: ``run_id, series, created, model, metric, data_fingerprint,
        code_version, n_points, n_failed`` and, for each figure, ``<name>``,
        ``<name>_low``, ``<name>_high``.
        """
        if series is not None and series not in self.series_names():
            known = ", ".join(self.series_names()) or "none"
            raise InputError(f"series {series!r} not found in {self.path} (known: {known})")
        where, params = ("WHERE s.name = ?", (series,)) if series is not None else ("", ())
        rows = self._query(
            "SELECT r.id, s.name, r.created, r.model, r.metric, r.data_fingerprint,"
            " r.code_version,"
            " (SELECT count(*) FROM points p WHERE p.run_id = r.id),"
            " (SELECT count(*) FROM points p WHERE p.run_id = r.id AND p.status != 'ok')"
            f" FROM runs r JOIN series s ON s.id = r.series_id {where} ORDER BY r.id", params)
        cols = ["run_id", "series", "created", "model", "metric", "data_fingerprint",
                "code_version", "n_points", "n_failed"]
        df = pd.DataFrame([tuple(r) for r in rows], columns=cols)
        if df.empty:
            return df
        figs = self._query(
            "SELECT h.run_id, h.name, h.estimate, h.low, h.high FROM headline h"
            " JOIN runs r ON r.id = h.run_id JOIN series s ON s.id = r.series_id"
            f" {where} ORDER BY h.run_id", params)
        names = [n for n in tracking.FIGURES if any(f[1] == n for f in figs)]
        names += sorted({f[1] for f in figs} - set(names))
        for n in names:
            for suffix in ("", "_low", "_high"):
                df[n + suffix] = math.nan
        index = {rid: i for i, rid in enumerate(df["run_id"])}
        for rid, name, est, lo, hi in figs:
            i = index[rid]
            for suffix, v in (("", est), ("_low", lo), ("_high", hi)):
                df.loc[i, name + suffix] = math.nan if v is None else float(v)
        return df

    def headline(self, run_id: int) -> dict[str, tracking.Figure]:
        """The headline figures of one run, by name."""
        self._run_row(run_id)
        rows = self._query("SELECT name, estimate, low, high, level, better, note FROM headline"
                           f" WHERE run_id = ? ORDER BY {self.ROW_ORDER}", (int(run_id),))
        return {r[0]: tracking.Figure(r[0], _unnull(r[1]), _unnull(r[2]), _unnull(r[3]),
                                      float(r[4] if r[4] is not None else INTERVAL), r[5],
                                      rename_legacy(r[6] or ""))
                for r in rows}

    def curve(self, run_id: int) -> Curve:
        """The stored curve of one run (points and meta), as recorded."""
        row = self._run_row(run_id)
        pts = self._query(
            "SELECT size, repeat, train_error, test_error, n_test, n_test_errors, fit_seconds,"
            " status, message, extra FROM points WHERE run_id = ? ORDER BY size, repeat",
            (int(run_id),))
        records = []
        for p in pts:
            rec = dict(zip(POINT_COLUMNS, p[:9]))
            if p[9]:
                rec.update(json.loads(p[9]))
            records.append(rec)
        df = pd.DataFrame(records) if records else pd.DataFrame(columns=POINT_COLUMNS)
        return Curve(df, rename_legacy(json.loads(row["meta"])))

    def fit_summary(self, run_id: int) -> dict | None:
        """The stored fit summary (``fit.to_dict()``) of one run, or None."""
        self._run_row(run_id)
        rows = self._query("SELECT summary FROM fits WHERE run_id = ?", (int(run_id),))
        return rename_legacy(json.loads(rows[0][0])) if rows else None

    def _run_row(self, run_id: Any) -> dict:
        try:
            rid = int(run_id)
        except (TypeError, ValueError):
            raise InputError(f"run id must be an integer; got {run_id!r}") from None
        rows = self._query(
            "SELECT r.id, s.name, r.created, r.meta, r.data_fingerprint, r.model, r.metric,"
            " r.code_version FROM runs r JOIN series s ON s.id = r.series_id WHERE r.id = ?",
            (rid,))
        if not rows:
            raise InputError(f"run {rid} not found in {self.path}")
        keys = ["id", "series", "created", "meta", "data_fingerprint", "model", "metric",
                "code_version"]
        return dict(zip(keys, rows[0]))

    # ------------------------------------------------------------------ baselines
    def accept(self, run_id: int, note: str = "") -> int:
        """Accept a run as its series' baseline (what ``track --accept RUN`` does).

        From now on the default baseline (``"accepted"``) of the series is this run, and
        ``"previous"`` may fall back on it even if it failed the gate. Returns the run id.
        """
        row = self._run_row(run_id)
        try:
            with self._transaction() as tx:
                sid = tx.execute("SELECT series_id FROM runs WHERE id = ?", (row["id"],))[0][0]
                tx.execute("INSERT INTO accepted (series_id, run_id, created, note) VALUES (?, ?, ?, ?)",
                           (sid, row["id"], _now(), str(note or "")))
        except self.DATABASE_ERRORS as exc:
            raise InputError(f"history store {self.path}: {first_line(exc)}") from None
        return row["id"]

    def accepted_run(self, series: str) -> int | None:
        """The run last accepted for ``series`` (``track --accept``), or None."""
        r = self._query("SELECT a.run_id FROM accepted a JOIN series s ON s.id = a.series_id"
                        " WHERE s.name = ? ORDER BY a.id DESC LIMIT 1", (series,))
        return int(r[0][0]) if r else None

    def series_of(self, run_id: int) -> str:
        """The series a run belongs to."""
        return self._run_row(run_id)["series"]

    def verdict(self, run_id: int) -> str | None:
        """The gate's verdict recorded for a run (None before it was compared)."""
        self._run_row(run_id)
        r = self._query("SELECT verdict FROM runs WHERE id = ?", (int(run_id),))
        return r[0][0] if r else None

    def record_verdict(self, comparison: tracking.Comparison,
                       figures: Sequence[tracking.Figure] = ()) -> None:
        """Store a comparison's verdict and baseline with its run, and the comparative
        figures (efficiency against that baseline) among the run's figures."""
        rid = int(comparison.run_id)
        names = [f.name for f in figures]
        try:
            with self._transaction() as tx:
                tx.execute("UPDATE runs SET verdict = ?, baseline_id = ? WHERE id = ?",
                           (comparison.verdict, comparison.baseline_id, rid))
                for name in names:
                    tx.execute("DELETE FROM headline WHERE run_id = ? AND name = ?", (rid, name))
                tx.executemany(
                    "INSERT INTO headline (run_id, name, estimate, low, high, level, better, note)"
                    " VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    [(rid, f.name, _num(f.estimate, keep_inf=True), _num(f.low, keep_inf=True),
                      _num(f.high, keep_inf=True), float(f.level), f.better, f.note or "")
                     for f in figures])
        except self.DATABASE_ERRORS as exc:
            raise InputError(f"history store {self.path}: {first_line(exc)}; the run is "
                             "recorded, its verdict is not") from None

    def baseline_for(self, run_id: int, baseline: str | int = "accepted") -> int | None:
        """Run id of the baseline of ``run_id``; None when the series has no earlier run.

        ``"accepted"``: the run last accepted for the series (``track --accept``), else
        the series' first run. ``"previous"``: the latest earlier run that passed the gate
        (or was accepted); a failing run is never a baseline by itself. ``"best"``: the
        earlier passing run with the lowest test error at the reference size. An int:
        that run."""
        row = self._run_row(run_id)
        rule = tracking.check_baseline(baseline)
        earlier = ("SELECT r.id FROM runs r JOIN series s ON s.id = r.series_id"
                   " WHERE s.name = ? AND r.id < ?")
        passing = (" AND (r.verdict IS NULL OR r.verdict IN (?, ?) OR r.id IN"
                   " (SELECT a.run_id FROM accepted a))")
        params = (row["series"], row["id"], *PASSING)
        if rule == "accepted":
            acc = self.accepted_run(row["series"])
            if acc is not None and acc != row["id"]:
                return acc
            r = self._query(earlier + " ORDER BY r.id ASC LIMIT 1", params[:2])
            return int(r[0][0]) if r else None
        if rule == "previous":
            r = self._query(earlier + passing + " ORDER BY r.id DESC LIMIT 1", params)
            return int(r[0][0]) if r else None
        if rule == "best":
            r = self._query(
                "SELECT r.id FROM runs r JOIN series s ON s.id = r.series_id"
                " JOIN headline h ON h.run_id = r.id AND h.name = 'test_error_at_ref'"
                " WHERE s.name = ? AND r.id < ? AND h.estimate IS NOT NULL" + passing +
                " ORDER BY h.estimate ASC, r.id DESC LIMIT 1", params)
            if r:
                return int(r[0][0])
            return self.baseline_for(run_id, "previous")
        bid = rule
        if bid == row["id"]:
            raise InputError(f"run {bid} cannot be its own baseline")
        self._run_row(bid)
        return bid

    # ------------------------------------------------------------------ comparing
    def compare(self, run_id: int, baseline: str | int = "accepted", *,
                tolerances: Mapping[str, Any] | None = None,
                allow_data_change: bool = False, gate: Any = None,
                efficiency: bool = True, random_state: int = 0) -> tracking.Comparison:
        """Compare a stored run with its baseline.

        Parameters
        ----------
        run_id : int
        baseline : "accepted", "previous", "best" or int
            See `baseline_for`.
        tolerances : mapping, optional
            Per-figure tolerances overriding the series' stored ones and the defaults
            (`curvefit.history.figures.DEFAULT_TOLERANCES`); numbers are absolute, ``"N%"``
            relative.
        allow_data_change : bool
            Compare even when the data fingerprint or the metric differ.
        gate : list of str, "efficiency" or "all", optional
            The figures that can fail the run (default: the efficiency figures, see
            `curvefit.history.efficiency`; the point figures are then information). When
            the curves cannot be compared (fewer than two sizes, no common size), the
            point figures gate instead.
        efficiency : bool
            Compute the efficiency figures from the two stored curves.
        random_state : int
            Seed of the efficiency intervals.

        Returns
        -------
        Comparison
            ``.regressed`` names the regressed gating figures, ``.comparable`` is False
            when the data or metric changed and that was not allowed.
        """
        row = self._run_row(run_id)
        rule = tracking.check_baseline(baseline)
        rule_name = rule if isinstance(rule, str) else "run"
        gated = set(tracking.check_gate(gate))
        bid = self.baseline_for(run_id, baseline)
        config = self.series_config(row["series"]) or {}
        tol = tracking.resolve_tolerances(config.get("tolerances"), tolerances)
        current = {n: f for n, f in self.headline(row["id"]).items()
                   if n not in tracking.EFFICIENCY}
        metric = row["metric"] or "error"
        if bid is None:
            changes = [tracking.compare_figure(f, None, tol.get(n)) for n, f in current.items()]
            return tracking.Comparison(row["series"], row["id"], None, rule_name, True, [], changes,
                                       metric=metric)
        brow = self._run_row(bid)
        base = {n: f for n, f in self.headline(bid).items() if n not in tracking.EFFICIENCY}
        reasons = []
        if not same_data(row, brow):
            reasons.append(f"data fingerprint differs from run {bid}'s "
                           f"({_short(brow['data_fingerprint'])} → {_short(row['data_fingerprint'])})")
        if (row["metric"] or "error") != (brow["metric"] or "error"):
            reasons.append(f"metric differs from run {bid}'s ({brow['metric']} → {row['metric']})")
        level = next((f.level for f in current.values()), INTERVAL)
        # Either efficiency figure fails the run: Bonferroni over the two keeps the chance
        # that a same-model run fails at most (1 - level) / 2, one-sided (90% → 95% intervals)
        level = 1 - (1 - level) / len(tracking.EFFICIENCY)
        eff_figs = self._efficiency(row["id"], bid, level, random_state) if efficiency else []
        if not eff_figs:
            gated = (gated - set(tracking.EFFICIENCY)) or set(tracking.check_gate("all"))
        names = list(current) + [n for n in base if n not in current]
        changes = [tracking.compare_figure(current.get(n), base.get(n), tol.get(n)) for n in names]
        changes = [tracking.compare_figure(f, tracking.null_figure(f.name, f.level), tol.get(f.name))
                   for f in eff_figs] + changes
        changes = [dataclasses.replace(c, gated=c.name in gated) for c in changes]
        comparable = not reasons or allow_data_change
        return tracking.Comparison(row["series"], row["id"], bid, rule_name, comparable,
                                   reasons, changes, data_change_allowed=bool(reasons) and allow_data_change,
                                   metric=metric)

    def _efficiency(self, run_id: int, baseline_id: int, level: float,
                    random_state: int) -> list[tracking.Figure]:
        """The efficiency figures of a run against its baseline; none when the curves
        cannot be compared (fewer than two sizes, no common size)."""
        from curvefit.history.efficiency import compare_curves

        try:
            eff = compare_curves(self.curve(run_id), self.curve(baseline_id), interval=level,
                                 random_state=random_state)
        except InputError:
            return []
        return tracking.efficiency_figures(eff, baseline_id)


def series_settings(stored: Mapping[str, Any] | None, series: str, curve: Curve, *,
                    target_error: float | None = None, reference_size: int | None = None,
                    tolerances: Mapping[str, Any] | None = None) -> dict:
    """A series' stored config (None for a new series) with one run's settings applied,
    checked: the reference size is fixed by the first run (its largest measured size
    unless given), a target or tolerances given replace the stored ones.

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [50, 100], "test_error": [0.2, 0.1]}))
    >>> series_settings(None, "s", c)
    {'reference_size': 100}
    >>> series_settings({"reference_size": 80}, "s", c, target_error=0.05)
    {'reference_size': 80, 'target_error': 0.05}
    """
    if not isinstance(series, str) or not series.strip():
        raise InputError("a series name is needed, e.g. --series nightly")
    if target_error is not None:
        check_positive(target_error, "target_error", allow_zero=True)
    config = dict(stored or {})
    if reference_size is not None:
        ref = check_count(reference_size, "reference_size", minimum=1)
        if config.get("reference_size") not in (None, ref):
            raise InputError(f"series {series!r} reads errors at reference size "
                             f"{config['reference_size']}, not {ref}; start a new series "
                             "to change it")
        config["reference_size"] = ref
    if "reference_size" not in config:
        if len(curve.sizes) == 0:
            raise InputError("the run has no successful cell; nothing to record")
        config["reference_size"] = int(curve.sizes.max())
    if target_error is not None:
        config["target_error"] = float(target_error)
    if tolerances is not None:
        tracking.resolve_tolerances(tolerances)  # validate names and values
        merged = dict(config.get("tolerances") or {})
        merged.update(tracking.tolerances_to_config(tolerances))
        config["tolerances"] = merged
    return config


def run_digest(curve: Curve) -> str:
    """SHA-256 of a run's content (its points and metadata), which tells a run file
    recorded twice from a new run: a new measurement has new timestamps in its meta.

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [50, 100], "test_error": [0.2, 0.1]}))
    >>> run_digest(c) == run_digest(Curve(c.points.copy(), dict(c.meta))), len(run_digest(c))
    (True, 64)
    """
    text = json.dumps([jsonable(curve.meta), _point_rows(curve.points)], sort_keys=True,
                      allow_nan=True, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def already_recorded(series: str, run_id: int) -> str:
    """The one line refusing a run that is already in the series."""
    return (f"this run is already recorded as run {run_id} of series {series!r}; record it "
            "again with --again (again=True), or track a new measurement")


def _short(fp: str | None) -> str:
    return "none" if not fp else str(fp)[:12]


def same_data(row: Mapping[str, Any], brow: Mapping[str, Any]) -> bool:
    """Whether two stored runs (rows with ``data_fingerprint`` and ``meta``) measured the
    same data; a run recorded with the old fingerprint form matches a ``v2:`` one through
    the old-form fingerprint the newer run also recorded (``meta["data"]["legacy_fingerprint"]``,
    see `curvefit.measuring.data.same_fingerprint`)."""
    fp, bfp = row["data_fingerprint"] or None, brow["data_fingerprint"] or None
    if fp == bfp:
        return True
    newer = brow if is_legacy_fingerprint(fp) else row
    try:
        data = json.loads(newer["meta"] or "{}").get("data")
    except (ValueError, AttributeError, RecursionError):
        data = None
    legacy = data.get("legacy_fingerprint") if isinstance(data, dict) else None
    return same_fingerprint(bfp, fp, legacy=legacy if isinstance(legacy, str) else None)


def _fingerprint(meta: Mapping[str, Any]) -> str | None:
    """The run's data fingerprint: ``meta["data_fingerprint"]`` or, as the runner
    writes it, ``meta["data"]["fingerprint"]`` (plus a separate test set's, if any)."""
    fp = meta.get("data_fingerprint")
    data = meta.get("data")
    if fp is None and isinstance(data, Mapping):
        fp = data.get("fingerprint")
        test_data = meta.get("test_data")
        test_fp = test_data.get("fingerprint") if isinstance(test_data, Mapping) else None
        if fp is not None and test_fp:
            fp = f"{fp}+{test_fp}"
    if isinstance(fp, Mapping):  # a runner may keep several hashes; store them all
        return _json(fp)
    return None if fp is None else str(fp)


def _point_rows(points: pd.DataFrame) -> list[tuple]:
    """The points as rows of the ``points`` table; columns beyond the standard ones go to ``extra``."""
    extra_cols = [c for c in points.columns if c not in POINT_COLUMNS]
    rows = []
    for rec in points.astype(object).where(points.notna(), None).to_dict(orient="records"):
        extra = {c: rec[c] for c in extra_cols}
        rows.append((int(rec["size"]), int(rec["repeat"]),
                     *(_num(rec[c]) for c in ("train_error", "test_error", "n_test",
                                               "n_test_errors", "fit_seconds")),
                     str(rec["status"]), str(rec["message"] or ""),
                     _json(extra) if extra else None))
    return rows


def _num(v: Any, keep_inf: bool = False) -> float | None:
    if v is None:
        return None
    f = float(v)
    if math.isnan(f) or (math.isinf(f) and not keep_inf):
        return None
    return f


def _unnull(v: Any) -> float:
    return math.nan if v is None else float(v)


def first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def is_postgres_address(path: Any) -> bool:
    """True for ``postgresql://...`` or ``postgres://...`` addresses.

    Examples
    --------
    >>> is_postgres_address("postgresql://ci@db.example/curvefit"), is_postgres_address("h.db")
    (True, False)
    """
    return isinstance(path, str) and path.split("://", 1)[0].lower() in ("postgresql", "postgres") \
        and "://" in path


class Transaction:
    """The statements of one write transaction: ``execute`` returns the rows (if any)."""

    def __init__(self, execute, executemany):
        self._execute, self._executemany = execute, executemany

    def execute(self, sql: str, params: Sequence[Any] = ()) -> list[tuple]:
        cur = self._execute(sql, params)
        return cur.fetchall() if cur.description else []

    def executemany(self, sql: str, rows: Sequence[Sequence[Any]]) -> None:
        if rows:
            self._executemany(sql, rows)
