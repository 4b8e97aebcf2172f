"""Reading result objects for display: names, labels and fields, without drawing anything.

Shared by the figures (`plots`), the page (`html`) and the pipelines that feed them; it
imports no plotting library, so the command line can use it cheaply.

Examples
--------
>>> as_items({"a": 1}), as_items([1, 2]), as_items(None)
([('a', 1)], [(None, 1), (None, 2)], [])
>>> metric_label("error"), metric_label("mse"), metric_label("roc_auc", info={"label": "1 − ROC AUC"})
('test error (0-1)', 'test MSE', 'test 1 − ROC AUC')
>>> format_param_value(2.0), format_param_value(None), format_param_value("rbf")
('2', 'None', 'rbf')
"""

from __future__ import annotations

import math
import numbers
from typing import Any, Mapping

from curvefit.core.formatting import is_rate, metric_name


def as_items(obj: Any) -> list:
    """One item, a list or a dict of items as a list of ``(label, item)`` (label None for lists)."""
    if obj is None:
        return []
    if isinstance(obj, Mapping):
        return list(obj.items())
    if isinstance(obj, (list, tuple)):
        return [(None, o) for o in obj]
    return [(None, obj)]


def field(obj: Any, name: str, default=None):
    """``obj.name`` or ``obj[name]``; ``default`` when absent or when ``obj`` is None."""
    if obj is None:
        return default
    if isinstance(obj, Mapping):
        return obj.get(name, default)
    return getattr(obj, name, default)


def is_finite(value: Any) -> bool:
    """True for a finite number (None, NaN, ±inf and non-numbers are not)."""
    try:
        return value is not None and math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def family_name(family: Any) -> str | None:
    """A curve family's name, from the name itself or an object with ``name``/``family``."""
    if family is None or isinstance(family, str):
        return family
    for key in ("name", "family"):
        v = getattr(family, key, None)
        if isinstance(v, str):
            return v
    return str(family)


def metric_label(metric: str | None, what: str = "test", info: Any = None) -> str:
    """Axis label with units: ``"test error (0-1)"`` for a 0-1 error rate, else the metric's
    name (`curvefit.core.formatting.metric_name`; ``info`` is the run's ``metric_info``)."""
    name = metric_name(metric, info)
    return f"{what} {name} (0-1)" if is_rate(metric) else f"{what} {name}"


def model_label(curve: Any, index: int = 0) -> str:
    """A short name for the model behind a curve, from its run metadata."""
    meta = getattr(curve, "meta", None) or {}
    for key in ("label", "name"):
        if meta.get(key):
            return str(meta[key])
    model = meta.get("model")
    if isinstance(model, Mapping):
        for key in ("label", "name", "spec", "class"):
            if model.get(key):
                return str(model[key])
    elif model:
        return str(model)
    for key in ("model_spec", "spec"):
        if meta.get(key):
            return str(meta[key])
    return f"model {index + 1}"


def split_label(curve: Any) -> str:
    """How a curve's train/test splits were made, in a few words (from its metadata).

    Leaky splits give curves a model never reaches, so every figure and report says
    which split a curve used.
    """
    meta = getattr(curve, "meta", None) or {}
    split = meta.get("split") if isinstance(meta.get("split"), Mapping) else {}
    data = meta.get("data") if isinstance(meta.get("data"), Mapping) else {}
    kind = split.get("kind")
    unit = " (sizes in groups)" if (meta.get("size_unit") or split.get("size_unit")) == "groups" else ""
    if kind == "groups":
        col = meta.get("groups_column") or data.get("groups") or split.get("column")
        return f"grouped split{f' by {col}' if col else ''}{unit}"
    if kind == "order":
        col = meta.get("order_column") or data.get("order") or split.get("column")
        return f"time-ordered split{f' by {col}' if col else ''}"
    if kind == "given_test":
        return "given test set"
    if kind == "random":
        return "random stratified split" if split.get("stratify", True) else "random split"
    return "split not recorded"


def format_param_value(value: Any) -> str:
    """A model parameter's value as text: missing → ``None``, whole floats without ``.0``."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "None"
    whole_float = isinstance(value, numbers.Real) and not isinstance(value, numbers.Integral)
    if whole_float and float(value).is_integer():
        return str(int(value))
    return str(value)
