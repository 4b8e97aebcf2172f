"""Fitting curves and answering from them: families, the fit, samples needed, purchases.

``families`` (the declarative curve families), ``engine`` (``fit_curve``, ``CurveFit``,
``SampleEstimate``), and the steps behind it: ``data`` (per-size means, standard errors,
weights, the variance a fresh data set would bring), ``least_squares``, ``selection``
(forecast validation, lack of fit, the choice and the ranking, the weights of the
averaged forecast), ``bootstrap`` (the chosen and the heaviest averaged families refitted
to redrawn means), ``intervals`` (the averaged forecast and its prediction band),
``calibration`` (the band correction learned on the curve corpus), ``answers`` (samples
needed); ``planning`` (what buying more labels is worth) and ``sanity`` (the constant
predictor and other judgements beside every answer).

Forecasts average the families that forecast held-out sizes well rather than betting on
the chosen one; the chosen family names the curve, its parameters and its asymptote.
"""

from curvefit.fitting.engine import CurveFit, SampleEstimate, fit_curve
from curvefit.fitting.planning import plan_purchase

__all__ = ["CurveFit", "SampleEstimate", "fit_curve", "plan_purchase"]
