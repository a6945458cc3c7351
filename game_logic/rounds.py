"""One round of one group, and the blocks and end rules around it.

``resolve`` is the pure heart of a session: the live server, the crash
recovery replay, the rehearsal bots and the offline pilot all pass through
``advance`` (vectorised) so that they cannot disagree.

Order within a round (documented in ``docs/model.md``):
harvests are rationed against the stock -> what remains decides the regime
(threshold crossing, with the round's flip draw; recovery above T + gap) ->
what remains regrows under that regime -> the end rule is checked.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from enum import StrEnum

import numpy as np
from numpy.typing import NDArray

from .errors import InvalidHarvest, RoundClosed
from .resource import draw_threshold, draw_thresholds, next_regime, ration, regrow, row_sums
from .seeding import bulk_threshold_uniforms, threshold_rng
from .study import Study


class Regime(StrEnum):
    GOOD = "good"
    DEGRADED = "degraded"


@dataclass(frozen=True)
class GroupState:
    """Where one group stands between rounds.

    ``round`` counts rounds already played in the current block (0 before the
    first). ``stock_path`` holds the stock at the start of every round of the
    block so far, the current one last; early-warning signals read it.
    """

    group: int
    block: int
    round: int
    stock: int
    regime: Regime
    threshold: float | None
    block_over: bool = False
    session_over: bool = False
    end_reason: str | None = None
    stock_path: tuple[int, ...] = ()


@dataclass(frozen=True)
class RoundOutcome:
    """Everything that happened in one round of one group (hidden parts included)."""

    group: int
    block: int
    round: int
    stock_before: int
    asked: tuple[int, ...]
    taken: tuple[int, ...]
    remaining: int
    stock_after: int
    regime_before: Regime
    regime_after: Regime
    threshold: float | None
    crossed: bool
    recovered: bool
    flip_draw: float
    continue_draw: float
    block_over: bool
    end_reason: str | None

    @property
    def total_taken(self) -> int:
        return sum(self.taken)

    @property
    def regrowth(self) -> int:
        return self.stock_after - self.remaining


@dataclass(frozen=True)
class Advance:
    """Vectorised result of one round for many groups (arrays of equal length)."""

    taken: NDArray[np.int64]
    remaining: NDArray[np.int64]
    stock_after: NDArray[np.int64]
    degraded_after: NDArray[np.bool_]
    crossed: NDArray[np.bool_]
    recovered: NDArray[np.bool_]
    block_over: NDArray[np.bool_]
    end_reason: NDArray[np.object_]


def check_harvest(study: Study, seat: int, harvest: object) -> int:
    """The one harvest rule: a whole number of units from 0 to ``max_harvest``; else ``InvalidHarvest``."""
    cap = study.resource.max_harvest
    if isinstance(harvest, bool) or not isinstance(harvest, (int, np.integer)) or not 0 <= harvest <= cap:
        raise InvalidHarvest(
            f"seat {seat + 1}: harvest {harvest!r} is not allowed; allowed: a whole number from 0 to {cap}"
        )
    return int(harvest)


def check_harvests(study: Study, harvests: Sequence[int]) -> tuple[int, ...]:
    """Validate one group's harvest requests; raise ``InvalidHarvest`` if any is off."""
    if len(harvests) != study.seats:
        raise InvalidHarvest(f"expected {study.seats} harvests, one per seat, got {len(harvests)}")
    return tuple(check_harvest(study, seat, h) for seat, h in enumerate(harvests))


def check_block_open(state: GroupState) -> None:
    """The one rule for a group's own block: rounds are played only while it runs; else ``RoundClosed``."""
    if state.session_over:
        raise RoundClosed("session_over", f"group {state.group + 1} has played its last block; "
                          "no more decisions are taken")
    if state.block_over:
        raise RoundClosed("block_over", f"block {state.block + 1} is over for group {state.group + 1}; "
                          "wait for the next block")


# Why a block ended, by ``advance``'s code (0: it goes on).
END_REASONS = np.array([None, "random stop", "last round", "exhausted"], dtype=object)


