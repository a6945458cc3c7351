"""Cash to carry and length of the day, from simulated sessions of a study.

Each simulated session plays the study's groups (``pilot.play``) with a behaviour
model; every seat is paid by the payment code (``money.earnings``) exactly as the
payment sheet pays it. The day lasts the setup,
every round played at the study's pace (groups play side by side, so a block lasts
as long as its longest group), the talk pauses and the debrief.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from decimal import Decimal

import numpy as np
from numpy.typing import NDArray

from .behaviour import Model
from .money import denominations_needed, earnings, packing_denominations
from .pilot import RoundStep, play
from .study import Study


@dataclass(frozen=True)
class SimulatedSessions:
    """Units each seat took and rounds each block lasted, per simulated session."""

    units: NDArray[np.int64]  # (sessions, groups, seats), all blocks together
    rounds: NDArray[np.int64]  # (sessions, blocks): rounds of the block's longest group


def simulate_sessions(study: Study, model: Model, sessions: int, seed: int = 1,
                      live_draws: bool = False) -> SimulatedSessions:
    """Play ``sessions`` whole sessions of the study's groups; session s has groups s*G'..s*G'+G-1."""
    count = study.groups.count
    rotation = math.lcm(*(len(b.all_treatments) for b in study.blocks))
    padded = -(-count // rotation) * rotation  # keeps each group's rotated treatment
    ids = (np.arange(sessions)[:, None] * padded + np.arange(count)[None, :]).ravel()
    units = np.zeros((ids.size, study.seats), dtype=np.int64)
    rounds = np.zeros((ids.size, len(study.blocks)), dtype=np.int64)

    def record(step: RoundStep) -> None:
        units[step.rows] += step.result.taken
        rounds[step.rows, step.block] = step.round

    play(study, model, seed, ids, record, live_draws=live_draws)
    return SimulatedSessions(units.reshape(sessions, count, study.seats),
                             rounds.reshape(sessions, count, -1).max(axis=1))


def seat_payments(study: Study, units: NDArray[np.int64]) -> list[list[Decimal]]:
    """Cash of every seat of one session, (groups, seats) units in, by the payment code."""
    spec = study.payment
    return [[earnings(int(u), spec).cash for u in row] for row in units]


@dataclass(frozen=True)
class CashBudget:
    """Cash a session needs under one model: minimum, mean, a high quantile, and what to pack."""

    model: str
    sessions: int
    quantile: float
    minimum: Decimal
    expected: Decimal
    high: Decimal
    maximum: Decimal
    packing: dict[Decimal, int]  # notes and coins for the high quantile (see ``cash_budget``)
    totals: tuple[Decimal, ...]
    minutes: tuple[float, ...]  # length of each simulated day (``day_minutes``)


def cash_budget(study: Study, model: Model, sessions: int = 1000, seed: int = 1,
                quantile: float = 0.95) -> CashBudget:
    """Session totals over simulated sessions; ``packing`` holds, for each note or coin, the
    ``quantile`` of the counts the simulated sessions needed to pay every seat exactly, so the
    bundle pays at least that share of sessions for each denomination taken alone.
    """
    played = simulate_sessions(study, model, sessions, seed)
    notes = packing_denominations(study.payment)
    totals, counts = [], []
    for units in played.units:
        amounts = [a for row in seat_payments(study, units) for a in row]
        totals.append(sum(amounts, Decimal(0)))
        needed = denominations_needed(amounts, notes)
        counts.append([needed[v] for v in notes])
    ordered = sorted(totals)
    high = ordered[min(len(ordered) - 1, math.ceil(quantile * len(ordered)) - 1)]
    per_note = np.quantile(np.array(counts), quantile, axis=0, method="inverted_cdf")
    mean = sum(totals, Decimal(0)) / len(totals)
    unit = Decimal(str(study.payment.round_up_to))
    return CashBudget(
        model=model.name, sessions=sessions, quantile=quantile, minimum=ordered[0],
        expected=(mean / unit).to_integral_value() * unit, high=high, maximum=ordered[-1],
        packing={v: int(k) for v, k in zip(notes, per_note, strict=True) if k > 0},
        totals=tuple(totals), minutes=tuple(float(m) for m in day_minutes(study, played.rounds)),
    )


def day_minutes(study: Study, rounds_played: NDArray[np.int64]) -> NDArray[np.float64]:
    """Minutes of each simulated day: setup, rounds at pace, talk pauses, debrief."""
    s = study.session
    pace = np.array([s.minutes_per_round + (b.talk_seconds / 60 if b.talk else 0.0) for b in study.blocks])
    return s.setup_minutes + rounds_played @ pace + s.debrief_minutes
