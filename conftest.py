"""Doctest settings for the docstring Examples under curvefit/ (tests/ has its own conftest)."""

import numpy as np
import pytest
from _pytest.doctest import DoctestItem


@pytest.fixture(autouse=True)
def _numpy_scalars_print_plain(request):
    """Docstrings show ``0.04295``, not ``np.float64(0.04295)``: numpy 2 changed the repr
    of its scalars, and the project supports numpy from 1.24 on, so examples read the same
    under both."""
    if isinstance(request.node, DoctestItem) and np.lib.NumpyVersion(np.__version__) >= "2.0.0":
        with np.printoptions(legacy="1.25"):
            yield
    else:
        yield
