"""Feedback while commands work, and warnings that always reach the user.

A CI log (stderr not a terminal) gets plain progress lines; a terminal gets a bar that
leaves nothing behind; slow phases say what they do; warnings print as one
``curvefit: warning:`` line each, with or without ``--quiet``, and only ``--no-warnings``
hides them. The checks run through the real entry point where the user would.
"""

import io
import re
import warnings

import numpy as np
import pandas as pd
import pytest

from conftest import run_cli
from curvefit.core.errors import FitWarning
from curvefit.core.progress import Progress, Status, extra_text, feedback_setting, progress_callback
from curvefit.measuring.splits import LEAK_FRACTION, shared_duplicate_fraction, shared_rows_message

LOGREG = "sklearn.linear_model:LogisticRegression"


class Terminal(io.StringIO):
    def isatty(self):
        return True


class FakeClock:
    def __init__(self):
        self.now = 0.0

    def __call__(self):
        return self.now


def test_a_log_gets_spaced_plain_lines_and_a_last_line():
    log, clock = io.StringIO(), FakeClock()
    p = Progress("measuring", "cells", stream=log, every=10, clock_fn=clock)
    for done, t in [(0, 0), (1, 1.0), (2, 2.5), (3, 5), (4, 12.4), (5, 12.6), (8, 13)]:
        clock.now = t
        p(done, 8)
    lines = log.getvalue().splitlines()
    assert lines == ["measuring: 2/8 cells, 0:02 elapsed, eta 0:08",    # 2.5 s / 2 cells × 6 left
                     "measuring: 5/8 cells, 0:13 elapsed, eta 0:08",    # 10 s after the first
                     "measuring: 8/8 cells done in 0:13"]
    assert "\r" not in log.getvalue()


def test_a_short_job_in_a_log_prints_nothing():
    log, clock = io.StringIO(), FakeClock()
    p = Progress("measuring", "cells", stream=log, every=10, clock_fn=clock)
    for done, t in [(0, 0), (1, 0.5), (2, 1.0)]:
        clock.now = t
        p(done, 2)
    assert log.getvalue() == ""


def test_a_terminal_gets_a_bar_redrawn_in_place_and_wiped():
    term, clock = Terminal(), FakeClock()
    with Progress("measuring", "cells", stream=term, every=10, clock_fn=clock) as p:
        for done in range(4):
            clock.now = done
            p(done, 4, None, extra={"answer so far": "2,400 rows"})
    text = term.getvalue()
    assert "\n" not in text
    assert text.count("\r") >= 4 and "answer so far 2,400 rows" in text
    assert text.split("\r")[-1] == "" and not text.split("\r")[-2].strip()  # wiped


def test_extra_eta_replaces_the_pace_estimate():
    p = Progress("measuring", "cells")
    assert p.line(5, 10, 50.0, extra={"eta": 20}).endswith("eta 0:20")
    assert "eta" not in p.line(5, 10, 50.0, extra={"eta": None, "answer": "x"})
    assert p.line(5, 10, 50.0, extra="stopping early").endswith("eta 0:50; stopping early")
    assert extra_text({"a": 1, "b": None}) == "a 1"


def test_user_callbacks_receive_three_arguments_whatever_the_runner_adds():
    seen = []
    report = progress_callback(lambda done, total, item: seen.append((done, total, item)))
    report(1, 3, "cell", extra={"eta": 1})
    assert seen == [(1, 3, "cell")]
    with pytest.raises(Exception, match="progress must be"):
        progress_callback("yes")


def test_the_environment_switches_feedback_off_or_spaces_it():
    assert feedback_setting({"CURVEFIT_PROGRESS": "off"}) is None
    assert feedback_setting({"CURVEFIT_PROGRESS": "30"}) == 30.0
    with pytest.raises(Exception, match="CURVEFIT_PROGRESS"):
        feedback_setting({"CURVEFIT_PROGRESS": "sometimes"})


def test_a_slow_phase_speaks_once_and_a_quick_one_not_at_all():
    log = io.StringIO()
    status = Status(stream=log, delay=0.05)
    with status.phase("quick"):
        pass
    with status.phase("fitting the curve families"):
        import time

        time.sleep(0.3)
    assert log.getvalue() == "fitting the curve families ...\n"
    term = Terminal()
    with Status(stream=term, delay=0).phase("fitting"):
        pass
    assert term.getvalue().startswith("\rfitting") and term.getvalue().endswith("\r")
    silent = io.StringIO()
    with Status(stream=silent, delay=0, enabled=False).phase("fitting"):
        pass
    assert silent.getvalue() == ""


def test_the_duplicate_row_warning_says_what_it_saw_and_when_it_matters():
    # coarse survey answers: 3 questions on a 1-3 scale, 300 distinct respondents
    rng = np.random.default_rng(0)
    X = rng.integers(1, 4, size=(300, 3))
    test, pool = np.arange(100), np.arange(100, 300)
    share = shared_duplicate_fraction(X, test, pool)
    assert share > LEAK_FRACTION          # only 27 combinations exist: coincidences galore
    text = shared_rows_message(share, X)
    assert text.startswith(f"{share:.0%} of the test rows have an identical copy among the training rows")
    assert "the 3 features take 27 distinct combinations over 300 rows" in text
    assert "--groups" in text and "harmless" in text and "leak" not in text.lower()


