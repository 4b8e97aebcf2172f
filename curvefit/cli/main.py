"""The ``curvefit`` command line: parse, call the API, print, and map errors to exit codes.

Exit codes: 0 done; 1 a quality gate or tracked regression failed; 2 bad input or
usage (one line on stderr, no traceback); 3 finished with some failed fits; 130
interrupted (finished work is kept; ``--resume`` continues).
"""

from __future__ import annotations

import importlib
import sys

import typer

try:  # typer >= 0.20 vendors its own copy of click
    from typer._click import exceptions as _cx
except ImportError:  # pragma: no cover - older typer uses click itself
    from click import exceptions as _cx

from curvefit.cli import COMMANDS
from curvefit.cli.common import option_message
from curvefit.core.errors import InputError

app = typer.Typer(
    name="curvefit",
    help="Measure learning curves, fit them with intervals, and answer how many labels "
         "a model needs. Estimates are statistical, not guarantees.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _version(value: bool):
    if value:
        from curvefit import __version__

        typer.echo(f"curvefit {__version__}")
        raise typer.Exit()


@app.callback()
def _root(version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                       help="Print the version and exit.")):
    """Measure learning curves, fit them with intervals, and answer how many labels a
    model needs. Estimates are statistical, not guarantees."""


for _name in COMMANDS:
    importlib.import_module(f"curvefit.cli.{_name}").register(app)


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point."""
    try:
        code = app(args=argv, prog_name="curvefit", standalone_mode=False)
    except InputError as exc:
        _fail(option_message(str(exc)))
    except _cx.UsageError as exc:
        if type(exc).__name__ == "NoArgsIsHelpError":
            sys.exit(0)  # a bare `curvefit` or `curvefit bound`: help was printed
        hint = f" (see: {exc.ctx.command_path} --help)" if exc.ctx and exc.ctx.parent else ""
        _fail(exc.format_message().replace("\n", " ") + hint)
    except _cx.ClickException as exc:
        _fail(exc.format_message().replace("\n", " "))
    except BrokenPipeError:
        # Output piped into `head` and closed early: not an error of ours.
        sys.stderr.close()
        sys.exit(0)
    except (KeyboardInterrupt, typer.Abort):
        print("curvefit: interrupted; finished work is kept (use --resume to continue)",
              file=sys.stderr)
        sys.exit(130)
    except typer.Exit as exc:
        sys.exit(exc.exit_code)
    if code == 130:  # typer turns Ctrl-C into exit code 130 without a word
        print("curvefit: interrupted; finished work is kept (use --resume to continue)",
              file=sys.stderr)
    sys.exit(code if isinstance(code, int) else 0)


def _fail(message: str) -> None:
    print(f"curvefit: error: {message}", file=sys.stderr)
    sys.exit(2)


if __name__ == "__main__":
    main()
