"""Offline pilot: many simulated groups through a whole design, vectorised.

Groups advance together through ``rounds.advance`` (numpy arrays over
groups); every random draw comes from the same per-round generators a live
session uses, so pilot group g with seed s is exactly what ``resolve`` would
give for those harvests.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .rounds import Regime, RoundOutcome, advance, group_threshold, round_draws
from .seeding import round_rng, strategy_rng
from .strategies import make_strategy
from .study import Study


@dataclass(frozen=True)
class PilotRun:
    """Outcomes of every round of every simulated group, in play order."""

    study: Study
    seed: int
    groups: int
    strategy: str
    outcomes: tuple[RoundOutcome, ...]


def run_pilot(study: Study, groups: int, seed: int, strategy: str) -> PilotRun:
    """Play ``groups`` simulated groups through every block of ``study``."""
    if groups < 1:
        raise ValueError(f"groups must be at least 1, got {groups}")
    player = make_strategy(strategy, study)
    noise = strategy_rng(seed)
    initial = study.resource.initial_stock
    stock = np.full(groups, initial, dtype=np.int64)
    degraded = np.zeros(groups, dtype=bool)
    outcomes: list[RoundOutcome] = []
    for b, block in enumerate(study.blocks):
        if block.reset_stock:
            stock[:] = initial
            degraded[:] = False
        thresholds = [group_threshold(study, seed, g, b) for g in range(groups)]
        threshold = np.array([np.nan if t is None else t for t in thresholds])
        active = np.arange(groups)
        last_taken = None
        for k in range(1, block.rounds + 1):
            asked = player.ask(k, stock[active], last_taken, noise)
            draws = np.array([round_draws(round_rng(seed, g, b, k)) for g in active])
            step = advance(
                study, b, np.full(active.size, k), stock[active], degraded[active],
                threshold[active], asked, draws[:, 0], draws[:, 1],
            )
            for j, g in enumerate(active):
                outcomes.append(
                    RoundOutcome(
                        group=int(g), block=b, round=k,
                        stock_before=int(stock[g]),
                        asked=tuple(int(a) for a in asked[j]),
                        taken=tuple(int(t) for t in step.taken[j]),
                        remaining=int(step.remaining[j]),
                        stock_after=int(step.stock_after[j]),
                        regime_before=Regime.DEGRADED if degraded[g] else Regime.GOOD,
                        regime_after=Regime.DEGRADED if step.degraded_after[j] else Regime.GOOD,
                        threshold=thresholds[g],
                        crossed=bool(step.crossed[j]), recovered=bool(step.recovered[j]),
                        flip_draw=float(draws[j, 0]), continue_draw=float(draws[j, 1]),
                        block_over=bool(step.block_over[j]), end_reason=step.end_reason[j],
                    )
                )
            stock[active] = step.stock_after
            degraded[active] = step.degraded_after
            keep = ~step.block_over
            last_taken = step.taken[keep]
            active = active[keep]
            if active.size == 0:
                break
    return PilotRun(study, seed, groups, strategy, tuple(outcomes))
