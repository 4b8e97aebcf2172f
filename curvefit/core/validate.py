"""Validation at the boundary: one check per kind of setting, one message style.

The API validates once; the command line maps the parameter name to its option name
(``InputError.option``) when it prints the message. Job files go through the same
checks (`curvefit.workflows.jobs`), so a setting is refused the same way wherever it
comes from.

Every count has a documented upper limit (`UPPER_LIMITS`): values past it would not
finish in any useful time or memory (``repeats=1e6``, ``bootstrap=1e9``), so they are
refused up front with one line instead of hanging.

Examples
--------
>>> check_level(0.9)
0.9
>>> check_count(5, "repeats", minimum=1)
5
>>> check_count(10**6, "repeats", minimum=1)  # doctest: +ELLIPSIS
Traceback (most recent call last):
...
curvefit.core.errors.InputError: repeats must be at most 1,000 (...), got 1,000,000
"""

from __future__ import annotations

import math
import numbers
import os
import sys
from typing import Callable

from curvefit.core.errors import InputError

# name -> (largest accepted value, why). Counts past these would not finish in useful time.
UPPER_LIMITS: dict[str, tuple[float, str]] = {
    "repeats": (1_000, "more repeats add little precision and cost time linearly"),
    "bootstrap": (100_000, "beyond about 10,000 replicates percentile intervals change by less "
                           "than their own Monte Carlo noise"),
    "n_jobs": (1_024, "more workers than that exhaust memory and processes"),
    "random_state": (2 ** 32 - 1, "scikit-learn and numpy seeds are 32-bit"),
    "seed": (2 ** 32 - 1, "scikit-learn and numpy seeds are 32-bit"),
    "timeout": (10 ** 7, "about 16 weeks; leave the option out for no limit"),
    "sizes": (1_000, "a curve needs a few dozen sizes at most"),
    "max_n": (10 ** 7, "each probe trial draws 2n rows"),
    "n_features": (100_000, "the probe generates rows of that many numbers"),
    "values": (10_000, "a longer list would not finish in useful time"),
}
# Smallest probability (ε, δ) the bounds accept: below it ln(1/δ) leaves the normal floats.
SMALLEST_PROBABILITY = 1e-300
# Largest size anywhere (rows, groups, samples): floats are exact whole numbers up to 2**53.
LARGEST_SIZE = 2 ** 53


def _limit(name: str, maximum):
    if maximum is not None:
        return maximum, None
    return UPPER_LIMITS.get(name, (None, None))


def _whole(value, name: str) -> int:
    """A whole number: ints (not bools), or floats/numpy numbers with no fraction."""
    if isinstance(value, bool) or isinstance(value, (str, bytes)):
        raise InputError(f"{name} must be a whole number, got {value!r}")
    if isinstance(value, numbers.Integral):
        return int(value)
    if isinstance(value, numbers.Real) and math.isfinite(float(value)) and float(value).is_integer():
        return int(value)
    raise InputError(f"{name} must be a whole number, got {value!r}")


def _number(value, name: str, kind: str = "a number") -> float:
    """``value`` as a float, or one InputError naming ``kind`` (bools and text refused)."""
    if not isinstance(value, (bool, str, bytes)):
        try:
            return float(value)
        except (TypeError, ValueError, OverflowError):
            pass
    raise InputError(f"{name} must be {kind}, got {value!r}")


def check_level(level, name: str = "interval") -> float:
    """An interval level strictly between 0 and 1 (``0.9`` for 90%)."""
    value = _number(level, name, "a number between 0 and 1")
    if not 0.0 < value < 1.0:
        raise InputError(f"{name} must be between 0 and 1 (e.g. 0.9 for 90%), got {level!r}")
    return value


def check_count(value, name: str, minimum: int = 0, maximum: int | None = None) -> int:
    """A whole number in ``[minimum, maximum]`` (bools and text refused).

    Without ``maximum`` the limit of ``UPPER_LIMITS[name]`` applies, when there is one.
    """
    value = _whole(value, name)
    top, why = _limit(name, maximum)
    if value < minimum:
        upper = f" and at most {top:,}" if top is not None else ""
        raise InputError(f"{name} must be at least {minimum}{upper}, got {value:,}")
    if top is not None and value > top:
        reason = f" ({why})" if why else ""
        raise InputError(f"{name} must be at most {top:,}{reason}, got {value:,}")
    return value


