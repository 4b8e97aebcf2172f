"""Loading tables and preparing them for measurement.

`load_table` reads CSV/TSV/TXT, Parquet or NPZ into a pandas DataFrame; `prepare`
splits it into features and target, decides the task, and fingerprints the content so
that a run file says exactly which data it was measured on. Everything here raises
`InputError` with one line naming the problem and the fix.

Task rule (documented, used by `prepare`):

* a non-numeric or boolean target is **classification**;
* a numeric target (integer or float) whose values are all whole numbers and that has
  at most ``MAX_INTEGER_CLASSES`` (20) distinct values is **classification** (labels
  such as 0/1 or the digits 0..9 stored as ``1.0, 2.0``, ...);
* any other numeric target is **regression**.

Pass ``task="classification"`` or ``task="regression"`` to override it.

Fingerprint (`table_fingerprint`): ``"v2:"`` and the SHA-256 of the table, column by
column: a line with the column name, its kind and the length of its payload, then the
payload. A numeric column (kind ``n``, booleans excluded) is hashed as float64
little-endian bytes: whole values below 2^53 exact (``3.0`` and ``3`` agree), other
values rounded to 40 mantissa bits (about 12 significant digits, which absorbs the
last-bit differences of decimal parsing), ``-0.0`` as ``0.0`` and every missing value
as one NaN; an integer column beyond 2^53 (kind ``i``) as exact int64. Any other column
(kind ``s``: strings, categories, dates, booleans) is the JSON list of its values as
text, missing values as ``null``. So the same data saved as CSV and as Parquet give the
same fingerprint, while row order and column order count. Runs recorded before this
form hold `legacy_table_fingerprint` (64 hex digits, no tag); `same_fingerprint`
compares the two forms by computing the old one of the current table when needed.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from curvefit.core.errors import InputError

MAX_INTEGER_CLASSES = 20
TASKS = ("classification", "regression")

_CSV_SUFFIXES = {".csv"}
_SNIFF_SUFFIXES = {".tsv", ".txt", ".tab"}
_PARQUET_SUFFIXES = {".parquet", ".pq"}
_NPZ_SUFFIXES = {".npz"}
_COMPRESSION = {".gz", ".bz2", ".xz", ".zst", ".zip"}


def _list_names(names, limit: int = 25) -> str:
    names = [str(n) for n in names]
    if len(names) > limit:
        return ", ".join(names[:limit]) + f", ... ({len(names) - limit} more)"
    return ", ".join(names) or "none"


def _data_suffix(path: Path) -> str:
    """The format suffix, looking through a compression suffix (``a.csv.gz`` → ``.csv``)."""
    suffixes = [s.lower() for s in path.suffixes]
    if len(suffixes) >= 2 and suffixes[-1] in _COMPRESSION:
        return suffixes[-2]
    return suffixes[-1] if suffixes else ""


def load_table(path: str | os.PathLike, columns=None) -> pd.DataFrame:
    """Read a data table from CSV, TSV/TXT (separator sniffed), Parquet or NPZ.

    Parameters
    ----------
    path : str or path-like
        ``.csv`` (comma separated, header row; a file whose header only splits on
        ``;``, tab or ``|`` is re-read with that separator), ``.tsv``/``.txt``/``.tab`` (separator
        detected from the file), ``.parquet``/``.pq`` (via pyarrow), or ``.npz`` with
        arrays ``X`` (2-D) and ``y`` (1-D) and optionally ``feature_names``. Text
        formats may be compressed (``.csv.gz``).
    columns : list of str, optional
        Read only these columns (kept in the file's order; see `table_columns`): the
        other columns of a CSV are not converted at all and those of a Parquet file
        not read. Every name must be in the file. Default: all columns.

    Returns
    -------
    pandas.DataFrame
        For NPZ: one column per feature (named from ``feature_names`` or ``x0..x{k-1}``),
        a ``y`` column, and any other 1-D array of the same length as a column.

    Raises
    ------
    InputError
        Missing or unreadable file, unknown format, empty table.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "t.csv").write_text("a,b,y\\n1,2,0\\n3,4,1\\n")
    >>> load_table(d / "t.csv").shape
    (2, 3)
    """
    path = Path(path)
    if not path.exists():
        raise InputError(f"data file not found: {path}; check the path")
    if path.is_dir():
        raise InputError(f"{path} is a directory; give the path of a CSV, Parquet or NPZ file")
    suffix = _data_suffix(path)
    if suffix in _CSV_SUFFIXES | _SNIFF_SUFFIXES and path.suffix.lower() not in _COMPRESSION:
        _check_delimiters(path)
    try:
        df = _read_frame(path, suffix, None if columns is None else [str(c) for c in columns])
    except InputError:
        raise
    except pd.errors.EmptyDataError:
        raise InputError(f"data file {path} is empty; it needs a header row and data rows") from None
    except (OSError, UnicodeDecodeError, ValueError, pd.errors.ParserError, ImportError) as exc:
        raise InputError(f"cannot read {path} as {suffix.lstrip('.').upper()}: "
                         f"{_one_line(exc)}; check the file is complete and in that format") from None
    except Exception as exc:  # pyarrow raises its own error classes for corrupt files
        raise InputError(f"cannot read {path} as {suffix.lstrip('.').upper()}: "
                         f"{type(exc).__name__}: {_one_line(exc)}") from None
    if df.shape[1] == 0:
        raise InputError(f"data file {path} has no columns; it needs a header row")
    if df.shape[0] == 0:
        raise InputError(f"data file {path} has no data rows (columns: {_list_names(df.columns)})")
    dupes = pd.Index(df.columns)[pd.Index(df.columns).duplicated()].unique()
    if len(dupes):
        raise InputError(f"data file {path} has duplicate column names: {_list_names(dupes)}; rename them")
    df.columns = [str(c) for c in df.columns]
    return df


def _read_frame(path: Path, suffix: str, columns: list | None, header_only: bool = False) -> pd.DataFrame:
    """The table (or, with ``header_only``, its empty header) in ``columns`` (None: all)."""
    rows = 0 if header_only else None
    if suffix in _CSV_SUFFIXES | _SNIFF_SUFFIXES:
        sniff = suffix in _SNIFF_SUFFIXES
        if not sniff:
            head = pd.read_csv(path, nrows=0)
            # a ".csv" written with semicolons or tabs (common with decimal commas)
            sniff = head.shape[1] == 1 and any(sep in str(head.columns[0]) for sep in ";\t|")
            if header_only and not sniff:
                return head
        if sniff:
            return pd.read_csv(path, sep=None, engine="python", usecols=columns, nrows=rows)
        return pd.read_csv(path, low_memory=False, usecols=columns)  # one dtype per column
    if suffix in _PARQUET_SUFFIXES:
        import pyarrow.parquet as pq

        names = [n for n in pq.read_schema(path).names if n not in _parquet_index_columns(path)]
        if header_only:
            return pd.DataFrame(columns=names)
        # column by column, each converted without a copy (numbers without gaps): the
        # peak stays near one copy of the table instead of Arrow's and pandas' side by side
        kwargs = {"split_blocks": True, "self_destruct": True}
        parts = {name: pd.read_parquet(path, columns=[name], to_pandas_kwargs=kwargs)[name]
                 for name in names if columns is None or name in columns}
        return pd.DataFrame(parts, copy=False) if parts else pd.read_parquet(path, columns=[])
    if suffix in _NPZ_SUFFIXES:
        df = _read_npz(path)
        return df[[c for c in df.columns if columns is None or c in columns]]
    raise InputError(f"unknown data format {suffix or '(no extension)'!r} for {path}; "
                     "use .csv, .tsv, .txt, .parquet or .npz")


def _parquet_index_columns(path: Path) -> set:
    """Columns pandas stored for a DataFrame's index (restored as the index, not data)."""
    import pyarrow.parquet as pq

    meta = pq.read_schema(path).pandas_metadata or {}
    return {c for c in meta.get("index_columns", []) if isinstance(c, str)}


