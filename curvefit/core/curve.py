"""The measured learning curve: one row per (size, repeat) cell, plus run metadata.

A `Curve` is what the runner produces and what every later step (fitting, capacity,
reports, history) reads. It is stored as a run file, JSON whose first key is
``"format": "curvefit.run/1"``, followed by ``meta`` and ``points``.
"""

from __future__ import annotations

import csv
import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from curvefit.core.defaults import INTERVAL
from curvefit.core.errors import InputError
from curvefit.core.jsonio import jsonable, write_json
from curvefit.core.legacy import rename_legacy
from curvefit.core.stats import clopper_pearson, hoeffding_half_width, sem
from curvefit.core.validate import check_level

RUN_FORMAT = "curvefit.run/1"

# Columns every Curve has, in this order; runners may add more (split counts, ...).
POINT_COLUMNS = [
    "size",           # labelled training samples in the subsample (rows, or groups)
    "repeat",         # repeat index; each repeat has its own train/test split
    "train_error",    # loss on the training subsample
    "test_error",     # loss on the repeat's test set
    "n_test",         # test-set size (rows), for exact intervals
    "n_test_errors",  # count of misclassified test rows (0-1 error only; else NaN)
    "fit_seconds",    # wall time of fit + predict
    "status",         # "ok" or "failed"
    "message",        # error text of a failed cell, else ""
]


# What a run file or curve table may hold before it is refused as damaged or hostile.
MAX_FILE_BYTES = 512 * 2 ** 20   # a run of a million cells is about 200 MB
MAX_META_DEPTH = 64              # nesting of the meta object (a run writes about 4)
MAX_CELLS = 2_000_000

# Optional column: the constant predictor's loss on the cell's test rows (majority class of
# the training subsample, or its mean). Files written before it existed load without it.
BASELINE_COLUMN = "baseline_error"


def _empty_points() -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype=t) for c, t in [
        ("size", "int64"), ("repeat", "int64"), ("train_error", "float64"),
        ("test_error", "float64"), ("n_test", "float64"), ("n_test_errors", "float64"),
        ("fit_seconds", "float64"), ("status", "object"), ("message", "object")]})


def _normalise_points(points: pd.DataFrame) -> pd.DataFrame:
    """Fill optional columns, fix dtypes, sort by (size, repeat)."""
    df = points.copy()
    if "size" not in df.columns or "test_error" not in df.columns:
        raise InputError("a curve table needs the columns 'size' and 'test_error' "
                         f"(found: {', '.join(map(str, df.columns)) or 'none'})")
    if "repeat" not in df.columns:
        df["repeat"] = df.groupby("size").cumcount()
    for col, default in [("train_error", math.nan), ("n_test", math.nan),
                         ("n_test_errors", math.nan), ("fit_seconds", math.nan)]:
        if col not in df.columns:
            df[col] = default
    if "status" not in df.columns:
        df["status"] = np.where(df["test_error"].notna(), "ok", "failed")
    if "message" not in df.columns:
        df["message"] = ""
    try:
        df["size"] = pd.to_numeric(df["size"]).astype("int64")
        df["repeat"] = pd.to_numeric(df["repeat"]).astype("int64")
        numeric = ["train_error", "test_error", "n_test", "n_test_errors", "fit_seconds"]
        for col in numeric + ([BASELINE_COLUMN] if BASELINE_COLUMN in df.columns else []):
            df[col] = pd.to_numeric(df[col], errors="raise").astype("float64")
    except (ValueError, TypeError) as exc:
        raise InputError(f"curve table has a non-numeric value: {exc}") from None
    if (df["size"] <= 0).any():
        raise InputError("curve table has a size <= 0; sizes count labelled samples")
    if (df["repeat"] < 0).any():
        raise InputError("curve table has a repeat below 0; repeats are numbered from 0")
    dup = df.duplicated(["size", "repeat"], keep=False)
    if dup.any():
        first = df[dup].iloc[0]
        count = int(((df["size"] == first["size"]) & (df["repeat"] == first["repeat"])).sum())
        raise InputError(f"the cell of size {int(first['size'])}, repeat {int(first['repeat'])} "
                         f"appears {count} times ({int(dup.sum())} duplicated rows in all); "
                         "copies would narrow the intervals: keep one row per size and repeat")
    df["status"] = df["status"].fillna("ok").astype(str)
    df["message"] = df["message"].fillna("").astype(str)
    extra = sorted((c for c in df.columns if c not in POINT_COLUMNS), key=lambda c: c != BASELINE_COLUMN)
    df = df[POINT_COLUMNS + extra]
    return df.sort_values(["size", "repeat"], kind="stable").reset_index(drop=True)


