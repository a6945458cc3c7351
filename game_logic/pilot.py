"""Offline play of many simulated groups through a whole design, vectorised over groups.

``play`` is the one simulation loop: blocks start through ``rounds.start_block`` and
``rounds.next_block``, every round is resolved by ``rounds.advance`` (the function
``resolve`` calls), what a seat sees is built from the phone's gate (``treatments.danger_info``,
as columns over groups by ``treatments.danger_columns``) and its choice comes from a
behaviour model (``game_logic.behaviour``) fed by its group's own generator
(``seeding.behaviour_rng``, drawn in bulk by ``seeding.BulkGenerators``). The pilot records
every round as a ``RoundOutcome``; the power analysis and the budget keep only summaries.

With ``live_draws`` (the pilot) each round's flip and stop draws come from
``seeding.round_rng``, exactly as in a live session, so pilot group g with seed s is
what ``resolve`` gives for the same harvests. Without (power analysis, budget), they
come from the group's behaviour generator after the seats' uniforms: one generator
per group and block instead of one per round.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, fields, replace

import numpy as np
from numpy.typing import NDArray

from .behaviour import Danger, Model, Observation, make_model
from .rounds import Advance, GroupState, Regime, RoundOutcome, advance, group_thresholds
from .seeding import BEHAVIOUR_STREAM, BlockRoundDraws, BulkGenerators
from .study import Study
from .treatments import danger_columns, danger_info


@dataclass(frozen=True)
class RoundStep:
    """One round of the groups still playing their block (arrays over those groups)."""

    block: int
    round: int
    rows: NDArray[np.int64]  # positions in the ``groups`` given to ``play``
    groups: NDArray[np.int64]  # group numbers in the seed tree
    stock_before: NDArray[np.int64]
    degraded_before: NDArray[np.bool_]
    threshold: NDArray[np.float64]
    asked: NDArray[np.int64]
    flip_draw: NDArray[np.float64]
    continue_draw: NDArray[np.float64]
    result: Advance


def _as_model(study: Study, model: Model | str) -> Model:
    return make_model(model, study) if isinstance(model, str) else model


# A round is played this many groups at a time: numpy's temporaries then stay small enough to
# be reused from the heap and the CPU cache instead of being fetched afresh from the system.
_SLICE = 16384


def play(
    study: Study,
    model: Model | str,
    seed: int,
    groups: Sequence[int] | NDArray[np.int64],
    on_round: Callable[[RoundStep], None],
    live_draws: bool = True,
) -> None:
    """Play the groups numbered ``groups`` through every block; ``on_round`` sees each round."""
    model = _as_model(study, model)
    ids = np.asarray(groups, dtype=np.int64)
    if ids.ndim != 1 or ids.size == 0:
        raise ValueError("groups must list at least one group number")
    seats, n = study.seats, ids.size
    stock = np.full(n, study.resource.initial_stock, dtype=np.int64)
    degraded = np.zeros(n, dtype=bool)
    for b, block in enumerate(study.blocks):
        if b > 0 and block.reset_stock:  # the same carry rule as ``rounds.start_block``
            stock[:] = study.resource.initial_stock
            degraded[:] = False
        threshold = group_thresholds(study, seed, ids, b)
        danger = Danger(**danger_columns(study, b, ids, threshold, stock))
        signal = _SignalPaths(study, model, b, ids, stock, degraded, threshold, danger, block.rounds)
        seat_draws = block.rounds * seats
        # Each group's behaviour generator (``seeding.behaviour_rng``): its seats' uniforms in
        # play order, drawn round by round; without live draws, the round's own two draws follow
        # all of them, so everything is drawn up front as (draw, group).
        behaviour = upfront = None
        if model.uses_uniforms or not live_draws:
            behaviour = BulkGenerators.of_key([seed, BEHAVIOUR_STREAM, ids, b], n)
        if not live_draws:
            upfront = behaviour.random(seat_draws + 2 * block.rounds)
        round_draws = BlockRoundDraws(seed, ids, b) if live_draws else None
        own_last = np.full((n, seats), np.nan)
        group_last = np.full((n, 1), np.nan)
        active = np.arange(n)
        for k in range(1, block.rounds + 1):
            signal.update_bands(active, k)
            everyone = active.size == n  # nobody has finished: slices of the arrays serve
            parts = []
            for start in range(0, active.size, _SLICE):
                stop = min(active.size, start + _SLICE)
                rows = slice(start, stop) if everyone else active[start:stop]
                stock_before, degraded_before = stock[rows].copy(), degraded[rows].copy()
                obs = Observation(round=np.full(stop - start, k), stock=stock_before,
                                  own_last=own_last[rows], group_last=group_last[rows],
                                  danger=danger.take(rows))
                if upfront is not None:
                    u = upfront[(k - 1) * seats:k * seats, rows].T
                elif behaviour is not None:
                    u = behaviour.random(seats, rows).T
                else:  # the model asks the same whatever it draws
                    u = np.zeros((stop - start, seats))
                asked = model.ask(obs, u)
                if round_draws is not None:  # exactly ``round_draws(round_rng(seed, g, b, k))``
                    flip_draw, continue_draw = round_draws.draws(rows, k)
                else:
                    flip_draw = upfront[seat_draws + 2 * (k - 1), rows]
                    continue_draw = upfront[seat_draws + 2 * (k - 1) + 1, rows]
                result = advance(study, b, obs.round, stock_before, degraded_before, threshold[rows], asked,
                                 flip_draw, continue_draw)
                stock[rows] = result.stock_after
                degraded[rows] = result.degraded_after
                own_last[rows] = result.taken
                group_last[rows, 0] = stock_before - result.remaining  # the group's total taken
                parts.append((stock_before, degraded_before, threshold[rows], asked, flip_draw,
                              continue_draw, result))
            stock_before, degraded_before, threshold_now, asked, flip_draw, continue_draw = (
                _joined([part[i] for part in parts]) for i in range(6))
            result = Advance(*(_joined([getattr(part[6], f.name) for part in parts])
                               for f in fields(Advance)))
            on_round(RoundStep(b, k, active, ids[active], stock_before, degraded_before, threshold_now,
                               asked, flip_draw, continue_draw, result))
            signal.record(active, k, result.stock_after)
            active = active[~result.block_over]
            if active.size == 0:
                break


def _joined(arrays: list[NDArray]) -> NDArray:
    return arrays[0] if len(arrays) == 1 else np.concatenate(arrays)


class _SignalPaths:
    """The health signal's band of the ``signal`` groups of one block, read anew every round.

    Only for models that read the band (it is costly): each such group's stock path is
    kept and its band recomputed through ``danger_info``, the phone's own rule, while the
    group plays. Other models keep the band the block started with.
    """

    def __init__(self, study: Study, model: Model, block: int, ids, stock, degraded, threshold,
                 danger: Danger, rounds: int) -> None:
        self.study, self.band = study, danger.band
        self.rows = np.flatnonzero(danger.kind == "signal") if model.reads_signal else np.empty(0, np.int64)
        self.where = np.full(ids.size, -1)  # row -> position among the signal rows
        self.where[self.rows] = np.arange(self.rows.size)
        self.paths = np.zeros((self.rows.size, rounds + 1), dtype=np.int64)
        self.paths[:, 0] = stock[self.rows]
        self.states = [
            GroupState(group=int(ids[i]), block=block, round=0, stock=int(stock[i]),
                       regime=Regime.DEGRADED if degraded[i] else Regime.GOOD,
                       threshold=None if np.isnan(threshold[i]) else float(threshold[i]),
                       stock_path=(int(stock[i]),))
            for i in self.rows.tolist()
        ]

    def update_bands(self, active, k: int) -> None:
        """Before round ``k``: the band of every signal group still playing, from its path so far."""
        if not self.rows.size:
            return
        for row, j in zip(active.tolist(), self.where[active].tolist(), strict=True):
            if j >= 0:
                state = replace(self.states[j], stock_path=tuple(self.paths[j, :k].tolist()))
                self.band[row] = danger_info(self.study, state)["band"]

    def record(self, active, k: int, stock_after) -> None:
        """After round ``k``: the stock each signal group ends it with joins its path."""
        if not self.rows.size:
            return
        j = self.where[active]
        mine = j >= 0
        self.paths[j[mine], k] = stock_after[mine]


@dataclass(frozen=True)
class PilotRun:
    """Outcomes of every round of every simulated group, in play order."""

    study: Study
    seed: int
    groups: int
    strategy: str
    outcomes: tuple[RoundOutcome, ...]


def round_outcomes(step: RoundStep) -> list[RoundOutcome]:
    """The ``RoundOutcome`` of every group in one round step, in the step's group order."""
    r = step.result
    return [
        RoundOutcome(
            group=int(g), block=step.block, round=step.round,
            stock_before=int(step.stock_before[j]),
            asked=tuple(int(a) for a in step.asked[j]),
            taken=tuple(int(t) for t in r.taken[j]),
            remaining=int(r.remaining[j]), stock_after=int(r.stock_after[j]),
            regime_before=Regime.DEGRADED if step.degraded_before[j] else Regime.GOOD,
            regime_after=Regime.DEGRADED if r.degraded_after[j] else Regime.GOOD,
            threshold=None if np.isnan(step.threshold[j]) else float(step.threshold[j]),
            crossed=bool(r.crossed[j]), recovered=bool(r.recovered[j]),
            flip_draw=float(step.flip_draw[j]), continue_draw=float(step.continue_draw[j]),
            block_over=bool(r.block_over[j]), end_reason=r.end_reason[j],
        )
        for j, g in enumerate(step.groups)
    ]


