"""Derive independent, reproducible random streams from one session seed.

Every random draw of a session comes from a generator keyed by (seed, purpose,
group, block, round) through numpy's ``SeedSequence``. Replaying a round after a
crash, or in a different order, therefore gives the same draws.
"""

import numpy as np

THRESHOLD_STREAM = 1
ROUND_STREAM = 2
STRATEGY_STREAM = 3


def threshold_rng(seed: int, group: int, block: int = 0) -> np.random.Generator:
    """Generator for drawing the hidden threshold of one group (and block)."""
    return np.random.default_rng([seed, THRESHOLD_STREAM, group, block])


def round_rng(seed: int, group: int, block: int, round_number: int) -> np.random.Generator:
    """Generator for the draws of one round of one group (risk flip, stopping)."""
    return np.random.default_rng([seed, ROUND_STREAM, group, block, round_number])


def strategy_rng(seed: int) -> np.random.Generator:
    """Generator for simulated players' own noise (pilot and rehearsal bots)."""
    return np.random.default_rng([seed, STRATEGY_STREAM])

PRACTICE_STREAM = 4
RISK_TASK_STREAM = 5


def practice_threshold_rng(seed: int, group: int) -> np.random.Generator:
    """Generator for the threshold of a group's practice stock (its own, not the game's)."""
    return np.random.default_rng([seed, PRACTICE_STREAM, group, 0])


def practice_round_rng(seed: int, group: int, round_number: int) -> np.random.Generator:
    """Generator for the draws of one practice round of one group."""
    return np.random.default_rng([seed, PRACTICE_STREAM, group, 1, round_number])


def risk_task_rng(seed: int, group: int, seat: int) -> np.random.Generator:
    """Generator for the one 50/50 draw of a seat's risk-attitude task."""
    return np.random.default_rng([seed, RISK_TASK_STREAM, group, seat])
