"""The capacity result: `CapacityEstimate`, and the lack-of-fit widening of its interval.

Shared by the probe (``capacity.probe``) and the gap model (``capacity.gap_model``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from curvefit.core.errors import InputError
from curvefit.core.estimate import Estimate
from curvefit.core.formatting import format_interval
from curvefit.core.jsonio import jsonable

STAT_NOTE = "Estimates are statistical, not guarantees."


@dataclass(frozen=True)
class CapacityEstimate:
    """An effective capacity in VC units with its interval and the data behind it.

    Attributes
    ----------
    vc_dim : float
        Point estimate of h; a lower bound when ``above_range`` is True.
    low, high : float
        Interval at ``level`` (``high`` is inf when only a lower bound is known).
    level : float
        Interval level, e.g. 0.9.
    method : str
        ``"probe"`` (max-deviation experiment) or ``"gap"`` (VC-shaped gap model).
    above_range : bool
        True when the capacity exceeds what the design could resolve.
    design : pandas.DataFrame
        Probe: ``n, tau, xi_mean, xi_sem, repeats, xi_fit``; gap model:
        ``size, gap_mean, gap_sem, repeats, gap_fit, gap_power``.
    scale : float or None
        The gap model's scale s (None for the probe).
    exponent : Estimate or None
        The gap power-law exponent b with its interval (gap model only).
    regime : str
        Plain words for b (gap model), else "".
    notes : list of str
        Caveats to show with the figure.
    message : str
        One sentence answer.
    status : str
        ``"ok"``; ``"above_range"`` (only a lower bound); ``"not_identifiable"`` (the
        sizes cannot pin the capacity: no figure, the message says which sizes would);
        ``"no_interval"`` (a figure without an interval, e.g. one repeat per size).
    """

    vc_dim: float
    low: float
    high: float
    level: float
    method: str
    above_range: bool
    design: pd.DataFrame = field(repr=False)
    scale: float | None = None
    exponent: Estimate | None = None
    regime: str = ""
    notes: list = field(default_factory=list)
    message: str = ""
    extra: dict = field(default_factory=dict, repr=False)
    status: str = "ok"

    def to_dict(self) -> dict:
        """Plain JSON-ready dict (inf and NaN become None)."""
        design = self.design.astype(object).where(self.design.notna(), None)
        return jsonable({
            "format": "curvefit.capacity/1",
            "vc_dim": self.vc_dim, "low": self.low, "high": self.high, "level": self.level,
            "method": self.method, "above_range": bool(self.above_range), "status": self.status,
            "scale": self.scale,
            "exponent": self.exponent.to_dict() if self.exponent is not None else None,
            "regime": self.regime, "notes": list(self.notes), "message": self.message,
            "design": design.to_dict(orient="records"), "extra": self.extra,
        })

    @classmethod
    def from_dict(cls, d: dict) -> "CapacityEstimate":
        """Rebuild from :meth:`to_dict` output (None in low/high → NaN/inf)."""
        if not isinstance(d, dict) or "vc_dim" not in d or "method" not in d:
            raise InputError("not a saved capacity estimate (needs 'vc_dim' and 'method')")

        def num(v, default=math.nan):
            return default if v is None else float(v)

        exp = d.get("exponent")
        exponent = None
        if isinstance(exp, dict):
            exponent = Estimate(num(exp.get("estimate")), num(exp.get("low")),
                                num(exp.get("high")), num(exp.get("level"), 0.9))
        above = bool(d.get("above_range", False))
        return cls(
            vc_dim=num(d["vc_dim"]), low=num(d.get("low")),
            high=num(d.get("high"), math.inf if above else math.nan),
            level=num(d.get("level"), 0.9), method=str(d["method"]), above_range=above,
            design=pd.DataFrame(d.get("design") or []),
            scale=None if d.get("scale") is None else float(d["scale"]),
            exponent=exponent, regime=str(d.get("regime") or ""),
            notes=list(d.get("notes") or []), message=str(d.get("message") or ""),
            extra=dict(d.get("extra") or {}),
            status=str(d.get("status") or ("above_range" if above else "ok")),
        )

    @property
    def interval(self) -> Estimate:
        """The estimate as an :class:`~curvefit.core.estimate.Estimate`."""
        return Estimate(self.vc_dim, self.low, self.high, self.level)

    def _repr_html_(self) -> str:
        """The capacity with its interval and note, as a table (shown by Jupyter)."""
        from curvefit.report.notebook import capacity_html

        return capacity_html(self)

    def plot(self, ax=None):
        """Draw the probe's ξ(n) with Φ(n/h), or the gap model's mean gaps with the fitted
        c(ν)·h/n; returns the matplotlib Axes (``ax`` when given)."""
        from curvefit.report.notebook import plot_capacity

        return plot_capacity(self, ax=ax)



def lack_of_fit(means, sems, fitted, n_params: int = 1) -> float:
    """Reduced chi-square χ²/dof of per-point means against a fitted curve.

    Points with a zero or undefined standard error (e.g. ξ = 1 in every repeat) are
    left out, and so are standard errors below 1e-9 of the values' scale: identical
    repeats give a rounding-level standard error (~1e-17) that is not a measure of
    noise. NaN when fewer than ``n_params + 1`` points remain.

    References
    ----------
    .. [1] R. T. Birge, "The calculation of errors by the method of least squares",
       Physical Review 40, 207–227, 1932 (the ratio used to scale errors when the
       scatter exceeds the stated uncertainties).

    Examples
    --------
    >>> lack_of_fit([1.0, 2.0, 3.0], [0.5, 0.5, 0.5], [1.0, 2.0, 4.0])
    2.0
    """
    m = np.asarray(means, float)
    e = np.asarray(sems, float)
    f = np.asarray(fitted, float)
    with np.errstate(invalid="ignore"):
        scale = np.maximum(np.maximum(np.abs(m), np.abs(f)), 1e-300)
        keep = np.isfinite(e) & np.isfinite(m) & np.isfinite(f) & (e > 1e-9 * scale)
    dof = int(keep.sum()) - n_params
    if dof < 1:
        return math.nan
    return float(np.sum(((m[keep] - f[keep]) / e[keep]) ** 2) / dof)


def widen_interval(estimate: float, low: float, high: float, ratio: float,
                   bounds: tuple[float, float] | None = None) -> tuple[float, float]:
    """Scale the interval's half-widths on the log scale by sqrt(ratio) when ratio > 1.

    With ``bounds`` (the range h was searched in) the result is clipped to it, and an
    upper end that reaches the top of the range becomes infinite: the data cannot
    bound h from above there, and a figure beyond the search range would be invented.
    The widening is done on logarithms, so a huge ratio gives a wide interval (0 or
    infinite ends), never an overflow.

    Examples
    --------
    >>> [round(v, 6) for v in widen_interval(10.0, 5.0, 20.0, ratio=4.0)]
    [2.5, 40.0]
    >>> widen_interval(10.0, 9.0, 11.0, ratio=1e300)
    (0.0, inf)
    """
    if (math.isfinite(ratio) and ratio > 1 and math.isfinite(estimate) and estimate > 0
            and math.isfinite(low) and math.isfinite(high) and low > 0 and high > 0):
        f = math.sqrt(ratio)
        log_low = math.log(estimate) + f * math.log(min(low / estimate, 1.0))
        log_high = math.log(estimate) + f * math.log(max(high / estimate, 1.0))
        low = math.exp(log_low) if log_low > -700 else 0.0
        high = math.exp(log_high) if log_high < 700 else math.inf
    if bounds is not None and math.isfinite(low) and math.isfinite(high):
        low = max(low, bounds[0])
        high = math.inf if high >= bounds[1] * (1 - 1e-9) else high
    return low, high



def interval_text(low: float, high: float, level: float) -> str:
    """The capacity interval in words: ``90% interval 4.1–6.2``, ``90% interval 12.5 to
    no upper limit``, or ``no interval``.

    Examples
    --------
    >>> interval_text(4.12, 6.2, 0.9), interval_text(250.0, math.inf, 0.9)
    ('90% interval 4.12–6.2', '90% interval 250 to no upper limit')
    >>> interval_text(math.nan, math.nan, 0.9)
    'no interval'
    """
    if math.isfinite(low) and (math.isfinite(high) or high == math.inf):
        return format_interval(low, high, level, kind="capacity")
    return "no interval"
