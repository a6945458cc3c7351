"""Descriptive table per block and treatment: harvests, benchmarks, regime and collapse."""

from __future__ import annotations

import pandas as pd

CELL = ["block", "block_name", "treatment"]


def _spread(values: pd.Series, prefix: str) -> dict:
    return {
        f"{prefix}_mean": values.mean(),
        f"{prefix}_median": values.median(),
        f"{prefix}_sd": values.std(ddof=1) if values.size > 1 else float("nan"),
        f"{prefix}_iqr": values.quantile(0.75) - values.quantile(0.25),
    }


def harvest_summary(groups: pd.DataFrame, decisions: pd.DataFrame, rounds: pd.DataFrame) -> pd.DataFrame:
    """One row per block and treatment.

    Individual harvest is the units a seat took in a round (all seat-rounds);
    group harvest is the group's take per round, averaged per group first so
    that every group counts once; ``group_harvest_per_planned_round`` spreads
    the group's take over the fixed horizon (exhausted rounds count as zero).
    Ratios are the group's take divided by the social optimum and by the
    selfish benchmark over that horizon. ``share_degraded_rounds`` counts
    group-rounds that ended in the degraded regime. Three end outcomes, kept
    apart: ``flip_incidence`` (the regime flipped), ``exhaustion_incidence``
    (the stock reached 0) and ``collapse_incidence`` (either);
    ``collapse_round_median`` is over the groups that collapsed.
    """
    rows = []
    for (block, name, treatment), cell in groups.groupby(CELL, sort=True):
        seats = decisions[(decisions["block"] == block) & (decisions["treatment"] == treatment)]
        played = rounds[(rounds["block"] == block) & (rounds["treatment"] == treatment)]
        collapsed = cell[cell["collapsed"]]
        rows.append({
            "block": block, "block_name": name, "treatment": treatment, "groups": len(cell),
            **_spread(seats["harvest_taken"], "individual_harvest"),
            **_spread(cell["group_harvest_per_round"], "group_harvest_per_round"),
            "group_harvest_per_planned_round_mean": cell["group_harvest_per_planned_round"].mean(),
            "ratio_to_optimum_mean": cell["ratio_to_optimum"].mean(),
            "ratio_to_selfish_mean": cell["ratio_to_selfish"].mean(),
            "share_degraded_rounds": float((played["regime_after"] == "degraded").mean()),
            "flip_incidence": float(cell["crossed"].mean()),
            "exhaustion_incidence": float(cell["exhausted"].mean()),
            "collapse_incidence": float(cell["collapsed"].mean()),
            "collapse_round_median": (
                collapsed["collapse_round"].median() if len(collapsed) else float("nan")
            ),
        })
    return pd.DataFrame(rows)
