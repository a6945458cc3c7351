"""Early-warning indicators of a stock path, and the health signal built on them.

A stock near a tipping point recovers slowly from each knock ("critical slowing
down"): the lag-1 autocorrelation and the variance of its fluctuations rise,
and Kendall's tau of each indicator against time measures that rise
(Scheffer et al. 2009, Nature 461:53; Dakos et al. 2012, PLOS ONE 7:e41010).
The ``signal`` treatment shows a band and a trend built from these, never a
number that would reveal the threshold. The analysis reuses the indicators.

The health signal reads the group's own stock path and the capacity, and
nothing else: it never sees the threshold, so no band boundary can sit at it.
Its choices and their limits are written up in ``docs/treatments.md``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from numpy.typing import NDArray
from scipy import ndimage, stats

BANDS = ("calm", "watch", "alarm")
TRENDS = ("falling", "steady", "rising")

# Weights and cut points of the danger score (see docs/treatments.md). They are
# design choices for a teaching game, tuned on simulated paths, not estimates.
LEVEL_WEIGHT = 0.6
PACE_WEIGHT = 0.6
SLOWING_WEIGHT = 0.3
LEVEL_SAFE_SHARE = 0.7  # at or above this share of capacity the level adds nothing
PACE_HORIZON = 4.0  # rounds: emptying this fast or faster gives the full pace term
WATCH_AT = 0.3
ALARM_AT = 0.6
STEADY_SHARE = 0.02  # |slope| below 2 % of capacity per round counts as steady
TREND_POINTS = 4  # the trend and pace read the last few rounds only
SLOWING_MIN_POINTS = 10  # fewer rounds than this: too short for variance/AR(1) trends


@dataclass(frozen=True)
class HealthSignal:
    band: str
    trend: str


@dataclass(frozen=True)
class IndicatorTrends:
    """Kendall's tau of the rolling indicators of a detrended path (NaN if undefined)."""

    variance_tau: float
    ar1_tau: float
    window: int
    bandwidth: float


@dataclass(frozen=True)
class HealthReading:
    """The health signal with the parts it was built from (for the console, not phones).

    ``level``, ``pace`` and ``slowing`` are each in [0, 1]; ``score`` is their
    weighted sum; ``reasons`` names the parts that pushed the band up.
    """

    band: str
    trend: str
    score: float
    level: float
    pace: float
    slowing: float
    reasons: tuple[str, ...]

    @property
    def signal(self) -> HealthSignal:
        return HealthSignal(self.band, self.trend)


def lag1_autocorrelation(values: Sequence[float]) -> float:
    """Pearson correlation of x_t with x_{t-1}; NaN when undefined."""
    x = np.asarray(values, dtype=float)
    if x.size < 3:
        return float("nan")
    a, b = x[:-1] - x[:-1].mean(), x[1:] - x[1:].mean()
    denom = np.sqrt((a * a).sum() * (b * b).sum())
    return float((a * b).sum() / denom) if denom > 0 else float("nan")


def _check_window(window: int, minimum: int) -> None:
    if isinstance(window, bool) or not isinstance(window, (int, np.integer)) or window < minimum:
        raise ValueError(f"window must be a whole number of rounds, at least {minimum}; got {window!r}")


def rolling_variance(values: Sequence[float], window: int) -> NDArray[np.float64]:
    """Sample variance (ddof=1) over each trailing window; NaN until the window is full."""
    _check_window(window, 2)
    x = np.asarray(values, dtype=float)
    out = np.full(x.size, np.nan)
    if x.size >= window:
        out[window - 1 :] = sliding_window_view(x, window).var(axis=1, ddof=1)
    return out


def rolling_lag1_autocorrelation(values: Sequence[float], window: int) -> NDArray[np.float64]:
    """Lag-1 autocorrelation over each trailing window; NaN until the window is full."""
    _check_window(window, 3)
    x = np.asarray(values, dtype=float)
    out = np.full(x.size, np.nan)
    if x.size >= window:
        out[window - 1 :] = [lag1_autocorrelation(w) for w in sliding_window_view(x, window)]
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


def detrended(values: Sequence[float], bandwidth: float) -> NDArray[np.float64]:
    """Residuals after Gaussian-kernel smoothing (Dakos et al. 2012, sec. "Detrending").

    ``bandwidth`` is the kernel's standard deviation in rounds; the edges are
    padded with the nearest value so a short path keeps its ends.
    """
    if not bandwidth > 0:
        raise ValueError(f"bandwidth must be a positive number of rounds; got {bandwidth!r}")
    x = np.asarray(values, dtype=float)
    return x - ndimage.gaussian_filter1d(x, sigma=bandwidth, mode="nearest")


