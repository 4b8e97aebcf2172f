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
