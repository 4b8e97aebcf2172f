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
    "InputError": "curvefit.errors",
    "Estimate": "curvefit.results",
    "Curve": "curvefit.curve",
    "measure": "curvefit.runner",
    "fit_curve": "curvefit.fitting",
    "CurveFit": "curvefit.fitting",
    "SampleEstimate": "curvefit.fitting",
    "plan_purchase": "curvefit.planning",
    "effective_capacity": "curvefit.capacity",
    "probe_capacity": "curvefit.capacity",
    "CapacityEstimate": "curvefit.capacity",
    "tradeoff": "curvefit.complexity",
    "Tradeoff": "curvefit.complexity",
    "Store": "curvefit.store",
}
_SUBMODULES = {"bounds", "families", "fitting", "planning", "capacity", "complexity",
               "store", "plots", "report", "runner", "data", "models", "splits"}

__all__ = sorted(_EXPORTS) + sorted(_SUBMODULES)


def __getattr__(name: str):
    if name in _EXPORTS:
        return getattr(importlib.import_module(_EXPORTS[name]), name)
    if name in _SUBMODULES:
        return importlib.import_module(f"curvefit.{name}")
    raise AttributeError(f"module 'curvefit' has no attribute {name!r}")


def __dir__():
    return __all__
