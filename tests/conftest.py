"""Shared test fixtures."""

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def run_cli(*args, cwd=None, timeout=300, env=None, input=None):
    """Run the real ``curvefit`` command line in a subprocess; returns CompletedProcess."""
    e = dict(os.environ)
    e.update(env or {})
    return subprocess.run([sys.executable, "-m", "curvefit.cli.main", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=timeout,
                          env=e, input=input)


def kill_when_journaled(args, out, journal, lines: int, timeout: float = 120):
    """Start ``curvefit <args> --out OUT`` in a real process, SIGKILL it as soon as its
    journal holds ``lines`` lines (header included), and wait for it to end; fails the
    test when the run finishes first or the lines never come."""
    import signal
    import time

    proc = subprocess.Popen([sys.executable, "-m", "curvefit.cli.main", *map(str, args),
                             "--out", str(out)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=ROOT)
    deadline = time.time() + timeout
    while time.time() < deadline:
        if journal.exists() and len(journal.read_text().splitlines()) >= lines:
            break
        if proc.poll() is not None:
            pytest.fail("the run finished before it could be killed")
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()


@pytest.fixture
def cli():
    return run_cli
