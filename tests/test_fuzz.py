"""Fuzzing: hostile values into every public `bounds` function and into the readers of run,
journal and job files. Nothing may escape but `InputError`, and no call may hang.

Each call runs under a SIGALRM time limit (`_time_limit`), so a hang fails the test with
the offending arguments instead of stalling the suite; the limit is generous (a loaded
2-core machine), a guard against hangs and not a speed target.
"""

from __future__ import annotations

import contextlib
import json
import math
import signal
import time
import warnings

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curvefit import bounds
from curvefit.core.curve import Curve
from curvefit.core.errors import InputError

CALL_LIMIT = 20.0  # seconds; the issue saw calls that never finished

FUZZ = settings(max_examples=100, deadline=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


class _Hang(Exception):
    pass


@contextlib.contextmanager
def _time_limit(seconds: float, what: str):
    def alarm(signum, frame):
        raise _Hang(f"{what} ran longer than {seconds} s")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def _only_input_error(func, *args, **kwargs):
    """Call ``func``; InputError is fine, any other exception, a numpy RuntimeWarning or a
    hang fails."""
    what = f"{func.__name__}{args!r}{kwargs!r}"
    started = time.monotonic()
    with _time_limit(CALL_LIMIT, what):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("error", RuntimeWarning)  # numpy warnings must not leak
                func(*args, **kwargs)
        except InputError as exc:
            assert "\n" not in str(exc), f"{what}: a multi-line message {exc}"
    assert time.monotonic() - started < CALL_LIMIT, what


# numbers a hostile user types: tiny, huge, subnormal, negative, non-finite, text
numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, allow_subnormal=True),
    st.floats(min_value=0, max_value=1, allow_subnormal=True),
    st.integers(min_value=-10, max_value=10 ** 30),
    st.sampled_from([0, 1, 2, 0.5, 1e-300, 1e-320, 1e-7, 1e12, 1e16, 2 ** 53, 2 ** 53 + 1, 1e308,
                     -1, float("nan"), float("inf"), "0.1", None, True, [0.1, 0.2], []]),
)
growths = st.sampled_from(["polynomial", "sauer", "bogus"])
methods = st.sampled_from(["hoeffding", "exact", "nope"])


@FUZZ
@given(n=numbers, d=numbers, kind=growths)
def test_growth_functions(n, d, kind):
    _only_input_error(bounds.log_growth_bound, n, d, kind=kind)
    _only_input_error(bounds.growth_bound, n, d, kind=kind)
    _only_input_error(bounds.cover_dichotomies, n, d)


@FUZZ
@given(n=numbers, d=numbers, delta=numbers, growth=growths)
def test_vc_error_bar(n, d, delta, growth):
    _only_input_error(bounds.vc_error_bar, n, d, delta, growth=growth)


@FUZZ
@given(d=numbers, eps=numbers, delta=numbers, growth=growths, trace=st.booleans(), start=numbers)
def test_vc_sample_size(d, eps, delta, growth, trace, start):
    _only_input_error(bounds.vc_sample_size, d, eps, delta, growth=growth, trace=trace,
                      start=1000.0 if start is None else start)


@FUZZ
@given(d=numbers, eps=numbers, delta=numbers, factor=numbers)
def test_pac_and_rule_of_thumb(d, eps, delta, factor):
    _only_input_error(bounds.pac_sample_size, d, eps, delta)
    _only_input_error(bounds.rule_of_thumb_samples, d, factor)


@FUZZ
@given(n=numbers, delta=numbers, errors=numbers, method=methods)
def test_test_set_error_bars(n, delta, errors, method):
    _only_input_error(bounds.hoeffding_half_width, n, delta)
    _only_input_error(bounds.clopper_pearson, errors, n, delta)
    _only_input_error(bounds.test_error_bar, n, delta, method=method, errors=errors)


@FUZZ
@given(eps=numbers, delta=numbers, p=numbers, method=methods, rel=numbers)
def test_test_set_sizes(eps, delta, p, method, rel):
    _only_input_error(bounds.test_sample_size, eps, delta, method=method, p=p)
    _only_input_error(bounds.relative_error_test_size, p, rel, delta)


@pytest.mark.parametrize("call", [
    lambda: bounds.vc_sample_size(10 ** 12, 0.1, 0.05),
    lambda: bounds.vc_sample_size(10 ** 12, 0.1, 0.05, growth="sauer"),
    lambda: bounds.vc_sample_size(3, 1e-7, 0.05),
    lambda: bounds.vc_sample_size(10 ** 13, 1e-8, 1e-10, growth="sauer", trace=True),
    lambda: bounds.vc_error_bar(100, 10 ** 12, 0.05, growth="sauer"),
    lambda: bounds.log_growth_bound(1e16, 10 ** 12, kind="sauer"),
])
def test_the_cases_that_hung_now_finish(call):
    """Each of these never finished or ran out of memory before (issue: a +1 walk near
    the root, an array of d Sauer terms)."""
    with _time_limit(CALL_LIMIT, "a case that hung"):
        value = call()
    assert value is not None


# ---------------------------------------------------------------- run and journal files
json_leaves = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(), st.text(max_size=8))
json_values = st.recursive(json_leaves, lambda kids: st.one_of(
    st.lists(kids, max_size=4), st.dictionaries(st.text(max_size=6), kids, max_size=4)), max_leaves=20)