@pytest.fixture(scope="module")
def repeated_rows_csv(tmp_path_factory):
    """A table where every row appears three times (as copies of one entity would)."""
    rng = np.random.default_rng(0)
    base = rng.normal(size=(60, 3)).round(3)
    X = np.repeat(base, 3, axis=0)
    y = np.repeat(rng.integers(0, 2, 60), 3)
    path = tmp_path_factory.mktemp("feedback") / "repeated.csv"
    pd.DataFrame(X, columns=["a", "b", "c"]).assign(label=y).to_csv(path, index=False)
    return path


def _measure(csv, tmp_path, *extra, env=None):
    return run_cli("measure", csv, "--target", "label", "--model", LOGREG, "--sizes", "20,60",
                   "--repeats", "2", "--out", tmp_path / "run.json", *extra, env=env)


def test_a_ci_log_shows_progress_lines_then_the_table(repeated_rows_csv, tmp_path):
    r = _measure(repeated_rows_csv, tmp_path, env={"CURVEFIT_PROGRESS": "0"})
    assert r.returncode == 0, r.stderr
    progress = [line for line in r.stderr.splitlines() if line.startswith("measuring:")]
    assert progress[-1].startswith("measuring: 4/4 cells done in")
    assert all(re.match(r"measuring: \d/4 cells(, \d+:\d\d elapsed| done in)", line) for line in progress)
    assert "\r" not in r.stderr and "learning curve:" in r.stdout


def test_quiet_hides_progress_but_not_the_warning(repeated_rows_csv, tmp_path):
    r = _measure(repeated_rows_csv, tmp_path, "--quiet", env={"CURVEFIT_PROGRESS": "0"})
    assert r.returncode == 0, r.stderr
    lines = r.stderr.splitlines()
    assert not any(line.startswith("measuring:") for line in lines)
    warned = [line for line in lines if line.startswith("curvefit: warning: ")]
    assert len(warned) == 1 and "identical copy among the training rows" in warned[0], r.stderr
    assert "Warning:" not in r.stderr and "Traceback" not in r.stderr   # no Python warning dump
    assert len(lines) == len(warned), r.stderr                       # nothing else on stderr


def test_no_warnings_silences_them(repeated_rows_csv, tmp_path):
    r = _measure(repeated_rows_csv, tmp_path, "--quiet", "--no-warnings")
    assert r.returncode == 0 and r.stderr == "", r.stderr


def test_library_warnings_do_not_leak_and_ours_become_one_line(capsys):
    from curvefit.cli.common import show_python_warning, show_warnings

    show_warnings(True)
    show_python_warning(RuntimeWarning("invalid value encountered in divide"), RuntimeWarning,
                        np.__file__, 10)
    show_python_warning(FitWarning("few sizes;\n  the choice is weak"), FitWarning, "x.py", 1)
    assert capsys.readouterr().err == "curvefit: warning: few sizes; the choice is weak\n"
    show_warnings(False)
    try:
        show_python_warning(FitWarning("hidden"), FitWarning, "x.py", 1)
    finally:
        show_warnings(True)
    assert capsys.readouterr().err == ""


def test_the_command_line_routes_python_warnings(tmp_path):
    """A curvefit warning raised while a command runs prints as one line; numpy's
    RuntimeWarning from the same command prints nothing."""
    script = tmp_path / "warn_cmd.py"
    script.write_text(
        "import sys, warnings\n"
        "import numpy as np\n"
        "from curvefit.cli import main as m\n"
        "from curvefit.core.errors import FitWarning\n"
        "@m.app.command('noisy')\n"
        "def noisy():\n"
        "    np.array([0.0]) / np.array([0.0])\n"
        "    warnings.warn('the fit is poorly determined', FitWarning)\n"
        "m.main(sys.argv[1:])\n")
    import subprocess
    import sys

    with warnings.catch_warnings():
        done = subprocess.run([sys.executable, str(script), "noisy"], capture_output=True, text=True,
                              timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stderr == "curvefit: warning: the fit is poorly determined\n"


def test_a_copied_readme_measure_example_shows_the_warning_on_survey_data(tmp_path):
    """Someone copies the README's `curvefit measure` line and points it at a coarse
    survey table (no group column): the duplicate-row warning reaches them."""
    import shlex

    from conftest import ROOT

    line = next(x for x in (ROOT / "README.md").read_text(encoding="utf-8").splitlines()
                if x.startswith("$ curvefit measure ") and "--out" in x)
    args = shlex.split(line)[3:]                         # after "$ curvefit measure"
    assert "--quiet" not in args and "--no-warnings" not in args
    rng = np.random.default_rng(1)
    answers = rng.integers(1, 4, size=(400, 3))          # three questions on a 1-3 scale
    table = pd.DataFrame(answers, columns=["q1", "q2", "q3"]).assign(
        label=(answers.sum(axis=1) + rng.integers(0, 3, 400) > 7).astype(int))
    table.to_csv(tmp_path / "survey.csv", index=False)
    swap = {args[0]: "survey.csv"}
    options = dict(zip(args[1::2], args[2::2]))
    options.update({"--target": "label", "--sizes": "40,120", "--repeats": "2", "--jobs": "1"})
    options.pop("--groups", None)                        # a survey has no entity column
    argv = [swap[args[0]]] + [x for kv in options.items() for x in kv]
    r = run_cli("measure", *argv, cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    warned = [x for x in r.stderr.splitlines() if x.startswith("curvefit: warning: ")]
    assert any("identical copy among the training rows" in x and "harmless" in x for x in warned), r.stderr
