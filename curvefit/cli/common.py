"""Helpers shared by the subcommands: output streams, JSON, list and range parsing."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path
from typing import Any, Callable

import numpy as np
from rich.console import Console

from curvefit.core.jsonio import jsonable
from curvefit.core.errors import InputError

# Human-readable output goes to stdout unless --json is set; progress and warnings to stderr.
out = Console(highlight=False, soft_wrap=True)
err = Console(stderr=True, highlight=False, soft_wrap=True)


def emit_json(obj: Any) -> None:
    """Print one JSON document on stdout (and nothing else there)."""
    sys.stdout.write(json.dumps(jsonable(obj), indent=1, allow_nan=False) + "\n")
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
            raise InputError(f"malformed {name} range {text!r}; use START:STOP:COUNT, e.g. 50:5000:12") from None
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


def resolve_job_paths(job: dict, config_path: str | Path, source: str | None = None) -> dict:
    """Resolve a job file's relative paths against the file's own folder.

    So a job runs the same from any working directory (what a nightly CI job needs).
    Touches the keys ``data``, ``test``, ``store``, ``out`` and the file part of a
    ``file.py:make_model`` model spec.
    """
    source = source or str(config_path)
    base = Path(config_path).resolve().parent

    def resolve(text: str) -> str:
        q = Path(text).expanduser()
        return str(q if q.is_absolute() else base / q)

    for k in ("data", "test", "store", "out"):
        if job.get(k) is not None:
            if not isinstance(job[k], str):
                raise InputError(f"{source}: {k!r} must be a path string, got {job[k]!r}")
            job[k] = resolve(job[k])
    model = job.get("model")
    if isinstance(model, str) and ".py:" in model:
        file_part, _, attr = model.rpartition(":")
        job["model"] = f"{resolve(file_part)}:{attr}"
    return job


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


def read_toml(path: str | Path, what: str = "config file") -> dict:
    """Read a TOML job/config file; a missing or malformed file is an `InputError`."""
    import tomllib

    p = Path(path)
    if not p.is_file():
        raise InputError(f"{what} not found: {p}")
    try:
        with open(p, "rb") as fh:
            return tomllib.load(fh)
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"{p} is not valid TOML: {' '.join(str(exc).split())}") from None
