"""The stored runs of a history store as one plain document (what ``curvefit history`` shows).

Reads the store only: every figure is the one recorded by ``curvefit track``.
"""

from __future__ import annotations

import json
import math
from typing import Any

import pandas as pd


def figure_names(runs: pd.DataFrame) -> list[str]:
    """Names of the headline figures in a `Store.runs` table (columns with ``_low``/``_high``)."""
    return [c for c in runs.columns if f"{c}_low" in runs.columns and f"{c}_high" in runs.columns]


def history_document(store, series: str | None = None) -> dict:
    """The runs of ``series`` (or of every series) as a plain JSON-ready dict.

    Each run lists its figures with ``estimate``, ``low``, ``high`` (None when unknown or
    infinite; ``unbounded`` says which), the recorded direction ``better`` and ``note``.

    Examples
    --------
    >>> import tempfile, os, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> from curvefit.history.figures import make_figure
    >>> from curvefit.history.store import Store
    >>> s = Store(os.path.join(tempfile.mkdtemp(), "history.db"))
    >>> c = Curve.from_table(pd.DataFrame({"size": [50, 100], "test_error": [0.2, 0.1]}))
    >>> _ = s.record(c, series="demo", headline=[make_figure("test_error_at_ref", 0.1, 0.09, 0.11)])
    >>> doc = history_document(s)
    >>> doc["series"][0]["runs"][0]["figures"]["test_error_at_ref"]["estimate"]
    0.1
    >>> s.close()
    """
    names = [series] if series is not None else store.series_names()
    doc = {"store": str(store.path), "schema_version": store.schema_version, "series": []}
    for name in names:
        runs = store.runs(name)
        entries = [_run_entry(store, r, figure_names(runs)) for _, r in runs.iterrows()]
        doc["series"].append({"name": name, "config": store.series_config(name), "runs": entries})
    return doc


def _run_entry(store, r: pd.Series, figs: list[str]) -> dict:
    recorded = store.headline(int(r["run_id"]))
    return {
        "run_id": int(r["run_id"]), "created": r["created"],
        "model": model_value(r["model"]), "model_label": model_label(r["model"]),
        "model_fingerprint": model_fingerprint(r["model"]),
        "metric": _text(r["metric"]), "data_fingerprint": _text(r["data_fingerprint"]),
        "code_version": _text(r["code_version"]),
        "n_points": int(r["n_points"]), "n_failed": int(r["n_failed"]),
        "figures": {f: {"estimate": _finite(r[f]), "low": _finite(r[f"{f}_low"]),
                        "high": _finite(r[f"{f}_high"]),
                        "unbounded": bool(math.isinf(r[f])),
                        "better": recorded[f].better if f in recorded else None,
                        "note": recorded[f].note if f in recorded else ""}
                    for f in figs if not pd.isna(r[f])},
    }


def model_label(value: Any) -> str | None:
    """A stored model spec in one line with its parameters: ``LogisticRegression(C=0.0001)``;
    a trainer program by its command. None when no model was recorded.

    Examples
    --------
    >>> model_label('{"name": "LogisticRegression", "params": {"C": 0.0001, "max_iter": 500}}')
    'LogisticRegression(C=0.0001, max_iter=500)'
    >>> model_label("sklearn.tree:DecisionTreeClassifier"), model_label(None)
    ('sklearn.tree:DecisionTreeClassifier', None)
    """
    v = model_value(value)
    if v is None or not isinstance(v, dict):
        return v
    if v.get("command"):
        return f"command: {v['command']}"
    name = str(v.get("label") or v.get("name") or v.get("spec") or "model")
    params = v.get("params") or {}
    if not isinstance(params, dict):
        return name
    inner = ", ".join(f"{k}={_param_text(params[k])}" for k in sorted(params))
    return f"{name}({inner})"


def _param_text(value: Any) -> str:
    return json.dumps(value, sort_keys=True) if isinstance(value, (dict, list)) else str(value)


def model_fingerprint(value: Any) -> str | None:
    """Eight hex digits of SHA-256 over what defines a stored model (kind, spec with a
    model file's name but not its folder, parameters, command), so runs of one model
    configuration share it and a changed parameter shows as a new fingerprint.

    Examples
    --------
    >>> a = model_fingerprint('{"kind": "import", "spec": "m:M", "params": {"C": 1.0}, "timeout": 5}')
    >>> b = model_fingerprint('{"kind": "import", "spec": "m:M", "params": {"C": 0.0001}}')
    >>> len(a), a == b, a == model_fingerprint('{"kind": "import", "spec": "m:M", "params": {"C": 1.0}}')
    (8, False, True)
    """
    import hashlib
    from pathlib import PurePath

    v = model_value(value)
    if v is None:
        return None
    if isinstance(v, dict):
        spec = v.get("spec")
        if v.get("kind") == "file" and isinstance(spec, str):
            spec = PurePath(spec).name  # the same file checked out elsewhere
        v = {"kind": v.get("kind"), "spec": spec, "params": v.get("params"),
             "command": v.get("command"), "factory": v.get("factory"),
             "name": None if spec else v.get("name")}
    text = json.dumps(v, sort_keys=True, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:8]


def model_value(v: Any):
    """A stored model spec: plain text, or the decoded JSON object; None when absent."""
    if v is None or pd.isna(v):
        return None
    if str(v).startswith("{"):
        try:
            return json.loads(v)
        except ValueError:
            pass
    return str(v)


def _text(v: Any) -> str | None:
    return None if v is None or pd.isna(v) else v


def _finite(v: Any) -> float | None:
    if v is None or pd.isna(v):
        return None
    f = float(v)
    return f if math.isfinite(f) else None  # unbounded values are flagged beside it


def trend_document(doc: dict) -> dict:
    """A history document for the trend figure, in which one panel never joins values of
    different kinds: a figure read off the chosen family is split by family, and a
    figure against a baseline is split by baseline (``asymptote (family power_law)``,
    ``efficiency_ratio (vs run 1)``).

    Examples
    --------
    >>> run = {"run_id": 1, "figures": {"asymptote": {"estimate": 0.1, "note": "family exp"},
    ...                                 "test_error_at_ref": {"estimate": 0.2, "note": "n=100"}}}
    >>> sorted(trend_document({"series": [{"name": "s", "runs": [run]}]})["series"][0]["runs"][0]["figures"])
    ['asymptote (family exp)', 'test_error_at_ref']
    """
    from curvefit.history.figures import EFFICIENCY, FAMILY_BOUND

    out = {k: v for k, v in doc.items() if k != "series"}
    out["series"] = []
    for s in doc.get("series", []):
        runs = []
        for r in s["runs"]:
            figures = {}
            for name, f in r["figures"].items():
                figures[_kind_name(name, f.get("note") or "", FAMILY_BOUND, EFFICIENCY)] = f
            runs.append({**r, "figures": figures})
        out["series"].append({**s, "runs": runs})
    return out


def _kind_name(name: str, note: str, family_bound, comparative) -> str:
    parts = [p.strip() for p in note.split(";")]
    if name in family_bound:
        family = next((p for p in parts if p.startswith("family ")), None)
        return f"{name} ({family})" if family else name
    if name in comparative:
        base = next((p for p in parts if p.startswith("vs run ")), None)
        return f"{name} ({base})" if base else name
    return name
