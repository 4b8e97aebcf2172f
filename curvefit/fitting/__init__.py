"""Fitting curves and answering from them: families, the fit, samples needed, purchases.

``families`` (the declarative curve families), ``engine`` (``fit_curve``: least squares,
forecast validation, choice, bootstrap intervals, ``samples_for``), ``planning`` (what
buying more labels is worth).
"""

from curvefit.fitting.engine import CurveFit, SampleEstimate, fit_curve
from curvefit.fitting.planning import plan_purchase

__all__ = ["CurveFit", "SampleEstimate", "fit_curve", "plan_purchase"]
