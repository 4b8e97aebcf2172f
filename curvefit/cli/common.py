"""Helpers shared by the subcommands: output streams, JSON, option names, warnings, status.

Start-up matters (``curvefit --help`` and ``curvefit bound`` should answer at once), so
this module and every command module import numpy, pandas, scipy, scikit-learn and
matplotlib only inside the functions that need them.
"""

from __future__ import annotations

import os
import re
import sys
from typing import Any

import typer
from rich.console import Console

from curvefit.core.defaults import INTERVAL
from curvefit.core.progress import Status

# Human-readable output goes to stdout unless --json is set; progress and warnings to stderr.
out = Console(highlight=False, soft_wrap=True)
err = Console(stderr=True, highlight=False, soft_wrap=True)

# API parameter -> the command-line option that sets it, so an API message names the option.
OPTION_NAMES = {
    "interval": "--interval", "bootstrap": "--bootstrap", "random_state": "--seed",
    "seed": "--seed", "target_error": "--target-error", "test_error": "--error",
    "gap": "--gap", "cost_per_label": "--label-cost", "budget": "--budget",
    "current_n": "--current", "vc_dim": "--vc-dim", "extra": "--extra", "on": "--on",
    "weights": "--weights", "families": "--families", "repeats": "--repeats",
    "max_n": "--max-n", "n_features": "--n-features", "n_jobs": "--jobs",
    "test_size": "--test-fraction", "baseline": "--baseline",
}
_LEADING_NAME = re.compile(r"^([a-z][a-z_]*)\b")


def option_message(message: str) -> str:
    """An API error message with its parameter names replaced by the option names.

    The leading word is replaced when it names a parameter; further on, only names with
    an underscore are (plain words such as "interval" also occur in prose).

    Examples
    --------
    >>> option_message("interval must be between 0 and 1, got 2")
    '--interval must be between 0 and 1, got 2'
    >>> option_message("budget needs a positive cost_per_label")
    '--budget needs a positive --label-cost'
    """
    text = _LEADING_NAME.sub(lambda m: OPTION_NAMES.get(m.group(1), m.group(1)), message, count=1)
    for name, option in OPTION_NAMES.items():
        if "_" in name:
            text = re.sub(rf"(?<![\w-]){name}\b", option, text)
    return text


def interval_option(help_text: str = "Interval level, e.g. 0.9 for 90%."):
    """The ``--interval`` option (default ``core.defaults.INTERVAL``)."""
    return typer.Option(INTERVAL, "--interval", help=help_text)


def level_alias():
    """``--level``: the former name of ``--interval``, accepted but not shown in help."""
    return typer.Option(None, "--level", hidden=True)


def pick_interval(interval: float, level: float | None) -> float:
    """The interval level: ``--level`` when that older name was used, else ``--interval``.

    When the older name was typed, error messages name it too.
    """
    if level is None:
        return interval
    OPTION_NAMES["interval"] = "--level"
    return level


def emit_json(obj: Any) -> None:
    """Print one JSON document on stdout (and nothing else there)."""
    from curvefit.core.jsonio import dumps

    sys.stdout.write(dumps(obj))
    sys.stdout.flush()


PACKAGE_DIR = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
# The help of every command's --quiet: it hides feedback, never warnings.
QUIET_HELP = "No progress or status lines on stderr (warnings still show; --no-warnings hides them)."

# --no-warnings switches warnings off for the whole command; --quiet never does.
WARNINGS = {"shown": True}


def show_warnings(shown: bool) -> None:
    """Switch the warning lines on or off (``--no-warnings``)."""
    WARNINGS["shown"] = bool(shown)


def warn(message: str, quiet: bool = False) -> None:
    """One warning line on stderr: ``curvefit: warning: <message>``.

    Warnings are shown whatever ``--quiet`` says (``quiet`` is accepted and ignored: it
    hides progress only); only ``--no-warnings`` silences them. The message is folded
    onto one line.
    """
    if not WARNINGS["shown"]:
        return
    from rich.markup import escape

    text = " ".join(str(message).split())
    err.print(f"curvefit: [yellow]warning:[/yellow] {escape(text)}", markup=True, highlight=False)


def show_python_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """`warnings.showwarning` for the command line: curvefit's own warnings become one
    `warn` line; the numerical chatter of libraries (numpy's "invalid value", matplotlib,
    scikit-learn's convergence notes inside a cell) is dropped, not dumped with a
    source line."""
    if own_warning(category, filename):
        warn(str(message))


def own_warning(category, filename: str) -> bool:
    """True for a warning curvefit raised (its class or the code that raised it is ours).

    Examples
    --------
    >>> from curvefit.core.errors import FitWarning
    >>> own_warning(FitWarning, "/x/numpy/lib.py"), own_warning(RuntimeWarning, "/x/numpy/lib.py")
    (True, False)
    """
    if getattr(category, "__module__", "").startswith("curvefit"):
        return True
    return os.path.abspath(str(filename)).startswith(PACKAGE_DIR + os.sep)


def status(text: str, quiet: bool = False):
    """``with status("fitting ..."):`` says what the command is doing when the block takes
    more than a second or two (a plain line in a log, a transient line on a terminal);
    nothing with ``--quiet``."""
    return Status(enabled=not quiet).phase(text)


def print_table(head: list[str], rows: list[list[str]], *, align: str = "right",
                indent: str = "") -> None:
    """A plain aligned text table on stdout (no box drawing, so it pastes into logs).

    ``align``: "right" (every column), "left" (every column) or "first-left" (the first
    column left-aligned, the rest right-aligned, for a label column).
    """
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(head)]

    def cell(i: int, c: str, w: int) -> str:
        left = align == "left" or (align == "first-left" and i == 0)
        return c.ljust(w) if left else c.rjust(w)

    for r in [head, *rows]:
        out.print((indent + "  ".join(cell(i, c, w) for i, (c, w) in enumerate(zip(r, widths)))).rstrip(),
                  markup=False)