def advance(
    study: Study,
    block: int,
    round_number: NDArray[np.int64],
    stock: NDArray[np.int64],
    degraded: NDArray[np.bool_],
    threshold: NDArray[np.float64],
    asked: NDArray[np.int64],
    flip_draw: NDArray[np.float64],
    continue_draw: NDArray[np.float64],
) -> Advance:
    """Play one round for many groups at once (no validation; see ``resolve``).

    ``round_number`` is the 1-based number of the round being played in the
    block; ``threshold`` is NaN for groups without one.
    """
    res, thr, end = study.resource, study.threshold, study.end
    taken = ration(asked, stock)
    remaining = stock - row_sums(taken)
    degraded_after, crossed, recovered = next_regime(
        degraded, remaining, threshold, thr.recovery_gap, thr.flip_probability, flip_draw
    )
    stock_after = regrow(
        remaining, degraded_after, res.growth, res.capacity, res.degraded_growth_factor
    )
    length = study.blocks[block].rounds
    # Codes into END_REASONS, a later rule overriding an earlier one (exhaustion wins).
    code = np.zeros(stock.shape, dtype=np.int8)
    if end.rule == "random":
        stops = (round_number >= end.min_rounds) & (continue_draw >= end.continuation_probability)
        code[stops] = 1
    code[round_number >= length] = 2
    if end.stop_when_exhausted:
        code[stock_after <= 0] = 3
    return Advance(
        taken=taken,
        remaining=remaining,
        stock_after=stock_after,
        degraded_after=degraded_after,
        crossed=crossed,
        recovered=recovered,
        block_over=code > 0,
        end_reason=END_REASONS[code],
    )


def round_draws(rng: np.random.Generator) -> tuple[float, float]:
    """The two uniform draws every round consumes: (flip, continue), in that order."""
    flip, cont = rng.random(2)
    return float(flip), float(cont)


def resolve(
    study: Study, state: GroupState, harvests: Sequence[int], rng: np.random.Generator
) -> tuple[GroupState, RoundOutcome]:
    """Resolve one round of one group.

    Parameters
    ----------
    study : the validated design.
    state : the group before the round; its block must still be open.
    harvests : whole units asked, one per seat, each in 0..max_harvest.
    rng : the round's generator (``seeding.round_rng``); exactly two uniforms
        are drawn from it, the flip draw and the continuation draw.

    Returns the state after the round and the round's full outcome.
    """
    check_block_open(state)
    asked = check_harvests(study, harvests)
    flip, cont = round_draws(rng)
    number = state.round + 1
    thr = np.nan if state.threshold is None else state.threshold
    step = advance(
        study,
        state.block,
        np.array([number]),
        np.array([state.stock]),
        np.array([state.regime is Regime.DEGRADED]),
        np.array([thr], dtype=float),
        np.array([asked]),
        np.array([flip]),
        np.array([cont]),
    )
    regime_after = Regime.DEGRADED if step.degraded_after[0] else Regime.GOOD
    over = bool(step.block_over[0])
    reason = step.end_reason[0]
    last_block = state.block == len(study.blocks) - 1
    stock_after = int(step.stock_after[0])
    outcome = RoundOutcome(
        group=state.group,
        block=state.block,
        round=number,
        stock_before=state.stock,
        asked=asked,
        taken=tuple(int(t) for t in step.taken[0]),
        remaining=int(step.remaining[0]),
        stock_after=stock_after,
        regime_before=state.regime,
        regime_after=regime_after,
        threshold=state.threshold,
        crossed=bool(step.crossed[0]),
        recovered=bool(step.recovered[0]),
        flip_draw=flip,
        continue_draw=cont,
        block_over=over,
        end_reason=reason,
    )
    new_state = replace(
        state,
        round=number,
        stock=stock_after,
        regime=regime_after,
        block_over=over,
        session_over=over and last_block,
        end_reason=reason,
        stock_path=state.stock_path if over else state.stock_path + (stock_after,),
    )
    return new_state, outcome


def group_threshold(study: Study, seed: int, group: int, block: int) -> float | None:
    """The hidden threshold of a group in a block, drawn from the session seed."""
    key_block = block if study.threshold.redraw_each_block else 0
    return draw_threshold(study.threshold, threshold_rng(seed, group, key_block))


def group_thresholds(study: Study, seed: int, groups: NDArray[np.int64], block: int) -> NDArray[np.float64]:
    """``group_threshold`` of many groups at once (NaN where there is none), the same numbers."""
    key_block = block if study.threshold.redraw_each_block else 0
    return draw_thresholds(study.threshold, bulk_threshold_uniforms(seed, groups, key_block))


def start_block(
    study: Study, seed: int, group: int, block: int, previous: GroupState | None = None
) -> GroupState:
    """State of a group at the start of a block (stock reset unless the block carries it)."""
    spec = study.blocks[block]
    carry = previous is not None and not spec.reset_stock
    stock = previous.stock if carry else study.resource.initial_stock
    regime = previous.regime if carry else Regime.GOOD
    return GroupState(
        group=group,
        block=block,
        round=0,
        stock=stock,
        regime=regime,
        threshold=group_threshold(study, seed, group, block),
        stock_path=(stock,),
    )


def next_block(study: Study, seed: int, state: GroupState) -> GroupState:
    """Move a group whose block is over into the next block."""
    if not state.block_over:
        raise RoundClosed("block_running",
                          f"block {state.block + 1} of group {state.group + 1} is still running")
    if state.session_over:
        raise RoundClosed("session_over", f"group {state.group + 1} has played its last block")
    return start_block(study, seed, state.group, state.block + 1, previous=state)
