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
from scipy.stats import binomtest


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
    paired = within_subject(groups)
    if paired:  # one curve per block and treatment: the blocks are not pooled
        data["stratum"] = "block " + groups["block"].astype(str) + ": " + groups["treatment"]
    curves = {s: kaplan_meier(d["time"], d["event"], s) for s, d in data.groupby("stratum", sort=True)}
    if not data["event"].any():
        return SurvivalResult(curves, nan, 0, nan,
                              "no group collapsed (no flip, no exhaustion): every time is censored")
    if paired:
        return SurvivalResult(curves, nan, 0, nan, "the blocks were played by the same groups, so they are "
                              "paired samples, not independent ones; the paired test below compares them")
    if len(curves) < 2:
        return SurvivalResult(curves, nan, 0, nan, "only one treatment: there is nothing to compare")
    test = multivariate_logrank_test(data["time"], data["stratum"], data["event"])
    statistic, df, p = float(test.test_statistic), int(test.degrees_of_freedom), float(test.p_value)
    return SurvivalResult(curves, statistic, df, p)


def within_subject(groups: pd.DataFrame) -> bool:
    """True when some group played more than one block (its blocks are paired, not independent)."""
    return bool(groups.groupby("group")["block"].nunique().gt(1).any())


def collapse_order(time_x: float, event_x: bool, time_y: float, event_y: bool) -> int:
    """+1 when x surely collapsed first, -1 when y did, 0 when censoring or a tie leaves it open.

    Gehan's (1965) scoring of a pair: an event at t comes before any time above t and
    before a censored time equal to t (censored at t means it held through round t).
    """
    if event_x and (time_x < time_y or (time_x == time_y and not event_y)):
        return 1
    if event_y and (time_y < time_x or (time_y == time_x and not event_x)):
        return -1
    return 0


def paired_collapse_tests(groups: pd.DataFrame) -> pd.DataFrame:
    """Each block against the next, paired by group: which block collapsed first?

    For every group that played both blocks the pair is scored with Gehan's rule
    (``collapse_order``); undetermined pairs (both censored, censored before the
    other collapsed, or collapsed in the same round) are left out, as zero
    differences are in the sign test, and counted in ``undetermined``. The
    two-sided exact sign test (scipy ``binomtest``, p = 1/2) asks whether one
    block collapses first more often than the other. Pairs stay within one
    design (``design`` column of the group outcomes, when present).
    """
    rows = []
    designs = groups.groupby("design", sort=True) if "design" in groups else [("", groups)]
    for design, cell in designs:
        times = survival_times(cell).assign(group=cell["group"].to_numpy(), block=cell["block"].to_numpy())
        blocks = sorted(times["block"].unique())
        for first, second in zip(blocks, blocks[1:], strict=False):
            x = times[times["block"] == second].set_index("group")
            y = times[times["block"] == first].set_index("group")
            both = x.index.intersection(y.index)
            if len(both) < 2:
                continue
            scores = [collapse_order(x.at[g, "time"], x.at[g, "event"], y.at[g, "time"], y.at[g, "event"])
                      for g in both]
            later_first, earlier_first = scores.count(1), scores.count(-1)
            decided = later_first + earlier_first
            p = float(binomtest(later_first, decided, 0.5).pvalue) if decided else float("nan")
            rows.append({"design": design, "block_x": second, "block_y": first, "pairs": len(both),
                         "x_collapsed_first": later_first, "y_collapsed_first": earlier_first,
                         "undetermined": len(both) - decided, "p_sign_test": p})
    return pd.DataFrame(rows)