@dataclass(frozen=True, eq=False)
class Curve:
    """A measured learning curve.

    Attributes
    ----------
    points : pandas.DataFrame
        One row per (size, repeat) cell with the columns in ``POINT_COLUMNS``
        (and possibly more, e.g. split counts).
    meta : dict
        Run metadata: model spec, data fingerprint, sizes, repeats, seed, metric, ...

    Examples
    --------
    >>> import pandas as pd
    >>> c = Curve.from_table(pd.DataFrame({"size": [10, 10, 20, 20],
    ...                                    "test_error": [0.3, 0.32, 0.2, 0.22]}))
    >>> c.sizes.tolist()
    [10, 20]
    """

    points: pd.DataFrame
    meta: dict = field(default_factory=dict)

    def __post_init__(self):
        object.__setattr__(self, "points", _normalise_points(self.points))

    # ------------------------------------------------------------------ views
    @property
    def sizes(self) -> np.ndarray:
        """Distinct sizes with at least one successful cell, ascending."""
        return np.sort(self.ok_points()["size"].unique())

    @property
    def metric(self) -> str:
        """The loss the curve holds. ``"error"`` is 0-1 error for classifiers; for a
        regressor the runner resolves it to mean squared error, reported as ``"mse"``."""
        name = str(self.meta.get("metric", "error"))
        info = self.meta.get("metric_info")
        if name == "error" and isinstance(info, dict) and info.get("kind") == "mse":
            return "mse"
        return name

    @property
    def metric_info(self) -> dict:
        """How the metric was turned into a loss (``name, kind, label, sign, ...``; see
        `curvefit.measuring.metrics.Metric`), or {} for a plain table; its ``label`` names
        the loss in sentences (`curvefit.core.formatting.metric_name`)."""
        info = self.meta.get("metric_info")
        return info if isinstance(info, dict) else {}

    @property
    def has_train(self) -> bool:
        return bool(self.ok_points()["train_error"].notna().any())

    @property
    def has_baseline(self) -> bool:
        """True when the cells hold the constant predictor's error (``baseline_error``)."""
        p = self.ok_points()
        return BASELINE_COLUMN in p.columns and bool(p[BASELINE_COLUMN].notna().any())

    def ok_points(self) -> pd.DataFrame:
        """Cells that finished and have a finite test error."""
        p = self.points
        return p[(p["status"] == "ok") & np.isfinite(p["test_error"])]

    def failed_points(self) -> pd.DataFrame:
        return self.points[self.points["status"] != "ok"]

    def summary(self, interval: float = INTERVAL) -> pd.DataFrame:
        """Per-size statistics over repeats.

        Columns: ``size, n_repeats, n_failed, test_mean, test_std, test_sem,
        train_mean, train_std, train_sem, gap_mean, gap_sem, n_test``, and, as the
        uncertainty of one repeat's finite test set at the mean error,
        ``test_low, test_high`` (exact Clopper–Pearson interval, 0-1 error only) and
        ``test_hoeffding`` (Hoeffding half-width), both at level ``interval``; then
        ``baseline_mean, baseline_sem``: the constant predictor's error on the same test
        sets (NaN for curves measured without it).

        Examples
        --------
        >>> import pandas as pd
        >>> c = Curve.from_table(pd.DataFrame({"size": [10, 10], "test_error": [0.3, 0.2],
        ...                                    "baseline_error": [0.4, 0.5]}))
        >>> c.summary()[["test_mean", "baseline_mean"]].round(3).values.tolist()
        [[0.25, 0.45]]
        """
        level = check_level(interval)
        ok = self.ok_points().copy()
        ok["gap"] = ok["test_error"] - ok["train_error"]
        failed = self.failed_points().groupby("size").size()
        rows = []
        for size, g in ok.groupby("size"):
            n_test = float(g["n_test"].mean()) if g["n_test"].notna().any() else math.nan
            row = {
                "size": int(size), "n_repeats": len(g), "n_failed": int(failed.get(size, 0)),
                "test_mean": float(g["test_error"].mean()), "test_std": _std(g["test_error"]),
                "test_sem": sem(g["test_error"]),
                "train_mean": float(g["train_error"].mean()) if g["train_error"].notna().any() else math.nan,
                "train_std": _std(g["train_error"]), "train_sem": sem(g["train_error"]),
                "gap_mean": float(g["gap"].mean()) if g["gap"].notna().any() else math.nan,
                "gap_sem": sem(g["gap"]), "n_test": n_test,
                "test_low": math.nan, "test_high": math.nan, "test_hoeffding": math.nan,
                "baseline_mean": math.nan, "baseline_sem": math.nan,
            }
            if BASELINE_COLUMN in g.columns and g[BASELINE_COLUMN].notna().any():
                row["baseline_mean"] = float(g[BASELINE_COLUMN].mean())
                row["baseline_sem"] = sem(g[BASELINE_COLUMN])
            if np.isfinite(n_test) and n_test >= 1:
                n_int = int(round(n_test))
                row["test_hoeffding"] = float(hoeffding_half_width(n_int, level))
                if g["n_test_errors"].notna().all():
                    k = min(int(round(float(g["n_test_errors"].mean()))), n_int)
                    row["test_low"], row["test_high"] = clopper_pearson(k, n_int, level)
            rows.append(row)
        cols = ["size", "n_repeats", "n_failed", "test_mean", "test_std", "test_sem",
                "train_mean", "train_std", "train_sem", "gap_mean", "gap_sem", "n_test",
                "test_low", "test_high", "test_hoeffding", "baseline_mean", "baseline_sem"]
        return pd.DataFrame(rows, columns=cols)

    # ------------------------------------------------------------------ I/O
    def to_dict(self) -> dict:
        pts = self.points.astype(object).where(self.points.notna(), None)
        return {"format": RUN_FORMAT, "meta": jsonable(self.meta),
                "points": [jsonable(r) for r in pts.to_dict(orient="records")]}

    def write(self, path: str | os.PathLike) -> Path:
        """Write the run file atomically (temporary file, fsync, rename)."""
        return write_json(path, self.to_dict(), what="run file")

    @classmethod
    def read(cls, path: str | os.PathLike) -> "Curve":
        """Read a run file, or a plain curve table if the file is a CSV."""
        path = Path(path)
        if not path.is_file():
            raise InputError(f"{path} is not a regular file; give a run file (JSON) or a curve table"
                             if path.exists() else f"run file not found: {path}")
        if path.suffix.lower() in (".csv", ".tsv", ".txt"):
            return cls.from_table(path)
        _check_file_size(path)
        try:
            with open(path, encoding="utf-8") as fh:
                doc = json.load(fh)
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise InputError(f"{path} is not a curvefit run file (not valid JSON: "
                             f"{' '.join(str(exc).split())})") from None
        except RecursionError:
            raise InputError(f"{path} is not a curvefit run file (nested too deep)") from None
        return cls.from_dict(doc, source=str(path))

    @classmethod
    def from_dict(cls, doc: Any, source: str = "input") -> "Curve":
        if not isinstance(doc, dict) or doc.get("format") != RUN_FORMAT:
            found = doc.get("format") if isinstance(doc, dict) else type(doc).__name__
            raise InputError(f"{source} is not a curvefit run file "
                             f"(expected format {RUN_FORMAT!r}, found {found!r})")
        meta = doc.get("meta")
        if meta is None:
            meta = {}
        if not isinstance(meta, dict):
            raise InputError(f"{source}: 'meta' must be an object, got {type(meta).__name__}")
        _check_depth(meta, f"{source}: 'meta'")
        df = _points_frame(doc.get("points"), source)
        # files written before the families were renamed are read with the new names
        return cls(df, rename_legacy(dict(meta)))

    @classmethod
    def from_table(cls, table: "pd.DataFrame | str | os.PathLike", meta: dict | None = None) -> "Curve":
        """A curve measured elsewhere: columns ``size, test_error[, train_error, repeat]``,
        and optionally ``metric`` naming the loss (one value, e.g. ``mse``; without it the
        values are read as 0-1 error rates, or as a "loss" in its own units when any test
        error exceeds 1).

        Accepts a DataFrame or the path of a CSV file.
        """
        if isinstance(table, pd.DataFrame):
            df, source = table, "table"
        else:
            source = str(table)
            if not Path(table).is_file():
                raise InputError(f"curve table not found: {table}")
            _check_file_size(Path(table))
            try:
                df = pd.read_csv(table, sep=None, engine="python")
            except (OSError, UnicodeDecodeError, ValueError, csv.Error) as exc:
                # pandas' ParserError and EmptyDataError are ValueErrors; the sniffer raises csv.Error
                raise InputError(f"cannot read curve table {table}: "
                                 f"{' '.join(str(exc).split()) or type(exc).__name__}; it needs a "
                                 "header line, then one row per size and repeat") from None
        if len(df) == 0:
            raise InputError(f"the curve table {source} has no rows; it needs one row per "
                             "size and repeat")
        if len(df) > MAX_CELLS:
            raise InputError(f"the curve table {source} has {len(df):,} rows; at most {MAX_CELLS:,}")
        m = {"source": source, "metric": "error"}
        if "metric" in df.columns:
            names = sorted({str(v).strip() for v in df["metric"].dropna()})
            if len(names) != 1:
                raise InputError(f"the metric column of {source} must hold one loss name "
                                 f"(e.g. mse), found {', '.join(names) or 'none'}")
            m["metric"] = names[0]
            df = df.drop(columns=["metric"])
        elif "test_error" in df.columns and (pd.to_numeric(df["test_error"], errors="coerce") > 1).any():
            m["metric"] = "loss"  # values above 1 are no 0-1 error rates: a loss in its own units
        m.update(meta or {})
        return cls(df, m)

    def __repr__(self) -> str:
        ok = self.ok_points()
        return (f"Curve({len(self.sizes)} sizes {self.sizes.min() if len(ok) else '-'}–"
                f"{self.sizes.max() if len(ok) else '-'}, {len(self.points)} cells, "
                f"{len(self.failed_points())} failed, metric={self.metric!r})")

    # notebook display: rendered by curvefit.report.notebook, reached through
    # curvefit.core.display because core may not import report (see that module)
    def _repr_html_(self) -> str:
        """The per-size table (mean test error ± its standard error, the exact test-set
        interval, training error), shown by Jupyter when a curve ends a cell."""
        from curvefit.core.display import renderer

        return renderer().curve_html(self)

    def plot(self, ax=None):
        """Draw the curve: mean test error per size with error bars, training error and
        the constant predictor where measured. Returns the matplotlib Axes (``ax`` when
        given, else a new pyplot figure's)."""
        from curvefit.core.display import renderer

        return renderer().plot_curve(self, ax=ax)


