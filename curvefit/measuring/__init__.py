"""Measuring a learning curve: train the user's model on growing subsamples, with repeats.

``runner`` (``measure``: cells, seeds, journal, parallel execution), ``data`` (reading
and preparing tables), ``models`` (model specifications: import paths, factories, external
trainers), ``metrics`` (losses), ``splits`` (how train and test sets are drawn),
``journal`` (crash-safe record of finished cells), ``parallel`` (local or Dask workers).
"""

from curvefit.measuring.runner import measure

__all__ = ["measure"]
