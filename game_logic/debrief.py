"""What the debrief screen reveals after play, computed from one group's record.

Given the design, the session seed and a group's ordered round outcomes, this
reveals each block's hidden threshold and recovery level, finds where the stock
first crossed it, counts the regrowth lost since, and replays the block with
everyone asking ``k`` units less each round through ``rounds.resolve`` with the
very same per-round generators, so "what if we had taken less" is computed on
the same draws, not guessed. Definitions are in ``docs/treatments.md``.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass
from itertools import groupby
from typing import Any

import numpy as np

from .resource import regrow
from .rounds import GroupState, Regime, RoundOutcome, group_threshold, resolve, round_draws
from .seeding import round_rng
from .study import Study

CAUTION = (
    "This game is a teaching device: its stock and danger level are invented and "
    "are not a forecast for any real fishery, forest or pasture."
)


@dataclass(frozen=True)
class WhatIf:
    """The block replayed with every seat asking ``less_by`` units less (floored at 0).

    ``stock_path`` is the stock at the start of each round played, then the
    stock after the last one. ``crossed_round`` is the first round whose
    regime flipped to degraded (None if never). ``extended_rounds`` counts the
    rounds played beyond the group's record because its own stock ran out
    sooner; they repeat the group's last asks.
    """

    less_by: int
    stock_path: tuple[int, ...]
    taken_per_round: tuple[int, ...]
    total_taken: int
    crossed_round: int | None
    end_reason: str | None
    extended_rounds: int = 0

    @property
    def crossed(self) -> bool:
        return self.crossed_round is not None


@dataclass(frozen=True)
class BlockDebrief:
    """One block of one group, with its hidden values revealed.

    ``threshold`` and ``recovery_level`` (threshold + recovery gap) are None
    when the study has no threshold. ``first_below_round`` is the first round
    whose remainder fell below the threshold; ``crossed_round`` the first round
    whose regime flipped to degraded (later than ``first_below_round`` when a
    risk treatment spared the stock; None if it never flipped).
    ``regrowth_lost`` has one entry per round from the crossing on (from round 1
    if the block began degraded): the regrowth the good regime would have given
    from that round's remainder, minus the regrowth the stock had.
    """

    block: int
    name: str
    treatment: str
    threshold: float | None
    recovery_level: float | None
    stock_path: tuple[int, ...]
    taken_per_round: tuple[int, ...]
    total_taken: int
    started_degraded: bool
    first_below_round: int | None
    crossed_round: int | None
    recovered_round: int | None
    rounds_degraded: int
    regrowth_lost: tuple[int, ...]
    what_ifs: tuple[WhatIf, ...]

    @property
    def crossed(self) -> bool:
        return self.crossed_round is not None

    @property
    def total_regrowth_lost(self) -> int:
        return sum(self.regrowth_lost)


@dataclass(frozen=True)
class GroupDebrief:
    """Every block of one group, and the caution the handout carries."""

    group: int
    seed: int
    blocks: tuple[BlockDebrief, ...]
    caution: str = CAUTION

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (dataclass fields, plus the derived totals)."""
        out = asdict(self)
        for block, raw in zip(self.blocks, out["blocks"], strict=True):
            raw["crossed"] = block.crossed
            raw["total_regrowth_lost"] = block.total_regrowth_lost
            for what_if, raw_if in zip(block.what_ifs, raw["what_ifs"], strict=True):
                raw_if["crossed"] = what_if.crossed
        return out


def _check_less_by(less_by: Iterable[int]) -> tuple[int, ...]:
    values = tuple(less_by)
    for k in values:
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 0:
            raise ValueError(f"less_by holds {k!r}; allowed: whole numbers of units, 0 or more")
    return tuple(int(k) for k in values)


