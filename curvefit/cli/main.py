"""The ``curvefit`` command line: parse, call the API, print, and map errors to exit codes.

Exit codes: 0 done; 1 a quality gate or tracked regression failed; 2 bad input or
usage (one line on stderr, no traceback); 3 finished with some failed fits; 130
interrupted (finished work is kept; ``--resume`` continues); 143 and 129 stopped by
SIGTERM or SIGHUP, which end a run the way Ctrl-C does.

Warnings print as one line each (``curvefit: warning: ...``) whatever ``--quiet`` says;
``--no-warnings``, before or after the command name, switches them off. Each command
module imports its heavy libraries inside its command function, so registering all of
them here costs little and ``curvefit --help`` answers at once.
"""

from __future__ import annotations

import importlib
import signal
import sys
import warnings

import typer

try:  # typer >= 0.20 vendors its own copy of click
    from typer._click import exceptions as _cx
except ImportError:  # pragma: no cover - older typer uses click itself
    from click import exceptions as _cx

from curvefit.cli import COMMANDS
from curvefit.cli.common import option_message, show_python_warning, show_warnings
from curvefit.core.errors import InputError

NO_WARNINGS = "--no-warnings"

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
                                       help="Print the version and exit."),
          no_warnings: bool = typer.Option(False, NO_WARNINGS,
                                           help="Print no warnings (they show even with --quiet, "
                                                "which hides progress only). Also accepted after "
                                                "the command name.")):
    """Measure learning curves, fit them with intervals, and answer how many labels a
    model needs. Estimates are statistical, not guarantees."""
    if no_warnings:
        show_warnings(False)


for _name in COMMANDS:
    importlib.import_module(f"curvefit.cli.{_name}").register(app)


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point."""
    _stop_like_ctrl_c()
    argv = take_no_warnings(sys.argv[1:] if argv is None else list(argv))
    try:
        with warnings.catch_warnings():
            # library warnings must not reach the user as Python's two-line dumps
            warnings.simplefilter("default")
            warnings.showwarning = show_python_warning
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
        sys.exit(128 + _STOPPED_BY[0] if _STOPPED_BY else 130)
    except typer.Exit as exc:
        sys.exit(exc.exit_code)
    if code == 130:  # typer turns Ctrl-C into exit code 130 without a word
        print("curvefit: interrupted; finished work is kept (use --resume to continue)",
              file=sys.stderr)
        code = 128 + _STOPPED_BY[0] if _STOPPED_BY else 130
    sys.exit(code if isinstance(code, int) else 0)


def take_no_warnings(argv: list[str]) -> list[str]:
    """``argv`` without ``--no-warnings`` (anywhere before ``--``), which switches warnings off.

    Examples
    --------
    >>> take_no_warnings(["fit", "run.json", "--no-warnings"])
    ['fit', 'run.json']
    """
    cut = argv.index("--") if "--" in argv else len(argv)
    show_warnings(NO_WARNINGS not in argv[:cut])
    return [a for a in argv[:cut] if a != NO_WARNINGS] + argv[cut:]


_STOPPED_BY: list[int] = []  # the signal that stopped the command, if any


def _stop_on_signal(signum, frame) -> None:
    if not _STOPPED_BY:  # a second signal must not cut the clean-up short
        _STOPPED_BY.append(signum)
        raise KeyboardInterrupt


def _stop_like_ctrl_c() -> None:
    """SIGTERM and SIGHUP take Ctrl-C's path: finished cells stay in the journal, workers,
    trainer programs and temporary files go, and the exit code is 128 + the signal."""
    for name in ("SIGTERM", "SIGHUP"):
        sig = getattr(signal, name, None)
        if sig is not None and signal.getsignal(sig) is not signal.SIG_IGN:  # nohup stays nohup
            signal.signal(sig, _stop_on_signal)


def _fail(message: str) -> None:
    print(f"curvefit: error: {message}", file=sys.stderr)
    sys.exit(2)


if __name__ == "__main__":
    main()
