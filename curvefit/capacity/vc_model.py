"""Former home of the capacity estimates, kept so older imports keep working.

Import from :mod:`curvefit.capacity` (or ``capacity.gap_model``, ``capacity.probe``,
``capacity.result``, ``capacity.vc_curve``) instead; this module goes once nothing
imports it.
"""

from curvefit.capacity.gap_model import effective_capacity  # noqa: F401
from curvefit.capacity.probe import DEFAULT_MAX_N, probe_capacity  # noqa: F401
from curvefit.capacity.result import CapacityEstimate, lack_of_fit  # noqa: F401
from curvefit.capacity.vc_curve import fit_vc_curve, phi, phi_inverse  # noqa: F401
