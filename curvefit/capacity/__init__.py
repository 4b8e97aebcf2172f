"""Effective capacity: the VC-shaped gap model, the max-deviation probe, the trade-off.

``vc_model`` (``effective_capacity`` from a measured gap and ``probe_capacity``), 
``tradeoff`` (train and test error against a complexity parameter).
"""

from curvefit.capacity.vc_model import (CapacityEstimate, effective_capacity, phi,
                                        probe_capacity)

__all__ = ["CapacityEstimate", "effective_capacity", "phi", "probe_capacity"]