def _check_file_size(path: Path) -> None:
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise InputError(f"cannot read {path}: {exc.strerror or exc}") from None
    if size > MAX_FILE_BYTES:
        raise InputError(f"{path} is {size / 2 ** 20:,.0f} MB; a run file or curve table of more "
                         f"than {MAX_FILE_BYTES // 2 ** 20} MB is not read")


def _check_depth(obj, what: str, limit: int = MAX_META_DEPTH) -> None:
    """Refuse objects nested deeper than ``limit`` (iterative: no recursion to exhaust)."""
    stack = [(obj, 1)]
    while stack:
        item, depth = stack.pop()
        if depth > limit:
            raise InputError(f"{what} is nested more than {limit} levels deep; not a run's metadata")
        if isinstance(item, dict):
            stack.extend((v, depth + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, depth + 1) for v in item)


_NUMBER_FIELDS = ("train_error", "test_error", "n_test", "n_test_errors", "fit_seconds", BASELINE_COLUMN)


def _points_frame(points, source: str) -> pd.DataFrame:
    """The cells of a run file as a table, each checked: JSON numbers where numbers belong
    (a size written as text or 1e400 is refused, not converted), whole sizes and repeats."""
    if not isinstance(points, list):
        raise InputError(f"{source}: 'points' must be a list of cells")
    if len(points) > MAX_CELLS:
        raise InputError(f"{source} has {len(points):,} cells; at most {MAX_CELLS:,}")
    for i, cell in enumerate(points):
        where = f"{source}: cell {i + 1}"
        if not isinstance(cell, dict):
            raise InputError(f"{where} is not an object")
        nested = [k for k, v in cell.items() if isinstance(v, (dict, list))]
        if nested:
            raise InputError(f"{where}: {nested[0].replace('_', ' ')} holds "
                             f"{type(cell[nested[0]]).__name__} data, not a single value")
        for key in ("size", "repeat"):
            if key not in cell and key == "size":
                raise InputError(f"{where} has no size")
            value = cell.get(key, 0)
            if not is_whole_number(value) or not 0 <= value <= 2 ** 53:
                raise InputError(f"{where}: {key} must be a whole number >= 0, got {value!r}")
        for key in _NUMBER_FIELDS:
            value = cell.get(key)
            if value is not None and (isinstance(value, bool) or not isinstance(value, (int, float))
                                      or math.isinf(value)):
                raise InputError(f"{where}: {key.replace('_', ' ')} must be a finite number or null, "
                                 f"got {value!r}")
        for key in ("status", "message"):
            if not isinstance(cell.get(key, ""), (str, type(None))):
                raise InputError(f"{where}: {key} must be text, got {cell[key]!r}")
    return pd.DataFrame(points) if points else _empty_points()


def is_whole_number(value) -> bool:
    """True for an int (not a bool) or a finite float without a fraction; text is not.

    Examples
    --------
    >>> is_whole_number(3), is_whole_number(3.0), is_whole_number("3"), is_whole_number(1e400)
    (True, True, False, False)
    """
    if isinstance(value, bool):
        return False
    if isinstance(value, int):
        return True
    return isinstance(value, float) and math.isfinite(value) and value.is_integer()


def _std(values) -> float:
    v = values.dropna()
    return float(v.std(ddof=1)) if len(v) > 1 else math.nan