def load_used_columns(path: str | os.PathLike, wanted) -> pd.DataFrame:
    """The table with only the ``wanted`` columns, in the file's order, when the header has
    every one of them; otherwise (or with no ``wanted``) the whole table, so the checks after
    reading name a missing column and list the file's columns.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "t.csv").write_text("a,b,note,y\\n1,2,x,0\\n3,4,z,1\\n")
    >>> list(load_used_columns(d / "t.csv", ["y", "a"]).columns)
    ['a', 'y']
    >>> list(load_used_columns(d / "t.csv", ["a", "missing"]).columns)
    ['a', 'b', 'note', 'y']
    """
    if not wanted:
        return load_table(path)
    wanted = {str(w) for w in wanted}
    header = table_columns(path)
    return load_table(path, columns=[c for c in header if c in wanted] if wanted <= set(header) else None)


def table_columns(path: str | os.PathLike) -> list[str]:
    """The column names of a data file, from its header (Parquet: its schema) only.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "t.csv").write_text("a,b,y\\n1,2,0\\n3,4,1\\n")
    >>> table_columns(d / "t.csv")
    ['a', 'b', 'y']
    """
    path = Path(path)
    suffix = _data_suffix(path)
    if not path.is_file() or suffix in _NPZ_SUFFIXES:
        return [str(c) for c in load_table(path).columns]  # its errors; NPZ has no header
    try:
        return [str(c) for c in _read_frame(path, suffix, None, header_only=True).columns]
    except InputError:
        raise
    except Exception:  # an unreadable file: load_table says why
        return [str(c) for c in load_table(path).columns]


