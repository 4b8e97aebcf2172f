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
