"""The journal: durable append, torn-line tolerance, refusal of corrupt or foreign files."""

import json

import pytest

from curvefit.core.errors import InputError
from curvefit.measuring.journal import JOURNAL_FORMAT, Journal, journal_path

ID = {"data": "abc", "seed": 0, "sizes": [10, 20], "repeats": 2}


def _write(path, cells, identity=ID):
    j, done = Journal.open(path, identity, resume=False)
    assert done == []
    for c in cells:
        j.append(c)
    j.close()


def test_journal_path_sits_beside_the_run_file(tmp_path):
    assert journal_path(tmp_path / "run.json") == tmp_path / "run.json.journal"


def test_round_trip_and_header(tmp_path):
    p = tmp_path / "j"
    _write(p, [{"size": 10, "repeat": 0, "test_error": 0.5}, {"size": 20, "repeat": 0, "test_error": None}])
    first = json.loads(p.read_text().splitlines()[0])
    assert first["format"] == JOURNAL_FORMAT and first["run"]["data"] == "abc"
    j, done = Journal.open(p, ID, resume=True)
    j.close()
    assert [(c["size"], c["repeat"]) for c in done] == [(10, 0), (20, 0)]


def test_torn_last_line_is_dropped_and_truncated(tmp_path):
    p = tmp_path / "j"
    _write(p, [{"size": 10, "repeat": 0}])
    good = p.read_bytes()
    with open(p, "ab") as fh:
        fh.write(b'{"size": 20, "rep')  # what kill -9 mid-write leaves
    j, done = Journal.open(p, ID, resume=True)
    assert len(done) == 1
    j.append({"size": 20, "repeat": 1})
    j.close()
    assert p.read_bytes().startswith(good)
    assert [json.loads(line)["repeat"] for line in p.read_text().splitlines()[1:]] == [0, 1]


def test_corrupt_middle_line_is_refused(tmp_path):
    p = tmp_path / "j"
    _write(p, [{"size": 10, "repeat": 0}, {"size": 20, "repeat": 0}])
    lines = p.read_text().splitlines()
    lines[1] = "not json"
    p.write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError, match="corrupt at line 2"):
        Journal.open(p, ID, resume=True)


def test_foreign_journal_is_refused_naming_the_difference(tmp_path):
    p = tmp_path / "j"
    _write(p, [{"size": 10, "repeat": 0}])
    with pytest.raises(InputError, match="different run.*seed"):
        Journal.open(p, {**ID, "seed": 1}, resume=True)
    (tmp_path / "k").write_text('{"format": "something/else"}\n')
    with pytest.raises(InputError, match="not a curvefit journal"):
        Journal.open(tmp_path / "k", ID, resume=True)


def test_without_resume_an_old_journal_is_replaced(tmp_path):
    p = tmp_path / "j"
    _write(p, [{"size": 10, "repeat": 0}])
    j, done = Journal.open(p, {**ID, "seed": 5}, resume=False)
    j.close()
    assert done == [] and len(p.read_text().splitlines()) == 1


@pytest.mark.parametrize("content", [b"", b'{"format": "curvefit.jour', b"\n"])
def test_empty_or_torn_header_journal_resumes_as_empty(tmp_path, content):
    # a 0-byte journal (disk full at the start) or a header torn by kill -9 holds no cell:
    # --resume starts over instead of refusing
    p = tmp_path / "j"
    p.write_bytes(content)
    j, done = Journal.open(p, ID, resume=True)
    j.append({"size": 10, "repeat": 0})
    j.close()
    assert done == []
    header, cell = [json.loads(line) for line in p.read_text().splitlines()]
    assert header["run"] == ID and cell == {"size": 10, "repeat": 0}


@pytest.mark.parametrize("cell, words", [
    ('{"size": "abc", "repeat": 0}', "size is 'abc'"),
    ('{"size": 1e400, "repeat": 0}', "size is inf"),
    ('{"size": 10.5, "repeat": 0}', "size is 10.5"),
    ('{"size": 10, "repeat": -1}', "repeat is -1"),
    ('{"repeat": 0}', "size is None"),
    ('{"size": 10, "repeat": 0, "test_error": "low"}', "test error is 'low'"),
    ('{"size": 10, "repeat": 0, "status": 3}', "status is 3"),
])
def test_cells_of_the_wrong_type_are_refused_with_one_line(tmp_path, cell, words):
    p = tmp_path / "j"
    _write(p, [])
    with open(p, "ab") as fh:
        fh.write(cell.encode() + b"\n")
    with pytest.raises(InputError, match=words) as info:
        Journal.open(p, ID, resume=True)
    assert "line 2" in str(info.value) and "\n" not in str(info.value)


def test_resume_from_a_zero_byte_journal_measures_everything(tmp_path):
    # what a disk that filled up as the run started leaves behind: --resume must not refuse it
    from sklearn.datasets import load_iris
    from sklearn.tree import DecisionTreeClassifier

    from curvefit.measuring.runner import measure

    X, y = load_iris(return_X_y=True)
    journal = tmp_path / "run.json.journal"
    journal.write_bytes(b"")
    curve = measure(DecisionTreeClassifier(max_depth=2), X, y, sizes=[20, 40], repeats=1,
                    journal=journal, resume=True)
    fresh = measure(DecisionTreeClassifier(max_depth=2), X, y, sizes=[20, 40], repeats=1)
    assert curve.meta["resumed_cells"] == 0 and len(curve.points) == 2
    assert curve.points["test_error"].tolist() == fresh.points["test_error"].tolist()
    assert len(journal.read_text().splitlines()) == 3  # header and two cells


def test_a_journal_that_is_not_a_regular_file_is_refused(tmp_path):
    import os

    fifo = tmp_path / "run.json.journal"
    os.mkfifo(fifo)  # reading it would block forever
    for resume in (True, False):
        with pytest.raises(InputError, match="not a regular file"):
            Journal.open(fifo, ID, resume=resume)