def stream_pilot(
    study: Study, groups: int, seed: int, strategy: Model | str, on_outcome: Callable[[RoundOutcome], None],
    on_round: Callable[[RoundStep], None] | None = None,
) -> str:
    """Play groups 0..``groups``-1 as ``run_pilot`` does, handing each outcome to ``on_outcome``
    in the same order instead of keeping them all; return the model's name."""
    if groups < 1:
        raise ValueError(f"groups must be at least 1, got {groups}")
    model = _as_model(study, strategy)

    def record(step: RoundStep) -> None:
        for outcome in round_outcomes(step):
            on_outcome(outcome)
        if on_round is not None:
            on_round(step)  # e.g. a progress bar

    play(study, model, seed, np.arange(groups), record, live_draws=True)
    return model.name


def run_pilot(study: Study, groups: int, seed: int, strategy: Model | str,
              on_round: Callable[[RoundStep], None] | None = None) -> PilotRun:
    """Play groups 0..``groups``-1 through every block of ``study`` with a behaviour model.

    ``on_round`` (optional) sees each round step after it is recorded, e.g. to show progress.
    """
    outcomes: list[RoundOutcome] = []
    name = stream_pilot(study, groups, seed, strategy, outcomes.append, on_round)
    return PilotRun(study, seed, groups, name, tuple(outcomes))
