"""Early-warning indicators of a stock path, and the health signal built on them.

A stock near a tipping point recovers slowly from each knock ("critical slowing
down"): the lag-1 autocorrelation and the variance of its fluctuations rise,
and Kendall's tau of each indicator against time measures that rise
(Scheffer et al. 2009, Nature 461:53; Dakos et al. 2012, PLOS ONE 7:e41010).
The ``signal`` treatment shows a band and a trend built from these, never a
number that would reveal the threshold. The analysis reuses the indicators.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import stats

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


def rolling_variance(values: Sequence[float], window: int) -> NDArray[np.float64]:
    """Sample variance (ddof=1) over each trailing window; NaN until the window is full."""
    x = np.asarray(values, dtype=float)
    out = np.full(x.size, np.nan)
    for end in range(window, x.size + 1):
        out[end - 1] = np.var(x[end - window : end], ddof=1)
    return out


def rolling_lag1_autocorrelation(values: Sequence[float], window: int) -> NDArray[np.float64]:
    """Lag-1 autocorrelation over each trailing window; NaN until the window is full."""
    x = np.asarray(values, dtype=float)
    out = np.full(x.size, np.nan)
    for end in range(window, x.size + 1):
        out[end - 1] = lag1_autocorrelation(x[end - window : end])
    return out


def kendall_trend(indicator: Sequence[float]) -> float:
    """Kendall's tau of an indicator against time (NaNs dropped); NaN if too short."""
    y = np.asarray(indicator, dtype=float)
    t = np.arange(y.size)
    keep = ~np.isnan(y)
    if keep.sum() < 3 or np.ptp(y[keep]) == 0:
        return float("nan")
    tau = stats.kendalltau(t[keep], y[keep]).statistic
    return float(tau)


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
