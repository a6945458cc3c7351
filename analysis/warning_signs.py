"""Early-warning indicators on each group's stock path, with the health signal's definitions.

The indicators are ``game_logic.early_warning.indicator_trend_rows``, the one
implementation the phones' health signal uses: the path is detrended with a
Gaussian kernel (bandwidth a tenth of the path, at least 2 rounds), the rolling
window is half the path (at least 3; Dakos et al. 2012, PLOS ONE 7:e41010), and
indicator values are rounded to 1e-9 before Kendall's tau ranks them, so ties
in exact arithmetic stay ties.

For a group that crossed, only the path up to its first crossing is used (the
indicators are meant to announce a transition, not to describe it). A falling
stock alone can make indicators trend, so each crossing path is set against a
**control**: the paths of groups in the same block and treatment that never
crossed, cut to the median length of the crossing paths. If the crossing
paths' taus are no higher than the controls', the trend says no more than the
decline.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from ebbtide.game_logic.early_warning import TIE_DECIMALS, indicator_trend_rows

from .group_outcomes import KEYS

MIN_PATH = 6
DEFINITIONS = (
    f"Indicators on paths detrended with a Gaussian kernel (bandwidth max(2, length/10) rounds), "
    f"rolling window max(3, length/2), values rounded to 1e-{TIE_DECIMALS} before ranking (ties honoured). "
    "Crossing paths end at the first crossing; controls are paths of groups that never crossed, "
    "cut to the median length of the crossing paths in the same block and treatment."
)


def _paths(rounds: pd.DataFrame) -> pd.DataFrame:
    """Per group-block: its stock path (starts of rounds, plus the last stock) and crossing."""
    ordered = rounds.sort_values(KEYS + ["round"])
    firsts = ~ordered.duplicated(KEYS, keep="first").to_numpy()
    starts = np.flatnonzero(firsts)
    crossed_all = ordered["crossed"].to_numpy(dtype=bool)
    stocks_all = ordered["stock_before"].to_numpy(dtype=float)
    last_after = ordered["stock_after"].to_numpy(dtype=float)
    ends = np.append(starts[1:], len(ordered))
    paths, crossed = [], []
    for start, end in zip(starts, ends, strict=True):
        flips = crossed_all[start:end]
        if flips.any():
            # Stocks seen up to and including the round in which the flip happened.
            paths.append(stocks_all[start : start + int(np.argmax(flips)) + 1])
        else:
            paths.append(np.append(stocks_all[start:end], last_after[end - 1]))
        crossed.append(bool(flips.any()))
    table = ordered.iloc[starts][KEYS + ["treatment"]].reset_index(drop=True)
    table["crossed"] = crossed
    table["stocks"] = paths
    return table


def _taus(paths: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Variance and AR(1) taus of many paths, batched by length (NaN when shorter than MIN_PATH)."""
    variance, ar1 = np.full(len(paths), np.nan), np.full(len(paths), np.nan)
    lengths = np.array([p.size for p in paths])
    for length in np.unique(lengths):
        if length < MIN_PATH:
            continue
        rows = np.flatnonzero(lengths == length)
        v, a, _, _ = indicator_trend_rows(np.stack([paths[i] for i in rows]))
        variance[rows], ar1[rows] = v, a
    return variance, ar1


def indicator_trends(rounds: pd.DataFrame) -> pd.DataFrame:
    """Per group-block: role (crossing or control), path length, window and both taus."""
    table = _paths(rounds)
    table["role"] = np.where(table["crossed"], "crossing", "control")
    crossing_lengths = table[table["crossed"]].assign(n=table["stocks"].map(len))
    target = crossing_lengths.groupby(["block", "treatment"])["n"].median()
    wanted = pd.MultiIndex.from_frame(table[["block", "treatment"]]).map(target.to_dict().get)
    table["stocks"] = [
        s if c or t is None or np.isnan(t) else s[: int(t)]
        for s, c, t in zip(table["stocks"], table["crossed"], wanted, strict=True)
    ]
    table["path_length"] = table["stocks"].map(len)
    table["window"] = table["path_length"].map(lambda n: max(3, n // 2))
    table["tau_variance"], table["tau_lag1_autocorrelation"] = _taus(list(table["stocks"]))
    return table.drop(columns=["stocks"])


def indicator_summary(trends: pd.DataFrame) -> pd.DataFrame:
    """Per block and treatment: mean taus of crossing paths and controls, and a Mann–Whitney test.

    ``p_variance`` compares the crossing paths' variance taus with the
    controls' (two-sided, scipy); NaN when either side has fewer than 2 paths.
    """
    rows = []
    for (block, treatment), cell in trends.groupby(["block", "treatment"], sort=True):
        crossing = cell[cell["crossed"]]["tau_variance"].dropna()
        control = cell[~cell["crossed"]]["tau_variance"].dropna()
        p = (float(stats.mannwhitneyu(crossing, control, alternative="two-sided").pvalue)
             if len(crossing) >= 2 and len(control) >= 2 else float("nan"))
        rows.append({
            "block": block, "treatment": treatment,
            "crossing_paths": len(crossing), "control_paths": len(control),
            "tau_variance_crossing": crossing.mean() if len(crossing) else float("nan"),
            "tau_variance_control": control.mean() if len(control) else float("nan"),
            "tau_lag1_crossing": cell[cell["crossed"]]["tau_lag1_autocorrelation"].mean(),
            "tau_lag1_control": cell[~cell["crossed"]]["tau_lag1_autocorrelation"].mean(),
            "p_variance": p,
        })
    return pd.DataFrame(rows)
