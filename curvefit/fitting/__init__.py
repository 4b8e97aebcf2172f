"""Fitting curves and answering from them: families, the fit, samples needed, purchases.

``families`` (the declarative curve families), ``engine`` (``fit_curve``, ``CurveFit``,
``SampleEstimate``), and the steps behind it: ``data`` (per-size means, standard errors,
weights), ``least_squares``, ``selection`` (forecast validation, lack of fit, the choice),
``bootstrap``, ``intervals`` (prediction bands), ``answers`` (samples needed);
``planning`` (what buying more labels is worth).
"""

from curvefit.fitting.engine import CurveFit, SampleEstimate, fit_curve
from curvefit.fitting.planning import plan_purchase

__all__ = ["CurveFit", "SampleEstimate", "fit_curve", "plan_purchase"]
