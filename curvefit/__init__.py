"""curvefit: measured learning curves, honest extrapolation, and effective capacity.

Public names load lazily so that ``import curvefit`` and the command line start fast.

Examples
--------
>>> import curvefit as cf
>>> round(cf.bounds.test_error_bar(1000, 0.05), 5)
0.04295
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

# public name -> module that defines it
_EXPORTS = {
    "InputError": "curvefit.core.errors",
    "Estimate": "curvefit.core.estimate",
    "Curve": "curvefit.core.curve",
    "measure": "curvefit.measuring.runner",
    "plan_measure": "curvefit.measuring.runner",
    "fit_curve": "curvefit.fitting.engine",
    "CurveFit": "curvefit.fitting.engine",
    "SampleEstimate": "curvefit.fitting.engine",
    "plan_purchase": "curvefit.fitting.planning",
    "plan_rounds": "curvefit.fitting.rounds",
    "plan_slices": "curvefit.fitting.rounds",
    "split_budget": "curvefit.fitting.rounds",
    "measure_slices": "curvefit.measuring.slices",
    "measure_grown": "curvefit.measuring.growing",
    "effective_capacity": "curvefit.capacity.gap_model",
    "probe_capacity": "curvefit.capacity.probe",
    "CapacityEstimate": "curvefit.capacity.result",
    "tradeoff": "curvefit.capacity.tradeoff",
    "Tradeoff": "curvefit.capacity.tradeoff",
    "Store": "curvefit.history.store",
    "track_run": "curvefit.workflows.nightly",
    "run_demo": "curvefit.workflows.demo",
}
# the parts of the package, reachable as attributes (``cf.fitting.families`` …)
_SUBMODULES = {"bounds", "core", "measuring", "fitting", "capacity", "history", "report"}

__all__ = sorted(_EXPORTS) + sorted(_SUBMODULES)


def _notebook_renderer():
    """`curvefit.report.notebook`, loaded when a core object is first shown in a notebook."""
    return importlib.import_module("curvefit.report.notebook")


# core may not import report, so Curve reaches its display through this hook
from curvefit.core import display as _display  # noqa: E402

_display.install_renderer(_notebook_renderer)


def __getattr__(name: str):
    if name in _EXPORTS:
        return getattr(importlib.import_module(_EXPORTS[name]), name)
    if name in _SUBMODULES:
        return importlib.import_module(f"curvefit.{name}")
    raise AttributeError(f"module 'curvefit' has no attribute {name!r}")


def __dir__():
    return __all__