def check_seed(seed, name: str = "random_state"):
    """A seed: None or a whole number in [0, 2**32 - 1] (a Generator passes through)."""
    if seed is None or hasattr(seed, "integers"):
        return seed
    return check_count(seed, name, minimum=0, maximum=UPPER_LIMITS["random_state"][0])


def check_jobs(n_jobs, name: str = "n_jobs") -> int:
    """Parallel workers, joblib's convention: a count, or -1 for every core (-2 all but one ...).

    Examples
    --------
    >>> check_jobs(2), check_jobs(-1)
    (2, -1)
    >>> check_jobs(0)
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: n_jobs must be at least 1, or -1 for every core, got 0
    """
    value = _whole(n_jobs, name)
    cores = os.cpu_count() or 1
    if value == 0 or value < -cores:
        raise InputError(f"{name} must be at least 1, or -1 for every core"
                         + (f" (down to -{cores} here)" if value < 0 else "") + f", got {value}")
    return check_count(value, name, minimum=1) if value > 0 else value


def check_positive(value, name: str, allow_zero: bool = False, maximum: float | None = None) -> float:
    """A finite number > 0 (≥ 0 with ``allow_zero``), at most ``UPPER_LIMITS[name]`` if set."""
    v = _number(value, name)
    if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        raise InputError(f"{name} must be {'≥' if allow_zero else '>'} 0, got {value!r}")
    top, why = _limit(name, maximum)
    if top is not None and v > top:
        raise InputError(f"{name} must be at most {top:,g}" + (f" ({why})" if why else "")
                         + f", got {value!r}")
    return v


def check_probability(value, name: str) -> float:
    """A probability of the bounds (ε, δ): a number in ``[1e-300, 1)``.

    Smaller values are refused rather than rounded: ``ln(1/δ)`` and ``1/ε²`` leave the
    range of floating-point numbers below about 1e-300 (1e-320 is not even a normal
    float).

    Examples
    --------
    >>> check_probability(0.05, "delta")
    0.05
    >>> check_probability(1e-320, "delta")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: delta must be at least 1e-300 (...), got 1e-320
    """
    v = _number(value, name, "a number strictly between 0 and 1")
    if not 0.0 < v < 1.0 or not math.isfinite(v):
        raise InputError(f"{name} must lie strictly between 0 and 1, got {value!r}; "
                         f"use e.g. {name}=0.05")
    if v < SMALLEST_PROBABILITY:
        raise InputError(f"{name} must be at least {SMALLEST_PROBABILITY:g} (smaller values are "
                         f"not representable in the bounds' logarithms), got {value!r}")
    return v


def check_error_target(value, name: str = "target_error", rate: bool = True) -> float:
    """A target error or gap: finite, and strictly between 0 and 1 for a 0-1 error rate
    (``rate``), else ≥ 0 in the metric's own units. ``need --error`` and ``report
    --target-error`` both check here.

    Examples
    --------
    >>> check_error_target(0.05)
    0.05
    >>> check_error_target(2)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: target_error is a 0-1 error rate, so it must be between 0 and 1 ...
    >>> check_error_target(2, rate=False)
    2.0
    """
    v = _number(value, name)
    if not math.isfinite(v):
        raise InputError(f"{name} must be a finite number, got {value!r}")
    if rate and not 0.0 < v < 1.0:
        raise InputError(f"{name} is a 0-1 error rate, so it must be between 0 and 1 "
                         f"(got {v}); e.g. 0.05 for 5%")
    if v < 0:
        raise InputError(f"{name} must not be negative, got {v}")
    return v


def check_flag(value, name: str) -> bool:
    """A yes/no setting: ``True`` or ``False`` only (``"false"`` or ``"no"`` are refused,
    since ``bool("false")`` is True)."""
    np = sys.modules.get("numpy")  # a numpy bool exists only once numpy is loaded
    if isinstance(value, bool) or (np is not None and isinstance(value, np.bool_)):
        return bool(value)
    raise InputError(f"{name} must be true or false (without quotes), got {value!r}")


