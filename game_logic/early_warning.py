"""Early-warning indicators of a stock path, and the health signal built on them.

A stock near a tipping point recovers slowly from each knock ("critical slowing
down"): the lag-1 autocorrelation and the variance of its fluctuations rise
(Scheffer et al. 2009, Nature 461:53; Dakos et al. 2012, PLOS ONE 7:e41010).
The ``signal`` treatment shows a band and a trend built from these, never a
number that would reveal the threshold.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

BANDS = ("calm", "watch", "alarm")
TRENDS = ("falling", "steady", "rising")


@dataclass(frozen=True)
class HealthSignal:
    band: str
    trend: str


def lag1_autocorrelation(values: Sequence[float]) -> float:
    """Pearson correlation of x_t with x_{t-1}; NaN when undefined."""
    x = np.asarray(values, dtype=float)
    if x.size < 3:
        return float("nan")
    a, b = x[:-1] - x[:-1].mean(), x[1:] - x[1:].mean()
    denom = np.sqrt((a * a).sum() * (b * b).sum())
    return float((a * b).sum() / denom) if denom > 0 else float("nan")


def health_signal(stock_path: Sequence[int], capacity: int) -> HealthSignal:
    """Band and trend from the group's own stock path (first rounds: calm/steady).

    The band combines where the stock stands relative to capacity with how much
    it has been falling; the trend is the sign of the last change. Both are
    coarse on purpose.
    """
    path = np.asarray(stock_path, dtype=float)
    if path.size < 2:
        return HealthSignal("calm", "steady")
    change = path[-1] - path[-2]
    trend = "falling" if change < 0 else "rising" if change > 0 else "steady"
    share = path[-1] / capacity
    recent = path[-4:]
    drop = (recent.max() - recent[-1]) / capacity
    score = (1 - share) + 2 * drop
    band = "alarm" if score > 0.9 else "watch" if score > 0.55 else "calm"
    return HealthSignal(band, trend)
