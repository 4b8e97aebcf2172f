"""Per-slice learning curves: one slice's training rows grow, the others stay whole.

For every value of a column (a class, a region, a customer segment) the test error on
that slice's test rows is measured as that slice's training rows grow from a few to all
of them while every other slice keeps all of its training rows. The split is drawn once
per repeat and is the same for every slice (each slice's rows are shuffled and its first
``test_size`` share is its test rows), so the slices' curves are measured against the
same model trained on the same other rows. Every slice goes through the one runner
(`curvefit.measuring.runner.measure`, with `SliceSplit` as its splitter), so the journal,
the seeds and the parallel backends behave as in any run.

A slice with too few rows for a curve (fewer than ``min_rows`` training rows, or fewer
than ``MIN_TEST_ROWS`` test rows) is not measured, and says so.

References
----------
.. [1] K. H. Tae and S. E. Whang, "Slice Tuner: A Selective Data Acquisition Framework
       for Accurate and Fair Machine Learning Models", SIGMOD 2021 (per-slice learning
       curves; acquiring labels per slice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from curvefit.core.curve import Curve
from curvefit.core.defaults import REPEATS, SEED, TEST_FRACTION
from curvefit.core.errors import InputError
from curvefit.core.validate import check_count, check_seed
from curvefit.measuring.splits import RepeatSplit

# A slice needs at least this many test rows and this many training rows to be measured.
MIN_TEST_ROWS = 10
MIN_ROWS = 20
# Sizes measured per slice (geometric, from the smallest size to all its training rows).
SLICE_SIZES = 6
FORMAT = "curvefit.slices/1"


class SliceSplit:
    """A splitter that grows one slice's training rows while the others stay whole.

    Each repeat shuffles every slice's rows (a generator seeded by the run's seed and
    the repeat, the same for every grown slice), takes its first ``test_size`` share as
    test rows, and the rest as training rows. The test rows are the grown slice's only;
    the pool is every other slice's training rows first, then the grown slice's, so a
    size of ``other + k`` trains on ``k`` rows of the grown slice.
    """

    kind = "slice"
    size_unit = "rows"

    def __init__(self, codes, grow, test_size: float = TEST_FRACTION):
        self.codes = np.asarray(codes)
        self.grow = grow
        self.test_size = float(test_size)

    def parts(self, repeat: int, seed: int) -> dict:
        """``value -> (test rows, training rows)`` of one repeat."""
        rng = np.random.default_rng([int(seed), int(repeat), 7919])
        out = {}
        for value in sorted(set(self.codes.tolist()), key=str):
            rows = rng.permutation(np.flatnonzero(self.codes == value))
            n_test = int(round(self.test_size * len(rows)))
            out[value] = (rows[:n_test], rows[n_test:])
        return out

    def other_rows(self, seed: int) -> int:
        """Training rows of the slices that stay whole (the same in every repeat)."""
        return sum(len(train) for v, (_, train) in self.parts(0, seed).items() if v != self.grow)

    def split(self, y, repeats: int, random_state: int) -> list[RepeatSplit]:
        plans = []
        for r in range(repeats):
            parts = self.parts(r, random_state)
            test, own = parts[self.grow]
            other = [train for v, (_, train) in parts.items() if v != self.grow]
            pool = np.concatenate(other + [own]) if other else own
            plans.append(RepeatSplit(repeat=r, test=np.sort(test), pool=pool))
        return plans

    def describe(self) -> dict:
        return {"kind": self.kind, "test_size": self.test_size, "slice": _plain(self.grow)}


def _plain(value):
    return value.item() if hasattr(value, "item") else value


@dataclass(frozen=True)
class SliceCurves:
    """Per-slice learning curves: the result of `measure_slices`.

    Attributes
    ----------
    column : str
        The column whose values are the slices.
    curves : dict
        ``value -> Curve`` whose sizes count that slice's training rows (the other
        slices' rows are in ``meta["slice"]["other_rows"]``).
    shares : dict
        ``value -> share of the rows`` (the slice's weight in the overall error).
    rows : dict
        ``value -> rows`` in the table.
    skipped : dict
        ``value -> reason`` for the slices too rare to measure.
    """

    column: str
    curves: dict
    shares: dict
    rows: dict
    skipped: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"format": FORMAT, "column": self.column,
                "slices": [{"value": _plain(v), "rows": self.rows[v], "share": self.shares[v],
                            "curve": self.curves[v].to_dict() if v in self.curves else None,
                            "skipped": self.skipped.get(v)} for v in self.rows]}

    @classmethod
    def from_dict(cls, doc, source: str = "input") -> "SliceCurves":
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise InputError(f"{source} is not a per-slice file (format {FORMAT}); measure one "
                             "with curvefit measure ... --slice COL")
        try:
            curves, shares, rows, skipped = {}, {}, {}, {}
            for s in doc["slices"]:
                v = s["value"]
                rows[v], shares[v] = int(s["rows"]), float(s["share"])
                if s.get("curve") is not None:
                    curves[v] = Curve.from_dict(s["curve"], source=f"{source}, slice {v}")
                if s.get("skipped"):
                    skipped[v] = str(s["skipped"])
            return cls(column=str(doc["column"]), curves=curves, shares=shares, rows=rows,
                       skipped=skipped)
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{source}: a damaged per-slice file ({exc})") from None

    def write(self, path) -> None:
        from curvefit.core.jsonio import write_json

        write_json(path, self.to_dict())

    @classmethod
    def read(cls, path) -> "SliceCurves":
        from curvefit.core.jsonio import read_json

        return cls.from_dict(read_json(path), source=str(path))


def slice_sizes(n_train: int, smallest: int, count: int = SLICE_SIZES) -> list[int]:
    """Geometric sizes from ``smallest`` to all ``n_train`` rows (distinct whole numbers).

    Examples
    --------
    >>> slice_sizes(400, 20)
    [20, 36, 66, 121, 220, 400]
    """
    return sorted({int(round(v)) for v in np.geomspace(smallest, n_train, count)})


def measure_slices(model, X, y, slices, *, column: str = "slice", repeats: int = REPEATS,
                   test_size: float = TEST_FRACTION, metric: str = "error", n_jobs: int = 1,
                   random_state=SEED, min_rows: int = MIN_ROWS, progress=False,
                   journal_dir=None, resume: bool = False,
                   n_sizes: int = SLICE_SIZES) -> SliceCurves:
    """Measure one learning curve per slice (value of ``slices``), the others held whole.

    Parameters
    ----------
    model, X, y
        As for `curvefit.measuring.runner.measure`.
    slices : array-like
        The slice of every row (one value per row of ``X``).
    column : str
        The slices' name, for messages and the result.
    min_rows : int
        Slices with fewer training rows than this (or fewer than ``MIN_TEST_ROWS`` test
        rows) are skipped, with the reason.
    journal_dir : path, optional
        A folder for one journal per slice (``slice-<k>.journal``, crash-safe cells).
    resume : bool
        Skip the cells already in those journals.
    n_sizes : int
        Sizes measured per slice (geometric, up to all its training rows; at least 3).

    Returns
    -------
    SliceCurves

    References
    ----------
    .. [1] K. H. Tae and S. E. Whang, "Slice Tuner", SIGMOD 2021.
    """
    from pathlib import Path

    from curvefit.measuring.runner import measure

    codes = np.asarray(slices)
    if codes.ndim != 1 or len(codes) != len(y):
        raise InputError(f"the {column} column must give one slice per row ({len(y)} rows)")
    if len(codes) and any(v is None or (isinstance(v, float) and math.isnan(v)) for v in codes.tolist()):
        raise InputError(f"the {column} column has missing values; fill them or drop those rows")
    repeats = check_count(repeats, "repeats", minimum=1)
    n_sizes = check_count(n_sizes, "sizes", minimum=3)
    seed = check_seed(random_state)
    seed = SEED if seed is None else int(seed)
    values = sorted(set(codes.tolist()), key=str)
    if len(values) < 2:
        raise InputError(f"the {column} column has {len(values)} value(s); slices need at least 2")
    if len(values) > 50:
        raise InputError(f"the {column} column has {len(values)} values; per-slice curves take "
                         "at most 50 slices (group rare values first)")
    rows = {v: int(np.sum(codes == v)) for v in values}
    shares = {v: rows[v] / len(codes) for v in values}
    curves, skipped = {}, {}
    for k, v in enumerate(values):
        splitter = SliceSplit(codes, v, test_size)
        test, train = splitter.parts(0, seed)[v]
        if len(train) < min_rows or len(test) < MIN_TEST_ROWS:
            skipped[v] = (f"{column} = {v} has only {rows[v]} rows ({len(train)} for training, "
                          f"{len(test)} for testing); a curve needs at least {min_rows} "
                          f"training and {MIN_TEST_ROWS} test rows")
            continue
        other = splitter.other_rows(seed)
        own = slice_sizes(len(train), max(5, min(min_rows, len(train)) // 2), n_sizes)
        journal = None
        if journal_dir is not None:
            Path(journal_dir).mkdir(parents=True, exist_ok=True)
            journal = Path(journal_dir) / f"slice-{k}.journal"
        curve = measure(model, X, y, sizes=[other + s for s in own], repeats=repeats,
                        test_size=test_size, metric=metric, n_jobs=n_jobs, random_state=seed,
                        splitter=splitter, journal=journal, resume=bool(resume and journal),
                        progress=progress)
        points = curve.points.copy()
        points["size"] = points["size"] - other
        meta = dict(curve.meta)
        meta.update(sizes=own, n_pool=len(train), n_test=len(test),
                    slice={"column": column, "value": _plain(v), "other_rows": other,
                           "rows": rows[v]})
        curves[v] = Curve(points, meta)
    return SliceCurves(column=column, curves=curves, shares=shares, rows=rows, skipped=skipped)


def measure_slices_of_table(path, *, target: str, column: str, model: str | None,
                            params=None, features=None, repeats: int = REPEATS,
                            test_size: float = TEST_FRACTION, metric: str = "error",
                            n_jobs: int = 1, random_state=SEED, progress=False,
                            journal_dir=None, resume: bool = False) -> SliceCurves:
    """`measure_slices` on a table file: the slices are the values of ``column``.

    The column stays a feature unless ``features`` leaves it out; it may be the target
    itself (per-class curves).
    """
    from curvefit.measuring import data as cfdata
    from curvefit.measuring.models import parse_params, resolve_model

    column = str(column)
    df = cfdata.load_used_columns(path, features and [*map(str, features), str(target), column])
    if column not in [str(c) for c in df.columns]:
        raise InputError(f"--slice column {column!r} not in the table; available columns: "
                         f"{', '.join(str(c) for c in list(df.columns)[:25])}")
    codes = df[column].reset_index(drop=True)
    if codes.isna().any():
        raise InputError(f"the --slice column {column!r} has {int(codes.isna().sum())} missing "
                         "values; fill them or drop those rows")
    ds = cfdata.prepare(df, target, features)
    spec = resolve_model(model, parse_params(params or []))
    return measure_slices(spec, ds.X, ds.y, codes.astype(str).to_numpy(), column=column,
                          repeats=repeats, test_size=test_size, metric=metric, n_jobs=n_jobs,
                          random_state=random_state, progress=progress,
                          journal_dir=journal_dir, resume=resume)


def is_slices_file(path) -> bool:
    """True when ``path`` is a JSON file written by `SliceCurves.write`."""
    import json
    from pathlib import Path

    p = Path(path)
    if p.suffix.lower() != ".json" or not p.is_file():
        return False
    try:
        with open(p, "rb") as fh:
            head = fh.read(4096).decode("utf-8", "replace")
        return f'"{FORMAT}"' in head and json.loads(p.read_text()).get("format") == FORMAT
    except (OSError, ValueError, AttributeError):
        return False