_DELIMITERS = {",": "commas", "\t": "tabs", ";": "semicolons", "|": "bars"}


def _check_delimiters(path: Path, sample_lines: int = 20) -> None:
    """Refuse a text table whose header and rows use different delimiters (a comma header
    over tab-separated rows), which pandas would read as one column of text and gaps."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(65536).decode("utf-8", errors="replace")
    except OSError:
        return  # reading proper reports it
    lines = [ln for ln in head.splitlines()[:sample_lines + 1] if ln.strip()]
    if len(lines) < 2:
        return
    header, rows = lines[0], lines[1:]
    counts = {d: header.count(d) for d in _DELIMITERS}
    used = max(counts, key=counts.get)
    if counts[used] == 0:
        return  # a single column
    without = sum(1 for r in rows if used not in r)
    if without < 0.8 * len(rows):
        return
    for other, name in _DELIMITERS.items():
        if other != used and sum(1 for r in rows if other in r) >= 0.8 * len(rows):
            raise InputError(f"{path}: the header line is separated by {_DELIMITERS[used]} but the "
                             f"rows by {name}; use one delimiter throughout")


def check_finite_features(X, what: str = "feature") -> None:
    """Refuse infinite values in numeric features up front (every cell would fail later).

    Missing values are allowed (imputed with ``encode="auto"``); ``inf`` is not.

    Examples
    --------
    >>> check_finite_features(np.array([[1.0, np.inf]]))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: feature column 1 has 1 infinite value (first at row index 0); ...
    """
    if isinstance(X, pd.DataFrame):
        columns = [(name, X[name].to_numpy()) for name in X.columns
                   if pd.api.types.is_numeric_dtype(X[name].dtype)
                   and not pd.api.types.is_bool_dtype(X[name].dtype)]
    else:
        arr = np.asarray(X)
        if arr.dtype.kind not in "fc" or arr.ndim != 2:
            return
        columns = [(j, arr[:, j]) for j in range(arr.shape[1])]
    for name, values in columns:
        bad = np.isinf(np.asarray(values, dtype=float))
        if bad.any():
            n = int(bad.sum())
            label = repr(name) if isinstance(name, str) else str(name)
            raise InputError(f"{what} column {label} has {n} infinite value{'s' if n > 1 else ''} "
                             f"(first at row index {int(np.flatnonzero(bad)[0])}); replace them "
                             "(gaps are imputed) or drop those rows")


def _one_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return text[:300] if text else type(exc).__name__


def _read_npz(path: Path) -> pd.DataFrame:
    try:
        archive = np.load(path, allow_pickle=False)
    except ValueError as exc:
        raise InputError(f"cannot read {path} as NPZ: {_one_line(exc)} "
                         "(object arrays are not loaded; save plain numeric or string arrays)") from None
    with archive:
        names = list(archive.files)
        if "X" not in names or "y" not in names:
            raise InputError(f"NPZ file {path} needs arrays 'X' and 'y' (found: {_list_names(names)}); "
                             "save with numpy.savez(path, X=X, y=y)")
        X = np.asarray(archive["X"])
        y = np.asarray(archive["y"])
        if X.ndim == 1:
            X = X.reshape(-1, 1)
        if X.ndim != 2:
            raise InputError(f"NPZ file {path}: 'X' must be 2-D (rows x features), got shape {X.shape}")
        if y.ndim != 1:
            y = y.reshape(-1) if y.ndim == 2 and 1 in y.shape else y
        if y.ndim != 1 or len(y) != X.shape[0]:
            raise InputError(f"NPZ file {path}: 'y' must be 1-D with one value per row of X "
                             f"(X has {X.shape[0]} rows, y has shape {y.shape})")
        if "feature_names" in names:
            feature_names = [str(v) for v in np.asarray(archive["feature_names"]).reshape(-1)]
            if len(feature_names) != X.shape[1]:
                raise InputError(f"NPZ file {path}: 'feature_names' has {len(feature_names)} names "
                                 f"for {X.shape[1]} columns of X")
        else:
            feature_names = [f"x{i}" for i in range(X.shape[1])]
        columns = {name: X[:, i] for i, name in enumerate(feature_names)}
        if "y" in columns:
            raise InputError(f"NPZ file {path}: a feature is named 'y', which is the target's column name")
        columns["y"] = y
        for name in names:
            if name in ("X", "y", "feature_names") or name in columns:
                continue
            arr = np.asarray(archive[name])
            if arr.ndim == 1 and len(arr) == X.shape[0]:
                columns[name] = arr
    return pd.DataFrame(columns)


# ---------------------------------------------------------------------- fingerprint
FINGERPRINT_TAG = "v2:"
_WHOLE_LIMIT = 2.0 ** 53
_DROPPED_BITS = 12  # a float's last 12 of 52 mantissa bits: about 12 significant digits are kept
_CANONICAL_NAN = np.uint64(0x7FF8000000000000)


def _is_numeric(series: pd.Series) -> bool:
    return (pd.api.types.is_numeric_dtype(series.dtype)
            and not pd.api.types.is_bool_dtype(series.dtype))


def _number_bytes(series: pd.Series) -> tuple[str, bytes]:
    """A numeric column as canonical little-endian bytes, and its kind.

    Kind ``n``: float64 where whole values below 2^53 are exact (``3`` and ``3.0``
    agree), other finite values are rounded to 40 mantissa bits (about 12 significant
    digits, so a last-bit difference of CSV parsing does not count), ``-0.0`` is ``0.0``
    and every missing value is one NaN. Kind ``i``: an integer column holding a value
    beyond 2^53, hashed exactly as int64.
    """
    if pd.api.types.is_integer_dtype(series.dtype) and not series.hasnans:
        ints = series.to_numpy(dtype="int64")
        if len(ints) and max(int(ints.max()), -int(ints.min())) >= _WHOLE_LIMIT:
            return "i", ints.astype("<i8", copy=False).tobytes()
    values = pd.to_numeric(series, errors="coerce").to_numpy(dtype="float64", na_value=np.nan)
    values = values + 0.0  # a new array, with -0.0 as 0.0
    bits = values.view(np.uint64)
    whole = np.isfinite(values) & (np.abs(values) < _WHOLE_LIMIT)
    whole[whole] = values[whole] == np.floor(values[whole])
    rounded = (bits + np.uint64(1 << (_DROPPED_BITS - 1))) & ~np.uint64((1 << _DROPPED_BITS) - 1)
    bits = np.where(whole | ~np.isfinite(values), bits, rounded)
    bits[np.isnan(values)] = _CANONICAL_NAN
    return "n", bits.astype("<u8", copy=False).tobytes()


def _text_bytes(series: pd.Series) -> bytes:
    """A non-numeric column as the JSON list of its values as text, missing as null."""
    missing = series.isna().to_numpy()
    text = series.astype(str).tolist()
    if missing.any():
        text = [None if m else t for m, t in zip(missing.tolist(), text)]
    return json.dumps(text, ensure_ascii=False, separators=(",", ":")).encode("utf-8")


def table_fingerprint(df: pd.DataFrame) -> str:
    """SHA-256 of a table's content, tagged ``v2:``, stable across CSV and Parquet copies.

    The canonical form is described in the module docstring: per column, its name, its
    kind and its values in row order (numbers as canonical float64 bytes, text as JSON).
    Hashing bytes per column makes it fast (about a second for a million rows of 20
    numbers); `legacy_table_fingerprint` is the slower text form older runs recorded,
    and `same_fingerprint` compares a recorded fingerprint of either form.

    References
    ----------
    .. [1] National Institute of Standards and Technology, "Secure Hash Standard (SHS)",
       FIPS PUB 180-4, 2015 (SHA-256).
    .. [2] IEEE, "IEEE Standard for Floating-Point Arithmetic", IEEE 754-2019 (the
       float64 layout whose last mantissa bits are rounded off).

    Examples
    --------
    >>> a = pd.DataFrame({"x": [1, 2], "y": ["a", "b"]})
    >>> b = pd.DataFrame({"x": [1.0, 2.0], "y": ["a", "b"]})
    >>> table_fingerprint(a) == table_fingerprint(b)
    True
    >>> fp = table_fingerprint(a)
    >>> fp[:3], len(fp)
    ('v2:', 67)
    """
    h = hashlib.sha256()
    h.update(f"curvefit.table/2 rows={len(df)} cols={df.shape[1]}\n".encode())
    for name in df.columns:
        col = df[name]
        if _is_numeric(col):
            kind, payload = _number_bytes(col)
        else:
            kind, payload = "s", _text_bytes(col)
        head = json.dumps([str(name), kind, len(payload)], ensure_ascii=False)
        h.update(head.encode("utf-8") + b"\n")
        h.update(payload)
    return FINGERPRINT_TAG + h.hexdigest()


def _canonical_numbers(series: pd.Series) -> list:
    values = pd.to_numeric(series, errors="coerce").to_numpy(dtype="float64", na_value=np.nan)
    out = []
    for v in values.tolist():
        if math.isnan(v):
            out.append(None)
        elif math.isfinite(v) and v == int(v) and abs(v) < 2 ** 53:
            out.append(str(int(v)))
        else:
            out.append(format(v, ".12g"))
    return out


def _canonical_text(series: pd.Series) -> list:
    missing = series.isna().to_numpy()
    text = series.astype(str).tolist()
    return [None if m else t for m, t in zip(missing.tolist(), text)]


def legacy_table_fingerprint(df: pd.DataFrame) -> str:
    """The fingerprint runs recorded before the ``v2:`` form: SHA-256 (hex, untagged) of
    a text form of the table (see DEVELOPERS, "Fingerprint"). Slow (a Python loop over
    every number); only computed to compare with a fingerprint an older run recorded.

    Examples
    --------
    >>> a = pd.DataFrame({"x": [1, 2], "y": ["a", "b"]})
    >>> len(legacy_table_fingerprint(a))
    64
    """
    h = hashlib.sha256()
    h.update(f"curvefit.table/1 rows={len(df)} cols={df.shape[1]}\n".encode())
    for name in df.columns:
        col = df[name]
        if _is_numeric(col):
            kind, values = "n", _canonical_numbers(col)
        else:
            kind, values = "s", _canonical_text(col)
        h.update(json.dumps([str(name), kind], ensure_ascii=False).encode("utf-8"))
        h.update(b"\n")
        h.update(json.dumps(values, ensure_ascii=False, separators=(",", ":")).encode("utf-8"))
        h.update(b"\n")
    return h.hexdigest()


def is_legacy_fingerprint(fp) -> bool:
    """True for a table fingerprint in the form recorded before ``v2:`` (64 hex digits).

    Examples
    --------
    >>> is_legacy_fingerprint("ab" * 32), is_legacy_fingerprint("v2:" + "ab" * 32)
    (True, False)
    """
    return (isinstance(fp, str) and len(fp) == 64
            and all(c in "0123456789abcdef" for c in fp))


def same_fingerprint(recorded, current, legacy=None) -> bool:
    """Whether two data fingerprints name the same table: the one comparison of
    fingerprints (journal resume, history store, efficiency pairing).

    Equal texts are the same table. A ``recorded`` fingerprint in the old form
    (`is_legacy_fingerprint`) against a ``v2:`` ``current`` one is compared with
    ``legacy``, the current table's old-form fingerprint: a text, or a function that
    computes it (called only then, since it is slow). Without ``legacy`` the two forms
    never match. Either side may be None (unknown): never the same.

    Examples
    --------
    >>> t = pd.DataFrame({"x": [1.5, 2.0]})
    >>> old, new = legacy_table_fingerprint(t), table_fingerprint(t)
    >>> same_fingerprint(new, new), same_fingerprint(old, new)
    (True, False)
    >>> same_fingerprint(old, new, legacy=lambda: legacy_table_fingerprint(t))
    True
    >>> same_fingerprint(new, old, legacy=old)  # order does not matter
    True
    """
    if recorded is None or current is None:
        return False
    if recorded == current:
        return True
    if legacy is None:
        return False
    for old, new in ((recorded, current), (current, recorded)):
        if is_legacy_fingerprint(old) and isinstance(new, str) and new.startswith(FINGERPRINT_TAG):
            value = legacy() if callable(legacy) else legacy
            return value == old
    return False


def array_fingerprint(X, y) -> str:
    """SHA-256 (hex) of features and target as given from Python (arrays or a DataFrame).

    Unlike `table_fingerprint` it hashes the bytes, so it is fast on large arrays but
    tells ``3`` from ``3.0``; runs measured from files use `table_fingerprint`.

    Examples
    --------
    >>> a = array_fingerprint(np.eye(2), np.array([0, 1]))
    >>> a == array_fingerprint(np.eye(2), np.array([0, 1])) != array_fingerprint(np.eye(2), np.array([1, 0]))
    True
    """
    h = hashlib.sha256(b"curvefit.arrays/1\n")
    if isinstance(X, pd.DataFrame):
        h.update(repr([str(c) for c in X.columns]).encode())
        h.update(pd.util.hash_pandas_object(X, index=False).to_numpy().tobytes())
    else:
        arr = np.ascontiguousarray(X)
        h.update(f"{arr.dtype.str} {arr.shape}".encode())
        h.update(arr.tobytes() if arr.dtype != object else repr(arr.tolist()).encode())
    yy = np.asarray(y)
    h.update(yy.tobytes() if yy.dtype != object else repr(yy.tolist()).encode())
    return h.hexdigest()


def leading_rows_fingerprint(df: pd.DataFrame, n_rows: int) -> str:
    """SHA-256 (hex) of a table's first ``n_rows`` rows, hashed from numpy buffers.

    Numeric columns are hashed as float64 bytes (``3`` and ``3.0`` agree, so a column
    that turns to floats when later rows add gaps keeps its fingerprint); other columns
    through pandas' per-value hashes. About a second per 10^7 values, so a grown
    table's older part (`curvefit.measuring.growing`) is recognised cheaply.

    Examples
    --------
    >>> a = pd.DataFrame({"x": [1, 2, 3], "y": ["a", "b", "c"]})
    >>> b = pd.DataFrame({"x": [1.0, 2.0, 9.0], "y": ["a", "b", "z"]})
    >>> leading_rows_fingerprint(a, 2) == leading_rows_fingerprint(b, 2) != leading_rows_fingerprint(b, 3)
    True
    """
    h = hashlib.sha256(f"curvefit.rows/1 rows={int(n_rows)} cols={df.shape[1]}\n".encode())
    for name in df.columns:
        col = df[name].iloc[:int(n_rows)]
        h.update(json.dumps(str(name), ensure_ascii=False).encode("utf-8") + b"\n")
        if _is_numeric(col):
            values = col.to_numpy(dtype="float64", na_value=np.nan)
            h.update(np.where(np.isnan(values), np.nan, values).tobytes())
        else:
            h.update(pd.util.hash_pandas_object(col, index=False).to_numpy().tobytes())
    return h.hexdigest()


# ---------------------------------------------------------------------- prepare
@dataclass(frozen=True, eq=False)
class Dataset:
    """Features and target ready for measurement.

    Attributes
    ----------
    X : pandas.DataFrame
        The feature columns with their original dtypes.
    y : numpy.ndarray
        The target, 1-D. Whole-number float labels of a classification task become
        integers.
    feature_names : list of str
    task : {"classification", "regression"}
        Decided by the rule in the module docstring unless overridden.
    categorical : list of str
        Non-numeric feature columns (strings, categories, dates, booleans with gaps).
    has_missing : bool
        True when any feature value is missing.
    classes : numpy.ndarray or None
        Sorted distinct labels (classification only).
    fingerprint : str
        `table_fingerprint` of the whole table given to `prepare`.
    """

    X: pd.DataFrame
    y: np.ndarray
    feature_names: list
    task: str
    categorical: list = field(default_factory=list)
    has_missing: bool = False
    classes: np.ndarray | None = None
    fingerprint: str = ""
    target: str = "y"

    @property
    def n_rows(self) -> int:
        return int(len(self.y))

    def describe(self) -> dict:
        """Plain-JSON summary for run metadata."""
        d = {"target": self.target, "task": self.task, "n_rows": self.n_rows,
             "n_features": len(self.feature_names), "feature_names": list(self.feature_names),
             "categorical": list(self.categorical), "has_missing": bool(self.has_missing),
             "fingerprint": self.fingerprint}
        if self.classes is not None:
            d["classes"] = [c.item() if hasattr(c, "item") else c for c in self.classes]
            d["class_counts"] = {str(k): int(v) for k, v in
                                 zip(*np.unique(self.y, return_counts=True))}
        return d

    def __repr__(self) -> str:
        extra = f", {len(self.classes)} classes" if self.classes is not None else ""
        return (f"Dataset({self.n_rows} rows, {len(self.feature_names)} features, "
                f"{self.task}{extra}, {len(self.categorical)} categorical, "
                f"missing={self.has_missing})")


def infer_task(y: pd.Series | np.ndarray) -> str:
    """Classification or regression by the rule in the module docstring.

    Examples
    --------
    >>> infer_task(np.array([0, 1, 1, 0]))
    'classification'
    >>> infer_task(np.array([0.5, 1.25, 3.0]))
    'regression'
    >>> infer_task(np.array(["cat", "dog"], dtype=object))
    'classification'
    """
    s = pd.Series(y)
    if pd.api.types.is_bool_dtype(s.dtype) or not pd.api.types.is_numeric_dtype(s.dtype):
        return "classification"
    values = pd.to_numeric(s, errors="coerce").dropna().to_numpy(dtype="float64")
    if len(values) == 0:
        return "regression"
    whole = bool(np.all(np.isfinite(values)) and np.all(values == np.round(values)))
    if whole and len(np.unique(values)) <= MAX_INTEGER_CLASSES:
        return "classification"
    return "regression"


def _is_categorical_feature(series: pd.Series) -> bool:
    dtype = series.dtype
    if pd.api.types.is_bool_dtype(dtype):
        return False
    return not pd.api.types.is_numeric_dtype(dtype)


def prepare(df: pd.DataFrame, target: str, features=None, *, drop=(),
            task: str | None = None) -> Dataset:
    """Split a table into features and target, decide the task, fingerprint it.

    Parameters
    ----------
    df : pandas.DataFrame
        The whole table (as from `load_table`).
    target : str
        Name of the target column.
    features : list of str, optional
        Feature columns to use (default: every column except the target and ``drop``).
    drop : sequence of str, keyword-only
        Columns that are never features (e.g. a group id or a time-order column),
        even if listed in ``features``. Names not in the table are ignored; the caller
        validates its own columns.
    task : {"classification", "regression"}, optional
        Override the inferred task.

    Returns
    -------
    Dataset

    Raises
    ------
    InputError
        Target absent (lists the columns), a listed feature absent, the target listed
        as a feature, missing values in the target, a single class, no feature left.

    Examples
    --------
    >>> t = pd.DataFrame({"a": [1.0, 2.0, 3.0, 4.0], "c": ["u", "v", "u", "v"],
    ...                   "y": [0, 1, 0, 1]})
    >>> ds = prepare(t, "y")
    >>> ds.task, ds.feature_names, ds.categorical
    ('classification', ['a', 'c'], ['c'])
    """
    if not isinstance(df, pd.DataFrame):
        raise InputError(f"expected a table (pandas DataFrame), got {type(df).__name__}")
    if len(df) == 0:
        raise InputError("the table has no rows")
    columns = [str(c) for c in df.columns]
    if len(set(columns)) != len(columns):
        raise InputError("the table has duplicate column names; rename them")
    df = df.set_axis(columns, axis=1)  # the caller's frame keeps its names; no copy of the data
    target = str(target)
    if target not in columns:
        raise InputError(f"target column {target!r} not in the table; available columns: "
                         f"{_list_names(columns)}")
    drop_set = {str(c) for c in (drop or ())}
    if features is not None:
        if isinstance(features, str):
            features = [f.strip() for f in features.split(",") if f.strip()]
        features = [str(f) for f in features]
        absent = [f for f in features if f not in columns]
        if absent:
            raise InputError(f"feature column{'s' if len(absent) > 1 else ''} "
                             f"{_list_names(absent)} not in the table; available columns: "
                             f"{_list_names(columns)}")
        if target in features:
            raise InputError(f"the target {target!r} is also listed as a feature; "
                             "remove it from the features")
        if len(set(features)) != len(features):
            raise InputError("a feature column is listed twice; list each once")
        feature_names = [f for f in features if f not in drop_set]
    else:
        feature_names = [c for c in columns if c != target and c not in drop_set]
    if not feature_names:
        excluded = sorted(drop_set & set(columns))
        raise InputError(f"no feature columns left (target {target!r}"
                         + (f", excluded {_list_names(excluded)}" if excluded else "")
                         + "); the table needs at least one other column")

    y_series = df[target]
    n_missing = int(y_series.isna().sum())
    if n_missing:
        rows = np.flatnonzero(y_series.isna().to_numpy())[:5].tolist()
        raise InputError(f"target column {target!r} has {n_missing} missing value"
                         f"{'s' if n_missing > 1 else ''} (first at row index "
                         f"{', '.join(map(str, rows))}); drop or fill those rows")
    if task is None:
        task = infer_task(y_series)
    elif task not in TASKS:
        raise InputError(f"unknown task {task!r}; use classification or regression")

    classes = None
    if task == "classification":
        y = _label_array(y_series)
        try:
            classes = np.unique(y)
        except TypeError:
            raise InputError(f"target column {target!r} mixes value types; "
                             "store the labels as one type (all text or all numbers)") from None
        if len(classes) < 2:
            only = classes[0].item() if hasattr(classes[0], "item") else classes[0]
            raise InputError(f"target column {target!r} has a single class ({only!r}); "
                             "classification needs at least two classes")
    else:
        try:
            y = pd.to_numeric(y_series).to_numpy(dtype="float64")
        except (ValueError, TypeError):
            raise InputError(f"target column {target!r} is not numeric; it cannot be a regression "
                             "target (use task classification)") from None
        if not np.all(np.isfinite(y)):
            raise InputError(f"target column {target!r} has infinite values; drop or fix those rows")

    X = df[feature_names]
    check_finite_features(X)
    categorical = [c for c in feature_names if _is_categorical_feature(X[c])]
    has_missing = bool(X.isna().to_numpy().any())
    return Dataset(X=X, y=y, feature_names=list(feature_names), task=task,
                   categorical=categorical, has_missing=has_missing, classes=classes,
                   fingerprint=table_fingerprint(df), target=target)


def _label_array(y_series: pd.Series) -> np.ndarray:
    """Class labels as a plain ndarray: whole-number floats become int64, text stays text."""
    s = y_series
    if pd.api.types.is_bool_dtype(s.dtype):
        return s.to_numpy(dtype=bool)
    if pd.api.types.is_numeric_dtype(s.dtype):
        values = s.to_numpy(dtype="float64")
        if np.all(values == np.round(values)) and np.all(np.abs(values) < 2.0 ** 53):
            return values.astype("int64")  # exact: whole numbers a float holds exactly
        return values
    if isinstance(s.dtype, pd.CategoricalDtype):
        s = s.astype(object)
    return s.to_numpy(dtype=object)


def as_features(X, what: str = "X"):
    """Features given from Python as a DataFrame (index dropped) or a 2-D array.

    A 1-D array is one feature column; a sparse matrix or a 3-D array is refused.

    Examples
    --------
    >>> as_features([1.0, 2.0, 3.0]).shape
    (3, 1)
    """
    if isinstance(X, pd.DataFrame):
        check_finite_features(X, f"{what}: feature")
        return X.reset_index(drop=True)
    if hasattr(X, "toarray") or hasattr(X, "tocsr"):
        raise InputError(f"{what} is a sparse matrix; pass a dense array or a DataFrame")
    arr = np.asarray(X)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2:
        raise InputError(f"{what} must be 2-D (rows x features), got shape {arr.shape}")
    check_finite_features(arr, f"{what}: feature")
    return arr


def as_target(y, n: int, what: str = "y") -> np.ndarray:
    """A target given from Python as a 1-D array of ``n`` values without gaps.

    Examples
    --------
    >>> as_target([[0], [1], [1]], 3).tolist()
    [0, 1, 1]
    """
    arr = np.asarray(y)
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1 or len(arr) != n:
        raise InputError(f"{what} must be 1-D with one value per row ({n} rows, got shape {arr.shape})")
    missing = pd.isna(pd.Series(arr)).to_numpy()
    if missing.any():
        raise InputError(f"{what} has {int(missing.sum())} missing values (first at row "
                         f"{int(np.flatnonzero(missing)[0])}); drop or fill those rows")
    return arr


def dataset_from_arrays(X, y, feature_names=None, *, task: str | None = None,
                        target: str = "y") -> Dataset:
    """Wrap in-memory ``X`` (array or DataFrame) and ``y`` as a `Dataset`.

    Used by the Python API when the user passes arrays instead of a file; the
    fingerprint covers ``X`` and ``y`` together.

    Examples
    --------
    >>> ds = dataset_from_arrays(np.arange(8.0).reshape(4, 2), [0, 1, 0, 1])
    >>> ds.feature_names
    ['x0', 'x1']
    """
    X = as_features(X)
    if isinstance(X, pd.DataFrame):
        frame = X.copy()
        frame.columns = [str(c) for c in frame.columns]
    else:
        names = list(feature_names) if feature_names is not None else [f"x{i}" for i in range(X.shape[1])]
        if len(names) != X.shape[1]:
            raise InputError(f"{len(names)} feature names for {X.shape[1]} columns of X")
        frame = pd.DataFrame(X, columns=[str(n) for n in names])
    y_arr = as_target(y, len(frame))
    if target in frame.columns:
        raise InputError(f"a feature column is named {target!r}, the target's name; rename it")
    frame[target] = y_arr
    return prepare(frame, target, task=task)