def check_choice(value, name: str, choices) -> str:
    """One of ``choices`` (the message lists them)."""
    try:
        ok = value in choices
    except TypeError:  # unhashable (a list from a job file)
        ok = False
    if not ok:
        raise InputError(f"{name} must be one of {', '.join(map(str, choices))}, got {value!r}")
    return value


def check_sizes(sizes, name: str = "sizes", unit: str = "rows") -> list[int]:
    """Training-set sizes: whole numbers from 1 to 2**53, at most ``UPPER_LIMITS["sizes"]``
    of them; returned sorted without repeats.

    Examples
    --------
    >>> check_sizes([200, 50.0, 100, 50])
    [50, 100, 200]
    """
    if isinstance(sizes, (str, bytes)) or not hasattr(sizes, "__iter__"):
        raise InputError(f"{name} must be a list of whole numbers, got {sizes!r}")
    values = list(sizes)
    top = UPPER_LIMITS["sizes"][0]
    if len(values) > top:
        raise InputError(f"{name}: at most {top:,} sizes ({UPPER_LIMITS['sizes'][1]}), got {len(values):,}")
    out = set()
    for v in values:
        try:
            n = _whole(v, "size")
        except InputError:
            raise InputError(f"size {v!r} is not a whole number; sizes count training {unit}") from None
        if n < 1:
            raise InputError(f"size {n} is below 1; sizes count training {unit}")
        if n > LARGEST_SIZE:
            raise InputError(f"size {n:,} is beyond 2**53; sizes count training {unit}")
        out.add(n)
    if not out:
        raise InputError(f"no {name} given; pass e.g. 50,100,200")
    return sorted(out)


def parse_list(text: str | None, kind: Callable = float, name: str = "value",
               integer_range: bool = False) -> list | None:
    """Parse ``"a,b,c"`` or a geometric range ``"start:stop:count"``.

    A range gives ``count`` values spaced geometrically from ``start`` to ``stop``
    inclusive (rounded and de-duplicated when ``integer_range``). Either form holds at
    most ``UPPER_LIMITS["values"]`` values (``10:100:1e8`` is refused, not built).

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
    top, why = UPPER_LIMITS["values"]
    if ":" in text:
        return _parse_range(text, kind, name, integer_range)
    pieces = text.split(",")
    if len(pieces) > top:
        raise InputError(f"at most {top:,} {name} values ({why}), got {len(pieces):,}")
    out_vals = []
    for piece in pieces:
        piece = piece.strip()
        try:
            v = kind(piece)
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"malformed {name} {piece!r} in {text!r}") from None
        if isinstance(v, float) and not math.isfinite(v):
            raise InputError(f"{name} {piece!r} is not finite")
        out_vals.append(v)
    return out_vals


def _parse_range(text: str, kind: Callable, name: str, integer_range: bool) -> list:
    """``START:STOP:COUNT`` → COUNT geometric steps (COUNT may be written 1e3)."""
    usage = "use START:STOP:COUNT, e.g. 50:5000:12"
    parts = text.split(":")
    if len(parts) != 3:
        raise InputError(f"malformed {name} range {text!r}; {usage}")
    try:
        start, stop, count_f = float(parts[0]), float(parts[1]), float(parts[2])
    except ValueError:
        raise InputError(f"malformed {name} range {text!r}; {usage}") from None
    if not all(math.isfinite(v) for v in (start, stop, count_f)) or not count_f.is_integer():
        raise InputError(f"{name} range {text!r} needs finite numbers and a whole COUNT; {usage}")
    count = int(count_f)
    if start <= 0 or stop < start or count < 1:
        raise InputError(f"{name} range {text!r} needs 0 < START <= STOP and COUNT >= 1")
    top, why = UPPER_LIMITS["values"]
    if count > top:
        raise InputError(f"{name} range {text!r} asks for {count:,} values; at most {top:,} ({why})")
    import numpy as np  # loaded on use: the command line starts without numpy

    vals = np.geomspace(start, stop, count) if count > 1 else np.array([start])
    if integer_range or kind is int:
        return sorted({int(round(v)) for v in vals})
    return [kind(v) for v in vals]
