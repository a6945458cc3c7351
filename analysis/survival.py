"""Survival of the good regime: Kaplan–Meier curves and the log-rank test by treatment.

Each group-block is one subject. Its time is the round in which the resource
first collapsed (an event): the stock flipped to degraded or was exhausted
(``collapsed`` / ``collapse_round`` of the group outcomes), whichever came
first. If it never did, the time is the last round the block ran (censored:
the block ended, by its length or a random stop, before any collapse). Blocks
of the same group are not independent of one another; the log-rank test here
is for between-groups designs or one block at a time, and ``paired_survival``
handles two blocks played by the same groups.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd
from lifelines import KaplanMeierFitter
from lifelines.statistics import multivariate_logrank_test


@dataclass(frozen=True)
class SurvivalResult:
    """Kaplan–Meier tables per stratum and the log-rank test across strata.

    ``curves[stratum]`` has columns time, at_risk, events, survival, ci_low,
    ci_high (Greenwood-based log(-log) interval, lifelines' default).
    ``not_applicable`` gives the reason when there is nothing to estimate or test.
    """

    curves: dict[str, pd.DataFrame]
    logrank_statistic: float
    logrank_df: int
    logrank_p: float
    not_applicable: str | None = None


def survival_times(groups: pd.DataFrame) -> pd.DataFrame:
    """Time (rounds) and event flag of every group-block."""
    event = groups["collapsed"].astype(bool)
    time = groups["collapse_round"].where(event, groups["rounds_played"]).astype(float)
    return pd.DataFrame({"time": time, "event": event, "stratum": groups["treatment"]})


def kaplan_meier(time, event, label: str = "all") -> pd.DataFrame:
    """Kaplan–Meier table of one sample (lifelines), one row per distinct time."""
    fitter = KaplanMeierFitter().fit(time, event_observed=event, label=label)
    table = fitter.event_table
    band = fitter.confidence_interval_survival_function_
    return pd.DataFrame({
        "time": table.index.to_numpy(dtype=float),
        "at_risk": table["at_risk"].to_numpy(),
        "events": table["observed"].to_numpy(),
        "survival": fitter.survival_function_.loc[table.index, label].to_numpy(),
        "ci_low": band.loc[table.index].iloc[:, 0].to_numpy(),
        "ci_high": band.loc[table.index].iloc[:, 1].to_numpy(),
    })


def good_regime_survival(groups: pd.DataFrame, has_threshold: bool) -> SurvivalResult:
    """Kaplan–Meier per treatment and the log-rank test (lifelines) when it applies."""
    nan = float("nan")
    if not has_threshold:
        return SurvivalResult({}, nan, 0, nan, "the design has no threshold, so the stock cannot flip")
    data = survival_times(groups)
    curves = {s: kaplan_meier(d["time"], d["event"], s) for s, d in data.groupby("stratum", sort=True)}
    if not data["event"].any():
        return SurvivalResult(curves, nan, 0, nan,
                              "no group collapsed (no flip, no exhaustion): every time is censored")
    if len(curves) < 2:
        return SurvivalResult(curves, nan, 0, nan, "only one treatment: there is nothing to compare")
    test = multivariate_logrank_test(data["time"], data["stratum"], data["event"])
    statistic, df, p = float(test.test_statistic), int(test.degrees_of_freedom), float(test.p_value)
    return SurvivalResult(curves, statistic, df, p)
