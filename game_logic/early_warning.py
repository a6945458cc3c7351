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


TIE_DECIMALS = 9  # indicator values are rounded to 1e-9 before ranking: equal in exact
# arithmetic means equal here, so Kendall's tau does not break ties made by rounding noise.


def lag1_autocorrelation(values: Sequence[float]) -> float:
    """Pearson correlation of x_t with x_{t-1}; NaN when undefined."""
    x = np.asarray(values, dtype=float)
    if x.size < 3:
        return float("nan")
    return float(_lag1_rows(x[None, :])[0])


def _lag1_rows(windows: NDArray[np.float64]) -> NDArray[np.float64]:
    """Lag-1 autocorrelation along the last axis of an array of windows."""
    a = windows[..., :-1] - windows[..., :-1].mean(axis=-1, keepdims=True)
    b = windows[..., 1:] - windows[..., 1:].mean(axis=-1, keepdims=True)
    denom = np.sqrt((a * a).sum(axis=-1) * (b * b).sum(axis=-1))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(denom > 0, (a * b).sum(axis=-1) / np.where(denom > 0, denom, 1.0), np.nan)


def _check_window(window: int, minimum: int) -> None:
    if isinstance(window, bool) or not isinstance(window, (int, np.integer)) or window < minimum:
        raise ValueError(f"window must be a whole number of rounds, at least {minimum}; got {window!r}")


def _rolling(x: NDArray[np.float64], window: int, statistic) -> NDArray[np.float64]:
    """``statistic`` over each trailing window along the last axis; NaN until the window is full."""
    out = np.full(x.shape, np.nan)
    if x.shape[-1] >= window:
        out[..., window - 1 :] = statistic(sliding_window_view(x, window, axis=-1))
    return out


def rolling_variance(values: Sequence[float], window: int) -> NDArray[np.float64]:
    """Sample variance (ddof=1) over each trailing window; NaN until the window is full.

    ``values`` may be one path or a 2-D array of paths of equal length (one per row).
    """
    _check_window(window, 2)
    return _rolling(np.asarray(values, dtype=float), window, lambda w: w.var(axis=-1, ddof=1))


def rolling_lag1_autocorrelation(values: Sequence[float], window: int) -> NDArray[np.float64]:
    """Lag-1 autocorrelation over each trailing window; NaN until the window is full (rows as above)."""
    _check_window(window, 3)
    return _rolling(np.asarray(values, dtype=float), window, _lag1_rows)


def kendall_trends(indicators: NDArray[np.float64], decimals: int = TIE_DECIMALS) -> NDArray[np.float64]:
    """Kendall's tau-b of each row against time, NaNs dropped, ties honoured after rounding.

    Values are rounded to ``decimals`` places first, so values equal up to rounding
    noise count as ties. Time has no ties, so tau-b = S / sqrt(n0 (n0 - n_ties))
    (Kendall 1945), S the concordant minus discordant pairs. NaN for a row with
    fewer than three values or no spread.
    """
    y = np.round(np.atleast_2d(np.asarray(indicators, dtype=float)), decimals)
    valid = ~np.isnan(y)
    later = np.triu(np.ones((y.shape[1], y.shape[1]), dtype=bool), k=1)
    pairs = valid[:, :, None] & valid[:, None, :] & later
    with np.errstate(invalid="ignore"):
        signs = np.sign(y[:, None, :] - y[:, :, None])
    signs = np.where(pairs, signs, 0.0)
    score = signs.sum(axis=(1, 2))
    n0 = pairs.sum(axis=(1, 2))
    untied = (pairs & (signs != 0)).sum(axis=(1, 2))
    usable = (valid.sum(axis=1) >= 3) & (untied > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(usable, score / np.sqrt(n0 * untied.astype(float)), np.nan)


def kendall_trend(indicator: Sequence[float], decimals: int = TIE_DECIMALS) -> float:
    """Kendall's tau of an indicator against time (NaNs dropped, ties honoured); NaN if too short."""
    return float(kendall_trends(np.asarray(indicator, dtype=float)[None, :], decimals)[0])


def detrended(values: Sequence[float], bandwidth: float) -> NDArray[np.float64]:
    """Residuals after Gaussian-kernel smoothing (Dakos et al. 2012, sec. "Detrending").

    ``bandwidth`` is the kernel's standard deviation in rounds; the edges are
    padded with the nearest value so a short path keeps its ends. ``values``
    may be one path or a 2-D array of paths (one per row).
    """
    if not bandwidth > 0:
        raise ValueError(f"bandwidth must be a positive number of rounds; got {bandwidth!r}")
    x = np.asarray(values, dtype=float)
    return x - ndimage.gaussian_filter1d(x, sigma=bandwidth, mode="nearest", axis=-1)


def default_window(length: int) -> int:
    """Trailing window for a path of ``length`` rounds: half the path, at least 3."""
    return max(3, length // 2)


def default_bandwidth(length: int) -> float:
    """Kernel bandwidth for a path of ``length`` rounds: a tenth of it, at least 2 rounds."""
    return max(2.0, length / 10)


def indicator_trend_rows(
    paths: NDArray[np.float64], *, window: int | None = None, bandwidth: float | None = None
) -> tuple[NDArray[np.float64], NDArray[np.float64], int, float]:
    """Kendall taus of rolling variance and lag-1 autocorrelation of detrended paths.

    ``paths`` holds one path per row, all of the same length. Returns the
    variance taus, the AR(1) taus, the window and the bandwidth used. This is
    the one implementation behind the health signal and the analysis.
    """
    x = np.atleast_2d(np.asarray(paths, dtype=float))
    length = x.shape[1]
    window = default_window(length) if window is None else window
    bandwidth = default_bandwidth(length) if bandwidth is None else bandwidth
    residuals = detrended(x, bandwidth)
    variance = kendall_trends(rolling_variance(residuals, window))
    ar1 = kendall_trends(rolling_lag1_autocorrelation(residuals, window))
    return variance, ar1, int(window), float(bandwidth)


def indicator_trends(
    values: Sequence[float], *, window: int | None = None, bandwidth: float | None = None
) -> IndicatorTrends:
    """Trend of rolling variance and lag-1 autocorrelation of the detrended path.

    Defaults follow the usual recipe for short records: a trailing window of
    half the path and a kernel bandwidth of a tenth of it, at least 2 rounds
    (Dakos et al. 2012 use windows of half the record length).
    """
    x = np.asarray(values, dtype=float)
    variance, ar1, window, bandwidth = indicator_trend_rows(x[None, :], window=window, bandwidth=bandwidth)
    return IndicatorTrends(variance_tau=float(variance[0]), ar1_tau=float(ar1[0]), window=window,
                           bandwidth=bandwidth)


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