def _check_block_record(study: Study, seed: int, outcomes: Sequence[RoundOutcome]) -> None:
    """Refuse a record that does not fit the study and seed: its replay would mislead."""
    if not outcomes:
        raise ValueError("no outcomes given; pass the block's rounds in order")
    first = outcomes[0]
    where = f"group {first.group + 1}, block {first.block + 1}"
    if first.block >= len(study.blocks):
        raise ValueError(f"{where}: the study has only {len(study.blocks)} blocks")
    rounds = [o.round for o in outcomes]
    if rounds != list(range(1, len(outcomes) + 1)):
        raise ValueError(f"{where}: rounds must run 1, 2, 3, ... without gaps; got {rounds}")
    if any(o.group != first.group for o in outcomes):
        raise ValueError(f"{where}: outcomes of several groups given; pass one group's outcomes")
    expected = group_threshold(study, seed, first.group, first.block)
    if first.threshold != expected:
        raise ValueError(f"{where}: the outcomes were not played with this study and seed {seed}")
    for o in outcomes:
        if (o.flip_draw, o.continue_draw) != round_draws(round_rng(seed, o.group, o.block, o.round)):
            raise ValueError(
                f"{where}, round {o.round}: the round's draws differ from seed {seed}; "
                "pass the seed the session was played with"
            )


def _start_state(outcomes: Sequence[RoundOutcome]) -> GroupState:
    """The state the group actually began the block in (carried stock included)."""
    first = outcomes[0]
    return GroupState(
        group=first.group,
        block=first.block,
        round=0,
        stock=first.stock_before,
        regime=first.regime_before,
        threshold=first.threshold,
        stock_path=(first.stock_before,),
    )


def _first_round(outcomes: Sequence[RoundOutcome], hit) -> int | None:
    return next((o.round for o in outcomes if hit(o)), None)


def what_if(
    study: Study, seed: int, outcomes: Sequence[RoundOutcome], less_by: int
) -> WhatIf:
    """Replay one block with every seat asking ``less_by`` units less each round.

    The replay starts from the state the group began the block in and plays
    each round through ``rounds.resolve`` with ``seeding.round_rng(seed,
    group, block, round)``, so every flip and stop draw is the one the group
    met. It ends by the block's own end rule: earlier if the replayed stock
    runs out; later if the group's stock ran out first, in which case the
    rounds the group never played repeat its last asks, cut the same way
    (counted in ``extended_rounds``).
    """
    (k,) = _check_less_by([less_by])
    _check_block_record(study, seed, outcomes)
    state = _start_state(outcomes)
    path, taken = [state.stock], []
    crossed_round, end_reason = None, None
    while not state.block_over:
        played = outcomes[min(state.round, len(outcomes) - 1)]
        asks = [max(0, a - k) for a in played.asked]
        rng = round_rng(seed, played.group, played.block, state.round + 1)
        state, outcome = resolve(study, state, asks, rng)
        path.append(outcome.stock_after)
        taken.append(outcome.total_taken)
        if outcome.crossed and crossed_round is None:
            crossed_round = outcome.round
        end_reason = outcome.end_reason
    extended = max(0, len(taken) - len(outcomes))
    return WhatIf(k, tuple(path), tuple(taken), sum(taken), crossed_round, end_reason, extended)


def regrowth_lost(study: Study, outcomes: Sequence[RoundOutcome]) -> tuple[int, ...]:
    """Per round from the first degraded round on: good-regime regrowth minus actual.

    Both regrowths are from the same remainder, with the model's own rounding
    and clipping (``resource.regrow``); a round back in the good regime loses 0.
    """
    start = next((i for i, o in enumerate(outcomes) if o.regime_after is Regime.DEGRADED), None)
    if start is None:
        return ()
    res = study.resource
    later = outcomes[start:]
    remaining = np.array([o.remaining for o in later])
    good = regrow(remaining, np.zeros(remaining.size, bool), res.growth, res.capacity,
                  res.degraded_growth_factor) - remaining
    return tuple(int(g - o.regrowth) for g, o in zip(good, later, strict=True))