cell_values = st.one_of(json_leaves, st.sampled_from(["10", "abc", 1e400, -1, 0, 2 ** 70, [], {}]))
cells = st.dictionaries(st.sampled_from(["size", "repeat", "test_error", "train_error", "status",
                                          "n_test", "message", "baseline_error"]),
                        cell_values, max_size=8)


@FUZZ
@given(meta=json_values, points=st.one_of(json_values, st.lists(cells, max_size=6)))
def test_run_file_reader(meta, points, tmp_path_factory):
    path = tmp_path_factory.mktemp("run") / "run.json"
    text = json.dumps({"format": "curvefit.run/1", "meta": meta, "points": points})
    path.write_text(text)
    _only_input_error(Curve.read, path)


@FUZZ
@given(raw=st.binary(max_size=300))
def test_run_file_reader_on_bytes(raw, tmp_path_factory):
    path = tmp_path_factory.mktemp("run") / "run.json"
    path.write_bytes(raw)
    _only_input_error(Curve.read, path)


@FUZZ
@given(text=st.text(max_size=300))
def test_curve_table_reader(text, tmp_path_factory):
    path = tmp_path_factory.mktemp("table") / "curve.csv"
    path.write_text(text)
    _only_input_error(Curve.read, path)


@FUZZ
@given(lines=st.lists(st.one_of(cells, json_values), max_size=6), torn=st.binary(max_size=20))
def test_journal_reader(lines, torn, tmp_path_factory):
    from curvefit.measuring.journal import JOURNAL_FORMAT, Journal

    identity = {"seed": 0}
    path = tmp_path_factory.mktemp("journal") / "run.json.journal"
    body = [json.dumps({"format": JOURNAL_FORMAT, "run": identity})]
    body += [json.dumps(x) for x in lines]
    path.write_bytes(("\n".join(body) + "\n").encode() + torn)

    def open_and_close():
        journal, done = Journal.open(path, identity, resume=True)
        journal.close()
        for c in done:  # what the runner does with each cell
            assert isinstance(c["size"], int) and isinstance(c["repeat"], int)

    _only_input_error(open_and_close)


toml_values = st.one_of(
    st.booleans(), st.integers(min_value=-10 ** 9, max_value=10 ** 9),
    st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=8),
    st.lists(st.integers(min_value=-5, max_value=10 ** 6), max_size=3),
    st.sampled_from(["false", "no", "10:100:100000000", "1e9", "-1", "0"]))


@FUZZ
@given(job=st.dictionaries(st.sampled_from([
    "repeats", "seed", "jobs", "sizes", "resume", "quiet", "features", "test_fraction",
    "timeout", "metric", "encode", "backend", "json", "size_unit"]), toml_values, max_size=5))
def test_job_file_settings(job, tmp_path_factory):
    """The typed check of a job file's settings (before any data is read)."""
    from curvefit.workflows.jobs import check_job_settings

    _only_input_error(check_job_settings, job, "job.toml")


@FUZZ
@given(raw=st.one_of(st.binary(max_size=200), st.text(max_size=200).map(str.encode)))
def test_job_file_reader(raw, tmp_path_factory):
    from curvefit.workflows.jobs import read_toml, resolve_job_paths

    path = tmp_path_factory.mktemp("job") / "job.toml"
    path.write_bytes(raw)
    _only_input_error(lambda: resolve_job_paths(read_toml(path), path))


def test_time_limit_catches_a_hang():
    """The guard itself works: a sleeping call is stopped and reported."""
    with pytest.raises(_Hang):
        with _time_limit(0.2, "sleep"):
            time.sleep(5)
    assert math.isfinite(CALL_LIMIT)


# ---------------------------------------------------------------- the API refuses what the CLI does
def _iris():
    from sklearn.datasets import load_iris

    return load_iris(return_X_y=True)


@pytest.mark.parametrize("settings, words", [
    ({"repeats": 10 ** 6}, "at most 1,000"),
    ({"n_jobs": 0}, "n_jobs must be at least 1"),
    ({"random_state": -1}, "random_state"),
    ({"sizes": [1.5, 20]}, "not a whole number"),
    ({"sizes": [20, float("inf")]}, "not a whole number"),
    ({"sizes": list(range(1, 1_500))}, "at most 1,000 sizes"),
])
def test_measure_refuses_before_opening_a_journal(tmp_path, settings, words):
    from sklearn.tree import DecisionTreeClassifier

    from curvefit.measuring.runner import measure

    X, y = _iris()
    journal = tmp_path / "run.json.journal"
    kwargs = {"sizes": [20, 40], "repeats": 1, **settings}
    with pytest.raises(InputError, match=words):
        measure(DecisionTreeClassifier(), X, y, journal=journal, **kwargs)
    assert not journal.exists()


def test_fit_and_probe_refuse_counts_past_their_limits():
    import pandas as pd

    from curvefit.capacity.probe import probe_capacity
    from curvefit.fitting.engine import fit_curve

    curve = Curve.from_table(pd.DataFrame({"size": [10, 20, 40, 80], "test_error": [.4, .3, .25, .22]}))
    with pytest.raises(InputError, match="bootstrap must be at most 100,000"):
        fit_curve(curve, bootstrap=10 ** 9)
    with pytest.raises(InputError, match="max_n must be at most"):
        probe_capacity("sklearn.tree:DecisionTreeClassifier", n_features=2, max_n=10 ** 13)
