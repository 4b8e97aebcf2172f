"""Helpers shared by the subcommands: output streams, JSON, option names, list parsing."""

from __future__ import annotations

import math
import re
import sys
from typing import Any, Callable

import numpy as np
import typer
from rich.console import Console

from curvefit.core.defaults import INTERVAL
from curvefit.core.errors import InputError
from curvefit.core.jsonio import dumps
from curvefit.workflows.jobs import read_toml, resolve_job_paths  # noqa: F401 (shared by commands)

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
    sys.stdout.write(dumps(obj))
    sys.stdout.flush()


def warn(message: str, quiet: bool = False) -> None:
    if not quiet:
        err.print(f"[yellow]warning:[/yellow] {message}", markup=True, highlight=False)


def parse_list(text: str | None, kind: Callable = float, name: str = "value",
               integer_range: bool = False) -> list | None:
    """Parse ``"a,b,c"`` or a geometric range ``"start:stop:count"``.

    A range gives ``count`` values spaced geometrically from ``start`` to ``stop``
    inclusive (rounded and de-duplicated when ``integer_range``).

    Examples
    --------
    >>> parse_list("50,100,200", int)
    [50, 100, 200]
    >>> parse_list("50:5000:3", int, integer_range=True)
    [50, 500, 5000]
    """
    if text is None:
        return None
    text = str(text).strip()
    if not text:
        raise InputError(f"empty {name} list")
    if ":" in text:
        parts = text.split(":")
        if len(parts) != 3:
            raise InputError(f"malformed {name} range {text!r}; use START:STOP:COUNT, e.g. 50:5000:12")
        try:
            start, stop, count = float(parts[0]), float(parts[1]), int(parts[2])
        except ValueError:
            raise InputError(f"malformed {name} range {text!r}; use START:STOP:COUNT, "
                             "e.g. 50:5000:12") from None
        if start <= 0 or stop < start or count < 1:
            raise InputError(f"{name} range {text!r} needs 0 < START <= STOP and COUNT >= 1")
        vals = np.geomspace(start, stop, count) if count > 1 else np.array([start])
        if integer_range or kind is int:
            return sorted({int(round(v)) for v in vals})
        return [kind(v) for v in vals]
    out_vals = []
    for piece in text.split(","):
        piece = piece.strip()
        try:
            v = kind(piece)
        except ValueError:
            raise InputError(f"malformed {name} {piece!r} in {text!r}") from None
        if isinstance(v, float) and not math.isfinite(v):
            raise InputError(f"{name} {piece!r} is not finite")
        out_vals.append(v)
    return out_vals


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