def debrief_block(
    study: Study, seed: int, outcomes: Sequence[RoundOutcome], less_by: Sequence[int] = (1, 2)
) -> BlockDebrief:
    """Reveal and replay one block of one group (its outcomes in round order)."""
    ks = _check_less_by(less_by)
    _check_block_record(study, seed, outcomes)
    first = outcomes[0]
    spec = study.blocks[first.block]
    threshold = first.threshold
    taken = tuple(o.total_taken for o in outcomes)
    return BlockDebrief(
        block=first.block,
        name=spec.name,
        treatment=spec.treatment_for(first.group),
        threshold=threshold,
        recovery_level=None if threshold is None else threshold + study.threshold.recovery_gap,
        stock_path=(first.stock_before, *(o.stock_after for o in outcomes)),
        taken_per_round=taken,
        total_taken=sum(taken),
        started_degraded=first.regime_before is Regime.DEGRADED,
        first_below_round=(
            None if threshold is None else _first_round(outcomes, lambda o: o.remaining < threshold)
        ),
        crossed_round=_first_round(outcomes, lambda o: o.crossed),
        recovered_round=_first_round(outcomes, lambda o: o.recovered),
        rounds_degraded=sum(o.regime_after is Regime.DEGRADED for o in outcomes),
        regrowth_lost=regrowth_lost(study, outcomes),
        what_ifs=tuple(what_if(study, seed, outcomes, k) for k in ks),
    )


def debrief_group(
    study: Study, seed: int, outcomes: Sequence[RoundOutcome], less_by: Sequence[int] = (1, 2)
) -> GroupDebrief:
    """Debrief every block of one group from its ordered outcomes (all blocks, or some).

    ``less_by`` lists the cuts to replay, in units per seat per round. Each
    block's what-if starts from the state the group really began that block in,
    so blocks are replayed one at a time, not chained.
    """
    outcomes = list(outcomes)
    if not outcomes:
        raise ValueError("no outcomes given; pass one group's rounds in play order")
    groups = {o.group for o in outcomes}
    if len(groups) != 1:
        raise ValueError(f"outcomes of groups {sorted(g + 1 for g in groups)} given; pass one group's")
    blocks = [list(rows) for _, rows in groupby(outcomes, key=lambda o: o.block)]
    order = [rows[0].block for rows in blocks]
    if order != sorted(set(order)):
        raise ValueError(f"outcomes must be in play order, block by block; blocks came as {order}")
    return GroupDebrief(
        group=outcomes[0].group,
        seed=seed,
        blocks=tuple(debrief_block(study, seed, rows, less_by) for rows in blocks),
    )


def finished_outcomes(outcomes: Sequence[RoundOutcome], current: GroupState) -> list[RoundOutcome]:
    """A group's rounds in the blocks it has finished (a block still in play is not debriefed)."""
    return [o for o in outcomes if o.block < current.block or current.block_over]


def _one_decimal(value: float | None) -> float | None:
    return None if value is None else round(value, 1)


def participant_debrief(
    study: Study, seed: int, outcomes: Sequence[RoundOutcome], language: str
) -> list[dict[str, Any]]:
    """What a group's own phones may show once the debrief is revealed: one entry per finished block.

    ``outcomes`` are the group's rounds of finished blocks (``finished_outcomes``).
    JSON-ready and deliberately narrow: the block's participant-facing label (never the
    researcher's name, nor the treatment key), the levels to one decimal as the console
    shows them, the group's own stock path and the what-if cuts that decide the sentence.
    """
    if not outcomes:
        return []
    debrief = debrief_group(study, seed, outcomes)
    return [
        {
            "part": block.block + 1,
            "label": study.block_label(block.block, language),
            "threshold": _one_decimal(block.threshold),
            "recovery_level": _one_decimal(block.recovery_level),
            "stock_path": list(block.stock_path),
            "degraded_rounds": [o.round for o in outcomes
                                if o.block == block.block and o.regime_after is Regime.DEGRADED],
            "total_taken": block.total_taken,
            "crossed_round": block.crossed_round,
            "total_regrowth_lost": block.total_regrowth_lost,
            "what_ifs": [{"less_by": w.less_by, "crossed_round": w.crossed_round} for w in block.what_ifs],
        }
        for block in debrief.blocks
    ]
