"""Derive independent, reproducible random streams from one session seed.

Every random draw of a session comes from a generator keyed by (seed, purpose,
group, block, round) through numpy's ``SeedSequence``. Replaying a round after a
crash, or in a different order, therefore gives the same draws.
"""

import numpy as np
from numpy.typing import NDArray

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


# --- The same draws for many groups at once -------------------------------------------------
# Making one Generator per (group, block, round) costs about 20 microseconds, which is most of
# a 100,000-group pilot. The functions below compute, with numpy arrays over groups, exactly the
# numbers ``np.random.default_rng(key).random(count)`` gives: numpy's SeedSequence hash
# (O'Neill's seed_seq design, numpy/random/bit_generator.pyx) feeding PCG64 (XSL-RR 128/64,
# O'Neill 2014; numpy/random/src/pcg64). tests/test_seeding.py compares them with numpy's own
# generators, so a change in numpy would show there first.

_INIT_A, _MULT_A, _INIT_B, _MULT_B = 0x43B0D7E5, 0x931E8875, 0x8B51F9DD, 0x58F38DED
_MIX_MULT_L, _MIX_MULT_R = 0xCA01F9DD, 0x4973F715
_POOL_SIZE = 4
_PCG_MULT_HI, _PCG_MULT_LO = 0x2360ED051FC65DA4, 0x4385DF649FCCF645
_LOW32, _S32 = np.uint64(0xFFFFFFFF), np.uint64(32)


def _key_words(key: list) -> list:
    """SeedSequence's entropy words: every int as its 32-bit words, low first; arrays one word each."""
    words: list = []
    for part in key:
        if isinstance(part, np.ndarray):
            if part.size and (part.min() < 0 or part.max() > 0xFFFFFFFF):
                raise ValueError("keys drawn in bulk must lie in 0..2**32 - 1")
            words.append(part.astype(np.uint32))
            continue
        value = int(part)
        if value < 0:
            raise ValueError("seed keys must not be negative")
        words.append(np.uint32(value & 0xFFFFFFFF))
        value >>= 32
        while value:
            words.append(np.uint32(value & 0xFFFFFFFF))
            value >>= 32
    return words


def _seed_words(key: list, rows: int) -> list:
    """The four 64-bit words ``SeedSequence(key).generate_state(4, uint64)`` for every row."""
    entropy = _key_words(key)
    const = _INIT_A

    def hashmix(value):
        nonlocal const
        value = value ^ np.uint32(const)
        const = (const * _MULT_A) & 0xFFFFFFFF
        value = value * np.uint32(const)
        return value ^ (value >> np.uint32(16))

    def mix(x, y):
        result = np.uint32(_MIX_MULT_L) * x - np.uint32(_MIX_MULT_R) * y
        return result ^ (result >> np.uint32(16))

    with np.errstate(over="ignore"):
        pool = [hashmix(entropy[i] if i < len(entropy) else np.uint32(0)) for i in range(_POOL_SIZE)]
        for src in range(_POOL_SIZE):
            for dst in range(_POOL_SIZE):
                if src != dst:
                    pool[dst] = mix(pool[dst], hashmix(pool[src]))
        for src in range(_POOL_SIZE, len(entropy)):
            for dst in range(_POOL_SIZE):
                pool[dst] = mix(pool[dst], hashmix(entropy[src]))
        state = np.empty((rows, 8), np.uint32)
        const = _INIT_B
        for i in range(8):
            value = pool[i % _POOL_SIZE] ^ np.uint32(const)
            const = (const * _MULT_B) & 0xFFFFFFFF
            value = value * np.uint32(const)
            state[:, i] = value ^ (value >> np.uint32(16))
    words = state.view("<u8")
    return [words[:, i] for i in range(4)]


def _high_product(a, b_lo, b_hi):
    """High 64 bits of the 128-bit product of uint64 ``a`` and the constant split as (b_lo, b_hi)."""
    a_lo, a_hi = a & _LOW32, a >> _S32
    low_low = a_lo * b_lo
    high_low = a_hi * b_lo
    cross = (low_low >> _S32) + (high_low & _LOW32) + a_lo * b_hi
    return a_hi * b_hi + (high_low >> _S32) + (cross >> _S32)


def _pcg_step(hi, lo, inc_hi, inc_lo):
    """One PCG64 step, state * multiplier + increment modulo 2**128, on (high, low) uint64 halves."""
    m_lo, m_hi = np.uint64(_PCG_MULT_LO), np.uint64(_PCG_MULT_HI)
    b_lo, b_hi = m_lo & _LOW32, m_lo >> _S32
    product_lo = lo * m_lo
    new_lo = product_lo + inc_lo
    new_hi = hi * m_lo + lo * m_hi + _high_product(lo, b_lo, b_hi) + inc_hi + (new_lo < product_lo)
    return new_hi, new_lo


def bulk_uniforms(key: list, rows: int, count: int) -> NDArray[np.float64]:
    """``np.random.default_rng(key_of_row).random(count)`` for every row, as a (rows, count) array.

    ``key`` lists the seed key's parts; an int is the same for every row, an array of
    ``rows`` ints (each below 2**32) gives each row its own part.
    """
    init_hi, init_lo, seq_hi, seq_lo = _seed_words(key, rows)
    out = np.empty((rows, count))
    with np.errstate(over="ignore"):
        # pcg64_set_seed: inc = seq << 1 | 1; state = 0 -> step -> += init -> step.
        inc_hi = (seq_hi << np.uint64(1)) | (seq_lo >> np.uint64(63))
        inc_lo = (seq_lo << np.uint64(1)) | np.uint64(1)
        lo = inc_lo + init_lo
        hi = inc_hi + init_hi + (lo < inc_lo)
        hi, lo = _pcg_step(hi, lo, inc_hi, inc_lo)
        for i in range(count):
            hi, lo = _pcg_step(hi, lo, inc_hi, inc_lo)
            rotation = hi >> np.uint64(58)
            folded = hi ^ lo
            word = (folded >> rotation) | (folded << ((np.uint64(64) - rotation) & np.uint64(63)))
            # next_double: the top 53 bits over 2**53.
            out[:, i] = (word >> np.uint64(11)) * (1.0 / 9007199254740992.0)
    return out


def bulk_round_draws(
    seed: int, groups: NDArray[np.int64], block: int, round_number: int
) -> NDArray[np.float64]:
    """(flip, continue) of ``round_rng(seed, g, block, round_number)`` for every group g: (n, 2)."""
    return bulk_uniforms([seed, ROUND_STREAM, np.asarray(groups), block, round_number], len(groups), 2)


def bulk_threshold_uniforms(seed: int, groups: NDArray[np.int64], block: int) -> NDArray[np.float64]:
    """The first ``random()`` of ``threshold_rng(seed, g, block)`` for every group g."""
    return bulk_uniforms([seed, THRESHOLD_STREAM, np.asarray(groups), block], len(groups), 1)[:, 0]
