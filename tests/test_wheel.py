"""The built wheel, installed (not editable) into a fresh virtual environment, runs the demo.

This is what a user gets from ``pip install curvefit``: no source tree beside the
package, so the demo must find its data inside the package. The build, the install and
the demo run are the session fixture ``installed_demo`` (tests/conftest.py), whose demo
output tests/test_demo.py checks in detail. The dependencies are not downloaded again:
the fresh environment reads the project venv's libraries, and ``pip check`` proves that
they meet the wheel's declared requirements.
"""

from __future__ import annotations

import pytest


@pytest.mark.slow
def test_installed_wheel_runs_the_demo(installed_demo):
    venv = installed_demo.venv
    # the wheel's requirements (Requires-Dist) are met by what the environment sees
    check = installed_demo.check
    assert check.returncode in (0, 1) and check.stdout.strip(), check.stderr
    broken = [line for line in check.stdout.splitlines() if line.lower().startswith("curvefit ")]
    assert not broken, broken
    assert installed_demo.where.resolve().is_relative_to(venv.resolve())  # the installed copy
    assert (installed_demo.where.parent / "workflows" / "packhouse.csv.gz").is_file()  # data shipped

    demo = installed_demo.demo
    assert demo.returncode == 0, f"curvefit demo failed:\n{demo.stdout[-3000:]}\n{demo.stderr[-3000:]}"
    out = installed_demo.out
    assert (out / "report.html").is_file()
    assert sorted(p.name for p in out.glob("run-*.json")) == ["run-boosted.json", "run-logistic.json"]
