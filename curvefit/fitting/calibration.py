"""The correction of forecast bands learned from the bundled curve corpus.

Beyond the largest measured size a band carries the model error its components cannot
know exactly: the spread of the bootstrap, the spread between the averaged families and
the model error seen in forecast validation (``fitting.intervals``). On the curve corpus
(``corpus/``, real tables from scikit-learn and statsmodels and generated tasks, several
model types) these together came out wider than the forecast errors they should cover,
so they are scaled by one factor, ``model_error_scale`` (κ), learned there; beside them
the band carries a model error relative to the forecast's level that grows with
ln(n/N), ``relative_error`` (τ): the curves whose own parts are narrow still err by a
few per cent per factor of n, which one factor on those parts cannot give them without
widening every other band. κ and τ are chosen together: the narrowest bands (median
width relative to the level) that cover 90% of the corpus' measured means and of its
generated tasks' true errors, and 85% of each model type's means. Where the corpus
shows the averaged test-error forecast systematically off beyond the data, its change
there is corrected in log space: F(n) → F(N)·(F(n)/F(N))^p·(n/N)^s beyond the largest
measured size N (``drop_power`` p, ``tail_slope`` s; the families' own drop, shrunk or
stretched, and a steady decline per factor of n that they miss); ``drop_scale`` scales
the change linearly (kept at 1). A curve whose model has predicted exactly what the
constant predictor does at every measured size shows no learning yet, and the families,
fitted to a flat line, would say it never starts; its forecast beyond N is instead
F(N)·(n/N)^c, with ``constant_slope`` c the median fall per factor of n of the corpus
curves that were in that state at their cut (boosted trees on small tables), and its
band stays open from 0 up to the flat forecast's upper end.
``scripts/calibrate_forecasts.py`` fits it leave-one-data-set-out (every data set is
scored with a factor fitted on the others), reports that score, and writes the factor
fitted on all data sets to ``calibration.json`` beside this module; the engine reads it
and says so in the fit's notes. The variance a fresh data set would bring is not scaled:
it comes from the run's own split (``fitting.data.dataset_variance``).
"""

from __future__ import annotations

import contextlib
import json
import math
from dataclasses import asdict, dataclass
from functools import lru_cache
from pathlib import Path

from curvefit.core.errors import InputError

CALIBRATION_FILE = Path(__file__).with_name("calibration.json")
CALIBRATION_FORMAT = "curvefit.calibration/1"


