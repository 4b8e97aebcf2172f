"""The built wheel, installed (not editable) into a fresh virtual environment, runs the demo.

This is what a user gets from ``pip install curvefit``: no source tree beside the
package, so the demo must find its data inside the package. Dependencies come from the
package registry (pip's cache makes a second run fast).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import ROOT

# what a source checkout has that a wheel must not need
_NOT_SOURCE = shutil.ignore_patterns(".git", ".venv", "build", "dist", "*.egg-info", "__pycache__",
                                     ".pytest_cache", ".hypothesis", "curvefit-demo", "corpus")


def _run(args, *, cwd, timeout, env):
    r = subprocess.run([str(a) for a in args], cwd=cwd, env=env, capture_output=True, text=True,
                       timeout=timeout)
    command = " ".join(map(str, args))
    assert r.returncode == 0, f"{command} failed ({r.returncode}):\n{r.stdout[-3000:]}\n{r.stderr[-3000:]}"
    return r


@pytest.mark.slow
def test_installed_wheel_runs_the_demo(tmp_path):
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV", "PYTHONHOME")}
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    # build from a copy, so that the build leaves nothing in the checkout
    source = tmp_path / "source"
    shutil.copytree(ROOT, source, ignore=_NOT_SOURCE)
    wheels = tmp_path / "wheels"
    _run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "-w", wheels, source],
         cwd=tmp_path, timeout=900, env=env)
    (wheel,) = wheels.glob("curvefit-*.whl")

    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", venv], cwd=tmp_path, timeout=300, env=env)
    python = venv / "bin" / "python"
    _run([python, "-m", "pip", "install", "--quiet", wheel], cwd=tmp_path, timeout=1800, env=env)
    where = _run([python, "-c", "import curvefit; print(curvefit.__file__)"], cwd=tmp_path,
                 timeout=120, env=env).stdout.strip()
    assert Path(where).resolve().is_relative_to(venv.resolve())  # the installed copy, not the checkout

    empty = tmp_path / "empty"
    empty.mkdir()
    _run([venv / "bin" / "curvefit", "demo", "--out", "demo-out"], cwd=empty, timeout=1800, env=env)
    out = empty / "demo-out"
    assert (out / "report.html").is_file()
    assert sorted(p.name for p in out.glob("run-*.json")) == ["run-boosted.json", "run-logistic.json"]