def indicator_trends(
    values: Sequence[float], *, window: int | None = None, bandwidth: float | None = None
) -> IndicatorTrends:
    """Trend of rolling variance and lag-1 autocorrelation of the detrended path.

    Defaults follow the usual recipe for short records: a trailing window of
    half the path and a kernel bandwidth of a tenth of it, at least 2 rounds
    (Dakos et al. 2012 use windows of half the record length).
    """
    x = np.asarray(values, dtype=float)
    window = max(3, x.size // 2) if window is None else window
    bandwidth = max(2.0, x.size / 10) if bandwidth is None else bandwidth
    residuals = detrended(x, bandwidth)
    return IndicatorTrends(
        variance_tau=kendall_trend(rolling_variance(residuals, window)),
        ar1_tau=kendall_trend(rolling_lag1_autocorrelation(residuals, window)),
        window=int(window),
        bandwidth=float(bandwidth),
    )


def _recent_slope(path: NDArray[np.float64]) -> float:
    """Theil-Sen slope of the last few rounds (robust to one odd round)."""
    recent = path[-TREND_POINTS:]
    if recent.size == 2:
        return float(recent[1] - recent[0])
    return float(stats.theilslopes(recent).slope)


def health_reading(stock_path: Sequence[int], capacity: int) -> HealthReading:
    """Band, trend and their parts from the group's own stock path.

    Parameters
    ----------
    stock_path : stock at the start of each round of the block so far, in
        units, the current one last (``GroupState.stock_path``).
    capacity : the stock's capacity K, in units.

    The danger score adds three parts, each in [0, 1]:

    - level: how far the stock is below ``LEVEL_SAFE_SHARE`` of capacity;
    - pace: how soon the recent decline would empty the stock, as
      ``PACE_HORIZON / rounds_to_empty``, capped at 1;
    - slowing: critical slowing down, the mean of the positive Kendall taus of
      rolling variance and AR(1) of the detrended path, once the path has
      ``SLOWING_MIN_POINTS`` rounds.

    ``calm`` below ``WATCH_AT``, ``alarm`` from ``ALARM_AT``, ``watch`` between.
    The trend is the direction of the stock over the last rounds, ``steady``
    within ``STEADY_SHARE`` of capacity per round.
    """
    if isinstance(capacity, bool) or not capacity > 0:
        raise ValueError(f"capacity must be a positive number of units; got {capacity!r}")
    path = np.asarray(stock_path, dtype=float)
    if path.ndim != 1 or np.any(path < 0) or not np.all(np.isfinite(path)):
        raise ValueError("stock_path must be a sequence of stocks, each a number of units >= 0")
    if path.size == 0:  # nothing seen yet: nothing to warn about
        return HealthReading("calm", "steady", 0.0, 0.0, 0.0, 0.0, ())

    current = path[-1]
    level = float(np.clip((LEVEL_SAFE_SHARE - current / capacity) / LEVEL_SAFE_SHARE, 0, 1))
    slope = _recent_slope(path) if path.size >= 2 else 0.0
    if current <= 0:
        pace = 1.0 if slope < 0 else 0.0
    elif slope < 0:
        pace = float(min(1.0, PACE_HORIZON * -slope / current))
    else:
        pace = 0.0
    slowing = 0.0
    if path.size >= SLOWING_MIN_POINTS and np.ptp(path) > 0:
        trends = indicator_trends(path)
        taus = np.nan_to_num([trends.variance_tau, trends.ar1_tau], nan=0.0)
        slowing = float(np.clip(taus, 0, 1).mean())

    score = LEVEL_WEIGHT * level + PACE_WEIGHT * pace + SLOWING_WEIGHT * slowing
    band = "alarm" if score >= ALARM_AT else "watch" if score >= WATCH_AT else "calm"
    steady = abs(slope) < STEADY_SHARE * capacity
    trend = "steady" if steady else "falling" if slope < 0 else "rising"
    parts = {"low_stock": LEVEL_WEIGHT * level, "falling_fast": PACE_WEIGHT * pace,
             "slow_recovery": SLOWING_WEIGHT * slowing}
    # A part is a reason when it alone would carry a fifth of the way to alarm.
    reasons = tuple(name for name, value in parts.items() if value >= ALARM_AT / 5) if band != "calm" else ()
    return HealthReading(band, trend, float(score), level, pace, slowing, reasons)


def health_signal(stock_path: Sequence[int], capacity: int) -> HealthSignal:
    """Band and trend from the group's own stock path (first round: calm/steady).

    Coarse on purpose; see ``health_reading`` for how they are built.
    """
    return health_reading(stock_path, capacity).signal
