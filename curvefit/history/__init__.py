"""History of measured runs and the nightly gate on data-efficiency.

``store`` (``Store``: SQLite or PostgreSQL, versioned schema), ``figures`` (headline
figures of a run and the rule that says whether a run regressed).
"""

from curvefit.history.store import Store

__all__ = ["Store"]
