"""Small result objects shared across modules."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass


@dataclass(frozen=True)
class Estimate:
    """A point estimate with an interval at a stated level (e.g. 0.9 for 90%).

    ``low``/``high`` may be NaN when no interval could be computed.
    """

    estimate: float
    low: float = math.nan
    high: float = math.nan
    level: float = 0.9

    def overlaps(self, other: "Estimate") -> bool:
        """True when the two intervals share a point (NaN intervals never clear)."""
        if any(math.isnan(v) for v in (self.low, self.high, other.low, other.high)):
            return True
        return self.low <= other.high and other.low <= self.high

    def to_dict(self) -> dict:
        return asdict(self)

    def __repr__(self) -> str:
        return (f"Estimate({self.estimate:.6g}, {self.level:.0%} interval "
                f"{self.low:.6g}–{self.high:.6g})")
