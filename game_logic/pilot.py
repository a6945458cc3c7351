"""Offline play of many simulated groups through a whole design, vectorised over groups.

``play`` is the one simulation loop: blocks start through ``rounds.start_block`` and
``rounds.next_block``, every round is resolved by ``rounds.advance`` (the function
``resolve`` calls), what a seat sees is built from ``treatments.danger_info`` (the
phone's gate) and its choice comes from a behaviour model (``game_logic.behaviour``)
fed by its group's own generator (``seeding.behaviour_rng``). The pilot records every
round as a ``RoundOutcome``; the power analysis and the budget keep only summaries.

With ``live_draws`` (the pilot) each round's flip and stop draws come from
``seeding.round_rng``, exactly as in a live session, so pilot group g with seed s is
what ``resolve`` gives for the same harvests. Without (power analysis, budget), they
come from the group's behaviour generator after the seats' uniforms: one generator
per group and block instead of one per round.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray

from .behaviour import Danger, Model, Observation, make_model
from .rounds import Advance, GroupState, Regime, RoundOutcome, advance, group_thresholds
from .seeding import BEHAVIOUR_STREAM, bulk_round_draws, bulk_uniforms
from .study import Study
from .treatments import GROUP_INDEPENDENT, danger_info


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
    seats = study.seats
    stock = np.full(ids.size, study.resource.initial_stock, dtype=np.int64)
    degraded = np.zeros(ids.size, dtype=bool)
    for b, block in enumerate(study.blocks):
        if b > 0 and block.reset_stock:  # the same carry rule as ``rounds.start_block``
            stock[:] = study.resource.initial_stock
            degraded[:] = False
        threshold = group_thresholds(study, seed, ids, b)
        states = _block_states(study, ids, b, stock, degraded, threshold)
        infos = _danger_infos(study, states)
        # The band is recomputed each round only for models that read it (it is costly).
        signal_rows = [i for i, info in enumerate(infos) if info["kind"] == "signal" and model.reads_signal]
        paths = {i: list(states[i].stock_path) for i in signal_rows}
        # Other treatments say the same thing all block long: their arrays are built once.
        static = None if signal_rows else Danger.from_infos(infos)
        draws_per_group = block.rounds * seats + (0 if live_draws else 2 * block.rounds)
        behaviour_draws = bulk_uniforms([seed, BEHAVIOUR_STREAM, ids, b], ids.size, draws_per_group)
        uniforms = behaviour_draws[:, :block.rounds * seats].reshape(ids.size, block.rounds, seats)
        if not live_draws:  # the group's own generator after its seats' uniforms
            own_draws = behaviour_draws[:, block.rounds * seats:].reshape(ids.size, block.rounds, 2)
        own_last = np.full((ids.size, seats), np.nan)
        group_last = np.full((ids.size, 1), np.nan)
        played = np.zeros(ids.size, dtype=np.int64)
        active = np.arange(ids.size)
        for k in range(1, block.rounds + 1):
            for i in signal_rows:
                if played[i] == k - 1:  # still playing: the signal reads the path so far
                    infos[i] = danger_info(study, replace(states[i], stock_path=tuple(paths[i])))
            danger = static.take(active) if static else Danger.from_infos([infos[i] for i in active])
            obs = Observation(round=np.full(active.size, k), stock=stock[active],
                              own_last=own_last[active], group_last=group_last[active], danger=danger)
            asked = model.ask(obs, uniforms[active, k - 1])
            if live_draws:  # exactly ``round_draws(round_rng(seed, g, b, k))`` of every group
                draws = bulk_round_draws(seed, ids[active], b, k)
            else:
                draws = own_draws[active, k - 1]
            result = advance(study, b, np.full(active.size, k), stock[active], degraded[active],
                             threshold[active], asked, draws[:, 0], draws[:, 1])
            on_round(RoundStep(b, k, active, ids[active], stock[active], degraded[active],
                               threshold[active], asked, draws[:, 0], draws[:, 1], result))
            stock[active] = result.stock_after
            degraded[active] = result.degraded_after
            own_last[active] = result.taken
            group_last[active, 0] = result.taken.sum(axis=1)
            played[active] = k
            for i, after in zip(active, result.stock_after, strict=True):
                if i in paths:
                    paths[i].append(int(after))
            active = active[~result.block_over]
            if active.size == 0:
                break


def _block_states(study: Study, ids, block: int, stock, degraded, threshold) -> list[GroupState | None]:
    """Each group's state at the start of ``block``, built only where the treatment reads it.

    Treatments whose message is the same for every group (``treatments.GROUP_INDEPENDENT``)
    get one state per block for the first such group; the others (exact, risk, signal) one per group.
    """
    spec = study.blocks[block]
    states: list[GroupState | None] = [None] * ids.size
    shared: dict[str, GroupState] = {}
    for i, g in enumerate(ids.tolist()):
        treatment = spec.treatment_for(g)
        if treatment in GROUP_INDEPENDENT and treatment in shared:
            states[i] = shared[treatment]
            continue
        t = threshold[i]
        states[i] = GroupState(group=g, block=block, round=0, stock=int(stock[i]),
                               regime=Regime.DEGRADED if degraded[i] else Regime.GOOD,
                               threshold=None if np.isnan(t) else float(t), stock_path=(int(stock[i]),))
        if treatment in GROUP_INDEPENDENT:
            shared[treatment] = states[i]
    return states


def _danger_infos(study: Study, states: list[GroupState]) -> list[dict]:
    """``danger_info`` of every state, computed once per distinct state object."""
    seen: dict[int, dict] = {}
    out = []
    for state in states:
        key = id(state)
        if key not in seen:
            seen[key] = danger_info(study, state)
        out.append(seen[key])
    return out


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
    study: Study, groups: int, seed: int, strategy: Model | str, on_outcome: Callable[[RoundOutcome], None]
) -> str:
    """Play groups 0..``groups``-1 as ``run_pilot`` does, handing each outcome to ``on_outcome``
    in the same order instead of keeping them all; return the model's name."""
    if groups < 1:
        raise ValueError(f"groups must be at least 1, got {groups}")
    model = _as_model(study, strategy)

    def record(step: RoundStep) -> None:
        for outcome in round_outcomes(step):
            on_outcome(outcome)

    play(study, model, seed, np.arange(groups), record, live_draws=True)
    return model.name


def run_pilot(study: Study, groups: int, seed: int, strategy: Model | str) -> PilotRun:
    """Play groups 0..``groups``-1 through every block of ``study`` with a behaviour model."""
    outcomes: list[RoundOutcome] = []
    name = stream_pilot(study, groups, seed, strategy, outcomes.append)
    return PilotRun(study, seed, groups, name, tuple(outcomes))
