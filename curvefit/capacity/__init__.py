"""Effective capacity: the calibrated gap model, the max-deviation probe, the trade-off.

``vc_curve`` (Φ of the max-deviation experiment, its inverse, the fit of s·Φ(n/h)),
``gap_model`` (``effective_capacity`` from a measured gap), ``probe``
(``probe_capacity``), ``result`` (``CapacityEstimate``), ``tradeoff`` (train and test
error against a complexity parameter).
"""

from curvefit.capacity.gap_model import effective_capacity
from curvefit.capacity.probe import probe_capacity
from curvefit.capacity.result import CapacityEstimate
from curvefit.capacity.vc_curve import phi, phi_inverse

__all__ = ["CapacityEstimate", "effective_capacity", "phi", "phi_inverse", "probe_capacity"]
