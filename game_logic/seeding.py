"""Derive independent, reproducible random streams from one session seed.

Every random draw of a session comes from a generator keyed by (seed, purpose,
group, block, round) through numpy's ``SeedSequence``. Replaying a round after a
crash, or in a different order, therefore gives the same draws.
"""

from __future__ import annotations

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


def _hashmix(value, const: int):
    """SeedSequence's hashmix of one word (scalar or array); returns it and the next hash constant."""
    value = value ^ np.uint32(const)
    const = (const * _MULT_A) & 0xFFFFFFFF
    value = value * np.uint32(const)
    return value ^ (value >> np.uint32(16)), const


def _mix(x, y):
    result = np.uint32(_MIX_MULT_L) * x - np.uint32(_MIX_MULT_R) * y
    return result ^ (result >> np.uint32(16))


def _mix_entropy(words: list) -> tuple[list, int]:
    """SeedSequence's ``mix_entropy``: the pool (scalars, or arrays over rows) and the hash constant.

    The constant advances with every hashmix whatever the words hold, so a pool can take
    further words later (``_absorb``) exactly as if they had been in ``words``.
    """
    const = _INIT_A
    pool = []
    for i in range(_POOL_SIZE):
        value, const = _hashmix(words[i] if i < len(words) else np.uint32(0), const)
        pool.append(value)
    for src in range(_POOL_SIZE):
        for dst in range(_POOL_SIZE):
            if src != dst:
                value, const = _hashmix(pool[src], const)
                pool[dst] = _mix(pool[dst], value)
    for word in words[_POOL_SIZE:]:
        pool, const = _absorb(pool, const, word)
    return pool, const


def _absorb(pool: list, const: int, word) -> tuple[list, int]:
    """Mix one entropy word past the pool's size into every pool word (SeedSequence's last loop)."""
    pool = list(pool)
    for dst in range(_POOL_SIZE):
        value, const = _hashmix(word, const)
        pool[dst] = _mix(pool[dst], value)
    return pool, const


def _generate_state(pool: list, rows: int) -> list:
    """The four 64-bit words ``SeedSequence.generate_state(4, uint64)`` of every row, from its pool."""
    state = np.empty((rows, 8), np.uint32)
    const = _INIT_B
    for i in range(8):
        value = pool[i % _POOL_SIZE] ^ np.uint32(const)
        const = (const * _MULT_B) & 0xFFFFFFFF
        value = value * np.uint32(const)
        state[:, i] = value ^ (value >> np.uint32(16))
    words = state.view("<u8")
    return [words[:, i] for i in range(4)]


def _seed_words(key: list, rows: int) -> list:
    """The four 64-bit words ``SeedSequence(key).generate_state(4, uint64)`` for every row."""
    with np.errstate(over="ignore"):
        return _generate_state(_mix_entropy(_key_words(key))[0], rows)


_M_LO, _M_HI = np.uint64(_PCG_MULT_LO), np.uint64(_PCG_MULT_HI)
_B_LO, _B_HI = _M_LO & _LOW32, _M_LO >> _S32  # the multiplier's low word in 32-bit halves
_U1, _U11, _U58, _U63 = np.uint64(1), np.uint64(11), np.uint64(58), np.uint64(63)
_TO_UNIT = 1.0 / 9007199254740992.0  # next_double: the top 53 bits over 2**53
# Rows are drawn in slices small enough for the scratch arrays to stay in the CPU cache;
# every operation writes into a scratch array instead of allocating a new one.
_CHUNK = 16384


def _pcg_step(hi, lo, inc_hi, inc_lo, t) -> None:
    """One PCG64 step in place: state * multiplier + increment modulo 2**128, on (high, low)
    uint64 halves. ``t`` holds four uint64 scratch arrays and one bool array of the same length."""
    a, b, c, d, carry = t
    # The high 64 bits of lo * multiplier_low, from 32-bit halves (as the old scalar formula).
    np.bitwise_and(lo, _LOW32, out=a)  # lo's low half
    np.right_shift(lo, _S32, out=b)  # lo's high half
    np.multiply(a, _B_LO, out=c)
    np.right_shift(c, _S32, out=c)
    np.multiply(a, _B_HI, out=a)
    np.add(c, a, out=c)
    np.multiply(b, _B_LO, out=d)
    np.bitwise_and(d, _LOW32, out=a)
    np.add(c, a, out=c)  # the cross sum
    np.right_shift(c, _S32, out=c)
    np.right_shift(d, _S32, out=d)
    np.add(c, d, out=c)
    np.multiply(b, _B_HI, out=b)
    np.add(c, b, out=c)
    # high = hi * m_lo + lo * m_hi + c + inc_hi + carry of the low word.
    np.multiply(hi, _M_LO, out=hi)
    np.add(hi, c, out=hi)
    np.multiply(lo, _M_HI, out=a)
    np.add(hi, a, out=hi)
    np.add(hi, inc_hi, out=hi)
    np.multiply(lo, _M_LO, out=a)  # low word of the product
    np.add(a, inc_lo, out=lo)
    np.less(lo, a, out=carry)
    np.add(hi, carry, out=hi)


def _pcg_output(hi, lo, out, t) -> None:
    """PCG64's XSL-RR output of the state as a double in [0, 1), written into ``out``."""
    a, b, c, _, _ = t
    np.right_shift(hi, _U58, out=a)  # rotation
    np.bitwise_xor(hi, lo, out=b)
    np.right_shift(b, a, out=c)
    np.negative(a, out=a)  # (64 - rotation) mod 64, as a left shift
    np.bitwise_and(a, _U63, out=a)
    np.left_shift(b, a, out=b)
    np.bitwise_or(c, b, out=c)
    np.right_shift(c, _U11, out=c)
    np.multiply(c, _TO_UNIT, out=out)


