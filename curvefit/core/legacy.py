"""Names that files of older versions use, mapped to the current ones, in one place.

Readers of run, fit, capacity, trade-off and history files pass what they read through
:func:`rename_legacy`; ``--families`` refuses an old name and says the new one.
"""

from __future__ import annotations

import re

# Curve families were called by a short code with a parameter count up to version 0.1;
# the pairs read old=new.
LEGACY_NAMES: dict[str, str] = dict(pair.split("=") for pair in (
    "last1=last-value pow2=power-law pow3=power-law-floor pow4=shifted-power-law exp3=exponential-floor log2=log-decline ilog2=inverse-log vap3=vapor-pressure mmf4=morgan-mercer-flodin wbl4=weibull joint5=joint-train-test"  # noqa: E501
).split())


def current_name(name):
    """The family's current name for a name read from a file (old names are mapped).

    Examples
    --------
    >>> old = next(k for k, v in LEGACY_NAMES.items() if v == "power-law-floor")
    >>> current_name(old), current_name("weibull"), current_name(None)
    ('power-law-floor', 'weibull', None)
    """
    if isinstance(name, str):
        return LEGACY_NAMES.get(name, name)
    return name


_NAME_KEYS = ("best", "runner_up", "family", "chosen", "chosen_family")


def rename_legacy(doc):
    """A copy of a JSON document with every old family name replaced by its new one.

    Rewrites the values of the keys that hold a family name (``best``, ``runner_up``,
    ``family`` …), lists of names under ``families``, and ``family NAME`` inside notes.

    Examples
    --------
    >>> old = {v: k for k, v in LEGACY_NAMES.items()}
    >>> rename_legacy({"best": old["power-law-floor"],
    ...                "note": f"family {old['morgan-mercer-flodin']}; 3 repeats"})
    {'best': 'power-law-floor', 'note': 'family morgan-mercer-flodin; 3 repeats'}
    """
    if isinstance(doc, dict):
        out = {}
        for key, value in doc.items():
            if key in _NAME_KEYS and isinstance(value, str):
                out[key] = current_name(value)
            elif key == "families" and isinstance(value, list) \
                    and all(isinstance(v, str) for v in value):
                out[key] = [current_name(v) for v in value]
            else:
                out[key] = rename_legacy(value)
        return out
    if isinstance(doc, list):
        return [rename_legacy(v) for v in doc]
    if isinstance(doc, str) and "family " in doc:
        return _rename_in_text(doc)
    return doc


def _rename_in_text(text: str) -> str:
    """``family OLD`` (as notes store it) becomes ``family NEW``."""
    return re.sub(r"\bfamily (\w+)\b",
                  lambda m: "family " + current_name(m.group(1)), text)