@dataclass(frozen=True)
class Calibration:
    """A learned correction of the forecast bands.

    Attributes
    ----------
    model_error_scale : float
        Factor on the bootstrap, family-spread and model-error parts of a band (1 leaves
        them as they are).
    drop_scale : float
        Factor on the averaged forecast's change beyond the largest measured size (1
        leaves it; above 1 the curves went on falling more than the families said).
    drop_power : float
        Power on the forecast's relative change F(n)/F(N) beyond the largest measured
        size N (test error only; 1 leaves it).
    tail_slope : float
        Extra change of ln F per unit of ln(n/N) beyond N (test error only; 0 leaves it;
        below 0 the curves went on falling where the families levelled off).
    constant_slope : float
        Change of ln F per unit of ln(n/N) beyond N for a curve whose model has predicted
        as the constant predictor does at every measured size (``FitData.constant``;
        test error only; 0 leaves the families' flat forecast).
    relative_error : float
        A model error that grows with the distance beyond the largest measured size N,
        relative to the forecast's level there: its standard deviation at n is
        ``relative_error`` × |F(N)| × ln(n/N), added to the band in quadrature, unscaled
        (0 leaves the band as it is). Beside κ it moves width from curves whose own
        parts are wide to curves whose own parts are narrow but which still err.
    level : float
        Interval level it was fitted at (it scales the band's width, so it carries over
        to other levels through the normal quantile).
    source : str
        Where it comes from: ``"corpus"`` (learned) or ``"none"`` (no correction).
    curves, datasets : int
        Curves and data sets it was learned on.
    note : str
        One line on how it was learned, for notes and reports.
    """

    model_error_scale: float = 1.0
    drop_scale: float = 1.0
    drop_power: float = 1.0
    tail_slope: float = 0.0
    relative_error: float = 0.0
    constant_slope: float = 0.0
    level: float = 0.9
    source: str = "none"
    curves: int = 0
    datasets: int = 0
    note: str = ""

    @property
    def active(self) -> bool:
        return self.source != "none"

    def describe(self) -> str:
        """The sentence a fit's notes carry ("" for no correction)."""
        if not self.active:
            return ""
        drop = (f", the forecast change beyond the largest size by {self.drop_scale:.2f}"
                if self.drop_scale != 1.0 else "")
        if self.drop_power != 1.0 or self.tail_slope != 0.0:
            drop += (f", the test-error forecast beyond the largest size N corrected to "
                     f"F(N)·(F(n)/F(N))^{self.drop_power:.2f}·(n/N)^{self.tail_slope:+.3f}")
        if self.constant_slope != 0.0:
            drop += (f", a model that has predicted as a constant does at every measured size "
                     f"forecast as F(N)·(n/N)^{self.constant_slope:+.2f}")
        if self.relative_error > 0:
            drop += (f", and a model error of {self.relative_error:.3f} × F(N) per unit of "
                     "ln(n/N) added to the band")
        return (f"forecasts beyond the measured sizes use a correction learned on {self.curves} "
                f"curves of {self.datasets} data sets (the model-error parts of the band "
                f"scaled by {self.model_error_scale:.2f}{drop}; scripts/calibrate_forecasts.py)")

    def to_dict(self) -> dict:
        return {"format": CALIBRATION_FORMAT, **asdict(self)}

    @classmethod
    def from_dict(cls, doc: dict) -> "Calibration":
        """Read a calibration written by :meth:`to_dict` (unknown keys are ignored).

        Examples
        --------
        >>> Calibration.from_dict({"model_error_scale": 0.5, "source": "corpus"}).active
        True
        """
        fields = {k: doc[k] for k in cls.__dataclass_fields__ if k in doc}
        cal = cls(**fields)
        for name in ("model_error_scale", "drop_scale", "drop_power"):
            value = getattr(cal, name)
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise InputError(f"calibration {name} must be > 0, got {value!r}")
        for name in ("tail_slope", "constant_slope"):
            value = getattr(cal, name)
            if not (isinstance(value, (int, float)) and math.isfinite(value)):
                raise InputError(f"calibration {name} must be a finite number, got {value!r}")
        value = cal.relative_error
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value >= 0):
            raise InputError(f"calibration relative_error must be >= 0, got {value!r}")
        return cal


NO_CALIBRATION = Calibration()


@lru_cache(maxsize=1)
def packaged_calibration() -> Calibration:
    """The calibration shipped in the package (no correction when the file is absent)."""
    if not CALIBRATION_FILE.exists():
        return NO_CALIBRATION
    return Calibration.from_dict(json.loads(CALIBRATION_FILE.read_text()))


_override: list = []


@contextlib.contextmanager
def use_calibration(calibration):
    """Fits made inside the block use ``calibration`` by default (a leave-one-out
    evaluation swaps in the factor fitted without the data set it scores).

    Examples
    --------
    >>> with use_calibration({"model_error_scale": 0.7, "source": "corpus"}):
    ...     resolve_calibration("auto").model_error_scale
    0.7
    >>> resolve_calibration("none").active
    False
    """
    _override.append(resolve_calibration(calibration))
    try:
        yield _override[-1]
    finally:
        _override.pop()


def resolve_calibration(calibration) -> Calibration:
    """``"auto"`` (the packaged one, or the one set by :func:`use_calibration`),
    ``"none"``/None (no correction), a :class:`Calibration` or its dict."""
    if isinstance(calibration, Calibration):
        return calibration
    if isinstance(calibration, dict):
        return Calibration.from_dict(calibration)
    if calibration is None or calibration == "none":
        return NO_CALIBRATION
    if calibration == "auto":
        return _override[-1] if _override else packaged_calibration()
    raise InputError(f"calibration must be 'auto', 'none' or a Calibration, got {calibration!r}")
