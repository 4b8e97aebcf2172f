"""How numbers read: one style for the terminal, the report and JSON labels.

Every printed error, count, capacity and interval goes through these functions, so
``0.005`` reads ``0.50%`` wherever it appears. This module is also the one place that
knows how a metric's values read: the 0-1 error (and its balanced form) as percentages,
every other loss (MSE, MAE, 1 − ROC AUC, ...) as a plain number in its own units, with
thousands separators and never in e-notation; `metric_name` and `quantity_name` give
the words for it ("test error" only for the 0-1 error, "test MSE", "test 1 − ROC AUC").

Examples
--------
>>> format_error(0.005), format_error(0.1234), format_error(1234.5, "mse")
('0.50%', '12.3%', '1,234')
>>> quantity_name("test_error", "error"), quantity_name("test_error", "mse")
('test error', 'test MSE')
>>> format_count(12_345), format_count(float("inf"))
('12,300', 'unbounded')
>>> format_interval(0.05, 0.12, 0.9, kind="error")
'90% interval 5.0%–12.0%'
"""

from __future__ import annotations

import math
from typing import Any

# Metrics whose values are rates in [0, 1], printed as percentages (the scorers
# "accuracy" and "balanced_accuracy" are measured as 1 − score: the same two rates).
RATE_METRICS = frozenset({"error", "balanced_error", "zero_one", "accuracy", "balanced_accuracy"})
# The 0-1 loss (misclassified fraction): the loss that VC theory bounds.
ZERO_ONE_METRICS = frozenset({"error", "zero_one", "accuracy"})
# How the built-in losses are named in sentences; a scikit-learn scorer's name comes from
# the scorer itself (``label`` in the run's ``metric_info``, see curvefit.measuring.metrics).
METRIC_NAMES = {"error": "error", "zero_one": "error", "balanced_error": "balanced error",
                "mse": "MSE", "mae": "MAE"}
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


def is_zero_one(metric: str | None) -> bool:
    """True for the 0-1 loss, the one loss the VC bounds speak about.

    >>> is_zero_one("error"), is_zero_one(None), is_zero_one("mse"), is_zero_one("balanced_error")
    (True, True, False, False)
    """
    return metric is None or metric in ZERO_ONE_METRICS


def metric_name(metric: str | None, info: Any = None) -> str:
    """The name a metric's values go by in sentences and headers.

    ``info`` is the run's ``metric_info`` (`curvefit.measuring.metrics.Metric.to_dict`);
    its ``label``, read from the scorer object when the curve was measured, wins.
    Without it the built-in names are known, and any other name is shown as given.

    >>> metric_name("error"), metric_name("mse"), metric_name("balanced_error")
    ('error', 'MSE', 'balanced error')
    >>> metric_name("roc_auc", {"label": "1 − ROC AUC"}), metric_name("roc_auc")
    ('1 − ROC AUC', 'roc_auc')
    """
    if isinstance(info, dict) and info.get("label"):
        return str(info["label"])
    m = (metric or "error").strip()
    return METRIC_NAMES.get(m, m)


def quantity_name(kind: str, metric: str | None, info: Any = None) -> str:
    """What a value is, in words: ``kind`` is ``"test_error"``, ``"train_error"`` or
    ``"gap"``. Only the 0-1 error is called "error"; the gap is the generalization gap
    whatever the loss.

    >>> quantity_name("test_error", "error"), quantity_name("train_error", "mae")
    ('test error', 'training MAE')
    >>> quantity_name("test_error", "max_error", {"label": "max error"}), quantity_name("gap", "mse")
    ('test max error', 'generalization gap')
    """
    if kind == "gap":
        return "generalization gap"
    where = "training" if kind in ("train", "train_error") else "test"
    return f"{where} {metric_name(metric, info)}"


def format_quantity(value: Any, kind: str, metric: str | None, info: Any = None) -> str:
    """A value with what it is: ``15.0% test error`` for a rate, ``a test MSE of 1,200``
    for a loss in its own units (``kind`` as in `quantity_name`).

    >>> format_quantity(0.15, "test_error", "error"), format_quantity(1234.5, "test_error", "mse")
    ('15.0% test error', 'a test MSE of 1,234')
    """
    what = quantity_name(kind, metric, info)
    text = format_error(value, metric)
    return f"{text} {what}" if is_rate(metric) else f"a {what} of {text}"


def vc_absent_reason(metric: str | None, info: dict | None = None) -> str | None:
    """Why a VC-based section (worst-case bound, VC units) is left out for this metric, in
    one line, or None when it applies: VC theory bounds the 0-1 loss only.

    >>> vc_absent_reason("error") is None
    True
    >>> vc_absent_reason("mse")
    'no VC comparison: VC theory bounds the 0-1 loss (misclassification), and this curve measures MSE'
    """
    if is_zero_one(metric):
        return None
    return ("no VC comparison: VC theory bounds the 0-1 loss (misclassification), and this "
            f"curve measures {metric_name(metric, info)}")


