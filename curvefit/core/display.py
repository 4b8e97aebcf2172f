"""How a core object reaches its notebook display, which lives in a part core may not import.

`Curve` is shown in notebooks (an HTML table, a figure) by `curvefit.report.notebook`,
but `core` imports no other part, not even lazily. So `Curve._repr_html_` and
`Curve.plot` ask this module for the renderer, and the package itself
(``curvefit/__init__.py``, which Python runs before any ``curvefit.*`` module) installs a
loader here that imports `curvefit.report.notebook` on first use. Nothing heavy is
imported until a curve is displayed.

Examples
--------
>>> import curvefit
>>> renderer().__name__
'curvefit.report.notebook'
"""

from __future__ import annotations

from collections.abc import Callable
from types import ModuleType

_loader: Callable[[], ModuleType] | None = None


def install_renderer(loader: Callable[[], ModuleType]) -> None:
    """Set the function that returns the renderer module (``curvefit/__init__.py`` does)."""
    global _loader
    _loader = loader


def renderer() -> ModuleType:
    """The module that renders notebook displays (`curvefit.report.notebook`)."""
    if _loader is None:  # only if this module were loaded outside the curvefit package
        raise RuntimeError("no notebook renderer installed; import curvefit first")
    return _loader()
