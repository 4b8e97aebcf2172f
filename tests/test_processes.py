"""Process hygiene: a stopped run leaves no process and no temporary file behind.

Every check runs the real command line, mostly with ``--jobs 2`` (joblib's loky workers),
and stops the parent with ``kill -9``, SIGTERM or SIGHUP while cells are being journaled.
Descendants are found through a marker in their environment (``/proc/<pid>/environ``):
a worker, a resource tracker, a trainer program or a trainer's own child all inherit it,
and an orphan that was reparented to init still carries it.
"""

import json
import os
import signal
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest

from tests.conftest import ROOT, default_signals

pytestmark = [pytest.mark.skipif(not Path("/proc/self/environ").exists(),
                                 reason="the process table is read from /proc (Linux)"),
              pytest.mark.slow]

SLOW_MODEL = (
    "import time\n"
    "from sklearn.linear_model import LogisticRegression\n"
    "class Slow(LogisticRegression):\n"
    "    def fit(self, X, y):\n"
    "        time.sleep(0.3)\n"
    "        return super().fit(X, y)\n"
    "def make_model():\n    return Slow(max_iter=300)\n")

# a trainer that runs a helper process of its own and takes its time
TRAINER = (
    "import csv, subprocess, sys, time\n"
    "train, test, pred = sys.argv[1:4]\n"
    "helper = subprocess.Popen(['sleep', '120'])\n"
    "time.sleep(0.6)\n"
    "helper.kill()\n"
    "rows = sum(1 for _ in open(test)) - 1\n"
    "label = [r[-1] for r in csv.reader(open(train))][1]\n"
    "open(pred, 'w').write((label + '\\n') * rows)\n")


@pytest.fixture(scope="module")
def iris_table(tmp_path_factory):
    from sklearn.datasets import load_iris  # data shipped in scikit-learn

    path = tmp_path_factory.mktemp("data") / "iris.csv"
    load_iris(as_frame=True).frame.to_csv(path, index=False)
    return path


def _marked(mark: str) -> list[str]:
    """Live (not zombie) processes whose environment holds the marker."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            if f"CF_TEST_MARK={mark}".encode() not in (entry / "environ").read_bytes().split(b"\0"):
                continue
            state = (entry / "stat").read_text().rsplit(")", 1)[1].split()[0]
            cmd = (entry / "cmdline").read_bytes().replace(b"\0", b" ").decode(errors="replace")
        except OSError:
            continue
        if state not in ("Z", "X"):
            found.append(f"{entry.name} {cmd[:120]}")
    return found


def _start(args, tmp_path, mark):
    scratch = tmp_path / "tmp"
    scratch.mkdir(exist_ok=True)
    env = dict(os.environ, CF_TEST_MARK=mark, TMPDIR=str(scratch))
    return subprocess.Popen([sys.executable, "-m", "curvefit.cli.main", *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            cwd=ROOT, env=env, preexec_fn=default_signals), scratch


def _wait_for_cells(proc, journal: Path, cells: int):
    deadline = time.time() + 120
    while time.time() < deadline:
        if journal.exists() and len(journal.read_text().splitlines()) >= cells + 1:
            return
        if proc.poll() is not None:
            pytest.fail(f"the run ended before it could be stopped: {proc.communicate()[1]}")
        time.sleep(0.05)
    proc.kill()
    pytest.fail("no cell was journaled within 120 s")


def _wait_until_gone(mark: str, seconds: float = 20.0) -> list[str]:
    deadline = time.time() + seconds
    left = _marked(mark)
    while left and time.time() < deadline:
        time.sleep(0.2)
        left = _marked(mark)
    return left


CASES = [  # (signal, model, jobs, resume afterwards)
    pytest.param(signal.SIGKILL, "python", 2, True, id="kill9-python-model"),
    pytest.param(signal.SIGTERM, "python", 2, True, id="sigterm-python-model"),
    pytest.param(signal.SIGHUP, "python", 2, False, id="sighup-python-model"),
    pytest.param(signal.SIGKILL, "command", 2, True, id="kill9-trainer-command"),
    pytest.param(signal.SIGTERM, "command", 2, False, id="sigterm-trainer-command"),
    # one process: the trainer watch, not a worker, stops the trainer
    pytest.param(signal.SIGKILL, "command", 1, False, id="kill9-trainer-command-one-job"),
]


@pytest.mark.parametrize("sig, kind, jobs, resume", CASES)
def test_stopped_run_leaves_nothing_behind(iris_table, tmp_path, sig, kind, jobs, resume):
    if kind == "python":
        (tmp_path / "slow.py").write_text(SLOW_MODEL)
        model = ["--model", f"{tmp_path / 'slow.py'}:make_model"]
    else:
        (tmp_path / "trainer.py").write_text(TRAINER)
        trainer = tmp_path / "trainer.py"
        model = ["--command", f"{sys.executable} {trainer} {{train}} {{test}} {{predictions}}"]
    out = tmp_path / "run.json"
    journal = tmp_path / "run.json.journal"
    args = ["measure", str(iris_table), "--target", "target", *model, "--sizes", "20,40,60",
            "--repeats", "4", "--seed", "5", "--jobs", str(jobs), "--quiet", "--out", str(out)]
    mark = uuid.uuid4().hex
    proc, scratch = _start(args, tmp_path, mark)
    _wait_for_cells(proc, journal, 2)
    assert len(_marked(mark)) >= (3 if jobs > 1 else 2)  # the parent, its workers or trainer
    proc.send_signal(sig)
    stopped = time.monotonic()
    # the pipes reach their end only when no process holds them: a `| tee` would hang
    _, stderr = proc.communicate(timeout=60)
    assert time.monotonic() - stopped < 20
    if sig == signal.SIGKILL:
        assert proc.returncode == -signal.SIGKILL
    else:
        # SIGTERM and SIGHUP finish like Ctrl-C: one line, 128 + the signal number
        assert proc.returncode == 128 + sig, stderr
        assert "Traceback" not in stderr
        assert [line for line in stderr.splitlines() if line.strip()] == [
            "curvefit: interrupted; finished work is kept (use --resume to continue)"]
    left = _wait_until_gone(mark)
    assert not left, "processes left running:\n" + "\n".join(left)
    leftovers = sorted(str(p.relative_to(scratch)) for top in scratch.iterdir()
                       if top.name.startswith("curvefit-") for p in [top, *top.rglob("*")])
    assert not leftovers, leftovers  # the run's scratch folder and the trainers' files
    assert not out.exists()
    kept = len(journal.read_text().splitlines()) - 1
    assert kept >= 2
    if not resume:
        return
    resumed, _ = _start([*args, "--resume"], tmp_path, mark)
    _, stderr = resumed.communicate(timeout=300)
    assert resumed.returncode in (0, 3), stderr
    doc = json.loads(out.read_text())
    assert len(doc["points"]) == 12 and doc["meta"]["resumed_cells"] == kept
    assert not _wait_until_gone(mark)