def _pcg_run(state: list, skip: int, count: int) -> NDArray[np.float64]:
    """Move PCG64 states (hi, lo, inc_hi, inc_lo arrays, updated in place) ``skip`` steps without
    output, then ``count`` steps with it: a (count, rows) array of doubles in [0, 1)."""
    hi, lo, inc_hi, inc_lo = state
    rows = hi.size
    out = np.empty((count, rows))
    size = min(rows, _CHUNK)
    scratch = [np.empty(size, np.uint64) for _ in range(4)] + [np.empty(size, bool)]
    with np.errstate(over="ignore"):
        for start in range(0, rows, _CHUNK):
            part = slice(start, min(rows, start + _CHUNK))
            t = [s[:part.stop - part.start] for s in scratch]
            h, lw, ih, il = hi[part], lo[part], inc_hi[part], inc_lo[part]
            for _ in range(skip):
                _pcg_step(h, lw, ih, il, t)
            for i in range(count):
                _pcg_step(h, lw, ih, il, t)
                _pcg_output(h, lw, out[i, part], t)
    return out


class BulkGenerators:
    """``np.random.default_rng(key)`` of many rows (one key each) at once, drawn ``random()`` by
    ``random()``: a row's generator moves on only when that row is drawn, so some rows may stop
    drawing (a group whose block is over) while the others go on."""

    def __init__(self, seed_words: list) -> None:
        """From each row's ``SeedSequence(key).generate_state(4, uint64)`` words (``_seed_words``)."""
        init_hi, init_lo, seq_hi, seq_lo = seed_words
        with np.errstate(over="ignore"):
            # pcg64_set_seed: inc = seq << 1 | 1; state = 0 -> step -> += init -> step.
            self.inc_hi = (seq_hi << _U1) | (seq_lo >> _U63)
            self.inc_lo = (seq_lo << _U1) | _U1
            self.lo = self.inc_lo + init_lo
            self.hi = self.inc_hi + init_hi + (self.lo < self.inc_lo)
        _pcg_run([self.hi, self.lo, self.inc_hi, self.inc_lo], 1, 0)

    @classmethod
    def of_key(cls, key: list, rows: int) -> BulkGenerators:
        """The generators of ``rows`` rows; ``key`` as for ``bulk_uniforms``."""
        return cls(_seed_words(key, rows))

    def random(self, count: int, rows: slice | NDArray[np.int64] = slice(None)) -> NDArray[np.float64]:
        """The next ``count`` draws of the rows ``rows`` (a slice, or distinct row numbers):
        a (count, len(rows)) array."""
        state = [a[rows] for a in (self.hi, self.lo, self.inc_hi, self.inc_lo)]
        out = _pcg_run(state, 0, count)
        if not isinstance(rows, slice):  # gathered copies: the moved states go back
            self.hi[rows], self.lo[rows] = state[0], state[1]
        return out


def bulk_uniform_draws(key: list, rows: int, count: int) -> NDArray[np.float64]:
    """``bulk_uniforms`` laid out draw by draw: a (count, rows) array, row r's i-th draw at [i, r]."""
    return BulkGenerators.of_key(key, rows).random(count)


def bulk_uniforms(key: list, rows: int, count: int) -> NDArray[np.float64]:
    """``np.random.default_rng(key_of_row).random(count)`` for every row, as a (rows, count) array.

    ``key`` lists the seed key's parts; an int is the same for every row, an array of
    ``rows`` ints (each below 2**32) gives each row its own part.
    """
    return bulk_uniform_draws(key, rows, count).T


class BlockRoundDraws:
    """``bulk_round_draws`` of many groups for every round of one block.

    The seed key's shared part (seed, stream, group, block) is hashed once; each round
    then mixes in only its own number.
    """

    def __init__(self, seed: int, groups: NDArray[np.int64], block: int) -> None:
        words = _key_words([seed, ROUND_STREAM, np.asarray(groups), block])
        # The round's number must come after the pool's first words for the split to hold.
        assert len(words) >= _POOL_SIZE
        with np.errstate(over="ignore"):
            self._pool, self._const = _mix_entropy(words)

    def draws(self, rows: slice | NDArray[np.int64], round_number: int) -> NDArray[np.float64]:
        """(flip, continue) of ``round_rng(seed, groups[r], block, round_number)`` for each r in
        ``rows`` (a slice or row numbers): a (2, len(rows)) array."""
        pool = [p[rows] for p in self._pool]  # arrays: the group part varies by row
        const = self._const
        with np.errstate(over="ignore"):
            for word in _key_words([round_number]):
                pool, const = _absorb(pool, const, word)
            state = _generate_state(pool, pool[0].size)
        return BulkGenerators(state).random(2)


def bulk_round_draws(
    seed: int, groups: NDArray[np.int64], block: int, round_number: int
) -> NDArray[np.float64]:
    """(flip, continue) of ``round_rng(seed, g, block, round_number)`` for every group g: (n, 2)."""
    return BlockRoundDraws(seed, groups, block).draws(np.arange(len(groups)), round_number).T


def bulk_threshold_uniforms(seed: int, groups: NDArray[np.int64], block: int) -> NDArray[np.float64]:
    """The first ``random()`` of ``threshold_rng(seed, g, block)`` for every group g."""
    return bulk_uniform_draws([seed, THRESHOLD_STREAM, np.asarray(groups), block], len(groups), 1)[0]
