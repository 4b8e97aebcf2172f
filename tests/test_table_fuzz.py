"""Fuzzing the table loader: whatever bytes a data file holds, `load_table` (and `prepare`
on what it read) gives a table or an InputError, never another exception."""

import gzip
import tempfile
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curvefit.core.errors import InputError
from curvefit.measuring.data import load_table, prepare

FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
SUFFIXES = [".csv", ".tsv", ".txt", ".tab", ".parquet", ".npz", ".csv.gz", ".txt.gz"]

# characters that matter to a CSV reader, plus some that should not
CELL_CHARS = st.sampled_from(list('0123456789.-+eE,;\t|" \'\r\nabcxyzNaInf\x00é€\ufeff'))
LINES = st.lists(st.text(CELL_CHARS, max_size=30), max_size=12)


@pytest.fixture(scope="module")
def folder():
    with tempfile.TemporaryDirectory(prefix="curvefit-fuzz-") as d:
        yield Path(d)


def _load(folder: Path, name: str, data: bytes):
    path = folder / name
    if name.endswith(".gz"):
        data = gzip.compress(data)
    path.write_bytes(data)
    try:
        df = load_table(path)
    except InputError as exc:
        assert "\n" not in str(exc)
        return None
    assert isinstance(df, pd.DataFrame)
    try:  # what a command does next with the first column as the target
        if len(df.columns):
            prepare(df, str(df.columns[0]))
    except InputError as exc:
        assert "\n" not in str(exc)
    return df


@FUZZ
@given(raw=st.binary(max_size=2000), suffix=st.sampled_from(SUFFIXES))
def test_random_bytes(folder, raw, suffix):
    _load(folder, "table" + suffix, raw)


@FUZZ
@given(header=st.text(CELL_CHARS, max_size=40), lines=LINES,
       suffix=st.sampled_from([".csv", ".txt", ".tsv", ".csv.gz"]),
       encoding=st.sampled_from(["utf-8", "latin-1", "utf-16"]))
def test_random_csv_text(folder, header, lines, suffix, encoding):
    text = "\n".join([header, *lines])
    _load(folder, "table" + suffix, text.encode(encoding, errors="replace"))


@FUZZ
@given(rows=st.lists(st.lists(st.one_of(st.integers(-10**30, 10**30), st.floats(allow_nan=True),
                                        st.text(CELL_CHARS, max_size=8), st.none()),
                              min_size=1, max_size=4), max_size=30),
       sep=st.sampled_from([",", ";", "\t", "|"]))
def test_random_cells_in_a_well_formed_table(folder, rows, sep):
    width = max((len(r) for r in rows), default=1)
    rows = [r + [None] * (width - len(r)) for r in rows]
    frame = pd.DataFrame(rows, columns=[f"c{i}" for i in range(width)])
    _load(folder, "table.csv", frame.to_csv(index=False, sep=sep).encode())
