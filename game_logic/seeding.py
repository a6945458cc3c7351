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
    """Generator of the rehearsal bots' thinking times (their choices use ``behaviour_rng``)."""
    return np.random.default_rng([seed, STRATEGY_STREAM])


BEHAVIOUR_STREAM = 4


def behaviour_rng(seed: int, group: int, block: int) -> np.random.Generator:
    """Generator of one group's simulated players in one block.

    Its first draws are the seats' uniforms, ``random((rounds, seats))`` in play
    order; pilot, rehearsal bots and power analysis all read them this way.
    """
    return np.random.default_rng([seed, BEHAVIOUR_STREAM, group, block])


# Streams 1-4 belong to the game and the behaviour models; the field day has its own.
PRACTICE_STREAM = 5
RISK_TASK_STREAM = 6


def practice_threshold_rng(seed: int, group: int) -> np.random.Generator:
    """Generator for the threshold of a group's practice stock (its own, not the game's)."""
    return np.random.default_rng([seed, PRACTICE_STREAM, group, 0])


def practice_round_rng(seed: int, group: int, round_number: int) -> np.random.Generator:
    """Generator for the draws of one practice round of one group."""
    return np.random.default_rng([seed, PRACTICE_STREAM, group, 1, round_number])


def risk_task_rng(seed: int, group: int, seat: int) -> np.random.Generator:
    """Generator for the one 50/50 draw of a seat's risk-attitude task."""
    return np.random.default_rng([seed, RISK_TASK_STREAM, group, seat])
