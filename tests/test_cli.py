"""The command-line shell: help, version, and usage errors as one line with exit 2."""

import pytest

from curvefit.core.errors import InputError
from curvefit.core.validate import parse_list


def test_help_lists_every_command(cli):
    r = cli("--help")
    assert r.returncode == 0
    for name in ["measure", "fit", "need", "capacity", "bound", "tradeoff", "report",
                 "track", "history", "demo"]:
        assert name in r.stdout


def test_unknown_command_is_one_line_exit_2(cli):
    r = cli("no-such-command")
    assert r.returncode == 2
    assert "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1


def test_version(cli):
    r = cli("--version")
    assert r.returncode == 0 and r.stdout.startswith("curvefit ")


def test_parse_list_forms():
    assert parse_list("1,2.5", float) == [1.0, 2.5]
    assert parse_list("10:1000:3", int) == [10, 100, 1000]
    for bad in ["", "1:2", "a,b", "0:10:3", "10:1:3"]:
        with pytest.raises(InputError):
            parse_list(bad, int)


@pytest.mark.parametrize("content, match", [(None, "config file not found"),
                                            ("target = [unclosed", "not valid TOML")])
def test_measure_config_problems_are_one_line(cli, tmp_path, content, match):
    cfg = tmp_path / "job.toml"
    if content is not None:
        cfg.write_text(content)
    r = cli("measure", "--config", cfg)
    assert r.returncode == 2 and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 and match in r.stderr


# Which libraries a command loads decides its start-up (scripts/bench_startup.py times
# it): --help and the bound calculators must not pay for pandas, scipy, scikit-learn or
# matplotlib, and --help not even for numpy.
LOADED_LIBRARIES = """
import sys
from curvefit.cli.main import main
try:
    main(sys.argv[1:])
except SystemExit:
    pass
heavy = {"numpy", "pandas", "scipy", "sklearn", "matplotlib", "joblib", "pyarrow"}
print(" ".join(sorted({name.split(".")[0] for name in sys.modules} & heavy)), file=sys.stderr)
"""


@pytest.mark.parametrize("args, allowed", [
    (["--help"], set()),
    (["fit", "--help"], set()),
    (["bound", "samples", "--vc-dim", "10", "--eps", "0.1"], {"numpy"}),
    (["bound", "test-error-bar", "--n-test", "1000"], {"numpy"}),
])
def test_help_and_bound_start_without_heavy_libraries(args, allowed):
    import subprocess
    import sys

    done = subprocess.run([sys.executable, "-c", LOADED_LIBRARIES, *args], capture_output=True,
                          text=True, timeout=120)
    loaded = set(done.stderr.strip().splitlines()[-1].split()) if done.stderr.strip() else set()
    assert loaded <= allowed, f"`curvefit {' '.join(args)}` loaded {sorted(loaded - allowed)}"


def test_importing_curvefit_loads_no_heavy_library():
    import subprocess
    import sys

    code = ("import sys, curvefit; print(sorted({m.split('.')[0] for m in sys.modules} & "
            "{'numpy', 'pandas', 'scipy', 'sklearn', 'matplotlib'}))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert done.stdout.strip() == "[]", done.stdout + done.stderr


def test_no_warnings_is_accepted_before_or_after_the_command(cli):
    for args in (["--no-warnings", "bound", "samples", "--vc-dim", "3", "--eps", "0.1", "--delta", "0.1"],
                 ["bound", "samples", "--vc-dim", "3", "--eps", "0.1", "--delta", "0.1", "--no-warnings"]):
        r = cli(*args)
        assert r.returncode == 0, r.stderr
        assert "29,300" in r.stdout  # docs/references.md#vc-sample-size-worked-example
