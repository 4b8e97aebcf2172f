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


@pytest.fixture
def cli():
    return run_cli
