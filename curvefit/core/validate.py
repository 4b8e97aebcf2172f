"""Validation at the boundary: one check per kind of setting, one message style.

The API validates once; the command line maps the parameter name to its option name
(``InputError.option``) when it prints the message.

Examples
--------
>>> check_level(0.9)
0.9
>>> check_count(5, "repeats", minimum=1)
5
"""

from __future__ import annotations

import math
import numbers
from typing import Callable

import numpy as np

from curvefit.core.errors import InputError


def check_level(level, name: str = "interval") -> float:
    """An interval level strictly between 0 and 1 (``0.9`` for 90%)."""
    try:
        value = float(level)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number between 0 and 1, got {level!r}") from None
    if not 0.0 < value < 1.0:
        raise InputError(f"{name} must be between 0 and 1 (e.g. 0.9 for 90%), got {level!r}")
    return value


def check_count(value, name: str, minimum: int = 0, maximum: int | None = None) -> int:
    """A whole number in ``[minimum, maximum]`` (bools refused)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        else:
            raise InputError(f"{name} must be a whole number, got {value!r}")
    value = int(value)
    if value < minimum or (maximum is not None and value > maximum):
        upper = f" and at most {maximum}" if maximum is not None else ""
        raise InputError(f"{name} must be at least {minimum}{upper}, got {value}")
    return value


def check_seed(seed, name: str = "random_state"):
    """A seed: None or a whole number ≥ 0 (a Generator passes through)."""
    if seed is None or hasattr(seed, "integers"):
        return seed
    return check_count(seed, name, minimum=0)


def check_positive(value, name: str, allow_zero: bool = False) -> float:
    """A finite number > 0 (≥ 0 with ``allow_zero``)."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        raise InputError(f"{name} must be {'≥' if allow_zero else '>'} 0, got {value!r}")
    return v


def check_choice(value, name: str, choices) -> str:
    """One of ``choices`` (the message lists them)."""
    if value not in choices:
        raise InputError(f"{name} must be one of {', '.join(map(str, choices))}, got {value!r}")
    return value


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
