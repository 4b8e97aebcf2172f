"""How numbers read: one style for the terminal, the report and JSON labels.

Every printed error, count, capacity and interval goes through these functions, so
``0.005`` reads ``0.50%`` wherever it appears.

Examples
--------
>>> format_error(0.005), format_error(0.1234), format_error(1234.5, "mse")
('0.50%', '12.3%', '1,234')
>>> format_count(12_345), format_count(float("inf"))
('12,300', 'unbounded')
>>> format_interval(0.05, 0.12, 0.9, kind="error")
'90% interval 5.0%–12.0%'
"""

from __future__ import annotations

import math
from typing import Any

# Metrics whose values are rates in [0, 1], printed as percentages.
RATE_METRICS = frozenset({"error", "balanced_error", "zero_one"})
# Values closer to zero than this print as exactly zero (fit noise, not a measurement).
ZERO_PRINT = 5e-7
MISSING = "–"


def is_missing(value: Any) -> bool:
    """True for None and NaN (the values tables show as ``–``)."""
    if value is None:
        return True
    try:
        return math.isnan(float(value))
    except (TypeError, ValueError):
        return False


def is_rate(metric: str | None) -> bool:
    """True when the metric is a 0–1 error rate (printed as a percentage)."""
    return metric is None or metric in RATE_METRICS


def round_significant(value: float, digits: int = 3) -> float:
    """``value`` rounded to ``digits`` significant figures (0, inf and NaN unchanged).

    >>> round_significant(12_345.0), round_significant(0.0012345, 2)
    (12300.0, 0.0012)
    """
    if value == 0 or not math.isfinite(value):
        return value
    return round(value, -int(math.floor(math.log10(abs(value)))) + digits - 1)


def format_number(value: Any, digits: int = 4) -> str:
    """A plain number: ``digits`` significant figures, separators from 1,000, no e-notation
    between 1e-4 and 1e15; ``–`` when missing, ``∞`` for infinity.

    >>> format_number(0.0812345), format_number(10780.4), format_number(3), format_number(None)
    ('0.08123', '10,780', '3', '–')
    """
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if v == 0:
        return "0"
    if 1000 <= abs(v) < 1e15:  # whole units with separators, rounded to `digits` figures
        return f"{round_significant(v, digits):,.0f}"
    if abs(v) >= 1e-4:
        return f"{v:.{digits}g}"
    return f"{v:.{max(digits - 1, 1)}e}"


def format_error(value: Any, metric: str | None = "error") -> str:
    """An error: a percentage for a 0–1 rate (``12.3%``, ``0.50%``), else a plain number.

    >>> format_error(0.25), format_error(0.0), format_error(0.05, "mse")
    ('25.0%', '0%', '0.05')
    """
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if not is_rate(metric):
        return format_number(v)
    if abs(v) < ZERO_PRINT:
        return "0%"
    pct = 100.0 * v
    return f"{pct:.1f}%" if abs(pct) >= 0.995 else f"{pct:#.2g}%"


def format_count(value: Any) -> str:
    """A sample count: three significant figures with separators (``12,300``);
    ``unbounded`` for infinity, ``–`` when missing.

    >>> format_count(2871.2), format_count(48)
    ('2,870', '48')
    """
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "unbounded"
    if abs(v) >= 1e15:
        return f"{v:.3g}"
    return f"{round_significant(v, 3):,.0f}" if abs(v) >= 1000 else f"{round(v):,.0f}"


def format_capacity(value: Any) -> str:
    """A VC dimension: whole units with separators from 100 up, else three digits."""
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "∞"
    return f"{v:,.0f}" if abs(v) >= 100 else f"{v:.3g}"


def format_level(level: float) -> str:
    """An interval level as a percentage: ``0.9`` → ``90%``, ``0.975`` → ``97.5%``."""
    pct = 100.0 * float(level)
    return f"{pct:.0f}%" if abs(pct - round(pct)) < 1e-9 else f"{pct:.3g}%"


_KINDS = {"error": format_error, "count": format_count, "number": format_number,
          "capacity": format_capacity}


def format_value(value: Any, kind: str = "number", metric: str | None = "error") -> str:
    """One value of a given kind (``error``, ``count``, ``capacity`` or ``number``)."""
    if kind == "error":
        return format_error(value, metric)
    return _KINDS[kind](value)


def format_range(low: Any, high: Any, kind: str = "number", metric: str | None = "error") -> str:
    """``low–high``; an infinite upper end reads ``low to no upper limit``.

    >>> format_range(2130, 4180, "count"), format_range(17_500, float("inf"), "count")
    ('2,130–4,180', '17,500 to no upper limit')
    """
    lo = format_value(low, kind, metric)
    if not is_missing(high) and math.isinf(float(high)) and float(high) > 0:
        return f"{lo} to no upper limit"
    return f"{lo}–{format_value(high, kind, metric)}"


def format_interval(low: Any, high: Any, level: float, kind: str = "number",
                    metric: str | None = "error") -> str:
    """``90% interval low–high``; empty when both ends are missing."""
    if is_missing(low) and is_missing(high):
        return ""
    return f"{format_level(level)} interval {format_range(low, high, kind, metric)}"


def format_estimate(estimate: Any, low: Any = None, high: Any = None, level: float | None = None,
                    kind: str = "number", metric: str | None = "error") -> str:
    """``estimate (90% interval low–high)``, or ``estimate (low–high)`` without a level;
    just the estimate when the interval is unknown, ``–`` when there is no estimate.

    >>> format_estimate(0.081, 0.079, 0.083, 0.9, kind="error")
    '8.1% (90% interval 7.9%–8.3%)'
    >>> format_estimate(0.0812, 0.0791, 0.0833)
    '0.0812 (0.0791–0.0833)'
    """
    if is_missing(estimate):
        return MISSING
    text = format_value(estimate, kind, metric)
    if is_missing(low) and is_missing(high):
        return text
    inner = (format_interval(low, high, level, kind, metric) if level is not None
             else format_range(low, high, kind, metric))
    return f"{text} ({inner})"


def format_money(value) -> str:
    """An amount of money: whole units from 100 up, else cents; ``–`` when missing.

    Examples
    --------
    >>> format_money(500), format_money(0.4), format_money(1234.5), format_money(None)
    ('500', '0.40', '1,234', '–')
    """
    if is_missing(value) or math.isinf(float(value)):
        return MISSING
    v = float(value)
    return f"{v:,.0f}" if abs(v) >= 100 else f"{v:,.2f}"
