"""One row per group and block: what the group did, and the benchmarks it can be held to.

The group (within its session) is the independent unit of every treatment
comparison, so this table is the base of the tests, the survival curves and
the benchmark ratios.
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pandas as pd

from ebbtide.game_logic.benchmarks import (
    equal_share_of_sustainable_yield,
    optimal_group_policy,
    selfish_group_take,
)
from ebbtide.game_logic.study import Study

from .exports_reader import ExportData

KEYS = ["session_id", "group_id", "block"]


def group_key(table: pd.DataFrame) -> pd.Series:
    """Group identifier unique across pooled sessions: ``session_id/group_id``."""
    return table["session_id"] + "/" + table["group_id"]


def group_outcomes(data: ExportData, seed: int = 1, replicates: int = 2000) -> pd.DataFrame:
    """Per group-block outcomes and benchmarks.

    Columns: rounds_played, group_harvest_total, group_harvest_per_round,
    share_degraded (share of the block's rounds that ended degraded), crossed
    (ever flipped to degraded), first_cross_round, threshold, and the benchmark
    totals over the rounds the group actually played: ``optimum_total`` (the
    planner's expected take, ``optimal_group_policy`` for that many rounds from
    the block's starting stock and regime), ``selfish_total`` (everyone takes
    the maximum, simulated through the model), ``sustainable_total`` (the equal
    share of the sustainable yield every round), and the ratios of the group's
    take to the first two.
    """
    rounds = data.rounds.sort_values(KEYS + ["round"])
    studies = data.studies()
    grouped = rounds.groupby(KEYS, sort=False)
    first = grouped.first()
    table = pd.DataFrame({
        "treatment": first["treatment"],
        "block_name": first["block_name"],
        "rounds_played": grouped["round"].max(),
        "group_harvest_total": grouped["total_taken"].sum(),
        "share_degraded": (rounds["regime_after"] == "degraded").groupby(
            [rounds[k] for k in KEYS], sort=False).mean(),
        "crossed": grouped["crossed"].any(),
        "threshold": first["threshold"],
        "start_stock": first["stock_before"],
        "start_degraded": first["regime_before"] == "degraded",
        "final_stock": grouped["stock_after"].last(),
    })
    crossing = rounds[rounds["crossed"]].groupby(KEYS)["round"].min()
    table["first_cross_round"] = crossing.reindex(table.index)
    table["group_harvest_per_round"] = table["group_harvest_total"] / table["rounds_played"]
    table = table.reset_index()
    table.insert(0, "group", group_key(table))

    rng = np.random.default_rng(seed)
    optimum, selfish, sustainable = [], [], []
    # Groups with the same design, length and start share one benchmark computation.
    starts = table[["session_id", "rounds_played", "start_stock", "start_degraded"]]
    cache: dict = {}
    for session, played, start, degraded in starts.itertuples(index=False, name=None):
        study = studies[session]
        key = (study.sha256, int(played), int(start), bool(degraded))
        if key not in cache:
            cache[key] = (
                _policy(study, int(played)).value_at(int(start), bool(degraded)),
                _selfish(study, int(played), int(start), bool(degraded), int(rng.integers(2**32)),
                         replicates),
                int(played) * study.seats * min(study.resource.max_harvest, _equal_share(study)),
            )
        optimum.append(cache[key][0])
        selfish.append(cache[key][1])
        sustainable.append(cache[key][2])
    table["optimum_total"] = optimum
    table["selfish_total"] = selfish
    table["sustainable_total"] = sustainable
    table["ratio_to_optimum"] = table["group_harvest_total"] / table["optimum_total"]
    table["ratio_to_selfish"] = table["group_harvest_total"] / table["selfish_total"]
    return table


@cache
def _policy(study: Study, rounds: int):
    # Studies are frozen and hashable; one programme per (design, realised length).
    return optimal_group_policy(study, rounds)


@cache
def _equal_share(study: Study) -> int:
    return equal_share_of_sustainable_yield(study)


_selfish_cache: dict = {}


def _selfish(study: Study, rounds: int, start: int, degraded: bool, seed: int, replicates: int) -> float:
    # Groups with the same design, length and start share one simulation (seeded by the first).
    key = (study.sha256, rounds, start, degraded, replicates)
    if key not in _selfish_cache:
        _selfish_cache[key] = selfish_group_take(
            study, rounds, np.random.default_rng(seed), stock=start, degraded=degraded, replicates=replicates
        )
    return _selfish_cache[key]
