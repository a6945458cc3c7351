"""Early-warning indicators on each group's stock path, reusing ``game_logic.early_warning``.

For a group that crossed, only the path before its first crossing is used
(the indicators are meant to announce a transition, not to describe it). The
rolling window is half the path, at least three rounds (Dakos et al. 2012,
PLOS ONE 7:e41010, use half the series). Kendall's tau of each indicator
against time measures its trend.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ebbtide.game_logic.early_warning import kendall_trend, rolling_lag1_autocorrelation, rolling_variance

from .group_outcomes import KEYS

MIN_PATH = 6


def indicator_trends(rounds: pd.DataFrame) -> pd.DataFrame:
    """Per group-block: path length used, window, and Kendall's tau of variance and lag-1 AC."""
    rows = []
    for (session, group, block), path in rounds.sort_values(KEYS + ["round"]).groupby(KEYS, sort=False):
        crossed = path["crossed"].to_numpy()
        stocks = path["stock_before"].to_numpy(dtype=float)
        if crossed.any():
            # Stocks seen up to and including the round in which the flip happened.
            stocks = stocks[: int(np.argmax(crossed)) + 1]
        else:
            stocks = np.append(stocks, float(path["stock_after"].iloc[-1]))
        window = max(3, stocks.size // 2)
        usable = stocks.size >= MIN_PATH
        rows.append({
            "session_id": session, "group_id": group, "block": block,
            "treatment": path["treatment"].iloc[0], "crossed": bool(crossed.any()),
            "path_length": stocks.size, "window": window,
            "tau_variance": kendall_trend(rolling_variance(stocks, window)) if usable else np.nan,
            "tau_lag1_autocorrelation": (
                kendall_trend(rolling_lag1_autocorrelation(stocks, window)) if usable else np.nan
            ),
        })
    return pd.DataFrame(rows)


def indicator_summary(trends: pd.DataFrame) -> pd.DataFrame:
    """Mean and median tau per treatment and by whether the group crossed."""
    summary = trends.groupby(["treatment", "crossed"]).agg(
        groups=("path_length", "size"),
        groups_with_indicator=("tau_variance", "count"),
        tau_variance_mean=("tau_variance", "mean"),
        tau_variance_median=("tau_variance", "median"),
        tau_lag1_autocorrelation_mean=("tau_lag1_autocorrelation", "mean"),
        tau_lag1_autocorrelation_median=("tau_lag1_autocorrelation", "median"),
    )
    return summary.reset_index()