def round_significant(value: float, digits: int = 3) -> float:
    """``value`` rounded to ``digits`` significant figures (0, inf and NaN unchanged).

    >>> round_significant(12_345.0), round_significant(0.0012345, 2)
    (12300.0, 0.0012)
    """
    if value == 0 or not math.isfinite(value):
        return value
    return round(value, -int(math.floor(math.log10(abs(value)))) + digits - 1)


def format_number(value: Any, digits: int = 4) -> str:
    """A plain number: ``digits`` significant figures, separators from 1,000, never
    e-notation (outside 1e-6 to 1e15 a power of ten, ``4.43×10⁻¹²``); ``–`` when
    missing, ``∞`` for infinity.

    >>> format_number(0.0812345), format_number(10780.4), format_number(3), format_number(None)
    ('0.08123', '10,780', '3', '–')
    >>> format_number(999.7, 3), format_number(0.0000123), format_number(4.433e-12)
    ('1,000', '0.0000123', '4.433×10⁻¹²')
    """
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    r = round_significant(v, digits)
    if r == 0:
        return "0"
    if 1000 <= abs(r) < 1e15:  # whole units with separators, rounded to `digits` figures
        return f"{r:,.0f}"
    if 1e-6 <= abs(r) < 1000:
        decimals = max(digits - 1 - math.floor(math.log10(abs(r))), 0)
        text = f"{r:.{decimals}f}"
        return text.rstrip("0").rstrip(".") if "." in text else text
    power = math.floor(math.log10(abs(r)))
    mantissa = format_number(r / 10.0 ** power, digits)
    return f"{mantissa}×10{str(power).translate(_SUPERSCRIPT)}"


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def format_error(value: Any, metric: str | None = "error", scale: float | None = None) -> str:
    """An error: a percentage for a 0–1 rate (``12.3%``, ``0.50%``), else a plain number in
    the metric's units. ``scale`` (the largest value of the table or sentence the value
    sits in) makes a loss closer to zero than ``ZERO_PRINT × scale`` print as ``0``: an
    exact fit's rounding noise, not a measurement.

    >>> format_error(0.25), format_error(0.0), format_error(0.05, "mse")
    ('25.0%', '0%', '0.05')
    >>> format_error(2.05e-26, "mse", scale=44_850), format_error(617.0, "mse", scale=44_850)
    ('0', '617')
    """
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if not is_rate(metric):
        if scale is not None and math.isfinite(float(scale)) and abs(v) < ZERO_PRINT * abs(float(scale)):
            return "0"
        return format_number(v)
    if abs(v) < ZERO_PRINT:
        return "0%"
    pct = 100.0 * v
    if abs(pct) >= 0.995:
        return f"{pct:.1f}%"
    decimals = 1 - math.floor(math.log10(abs(pct)))  # two significant figures, kept zeros
    return f"{round_significant(pct, 2):.{decimals}f}%"


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
        return format_number(v, 3)
    return f"{round_significant(v, 3):,.0f}" if abs(v) >= 1000 else f"{round(v):,.0f}"


def format_capacity(value: Any) -> str:
    """A VC dimension: whole units with separators from 100 up, else three digits."""
    if is_missing(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "∞"
    return f"{v:,.0f}" if abs(v) >= 100 else format_number(v, 3)


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


# Amounts of money below this print as "less than" it: a price that small is rounding.
MONEY_FLOOR = 0.0001


def format_money(value) -> str:
    """An amount of money: whole units from 100 up, cents from 1 up, two significant
    figures below 1 (``0.0012``), and ``less than 0.0001`` for tinier positive amounts;
    ``–`` when missing.

    Examples
    --------
    >>> format_money(500), format_money(0.4), format_money(1234.5), format_money(None)
    ('500', '0.40', '1,234', '–')
    >>> format_money(0.001), format_money(0.8275), format_money(3e-9), format_money(0)
    ('0.0010', '0.83', 'less than 0.0001', '0')
    """
    if is_missing(value) or math.isinf(float(value)):
        return MISSING
    v = float(value)
    if v == 0:
        return "0"
    if abs(v) >= 100:
        return f"{v:,.0f}"
    if abs(v) >= 0.995:
        return f"{v:,.2f}"
    if abs(v) < MONEY_FLOOR:
        return f"less than {MONEY_FLOOR:g}" if v > 0 else f"more than −{MONEY_FLOOR:g}"
    decimals = 1 - math.floor(math.log10(abs(round_significant(v, 2))))
    return f"{round_significant(v, 2):.{max(decimals, 2)}f}"
