"""Feedback of `capacity --probe` and `tradeoff`: the same progress as `measure`
(`curvefit.core.progress`): plain lines in a CI log (stderr not a terminal), one count
over all of a job's cells, nothing with --quiet but the warnings.

Data: scikit-learn's bundled iris table (load_iris) and standard-normal probe inputs.
"""

import re

import pytest
from sklearn.datasets import load_iris
from sklearn.svm import LinearSVC

from conftest import run_cli
from curvefit.capacity.probe import probe_capacity

EVERY_EVENT = {"CURVEFIT_PROGRESS": "0"}   # a plain line per event, as a log would get them spaced
PROBE = ["capacity", "--probe", "--model", "sklearn.svm:LinearSVC", "--param", "max_iter=20000",
         "--n-features", "2", "--repeats", "3", "--bootstrap", "10"]


@pytest.fixture(scope="module")
def iris_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("feedback") / "iris.csv"
    load_iris(as_frame=True).frame.to_csv(path, index=False)
    return path


def _counts(lines: list[str], label: str) -> list[tuple[int, int]]:
    """(done, total) of each progress line; every line must be one."""
    pattern = re.compile(rf"^{label}: (\d+)/(\d+) cells(, \d+:\d\d elapsed.*| done in \d+:\d\d)$")
    matches = [pattern.match(line) for line in lines]
    assert all(matches), lines
    return [(int(m.group(1)), int(m.group(2))) for m in matches]


def _one_count_to_its_end(counts: list[tuple[int, int]]) -> None:
    dones = [d for d, _ in counts]
    assert dones == sorted(dones) and all(d <= t for d, t in counts)
    assert counts[-1][0] == counts[-1][1]
    assert all(d < t for d, t in counts[:-1])   # the count ends once, at the end


def test_a_ci_log_shows_the_probe_in_plain_lines_over_both_rounds():
    r = run_cli(*PROBE, "--max-n", "200", env=EVERY_EVENT)
    assert r.returncode == 0, r.stderr
    assert "\r" not in r.stderr and "Effective VC dimension" in r.stdout
    lines = r.stderr.splitlines()
    _one_count_to_its_end(_counts(lines, "probing"))
    assert lines[-1].startswith("probing: ") and " done in " in lines[-1]
    assert any(line.endswith("; round 1 of 2") for line in lines)
    assert any("; round 2 of 2, h so far ≈ " in line for line in lines)


def test_quiet_hides_the_probe_progress_but_not_the_warning_about_failed_cells():
    # 5 neighbours cannot be found among 2n = 2 or 4 training rows: those cells fail
    r = run_cli("capacity", "--probe", "--model", "sklearn.neighbors:KNeighborsClassifier",
                "--n-features", "2", "--sizes", "1,2,8,16", "--repeats", "3", "--bootstrap", "10",
                "--quiet", env=EVERY_EVENT)
    assert r.returncode == 0, r.stderr
    lines = r.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith(
        "curvefit: warning: 6 of 12 probe cells failed and were left out (the first: ValueError: "), lines


def test_a_ci_log_shows_one_tradeoff_count_over_settings_and_probes(iris_csv):
    r = run_cli("tradeoff", iris_csv, "--target", "target", "--model", "sklearn.tree:DecisionTreeClassifier",
                "--vary", "max_depth=1,3", "--sizes", "30,90", "--repeats", "2", "--probe", env=EVERY_EVENT)
    assert r.returncode == 0, r.stderr
    assert "\r" not in r.stderr and "best setting per size" in r.stdout
    lines = r.stderr.splitlines()
    _one_count_to_its_end(_counts(lines, "trade-off"))
    for note in ("; max_depth=1", "; max_depth=1, capacity probe", "; max_depth=3, capacity probe"):
        assert any(line.endswith(note) for line in lines), note


def test_quiet_tradeoff_shows_only_the_warning_about_failed_fits(iris_csv):
    # k = 50 neighbours cannot predict from 30 training rows: those cells fail
    r = run_cli("tradeoff", iris_csv, "--target", "target", "--model",
                "sklearn.neighbors:KNeighborsClassifier", "--vary", "n_neighbors=1,50",
                "--sizes", "30,90", "--repeats", "2", "--quiet", env=EVERY_EVENT)
    assert r.returncode == 3, r.stderr
    assert r.stderr.splitlines() == ["curvefit: warning: 2 fit(s) failed and were left out "
                                     "(recorded in the table's failed column)"]


def test_the_probe_reports_each_cell_to_a_callable():
    events = []
    est = probe_capacity(LinearSVC(max_iter=20000), n_features=2, repeats=3, bootstrap=10,
                         max_n=100, progress=lambda done, total, cell: events.append((done, total, cell)))
    finished = [(d, t) for d, t, cell in events if cell is not None]
    assert len(finished) == est.extra["cells"]
    _one_count_to_its_end(finished)
    assert {cell["round"] for _, _, cell in events if cell} == {1, 2}

